"""The exact periodic steady state of a repeating window, without stepping through the periods.

Method (the one-period state transition of a linear periodically switched network).  Every
interval j of a period maps its scaled state before its event to its state before the next
event by the exact interval solution (``response``):

    x_end = x_p + Q1 expm(A h) L (x_minus − x_p) = M_j x_minus + v_j,

L = the interval's ``left`` map (only the charges and fluxes of x_minus enter: the jump at the
event is in it, so charge sharing without resistance is an ordinary linear map), h its scaled
length.  Composed over the m intervals of a period, x ↦ Φ x + γ.  On the dynamic coordinates of
the period's first interval, z = L_0 (x_minus − x_p0), the map is

    z ↦ Φ_z z + γ_z,  Φ_z = L_0 R Q1_0 expm(A_0 h_0),  γ_z = L_0 (R x_p0 + r − x_p0),

with x ↦ R x + r the map of intervals 1 … m−1.  An interval without a bounded particular solution (a current charging a node with no DC
path: ``response.augment``) maps [x; 1] linearly, so x ↦ M x + v is still affine; the map's
first interval is the period's first bounded one.  The steady state solves (I − Φ_z) z* = γ_z:
in the eigenvector basis of Φ_z, w*_j = g_j / (1 − λ_j), and a coordinate with λ_j = 1 (a
charge or flux that no interval changes, trapped charge) keeps its value from the state at the
window's start; a λ_j = 1 driven by g_j ≠ 0, or |λ_j| > 1, grows: no steady state.  Where the
eigenvector basis is ill-conditioned, I − Φ_z is solved directly.

Per probe (``functional``: c·x + d·dx/dτ + k per interval), from the steady state the period is
rebuilt interval by interval (``response.build``):

* minimum and maximum: a dense grid of the exact waveform per interval, the extremes refined
  by a bounded scalar search (Brent) on the exact waveform;
* average: exact: ∫ expm(A τ) dτ over [0, h] is the top-right block of expm([[A, I], [0, 0]] h)
  (Van Loan 1978), ∫ dx/dτ = x(h) − x(0), plus, for a ``through`` probe, the impulsive charge
  of the part at each event (``jumps.jump_at``);
* settling: the deviation from the steady state in period n is Φ_z^n δz_0 (periods counted
  from the map's first interval); the probe's largest
  deviation over period n is max_i |Σ_j B_ij λ_j^n| on a grid of rows (B = Ψ V diag(V⁻¹ δz_0),
  Ψ the grid's deviation rows); the count is found from the monotone bound Σ_j |B_ij| |λ_j|^n
  and an exact scan below it (or, with an ill-conditioned basis, by iterating the map until
  that bound, ‖Ψ‖·‖δz_n‖, is inside the band).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg as sla

from ..model import THROUGH, Probe
from ..results import GROWS, NO_WINDOW, NOT_ESTABLISHED, PeriodicValue
from .jumps import jump_at
from .mna import capacitor_null_basis
from .probes import functional
from .response import IntervalResponse, Pencil, build

#: |1 − λ| below which an eigenvalue of the period map is a conserved coordinate
UNIT_EIGENVALUE = 1e-9
#: |λ| above 1 + this is growth
GROWTH_MARGIN = 1e-9
#: condition number of the eigenvector basis above which the direct solve is used instead
BASIS_CONDITION = 1e8
#: grid points per interval for the extremes, and rows per interval for the deviation
GRID_POINTS = 400
DEVIATION_ROWS = 9
#: periods searched for settling; beyond it the count is not given
MAX_SETTLE_PERIODS = 1_000_000
#: periods evaluated at once in the exact scan
SCAN_CHUNK = 20_000
#: a first-period deviation below this fraction of the probe's steady-state size is "already
#: there" (settle_periods 0)
AT_REST = 1e-12


@dataclass(frozen=True)
class _Interval:
    """One interval of the period: its index k in the solution (period 0), scaled length h,
    its response (period 0), and its affine map x_end = m x_minus + v (scaled units)."""

    k: int
    h: float
    resp: IntervalResponse
    m: np.ndarray
    v: np.ndarray


@dataclass(frozen=True)
class Cycle:
    """The steady-state period of a solution (scaled units).

    Attributes:
        intervals: the period's intervals (``_Interval``), with their steady-state responses
            in ``responses`` (same order) and the states x_minus before each event.
        responses, minus: as above; shapes of the states (n,).
        phi_z, gamma_z: the map on the first interval's dynamic coordinates, (f, f) and (f,).
        z_star: the steady state, shape (f,); dz0: the start's deviation from it, shape (f,).
        carry: rows mapping a deviation δz of the first interval's coordinates to the
            deviation of x_minus before each interval, list of (n, f).
    """

    intervals: tuple[_Interval, ...]
    responses: tuple[IntervalResponse, ...]
    minus: tuple[np.ndarray, ...]
    phi_z: np.ndarray
    gamma_z: np.ndarray
    z_star: np.ndarray
    dz0: np.ndarray
    carry: tuple[np.ndarray, ...]


class NoSteadyState(Exception):
    """The period map has no steady state (``reason`` one of ``results`` GROWS,
    NOT_ESTABLISHED)."""

    def __init__(self, reason: str) -> None:
        super().__init__(reason)
        self.reason = reason


def _left(dec) -> np.ndarray:
    """The decomposition's left map as a matrix, shape (f, n)."""
    if dec.left is not None:
        return dec.left
    f1, f2 = dec.left_factors
    return f1 @ f2


def _intervals(sol) -> tuple[_Interval, ...]:
    """The intervals of the window's first period with their exact affine maps, starting at
    the first one with a bounded particular solution (its dynamic coordinates are the map's)."""
    window = sol.circuit.periodic
    events = np.asarray(sol.circuit.events)
    t_ref = sol.scale.t
    out = []
    for j, offset in enumerate(window.offsets):
        time = window.start + offset
        k = int(np.argmin(np.abs(events - time)))
        nxt = window.offsets[j + 1] if j + 1 < len(window.offsets) else \
            window.offsets[0] + window.period
        h = (nxt - offset) / t_ref
        resp = sol.intervals[k]
        dec, n = resp.dec, resp.g.shape[0]
        if dec.order == 0:
            m, v = np.zeros((n, n)), resp.xp[:n].copy()
        elif resp.augmented:                 # x_end = (Q1 e^(A h) L [x; 1])[:n]: still affine
            full = dec.q1 @ sla.expm(dec.a * h) @ _left(dec)
            m, v = full[:n, :n], full[:n, n]
        else:
            m = dec.q1 @ sla.expm(dec.a * h) @ _left(dec)
            v = resp.xp - m @ resp.xp
        out.append(_Interval(k, h, resp, m, v))
    bounded = [j for j, step in enumerate(out) if not step.resp.augmented]
    if not bounded:
        raise NoSteadyState(GROWS)
    return tuple(out[bounded[0]:] + out[:bounded[0]])


def cycle(sol) -> Cycle:
    """The steady-state period of ``sol`` (a ``ClosedFormSolution``).

    Raises:
        NoSteadyState: the map grows, or its fixed point cannot be established.
    """
    steps = _intervals(sol)
    first = steps[0]
    dec0, xp0 = first.resp.dec, first.resp.xp
    n = xp0.size
    rest_m, rest_v = np.eye(n), np.zeros(n)
    carry = [None]
    e0 = dec0.q1 @ sla.expm(dec0.a * first.h) if dec0.order else np.zeros((n, 0))
    for step in steps[1:]:
        carry.append(rest_m @ e0)
        rest_m, rest_v = step.m @ rest_m, step.m @ rest_v + step.v
    left0 = _left(dec0) if dec0.order else np.zeros((0, n))
    phi_z = left0 @ rest_m @ e0
    gamma_z = left0 @ (rest_m @ xp0 + rest_v - xp0)
    x_start = sol._x_minus(first.k)
    z_start = left0 @ (x_start - xp0)
    z_star = _fixed_point(phi_z, gamma_z, z_start)
    x_minus = rest_m @ (xp0 + e0 @ z_star) + rest_v
    pencils = {}
    null = capacitor_null_basis(sol.circuit, sol.layout)
    responses, minus = [], []
    for step in steps:
        resp = step.resp
        key = id(resp.dec)
        if key not in pencils:
            pencils[key] = Pencil(resp.kept_g, resp.kept_c, resp.dec)
        minus.append(x_minus)
        new = build(sol.layout, pencils[key], null, resp.b, x_minus, index=step.k,
                    start=resp.start, next_time=resp.start + step.h * sol.scale.t,
                    values=resp.values, closed=resp.closed, t_ref=sol.scale.t)
        responses.append(new)
        x_minus = new.x_end
    if not all(np.all(np.isfinite(x)) for x in minus):
        raise NoSteadyState(NOT_ESTABLISHED)
    return Cycle(steps, tuple(responses), tuple(minus), phi_z, gamma_z, z_star,
                 z_start - z_star, tuple(carry))


def _fixed_point(phi: np.ndarray, gamma: np.ndarray, z_start: np.ndarray) -> np.ndarray:
    """z* = Φ z* + γ, conserved coordinates (λ = 1) kept from ``z_start``; shape (f,)."""
    f = phi.shape[0]
    if f == 0:
        return np.zeros(0)
    lam, vec = np.linalg.eig(phi)
    if np.any(np.abs(lam) > 1 + GROWTH_MARGIN):
        raise NoSteadyState(GROWS)
    if np.linalg.cond(vec) < BASIS_CONDITION:
        g = np.linalg.solve(vec, gamma.astype(complex))
        w0 = np.linalg.solve(vec, z_start.astype(complex))
        unit = np.abs(1 - lam) <= UNIT_EIGENVALUE
        scale = max(float(np.max(np.abs(g), initial=0.0)), 1e-300)
        if np.any(np.abs(g[unit]) > 1e-9 * scale + 1e-300):
            raise NoSteadyState(GROWS)       # charge pumped into a conserved group each period
        w = np.where(unit, w0, g / np.where(unit, 1.0, 1 - lam))
        return (vec @ w).real
    lhs = np.eye(f) - phi
    if np.linalg.cond(lhs) > 1 / (1e3 * np.finfo(float).eps):
        raise NoSteadyState(NOT_ESTABLISHED)
    return np.linalg.solve(lhs, gamma)


def periodic_value(sol, cyc: Cycle, probe: Probe, fraction: float) -> PeriodicValue:
    """The probe's ``PeriodicValue`` from the steady-state period ``cyc`` of ``sol``."""
    window = sol.circuit.periodic
    fn = functional(sol.circuit, sol.layout, probe)
    terms = [fn.terms(sol.layout, sol.scale, r.g, r.b, r.values, r.xp.size)
             for r in cyc.responses]
    lo, hi = _extremes(cyc, terms)
    average = _average(sol, cyc, terms, probe)
    size = max(abs(lo), abs(hi), 1e-300)
    settle = _settle(cyc, terms, fraction, size)
    return PeriodicValue(start=window.first, period=window.period, minimum=lo, maximum=hi,
                         average=average, settle_periods=settle, fraction=fraction)


def _values(resp: IntervalResponse, term, tau: np.ndarray) -> np.ndarray:
    """The probe c·x + d·dx/dτ + k at scaled local times ``tau``, shape (len(tau),)."""
    c, d, const = term
    x, dx = resp.states(np.atleast_1d(tau))
    return x @ c + dx @ d + const


def _extremes(cyc: Cycle, terms) -> tuple[float, float]:
    """(minimum, maximum) over the period: a grid, then a bounded search at the best points."""
    best = {"min": (np.inf, None), "max": (-np.inf, None)}
    for step, resp, term in zip(cyc.intervals, cyc.responses, terms):
        tau = np.linspace(0.0, step.h, GRID_POINTS)
        y = _values(resp, term, tau)
        for which, sign in (("min", 1.0), ("max", -1.0)):
            i = int(np.argmin(sign * y))
            if sign * y[i] < sign * best[which][0]:
                bracket = (tau[max(i - 1, 0)], tau[min(i + 1, tau.size - 1)])
                best[which] = (float(y[i]), (resp, term, bracket, sign))
    from scipy.optimize import minimize_scalar     # deferred: only periodic checks need it
    out = []
    for which in ("min", "max"):
        value, where = best[which]
        resp, term, (a, b), sign = where
        if b > a:
            res = minimize_scalar(lambda t: sign * float(_values(resp, term, t)[0]),
                                  bounds=(a, b), method="bounded",
                                  options={"xatol": 1e-12 * max(b, 1.0)})
            if res.success and sign * res.fun < sign * value:
                value = sign * float(res.fun)
        out.append(value)
    return out[0], out[1]


def _integral(resp: IntervalResponse, h: float) -> np.ndarray:
    """∫_0^h x(τ) dτ over the interval (scaled), shape (n,): x_p h + Q1 ∫expm(A τ) dτ z0."""
    dec = resp.dec
    f = dec.order
    out = resp.xp * h
    if f:
        big = np.zeros((2 * f, 2 * f))
        big[:f, :f] = dec.a
        big[:f, f:] = np.eye(f)
        block = sla.expm(big * h)[:f, f:]
        out = out + dec.q1 @ (block @ resp.z0)
    return out[:resp.g.shape[0]]


def _average(sol, cyc: Cycle, terms, probe: Probe) -> float:
    """(1/period) ∫ over the period, exact, impulses at the events included."""
    total = 0.0
    for step, resp, (c, d, const) in zip(cyc.intervals, cyc.responses, terms):
        n = resp.g.shape[0]
        total += float(c[:n] @ _integral(resp, step.h) + d[:n] @ (resp.x_end - resp.x_plus)) \
            + const * step.h
    average = total * sol.scale.t / sol.circuit.periodic.period
    if probe.kind == THROUGH:
        name = probe.targets[0]
        for resp, x_minus in zip(cyc.responses, cyc.minus):
            jump = jump_at(sol.circuit, sol.layout, sol.scale, resp.g, resp.c, x_minus,
                           resp.x_plus, resp.start, resp.values, sol._jump_scales())
            average += jump.charges.get(name, 0.0) / sol.circuit.periodic.period
    return average


def _deviation_rows(cyc: Cycle, terms) -> np.ndarray:
    """Ψ: the probe's deviation at DEVIATION_ROWS times per interval, per unit deviation δz of
    the first interval's dynamic coordinates; shape (rows, f)."""
    rows = []
    for j, (step, resp, (c, d, _)) in enumerate(zip(cyc.intervals, cyc.responses, terms)):
        dec = resp.dec
        if dec.order == 0:
            continue
        n = resp.g.shape[0]
        into = np.eye(dec.order) if j == 0 else _left(dec)[:, :n] @ cyc.carry[j]
        base = c[:n] @ dec.q1[:n] + d[:n] @ (dec.q1 @ dec.a)[:n]
        for tau in np.linspace(0.0, step.h, DEVIATION_ROWS):
            rows.append(base @ sla.expm(dec.a * tau) @ into)
    return np.array(rows) if rows else np.zeros((0, cyc.phi_z.shape[0]))


def _settle(cyc: Cycle, terms, fraction: float, size: float) -> int | None:
    """Periods until the probe's deviation stays within ``fraction`` of its first period's."""
    psi = _deviation_rows(cyc, terms)
    if psi.size == 0 or cyc.dz0.size == 0:
        return 0
    d0 = float(np.max(np.abs(psi @ cyc.dz0)))
    if d0 <= AT_REST * size:
        return 0
    band = fraction * d0
    lam, vec = np.linalg.eig(cyc.phi_z)
    if np.linalg.cond(vec) < BASIS_CONDITION:
        return _settle_modal(psi @ vec, np.linalg.solve(vec, cyc.dz0.astype(complex)), lam,
                             band)
    return _settle_iterated(psi, cyc.phi_z, cyc.dz0, band)


def _settle_modal(psi_v: np.ndarray, w0: np.ndarray, lam: np.ndarray, band: float) -> int | None:
    """The settle count from B = Ψ V diag(w0): dev(n) = max_i |Σ_j B_ij λ_j^n|."""
    live = np.abs(w0) > 0
    b, lam = psi_v[:, live] * w0[live], lam[live]
    if lam.size == 0:
        return 0
    mags, rates = np.abs(b), np.abs(lam)

    def bound(n: int) -> float:
        with np.errstate(under="ignore"):
            return float(np.max(mags @ rates ** n))

    hi = 1
    while bound(hi) > band:
        hi *= 2
        if hi > 2 * MAX_SETTLE_PERIODS:
            return None
    lo = hi // 2
    while hi - lo > 1:                       # smallest n with bound(n) <= band
        mid = (lo + hi) // 2
        lo, hi = (mid, hi) if bound(mid) > band else (lo, mid)
    if hi > MAX_SETTLE_PERIODS:
        return None
    last = -1                                # the last period whose deviation exceeds the band
    for start in range(0, hi, SCAN_CHUNK):
        n = np.arange(start, min(hi, start + SCAN_CHUNK))
        with np.errstate(under="ignore"):
            dev = np.max(np.abs(b @ (lam[:, None] ** n[None, :])), axis=0)
        over = np.flatnonzero(dev > band)
        if over.size:
            last = int(n[over[-1]])
    return last + 1


def _settle_iterated(psi: np.ndarray, phi: np.ndarray, dz: np.ndarray, band: float) -> int | None:
    """The settle count from the deviation states δz_n = Φ^n δz_0, a block of ``SCAN_CHUNK``
    periods at a time, until the bound ‖Ψ‖‖δz_n‖ is inside the band."""
    norm = float(np.linalg.norm(psi, 2))
    last, done = -1, 0
    while done < MAX_SETTLE_PERIODS:
        block = np.empty((dz.size, SCAN_CHUNK))
        for i in range(SCAN_CHUNK):
            block[:, i], dz = dz, phi @ dz
        over = np.flatnonzero(np.max(np.abs(psi @ block), axis=0) > band)
        if over.size:
            last = done + int(over[-1])
        inside = np.flatnonzero(norm * np.linalg.norm(block, axis=0) <= band)
        if inside.size:
            return max(last + 1, 0)
        done += SCAN_CHUNK
    return None


def steady_state(sol, probe: Probe, fraction: float) -> PeriodicValue:
    """``PeriodicValue`` of ``probe`` for a ``ClosedFormSolution`` (a reason where none)."""
    if sol.circuit.periodic is None:
        return PeriodicValue.without(None, fraction, NO_WINDOW)
    try:
        return periodic_value(sol, sol._periodic_cycle(), probe, fraction)
    except NoSteadyState as exc:
        return PeriodicValue.without(sol.circuit.periodic, fraction, exc.reason)


def steady_waveform(sol, probe: Probe, offsets: np.ndarray) -> np.ndarray | None:
    """The probe's steady-state values at ``offsets`` (s after the window's first event, within
    [0, period]; NaN outside), shape (n,): each time in the interval of the steady-state period
    that holds it, by the exact interval response from its steady-state start (``cycle``).  A
    time on an event is the value just before it (the end of the interval it closes), offset 0
    the value just after the window's first event.  None without a steady state."""
    if sol.circuit.periodic is None:
        return None
    try:
        cyc = sol._periodic_cycle()
    except NoSteadyState:
        return None
    window, t_ref = sol.circuit.periodic, sol.scale.t
    fn = functional(sol.circuit, sol.layout, probe)
    offsets = np.asarray(offsets, dtype=float)
    phase = window.first + offsets
    out = np.full(phase.shape, np.nan)
    for step, resp in zip(cyc.intervals, cyc.responses):
        start = resp.start
        inside = ((phase > start) | (offsets == 0) & (start == window.first)) & \
            (phase <= start + step.h * t_ref)
        if np.any(inside):
            term = fn.terms(sol.layout, sol.scale, resp.g, resp.b, resp.values, resp.xp.size)
            out[inside] = _values(resp, term, (phase[inside] - start) / t_ref)
    return out
