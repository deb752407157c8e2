"""Feature extraction from an interval's held waveform (local time s = t - t_k).

* after: the post-pulse segment [s_a, s_a + W] (s_a = ``Regularisation.post_pulse``, 100 pulse
  time constants; W = ``WINDOW`` * s_a, at most ``WINDOW_FAST`` of the fastest real time
  constant) is sampled at ``FIT_POINTS`` points of the dense output, fitted with a quadratic
  polynomial by least squares, and the polynomial is evaluated at s = 0.  Its error is of order
  (W / tau_fast)^3 of the swing, far below the model error.
* final: the value at the end of the settled continuation.
* tau: on the post-pulse waveform d(s) = x(s) - x_inf, a weighted log-linear least-squares fit
  d ~ A e^(-s/tau) over the span where |d| falls from its largest value to ``FIT_SPAN`` of it;
  the probe counts as first order when the largest deviation of d from the fitted exponential,
  over the whole held response, is within ``FIT_RESIDUAL`` of the probe's scale (or the
  integration's own error in the probe, where that is larger), and never where d itself stays
  within that error (a flat line fits as well: a deviation the integration does not resolve
  establishes no time constant; the ``flat-response`` note says so and the comparator lets
  the closed form's τ stand alone, saying why).  Where the fit fails and the engine's own
  pencil shows one visible real mode, that mode's exponential is tested against the same
  residual (``mode_fits``), on the same condition.  Otherwise the slowest time constant is the
  log-linear slope of the last decade of the decay above the noise.
* jump: charge moved through a part in the pulse is the integral of its current over [0, s_a]
  (Gauss-Legendre on each integrator step of the dense output) minus the integral of its
  post-pulse polynomial over the same span (the non-impulsive part); for a capacitor it is
  C (after - before) of its voltage.  The dissipated energy is the integral of r i^2 over the
  regularising resistances, minus the same for the post-pulse polynomials.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..results import FLAT_RESPONSE, SIGN_CHANGE, Diagnostic
from .integrate import IntervalRun
from .modal import NOISE  # the integration's error on a state, in units of its tolerance

#: post-pulse fit window, in units of the post-pulse start s_a
WINDOW = 20.0
#: ... and at most this fraction of the fastest real time constant
WINDOW_FAST = 1e-3
#: samples in the post-pulse fit
FIT_POINTS = 13
#: degree of the post-pulse polynomial
FIT_DEGREE = 2
#: the single-exponential fit uses the span where |d| is above this fraction of its maximum
FIT_SPAN = 1e-3
#: a single exponential fits when it deviates by at most this fraction of the probe scale
FIT_RESIDUAL = 3e-6
#: the tail's time constant is read above 100 times this fraction of the probe scale
TAIL_NOISE = 1e-10
#: a fitted τ within this fraction of a mode of this engine's own pencil is that mode: the
#: log-linear fit finds which mode the probe follows, the pencil's QZ gives its rate to
#: rounding.  A fast mode of small amplitude (116 ps beside 250.7 ns, or a 1e-4 share) bends
#: the fit by 2e-4 while leaving it within a fraction of a percent of its mode
FIT_TO_MODE = 1e-2
#: points of the geometric grid on which the held response is examined for time constants
GRID = 400
#: Gauss-Legendre nodes per integrator step for the pulse integrals
GAUSS = 5


@dataclass(frozen=True)
class PostPulse:
    """The quadratic x(s) ~ sum c_i (s/W)^i fitted on [s_a, s_a + W] (coefficients highest first)."""

    s_a: float
    width: float
    coeffs: np.ndarray  #: shape (FIT_DEGREE + 1, p) for p quantities

    def value(self, s) -> np.ndarray:
        """Polynomial values at local times ``s`` (s), shape (p, len(s))."""
        x = np.atleast_1d(np.asarray(s, dtype=float)) / self.width
        out = np.zeros((self.coeffs.shape[1], x.size))
        for c in self.coeffs:
            out = out * x[None, :] + c[:, None]
        return out

    def at_event(self):
        """Value at s = 0 (the extrapolated after-value)."""
        return self.coeffs[-1]

    def integral(self):
        """Integral of the polynomial over [0, s_a] (per quantity)."""
        deg = len(self.coeffs) - 1
        u = self.s_a / self.width
        return sum(c * self.width * u ** (deg - i + 1) / (deg - i + 1)
                   for i, c in enumerate(self.coeffs))


def fit_window(s_a: float, t_fast: float) -> float:
    """Width W in s of the post-pulse fit window (see the module docstring)."""
    return max(s_a, min(WINDOW * s_a, WINDOW_FAST * t_fast))


def post_pulse(run: IntervalRun, rows: np.ndarray, offsets: np.ndarray, s_a: float,
               width: float) -> PostPulse:
    """Fit the post-pulse polynomials of the quantities rows @ z + offsets.

    Args:
        rows: shape (p, n), one row per quantity; offsets: shape (p,), their values at the
            interval's origin.
    """
    s = s_a + np.linspace(0.0, width, FIT_POINTS)
    x = run.probe(rows, offsets, s, whole_states=True)  # (p, FIT_POINTS)
    coeffs = np.polyfit(s / width, x.T, FIT_DEGREE).reshape(FIT_DEGREE + 1, -1)
    return PostPulse(s_a, width, coeffs)


def values(run: IntervalRun, w: np.ndarray, offset: float, s: np.ndarray) -> np.ndarray:
    """Probe values w . z(s) + offset at local times s (clipped to the held response),
    shape (len(s),)."""
    return run.probe(w, offset, s)


def _loglinear(s: np.ndarray, d: np.ndarray) -> tuple[float, float]:
    """Weighted least squares of log|d| = a - s/tau (weights |d|, i.e. absolute residuals);
    returns (A, tau) with d ~ A e^(-s/tau), tau <= 0 meaning no decay.  Points where d is
    exactly 0 carry no weight and are left out (their log is -inf: 0 x -inf made the fit NaN)."""
    keep = d != 0
    if np.count_nonzero(keep) < 2:
        return 0.0, 0.0
    s, d = s[keep], d[keep]
    weights = np.abs(d)
    slope, intercept = np.polyfit(s, np.log(np.abs(d)), 1, w=weights)
    tau = -1.0 / slope if slope < 0 else 0.0
    return float(np.sign(d[0]) * np.exp(intercept)), float(tau)


def decay(run: IntervalRun, w: np.ndarray, offset: float, s_a: float, x_inf: float, scale: float,
          floor: float, noise: float = 0.0, unit: str = ""
          ) -> tuple[float | None, tuple[float, ...], tuple[Diagnostic, ...]]:
    """(tau or None, modes slowest first, notes) of the held response after the pulse.

    Args:
        scale: the probe's scale (its largest magnitude at any event), in its unit.
        floor: amplitude below which the decay is invisible (probe unit).
        noise: the integration's own error in the probe (``probe_noise``, probe unit): the
            fit's residual is judged against ``FIT_RESIDUAL`` of the scale or that, whichever
            is larger (a probe of 0.46 uV integrated to ~1e-11 V cannot show a single
            exponential to 3e-6 of itself).
        unit: the probe's unit (``V`` or ``A``), for the ``flat-response`` note.
    """
    end = run.end
    if end <= s_a:
        return None, (), ()
    grid = np.geomspace(s_a, end, GRID)
    d = values(run, w, offset, grid) - x_inf
    dmax = float(np.max(np.abs(d)))
    if dmax <= noise:               # within its own error: a flat line fits as well
        return None, (), (flat_note(dmax, noise, unit),)
    if dmax <= floor:
        return None, (), ()
    allowed = max(FIT_RESIDUAL * scale, noise)
    above = np.flatnonzero(np.abs(d) >= FIT_SPAN * dmax)
    s_b = grid[above[-1]]
    lin = np.linspace(s_a, s_b, 200)
    dl = values(run, w, offset, lin) - x_inf
    signs = np.sign(dl[np.abs(dl) > floor])
    notes: tuple[Diagnostic, ...] = ()
    if signs.size and np.all(signs == signs[0]):
        amp, tau = _loglinear(lin - s_a, dl)
        if tau > 0:
            model = amp * np.exp(-(grid - s_a) / tau)
            if np.max(np.abs(d - model)) <= allowed:
                return tau, (tau,), ()
    else:
        notes = (Diagnostic(SIGN_CHANGE, engine="numeric"),)
    slow = _tail_tau(grid, d, dmax, TAIL_NOISE * scale)
    return None, ((slow,) if slow else ()), notes


def flat_note(deviation: float, noise: float, unit: str) -> Diagnostic:
    """The ``flat-response`` note: the response after the pulse departs from its final value
    by ``deviation`` at most, within the integration's own error in the probe ``noise``
    (probe unit ``unit``), so no test of it can tell any time constant from none."""
    return Diagnostic(FLAT_RESPONSE, values=(("deviation", deviation), ("noise", noise)),
                      detail=unit, engine="numeric")


def mode_fits(run: IntervalRun, w: np.ndarray, offset: float, s_a: float, x_inf: float,
              tau: float, allowed: float, noise: float = 0.0) -> bool:
    """Whether the held response after the pulse is A e^(-(s - s_a)/tau) to within ``allowed``
    (probe unit) over the whole grid, A by least squares: the test of a time constant of this
    engine's own pencil where the log-linear fit cannot find it (modes below visibility that
    carry a large share of a small swing, or a hump from 0, weigh down its log points).  Never
    where the response itself stays within the integration's own error ``noise`` (probe unit:
    any time constant, or none, would pass)."""
    if not (tau > 0 and run.end > s_a):
        return False
    grid = np.geomspace(s_a, run.end, GRID)
    d = values(run, w, offset, grid) - x_inf
    if not np.max(np.abs(d)) > noise:
        return False
    e = np.exp(-(grid - s_a) / tau)
    amp = float(d @ e) / float(e @ e)
    return bool(np.max(np.abs(d - amp * e)) <= allowed)


def probe_noise(w: np.ndarray, atol: np.ndarray) -> float:
    """The integration's error in the probe w . z (probe unit): ``NOISE`` times sum_j |w_j|
    atol_j over the integrated coordinates (Radau's global error is a small multiple of its
    local tolerance)."""
    return NOISE * float(np.abs(w) @ np.broadcast_to(atol, np.shape(w)))


def _tail_tau(grid: np.ndarray, d: np.ndarray, dmax: float, noise: float) -> float | None:
    """Slowest time constant from the last decade of the decay above the noise level."""
    low = max(100.0 * noise, 1e-9 * dmax)
    idx = np.flatnonzero(np.abs(d) >= low)
    if idx.size < 3:
        return None
    last = idx[-1]
    top = np.flatnonzero(np.abs(d[: last + 1]) >= 10.0 * abs(d[last]))
    first = top[-1] if top.size else idx[0]
    seg = slice(first, last + 1)
    sg, dg = grid[seg], d[seg]
    if sg.size < 3 or not np.all(np.sign(dg) == np.sign(dg[0])):
        return None
    _, tau = _loglinear(sg - sg[0], dg)
    return tau if tau > 0 else None


def pulse_points(run: IntervalRun, s_a: float) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights covering [0, s_a] step by step, shapes (q,), (q,)."""
    x, wts = np.polynomial.legendre.leggauss(GAUSS)
    edges = run.s[run.s < s_a]
    edges = np.append(edges, min(s_a, run.end))
    lo, hi = edges[:-1], edges[1:]
    half = 0.5 * (hi - lo)
    nodes = (0.5 * (hi + lo))[:, None] + half[:, None] * x[None, :]
    weights = half[:, None] * wts[None, :]
    return nodes.ravel(), weights.ravel()


def nearest_mode(fitted: float | None, modes: tuple[float, ...]) -> float | None:
    """The fitted time constant (s), replaced by the nearest mode of this engine's own pencil
    (``modal.visible``) when it lies within ``FIT_TO_MODE`` of it; None stays None."""
    if fitted is None or not modes:
        return fitted
    nearest = min(modes, key=lambda m: abs(m - fitted))
    return nearest if abs(nearest - fitted) <= FIT_TO_MODE * fitted else fitted
