"""One waveform plot per check, as PNG bytes (matplotlib object API on the Agg canvas).

The figure shows, for the check's interval up to the next event (a dotted vertical line): the
numeric waveform, the closed-form curve, the curve the hand values predict, the event (a
vertical line) and the jump x(t_k-) -> x(t_k+) (an arrow, only where the two differ beyond the
engine tolerance).  Past the next event only the closed form goes on, grey and dashed, labelled
"if held" (the circuit never follows it), for a quarter of the interval or as far as a crossing
or peak mark that lies there (also grey, "if held").  The y-axis spans at least ``MIN_SPAN`` of
the probe's scale.  Time runs from the event (t - t_k, so τ can be read off directly; the event time is
in the axis label).  Axes carry SI prefixes through matplotlib's ``EngFormatter``.  No pyplot,
no global state and no display: ``Figure`` plus ``FigureCanvasAgg`` render off-screen anywhere.

The hand curve is the classical first-order response
    x(t) = x_inf + (x(t_k+) - x_inf) * exp(-(t - t_k) / tau)           for t >= t_k
with each of x(t_k+), x_inf and tau taken from the hand values and, where the hand left a field
out, from the closed form (then the numeric value).  ``Trace.hand_t``/``hand_x``, when the
comparator supplies them, are drawn instead.

A check with periodic steady-state fields gets a second panel: the last periods of the
repeating window in both engines (``Trace.periods_t``) beside the steady state's minimum and
maximum and the hand ones, or the hand ripple about the middle (``Trace.ripple_lines``).
"""

from __future__ import annotations

import io
import json
import math
from dataclasses import dataclass

import numpy as np

from .. import tolerances as tol
from ..compare.curve import first_order
from ..outcome import CheckResult, FieldResult
from ..units import format_apart
from . import common

#: figure size in inches and resolution: 7 x 4 in at 90 dpi is 630 x 360 px
SIZE = (7.0, 4.0)
#: the size with a second panel (the last periods of a repeating window)
PERIODS_SIZE = (7.0, 6.8)
#: the gap between the two panels, a fraction of the mean axis height (room for the upper
#: panel's time label)
PERIODS_GAP = 0.32
DPI = 90
#: points on the hand-predicted curve
HAND_POINTS = 400
#: the y-axis spans at least this fraction of the probe's scale (its largest magnitude)
MIN_SPAN = 0.02
#: past the next event the x-axis goes on for this fraction of the interval (the held
#: continuation, grey), further only to show a mark that lies there
HELD_VIEW = 0.25
#: room left of the event on the x-axis, as a fraction of the axis
X_MARGIN = 0.03
#: figure margins in inches (tick labels and axis label left; the x label below; the title)
#: and the height of one legend row
MARGIN_LEFT, MARGIN_RIGHT, MARGIN_TOP, MARGIN_BOTTOM, LEGEND_ROW = 0.95, 0.2, 0.32, 0.5, 0.2

_COLOURS = {"numeric": "#1f5fbf", "closed": "#e07b00", "hand": "#2a9d3a", "event": "#777777",
            "jump": "#c0262d", "estimate": "#8e44ad", "level": "#555555", "mark": "#000000",
            "held": "#9a9a9a"}


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
    return t, first_order(t, t_k, x0, x_inf, tau)


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


def plain(text: str) -> str:
    """Text safe from matplotlib's mathtext (``$`` starts math; escape it), control and
    bidi-control characters shown as escapes."""
    return common.printable(text).replace("\\", "\\\\").replace("$", r"\$")


def plot_check(check: CheckResult, title: str = "") -> bytes | None:
    """Render the check's waveform plot as PNG bytes; None when the check has no trace."""
    trace = check.trace
    if trace is None:
        return None
    unit = trace.unit or (check.fields[0].unit if check.fields else "")
    periods = trace.periods_t is not None
    fig, axes = new_figure(2, PERIODS_SIZE, share=False) if periods else new_figure()
    ax, axes = (axes[0], axes) if periods else (axes, [axes])
    t_k = trace.event if trace.event is not None else check.at
    view = _view(check, t_k)
    ends = _draw_curves(ax, check, t_k, view)
    _draw_signoff(ax, check, t_k, view)
    _draw_event(ax, check, unit, t_k)
    axis_format(ax, unit)
    width = view.end - t_k
    ax.set_xlim(min(_start(check) - t_k, 0.0) - X_MARGIN * width, view.end - t_k)
    keep_span(ax, trace.scale)
    ax.set_xlabel(f"time since the event at t = {common.time(t_k)}", fontsize=9)
    ax.set_ylabel(plain(shorten(check.probe, 40)), fontsize=9)
    heading = title or common.check_label(check)
    ax.set_title(plain(shorten(heading, 80)), fontsize=10, loc="left")
    if periods:
        _draw_periods(axes[1], trace, unit)
    legend_below(fig, axes, 3)
    if periods:
        fig.subplots_adjust(hspace=PERIODS_GAP)
    return png(fig, axes, curves_end=max(ends, default=None))


def _draw_periods(ax, trace, unit: str) -> None:
    """The last periods of the repeating window in both engines (absolute time), with the
    steady state's minimum and maximum (dotted) and the hand ones or the hand ripple (dashed)
    as horizontal lines."""
    ax.plot(trace.periods_t, trace.periods_numeric, color=_COLOURS["numeric"], linewidth=2.4,
            alpha=0.55, label="_nolegend_")
    ax.plot(trace.periods_t, trace.periods_closed, color=_COLOURS["closed"], linewidth=1.3,
            linestyle="--", label="_nolegend_")
    shown = set()
    for label, level in trace.ripple_lines:
        hand = label.startswith("hand")
        ax.axhline(level, color=_COLOURS["hand" if hand else "closed"], linewidth=1.0,
                   linestyle="--" if hand else ":",
                   label="_nolegend_" if label in shown else plain(label))
        shown.add(label)
    axis_format(ax, unit)
    keep_span(ax, trace.scale)
    ax.set_xlabel("time (the last periods of the repeating window)", fontsize=9)


def new_figure(rows: int = 1, size: tuple[float, float] = SIZE, share: bool = True):
    """A Figure on the Agg canvas (no pyplot, no global state) and its axes (one per row,
    sharing the time axis unless ``share`` is false)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg  # imported when drawing: a
    from matplotlib.figure import Figure                           # run without reports does
    fig = Figure(figsize=size, dpi=DPI)                           # not pay ~0.3 s for it
    FigureCanvasAgg(fig)
    axes = fig.subplots(rows, 1, sharex=share, squeeze=False)[:, 0]
    return fig, (axes[0] if rows == 1 else list(axes))


def legend_below(fig, axes, ncols: int) -> None:
    """The figure's legend centred under the axes, and the margins set by hand for it, the
    tick labels and the titles: a fixed layout draws the figure once, where a constrained
    layout drew it twice (40 % of the plot time)."""
    labels = []
    for ax in axes:
        labels += [lab for lab in ax.get_legend_handles_labels()[1] if lab not in labels]
    width, height = fig.get_size_inches()
    rows = math.ceil(len(labels) / ncols) if labels else 0
    legend = LEGEND_ROW * rows
    fig.subplots_adjust(left=MARGIN_LEFT / width, right=1 - MARGIN_RIGHT / width,
                        top=1 - MARGIN_TOP / height, bottom=(MARGIN_BOTTOM + legend) / height,
                        hspace=0.15)
    if labels:
        fig.legend(loc="lower center", bbox_to_anchor=(0.5, 0.0), ncols=ncols, fontsize=8.5,
                   frameon=False)


def axis_format(ax, unit: str) -> None:
    """SI-prefixed ticks (time on x, the probe's unit on y) and the light grid."""
    from matplotlib.ticker import EngFormatter
    ax.xaxis.set_major_formatter(EngFormatter(unit="s", places=None))
    ax.yaxis.set_major_formatter(EngFormatter(unit=_symbol(unit)))
    ax.grid(True, color="#dddddd", linewidth=0.6)
    ax.tick_params(labelsize=9)


def keep_span(ax, scale: float) -> None:
    """Widen the y-axis to at least ``MIN_SPAN`` of the probe's scale about its middle, so a
    probe that hardly moves is not drawn at the scale of its rounding."""
    low, high = ax.get_ylim()
    span = MIN_SPAN * scale
    if span > 0 and high - low < span:
        middle = 0.5 * (low + high)
        ax.set_ylim(middle - span / 2, middle + span / 2)


def png(fig, axes, **facts) -> bytes:
    """The figure as PNG bytes, with its legend labels and axis limits (SI units, times as on the
    axes) in the PNG text chunk ``tauproof`` (JSON) for whoever reads the file without eyes."""
    labels = []
    for ax in axes:
        labels += [label for label in ax.get_legend_handles_labels()[1] if label not in labels]
    facts = {"legend": labels, "xlim": list(axes[0].get_xlim()),
             "ylim": list(axes[0].get_ylim()), "ylims": [list(ax.get_ylim()) for ax in axes],
             **facts}
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=DPI,
                metadata={"tauproof": json.dumps(facts, allow_nan=False)})
    return buffer.getvalue()


@dataclass(frozen=True)
class _View:
    """What the plot shows: the next event (s, absolute; None for the last interval) and the end
    of the x-axis (s, absolute)."""

    next_event: float | None
    end: float


def _view(check: CheckResult, t_k: float) -> _View:
    """Up to the next event plus ``HELD_VIEW`` of the interval (to show where a mark on the held
    continuation lies, at most its span); the whole trace for the last interval."""
    trace, end = check.trace, _trace_end(check)
    nxt = trace.next_event
    if nxt is None or end is None or not t_k < nxt < end:
        return _View(None, end if end is not None else t_k)
    width = nxt - t_k
    beyond = [when for _, when, _ in trace.marks if when > nxt]
    stop = max([nxt + HELD_VIEW * width] + [w + 0.1 * width for w in beyond])
    return _View(nxt, min(stop, end))


def _start(check: CheckResult) -> float:
    start = _trace_start(check)
    return start if start is not None else check.at


def _split(t: np.ndarray, x: np.ndarray, cut: float | None):
    """(t, x) up to ``cut`` (its value there interpolated) and (t, x) from it; the second is
    empty without a cut."""
    t, x = np.asarray(t, float), np.asarray(x, float)
    if cut is None or not t.size or cut >= t[-1]:
        return (t, x), (t[:0], x[:0])
    at = float(np.interp(cut, t, x))
    inside = t < cut
    return ((np.append(t[inside], cut), np.append(x[inside], at)),
            (np.insert(t[~inside], 0, cut), np.insert(x[~inside], 0, at)))


def _draw_curves(ax, check: CheckResult, t_k: float, view: _View) -> list[float]:
    """Numeric, closed-form and hand curves against t - t_k, each up to the next event; the
    closed form's held continuation beyond it grey and dashed ("if held").  Returns the
    absolute times where the solid curves end."""
    trace, ends = check.trace, []
    styles = [(trace.numeric_t, trace.numeric_x, dict(color=_COLOURS["numeric"], linewidth=2.4,
                                                      alpha=0.55, label="numeric")),
              (trace.closed_t, trace.closed_x, dict(color=_COLOURS["closed"], linewidth=1.3,
                                                    linestyle="--", label="closed form"))]
    curve = hand_curve(check)
    if curve is not None:
        styles.append((curve[0], curve[1], dict(color=_COLOURS["hand"], linewidth=1.3,
                                                linestyle=":", label="hand values")))
    for t, x, style in styles:
        if t is None or not len(t):
            continue
        (t_in, x_in), held = _split(t, x, view.next_event)
        ax.plot(t_in - t_k, x_in, **style)
        ends.append(float(t_in[-1]))
        if style["label"] == "closed form" and len(held[0]):
            shown = held[0] <= view.end
            ax.plot(held[0][shown] - t_k, held[1][shown], color=_COLOURS["held"],
                    linewidth=1.1, linestyle=(0, (4, 3)), label="closed form if held")
    return ends


def _draw_signoff(ax, check: CheckResult, t_k: float, view: _View) -> None:
    """Crossing level (dashed line), crossing and peak marks (grey and "if held" past the next
    event), the one-τ dominant estimate up to the next event."""
    trace = check.trace
    if trace.estimate_t is not None and trace.estimate_x is not None:
        (t, x), _ = _split(trace.estimate_t, trace.estimate_x, view.next_event)
        ax.plot(t - t_k, x, color=_COLOURS["estimate"], linewidth=1.1,
                linestyle=(0, (5, 2, 1, 2)), label="one-τ estimate")
    for label, level in trace.levels:
        ax.axhline(level, color=_COLOURS["level"], linewidth=0.8, linestyle="--",
                   label=plain(label))
    for label, when, x in trace.marks:
        held = view.next_event is not None and when > view.next_event
        text = f"{label} +{common.time(when - t_k)}" + (" (if held)" if held else "")
        ax.plot([when - t_k], [x], marker="x" if label == "crossing" else "^", markersize=7,
                color=_COLOURS["held" if held else "mark"], linestyle="none", label=plain(text))
    if view.next_event is not None:
        ax.axvline(view.next_event - t_k, color=_COLOURS["event"], linewidth=0.9,
                   linestyle=(0, (1, 2)), label=f"next event t = {common.time(view.next_event)}")


def _trace_start(check: CheckResult) -> float | None:
    trace = check.trace
    starts = [float(np.min(a)) for a in (trace.numeric_t, trace.closed_t)
              if a is not None and len(a)]
    return min(starts) if starts else None


def _draw_event(ax, check: CheckResult, unit: str, t_k: float) -> None:
    """The event line (0 on the relative axis) and, where the trace knows both sides, the jump
    (named a jump only when the two sides differ beyond the engine tolerance)."""
    trace = check.trace
    ax.axvline(0.0, color=_COLOURS["event"], linewidth=0.9, linestyle="-.",
               label=f"event t = {common.time(t_k)}")
    before, after = trace.before, trace.after
    if before is None or after is None:
        return
    jumps = not tol.agree(before, after, tol.ENGINE_RELATIVE, tol.ENGINE_FLOOR * trace.scale)
    if jumps:
        a, b = format_apart([before, after], unit)
        label = plain(f"jump {a} → {b}")
    else:
        label = plain(f"no jump ({common.value(after, unit)})")
    ax.plot([0.0], [before], marker="o", markersize=5, markerfacecolor="white",
            markeredgecolor=_COLOURS["jump"], linestyle="none", label=label)
    ax.plot([0.0], [after], marker="o", markersize=5, color=_COLOURS["jump"], linestyle="none")
    if jumps:
        ax.annotate("", xy=(0.0, after), xytext=(0.0, before),
                    arrowprops={"arrowstyle": "->", "color": _COLOURS["jump"], "linewidth": 1.4})


def _symbol(unit: str) -> str:
    return {"ohm": "Ω", "1": ""}.get(unit, unit)


def shorten(text: str, limit: int) -> str:
    return text if len(text) <= limit else text[: limit - 1] + "…"
