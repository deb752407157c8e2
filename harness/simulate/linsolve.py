"""Linear solves of the regularised DC systems, with iterative refinement.

The regularised matrices mix conductances 1/r_s with 1/R (ratios up to ~1e10), and a node held
by a source through r_s has v - E ~ r_s i: a plain LU solve then leaves quantities computed
through r_s (for example a current-controlled source that senses a voltage source) wrong by
about 1e-16 |v| / r_s.  Iterative refinement with residuals accumulated in extended precision
(numpy.longdouble; classical mixed-precision refinement, e.g. Golub & Van Loan, "Matrix
Computations", section 3.5.3) recovers those digits.
"""

from __future__ import annotations

import warnings

import numpy as np
import scipy.linalg
import scipy.sparse as sp
import scipy.sparse.linalg as spla

#: dense factorisation up to this many unknowns, sparse above
DENSE_UP_TO = 50
#: refinement sweeps
SWEEPS = 3
#: smallest LU pivot of the equilibrated matrix, relative to the largest, below which it is
#: singular
SINGULAR = 1e-13


class Singular(Exception):
    """The matrix is singular to working precision."""


def _residual(A: sp.coo_matrix, b: np.ndarray, x: np.ndarray) -> np.ndarray:
    """b - A x accumulated in numpy.longdouble, returned as float64."""
    xl = x.astype(np.longdouble)
    acc = b.astype(np.longdouble).copy()
    np.add.at(acc, A.row, -(A.data.astype(np.longdouble) * xl[A.col]))
    return acc.astype(float)


def _scalings(A: sp.csc_matrix) -> tuple[np.ndarray, np.ndarray]:
    """Row and column scalings (r, c) so that diag(r) A diag(c) has unit largest entries."""
    absA = abs(A)
    rows = np.asarray(absA.max(axis=1).todense()).ravel()
    r = 1.0 / np.where(rows > 0, rows, 1.0)
    cols = np.asarray((sp.diags(r) @ absA).max(axis=0).todense()).ravel()
    return r, 1.0 / np.where(cols > 0, cols, 1.0)


def _factor(A: sp.csc_matrix):
    """A solve function for A, or raise Singular.

    The LU factorisation is of the equilibrated matrix diag(r) A diag(c), and A counts as
    singular when its smallest pivot is below ``SINGULAR`` times the largest (so that the spread
    of 1/r_s against 1/R alone does not count as singularity).
    """
    n = A.shape[0]
    r, c = _scalings(A)
    E = (sp.diags(r) @ A @ sp.diags(c)).tocsc()
    if n <= DENSE_UP_TO:
        with warnings.catch_warnings():  # singularity is judged from the pivots below
            warnings.simplefilter("ignore", scipy.linalg.LinAlgWarning)
            lu, piv = scipy.linalg.lu_factor(E.toarray(), check_finite=False)
        pivots = np.abs(np.diag(lu))

        def apply(rhs):
            return c * scipy.linalg.lu_solve((lu, piv), r * rhs)
    else:
        try:
            lu = spla.splu(E)
        except RuntimeError:
            raise Singular() from None
        pivots = np.abs(lu.U.diagonal())

        def apply(rhs):
            return c * lu.solve(r * rhs)
    if pivots.min() <= SINGULAR * pivots.max():
        raise Singular()
    return apply


def solve(A: sp.spmatrix, b: np.ndarray, factors: dict | None = None) -> np.ndarray:
    """x with A x = b (A square, nonsingular), refined; raises Singular.

    ``factors``: a dict owned by the caller that keeps each matrix's factorisation (or None
    where it is singular) by id(A) for later solves; A must stay alive and unchanged while the
    dict is in use."""
    key = id(A)
    A = sp.csc_matrix(A)
    if A.shape[0] == 0:
        return np.zeros(0)
    if factors is not None and key in factors:
        apply = factors[key]
    else:
        try:
            apply = _factor(A)
        except Singular:
            apply = None
        if factors is not None:
            factors[key] = apply
    if apply is None:
        raise Singular()
    x = apply(b)
    coo = A.tocoo()
    for _ in range(SWEEPS):
        x = x + apply(_residual(coo, b, x))
    if not np.all(np.isfinite(x)):
        raise Singular()
    return x


def least_squares(A: sp.spmatrix, b: np.ndarray) -> np.ndarray:
    """A least-squares solution of A x = b (minimum norm for dense systems)."""
    A = sp.csc_matrix(A)
    if A.shape[0] <= DENSE_UP_TO:
        return np.linalg.lstsq(A.toarray(), b, rcond=None)[0]
    return spla.lsqr(A, b, atol=1e-14, btol=1e-14)[0]


#: an operating point is consistent when each row's residual is below this fraction of the
#: row's terms
CONSISTENT = 1e-9


#: systems up to this size get the conserved-quantity correction of a singular operating point
NULLSPACE_UP_TO = 400
#: singular values of the equilibrated matrix below this fraction of the largest span its null
#: space
NULL = 1e-11


def _conserving(K: sp.spmatrix, M: sp.spmatrix, y_p: np.ndarray, y0: np.ndarray) -> np.ndarray:
    """The equilibrium y_p + N a with the conserved quantities of y0 (see ``operating_point``)."""
    r, c = _scalings(sp.csc_matrix(K))
    E = (sp.diags(r) @ K @ sp.diags(c)).toarray()
    U, S, Vt = np.linalg.svd(E)
    null = S <= NULL * S[0]
    if not null.any():
        return y_p
    N = c[:, None] * Vt[null].T          # K N = 0
    W = r[:, None] * U[:, null]          # W^T K = 0: W^T M y is conserved
    WM = W.T @ M.toarray()
    a = np.linalg.lstsq(WM @ N, WM @ (y0 - y_p), rcond=None)[0]
    return y_p + N @ a


def operating_point(K: sp.spmatrix, b: np.ndarray, bound: np.ndarray, M: sp.spmatrix | None = None,
                    y0: np.ndarray | None = None, factors: dict | None = None,
                    noise: np.ndarray | None = None) -> tuple[np.ndarray, bool]:
    """(y_o, consistent): K y_o = b solved and refined, else least squares; y_o shape (n,).

    Where K is singular (charge trapped on capacitors, flux in loops of inductors and carriers)
    the operating point is not unique; given the capacitance/inductance matrix M and the
    interval's initial state y0, the one returned then keeps the conserved quantities
    W^T M y (W spanning the left null space of K) of y0: it is the state the interval settles
    to, so the deviation z = y - y_o decays to zero (integrate.py).  ``bound`` (shape (n,)) is
    the largest plausible magnitude of each state; a solution beyond it is replaced by the
    least-squares one, and that by zero.  ``consistent`` is False where no operating point exists
    (unbounded growth): some row's residual exceeds ``CONSISTENT`` times that row's terms.
    ``factors`` keeps K's factorisation for intervals that share K (see ``solve``).  ``noise``
    (shape (n,), optional): each state's magnitude below which it is rounding; a row's terms
    count each state at least at it, so that a row whose states are all rounding-level zeros
    (a carrier current that carries nothing) is not judged on the rounding alone.
    """
    n = b.shape[0]
    y = np.zeros(n)
    singular = False
    for make in (lambda: solve(K, b, factors), lambda: least_squares(K, b)):
        try:
            trial = make()
        except (Singular, np.linalg.LinAlgError, RuntimeError):
            singular = True
            continue
        if np.all(np.isfinite(trial)) and np.all(np.abs(trial) <= bound):
            y = trial
            break
        singular = True
    terms = abs(K) @ (np.abs(y) if noise is None else np.abs(y) + noise) + np.abs(b)
    residual = np.abs(_residual(sp.coo_matrix(K), b, y))
    consistent = bool(np.all(residual <= CONSISTENT * terms + 1e-300))
    if singular and consistent and M is not None and y0 is not None and n <= NULLSPACE_UP_TO:
        y = _conserving(K, M, y, y0)
    return y, consistent
