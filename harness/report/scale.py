"""The numbers behind the SVG plots: tick positions, SI-prefixed tick labels, and polylines thinned
to the pixel resolution.

Ticks are "nice" numbers (a step of 1, 2, 2.5 or 5 times a power of ten, the usual choice for
plot axes: common practice), at most ``target`` of them inside the limits.  Labels share one SI
prefix per axis (chosen by the largest tick) and the decimals the step needs, so ``0.0 ms,
0.5 ms, 1.0 ms`` line up.

``thin`` keeps a polyline's shape to within ``TOLERANCE`` pixels with far fewer vertices: above
``COLUMN_POINTS`` points per pixel column it first keeps, per column, the first, last, lowest and
highest sample (what the column shows), then the Ramer-Douglas-Peucker simplification (Ramer,
Computer Graphics and Image Processing 1, 1972; Douglas and Peucker, Cartographica 10, 1973)
keeps the samples that lie farther than the tolerance from the chord.  Every kept vertex is one of
the samples, so a vertex read back through the axes is an engine's value.
"""

from __future__ import annotations

import math

import numpy as np

#: the nice steps, as multiples of a power of ten
STEPS = (1.0, 2.0, 2.5, 5.0, 10.0)
#: the SI prefixes a tick label uses, by power of ten
PREFIXES = {-15: "f", -12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G",
            12: "T"}
#: the largest distance, in pixels, of a sample from the thinned polyline (beyond the per-column
#: pass, which keeps each column's extent)
TOLERANCE = 0.4
#: above this many samples per pixel column of the axis, a column keeps its extremes first
COLUMN_POINTS = 4
#: decimals a tick label may carry, at most
MAX_DECIMALS = 9


def ticks(low: float, high: float, target: int = 7) -> tuple[np.ndarray, float]:
    """Nice tick values inside ``[low, high]`` (at most ``target`` + 1 of them) and their step."""
    span = high - low
    if not (math.isfinite(span) and span > 0):
        return np.array([low]), 1.0
    raw = span / max(target, 1)
    power = 10.0 ** math.floor(math.log10(raw))
    step = next(m * power for m in STEPS if m * power >= raw * (1 - 1e-9))
    first = math.ceil(low / step - 1e-9)
    last = math.floor(high / step + 1e-9)
    values = np.arange(first, last + 1) * step
    values[np.abs(values) < 1e-9 * step] = 0.0
    return values, step


def _decimals(step: float) -> int:
    """Decimals that write ``step`` (already scaled by the prefix) exactly."""
    for d in range(MAX_DECIMALS + 1):
        if abs(round(step, d) - step) <= 1e-6 * step:
            return d
    return MAX_DECIMALS


def si_labels(values: np.ndarray, step: float, unit: str) -> list[str]:
    """``values`` as ``1.5 ms``: one prefix for the axis (by the largest magnitude), the decimals
    of the step, a true minus sign; ``unit`` "" gives bare prefixed numbers (``2 k``)."""
    top = float(np.max(np.abs(values))) if len(values) else 0.0
    power = 0 if top == 0 else 3 * math.floor(math.log10(top) / 3 + 1e-9)
    power = min(max(power, -15), 12)
    scale = 10.0 ** power
    d = _decimals(step / scale)
    suffix = f" {PREFIXES[power]}{unit}".rstrip()
    return [_number(v / scale, d) + suffix for v in values]


def plain_labels(values: np.ndarray, step: float) -> list[str]:
    """``values`` as plain numbers with the step's decimals (counts, ratios)."""
    d = _decimals(step)
    return [_number(v, d) for v in values]


def _number(v: float, decimals: int) -> str:
    text = f"{v:.{decimals}f}"
    if text.startswith("-"):
        text = "0" + text[1:] if float(text) == 0 else "−" + text[1:]
    return text


def runs(x: np.ndarray, y: np.ndarray) -> list[tuple[np.ndarray, np.ndarray]]:
    """The stretches of ``(x, y)`` where both are finite (a gap breaks the line)."""
    ok = np.isfinite(x) & np.isfinite(y)
    if ok.all():
        return [(x, y)] if len(x) else []
    edges = np.flatnonzero(np.diff(np.r_[0, ok.astype(np.int8), 0]))
    return [(x[a:b], y[a:b]) for a, b in zip(edges[::2], edges[1::2])]


def thin(x: np.ndarray, y: np.ndarray, tolerance: float = TOLERANCE) -> np.ndarray:
    """Indices of the samples to keep of one polyline in pixel coordinates (shape (n,) each),
    in order: the first and last always, the rest as the module text says."""
    n = len(x)
    if n <= 2:
        return np.arange(n)
    index = np.arange(n)
    span = float(np.max(x) - np.min(x))
    if n > COLUMN_POINTS * (span + 1) and np.all(np.diff(x) >= 0):
        index = _column_extremes(x, y)
    keep = _ramer_douglas_peucker(x[index], y[index], tolerance)
    return index[keep]


def _column_extremes(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Per pixel column (x non-decreasing): the first, last, lowest and highest sample."""
    column = np.floor(x).astype(np.int64)
    starts = np.flatnonzero(np.r_[True, column[1:] != column[:-1]])
    ends = np.r_[starts[1:], len(x)] - 1
    order = np.lexsort((y, column))          # by column, then by value within it
    return np.unique(np.concatenate([starts, ends, order[starts], order[ends]]))


def _ramer_douglas_peucker(x: np.ndarray, y: np.ndarray, tolerance: float) -> np.ndarray:
    """Boolean mask of the vertices the simplification keeps (distance to the chord segment).

    Breadth first: each pass measures every sample against the chord of the kept vertices on
    either side of it and keeps, in every chord's stretch, the farthest sample beyond the
    tolerance (ties all kept); the same vertices as the recursive form, in a few array passes
    (about log2 of the vertices kept) instead of one Python step per vertex."""
    n = len(x)
    keep = np.zeros(n, bool)
    keep[0] = keep[-1] = True
    limit = tolerance * tolerance
    points = np.arange(n)
    while True:
        kept = np.flatnonzero(keep)
        chord = np.minimum(np.searchsorted(kept, points, side="right") - 1, len(kept) - 2)
        a, b = kept[chord], kept[chord + 1]
        dx, dy = x[b] - x[a], y[b] - y[a]
        px, py = x - x[a], y - y[a]
        length = dx * dx + dy * dy
        u = np.clip((px * dx + py * dy) / np.where(length > 0, length, 1.0), 0.0, 1.0)
        far = (px - u * dx) ** 2 + (py - u * dy) ** 2
        far[keep] = 0.0
        widest = np.maximum.reduceat(far, kept[:-1])
        hit = (far > limit) & (far == widest[chord])
        if not hit.any():
            return keep
        keep |= hit
