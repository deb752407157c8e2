"""Start-up of a small run and the closed form on small circuits, measured in one run.

    python -m tests.benchmarks.startup_bench [--runs 8] [--print-only]

1. ``python -m harness.cli solve FILE --closed-form-only`` on a small library circuit against a
   bare ``python -c "import numpy, scipy.linalg"``, alternately, ``--runs`` times each: median
   wall time and CPU time (user + system of the child, from wait4) and their ratios.
2. The library circuits with fewer than 10 nodes: median of the closed-form solve plus every
   expectation's features (``closedform_bench.small_circuits``), against 2 ms.
Writes the "## Start-up and small circuits" section of RESULTS.md with /proc/loadavg.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

from .timing import load_average, publish

RESULTS = Path(__file__).with_name("RESULTS.md")
HEADING = "## Start-up and small circuits"
SMALL_FILE = "circuits/library/logger/button-debounce.toml"


def _child(args: list[str]) -> tuple[float, float]:
    """(wall s, CPU s) of one child process."""
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1")
    start = time.perf_counter()
    child = subprocess.Popen([sys.executable, *args], stdout=subprocess.DEVNULL,
                             stderr=subprocess.DEVNULL, env=env)
    _, _, usage = os.wait4(child.pid, 0)
    return time.perf_counter() - start, usage.ru_utime + usage.ru_stime


def startup(runs: int) -> dict:
    bare, solve = [], []
    for _ in range(runs):
        bare.append(_child(["-c", "import numpy, scipy.linalg"]))
        solve.append(_child(["-m", "harness.cli", "solve", SMALL_FILE, "--closed-form-only"]))
    med = {name: tuple(statistics.median(x[i] for x in data) for i in (0, 1))
           for name, data in (("bare", bare), ("solve", solve))}
    return med


def small() -> tuple[float, int, int]:
    from .perf import _library_small
    from .closedform_bench import small_circuits
    totals = sorted(r["total"] for r in small_circuits(_library_small()))
    return statistics.median(totals), sum(t < 2e-3 for t in totals), len(totals)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--runs", type=int, default=8)
    parser.add_argument("--print-only", action="store_true")
    args = parser.parse_args(argv)
    load0 = load_average()
    med = startup(args.runs)
    median, under, count = small()
    (bw, bc), (sw, sc) = med["bare"], med["solve"]
    text = (f"`python -m tests.benchmarks.startup_bench` (load average {load0} / "
            f"{load_average()}; 2 shared cores).\n\n"
            f"| process | median wall s | median CPU s |\n|---|---|---|\n"
            f"| `python -c \"import numpy, scipy.linalg\"` | {bw:.3f} | {bc:.3f} |\n"
            f"| `solve {SMALL_FILE} --closed-form-only` | {sw:.3f} | {sc:.3f} |\n"
            f"| ratio | {sw / bw:.2f} | {sc / bc:.2f} |\n\n"
            f"Target solve <= 1.2x the bare imports: **{'met' if sc / bc <= 1.2 else 'not met'}"
            f"** (CPU ratio {sc / bc:.2f}, {args.runs} runs each, alternating).\n\n"
            f"Small circuits: {count} library circuits with fewer than 10 nodes, closed-form "
            f"solve + every expectation's features: median {1e3 * median:.2f} ms, {under} of "
            f"{count} under 2 ms; target median < 2 ms: "
            f"**{'met' if median < 2e-3 else 'not met'}**.")
    return publish(RESULTS, HEADING, text, args.print_only)


if __name__ == "__main__":
    raise SystemExit(main())
