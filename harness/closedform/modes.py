"""Natural modes of one interval: clustering the eigenvalues of A and splitting A by cluster.

A (f x f, real, scaled time) is the dynamics of the dynamic coordinates z (z' = A z).  Its
eigenvalues are grouped into clusters: the zero cluster (|lambda| <= zero_tol: trapped charge and
flux, and the constant of an unbounded ramp), and clusters of eigenvalues that agree to
``tolerances.MODE_MERGE`` relative (identical modes merged, defective ones included).  A is then
block-diagonalised by cluster, A = sum_j V_j T_j W_j with W_j V_k = delta_jk, through successive
ordered complex Schur forms and Sylvester decoupling (Golub & Van Loan, Matrix Computations,
sec. 7.6.3 "block diagonalization").  A probe y = h z then reads, per cluster,

    y_j(tau) = h V_j expm(T_j tau) W_j z0 = e^(lambda_j tau) * sum_m a_m tau^m / m!,
    a_m = h V_j (T_j - lambda_j I)^m W_j z0,

so a repeated non-defective mode shows as one exponential and a defective one as a polynomial
times an exponential.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg as sla

from ..tolerances import MODE_MERGE

#: a complex rate whose |Re| is below this fraction of |lambda| has no decay (an undamped swing)
UNDAMPED = 1e-9


@dataclass(frozen=True)
class Cluster:
    """One group of equal eigenvalues of A (scaled units).

    Attributes:
        rate: the cluster's eigenvalue (mean of its members; exactly 0 for the zero cluster).
        block: T_j, shape (m, m), complex: A V_j = V_j T_j.
        right: V_j, shape (f, m), complex (None when ``index`` is set).
        left: W_j, shape (m, f), complex (None when ``index`` is set).
        zero: True for the zero cluster.
        index: where V_j and W_j are unit selections (A diagonal), the selected coordinates,
            else None.
    """

    rate: complex
    block: np.ndarray
    right: np.ndarray | None
    left: np.ndarray | None
    zero: bool
    index: tuple[int, ...] | None = None

    @property
    def size(self) -> int:
        return self.block.shape[0]

    @property
    def nilpotent(self) -> np.ndarray:
        """T_j - lambda_j I, shape (m, m)."""
        return self.block - self.rate * np.eye(self.size)


@dataclass(frozen=True)
class Mode:
    """One natural mode of an interval, in SI units.

    Attributes:
        rate: lambda in 1/s (complex; x ~ e^(lambda t)).
        tau: -1/Re(lambda) in s for a decaying mode, else None.
        frequency: |Im(lambda)|/(2 pi) in Hz (0 for a real mode).
        multiplicity: how many eigenvalues the mode stands for (merged identical ones).
        kind: "decaying", "growing", "undamped" or "constant" (lambda = 0: trapped charge/flux).
    """

    rate: complex
    tau: float | None
    frequency: float
    multiplicity: int
    kind: str


def group_rates(rates: np.ndarray, zero_tol: float) -> list[list[int]]:
    """Indices of ``rates`` grouped into clusters: the zero cluster first (if any), then groups
    joined by single linkage at relative distance MODE_MERGE, slowest |lambda| first.

    A rate joins the earliest-created group holding a rate within MODE_MERGE of it.  Such a
    rate has |r_j| >= (1 - MODE_MERGE) |r_i| (triangle inequality), so only the window of
    already-sorted rates just below r_i in magnitude is searched.
    """
    mags = np.abs(np.asarray(rates))
    zero_mask = mags <= zero_tol
    zero = [int(i) for i in np.flatnonzero(zero_mask)]
    rest = [int(i) for i in sorted(np.flatnonzero(~zero_mask), key=lambda i: mags[i])]
    groups: list[list[int]] = []
    group_of: list[int] = []                  # group id of rest[k]
    for k, i in enumerate(rest):
        low = (1.0 - MODE_MERGE - 1e-12) * mags[i]
        home = None
        back = k - 1
        while back >= 0 and mags[rest[back]] >= low:
            j = rest[back]
            if abs(rates[i] - rates[j]) <= MODE_MERGE * max(mags[i], mags[j]):
                gid = group_of[back]
                home = gid if home is None else min(home, gid)
            back -= 1
        if home is None:
            group_of.append(len(groups))
            groups.append([i])
        else:
            group_of.append(home)
            groups[home].append(i)
    return ([zero] if zero else []) + groups


def _split(tmat: np.ndarray, member) -> tuple[int, np.ndarray, np.ndarray, np.ndarray]:
    """Ordered Schur form of ``tmat`` with ``member`` eigenvalues first, decoupled.

    Returns (m, U, S, X): tmat = U S U^H, S = [[S11, S12], [0, S22]] with S11 (m x m) the
    cluster, and X solving S11 X - X S22 = -S12.
    """
    s, u, m = sla.schur(tmat, output="complex", sort=member)
    s11, s12, s22 = s[:m, :m], s[:m, m:], s[m:, m:]
    if m == 0 or m == s.shape[0]:
        return m, u, s, np.zeros((m, s.shape[0] - m), dtype=complex)
    x = sla.solve_sylvester(s11, -s22, -s12)
    return m, u, s, x


#: eigenvector bases with a condition number above this are not used for the split
EIG_CONDITION = 1e6
#: the eigenvector split is used from this order of A on (below it the Schur splits are cheap)
EIG_MIN_ORDER = 2


def _radius(members: np.ndarray, is_zero: bool, zero_tol: float) -> tuple[complex, float]:
    """Centre and capture radius of a cluster (the selection of the Schur split)."""
    center = 0.0 if is_zero else complex(members.sum() / members.size)
    spread = float(np.abs(members - center).max())
    radius = zero_tol * 2 if is_zero else max(3 * spread, 0.3 * MODE_MERGE * abs(center))
    return center, radius


def _by_eigenvectors(a: np.ndarray, zero_tol: float) -> tuple[Cluster, ...] | None:
    """The same split from one eigendecomposition A = V diag(w) V^-1, or None when V is
    ill-conditioned (a defective or nearly defective A) or a cluster's capture radius reaches
    a later cluster's eigenvalues.

    For a diagonalisable A the cluster data V_j T_j^m W_j are basis independent (they are the
    spectral projector times (A - lambda_j I)^m), so T_j = diag(w_j), V_j = V[:, j],
    W_j = V^-1[j, :] give the same features as the successive Schur splits, in O(f^3)
    instead of O(f^4) for f distinct modes.
    """
    rates, vec = np.linalg.eig(a)
    if not np.all(np.isfinite(rates)):
        return None
    try:
        inv = np.linalg.inv(vec)
    except np.linalg.LinAlgError:
        return None
    if np.linalg.norm(vec, 1) * np.linalg.norm(inv, 1) > EIG_CONDITION:
        return None
    groups = group_rates(rates, zero_tol)
    taken = np.zeros(rates.size, dtype=bool)
    out = []
    for gi, group in enumerate(groups):
        members = rates[group]
        is_zero = gi == 0 and all(abs(r) <= zero_tol for r in members)
        center, radius = _radius(members, is_zero, zero_tol)
        taken[group] = True
        if gi < len(groups) - 1 and np.any((np.abs(rates - center) <= radius) & ~taken):
            return None
        out.append(Cluster(center, np.diag(members.astype(complex)),
                           vec[:, group].astype(complex), inv[group, :].astype(complex),
                           is_zero))
    return tuple(out)


def _separated(rates: np.ndarray, zero_tol: float) -> tuple[Cluster, ...] | None:
    """``diagonal_clusters`` where no two non-zero rates come within MODE_MERGE of each other
    and none within 2 zero_tol of zero, or None otherwise.

    Then (|r_i - r_j| >= ||r_i| - |r_j||) no rate joins another's group and no capture radius
    (0.3 MODE_MERGE |r| for a single rate, 2 zero_tol for the zero cluster) reaches another
    rate, so every non-zero rate is its own cluster, slowest first after the zero cluster:
    decided from the sorted magnitudes in O(f log f) instead of the general grouping.
    """
    mags = np.abs(rates)
    zero = np.flatnonzero(mags <= zero_tol)
    rest = np.flatnonzero(mags > zero_tol)
    rest = rest[np.argsort(mags[rest], kind="stable")]
    m = mags[rest]
    if m.size and m[0] <= 2 * zero_tol:
        return None
    if m.size > 1 and np.any(np.diff(m) <= (MODE_MERGE + 1e-12) * m[1:]):
        return None
    out = []
    if zero.size:
        out.append(Cluster(0.0, np.diag(rates[zero]), None, None, True, tuple(zero.tolist())))
    picked = rates[rest]
    blocks = picked.reshape(-1, 1, 1)
    for i, rate, block in zip(rest.tolist(), picked.tolist(), blocks):
        out.append(_single(rate, block, i))
    return tuple(out)


def _single(rate: complex, block: np.ndarray, i: int) -> Cluster:
    """``Cluster(rate, block, None, None, False, (i,))`` for a 1 x 1 unit selection, its fields
    set directly (what the frozen dataclass's own ``__init__`` does field by field through
    ``object.__setattr__``): one per mode of a large diagonal A."""
    cl = object.__new__(Cluster)
    cl.__dict__.update(rate=rate, block=block, right=None, left=None, zero=False, index=(i,))
    return cl


def diagonal_clusters(rates: np.ndarray, zero_tol: float) -> tuple[Cluster, ...]:
    """The clusters of A = diag(rates) (real or complex), shape (f,): as ``clusters_of`` would
    give them, as unit selections (``Cluster.index``; right and left are None)."""
    f = rates.size
    if f == 0:
        return ()
    rates = np.asarray(rates, dtype=complex)
    separated = _separated(rates, zero_tol)
    if separated is not None:
        return separated
    groups = group_rates(rates, zero_tol)
    owner = np.empty(f, dtype=int)
    for gi, group in enumerate(groups):
        owner[group] = gi
    order = np.argsort(np.abs(rates), kind="stable")
    mags = np.abs(rates)[order]
    out = []
    for gi, group in enumerate(groups):
        members = rates[group]
        is_zero = gi == 0 and bool(np.all(np.abs(members) <= zero_tol))
        center, radius = _radius(members, is_zero, zero_tol)
        if gi < len(groups) - 1:                   # would the Schur split capture more?
            lo = np.searchsorted(mags, abs(center) - radius, side="left")
            hi = np.searchsorted(mags, abs(center) + radius, side="right")
            near = order[lo:hi]
            near = near[owner[near] > gi]
            if near.size and np.any(np.abs(rates[near] - center) <= radius):
                return clusters_of(np.diag(rates), zero_tol)
        out.append(Cluster(center, np.diag(members), None, None, is_zero, tuple(group)))
    return tuple(out)


def clusters_of(a: np.ndarray, zero_tol: float) -> tuple[Cluster, ...]:
    """Block-diagonalise A by eigenvalue cluster (see the module docstring).

    From EIG_MIN_ORDER modes on, a well-conditioned eigenvector basis gives the split directly
    (``_by_eigenvectors``); otherwise successive ordered Schur forms and Sylvester equations
    do.
    """
    f = a.shape[0]
    if f == 0:
        return ()
    fast = _by_eigenvectors(a, zero_tol) if f >= EIG_MIN_ORDER else None
    if fast is not None:
        return fast
    rates = np.linalg.eigvals(a)
    groups = group_rates(rates, zero_tol)
    z = np.eye(f, dtype=complex)          # right basis of the part not yet split off
    y = np.eye(f, dtype=complex)          # left basis: y z = I, A z = z tmat
    tmat = a.astype(complex)
    out = []
    for gi, group in enumerate(groups):
        members = rates[group]
        is_zero = gi == 0 and all(abs(r) <= zero_tol for r in members)
        center, radius = _radius(members, is_zero, zero_tol)
        if gi == len(groups) - 1:
            out.append(Cluster(center, tmat, z, y, is_zero))
            break
        m, u, s, x = _split(tmat, lambda w, c=center, r=radius: abs(w - c) <= r)
        u1, u2 = u[:, :m], u[:, m:]
        left_u = u.conj().T
        right_c = z @ u1
        left_c = (left_u[:m] - x @ left_u[m:]) @ y
        out.append(Cluster(center, s[:m, :m], right_c, left_c, is_zero))
        z = z @ (u1 @ x + u2)
        y = left_u[m:] @ y
        tmat = s[m:, m:]
        if tmat.shape[0] == 0:
            break
    return tuple(out)


def mode_of(cluster: Cluster, t_ref: float) -> Mode:
    """The SI mode of a cluster; ``t_ref`` is the scaling time T in s."""
    rate = complex(cluster.rate) / t_ref
    freq = abs(rate.imag) / (2 * math.pi)
    if cluster.zero:
        return Mode(0j, None, 0.0, cluster.size, "constant")
    if abs(rate.real) <= UNDAMPED * abs(rate):
        return Mode(rate, None, freq, cluster.size, "undamped")
    if rate.real > 0:
        return Mode(rate, None, freq, cluster.size, "growing")
    return Mode(rate, -1.0 / rate.real, freq, cluster.size, "decaying")


def poly_coefficients(h: np.ndarray, cluster: Cluster, g: np.ndarray) -> np.ndarray:
    """a_m = h (T_j - lambda_j I)^m g for m = 0 .. size-1, shape (size,), complex.

    Args:
        h: output row over the cluster's coordinates, shape (m,).
        g: the cluster's initial coordinates W_j z0, shape (m,).
    """
    nil = cluster.nilpotent
    coeffs = []
    vec = g.astype(complex)
    for _ in range(cluster.size):
        coeffs.append(complex(h @ vec))
        vec = nil @ vec
    return np.array(coeffs)
