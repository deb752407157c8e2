"""The library on a local Dask cluster beside the worker pool, side by side in one run:
``tauproof check circuits/library --no-report`` with ``--jobs 1``, ``--jobs 2`` and
``--cluster local:2`` (interleaved, medians), the start-up cost of each mechanism and the
overhead per task of each (no-op tasks).

    python -m tests.benchmarks.cluster_bench [repeats]
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import time

LIBRARY = "circuits/library"
#: no-op tasks timed for the overhead per task
TASKS = 200


def _wall(args: list[str]) -> tuple[float, int]:
    cmd = [sys.executable, "-m", "harness", "check", LIBRARY, "--no-report", *args]
    start = time.perf_counter()
    code = subprocess.run(cmd, capture_output=True, text=True).returncode
    return time.perf_counter() - start, code


def library(repeats: int) -> dict:
    """Median wall time (s) of each way of running the library, runs interleaved."""
    ways = {"jobs 1": ["--jobs", "1"], "jobs 2": ["--jobs", "2"],
            "local:2": ["--cluster", "local:2"]}
    times: dict[str, list[float]] = {name: [] for name in ways}
    for _ in range(repeats):
        for name, args in ways.items():
            seconds, code = _wall(args)
            assert code == 0, (name, code)
            times[name].append(seconds)
    return {name: statistics.median(t) for name, t in times.items()}


def _noop(x):
    return x


def pool_costs() -> dict:
    """The worker pool: start-up (2 workers, one task each) and overhead per no-op task."""
    from harness.pool import run_tasks
    start = time.perf_counter()
    run_tasks([(0,), (1,)], _noop, jobs=2, timeout=None, on_timeout=None, on_death=None)
    startup = time.perf_counter() - start
    start = time.perf_counter()
    run_tasks([(i,) for i in range(TASKS)], _noop, jobs=2, timeout=None, on_timeout=None,
              on_death=None)
    return {"startup": startup, "per_task": (time.perf_counter() - start) / TASKS}


def dask_costs() -> dict:
    """A local cluster of 2 processes: start-up (cluster, client, engines imported on the
    workers) and overhead per no-op task (submit, run, gather through as_completed)."""
    import logging
    from distributed import Client, LocalCluster, as_completed
    from harness.runner import _preload
    start = time.perf_counter()
    cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                           dashboard_address=None, silence_logs=logging.CRITICAL)
    client = Client(cluster)
    client.run(_preload, True)
    startup = time.perf_counter() - start
    try:
        start = time.perf_counter()
        for future in as_completed([client.submit(_noop, i, pure=False) for i in range(TASKS)]):
            future.result()
        per_task = (time.perf_counter() - start) / TASKS
    finally:
        start = time.perf_counter()
        client.close()
        cluster.close()
        shutdown = time.perf_counter() - start
    return {"startup": startup, "per_task": per_task, "shutdown": shutdown}


def main() -> None:
    repeats = int(sys.argv[1]) if len(sys.argv) > 1 else 1
    walls = library(repeats)
    print(f"library ({repeats} run(s) each, median wall s): " +
          ", ".join(f"{k} {v:.1f}" for k, v in walls.items()))
    print(f"  jobs 1 / local:2 = {walls['jobs 1'] / walls['local:2']:.2f}x, "
          f"jobs 1 / jobs 2 = {walls['jobs 1'] / walls['jobs 2']:.2f}x, "
          f"jobs 2 / local:2 = {walls['jobs 2'] / walls['local:2']:.2f}x")
    pool, dask = pool_costs(), dask_costs()
    print(f"start-up: pool {pool['startup']:.2f} s, local cluster {dask['startup']:.2f} s "
          f"(+ {dask['shutdown']:.2f} s to stop)")
    print(f"overhead per task: pool {pool['per_task'] * 1e3:.2f} ms, "
          f"local cluster {dask['per_task'] * 1e3:.2f} ms")


if __name__ == "__main__":
    main()
