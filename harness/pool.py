"""Worker processes that analyse one file at a time, with a per-file time limit.

A thread cannot be stopped from outside, so every file that must be bounded in time, or isolated
from the others, runs in a worker process.  ``run_tasks`` keeps up to ``jobs`` long-lived workers
(the callers ask for no more than the cores no other process is running on: ``usable_jobs``),
forked where the platform allows (so the imported engines are shared); it hands each the next file
over its own pipe and waits on the pipes, the process sentinels and the nearest deadline at once
(``multiprocessing.connection.wait``).  Three faults are contained:

* a file over ``timeout`` seconds: its worker is killed (SIGKILL) and replaced, and the file gets
  an ``error`` result "timed out after N s";
* a worker that dies (``os._exit``, a signal, an out-of-memory kill): the file it held gets an
  ``error`` result naming how it died; a fresh worker takes the next file;
* an interruption of the parent (SIGINT as ``KeyboardInterrupt``, SIGTERM as ``Interrupted``):
  every worker is killed and ``RunInterrupted`` carries the results that had finished.

Workers ignore SIGINT (a terminal's Ctrl-C reaches the whole process group; the parent decides)
and take SIGTERM's default action, and die with the parent even when it is killed outright
(SIGKILL, out of memory): on Linux through ``prctl(PR_SET_PDEATHSIG, SIGKILL)``, elsewhere by a
watchdog thread that notices the parent is gone.  A forked worker also closes the parent's ends
of the other workers' pipes, so no worker keeps another one's pipe open.
"""

from __future__ import annotations

import ctypes
import os
import signal
import sys
import threading
import time
from collections import deque
from typing import Callable

#: how often (s) the parent wakes when no deadline is nearer, to notice dead workers promptly
_POLL = 0.5
#: prctl option: the signal a process gets when its parent dies (linux/prctl.h)
_PR_SET_PDEATHSIG = 1
#: how often (s) the watchdog thread of a worker without prctl looks at its parent
_WATCH = 0.5


class Interrupted(BaseException):
    """The run was asked to stop by a signal (``signum``); raised by the SIGTERM handler.

    A ``BaseException`` like ``KeyboardInterrupt``, so no ``except Exception`` swallows it.
    """

    def __init__(self, signum: int) -> None:
        super().__init__(f"interrupted by signal {signum}")
        self.signum = signum


class RunInterrupted(Exception):
    """A run stopped early; ``done`` maps task index -> result for the tasks that finished."""

    def __init__(self, signum: int, done: dict) -> None:
        super().__init__(f"interrupted by signal {signum}")
        self.signum = signum
        self.done = done


def _context():
    # multiprocessing loads here, not at import: a run in one process (``solve`` on a file)
    # never starts a worker and would pay ~2 ms of start-up for it
    import multiprocessing as mp
    methods = mp.get_all_start_methods()
    return mp.get_context("fork" if "fork" in methods else "spawn")


def die_with_parent(parent: int) -> None:
    """Make this process end when the process ``parent`` (its parent) ends, however it ends."""
    if sys.platform.startswith("linux"):
        try:
            libc = ctypes.CDLL(None, use_errno=True)
            if libc.prctl(_PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0) == 0:
                if os.getppid() != parent:  # it was gone before the call took effect
                    os._exit(1)
                return
        except (OSError, AttributeError):  # pragma: no cover - no usable libc
            pass

    def watch() -> None:  # pragma: no cover - platforms without prctl
        while os.getppid() == parent:
            time.sleep(_WATCH)
        os._exit(1)

    threading.Thread(target=watch, daemon=True).start()


def _serve(conn, work: Callable, parent: int, others: list) -> None:
    """Worker loop: receive (index, args), send (index, work(*args)); stop on None.
    ``others``: the parent's ends of the other workers' pipes, closed here at once."""
    die_with_parent(parent)
    for other in others:
        try:
            other.close()
        except OSError:
            pass
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    while True:
        try:
            task = conn.recv()
        except (EOFError, OSError):
            return
        if task is None:
            return
        index, args = task
        conn.send((index, work(*args)))


class _Worker:
    """One worker process and the parent's end of its pipe."""

    def __init__(self, ctx, work: Callable, others: list | None = None) -> None:
        self.conn, child = ctx.Pipe()
        inherited = [w.conn for w in others or () if not w.conn.closed] \
            if ctx.get_start_method() == "fork" else []
        self.process = ctx.Process(target=_serve, args=(child, work, os.getpid(), inherited),
                                   daemon=True)
        self.process.start()
        child.close()
        self.task: int | None = None
        self.deadline = float("inf")

    def give(self, index: int, args: tuple, timeout: float | None) -> None:
        self.task = index
        self.deadline = time.monotonic() + timeout if timeout else float("inf")
        self.conn.send((index, args))

    def kill(self) -> None:
        if self.process.is_alive():
            self.process.kill()
        self.process.join(5)
        self.conn.close()

    def stop(self) -> None:
        try:
            self.conn.send(None)
        except OSError:
            pass
        self.process.join(2)
        self.kill()


def death_text(exitcode: int | None) -> str:
    """How a worker ended, in words: ``killed by signal SIGKILL`` or ``exited with code 3``."""
    if exitcode is None:
        return "stopped responding"
    if exitcode < 0:
        try:
            return f"killed by signal {signal.Signals(-exitcode).name}"
        except ValueError:
            return f"killed by signal {-exitcode}"
    return f"exited with code {exitcode}"


#: samples of the run queue taken by ``free_cores``, and the pause between them (s)
_LOAD_SAMPLES = 5
_LOAD_PAUSE = 0.01
#: the kernel's load figures; the fourth field is runnable/total threads (proc(5))
_LOADAVG = "/proc/loadavg"


def free_cores() -> int:
    """Cores this process may use that no other process is running on now, at least 1.

    The cores come from the CPU affinity mask (``os.sched_getaffinity``: a container or
    ``taskset`` may allow fewer than the machine has), the busy ones from the kernel's count of
    runnable threads (the fourth field of /proc/loadavg, less this process), the median of a
    few samples ``_LOAD_PAUSE`` apart.  Where neither exists, ``os.cpu_count()`` and none busy.
    A second worker on a core another process keeps busy only shares that core: measured,
    ``--jobs 2`` beside one busy process was slower than ``--jobs 1``.
    """
    try:
        cores = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        cores = os.cpu_count() or 1
    busy = []
    for i in range(_LOAD_SAMPLES):
        try:
            with open(_LOADAVG, encoding="ascii") as fh:
                running = int(fh.read().split()[3].split("/")[0])
        except (OSError, ValueError, IndexError):
            break
        busy.append(max(0, running - 1))
        if i + 1 < _LOAD_SAMPLES:
            time.sleep(_LOAD_PAUSE)
    others = sorted(busy)[len(busy) // 2] if busy else 0
    return max(1, cores - others)


def usable_jobs(jobs: int) -> int:
    """The worker processes worth starting for ``jobs`` requested: ``jobs`` capped by
    ``free_cores()`` (1 stays 1 without sampling the load).  At 1 the caller runs in its own
    process: one worker beside an idle parent only adds the transport (measured: --jobs 2 on a
    busy machine with one worker took 1.3x the in-process run)."""
    return jobs if jobs <= 1 else min(jobs, free_cores())


def run_tasks(tasks: list[tuple], work: Callable, *, jobs: int, timeout: float | None,
              on_timeout: Callable[[int], object], on_death: Callable[[int, str], object],
              on_done: Callable[[int], None] | None = None,
              order: list[int] | None = None) -> dict:
    """Run ``work(*tasks[i])`` for every i in up to ``jobs`` worker processes (callers cap
    ``jobs`` with ``usable_jobs``), handing the tasks out in ``order`` (indices; None: 0, 1, …).

    Returns index -> result.  A task over ``timeout`` seconds (None: no limit) gets
    ``on_timeout(i)``; a task whose worker died gets ``on_death(i, how)``.  ``on_done(i)`` is
    called as each task ends (progress).

    Raises:
        RunInterrupted: on KeyboardInterrupt (signum 2) or ``Interrupted``; carries the results
            that finished; every worker has been killed.
    """
    ctx = _context()
    pending = deque(range(len(tasks)) if order is None else order)
    done: dict = {}
    workers: list[_Worker] = []
    try:
        for _ in range(max(1, min(jobs, len(tasks)))):
            workers.append(_Worker(ctx, work, workers))
        while len(done) < len(tasks):
            for i, worker in enumerate(workers):
                if worker.task is None and pending:
                    index = pending.popleft()
                    try:
                        worker.give(index, tasks[index], timeout)
                    except OSError:  # died while idle: replace it and try again later
                        worker.kill()
                        workers[i] = _Worker(ctx, work, workers)
                        pending.appendleft(index)
            _wait_round(ctx, work, workers, done, on_timeout, on_death, on_done)
    except KeyboardInterrupt:
        _kill_all(workers)
        raise RunInterrupted(signal.SIGINT, done) from None
    except Interrupted as stop:
        _kill_all(workers)
        raise RunInterrupted(stop.signum, done) from None
    for worker in workers:
        worker.stop()
    return done


def _wait_round(ctx, work, workers, done, on_timeout, on_death, on_done) -> None:
    """Wait for the next result, death or deadline, and record what happened."""
    busy = [w for w in workers if w.task is not None]
    nearest = min((w.deadline for w in busy), default=float("inf"))
    delay = max(0.0, min(_POLL, nearest - time.monotonic()))
    from multiprocessing.connection import wait
    ready = set(wait([w.conn for w in busy] + [w.process.sentinel for w in busy], delay))
    now = time.monotonic()
    for i, worker in enumerate(workers):
        if worker.task is None:
            continue
        index, outcome, expired = worker.task, None, False
        if worker.conn in ready or worker.process.sentinel in ready:
            try:
                got, result = worker.conn.recv()
                outcome = result if got == index else None
            except (EOFError, OSError):
                worker.process.join(5)
                outcome = on_death(index, death_text(worker.process.exitcode))
        elif now >= worker.deadline:
            outcome, expired = on_timeout(index), True
        else:
            continue
        if outcome is None:
            outcome = on_death(index, "sent a wrong answer")
        done[index] = outcome
        if on_done:
            on_done(index)
        worker.task = None
        if expired or not worker.process.is_alive():
            worker.kill()
            workers[i] = _Worker(ctx, work, workers)


def _kill_all(workers: list[_Worker]) -> None:
    for worker in workers:
        try:
            worker.kill()
        except Exception:  # pragma: no cover - best effort while stopping
            pass
