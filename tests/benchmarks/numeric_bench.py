"""Numerical engine against a bare integrator, and its scaling (sections 2 and 3).

The bare integrator is scipy.integrate.solve_ivp on the ladder's ODE written here by hand,
C v' = -G v + g_in V (v the n capacitor voltages, V = 1 V from t = 0), as a sparse tridiagonal
Jacobian J = -C^-1 G, with the engine's own method (Radau), rtol, the engine's absolute
tolerance of the node voltages, and the same time span as the engine's interval (t = 0 to where
its held continuation stopped).  The engine integrates the regularised model (a series
resistance r_s at the source, a parasitic capacitance at the source node), which differs from
the hand ODE by r_s / R ~ 1e-7: the same ODE for timing purposes.
"""

from __future__ import annotations

import statistics
import time

import numpy as np
import scipy.sparse as sp
from scipy.integrate import solve_ivp

from harness import simulate

from .circuits import rc_ladder, switched_rc
from .closedform_bench import exponents
from .timing import growth_exponent, ms

R, C = 1e3, 1e-9


def hand_ode(n: int):
    """(J sparse (n, n) in 1/s, c (n,) in V/s) of the n-section ladder driven with 1 V."""
    main = np.full(n, -2.0)
    main[-1] = -1.0
    off = np.ones(n - 1)
    jac = sp.diags([off, main, off], [-1, 0, 1], format="csc") / (R * C)
    c = np.zeros(n)
    c[0] = 1.0 / (R * C)
    return jac, c


def bare(n: int, t_end: float, rtol: float, atol, method: str = "Radau", dense: bool = False):
    """solve_ivp on the hand ODE from v = 0; returns the result (nfev, njev, nlu, t)."""
    jac, c = hand_ode(n)
    if not dense:
        return solve_ivp(lambda _t, v: jac @ v + c, (0.0, t_end), np.zeros(n), method=method,
                         jac=jac, rtol=rtol, atol=atol)
    jd = jac.toarray()
    return solve_ivp(lambda _t, v: jd @ v + c, (0.0, t_end), np.zeros(n), method=method,
                     jac=jd, rtol=rtol, atol=atol)


def _node_atol(sol, n: int):
    """The engine's absolute tolerance of the ladder's capacitor nodes n1..nn."""
    names = list(getattr(sol.layout, "nodes", ()))
    try:
        idx = [names.index(f"n{k}") for k in range(1, n + 1)]
        return np.asarray(sol.atol)[idx]
    except (ValueError, IndexError):
        return float(np.min(sol.atol))


def engine_vs_bare(n: int, repeats: int) -> dict:
    """Engine (solve + the probe's features) and bare solve_ivp on the n-section ladder, run
    alternately ``repeats`` times after one warm-up each; medians of the times."""
    circ = rc_ladder(n)
    probe = circ.expectations[0].probe
    sol = simulate.solve(circ)
    stats = sol.stats(0)
    t_end = sol.runs[0].end
    atol = _node_atol(sol, n)
    ref = bare(n, t_end, sol.rtol, atol)
    engine, stepping, setup, plain = [], [], [], []
    for _ in range(repeats):
        start = time.perf_counter()
        s = simulate.solve(circ)
        s.features(probe, 0)
        engine.append(time.perf_counter() - start)
        stepping.append(s.stats(0).seconds)
        setup.append(s.setup_seconds)
        start = time.perf_counter()
        bare(n, t_end, sol.rtol, atol)
        plain.append(time.perf_counter() - start)
    return {"n": n, "engine": statistics.median(engine),
            "integrator": statistics.median(stepping), "setup": statistics.median(setup),
            "bare": statistics.median(plain),
            "steps": stats.steps, "nfev": stats.nfev, "njev": stats.njev, "nlu": stats.nlu,
            "bare_steps": ref.t.size - 1, "bare_nfev": ref.nfev, "bare_njev": ref.njev,
            "bare_nlu": ref.nlu, "rtol": sol.rtol, "t_end": t_end}


def dense_vs_sparse(n: int) -> dict:
    """The bare integrator at n sections: Radau dense, Radau sparse, BDF sparse (one run each)."""
    t_end = 10 * 0.5 * R * C * n * n
    out = {}
    for label, method, dense in (("Radau dense", "Radau", True), ("Radau sparse", "Radau", False),
                                 ("BDF sparse", "BDF", False)):
        start = time.perf_counter()
        bare(n, t_end, 1e-7, 1e-11, method, dense)
        out[label] = time.perf_counter() - start
    return out


def _event_row(circ) -> dict:
    """One solve of ``circ``: time, total steps, intervals with values / intervals."""
    start = time.perf_counter()
    sol = simulate.solve(circ)
    seconds = time.perf_counter() - start
    return {"seconds": seconds, "steps": sum(r.stats.steps for r in sol.runs),
            "kept": len(sol.runs), "intervals": len(circ.events),
            "setup": sol.setup_seconds}


def event_scaling(counts) -> list[dict]:
    """The numerical engine against the number of events (one run each: the long schedules
    take tens of seconds)."""
    rows = []
    for m in counts:
        rows.append({"events": m, "ladder": _event_row(rc_ladder(10, events=m)),
                     "switched": _event_row(switched_rc(m))})
    return rows


def _event_table(ev: list[dict]) -> str:
    body = []
    for r in ev:
        cells = [str(r["events"])]
        for key in ("ladder", "switched"):
            x = r[key]
            cells += [ms(x["seconds"]), ms(x["seconds"] / r["events"]),
                      f"{x['steps'] / x['kept']:.0f}" if x["kept"] else "-",
                      f"{x['kept']} / {x['intervals']}"]
        body.append(cells)
    head = ["events", "10-section ladder ms", "per event ms", "steps per interval",
            "intervals with values", "switched RC ms", "per event ms", "steps per interval",
            "intervals with values"]
    return _t(head, body)


def section(quick: bool) -> tuple[str, dict]:
    sizes = [10, 30, 100, 300] if quick else [10, 30, 100, 300, 1000, 2000]
    rows = [engine_vs_bare(n, 5 if n <= 300 else 3) for n in sizes]
    body = [[str(r["n"]), ms(r["engine"]), ms(r["setup"]), ms(r["integrator"]), ms(r["bare"]),
             f"{r['engine'] / r['bare']:.2f}", f"{r['integrator'] / r['bare']:.2f}",
             f"{r['steps']} / {r['bare_steps']}", f"{r['nfev']} / {r['bare_nfev']}",
             f"{r['njev']} / {r['bare_njev']}", f"{r['nlu']} / {r['bare_nlu']}"]
            for r in rows]
    head = ["ladder sections", "engine solve+features ms", "of which set-up ms",
            "of which stepping ms",
            "bare solve_ivp ms", "engine / bare", "stepping / bare", "steps (engine / bare)",
            "f evals", "J evals", "LU"]
    p_engine = exponents(rows, "engine", "n")
    p_bare = exponents(rows, "bare", "n")
    dvs = dense_vs_sparse(300 if quick else 1000)
    ev = event_scaling([1, 10, 100] if quick else [1, 10, 100, 1000])
    p_ev = {key: growth_exponent([r["events"] for r in ev[1:]],
                                 [r[key]["seconds"] for r in ev[1:]])
            for key in ("ladder", "switched")}
    worst = max(rows, key=lambda r: r["engine"] / r["bare"])
    met = all(r["engine"] <= 1.3 * r["bare"] for r in rows)
    big = [r for r in rows if r["n"] >= 1000]
    verdict = [f"Target engine <= 1.3 x bare: **{'met' if met else 'not met'}** (worst "
               f"n = {worst['n']}: {worst['engine'] / worst['bare']:.2f} x; stepping alone "
               f"{worst['integrator'] / worst['bare']:.2f} x)."]
    if big:
        verdict.append(f"The {big[0]['n']}-section ladder: {big[0]['engine']:.2f} s in all "
                       f"(sparse Jacobian, {big[0]['steps']} steps, {big[0]['nlu']} LU).")
    text = ["### 2. Numerical engine vs a bare integrator", "",
            f"rtol = {rows[0]['rtol']:.0e} (the engine's), same atol, Radau, sparse hand-written "
            f"Jacobian, same time span.", "",
            _t(head, body), "",
            " ".join(verdict), "",
            f"Growth exponents (last three sizes): engine n^{p_engine:.2f}, bare n^{p_bare:.2f}.",
            "", f"Bare integrator on the {300 if quick else 1000}-section ladder (rtol 1e-7, one "
            "run each): " + ", ".join(f"{k} {v:.2f} s" for k, v in dvs.items()) + ".", "",
            "Numeric solve against the number of events (one run each; a toggling source into "
            "the 10-section ladder, and the switched RC):", "",
            _event_table(ev), "",
            f"Fitted exponents (10 … max events): ladder m^{p_ev['ladder']:.2f}, switched RC "
            f"m^{p_ev['switched']:.2f}."]
    return "\n".join(text), {"rows": rows, "dense_sparse": dvs, "events": ev}


def _t(header, rows) -> str:
    out = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    return "\n".join(out + ["| " + " | ".join(r) + " |" for r in rows])
