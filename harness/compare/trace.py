"""The waveforms of one check for the plots and the whole-waveform comparison: the closed form,
the numerical engine and the curve the hand values predict, with the crossing and peak marks."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from .. import tolerances as tol
from ..model import Expectation
from ..outcome import Trace
from ..results import Features, Solution
from ..units import format_exact
from .context import CheckContext, snap_zero
from .curve import first_order

#: plot and waveform-comparison grid size per check
GRID_POINTS = 400


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
        deviation = float(np.nanmax(np.abs(numeric_x - closed)) / swing)
    hand_t, hand_x = _hand_curve(exp, fe, t)
    events = ctx.circuit.events
    return Trace(unit=exp.probe.dimension, numeric_t=numeric_t, numeric_x=numeric_x,
                 closed_t=t, closed_x=closed, hand_t=hand_t, hand_x=hand_x,
                 event=events[ctx.k], before=snap_zero(fe.before, ctx.scale),
                 after=snap_zero(fe.after, ctx.scale),
                 deviation=deviation, scale=ctx.scale,
                 next_event=events[ctx.k + 1] if ctx.k + 1 < len(events) else None)


def _hand_curve(exp: Expectation, fe: Features, t: np.ndarray):
    """x∞ + (x(0+) − x∞)·e^(−(t − t_k)/τ) from the hand values, computed ones filling gaps."""
    after = exp.hand.get("after", fe.after)
    final = exp.hand.get("final", fe.final)
    tau = exp.hand.get("tau", fe.tau)
    if after is None or final is None or tau is None or tau <= 0:
        return None, None
    return t, first_order(t, exp.at, after, final, tau)
