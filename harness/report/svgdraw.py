"""The drawing of a ``svg.Chart`` as SVG text (``render``): the layout (title, panels, legend rows), each panel's grid,
frame, ticks and labels, its data clipped to the frame, and the legend.

``render`` returns the whole ``<svg>`` element (with the ``xmlns``, so the same text is a valid
file on its own and an inline element of the HTML page); the parts are in the chart's pixel
coordinates.  Only ``svg`` and ``scale`` are used; nothing is global.
"""

from __future__ import annotations

import json

import numpy as np

from . import scale
from .svg import (FONT, GAP, SVG_NS, LABEL_FONT, LEGEND_FONT, LEGEND_ROW, RIGHT, TICK, TICK_FONT, TITLE_FONT,
                  X_TICK_SPACING, Y_TICK_SPACING, _FRAME, _GRID, Chart, Panel, Style,
                  legend_entries, esc, text_width)

#: room above the first panel with a title and without one, px
TOP_TITLE, TOP_BARE = 28, 10
#: room left of the y-axis label's baseline, px
Y_LABEL_X = 15
#: gap below a panel's x-axis texts before the next panel or the legend, px
PANEL_GAP = 10


def render(chart: Chart, **extra) -> str:
    """The chart as SVG text; ``extra`` facts join the legend labels, the axis limits (SI units)
    and the panels' frames (px) in its ``<metadata>`` (JSON: finite numbers, lists, strings)."""
    body, height, frames = draw_chart(chart)
    limits = [p.limits() for p in chart.panels]
    facts = {"legend": chart.legend_labels(), "xlim": list(limits[0][0]),
             "ylim": list(limits[0][1]), "xlims": [list(lim[0]) for lim in limits],
             "ylims": [list(lim[1]) for lim in limits], "frames": frames, **extra}
    meta = esc(json.dumps(facts, allow_nan=False, ensure_ascii=False))
    return (f'<svg xmlns="{SVG_NS}" width="{chart.width:g}" height="{height:g}" '
            f'viewBox="0 0 {chart.width:g} {height:g}" font-family="{FONT}" '
            f'font-size="{TICK_FONT}"><title>{esc(chart.title)}</title>'
            f"<metadata>{meta}</metadata>{body}</svg>")


def draw_chart(chart: Chart) -> tuple[str, float, list[list[float]]]:
    """(the chart's elements, its height in px, each panel's [left, top, width, height])."""
    panels = chart.panels
    y_ticks = [_y_ticks(p) for p in panels]
    left = max(_left_room(p, labels) for p, (_, labels) in zip(panels, y_ticks))
    width = chart.width - left - RIGHT
    top = TOP_TITLE if chart.title else TOP_BARE
    out = ['<rect width="100%" height="100%" fill="#ffffff"/>']
    if chart.title:
        out.append(f'<text x="{left:.0f}" y="{TOP_TITLE - 10}" font-size="{TITLE_FONT}">'
                   f"{esc(chart.title)}</text>")
    frames = []
    for p, ticks in zip(panels, y_ticks):
        frame = (left, top, width, p.height)
        out.append(_panel(p, frame, ticks))
        frames.append([round(v, 3) for v in frame])
        top += p.height + TICK + PANEL_GAP
        top += (GAP + TICK_FONT) * p.x_tick_labels + (GAP + LABEL_FONT + 2) * bool(p.xlabel)
    legend, rows = _legend(legend_entries(panels), chart.width, top)
    out.append(legend)
    return "".join(out), round(top + rows * LEGEND_ROW + 4), frames


def _left_room(p: Panel, labels: list[str]) -> float:
    widest = max((text_width(s, TICK_FONT) for s in labels), default=0.0)
    return round(Y_LABEL_X + 8 + widest + GAP + TICK + (0 if p.ylabel else -Y_LABEL_X + 4))


def _labels(values: np.ndarray, step: float, unit: str | None) -> list[str]:
    return scale.plain_labels(values, step) if unit is None else \
        scale.si_labels(values, step, unit)


def _y_ticks(p: Panel) -> tuple[np.ndarray, list[str]]:
    low, high = p.ylim()
    if p.categories is not None:
        values = np.arange(len(p.categories), dtype=float)
        return values, [esc(c) for c in p.categories]
    values, step = scale.ticks(low, high, max(2, int(p.height / Y_TICK_SPACING)))
    return values, _labels(values, step, p.yunit)


def _x_ticks(p: Panel, low: float, high: float, width: float):
    """Tick values and labels along x, fewer when the labels would touch."""
    target = max(2, int(width / X_TICK_SPACING))
    while True:
        values, step = scale.ticks(low, high, target)
        labels = _labels(values, step, p.xunit)
        room = step / (high - low) * width if high > low else width
        widest = max((text_width(s, TICK_FONT) for s in labels), default=0.0)
        if widest + 8 <= room or target <= 2:
            return values, labels
        target -= 1


def _panel(p: Panel, frame, y_ticks) -> str:
    """Grid, data (clipped), frame, ticks, tick labels and axis labels of one panel."""
    (x0, x1), (y0, y1) = p.limits()
    left, top, width, height = frame
    sx = width / (x1 - x0) if x1 > x0 else 0.0
    sy = height / (y1 - y0) if y1 > y0 else 0.0

    def px(v):
        return left + (np.asarray(v, float) - x0) * sx

    def py(v):
        return top + height - (np.asarray(v, float) - y0) * sy

    xv, xl = _x_ticks(p, x0, x1, width)
    yv, yl = y_ticks
    inside = (yv >= min(y0, y1)) & (yv <= max(y0, y1))
    yv, yl = yv[inside], [s for s, keep in zip(yl, inside) if keep]
    xs, ys = px(xv), py(yv)
    bottom, right = top + height, left + width
    grid = "".join(f"M{x:.1f},{top:.1f}V{bottom:.1f}" for x in xs) + \
        "".join(f"M{left:.1f},{y:.1f}H{right:.1f}" for y in ys)
    marks = "".join(f"M{x:.1f},{bottom:.1f}v{TICK}" for x in xs) + \
        "".join(f"M{left:.1f},{y:.1f}h-{TICK}" for y in ys)
    out = [f'<path d="{grid}" stroke="{_GRID}" stroke-width="0.8" fill="none"/>',
           f'<svg x="{left:g}" y="{top:g}" width="{width:g}" height="{height:g}" '
           f'viewBox="{left:g} {top:g} {width:g} {height:g}" overflow="hidden">',
           _data(p, px, py, frame), "</svg>",
           f'<rect x="{left:g}" y="{top:g}" width="{width:g}" height="{height:g}" fill="none" '
           f'stroke="{_FRAME}" stroke-width="1"/>',
           f'<path d="{marks}" stroke="{_FRAME}" stroke-width="1"/>']
    if p.x_tick_labels:
        base = bottom + TICK + GAP + TICK_FONT * 0.8
        out.append('<g text-anchor="middle">' + "".join(
            f'<text x="{x:.1f}" y="{base:.1f}">{s}</text>' for x, s in zip(xs, xl)) + "</g>")
    out.append('<g text-anchor="end">' + "".join(
        f'<text x="{left - TICK - GAP:.1f}" y="{y + TICK_FONT * 0.35:.1f}">{s}</text>'
        for y, s in zip(ys, yl)) + "</g>")
    out += _axis_labels(p, frame)
    return "".join(out)


def _axis_labels(p: Panel, frame) -> list[str]:
    left, top, width, height = frame
    out = []
    if p.xlabel:
        y = top + height + TICK + GAP + TICK_FONT * p.x_tick_labels + GAP + LABEL_FONT * 0.9
        out.append(f'<text x="{left + width / 2:.1f}" y="{y:.1f}" text-anchor="middle" '
                   f'font-size="{LABEL_FONT}">{esc(p.xlabel)}</text>')
    if p.ylabel:
        out.append(f'<text transform="rotate(-90)" x="{-(top + height / 2):.1f}" '
                   f'y="{Y_LABEL_X}" text-anchor="middle" font-size="{LABEL_FONT}">'
                   f"{esc(p.ylabel)}</text>")
    return out


def _data(p: Panel, px, py, frame) -> str:
    left, top, width, height = frame
    out = []
    for kind, data, style, cls in p.items:
        if kind == "line":
            out.append(_polyline(px(data[0]), py(data[1]), style, cls))
        elif kind == "hline":
            y = float(py(data))
            out.append(f'<path d="M{left:.1f},{y:.1f}H{left + width:.1f}" {style.stroke()}/>')
        elif kind == "vline":
            x = float(px(data))
            out.append(f'<path d="M{x:.1f},{top:.1f}V{top + height:.1f}" {style.stroke()}/>')
        elif kind == "marker":
            x, y, shape, size, filled = data
            out.append(marker(float(px(x)), float(py(y)), shape, size, filled, style))
        elif kind == "arrow":
            out.append(_arrow(float(px(data[0])), float(py(data[1])), float(py(data[2])), style))
        elif kind == "bars":
            out.append(_bars(px(data[0]), py(data[1]), float(py(0.0)), style.colour))
        elif kind == "hbars":
            out.append(_hbars(data[0], data[1], px, py))
    return "".join(out)


def _polyline(x: np.ndarray, y: np.ndarray, style: Style, cls: str) -> str:
    """One path through the finite points, thinned to the pixel resolution (``scale.thin``)."""
    parts = []
    for rx, ry in scale.runs(x, y):
        keep = scale.thin(rx, ry)
        parts.append("M" + " ".join(f"{a:.1f},{b:.1f}" for a, b in
                                    zip(rx[keep].tolist(), ry[keep].tolist())))
    if not parts:
        return ""
    attr = f' class="{esc(cls)}"' if cls else ""
    return (f'<path{attr} d="{"".join(parts)}" fill="none" stroke-linejoin="round" '
            f"{style.stroke()}/>")


def marker(x: float, y: float, shape: str, size: float, filled: bool, style: Style) -> str:
    """An "x" (two strokes), a "^" (filled triangle) or an "o" (a circle, white inside unless
    ``filled``) of width ``size`` px centred on (x, y)."""
    r = size / 2
    if shape == "x":
        return (f'<path d="M{x - r:.1f},{y - r:.1f}L{x + r:.1f},{y + r:.1f}M{x - r:.1f},'
                f'{y + r:.1f}L{x + r:.1f},{y - r:.1f}" stroke="{style.colour}" '
                f'stroke-width="1.6"/>')
    if shape == "^":
        return (f'<path d="M{x:.1f},{y - r:.1f}L{x - r:.1f},{y + 0.8 * r:.1f}H{x + r:.1f}Z" '
                f'fill="{style.colour}"/>')
    fill = style.colour if filled else "#ffffff"
    return (f'<circle cx="{x:.1f}" cy="{y:.1f}" r="{r:.1f}" fill="{fill}" '
            f'stroke="{style.colour}" stroke-width="1.3"/>')


def _arrow(x: float, y0: float, y1: float, style: Style) -> str:
    """A shaft from y0 to y1 with its head at y1, stopping short of the markers there."""
    length = abs(y1 - y0)
    if length < 14:
        return ""
    sign = 1.0 if y1 > y0 else -1.0
    start, tip = y0 + 4 * sign, y1 - 4 * sign
    back = tip - 8 * sign
    return (f'<path d="M{x:.1f},{start:.1f}V{back:.1f}" {style.stroke()}/>'
            f'<path d="M{x:.1f},{tip:.1f}L{x - 4:.1f},{back:.1f}H{x + 4:.1f}Z" '
            f'fill="{style.colour}"/>')


def _bars(edges: np.ndarray, tops: np.ndarray, base: float, colour: str) -> str:
    d = "".join(f"M{a:.1f},{base:.1f}V{t:.1f}H{b:.1f}V{base:.1f}Z"
                for a, b, t in zip(edges[:-1].tolist(), edges[1:].tolist(), tops.tolist())
                if t < base)
    return f'<path d="{d}" fill="{colour}"/>' if d else ""


def _hbars(values: np.ndarray, colours: list[str], px, py) -> str:
    zero = float(px(0.0))
    paths: dict[str, str] = {}
    for i, (v, colour) in enumerate(zip(values.tolist(), colours)):
        x, a, b = float(px(v)), float(py(i + 0.4)), float(py(i - 0.4))
        paths[colour] = paths.get(colour, "") + \
            f"M{min(zero, x):.1f},{a:.1f}H{max(zero, x):.1f}V{b:.1f}H{min(zero, x):.1f}Z"
    return "".join(f'<path d="{d}" fill="{c}"/>' for c, d in paths.items())


def _legend(entries: list, width: float, top: float) -> tuple[str, int]:
    """The legend rows, each centred, from ``top``; and how many rows."""
    rows, row, used = [], [], 0.0
    room = width - 20
    for entry in entries:
        w = 30 + text_width(entry[0], LEGEND_FONT) + 14
        if row and used + w > room:
            rows.append((row, used))
            row, used = [], 0.0
        row.append((entry, w))
        used += w
    if row:
        rows.append((row, used))
    out = []
    for n, (items, used) in enumerate(rows):
        x, y = (width - used) / 2 + 7, top + n * LEGEND_ROW + LEGEND_ROW / 2
        for (label, kind, style, extra), w in items:
            out.append(_sample(x, y, kind, style, extra))
            out.append(f'<text x="{x + 30:.1f}" y="{y + LEGEND_FONT * 0.35:.1f}" '
                       f'font-size="{LEGEND_FONT}">{esc(label)}</text>')
            x += w
    return "".join(out), len(rows)


def _sample(x: float, y: float, kind: str, style: Style, extra) -> str:
    if kind == "marker":
        shape, size, filled = extra
        return marker(x + 12, y, shape, size, filled, style)
    if kind == "patch":
        return f'<rect x="{x + 5:.1f}" y="{y - 5:.1f}" width="16" height="10" fill="{style.colour}"/>'
    return f'<path d="M{x:.1f},{y:.1f}h24" {style.stroke()}/>'
