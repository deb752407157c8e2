"""The worker pool starts no more workers than there are cores nobody else is running on.

Reference: proc(5), the Linux manual page: the fourth field of /proc/loadavg is the number of
currently runnable kernel scheduling entities over the number that exist (the reader itself is
one of the runnable ones).
"""

from __future__ import annotations

import os

import pytest

from harness import pool


@pytest.mark.parametrize("line, cores, expected", [
    ("0.02 0.10 0.20 1/300 4242\n", 2, 2),     # only the reader runs: both cores free
    ("1.00 1.00 1.00 2/300 4242\n", 2, 1),     # one other runnable thread: one core left
    ("9.80 9.50 9.00 11/300 4242\n", 2, 1),    # a crowded machine: still one worker
    ("2.00 2.00 2.00 3/300 4242\n", 8, 6),     # 8 cores in the affinity mask, 2 busy
])
def test_free_cores_from_the_affinity_mask_and_the_run_queue(tmp_path, monkeypatch, line,
                                                              cores, expected):
    fake = tmp_path / "loadavg"
    fake.write_text(line)
    monkeypatch.setattr(pool, "_LOADAVG", str(fake))
    monkeypatch.setattr(pool, "_LOAD_PAUSE", 0.0)
    monkeypatch.setattr(os, "sched_getaffinity", lambda _pid: set(range(cores)), raising=False)
    assert pool.free_cores() == expected


def test_free_cores_without_load_figures_uses_every_allowed_core(tmp_path, monkeypatch):
    monkeypatch.setattr(pool, "_LOADAVG", str(tmp_path / "missing"))
    monkeypatch.setattr(os, "sched_getaffinity", lambda _pid: {0, 1, 2}, raising=False)
    assert pool.free_cores() == 3


def test_a_busy_machine_runs_the_files_in_this_process(tmp_path, monkeypatch):
    """With one free core, jobs=2 runs the files here as jobs=1 does (no worker pool: one
    worker beside an idle parent only adds the transport) and gives the same results."""
    from harness import runner
    from harness.runner import RunOptions, run
    from tests.test_reliability_faults import rc_files
    files = rc_files(tmp_path, ["a", "b", "c"])
    alone = run(files, RunOptions(numeric=False, jobs=1))
    monkeypatch.setattr(pool, "free_cores", lambda: 1)
    monkeypatch.setattr(runner, "run_tasks", _no_pool)
    busy = run(files, RunOptions(numeric=False, jobs=2))
    assert _verdicts(busy) == _verdicts(alone)


def _verdicts(result) -> list:
    return [(f.file, f.verdict, [c.verdict for c in f.checks]) for f in result.files]


def test_usable_jobs_caps_the_request_by_the_free_cores(monkeypatch):
    monkeypatch.setattr(pool, "free_cores", lambda: 3)
    assert [pool.usable_jobs(j) for j in (1, 2, 3, 8)] == [1, 2, 3, 3]


def _no_pool(*_args, **_kwargs):
    raise AssertionError("the worker pool was started on a machine with one free core")
