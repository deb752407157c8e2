"""How many modes of an interval sit exactly at zero, from the circuit's graph alone.

A zero mode of C x' + G x = 0 is a solution that never moves: G x = 0 with C x free, i.e. the
null space of the DC network (capacitors open, inductors shorted).  For a network of resistors,
capacitors, inductors, independent sources and switches (no controlled part) that null space
is structural, with no rank decision on rounded numbers (common practice of nodal analysis):

* each set of nodes the DC network (every part but capacitors, current-type outputs and open
  ideal switches) leaves cut off from ground has a free common-mode voltage: trapped charge;
* each independent loop of zero-resistance branches (inductors, voltage sources, closed ideal
  switches) has a free circulating current: trapped flux (a loop without an inductor is no
  mode but a singular pencil, which the decomposition refuses anyway).

The count is n_islands + (E - V + K) of the zero-resistance subgraph (its cycle rank, E edges,
V nodes, K components).  The decomposition counts its zero modes from eigenvalue magnitudes,
which cannot tell a mode 14 decades below the fastest from an exact zero; given this count it
knows when it has taken a slow real mode for trapped charge (``interval.decompose``).
Controlled sources and op-amps shape the null space through their gains, so there the graph
does not give the count.  It is still exact where the interval's DC matrix G~ (pinned and
scaled as decomposed) is provably nonsingular: then s = 0 is no root of det(G~ + s C~) and the
interval has no zero mode (a Miller stage behind a resistor: its 1e6 s mode beside a 1 ps one
read as trapped charge, its final value the step's start instead of -A times the input).  The
proof is numerical but rigorous: G~ equilibrated by powers of two (exact: the scaling moves no
digit and keeps the rank) has a smallest computed singular value above ``NONSINGULAR`` of its
largest, and a backward-stable SVD errs by a small multiple of the unit roundoff times the
largest (Golub & Van Loan, Matrix Computations, 4th ed., sec. 8.6.1), so the exact smallest
one is not zero.  Where that fails (a singular or nearly singular G~, a matrix over
``CERTIFY_MAX`` rows) the count is not given (None).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from functools import partial

import numpy as np

from ..model import (CAPACITOR, CONTROLLED, INDUCTOR, KIND_SPECS, SWITCH, VOLTAGE_SOURCE,
                     Circuit, Part)
from .linalg import equilibrate
from .mna import find_root

#: the smallest singular value of the equilibrated DC matrix, as a fraction of its largest,
#: above which it is nonsingular: ~2e3 times the SVD's own error bound (~n·u, 4.4e-14 at
#: ``CERTIFY_MAX`` rows) for the largest matrices certified, far more for small ones; the
#: Miller stages of tests/test_closedform_nullity.py measured at 5e-7..5e-3
NONSINGULAR = 1e-10
#: rows above which the certificate is not attempted (an SVD of the dense matrix)
CERTIFY_MAX = 400
#: sweeps of power-of-two row and column equilibration (Ruiz's iteration, ``linalg.equilibrate``)
EQUILIBRATE_ROUNDS = 20


def zero_modes(circuit: Circuit, closed: Mapping[str, bool],
               pinned: Iterable[str] = (), dc: np.ndarray | None = None) -> int | None:
    """The number of zero modes of the interval whose switches are ``closed`` (name -> bool),
    with the nodes ``pinned`` tied to ground (``mna.pin``: the first node of each group with no
    path to ground even through capacitors).  With a controlled part: 0 where the interval's
    DC matrix ``dc`` (G~, shape (n, n)) is provably nonsingular (``nonsingular``), else None."""
    if any(p.kind in CONTROLLED for p in circuit.parts):
        return 0 if dc is not None and nonsingular(dc) else None
    ground = circuit.ground
    parent: dict = {ground: ground}
    find = partial(find_root, parent)
    for node in pinned:
        parent[find(node)] = find(ground)
    for part in circuit.parts:
        find(part.p), find(part.n)
        if _dc_joins(part, closed):
            parent[find(part.p)] = find(part.n)
    roots = {find(n) for n in list(parent)}
    islands = len(roots - {find(ground)})
    return islands + _cycle_rank([p for p in circuit.parts if _zero_resistance(p, closed)])


def _dc_joins(part: Part, closed: Mapping[str, bool]) -> bool:
    """Whether ``part`` joins its two nodes in the DC network of the interval."""
    if part.kind == CAPACITOR or KIND_SPECS[part.kind].current_branch:
        return False
    if part.kind == SWITCH:
        return bool(closed.get(part.name)) or bool(part.off_resistance)
    return True


def _zero_resistance(part: Part, closed: Mapping[str, bool]) -> bool:
    """An inductor, a voltage source, or a closed ideal switch (a short at DC)."""
    if part.kind == SWITCH:
        return bool(closed.get(part.name)) and not part.on_resistance
    return part.kind in (INDUCTOR, VOLTAGE_SOURCE)


def _cycle_rank(edges: list[Part]) -> int:
    """E - V + K of the graph of ``edges`` (each joins its two nodes)."""
    parent: dict = {}
    find = partial(find_root, parent)
    for part in edges:
        parent[find(part.p)] = find(part.n)
    components = len({find(n) for n in list(parent)})
    return len(edges) - len(parent) + components


def nonsingular(g: np.ndarray) -> bool:
    """Whether the square matrix ``g`` is provably nonsingular: equilibrated by powers of two
    (``linalg.equilibrate``, ``EQUILIBRATE_ROUNDS`` of Ruiz's sweeps, so no entry is rounded),
    its smallest singular value exceeds ``NONSINGULAR`` of its largest (module docstring);
    False for a matrix over ``CERTIFY_MAX`` rows, not finite, or with a zero row or column."""
    if g.shape[0] > CERTIFY_MAX or not np.all(np.isfinite(g)):
        return False
    a = np.array(g, dtype=float)
    if not (np.all(np.any(a != 0, axis=1)) and np.all(np.any(a != 0, axis=0))):
        return False                    # a zero row or column: singular
    dr, dc = equilibrate(a, EQUILIBRATE_ROUNDS, pattern=None)
    sigma = np.linalg.svd(dr[:, None] * a * dc, compute_uv=False)
    return bool(sigma[-1] > NONSINGULAR * sigma[0])
