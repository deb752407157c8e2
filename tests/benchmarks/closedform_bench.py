"""Closed-form engine against its linear-algebra limit, and its scaling (sections 1 and 3).

The limit is the bare LAPACK work on the same matrices the engine decomposes, for the route the
engine takes on that circuit: for the symmetric route the LU of the algebraic block and
``scipy.linalg.eigh(S, C11)`` on the reduced capacitor coordinates (see
harness/closedform/symmetric.py); for the general route (small circuits, inductors, controlled
sources) the LU of G~ + s0 C~, the solve for M R, the ordered real Schur form of K and the
Sylvester equation (harness/closedform/interval.py).  For reference also a dense non-symmetric
``eig`` of C11^-1 S and QZ (``scipy.linalg.eig(G, C)``) on the full MNA pencil.
"""

from __future__ import annotations

from pathlib import Path
import numpy as np
import scipy.linalg as sla

from harness.closedform import response, solve, symmetric
from harness.closedform.mna import (capacitor_null_basis, connects_in_interval, floating_groups,
                                    pin, scale_of, scaled)
from harness.closedform.stamps import layout_of, stamp
from harness.model import SWITCH

from .circuits import random_rc, rc_ladder, switched_rc
from .timing import growth_exponent, median_time, repeats_for

ROOT = Path(__file__).resolve().parents[2]


def pencil(circuit):
    """The scaled pencil (G~, C~) and null basis of interval 0, as the engine builds it."""
    layout, scale = layout_of(circuit), scale_of(circuit)
    closed = {p.name: p.is_closed(0.0) for p in circuit.parts if p.kind == SWITCH}
    g, c, _ = stamp(circuit, layout, closed, lambda p: 0.0)
    pin(g, layout, floating_groups(circuit, connects_in_interval(closed)), 1.0 / scale.r0)
    gs, cs, _ = scaled(g, c, np.zeros(layout.size), layout, scale)
    return gs, cs, capacitor_null_basis(circuit, layout)


def reduced(gs, cs, null):
    """(S, C11, G22) of the symmetric route, or None where it does not apply."""
    g2 = symmetric._symmetric(symmetric._cleared(gs, cs))
    n0, r = symmetric._bases(null, gs.shape[0])
    red = symmetric._reduced(g2, symmetric._symmetric(cs), n0, r)
    if red is None:
        return None
    g22 = np.asarray(n0.T @ np.asarray(n0.T @ g2).T) if n0.shape[1] else np.zeros((0, 0))
    return red[0], red[1], g22


def _general_only(fn):
    """Run ``fn`` with the symmetric route switched off."""
    real = response.symmetric.decompose
    response.symmetric.decompose = lambda g, c, null: None
    try:
        return fn()
    finally:
        response.symmetric.decompose = real


def general_limit(gs, cs, null, reps: int) -> float:
    """Median time in s of the general route's decomposition calls on the pencil at s0 = 1:
    lu_factor(G~ + C~), lu_solve for M R = (G~ + C~)^-1 C~ R, the ordered real Schur form of
    K = R^T M R (finite block first) and the Sylvester equation that decouples it."""
    import math
    from harness.closedform.interval import INFINITE_REL, _orth_complement
    r = _orth_complement(null, gs.shape[0])
    cr = cs @ r
    thr = INFINITE_REL

    def bare():
        lu = sla.lu_factor(gs + cs, check_finite=False)
        k = r.T @ sla.lu_solve(lu, cr, check_finite=False)
        t, _, f = sla.schur(k, output="real", sort=lambda x, y: math.hypot(x, y) > thr)
        if 0 < f < t.shape[0]:
            sla.solve_sylvester(t[:f, :f], -t[f:, f:], -t[:f, f:])
    return median_time(bare, reps)


def limit_row(circuit, with_general: bool, with_reference: bool) -> dict:
    """Median times in s of the engine's solve and of the bare decompositions for one circuit
    (``limit``, for the route the engine takes: ``route`` "symmetric" or "general")."""
    t_solve = median_time(lambda: solve(circuit), 1, warmup=0)
    reps = repeats_for(t_solve, budget=4.0, low=3, high=15)
    row = {"circuit": circuit.title, "unknowns": None, "solve": median_time(
        lambda: solve(circuit), reps, warmup=0)}
    gs, cs, null = pencil(circuit)
    row["unknowns"] = gs.shape[0]
    red = reduced(gs, cs, null)
    if red is not None:
        s, c11, g22 = red
        row["coords"] = s.shape[0]
    if symmetric.decompose(gs, cs, null) is not None:
        row["route"] = "symmetric"

        def bare():
            if g22.size:
                sla.lu_factor(g22, check_finite=False)
            sla.eigh(s, c11, check_finite=False)
        row["limit"] = median_time(bare, reps)
    else:
        row["route"] = "general"
        row["limit"] = general_limit(gs, cs, null, reps)
    if red is not None and with_reference:
        row["eig"] = median_time(lambda: np.linalg.eig(np.linalg.solve(c11, s)), 3)
        if gs.shape[0] <= 400:
            row["qz"] = median_time(lambda: sla.eig(gs, cs, right=False), 3)
    if with_general:
        row["general"] = median_time(lambda: _general_only(lambda: solve(circuit)), 3)
    return row


def limits(sizes_ladder, sizes_random, general_up_to: int, reference_up_to: int) -> list[dict]:
    rows = []
    for n in sizes_ladder:
        rows.append(limit_row(rc_ladder(n), n <= general_up_to, n <= reference_up_to))
    for n in sizes_random:
        rows.append(limit_row(random_rc(n), n <= general_up_to, n <= reference_up_to))
    return rows


def small_circuits(circuits) -> list[dict]:
    """Total closed-form time (solve + every expectation's features) of small circuits."""
    rows = []
    for circ in circuits:
        def run():
            sol = solve(circ)
            for exp in circ.expectations:
                k = circ.events.index(exp.at) if exp.at in circ.events else 0
                sol.features(exp.probe, k)
        def solve_only():
            solve(circ)
        rows.append({"circuit": circ.title, "nodes": len(circ.nodes) - 1,
                     "total": median_time(run, 15, warmup=2),
                     "solve": median_time(solve_only, 15, warmup=1)})
    return rows


def feature_cost(sizes) -> list[dict]:
    """Time of one probe's features at event 0 (includes the zero-value time constant)."""
    rows = []
    for n in sizes:
        circ = rc_ladder(n)
        probe = circ.expectations[0].probe
        sol = solve(circ)

        def feats():
            sol._probe_cache.clear()
            sol._jump_cache.clear()
            sol.features(probe, 0)
        rows.append({"n": n, "features": median_time(feats, 3, warmup=0)})
    return rows


def event_scaling(counts) -> list[dict]:
    """Closed-form solve time against the number of events (10-section ladder, switched RC)."""
    rows = []
    for m in counts:
        lad = rc_ladder(10, events=m)
        sw = switched_rc(m)
        rows.append({"events": m,
                     "ladder": median_time(lambda: solve(lad), 3 if m < 300 else 1),
                     "switched": median_time(lambda: solve(sw), 3 if m < 300 else 1)})
    return rows


def exponents(rows: list[dict], key: str, size_key: str, tail: int = 3) -> float:
    pts = [(r[size_key], r[key]) for r in rows if r.get(key)]
    pts = pts[-tail:]
    return growth_exponent([p[0] for p in pts], [p[1] for p in pts])


def solve_profile(n: int, top: int = 8) -> tuple[float, list[tuple[str, float]]]:
    """cProfile of one solve of the n-section ladder: (total s, [(function, own s)] largest)."""
    import cProfile
    import pstats
    circ = rc_ladder(n)
    solve(circ)
    prof = cProfile.Profile()
    prof.enable()
    solve(circ)
    prof.disable()
    stats = pstats.Stats(prof)
    rows = []
    for (file, line, name), (_cc, _nc, tt, _ct, _callers) in stats.stats.items():
        short = file.split("site-packages/")[-1].replace(str(ROOT) + "/", "")
        rows.append((f"{short}:{name}", tt))
    rows.sort(key=lambda r: -r[1])
    return stats.total_tt, rows[:top]
