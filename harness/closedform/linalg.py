"""Small dense linear-algebra helpers shared by the engine's modules: equilibration and a least
squares solve that reports whether the system was consistent."""

from __future__ import annotations

import warnings

import numpy as np
import scipy.linalg as sla
from scipy.linalg import lapack

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
        sr, sc = np.sqrt(rmax), np.sqrt(cmax)
        if np.all(sr == 1.0) and np.all(sc == 1.0):
            break                       # a fixed point: further sweeps change nothing
        dr /= sr
        dc /= sc
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
    y = _regular_solve(a2, b2)
    if y is None:
        y, *_ = sla.lstsq(a2, b2)
    y = _refine(a2, b2, y)
    r2 = b2 - a2 @ y
    bound = CONSISTENT * (np.linalg.norm(a2) * np.linalg.norm(y) + np.linalg.norm(b2))
    x = dc * y
    return x, b - a @ x, bool(np.linalg.norm(r2) <= bound)


#: iterative-refinement steps on the least-squares solution
REFINE_STEPS = 2


def _refine(a: np.ndarray, b: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Iterative refinement with the residual in extended precision (np.longdouble).

    Wilkinson's classical refinement: each step solves a dy = r for the residual computed in
    more precision than the solve, which recovers the digits an ill-conditioned a loses (parts
    from 1 mOhm to 1 TOhm in one circuit).  A step that does not shrink the residual is undone.
    """
    wide = np.longdouble
    a_w = a.astype(wide)
    best = float(np.linalg.norm((b.astype(wide) - a_w @ y.astype(wide)).astype(float)))
    for _ in range(REFINE_STEPS):
        r = (b.astype(wide) - a_w @ y.astype(wide)).astype(float)
        if not np.any(r):
            break
        dy, *_ = sla.lstsq(a, r)
        trial = y + dy
        norm = float(np.linalg.norm((b.astype(wide) - a_w @ trial.astype(wide)).astype(float)))
        if not norm < best:
            break
        y, best = trial, norm
    return y


#: a square system whose estimated reciprocal condition number is above this is solved by LU
REGULAR_RCOND = 1e-10
#: ... from this size on (smaller systems keep the SVD route and its exact results; it is cheap)
REGULAR_MIN_SIZE = 32


def _regular_solve(a: np.ndarray, b: np.ndarray) -> np.ndarray | None:
    """x = a^-1 b by LU with partial pivoting when a is square, of at least REGULAR_MIN_SIZE
    rows, and well conditioned (LAPACK
    dgecon 1-norm estimate of rcond above REGULAR_RCOND), else None.

    For such a matrix the least-squares solution is unique and gelsd would drop no singular
    value, so both give the same x to rounding; LU costs a fraction of the SVD.
    """
    n = a.shape[0]
    if a.shape != (n, n) or n < REGULAR_MIN_SIZE:
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", sla.LinAlgWarning)
        lu, piv = sla.lu_factor(a, check_finite=False)
    if not np.all(np.isfinite(lu)) or np.any(np.diagonal(lu) == 0):
        return None
    anorm = float(np.abs(a).sum(axis=0).max())
    rcond, info = lapack.dgecon(lu, anorm, norm="1")
    if info != 0 or not rcond > REGULAR_RCOND:
        return None
    return sla.lu_solve((lu, piv), b, check_finite=False)
