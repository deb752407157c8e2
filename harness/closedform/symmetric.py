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
zero cluster.  A growing mode (never present in a passive network) returns None.

Used from MIN_SIZE unknowns on (below it the general route is as fast).  Cost: O(n^2) assembly with sparse R and N0, one LU of the m x m algebraic block and one
symmetric-definite eigenproblem of the r capacitor coordinates, against the general route's
LU, ordered Schur form, Sylvester equation and non-symmetric eigenproblems of the full pencil.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import scipy.linalg as sla
import scipy.sparse as sp

from .interval import INFINITE_REL, ZERO_REL, Decomposition
from .modes import diagonal_clusters

#: asymmetry of G~ (after clearing open-switch columns), relative to its largest entry,
#: tolerated as rounding
SYMMETRY_REL = 1e-12
#: below this many unknowns the bases are kept dense
DENSE_BELOW = 150
#: below this many unknowns the general route is used: it is as fast there, and small circuits
#: keep bit for bit the results they had before this route existed
MIN_SIZE = 32
#: a pivot of the algebraic block below this fraction of the largest counts as singular
PIVOT_REL = 1e-12
#: a negative w beyond this fraction of the largest |w| is a growing mode (fall back)
GROWING_REL = 1e-9


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


def _bases(null: np.ndarray, n: int):
    """N0 (the given null columns) and R (orthonormal complement): column selections
    (``_Selection``) when every null column is a unit vector, else scipy.sparse above
    DENSE_BELOW unknowns; None when the null columns do not have disjoint supports."""
    owner = np.full(n, -1)
    blocks = []                                    # (support, complement columns)
    units = []                                     # the row of each unit null column
    for j in range(null.shape[1]):
        support = np.flatnonzero(null[:, j])
        if np.any(owner[support] >= 0):
            return None
        owner[support] = j
        if support.size == 1 and null[support[0], j] == 1.0:
            units.append(int(support[0]))
        if support.size > 1:
            u = null[support, j] / np.linalg.norm(null[support, j])
            blocks.append((support, _householder_complement(u)))
    free = np.flatnonzero(owner < 0)
    if len(units) == null.shape[1]:                # every null column a unit vector e_i
        return _Selection(np.array(units, dtype=int), n), _Selection(free, n)
    width = free.size + sum(comp.shape[1] for _, comp in blocks)
    if n <= DENSE_BELOW:                           # sparse bookkeeping costs more here
        r = np.zeros((n, width))
        r[free, np.arange(free.size)] = 1.0
        col = free.size
        for support, comp in blocks:
            r[np.ix_(support, np.arange(col, col + comp.shape[1]))] = comp
            col += comp.shape[1]
        return null, r
    rows, cols, vals = [free], [np.arange(free.size)], [np.ones(free.size)]
    col = free.size
    for support, comp in blocks:
        k = comp.shape[1]
        rows.append(np.repeat(support, k))
        cols.append(np.tile(np.arange(col, col + k), support.size))
        vals.append(comp.ravel())
        col += k
    r = sp.csc_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                      shape=(n, width))
    n0 = sp.csc_matrix(null) if null.shape[1] else sp.csc_matrix((n, 0))
    return n0, r


def _reduced(g: np.ndarray, c: np.ndarray, n0, r):
    """(S, C11, H, R^T C~) of the module docstring, H = G22^-1 G21; None if G22 is singular."""
    rtc = np.asarray(r.T @ c)                      # (r, n); C~ symmetric
    c11 = np.asarray(r.T @ rtc.T)
    rtg = np.asarray(r.T @ g)                      # (r, n); G~ symmetric
    g11 = np.asarray(r.T @ rtg.T)
    if n0.shape[1] == 0:
        return 0.5 * (g11 + g11.T), 0.5 * (c11 + c11.T), np.zeros((0, r.shape[1])), rtc
    g21 = np.asarray(n0.T @ rtg.T)                 # (m, r)
    g22 = np.asarray(n0.T @ np.asarray(n0.T @ g).T)
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
    s = g11 - g21.T @ h
    return 0.5 * (s + s.T), 0.5 * (c11 + c11.T), h, rtc


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


def decompose(g: np.ndarray, c: np.ndarray, null: np.ndarray) -> Decomposition | None:
    """The Decomposition of the scaled pencil (G~, C~) by the symmetric route, or None when it
    does not apply (see the module docstring); ``null`` is the orthonormal null basis of C~."""
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
    try:
        w, v = sla.eigh(s, c11, check_finite=False)
    except (ValueError, np.linalg.LinAlgError):
        return None                                # C11 not positive definite
    if not np.all(np.isfinite(w)) or w.min(initial=0.0) < -GROWING_REL * np.abs(w).max():
        return None
    lam = -w
    s0 = _shift(lam)
    keep = _finite(lam, s0)
    lam, vk = lam[keep], v[:, keep]
    zero_tol = ZERO_REL * abs(s0)
    q1 = np.asarray(r @ vk)
    if n0.shape[1]:
        q1 = q1 - np.asarray(n0 @ (h @ vk))
    return Decomposition(s0, q1, np.diag(lam), None, diagonal_clusters(lam, zero_tol), zero_tol,
                         diagonal=True, left_factors=(vk.T, rtc))
