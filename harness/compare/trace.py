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
#: the last periods of a repeating window drawn for a check with periodic fields, and the
#: points per interval of them
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


def _grid(exact: Solution, k: int) -> np.ndarray:
    start, end = exact.span(k)
    width = end - start
    return start + width * np.linspace(1e-4, 1.0, GRID_POINTS)


def make_trace(ctx: CheckContext, exp: Expectation, fe: Features) -> Trace:
    """Waveforms of the check's interval: closed form, numeric and the hand-predicted curve."""
    t = _grid(ctx.exact, ctx.k)
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
    events = ctx.circuit.events
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
    """The trace with the last ``PLOT_PERIODS`` periods of the repeating window (each
    interval's waveform in both engines, ``PERIOD_POINTS`` points per interval) and the lines
    of the steady state's and the hand minimum and maximum."""
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
