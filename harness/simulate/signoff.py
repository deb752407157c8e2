"""Sign-off quantities read from the numerical engine's own integration.

Every value here comes from interval k's integrated held response (local time s = t - t_k): the
accepted steps of the stiff integrator and its dense output (Radau's collocation polynomial,
cubic on each step), with the pulse window [0, s_a) replaced by the post-pulse polynomial as in
``NumericSolution.waveform`` (s_a = ``Regularisation.post_pulse``).  Nothing is taken from the
closed-form engine.

* crossing: the waveform is scanned on a grid made of every accepted step and ``PER_STEP``
  equally spaced points inside each step (with ``PULSE_POINTS`` on the post-pulse polynomial
  over [0, s_a)); the first sign change of x - level in the asked direction is bracketed there
  and refined by Brent's method on the dense output.  A jump x(t_k-) -> x(t_k+) across the
  level is the crossing at 0.  Where the level lies within the noise band (``NOISE`` of the
  probe's scale) of the final value, sign changes in the settled tail are rounding, not
  crossings.
* peak: the largest of |x(t_k+)|, the local extrema of |x| on the same grid (each refined by a
  bounded scalar search on the dense output over its two neighbouring grid intervals) and the
  final value |x_inf| (the limit, time None).  An extremum counts only where it exceeds
  |x_inf| by more than the noise band, so that settled-tail rounding is not a peak.
* energy: E = E_jump + int_0^end (i^2 - i_inf^2) R ds by ``GAUSS``-point Gauss-Legendre on each
  accepted step of the dense output (exact for the cubic interpolant's square), the pulse
  included; i_inf is the settled value at the end of the held run; E_jump is the numerical
  jump's own dissipation (r i^2 over the regularising resistances during the pulse,
  ``NumericSolution.jump``) for an ideal switch that carries the impulse; ``in_interval`` is
  E_jump + int_0^(t_(k+1) - t_k) i^2 R ds (a step ends exactly on the next event).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import brentq, minimize_scalar

from ..model import ACROSS, CONTROLLED, EITHER, FALLING, RESISTOR, RISING, SWITCH, THROUGH, Probe
from ..results import CrossingValue, EnergyValue, PeakValue

#: interior points per accepted step at which the dense output is scanned
PER_STEP = 4
#: points on the post-pulse polynomial over [0, s_a)
PULSE_POINTS = 8
#: values within this fraction of the probe's scale of the final value are the settled tail
NOISE = 1e-9
#: Gauss-Legendre nodes per accepted step for the energy quadrature
GAUSS = 5


# ------------------------------------------------------------------------------- the grid
def scan_grid(sol, k: int) -> np.ndarray:
    """Local times (s) on which interval k is scanned: 0, points on [0, s_a), every accepted
    step from s_a on and PER_STEP points inside each; sorted, shape (m,)."""
    run = sol.runs[k]
    s_a = min(sol.regularisation.post_pulse, run.end)
    steps = run.s[run.s >= s_a]
    edges = np.unique(np.concatenate([[s_a], steps]))
    inner = (edges[:-1, None] + (edges[1:] - edges[:-1])[:, None]
             * (np.arange(1, PER_STEP + 1) / (PER_STEP + 1))[None, :]).ravel()
    pulse = np.linspace(0.0, s_a, PULSE_POINTS, endpoint=False)
    return np.unique(np.concatenate([pulse, edges, inner]))


def _evaluator(sol, probe: Probe, k: int):
    """Scalar function s -> probe value at local time s (dense output, post-pulse polynomial in
    the pulse window)."""
    return lambda s: float(sol.held(probe, k, np.array([s]))[0])


def _band(sol, probe: Probe) -> float:
    return NOISE * sol.scale(probe)


# ------------------------------------------------------------------------------- crossings
def _sides(direction: str, lo: float, hi: float) -> bool:
    """Whether value-minus-level going from ``lo`` to ``hi`` crosses in ``direction``."""
    rising, falling = lo < 0 <= hi, lo > 0 >= hi
    return rising if direction == RISING else falling if direction == FALLING else \
        rising or falling


def _tail_start(values: np.ndarray, final: float | None, band: float) -> int:
    """Index of the grid point from which the waveform stays within ``band`` of ``final``."""
    if final is None:
        return len(values)
    outside = np.flatnonzero(np.abs(values - final) > band)
    return int(outside[-1]) + 1 if outside.size else 0


def crossing(sol, probe: Probe, k: int, level: float, direction: str) -> CrossingValue | None:
    """First crossing of ``level`` after event k on the numerical held waveform (see the module
    docstring); None when the integration stopped before interval k."""
    if k >= len(sol.runs):
        return None
    fe = sol.features(probe, k)
    run = sol.runs[k]
    gap = run.length
    if fe.before is not None and fe.after is not None and fe.after != level and \
            _sides(direction, fe.before - level, fe.after - level):
        way = RISING if fe.after > fe.before else FALLING
        return CrossingValue(0.0, way, in_jump=True, approaches=fe.final)
    grid = scan_grid(sol, k)
    values = sol.held(probe, k, grid)
    values[0] = fe.after if fe.after is not None else values[0]
    last = len(grid) - 1
    if fe.final is not None and abs(level - fe.final) <= _band(sol, probe):
        last = min(last, _tail_start(values, fe.final, _band(sol, probe)))
    d = values - level
    fun = _evaluator(sol, probe, k)
    for i in range(last):
        if not _sides(direction, d[i], d[i + 1]):
            continue
        time = float(grid[i + 1]) if d[i + 1] == 0 else _root(fun, level, grid[i], grid[i + 1])
        way = direction if direction != EITHER else (RISING if d[i + 1] > d[i] else FALLING)
        late = gap is not None and time > gap
        return CrossingValue(time, way, after_next_event=late, approaches=fe.final)
    return CrossingValue(None, approaches=fe.final)


def _root(fun, level: float, lo: float, hi: float) -> float:
    """Brent's root of fun - level in [lo, hi]; the nearer end where it is not bracketed (at
    s = 0 the grid holds the right limit x(t_k+), which a direct evaluation may miss)."""
    f_lo, f_hi = fun(lo) - level, fun(hi) - level
    if f_lo == 0 or f_hi == 0 or f_lo * f_hi > 0:
        return float(lo if abs(f_lo) <= abs(f_hi) else hi)
    return float(brentq(lambda s: fun(s) - level, lo, hi, xtol=1e-15 * max(hi, 1e-300),
                        rtol=4 * np.finfo(float).eps, maxiter=200))


# ------------------------------------------------------------------------------- peaks
def peak(sol, probe: Probe, k: int) -> PeakValue | None:
    """Largest magnitude of ``probe`` in interval k on the numerical held waveform (module
    docstring); None when the integration stopped before interval k."""
    if k >= len(sol.runs):
        return None
    fe = sol.features(probe, k)
    run = sol.runs[k]
    grid = scan_grid(sol, k)
    values = sol.held(probe, k, grid)
    if fe.after is not None:
        values[0] = fe.after
    candidates: list[tuple[float, float | None]] = []
    if fe.after is not None:
        candidates.append((fe.after, 0.0))
    floor = abs(fe.final) + _band(sol, probe) if fe.final is not None else -math.inf
    mags = np.abs(values)
    fun = _evaluator(sol, probe, k)
    inner = np.flatnonzero((mags[1:-1] > mags[:-2]) & (mags[1:-1] >= mags[2:])) + 1
    for i in inner:
        if mags[i] <= floor:
            continue
        candidates.append(_refine_extremum(fun, grid[i - 1], grid[i], grid[i + 1], values[i]))
    if fe.final is not None:
        candidates.append((fe.final, None))
    else:                           # not settled: the largest magnitude seen on the run
        i = int(np.nanargmax(mags))
        candidates.append((float(values[i]), float(grid[i])))
    value, time = max(candidates, key=lambda c: (abs(c[0]), c[1] is not None))
    late = time is not None and run.length is not None and time > run.length
    return PeakValue(magnitude=abs(value), value=float(value), time=time, after_next_event=late)


def overshoot(sol, probe: Probe, k: int) -> float | None:
    """How far ``probe`` passes its settled final value in interval k, as a fraction of the
    step x_inf - x(t_k+), from the held waveform: local maxima of sign (x - x_inf) on the scan
    grid refined by a bounded search on the dense output; 0 when it never passes; None without
    a final value or a step, or where the integration stopped."""
    if k >= len(sol.runs):
        return None
    fe = sol.features(probe, k)
    if fe.final is None or fe.after is None:
        return None
    step = fe.final - fe.after
    if not abs(step) > 1e-9 * max(abs(fe.final), abs(fe.after)):
        return None
    sign, final = math.copysign(1.0, step), fe.final
    grid = scan_grid(sol, k)
    beyond = sign * (sol.held(probe, k, grid) - final)
    fun = _evaluator(sol, probe, k)
    best = 0.0
    inner = np.flatnonzero((beyond[1:-1] > beyond[:-2]) & (beyond[1:-1] >= beyond[2:])) + 1
    for i in inner:
        if beyond[i] <= 0:
            continue
        value, _ = _refine_extremum(lambda u: sign * (fun(u) - final), grid[i - 1], grid[i],
                                    grid[i + 1], beyond[i])
        best = max(best, value)
    return best / abs(step)


def _refine_extremum(fun, lo: float, mid: float, hi: float, at_mid: float):
    """(value, time) of the largest |x| in [lo, hi] by a bounded scalar search on the dense
    output, never worse than the grid point ``mid``."""
    sign = 1.0 if at_mid >= 0 else -1.0
    res = minimize_scalar(lambda s: -sign * fun(s), bounds=(lo, hi), method="bounded",
                          options={"xatol": 1e-12 * max(hi, 1e-300), "maxiter": 200})
    value = -sign * float(res.fun)
    if abs(value) >= abs(at_mid):
        return value, float(res.x)
    return float(at_mid), float(mid)


# ------------------------------------------------------------------------------- energy
def resistance_in(part, closed: bool) -> float:
    """The part's dissipating resistance in an interval in ohms (0 for ideal parts)."""
    if part.kind == RESISTOR:
        return float(part.value)
    if part.kind == SWITCH:
        r = part.on_resistance if closed else part.off_resistance
        return float(r) if r is not None else 0.0
    return 0.0


def step_quadrature(run, stop: float) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights over [0, stop] with GAUSS nodes per accepted step,
    shapes (q,), (q,)."""
    x, wts = np.polynomial.legendre.leggauss(GAUSS)
    edges = np.unique(np.concatenate([run.s[run.s < stop], [min(stop, run.end)]]))
    lo, hi = edges[:-1], edges[1:]
    half = 0.5 * (hi - lo)
    nodes = (0.5 * (hi + lo))[:, None] + half[:, None] * x[None, :]
    return nodes.ravel(), (half[:, None] * wts[None, :]).ravel()


def _jump_loss(sol, part, k: int) -> float | None:
    """The jump's loss (J) a switch carries at event k (its impulse of current or voltage in
    this engine's pulse), 0 for other parts, None where the jump's energy is undefined."""
    if part.kind != SWITCH:
        return 0.0
    jump = sol.jump(k)
    if part.name in jump.charges or part.name in jump.fluxes:
        return None if jump.energy is None else float(jump.energy)
    return 0.0


def _deviations(sol, run, k: int, probe: Probe, nodes: np.ndarray) -> tuple[np.ndarray, float]:
    """(x - x_inf at local times ``nodes``, x_inf) of a probe, free of its offset.  Within the
    pulse window the post-pulse fit extrapolated back to t_k+ stands in for the pulse (as for
    ``after``): a finite current over the pulse's vanishing width dissipates nothing in the
    ideal limit, and a switch's impulse is counted as the jump's loss instead."""
    w, offset = sol.probe_terms(probe, k)
    x_inf = float(run.probe(w, offset, np.array([run.end]))[0])
    dev = run.probe(w, 0.0, nodes) - (x_inf - offset)
    early = nodes < sol.regularisation.post_pulse
    if np.any(early):
        dev[early] = sol.held(probe, k, nodes[early]) - x_inf
    return dev, x_inf


def _power(sol, part, run, k: int, nodes: np.ndarray) -> tuple[np.ndarray, float]:
    """(p - p_inf at ``nodes``, p_inf) in W: R i^2 for a resistor or switch (its resistance in
    interval k), v i (passive sign convention) for a controlled source."""
    di, i_inf = _deviations(sol, run, k, Probe(THROUGH, (part.name,)), nodes)
    if part.kind in CONTROLLED:
        dv, v_inf = _deviations(sol, run, k, Probe(ACROSS, (part.name,)), nodes)
        return v_inf * di + i_inf * dv + dv * di, v_inf * i_inf
    resistance = resistance_in(part, part.is_closed(sol.circuit.events[k]))
    return resistance * di * (di + 2.0 * i_inf), resistance * i_inf ** 2


def energy(sol, part_name: str, k: int, until: float | None = None) -> EnergyValue | None:
    """Energy absorbed by a resistor, switch or controlled source over interval k from the
    numerical integration (module docstring), or with ``until`` (s) the whole energy from the
    event to that time; None when the integration stopped before interval k."""
    if k >= len(sol.runs):
        return None
    part = sol.circuit.part(part_name)
    run, loss = sol.runs[k], _jump_loss(sol, part, k)
    if loss is None:
        return EnergyValue(None)
    gap = run.length
    if part.kind == SWITCH and resistance_in(part, part.is_closed(sol.circuit.events[k])) == 0:
        return EnergyValue(loss, jump=loss, in_interval=None if gap is None else loss)

    def total(stop: float) -> float | None:
        nodes, weights = step_quadrature(run, stop)
        dev, p_inf = _power(sol, part, run, k, nodes)
        beyond = max(stop - run.end, 0.0)
        if beyond and run.status != "settled":
            return None
        return loss + float(weights @ dev) + p_inf * (min(stop, run.end) + beyond)

    in_interval = None if gap is None else total(gap)
    if until is not None:
        return EnergyValue(total(until), jump=loss, in_interval=in_interval)
    if run.status != "settled":
        return EnergyValue(None, jump=loss)
    nodes, weights = step_quadrature(run, run.end)
    dev, p_inf = _power(sol, part, run, k, nodes)
    return EnergyValue(float(weights @ dev) + loss, jump=loss, steady_power=p_inf,
                       in_interval=in_interval)
