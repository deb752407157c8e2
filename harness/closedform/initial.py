"""The storage state at t = 0- (DESIGN.md "Initial state").

Without any ``initial``, the state is the DC steady state of the pre-step circuit (every source at
its pre-step value, every switch in its pre-step state): capacitors open, inductors shorted.  With
some ``initial`` values, each such capacitor is held as a voltage source at its initial voltage and
each such inductor as a current source at its initial current, and the other storage values come
from the DC solve of that network.  The result fixes the charges and fluxes at 0-; the values at
0- of every other quantity follow in ``response.prestep`` from the resistive network at 0-
(capacitors replaced by their voltages, inductors by their currents).

Errors (``InitialStateError``, naming part and field): initial values that contradict the circuit
(a least-squares residual), and storage parts whose pre-step value the DC solve leaves undefined
(a capacitor on a node with no DC path, inductors in a loop of shorts).
"""

from __future__ import annotations

import numpy as np

from ..errors import InitialStateError
from ..model import CAPACITOR, CURRENT_BRANCHES, INDUCTOR, STORAGE, SWITCH, Circuit, Part
from .linalg import LeastSquares, regular_factor
from .mna import Layout, Scale, floating_groups, pin, voltage_row
from .stamps import stamp

_RESIDUAL = 1e-9
_NULL = 1e-12


def _pre_closed(circuit: Circuit) -> dict[str, bool]:
    return {p.name: p.is_closed_before(0.0) for p in circuit.parts if p.kind == SWITCH}


def _dc_connects(part: Part) -> bool:
    """Whether a part joins its nodes in the DC network used at 0-."""
    if part.kind in CURRENT_BRANCHES:
        return False
    if part.kind == CAPACITOR:
        return part.initial is not None
    if part.kind == INDUCTOR:
        return part.initial is None
    if part.kind == SWITCH:
        return bool(part.is_closed_before(0.0)) or bool(part.off_resistance)
    return True


def _check_defined(circuit: Circuit, groups: list[list[str]]) -> None:
    """A capacitor without ``initial`` with a terminal in a DC-floating group has no DC value."""
    if not groups:
        return
    group_of = {node: gi for gi, g in enumerate(groups) for node in g}
    for part in circuit.parts:
        if part.kind != CAPACITOR or part.initial is not None:
            continue
        gp, gn = group_of.get(part.p), group_of.get(part.n)
        if (gp is not None or gn is not None) and gp != gn:
            node = part.p if gp is not None else part.n
            raise InitialStateError(
                f"the voltage of {part.name} before t = 0 is undefined: node {node} has no DC "
                f"path (it is reached only through capacitors or open switches); give "
                f"{part.name} an initial voltage", file=circuit.source, part=part.name,
                field="initial", line=part.line)


def _dc_system(circuit: Circuit, layout: Layout, scale: Scale):
    """Scaled DC matrix, right side and the extra rows' owners (capacitors held by ``initial``)."""
    g, _, b = stamp(circuit, layout, _pre_closed(circuit),
                    lambda p: p.source_value_before(0.0))
    held = [p for p in circuit.parts if p.kind == CAPACITOR and p.initial is not None]
    n, m = layout.size, len(held)
    gd = np.zeros((n + m, n + m))
    bd = np.zeros(n + m)
    gd[:n, :n], bd[:n] = g, b
    for part in circuit.parts:
        if part.kind == INDUCTOR and part.initial is not None:
            j = layout.branch(part.name)
            gd[j, :] = 0.0
            gd[j, j] = 1.0
            bd[j] = part.initial
    for k, part in enumerate(held):
        vrow = voltage_row(layout, part.p, part.n)
        gd[:n, n + k] += vrow                 # KCL: the held current leaves p, enters n
        gd[n + k, :n] = vrow
        bd[n + k] = part.initial
    d = np.concatenate([scale.var(layout), np.full(m, 1.0 / scale.r0)])
    e = np.concatenate([scale.row(layout), np.ones(m)])
    return e[:, None] * gd * d[None, :], e * bd, held


def _row_owner(circuit: Circuit, layout: Layout, held: list[Part], row: int) -> Part | None:
    if row >= layout.size:
        return held[row - layout.size]
    if row >= layout.n_nodes:
        return circuit.part(layout.branches[row - layout.n_nodes])
    return None


def _inconsistent(circuit: Circuit, layout: Layout, held: list[Part], resid: np.ndarray) -> None:
    """Raise the error that names the parts whose equations the residual sits on."""
    rows = [i for i in np.argsort(-np.abs(resid)) if abs(resid[i]) > 1e-6 * np.abs(resid).max()]
    owners = [_row_owner(circuit, layout, held, int(i)) for i in rows]
    storage = [p for p in owners if p is not None and p.initial is not None]
    if storage:
        part = storage[0]
        names = ", ".join(dict.fromkeys(p.name for p in owners if p is not None))
        raise InitialStateError(
            f"the initial value of {part.name} contradicts the circuit at 0- (the equations of "
            f"{names} cannot all hold)", file=circuit.source, part=part.name, field="initial",
            line=part.line)
    parts = [p for p in owners if p is not None]
    if parts:
        part = parts[0]
        raise InitialStateError(
            f"{part.name} is shorted by a loop of voltage-type parts and inductors before t = 0: "
            f"the DC state at 0- does not exist", file=circuit.source, part=part.name,
            field="value", line=part.line)
    nodes = {layout.nodes[int(i)] for i in rows if i < layout.n_nodes}
    held = [p for p in circuit.parts if p.kind == INDUCTOR and p.initial is not None
            and (p.p in nodes or p.n in nodes)]
    if held:
        raise InitialStateError(
            f"the initial currents of {', '.join(p.name for p in held)} contradict Kirchhoff's "
            f"current law at node(s) {', '.join(sorted(nodes))} at 0-", file=circuit.source,
            part=held[0].name, field="initial", line=held[0].line)
    feeders = [p for p in circuit.parts if p.kind in CURRENT_BRANCHES
               and (p.p in nodes or p.n in nodes)]
    part = feeders[0] if feeders else None
    raise InitialStateError(
        f"current into node(s) {', '.join(sorted(nodes))} has no DC path before t = 0: the DC "
        f"state at 0- does not exist", file=circuit.source, part=part.name if part else None,
        field="value" if part else None, line=part.line if part else None)


#: a DC matrix whose estimated reciprocal condition number (1-norm, after equilibration) is
#: above this times its size n has no singular value below _NULL times the largest, so its SVD
#: is skipped: sigma_min / sigma_max >= rcond_1 / n (|.|_2 <= sqrt(n) |.|_1 for a matrix and
#: its inverse), and the estimate (dgecon's, or onenormest's for a large sparse matrix: both
#: bound |a^-1|_1 from below) is rarely more than 3 x above the true rcond_1 (10 x allowed here)
_GATE_RCOND = 10 * _NULL
#: below this many unknowns the SVD is as cheap as the gate and is always taken
_GATE_MIN_SIZE = 32


def _regular(a: np.ndarray) -> bool:
    """Whether the square ``a`` is provably far from singular: an LU and a condition estimate
    (``linalg.regular_factor``: dense O(n^3/3), sparse far less) instead of a full SVD (O(n^3),
    ~10 x the dense LU's work)."""
    n = a.shape[0]
    return regular_factor(a, _GATE_RCOND * max(n, 1), min_size=_GATE_MIN_SIZE) is not None


def _check_unique(circuit: Circuit, layout: Layout, scale: Scale, gd: np.ndarray,
                  solver: LeastSquares | None = None) -> None:
    """Storage values that the DC system leaves free are undefined.

    The null space is found by an SVD of the equilibrated DC matrix (``linalg.equilibrate``,
    taken from ``solver``, the DC solve's ``LeastSquares(gd)``, when given); where an LU
    condition estimate already shows the matrix is regular (``_regular``) there is none and the
    SVD is not taken.
    """
    # part values decades apart must not look like a null space
    solver = solver if solver is not None else LeastSquares(gd)
    dr, dc, eq = solver.scaled()
    known = solver.regular(_GATE_RCOND * max(eq.shape[0], 1), _GATE_MIN_SIZE)
    if known if known is not None else _regular(eq):
        return
    _, sv, vh = np.linalg.svd(eq)
    null = vh[sv <= _NULL * max(sv.max(), 1e-300)] * dc[None, :]
    if null.shape[0] == 0:
        return
    null /= np.linalg.norm(null, axis=1, keepdims=True)
    d = scale.var(layout)
    for part in circuit.parts:
        if part.initial is not None or part.kind not in STORAGE:
            continue
        if part.kind == CAPACITOR:
            row = voltage_row(layout, part.p, part.n) * d
        else:
            row = np.zeros(layout.size)
            row[layout.branch(part.name)] = 1.0
        row = np.concatenate([row, np.zeros(gd.shape[0] - layout.size)])
        if np.max(np.abs(null @ row)) > 1e-6:
            raise InitialStateError(
                f"the {'voltage' if part.kind == CAPACITOR else 'current'} of {part.name} before "
                f"t = 0 is undefined by the DC circuit; give it an initial value",
                file=circuit.source, part=part.name, field="initial", line=part.line)


def dc_state(circuit: Circuit, layout: Layout, scale: Scale,
             reuse: tuple[LeastSquares, np.ndarray] | None = None) -> np.ndarray:
    """The scaled state x~ at 0- from the DC solve, shape (n,); its charges and fluxes C~ x~ are
    the storage state at 0-.

    ``reuse`` = (solve, b~): the pre-step pencil's kept particular solve (``LeastSquares`` of
    its G~) and its right side b~, given only when that pencil pins no floating group.  Without
    initial values and without DC-floating groups the DC system *is* that one: ``_dc_system``
    builds E G D from the same stamp (the switches in their pre-step states, inductors as
    shorts) and E b from the pre-step source values, with no rows added and nothing pinned, so
    it is skipped and the kept equilibration, LU and condition estimate serve (and the DC
    solution is the pre-step particular solution, same floats).

    Raises:
        InitialStateError: contradicting initial values or undefined pre-step storage values.
    """
    groups = floating_groups(circuit, _dc_connects)
    _check_defined(circuit, groups)
    storage = any(p.initial is not None for p in circuit.parts
                  if p.kind in STORAGE)
    if reuse is not None and not groups and not storage:
        solver, bd = reuse
        gd, held, pinned = solver.a, [], solver.a
    else:
        gd, bd, held = _dc_system(circuit, layout, scale)
        pinned = gd.copy()
        pin(pinned, layout, groups, 1.0)       # undefined common modes of DC islands: 0 V
        solver = LeastSquares(pinned)
    x, _, consistent = solver.solve(bd)
    resid = bd - gd @ x                        # a pin that carries current hides a contradiction
    if not consistent or np.linalg.norm(resid) > _RESIDUAL * (
            np.linalg.norm(gd) * np.linalg.norm(x) + np.linalg.norm(bd)):
        _inconsistent(circuit, layout, held, resid)
    _check_unique(circuit, layout, scale, pinned, solver)
    return x[:layout.size]
