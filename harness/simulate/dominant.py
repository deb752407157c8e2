"""The numerical engine's own dominant-τ estimate: the pole sum of the modes its probe observes.

Route (independent of the exact engine's zero-value time constants and of its structural
reachability rule): a modal decomposition of this engine's own equations of interval k,
M y' = -K_dc y + b (equations.py: node voltages, inductor currents, carrier currents; K_dc the
ideal circuit's rows, no 1/r_s), with the regularisation's carrier inductances L_p taken out of
M so the pencil is the ideal circuit's.  The generalized eigenproblem -K_dc v = lambda M v
(QZ, ``scipy.linalg.eig`` with left and right vectors) gives the finite modes lambda_i and

    y(t) = y_inf + sum_i v_i (u_i^H M y0) / (u_i^H M v_i) e^(lambda_i t),

so mode i appears in the probe's ideal row c (value c . y) with strength

    s_i = |c v_i| * sum_j |(u_i^H M)_j| a_j / |u_i^H M v_i|,

the largest it can reach from an initial deviation within the states' scales a_j (the
engine's voltage and current scales).  A mode is *observed* when s_i > ``OBSERVED`` times
sum_j |c_j| a_j (the probe's own scale); a mode of a part of the circuit that cannot reach the
probe has c v_i = 0 up to rounding.  Pulse-scale modes of the parasitic node capacitances
(|lambda| t_pulse > PILOT_SPLIT) are the model's, not the circuit's, and are left out.  Then

    tau = sum over the observed modes of -1/lambda_i (real part; conjugate pairs add to a real),

the first denominator coefficient b1 of the probe's transfer function (the sum of the time
constants of its poles).  The exact engine reaches the same number as a sum of zero-value
time constants of the storage that reaches the probe (Cochrun & Grabel, IEEE Trans. Circuit
Theory 20 (1973) 8-14).  An observed mode that does not decay within the settle horizon
(``Regularisation.horizon``, 1e3 times the circuit's slowest time scale: trapped charge,
growth) makes tau None, as an infinite zero-value term does.  ``terms``
maps "mode i" (slowest first) to each observed mode's -1/lambda_i.

The probe's ideal row: a node, between or across probe its voltage difference; a capacitor's
current the voltage across it (the same modes for lambda != 0); a carrier's or an inductor's
current its own current state; a cccs its control's current row; the other parts their branch
rows (resistive); an independent current source none (no mode: tau None).

Cost: one dense QZ per switch configuration (memoised), up to ``EIGEN_UP_TO`` states; above
that the estimate is not computed (None).

deviation and t50 come from interval k's integrated held waveform on the sign-off scan grid
(signoff.scan_grid, refined by Brent's method on the dense output).
"""

from __future__ import annotations

import math

import numpy as np
import scipy.linalg as la
from scipy.optimize import brentq

from ..model import ACROSS, BETWEEN, CAPACITOR, CCCS, CURRENT_SOURCE, NODE, Probe
from ..results import DominantTau
from ..tolerances import WAVEFORM_SWING_FLOOR
from .probes import voltage_row
from .regularise import PILOT_SPLIT
from .signoff import scan_grid

#: largest state whose modes are computed (dense QZ)
EIGEN_UP_TO = 800
#: a mode is observed in a probe above this fraction of the probe's own scale
OBSERVED = 1e-9


# ------------------------------------------------------------------------------- modes
def _scales(sol) -> np.ndarray:
    """a_j: the voltage scale for node states, the current scale for current states (n,)."""
    a = np.full(sol.layout.n, sol.i_scale)
    a[:len(sol.layout.nodes)] = sol.v_scale
    return a


def _decompose(sol, system):
    """(lambda, V, strength weights) of the ideal pencil (module docstring), memoised per
    system; None above EIGEN_UP_TO states or when QZ fails."""
    key = ("modes", id(system))
    if key in sol._cache:
        return sol._cache[key]
    lay, out = sol.layout, None
    K = system.K_dc.toarray()
    M = system.M.toarray()
    carriers = [lay.part_index[n] for n in lay.carriers]
    M[carriers, :] = 0.0
    M[:, carriers] = 0.0
    if 0 < lay.n <= EIGEN_UP_TO and np.all(np.isfinite(K)) and np.all(np.isfinite(M)):
        try:
            ab, left, right = la.eig(-K, M, left=True, right=True, homogeneous_eigvals=True)
        except (la.LinAlgError, ValueError):
            ab = None
        if ab is not None:
            alpha, beta = ab
            finite = np.abs(beta) > 1e-12 * np.abs(alpha)
            lam = alpha[finite] / beta[finite]
            v, u = right[:, finite], left[:, finite]
            um = u.conj().T @ M                                  # (m, n)
            norm = np.abs(np.sum(um * v.T, axis=1))
            with np.errstate(divide="ignore", invalid="ignore"):
                reach = (np.abs(um) @ _scales(sol)) / norm
            ok = np.isfinite(reach)
            out = (lam[ok], v[:, ok], reach[ok])
    sol._cache[key] = out
    return out


def ideal_row(sol, system, probe: Probe) -> np.ndarray:
    """The probe's row over the full state of the ideal pencil (module docstring), shape (n,)."""
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


def observed_modes(sol, probe: Probe, k: int) -> np.ndarray | None:
    """The rates lambda_i (1/s) of interval k's circuit modes observed in ``probe`` (module
    docstring), shape (m,); None where they cannot be computed."""
    system = sol.systems[k]
    modes = _decompose(sol, system)
    if modes is None:
        return None
    lam, vecs, reach = modes
    row = ideal_row(sol, system, probe)
    own = float(np.abs(row) @ _scales(sol))
    strength = np.abs(row @ vecs) * reach
    circuit_mode = np.abs(lam) * sol.regularisation.t_pulse <= PILOT_SPLIT
    return lam[circuit_mode & (strength > OBSERVED * own)]


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
    fe = sol.features(probe, k)
    if tau is None or fe.final is None or fe.after is None:
        return DominantTau(tau, terms, msum)
    swing = fe.after - fe.final
    grid = scan_grid(sol, k)
    values = sol.held(probe, k, grid)
    values[0] = fe.after
    excursion = float(np.max(np.abs(values - fe.final), initial=0.0))
    if not abs(swing) > WAVEFORM_SWING_FLOOR * excursion:
        # a pulse that starts and ends near its final value: no one-τ curve describes it
        return DominantTau(tau, terms, msum, None, None, tau * math.log(2))
    one = fe.final + swing * np.exp(-grid / tau)
    deviation = float(np.max(np.abs(one - values)) / abs(swing))
    t50 = _first_crossing(sol, probe, k, grid, values, fe.final + swing / 2)
    return DominantTau(tau, terms, msum, deviation, t50, tau * math.log(2))
