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
    if m == 0 or n == 0:
        return np.ones(m), np.ones(n)
    pattern = _pattern(p) if isinstance(pattern, str) else pattern
    if pattern is None:
        dr, dc = _sweep_dense(np.abs(p), sweeps)
        if not (np.isfinite(dr).all() and np.isfinite(dc).all()):
            dr, dc = _sweep_checked(np.abs(p), sweeps)     # non-finite entries or underflow
    else:
        dr, dc = _sweep_sparse(p, pattern, sweeps)
    return np.exp2(np.round(np.log2(dr))), np.exp2(np.round(np.log2(dc)))


_MAX = np.maximum.reduce


def _sweep_dense(a: np.ndarray, sweeps: int) -> tuple[np.ndarray, np.ndarray]:
    """Ruiz's sweeps on a dense non-negative ``a``, shape (m, n): the unrounded (dr, dc).

    The rows and columns that are zero in ``a`` are found once (a scaled entry is zero only
    where ``a`` is: the scalings stay positive and far from underflow) and their maxima taken
    as 1.  A sweep at the fixed point divides by sqrt(1) = 1 exactly, so running every sweep
    gives the same floats as stopping there; per sweep this is 6 array operations.
    """
    dr, dc = np.ones(a.shape[0]), np.ones(a.shape[1])
    row_zero, col_zero = _MAX(a, axis=1) == 0, _MAX(a, axis=0) == 0
    fix_rows, fix_cols = bool(row_zero.any()), bool(col_zero.any())
    col, scaled = dr[:, None], np.empty_like(a)       # col: a view that follows dr
    for _ in range(sweeps):
        np.multiply(col, a, out=scaled)
        scaled *= dc
        rmax, cmax = _MAX(scaled, axis=1), _MAX(scaled, axis=0)
        if fix_rows:
            rmax[row_zero] = 1.0
        if fix_cols:
            cmax[col_zero] = 1.0
        dr /= np.sqrt(rmax, out=rmax)
        dc /= np.sqrt(cmax, out=cmax)
    return dr, dc


def _ruiz_step(dr: np.ndarray, dc: np.ndarray, rmax: np.ndarray, cmax: np.ndarray) -> bool:
    """One Ruiz update in place: divide dr, dc by the square roots of the row and column maxima
    of the scaled matrix (a zero row or column keeps its scale); True, with nothing changed, at
    the fixed point (every maximum 1)."""
    if not rmax.all():
        rmax[rmax == 0] = 1.0
    if not cmax.all():
        cmax[cmax == 0] = 1.0
    if (rmax == 1.0).all() and (cmax == 1.0).all():
        return True
    dr /= np.sqrt(rmax)
    dc /= np.sqrt(cmax)
    return False


def _sweep_checked(a: np.ndarray, sweeps: int) -> tuple[np.ndarray, np.ndarray]:
    """``_sweep_dense`` testing every sweep's maxima for zeros and the fixed point."""
    dr, dc = np.ones(a.shape[0]), np.ones(a.shape[1])
    for _ in range(sweeps):
        scaled = dr[:, None] * a
        scaled *= dc
        rmax, cmax = scaled.max(axis=1), scaled.max(axis=0)
        if _ruiz_step(dr, dc, rmax, cmax):
            break                       # a fixed point: further sweeps change nothing
    return dr, dc


def _sweep_sparse(p: np.ndarray, pattern, sweeps: int) -> tuple[np.ndarray, np.ndarray]:
    """Ruiz's sweeps on the non-zero entries of a sparse p (``_pattern``), O(nnz) each: the
    unrounded (dr, dc)."""
    m, n = p.shape
    dr, dc = np.ones(m), np.ones(n)
    rows, cols = pattern[0], pattern[1]
    a = np.abs(p[rows, cols])
    order = np.argsort(cols, kind="stable")
    cpresent, cstarts = np.unique(cols[order], return_index=True)
    by_col = (order, cstarts, cpresent)
    for _ in range(sweeps):
        scaled = dr[rows] * a * dc[cols]
        rmax, cmax = _row_col_max(scaled, pattern, (m, n), by_col)
        if _ruiz_step(dr, dc, rmax, cmax):
            break                       # a fixed point: further sweeps change nothing
    return dr, dc


def least_squares(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray, bool]:
    """Minimum-norm least-squares x of a x ~ b on the equilibrated system.

    Returns (x, r, consistent): r = b - a x in the original units, and whether the equilibrated
    residual is at rounding level (|r'| <= CONSISTENT (|a'| |x'| + |b'|), the normwise backward
    error criterion of Rigal and Gaches).  ``LeastSquares(a).solve(b)`` is the same solve with
    the work that depends on a alone kept for further right-hand sides.
    """
    return LeastSquares(a).solve(b)


class LeastSquares:
    """``least_squares`` for one matrix a, shape (m, n), and any number of b, shape (m,).

    The equilibration (``equilibrate``), the scaled a' = dr a dc, its LU factors where
    ``regular_factor`` gives them, its extended-precision copy for the refinement residual and
    its Frobenius norm depend on a alone; they are made on the first ``solve`` that needs them
    and reused, so every b gets the floats ``least_squares(a, b)`` gives.  The last b and its
    answer are kept too: the DC solve at 0- and the pre-step interval's particular solution are
    the same system when the circuit has no switches and no initial values (copies returned).
    """

    def __init__(self, a: np.ndarray) -> None:
        self.a = a
        self._scaled = None
        self._prepared = None
        self._finite = None
        self._last = None
        self.factor: Factor | None = None

    def regular(self, rcond_min: float, min_size: int) -> bool | None:
        """Whether a' (``scaled``) is provably regular at ``rcond_min`` (>= REGULAR_RCOND) from
        the factor the solves use (made here if no solve has needed it yet): True/False when
        that decides it (the same estimate ``regular_factor(a', rcond_min, min_size)`` would
        compute), None when it does not (a' not admitted at REGULAR_RCOND, or not finite)."""
        if rcond_min < REGULAR_RCOND or min_size != REGULAR_MIN_SIZE or self.a.size == 0 \
                or not np.isfinite(self.a).all():
            return None
        if self._prepared is None:
            self._prepare()
        return None if self.factor is None else self.factor.rcond > rcond_min

    def scaled(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(dr, dc, a') of ``equilibrate``: a' = dr[:, None] * a * dc, shapes (m,), (n,), (m, n)."""
        if self._scaled is None:
            a = self.a
            pattern = _pattern(a)        # scaling by powers of 2 keeps the non-zero pattern
            dr, dc = equilibrate(a, pattern=pattern)
            self._scaled = (dr, dc, dr[:, None] * a * dc[None, :], pattern)
        return self._scaled[:3]

    def _prepare(self):
        self.scaled()
        dr, dc, a2, pattern = self._scaled
        factor = self.factor = regular_factor(a2, pattern=pattern)
        svd = factor.solve if factor is not None else _svd_solver(a2)
        self._prepared = (dr, dc, _matvec(a2, pattern), svd, _wide_product(a2, pattern),
                          np.linalg.norm(a2), _matvec(self.a, pattern))
        return self._prepared

    def solve(self, b: np.ndarray) -> tuple[np.ndarray, np.ndarray, bool]:
        """(x, r, consistent) of ``least_squares(a, b)``."""
        a, b = self.a, np.asarray(b)
        if a.size == 0 or not b.any():
            return np.zeros(a.shape[1]), np.zeros(a.shape[0]), True
        if self._finite is None:
            self._finite = bool(np.isfinite(a).all())
        if not (self._finite and np.isfinite(b).all()):
            return np.full(a.shape[1], np.nan), np.full(a.shape[0], np.nan), False
        key = b.tobytes()
        if self._last is not None and self._last[0] == key and b.dtype == self._last[1]:
            x, r, ok = self._last[2]
            return x.copy(), r.copy(), ok
        dr, dc, times_a2, svd, product, anorm, times_a = self._prepared or self._prepare()
        b2 = dr * b
        y = svd(b2)
        y = _refine(self._scaled[2], b2, y, svd, product=product)
        r2 = b2 - times_a2(y)
        bound = CONSISTENT * (anorm * np.linalg.norm(y) + np.linalg.norm(b2))
        x = dc * y
        out = (x, b - times_a(x), bool(np.linalg.norm(r2) <= bound))
        self._last = (key, b.dtype, (out[0].copy(), out[1].copy(), out[2]))
        return out


def _matvec(a: np.ndarray, pattern):
    """y -> a @ y: the dense product, or for a sparse a (``_pattern``) the product on its
    non-zero entries (compressed rows, O(nnz) instead of O(n^2))."""
    if pattern is None:
        return lambda y: a @ y
    from scipy.sparse import csr_matrix
    rows, cols = pattern[0], pattern[1]
    sparse = csr_matrix((a[rows, cols], (rows, cols)), shape=a.shape)
    return lambda y: sparse @ y


def _svd_solver(a: np.ndarray):
    """b -> ``scipy.linalg.lstsq(a, b)[0]`` (LAPACK dgelsd, rcond = machine epsilon) for a
    float64 ``a``, shape (m, n), and b of shape (m,): the same LAPACK call with the same
    workspace, its size queried once, without the wrapper's per-call checks (a b that is not
    finite goes through the wrapper, which raises as before)."""
    m, n = a.shape
    if a.dtype != np.float64 or m == 0 or n == 0:
        return lambda b: sla.lstsq(a, b)[0]
    eps = np.finfo(np.float64).eps
    try:    # scipy's own workspace query (a private helper: without it, use the wrapper)
        gelsd, gelsd_lwork = sla.get_lapack_funcs(("gelsd", "gelsd_lwork"), (a,))
        lwork, iwork = lapack._compute_lwork(gelsd_lwork, m, n, 1, eps)
    except (AttributeError, ValueError, TypeError):
        return lambda b: sla.lstsq(a, b)[0]
    a_f = np.asfortranarray(a)

    def solve(b: np.ndarray) -> np.ndarray:
        if b.dtype != np.float64 or b.shape != (m,) or not np.isfinite(b).all():
            return sla.lstsq(a, b)[0]
        if m < n:
            b = np.concatenate([b, np.zeros(n - m)])
        x, _, _, info = gelsd(a_f, b, lwork, iwork, eps, False, False)
        if info != 0:
            return sla.lstsq(a, b[:m])[0]           # the wrapper's error, as before
        return x[:n] if m > n else x
    return solve


#: iterative-refinement steps on the least-squares solution
REFINE_STEPS = 2


def _refine(a: np.ndarray, b: np.ndarray, y: np.ndarray, correction=None,
            pattern="find", product=None) -> np.ndarray:
    """Iterative refinement with the residual in extended precision (np.longdouble).

    Wilkinson's classical refinement: each step solves a dy = r for the residual computed in
    more precision than the solve, which recovers the digits an ill-conditioned a loses (parts
    from 1 mOhm to 1 TOhm in one circuit).  A step that does not shrink the residual is undone.
    ``correction(r)`` solves a dy = r (the LU factors of a regular a, O(n^2) per step); without
    it each step is a least-squares solve (an SVD, O(n^3)).  ``product`` is a's
    ``_wide_product`` when the caller has it already.
    """
    residual = _wide_residual(a, b, pattern, product)
    res = residual(y)
    best = float(np.linalg.norm(res))
    for _ in range(REFINE_STEPS):
        if not res.any():
            break
        dy = correction(res) if correction is not None else sla.lstsq(a, res)[0]
        trial = y + dy
        res_trial = residual(trial)
        norm = float(np.linalg.norm(res_trial))
        if not norm < best:
            break
        y, best, res = trial, norm, res_trial
    return y


def _wide_residual(a: np.ndarray, b: np.ndarray, pattern="find", product=None):
    """y -> b - a y computed in np.longdouble and rounded to float64 (on the non-zero entries
    of a sparse a: the same products and sums, without the zeros)."""
    if product is None:
        if isinstance(pattern, str):
            pattern = _pattern(a) if a.ndim == 2 else None
        product = _wide_product(a, pattern)
    b_w = b.astype(np.longdouble)
    return lambda y: product(b_w, y)


def _wide_product(a: np.ndarray, pattern):
    """(b_w, y) -> b_w - a y in np.longdouble, rounded to float64, for b_w in np.longdouble;
    a sparse a (``_pattern``) on its non-zero entries, row by row in the same order."""
    wide = np.longdouble
    if pattern is None:
        a_w = a.astype(wide)
        return lambda b_w, y: (b_w - a_w @ y.astype(wide)).astype(float)
    rows, cols, starts, present = pattern
    vals = a[rows, cols].astype(wide)

    def product(b_w: np.ndarray, y: np.ndarray) -> np.ndarray:
        out = b_w.copy()
        out[present] -= np.add.reduceat(vals * y.astype(wide)[cols], starts)
        return out.astype(float)
    return product


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
    shape (n,) or (n, k).  ``rcond`` is the 1-norm reciprocal condition estimate that admitted
    it (``regular_factor``), so a caller with a stricter bound need not factor again."""

    def __init__(self, dense=None, sparse=None, rcond: float = 0.0) -> None:
        self._dense, self._sparse, self.rcond = dense, sparse, rcond

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
    rcond = rcond_estimate(a, lu)
    return Factor(dense=(lu, piv), rcond=rcond) if rcond > rcond_min else None


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
    rcond = 1.0 / (anorm * inv_norm)
    return Factor(sparse=lu, rcond=rcond) if rcond > rcond_min else None


def rcond_estimate(a: np.ndarray, lu: np.ndarray) -> float:
    """LAPACK dgecon's estimate of 1 / (|a|_1 |a^-1|_1) from the LU factors ``lu`` of ``a``
    (0 when the estimate fails).  The estimator (Hager, Higham: Higham, *Accuracy and Stability
    of Numerical Algorithms*, 2nd ed., sec. 15.3) bounds |a^-1|_1 from below, in practice
    within a factor of 3, so the true rcond is rarely below a tenth of the estimate."""
    anorm = float(np.abs(a).sum(axis=0).max(initial=0.0))
    rcond, info = lapack.dgecon(lu, anorm, norm="1")
    return float(rcond) if info == 0 and np.isfinite(rcond) else 0.0
