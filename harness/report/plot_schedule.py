"""One plot per file: every probe of its ``[[expect]]`` blocks across the whole schedule.

Each interval is drawn from its event to the next (the last until it settles), so the plot shows
what the circuit does, pulses and all; one panel per unit (volts, amperes), absolute time on the
x-axis, the events as thin vertical lines (the first ``MAX_EVENT_LINES``), closed form as a line
and the numeric waveform as a wide pale line beneath it in the same colour.  Each panel spans at
least ``plots.MIN_SPAN`` of its largest probe scale.  SVG text (``svg``), as the checks' plots.
"""

from __future__ import annotations

import numpy as np

from ..outcome import FileResult
from . import common, plots
from .svg import Chart, Style
from .svgdraw import render

#: the key of a file's schedule plot beside its check indices: (file index, SCHEDULE)
SCHEDULE = "schedule"
#: events drawn as vertical lines, at most
MAX_EVENT_LINES = 60
#: the chart's width, px, and a panel's height with one unit and with more
WIDTH, HEIGHT, HEIGHT_SHARED = 720, 260, 190
_PALETTE = ("#1f5fbf", "#e07b00", "#2a9d3a", "#c0262d", "#8e44ad", "#17807e", "#8c564b",
            "#d6277f")
_EVENT = Style("#999999", 0.8, "1.2,2.2")


def plot_schedule(file: FileResult) -> str | None:
    """The whole-schedule plot as SVG text; None without a schedule or probes."""
    sched = file.schedule
    if sched is None or not sched.probes:
        return None
    units = list(dict.fromkeys(p.unit for p in sched.probes))
    title = common.printable(f"whole schedule: {file.title or file.file}")
    chart = Chart(WIDTH, plots.shorten(title, 86))
    height = HEIGHT if len(units) == 1 else HEIGHT_SHARED
    axes = [chart.panel(height, xunit="s", yunit=plots.unit_symbol(unit), ylabel=_unit_name(unit),
                        x_tick_labels=n == len(units) - 1) for n, unit in enumerate(units)]
    for n, probe in enumerate(sched.probes):
        ax = axes[units.index(probe.unit)]
        colour = _PALETTE[n % len(_PALETTE)]
        if probe.numeric_x is not None:
            ax.line(probe.t, probe.numeric_x, Style(colour, 3.8, opacity=0.25), kind="numeric")
        ax.line(probe.t, probe.closed_x, Style(colour, 1.6),
                plots.shorten(common.printable(probe.probe), 40), "closed")
    start = float(np.nanmin([p.t.min() for p in sched.probes]))
    end = float(np.nanmax([p.t.max() for p in sched.probes]))
    for ax, unit in zip(axes, units):
        for when in sched.events[:MAX_EVENT_LINES]:
            ax.vline(when, _EVENT)
        ax.xlim = (start, end)
        plots.keep_span(ax, max(p.scale for p in sched.probes if p.unit == unit))
    axes[-1].xlabel = (f"time (events: {_events_text(sched.events)}; a wide pale line is the "
                       f"numeric waveform)")
    return render(chart)


def _unit_name(unit: str) -> str:
    return {"V": "voltage", "A": "current"}.get(unit, unit)


def _events_text(events) -> str:
    shown = ", ".join(common.time(t) for t in events[:6])
    return shown + (f" … {len(events)} in all" if len(events) > 6 else "")
