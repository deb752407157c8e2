"""Numerical engine against a bare integrator, and its scaling (sections 2 and 3).

The engine against a bare Radau at equal tolerance and at equal accuracy is
``numeric_accuracy``'s (the hand ODE of each circuit, an exact reference, the bare tolerances
searched until its error is at most the engine's).  Here: that table in the section, the bare
integrator's dense against sparse Jacobian on the ladder's hand ODE C v' = -G v + g_in V (a
sparse tridiagonal J = -C^-1 G), and the engine against the number of events.
"""

from __future__ import annotations

import time

import numpy as np
import scipy.sparse as sp
from scipy.integrate import solve_ivp

from harness import simulate

from . import numeric_accuracy
from .circuits import rc_ladder, switched_rc
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
    """Section 2 of the Performance section: the engine against a bare Radau at equal
    tolerance and at equal accuracy (``numeric_accuracy``), the bare integrator's own dense
    against sparse cost, and the engine against the number of events."""
    rows = numeric_accuracy.measure(quick)
    ratios = {k: [r["seconds"]["engine"] / r["seconds"][k] for r in rows]
              for k in ("equal_tol", "whole", "linear")}
    dvs = dense_vs_sparse(300 if quick else 1000)
    ev = event_scaling([1, 10, 100] if quick else [1, 10, 100, 1000])
    p_ev = {key: growth_exponent([r["events"] for r in ev[1:]],
                                 [r[key]["seconds"] for r in ev[1:]])
            for key in ("ladder", "switched")}
    verdict = [f"{label} {'**met**' if max(ratios[key]) <= 1.2 else '**not met**'} "
               f"({min(ratios[key]):.2f}-{max(ratios[key]):.2f} x)"
               for key, label in (("whole", "whole grid"), ("linear", "linear grid"))]
    text = ["### 2. Numerical engine vs a bare integrator", "",
            "`python -m tests.benchmarks.numeric_accuracy` (its docstring gives the method): "
            "the hand ODE of each circuit (capacitor-less nodes eliminated), Radau with its "
            "analytic Jacobian (sparse under 20 % fill, else dense), over 30 slowest time "
            "constants of the exact solution; errors are the largest |v - v_ref| over every "
            "capacitor node against that solution (the symmetric eigendecomposition of "
            "(G_r, C)), on 1,000 linear times (\"linear\") and those plus 1,000 logarithmic "
            "times from 10 pulse widths (\"whole\"); one BLAS thread; the bare "
            "tolerances (rtol 1e-7 and the engine's node atol, scaled together) are searched "
            "by decades and three bisections until its error is at most the engine's.  The "
            "four runs of a row alternate (5 repeats, 3 at 1000 sections; medians).", "",
            numeric_accuracy.table(rows), "",
            "Target engine <= 1.2 x bare at equal accuracy: " + "; ".join(verdict)
            + f"; at equal tolerance {min(ratios['equal_tol']):.2f}-"
            f"{max(ratios['equal_tol']):.2f} x.", "",
            f"Bare integrator on the {300 if quick else 1000}-section ladder (rtol 1e-7, one "
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
