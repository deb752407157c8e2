"""The exact response of one interval: particular solution, jump to t_k+ and the state for t > t_k.

Particular solution (DESIGN step 2): x_p = argmin |G~ x - b~| (least squares, so trapped charge,
where G~ is singular, is allowed).  A residual that does not vanish means the sources push charge
into nodes with no DC path: the response grows without bound.  Then the interval is solved in the
augmented homogeneous form [x; 1] (``interval.augment``), which keeps the ramp exact.

With e = x~(t_k-) - x_p (padded with 1 when augmented), z0 = left @ e and for tau = (t - t_k)/T:

    x~(tau) = x_p + Q1 expm(A tau) z0,   dx~/dtau = Q1 A expm(A tau) z0,

and the right limit at t_k+ is tau = 0.  Per cluster j the same is available as Q1 V_j, Q1 V_j T_j
and W_j z0 for the probe features.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from functools import cached_property
from typing import Mapping

import numpy as np
import scipy.linalg as sla

from . import symmetric
from .interval import Decomposition, augment, decompose
from .linalg import LeastSquares, _pattern
from .mna import Layout
from .modes import Cluster



#: above this many dynamic coordinates, or this many times at once, states are summed per mode
#: cluster instead of expm(A t) per time (the single-time calls of ``build`` for small systems
#: keep the expm form)
DENSE_EXPM_ORDER = 16
DENSE_EXPM_TIMES = 8
#: a diagonal interval of at least this many modes evaluates a probe's output projected onto
#: its modes (``IntervalResponse.output``)
PROJECT_ORDER = 64


@dataclass(frozen=True)
class ClusterData:
    """One mode cluster of an interval seen from the scaled state.

    Attributes:
        cluster: the cluster (rate, block T_j).
        qv: Q1 V_j, shape (n_aug, m), complex.
        qvt: Q1 V_j T_j, shape (n_aug, m), complex.
        g: W_j z0, shape (m,), complex.
    """

    cluster: Cluster
    qv: np.ndarray
    qvt: np.ndarray
    g: np.ndarray


#: from this many unknowns a scaled matrix with at most ``linalg.SPARSE_SHARE`` non-zero
#: entries is kept sparse between its uses (``Kept``): two dense n x n matrices per switch
#: configuration were 100 MB of a 5,000-part circuit's memory, held for the whole analysis
KEEP_SPARSE_MIN = 500


class Kept:
    """A scaled MNA matrix as it is kept: the dense array itself, or from ``KEEP_SPARSE_MIN``
    rows on, where sparse enough (``linalg._pattern``), its non-zero entries (CSR).  ``dense()``
    gives the matrix (the kept array, or a new one with the same floats, signed zeros read as
    +0); ``rows(rows)`` the rows ``rows`` as a sparse matrix (sparse kind only)."""

    def __init__(self, m: np.ndarray) -> None:
        self.shape = m.shape
        self.sparse = None
        self._dense: np.ndarray | None = m
        if m.shape[0] >= KEEP_SPARSE_MIN and _pattern(m) is not None:
            from scipy.sparse import csr_matrix
            self.sparse, self._dense = csr_matrix(m), None

    def dense(self) -> np.ndarray:
        return self._dense if self._dense is not None else self.sparse.toarray()

    def rows(self, rows: np.ndarray):
        return self.sparse[rows]


class _Arrays:
    """``g`` and ``c``: the kept G~ and C~ (``kept_g``, ``kept_c``) as arrays."""

    kept_g: Kept
    kept_c: Kept

    @property
    def g(self) -> np.ndarray:
        return self.kept_g.dense()

    @property
    def c(self) -> np.ndarray:
        return self.kept_c.dense()


@dataclass(frozen=True)
class Pencil(_Arrays):
    """The scaled matrices of a switch configuration (``Kept``) and their decomposition
    (cached); ``g`` and ``c`` give them as arrays."""

    kept_g: Kept
    kept_c: Kept
    dec: Decomposition

    @cached_property
    def particular(self) -> LeastSquares:
        """The least-squares solve of G~ x = b~ for this configuration, kept for every interval
        with it (only b~ changes between them)."""
        return LeastSquares(self.g)


@dataclass(frozen=True)
class IntervalResponse(_Arrays):
    """Interval k (k = -1: the pre-step circuit used for the values at 0-), scaled units.

    Attributes:
        index, start, next: k, t_k in s and t_(k+1) in s (None for the last interval).
        values: independent source name -> value in this interval (V or A).
        kept_g, kept_c, b: the scaled MNA system (G~ and C~ as kept, ``Kept``; the properties
            ``g`` and ``c`` give them as arrays, a new one per use where they are kept sparse).
        augmented: True when the response grows without bound (no bounded particular solution).
        growth_nodes: nodes where the unbalanced charge accumulates (augmented only).
        xp: particular solution, shape (n_aug,) (zero when augmented).
        dec: the decomposition used (of the augmented pencil when augmented).
        z0: dynamic coordinates at t_k+, shape (f,).
        clusters: per-cluster data (built on first use: the solve itself needs only the
            decomposition's clusters, ``dec.clusters``, in the same order).
        x_plus, dx_plus: x~ and dx~/dtau at t_k+, shape (n,).
        x_end, dx_end: the same at t_(k+1)-, or None for the last interval.
    """

    index: int
    start: float
    next: float | None
    values: Mapping[str, float]
    kept_g: Kept
    kept_c: Kept
    b: np.ndarray
    augmented: bool
    growth_nodes: tuple[str, ...]
    xp: np.ndarray
    dec: Decomposition
    z0: np.ndarray
    x_plus: np.ndarray
    dx_plus: np.ndarray
    x_end: np.ndarray | None = None
    dx_end: np.ndarray | None = None
    closed: Mapping[str, bool] = field(default_factory=dict)

    @property
    def n(self) -> int:
        return self.kept_g.shape[0]

    @cached_property
    def clusters(self) -> tuple[ClusterData, ...]:
        """Per-cluster data, one per ``dec.clusters`` (``_cluster_data``), built once."""
        return _cluster_data(self.dec, self.z0)

    def states(self, tau: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """x~ and dx~/dtau at scaled times ``tau`` >= 0, shapes (len(tau), n_aug) each."""
        tau = np.asarray(tau, dtype=float)
        f = self.dec.order
        if f == 0:
            return np.tile(self.xp, (tau.size, 1)), np.zeros((tau.size, self.xp.size))
        if self.dec.diagonal:                      # expm(diag(lam) tau) z0 = e^(lam tau) z0
            lam = self.dec.diagonal_rates
            with np.errstate(over="ignore", invalid="ignore"):
                expo = np.exp(np.outer(tau, lam)) * self.z0
                return self.xp[None, :] + expo @ self.dec.q1.T, (expo * lam) @ self.dec.q1.T
        if f > DENSE_EXPM_ORDER or tau.size > DENSE_EXPM_TIMES:
            return self._states_by_cluster(tau)
        with np.errstate(over="ignore", invalid="ignore"):
            expo = sla.expm(self.dec.a[None, :, :] * tau[:, None, None]) @ self.z0
            x = self.xp[None, :] + expo @ self.dec.q1.T
            dx = expo @ (self.dec.q1 @ self.dec.a).T
        return x, dx

    def output(self, tau: np.ndarray, c: np.ndarray, d: np.ndarray) -> np.ndarray:
        """c . x~ + d . dx~/dtau at scaled times ``tau`` (c, d: shape (n_aug,)), shape like
        ``tau`` flattened; for a diagonal A of at least ``PROJECT_ORDER`` modes the rows are
        projected onto the modes first (O(times f) instead of O(times f n)), else from
        ``states``."""
        tau = np.asarray(tau, dtype=float)
        if not (self.dec.diagonal and self.dec.order >= PROJECT_ORDER):
            x, dx = self.states(tau)
            return x @ c + dx @ d
        lam = self.dec.diagonal_rates
        weights = (self.dec.q1.T @ c + lam * (self.dec.q1.T @ d)) * self.z0
        with np.errstate(over="ignore", invalid="ignore"):
            expo = np.exp(np.outer(tau.ravel(), lam))
            return self.xp @ c + expo @ weights

    def _states_by_cluster(self, tau: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``states`` from the cluster split A = sum V_j T_j W_j: expm(A tau) z0 =
        sum_j V_j expm(T_j tau) W_j z0, O(n f) per time instead of O(f^3); the 1 x 1
        clusters are summed in one product."""
        x = np.tile(self.xp.astype(complex), (tau.size, 1))
        dx = np.zeros_like(x)
        single = [d for d in self.clusters if d.cluster.size == 1]
        with np.errstate(over="ignore", invalid="ignore"):
            if single:
                rates = np.array([d.cluster.block[0, 0] for d in single])
                e = np.exp(np.outer(tau, rates)) * np.array([d.g[0] for d in single])
                x += e @ np.hstack([d.qv for d in single]).T
                dx += e @ np.hstack([d.qvt for d in single]).T
            for data in self.clusters:
                if data.cluster.size == 1:
                    continue
                e = sla.expm(data.cluster.block[None, :, :] * tau[:, None, None]) @ data.g
                x += e @ data.qv.T
                dx += e @ data.qvt.T
        return x.real, dx.real


def pencil_of(g: Kept, c: Kept, null: np.ndarray, zeros: int | None = None) -> Pencil:
    """Decompose a non-augmented scaled pencil (SingularPencil if it is not regular): by the
    symmetric route where it applies (``symmetric``), else by the general one.  Where the
    matrices are kept sparse the symmetric route gets dense copies of its own, which it
    releases before its eigenproblem (``c_rows``).  ``zeros``: the number of exact zero modes
    from the circuit's graph (``nullity.zero_modes``), or None where it is not known."""
    rows = c.rows if c.sparse is not None else None
    dec = symmetric.decompose(g.dense(), c.dense(), null, c_rows=rows, zeros=zeros)
    return Pencil(g, c, dec if dec is not None else decompose(g.dense(), c.dense(), null,
                                                              zeros=zeros))


def _particular(pencil: Pencil, b: np.ndarray) -> tuple[np.ndarray, np.ndarray, bool]:
    """Least-squares x_p with G~ x_p ~ b~, the residual b~ - G~ x_p, and whether it vanishes
    (``linalg.least_squares`` on the pencil's kept solve)."""
    return pencil.particular.solve(b)


def _cluster_data(dec: Decomposition, z0: np.ndarray) -> tuple[ClusterData, ...]:
    out = []
    general = [cl for cl in dec.clusters if cl.index is None]
    batch = bool(general) and dec.order > DENSE_EXPM_ORDER
    if batch:                                     # Q1 V_j for every cluster in one product
        qv_all = dec.q1 @ np.hstack([cl.right for cl in general])
        starts = np.cumsum([0] + [cl.size for cl in general])
    pos = 0
    q1c, z0c = dec.q1.astype(complex), z0.astype(complex)
    q1t = q1c * dec.diagonal_rates if dec.diagonal else None     # Q1 A for a diagonal A
    for cl in dec.clusters:
        if cl.index is not None and len(cl.index) == 1:   # one unit column: views, O(1)
            i = cl.index[0]
            qv = q1c[:, i:i + 1]
            qvt = q1t[:, i:i + 1] if q1t is not None else qv * cl.block[0, 0]
            out.append(ClusterData(cl, qv, qvt, z0c[i:i + 1]))
            continue
        if cl.index is not None:                  # unit selections: pick columns, O(n m)
            idx = list(cl.index)
            qv = q1c[:, idx]
            g = z0c[idx]
        elif batch:
            qv = qv_all[:, starts[pos]:starts[pos + 1]]
            g = cl.left @ z0
            pos += 1
        else:
            qv = dec.q1 @ cl.right
            g = cl.left @ z0
        out.append(ClusterData(cl, qv, qv @ cl.block, g))
    return tuple(out)


def build(layout: Layout, pencil: Pencil, null: np.ndarray, b: np.ndarray, x_minus: np.ndarray,
          *, index: int, start: float, next_time: float | None, values: Mapping[str, float],
          closed: Mapping[str, bool], t_ref: float) -> IntervalResponse:
    """The response of one interval from the scaled state ``x_minus`` = x~(t_k-), shape (n,).

    ``t_ref`` is the scaling time T in s (to convert t_(k+1) - t_k to scaled time).
    """
    n = pencil.kept_g.shape[0]
    xp, resid, consistent = _particular(pencil, b)
    augmented = not consistent
    growth_nodes: tuple[str, ...] = ()
    if augmented:
        big = np.abs(resid[:layout.n_nodes])
        growth_nodes = tuple(layout.nodes[i] for i in np.flatnonzero(big > 1e-6 * big.max()))
        ga, ca, null_a = augment(pencil.g, pencil.c, b, null)
        dec = decompose(ga, ca, null_a, augmented=True)
        xp = np.zeros(n + 1)
        e = np.concatenate([x_minus, [1.0]])
    else:
        dec = pencil.dec
        e = x_minus - xp
    with np.errstate(invalid="ignore", over="ignore"):     # a state beyond range stays NaN
        z0 = dec.coordinates(e)
    resp = IntervalResponse(index, start, next_time, dict(values), pencil.kept_g,
                            pencil.kept_c, b, augmented,
                            growth_nodes, xp, dec, z0, np.zeros(n), np.zeros(n),
                            closed=dict(closed))
    x0, dx0 = resp.states(np.zeros(1))
    ends: dict = {"x_plus": x0[0, :n], "dx_plus": dx0[0, :n]}
    if next_time is not None:
        x1, dx1 = resp.states(np.array([(next_time - start) / t_ref]))
        ends.update(x_end=x1[0, :n], dx_end=dx1[0, :n])
    out = replace(resp, **ends)
    if "clusters" in resp.__dict__:              # built by ``states``: keep it
        out.__dict__["clusters"] = resp.__dict__["clusters"]
    return out
