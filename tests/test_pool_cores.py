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


def test_a_busy_machine_runs_the_tasks_in_one_worker(tmp_path, monkeypatch):
    """With no free core beside the parent, jobs=2 runs every task in one worker process."""
    fake = tmp_path / "loadavg"
    fake.write_text("5.0 5.0 5.0 6/300 4242\n")
    monkeypatch.setattr(pool, "_LOADAVG", str(fake))
    monkeypatch.setattr(pool, "_LOAD_PAUSE", 0.0)
    monkeypatch.setattr(os, "sched_getaffinity", lambda _pid: {0, 1}, raising=False)
    done = pool.run_tasks([(i,) for i in range(4)], _pid_of_worker, jobs=2, timeout=None,
                          on_timeout=lambda i: None, on_death=lambda i, how: None)
    assert len(set(done.values())) == 1 and os.getpid() not in done.values()


def _pid_of_worker(_index: int) -> int:
    return os.getpid()
