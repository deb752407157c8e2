"""Library throughput (section 4): ``tauproof check circuits/library`` with --jobs 1 and 2, and
the share of the run spent in plotting and report writing (cProfile of one in-process run)."""

from __future__ import annotations

import cProfile
import pstats
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

LIBRARY = "circuits/library"


def _wall(args: list[str], repeats: int) -> tuple[float, int]:
    """Median wall time in s of the command line, and its last exit code."""
    times, code = [], None
    for _ in range(repeats):
        with tempfile.TemporaryDirectory() as out:
            cmd = [sys.executable, "-m", "harness", "check", LIBRARY, "--report-dir", out] + args
            start = time.perf_counter()
            proc = subprocess.run(cmd, capture_output=True, text=True)
            times.append(time.perf_counter() - start)
            code = proc.returncode
    return statistics.median(times), code


def throughput(repeats: int = 3, extra: tuple[str, ...] = ()) -> dict:
    """Wall times of the library check with 1 and 2 jobs (same run, interleaved medians)."""
    one, code1 = _wall(["--jobs", "1", *extra], repeats)
    two, code2 = _wall(["--jobs", "2", *extra], repeats)
    return {"jobs1": one, "jobs2": two, "speedup": one / two, "exit": (code1, code2),
            "files": len(list(Path(LIBRARY).rglob("*.toml")))}


def _cum(stats: pstats.Stats, needle: str) -> float:
    """Largest cumulative time of a function whose 'file:function' contains ``needle``."""
    best = 0.0
    for (file, _line, name), (_cc, _nc, _tt, ct, _callers) in stats.stats.items():
        if needle in f"{file}:{name}":
            best = max(best, ct)
    return best


def profile_share(extra: tuple[str, ...] = ()) -> dict:
    """cProfile of one --jobs 1 check run in this process: total, reports, plots, engines."""
    from harness import cli
    with tempfile.TemporaryDirectory() as out:
        prof = cProfile.Profile()
        start = time.perf_counter()
        prof.enable()
        cli.main(["check", LIBRARY, "--jobs", "1", "--report-dir", out, *extra])
        prof.disable()
        wall = time.perf_counter() - start
    stats = pstats.Stats(prof)
    total = _cum(stats, "harness/cli.py:main")
    return {"wall": wall, "total": total,
            "reports": _cum(stats, "harness/report/__init__.py:write_all"),
            "plots": _cum(stats, "harness/report/__init__.py:render_plots"),
            "closed_form": _cum(stats, "harness/closedform/solution.py:solve"),
            "numeric": _cum(stats, "harness/simulate/engine.py:solve"),
            "compare": _cum(stats, "harness/compare.py:compare")}


def _plot_one(check):
    from harness.report import plots
    return plots.plot_check(check)


def plots_what_if(numeric: bool) -> dict:
    """Analysis with 1 and 2 jobs and plotting serial vs spread over 2 processes (a what-if
    for the report writer: plots are now rendered one by one in the parent process)."""
    from concurrent.futures import ProcessPoolExecutor
    import multiprocessing as mp

    from harness.report import render_plots
    from harness.runner import RunOptions, run
    t0 = time.perf_counter()
    result = run([LIBRARY], RunOptions(numeric=numeric, jobs=1))
    t1 = time.perf_counter()
    run([LIBRARY], RunOptions(numeric=numeric, jobs=2))
    t2 = time.perf_counter()
    render_plots(result)
    t3 = time.perf_counter()
    checks = [c for f in result.files for c in f.checks]
    with ProcessPoolExecutor(2, mp_context=mp.get_context("fork")) as pool:
        list(pool.map(_plot_one, checks, chunksize=8))
    t4 = time.perf_counter()
    return {"analysis1": t1 - t0, "analysis2": t2 - t1, "plots1": t3 - t2, "plots2": t4 - t3,
            "plots": len(checks)}
