"""Every report with a plot per check against the same run without reports (speed target 1),
side by side in one run, with the HTML page's size.

    python -m tests.benchmarks.plots_bench [--rounds 2] [--print-only]

Runs ``tauproof check circuits/library --jobs 1`` three ways in turn, ``--rounds`` times each:
``--no-report``, every report and plot (the default) and ``--no-plots`` (every report, no
plot); takes each child's wall time and CPU time (user + system from ``os.wait4``) with
/proc/loadavg read just before it, and the size of report.html, of the plots folder and the
plot count.  The ratios are medians over medians.  Then, in this process, the time to draw every
plot of one library result (``report.render_plots``, median of three) per plot.  Writes the
"## Reports and plots" section of RESULTS.md.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from .timing import load_average, publish

RESULTS = Path(__file__).with_name("RESULTS.md")
HEADING = "## Reports and plots"
LIBRARY = "circuits/library"
#: the three ways the library is checked: name -> extra command-line options
WAYS = {"--no-report": ["--no-report"], "reports": [], "--no-plots": ["--no-plots"]}


def one_run(way: str) -> dict:
    """Wall and CPU s, exit code, load before, and the report folder's sizes of one check."""
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1")
    load = load_average()
    with tempfile.TemporaryDirectory() as out:
        cmd = [sys.executable, "-m", "harness.cli", "check", LIBRARY, "--jobs", "1",
               "--report-dir", out, *WAYS[way]]
        start = time.perf_counter()
        proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                                env=env)
        _, status, usage = os.wait4(proc.pid, 0)
        wall = time.perf_counter() - start
        page = Path(out, "report.html")
        plots = list(Path(out, "plots").glob("*")) if Path(out, "plots").is_dir() else []
        text = page.read_text(encoding="utf-8") if page.exists() else ""
        return {"way": way, "wall": wall, "cpu": usage.ru_utime + usage.ru_stime,
                "code": os.waitstatus_to_exitcode(status), "load": load,
                "html": len(text.encode("utf-8")), "inline": text.count('<div class="plot"'),
                "plots": len(plots), "plot_bytes": sum(p.stat().st_size for p in plots)}


def per_plot() -> tuple[int, float]:
    """(plots, median s to draw them all) for one library result, in this process."""
    from harness.report import render_plots
    from harness.runner import RunOptions, run
    result = run([LIBRARY], RunOptions(jobs=1))
    render_plots(result)                                  # imports and first calls
    times = []
    for _ in range(3):
        start = time.perf_counter()
        drawn = render_plots(result)
        times.append(time.perf_counter() - start)
    return len(drawn), statistics.median(times)


def _table(runs: list[dict]) -> list[str]:
    rows = ["| run | way | wall s | CPU s | exit | report.html | plots (files, bytes) | "
            "/proc/loadavg before |", "|---|---|---|---|---|---|---|---|"]
    rows += [f"| {i + 1} | {r['way']} | {r['wall']:.1f} | {r['cpu']:.2f} | {r['code']} | "
             f"{r['html'] / 1e6:.2f} MB | {r['plots']}, {r['plot_bytes'] / 1e6:.2f} MB | "
             f"{r['load']} |" for i, r in enumerate(runs)]
    return rows


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--rounds", type=int, default=2)
    parser.add_argument("--print-only", action="store_true")
    args = parser.parse_args(argv)
    runs = []
    for _ in range(args.rounds):
        for way in WAYS:
            runs.append(one_run(way))
            print(f"[plots] {runs[-1]}", flush=True)
    med = {way: {k: statistics.median(r[k] for r in runs if r["way"] == way)
                 for k in ("wall", "cpu")} for way in WAYS}
    count, drawing = per_plot()
    base = med["--no-report"]
    ratio = {way: (m["cpu"] / base["cpu"], m["wall"] / base["wall"]) for way, m in med.items()}
    full = max((r for r in runs if r["way"] == "reports"), key=lambda r: r["html"])
    text = (f"`python -m tests.benchmarks.plots_bench`: `check circuits/library --jobs 1` with "
            f"`--no-report`, with every report and a plot per check, and with `--no-plots`, in "
            f"turn on this 2-core shared machine (CPU: user + system of the child).\n\n"
            + "\n".join(_table(runs))
            + f"\n\nEvery report and plot / `--no-report`: **CPU {ratio['reports'][0]:.2f}x, "
            f"wall {ratio['reports'][1]:.2f}x**; `--no-plots` / `--no-report`: CPU "
            f"{ratio['--no-plots'][0]:.2f}x, wall {ratio['--no-plots'][1]:.2f}x.  The whole-"
            f"library report.html: **{full['html'] / 1e6:.2f} MB** ({full['inline']} of "
            f"{full['plots']} plots inline).  Drawing the "
            f"{count} plots of one result in this process: {drawing:.2f} s "
            f"({1e3 * drawing / max(count, 1):.1f} ms a plot), load {load_average()} after.")
    return publish(RESULTS, HEADING, text, args.print_only)


if __name__ == "__main__":
    raise SystemExit(main())
