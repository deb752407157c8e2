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
Controlled sources and op-amps shape the null space through their gains, so there the count is
not given (None).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from functools import partial

from ..model import (CAPACITOR, CONTROLLED, INDUCTOR, KIND_SPECS, SWITCH, VOLTAGE_SOURCE,
                     Circuit, Part)
from .mna import find_root


def zero_modes(circuit: Circuit, closed: Mapping[str, bool],
               pinned: Iterable[str] = ()) -> int | None:
    """The number of zero modes of the interval whose switches are ``closed`` (name -> bool),
    with the nodes ``pinned`` tied to ground (``mna.pin``: the first node of each group with no
    path to ground even through capacitors); None where a controlled part is present."""
    if any(p.kind in CONTROLLED for p in circuit.parts):
        return None
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
