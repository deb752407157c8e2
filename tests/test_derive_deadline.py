"""The derivation's time budget (``derive.derivation.deadline``) holds where its signal lands in
code that cannot pass an exception on, and leaves a caller's own timer running.

Reference: the Python documentation (``gc.callbacks``, ``sys.unraisablehook``, ``__del__``):
an exception raised inside a garbage-collector callback or a finaliser is reported as
"unraisable" and dropped, so a budget raised there would be lost and a warning printed.
"""

from __future__ import annotations

import gc
import signal
import sys
import time

import pytest

from harness.derive.derivation import OverBudget, deadline


def _spin(seconds: float) -> None:
    end = time.perf_counter() + seconds
    while time.perf_counter() < end:
        pass


def test_a_budget_expiring_inside_a_gc_callback_is_raised_after_it(monkeypatch):
    unraisable = []
    monkeypatch.setattr(sys, "unraisablehook", unraisable.append)

    def slow_callback(phase, info):
        if phase == "start":
            _spin(0.2)                      # the budget expires in here

    gc.callbacks.insert(0, slow_callback)
    try:
        with pytest.raises(OverBudget):
            with deadline(0.05):
                gc.collect()
                _spin(2.0)                  # raised here, not lost in the callback
    finally:
        gc.callbacks.remove(slow_callback)
    assert not unraisable


def test_a_callers_own_timer_survives_the_budget():
    fired = []
    old = signal.signal(signal.SIGALRM, lambda *args: fired.append(True))
    try:
        signal.setitimer(signal.ITIMER_REAL, 5.0)
        with deadline(1.0):
            pass
        remaining, _ = signal.getitimer(signal.ITIMER_REAL)
        assert 4.0 < remaining <= 5.0
        signal.setitimer(signal.ITIMER_REAL, 0.01)
        with deadline(1.0):
            _spin(0.05)                     # the caller's timer is due by the exit
        _spin(0.05)
        assert fired
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)
