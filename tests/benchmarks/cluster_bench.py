"""A local Dask cluster beside the worker pool, side by side in one run, with the machine's load
(1-minute load average from /proc/loadavg) read beside every figure:

* the library: ``tauproof check circuits/library --no-report`` with ``--jobs 1``, ``--jobs 2``
  and ``--cluster local:2``, ``local:2`` as it ran before this round (``as_before``: Dask
  imported and the cluster started with the collector on, the start waiting for every
  worker, the close waited for), and ``local:2`` with each worker holding only the file it
  runs and Dask's memory and system monitors at their defaults (``_ONE_HELD``, an earlier
  before), interleaved,
  medians of the wall time and of the CPU time of every process of the run (the command and
  the workers it waited for);
* what a running ``local:2`` cluster costs beside its tasks, as it runs now and as ``_ONE_HELD``
  (``background``): CPU per second of its processes idle, and over tasks of 10 ms returning
  ~140 kB (a library file's result, on average) the CPU per task of the client's process
  (scheduler, nannies, client) and of the workers beyond the task, and how long a worker sits
  between two tasks;
* the local cluster's fixed costs, each in a fresh process so imports count, before this
  round (``as_before``) and now: importing Dask's client once the engines are imported as the
  console command imports them, starting until a first task's result is back, stopping; the
  overhead per task (no-op tasks), results fetched one by one by the caller (before) and by
  the client's event loop (now); the pool's start-up and overhead beside them, and the ratio
  they predict for the library on an idle machine;
* what a worker's death and a task over its time limit cost each (time until a no-op task
  behind it has run);
* a 10⁶-sample Monte Carlo (the library's reset-delay tolerance file with 1,000,000 samples:
  four pieces on the batched route) in this process, then on a running local cluster of 1 and
  of 2 workers (start-up excluded), with the numerical engine at the corners in tasks of their
  own (now) and inside the file's own task (before), and what its parts cost;
* the exact engine's cost per sample (the same file with a second storage part), for the
  estimate on paper in RESULTS.md.

    python -m tests.benchmarks.cluster_bench [repeats]
"""

from __future__ import annotations

import contextlib
import copy
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

LIBRARY = "circuits/library"
RESET = Path(LIBRARY) / "tolerance" / "reset-delay-spread.toml"
#: no-op tasks timed for the overhead per task
TASKS = 200
MC_SAMPLES = 1_000_000
#: a second storage part on the reset pin: every sample is an exact solve
SECOND_STAGE = ('R2 = { kind = "resistor", nodes = ["rst", "pin"], value = "1k", spread = "F" }\n'
                'C2 = { kind = "capacitor", nodes = ["pin", "gnd"], value = "100n", '
                'spread = "K" }\n[[expect]]')


def load() -> float:
    """The 1-minute load average."""
    with open("/proc/loadavg", encoding="utf-8") as handle:
        return float(handle.read().split()[0])


def as_before() -> None:
    """``--cluster local:N`` as it ran before the collector was paused, the workers were no
    longer awaited and the close moved behind: Dask imported and the cluster started with the
    collector on, the cluster's start waiting for all N workers (the nannies' 50-ms look
    included), the client waiting for the close."""
    import logging
    from harness import cluster

    @contextlib.contextmanager
    def collector_on():
        yield lambda: None

    def waited(address: str, numeric: bool):
        from distributed import Client, LocalCluster
        cluster._versions_read()
        local = LocalCluster(n_workers=int(address[len(cluster.LOCAL):]), threads_per_worker=1,
                             processes=True, dashboard_address=None,
                             scheduler_kwargs={"dashboard_address": ":0"},
                             silence_logs=logging.CRITICAL, preload=["harness.cluster"])
        return Client(local, timeout=cluster.CONNECT_TIMEOUT), local

    def close_now(starter, client, local) -> None:
        cluster._close(client, local)

    cluster._collector_paused = collector_on
    cluster._start = waited
    cluster._close_behind = close_now


#: ``tauproof check`` (the console command, ``harness.cli.command``) as ``as_before`` runs it
_WAITED = ("import sys, harness.cli; from tests.benchmarks.cluster_bench import as_before; "
           "as_before(); sys.exit(harness.cli.command())")


#: the Dask settings ``--cluster local:N`` ran with before its workers held a file queued
#: behind the one they run and its memory and system monitors were slowed
_SLOWED = ("distributed.worker.memory.monitor-interval",
           "distributed.admin.system-monitor.interval")

#: ``tauproof check`` on the local cluster with each worker holding only the file it runs and
#: Dask's memory and system monitors at their defaults (the rest as now)
_ONE_HELD = ("import sys, harness.cli; from harness import cluster; "
             f"[cluster.QUIET_LOOPS.pop(k) for k in {_SLOWED!r}]; cluster.LOCAL_SATURATION = 1.0; "
             "sys.exit(harness.cli.main(sys.argv[1:]))")


def _wall(args: list[str], head: str | None = None) -> tuple[float, float, int]:
    """(wall s, CPU s of the command and every process it waited for, exit code); ``head``:
    code run in place of the command's module (``_WAITED``, ``_ONE_HELD``)."""
    import resource
    head = ["-c", head] if head else ["-m", "harness"]
    cmd = [sys.executable, *head, "check", LIBRARY, "--no-report", *args]
    used = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    code = subprocess.run(cmd, capture_output=True, text=True).returncode
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, (after.ru_utime + after.ru_stime) - (used.ru_utime + used.ru_stime), code


def library(repeats: int) -> tuple[dict, dict, list[float]]:
    """Median wall time and CPU time (s) of each way of running the library, runs interleaved
    (``local:2 waited``: the console command with ``as_before``; ``local:2 one held``:
    ``_ONE_HELD``, an earlier before); the load average before each run."""
    ways = {"jobs 1": ["--jobs", "1"], "jobs 2": ["--jobs", "2"],
            "local:2": ["--cluster", "local:2"], "local:2 waited": ["--cluster", "local:2"],
            "local:2 one held": ["--cluster", "local:2"]}
    heads = {"local:2 one held": _ONE_HELD, "local:2 waited": _WAITED}
    times: dict[str, list[float]] = {name: [] for name in ways}
    cpu: dict[str, list[float]] = {name: [] for name in ways}
    loads = []
    for _ in range(repeats):
        for name, args in ways.items():
            loads.append(load())
            seconds, used, code = _wall(args, heads.get(name))
            assert code == 0, (name, code)
            times[name].append(seconds)
            cpu[name].append(used)
    return ({name: statistics.median(t) for name, t in times.items()},
            {name: statistics.median(t) for name, t in cpu.items()}, loads)


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


#: the code a fresh process runs for ``fixed_costs`` (prints the figures as JSON): the engines
#: imported as the console command imports them (``cli._import_engines``), then Dask's import,
#: the start until a no-op task's result is back (files flowing), and the stop
_FIXED = """
import gc, json, sys, time
import harness.cli
from harness import cluster
harness.cli._import_engines()
if sys.argv[1] == "before":
    from tests.benchmarks.cluster_bench import as_before
    as_before()
began = time.perf_counter()
with cluster._collector_paused():
    import distributed
imported = time.perf_counter() - began
began = time.perf_counter()
with cluster._connect("local:2", True) as ready:
    ready().submit(len, [], pure=False).result()
    started = time.perf_counter() - began
    began = time.perf_counter()
stopped = time.perf_counter() - began
print(json.dumps({"import": imported, "start": started, "stop": stopped, "ended": began}),
      flush=True)
gc.freeze()                 # as the console command leaves (``harness.cli.command``)
"""


def fixed_costs(way: str) -> dict:
    """Seconds to import Dask's client (the engines already imported), to start a local cluster
    of 2 workers until a first task's result is back, to stop it (the client's wait), and from
    the results in hand to the process's end (``exit``: the stop wherever it is waited for,
    and the interpreter's exit); ``way`` "before" (``as_before``) or "now"; in a fresh
    process (``time.perf_counter`` is the system's monotonic clock, one for both processes)."""
    import json
    out = subprocess.run([sys.executable, "-c", _FIXED, way], capture_output=True, text=True,
                         check=True).stdout
    ended = time.perf_counter()
    got = json.loads(out.strip().splitlines()[-1])
    got["exit"] = ended - got.pop("ended")
    return got


#: fresh processes per way for the fixed costs (each under a second)
FIXED_RUNS = 5


def fixed_medians() -> dict:
    """``fixed_costs`` of each way, ``FIXED_RUNS`` fresh processes each, interleaved: medians."""
    runs: dict = {"before": [], "now": []}
    for _ in range(FIXED_RUNS):
        for way, got in runs.items():
            got.append(fixed_costs(way))
    return {way: {what: statistics.median(r[what] for r in got) for what in got[0]}
            for way, got in runs.items()}


def _ready(started, workers: int = 2):
    """The client of a cluster ``cluster._connect`` started, once its workers have joined."""
    client = started()
    client.wait_for_workers(workers)
    return client


def dask_per_task() -> dict:
    """Overhead per no-op task on a running ``local:2`` cluster (submit, run, result): each
    result fetched by the caller (before) and by the client's event loop (now)."""
    from distributed import as_completed
    from harness import cluster
    out = {}
    with cluster._connect("local:2", True) as ready:
        client = _ready(ready)
        start = time.perf_counter()
        for future in as_completed([client.submit(_noop, i, pure=False) for i in range(TASKS)]):
            future.result()
        out["before"] = (time.perf_counter() - start) / TASKS
        start = time.perf_counter()
        for _ in as_completed([client.submit(_noop, i, pure=False) for i in range(TASKS)],
                              with_results=True):
            pass
        out["now"] = (time.perf_counter() - start) / TASKS
    return out


@contextlib.contextmanager
def _one_held(on: bool):
    """``--cluster local:N`` as ``_ONE_HELD`` runs it while ``on``, as now otherwise."""
    from harness import cluster
    saved, saturation = dict(cluster.QUIET_LOOPS), cluster.LOCAL_SATURATION
    if on:
        for key in _SLOWED:
            cluster.QUIET_LOOPS.pop(key)
        cluster.LOCAL_SATURATION = 1.0
    try:
        yield
    finally:
        cluster.QUIET_LOOPS.update(saved)
        cluster.LOCAL_SATURATION = saturation


def _process_cpu() -> float:
    """CPU seconds of the process running this (all its threads)."""
    return time.process_time()


def _result_like(i: int) -> tuple:
    """A task of 10 ms of its thread's CPU returning ~140 kB, as a library file's result does
    on average (6.8 MB pickled over 49 files): (its process, when it began and ended on the
    system's monotonic clock, the values)."""
    import os
    began, used = time.perf_counter(), time.thread_time()
    while time.thread_time() - used < 0.01:
        pass
    return os.getpid(), began, time.perf_counter(), [float(k) for k in range(17_000)]


def _gaps(stamps: list) -> list[float]:
    """Seconds each worker sat between the end of a task and the start of its next."""
    runs: dict = {}
    for pid, began, ended, _ in stamps:
        runs.setdefault(pid, []).append((began, ended))
    return [after[0] - before[1] for times in runs.values()
            for before, after in zip(sorted(times), sorted(times)[1:])]


#: seconds a running cluster is left idle in ``background``
IDLE = 4.0


def background(repeats: int) -> dict:
    """A running ``local:2`` cluster beside its tasks, "now" and "one held" (``_one_held``)
    interleaved, medians: CPU ms per second of the client's process and of the workers while
    idle; over ``TASKS`` tasks (``_result_like``) CPU ms per task of the client's process and
    of the workers beyond the task's 10 ms, and the mean ms a worker sat between two tasks."""
    from distributed import as_completed
    from harness import cluster
    got: dict = {}
    for _ in range(repeats):
        for way in ("now", "one held"):
            with _one_held(way == "one held"), cluster._connect("local:2", True) as ready:
                client = _ready(ready)

                def workers() -> float:
                    return sum(client.run(_process_cpu).values())
                time.sleep(1.0)      # the workers' start-up over
                here, there = time.process_time(), workers()
                time.sleep(IDLE)
                figures = [(time.process_time() - here) / IDLE * 1e3,
                           (workers() - there) / IDLE * 1e3]
                here, there = time.process_time(), workers()
                stamps = [stamp for _, stamp in as_completed(
                    [client.submit(_result_like, i, pure=False) for i in range(TASKS)],
                    with_results=True)]
                figures += [(time.process_time() - here) / TASKS * 1e3,
                            (workers() - there) / TASKS * 1e3 - 10.0,
                            statistics.mean(_gaps(stamps)) * 1e3]
            got.setdefault(way, []).append(figures)
    return {way: [statistics.median(column) for column in zip(*rows)]
            for way, rows in got.items()}


def _fault(kind):
    """A task that kills its worker process (``die``), sleeps past any limit (``sleep``) or
    returns at once."""
    import os
    if kind == "die":
        os._exit(3)
    if kind == "sleep":
        time.sleep(60)
    return kind


#: the time limit (s) of the task that sleeps
LIMIT = 0.5


def pool_faults() -> dict:
    """One worker: a task that dies, then a no-op (the pool forks a new worker); a task over
    ``LIMIT``, then a no-op (the pool kills the late worker and forks another).  Seconds beyond
    the limit."""
    from harness.pool import run_tasks
    out = {}
    for kind, limit in (("die", None), ("sleep", LIMIT)):
        start = time.perf_counter()
        run_tasks([(kind,), ("ok",)], _fault, jobs=1, timeout=limit, on_timeout=lambda i: None,
                  on_death=lambda i, how: None)
        out[kind] = time.perf_counter() - start - (limit or 0.0)
    return out


def dask_faults() -> dict:
    """The same on a ``local:1`` cluster as ``--cluster`` runs it: the dying task is retried
    up to the death bound (each death a worker restart) before it is given up; the late task is
    cancelled and its worker restarted (``cluster._Run.expire``).  Seconds per death, and
    beyond the limit."""
    from harness import cluster, clusterparts
    from harness.runner import RunOptions
    out = {}
    with cluster._connect("local:1", True) as ready:
        client = _ready(ready, 1)
        start = time.perf_counter()
        dying = client.submit(_fault, "die", pure=False)
        with contextlib.suppress(Exception):     # KilledWorker past the death bound
            dying.result()
        client.submit(_fault, "ok", pure=False).result()
        out["die"] = (time.perf_counter() - start) / (cluster.LOCAL_ALLOWED_FAILURES + 1)
        start = time.perf_counter()
        files = ["sleep", "ok"]
        cluster._gather(client, files, RunOptions(timeout=LIMIT), [], _late,
                        [clusterparts.plan(f, None, True) for f in files])
        client.submit(_fault, "ok", pure=False).result()   # the restarted worker is back
        out["sleep"] = time.perf_counter() - start - LIMIT
    return out


def _late(path, numeric, tolerance):
    """``cluster``'s task for the fault measurement: ``path`` names the behaviour."""
    from harness.runner import _error_result
    _fault(path)
    return _error_result(path, "done")


def _variant(folder: Path, samples: int, second_stage: bool = False) -> Path:
    text = RESET.read_text(encoding="utf-8").replace("samples = 10000", f"samples = {samples}")
    if second_stage:   # the probe moves to the second stage; τ is not first order there
        text = text.replace("[[expect]]", SECOND_STAGE).replace('node = "rst"', 'node = "pin"')
        text = text.replace('tau = "= R1*C1"\n', "").replace(
            ', tau = { min = "80 ms", max = "120 ms" }', "")
    path = folder / ("exact.toml" if second_stage else "mc.toml")
    path.write_text(text, encoding="utf-8")
    return path


def monte_carlo(repeats: int) -> dict:
    """The 10⁶-sample file: in this process (the ``--jobs 1`` path), then through the cluster
    code on a running local cluster of 1 and of 2 workers (median of ``repeats`` each, start-up
    excluded), with the corners' engine runs in tasks of their own ("now") and in the file's
    own task ("before": the plan without corners), interleaved; what its parts cost here."""
    from dataclasses import replace
    from harness import cluster, clusterparts
    from harness.circuitfile import read_circuit
    from harness.runner import RunOptions, _check_task, check_file
    from harness.variation import shard
    out: dict = {}
    with tempfile.TemporaryDirectory() as tmp:
        path = str(_variant(Path(tmp), MC_SAMPLES))
        circuit = read_circuit(path)
        plan = shard.plan(circuit)
        out["pieces"] = sum(len(r) for r in plan.values())
        out["load_before"] = load()
        start = time.perf_counter()
        whole = check_file(path)
        out["here"] = time.perf_counter() - start
        out.update(_parts_here(path, circuit, plan))
        weight, now = clusterparts.plan(path, None, True)
        ways = {"now": now, "before": {i: replace(s, corners=0) for i, s in now.items()}}
        for workers in (1, 2):
            with cluster._connect(f"local:{workers}", True) as ready:
                client = _ready(ready, workers)
                times: dict = {way: [] for way in ways}
                for _ in range(repeats):
                    for way, split in ways.items():
                        start = time.perf_counter()
                        got = cluster._gather(client, [path], RunOptions(), [], _check_task,
                                              [(weight, split)])
                        times[way].append(time.perf_counter() - start)
                        assert [s.to_json() for s in got[0].spreads] == \
                            [s.to_json() for s in whole.spreads]
            for way, taken in times.items():
                out[f"{way} {workers}"] = statistics.median(taken)
        out["load_after"] = load()
    return out


def _parts_here(path: str, circuit, plan: dict) -> dict:
    """Seconds, in this process: every piece; the corners' search and the engine at them; the
    file's own task handed both, and handed the pieces alone."""
    from harness.runner import check_file
    from harness.variation import shard
    out = {}
    start = time.perf_counter()
    pieces = {i: [shard.summary(circuit, i, a, b) for a, b in r] for i, r in plan.items()}
    out["pieces_here"] = time.perf_counter() - start
    start = time.perf_counter()
    values = {i: [shard.corner_value(circuit, i, *c) for c in shard.corners(circuit, i)]
              for i in plan}
    out["corners_here"] = time.perf_counter() - start
    for name, handed in (("final_here", values), ("final_pieces_only", {})):
        given = {i: shard.evaluated(copy.deepcopy(pieces[i]), handed.get(i, ())) for i in plan}
        start = time.perf_counter()
        check_file(path, True, None, given)
        out[name] = time.perf_counter() - start
    return out


def exact_per_sample(count: int = 32) -> float:
    """Seconds per sample on the exact engine's route (one solve per sample)."""
    from harness.circuitfile import read_circuit
    from harness.variation import shard
    with tempfile.TemporaryDirectory() as tmp:
        circuit = read_circuit(str(_variant(Path(tmp), 2048, second_stage=True)))
        start = time.perf_counter()
        shard.summary(circuit, 0, 0, count)
        return (time.perf_counter() - start) / count


def expected(walls: dict, files: int, pool: dict, fixed: dict, per_task: float) -> float:
    """``--jobs 1`` / the wall ``local:2`` is expected to take: ``--jobs 2``'s plus what the
    cluster costs beyond the pool (import, start, the end from the results in hand to the
    process's exit, which holds the stop and the interpreter's exit, the latter a local run's
    too; overhead per task, half of the files on each worker)."""
    extra = fixed["import"] + fixed["start"] + fixed["exit"] - pool["startup"] + \
        (per_task - pool["per_task"]) * files / 2
    return walls["jobs 1"] / (walls["jobs 2"] + extra)


def _print_background(bg: dict, repeats: int, before: float) -> None:
    """``background``'s figures, now / one held, with the load average before and after."""
    def both(column: int, digits: int) -> str:
        return " / ".join(f"{bg[way][column]:.{digits}f}" for way in ("now", "one held"))
    print(f"a running local:2 beside its tasks, now / one held (median of {repeats}): idle, "
          f"CPU ms per s: client's process {both(0, 1)}, workers {both(1, 1)}; {TASKS} tasks "
          f"of 10 ms returning ~140 kB, CPU ms per task: client's process {both(2, 2)}, "
          f"workers beyond the task {both(3, 2)}, ms a worker sat between two tasks "
          f"{both(4, 1)}; load average {before:.1f}-{load():.1f}")


def main() -> None:
    from harness.cluster import LOCAL_ALLOWED_FAILURES
    repeats = int(sys.argv[1]) if len(sys.argv) > 1 else 1
    walls, cpu, loads = library(repeats)
    files = len(list(Path(LIBRARY).rglob("*.toml")))
    print(f"library, {files} files ({repeats} run(s) each, median wall s): " +
          ", ".join(f"{k} {v:.2f}" for k, v in walls.items()) +
          f"; load average {min(loads):.1f}-{max(loads):.1f}")
    print("  CPU s, all processes of the run: " +
          ", ".join(f"{k} {v:.2f}" for k, v in cpu.items()))
    print(f"  jobs 1 / local:2 = {walls['jobs 1'] / walls['local:2']:.2f}x, "
          f"jobs 1 / jobs 2 = {walls['jobs 1'] / walls['jobs 2']:.2f}x, "
          f"jobs 2 / local:2 = {walls['jobs 2'] / walls['local:2']:.2f}x, "
          f"jobs 1 / local:2 waited = {walls['jobs 1'] / walls['local:2 waited']:.2f}x, "
          f"jobs 1 / local:2 one held = {walls['jobs 1'] / walls['local:2 one held']:.2f}x")
    before = load()
    pool = pool_costs()
    fixed = fixed_medians()
    task = dask_per_task()
    print(f"local cluster fixed costs, before / now (s, medians of {FIXED_RUNS}): " + "; ".join(
        f"{what} {fixed['before'][what]:.3f} / {fixed['now'][what]:.3f}"
        for what in ("import", "start", "stop", "exit")) +
        f"; pool start-up {pool['startup']:.2f}; load average {before:.1f}")
    print(f"overhead per task: pool {pool['per_task'] * 1e3:.2f} ms, local cluster "
          f"{task['before'] * 1e3:.2f} ms before / {task['now'] * 1e3:.2f} ms now")
    print(f"  expected jobs 1 / local:2 from these: before "
          f"{expected(walls, files, pool, fixed['before'], task['before']):.2f}x, now "
          f"{expected(walls, files, pool, fixed['now'], task['now']):.2f}x "
          f"(measured jobs 1 / jobs 2 {walls['jobs 1'] / walls['jobs 2']:.2f}x); "
          f"load average {load():.1f}")
    before = load()
    _print_background(background(repeats), repeats, before)
    before = load()
    pf, df = pool_faults(), dask_faults()
    print(f"a worker's death: pool {pf['die']:.2f} s, local cluster {df['die']:.2f} s per death "
          f"(tried {1 + LOCAL_ALLOWED_FAILURES} times); "
          f"a task over its limit: pool {pf['sleep']:.2f} s, local cluster {df['sleep']:.2f} s "
          f"beyond the limit; load average {before:.1f}")
    mc = monte_carlo(repeats)
    print(f"Monte Carlo, {MC_SAMPLES:,} samples in {mc['pieces']} pieces (median wall s): "
          f"this process {mc['here']:.2f}; cluster of 1 / 2 workers, corners in tasks of their "
          f"own {mc['now 1']:.2f} / {mc['now 2']:.2f} = {mc['now 1'] / mc['now 2']:.2f}x, in "
          f"the file's task (before) {mc['before 1']:.2f} / {mc['before 2']:.2f} = "
          f"{mc['before 1'] / mc['before 2']:.2f}x; load average {mc['load_before']:.1f} -> "
          f"{mc['load_after']:.1f}")
    print(f"  in this process: all pieces {mc['pieces_here']:.2f} s, the corners' search and "
          f"engine runs {mc['corners_here']:.2f} s, the file's own task handed both "
          f"{mc['final_here']:.2f} s, handed the pieces alone {mc['final_pieces_only']:.2f} s")
    before = load()
    per = exact_per_sample()
    print(f"exact engine per sample: {per * 1e3:.1f} ms; load average {before:.1f}")


if __name__ == "__main__":
    main()
