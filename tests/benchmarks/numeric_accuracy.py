"""The numerical engine against a bare Radau at equal *accuracy*, not equal tolerance:
``python -m tests.benchmarks.numeric_accuracy [--quick]`` (prints the table; ``numeric_bench``
puts it in RESULTS.md's Performance section 2).

The engine's tolerance applies to the decaying deviation from each interval's operating point,
the bare integrator's to the state itself, so at equal rtol and atol the two reach different
errors.  Here both are measured against an outside reference on one time grid, and the bare
run's tolerances are tightened until its error is at most the engine's:

* the hand ODE: the circuit's nodal equations C v' = -G v + g V (a 1 V step at t = 0 from rest),
  the nodes without capacitance eliminated (Kron reduction: G_r = G_dd - G_da G_aa^-1 G_ad);
  the bare integrator gets A = -C^-1 G_r and its analytic Jacobian, sparse where A's fill is
  under 20 %, else dense;
* the reference: the exact solution of that linear ODE by the symmetric definite
  eigendecomposition G_r X = C X diag(mu), X^T C X = I (``scipy.linalg.eigh``):
  v(t) = v_inf - X diag(e^(-mu t)) X^T C v_inf, checked against ``scipy.linalg.expm`` of A at
  three times where the state is small enough for a dense expm (reported as ``ref_check``);
* the error: the largest |v_k(t) - v_ref,k(t)| (V) over every capacitor node k on two grids,
  each run read through its own dense output: "linear", ``GRID_POINTS`` times up to
  ``SPAN_TAUS`` slowest time constants of the exact solution (the response a user reads; the
  bare run integrates that span, the engine until its own settle test ends it), and "whole",
  those plus ``GRID_POINTS`` logarithmic times from 10 post-pulse widths (the first
  nanoseconds of the step, where a node still near 0 V is most sensitive to the error scale);
* the search, per grid: rtol and atol scaled together by decades from the engine's own (1e-7
  and its node atol) until the bare error is at most the engine's, then three bisections of
  the log of the factor between the last decade that failed and the first that passed.

``--spans TITLE`` prints, for one circuit, the engine's and the equal-accuracy bare run's steps
and largest errors per decade of time instead (where the steps go).
"""

from __future__ import annotations

import os

# one BLAS thread, as the command line runs the engines (harness/cli.py): on shared cores a
# second thread spin-waits and makes the engine's dense eigenvalue calls several times slower
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse  # noqa: E402
import math
import statistics
import time
import warnings

import numpy as np
import scipy.linalg as la
import scipy.sparse as sp
from scipy.integrate import solve_ivp

from harness import simulate
from harness.model import Probe

from .circuits import rc_ladder, random_rc

#: a reduced A with fill below this goes to the bare integrator as a sparse matrix
SPARSE_FILL = 0.2


def hand_network(circ):
    """(A (n, n) sparse or dense, c (n,), names (n,), G_r, C): the circuit's capacitor-node
    ODE v' = A v + c for its resistors, capacitors and one voltage source of 1 V (module
    docstring).  Raises ValueError where C is singular on the storage nodes."""
    src = next(p for p in circ.parts if p.kind == "voltage-source")
    driven, ground = src.nodes[0], src.nodes[1]
    names = sorted({x for p in circ.parts for x in p.nodes} - {driven, ground})
    idx = {nm: i for i, nm in enumerate(names)}
    n = len(names)
    g, c, b = np.zeros((n, n)), np.zeros((n, n)), np.zeros(n)
    for p in circ.parts:
        if p.kind not in ("resistor", "capacitor"):
            continue
        mat, val = (g, 1.0 / p.value) if p.kind == "resistor" else (c, p.value)
        i, j = idx.get(p.nodes[0]), idx.get(p.nodes[1])
        for here, there, other in ((i, j, p.nodes[1]), (j, i, p.nodes[0])):
            if here is None:
                continue
            mat[here, here] += val
            if there is not None:
                mat[here, there] -= val
            elif other == driven:
                if mat is c:
                    raise ValueError("a capacitor on the driven node")
                b[here] += val                       # the source's 1 V through this resistor
    store = np.any(c != 0.0, axis=1)
    d, a = np.flatnonzero(store), np.flatnonzero(~store)
    gr, br = g[np.ix_(d, d)], b[d]
    if a.size:
        solve = la.solve(g[np.ix_(a, a)], np.column_stack([g[np.ix_(a, d)], b[a]]))
        gr = gr - g[np.ix_(d, a)] @ solve[:, :-1]
        br = br - g[np.ix_(d, a)] @ solve[:, -1]
    cd = c[np.ix_(d, d)]
    if np.min(la.eigvalsh(cd)) <= 1e-12 * np.max(np.diag(cd)):
        raise ValueError("C is singular on the storage nodes")
    jac = -la.solve(cd, gr)
    rhs = la.solve(cd, br)
    fill = np.count_nonzero(np.abs(jac) > 1e-14 * np.max(np.abs(jac))) / jac.size
    if fill < SPARSE_FILL:
        jac = sp.csc_matrix(np.where(np.abs(jac) > 1e-14 * np.max(np.abs(jac)), jac, 0.0))
    return jac, rhs, [names[i] for i in d], 0.5 * (gr + gr.T), cd, br


#: the span of both grids and of the bare run, in slowest time constants of the exact solution
#: (e^-30 ~ 1e-13: settled to the last digits the engine's own settle test asks for)
SPAN_TAUS = 30.0


def reference(gr, cd, br):
    """(v, span): v(t) for times t (s), shape (n, len(t)), the exact solution from rest (module
    docstring); span = ``SPAN_TAUS`` times its slowest time constant (s)."""
    mu, x = la.eigh(gr, cd)
    v_inf = la.solve(gr, br)
    coef = x.T @ (cd @ v_inf)

    def at(t):
        t = np.atleast_1d(t)
        return v_inf[:, None] - x @ (np.exp(-np.outer(mu, t)) * coef[:, None])
    return at, SPAN_TAUS / float(np.min(mu))


def ref_check(at, jac, rhs, t_end: float) -> float:
    """Largest |reference - expm route| (V) at three times, where n <= 300 (else nan)."""
    n = rhs.size
    if n > 300:
        return math.nan
    a = jac.toarray() if sp.issparse(jac) else jac
    v_inf = -la.solve(a, rhs)
    worst = 0.0
    for t in (1e-3 * t_end, 0.05 * t_end, 0.3 * t_end):
        v = v_inf - la.expm(a * t) @ v_inf
        worst = max(worst, float(np.max(np.abs(v - at(t)[:, 0]))))
    return worst


#: times on each grid: both integrators' errors peak between their steps (the interpolant of a
#: step is less accurate than its end), so a coarse grid samples the peaks by chance (200 times
#: moved the largest error of one network 3x between two runs of nearly the same steps)
GRID_POINTS = 1000


def grids(t_first: float, t_end: float) -> dict[str, np.ndarray]:
    """The two time grids (s): "linear", ``GRID_POINTS`` times up to t_end, the first at
    t_end / GRID_POINTS; "whole", those and ``GRID_POINTS`` logarithmic times from t_first,
    sorted (the start of the step included)."""
    lin = np.linspace(t_end / GRID_POINTS, t_end, GRID_POINTS)
    log = np.geomspace(max(t_first, 1e-9 * t_end), t_end, GRID_POINTS)
    return {"whole": np.unique(np.concatenate([lin[lin >= t_first], log])), "linear": lin}


def engine_values(sol, names, times) -> np.ndarray:
    """The engine's node voltages (V) at ``times``, shape (n, len(times)), interval 0."""
    terms = [sol.probe_terms(Probe("node", (nm,)), 0) for nm in names]
    w = np.array([t[0] for t in terms])
    off = np.array([t[1] for t in terms])
    return sol.runs[0].probe(w, off, times)


def bare(jac, rhs, t_end: float, rtol: float, atol, dense_output: bool = False):
    """solve_ivp Radau on v' = A v + c from rest with the analytic Jacobian A."""
    return solve_ivp(lambda _t, v: jac @ v + rhs, (0.0, t_end), np.zeros(rhs.size),
                     method="Radau", jac=jac, rtol=rtol, atol=atol, dense_output=dense_output)


def bare_error(case, factor: float, which: str) -> float:
    """The bare run's largest error (V) on grid ``which`` with rtol, atol scaled by
    ``factor``."""
    res = bare(case["jac"], case["rhs"], case["t_end"], case["rtol"] * factor,
               case["atol"] * factor, dense_output=True)
    return float(np.max(np.abs(res.sol(case["times"][which]) - case["ref"][which])))


def search(case, which: str) -> tuple[float, float, list]:
    """(factor, its error, trials): the loosest tolerance factor (decades, then three
    bisections of its log) whose bare error on grid ``which`` is at most the engine's."""
    target, trials = case["engine_err"][which], []

    def ok(f):
        err = bare_error(case, f, which)
        trials.append((f, err))
        return err <= target, err
    passed, err = ok(1.0)
    good, bad = (1.0, None) if passed else (None, 1.0)
    f = 1.0
    for _ in range(7):
        f *= 10.0 if passed else 0.1
        p, e = ok(f)
        if p:
            good, err = f, e
        else:
            bad = f
        if p != passed:
            break
    if good is None or bad is None:
        return (good or math.nan), err, trials
    for _ in range(3):
        mid = math.sqrt(good * bad)
        p, e = ok(mid)
        if p:
            good, err = mid, e
        else:
            bad = mid
    return good, err, trials


def _node_atol(sol, names):
    lay = sol.layout
    return np.array([np.asarray(sol.atol)[lay.nodes.index(nm)] for nm in names])


def prepare(circ) -> dict:
    """Everything measured once (errors, the tolerance searches) for one circuit."""
    jac, rhs, names, gr, cd, br = hand_network(circ)
    sol = simulate.solve(circ)
    at, t_end = reference(gr, cd, br)
    times = grids(10 * sol.regularisation.post_pulse, t_end)
    case = {"circuit": circ, "jac": jac, "rhs": rhs, "t_end": t_end, "times": times,
            "ref": {k: at(t) for k, t in times.items()}, "rtol": sol.rtol,
            "atol": _node_atol(sol, names), "sparse": sp.issparse(jac), "n": rhs.size,
            "names": names,
            "title": circ.title, "ref_check": ref_check(at, jac, rhs, t_end)}
    case["engine_err"] = {k: float(np.max(np.abs(engine_values(sol, names, t) - case["ref"][k])))
                          for k, t in times.items()}
    case["equal_tol_err"] = {k: bare_error(case, 1.0, k) for k in times}
    case["factor"], case["equal_acc_err"], case["trials"] = {}, {}, {}
    for k in times:
        case["factor"][k], case["equal_acc_err"][k], case["trials"][k] = search(case, k)
    return case


def time_case(case, repeats: int) -> dict:
    """Engine (solve + features of the circuit's probe), the bare run at the engine's
    tolerances and at each grid's equal-accuracy ones, alternated ``repeats`` times after a
    warm-up; medians (s) and step counts (engine, bare at each tolerance)."""
    circ = case["circuit"]
    probe = circ.expectations[0].probe
    factors = {"equal_tol": 1.0}
    factors.update({k: (f if math.isfinite(f) else 1.0) for k, f in case["factor"].items()})

    def bare_at(f):
        return lambda: bare(case["jac"], case["rhs"], case["t_end"], case["rtol"] * f,
                            case["atol"] * f)
    runs = {"engine": lambda: simulate.solve(circ).features(probe, 0)}
    runs.update({k: bare_at(f) for k, f in factors.items()})
    out = {k: [] for k in runs}
    for fn in runs.values():
        fn()
    for _ in range(repeats):
        for key, fn in runs.items():
            start = time.perf_counter()
            fn()
            out[key].append(time.perf_counter() - start)
    return {"seconds": {k: statistics.median(v) for k, v in out.items()},
            "steps": {"engine": simulate.solve(circ).stats(0).steps,
                      **{k: bare_at(f)().t.size - 1 for k, f in factors.items()}}}


def circuits(quick: bool):
    """Ladders of 10-1000 sections and random RC networks (the first seeds whose storage
    nodes have a regular C: a floating capacitor pair with no grounded one makes a DAE)."""
    out = [rc_ladder(n) for n in ((10, 30, 100) if quick else (10, 30, 100, 300, 1000))]
    for n in ((30, 100) if quick else (30, 100, 300)):
        for seed in range(20):
            circ = random_rc(n, seed=seed)
            try:
                hand_network(circ)
            except ValueError:
                continue
            out.append(circ)
            break
    return out


def measure(quick: bool = False) -> list[dict]:
    """One row per circuit: the accuracy search, then the side-by-side timing."""
    rows = []
    for circ in circuits(quick):
        case = prepare(circ)
        case.update(time_case(case, 5 if case["n"] <= 300 else 3))
        rows.append(case)
    return rows


def table(rows: list[dict]) -> str:
    """Markdown table: errors (V), the equal-accuracy tolerance factors, times and ratios."""
    head = ["circuit", "states", "bare J", "engine error V (whole / linear)",
            "bare error at equal tol V", "equal-accuracy factor (whole / linear)",
            "engine ms", "bare ms: equal tol / equal acc. whole / linear",
            "engine / bare: equal tol", "equal acc. whole", "equal acc. linear",
            "steps: engine / bare equal tol / whole / linear"]
    body = []
    for r in rows:
        sec, st, f, ee, eb = (r["seconds"], r["steps"], r["factor"], r["engine_err"],
                              r["equal_tol_err"])
        body.append([r["title"], str(r["n"]), "sparse" if r["sparse"] else "dense",
                     f"{ee['whole']:.1e} / {ee['linear']:.1e}",
                     f"{eb['whole']:.1e} / {eb['linear']:.1e}",
                     f"x{f['whole']:.3g} / x{f['linear']:.3g}",
                     f"{1e3 * sec['engine']:.0f}",
                     " / ".join(f"{1e3 * sec[k]:.0f}" for k in ("equal_tol", "whole", "linear")),
                     *(f"{sec['engine'] / sec[k]:.2f}" for k in ("equal_tol", "whole", "linear")),
                     " / ".join(str(st[k]) for k in ("engine", "equal_tol", "whole", "linear"))])
    out = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    return "\n".join(out + ["| " + " | ".join(b) + " |" for b in body])


#: points of the span table's logarithmic grid (``spans``)
SPAN_POINTS = 4000


def spans(circ) -> str:
    """Markdown table of where the steps go: per decade of time (s) from the pulse to the end
    of the bare run, the engine's accepted steps and the bare run's at the whole grid's
    equal-accuracy factor, and each run's largest error (V) over every capacitor node on
    ``SPAN_POINTS`` log-spaced times (each through its own dense output)."""
    case = prepare(circ)
    sol = simulate.solve(circ)
    f = case["factor"]["whole"]
    f = f if math.isfinite(f) else 1.0
    at, _ = reference(*hand_network(circ)[3:])
    t = np.geomspace(10 * sol.regularisation.post_pulse, case["t_end"], SPAN_POINTS)
    ref = at(t)
    res = bare(case["jac"], case["rhs"], case["t_end"], case["rtol"] * f, case["atol"] * f,
               dense_output=True)
    err_e = np.max(np.abs(engine_values(sol, case["names"], t) - ref), axis=0)
    err_b = np.max(np.abs(res.sol(t) - ref), axis=0)
    s_e = sol.runs[0].s[1:]
    edges = [0.0] + list(10.0 ** np.arange(-12, math.ceil(math.log10(s_e[-1])) + 1))
    out = [f"{circ.title}: bare at x{f:.3g} (whole grid)",
           "| span (s) | engine steps | engine largest error V | bare steps "
           "| bare largest error V |",
           "|---|---|---|---|---|"]
    for a, b in zip(edges[:-1], edges[1:]):
        ne = int(np.sum((s_e > a) & (s_e <= b)))
        nb = int(np.sum((res.t[1:] > a) & (res.t[1:] <= b)))
        inside = (t > a) & (t <= b)
        if ne or nb:
            ee = f"{err_e[inside].max():.1e}" if inside.any() else "-"
            eb = f"{err_b[inside].max():.1e}" if inside.any() else "-"
            out.append(f"| {a:.0e}-{b:.0e} | {ne} | {ee} | {nb} | {eb} |")
    out.append(f"| total | {s_e.size} | {err_e.max():.1e} | {res.t.size - 1} "
               f"| {err_b.max():.1e} |")
    return "\n".join(out)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="smaller sizes")
    parser.add_argument("--spans", metavar="TITLE",
                        help="only the table of steps and errors per decade of time for the "
                             "circuit of this title (e.g. 'random rc 100')")
    args = parser.parse_args(argv)
    warnings.simplefilter("ignore")
    if args.spans:
        print(spans(next(c for c in circuits(args.quick) if c.title == args.spans)))
        return 0
    with open("/proc/loadavg", encoding="ascii") as fh:
        load0 = fh.read().strip()
    rows = measure(args.quick)
    with open("/proc/loadavg", encoding="ascii") as fh:
        load1 = fh.read().strip()
    print(table(rows))
    print(f"\nload at start / end: {load0} / {load1}")
    print("reference check against expm (V): " + ", ".join(
        f"{r['title']} {r['ref_check']:.1e}" for r in rows))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
