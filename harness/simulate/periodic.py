"""The periodic steady state by the numerical engine's own route: shooting on its integrated
narrow-pulse model, confirmed by integrating a period from the result.

Method (shooting for the periodic steady state of a periodically switched network, as in
Aprille and Trick, Proc. IEEE 60(1), 1972: the state at the start of a period is found so that
one integrated period returns to it; for a linear network the period map is affine and one
Newton step is exact).

* Coordinates: u, the integrated coordinates x_d (``equations``) of the window's first
  interval at the instant before its event.  P(u) integrates one period of the engine's own
  ODEs (``System``: y_d' = J y_d + c per interval, Radau, L-stable, order 5, the pulse at each
  event resolved by a first step of a fraction of its width; z = y_d − y_o from each interval's
  operating point, as ``integrate`` does) and returns the coordinates before the next period.
* Jacobian: Φ by finite differences of integrated periods, column j from u_b + δ_j e_j with
  δ_j the engine's state scale (V or A), exact up to the integration error for an affine map.
* Steady state: u* = u_b + (I − Φ)⁻¹ (P(u_b) − u_b), u_b the engine's own state at the
  window's start.  Where I − Φ is singular (charge conserved over every period: its left null
  vectors ℓ) the step keeps ℓ·u of u_b, and ℓ·(P(u_b) − u_b) ≠ 0 (charge added every period)
  is growth.  A period integrated from u* must return within ``CHANGE`` of the state scale
  (the period-to-period change), else nothing is reported.
* Values: one period integrated from u* with dense output: the extremes on a grid after each
  interval's pulse (the pulse is the regularised impulse, not a value), refined by a bounded
  search on the dense output; the average by 5-point Gauss–Legendre over each accepted step
  (the pulse included: its integral is the impulsive charge); settling by iterating the
  deviation δu_n = Φ^n (u_b − u*) with the probe's deviation rows from the same finite
  differences, until ‖Ψ‖ ‖δu_n‖ is inside the band.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import minimize_scalar

from ..model import Probe
from ..results import GROWS, NO_WINDOW, NOT_ESTABLISHED, PeriodicValue
from .integrate import interval_origin
from .probes import probe_row

#: the first step of an interval, as a fraction of the pulse width (as the engine's own)
FIRST_STEP = 1e-3
#: a period integrated from the steady state returns within this fraction of the state scale
#: (times the engine's rtol, at least ``CHANGE_FLOOR``)
CHANGE = 1e3
CHANGE_FLOOR = 1e-6
#: I − Φ with a condition number above this is singular (conserved charge)
SINGULAR = 1e10
#: grid points per interval for the extremes; deviation rows per interval
GRID_POINTS = 400
DEVIATION_ROWS = 9
#: periods iterated at most for the settle count
MAX_SETTLE_PERIODS = 200_000
#: spectral radius of Φ above this is growth
GROWTH = 1 + 1e-6
#: a first-period deviation below this fraction of the probe's size is "already there"
AT_REST = 1e-9
_GL_X, _GL_W = np.polynomial.legendre.leggauss(5)


@dataclass(frozen=True)
class _Leg:
    """One interval of the period: its system, its length (s), start time (s), origin over
    x_d, and the driving term r (z' = J z + r)."""

    k: int
    system: object
    length: float
    start: float
    origin: np.ndarray
    r: np.ndarray


@dataclass(frozen=True)
class _Run:
    """One integrated period: per leg the step times (local s), the dense output of z, and
    x_d at the deviation sample times (shape (DEVIATION_ROWS, n_d))."""

    steps: tuple
    dense: tuple
    samples: tuple
    end: np.ndarray


@dataclass(frozen=True)
class NumericCycle:
    """The engine's steady-state period: its legs, the run from u*, Φ, the deviation
    samples per unit δu (per leg, shape (DEVIATION_ROWS, n_d, f)) and δu_0 = u_b − u*."""

    legs: tuple
    run: _Run
    phi: np.ndarray
    sensitivity: tuple
    du0: np.ndarray


class NoSteadyState(Exception):
    """No steady state (``reason``: ``results`` GROWS or NOT_ESTABLISHED)."""

    def __init__(self, reason: str) -> None:
        super().__init__(reason)
        self.reason = reason


def _legs(sol) -> tuple[_Leg, ...]:
    window = sol.circuit.periodic
    events = np.asarray(sol.circuit.events)
    start_state = _start_state(sol)
    legs, y = [], start_state
    for j, offset in enumerate(window.offsets):
        time = window.start + offset
        k = int(np.argmin(np.abs(events - time)))
        nxt = window.offsets[j + 1] if j + 1 < len(window.offsets) else \
            window.offsets[0] + window.period
        system = sol.systems[k]
        _, _, origin, r = interval_origin(system, y, sol.plausible, sol.atol / sol.rtol)
        legs.append(_Leg(k, system, nxt - offset, time, origin, np.asarray(r).ravel()))
    return tuple(legs)


def _start_state(sol) -> np.ndarray:
    """The engine's full state just before the window's first event."""
    window = sol.circuit.periodic
    k0 = int(np.argmin(np.abs(np.asarray(sol.circuit.events) - window.first)))
    if k0 == 0:
        return sol.y0
    if k0 - 1 < len(sol.runs) and sol.runs[k0 - 1].y_next is not None:
        return sol.runs[k0 - 1].y_next
    raise NoSteadyState(NOT_ESTABLISHED)


def _period(sol, legs, u: np.ndarray, dense: bool = False) -> _Run:
    """Integrate one period from the first leg's coordinates ``u`` (shape (n_d,))."""
    steps, outs, samples = [], [], []
    yd = u
    for j, leg in enumerate(legs):
        red, jac, r = leg.system.reduction, leg.system.jac, leg.r
        if j:
            yd = red.integrated(y_full)
        atol = sol.atol[red.dyn]
        res = solve_ivp(lambda _t, z: jac @ z + r, (0.0, leg.length), yd - leg.origin,
                        method="Radau", jac=jac, rtol=sol.rtol, atol=atol,
                        first_step=min(sol.regularisation.t_pulse * FIRST_STEP, leg.length),
                        dense_output=True)
        if not res.success or not np.all(np.isfinite(res.y)):
            raise NoSteadyState(NOT_ESTABLISHED)
        s = _sample_times(sol, leg.length)
        samples.append((res.sol(s) + leg.origin[:, None]).T)
        z_end = res.y[:, -1]
        y_full = np.asarray(red.lift @ (leg.origin + z_end)).ravel() + red.lift_c
        steps.append(res.t if dense else None)
        outs.append(res.sol if dense else None)
    end = legs[0].system.reduction.integrated(y_full)
    return _Run(tuple(steps), tuple(outs), tuple(samples), end)


def _sample_times(sol, length: float) -> np.ndarray:
    """The deviation sample times of a leg (local s), after its pulse."""
    first = min(sol.regularisation.post_pulse, 0.5 * length)
    return np.linspace(first, length, DEVIATION_ROWS)


def _scales(sol, leg: _Leg) -> np.ndarray:
    """The engine's scale (V or A) of each integrated coordinate of ``leg``."""
    nn = len(sol.layout.nodes)
    dyn = leg.system.reduction.dyn
    return np.where(dyn < nn, sol.v_scale, sol.i_scale)


def cycle(sol) -> NumericCycle:
    """The engine's steady-state period (raises ``NoSteadyState``)."""
    if sol.circuit.periodic is None:
        raise NoSteadyState(NO_WINDOW)
    legs = _legs(sol)
    u_b = legs[0].system.reduction.integrated(_start_state(sol))
    base = _period(sol, legs, u_b)
    deltas = _scales(sol, legs[0])
    columns = [_period(sol, legs, u_b + d * e) for d, e in zip(deltas, np.eye(u_b.size))]
    phi = np.column_stack([(c.end - base.end) / d for c, d in zip(columns, deltas)]) \
        if columns else np.zeros((0, 0))
    if phi.size and np.max(np.abs(np.linalg.eigvals(phi))) > GROWTH:
        raise NoSteadyState(GROWS)
    tol = max(CHANGE * sol.rtol, CHANGE_FLOOR)
    u_star = u_b + _correction(np.eye(u_b.size) - phi, base.end - u_b, deltas, tol)
    final = _period(sol, legs, u_star, dense=True)
    if np.any(np.abs(final.end - u_star) > tol * deltas):
        raise NoSteadyState(NOT_ESTABLISHED)
    sens = tuple(np.stack([(c.samples[j] - base.samples[j]) / d
                           for c, d in zip(columns, deltas)], axis=-1)
                 for j in range(len(legs)))
    return NumericCycle(legs, final, phi, sens, u_b - u_star)


def _correction(lhs: np.ndarray, rhs: np.ndarray, deltas: np.ndarray,
                tol: float) -> np.ndarray:
    """Δ with (I − Φ) Δ = P(u_b) − u_b: one Newton step of the shooting.  Where I − Φ is
    singular (ℓ (I − Φ) = 0: ℓ·u is conserved by every period) the step keeps ℓ·u, ℓ·Δ = 0;
    ℓ·rhs beyond ``tol`` of the state scale (charge added every period) is growth."""
    if lhs.size == 0:
        return np.zeros(0)
    if np.linalg.cond(lhs) < SINGULAR:
        return np.linalg.solve(lhs, rhs)
    u, sv, _ = np.linalg.svd(lhs / deltas[None, :])
    conserved = u[:, sv <= sv[0] / SINGULAR].T          # rows ℓ, left null of I − Φ
    if np.any(np.abs(conserved @ rhs) > tol * (np.abs(conserved) @ deltas)):
        raise NoSteadyState(GROWS)
    stacked = np.vstack([lhs, conserved])
    target = np.concatenate([rhs, np.zeros(conserved.shape[0])])
    return np.linalg.lstsq(stacked, target, rcond=None)[0]


def periodic_value(sol, cyc: NumericCycle, probe: Probe, fraction: float) -> PeriodicValue:
    """The probe's ``PeriodicValue`` from the engine's steady-state period."""
    window = sol.circuit.periodic
    rows = [probe_row(sol.circuit, sol.layout, leg.system, probe) for leg in cyc.legs]
    lo, hi = _extremes(sol, cyc, rows)
    total = 0.0
    for leg, steps, dense, (w, e) in zip(cyc.legs, cyc.run.steps, cyc.run.dense, rows):
        a, b = steps[:-1], steps[1:]
        half, mid = (b - a) / 2, (a + b) / 2
        s = (mid[:, None] + half[:, None] * _GL_X[None, :]).ravel()
        y = w @ dense(s) + (w @ leg.origin + e)
        total += float(np.sum(y.reshape(-1, _GL_X.size) @ _GL_W * half))
    average = total / window.period
    settle = _settle(cyc, rows, fraction, max(abs(lo), abs(hi), 1e-300))
    return PeriodicValue(start=window.first, period=window.period, minimum=lo, maximum=hi,
                         average=average, settle_periods=settle, fraction=fraction)


def _extremes(sol, cyc: NumericCycle, rows) -> tuple[float, float]:
    """(minimum, maximum) after each pulse: a grid on the dense output, then a bounded
    search around the best grid points."""
    found = []
    for leg, dense, (w, e) in zip(cyc.legs, cyc.run.dense, rows):
        offset = float(w @ leg.origin + e)
        grid = np.linspace(min(sol.regularisation.post_pulse, 0.5 * leg.length), leg.length,
                           GRID_POINTS)
        y = w @ dense(grid) + offset
        for sign in (1.0, -1.0):
            i = int(np.argmin(sign * y))
            a, b = grid[max(i - 1, 0)], grid[min(i + 1, grid.size - 1)]
            best = float(y[i])
            if b > a:
                res = minimize_scalar(lambda s: sign * float(w @ dense(s) + offset),
                                      bounds=(a, b), method="bounded",
                                      options={"xatol": 1e-12 * b})
                if res.success and sign * res.fun < sign * best:
                    best = sign * float(res.fun)
            found.append((sign, best))
    lows = [v for s, v in found if s > 0]
    highs = [v for s, v in found if s < 0]
    return min(lows), max(highs)


def _settle(cyc: NumericCycle, rows, fraction: float, size: float) -> int | None:
    """Periods until the probe's deviation stays within ``fraction`` of its first period's."""
    if cyc.du0.size == 0:
        return 0
    psi = np.vstack([np.einsum("d,sdf->sf", w, sens) for (w, _), sens in
                     zip(rows, cyc.sensitivity)])
    du = cyc.du0
    d0 = float(np.max(np.abs(psi @ du)))
    if d0 <= AT_REST * size:
        return 0
    band = fraction * d0
    norm = float(np.linalg.norm(psi, 2))
    last = -1
    for n in range(MAX_SETTLE_PERIODS):
        if np.max(np.abs(psi @ du)) > band:
            last = n
        if norm * float(np.linalg.norm(du)) <= band:
            return last + 1
        du = cyc.phi @ du
    return None


def steady_state(sol, probe: Probe, fraction: float) -> PeriodicValue:
    """``PeriodicValue`` of ``probe`` for a ``NumericSolution`` (a reason where none)."""
    try:
        cyc = sol._periodic_cycle()
    except NoSteadyState as exc:
        return PeriodicValue.without(sol.circuit.periodic, fraction, exc.reason)
    return periodic_value(sol, cyc, probe, fraction)


def steady_waveform(sol, probe: Probe, offsets: np.ndarray) -> np.ndarray | None:
    """The probe's steady-state values at ``offsets`` (s after the window's first event, within
    [0, period]; NaN outside), shape (n,), from the dense output of the period integrated from
    u* (``cycle``); within an event's pulse (the regularised impulse, not a value) the value at
    its end.  A time on an event is the value just before it, offset 0 the value after the
    window's first event.  None without a steady state."""
    try:                        # no window is NoSteadyState(NO_WINDOW) too (``cycle``)
        cyc = sol._periodic_cycle()
    except NoSteadyState:
        return None
    window = sol.circuit.periodic
    offsets = np.asarray(offsets, dtype=float)
    phase = window.first + offsets
    out = np.full(phase.shape, np.nan)
    for leg, dense in zip(cyc.legs, cyc.run.dense):
        inside = ((phase > leg.start) | (offsets == 0) & (leg.start == window.first)) & \
            (phase <= leg.start + leg.length)
        if np.any(inside):
            w, e = probe_row(sol.circuit, sol.layout, leg.system, probe)
            local = np.clip(phase[inside] - leg.start,
                            min(sol.regularisation.post_pulse, 0.5 * leg.length), leg.length)
            out[inside] = w @ dense(local) + float(w @ leg.origin + e)
    return out
