"""One plot per file: every probe of its ``[[expect]]`` blocks across the whole schedule.

Each interval is drawn from its event to the next (the last until it settles), so the plot shows
what the circuit does, pulses and all; one panel per unit (volts, amperes), absolute time on the
x-axis, the events as thin vertical lines (the first ``MAX_EVENT_LINES``), closed form as a line
and the numeric waveform as a wide pale line beneath it in the same colour.  Each panel spans at
least ``plots.MIN_SPAN`` of its largest probe scale.
"""

from __future__ import annotations

import numpy as np

from ..outcome import FileResult
from . import common, plots

#: the key of a file's schedule plot beside its check indices: (file index, SCHEDULE)
SCHEDULE = "schedule"
#: events drawn as vertical lines, at most
MAX_EVENT_LINES = 60
#: figure size in inches (taller than a check's plot for a panel per unit)
SIZE = (8.0, 4.2)
_PALETTE = ("#1f5fbf", "#e07b00", "#2a9d3a", "#c0262d", "#8e44ad", "#17807e", "#8c564b",
            "#d6277f")


def plot_schedule(file: FileResult) -> bytes | None:
    """The whole-schedule plot as PNG bytes; None without a schedule or probes."""
    sched = file.schedule
    if sched is None or not sched.probes:
        return None
    units = list(dict.fromkeys(p.unit for p in sched.probes))
    height = SIZE[1] + 1.6 * (len(units) - 1)
    fig, axes = plots.new_figure(len(units), (SIZE[0], height))
    axes = axes if isinstance(axes, list) else [axes]
    for n, probe in enumerate(sched.probes):
        ax = axes[units.index(probe.unit)]
        colour = _PALETTE[n % len(_PALETTE)]
        if probe.numeric_x is not None:
            ax.plot(probe.t, probe.numeric_x, color=colour, linewidth=3.0, alpha=0.25)
        ax.plot(probe.t, probe.closed_x, color=colour, linewidth=1.3,
                label=plots.plain(plots.shorten(probe.probe, 40)))
    for ax, unit in zip(axes, units):
        for when in sched.events[:MAX_EVENT_LINES]:
            ax.axvline(when, color="#999999", linewidth=0.6, linestyle=":")
        plots.axis_format(ax, unit)
        scale = max(p.scale for p in sched.probes if p.unit == unit)
        plots.keep_span(ax, scale)
        ax.set_ylabel(_unit_name(unit), fontsize=9)
    axes[-1].set_xlabel(f"time (events: {_events_text(sched.events)}; a wide pale line is "
                        f"the numeric waveform)", fontsize=9)
    title = common.printable(f"whole schedule: {file.title or file.file}")
    axes[0].set_title(plots.plain(plots.shorten(title, 90)), fontsize=10, loc="left")
    plots.legend_below(fig, axes, 4)
    start = float(np.nanmin([p.t.min() for p in sched.probes]))
    end = float(np.nanmax([p.t.max() for p in sched.probes]))
    axes[0].set_xlim(start, end)
    return plots.png(fig, axes)


def _unit_name(unit: str) -> str:
    return {"V": "voltage", "A": "current"}.get(unit, unit)


def _events_text(events) -> str:
    shown = ", ".join(common.time(t) for t in events[:6])
    return shown + (f" … {len(events)} in all" if len(events) > 6 else "")
