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
engine's value (``compare.dominant._with_weak_modes``).

Above ``modal.EIGEN_UP_TO`` states the estimate is not computed (None).

deviation and t50 come from interval k's integrated held waveform on the sign-off scan grid
(signoff.scan_grid, refined by Brent's method on the dense output).
"""

from __future__ import annotations

import math

import numpy as np
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


# ------------------------------------------------------------------------------- modes
def observed_modes(sol, probe: Probe, k: int,
                   threshold: float = OBSERVED) -> np.ndarray | None:
    """The rates lambda_i (1/s) of interval k's circuit modes observed in ``probe`` above
    ``threshold`` of its own scale (module docstring), strongest first, shape (m,); None
    where they cannot be computed."""
    system = sol.systems[k]
    modes = decompose(sol, system)
    if modes is None:
        return None
    row = ideal_row(sol, system, probe)
    own = float(np.abs(row) @ state_scales(sol))
    strength = np.abs(row @ modes.v) * modes.reach
    order = np.argsort(-strength)
    return modes.lam[order][strength[order] > threshold * own]


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
