"""Brent's method for a bracketed root of a scalar function (Brent 1973, *Algorithms for
Minimization Without Derivatives*, ch. 4): inverse quadratic interpolation through the last
three iterates, the secant step when only two are distinct, and a bisection step whenever the
interpolated step would leave the bracket's safe part or shrink too slowly.

The steps, their acceptance test and the stopping rule (half the bracket below
(xtol + rtol |x|) / 2, else a step of at least that size) are those of
``scipy.optimize.brentq``, so the roots agree with it to the bit
(``tests/test_closedform_brent.py`` checks this against scipy).  It lives here because
importing ``scipy.optimize`` for one root finder cost a small run's start-up about 0.1 s of
CPU (the whole package loads, with scipy.special, scipy.fft and scipy.spatial), more than the
exact engine's own work on a small circuit (tests/benchmarks/RESULTS.md, "Start-up and small
circuits").
"""

from __future__ import annotations

import math
from typing import Callable


def _opposite(a: float, b: float) -> bool:
    """Whether ``a`` and ``b`` are non-zero with opposite signs (a sign test, not a product:
    the product of two tiny values underflows to 0)."""
    return a != 0 and b != 0 and math.copysign(1.0, a) != math.copysign(1.0, b)


def brentq(fun: Callable[[float], float], a: float, b: float, xtol: float, rtol: float,
           maxiter: int, fa: float | None = None, fb: float | None = None) -> float:
    """The root of ``fun`` in [a, b] (``fun(a)`` and ``fun(b)`` of opposite signs or zero).

    Args:
        fun: a scalar function of one float (same units as its root's argument).
        a, b: the bracket's ends.
        xtol, rtol: the root is known to within xtol + rtol |root| (xtol > 0).
        maxiter: at most this many steps.
        fa, fb: ``fun(a)`` and ``fun(b)`` when the caller has them (saves two calls).

    Raises:
        ValueError: the ends do not bracket a root, or ``fun`` returned NaN.
        RuntimeError: no convergence within ``maxiter`` steps.
    """
    x_prev, x_cur = float(a), float(b)
    f_prev = float(fun(x_prev) if fa is None else fa)
    f_cur = float(fun(x_cur) if fb is None else fb)
    if f_prev * f_cur > 0:
        raise ValueError("the ends do not bracket a root (same sign)")
    if f_prev == 0:
        return x_prev
    if f_cur == 0:
        return x_cur
    x_blk = f_blk = step_prev = step_cur = 0.0
    for _ in range(maxiter):
        if _opposite(f_prev, f_cur):        # the root lies between x_cur and x_prev: new bracket
            x_blk, f_blk = x_prev, f_prev
            step_prev = step_cur = x_cur - x_prev
        if abs(f_blk) < abs(f_cur):          # keep the better end as x_cur
            x_prev, x_cur, x_blk = x_cur, x_blk, x_cur
            f_prev, f_cur, f_blk = f_cur, f_blk, f_cur
        delta = float(xtol + rtol * abs(x_cur)) / 2   # a float: numpy scalars would warn
        half = (x_blk - x_cur) / 2
        if f_cur == 0 or abs(half) < delta:
            return x_cur
        step_prev, step_cur = _step(x_prev, f_prev, x_cur, f_cur, x_blk, f_blk,
                                    step_prev, step_cur, half, delta)
        x_prev, f_prev = x_cur, f_cur
        x_cur += step_cur if abs(step_cur) > delta else (delta if half > 0 else -delta)
        f_cur = float(fun(x_cur))
        if math.isnan(f_cur):
            raise ValueError(f"the function value at x={x_cur} is NaN")
    raise RuntimeError(f"no convergence after {maxiter} steps (last x={x_cur})")


def _step(x_prev: float, f_prev: float, x_cur: float, f_cur: float, x_blk: float,
          f_blk: float, step_prev: float, step_cur: float, half: float,
          delta: float) -> tuple[float, float]:
    """(previous step, next step): the interpolated step when it is safe and shrinks the
    bracket fast enough, else the bisection step ``half`` for both."""
    if abs(step_prev) > delta and abs(f_cur) < abs(f_prev):
        try:
            if x_prev == x_blk:              # two distinct points: secant
                trial = -f_cur * (x_cur - x_prev) / (f_cur - f_prev)
            else:                            # three: inverse quadratic interpolation
                d_prev = (f_prev - f_cur) / (x_prev - x_cur)
                d_blk = (f_blk - f_cur) / (x_blk - x_cur)
                trial = -f_cur * (f_blk * d_blk - f_prev * d_prev) / (d_blk * d_prev
                                                                      * (f_blk - f_prev))
        except ZeroDivisionError:            # C gives inf or NaN here: the test below fails
            return half, half                # and the step bisects, as scipy's brentq does
        if 2 * abs(trial) < min(abs(step_prev), 3 * abs(half) - delta):
            return step_cur, trial
    return half, half
