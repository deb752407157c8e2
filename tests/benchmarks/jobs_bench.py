"""``--jobs 2`` against ``--jobs 1`` on the library, side by side, with the load beside them.

    python -m tests.benchmarks.jobs_bench [--rounds 2] [--reports] [--print-only]

Runs ``tauproof check circuits/library --no-report`` (``--reports``: with the reports and plots)
with --jobs 1 and --jobs 2 alternately, ``--rounds`` times each, and prints every wall time
with /proc/loadavg and ``pool.free_cores()`` read just before the run (how many workers
``--jobs 2`` will start).  The ratio is the median --jobs 1 time over the median --jobs 2 time.
Writes the "## Parallel runs" section of RESULTS.md.
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


def one_run(jobs: int, reports: bool) -> dict:
    """Wall time s and exit code of one library check, with the load and free cores before."""
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", MPLBACKEND="Agg")
    load, free = load_average(), free_cores()
    with tempfile.TemporaryDirectory() as out:
        tail = ["--report-dir", out] if reports else ["--no-report"]
        start = time.perf_counter()
        proc = subprocess.run([sys.executable, "-m", "harness.cli", "check", LIBRARY,
                               "--jobs", str(jobs), *tail], capture_output=True, env=env)
        wall = time.perf_counter() - start
    return {"jobs": jobs, "wall": wall, "code": proc.returncode, "load": load, "free": free}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--rounds", type=int, default=2)
    parser.add_argument("--reports", action="store_true")
    parser.add_argument("--print-only", action="store_true")
    args = parser.parse_args(argv)
    runs = []
    for _ in range(args.rounds):
        for jobs in (1, 2):
            runs.append(one_run(jobs, args.reports))
            print(f"[jobs] {runs[-1]}", flush=True)
    med = {j: statistics.median(r["wall"] for r in runs if r["jobs"] == j) for j in (1, 2)}
    rows = ["| run | --jobs | wall s | exit | /proc/loadavg before | free cores before |",
            "|---|---|---|---|---|---|"]
    rows += [f"| {i + 1} | {r['jobs']} | {r['wall']:.1f} | {r['code']} | {r['load']} | "
             f"{r['free']} |" for i, r in enumerate(runs)]
    what = "with the reports and plots" if args.reports else "`--no-report`"
    text = (f"`python -m tests.benchmarks.jobs_bench{' --reports' if args.reports else ''}`: "
            f"`check circuits/library` {what}, --jobs 1 and 2 alternately on this 2-core "
            f"shared machine.  --jobs 2 starts as many workers as `pool.free_cores()` finds "
            f"(cores in the affinity mask less the other runnable threads); with one free "
            f"core it runs the files in its own process, as --jobs 1 does.\n\n"
            + "\n".join(rows) + f"\n\nMedian --jobs 1 / --jobs 2: **{med[1] / med[2]:.2f}x**.")
    return publish(RESULTS, HEADING, text, args.print_only)


if __name__ == "__main__":
    raise SystemExit(main())
