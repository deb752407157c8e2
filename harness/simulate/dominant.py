"""The numerical engine's own dominant-τ estimate: the pole sum of the modes its probe observes.

Route (independent of the exact engine's zero-value time constants and of its structural
reachability rule): the modes of this engine's own ideal pencil (``modal.decompose``: QZ of
its interval equations M y' = -K_dc y + b with the carriers' L_p taken out of M), each with its
reach r_i (how far it can move the state from an initial deviation within the states' scales
a_j).  Mode i appears in the probe's ideal row c (``modal.ideal_row``) with strength
s_i = |c v_i| r_i, and is *observed* when s_i > ``OBSERVED`` times sum_j |c_j| a_j (the
probe's own scale); a mode of a part of the circuit that cannot reach the probe has c v_i = 0
up to rounding.  Then

    tau = sum over the observed modes of -1/lambda_i (real part; conjugate pairs add to a real),

the first denominator coefficient b1 of the probe's transfer function (the sum of the time
constants of its poles).  The exact engine reaches the same number as a sum of zero-value
time constants of the storage that reaches the probe (Cochrun & Grabel, IEEE Trans. Circuit
Theory 20 (1973) 8-14).  An observed mode that does not decay within the settle horizon
(``Regularisation.horizon``, 1e3 times the circuit's slowest time scale: trapped charge,
growth) makes tau None, as an infinite zero-value term does.  ``terms`` maps "mode i"
(slowest first) to each observed mode's -1/lambda_i.

A mode whose strength lies between ``WEAK`` and ``OBSERVED`` of the probe's scale is *weakly*
observed: storage reached through a path that time-scale separation makes faint (a slow Miller
mode in an inductor's voltage) and modes that cannot reach the probe at all (their c v_i is
QZ rounding) both land there, so this engine cannot say which; tau leaves them out and
``DominantTau.weak`` lists them, and the comparator takes tau plus any of them as this
engine's value (``compare.dominant._with_weak_modes``).  A mode below ``REFINE_BELOW`` of the
scale is judged on its right vector refined by one step of inverse iteration (``_refined``):
on a badly scaled pencil QZ's vector of a mode that cannot reach the probe shows it at up to
~1e-8, above OBSERVED.

Above ``modal.EIGEN_UP_TO`` states the estimate is not computed (None).

deviation and t50 come from interval k's integrated held waveform on the sign-off scan grid
(signoff.scan_grid, refined by Brent's method on the dense output).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import scipy.linalg as la
from scipy.optimize import brentq

from ..model import Probe
from ..results import DominantTau
from ..tolerances import WAVEFORM_SWING_FLOOR
from .modal import decompose, ideal_row, state_scales
from .signoff import scan_grid

#: a mode is observed in a probe above this fraction of the probe's own scale
OBSERVED = 1e-9
#: below OBSERVED and above this fraction a mode is *weakly* observed: a storage part reached
#: through a path that time-scale separation makes faint (a 675 s Miller mode in an
#: inductor's voltage at 3.3e-12 of the probe's scale, seed-generated random circuits) sits
#: among the QZ rounding of modes that cannot reach the probe (up to 9.3e-14 measured), so
#: this engine cannot tell which; it reports them apart (``DominantTau.weak``)
WEAK = 1e-15
#: at most this many weakly observed modes are reported (the strongest)
WEAK_MOST = 12
#: a mode whose strength lies between WEAK and this fraction of the probe's scale has its
#: right vector refined by one step of inverse iteration before it is judged: QZ's vector
#: carries the pencil's conditioning, and on a badly scaled pencil (a vcvs gain of 1520 beside
#: 11.9 pF) a mode of a feed-forward stage that cannot reach the probe showed at 1.5e-8 of
#: its scale (1e-16 after one step)
REFINE_BELOW = 1e-4
#: the inverse iteration's shift: the mode's own rate times (1 + SHIFT), close enough that
#: the other modes' share of the vector falls by |SHIFT lambda_i / (lambda_i - lambda_j)|
SHIFT = 1e-8
#: up to this many states the observed modes' rates are refined by the same step (one LU per
#: mode): on that pencil QZ's slow rate was 1e-6 off the hand ODE's (mpmath), the width of
#: the engines' dominant-τ tolerance; 4e-13 after one step
REFINE_UP_TO = 64
#: a refined rate that moves by more than this fraction of QZ's is not taken, nor the step's
#: vector (the step mixed in a neighbouring mode; rounding moves it far less)
REFINE_MOVE = 1e-4


# ------------------------------------------------------------------------------- modes
def observed_modes(sol, probe: Probe, k: int,
                   threshold: float = OBSERVED) -> np.ndarray | None:
    """The rates lambda_i (1/s) of interval k's circuit modes observed in ``probe`` above
    ``threshold`` of its own scale (module docstring), strongest first, shape (m,); None
    where they cannot be computed.  A mode below ``REFINE_BELOW`` of the scale is judged on
    its refined vector, and up to ``REFINE_UP_TO`` states the rates returned are refined."""
    system = sol.systems[k]
    modes = decompose(sol, system)
    if modes is None:
        return None
    row = ideal_row(sol, system, probe)
    own = float(np.abs(row) @ state_scales(sol))
    strength = np.abs(row @ modes.v) * modes.reach
    for i in np.flatnonzero((strength > WEAK * own) & (strength < REFINE_BELOW * own)):
        _, v = _refined(sol, system, modes, i)
        with np.errstate(divide="ignore", invalid="ignore"):
            strength[i] = (np.abs(row @ v) * modes.reach[i] * abs(modes.norm[i])
                           / abs(modes.um[i] @ v))
    order = np.argsort(-strength)
    seen = order[strength[order] > threshold * own]
    if sol.layout.n > REFINE_UP_TO:
        return modes.lam[seen]
    return np.array([_refined(sol, system, modes, i)[0] for i in seen], dtype=complex)


def _refined(sol, system, modes, i: int) -> tuple[complex, np.ndarray]:
    """Mode i's rate (1/s) and right vector (n,) after one step of inverse iteration on this
    engine's ideal pencil (K_dc, M without the carriers' L_p, as in ``modal``):
    (K_dc + sigma M) w = M v_i with sigma = lambda_i (1 + SHIFT); as K_dc v = -lambda M v for
    the true vector, w = v / (sigma - lambda), so lambda = sigma - (u_i^H M v_i)/(u_i^H M w)
    (Golub & Van Loan, Matrix Computations, 4th ed., sec. 7.6.1).  QZ's own rate and vector
    where the solve fails or the rate moves by more than ``REFINE_MOVE``: such a move means
    u_i^H M w nearly vanished, w being another mode's vector more than this one's, and the
    strength ``observed_modes`` reads from w is divided by that near-zero (a mode the probe
    cannot see was counted in the dominant τ).  Memoised per system and mode."""
    key = ("refined", id(system), int(i))
    if key not in sol._cache:
        lam, v = complex(modes.lam[i]), modes.v[:, i]
        stiffness, mass = _ideal_pencil(sol, system)
        shift = lam * (1.0 + SHIFT)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", la.LinAlgWarning)
                w = la.solve(stiffness + shift * mass, mass @ v)
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
                rate = complex(shift - (modes.um[i] @ v) / (modes.um[i] @ w))
        except (la.LinAlgError, ValueError):
            w, rate = v, lam
        if not (np.all(np.isfinite(w)) and np.any(w != 0)):
            w = v
        if not (np.isfinite(rate) and abs(rate - lam) <= REFINE_MOVE * abs(lam)):
            rate, w = lam, v                # the step is not this mode's: neither is taken
        sol._cache[key] = (rate if lam.imag else complex(rate.real), w)
    return sol._cache[key]


def _ideal_pencil(sol, system) -> tuple[np.ndarray, np.ndarray]:
    """(K_dc, M) dense, with the carriers' rows and columns of M zeroed (their L_p), as
    ``modal`` decomposes them; memoised per system."""
    key = ("ideal pencil", id(system))
    if key not in sol._cache:
        mass = system.M.toarray()
        carriers = [sol.layout.part_index[n] for n in sol.layout.carriers]
        mass[carriers, :] = 0.0
        mass[:, carriers] = 0.0
        sol._cache[key] = (system.K_dc.toarray(), mass)
    return sol._cache[key]


def weak_taus(sol, probe: Probe, k: int) -> tuple[float, ...]:
    """-1/Re lambda (s) of the decaying modes observed between ``WEAK`` and ``OBSERVED`` of
    the probe's own scale, the ``WEAK_MOST`` strongest: those this engine cannot place."""
    faint = observed_modes(sol, probe, k, WEAK)
    if faint is None:
        return ()
    strong = observed_modes(sol, probe, k)
    out = [float((-1.0 / r).real) for r in faint if r.real < 0 and not np.any(strong == r)]
    return tuple(out[:WEAK_MOST])


def modal_tau(sol, probe: Probe, k: int) -> tuple[float | None, dict[str, float]]:
    """(tau, terms): the sum of -1/lambda over the observed modes (s) and each term, or
    (None, terms) where a mode does not decay or none is observed."""
    lam = observed_modes(sol, probe, k)
    if lam is None or lam.size == 0:
        return None, {}
    lam = lam[np.argsort(np.abs(lam))]
    slow = sol.regularisation.horizon
    if np.any(lam.real * slow > -1.0):
        return None, {f"mode {i + 1}": float((-1.0 / r).real) if r != 0 else math.inf
                      for i, r in enumerate(lam)}
    terms = {f"mode {i + 1}": float((-1.0 / r).real) for i, r in enumerate(lam)}
    total = float(np.sum((-1.0 / lam).real))
    return (total if math.isfinite(total) and total > 0 else None), terms


# ------------------------------------------------------------------------------- waveform
def _first_crossing(sol, probe: Probe, k: int, grid: np.ndarray, values: np.ndarray,
                    level: float) -> float | None:
    """First local time where the held waveform crosses ``level`` (either way) on ``grid``,
    refined by Brent's method on the dense output; None when it never does."""
    d = values - level
    for i in range(len(grid) - 1):
        if d[i] == 0:
            return float(grid[i])
        if d[i] * d[i + 1] < 0:
            fun = lambda s: float(sol.held(probe, k, np.array([s]))[0]) - level  # noqa: E731
            lo, hi = float(grid[i]), float(grid[i + 1])
            if fun(lo) * fun(hi) > 0:         # s = 0 holds x(t_k+), the dense output may not
                return hi if abs(d[i + 1]) < abs(d[i]) else lo
            return float(brentq(fun, lo, hi, xtol=1e-15 * max(hi, 1e-300), rtol=1e-14))
    return None


def dominant(sol, probe: Probe, k: int) -> DominantTau | None:
    """The numerical engine's ``results.DominantTau`` of ``probe`` in interval k, or None where
    interval k was not integrated (see the module docstring)."""
    if k >= len(sol.runs):
        return None
    tau, terms = modal_tau(sol, probe, k)
    msum = tau
    weak = weak_taus(sol, probe, k)
    fe = sol.features(probe, k)
    if tau is None or fe.final is None or fe.after is None:
        return DominantTau(tau, terms, msum, weak=weak)
    swing = fe.after - fe.final
    grid = scan_grid(sol, k)
    values = sol.held(probe, k, grid)
    values[0] = fe.after
    excursion = float(np.max(np.abs(values - fe.final), initial=0.0))
    if not abs(swing) > WAVEFORM_SWING_FLOOR * excursion:
        # a pulse that starts and ends near its final value: no one-τ curve describes it
        return DominantTau(tau, terms, msum, None, None, tau * math.log(2), weak)
    one = fe.final + swing * np.exp(-grid / tau)
    deviation = float(np.max(np.abs(one - values)) / abs(swing))
    t50 = _first_crossing(sol, probe, k, grid, values, fe.final + swing / 2)
    return DominantTau(tau, terms, msum, deviation, t50, tau * math.log(2), weak)
