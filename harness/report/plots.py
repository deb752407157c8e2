"""One waveform plot per check, as SVG text (``svg``: drawn by this package, no plotting library).

The figure shows, for the check's interval up to the next event (a dotted vertical line): the
numeric waveform, the closed-form curve, the curve the hand values predict, the event (a
vertical line) and the jump x(t_k-) -> x(t_k+) (an arrow, only where the two differ beyond the
engine tolerance).  Past the next event only the closed form goes on, grey and dashed, labelled
"if held" (the circuit never follows it), for a quarter of the interval or as far as a crossing
or peak mark that lies there (also grey, "if held").  The y-axis spans at least ``MIN_SPAN`` of
the probe's scale.  Time runs from the event (t - t_k, so τ can be read off directly; the event time is
in the axis label).  Ticks carry SI prefixes (``scale.si_labels``); each curve is thinned to
the pixel resolution, so a plot is a few kilobytes and takes milliseconds to write.

The hand curve is the classical first-order response
    x(t) = x_inf + (x(t_k+) - x_inf) * exp(-(t - t_k) / tau)           for t >= t_k
with each of x(t_k+), x_inf and tau taken from the hand values and, where the hand left a field
out, from the closed form (then the numeric value).  ``Trace.hand_t``/``hand_x``, when the
comparator supplies them, are drawn instead.

A check with periodic steady-state fields gets a second panel: three periods of the periodic
steady state those fields judge, in both engines (``Trace.periods_t``, time from a period's
start), beside the steady state's minimum and maximum and the hand ones, or the hand ripple
about the middle (``Trace.ripple_lines``).  Without a steady state (the closed form finds
none) the panel shows the repeating window's last periods instead.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .. import tolerances as tol
from ..compare.curve import first_order
from ..outcome import CheckResult, FieldResult
from ..units import format_apart
from . import common
from .svg import Chart, Panel, Style
from .svgdraw import render

#: the chart's width and its panel's height, px (a second panel for the last periods of a
#: repeating window has ``PERIODS_HEIGHT``)
WIDTH, HEIGHT, PERIODS_HEIGHT = 630, 250, 210
#: points on the hand-predicted curve
HAND_POINTS = 400
#: the y-axis spans at least this fraction of the probe's scale (its largest magnitude); the
#: periods panel at least ``PERIODS_MIN_SPAN`` (a steady-state ripple of 1e-4 of the level,
#: 2.3 mV on 24 V, is the signal there, far above the engines' agreement)
MIN_SPAN, PERIODS_MIN_SPAN = 0.02, 1e-5
#: past the next event the x-axis goes on for this fraction of the interval (the held
#: continuation, grey), further only to show a mark that lies there
HELD_VIEW = 0.25
#: room left of the event on the x-axis, as a fraction of the axis
X_MARGIN = 0.03
#: characters of the title and of the y-axis label, at most
TITLE_CHARS, LABEL_CHARS = 76, 40

_COLOURS = {"numeric": "#1f5fbf", "closed": "#e07b00", "hand": "#2a9d3a", "event": "#777777",
            "jump": "#c0262d", "estimate": "#8e44ad", "level": "#555555", "mark": "#000000",
            "held": "#9a9a9a"}
#: how each curve and line is drawn (widths and dashes in px): the numeric waveform wide and
#: pale beneath the closed form's dashes, the hand curve dotted
STYLES = {"numeric": Style(_COLOURS["numeric"], 3.0, opacity=0.55),
          "closed": Style(_COLOURS["closed"], 1.6, "6,2.6"),
          "hand": Style(_COLOURS["hand"], 1.8, "1.8,2.6"),
          "held": Style(_COLOURS["held"], 1.4, "5.5,4"),
          "estimate": Style(_COLOURS["estimate"], 1.4, "7,2.8,1.4,2.8"),
          "level": Style(_COLOURS["level"], 1.0, "3.7,1.6"),
          "event": Style(_COLOURS["event"], 1.1, "7,1.8,1.1,1.8"),
          "next": Style(_COLOURS["event"], 1.1, "1.1,2.2"),
          "jump": Style(_COLOURS["jump"], 1.7)}


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


def plot_check(check: CheckResult, title: str = "") -> str | None:
    """The check's waveform plot as SVG text; None when the check has no trace."""
    trace = check.trace
    if trace is None:
        return None
    unit = trace.unit or (check.fields[0].unit if check.fields else "")
    heading = title or common.check_label(check)
    chart = Chart(WIDTH, shorten(common.printable(heading), TITLE_CHARS))
    t_k = trace.event if trace.event is not None else check.at
    view = _view(check, t_k)
    ax = chart.panel(HEIGHT, xunit="s", yunit=unit_symbol(unit),
                     xlabel=f"time since the event at t = {common.time(t_k)}",
                     ylabel=shorten(common.printable(check.probe), LABEL_CHARS))
    ends = _draw_curves(ax, check, t_k, view)
    _draw_signoff(ax, check, t_k, view)
    _draw_event(ax, check, unit, t_k)
    width = view.end - t_k
    ax.xlim = (min(_start(check) - t_k, 0.0) - X_MARGIN * width, view.end - t_k)
    keep_span(ax, trace.scale)
    if trace.periods_t is not None:
        _draw_periods(chart.panel(PERIODS_HEIGHT, xunit="s", yunit=unit_symbol(unit)), trace)
    return render(chart, curves_end=max(ends, default=None))


def _draw_periods(ax: Panel, trace) -> None:
    """The periodic steady state the fields judge in both engines (time from a period's start
    at the window's first event; without a steady state, the window's last periods in absolute
    time), with the steady state's minimum and maximum (dotted) and the hand ones or the hand
    ripple (dashed) as horizontal lines."""
    ax.line(trace.periods_t, trace.periods_numeric, STYLES["numeric"], kind="numeric")
    ax.line(trace.periods_t, trace.periods_closed, STYLES["closed"], kind="closed")
    for label, level in trace.ripple_lines:
        hand = label.startswith("hand")
        ax.hline(level, Style(_COLOURS["hand" if hand else "closed"], 1.3,
                              "4.8,2" if hand else "1.3,2.1"), common.printable(label))
    keep_span(ax, trace.scale, PERIODS_MIN_SPAN)
    ax.xlabel = ("time in the periodic steady state (from a period's start)"
                 if trace.periods_steady else "time (the last periods of the repeating window)")


def keep_span(ax: Panel, scale: float, fraction: float = MIN_SPAN) -> None:
    """Widen the y-axis to at least ``fraction`` of the probe's scale about its middle, so a
    probe that hardly moves is not drawn at the scale of its rounding."""
    low, high = ax.ylim()
    span = fraction * scale
    if span > 0 and high - low < span:
        middle = 0.5 * (low + high)
        ax.set_ylim(middle - span / 2, middle + span / 2)


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


def _draw_curves(ax: Panel, check: CheckResult, t_k: float, view: _View) -> list[float]:
    """Numeric, closed-form and hand curves against t - t_k, each up to the next event; the
    closed form's held continuation beyond it grey and dashed ("if held").  Returns the
    absolute times where the solid curves end."""
    trace, ends = check.trace, []
    curves = [(trace.numeric_t, trace.numeric_x, "numeric", "numeric"),
              (trace.closed_t, trace.closed_x, "closed", "closed form")]
    curve = hand_curve(check)
    if curve is not None:
        curves.append((curve[0], curve[1], "hand", "hand values"))
    for t, x, kind, label in curves:
        if t is None or not len(t):
            continue
        (t_in, x_in), held = _split(t, x, view.next_event)
        ax.line(t_in - t_k, x_in, STYLES[kind], label, kind)
        ends.append(float(t_in[-1]))
        if kind == "closed" and len(held[0]):
            shown = held[0] <= view.end
            ax.line(held[0][shown] - t_k, held[1][shown], STYLES["held"],
                    "closed form if held", "held")
    return ends


def _draw_signoff(ax: Panel, check: CheckResult, t_k: float, view: _View) -> None:
    """Crossing level (dashed line), crossing and peak marks (grey and "if held" past the next
    event), the one-τ dominant estimate up to the next event."""
    trace = check.trace
    if trace.estimate_t is not None and trace.estimate_x is not None:
        (t, x), _ = _split(trace.estimate_t, trace.estimate_x, view.next_event)
        ax.line(t - t_k, x, STYLES["estimate"], "one-τ estimate", "estimate")
    for label, level in trace.levels:
        ax.hline(level, STYLES["level"], common.printable(label))
    for label, when, x in trace.marks:
        held = view.next_event is not None and when > view.next_event
        text = f"{label} +{common.time(when - t_k)}" + (" (if held)" if held else "")
        ax.marker(when - t_k, x, "x" if label == "crossing" else "^",
                  Style(_COLOURS["held" if held else "mark"]), 9.0,
                  label=common.printable(text))
    if view.next_event is not None:
        ax.vline(view.next_event - t_k, STYLES["next"],
                 f"next event t = {common.time(view.next_event)}")


def _trace_start(check: CheckResult) -> float | None:
    trace = check.trace
    starts = [float(np.min(a)) for a in (trace.numeric_t, trace.closed_t)
              if a is not None and len(a)]
    return min(starts) if starts else None


def _draw_event(ax: Panel, check: CheckResult, unit: str, t_k: float) -> None:
    """The event line (0 on the relative axis) and, where the trace knows both sides, the jump
    (named a jump only when the two sides differ beyond the engine tolerance)."""
    trace = check.trace
    ax.vline(0.0, STYLES["event"], f"event t = {common.time(t_k)}")
    before, after = trace.before, trace.after
    if before is None or after is None:
        return
    jumps = not tol.agree(before, after, tol.ENGINE_RELATIVE, tol.ENGINE_FLOOR * trace.scale)
    if jumps:
        a, b = format_apart([before, after], unit)
        label = f"jump {a} → {b}"
    else:
        label = f"no jump ({common.value(after, unit)})"
    if jumps:
        ax.arrow(0.0, before, after, STYLES["jump"])
    ax.marker(0.0, before, "o", STYLES["jump"], 7.0, filled=False,
              label=common.printable(label))
    ax.marker(0.0, after, "o", STYLES["jump"], 7.0)


def unit_symbol(unit: str) -> str:
    return {"ohm": "Ω", "1": ""}.get(unit, unit)


def shorten(text: str, limit: int) -> str:
    return text if len(text) <= limit else text[: limit - 1] + "…"
