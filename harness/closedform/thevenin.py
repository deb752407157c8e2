"""Thevenin resistance seen by each storage part: the hand method's R_th, computed exactly.

For a capacitor or inductor P in interval k: zero the independent sources, open the other
capacitors, short the other inductors (that is G of the interval, whose inductor rows read
v_p - v_n = 0 and in which capacitors have no entries), keep the controlled sources, open P
itself, inject a 1 A test current into P's p terminal (out of n) and read v_p - v_n.  That ratio
is R_th, so tau = R_th C or L / R_th for a single-storage circuit; with a controlled source the
test-source method includes feedback exactly (Miller: R (1 + A) for an inverting gain -A across
the capacitor).  A terminal pair with no resistive path reads +inf.

Cost, for n unknowns and s storage parts.  Every capacitor sees the same matrix G~, so one LU
of G~ serves all their test injections at once (one multi-column solve).  An inductor's own
row is replaced by i = 0; for a regular G~ that is a rank-one change of one row, handled by the
bordered solve (Sherman-Morrison; Golub & Van Loan, *Matrix Computations*, 4th ed., sec. 2.1.4)

    G~ x = r + e_j lam,  x_j = 0   =>   x = y - w y_j / w_j,   y = G~^-1 r,  w = G~^-1 e_j,

so the whole interval costs O(n^3 + s n^2) instead of one least-squares solve and one SVD per
part (O(s n^3)).  Where G~ is not provably regular (an LU condition estimate) or an inductor's
w_j is too small to trust (opening it leaves no resistive path), the per-part route is used: a
least-squares solve and a null-space test.  All capacitors see the same G~, so they share one
least-squares solver (its equilibration, pattern and factors made once: ``LeastSquares``) and
one null-space test; each such inductor gets its own.  The null-space test is an SVD, O(n^3),
skipped where the solver's own LU condition estimate already shows that no singular value can
fall below ``NULL_REL`` of the largest (``_provably_regular``).

An op-amp with a gain-bandwidth product is a storage of its own: its pole puts −(v(p) − v(n))/ω_t
on its branch row of C.  Its zero-value time constant (``pole_time_constants``) is that entry
times the output voltage a unit source on its branch row (an input offset of 1 V) gives in G~:
τ = −(v(p) − v(n))/ω_t, the term tr(G^-1 C) adds for that row (capacitors open, the other
op-amps at their DC gain).  For a follower it is (1/ω_t)·A/(1 + A), the closed-loop pole.
"""

from __future__ import annotations

import numpy as np

from ..model import CAPACITOR, INDUCTOR, Circuit
from .conditioning import SPARSE_CONDITION_MIN, sparse_condition
from .linalg import REGULAR_MIN_SIZE, LeastSquares, _pattern, equilibrate, regular_factor
from .mna import Layout, Scale, opamp_omega, voltage_row

#: more storage parts than this are solved this many test injections at a time (an (n, s)
#: block per batch instead of three (n, s) matrices: 50 MB each at 2,500 parts)
CHUNK = 512
#: G~ with an estimated reciprocal condition number (1-norm) above this takes the batched route.
#: Faithful to the per-part null test (singular values below 1e-12 of the largest): it implies
#: sigma_min / sigma_max > ~1e-7 / n, far above 1e-12 for any circuit within the part limit
BATCH_RCOND = 1e-6
#: an inductor whose bordered pivot |w_j| is below this fraction of max |w| takes the per-part
#: route (opening it may leave its terminals without a resistive path)
BORDER_PIVOT = 1e-6
#: a singular value below this fraction of the largest spans the null space (per-part route)
NULL_REL = 1e-12
#: a test voltage row with a null-space component above this reads +inf (no unique voltage)
NULL_COUPLING = 1e-9
#: margin on the LU condition estimate before it stands in for the SVD's null-space test: the
#: 1-norm estimate is within a factor of 3 of the truth in practice (Higham, *Accuracy and
#: Stability of Numerical Algorithms*, 2nd ed., sec. 15.3), and sigma_min / sigma_max >=
#: rcond_1 / n; a further factor of 10 on top
NULL_ESTIMATE_MARGIN = 30.0


def _storage(circuit: Circuit) -> list:
    return [p for p in circuit.parts if p.kind in (CAPACITOR, INDUCTOR)]


def _injections(layout: Layout, scale: Scale, parts: list) -> tuple[np.ndarray, np.ndarray]:
    """(V, Rhs), shapes (n, s) each: column k is part k's voltage row v_p - v_n and its scaled
    1 A test injection (on the node rows only)."""
    vrows = np.column_stack([voltage_row(layout, p.p, p.n) for p in parts])
    rhs = vrows.copy()
    rhs[layout.n_nodes:] = 0.0
    return vrows, scale.r0 * rhs


def thevenin_resistances(circuit: Circuit, layout: Layout, scale: Scale,
                         g_scaled: np.ndarray) -> dict[str, float]:
    """Part name -> R_th in ohms for every capacitor and inductor.

    Args:
        g_scaled: the interval's scaled G~ (shape (n, n)), floating groups already pinned.
    """
    parts = _storage(circuit)
    if not parts:
        return {}
    factor = regular_factor(g_scaled, BATCH_RCOND, min_size=1)
    if factor is None:
        return _per_part_each(layout, g_scaled, parts,
                              lambda k: _one_injection(layout, scale, parts[k]))
    solve = (lambda m: _refined_solve(g_scaled, factor, m))
    if len(parts) > CHUNK:
        return _chunked(layout, scale, g_scaled, parts, solve)
    vrows, rhs = _injections(layout, scale, parts)
    x = solve(rhs)                                   # (n, s): every test injection at once
    out = {p.name: float(vrows[:, k] @ x[:, k]) for k, p in enumerate(parts)
           if p.kind == CAPACITOR}
    out = _with_inductors(layout, g_scaled, parts, vrows, rhs, x, solve, out)
    return {p.name: out[p.name] for p in parts}


def _chunked(layout: Layout, scale: Scale, g_scaled: np.ndarray, parts: list,
             solve) -> dict[str, float]:
    """``thevenin_resistances``' batched route for many storage parts: the test injections
    solved ``CHUNK`` columns at a time (each column's solve and dot product as in one batch),
    so no (n, s) matrix is held; inductors keep their own columns for the bordered solve."""
    out: dict[str, float] = {}
    kept = []
    for start in range(0, len(parts), CHUNK):
        group = parts[start:start + CHUNK]
        vrows, rhs = _injections(layout, scale, group)
        x = solve(rhs)
        out.update({p.name: float(vrows[:, k] @ x[:, k]) for k, p in enumerate(group)
                    if p.kind == CAPACITOR})
        kept += [(p, vrows[:, k], rhs[:, k], x[:, k]) for k, p in enumerate(group)
                 if p.kind == INDUCTOR]
    if not kept:
        return {p.name: out[p.name] for p in parts}
    held, vrows, rhs, x = ([item[i] for item in kept] for i in range(4))
    out = _with_inductors(layout, g_scaled, held, np.column_stack(vrows),
                          np.column_stack(rhs), np.column_stack(x), solve, out)
    return {p.name: out[p.name] for p in parts}


def _with_inductors(layout: Layout, g_scaled: np.ndarray, parts: list, vrows: np.ndarray,
                    rhs: np.ndarray, x: np.ndarray, solve, out: dict) -> dict[str, float]:
    """``out`` (the capacitors' R_th) with every inductor's added, by the bordered solve
    (module docstring) or, where its pivot is too small, the per-part route."""
    inductors = [k for k, p in enumerate(parts) if p.kind == INDUCTOR]
    if inductors:
        cols = np.array([layout.branch(parts[k].name) for k in inductors])
        unit = np.zeros((g_scaled.shape[0], cols.size))
        unit[cols, np.arange(cols.size)] = 1.0
        w = solve(unit)                              # (n, l): G~^-1 e_j per inductor
        for i, k in enumerate(inductors):
            j, wk = cols[i], w[:, i]
            if abs(wk[j]) <= BORDER_PIVOT * np.abs(wk).max(initial=0.0):
                out.update(_per_part(layout, g_scaled, [parts[k]], vrows[:, [k]],
                                     rhs[:, [k]]))
                continue
            xk = x[:, k] - wk * (x[j, k] / wk[j])    # x_j = 0: the inductor itself open
            out[parts[k].name] = float(vrows[:, k] @ xk)
    return out


def _refined_solve(g: np.ndarray, factor, rhs: np.ndarray) -> np.ndarray:
    """g^-1 rhs from the LU ``factor`` of g with one step of iterative refinement (the
    per-part route's least squares refines too), shape like ``rhs``."""
    x = factor.solve(rhs)
    return x + factor.solve(rhs - g @ x)


def _one_injection(layout: Layout, scale: Scale, part) -> tuple[np.ndarray, np.ndarray]:
    """``_injections`` of one part: its voltage row and test injection, shapes (n,)."""
    vrows, rhs = _injections(layout, scale, [part])
    return vrows[:, 0], rhs[:, 0]


def _per_part(layout: Layout, g_scaled: np.ndarray, parts: list, vrows: np.ndarray,
              rhs: np.ndarray) -> dict[str, float]:
    """``_per_part_each`` with the parts' voltage rows and injections given as columns."""
    return _per_part_each(layout, g_scaled, parts, lambda k: (vrows[:, k], rhs[:, k]))


def _per_part_each(layout: Layout, g_scaled: np.ndarray, parts: list,
                   injection) -> dict[str, float]:
    """R_th by one least-squares solve per part and a null-space test: every capacitor shares
    one solver and one test of G~; each inductor (whose own row is replaced by i = 0) gets its
    own.  ``injection(k)``: part k's (voltage row, test injection), shapes (n,), made per part
    so that no (n, s) matrix is held."""
    out = {}
    shared = None
    for k, part in enumerate(parts):
        if part.kind == INDUCTOR:
            g = g_scaled.copy()
            j = layout.branch(part.name)
            g[j, :] = 0.0
            g[j, j] = 1.0                            # the part itself open: i = 0
            solver, null = _solver_and_null(g)
        else:
            shared = _solver_and_null(g_scaled) if shared is None else shared
            solver, null = shared
        vrow, rhs = injection(k)
        out[part.name] = _solve_ratio(solver, rhs, vrow, null)
    return out


def _solver_and_null(g: np.ndarray) -> tuple[LeastSquares, np.ndarray]:
    """The least-squares solver of g and the unit rows spanning its null space (``_null_space``,
    none where ``_provably_regular``)."""
    solver = LeastSquares(g)
    if _provably_regular(solver, g.shape[0]):
        return solver, np.zeros((0, g.shape[1]))
    return solver, _null_space(g)


def _provably_regular(solver: LeastSquares, n: int) -> bool:
    """Whether the equilibrated g (the solver's own, the same Ruiz scaling ``_null_space``
    uses) has no singular value below ``NULL_REL`` of the largest: shown by its LU condition
    estimate with ``NULL_ESTIMATE_MARGIN``, or for a large sparse g by its 2-norm condition
    number (Lanczos, ``conditioning.sparse_condition``) below 1 / (10 NULL_REL)."""
    if solver.regular(NULL_ESTIMATE_MARGIN * max(n, 1) * NULL_REL, REGULAR_MIN_SIZE) is True:
        return True
    if n < SPARSE_CONDITION_MIN or solver.factor is None:
        return False
    _, _, scaled = solver.scaled()
    pattern = _pattern(scaled)
    return pattern is not None and sparse_condition(scaled, pattern) < 0.1 / NULL_REL


def _null_space(g: np.ndarray) -> np.ndarray:
    """Unit rows spanning the numerical null space of g: singular values <= NULL_REL * largest
    of the Ruiz-equilibrated dr g dc, mapped back (x = dc y).  Equilibrating first keeps a
    branch-stamped resistance (a 10 GOhm off-switch reads -5e7 in its row of G~) from looking
    like a null direction of the unscaled matrix."""
    dr, dc = equilibrate(g)
    _, sv, vh = np.linalg.svd(dr[:, None] * g * dc[None, :])
    null = vh[sv <= NULL_REL * sv.max()] * dc[None, :]
    return null / np.linalg.norm(null, axis=1, keepdims=True) if null.shape[0] else null


def _solve_ratio(solver: LeastSquares, rhs: np.ndarray, vrow: np.ndarray,
                 null: np.ndarray) -> float:
    """v = vrow . x for G~ x = rhs (1 A injected, scaled); +inf if no solution or not unique."""
    x, _, consistent = solver.solve(rhs)
    if not consistent:
        return float("inf")
    if null.shape[0] and np.max(np.abs(null @ vrow)) > NULL_COUPLING:
        return float("inf")
    return float(vrow @ x)


def pole_time_constants(circuit: Circuit, g_scaled: np.ndarray,
                        layout: Layout) -> dict[str, float]:
    """Op-amp name -> the zero-value time constant in s of its gain-bandwidth pole (module
    docstring), for every op-amp with a ``gbw``; +inf where the output voltage is not fixed
    by G~.  Branch rows are unweighted in the scaling (``mna.Scale``), so a unit right side
    there is 1 V and the node voltages read off x~ directly.

    Args:
        g_scaled: the interval's scaled G~ (shape (n, n)), floating groups already pinned.
    """
    amps = [(p, w) for p in circuit.parts if (w := opamp_omega(p)) is not None]
    if not amps:
        return {}
    unit = np.zeros((g_scaled.shape[0], len(amps)))
    unit[[layout.branch(p.name) for p, _ in amps], np.arange(len(amps))] = 1.0
    vrows = np.column_stack([voltage_row(layout, p.p, p.n) for p, _ in amps])
    factor = regular_factor(g_scaled, BATCH_RCOND, min_size=1)
    if factor is not None:
        x = _refined_solve(g_scaled, factor, unit)
        volts = [float(vrows[:, k] @ x[:, k]) for k in range(len(amps))]
    else:
        solver, null = _solver_and_null(g_scaled)
        volts = [_solve_ratio(solver, unit[:, k], vrows[:, k], null) for k in range(len(amps))]
    return {p.name: (-v / w if np.isfinite(v) else float("inf"))
            for (p, w), v in zip(amps, volts)}
