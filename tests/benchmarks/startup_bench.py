"""Start-up of a small run and the closed form on small circuits, measured in one run.

    python -m tests.benchmarks.startup_bench [--runs 8] [--print-only]

1. ``python -m harness.cli solve FILE --closed-form-only`` on a small library circuit against a
   bare ``python -c "import numpy, scipy.linalg"``, alternately, ``--runs`` times each: median
   wall time and CPU time (user + system of the child, from wait4) and their ratios.  Beside
   them, in the same alternation, the ``tauproof`` console script (when installed next to this
   interpreter), the same solve through ``harness.cli.main`` (what the console command adds
   is when the garbage collector runs and an exit without the interpreter's teardown:
   ``cli.command``) and the same solve with the package's
   sources compiled every run.  Every child runs with one BLAS thread and with bytecode caches
   as an installed package has them (pip byte-compiles on install; ``PYTHONDONTWRITEBYTECODE``
   is dropped from the children's environment and one unmeasured run writes the caches); the
   "compiled every run" row runs a copy of ``harness/`` without caches under
   ``PYTHONDONTWRITEBYTECODE=1``, as a checkout without ``__pycache__`` does (numpy and scipy
   keep their installed caches).
2. The library circuits with fewer than 10 nodes: median of the closed-form solve plus every
   expectation's features (``closedform_bench.small_circuits``, wall time), and the median of
   the same in CPU time of this process (robust to other processes on the cores), against 2 ms.
Writes the "## Start-up and small circuits" section of RESULTS.md with /proc/loadavg.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from .timing import load_average, median_time, publish

RESULTS = Path(__file__).with_name("RESULTS.md")
ROOT = Path(__file__).resolve().parents[2]
HEADING = "## Start-up and small circuits"
SMALL_FILE = "circuits/library/logger/button-debounce.toml"
SOLVE = ["solve", SMALL_FILE, "--closed-form-only"]


def _env(**extra: str) -> dict:
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", **extra)
    if "PYTHONDONTWRITEBYTECODE" not in extra:
        env.pop("PYTHONDONTWRITEBYTECODE", None)
    return env


def _child(command: list[str], env: dict, cwd: str | None = None) -> tuple[float, float]:
    """(wall s, CPU s) of one child process."""
    start = time.perf_counter()
    child = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                             env=env, cwd=cwd)
    _, _, usage = os.wait4(child.pid, 0)
    return time.perf_counter() - start, usage.ru_utime + usage.ru_stime


def _children(uncached: Path) -> dict[str, tuple[list[str], dict, str | None]]:
    """name -> (command, environment, folder) of every child measured; ``uncached``: an
    empty folder for the copy of the package without bytecode caches."""
    out = {"bare": ([sys.executable, "-c", "import numpy, scipy.linalg"], _env(), None),
           "solve": ([sys.executable, "-m", "harness.cli", *SOLVE], _env(), None)}
    out["main"] = ([sys.executable, "-c", "import sys, harness.cli; "
                    "sys.exit(harness.cli.main(sys.argv[1:]))", *SOLVE], _env(), None)
    script = shutil.which("tauproof", path=str(Path(sys.executable).parent))
    if script:
        out["script"] = ([script, *SOLVE], _env(), None)
    shutil.copytree(ROOT / "harness", uncached / "harness",
                    ignore=shutil.ignore_patterns("__pycache__"))
    shutil.copy(ROOT / "pyproject.toml", uncached)
    out["uncached"] = ([sys.executable, "-m", "harness.cli", "solve", str(ROOT / SMALL_FILE),
                        "--closed-form-only"], _env(PYTHONDONTWRITEBYTECODE="1"), str(uncached))
    return out


def startup(runs: int) -> dict[str, tuple[float, float]]:
    """name -> (median wall s, median CPU s), the children run alternately."""
    with tempfile.TemporaryDirectory() as uncached:
        children = _children(Path(uncached))
        for child in children.values():       # unmeasured: writes the caches
            _child(*child)
        times: dict[str, list] = {name: [] for name in children}
        for _ in range(runs):
            for name, child in children.items():
                times[name].append(_child(*child))
    return {name: tuple(statistics.median(x[i] for x in data) for i in (0, 1))
            for name, data in times.items()}


def _cpu_median(circ, repeats: int = 15) -> float:
    """Median CPU time (s, this process) of the closed-form solve plus every expectation's
    features of ``circ``, after two unmeasured runs."""
    from harness.closedform import solve

    def run():
        sol = solve(circ)
        for exp in circ.expectations:
            sol.features(exp.probe, circ.events.index(exp.at) if exp.at in circ.events else 0)
    return median_time(run, repeats, warmup=2, clock=time.process_time)


def small() -> tuple[float, int, float, int, int]:
    """(wall median, count under 2 ms, CPU median, count under 2 ms, circuits)."""
    from .perf import _library_small
    from .closedform_bench import small_circuits
    circuits = _library_small()
    walls = [r["total"] for r in small_circuits(circuits)]
    cpus = [_cpu_median(c) for c in circuits]
    return (statistics.median(walls), sum(t < 2e-3 for t in walls), statistics.median(cpus),
            sum(t < 2e-3 for t in cpus), len(circuits))


_ROWS = {"bare": '`python -c "import numpy, scipy.linalg"`',
         "solve": f"`python -m harness.cli solve {SMALL_FILE} --closed-form-only`",
         "main": "the same through `harness.cli.main` (the garbage collector left as Python "
                 "runs it, the usual exit)",
         "script": "the same through the `tauproof` console script",
         "uncached": "`python -m harness.cli solve ...`, sources compiled every run"}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--runs", type=int, default=8)
    parser.add_argument("--print-only", action="store_true")
    args = parser.parse_args(argv)
    load0 = load_average()
    med = startup(args.runs)
    wall, wall_under, cpu, cpu_under, count = small()
    bw, bc = med["bare"]
    rows = "".join(f"| {_ROWS[name]} | {w:.3f} | {c:.3f} | {w / bw:.2f} | {c / bc:.2f} |\n"
                   for name, (w, c) in med.items())
    sc = med["solve"][1]
    text = (f"`python -m tests.benchmarks.startup_bench` (load average {load0} / "
            f"{load_average()}; 2 shared cores; one BLAS thread per child).\n\n"
            f"| process | median wall s | median CPU s | wall ratio | CPU ratio |\n"
            f"|---|---|---|---|---|\n{rows}\n"
            f"Target solve <= 1.2x the bare imports: **{'met' if sc / bc <= 1.2 else 'not met'}"
            f"** (CPU ratio {sc / bc:.2f}, {args.runs} runs each, alternating; bytecode "
            f"cached as installed).\n\n"
            f"Small circuits: {count} library circuits with fewer than 10 nodes, closed-form "
            f"solve + every expectation's features: median {1e3 * cpu:.2f} ms CPU ({cpu_under} "
            f"of {count} under 2 ms), {1e3 * wall:.2f} ms wall ({wall_under} under 2 ms); "
            f"target median < 2 ms: **{'met' if cpu < 2e-3 else 'not met'}** (CPU).")
    return publish(RESULTS, HEADING, text, args.print_only)


if __name__ == "__main__":
    raise SystemExit(main())
