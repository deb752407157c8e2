"""The min and max of a field over the box of spreads, with the corner that gives them.

Up to ``VERTEX_LIMIT`` varied quantities every vertex of the box is evaluated in one batch;
above it, the two sensitivity-signed corners (each quantity at the edge its sensitivity points
to).  Either way the best point is then refined by a bounded coordinate search: on each axis a
bounded scalar minimisation (Brent's method, ``scipy.optimize.minimize_scalar``) over the whole
spread, repeated while it improves, so a field that turns inside the box (a crossing time with a
minimum in one part) is still found.  Any evaluated point (Monte Carlo samples included) that is
more extreme wins.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize_scalar

VERTEX_LIMIT = 16
PASSES = 3


@dataclass(frozen=True)
class Extreme:
    """One extreme: its value and the relative deviations of each quantity there."""

    value: float
    corner: np.ndarray
    method: str


def vertices(low: np.ndarray, high: np.ndarray) -> np.ndarray:
    """Every vertex of the box, shape (2^n, n)."""
    return np.array(list(itertools.product(*zip(low, high))), dtype=float).reshape(-1, len(low))


def signed_corners(low, high, gradient: np.ndarray) -> np.ndarray:
    """The corners where each quantity sits at the edge its sensitivity points to (for the
    max) and the opposite one (for the min), shape (2, n)."""
    up = np.where(gradient >= 0, high, low)
    down = np.where(gradient >= 0, low, high)
    return np.vstack([down, up])


def search(fn, low, high, gradients: np.ndarray, extra: np.ndarray | None = None,
           extra_values: np.ndarray | None = None):
    """Min and max of every column of ``fn`` (deviations (S, n) -> values (S, F)) over the box.

    Args:
        gradients: (F, n) derivatives of each field per relative deviation (signs used above
            the vertex limit).
        extra, extra_values: points already evaluated (Monte Carlo) and their values.

    Returns:
        (list of (min Extreme, max Extreme) per field, the method's name).
    """
    n = len(low)
    if n <= VERTEX_LIMIT:
        points, method = vertices(low, high), "all vertices"
        values = fn(points)
    else:
        method = "sensitivity-signed corners + bounded local search"
        points = np.vstack([signed_corners(low, high, g) for g in gradients])
        values = fn(points)
    if extra is not None and len(extra):
        points = np.vstack([points, extra])
        values = np.vstack([values, extra_values])
    out = []
    for col in range(values.shape[1]):
        pair = []
        for sign in (1.0, -1.0):            # min, then max
            column = sign * values[:, col]
            if not np.isfinite(column).any():
                pair.append(Extreme(float("nan"), np.zeros(n), method))
                continue
            best = int(np.nanargmin(column))
            corner, value = _refine(fn, col, sign, points[best].copy(), column[best], low, high)
            pair.append(Extreme(sign * value, corner, method))
        out.append(tuple(pair))
    return out, method


def _refine(fn, col, sign, corner, value, low, high):
    """Bounded coordinate search from ``corner`` minimising sign·field."""
    for _ in range(PASSES):
        improved = False
        for axis in range(len(corner)):
            def along(d, axis=axis):
                point = corner.copy()
                point[axis] = d
                result = sign * fn(point[None, :])[0, col]
                return result if np.isfinite(result) else np.inf
            found = minimize_scalar(along, bounds=(low[axis], high[axis]), method="bounded",
                                    options={"xatol": 1e-6 * max(high[axis] - low[axis], 1e-12)})
            if found.fun < value - 1e-12 * abs(value):
                corner[axis], value, improved = found.x, found.fun, True
        if not improved:
            break
    return corner, float(value)
