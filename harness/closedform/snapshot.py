"""Which currents at 0- the resistive network at 0- leaves free (DESIGN.md "Initial state").

The values at 0- of everything but the storage come from the pre-step network with every
capacitor replaced by a voltage source at its voltage and every inductor by a current source at
its current.  Where capacitors close a loop with each other and voltage-type parts (voltage
sources, vcvs, ccvs, op-amp outputs, closed ideal switches), that network fixes every voltage
but not the current circulating in the loop: the current of each part of the loop is free.

When the circuit is at rest at 0- (the state is the pre-step circuit's DC state: every
derivative zero) the loop carries no current and the value is 0.  When an ``initial`` makes the
state something else, the circuit was in motion and how the loop's current divides between its
capacitors depends on how that state was reached, which the circuit does not say; the value is
then not established (``results.UNDEFINED_CURRENT``), never a split by capacitance.

Method (this engine's own): the snapshot matrix is the scaled pre-step G~ (floating groups
pinned as in the interval), bordered by one current unknown and one voltage row per capacitor,
with each inductor's branch row replaced by "current given".  Its null space (SVD of the
row/column equilibrated matrix, singular values below ``NULL_RCOND`` of the largest) holds the
free loop currents; a ``through`` probe of a capacitor or of a part with a branch current is
free where its current has a component there above ``LOOP_SHARE``.  Rest: ‖dx~/dτ‖ at 0- below
``REST`` of ‖x~‖ (the pre-step response's own derivative).
"""

from __future__ import annotations

import numpy as np

from ..model import CAPACITOR, INDUCTOR, THROUGH, Circuit, Probe
from ..results import UNDEFINED_CURRENT, Diagnostic
from .mna import Layout
from .response import IntervalResponse

#: singular values below this fraction of the largest span the snapshot's null space
NULL_RCOND = 1e-10
#: a part is on a free loop where its current's share of the null direction exceeds this
LOOP_SHARE = 1e-6
#: the pre-step state is at rest where |dx~/dtau| stays below this fraction of |x~|
REST = 1e-9
#: above this many unknowns the snapshot is not analysed (a dense SVD); values stay as computed
MAX_SIZE = 1500


def at_rest(prestep: IntervalResponse) -> bool:
    """Whether the state at 0- is the pre-step circuit's DC state (every derivative zero)."""
    x, dx = prestep.x_plus, prestep.dx_plus
    top = float(np.max(np.abs(x), initial=0.0))
    return float(np.max(np.abs(dx), initial=0.0)) <= REST * max(top, 1e-300)


def _snapshot(circuit: Circuit, layout: Layout, g) -> tuple[np.ndarray, list[str]]:
    """(the bordered snapshot matrix, the capacitors in the order of their columns)."""
    # a sparse G (kept sparse for large circuits) densified; no scipy.sparse import for a small one
    g = np.array(g, dtype=float) if isinstance(g, np.ndarray) else g.toarray()
    caps = [p for p in circuit.parts if p.kind == CAPACITOR]
    n, m = layout.size, len(caps)
    s = np.zeros((n + m, n + m))
    s[:n, :n] = g
    for part in circuit.parts:
        if part.kind == INDUCTOR and part.name in layout.branches:
            row = layout.branch(part.name)
            s[row, :] = 0.0
            s[row, row] = 1.0
    for j, part in enumerate(caps):
        for node, sign in ((part.p, 1.0), (part.n, -1.0)):
            i = layout.node(node)
            if i is not None:
                s[i, n + j] = sign                 # its current leaves p, enters n (KCL)
                s[n + j, i] = sign                 # v(p) - v(n) given
    return s, [p.name for p in caps]


def _null_space(s: np.ndarray) -> np.ndarray:
    """Columns spanning the null space of ``s`` in its own (unequilibrated) unknowns."""
    r, c = np.ones(s.shape[0]), np.ones(s.shape[1])
    a = np.abs(s)
    for _ in range(8):
        rows = (r[:, None] * a * c[None, :]).max(axis=1)
        r /= np.sqrt(np.where(rows > 0, rows, 1.0))
        cols = (r[:, None] * a * c[None, :]).max(axis=0)
        c /= np.sqrt(np.where(cols > 0, cols, 1.0))
    _, sv, vh = np.linalg.svd(r[:, None] * s * c[None, :])
    if not sv.size or sv[0] == 0:
        return np.zeros((s.shape[1], 0))
    free = vh[np.flatnonzero(sv <= NULL_RCOND * sv[0])].T
    rank_gap = s.shape[1] - sv.size                # a wide matrix: trailing rows of vh
    if rank_gap > 0:
        free = np.hstack([free, vh[sv.size:].T])
    return c[:, None] * free


def free_loop(circuit: Circuit, layout: Layout, prestep: IntervalResponse,
              probe: Probe, cache: dict) -> tuple[str, ...] | None:
    """The parts of the loop whose free current ``probe`` reads at 0- (module docstring), or
    None where the resistive network at 0- fixes the probe's value; the null space is kept in
    ``cache`` for the circuit's other probes."""
    if probe.kind != THROUGH or layout.size > MAX_SIZE:
        return None
    if "snapshot-null" not in cache:
        s, caps = _snapshot(circuit, layout, prestep.g)
        cache["snapshot-null"] = (_null_space(s), caps)
    null, caps = cache["snapshot-null"]
    names = list(layout.nodes) + list(layout.branches) + caps
    part = probe.targets[0]
    if part in caps:
        index = layout.size + caps.index(part)
    elif part in layout.branches:
        index = layout.branch(part)
    else:
        return None
    if null.shape[1] == 0:
        return None
    span = np.abs(null).max(axis=0)
    null = null / np.where(span > 0, span, 1.0)
    through = null[index]
    if float(np.max(np.abs(through), initial=0.0)) <= LOOP_SHARE:
        return None
    direction = null @ through
    direction /= float(np.max(np.abs(direction)))
    currents = range(layout.n_nodes, len(names))
    return tuple(names[i] for i in currents if abs(direction[i]) > LOOP_SHARE)


def undefined_before(circuit: Circuit, layout: Layout, prestep: IntervalResponse,
                     probe: Probe, cache: dict) -> Diagnostic | None:
    """The diagnostic for a ``before`` at 0- that the model leaves undefined, or None."""
    if probe.kind != THROUGH or at_rest(prestep):
        return None
    loop = free_loop(circuit, layout, prestep, probe, cache)
    if loop is None:
        return None
    given = tuple(p.name for p in circuit.parts if p.initial is not None)
    name = probe.targets[0]
    return Diagnostic(UNDEFINED_CURRENT, 0.0, parts=(name,) + tuple(p for p in loop if p != name),
                      detail=",".join(given))
