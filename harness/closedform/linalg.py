"""Small dense linear-algebra helpers shared by the engine's modules: equilibration and a least
squares solve that reports whether the system was consistent."""

from __future__ import annotations

import numpy as np
import scipy.linalg as sla

#: backward-error level below which a least-squares residual counts as rounding
CONSISTENT = 1e-10


def equilibrate(p: np.ndarray, sweeps: int = 8) -> tuple[np.ndarray, np.ndarray]:
    """Row and column scalings (powers of 2) that bring every row and column of |p| to max ~1.

    Ruiz's iteration: divide rows and columns by the square roots of their largest entries, a
    few sweeps (D. Ruiz, "A scaling algorithm to equilibrate both rows and columns norms in
    matrices", RAL-TR-2001-034).  Returns (dr, dc), shapes (m,), (n,), for dr[:, None] * p * dc.
    """
    m, n = p.shape
    dr, dc = np.ones(m), np.ones(n)
    a = np.abs(p)
    for _ in range(sweeps):
        scaled = dr[:, None] * a * dc[None, :]
        rmax, cmax = scaled.max(axis=1, initial=0.0), scaled.max(axis=0, initial=0.0)
        rmax[rmax == 0] = 1.0
        cmax[cmax == 0] = 1.0
        dr /= np.sqrt(rmax)
        dc /= np.sqrt(cmax)
    return np.exp2(np.round(np.log2(dr))), np.exp2(np.round(np.log2(dc)))


def least_squares(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray, bool]:
    """Minimum-norm least-squares x of a x ~ b on the equilibrated system.

    Returns (x, r, consistent): r = b - a x in the original units, and whether the equilibrated
    residual is at rounding level (|r'| <= CONSISTENT (|a'| |x'| + |b'|), the normwise backward
    error criterion of Rigal and Gaches).
    """
    if a.size == 0 or not np.any(b):
        return np.zeros(a.shape[1]), np.zeros(a.shape[0]), True
    if not (np.all(np.isfinite(a)) and np.all(np.isfinite(b))):
        return np.full(a.shape[1], np.nan), np.full(a.shape[0], np.nan), False
    dr, dc = equilibrate(a)
    a2, b2 = dr[:, None] * a * dc[None, :], dr * b
    y, *_ = sla.lstsq(a2, b2)
    r2 = b2 - a2 @ y
    bound = CONSISTENT * (np.linalg.norm(a2) * np.linalg.norm(y) + np.linalg.norm(b2))
    x = dc * y
    return x, b - a @ x, bool(np.linalg.norm(r2) <= bound)
