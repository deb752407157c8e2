"""Small dense linear-algebra helpers shared by the engine's modules: equilibration and a least
squares solve that reports whether the system was consistent."""

from __future__ import annotations

import warnings

import numpy as np
import scipy.linalg as sla
from scipy.linalg import lapack

#: backward-error level below which a least-squares residual counts as rounding
CONSISTENT = 1e-10


#: matrices with at least this many entries, of which at most SPARSE_SHARE are non-zero, are
#: equilibrated and refined on their non-zero entries only (MNA matrices have a few per row)
SPARSE_MIN_ENTRIES = 4096
SPARSE_SHARE = 0.1


def _pattern(a: np.ndarray):
    """(rows, cols, row starts, rows present) of the non-zero entries of a sparse-enough ``a``
    in row-major order, or None for a small or dense one."""
    if a.size < SPARSE_MIN_ENTRIES:
        return None
    rows, cols = np.nonzero(a)
    if rows.size > SPARSE_SHARE * a.size or rows.size == 0:
        return None
    present, starts = np.unique(rows, return_index=True)
    return rows, cols, starts, present


def _row_col_max(scaled: np.ndarray, pattern, shape, by_col) -> tuple[np.ndarray, np.ndarray]:
    """Largest entry of every row and column (0 for an empty one) of a non-negative sparse
    matrix from its non-zero entries ``scaled`` in ``pattern`` order."""
    _, _, starts, present = pattern
    order, cstarts, cpresent = by_col
    rmax, cmax = np.zeros(shape[0]), np.zeros(shape[1])
    rmax[present] = np.maximum.reduceat(scaled, starts)
    cmax[cpresent] = np.maximum.reduceat(scaled[order], cstarts)
    return rmax, cmax


def equilibrate(p: np.ndarray, sweeps: int = 8,
                pattern="find") -> tuple[np.ndarray, np.ndarray]:
    """Row and column scalings (powers of 2) that bring every row and column of |p| to max ~1.

    Ruiz's iteration: divide rows and columns by the square roots of their largest entries, a
    few sweeps (D. Ruiz, "A scaling algorithm to equilibrate both rows and columns norms in
    matrices", RAL-TR-2001-034).  Returns (dr, dc), shapes (m,), (n,), for dr[:, None] * p * dc.
    A sparse p is swept on its non-zero entries only (the same products, O(nnz) per sweep);
    ``pattern`` is its ``_pattern`` when the caller has it already.
    """
    m, n = p.shape
    dr, dc = np.ones(m), np.ones(n)
    if m == 0 or n == 0:
        return dr, dc
    pattern = _pattern(p) if isinstance(pattern, str) else pattern
    by_col = None
    if pattern is None:
        a = np.abs(p)
    else:
        rows, cols = pattern[0], pattern[1]
        a = np.abs(p[rows, cols])
        order = np.argsort(cols, kind="stable")
        cpresent, cstarts = np.unique(cols[order], return_index=True)
        by_col = (order, cstarts, cpresent)
    for _ in range(sweeps):
        if pattern is None:
            scaled = dr[:, None] * a
            scaled *= dc
        else:
            scaled = dr[rows] * a * dc[cols]
        if pattern is None:
            rmax, cmax = scaled.max(axis=1), scaled.max(axis=0)
        else:
            rmax, cmax = _row_col_max(scaled, pattern, (m, n), by_col)
        if not rmax.all():
            rmax[rmax == 0] = 1.0
        if not cmax.all():
            cmax[cmax == 0] = 1.0
        if (rmax == 1.0).all() and (cmax == 1.0).all():
            break                       # a fixed point: further sweeps change nothing
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
    pattern = _pattern(a)                # scaling by powers of 2 keeps the non-zero pattern
    dr, dc = equilibrate(a, pattern=pattern)
    a2, b2 = dr[:, None] * a * dc[None, :], dr * b
    factor = regular_factor(a2, pattern=pattern)
    if factor is not None:
        y = factor.solve(b2)
        correction = factor.solve
    else:
        y, *_ = sla.lstsq(a2, b2)
        correction = None
    y = _refine(a2, b2, y, correction, pattern)
    r2 = b2 - a2 @ y
    bound = CONSISTENT * (np.linalg.norm(a2) * np.linalg.norm(y) + np.linalg.norm(b2))
    x = dc * y
    return x, b - a @ x, bool(np.linalg.norm(r2) <= bound)


#: iterative-refinement steps on the least-squares solution
REFINE_STEPS = 2


def _refine(a: np.ndarray, b: np.ndarray, y: np.ndarray, correction=None,
            pattern="find") -> np.ndarray:
    """Iterative refinement with the residual in extended precision (np.longdouble).

    Wilkinson's classical refinement: each step solves a dy = r for the residual computed in
    more precision than the solve, which recovers the digits an ill-conditioned a loses (parts
    from 1 mOhm to 1 TOhm in one circuit).  A step that does not shrink the residual is undone.
    ``correction(r)`` solves a dy = r (the LU factors of a regular a, O(n^2) per step); without
    it each step is a least-squares solve (an SVD, O(n^3)).
    """
    residual = _wide_residual(a, b, pattern)
    res = residual(y)
    best = float(np.linalg.norm(res))
    for _ in range(REFINE_STEPS):
        if not np.any(res):
            break
        dy = correction(res) if correction is not None else sla.lstsq(a, res)[0]
        trial = y + dy
        res_trial = residual(trial)
        norm = float(np.linalg.norm(res_trial))
        if not norm < best:
            break
        y, best, res = trial, norm, res_trial
    return y


def _wide_residual(a: np.ndarray, b: np.ndarray, pattern="find"):
    """y -> b - a y computed in np.longdouble and rounded to float64 (on the non-zero entries
    of a sparse a: the same products and sums, without the zeros)."""
    wide = np.longdouble
    b_w = b.astype(wide)
    if isinstance(pattern, str):
        pattern = _pattern(a) if a.ndim == 2 else None
    if pattern is None:
        a_w = a.astype(wide)
        return lambda y: (b_w - a_w @ y.astype(wide)).astype(float)
    rows, cols, starts, present = pattern
    vals = a[rows, cols].astype(wide)

    def residual(y: np.ndarray) -> np.ndarray:
        out = b_w.copy()
        out[present] -= np.add.reduceat(vals * y.astype(wide)[cols], starts)
        return out.astype(float)
    return residual


#: from this size on a sparse-enough matrix (``_pattern``) is factored by a sparse LU (below it
#: the dense LU is faster than SuperLU and its norm estimate)
SPARSE_LU_MIN = 500
#: a square system whose estimated reciprocal condition number is above this is solved by LU
REGULAR_RCOND = 1e-10
#: ... from this size on (smaller systems keep the SVD route and its exact results; it is cheap)
REGULAR_MIN_SIZE = 32


class Factor:
    """LU factors of a regular square matrix: dense (LAPACK getrf) or, for a large sparse one,
    sparse (SuperLU with partial pivoting, scipy.sparse.linalg.splu); ``solve(b)`` for b of
    shape (n,) or (n, k)."""

    def __init__(self, dense=None, sparse=None) -> None:
        self._dense, self._sparse = dense, sparse

    def solve(self, b: np.ndarray) -> np.ndarray:
        if self._sparse is not None:
            return self._sparse.solve(np.asarray(b, dtype=float))
        return sla.lu_solve(self._dense, b, check_finite=False)


def regular_factor(a: np.ndarray, rcond_min: float = REGULAR_RCOND,
                   min_size: int = REGULAR_MIN_SIZE, pattern="find") -> Factor | None:
    """LU factors of ``a`` when it is square, of at least ``min_size`` rows, and well
    conditioned (a 1-norm estimate of rcond above ``rcond_min``: LAPACK dgecon, or for a sparse
    a the block estimator of Higham & Tisseur, scipy.sparse.linalg.onenormest, of |a^-1|_1),
    else None.

    For such a matrix the least-squares solution is unique and gelsd would drop no singular
    value, so both give the same x to rounding; LU costs a fraction of the SVD, and a sparse LU
    of an MNA matrix (a few entries per row) a fraction of the dense one.
    """
    n = a.shape[0]
    if a.shape != (n, n) or n < max(min_size, 1):
        return None
    if n < SPARSE_LU_MIN:
        pattern = None
    elif isinstance(pattern, str):
        pattern = _pattern(a)
    if pattern is not None:
        return _sparse_factor(a, pattern, rcond_min)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", sla.LinAlgWarning)
        try:
            lu, piv = sla.lu_factor(a, check_finite=False)
        except (ValueError, np.linalg.LinAlgError):
            return None
    if not np.all(np.isfinite(lu)) or np.any(np.diagonal(lu) == 0):
        return None
    if rcond_estimate(a, lu) > rcond_min:
        return Factor(dense=(lu, piv))
    return None


def _sparse_factor(a: np.ndarray, pattern, rcond_min: float) -> Factor | None:
    """``regular_factor`` for a large sparse a (its non-zeros in ``pattern``): SuperLU with
    threshold 1, i.e. partial pivoting."""
    from scipy.sparse import csc_matrix
    from scipy.sparse.linalg import LinearOperator, onenormest, splu
    if not np.all(np.isfinite(a)):
        return None
    rows, cols = pattern[0], pattern[1]
    try:
        lu = splu(csc_matrix((a[rows, cols], (rows, cols)), shape=a.shape),
                  diag_pivot_thresh=1.0)
    except RuntimeError:                        # exactly singular
        return None
    n = a.shape[0]
    inverse = LinearOperator((n, n), matvec=lu.solve, rmatvec=lambda y: lu.solve(y, trans="T"),
                             dtype=float)
    with np.errstate(all="ignore"):
        inv_norm = float(onenormest(inverse))
    anorm = float(np.abs(a).sum(axis=0).max(initial=0.0))
    if not (np.isfinite(inv_norm) and inv_norm > 0 and anorm > 0):
        return None
    return Factor(sparse=lu) if 1.0 / (anorm * inv_norm) > rcond_min else None


def rcond_estimate(a: np.ndarray, lu: np.ndarray) -> float:
    """LAPACK dgecon's estimate of 1 / (|a|_1 |a^-1|_1) from the LU factors ``lu`` of ``a``
    (0 when the estimate fails).  The estimator (Hager, Higham: Higham, *Accuracy and Stability
    of Numerical Algorithms*, 2nd ed., sec. 15.3) bounds |a^-1|_1 from below, in practice
    within a factor of 3, so the true rcond is rarely below a tenth of the estimate."""
    anorm = float(np.abs(a).sum(axis=0).max(initial=0.0))
    rcond, info = lapack.dgecon(lu, anorm, norm="1")
    return float(rcond) if info == 0 and np.isfinite(rcond) else 0.0
