"""The waveforms of one check for the plots and the whole-waveform comparison: the closed form,
the numerical engine and the curve the hand values predict, with the crossing and peak marks."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from .. import tolerances as tol
from ..fieldspec import field_spec
from ..model import Expectation
from ..outcome import Trace
from ..results import Features, Solution
from ..units import format_exact
from .context import CheckContext, snap_zero
from .curve import first_order

#: plot and waveform-comparison grid size per check
GRID_POINTS = 400
#: below this share of the grid before the next event, a grid over the interval itself is
#: added, to this multiple of the interval (the plot shows a quarter beyond the next event,
#: ``report.plots.HELD_VIEW``)
INTERVAL_SHARE, INTERVAL_VIEW = 0.25, 1.25
#: the steady-state periods drawn for a check with periodic fields, and the points per
#: interval of them
PLOT_PERIODS, PERIOD_POINTS = 3, 120


def with_marks(trace: Trace, fields, dominant, t_k: float, final: float | None) -> Trace:
    """The trace with the crossing/peak marks, the crossing level and the one-τ estimate."""
    marks, levels = [], []
    for f in fields:
        if f.name == "crossing":
            level = f.extra["level"]
            levels.append((f"level {format_exact(level, trace.unit)}", level))
            if f.extra.get("at") is not None:
                marks.append(("crossing", f.extra["at"], f.extra["level"]))
        elif f.name == "peak" and f.extra.get("at") is not None:
            marks.append(("peak", f.extra["at"], f.extra["value"]))
    est_t = est_x = None
    if dominant is not None and dominant.tau and trace.after is not None and final is not None:
        est_t = trace.closed_t
        est_x = first_order(est_t, t_k, trace.after, final, dominant.tau)
    return replace(trace, marks=tuple(marks), levels=tuple(levels), estimate_t=est_t,
                   estimate_x=est_x)


def _grid(exact: Solution, k: int, next_event: float | None) -> np.ndarray:
    """``GRID_POINTS`` times over the interval's span (its held continuation up to settling,
    absolute s), and, where fewer than ``INTERVAL_SHARE`` of them fall before the next event
    (an interval far shorter than its settling), ``GRID_POINTS`` more from the event to
    ``INTERVAL_VIEW`` times the interval: the stretch the plot shows.  Without them a 5 µs
    interval of a 110 ms decay had no point before its next event."""
    start, end = exact.span(k)
    width = end - start
    grid = start + width * np.linspace(1e-4, 1.0, GRID_POINTS)
    if next_event is None or not start < next_event < end or \
            np.count_nonzero(grid < next_event) >= INTERVAL_SHARE * GRID_POINTS:
        return grid
    stop = min(end, start + INTERVAL_VIEW * (next_event - start))
    near = start + (stop - start) * np.linspace(1e-4, 1.0, GRID_POINTS)
    return np.union1d(near, grid)


def make_trace(ctx: CheckContext, exp: Expectation, fe: Features) -> Trace:
    """Waveforms of the check's interval: closed form, numeric and the hand-predicted curve."""
    events = ctx.circuit.events
    t = _grid(ctx.exact, ctx.k, events[ctx.k + 1] if ctx.k + 1 < len(events) else None)
    closed = np.asarray(ctx.exact.waveform(exp.probe, ctx.k, t), dtype=float)
    numeric_t, numeric_x, deviation = t, np.full_like(t, np.nan), None
    if ctx.numeric is not None:
        numeric_x = np.asarray(ctx.numeric.waveform(exp.probe, ctx.k, t), dtype=float)
        swing = max(abs((fe.after or 0.0) - (fe.final if fe.final is not None else closed[-1])),
                    float(np.ptp(closed)), tol.WAVEFORM_SWING_FLOOR * ctx.scale,
                    ctx.noise / tol.WAVEFORM_RELATIVE, 1e-300)
        apart = np.abs(numeric_x - closed)
        if np.any(np.isfinite(apart)):   # none where the numerical engine stopped before
            deviation = float(np.nanmax(apart) / swing)
    hand_t, hand_x = _hand_curve(exp, fe, t)
    trace = Trace(unit=exp.probe.dimension, numeric_t=numeric_t, numeric_x=numeric_x,
                  closed_t=t, closed_x=closed, hand_t=hand_t, hand_x=hand_x,
                  event=events[ctx.k], before=snap_zero(fe.before, ctx.scale),
                  after=snap_zero(fe.after, ctx.scale),
                  deviation=deviation, scale=ctx.scale,
                  next_event=events[ctx.k + 1] if ctx.k + 1 < len(events) else None)
    if ctx.circuit.periodic is None or not any(field_spec(name).periodic for name in exp.hand):
        return trace
    return with_periods(trace, ctx, exp)


def with_periods(trace: Trace, ctx: CheckContext, exp: Expectation) -> Trace:
    """The trace with ``PLOT_PERIODS`` periods of the periodic steady state the fields judge
    (each engine's ``periodic_waveform``, ``PERIOD_POINTS`` points per interval, times from a
    period's start at the window's first event) and the lines of the steady state's and the
    hand minimum and maximum.  The window's own last periods are not it where the window is
    shorter than the settling (a 6-period window that settles in 49); they are drawn instead
    only where the closed form establishes no steady state."""
    steady = _steady_periods(ctx, exp)
    if steady is None:
        return _window_periods(trace, ctx, exp)
    times, closed, numeric = steady
    return replace(trace, periods_t=times, periods_closed=closed, periods_numeric=numeric,
                   ripple_lines=_ripple_lines(ctx, exp), periods_steady=True)


def _steady_periods(ctx: CheckContext, exp: Expectation):
    """(offsets from the window's first event, closed form, numeric) over ``PLOT_PERIODS``
    steady-state periods, or None where the closed form gives no steady-state waveform."""
    window = ctx.circuit.periodic
    marks = [o - window.offsets[0] for o in window.offsets] + [window.period]
    # each interval from just after its event to the next (the value before it), in (0, period]
    within = np.concatenate([a + (b - a) * np.linspace(1e-6, 1.0, PERIOD_POINTS)
                             for a, b in zip(marks[:-1], marks[1:])])
    times = np.concatenate([p * window.period + within for p in range(PLOT_PERIODS)])
    closed = ctx.exact.periodic_waveform(exp.probe, within)
    if closed is None:
        return None
    numeric = None if ctx.numeric is None else ctx.numeric.periodic_waveform(exp.probe, within)
    numeric = np.full_like(within, np.nan) if numeric is None else np.asarray(numeric, float)
    return (times, np.tile(np.asarray(closed, dtype=float), PLOT_PERIODS),
            np.tile(numeric, PLOT_PERIODS))


def _window_periods(trace: Trace, ctx: CheckContext, exp: Expectation) -> Trace:
    """The trace with the last ``PLOT_PERIODS`` periods of the repeating window (absolute
    times, each interval's waveform in both engines) and the lines of ``_ripple_lines``."""
    window, events = ctx.circuit.periodic, ctx.circuit.events
    start = window.end - min(PLOT_PERIODS, window.count) * window.period
    times, closed, numeric = [], [], []
    for k, t_k in enumerate(events):
        if not start - 1e-12 * window.period <= t_k < window.end:
            continue
        t_next = min(events[k + 1], window.end) if k + 1 < len(events) else window.end
        t = t_k + (t_next - t_k) * np.linspace(1e-6, 1.0, PERIOD_POINTS)
        times.append(t)
        closed.append(np.asarray(ctx.exact.waveform(exp.probe, k, t), dtype=float))
        numeric.append(np.full_like(t, np.nan) if ctx.numeric is None else
                       np.asarray(ctx.numeric.waveform(exp.probe, k, t), dtype=float))
    if not times:
        return trace
    return replace(trace, periods_t=np.concatenate(times), periods_closed=np.concatenate(closed),
                   periods_numeric=np.concatenate(numeric), ripple_lines=_ripple_lines(ctx, exp))


def _ripple_lines(ctx: CheckContext, exp: Expectation) -> tuple[tuple[str, float], ...]:
    """(label, value): the exact steady state's minimum and maximum; the hand minimum and
    maximum, or the hand ripple about the steady state's middle (or about the hand average)."""
    within = exp.settle_within if exp.settle_within is not None else tol.SETTLE_FRACTION
    exact = ctx.exact.periodic(exp.probe, within)
    lines = []
    if exact.reason is None:
        lines += [("steady-state minimum", exact.minimum), ("steady-state maximum", exact.maximum)]
    hand, unit = exp.hand, exp.probe.dimension
    if "ripple" in hand and not ("minimum" in hand and "maximum" in hand):
        middle = hand.get("average", None if exact.reason else
                          0.5 * (exact.minimum + exact.maximum))
        if middle is not None:
            text = f"hand ripple {format_exact(hand['ripple'], unit)}"
            lines += [(text, middle - hand["ripple"] / 2), (text, middle + hand["ripple"] / 2)]
    lines += [(f"hand {name}", hand[name]) for name in ("minimum", "maximum") if name in hand]
    return tuple(lines)


def _hand_curve(exp: Expectation, fe: Features, t: np.ndarray):
    """x∞ + (x(0+) − x∞)·e^(−(t − t_k)/τ) from the hand values, computed ones filling gaps."""
    after = exp.hand.get("after", fe.after)
    final = exp.hand.get("final", fe.final)
    tau = exp.hand.get("tau", fe.tau)
    if after is None or final is None or tau is None or tau <= 0:
        return None, None
    return t, first_order(t, exp.at, after, final, tau)
