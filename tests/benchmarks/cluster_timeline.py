"""A timeline of one ``tauproof check circuits/library --no-report --cluster local:2`` run, run
as the console command runs it (``harness.cli.command``) in a child process, time-stamped on
the system's monotonic clock (``time.perf_counter``, one clock for every process on Linux):

* the client's phases: the engines imported, Dask imported and the cluster asked for, the
  client connected, files handed out, each worker's preload, results, the close, the exit;
* each worker: its first task's start, its last task's end, time busy, the gaps between its
  tasks (mean, largest), its last tasks;
* the end of the run: when each worker's last task ended, and how the files' measured
  durations would have been spread over two workers in collection order (the worker pool),
  largest file first (the cluster's order once) and longest first by the measured
  durations themselves (the best an estimate could do), one file at a time per worker
  (list scheduling) and with the next file held behind the one running
  (``cluster.LOCAL_SATURATION``).

    python -m tests.benchmarks.cluster_timeline [FOLDER]      (default circuits/library)
"""

from __future__ import annotations

import heapq
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

LIBRARY = "circuits/library"

#: run in the child: the command with stamps added around its phases and in the workers
_CHILD = r"""
import json, os, sys, time
stamps = sys.argv[1]
def stamp(what, **more):
    with open(os.path.join(stamps, str(os.getpid())), "a") as out:
        out.write(json.dumps({"t": time.perf_counter(), "what": what, **more}) + "\n")
import harness.cli as cli
from harness import cluster, runner
def around(owner, name, label):
    inner = getattr(owner, name)
    def wrapped(*args, **kwargs):
        stamp(label + " begins")
        try:
            return inner(*args, **kwargs)
        finally:
            stamp(label + " ends")
    setattr(owner, name, wrapped)
checked = runner.check_file          # forked workers inherit the wrapper
def check_file(path, *args, **kwargs):
    stamp("task begins", path=path)
    try:
        return checked(path, *args, **kwargs)
    finally:
        stamp("task ends", path=path)
runner.check_file = check_file
around(cli, "_import_engines", "engines' import")
around(cluster, "_start", "cluster start (thread)")
around(cluster, "_close", "close (thread)")
around(cluster, "dask_setup", "worker preload")
around(cluster, "_gather", "gather")
collect = cluster._Run.collect
def collected(run, block=False):
    before = len(run.done)
    found = collect(run, block)
    for _ in range(len(run.done) - before):
        stamp("result")
    return found
cluster._Run.collect = collected
submit = cluster._Run._submit
def submitted(run, path, plan):
    stamp("handed out")
    return submit(run, path, plan)
cluster._Run._submit = submitted
sys.argv = ["tauproof", "check", sys.argv[2], "--no-report", "--cluster", "local:2"]
stamp("command begins")
code = cli.command()
stamp("command ends")
sys.exit(code)
"""


def run(folder: str) -> tuple[list[dict], float, float, int]:
    """(every stamp with its process id, sorted; the child's spawn and end; the child's id)."""
    with tempfile.TemporaryDirectory() as stamps:
        began = time.perf_counter()
        child = subprocess.run([sys.executable, "-c", _CHILD, stamps, folder],
                               capture_output=True, text=True)
        ended = time.perf_counter()
        assert child.returncode == 0, child.stderr
        rows = []
        for name in os.listdir(stamps):
            with open(os.path.join(stamps, name), encoding="utf-8") as handle:
                rows += [dict(json.loads(line), pid=int(name)) for line in handle]
    client = min(rows, key=lambda r: r["t"])["pid"]
    return sorted(rows, key=lambda r: r["t"]), began, ended, client


def tasks(rows: list[dict]) -> dict[int, list[tuple[float, float, str]]]:
    """Worker id -> its tasks as (start, end, file), in order."""
    open_, out = {}, {}
    for r in rows:
        if r["what"] == "task begins":
            open_[r["pid"]] = r
        elif r["what"] == "task ends":
            start = open_.pop(r["pid"])
            out.setdefault(r["pid"], []).append((start["t"], r["t"], r["path"]))
    return out


def spread(order: list[str], cost: dict[str, float], held: bool, workers: int = 2) -> float:
    """When the last of two workers ends, files taken in ``order``: each file to the worker
    that is free first (``held`` False), or, holding the next file behind the one running,
    each file to the worker that has just finished one, queued behind the one it starts."""
    order = list(order)
    queues = [[order.pop(0)] for _ in range(workers) if order]
    if held:
        for queue in queues:
            if order:
                queue.append(order.pop(0))
    events = [(0.0, w) for w in range(len(queues))]
    ends = [0.0] * len(queues)
    while events:
        now, w = heapq.heappop(events)
        ends[w] = now
        if held and order and now > 0:
            queues[w].append(order.pop(0))
        elif not held and order and not queues[w]:
            queues[w].append(order.pop(0))
        if queues[w]:
            heapq.heappush(events, (now + cost[queues[w].pop(0)], w))
    return max(ends)


def main() -> None:
    with open("/proc/loadavg", encoding="utf-8") as handle:
        load = handle.read().split()[0]
    folder = sys.argv[1] if len(sys.argv) > 1 else LIBRARY
    rows, began, ended, client = run(folder)
    print(f"one local:2 run, {folder}, load average {load}; seconds from the child's spawn")
    for r in rows:
        if r["pid"] == client and r["what"] not in ("result", "handed out"):
            print(f"  {r['t'] - began:7.3f}  client: {r['what']}")
        elif r["what"].startswith("worker preload"):
            print(f"  {r['t'] - began:7.3f}  worker {r['pid']}: {r['what']}")
    for what in ("handed out", "result"):
        times = [r["t"] - began for r in rows if r["what"] == what]
        print(f"  {what}: {len(times)}, first {times[0]:.3f}, last {times[-1]:.3f}")
    print(f"  {ended - began:7.3f}  the child has exited")
    by_worker = tasks(rows)
    for pid, done in by_worker.items():
        gaps = [b[0] - a[1] for a, b in zip(done, done[1:])]
        print(f"worker {pid}: {len(done)} files, first begins {done[0][0] - began:.3f}, last "
              f"ends {done[-1][1] - began:.3f}, busy {sum(b - a for a, b, _ in done):.3f} s; "
              f"gaps between files: mean {1e3 * sum(gaps) / max(1, len(gaps)):.1f} ms, "
              f"largest {1e3 * max(gaps, default=0):.1f} ms, in all {sum(gaps):.3f} s")
        print("  last: " + ", ".join(f"{Path(p).name} {a - began:.3f}-{b - began:.3f}"
                                     for a, b, p in done[-2:]))
    cost = {p: b - a for done in by_worker.values() for a, b, p in done}
    files = sorted(cost)
    orders = {"collection order (the pool)": files,
              "largest file first (the cluster)": sorted(files,
                                                         key=lambda f: -os.path.getsize(f)),
              "longest first by measured time": sorted(files, key=lambda f: -cost[f])}
    print(f"the files' measured durations ({sum(cost.values()):.3f} s, half "
          f"{sum(cost.values()) / 2:.3f} s) spread over 2 workers, last end:")
    for name, order in orders.items():
        print(f"  {name}: one at a time {spread(order, cost, False):.3f} s, next file held "
              f"{spread(order, cost, True):.3f} s")


if __name__ == "__main__":
    main()
