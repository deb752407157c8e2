"""Stiff integration of one interval, restarted at its event, continued until it settles.

Each interval is integrated in local time s = t - t_k (so that the pulse, many decades faster
than the interval, is resolved near s = 0 whatever t_k is) with scipy.integrate's Radau method
(implicit Runge-Kutta, order 5, L-stable) and the constant analytic Jacobian J.

The state is integrated as a deviation z = y - y_o from an origin y_o, the interval's own DC
operating point (K y_o = b; where K is singular, the one that keeps the conserved charges and
fluxes of y(t_k-), see linsolve.operating_point): z' = J z + r, where r = 0 when
y_o is an operating point (its residual is rounding) and r = J y_o + c, the driving term of the
growth, where none exists.  The ODE is the same for any origin, so the waveform and the settled
value are still the integrator's; the origin only removes a rounding floor: a node held by a
source through r_s has v - E ~ r_s i, so its current (v - E)/r_s computed from an absolute v
carries an error of about 1e-16 |v| / r_s, which makes the step size stall long after the
response has settled; relative to the origin that error decays with the response.

The error scale of each step (``_step_tolerances``) is Radau's atol + rtol |z| on the deviation,
with two changes measured against the exact solution of RC networks
(tests/benchmarks/numeric_accuracy.py): a state still moving from its start (the largest
|origin + z| it has taken so far below |z|: a far node of a ladder just after the step, |z| ~
the swing while its value is ~0) is held to atol + rtol times that largest value, as a
tolerance on the state itself would hold it (on |z| alone its error in the first nanoseconds
reached 3-18x a bare Radau's at the same tolerance, in the interpolant of the first step after
the pulse window, 1,500x longer than the window's); a coordinate whose value passes through 0
later, after it has been larger (a floating capacitor's voltage on its way to a small final
value), is not moving from its start and keeps rtol |z|; and every other state's absolute
tolerance is at least ``SWING_FLOOR`` rtol times its largest deviation after the pulse, so that
a state whose deviation has decayed below that share of its swing no longer holds every step
to rtol of what is left of it (on the 78-state random network of the benchmark, 239 of the
engine's 580 steps were taken after 0.2 slowest time constants, against the bare Radau's 119
at equal accuracy; from 2 time constants on its error was 10-40x below its largest).

The runs are:

1. from the state at t_k- through the pulse and the post-pulse fit window, starting with a step
   of a fraction of the pulse width and with bounded steps (Radau's error estimate filters stiff
   components, so left to itself it may step over a pulse it does not see);
2. on to the next event (the step lands exactly on it, giving the state from which the next
   interval starts);
3. then, with the same sources held, until the response settles or the horizon is reached.

Settling is read from the response itself: the interval has settled at a step s when every
dynamic state's (a node voltage with a real capacitor, an inductor current) rate of change,
times the elapsed time s, is below ``SETTLE`` times that state's scale
(the largest magnitude of its deviation z after the pulse, at least its absolute-tolerance
base), judged only from the lower estimate of the fastest real time constant on.  For a decay
a e^(-s/tau) this holds from s ~ 30 tau on and leaves less than ~1e-13 a; a slow mode still
moving is caught because its rate times s grows with s.  (The rate J z is free of rounding
noise because z, unlike y, decays to zero.)  A response that grows past ``BLOW_UP`` times its
scale, or an interval that reaches the horizon or ``MAX_STEPS`` steps, is reported as not
settled.
"""

from __future__ import annotations

import time as _time
import warnings
from dataclasses import dataclass
from functools import partial

import numpy as np
import scipy.sparse as sp
from scipy.integrate import OdeSolution, Radau
from scipy.linalg import LinAlgWarning, get_lapack_funcs

from .equations import System
from .linsolve import operating_point
from .sparse_step import ShiftedIdentity, factorise, matvec
from .stepper import LeanRadau

#: the LAPACK routines scipy.linalg.lu_factor / lu_solve call, for real and complex matrices
_DGETRF, _DGETRS = get_lapack_funcs(("getrf", "getrs"), (np.zeros((1, 1)),))
_ZGETRF, _ZGETRS = get_lapack_funcs(("getrf", "getrs"), (np.zeros((1, 1), dtype=complex),))

#: rate of change times elapsed time, relative to the scale, below which a state has settled
SETTLE = 1e-11
#: growth beyond this multiple of the scale at 0+ is unbounded
BLOW_UP = 1e9
#: the pulse window is crossed in at least this many steps
WINDOW_STEPS = 16
#: a state not moving from its start has an absolute tolerance of at least this fraction of
#: rtol times its largest deviation after the pulse (``_step_tolerances``): 3e-9 of its swing at
#: the default rtol, over 300x below the engines' agreement floor (tolerances.ENGINE_FLOOR, 1e-6
#: of the probe's scale) and the first-order fit's residual (features.FIT_RESIDUAL, 3e-6).
#: Measured (tests/benchmarks/numeric_accuracy.py): the engine's largest error stays below a
#: bare Radau's at the same tolerances on every circuit there (a floor of 1e-2 rtol only once
#: every deviation was within 1e-2 of its swing left the 78-state network 523 steps, this one
#: 488; 0.1 doubled the 235-state network's largest error)
SWING_FLOOR = 3e-2
#: steps allowed in one run (up to the next event, or the settling continuation)
MAX_STEPS = 50000
#: an operating point may hold this many times the magnitude of each state at the event
#: (charge trapped on capacitors and flux in inductor loops is kept, not driven)
TRAPPED = 1e3


@dataclass(frozen=True)
class IntervalStats:
    """Integrator counters of one interval (both runs), like solve_ivp's result.

    Attributes:
        steps: accepted steps; nfev, njev, nlu: right-hand-side evaluations, Jacobian
        evaluations, LU decompositions; seconds: wall time spent stepping the integrator.
    """

    steps: int = 0
    nfev: int = 0
    njev: int = 0
    nlu: int = 0
    seconds: float = 0.0

    def plus(self, other: "IntervalStats") -> "IntervalStats":
        return IntervalStats(self.steps + other.steps, self.nfev + other.nfev,
                             self.njev + other.njev, self.nlu + other.nlu,
                             self.seconds + other.seconds)


@dataclass(frozen=True)
class IntervalRun:
    """The held response of one interval, in local time s = t - t_k.

    Attributes:
        t0: absolute time of the event t_k (s).
        length: s from t_k to the next event, or None for the last interval.
        origin: the origin y_o over the integrated states y_d, shape (n_d,); y_d = y_o + z.
        origin_full: the origin as a full state, shape (n,) (the refined DC solution).
        consistent: True when y_o is an operating point (False: the response grows).
        s: accepted step times, shape (m,), from 0 to ``end``.
        z: deviations from the origin at those times, shape (n_d, m).
        dense: continuous z over [0, end] (scipy OdeSolution in local time), or None.
        y_next: full state at the next event, shape (n,), or None (last interval or failure).
        end: local time where the held continuation stopped (s).
        status: ``settled``, ``horizon`` (not settled in time), ``blow-up``, ``failed`` (the
            integrator broke down), ``budget`` (the work budget ran out) or ``no-origin``
            (settled, but to an operating point the DC solve did not establish).
        settle_time: local time at which settling was detected, or None.
        stats: integrator counters.
    """

    t0: float
    length: float | None
    origin: np.ndarray
    origin_full: np.ndarray
    consistent: bool
    s: np.ndarray
    z: np.ndarray
    dense: OdeSolution | None
    y_next: np.ndarray | None
    end: float
    status: str
    settle_time: float | None
    stats: IntervalStats

    @property
    def y(self) -> np.ndarray:
        """Integrated states y_d at the step times, shape (n_d, m)."""
        return self.origin[:, None] + self.z

    def probe(self, w: np.ndarray, offset, s: np.ndarray,
              whole_states: bool = False) -> np.ndarray:
        """w . z(s) + offset at local times ``s`` (clipped to [0, end]), shape (len(s),); with
        stacked rows w of shape (p, n) and offset of shape (p,), shape (p, len(s)).  The offset
        is the probe's value at the origin (``probes.probe_offset``).  Evaluated ``projected``;
        ``whole_states``: the whole state per time, then w (the post-pulse fit, whose
        extrapolation back to the event turns a last-digit difference into ~1e-7 of the
        value, keeps the floats it was validated with)."""
        s = np.clip(np.atleast_1d(np.asarray(s, dtype=float)), 0.0, self.end)
        offset = np.asarray(offset, dtype=float)
        base = offset[..., None] if offset.ndim else offset
        if self.dense is None:
            return base + np.zeros(np.shape(w)[:-1] + s.shape)
        if whole_states:
            return w @ self.dense(s) + base
        return projected(self.dense, np.asarray(w, dtype=float), s) + base


#: from this many times at once the dense output is evaluated projected (``projected``)
PROJECT_TIMES = 4


def projected(dense: OdeSolution, w: np.ndarray, s: np.ndarray) -> np.ndarray:
    """w @ dense(s): the rows w (shape (n,) or (p, n)) of the dense output at the times s
    (shape (m,)), shape w.shape[:-1] + (m,), for every time at once.

    Each time's step is found as ``OdeSolution`` finds it (searchsorted, clipped to the
    steps); on it Radau's collocation polynomial is y(s) = y_old + Q [x, x^2, x^3]^T with
    x = (s - t_old) / h (scipy's ``RadauDenseOutput``; Hairer & Wanner, *Solving Ordinary
    Differential Equations II*, sec. IV.8), evaluated as (w y_old) + (w Q) [x, x^2, x^3]^T:
    the rows are projected on the steps the times fall in (O(steps n p)) and each time then
    costs O(p), instead of a whole state per time through a Python loop over the steps.
    Equal to ``w @ dense(s)`` to rounding.  Fewer than ``PROJECT_TIMES`` times (the scalar
    searches' single points) and other interpolants: ``w @ dense(s)``."""
    steps = dense.interpolants
    if s.size < PROJECT_TIMES or not (dense.ascending and all(hasattr(it, "Q") and it.Q.shape[1] == 3 for it in steps)):
        return w @ dense(s)
    seg = np.searchsorted(dense.ts_sorted, s, side=dense.side) - 1
    np.clip(seg, 0, dense.n_segments - 1, out=seg)
    used, where = np.unique(seg, return_inverse=True)
    rows = np.atleast_2d(w)                                   # (p, n)
    q = np.stack([steps[i].Q for i in used])                  # (u, n, 3)
    y_old = np.stack([steps[i].y_old for i in used])          # (u, n)
    t_old = np.array([steps[i].t_old for i in used])[where]
    h = np.array([steps[i].h for i in used])[where]
    x = (s - t_old) / h
    powers = np.cumprod(np.tile(x, (3, 1)), axis=0)           # (3, m)
    wq = np.matmul(rows[None, :, :], q)                       # (u, p, 3)
    out = (y_old @ rows.T)[where].T                           # (p, m)
    out += np.einsum("mpl,lm->pm", wq[where], powers)
    return out if np.ndim(w) > 1 else out[0]


class _Settle:
    """Incremental settle and growth detector over the accepted steps of one interval (on z).

    A state's scale is the largest |z| it takes from ``pulse_end`` on (the pulse itself is
    excluded: its currents are many decades larger than the response), at least ``floor``.
    Neither settling nor growth is judged before ``earliest``.  Settling is judged on the
    ``dynamic`` states (mask): voltages of nodes with a real capacitor and inductor currents;
    the others (capacitor-less nodes, carrier currents) follow them within the pulse time, and
    their rates carry the rounding of the stiffest rows.
    """

    def __init__(self, slope, dynamic: np.ndarray, floor: np.ndarray, pulse_end: float,
                 earliest: float) -> None:
        self.slope = slope
        self.dynamic = dynamic
        self.pulse_end = pulse_end
        self.earliest = earliest
        self.scale = floor.copy()
        self.start_scale: np.ndarray | None = None
        self._limit: np.ndarray | None = None        # BLOW_UP * start_scale, once known
        self._dyn = np.flatnonzero(dynamic)          # the indices settling is judged on
        self._worst = int(self._dyn[0]) if self._dyn.size else 0

    def add(self, s: float, z: np.ndarray, rate: np.ndarray | None = None) -> str | None:
        """Record a step; return ``settled``, ``blow-up`` or None.  ``rate``: z' at the step
        where the caller has it (Radau keeps f(s, z) of its last step), else slope(z)."""
        size = np.abs(z)
        if s >= self.pulse_end:
            np.maximum(self.scale, size, out=self.scale)
            if self.start_scale is None:
                self.start_scale = self.scale.copy()
                self._limit = BLOW_UP * self.start_scale
        if s < self.earliest or self.start_scale is None:
            return None
        if (size > self._limit).any():
            return "blow-up"
        dyn = self._dyn
        if not dyn.size:
            return "settled"
        # the same quotients as |rate| * s / scale over all states, on the dynamic ones only
        rate = self.slope(z) if rate is None else rate
        k = self._worst                  # the state that drifted most at the last step: while
        if abs(rate[k]) * s / self.scale[k] > SETTLE:  # it still drifts, the maximum does too
            return None
        drift = np.abs(rate[dyn]) * s / self.scale[dyn]
        worst = int(np.argmax(drift))
        self._worst = int(dyn[worst])
        return "settled" if drift[worst] <= SETTLE else None


def _lu_factor(solver: Radau, a: np.ndarray):
    """scipy.linalg.lu_factor(a, overwrite_a=True) by the same LAPACK call (getrf), counted in
    the solver's ``nlu`` as Radau's own does; non-finite input raises ValueError."""
    solver.nlu += 1
    if not np.isfinite(a).all():
        raise ValueError("array must not contain infs or NaNs")
    getrf = _ZGETRF if a.dtype.kind == "c" else _DGETRF
    lu, piv, info = getrf(a, overwrite_a=True)
    if info < 0:
        raise ValueError(f"illegal value in argument {-info} of getrf")
    if info > 0:
        warnings.warn(f"Diagonal number {info} is exactly zero. Singular matrix.",
                      LinAlgWarning, stacklevel=2)
    return lu, piv


def _solve_lu(factors, b: np.ndarray) -> np.ndarray:
    """x with A x = b from ``factors`` = scipy.linalg.lu_factor(A), overwriting b: the same
    LAPACK call (getrs) as scipy.linalg.lu_solve, hence the same digits, without its per-call
    argument handling, which costs ~4/5 of a solve at the engine's small dense systems (each
    Radau step makes five).  Non-finite input raises ValueError, as lu_solve does."""
    lu, piv = factors
    if not np.isfinite(b).all():
        raise ValueError("array must not contain infs or NaNs")
    getrs = _ZGETRS if (lu.dtype.kind == "c" or b.dtype.kind == "c") else _DGETRS
    x, info = getrs(lu, piv, b, overwrite_b=True)
    if info != 0:
        raise ValueError(f"illegal value in argument {-info} of getrs")
    return x


_TINY = np.finfo(float).tiny


def _step_tolerances(rtol: float, atol: np.ndarray, origin: np.ndarray, z: np.ndarray,
                     peak: np.ndarray, reached: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(rtol, atol) per state, shape (n_d,) each, for the next step from the deviation z.

    ``peak``: each state's largest |z| after the pulse so far (the settle detector's scale;
    before the pulse has died, its absolute-tolerance base atol / rtol); ``reached``: each
    state's largest |y| = |origin + z| at the steps so far, this one's included.

    Radau's error scale, atol + rtol |z| on the deviation, is changed in two places:

    * a state still moving from its start (``reached`` < |z|: a node at 0 V stepping to 1 V
      has |z| ~ 1 V and |y| ~ 0) gets rtol scaled by reached / |z|, so its scale is atol +
      rtol |y| while |y| grows, as on the state itself; with |z| alone its error could reach
      rtol times the swing on a value still near 0.  A value that comes back towards 0 after
      being larger (a coordinate crossing 0 on its way to a small final value) is not moving
      from its start: held to rtol |y| there, a floating capacitor's voltage crossing 0 took
      over 100 steps of a 78-state network's 580;
    * every other state's absolute tolerance is at least ``SWING_FLOOR`` rtol times its
      ``peak``, so that a deviation decayed below that share of its swing is resolved to a
      fixed share of the swing instead of to rtol of what is left of it.

    Radau reads ``rtol`` and ``atol`` at every step and takes them elementwise
    (scipy.integrate.Radau: scale = atol + max(|y|, |y_new|) rtol), so where no state is
    moving the scalar ``rtol`` stands for the array of it (the same products)."""
    dev = np.abs(z)
    moving = reached < dev
    floor = np.maximum(atol, SWING_FLOOR * rtol * peak)
    if not moving.any():
        return rtol, floor
    ratio = reached / np.maximum(dev, _TINY)
    ratio[~moving] = 1.0
    return rtol * ratio, np.where(moving, atol, floor)


def _unwrap(solver: Radau, n: int) -> None:
    """Replace Radau's per-step linear algebra by the same computations without scipy's
    per-call wrapping: with a sparse J its identity (read only in mu / h * I - J, J being its
    own CSC copy of the Jacobian) by the shifted matrix on a pattern found once and its
    factorisation hook by SuperLU's own call (``sparse_step``); with a dense J its
    factorise/solve hooks (instance attributes it calls every step) by the same LAPACK calls
    (``_lu_factor``, ``_solve_lu``)."""
    if sp.issparse(solver.J) and solver.J.format == "csc" and sp.issparse(solver.I):
        solver.I = ShiftedIdentity(solver.J)
        solver.lu = factorise(solver)
    elif not sp.issparse(solver.J) and n and hasattr(solver, "solve_lu"):
        solver.lu, solver.solve_lu = partial(_lu_factor, solver), _solve_lu


def _run(system: System, r: np.ndarray, z0: np.ndarray, s0: float, s_bound: float, rtol: float,
         atol: np.ndarray, settle: _Settle | None, first_step: float | None = None,
         max_step: float = np.inf, budget: tuple[float, float] = (np.inf, np.inf),
         scaled: tuple[np.ndarray, _Settle, np.ndarray] | None = None):
    """Step Radau on z' = J z + r from s0 to s_bound; returns (s, z, interpolants, status, stats).

    ``budget`` = (steps, right-hand-side evaluations) this run may still use; past either the
    status is ``budget``.  ``scaled`` = (the origin, shape (n_d,); the interval's settle
    detector, whose ``scale`` is each state's largest deviation after the pulse so far; each
    state's largest |origin + z| so far, shape (n_d,), kept across the interval's runs and
    raised here at every step): where given, each step's tolerances are ``_step_tolerances`` of
    the state it starts from."""
    jac = system.jac
    product = matvec(jac)

    def fun(_t, z):
        return product(z) + r

    started = _time.perf_counter()
    solver = LeanRadau(fun, s0, z0, s_bound, jac=jac, rtol=rtol, atol=atol,
                       first_step=first_step, max_step=max_step)
    _unwrap(solver, z0.size)
    ss, zs, interps = [s0], [z0.copy()], []
    with np.errstate(all="ignore"):
        status = _steps(solver, ss, zs, interps, rtol, atol, settle, budget, scaled)
    stats = IntervalStats(len(interps), solver.nfev, solver.njev, solver.nlu,
                          _time.perf_counter() - started)
    return ss, zs, interps, status, stats


def _steps(solver: Radau, ss: list, zs: list, interps: list, rtol: float, atol: np.ndarray,
           settle: _Settle | None, budget: tuple[float, float],
           scaled: tuple[np.ndarray, _Settle, np.ndarray] | None) -> str:
    """Step ``solver`` until it ends, appending each accepted step's time, state (a copy)
    and interpolant; returns the status (``_run``).  Floating-point errors are ignored
    (the caller's errstate): an overflowing (e.g. unstable regularised) system is a
    failure, not a crash."""
    while solver.status == "running":
        if len(interps) >= MAX_STEPS:
            return "horizon"
        if len(interps) >= budget[0] or solver.nfev >= budget[1]:
            return "budget"
        try:
            if scaled is not None:
                origin, detector, reached = scaled
                np.maximum(reached, np.abs(origin + solver.y), out=reached)
                solver.rtol, solver.atol = _step_tolerances(rtol, atol, origin, solver.y,
                                                            detector.scale, reached)
            solver.step()
        except (ValueError, ArithmeticError, np.linalg.LinAlgError):
            return "failed"
        if solver.status == "failed" or not np.isfinite(solver.y).all():
            return "failed"
        ss.append(solver.t)
        zs.append(solver.y.copy())
        interps.append(solver.dense_output())
        if settle is not None:
            verdict = settle.add(solver.t, solver.y, solver.f)
            if verdict is not None:
                return verdict
    return "reached"


def integrate_interval(system: System, y0: np.ndarray, t0: float, length: float | None,
                       horizon: float, rtol: float, atol: np.ndarray, pulse_end: float,
                       earliest: float, dynamic: np.ndarray, window: float,
                       first_step: float, plausible: np.ndarray,
                       budget: tuple[float, float] = (np.inf, np.inf),
                       factors: dict | None = None) -> IntervalRun:
    """Integrate interval k from y(t_k-) = y0; see the module docstring.

    Args:
        system: the interval's ODE.
        y0: full state at t_k-, shape (n,).
        t0: absolute event time t_k (s), recorded only.
        length: s to the next event, or None for the last interval.
        horizon: the longest local time the held continuation may run (s).
        rtol: relative tolerance; atol: absolute tolerances of the full state, shape (n,).
        pulse_end: local time (s) after which the pulse has died (``post_pulse``).
        earliest: local time (s) before which settling is not judged (the lower estimate of
            the fastest real time constant: before it no real mode has moved measurably).
        dynamic: boolean mask over the full state, shape (n,), of the states on which settling
            is judged.
        window: local time (s) to the end of the post-pulse fit window; the first run ends
            there, with steps of at most window / WINDOW_STEPS.
        first_step: the first step (s), a fraction of the pulse width (Radau's own choice from
            the initial slope can step over a pulse its error estimate does not see).
        plausible: the largest magnitude of each state of an operating point, shape (n,)
            (``interval_origin``).
        budget: (accepted steps, right-hand-side evaluations) the interval may use in all its
            runs; past either the run stops with status ``budget``.
        factors: a dict owned by the caller for one solve, keeping the DC factorisations of
            the intervals' systems (linsolve.solve).
    """
    red = system.reduction
    origin_full, consistent, origin, r = interval_origin(system, y0, plausible, atol / rtol,
                                                         factors)
    atol, dynamic = atol[red.dyn], dynamic[red.dyn]
    z0 = red.integrated(y0) - origin
    settle = _Settle(lambda z: system.jac @ z + r, dynamic, atol / rtol, pulse_end, earliest)
    settle.add(0.0, z0)
    acc, scaled = _Accumulator(z0), (origin, settle, np.zeros_like(z0))
    # 1. the pulse and the post-pulse fit window, resolved with small first and bounded steps
    bound = window if length is None else min(window, length)
    # a pulse wider than the whole window (a part value at the edge of the accepted range)
    # starts with the window itself rather than a step Radau refuses
    first_step = min(first_step, bound) if first_step else first_step
    status = acc.add(*_run(system, r, z0, 0.0, bound, rtol, atol, settle, first_step=first_step,
                           max_step=bound / WINDOW_STEPS, budget=acc.left(budget), scaled=scaled))
    # 2. on to the next event
    status, y_next, settled = _to_next_event(system, r, origin, acc, settle, scaled, status,
                                             length, bound, rtol, atol, budget)
    # 3. the held continuation until it settles
    if status == "reached" and not settled:
        start = acc.s[-1]
        status = acc.add(*_run(system, r, acc.z[-1], start, max(horizon, 2.0 * start), rtol,
                               atol, settle, budget=acc.left(budget), scaled=scaled))
        settled = status == "settled"
        if status == "reached":
            status = "horizon"
    return acc.run(t0, length, origin, origin_full, consistent, y_next,
                   "settled" if settled else status, settled)


def _to_next_event(system: System, r: np.ndarray, origin: np.ndarray, acc: "_Accumulator",
                   settle: _Settle, scaled: tuple, status: str, length: float | None,
                   bound: float, rtol: float, atol: np.ndarray, budget: tuple[float, float]):
    """Step 2 of ``integrate_interval``: from the end of the fit window to the next event (if
    the window ended before it); returns (status, full state at the next event or None,
    whether the steps after the window settled)."""
    y_next, settled = None, False
    if status == "reached" and length is not None and acc.s[-1] < length:
        status = acc.add(*_run(system, r, acc.z[-1], acc.s[-1], length, rtol, atol, None,
                               budget=acc.left(budget), scaled=scaled))
    if status == "reached" and length is not None:
        red = system.reduction
        y_next = np.asarray(red.lift @ (origin + acc.z[-1])).ravel() + red.lift_c
        settled = any(settle.add(s, z) == "settled" for s, z in zip(acc.s[1:], acc.z[1:])
                      if s > bound)
    elif status == "settled":
        settled, status = True, "reached"
    return status, y_next, settled


def interval_origin(system: System, y0: np.ndarray, plausible: np.ndarray, noise: np.ndarray,
                    factors: dict | None = None):
    """(origin as a full state, consistent, origin over x_d, driving term r) of an interval.

    The origin is the interval's DC operating point (linsolve.operating_point), accepted up to
    ``plausible`` (shape (n,): the largest magnitude each state of an operating point can take,
    from the circuit's own scales, engine.py) plus ``TRAPPED`` times |y0| (charge and flux the
    interval keeps).  Where no operating point is established (``consistent`` False) the
    origin is whatever the solve left, and the full origin is rebuilt from it through the
    reduction's lift, so that a probe read at the origin (probes.probe_offset) is the value of
    the same state the integration starts from; the DC solve's own full state there is not an
    equilibrium and may differ from the lift (a zero vector has no source in it).  ``noise``
    (shape (n,)): the magnitude below which each state is at its tolerance, atol / rtol
    (linsolve.operating_point).
    ``factors`` keeps the factorisations of K_dc across intervals (linsolve.solve).
    """
    origin_full, consistent = operating_point(system.K_dc, system.b_dc,
                                              plausible + TRAPPED * np.abs(y0), system.M, y0,
                                              factors, noise)
    red = system.reduction
    origin = red.integrated(origin_full)
    if consistent:
        return origin_full, True, origin, np.zeros_like(origin)
    origin_full = np.asarray(red.lift @ origin).ravel() + red.lift_c
    return origin_full, False, origin, np.asarray(system.jac @ origin + system.c).ravel()


class _Accumulator:
    """Joins the runs of one interval into one list of steps."""

    def __init__(self, z0: np.ndarray) -> None:
        self.s, self.z, self.interps = [0.0], [z0], []
        self.stats = IntervalStats()

    def left(self, budget: tuple[float, float]) -> tuple[float, float]:
        """What remains of (steps, evaluations) ``budget`` after the runs so far."""
        return budget[0] - self.stats.steps, budget[1] - self.stats.nfev

    def add(self, ss, zs, interps, status, stats) -> str:
        self.s += ss[1:]
        self.z += zs[1:]
        self.interps += interps
        self.stats = self.stats.plus(stats)
        return status

    def run(self, t0: float, length: float | None, origin: np.ndarray, origin_full: np.ndarray,
            consistent: bool, y_next: np.ndarray | None, status: str,
            settled: bool) -> IntervalRun:
        """The ``IntervalRun`` of the steps joined so far.  One that settled without an
        established operating point (``consistent`` False) has status ``no-origin``: an
        operating point exists that the DC solve did not find, and values read against it are
        not reported as settled ones."""
        if settled and not consistent:
            settled, status = False, "no-origin"
        s_arr = np.asarray(self.s)
        dense = OdeSolution(s_arr, self.interps) if self.interps else None
        return IntervalRun(t0, length, origin, origin_full, consistent, s_arr,
                           np.column_stack(self.z), dense, y_next, float(s_arr[-1]), status,
                           self.s[-1] if settled else None, self.stats)
