"""Fast exact decomposition for reciprocal RC pencils: one symmetric generalized eigenproblem.

For networks of resistors, capacitors, independent sources and switches the scaled MNA pencil
(G~, C~) is symmetric once the open ideal switches are set aside: a voltage source's or closed
switch's KCL column and branch row are the same incidence vector (both +-1 after scaling), a
resistive switch adds -R/R0 on its diagonal, and C~ is the capacitor Laplacian on the node
block.  A row that holds a single diagonal entry and no capacitance (an open ideal switch,
i = 0) forces its variable to zero in every homogeneous solution, so its column is irrelevant
and is cleared.  Whatever the parts, this module only acts when the resulting G~ is symmetric
and C~ symmetric with a positive definite capacitance block; otherwise it returns None and the
general route (``interval.decompose``) is used.

Reduction to the capacitor coordinates.  With N0 the exact null basis of C~ (from the graph,
``mna.capacitor_null_basis``: branch currents, nodes without capacitance, common modes of
capacitor groups cut off from ground) and R its orthonormal complement (built per support, so
both are sparse), x = R x1 + N0 x2 and, because C~ N0 = 0,

    C11 x1' + G11 x1 + G12 x2 = R^T b~,     G21 x1 + G22 x2 = N0^T b~,

with C11 = R^T C~ R, G11 = R^T G~ R, G12 = G21^T = R^T G~ N0, G22 = N0^T G~ N0.  Where G22 is
regular (no capacitor forms a loop with voltage sources or closed ideal switches, nothing is
left floating), x2 = G22^-1 (N0^T b~ - G21 x1) exactly and

    C11 x1' + S x1 = ...,     S = G11 - G12 G22^-1 G21   (symmetric Schur complement).

scipy.linalg.eigh(S, C11) (LAPACK sygvd: Cholesky of C11 and a symmetric tridiagonal
eigensolver) gives S V = C11 V diag(w), V^T C11 V = I, the modes lambda = -w (trapped charge is
w = 0) and, from the Laplace transform of the homogeneous part with the charges C~ e of
e = x(t_k-) - x_p,

    x(tau) = x_p + Q1 expm(diag(lambda) tau) z0,
    Q1 = R V - N0 G22^-1 G21 V,      z0 = V^T R^T C~ e,

the same representation as ``interval.Decomposition`` with A = diag(lambda).  Jumps are
included: only the charges C~ e enter z0.  A G22 singular to working precision (capacitor loops
with ideal voltage-type parts, where the capacitor voltages themselves jump) returns None.

Mode bookkeeping copies the general route so that both give the same features: the shift s0 is
1, moved to the geometric centre of the non-zero rates when that lies outside [1e-2, 1e2];
modes with |mu| = 1/|s0 - lambda| at or below max(INFINITE_REL / s0, 1e3 eps |K|_F) are
instantaneous and dropped (|K|_F estimated by the norm of the mu); |lambda| <= ZERO_REL s0 is the
zero cluster, except a rate above eigh's rounding (ZERO_ROUNDING of the largest |lambda|): a
slow real mode, for which the shift moves to the centre of it and the fastest mode
(``_zero_split``).  A growing mode (never present in a passive network) returns None.

Used from MIN_SIZE unknowns on (below it the general route is as fast).  Cost: O(n^2) assembly
with R and N0 applied as row picks and small per-support blocks (``_Selection``, ``_Blocks``),
one LU of the m x m algebraic block and one
symmetric-definite eigenproblem of the r capacitor coordinates, against the general route's
LU, ordered Schur form, Sylvester equation and non-symmetric eigenproblems of the full pencil.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import scipy.linalg as sla

from .interval import INFINITE_REL, ZERO_REL, ZERO_ROUNDING, Decomposition
from .modes import diagonal_clusters

#: asymmetry of G~ (after clearing open-switch columns), relative to its largest entry,
#: tolerated as rounding
SYMMETRY_REL = 1e-12
#: below this many unknowns the general route is used: it is as fast there, and small circuits
#: keep bit for bit the results they had before this route existed
MIN_SIZE = 32
#: a pivot of the algebraic block below this fraction of the largest counts as singular
PIVOT_REL = 1e-12
#: a negative w beyond this fraction of the largest |w| is a growing mode (fall back)
GROWING_REL = 1e-9
#: below this magnitude m + m^T cannot overflow, so (m + m^T)/2 of a symmetric m is m exactly
_HALF_MAX = np.finfo(float).max / 2


def _cleared(g: np.ndarray, c: np.ndarray) -> np.ndarray:
    """G~ with the columns of zero-forcing rows cleared (rows with one diagonal entry, no C~)."""
    diag = np.diagonal(g)
    single = (np.count_nonzero(g, axis=1) == 1) & (diag != 0) & ~np.any(c, axis=1)
    if not np.any(single):
        return g
    g2 = g.copy()
    cols = np.flatnonzero(single)
    g2[:, cols] = 0.0
    g2[cols, cols] = diag[cols]
    return g2


def _symmetric(m: np.ndarray) -> np.ndarray | None:
    """(m + m^T)/2 when max |m - m^T| <= SYMMETRY_REL max |m + m^T|, else None."""
    if not np.all(np.isfinite(m)):
        return None
    if np.array_equal(m, m.T) and max(m.max(initial=0.0), -m.min(initial=0.0)) < _HALF_MAX:
        return m                                   # exactly symmetric: (m + m^T)/2 is m
    dev = m - m.T
    np.abs(dev, out=dev)
    sym = m + m.T
    if dev.max(initial=0.0) > SYMMETRY_REL * np.abs(sym).max(initial=0.0):
        return None
    sym *= 0.5
    return sym


def _householder_complement(u: np.ndarray) -> np.ndarray:
    """Orthonormal basis of the complement of the unit vector u, shape (k, k-1)."""
    k = u.size
    w = u.astype(float).copy()
    w[0] += math.copysign(1.0, w[0] if w[0] != 0 else 1.0)
    w /= np.linalg.norm(w)
    h = np.eye(k) - 2.0 * np.outer(w, w)       # H u = -+e_1: columns 2..k span u's complement
    return h[:, 1:]


class _Selection:
    """A 0/1 matrix whose column j is the unit vector e_(rows[j]) (shape (n, k)), or its
    transpose, applied by indexing: the products R^T M, N0^T M, R V and N0 V of the reduction
    are row picks and row scatters, exact and O(size of the result)."""

    def __init__(self, rows: np.ndarray, n: int, transposed: bool = False) -> None:
        self.rows, self.n, self.transposed = rows, n, transposed
        self.shape = (rows.size, n) if transposed else (n, rows.size)

    @property
    def T(self) -> "_Selection":
        return _Selection(self.rows, self.n, not self.transposed)

    def __matmul__(self, m: np.ndarray) -> np.ndarray:
        m = np.asarray(m)
        if self.transposed:
            return m[self.rows]
        out = np.zeros((self.n,) + m.shape[1:], dtype=m.dtype)
        out[self.rows] = m
        return out


class _Blocks:
    """A matrix of shape (n, k) whose columns have disjoint supports: unit columns e_(units[i])
    first, then per block b the columns ``vecs[b]`` (shape (|support_b|, k_b)) on the rows
    ``supports[b]``; or its transpose.  Products with dense matrices are a row pick plus one
    small dense product per block, O(size of the result + sum over blocks), where a general
    sparse product costs a sparse matrix-times-dense-columns pass."""

    def __init__(self, units: np.ndarray, supports: list, vecs: list, n: int,
                 transposed: bool = False) -> None:
        self.units, self.supports, self.vecs, self.n = units, supports, vecs, n
        self.transposed = transposed
        self.width = units.size + sum(v.shape[1] for v in vecs)
        self.shape = (self.width, n) if transposed else (n, self.width)

    @property
    def T(self) -> "_Blocks":
        return _Blocks(self.units, self.supports, self.vecs, self.n, not self.transposed)

    def __matmul__(self, m: np.ndarray) -> np.ndarray:
        m = np.asarray(m)
        if self.transposed:                        # B^T m: rows of m, block-combined
            parts = [m[self.units]] + [v.T @ m[sup] for sup, v in zip(self.supports, self.vecs)]
            return np.concatenate(parts, axis=0)
        out = np.zeros((self.n,) + m.shape[1:], dtype=np.result_type(m, float))
        out[self.units] = m[:self.units.size]
        col = self.units.size
        for sup, v in zip(self.supports, self.vecs):
            out[sup] += v @ m[col:col + v.shape[1]]
            col += v.shape[1]
        return out

    def right(self, m: np.ndarray) -> np.ndarray:
        """m @ B for the (not transposed) B, m of shape (p, n): columns of m picked and
        block-combined, shape (p, k), C-ordered."""
        cols = _index(self.units)
        parts = [np.ascontiguousarray(m[:, cols])]
        parts += [m[:, sup] @ v for sup, v in zip(self.supports, self.vecs)]
        return np.concatenate(parts, axis=1) if len(parts) > 1 else parts[0]


def _bases(null: np.ndarray, n: int):
    """N0 (the given null columns) and R (orthonormal complement): column selections
    (``_Selection``) when every null column is a unit vector, else ``_Blocks`` (R: the rows no
    null column touches as unit columns, then per multi-row support the Householder complement
    of its null vector); None when the null columns do not have disjoint supports."""
    m = null.shape[1]
    cols, rows = np.nonzero(null.T)                # by column, rows ascending in each
    owner = np.full(n, -1)
    if np.unique(rows).size != rows.size:
        return None                                # a row in two null columns' supports
    owner[rows] = cols
    starts = np.searchsorted(cols, np.arange(m + 1))
    free = np.flatnonzero(owner < 0)
    single = np.diff(starts) == 1
    unit_rows = rows[starts[:-1][single]] if m else np.zeros(0, dtype=int)
    if single.all() and np.all(null[unit_rows, np.flatnonzero(single)] == 1.0):
        return _Selection(unit_rows.astype(int), n), _Selection(free, n)
    n_units, n_sup, n_vec = [], [], []   # N0: its unit columns first, then the others
    r_sup, r_vec = [], []
    for j in range(m):
        support = rows[starts[j]:starts[j + 1]]
        vals = null[support, j]
        if support.size == 1 and vals[0] == 1.0:
            n_units.append(int(support[0]))
            continue
        n_sup.append(support)
        n_vec.append(vals.reshape(-1, 1))
        if support.size > 1:
            r_sup.append(support)
            r_vec.append(_householder_complement(vals / np.linalg.norm(vals)))
    n0 = _Blocks(np.array(n_units, dtype=int), n_sup, n_vec, n)
    return n0, _Blocks(free, r_sup, r_vec, n)


def _reduced(g: np.ndarray, c: np.ndarray, n0, r):
    """(S, C11, H, R^T C~) of the module docstring, H = G22^-1 G21; None if G22 is singular.

    ``g`` and ``c`` are exactly symmetric (``_symmetric``), so with unit-column bases
    (``_Selection``) every block is a submatrix picked in one indexing step, the same floats
    as the products (``_selected_blocks``).
    """
    if isinstance(r, _Selection) and isinstance(n0, _Selection):
        rtc, c11, g11, g21, g22 = _selected_blocks(g, c, n0.rows, r.rows)
        if n0.shape[1] == 0:
            return 0.5 * (g11 + g11.T), c11, np.zeros((0, r.shape[1])), rtc
        return _schur(g11, g21, g22, c11, rtc)
    if isinstance(r, _Blocks) and isinstance(n0, _Blocks):
        rtc, rtg = r.T @ c, r.T @ g                # (r, n) each; C~, G~ symmetric
        c11, g11 = r.right(rtc), r.right(rtg)      # R^T C~ R, R^T G~ R
        if n0.shape[1] == 0:
            return 0.5 * (g11 + g11.T), 0.5 * (c11 + c11.T), np.zeros((0, r.shape[1])), rtc
        g21 = n0.right(rtg).T                      # N0^T G~ R = (R^T G~ N0)^T, (m, r)
        g22 = n0.right(n0.T @ g)                   # N0^T G~ N0
        return _schur(g11, np.ascontiguousarray(g21), g22, 0.5 * (c11 + c11.T), rtc)
    rtc = np.asarray(r.T @ c)                      # (r, n); C~ symmetric
    c11 = np.asarray(r.T @ rtc.T)
    rtg = np.asarray(r.T @ g)                      # (r, n); G~ symmetric
    g11 = np.asarray(r.T @ rtg.T)
    if n0.shape[1] == 0:
        return 0.5 * (g11 + g11.T), 0.5 * (c11 + c11.T), np.zeros((0, r.shape[1])), rtc
    g21 = np.asarray(n0.T @ rtg.T)                 # (m, r)
    g22 = np.asarray(n0.T @ np.asarray(n0.T @ g).T)
    return _schur(g11, g21, g22, 0.5 * (c11 + c11.T), rtc)


def _selected_blocks(g: np.ndarray, c: np.ndarray, null_rows: np.ndarray, rows: np.ndarray):
    """(R^T C~, C11, G11, G21, G22) for bases of unit columns: R picks ``rows``, N0 picks
    ``null_rows``.  For the exactly symmetric g, c these are the submatrices the products of
    ``_reduced`` give (R^T (R^T C~)^T is C~[rows][:, rows]^T = C~[rows][:, rows], and C11 is
    already exactly symmetric, so its (C11 + C11^T)/2 is itself)."""
    sel = _index(rows)
    rtc = c[sel]
    c11 = np.ascontiguousarray(rtc[:, sel])
    g11 = _pick(g, sel, sel)
    g21 = _pick(g, _index(null_rows), sel)
    g22 = _pick(g, _index(null_rows), _index(null_rows))
    return rtc, c11, g11, g21, g22


def _index(rows: np.ndarray):
    """``rows`` as a slice when they are consecutive (a view, no gather), else as they are."""
    if rows.size and rows[-1] - rows[0] + 1 == rows.size and np.all(np.diff(rows) == 1):
        return slice(int(rows[0]), int(rows[-1]) + 1)
    return rows


def _pick(m: np.ndarray, rows, cols) -> np.ndarray:
    """The submatrix m[rows][:, cols] as a new C-ordered array (rows, cols: ``_index``)."""
    if isinstance(rows, slice) and isinstance(cols, slice):
        return m[rows, cols].copy()
    if isinstance(rows, slice) or isinstance(cols, slice):
        return np.ascontiguousarray(m[rows][:, cols])
    return m[np.ix_(rows, cols)]


def _schur(g11, g21, g22, c11, rtc):
    """(S, C11, H, R^T C~) with S = G11 - G21^T G22^-1 G21 symmetrised, H = G22^-1 G21; None
    when a pivot of G22's LU is below PIVOT_REL of the largest (``_reduced``)."""
    try:
        with warnings.catch_warnings():           # a singular block is an answer here
            warnings.simplefilter("ignore", sla.LinAlgWarning)
            lu = sla.lu_factor(g22, check_finite=False)
    except (ValueError, np.linalg.LinAlgError):
        return None
    piv = np.abs(np.diagonal(lu[0]))
    if not np.all(np.isfinite(piv)) or piv.min() <= PIVOT_REL * max(piv.max(), 1e-300):
        return None
    h = sla.lu_solve(lu, g21, check_finite=False)
    g11 -= g21.T @ h                               # S in place (g11 is a fresh copy)
    g11 += g11.T                                   # numpy buffers the overlapping operand
    g11 *= 0.5
    return g11, c11, h, rtc


def _finite(lam: np.ndarray, s0: float) -> np.ndarray:
    """Mask of the modes the general route keeps at shift s0 (|mu| above its threshold)."""
    mu = 1.0 / np.abs(s0 - lam)
    thr = max(INFINITE_REL / abs(s0), 1e3 * np.finfo(float).eps * float(np.linalg.norm(mu)))
    return mu > thr


def _shift(lam: np.ndarray) -> float:
    """The shift the general route settles on (1, or the geometric centre of the rates)."""
    keep = _finite(lam, 1.0)
    rates = np.abs(lam[keep])
    rates = rates[rates > ZERO_REL]
    if rates.size == 0:
        return 1.0
    center = math.sqrt(float(rates.min()) * float(rates.max()))
    return 1.0 if 1e-2 <= center <= 1e2 else center


def _zero_split(lam: np.ndarray, s0: float) -> tuple[float, float]:
    """(shift, zero tolerance): ``s0`` and ZERO_REL s0, unless a rate lies at or below that
    tolerance but above eigh's own rounding of a zero rate (ZERO_ROUNDING of the largest
    |lambda|: its absolute error is ~eps times the largest): that is a slow real mode, as in
    the general route (``interval._slow_modes_resolved``), and the shift moves to the geometric
    centre of it and the fastest mode, the tolerance to ZERO_REL of that or the rounding,
    whichever is larger (a 1e5 s mode beside a ladder's 0.1 us ones was trapped charge at
    shift 1, and its node kept 0 V for ever)."""
    rates = np.abs(lam[_finite(lam, s0)])
    zero_tol = ZERO_REL * abs(s0)
    floor = ZERO_ROUNDING * float(rates.max(initial=0.0))
    slow = rates[(rates > floor) & (rates <= zero_tol)]
    if slow.size == 0:
        return s0, zero_tol
    s0 = math.sqrt(float(slow.min()) * float(rates.max()))
    return s0, max(ZERO_REL * s0, floor)


def decompose(g: np.ndarray, c: np.ndarray, null: np.ndarray,
              c_rows=None, zeros: int | None = None) -> Decomposition | None:
    """The Decomposition of the scaled pencil (G~, C~) by the symmetric route, or None when it
    does not apply (see the module docstring); ``null`` is the orthonormal null basis of C~.
    ``zeros``, where given, is the exact number of zero modes (``nullity.zero_modes``): more
    rates than that within the zero tolerance are slow real modes below eigh's rounding of
    the fastest (one 14 decades below it), which only the general route's shifts resolve, so
    the answer is then None.

    ``c_rows(rows)``, where given, returns those rows of C~ as a sparse matrix: then R^T C~ is
    kept in that form for z0 (for unit-column bases) and g and c, this call's own copies, are
    released before the eigenproblem, so it never runs beside two dense n x n matrices more."""
    n = g.shape[0]
    if n < max(MIN_SIZE, 1) or c.shape != g.shape or null.shape[0] != n:
        return None
    cs = _symmetric(c)
    gs = _symmetric(_cleared(g, c)) if cs is not None else None
    bases = _bases(null, n) if gs is not None else None
    if bases is None:
        return None
    n0, r = bases
    if r.shape[1] == 0:
        return None
    if n0.shape[1] and np.abs(np.asarray(n0.T @ cs)).max() > 1e-12 * max(np.abs(cs).max(),
                                                                        1e-300):
        return None                                # not a null basis of C~
    red = _reduced(gs, cs, n0, r)
    if red is None:
        return None
    s, c11, h, rtc = red
    del red
    if c_rows is not None and isinstance(r, _Selection):
        rtc = c_rows(r.rows)                       # the same entries, sparse
    del g, c, gs, cs                               # (where a caller still holds them: no-op)
    try:           # S and C11 are this function's own and exactly symmetric: handed over as
        # their transposes (the same matrices, in LAPACK's column order), LAPACK overwrites
        # them in place instead of working on Fortran-ordered copies
        w, v = sla.eigh(s.T, c11.T, check_finite=False, overwrite_a=True, overwrite_b=True)
    except (ValueError, np.linalg.LinAlgError):
        return None                                # C11 not positive definite
    del s, c11
    if not np.all(np.isfinite(w)) or w.min(initial=0.0) < -GROWING_REL * np.abs(w).max():
        return None
    lam = -w
    s0, zero_tol = _zero_split(lam, _shift(lam))
    keep = _finite(lam, s0)
    if zeros is not None and np.count_nonzero(np.abs(lam[keep]) <= zero_tol) > zeros:
        return None
    if not keep.all():
        lam, v = lam[keep], v[:, keep]
    q1 = _right_basis(r, n0, h, v)
    return Decomposition(s0, q1, None, None, diagonal_clusters(lam, zero_tol), zero_tol,
                         diagonal=True, left_factors=(_rows_of(q1, r, v).T, rtc), rates=lam)


def _right_basis(r, n0, h: np.ndarray, v: np.ndarray) -> np.ndarray:
    """Q1 = R V - N0 (H V), shape (n, f), with no n x f temporary beside it where N0 is a
    selection (its rows of R V are exact zeros, so subtracting there in place is the same
    floats)."""
    q1 = np.asarray(r @ v)
    if n0.shape[1] == 0:
        return q1
    if isinstance(n0, _Selection):
        q1[n0.rows] -= h @ v
    else:
        q1 -= np.asarray(n0 @ (h @ v))
    return q1


def _rows_of(q1: np.ndarray, r, v: np.ndarray) -> np.ndarray:
    """V itself: R^T Q1 = V exactly where R is a selection (its rows of Q1 are V's rows, N0's
    part being exact zeros there), taken as a view of Q1 where the rows are consecutive, so
    the decomposition keeps one n x f matrix instead of two; else V."""
    if isinstance(r, _Selection):
        sel = _index(r.rows)
        if isinstance(sel, slice):
            return q1[sel]
    return v
