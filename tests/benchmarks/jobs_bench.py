"""``--jobs 2`` against ``--jobs 1`` on the library, side by side, with the load beside them.

    python -m tests.benchmarks.jobs_bench [--rounds 2] [--reports] [--tail] [--print-only]

Runs ``tauproof check circuits/library --no-report`` (``--reports``: with the reports and plots)
with --jobs 1 and --jobs 2 alternately, ``--rounds`` times each, and prints every wall time
with /proc/loadavg and ``pool.free_cores()`` read just before the run (how many workers
``--jobs 2`` will start).  The ratio is the median --jobs 1 time over the median --jobs 2 time.
Writes the "## Parallel runs" section of RESULTS.md.

``--tail`` also gives each run's work after the last file returned (the reports, the console
text, the exit): the parent's CPU and wall seconds from ``runner.run``'s return to the end, and
the CPU of its child processes (workers, a pool drawing plots); the command line runs through
``python -c`` with ``runner.run`` wrapped to read the clocks (figures a loaded machine does not
distort as it does the wall times).  With ``--tail --force-workers`` ``pool.free_cores``
answers 2, so --jobs 2 runs its workers however busy the machine is.
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

from harness.pool import free_cores

from .timing import load_average, publish

RESULTS = Path(__file__).with_name("RESULTS.md")
HEADING = "## Parallel runs"
LIBRARY = "circuits/library"


#: the command line with clocks read when ``runner.run`` returns and at exit (``--tail``):
#: prints ``TAIL <parent CPU after> <wall after> <children's CPU>`` on stderr
_TIMED = r"""
import atexit, resource, sys, time
import harness.pool as pool, harness.runner as runner
if {force}:
    pool.free_cores = lambda: 2
marks = {{}}
run = runner.run
def timed(*args, **kwargs):
    result = run(*args, **kwargs)
    marks.update(cpu=time.process_time(), wall=time.perf_counter())
    return result
runner.run = timed
def report():
    done = resource.getrusage(resource.RUSAGE_CHILDREN)
    sys.stderr.write("TAIL %.4f %.4f %.4f\n" % (time.process_time() - marks["cpu"],
                     time.perf_counter() - marks["wall"], done.ru_utime + done.ru_stime))
atexit.register(report)
import harness.cli as cli
sys.exit(cli.main(sys.argv[1:]))
"""


def one_run(jobs: int, reports: bool, tail: bool = False, force: bool = False) -> dict:
    """Wall time s and exit code of one library check, with the load and free cores before
    (``tail``: also the parent's CPU and wall after the files and its children's CPU)."""
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", MPLBACKEND="Agg")
    load, free = load_average(), free_cores()
    command = ["-c", _TIMED.format(force=force)] if tail else ["-m", "harness.cli"]
    with tempfile.TemporaryDirectory() as out:
        rest = ["--report-dir", out] if reports else ["--no-report"]
        start = time.perf_counter()
        proc = subprocess.run([sys.executable, *command, "check", LIBRARY,
                               "--jobs", str(jobs), *rest], capture_output=True, env=env)
        wall = time.perf_counter() - start
    out = {"jobs": jobs, "wall": wall, "code": proc.returncode, "load": load, "free": free}
    if tail:
        line = [ln for ln in proc.stderr.decode().splitlines() if ln.startswith("TAIL ")][-1]
        out.update(zip(("after_cpu", "after_wall", "children_cpu"), map(float, line.split()[1:])))
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--rounds", type=int, default=2)
    parser.add_argument("--reports", action="store_true")
    parser.add_argument("--tail", action="store_true")
    parser.add_argument("--force-workers", action="store_true")
    parser.add_argument("--print-only", action="store_true")
    args = parser.parse_args(argv)
    runs = []
    for _ in range(args.rounds):
        for jobs in (1, 2):
            runs.append(one_run(jobs, args.reports, args.tail, args.force_workers))
            print(f"[jobs] {runs[-1]}", flush=True)
    med = {j: statistics.median(r["wall"] for r in runs if r["jobs"] == j) for j in (1, 2)}
    rows = _rows(runs, args.tail)
    what = "with the reports and plots" if args.reports else "`--no-report`"
    flags = "".join(f" --{name}" for name, on in (("reports", args.reports), ("tail", args.tail),
                                                   ("force-workers", args.force_workers)) if on)
    text = (f"`python -m tests.benchmarks.jobs_bench{flags}`: "
            f"`check circuits/library` {what}, --jobs 1 and 2 alternately on this 2-core "
            f"shared machine.  --jobs 2 starts as many workers as `pool.free_cores()` finds "
            f"(cores in the affinity mask less the other runnable threads); with one free "
            f"core it runs the files in its own process, as --jobs 1 does.\n\n"
            + "\n".join(rows) + f"\n\nMedian --jobs 1 / --jobs 2: **{med[1] / med[2]:.2f}x**.")
    if args.tail:
        after = {j: statistics.median(r["after_cpu"] for r in runs if r["jobs"] == j)
                 for j in (1, 2)}
        text += (f"  Median parent CPU after the files: --jobs 1 {after[1]:.2f} s, --jobs 2 "
                 f"{after[2]:.2f} s" + ("; `pool.free_cores` forced to 2." if args.force_workers
                                        else "."))
    return publish(RESULTS, HEADING, text, args.print_only)


def _rows(runs: list[dict], tail: bool) -> list[str]:
    """The table of the runs (``tail``: with the work after the files)."""
    extra = " parent CPU after the files s | wall after the files s | children CPU s |" \
        if tail else ""
    rows = ["| run | --jobs | wall s | exit | /proc/loadavg before | free cores before |" + extra,
            "|---|---|---|---|---|---|" + "---|---|---|" * tail]
    for i, r in enumerate(runs):
        cells = f" {r['after_cpu']:.2f} | {r['after_wall']:.2f} | {r['children_cpu']:.2f} |" \
            if tail else ""
        rows.append(f"| {i + 1} | {r['jobs']} | {r['wall']:.1f} | {r['code']} | {r['load']} | "
                    f"{r['free']} |" + cells)
    return rows


if __name__ == "__main__":
    raise SystemExit(main())
