"""The numerical engine's own modes: a modal decomposition of its ideal interval equations.

Interval k's equations M y' = -K_dc y + b (equations.py: node voltages, inductor currents,
carrier currents; K_dc the ideal circuit's rows, no 1/r_s) with the regularisation's carrier
inductances L_p taken out of M are the ideal circuit's pencil in this engine's own
formulation.  QZ (``scipy.linalg.eig`` with left and right vectors) gives its finite modes
lambda_i with right vectors v_i and left vectors u_i, and every deviation from the interval's
final state expands as

    y(t) - y_inf = sum_i v_i alpha_i e^(lambda_i t),   alpha_i = u_i^H M (y(t0) - y_inf)
                                                                  / (u_i^H M v_i) e^(-lambda_i t0).

Two uses:

* ``decompose`` also returns each mode's *reach*, sum_j |(u_i^H M)_j| a_j / |u_i^H M v_i| with
  a_j the states' voltage or current scales: how far the mode can move the state from an
  initial deviation within those scales (the dominant-τ route, ``dominant.py``);
* ``visible`` expands the integrated response itself, taken at the end of the narrow pulse
  (t0 = ``Regularisation.post_pulse``, where the regularisation has died) against the settled
  state, and keeps the modes whose amplitude c v_i alpha_i in the probe's ideal row c exceeds
  ``tolerances.MODE_VISIBILITY`` of the probe's scale: this engine's order, modes and rings.

Pulse-scale modes of the parasitic node capacitances (|lambda| t_pulse > PILOT_SPLIT) are the
model's and are left out.  Cost: one dense QZ per switch configuration (memoised), up to
``EIGEN_UP_TO`` states; above that nothing is reported (None).  From ``SYMMETRIC_FROM``
states on, a pencil that is symmetric definite on its storage states (passive reciprocal RC
networks) takes ``_symmetric`` instead: the same modes and vectors from ``eigh`` of a smaller
matrix, without QZ's infinite eigenvalues.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.linalg as la

from ..model import ACROSS, BETWEEN, CAPACITOR, CCCS, CURRENT_SOURCE, NODE, THROUGH, Probe
from ..tolerances import MODE_MERGE, MODE_VISIBILITY
from .probes import voltage_row
from .regularise import PILOT_SPLIT

#: a QZ pair with |beta|/||M|| below this fraction of |alpha|/||K|| is an infinite eigenvalue
INFINITE = 1e-12
#: largest state whose modes are computed (dense QZ)
EIGEN_UP_TO = 800
#: smallest state on which a symmetric definite pencil takes ``_symmetric`` (eigh, 4-12x
#: cheaper than QZ at 100-800 states, 1.7x at 64); below it QZ as before, where it costs ~1 ms and keeps
#: the bundled circuits' values to the last digit (the eigh route moves their rates by up to
#: 7e-14 relative, as often away from the exact engine's as towards it)
SYMMETRIC_FROM = 64
#: the Schur complement counts as symmetric when its asymmetry is below this fraction of its
#: largest entry (rounding of the elimination)
SYMMETRY = 1e-12
#: a mode decaying slower than this fraction of its magnitude is undamped (not in the order)
UNDAMPED = 1e-9
#: the order is also counted at this many times the visibility threshold and at its inverse:
#: the band within which this engine's amplitudes (errors ~ its tolerance) cannot place a mode
BAND = 100.0
#: the integration's relative error on a state, in units of its tolerance (rtol)
NOISE = 10.0


@dataclass(frozen=True)
class Modes:
    """The finite modes of one system's ideal pencil: rates lam (1/s, shape (m,)), right
    vectors v (n, m), the rows u_i^H M (m, n), their norms u_i^H M v_i (m,) and reach (m,)."""

    lam: np.ndarray
    v: np.ndarray
    um: np.ndarray
    norm: np.ndarray
    reach: np.ndarray


def state_scales(sol) -> np.ndarray:
    """a_j: the voltage scale for node states, the current scale for current states (n,)."""
    return np.where(sol.layout.volts, sol.v_scale, sol.i_scale)


def decompose(sol, system) -> Modes | None:
    """The ideal pencil's modes (module docstring), memoised per system; None above
    EIGEN_UP_TO states or when QZ fails."""
    key = ("modes", id(system))
    if key not in sol._cache:
        sol._cache[key] = _qz(sol, system)
    return sol._cache[key]


def _qz(sol, system) -> Modes | None:
    lay = sol.layout
    K = system.K_dc.toarray()
    M = system.M.toarray()
    carriers = [lay.part_index[n] for n in lay.carriers]
    M[carriers, :] = 0.0
    M[:, carriers] = 0.0
    if not (0 < lay.n <= EIGEN_UP_TO and np.all(np.isfinite(K)) and np.all(np.isfinite(M))):
        return None
    pairs = _symmetric(K, M) if lay.n >= SYMMETRIC_FROM else None
    if pairs is None:
        pairs = _general(K, M)
    if pairs is None:
        return None
    lam, v, um = pairs
    circuit_mode = np.abs(lam) * sol.regularisation.t_pulse <= PILOT_SPLIT
    norm = np.sum(um * v.T, axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        reach = (np.abs(um) @ state_scales(sol)) / np.abs(norm)
    ok = np.isfinite(reach) & circuit_mode
    return Modes(lam[ok], v[:, ok], um[ok], norm[ok], reach[ok])


def _general(K: np.ndarray, M: np.ndarray):
    """(lam (m,), v (n, m), u^H M (m, n)) of the finite modes of (-K, M) by QZ with left and
    right vectors (LAPACK ggev through ``scipy.linalg.eig``), or None where QZ fails."""
    try:
        (alpha, beta), left, right = la.eig(-K, M, left=True, right=True,
                                            homogeneous_eigvals=True)
    except (la.LinAlgError, ValueError):
        return None
    finite = _finite(alpha, beta, K, M)
    v, u = right[:, finite], left[:, finite]
    return alpha[finite] / beta[finite], v, u.conj().T @ M


def _symmetric(K: np.ndarray, M: np.ndarray):
    """(lam (m,), v (n, m), u^H M (m, n)) of (-K, M) where the pencil is symmetric definite on
    its storage states, else None (the caller takes QZ).

    The states split into D (a row or column of M nonzero) and A (M's row and column zero:
    nodes without capacitance, carrier currents).  With K_AA regular the finite modes are
    exactly those of the Schur complement S = K_DD - K_DA K_AA^-1 K_AD against M_DD (the A
    rows are constraints, Golub & Van Loan, Matrix Computations, 4th ed., sec. 7.7 on
    deflating infinite eigenvalues); where S is symmetric to rounding (a passive reciprocal
    network's nodal matrix; its carriers only fix node voltages) and M_DD positive definite,
    ``scipy.linalg.eigh(-S, M_DD)`` (LAPACK sygvd, sec. 8.7) gives real rates and
    M_DD-orthonormal vectors x: the right vector is x on D and -K_AA^-1 K_AD x on A, and as
    the left vector equals the right one on D and M vanishes on A, u^H M = x^T M_DD on D, 0 on
    A.  4-12x cheaper than QZ with both vector sets at 100-800 states (ladders, one run)."""
    store = np.any(M != 0.0, axis=0) | np.any(M != 0.0, axis=1)
    d, a = np.flatnonzero(store), np.flatnonzero(~store)
    if d.size == 0:
        return None
    m_dd = M[np.ix_(d, d)]
    k_da, k_ad = K[np.ix_(d, a)], K[np.ix_(a, d)]
    try:
        lu = la.lu_factor(K[np.ix_(a, a)], check_finite=False) if a.size else None
        lift = -la.lu_solve(lu, k_ad, check_finite=False) if a.size else np.zeros((0, d.size))
    except (la.LinAlgError, ValueError):
        return None
    schur = K[np.ix_(d, d)] + k_da @ lift
    scale = max(float(np.max(np.abs(schur))), 1e-300)
    if (not np.all(np.isfinite(lift)) or np.max(np.abs(schur - schur.T)) > SYMMETRY * scale
            or np.max(np.abs(m_dd - m_dd.T)) > 0.0):
        return None
    schur = 0.5 * (schur + schur.T)
    try:
        lam, x = la.eigh(-schur, m_dd, check_finite=False)
    except (la.LinAlgError, ValueError):
        return None
    lam = _rayleigh(schur, m_dd, x)
    v = np.zeros((K.shape[0], lam.size))
    v[d], v[a] = x, lift @ x
    um = np.zeros((lam.size, K.shape[0]))
    um[:, d] = x.T @ m_dd
    return lam, v, um


def _rayleigh(schur: np.ndarray, m_dd: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Rates (1/s, shape (m,)) as Rayleigh quotients -x^T S x / x^T M x of eigh's vectors x
    (n, m), the numerator summed in the conductance form sum_(i<j) -S_ij (x_i - x_j)^2 +
    sum_i (sum_j S_ij) x_i^2 (an identity for symmetric S).  A slow mode's x is smooth, so
    S x cancels to ~eps ||S|| ||x||: eigh's rate of it carries that absolute error (1.6e-11
    relative on the slowest mode of a 300-section ladder, against the textbook
    -4 sin^2((2k-1) pi / (2 (2n + 1))) / RC); the quotient's error is the square of the
    vector's, and the differences of neighbours carry no cancellation (4e-15 there).
    Chunked over modes so that the edge-by-mode differences stay under ~2^22 numbers."""
    i, j = np.nonzero(np.triu(schur, 1))
    weight = -schur[i, j]
    ground = np.sum(schur, axis=1)
    out = np.empty(x.shape[1])
    step = max(1, (1 << 22) // max(i.size, 1))
    for lo in range(0, x.shape[1], step):
        xs = x[:, lo:lo + step]
        diff = xs[i] - xs[j]
        num = weight @ (diff * diff) + ground @ (xs * xs)
        out[lo:lo + step] = -num / np.sum(xs * (m_dd @ xs), axis=0)
    return out


def _finite(alpha: np.ndarray, beta: np.ndarray, K: np.ndarray, M: np.ndarray) -> np.ndarray:
    """Which generalized eigenvalues alpha/beta of (-K, M) are finite: |beta|/||M|| above
    ``INFINITE`` of |alpha|/||K|| (QZ's beta of an infinite eigenvalue is rounding on M's
    scale).  Relative to the pencil's own rate scale ||K||/||M||, not to 1/s: an absolute test
    |beta| > 1e-12 |alpha| took an 18 fs mode (1.23 pF on 14.9 mohm) for infinite."""
    k_norm = max(float(np.max(np.abs(K), initial=0.0)), 1e-300)
    m_norm = max(float(np.max(np.abs(M), initial=0.0)), 1e-300)
    return np.abs(beta) / m_norm > INFINITE * np.abs(alpha) / k_norm


def ideal_row(sol, system, probe: Probe) -> np.ndarray:
    """The probe's row c over the full state of the ideal pencil, shape (n,): a voltage
    difference; a capacitor's current as the voltage across it (the same modes for lambda != 0);
    a carrier's or inductor's current its own state; a cccs its control's row; other parts
    their resistive branch rows; an independent current source none."""
    circuit, lay = sol.circuit, sol.layout
    if probe.kind == NODE:
        return voltage_row(lay, probe.targets[0], circuit.ground)
    if probe.kind == BETWEEN:
        return voltage_row(lay, probe.targets[0], probe.targets[1])
    part = circuit.part(probe.targets[0])
    if probe.kind == ACROSS or part.kind == CAPACITOR:
        return voltage_row(lay, part.p, part.n)
    if part.name in lay.part_index:
        row = np.zeros(lay.n)
        row[lay.part_index[part.name]] = 1.0
        return row
    if part.kind == CCCS and isinstance(part.control, str):
        return ideal_row(sol, system, Probe(probe.kind, (part.control,)))
    if part.kind == CURRENT_SOURCE:
        return np.zeros(lay.n)
    return system.branches[part.name].dense(lay.n)


@dataclass(frozen=True)
class Visible:
    """This engine's view of a probe's modes in one interval: order (a complex pair counts
    2), envelope time constants (s, slowest first, merged), damped frequencies (Hz), rings
    ((f_d Hz, zeta), slowest envelope first) and the order counted at BAND times the
    threshold and at its inverse (lowest, highest)."""

    order: int
    modes: tuple[float, ...]
    oscillation: tuple[float, ...]
    rings: tuple[tuple[float, float], ...]
    bounds: tuple[int, int] = (0, 0)


def _deviation(sol, k: int) -> np.ndarray | None:
    """y(t0) - y_inf over the full state, t0 the end of the pulse (module docstring)."""
    run, system = sol.runs[k], sol.systems[k]
    if run.status != "settled" or run.dense is None:
        return None
    t0 = sol.regularisation.post_pulse
    dz = np.asarray(run.dense(t0)).ravel() - np.asarray(run.dense(run.end)).ravel()
    return np.asarray(system.reduction.lift @ dz).ravel()


def visible(sol, probe: Probe, k: int, scale: float) -> Visible | None:
    """The modes visible in ``probe`` in interval k (module docstring), or None where they
    cannot be computed (too many states, the interval did not settle)."""
    if k >= len(sol.runs):
        return None
    modes, dev = decompose(sol, sol.systems[k]), _deviation(sol, k)
    if modes is None or dev is None:
        return None
    t0 = sol.regularisation.post_pulse
    with np.errstate(over="ignore", invalid="ignore"):
        alpha = (modes.um @ dev) / modes.norm * np.exp(-modes.lam * t0)
    gain = np.abs(ideal_row(sol, sol.systems[k], probe) @ modes.v)
    part = None if probe.kind != THROUGH else sol.circuit.part(probe.targets[0])
    if part is not None and part.kind == CAPACITOR:    # i = C dv/dt: each mode's C|lambda| v
        gain = gain * abs(part.value) * np.abs(modes.lam)
    amp = gain * np.abs(alpha)
    decaying = np.isfinite(amp) & (modes.lam.real < -UNDAMPED * np.abs(modes.lam))
    thr = MODE_VISIBILITY * scale
    seen = modes.lam[decaying & (amp > thr)]
    # the order band: the noise is what the integration's own error (NOISE times its
    # tolerance atol_j + rtol |y_j - y_inf| on every state j) can put into a mode's amplitude;
    # a mode counts surely when its amplitude less that noise exceeds BAND times the
    # threshold, possibly when its amplitude plus the noise exceeds the threshold over BAND or
    # it decayed by more than e over the pulse window (its error magnified by the
    # extrapolation back to t_k+).  (The states' full scales in place of their tolerances, and
    # "unsure" whenever the noise alone passed threshold/BAND, made the lower end 0 almost
    # always, so an order the closed form undercounts was never flagged.)
    tolerance = NOISE * (np.broadcast_to(sol.atol, dev.shape)
                         + max(sol.rtol, sol.regularisation.pulse_ratio) * np.abs(dev))
    with np.errstate(over="ignore", invalid="ignore"):
        noise = gain * (np.abs(modes.um) @ tolerance) / np.abs(modes.norm) \
            * np.abs(np.exp(-modes.lam * t0))
    extrapolated = np.abs(modes.lam.real) * t0 > 1.0
    bounds = (int(np.sum(decaying & ~extrapolated & (amp - noise > BAND * thr))),
              int(np.sum(decaying & (extrapolated | (amp + noise > thr / BAND)))))
    return _summarise(seen, ring_split(sol.regularisation.pulse_ratio), bounds)


def ring_split(pulse_ratio: float) -> float:
    """|Im lambda| / |lambda| below which a pair is a split double real pole, not a ring: the
    narrow-pulse model perturbs the pencil by about ``pulse_ratio`` (its inductor shunts), which
    splits a double pole by its square root; ten times that."""
    return 10.0 * math.sqrt(pulse_ratio)


def _summarise(lam: np.ndarray, split: float, bounds: tuple[int, int]) -> Visible:
    taus, rings = [], []
    for rate in sorted(lam, key=lambda r: r.real, reverse=True):
        if abs(rate.imag) > split * abs(rate) and rate.imag < 0:
            continue                                  # the conjugate of a pair counted below
        taus.append(float(-1.0 / rate.real))
        if abs(rate.imag) > split * abs(rate):
            rings.append((float(rate.imag / (2 * math.pi)), float(-rate.real / abs(rate))))
    order = int(lam.size)
    merged: list[float] = []
    for tau in taus:
        if not merged or abs(merged[-1] - tau) > max(MODE_MERGE, split) * max(merged[-1], tau):
            merged.append(tau)
    return Visible(order, tuple(merged), tuple(sorted(f for f, _ in rings)), tuple(rings),
                   bounds)
