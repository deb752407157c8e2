"""Runs circuit files on a Dask cluster: one task per file, results gathered on the client.

``run(paths, options, address)`` is ``runner.run`` with the files analysed by the workers of a
Dask scheduler instead of this machine's worker pool.  ``address`` is a scheduler's address
(``tcp://host:8786``) or ``local:N``, which starts a cluster of N worker processes (one thread
each) for the run and stops it afterwards.  Each task is ``runner.check_file`` on one file path:
the workers read the file themselves, so the file must be reachable at the same path on every
worker (a relative path is read from the worker's working folder).

Faults, as in a local run:

* a worker that dies while analysing a file: the scheduler gives the file to another worker, up
  to its ``allowed-failures`` bound (``LOCAL_ALLOWED_FAILURES`` for ``local:N``); past it the
  file is an ``error`` naming the cause and the other files go on;
* ``timeout``: files are handed out no faster than the cluster has threads, so a file's clock
  starts when it is handed out; a file over the limit is cancelled (its worker restarted when it
  has one thread) and becomes "timed out after N s";
* SIGINT (``KeyboardInterrupt``) or SIGTERM (``pool.Interrupted``): every future is cancelled and
  ``runner.RunInterrupted`` carries the results that finished;
* a scheduler that does not answer within ``CONNECT_TIMEOUT`` s: ``ClusterUnreachable``.

``distributed`` is imported only here, and this module only when a cluster is asked for.
"""

from __future__ import annotations

import contextlib
import logging
import time
from typing import Callable, Iterable

from .outcome import FileResult, RunResult
from .pool import Interrupted
from .runner import (RunInterrupted, RunOptions, _bar, _check_task, _done, _error_result,
                     _preload, collect)

#: seconds to wait for a scheduler before giving up on it
CONNECT_TIMEOUT = 5.0
#: times a file may kill its worker on a ``local:N`` cluster before it becomes an error
LOCAL_ALLOWED_FAILURES = 2
#: scheduler settings of a ``local:N`` cluster: the death bound, and no file queued on a worker
#: beside the one it runs (a dying worker counts against every file it holds)
_LOCAL_SCHEDULER = {"distributed.scheduler.allowed-failures": LOCAL_ALLOWED_FAILURES,
                    "distributed.scheduler.worker-saturation": 1.0}
#: how often (s) the client looks for finished futures and expired deadlines
_POLL = 0.02
#: prefix of the address that asks for a cluster started for the run
LOCAL = "local:"


class ClusterUnreachable(Exception):
    """The scheduler at ``address`` could not be reached (or a ``local:N`` cluster started)."""

    def __init__(self, address: str, why: str) -> None:
        super().__init__(f"cannot reach the cluster scheduler at {address} within "
                         f"{CONNECT_TIMEOUT:g} s: {why}")
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
    task runs (``runner.check_file`` through ``_check_task``).

    Raises:
        ClusterUnreachable: no scheduler answered at ``address``.
        RunInterrupted: SIGINT or SIGTERM stopped the run; ``partial`` holds what finished.
    """
    files, missing = collect(paths)
    with _quiet_logs(), _connect(address, options.numeric) as client:
        results = _gather(client, files, options, missing, work)
    return RunResult(files=tuple(missing) + tuple(results))


@contextlib.contextmanager
def _quiet_logs():
    """The cluster's own log lines (a worker restarted, a connection closed) stay off stderr:
    what matters reaches the user as a file's result."""
    logger = logging.getLogger("distributed")
    level = logger.level
    logger.setLevel(logging.CRITICAL)
    try:
        yield
    finally:
        logger.setLevel(level)


@contextlib.contextmanager
def _connect(address: str, numeric: bool):
    """A client of the scheduler at ``address``, or of a ``local:N`` cluster started here."""
    import dask
    from distributed import Client, LocalCluster

    cluster = None
    try:
        if address.startswith(LOCAL):
            with dask.config.set(_LOCAL_SCHEDULER):
                cluster = LocalCluster(n_workers=int(address[len(LOCAL):]),
                                       threads_per_worker=1, processes=True,
                                       dashboard_address=None, silence_logs=logging.CRITICAL)
            client = Client(cluster, timeout=CONNECT_TIMEOUT)
        else:
            client = Client(address, timeout=CONNECT_TIMEOUT)
    except (OSError, TimeoutError) as err:
        if cluster is not None:
            cluster.close()
        raise ClusterUnreachable(address, str(err) or type(err).__name__) from None
    try:
        if cluster is not None:
            _workers_ignore_interrupts(client)
        client.run(_preload, numeric)  # every worker imports the engines once, before the files
        yield client
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def _ignore_interrupts(worker=None) -> None:
    """SIGINT is ignored in this worker process: Ctrl-C at a terminal reaches the whole process
    group, local workers included; the client decides (cancels and stops the cluster)."""
    import signal
    with contextlib.suppress(ValueError):  # not the main thread: nothing to do
        signal.signal(signal.SIGINT, signal.SIG_IGN)


def _workers_ignore_interrupts(client) -> None:
    """Every worker of a ``local:N`` cluster ignores SIGINT, also one restarted later (a worker
    plugin is run on each worker as it joins)."""
    from distributed import WorkerPlugin

    class IgnoreInterrupts(WorkerPlugin):
        def setup(self, worker) -> None:
            _ignore_interrupts(worker)

    client.register_plugin(IgnoreInterrupts(), name="tauproof-ignore-sigint")


def _gather(client, files: list[str], options: RunOptions, missing: list[FileResult],
            work: Callable) -> list[FileResult]:
    """Submit the files, collect their results as they finish (progress, deadlines)."""
    from distributed import as_completed

    bar = _bar(files, options)
    limit = options.timeout
    window = max(1, sum(client.nthreads().values())) if limit else len(files)
    done: dict[int, FileResult] = {}
    running: dict = {}  # future -> (index, deadline)
    pending = list(range(len(files)))
    finished = as_completed()
    try:
        while len(done) < len(files):
            while pending and len(running) < window:
                i = pending.pop(0)
                future = client.submit(work, files[i], options.numeric, options.tolerance,
                                       pure=False)
                running[future] = (i, time.monotonic() + limit if limit else float("inf"))
                finished.add(future)
            batch = finished.next_batch(block=False)
            for future in batch:
                if future not in running:  # cancelled on its deadline, already recorded
                    continue
                i, _ = running.pop(future)
                done[i] = _outcome(future, files[i])
                bar.step()
            if not batch:
                _expire(client, running, done, files, limit, bar)
                time.sleep(_POLL)
        _second_chance(client, files, done, options, work)
    except (KeyboardInterrupt, Interrupted) as stop:
        client.cancel(list(running), force=True)
        signum = getattr(stop, "signum", 2)
        raise RunInterrupted(signum, RunResult(tuple(missing) + tuple(
            done[i] for i in sorted(done))), len(files)) from None
    finally:
        _done(bar, options)
    return [done[i] for i in range(len(files))]


def _second_chance(client, files: list[str], done: dict, options: RunOptions,
                   work: Callable) -> None:
    """Run again, one at a time, every file whose worker died or whose task the cluster lost:
    a dying worker also takes the files it held beside the one that killed it, and a file run
    alone can only die of itself.  Its new result replaces the error; a file that fails again
    keeps it."""
    from distributed import wait
    for i in [i for i, r in sorted(done.items())
              if r.errors and (_DIED in r.errors[0] or _LOST in r.errors[0])]:
        future = client.submit(work, files[i], options.numeric, options.tolerance, pure=False)
        with contextlib.suppress(TimeoutError):     # past the per-file limit: it keeps its error
            wait([future], timeout=options.timeout)
        if future.status == "finished":
            done[i] = future.result()
        else:
            client.cancel([future], force=True)


#: the words of a file result whose worker died, or whose task the cluster lost (``_outcome``):
#: ``check_file`` never raises, so a task without a result always means cluster trouble
_DIED = "the worker process analysing this file died"
_LOST = "the cluster could not analyse this file"


def _outcome(future, file: str) -> FileResult:
    """The result of a finished future, or an ``error`` result naming why it has none."""
    if future.status == "finished":
        return future.result()
    err = future.exception()
    if type(err).__name__ == "KilledWorker":
        return _error_result(file, f"{file}: {_DIED} "
                                   f"each time the cluster tried it ({err}); the file's result "
                                   f"is lost (the other files are not affected)")
    return _error_result(file, f"{file}: {_LOST}: {type(err).__name__}: {err}")


def _expire(client, running: dict, done: dict, files: list[str], limit: float | None,
            bar) -> None:
    """Cancel the futures past their deadline; each becomes "timed out after N s".  A worker
    with one thread that was running one is restarted (a thread cannot be stopped)."""
    if not limit:
        return
    now = time.monotonic()
    late = [f for f, (_, deadline) in running.items() if now >= deadline]
    if not late:
        return
    processing = client.processing()
    keys = {f.key for f in late}
    threads = client.nthreads()
    stuck = [w for w, held in processing.items()
             if keys & set(held) and threads.get(w, 0) == 1]
    client.cancel(late, force=True)
    for future in late:
        i, _ = running.pop(future)
        done[i] = _error_result(files[i], f"{files[i]}: timed out after {limit:g} s (the "
                                          f"--timeout limit); the analysis was stopped")
        bar.step()
    if stuck:
        with contextlib.suppress(Exception):  # best effort: the result is already recorded
            client.restart_workers(stuck, raise_for_error=False)
