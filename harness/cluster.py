"""Runs circuit files on a Dask cluster: one task per file, results gathered on the client.

``run(paths, options, address)`` is ``runner.run`` with the files analysed by the workers of a
Dask scheduler instead of this machine's worker pool.  ``address`` is a scheduler's address
(``tcp://host:8786``) or ``local:N``, which starts a cluster of N worker processes (one thread
each) for the run and stops it afterwards.  Each task is ``runner.check_file`` on one file path:
the workers read the file themselves, so the file must be reachable at the same path on every
worker (a relative path is read from the worker's working folder).

A file whose Monte Carlo spans more than one piece also gets a task per piece and, when the
numerical engine runs, tasks for its extreme corners (``clusterparts``, which says why the
result is the bytes of a local run); its own task waits for them and is handed their values,
so one heavy file spreads over the workers.

Files are handed out heaviest first (``runner.heavy_first``).  A ``local:N`` cluster's workers
fork from this process once it has the engines (``_local_settings``); the cluster starts on a
thread while the files are planned (``_connect``, the collector paused: ``_collector_paused``);
files are handed out once its workers have started (``_start``).

Faults, as in a local run:

* a worker that dies while analysing a file (or a piece of it): the scheduler gives the task to
  another worker, up to its ``allowed-failures`` bound (``LOCAL_ALLOWED_FAILURES`` for
  ``local:N``); past it the file is run once more alone, whole (``_second_chance``), and if it
  fails again it is an ``error`` naming the cause; the other files go on;
* ``timeout``: tasks are handed out no faster than the cluster has threads (a file with pieces
  counts each), so a file's clock starts when it is handed out; a file over the limit is
  cancelled with its parts (a worker running one replaced when it has one thread:
  ``_stop_workers``) and becomes "timed out after N s";
* SIGINT (``KeyboardInterrupt``) or SIGTERM (``pool.Interrupted``): every future is cancelled and
  ``runner.RunInterrupted`` carries the results that finished;
* a ``local:N`` cluster left with no worker for ``WORKER_START_TIMEOUT`` s (its workers lost,
  none restarted): the files done are kept, every other file becomes an ``error`` naming the
  cause (``_Run.abandon``), and the run ends as one with errors;
* a scheduler that does not answer within ``CONNECT_TIMEOUT`` s, or a ``local:N`` cluster whose
  workers cannot start: ``ClusterUnreachable``.

``distributed`` is imported only here, and this module only when a cluster is asked for.
"""

from __future__ import annotations

import contextlib
import logging
import math
import time
from dataclasses import dataclass, field
from typing import Callable, Iterable

from . import clusterparts
from .outcome import FileResult, RunResult
from .pool import Interrupted
from .runner import (RunInterrupted, RunOptions, _bar, _check_task, _done, _error_result,
                     _preload, collect, heavy_first)

#: seconds to wait for a scheduler before giving up on it
CONNECT_TIMEOUT = 5.0
#: seconds a ``local:N`` cluster may be without a worker (its workers starting, or restarting
#: after a death; over a second at a load average of 10 on 2 cores) before the run gives up
WORKER_START_TIMEOUT = 60.0
#: times a file may kill its worker on a ``local:N`` cluster before it becomes an error
LOCAL_ALLOWED_FAILURES = 2
#: how often (s) the client looks for finished futures and expired deadlines
_POLL = 0.02
#: prefix of the address that asks for a cluster started for the run
LOCAL = "local:"


class ClusterUnreachable(Exception):
    """The scheduler at ``address`` could not be reached (or a ``local:N`` cluster started)."""

    def __init__(self, address: str, why: str, within: float | None = CONNECT_TIMEOUT) -> None:
        super().__init__(f"cannot start the cluster {address}: {why}" if within is None else
                         f"cannot reach the cluster scheduler at {address} within {within:g} s: "
                         f"{why}")
        self.address = address


def check_address(text: str) -> str:
    """``text`` if it is a usable cluster address (``local:N`` with N ≥ 1, or
    ``scheme://host:port``); raises ValueError saying what is expected otherwise."""
    text = text.strip()
    if text.startswith(LOCAL):
        count = text[len(LOCAL):]
        if count.isdigit() and int(count) >= 1:
            return text
        raise ValueError(f"expected local:N with N a whole number of at least 1, got {text!r}")
    if "://" in text and text.split("://", 1)[1]:
        return text
    raise ValueError(f"expected a scheduler address such as tcp://host:8786, or local:N, "
                     f"got {text!r}")


def run(paths: Iterable[str], options: RunOptions, address: str,
        work: Callable = _check_task) -> RunResult:
    """Check every file under ``paths`` on the cluster at ``address``; results in the order the
    files were collected (as ``runner.run``).  ``work(path, numeric, tolerance)`` is what each
    task runs (``runner.check_file`` through ``_check_task``).  The files are read and planned
    here while the cluster starts (``_connect`` starts it on a thread of its own).

    Raises:
        ClusterUnreachable: no scheduler answered at ``address``.
        RunInterrupted: SIGINT or SIGTERM stopped the run; ``partial`` holds what finished.
    """
    files, missing = collect(paths)
    with _connect(address, options.numeric) as started:
        plans = [clusterparts.plan(f, options.tolerance, options.numeric) for f in files]
        results = _gather(started(), files, options, missing, work, plans)
    return RunResult(files=tuple(missing) + tuple(results))


@contextlib.contextmanager
def _quiet_logs():
    """Dask's own log lines (a worker restarted, a connection closed) stay off stderr while
    the cluster runs: what matters reaches the user as a file's result."""
    logger = logging.getLogger("distributed")
    level = logger.level
    logger.setLevel(logging.CRITICAL)
    try:
        yield
    finally:
        logger.setLevel(level)


class _Silent(logging.Filter):
    """Drops every record: set on Dask's log handlers while a cluster closes behind the caller
    (``_close``), ``_quiet_logs`` having ended.  A filter, not a level: each close adds and
    removes its own, where a level saved and restored by one thread can undo another's."""

    def filter(self, record: logging.LogRecord) -> bool:
        return False


def _local_settings() -> dict:
    """Dask settings of a ``local:N`` cluster, held while it runs (a worker restarted later
    starts the same way): the death bound; one file queued on a worker behind the one it runs
    (``LOCAL_SATURATION``); workers forked from this process where the platform can fork (with
    its engines, in ~0.1 s where a spawned one imports everything again: ``cluster_bench``);
    the event loops' needless wake-ups off (``QUIET_LOOPS``)."""
    import multiprocessing as mp
    method = "fork" if "fork" in mp.get_all_start_methods() else "spawn"
    return {"distributed.scheduler.allowed-failures": LOCAL_ALLOWED_FAILURES,
            "distributed.scheduler.worker-saturation": LOCAL_SATURATION,
            "distributed.worker.multiprocessing-method": method, **QUIET_LOOPS}


#: files a ``local:N`` worker holds per thread (Dask's ``worker-saturation``; it holds
#: ceil(threads × this)): the one it runs and the next, so a worker does not wait a round trip
#: through the scheduler between files (mean gap between a worker's tasks 7.8 -> 5.3 ms at a
#: load of 8: tests/benchmarks/RESULTS.md).  The scheduler counts a dying worker against every
#: task it holds, queued ones too, so a file queued behind one that kills its worker may reach
#: the death bound through no fault of its own; such a file is run again alone at the end
#: (``_second_chance``) and keeps its result.  With ``--timeout`` the client hands out no more
#: files than there are threads, so none is queued.
LOCAL_SATURATION = 2.0


#: Dask settings that keep a ``local:N`` cluster's event loops from waking for nothing: the
#: worker's statistical profiler (every 10 ms it takes the interpreter lock from the task's
#: thread to walk its stack: Dask's dashboard is the only reader, and none is started) and the
#: health tick of every event loop (worker, nanny, scheduler: 20 ms; it only times the loop for
#: an "unresponsive" log line, which is silenced).  Sampled over the library, the profiler and
#: its timers were a third of the workers' busy time outside the tasks (that time ~7 % of the
#: tasks'); with the versions read once (``_versions_read``) a run's CPU fell 0.3-0.6 s
#: (tests/benchmarks/RESULTS.md).  The memory monitors (worker and nanny: the process's size
#: against its limit, every 100 ms) look once a second, and the system monitors (every Dask
#: process: CPU, memory, network and disk counters for the dashboard, every 500 ms) every
#: 5 s: an idle cluster's processes then take ~10 ms of CPU a second instead of ~25.  None
#: of these touches a task or its result; a worker past its memory limit is still stopped.
QUIET_LOOPS = {"distributed.worker.profile.enabled": False,
               "distributed.admin.tick.interval": "1s",
               "distributed.worker.memory.monitor-interval": "1s",
               "distributed.admin.system-monitor.interval": "5s"}


@contextlib.contextmanager
def _connect(address: str, numeric: bool):
    """Yields ``started()``, which returns a client of the scheduler at ``address`` (or of a
    ``local:N`` cluster started here) once it is connected: the connection is made on a thread
    of its own, so the caller reads and plans the files meanwhile.  Closes both at the end,
    on that thread, without waiting (``_close``).

    For ``local:N`` the engines are imported here first (``runner._preload``, and the Monte
    Carlo planning's modules), so forked workers have them, and nothing is being imported
    here while a worker is forked."""
    from concurrent.futures import ThreadPoolExecutor

    with _quiet_logs(), _collector_paused() as resume:
        import dask
        import distributed  # noqa: F401  (its settings' defaults, before ours are set over them)

        local = address.startswith(LOCAL)
        starter = ThreadPoolExecutor(1, thread_name_prefix="tauproof-connect")
        with dask.config.set(_local_settings() if local else {}):
            if local:
                _preload(numeric)
                from .variation import shard  # noqa: F401  (planning, below, while workers fork)
            start = starter.submit(_start, address, numeric)

            def started():
                client = start.result()[0]
                resume()
                return client
            try:
                yield started
            finally:
                with contextlib.suppress(ClusterUnreachable):
                    _close_behind(starter, *start.result())
                starter.shutdown(wait=False)


@contextlib.contextmanager
def _collector_paused():
    """The cyclic garbage collector off while Dask is imported and the cluster starts, then
    everything alive set aside (``gc.freeze``) and the collector's state restored; yields
    ``resume``, which does that at once (the caller calls it when the cluster is ready, and it
    runs on the way out otherwise).  Dask's import and the cluster's start make ~100,000
    objects (modules, classes, the scheduler's and nannies' state) that live as long as the
    run: with the collector on, its passes over them free nothing (0.035-0.076 s of the
    client's, one full pass, under load; Dask's import 0.135 -> 0.125 s on a quiet machine:
    tests/benchmarks/RESULTS.md), and once frozen the later full passes of the run skip them.  Workers forked meanwhile start
    with the collector off; ``dask_setup`` turns it on in every worker, with what it inherited
    frozen.  In a process that lives on (the tests) what is frozen is never collected as a
    cycle, as after the console command's own ``gc.freeze``."""
    import gc
    enabled, paused = gc.isenabled(), {"now": True}

    def resume() -> None:
        if paused["now"]:
            paused["now"] = False
            gc.freeze()
            if enabled:
                gc.enable()
    gc.disable()
    try:
        yield resume
    finally:
        resume()


def _start(address: str, numeric: bool):
    """(client, cluster or None): a client of ``address``, with the ``local:N`` cluster it
    names started first; the workers of a scheduler started elsewhere import the engines now,
    before their first file (whose time limit would otherwise include the imports).

    A ``local:N`` cluster returns once its N workers have started (each runs ``dask_setup``):
    a file that kills a worker its nanny has not yet seen start loses it for good (no
    restart).  A worker that cannot start is ``ClusterUnreachable``."""
    from distributed import Client, LocalCluster

    cluster = None
    try:
        if address.startswith(LOCAL):
            _versions_read()
            count = int(address[len(LOCAL):])
            # no dashboard; the scheduler's own HTTP server (health, metrics) on a free port,
            # not Dask's 8787, which another cluster may hold (Dask then warns); each worker's
            # memory limit its share of the machine's, as Dask sets it for N workers started
            # with the cluster (a fraction of the total, ``parse_memory_limit``)
            cluster = LocalCluster(n_workers=count, threads_per_worker=1, memory_limit=1 / count,
                                   processes=True, dashboard_address=None,
                                   scheduler_kwargs={"dashboard_address": ":0"},
                                   silence_logs=logging.CRITICAL, preload=[__name__])
            return Client(cluster, timeout=CONNECT_TIMEOUT), cluster
        client = Client(address, timeout=CONNECT_TIMEOUT)
    except (OSError, TimeoutError) as err:
        if cluster is not None:
            cluster.close()
        raise ClusterUnreachable(address, str(err) or type(err).__name__) from None
    except RuntimeError as err:     # Dask: a local worker's nanny failed to start its process
        if not address.startswith(LOCAL):
            raise
        raise ClusterUnreachable(address, f"its workers did not start ({err})", None) from None
    client.run(_preload, numeric)
    return client, None


def _versions_read() -> None:
    """Read the installed packages' versions once here, before the workers fork: every Dask
    process reports them as it joins (the scheduler compares them), and each read parses
    package metadata (``importlib.metadata``, some 20-40 ms); Dask keeps them per process
    (``distributed.versions``), so forked workers start with them read."""
    from distributed.versions import get_versions
    get_versions()


def _close_behind(starter, client, cluster) -> None:
    """``_close`` on the thread ``starter`` (a ``ThreadPoolExecutor``), not waited for."""
    starter.submit(_close, client, cluster)


def _close(client, cluster) -> None:
    """The client, then the ``local:N`` cluster it started (nothing runs on it any more: the
    results are in hand).  Run on the connecting thread (``_close_behind``) while the caller
    goes on to write the run's outcome and reports (the close took 0.03 s on a quiet
    machine): the interpreter waits for that thread before it exits (``concurrent.futures``
    joins its threads ahead of the ``atexit`` handlers, Dask's own close of a cluster left
    open among them), and a local worker dies with this process in any case
    (``dask_setup``); a test checks that no worker outlives the run.  Its log lines are
    dropped (``_Silent``)."""
    silent, handlers = _Silent(), list(logging.getLogger("distributed").handlers)
    for handler in handlers:
        handler.addFilter(silent)
    try:
        client.close()
        if cluster is not None:
            cluster.close()
    finally:
        for handler in handlers:
            handler.removeFilter(silent)


def dask_setup(worker=None) -> None:
    """Run by Dask in every worker process of a ``local:N`` cluster as it starts (the
    cluster's worker preload, restarted workers too): SIGINT is ignored (Ctrl-C at a terminal
    reaches the whole process group, local workers included; the client decides: it cancels
    and stops the cluster) and SIGTERM takes its default action (a forked worker inherits the
    command line's handler); the process dies with its parent, the client
    (``pool.die_with_parent``): a worker busy in a task could outlive an interrupted client,
    holding its output pipes.  The collector is turned on, what the worker inherited set aside
    first (a worker forked while ``_collector_paused`` held it off).  A worker started by
    spawning (no fork on this platform) imports the engines here, before its first file."""
    import gc
    import os
    import signal
    from .pool import die_with_parent
    gc.freeze()
    gc.enable()
    with contextlib.suppress(ValueError):  # not the main thread: nothing to do
        signal.signal(signal.SIGINT, signal.SIG_IGN)
        signal.signal(signal.SIGTERM, signal.SIG_DFL)
    die_with_parent(os.getppid())
    import dask
    if dask.config.get("distributed.worker.multiprocessing-method") == "fork":
        _fresh_offload_thread()
    else:
        _preload(True)


def _fresh_offload_thread() -> None:
    """A forked worker inherits the client's pool of one thread on which Dask (de)serialises
    messages over ``distributed.comm.offload`` (10 MiB) without that thread (a fork copies only
    the thread that forks): once the client had received a large result, a worker forked after
    it hung on its first large transfer, the pool believing its thread alive.  A new pool
    (Dask's module attribute, the one thread it names ``Dask-Offload``)."""
    from concurrent.futures import ThreadPoolExecutor
    from distributed import utils
    if isinstance(getattr(utils, "_offload_executor", None), ThreadPoolExecutor):
        utils._offload_executor = ThreadPoolExecutor(max_workers=1,
                                                     thread_name_prefix="Dask-Offload")


def _gather(client, files: list[str], options: RunOptions, missing: list[FileResult],
            work: Callable, plans: list) -> list[FileResult]:
    """Submit the files, collect their results as they finish (progress, deadlines).
    ``plans``: each file's weight and Monte Carlo pieces (``clusterparts.plan``)."""
    run = _Run(client, files, options, work, plans)
    try:
        while len(run.done) < len(files):
            run.hand_out()
            present = run.joined()   # sleep on results only where nothing else ends a wait
            if not present and run.deserted():
                run.abandon()        # every file not done: an error naming the cause
            elif not run.collect(block=present and not run.limit and run.local is None):
                run.expire()
                time.sleep(_POLL)
        _second_chance(run)
    except (KeyboardInterrupt, Interrupted) as stop:
        client.cancel(run.futures(list(run.running)), force=True)
        signum = getattr(stop, "signum", 2)
        raise RunInterrupted(signum, RunResult(tuple(missing) + tuple(
            run.done[i] for i in sorted(run.done))), len(files)) from None
    finally:
        _done(run.bar, options)
    return [run.done[i] for i in range(len(files))]


@dataclass
class _Task:
    """A file handed to the cluster: its index, its deadline (``time.monotonic``), and the
    futures of its Monte Carlo pieces that its own task waits for."""

    index: int
    deadline: float
    pieces: list = field(default_factory=list)
    cost: int = 1                    # the tasks it holds on the cluster: its own and its parts'


class _Run:
    """The state of one run on the cluster: files waiting, files running, results."""

    def __init__(self, client, files: list[str], options: RunOptions, work: Callable,
                 plans: list) -> None:
        from distributed import as_completed
        self.client, self.files, self.options, self.work = client, files, options, work
        self.bar = _bar(files, options)
        self.limit = options.timeout
        local = getattr(client, "cluster", None)          # a ``local:N`` cluster started here
        self.local = f"{LOCAL}{len(local.worker_spec)}" if local is not None else None
        self.unmanned = None             # since when (time.monotonic) no worker has been seen
        self.looked = -math.inf          # when the workers were last looked at
        # with a limit, tasks are handed out no faster than the cluster has threads
        self.window = max(1, sum(client.nthreads().values())) if self.limit else None
        self.done: dict[int, FileResult] = {}
        self.running: dict = {}              # the file's future -> _Task
        self.plans = [splits for _, splits in plans]
        self.pending = heavy_first([weight for weight, _ in plans],
                                   [sum(s.tasks for s in splits.values()) for _, splits in plans])
        # results are fetched by the client's event loop as the files finish
        self.finished = as_completed(with_results=True, raise_errors=False)

    def joined(self) -> bool:
        """Whether a worker is there (a remote scheduler's may come later: always True); a
        local cluster's workers are looked at once a second at most."""
        now = time.monotonic()
        if self.local is None or (self.unmanned is None and now < self.looked + 1.0):
            return True                  # a scheduler round trip at most once a second
        self.looked = now
        if self.client.nthreads():
            self.unmanned = None
            return True
        self.unmanned = self.unmanned or now
        return False

    def deserted(self) -> bool:
        """Whether a local cluster has had no worker for ``WORKER_START_TIMEOUT`` s, as
        ``joined`` last saw it (all lost, none restarted: the run must not wait for ever)."""
        return time.monotonic() > (self.unmanned or math.inf) + WORKER_START_TIMEOUT

    def abandon(self) -> None:
        """End the run on a deserted cluster as other faults end a file: the results in hand
        are kept; every file not done (running, cancelled with its parts, or waiting) becomes
        an ``error`` naming the cause."""
        self.collect()
        self.client.cancel(self.futures(list(self.running)), force=True)
        left = sorted([t.index for t in self.running.values()] + self.pending)
        self.running, self.pending = {}, []
        why = (f"{_DESERTED} {self.local} for {WORKER_START_TIMEOUT:g} s (its workers were lost "
               f"and none restarted); the file was not analysed")
        for i in left:
            self.done[i] = _error_result(self.files[i], f"{self.files[i]}: {why}")
            self.bar.step()

    def hand_out(self) -> None:
        """Submit waiting files while the window allows (a file counts its pieces too; one
        file is always let through when nothing runs)."""
        load = sum(t.cost for t in self.running.values())
        while self.pending:
            i = self.pending[0]
            plan = self.plans[i]
            cost = 1 + sum(split.tasks for split in plan.values())
            if self.window is not None and self.running and load + cost > self.window:
                return
            self.pending.pop(0)
            future, pieces = self._submit(self.files[i], plan)
            deadline = time.monotonic() + self.limit if self.limit else float("inf")
            self.running[future] = _Task(i, deadline, pieces, cost)
            self.finished.add(future)
            load += cost

    def _submit(self, path: str, plan: dict):
        """The file's task; when it has a plan, after the tasks of its parts
        (``clusterparts``), all ahead of plain files so a heavy file starts early.  (future,
        its parts' futures)."""
        opts = self.options
        if not plan:
            return self.client.submit(self.work, path, opts.numeric, opts.tolerance,
                                      pure=False), []
        given, values, parts = clusterparts.submit_parts(self.client, path, opts.tolerance,
                                                         plan)
        future = self.client.submit(clusterparts.joined, self.work, path, opts.numeric,
                                    opts.tolerance, given, values, pure=False, priority=1)
        return future, parts

    def collect(self, block: bool = False) -> bool:
        """Record the files that finished; False when none had.  ``block``: wait for one
        (Dask's wait wakes for signals) instead of looking every ``_POLL`` s."""
        batch = self.finished.next_batch(block=block and bool(self.running))
        for future, result in batch:
            task = self.running.pop(future, None)
            if task is None:          # cancelled on its deadline, already recorded
                continue
            self.done[task.index] = result if isinstance(result, FileResult) else \
                _outcome(future, self.files[task.index])     # the result in hand, if any
            self.bar.step()
        return bool(batch)

    def futures(self, files: list) -> list:
        """These files' futures with those of their pieces."""
        return files + [p for f in files for p in self.running[f].pieces]

    def expire(self) -> None:
        """Cancel the files past their deadline (pieces too); each becomes "timed out after
        N s".  A worker with one thread that was running one is replaced (a thread cannot be
        stopped: ``_stop_workers``)."""
        if not self.limit:
            return
        now = time.monotonic()
        late = [f for f, task in self.running.items() if now >= task.deadline]
        if not late:
            return
        held = self.futures(late)
        keys = {f.key for f in held}
        threads = self.client.nthreads()
        stuck = [w for w, busy in self.client.processing().items()
                 if keys & set(busy) and threads.get(w, 0) == 1]
        self.client.cancel(held, force=True)
        for future in late:
            i = self.running.pop(future).index
            self.done[i] = _error_result(self.files[i], f"{self.files[i]}: timed out after "
                                                        f"{self.limit:g} s (the --timeout "
                                                        f"limit); the analysis was stopped")
            self.bar.step()
        if stuck:
            with contextlib.suppress(Exception):  # best effort: the result is already recorded
                _stop_workers(self.client, stuck)


def _stop_workers(client, workers: list[str]) -> None:
    """Replace these workers, each stuck in a task that was cancelled.  A worker of a
    ``local:N`` cluster (a child process of this one) is killed at once and its nanny starts a
    new one, as after any death (~0.1 s); Dask's restart would first wait for the busy worker
    to close, seconds in which this client collects nothing.  Its process id is asked of the
    worker itself (its event loop answers while a task holds its thread: a nanny's record can
    name a newer worker than the one the scheduler gave the task).  A remote worker is
    restarted through its scheduler."""
    import os
    import signal
    if getattr(client, "cluster", None) is None:
        client.restart_workers(workers, raise_for_error=False)
        return
    for pid in client.run(os.getpid, workers=workers, on_error="ignore").values():
        if isinstance(pid, int) and _parent_of(pid) == os.getpid():
            with contextlib.suppress(ProcessLookupError):
                os.kill(pid, signal.SIGKILL)


def _parent_of(pid: int) -> int | None:
    """The parent process id of ``pid`` (``/proc/PID/stat``, field 4: proc(5)); where there is
    no /proc, ``pid``'s parent is taken to be this process (the local workers are its own)."""
    import os
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as handle:
            return int(handle.read().rsplit(")", 1)[1].split()[1])
    except FileNotFoundError:
        return os.getpid() if not os.path.isdir("/proc") else None
    except (OSError, ValueError, IndexError):
        return None


def _second_chance(run: _Run) -> None:
    """Run again, one at a time, every file whose worker died or whose task the cluster lost:
    a dying worker also takes the files it held beside the one that killed it, and a file run
    alone can only die of itself.  Its new result replaces the error; a file that fails again,
    runs past the limit or finds the cluster deserted (``_Run.deserted``) keeps it; the re-run
    is cancelled however this ends (an interrupt too)."""
    options = run.options
    for i in [i for i, r in sorted(run.done.items())
              if r.errors and (_DIED in r.errors[0] or _LOST in r.errors[0])]:
        future = run.client.submit(run.work, run.files[i], options.numeric, options.tolerance,
                                   pure=False)
        end = time.monotonic() + (options.timeout or math.inf)
        try:
            while future.status == "pending" and time.monotonic() < end and \
                    (run.joined() or not run.deserted()):
                time.sleep(_POLL)
            with contextlib.suppress(TimeoutError):     # its worker may leave before the gather
                run.done[i] = future.result(timeout=WORKER_START_TIMEOUT) \
                    if future.status == "finished" else run.done[i]
        finally:
            run.client.cancel([future], force=True)


#: the words of a file result whose worker died, or whose task the cluster lost (``_outcome``):
#: ``check_file`` never raises, so a task without a result always means cluster trouble
_DIED = "the worker process analysing this file died"
_LOST = "the cluster could not analyse this file"
#: the words of a file not analysed because the cluster was left without workers (``abandon``)
_DESERTED = "no worker left on the cluster"


def _outcome(future, file: str) -> FileResult:
    """The ``error`` result of a file whose task gave none, naming why, from what the future
    holds: one whose worker left since reads "lost" (pending again, ``exception()`` waits)."""
    err = future.exception() if future.status == "error" else None
    if type(err).__name__ == "KilledWorker":
        return _error_result(file, f"{file}: {_DIED} "
                                   f"each time the cluster tried it ({err}); the file's result "
                                   f"is lost (the other files are not affected)")
    why = f"{type(err).__name__}: {err}" if err is not None else f"its task {future.status}"
    return _error_result(file, f"{file}: {_LOST}: {why}")
