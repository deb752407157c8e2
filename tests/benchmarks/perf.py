"""Run every performance measurement in one go and write the "Performance" section of
tests/benchmarks/RESULTS.md: ``python -m tests.benchmarks.perf [--quick]``.

Other sections of RESULTS.md belong to other benchmarks: the file is read, only the section
headed "## Performance" is replaced, and it is written back at the very end.
"""

from __future__ import annotations

import argparse
import os
import time
from pathlib import Path

from harness.circuitfile import read_circuit

from . import alternatives, closedform_bench as cfb, library_bench
from .timing import cpu_model, growth_exponent, load_average, ms, versions, write_section

RESULTS = Path(__file__).with_name("RESULTS.md")
HEADING = "## Performance"


def _table(header: list[str], rows: list[list[str]]) -> str:
    out = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    out += ["| " + " | ".join(r) + " |" for r in rows]
    return "\n".join(out)


def _ratio(a, b) -> str:
    return f"{a / b:.2f}" if a and b else "—"


def _opt(x) -> str:
    return ms(x) if x else "—"


def section_limits(quick: bool) -> tuple[str, dict]:
    sizes = [10, 30, 100, 300] if quick else [10, 30, 100, 300, 1000, 2000]
    rows = cfb.limits(sizes, sizes, general_up_to=300, reference_up_to=1000)
    body = []
    for r in rows:
        body.append([r["circuit"], str(r["unknowns"]), str(r.get("coords", "—")),
                     ms(r["solve"]), _opt(r.get("limit")), _ratio(r["solve"], r.get("limit")),
                     _opt(r.get("general")), _opt(r.get("eig")), _opt(r.get("qz"))])
    text = _table(["circuit", "MNA unknowns", "capacitor coords", "solve ms", "limit ms",
                   "solve / limit", "general route ms", "dense eig ms", "QZ ms"], body)
    ladders = [r for r in rows if r["circuit"].startswith("rc ladder")]
    randoms = [r for r in rows if r["circuit"].startswith("random")]
    fit = {"ladder": cfb.exponents(ladders, "solve", "unknowns"),
           "ladder_limit": cfb.exponents(ladders, "limit", "unknowns"),
           "random": cfb.exponents(randoms, "solve", "unknowns"),
           "random_limit": cfb.exponents(randoms, "limit", "unknowns")}
    prof = cfb.solve_profile(300 if quick else 1000)
    return text, {"rows": rows, "fit": fit, "profile": prof}


def _library_small() -> list:
    out = []
    for path in sorted(Path("circuits/library").rglob("*.toml")):
        try:
            circ = read_circuit(path)
        except Exception:          # noqa: BLE001 - a file that does not read is not timed
            continue
        if len(circ.nodes) - 1 < 10:
            out.append(circ)
    return out


def section_small() -> tuple[str, dict]:
    rows = cfb.small_circuits(_library_small())
    rows.sort(key=lambda r: r["total"])
    totals = [r["total"] for r in rows]
    med = sorted(totals)[len(totals) // 2] if totals else 0.0
    under = sum(t < 2e-3 for t in totals)
    body = [[r["circuit"][:48], str(r["nodes"]), ms(r["solve"]), ms(r["total"])]
            for r in rows[:: max(1, len(rows) // 12)]]
    text = (f"{len(rows)} library circuits with fewer than 10 nodes: median total (solve + every "
            f"expectation's features) {ms(med)} ms; {under} of {len(rows)} under 2 ms.\n\n"
            + _table(["circuit (every k-th)", "nodes", "solve ms", "total ms"], body))
    return text, {"median": med, "under": under, "count": len(rows)}


def section_features(quick: bool) -> tuple[str, dict]:
    sizes = [10, 30, 100] if quick else [10, 30, 100, 200]
    rows = cfb.feature_cost(sizes)
    p = growth_exponent([r["n"] for r in rows[-3:]], [r["features"] for r in rows[-3:]])
    text = _table(["ladder sections", "features of one probe, ms"],
                  [[str(r["n"]), ms(r["features"])] for r in rows])
    return text + f"\n\nFitted growth exponent (last 3 points): n^{p:.2f}.", {"p": p}


def section_events(quick: bool) -> tuple[str, dict]:
    counts = [1, 10, 100] if quick else [1, 10, 100, 1000]
    rows = cfb.event_scaling(counts)
    p_lad = growth_exponent([r["events"] for r in rows[1:]], [r["ladder"] for r in rows[1:]])
    p_sw = growth_exponent([r["events"] for r in rows[1:]], [r["switched"] for r in rows[1:]])
    text = _table(["events", "10-section ladder, solve ms", "switched RC, solve ms",
                   "per event (switched), ms"],
                  [[str(r["events"]), ms(r["ladder"]), ms(r["switched"]),
                    ms(r["switched"] / r["events"])] for r in rows])
    return (text + f"\n\nFitted exponents (10 … max events): ladder m^{p_lad:.2f}, switched "
            f"m^{p_sw:.2f}.", {"ladder": p_lad, "switched": p_sw})


def section_library(quick: bool) -> tuple[str, dict]:
    res = library_bench.throughput(repeats=1 if quick else 2)
    share = library_bench.profile_share()
    lines = [f"{res['files']} files.  Wall time (median of {1 if quick else 2}, subprocess, "
             f"reports written): --jobs 1 {res['jobs1']:.2f} s, --jobs 2 {res['jobs2']:.2f} s, "
             f"speed-up {res['speedup']:.2f}x (exit codes {res['exit']}).",
             "",
             f"cProfile of one in-process --jobs 1 run ({share['total']:.2f} s under the "
             f"profiler): closed form {share['closed_form']:.2f} s "
             f"({100 * share['closed_form'] / share['total']:.0f} %), numeric "
             f"{share['numeric']:.2f} s ({100 * share['numeric'] / share['total']:.0f} %), "
             f"report writing {share['reports']:.2f} s "
             f"({100 * share['reports'] / share['total']:.0f} %) of which plotting "
             f"{share['plots']:.2f} s ({100 * share['plots'] / share['total']:.0f} %)."]
    wi = library_bench.plots_what_if(numeric=True)
    lines += ["", f"Breakdown (in-process, this run): analysis alone --jobs 1 {wi['analysis1']:.2f} s, "
              f"--jobs 2 {wi['analysis2']:.2f} s ({wi['analysis1'] / wi['analysis2']:.2f}x); "
              f"the {wi['plots']} plots one by one {wi['plots1']:.2f} s "
              f"({1e3 * wi['plots1'] / max(wi['plots'], 1):.0f} ms each), spread over 2 "
              f"processes {wi['plots2']:.2f} s ({wi['plots1'] / wi['plots2']:.2f}x)."]
    return "\n".join(lines), {"throughput": res, "share": share, "what_if": wi}


def section_threads() -> tuple[str, dict]:
    from . import threads_bench
    res = threads_bench.compare()
    cases = list(res.get("1 thread", {}))
    body = [[c, ms(res["1 thread"][c]), ms(res["default"].get(c, 0.0)),
             _ratio(res["default"].get(c), res["1 thread"][c])] for c in cases]
    return _table(["case", "OPENBLAS_NUM_THREADS=1, ms", "default threads, ms",
                   "default / 1"], body), res


def section_alternatives(quick: bool) -> tuple[str, dict]:
    rows = alternatives.compare([1, 2, 3] if quick else [1, 2, 3, 5, 10], 20.0)
    body = []
    for r in rows:
        body.append([str(r["n"]), ms(r["engine"]), ms(r["signal"]),
                     f"{r['sympy']:.2f} s" if r["sympy"] else "> 20 s (stopped)",
                     _ratio(r["engine"], r["signal"]),
                     _ratio(r["sympy"], r["engine"]) if r["sympy"] else "—",
                     f"{r['max_dev']:.1e}"])
    text = _table(["ladder sections", "engine ms", "scipy.signal ms", "sympy dsolve",
                   "engine / signal", "sympy / engine", "max |engine - signal| V"], body)
    text += "\n\nWhere the hand scripts give up (measured in the same run):\n\n"
    text += "\n".join(f"- **{what}**: {how}" for what, how in alternatives.where_they_give_up())
    return text, {"rows": rows}


def _write_section(text: str) -> None:
    """Replace (or append) the Performance section of RESULTS.md, keeping every other one."""
    write_section(RESULTS, HEADING, text)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--quick", action="store_true", help="smaller sizes, fewer repeats")
    parser.add_argument("--only", nargs="*", default=None,
                        help="sections: threads limits small features events numeric library alt")
    parser.add_argument("--print-only", action="store_true",
                        help="print the tables without rewriting RESULTS.md")
    args = parser.parse_args(argv)
    want = set(args.only) if args.only else {"threads", "limits", "small", "features",
                                              "events", "numeric", "library", "alt"}
    started = time.perf_counter()
    load0 = load_average()
    parts: dict[str, tuple[str, dict]] = {}
    steps = [("threads", section_threads), ("limits", lambda: section_limits(args.quick)), ("small", section_small),
             ("features", lambda: section_features(args.quick)),
             ("events", lambda: section_events(args.quick)),
             ("numeric", lambda: numeric_section(args.quick)),
             ("library", lambda: section_library(args.quick)),
             ("alt", lambda: section_alternatives(args.quick))]
    for name, fn in steps:
        if name in want:
            print(f"[perf] {name} ...", flush=True)
            parts[name] = fn()
    from .report_text import compose
    text = compose(parts, {"cpu": cpu_model(), "versions": versions(), "load": (load0,
                   load_average()), "seconds": time.perf_counter() - started,
                   "threads": os.environ.get("OPENBLAS_NUM_THREADS", "default")})
    if not args.print_only:
        _write_section(text)
    print(text)
    return 0


def numeric_section(quick: bool):
    from . import numeric_bench
    return numeric_bench.section(quick)


if __name__ == "__main__":
    raise SystemExit(main())
