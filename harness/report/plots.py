"""One waveform plot per check, as PNG bytes (matplotlib object API on the Agg canvas).

The figure shows, for the check's interval: the numeric waveform, the closed-form curve, the
curve the hand values predict, the event (a vertical line) and the jump x(t_k-) -> x(t_k+)
(an arrow).  Time runs from the event (t - t_k, so τ can be read off directly; the event time is
in the axis label).  Axes carry SI prefixes through matplotlib's ``EngFormatter``.  No pyplot,
no global state and no display: ``Figure`` plus ``FigureCanvasAgg`` render off-screen anywhere.

The hand curve is the classical first-order response
    x(t) = x_inf + (x(t_k+) - x_inf) * exp(-(t - t_k) / tau)           for t >= t_k
with each of x(t_k+), x_inf and tau taken from the hand values and, where the hand left a field
out, from the closed form (then the numeric value).  ``Trace.hand_t``/``hand_x``, when the
comparator supplies them, are drawn instead.
"""

from __future__ import annotations

import io
import math

import numpy as np

from ..outcome import CheckResult, FieldResult
from . import common

#: figure size in inches and resolution: 7 x 4 in at 90 dpi is 630 x 360 px
SIZE = (7.0, 4.0)
DPI = 90
#: points on the hand-predicted curve
HAND_POINTS = 400

_COLOURS = {"numeric": "#1f5fbf", "closed": "#e07b00", "hand": "#2a9d3a", "event": "#777777",
            "jump": "#c0262d", "estimate": "#8e44ad", "level": "#555555", "mark": "#000000"}


def hand_curve(check: CheckResult,
               t_end: float | None = None) -> tuple[np.ndarray, np.ndarray] | None:
    """The curve the hand values predict, ``(t, x)`` of shape (HAND_POINTS,), or None.

    None when x(t_k+), x_inf or tau cannot be resolved (for example a higher-order probe with no
    hand τ), or tau is not positive.  ``t_end`` defaults to the end of the trace's time axes, or
    t_k + 5 tau without a trace.
    """
    trace = check.trace
    if trace is not None and trace.hand_t is not None and trace.hand_x is not None:
        return np.asarray(trace.hand_t, float), np.asarray(trace.hand_x, float)
    fields = {f.name: f for f in check.fields}
    x0, x_inf, tau = (_resolved(fields.get(name)) for name in ("after", "final", "tau"))
    if x0 is None or x_inf is None or tau is None or not tau > 0:
        return None
    t_k = check.at
    if t_end is None:
        t_end = _trace_end(check)
    if t_end is None or not t_end > t_k:
        t_end = t_k + 5 * tau
    t = np.linspace(t_k, t_end, HAND_POINTS)
    return t, x_inf + (x0 - x_inf) * np.exp(-(t - t_k) / tau)


def _resolved(field: FieldResult | None) -> float | None:
    """Hand value, else closed form, else numeric; None when none is a finite number."""
    if field is None:
        return None
    for candidate in (field.hand, field.closed_form, field.numeric):
        if candidate is not None and math.isfinite(candidate):
            return candidate
    return None


def _trace_end(check: CheckResult) -> float | None:
    trace = check.trace
    if trace is None:
        return None
    ends = [float(np.max(a)) for a in (trace.numeric_t, trace.closed_t) if a is not None and len(a)]
    return max(ends) if ends else None


def _plain(text: str) -> str:
    """Text safe from matplotlib's mathtext (``$`` starts math; escape it)."""
    return text.replace("\\", "\\\\").replace("$", r"\$")


def plot_check(check: CheckResult, title: str = "") -> bytes | None:
    """Render the check's waveform plot as PNG bytes; None when the check has no trace."""
    trace = check.trace
    if trace is None:
        return None
    unit = trace.unit or (check.fields[0].unit if check.fields else "")
    from matplotlib.backends.backend_agg import FigureCanvasAgg  # imported when drawing: a
    from matplotlib.figure import Figure                           # run without reports does
    from matplotlib.ticker import EngFormatter                     # not pay ~0.3 s for it
    fig = Figure(figsize=SIZE, dpi=DPI, layout="constrained")
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    t_k = trace.event if trace.event is not None else check.at
    _draw_curves(ax, check, t_k)
    _draw_signoff(ax, check, unit, t_k)
    _draw_event(ax, check, unit, t_k)
    ax.xaxis.set_major_formatter(EngFormatter(unit="s", places=None))
    ax.yaxis.set_major_formatter(EngFormatter(unit=_symbol(unit)))
    ax.set_xlabel(f"time since the event at t = {common.time(t_k)}", fontsize=9)
    ax.set_ylabel(_plain(_shorten(check.probe, 40)), fontsize=9)
    ax.grid(True, color="#dddddd", linewidth=0.6)
    ax.tick_params(labelsize=9)
    heading = title or common.check_label(check)
    ax.set_title(_plain(_shorten(heading, 80)), fontsize=10, loc="left")
    fig.legend(loc="outside lower center", ncols=3, fontsize=8.5, frameon=False)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=DPI)
    return buffer.getvalue()


def _draw_curves(ax, check: CheckResult, t_k: float) -> None:
    """Numeric, closed-form and hand curves against time since the event, t - t_k."""
    trace = check.trace
    if trace.numeric_t is not None and len(trace.numeric_t):
        ax.plot(np.asarray(trace.numeric_t) - t_k, trace.numeric_x, color=_COLOURS["numeric"],
                linewidth=2.4, alpha=0.55, label="numeric")
    if trace.closed_t is not None and len(trace.closed_t):
        ax.plot(np.asarray(trace.closed_t) - t_k, trace.closed_x, color=_COLOURS["closed"],
                linewidth=1.3, linestyle="--", label="closed form")
    curve = hand_curve(check)
    if curve is not None:
        ax.plot(curve[0] - t_k, curve[1], color=_COLOURS["hand"], linewidth=1.3, linestyle=":",
                label="hand values")
        before = {f.name: f for f in check.fields}.get("before")
        start = _trace_start(check)
        if before is not None and before.hand is not None and start is not None \
                and start < check.at:
            ax.plot([start - t_k, check.at - t_k], [before.hand, before.hand],
                    color=_COLOURS["hand"], linewidth=1.3, linestyle=":")


def _draw_signoff(ax, check: CheckResult, unit: str, t_k: float) -> None:
    """Crossing level (dashed line), crossing and peak marks, the one-τ dominant estimate."""
    trace = check.trace
    if trace.estimate_t is not None and trace.estimate_x is not None:
        ax.plot(np.asarray(trace.estimate_t) - t_k, trace.estimate_x, color=_COLOURS["estimate"],
                linewidth=1.1, linestyle=(0, (5, 2, 1, 2)), label="one-τ estimate")
    for label, level in trace.levels:
        ax.axhline(level, color=_COLOURS["level"], linewidth=0.8, linestyle="--",
                   label=_plain(label))
    for label, when, x in trace.marks:
        marker = "x" if label == "crossing" else "^"
        ax.plot([when - t_k], [x], marker=marker, markersize=7, color=_COLOURS["mark"],
                linestyle="none",
                label=_plain(f"{label} +{common.time(when - t_k)}"))


def _trace_start(check: CheckResult) -> float | None:
    trace = check.trace
    starts = [float(np.min(a)) for a in (trace.numeric_t, trace.closed_t)
              if a is not None and len(a)]
    return min(starts) if starts else None


def _draw_event(ax, check: CheckResult, unit: str, t_k: float) -> None:
    """The event line (0 on the relative axis) and, where the trace knows both sides, the jump."""
    trace = check.trace
    ax.axvline(0.0, color=_COLOURS["event"], linewidth=0.9, linestyle="-.",
               label=f"event t = {common.time(t_k)}")
    before, after = trace.before, trace.after
    if before is None or after is None:
        return
    if before == after:
        label = _plain(f"no jump ({common.value(before, unit)})")
    else:
        label = _plain(f"jump {common.value(before, unit)} → {common.value(after, unit)}")
    ax.plot([0.0], [before], marker="o", markersize=5, markerfacecolor="white",
            markeredgecolor=_COLOURS["jump"], linestyle="none", label=label)
    ax.plot([0.0], [after], marker="o", markersize=5, color=_COLOURS["jump"], linestyle="none")
    if before != after:
        ax.annotate("", xy=(0.0, after), xytext=(0.0, before),
                    arrowprops={"arrowstyle": "->", "color": _COLOURS["jump"], "linewidth": 1.4})


def _symbol(unit: str) -> str:
    return {"ohm": "Ω", "1": ""}.get(unit, unit)


def _shorten(text: str, limit: int) -> str:
    return text if len(text) <= limit else text[: limit - 1] + "…"
