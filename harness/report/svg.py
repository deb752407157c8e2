"""A small SVG writer for the report plots: one or more panels stacked on a shared width, each
with its frame, light grid, ticks with SI-prefixed labels (``scale``) and axis labels, the
drawing clipped to the panel, a title above and one legend below for the whole chart.

A ``Chart`` is built by the plot modules (``plots``, ``plot_schedule``, ``spreads``) and turned
into text once by ``svgdraw.render``: the same text is the ``.svg`` file in the report folder and
is written inline into the HTML page.  Coordinates are pixels of the ``viewBox`` (the chart's
``width`` by its computed height); each panel's drawing is a nested ``<svg>`` whose viewport is
the panel's frame in the outer coordinates, so what lies outside the axes' limits is clipped
without an id that two plots on one page could share.  Every polyline is thinned to the pixel
resolution (``scale.thin``): a waveform of thousands of samples costs a few hundred bytes.

The chart's facts (legend labels, axis limits in SI units, each panel's frame in pixels and
whatever the plot adds) are written as JSON in the ``<metadata>`` element, for whoever reads the
file without eyes (the tests do).  All text goes through ``esc``: untrusted titles and names
are character data, never markup.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from html import escape as _escape

import numpy as np

from ..safetext import printable

SVG_NS = "http://www.w3.org/2000/svg"
#: the fonts asked for, first available wins (a sans-serif face with the Greek and math signs)
FONT = "DejaVu Sans, Verdana, Arial, sans-serif"
#: font sizes, px: tick labels, axis labels, the title, the legend
TICK_FONT, LABEL_FONT, TITLE_FONT, LEGEND_FONT = 11, 12, 13, 11
#: the average glyph width as a fraction of the font size, for laying out text (an estimate on
#: the wide side, so labels do not collide)
GLYPH = 0.62
#: the autoscale margin on each side, a fraction of the data span
MARGIN = 0.05
#: pixels: right margin, tick length, gap between a tick label and its tick, one legend row
RIGHT, TICK, GAP, LEGEND_ROW = 24, 4, 3, 18
#: pixels per tick on x and y (how many ticks an axis gets)
X_TICK_SPACING, Y_TICK_SPACING = 85, 42
_GRID, _FRAME = "#dddddd", "#333333"
#: characters XML 1.0 does not allow, whatever ``printable`` left
_NOT_XML = re.compile("[^\t\n\r\x20-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")
_METADATA = re.compile(r"<metadata>.*?</metadata>", re.S)


def esc(text: object) -> str:
    """Any text as XML character data or a quoted attribute value (control characters shown
    as escapes by ``safetext.printable``)."""
    return _escape(_NOT_XML.sub("\ufffd", printable(str(text))), quote=True)


def text_width(text: str, size: float) -> float:
    """Estimated width in px of ``text`` at font size ``size``."""
    return len(text) * size * GLYPH


def without_metadata(svg: str) -> str:
    """The chart without its ``<metadata>`` facts (for the HTML page, where tables say it)."""
    return _METADATA.sub("", svg, count=1)


@dataclass(frozen=True)
class Style:
    """How a line, marker or bar is drawn: colour, stroke width (px), dash pattern (px, SVG
    ``stroke-dasharray``; "" for solid), opacity."""

    colour: str
    width: float = 1.5
    dash: str = ""
    opacity: float = 1.0

    def stroke(self) -> str:
        out = f'stroke="{self.colour}" stroke-width="{self.width:g}"'
        if self.dash:
            out += f' stroke-dasharray="{self.dash}"'
        if self.opacity < 1:
            out += f' stroke-opacity="{self.opacity:g}"'
        return out


@dataclass
class Panel:
    """One set of axes.  Data are added in SI units; limits are the data's (with ``MARGIN``)
    unless set.  ``xunit``/``yunit``: the unit symbol of SI tick labels, None for plain numbers;
    ``categories``: names for the y ticks at 0, 1, 2 … instead of numbers."""

    height: float
    xunit: str | None = "s"
    yunit: str | None = ""
    xlabel: str = ""
    ylabel: str = ""
    xlim: tuple[float, float] | None = None
    ylim_set: tuple[float, float] | None = None
    categories: list[str] | None = None
    x_tick_labels: bool = True
    items: list = field(default_factory=list)
    legend: list = field(default_factory=list)
    _floor: bool = False

    # ---------------------------------------------------------------- what is drawn
    def line(self, x, y, style: Style, label: str | None = None, kind: str = "") -> None:
        """A polyline through ``(x, y)`` (arrays of shape (n,); non-finite points break it);
        ``kind`` becomes its ``class`` (the tests find the engines' traces by it)."""
        x, y = np.asarray(x, float), np.asarray(y, float)
        if len(x):
            self.items.append(("line", (x, y), style, kind))
            self._label(label, "line", style)

    def hline(self, y: float, style: Style, label: str | None = None) -> None:
        self.items.append(("hline", float(y), style, ""))
        self._label(label, "line", style)

    def vline(self, x: float, style: Style, label: str | None = None) -> None:
        self.items.append(("vline", float(x), style, ""))
        self._label(label, "line", style)

    def marker(self, x: float, y: float, shape: str, style: Style, size: float = 8.0,
               filled: bool = True, label: str | None = None) -> None:
        """A marker: ``shape`` "x", "^" or "o"; ``size`` its width in px."""
        self.items.append(("marker", (float(x), float(y), shape, size, filled), style, ""))
        self._label(label, "marker", style, (shape, size, filled))

    def arrow(self, x: float, y0: float, y1: float, style: Style) -> None:
        """A vertical arrow from ``y0`` to ``y1`` at ``x``."""
        self.items.append(("arrow", (float(x), float(y0), float(y1)), style, ""))

    def bars(self, edges, heights, colour: str, label: str | None = None) -> None:
        """Vertical bars standing on 0 between consecutive ``edges`` (shape (n + 1,))."""
        self.items.append(("bars", (np.asarray(edges, float), np.asarray(heights, float)),
                           Style(colour), ""))
        self._floor = True
        self._label(label, "patch", Style(colour))

    def hbars(self, values, colours: list[str], label: str | None = None) -> None:
        """Horizontal bars from 0 to each value, bar i centred at y = i (height 0.8)."""
        self.items.append(("hbars", (np.asarray(values, float), list(colours)),
                           Style(colours[0] if colours else "#000"), ""))
        self._label(label, "patch", Style(colours[0] if colours else "#000"))

    def _label(self, label, kind, style, extra=None) -> None:
        if label and label not in [entry[0] for entry in self.legend]:
            self.legend.append((label, kind, style, extra))

    # ---------------------------------------------------------------- limits
    def data_limits(self) -> tuple[float, float, float, float]:
        """(x low, x high, y low, y high) of everything drawn, before margins."""
        xs, ys = [], []
        for kind, data, _style, _ in self.items:
            if kind == "line":
                xs.append(data[0])
                ys.append(data[1])
            elif kind == "hline":
                ys.append([data])
            elif kind == "vline":
                xs.append([data])
            elif kind == "marker":
                xs.append([data[0]])
                ys.append([data[1]])
            elif kind == "arrow":
                xs.append([data[0]])
                ys.append(data[1:])
            elif kind == "bars":
                xs.append(data[0])
                ys.append(np.r_[0.0, data[1]])
            elif kind == "hbars":
                xs.append(np.r_[0.0, data[0]])
                ys.append([-0.4, len(data[0]) - 0.6])
        return _extent(xs) + _extent(ys)

    def limits(self) -> tuple[tuple[float, float], tuple[float, float]]:
        """The x and y limits drawn: set ones, else the data's widened by ``MARGIN`` (bars keep
        0 as the bottom)."""
        x0, x1, y0, y1 = self.data_limits()
        xlim = self.xlim or _widen(x0, x1)
        if self.ylim_set:
            return xlim, self.ylim_set
        low, high = _widen(y0, y1)
        if self._floor and y0 >= 0:
            low = 0.0
        return xlim, (low, high)

    def ylim(self) -> tuple[float, float]:
        return self.limits()[1]

    def set_ylim(self, low: float, high: float) -> None:
        self.ylim_set = (float(low), float(high))


def _extent(arrays) -> tuple[float, float]:
    lows, highs = [], []
    for a in arrays:
        a = np.asarray(a, float)
        a = a[np.isfinite(a)]
        if a.size:
            lows.append(float(a.min()))
            highs.append(float(a.max()))
    return (min(lows), max(highs)) if lows else (0.0, 1.0)


def _widen(low: float, high: float) -> tuple[float, float]:
    span = high - low
    if not span > 0:
        pad = abs(low) * 0.05 or 1.0
        return low - pad, high + pad
    return low - MARGIN * span, high + MARGIN * span


@dataclass
class Chart:
    """Panels stacked top to bottom on one width (px), a title and a legend below."""

    width: float
    title: str = ""
    panels: list[Panel] = field(default_factory=list)

    def panel(self, height: float, **options) -> Panel:
        self.panels.append(Panel(height, **options))
        return self.panels[-1]

    def legend_labels(self) -> list[str]:
        return [entry[0] for entry in legend_entries(self.panels)]


def legend_entries(panels: list[Panel]) -> list:
    seen, out = set(), []
    for p in panels:
        for entry in p.legend:
            if entry[0] not in seen:
                seen.add(entry[0])
                out.append(entry)
    return out


def frame_of(facts_: dict, panel: int = 0):
    """(x low, x high, y low, y high) limits and (left, top, width, height) px of a panel, from
    a chart's facts; with ``to_data`` below, a drawn point reads back in SI units."""
    return (*facts_["xlims"][panel], *facts_["ylims"][panel]), facts_["frames"][panel]


def to_data(px: float, py: float, limits, frame) -> tuple[float, float]:
    """A point of the ``viewBox`` read back through a panel's axes: (x, y) in SI units."""
    x0, x1, y0, y1 = limits
    left, top, width, height = frame
    return (x0 + (px - left) / width * (x1 - x0), y0 + (top + height - py) / height * (y1 - y0))
