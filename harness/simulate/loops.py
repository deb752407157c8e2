"""Currents at 0- that the resistive network at 0- leaves free, found on this engine's own graph.

At 0- every capacitor stands for a voltage source at its voltage (DESIGN.md "Initial state").
A part on a cycle of voltage-fixing parts (capacitors, voltage sources, vcvs, ccvs, op-amp
outputs, closed switches without resistance) carries a current that network does not fix.  It
is 0 when the circuit is at rest at 0-; when the given initial values are not the DC state the
circuit was in motion, the current depends on how the state was reached, and this engine
reports ``before`` as not established (``results.UNDEFINED_CURRENT``) instead of the value
its regularised DC solve happens to give (the split its r_s picks).

Method: the cycle test is a breadth-first search between the part's terminals over the other
voltage-fixing parts (the path found names the loop).  At rest: the residual of the pre-step
DC rows at y(0-), K_dc y0 - b_dc, which the held capacitors' currents and the held inductors'
voltages make up, is below ``REST`` of the rows' own terms (|K_dc| |y0| + |b_dc|).
"""

from __future__ import annotations

from collections import deque

import numpy as np

from ..model import CAPACITOR, KIND_SPECS, SWITCH, THROUGH, Circuit, Part, Probe
from ..results import UNDEFINED_CURRENT, Diagnostic
from .equations import System

#: the pre-step state is at rest where the DC rows' residual stays below this fraction of
#: their largest term
REST = 1e-9


def _fixes_voltage(part: Part) -> bool:
    if part.kind == CAPACITOR:
        return True
    if part.kind == SWITCH:
        return bool(part.is_closed_before(0.0)) and not part.on_resistance
    return KIND_SPECS[part.kind].voltage_branch


def loop_through(circuit: Circuit, name: str) -> tuple[str, ...] | None:
    """(``name``, the other parts of a loop of voltage-fixing parts through it) at 0-, or
    None where ``name`` is on no such loop."""
    part = circuit.part(name)
    if not _fixes_voltage(part) or part.p == part.n:
        return None
    edges: dict[str, list[tuple[str, str]]] = {}
    for other in circuit.parts:
        if other.name != name and _fixes_voltage(other):
            edges.setdefault(other.p, []).append((other.n, other.name))
            edges.setdefault(other.n, []).append((other.p, other.name))
    came: dict[str, tuple[str, str] | None] = {part.n: None}
    queue = deque([part.n])
    while queue:
        node = queue.popleft()
        for nxt, via in edges.get(node, ()):
            if nxt not in came:
                came[nxt] = (node, via)
                queue.append(nxt)
    if part.p not in came:
        return None
    path, node = [], part.p
    while came[node] is not None:
        node, via = came[node]
        path.append(via)
    return (name,) + tuple(reversed(path))


def at_rest(pre: System, y0: np.ndarray, n_nodes: int) -> bool:
    """Whether y(0-) satisfies the pre-step DC rows (module docstring), the node rows
    (currents) and the other rows (voltages) each against their own largest term."""
    residual = np.abs(pre.K_dc @ y0 - pre.b_dc)
    terms = abs(pre.K_dc) @ np.abs(y0) + np.abs(pre.b_dc)
    for rows in (slice(0, n_nodes), slice(n_nodes, None)):
        top = float(np.max(terms[rows], initial=0.0))
        if float(np.max(residual[rows], initial=0.0)) > REST * max(top, 1e-300):
            return False
    return True


def undefined_before(circuit: Circuit, pre: System, y0: np.ndarray, n_nodes: int,
                     probe: Probe) -> Diagnostic | None:
    """The diagnostic for a ``before`` at 0- this engine does not establish, or None."""
    if probe.kind != THROUGH:
        return None
    loop = loop_through(circuit, probe.targets[0])
    if loop is None or at_rest(pre, y0, n_nodes):
        return None
    given = ",".join(p.name for p in circuit.parts if p.initial is not None)
    return Diagnostic(UNDEFINED_CURRENT, 0.0, parts=loop, detail=given, engine="numeric")
