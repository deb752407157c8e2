"""Thevenin resistance seen by each storage part: the hand method's R_th, computed exactly.

For a capacitor or inductor P in interval k: zero the independent sources, open the other
capacitors, short the other inductors (that is G of the interval, whose inductor rows read
v_p - v_n = 0 and in which capacitors have no entries), keep the controlled sources, open P
itself, inject a 1 A test current into P's p terminal (out of n) and read v_p - v_n.  That ratio
is R_th, so tau = R_th C or L / R_th for a single-storage circuit; with a controlled source the
test-source method includes feedback exactly (Miller: R (1 + A) for an inverting gain -A across
the capacitor).  A terminal pair with no resistive path reads +inf.
"""

from __future__ import annotations

import numpy as np

from ..model import CAPACITOR, INDUCTOR, Circuit
from .linalg import least_squares
from .mna import Layout, Scale, voltage_row


def thevenin_resistances(circuit: Circuit, layout: Layout, scale: Scale,
                         g_scaled: np.ndarray) -> dict[str, float]:
    """Part name -> R_th in ohms for every capacitor and inductor.

    Args:
        g_scaled: the interval's scaled G~ (shape (n, n)), floating groups already pinned.
    """
    out = {}
    for part in circuit.parts:
        if part.kind not in (CAPACITOR, INDUCTOR):
            continue
        g = g_scaled.copy()
        if part.kind == INDUCTOR:
            j = layout.branch(part.name)
            g[j, :] = 0.0
            g[j, j] = 1.0                       # the part itself open: i = 0
        vrow = voltage_row(layout, part.p, part.n)
        rhs = scale.r0 * vrow[:layout.size] * (np.arange(layout.size) < layout.n_nodes)
        out[part.name] = _solve_ratio(g, rhs, vrow)
    return out


def _solve_ratio(g: np.ndarray, rhs: np.ndarray, vrow: np.ndarray) -> float:
    """v = vrow . x for G~ x = rhs (1 A injected, scaled); +inf if no solution or not unique."""
    x, _, consistent = least_squares(g, rhs)
    if not consistent:
        return float("inf")
    _, sv, vh = np.linalg.svd(g)
    null = vh[sv <= 1e-12 * sv.max()]
    if null.shape[0] and np.max(np.abs(null @ vrow)) > 1e-9:
        return float("inf")
    return float(vrow @ x)
