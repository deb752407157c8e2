"""Exact decomposition of one interval's pencil (G~, C~): shift-invert and ordered Schur form.

For C~ x' + G~ x = b~ on tau > 0 with state x(0-) (scaled units), the Laplace transform with the
distributional derivative gives (s C~ + G~) X(s) = b~/s + C~ x(0-), hence with G~ x_p = b~ and
e = x(0-) - x_p:

    X(s) = x_p/s + (s C~ + G~)^-1 C~ e = x_p/s + (I + (s - s0) M)^-1 M e,
    M = (G~ + s0 C~)^-1 C~                       (shift-invert, s0 not a mode).

If M = V diag(S11, N) V^-1 with S11 invertible (the finite modes, mu = 1/(s0 - lambda)) and N
nilpotent (the algebraic, "infinite" directions), the finite block inverts to (sI - A)^-1 with
A = s0 I - S11^-1 and the nilpotent block is a polynomial in s: impulses at tau = 0 and nothing
after.  So for tau > 0, exactly,

    x(tau) = x_p + Q1 expm(A tau) z0,    Q1 = M R U1 S11^-1,   z0 = [I, -X] U^T R^T e.

Here the exact null space of C~ (from the graph, ``mna.capacitor_null_basis``, columns N0) is
deflated first: M N0 = 0, so with R an orthonormal complement of N0 the eigenproblem reduces to
K = R^T M R, in which the algebraic directions of index-2 structures (capacitor loops with
voltage-type parts, inductor cutsets) are simple zeros instead of Jordan blocks, whose numerical
eigenvalues would spread like sqrt(eps).  K = U S U^T is the real Schur form ordered with
|mu| > INFINITE_REL / s0 first (scipy.linalg.schur, LAPACK dgees with a selection), and
S11 X - X S22 = -S12 (scipy.linalg.solve_sylvester, Bartels-Stewart) decouples the two blocks
(Golub & Van Loan, sec. 7.6).  Only R^T e enters z0, i.e. only the charges and fluxes C~ e:
algebraic values at 0- cannot influence the response, as physics requires.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
import scipy.linalg as sla

from .linalg import equilibrate
from .modes import Cluster, clusters_of

#: |mu| below INFINITE_REL / s0 is an algebraic (infinite-eigenvalue) direction: modes faster
#: than ~1/INFINITE_REL times the shift count as instantaneous
INFINITE_REL = 1e-11
#: |lambda| below this fraction of s0 is a zero mode (trapped charge or flux)
ZERO_REL = 1e-10
#: as ZERO_REL for augmented (unbounded) systems, whose zero modes form Jordan blocks
ZERO_REL_AUGMENTED = 1e-6
#: a mode below ZERO_REL whose rate, re-read from the pencil itself (least squares of
#: G~ q = -lambda C~ q on its own vectors), stays above this fraction of the shift is a slow real
#: mode, not trapped charge: it is resolved at a shift moved down to it (1e3 eps: rounding of
#: an exact zero mode's residual stays below it)
ZERO_ROUNDING = 1e3 * np.finfo(float).eps
#: the lowest shift, as a fraction of the fastest rate, that keeps the fastest mode finite
#: (|mu| ten times INFINITE_REL / s0): where the graph says fewer modes sit at zero than the
#: zero cluster holds, a slow real mode is looked for there (``_hidden_slow_modes``)
LOWEST_SHIFT = 10 * INFINITE_REL
#: shifts tried, as multiples of the first choice, when G~ + s0 C~ is (nearly) singular
_SHIFT_TRIES = (1.0, 1.618, 0.618, 2.718, 0.3679, 7.389, 0.1353)


class SingularPencil(ValueError):
    """G~ + s C~ is singular for every shift tried: the interval's equations do not fix x."""


@dataclass(frozen=True)
class Decomposition:
    """The finite (dynamic) part of one pencil, scaled units.

    Attributes:
        s0: the shift used.
        q1: right basis of the dynamic subspace, shape (n, f), real.
        block: dynamics z' = A z, shape (f, f), real; its eigenvalues are the finite modes;
            None on the diagonal route, where ``rates`` holds A's diagonal (``a`` gives the
            matrix either way; the diagonal one is formed only when asked for, so a large
            interval does not keep an f x f matrix of zeros).
        left: z0 = left @ e for e = x(0-) - x_p, shape (f, n), real.
        clusters: A split by eigenvalue cluster (``modes.clusters_of``).
        zero_tol: |lambda| at or below which a mode counts as zero.
        diagonal: A is diagonal (the symmetric route), so expm(A tau) z0 = e^(diag(A) tau) z0.
        left_factors: (F1, F2) with left = F1 @ F2, kept factored (then ``left`` is None):
            z0 = F1 (F2 e) costs O(n f) where forming left would cost O(n f r).
        rates: A's diagonal, shape (f,), on the diagonal route (``block`` is None), else None.
        refine: z0 is refined by one step (``coordinates``): a pencil decomposed at a shift
            moved across 14+ decades (``_hidden_slow_modes``) rebuilt x(t_k+) to 8e-11 of a
            volt where it is exactly x(t_k-), enough to read as a jump.
    """

    s0: float
    q1: np.ndarray
    block: np.ndarray | None
    left: np.ndarray | None
    clusters: tuple[Cluster, ...]
    zero_tol: float
    diagonal: bool = False
    left_factors: tuple[np.ndarray, np.ndarray] | None = None
    rates: np.ndarray | None = None
    refine: bool = False

    @property
    def a(self) -> np.ndarray:
        """A, shape (f, f) (formed from ``rates`` on the diagonal route)."""
        return np.diag(self.rates) if self.block is None else self.block

    @property
    def diagonal_rates(self) -> np.ndarray:
        """A's diagonal, shape (f,) (A is diagonal when ``diagonal``)."""
        return self.rates if self.block is None else np.diagonal(self.block)

    @property
    def order(self) -> int:
        return self.q1.shape[1]

    def coordinates(self, e: np.ndarray) -> np.ndarray:
        """z0 = left @ e, shape (f,), for e = x(0-) - x_p, shape (n,); with ``refine`` one step
        of iterative refinement, z0 + left @ (e - Q1 z0) (only charges enter ``left``, so the
        algebraic part of e - Q1 z0 adds nothing)."""
        z0 = self._left(e)
        return z0 + self._left(e - self.q1 @ z0) if self.refine else z0

    def _left(self, e: np.ndarray) -> np.ndarray:
        if self.left is not None:
            return self.left @ e
        f1, f2 = self.left_factors
        return f1 @ (f2 @ e)


def _orth_complement(null: np.ndarray, n: int) -> np.ndarray:
    """Orthonormal basis of the complement of the orthonormal columns ``null``, shape (n, n-m)."""
    if null.shape[1] == 0:
        return np.eye(n)
    return sla.null_space(null.T)


def _shifted(g: np.ndarray, c: np.ndarray, r: np.ndarray, s0: float) -> np.ndarray | None:
    """M R = (G + s0 C)^-1 C R, or None when G + s0 C is singular to working precision."""
    pencil = g + s0 * c
    try:
        lu = sla.lu_factor(pencil, check_finite=False)
    except (ValueError, np.linalg.LinAlgError):
        return None
    piv = np.abs(np.diag(lu[0]))
    if piv.size and (piv.min() <= 1e-14 * max(piv.max(), 1e-300) or not np.all(np.isfinite(piv))):
        return None
    mr = sla.lu_solve(lu, c @ r, check_finite=False)
    return mr if np.all(np.isfinite(mr)) else None


def _finite_block(k: np.ndarray, s0: float) -> tuple[np.ndarray, np.ndarray, int, np.ndarray]:
    """Ordered real Schur form of K with the finite block first; returns (U, S, f, X).

    A stable or zero mode has |mu| = 1/|s0 - lambda| <= 1/s0, reached by the zero modes, so
    |mu| > INFINITE_REL / s0 (and well above the rounding level of K) selects the finite modes.
    """
    r = k.shape[0]
    if r == 0:
        return np.eye(0), np.zeros((0, 0)), 0, np.zeros((0, 0))
    thr = max(INFINITE_REL / abs(s0), 1e3 * np.finfo(float).eps * np.linalg.norm(k))
    s, u, f = sla.schur(k, output="real", sort=lambda x, y: math.hypot(x, y) > thr)
    if 0 < f < r:
        x = sla.solve_sylvester(s[:f, :f], -s[f:, f:], -s[:f, f:])
    else:
        x = np.zeros((f, r - f))
    return u, s, f, x


def _decompose_at(g: np.ndarray, c: np.ndarray, null: np.ndarray, s0: float,
                  zero_rel: float) -> Decomposition | None:
    """The decomposition at shift s0, computed on the equilibrated pencil and mapped back."""
    dr, dc = equilibrate(np.abs(g) + abs(s0) * np.abs(c))
    gb, cb = dr[:, None] * g * dc[None, :], dr[:, None] * c * dc[None, :]
    nb = null / dc[:, None]                 # disjoint supports: normalising keeps it orthonormal
    if nb.shape[1]:
        nb = nb / np.linalg.norm(nb, axis=0)
    r = _orth_complement(nb, g.shape[0])
    mr = _shifted(gb, cb, r, s0)
    if mr is None:
        return None
    u, s, f, x = _finite_block(r.T @ mr, s0)
    s11 = s[:f, :f]
    try:
        s11_inv = np.linalg.inv(s11) if f else np.zeros((0, 0))
    except np.linalg.LinAlgError:
        return None
    mu_max = np.max(np.abs(np.linalg.eigvals(s11))) if f else 0.0
    if f and mu_max * abs(s0) > 1e7:          # a mode sits (almost) on the shift: try another
        return None
    q1 = dc[:, None] * (mr @ u[:, :f] @ s11_inv)
    a = s0 * np.eye(f) - s11_inv
    left = (np.hstack([np.eye(f), -x]) @ u.T @ r.T) / dc[None, :] if f \
        else np.zeros((0, g.shape[0]))
    zero_tol = zero_rel * abs(s0)
    return Decomposition(s0, q1, a, left, clusters_of(a, zero_tol), zero_tol)


def _center(dec: Decomposition) -> float | None:
    """Geometric centre of the non-zero |lambda|, where the shift balances accuracy."""
    rates = np.abs(np.linalg.eigvals(dec.a)) if dec.order else np.zeros(0)
    rates = rates[rates > dec.zero_tol]
    if rates.size == 0:
        return None
    return math.sqrt(float(rates.min()) * float(rates.max()))


def decompose(g: np.ndarray, c: np.ndarray, null: np.ndarray, *,
              augmented: bool = False, zeros: int | None = None) -> Decomposition:
    """Decompose the scaled pencil (G~, C~) whose C~ has the orthonormal null basis ``null``.

    The shift starts at s0 = 1 (scaled time) and is moved to the geometric centre of the modes
    when they lie far from 1, so that slow modes (lambda = s0 - 1/mu, cancellation
    ~ eps s0/|lambda|) and fast ones (mu ~ -1/lambda) are resolved alike.  Each shift works on the
    pencil equilibrated for |G~| + s0 |C~| (``linalg.equilibrate``).  ``zeros``, where given,
    is the exact number of zero modes (``nullity.zero_modes``; non-augmented systems only).

    Raises:
        SingularPencil: when no shift gives a regular G~ + s0 C~.
    """
    zero_rel = ZERO_REL_AUGMENTED if augmented else ZERO_REL
    dec = _try_shifts(g, c, null, 1.0, zero_rel)
    center = _center(dec)
    if center is not None and not (1e-2 <= center <= 1e2):
        better = _try_shifts(g, c, null, center, zero_rel, strict=False)
        if better is not None:
            dec = better
    if augmented:
        return dec
    dec = _slow_modes_resolved(dec, g, c, null)
    if zeros is not None and _zero_count(dec) > zeros:
        dec = _hidden_slow_modes(dec, g, c, null, zeros)
    return dec


def _zero_count(dec: Decomposition) -> int:
    return sum(cl.size for cl in dec.clusters if cl.zero)


def _slow_rate(dec: Decomposition, g: np.ndarray, c: np.ndarray) -> float:
    """Smallest |lambda| of the zero cluster re-read from the pencil, or 0 if none is real.

    A mode 12 decades slower than the shift falls below ZERO_REL s0, where lambda = s0 - 1/mu
    has lost its digits, but its vectors q (n x m) are still those of a real mode: the least-
    squares solution B of (C~ q) B = -(G~ q) has the cluster's rates as eigenvalues, read without
    the cancellation.  Rates at or below ZERO_ROUNDING s0 are trapped charge (G~ q = 0).
    """
    zero = [cl for cl in dec.clusters if cl.zero]
    if not zero or dec.block is None or zero[0].right is None:
        return 0.0
    q = dec.q1 @ zero[0].right
    cq, gq = c @ q, g @ q
    if not np.all(np.isfinite(cq)) or np.linalg.norm(cq) == 0.0:
        return 0.0
    rates = np.abs(np.linalg.eigvals(np.linalg.lstsq(cq, -gq, rcond=None)[0]))
    rates = rates[rates > ZERO_ROUNDING * abs(dec.s0)]
    return float(rates.min()) if rates.size else 0.0


def _slow_modes_resolved(dec: Decomposition, g: np.ndarray, c: np.ndarray,
                         null: np.ndarray) -> Decomposition:
    """``dec``, or its pencil decomposed again at a shift that resolves a slow real mode.

    The scale is the mode's own: the new shift is the geometric centre of the slow rate and the
    fastest mode, so both sit ~ sqrt(spread) from it; the result is kept only when it finds the
    same number of finite modes and fewer zero ones (a spread beyond ~1e20 stays unresolved).
    """
    slow = _slow_rate(dec, g, c)
    if slow == 0.0:
        return dec
    rates = np.abs(np.linalg.eigvals(dec.a))
    center = math.sqrt(slow * max(float(rates.max()), slow))
    better = _try_shifts(g, c, null, center, ZERO_REL, strict=False)
    if better is None or better.order != dec.order or _zero_count(better) >= _zero_count(dec):
        return dec
    return better


def _hidden_slow_modes(dec: Decomposition, g: np.ndarray, c: np.ndarray, null: np.ndarray,
                       zeros: int) -> Decomposition:
    """``dec``, or its pencil decomposed again where the slow real modes it took for trapped
    charge are resolved: its zero cluster holds more modes than the graph's ``zeros``, so
    some of them are real modes too slow for ``_slow_rate`` to read (1e-14 of the fastest:
    below rounding at the shift).  At the lowest shift that keeps the fastest mode finite
    (``LOWEST_SHIFT`` of it) a mode down to ZERO_REL of that shift stands out; the result is
    decomposed once more at the geometric centre of the slowest such rate and the fastest, so
    both keep their digits.  Kept only with the same number of finite modes and no more zero
    modes than ``zeros``."""
    rates = np.abs(np.linalg.eigvals(dec.a))
    fastest = float(rates.max(initial=0.0))
    if fastest == 0.0:
        return dec
    found = dec
    for base in (fastest * LOWEST_SHIFT, None):
        if base is None:
            slow = np.abs(np.linalg.eigvals(found.a))
            slow = slow[slow > found.zero_tol]
            base = math.sqrt(float(slow.min()) * fastest)
        better = _try_shifts(g, c, null, base, ZERO_REL, strict=False)
        if better is None or better.order != dec.order or _zero_count(better) > zeros:
            break
        found = replace(better, refine=True)
    return found


def _try_shifts(g, c, null, base: float, zero_rel: float, strict: bool = True):
    for factor in _SHIFT_TRIES:
        dec = _decompose_at(g, c, null, base * factor, zero_rel)
        if dec is not None:
            return dec
    if strict:
        raise SingularPencil("G + s C is singular for every shift tried")
    return None


def augment(g: np.ndarray, c: np.ndarray, b: np.ndarray,
            null: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The homogeneous augmented system for x_a = [x; u], u' = 0, u = 1 (shapes n+1).

    C_a x_a' + G_a x_a = 0 with C_a = [[C, 0], [0, 1]], G_a = [[G, -b], [0, 0]]: exact for any
    b, including b outside the range of G (unbounded ramps), whose polynomial growth appears as
    a Jordan block at lambda = 0.  Returns (G_a, C_a, null_a).
    """
    n = g.shape[0]
    ga = np.zeros((n + 1, n + 1))
    ca = np.zeros((n + 1, n + 1))
    ga[:n, :n], ga[:n, n] = g, -b
    ca[:n, :n], ca[n, n] = c, 1.0
    null_a = np.vstack([null, np.zeros((1, null.shape[1]))])
    return ga, ca, null_a
