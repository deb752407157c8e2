"""The state at t = 0-, from this engine's own DC solve of the regularised network.

DESIGN.md "Initial state": with no ``initial`` given anywhere the circuit is in DC steady state
with every source at its pre-step value and every switch in its pre-step state.  Otherwise each
capacitor with ``initial`` is held at that voltage and each inductor with ``initial`` carries that
current, and the rest follows from the DC solve that respects them (capacitors without
``initial`` open, inductors without it shorted).

Unknowns: the state y (node voltages, inductor currents) and the currents of the held
capacitors.  Equations: the node rows of K_dc y = b_dc (the pre-step interval's branch currents) plus
the held capacitors' currents; v_p - v_n = 0 for free inductors, i = I0 for held ones;
v_p - v_n = V0 for held capacitors.
"""

from __future__ import annotations

import numpy as np
import scipy.linalg
import scipy.sparse as sp

from ..errors import InitialStateError
from .nodesets import find_root
from ..model import (CAPACITOR, CONTROLLED, CURRENT_SOURCE, INDUCTIVE, INDUCTOR, KIND_SPECS,
                     RESISTIVE, RESISTOR, SWITCH, VOLTAGE_SOURCE, VOLTAGE_TYPE, Circuit, Part)
from . import linsolve
from .branches import Layout
from .equations import System
from .probes import voltage_row

#: an inductor shunt carrying more than this fraction of the current scale at 0- means the
#: given initial currents contradict the circuit
CONTRADICTION = 1e-3


def _dc_paths(circuit: Circuit) -> dict[str, str]:
    """Union-find roots of nodes joined by parts that conduct at DC at 0-."""
    parent: dict[str, str] = {}
    for node in circuit.nodes:
        find_root(parent, node)
    for part in circuit.parts:
        conducts = KIND_SPECS[part.kind].branch in (RESISTIVE, VOLTAGE_TYPE, INDUCTIVE)
        if part.kind == SWITCH:
            conducts = part.is_closed_before(0.0) or bool(part.off_resistance)
        if part.kind == CAPACITOR:
            conducts = part.initial is not None
        if conducts:
            a, b = find_root(parent, part.p), find_root(parent, part.n)
            if a != b:
                parent[a] = b
    return {node: find_root(parent, node) for node in circuit.nodes}


def check_defined(circuit: Circuit) -> None:
    """Raise InitialStateError for a node whose pre-step voltage no DC path defines."""
    roots = _dc_paths(circuit)
    ground = roots[circuit.ground]
    floating = [n for n in circuit.nodes if roots[n] != ground]
    if not floating:
        return
    for part in circuit.parts:
        if part.kind == CAPACITOR and part.initial is None and (
                part.p in floating or part.n in floating):
            node = part.p if part.p in floating else part.n
            raise InitialStateError(
                f"the pre-step voltage of {part.name} is undefined: node {node!r} has no DC path "
                f"to {circuit.ground!r} at 0-; give {part.name} an initial value",
                file=circuit.source, part=part.name, field="initial", line=part.line)
    part = next(p for p in circuit.parts if floating[0] in p.nodes)
    raise InitialStateError(f"node {floating[0]!r} has no DC path to {circuit.ground!r} at 0- "
                            f"(its parts, such as {part.name}, conduct no DC current there), so "
                            "its pre-step voltage is undefined",
                            file=circuit.source, part=part.name, field="nodes", line=part.line)


def _dc_matrix(circuit: Circuit, lay: Layout, pre: System):
    """(A, rhs, held capacitors) of the DC system described in the module docstring, assembled
    as COO triplets: K_dc with each row of an inductor with ``initial`` replaced by i = initial,
    bordered by one row and column per held capacitor."""
    held = [p for p in circuit.parts if p.kind == CAPACITOR and p.initial is not None]
    n, m = lay.n, len(held)
    by_name = {p.name: p for p in circuit.parts}
    rhs = np.concatenate([pre.b_dc, np.zeros(m)])
    fixed = np.zeros(n + m, dtype=bool)
    for name in lay.inductors:
        part, r = by_name[name], lay.part_index[name]
        if part.initial is not None:
            fixed[r] = True
            rhs[r] = part.initial
    K = pre.K_dc.tocoo()
    keep = ~fixed[K.row]
    rows, cols, vals = [K.row[keep]], [K.col[keep]], [K.data[keep]]
    ones = np.flatnonzero(fixed)
    rows.append(ones), cols.append(ones), vals.append(np.ones(ones.size))
    for j, part in enumerate(held):
        row = voltage_row(lay, part.p, part.n)
        idx = np.flatnonzero(row)
        # the held capacitor's voltage row, and its current leaving p and entering n
        rows += [np.full(idx.size, n + j), idx]
        cols += [idx, np.full(idx.size, n + j)]
        vals += [row[idx], row[idx]]
        rhs[n + j] = part.initial
    A = sp.csc_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                      shape=(n + m, n + m))
    return A, rhs, held


def _fixes_voltage(part: Part) -> bool:
    """Whether ``part`` fixes its voltage at 0- (``_voltage_loop``)."""
    fixes = KIND_SPECS[part.kind].voltage_branch
    fixes |= part.kind == INDUCTOR and part.initial is None
    fixes |= part.kind == CAPACITOR and part.initial is not None
    fixes |= part.kind == SWITCH and part.is_closed_before(0.0) and not part.on_resistance
    return bool(fixes)


def _voltage_loop(circuit: Circuit) -> str | None:
    """A part that closes a loop of parts fixing voltages at 0- (voltage sources, vcvs, ccvs,
    closed switches without resistance, inductors without ``initial``, capacitors with it)."""
    parent: dict[str, str] = {}
    for part in circuit.parts:
        if not _fixes_voltage(part):
            continue
        a, b = find_root(parent, part.p), find_root(parent, part.n)
        if a == b:
            return part.name
        parent[a] = b
    return None


def _held_group(circuit: Circuit) -> tuple[Part, list[str]] | None:
    """(an inductor with ``initial``, the nodes it feeds) where its given current flows into a
    group of nodes that reaches ground at 0- only through parts of fixed current (inductors with
    ``initial``, current sources, vccs, cccs): KCL of the group then fixes that current, so a
    given value contradicts it (or the group's voltage is undefined)."""
    parent: dict[str, str] = {}
    for node in circuit.nodes:
        find_root(parent, node)
    for part in circuit.parts:
        conducts = KIND_SPECS[part.kind].branch in (RESISTIVE, VOLTAGE_TYPE)
        conducts |= part.kind == INDUCTOR and part.initial is None
        conducts |= part.kind == CAPACITOR and part.initial is not None
        if part.kind == SWITCH:
            conducts = part.is_closed_before(0.0) or bool(part.off_resistance)
        if conducts:
            a, b = find_root(parent, part.p), find_root(parent, part.n)
            if a != b:
                parent[a] = b
    ground = find_root(parent, circuit.ground)
    for part in circuit.parts:
        if part.kind == INDUCTOR and part.initial is not None:
            for node in part.nodes:
                group = find_root(parent, node)
                if group != ground:
                    return part, [n for n in circuit.nodes if find_root(parent, n) == group]
    return None


#: a controlled source is blamed for a singular DC system when its nodes or control touch the
#: unknowns of the null vector above this fraction of its largest component
NULL_SHARE = 1e-3


def _null_owner(circuit: Circuit, lay: Layout, A: sp.csc_matrix) -> Part | None:
    """The controlled source most involved in the null vector of the (Ruiz-equilibrated) DC
    matrix, else a part touching its largest unknown; None for large systems.

    Equilibration: D. Ruiz, "A scaling algorithm to equilibrate both rows and columns norms in
    matrices" (RAL-TR-2001-034), repeated square-root scalings by the row and column maxima.
    """
    if A.shape[0] > 400:
        return None
    B = np.abs(A.toarray())
    r, c = np.ones(B.shape[0]), np.ones(B.shape[0])
    for _ in range(20):
        S = r[:, None] * B * c[None, :]
        r /= np.sqrt(np.where(S.max(axis=1) > 0, S.max(axis=1), 1.0))
        c /= np.sqrt(np.where(S.max(axis=0) > 0, S.max(axis=0), 1.0))
    v = np.abs(np.linalg.svd(r[:, None] * A.toarray() * c[None, :])[2][-1] * c)
    names = list(lay.names)
    involved = {names[i] for i in np.flatnonzero(v[:len(names)] > NULL_SHARE * v.max())}
    for part in circuit.parts:
        if part.kind in CONTROLLED:
            touched = set(part.nodes) | ({part.name} if part.name in lay.part_index else set())
            touched |= set(part.control) if isinstance(part.control, tuple) else {part.control}
            if touched & involved:
                return part
    top = names[int(np.argmax(v[:len(names)]))] if names else None
    return next((p for p in circuit.parts if top in p.nodes or p.name == top), None)


#: the dropped equations of a singular DC system at 0- hold where their residual stays below
#: this fraction of their terms (``_held_loops_at_rest``)
CONSISTENT = 1e-9
#: the free directions of a singular DC system are found densely up to this many unknowns
DENSE_NULL_UP_TO = 2000


def _held_loops_at_rest(A: sp.csc_matrix, rhs: np.ndarray, n: int,
                        m: int) -> np.ndarray | None:
    """The DC solution at rest of a system whose only free directions are currents circulating
    through capacitors with ``initial`` (a loop of voltage-fixing parts, such as a source, two
    capacitors and an ideal op-amp's output, whose voltages are all fixed): one such current
    per free direction is set to 0 (the circuit at rest, ``loops``), as many equations the rest
    implies leave the system, the square remainder is solved as usual (``linsolve.solve``) and
    the equations left out must hold as well; else None.

    The free directions (right null space) and the implied equations (left null space) come
    from the SVD of the row-scaled dense matrix (scipy.linalg.null_space); which currents and
    rows go, from QR with column pivoting of those bases (Golub & Van Loan, sec. 5.4.1)."""
    if m == 0 or A.shape[0] > DENSE_NULL_UP_TO:
        return None
    dense = A.toarray()
    rows = np.abs(dense).max(axis=1)
    dense = dense / np.where(rows > 0.0, rows, 1.0)[:, None]
    right, left = scipy.linalg.null_space(dense), scipy.linalg.null_space(dense.T)
    f = right.shape[1]
    if f == 0 or left.shape[1] != f:
        return None
    moved = right[n:n + m]
    if np.linalg.matrix_rank(moved) < f:            # a direction no held capacitor carries
        return None
    cols = n + scipy.linalg.qr(moved.T, pivoting=True, mode="r")[1][:f]
    drop = scipy.linalg.qr(left.T, pivoting=True, mode="r")[1][:f]
    keep_c = np.setdiff1d(np.arange(A.shape[0]), cols)
    keep_r = np.setdiff1d(np.arange(A.shape[0]), drop)
    x = np.zeros(A.shape[0])
    try:
        x[keep_c] = linsolve.solve(A[keep_r][:, keep_c].tocsc(), rhs[keep_r])
    except linsolve.Singular:
        return None
    dropped = A[drop]
    resid = np.abs(dropped @ x - rhs[drop])
    terms = abs(dropped) @ np.abs(x) + np.abs(rhs[drop])
    return x if np.all(resid <= CONSISTENT * np.maximum(terms, 1e-300)) else None


def _solve(A: sp.csc_matrix, rhs: np.ndarray, circuit: Circuit, lay: Layout,
           held: list[Part] = ()) -> np.ndarray:
    try:
        return linsolve.solve(A, rhs)
    except linsolve.Singular:
        pass
    rest = _held_loops_at_rest(A, rhs, lay.n, len(held))
    if rest is not None:
        return rest
    culprit = _voltage_loop(circuit)
    if culprit is not None:
        part = circuit.part(culprit)
        raise InitialStateError(
            f"{culprit} closes a loop of parts that fix voltages at 0- (voltage sources, closed "
            "switches, inductors without an initial current, capacitors with an initial "
            "voltage): the loop's current is undefined or its voltages contradict each other; "
            "give the inductors initial values or remove the conflict",
            file=circuit.source, part=culprit, line=part.line)
    held = _held_group(circuit)
    if held is not None:
        part, nodes = held
        raise InitialStateError(
            f"the initial current of {part.name} flows into node(s) {', '.join(nodes)}, which "
            "reach ground at 0- only through parts of fixed current (inductors with an initial "
            "current, current sources, vccs, cccs): Kirchhoff's current law there fixes the "
            f"current of {part.name}, so a given value contradicts it; remove its initial value "
            "or give the nodes a DC path",
            file=circuit.source, part=part.name, field="initial", line=part.line)
    part = _null_owner(circuit, lay, A)
    controlled = part is not None and part.kind in CONTROLLED
    raise InitialStateError(
        "the DC equations at 0- are singular (the pre-step state is undefined or its "
        + (f"equations contradict each other); check the gain and control of {part.name}"
           if controlled else "equations contradict each other)"),
        file=circuit.source, part=None if part is None else part.name,
        field=("gain" if controlled else "nodes") if part is not None else None,
        line=None if part is None else part.line)


def _check_consistent(circuit: Circuit, pre: System, y: np.ndarray, i_scale: float) -> None:
    """Raise InitialStateError where an inductor shunt carries what an ideal inductor cannot
    (inductors in series with different initial currents)."""
    for reg in pre.regularisers:
        if reg.role != "shunt":
            continue
        current = float(reg.current.dense(y.shape[0]) @ y + reg.current.const)
        if abs(current) > CONTRADICTION * i_scale:
            part = circuit.part(reg.part)
            raise InitialStateError(
                f"the initial currents force a current through inductor {part.name} that it "
                "does not carry (inductors in series with different initial currents?)",
                file=circuit.source, part=part.name, field="initial", line=part.line)


def _resistive_current(circuit: Circuit) -> float:
    """A current scale in A: the largest source voltage or capacitor initial voltage over the
    largest resistance, plus the largest source current, so that rounding noise in a shunt is
    not read as a contradiction where no inductor has a current.  Node voltages are left out:
    a contradiction drives its current through the shunt and raises them with it."""
    res = [abs(p.value) for p in circuit.parts if p.kind == RESISTOR and p.value]
    volts = [abs(v or 0.0) for p in circuit.parts if p.kind in (VOLTAGE_SOURCE, CAPACITOR)
             for v in [p.value if p.kind == VOLTAGE_SOURCE else p.initial]
             + [v for _, v in p.steps]]
    amps = [abs(v or 0.0) for p in circuit.parts if p.kind == CURRENT_SOURCE
            for v in [p.value] + [v for _, v in p.steps]]
    return (max(volts, default=0.0) / max(res) if res else 0.0) + max(amps, default=0.0)


def initial_state(circuit: Circuit, lay: Layout, pre: System) -> np.ndarray:
    """The state y(0-), shape (n,), for the pre-step system ``pre``.

    Raises:
        InitialStateError: a pre-step value is undefined or the given values contradict the
            circuit at 0-.
    """
    check_defined(circuit)
    A, rhs, held = _dc_matrix(circuit, lay, pre)
    x = _solve(A, rhs, circuit, lay, held)
    y = x[:lay.n]
    i_scale = max([abs(circuit.part(nm).initial or 0.0) for nm in lay.inductors]
                  + [float(np.max(np.abs(y[~lay.volts]), initial=0.0)),
                     _resistive_current(circuit), 1e-30])
    _check_consistent(circuit, pre, y, i_scale)
    return y
