"""Sign-off quantities of the exact engine: crossings, peaks, dissipated energy, dominant τ.

Every probe in interval k is an exponential sum in the local time u = t - t_k (s):

    y(u) = c + Re sum_j e^(r_j s) sum_m a_jm s^m / m!,      s = u / T,

with the scaled rates r_j and polynomial coefficients a_jm of ``features.RawEvent`` (T the
engine's reference time; the zero cluster's growth terms enter with r = 0).  On it:

* crossing: the first root of y(u) - level after t_k, bracketed on a grid that resolves every
  mode (geometric from 1e-6 of the fastest time constant, linear with 16 points per period of
  any oscillation, out to the interval's span and beyond while the tail still has to cross) and
  refined by Brent's method (``brent.brentq``: the steps of scipy.optimize.brentq).  A jump
  x(t_k-) -> x(t_k+) across the level is a crossing at u = 0.
* peak: the largest |y| among y(0+), the roots of y'(u) (bracketed and refined the same way)
  and the final value as the limit t -> infinity.  At most ``PEAK_REFINE_MAX`` roots of y' are
  refined: past that, those in the grid cells where |y| is largest.
* energy: with i(u) = c + delta(u) the part's current, the integrals over [0, inf) are closed
  form, int s^n e^(r s) ds = n! / (-r)^(n+1) for Re r < 0:
      int delta du = T sum a_jm / (-r_j)^(m+1),
      int delta^2 du = T sum_{i,j,m,n} a_im a_jn (m+n)! / (m! n! (-(r_i + r_j))^(m+n+1)),
  E = R (2 c int delta + int delta^2) + E_jump (see ``harness.results.EnergyValue``).  The
  total up to the next event is integrated by composite Gauss-Legendre on the grid.
* dominant τ: the zero-value time constants R_th C and L / R_th from ``thevenin`` (other
  capacitors open, other inductors shorted, sources zeroed), summed; compared with the sum of
  -1/lambda over the modes and with the exact waveform (``harness.results.DominantTau``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from ..model import CAPACITOR, FALLING, INDUCTOR, RISING
from ..results import CrossingValue, DominantTau, EnergyValue, PeakValue
from ..tolerances import THEVENIN_SHORT, WAVEFORM_SWING_FLOOR
from .brent import brentq
from .features import RawEvent

#: grid: geometric part starts at this fraction of the fastest time constant
GRID_START = 1e-6
#: points of the geometric and of the linear part of the grid; per oscillation period
GRID_POINTS = 1500
PER_PERIOD = 16
#: a sum of at least this many single exponentials is evaluated as a matrix product over
#: blocks of VECTOR_BLOCK times (smaller sums keep the term-by-term loop and its floats)
VECTOR_TERMS = 64
VECTOR_BLOCK = 256
#: the grid never exceeds this many points
GRID_MAX = 60000
#: Gauss-Legendre nodes per grid cell for finite-interval energies
GAUSS = 4
#: at most this many extrema are refined per peak search: past it (an oscillation that barely
#: decays, whose extrema are alike) only the cells whose grid |y| is largest are refined, which
#: bounds the search to well under a second where refining every cell took a minute
PEAK_REFINE_MAX = 64


@dataclass(frozen=True)
class ExpSum:
    """The probe's exact waveform in interval k as an exponential sum (module docstring).

    Attributes:
        constant: c (SI unit of the probe).
        rates: r_j, scaled (1/T), complex.
        coeffs: a_jm per cluster, complex arrays of shape (m_j,).
        t_ref: T in s.
        before, after: y(t_k-) and y(t_k+).
    """

    constant: float
    rates: tuple[complex, ...]
    coeffs: tuple[np.ndarray, ...]
    t_ref: float
    before: float | None
    after: float | None

    @classmethod
    def of(cls, raw: RawEvent, t_ref: float) -> "ExpSum":
        rates = [complex(r) for r, _ in raw.clusters]
        coeffs = [np.asarray(a, dtype=complex) for _, a in raw.clusters]
        if raw.growth.size:
            rates.append(0j)
            coeffs.append(np.concatenate([[0j], np.asarray(raw.growth, dtype=complex)]))
        constant = raw.constant if raw.constant is not None else math.nan
        return cls(constant, tuple(rates), tuple(coeffs), t_ref, raw.before, raw.after)

    @property
    def decays(self) -> bool:
        """Every term dies out (no growth, no undamped or growing mode)."""
        return all(r.real < 0 for r in self.rates) and math.isfinite(self.constant)

    def _poly(self, coeffs: np.ndarray, s: np.ndarray, deriv: bool) -> np.ndarray:
        out = np.zeros(s.shape, dtype=complex)
        for m, a in enumerate(coeffs):
            if deriv:
                if m >= 1:
                    out += a * s ** (m - 1) / math.factorial(m - 1)
            else:
                out += a * s ** m / math.factorial(m)
        return out

    def _simple(self) -> tuple[np.ndarray, np.ndarray] | None:
        """(rates, a_0), shapes (m,), for a sum of at least ``VECTOR_TERMS`` terms that are all
        single exponentials (no polynomial factors), else None."""
        if len(self.rates) < VECTOR_TERMS or any(a.size != 1 for a in self.coeffs):
            return None
        return np.array(self.rates, dtype=complex), np.array([a[0] for a in self.coeffs])

    def _summed(self, s: np.ndarray, rates: np.ndarray, weights: np.ndarray) -> np.ndarray:
        """sum_j weights_j e^(rates_j s) at the scaled times ``s`` (flat), as products of
        blocks of ``VECTOR_BLOCK`` times by every term (BLAS instead of a loop over terms)."""
        flat = s.ravel()
        out = np.empty(flat.shape, dtype=complex)
        real = not rates.imag.any()              # real rates: real exponentials, 2 products
        both = np.stack([weights.real, weights.imag], axis=1)
        with np.errstate(over="ignore", invalid="ignore"):
            for i in range(0, flat.size, VECTOR_BLOCK):
                part = flat[i:i + VECTOR_BLOCK]
                if real:
                    sums = np.exp(np.outer(part, rates.real)) @ both
                    out[i:i + VECTOR_BLOCK] = sums[:, 0] + 1j * sums[:, 1]
                else:
                    out[i:i + VECTOR_BLOCK] = np.exp(np.outer(part, rates)) @ weights
        return out.reshape(s.shape)

    def value(self, u: np.ndarray) -> np.ndarray:
        """y at local times ``u`` (s after t_k), shape like ``u``."""
        s = np.asarray(u, dtype=float) / self.t_ref
        simple = self._simple()
        if simple is not None:
            return (self.constant + self._summed(s, *simple)).real
        out = np.full(s.shape, self.constant, dtype=complex)
        with np.errstate(over="ignore", invalid="ignore"):
            for r, a in zip(self.rates, self.coeffs):
                out += np.exp(r * s) * self._poly(a, s, False)
        return out.real

    def slope(self, u: np.ndarray) -> np.ndarray:
        """dy/du at local times ``u`` (unit per s)."""
        s = np.asarray(u, dtype=float) / self.t_ref
        simple = self._simple()
        if simple is not None:
            return self._summed(s, simple[0], simple[0] * simple[1]).real / self.t_ref
        out = np.zeros(s.shape, dtype=complex)
        with np.errstate(over="ignore", invalid="ignore"):
            for r, a in zip(self.rates, self.coeffs):
                out += np.exp(r * s) * (r * self._poly(a, s, False) + self._poly(a, s, True))
        return out.real / self.t_ref

    def time_scales(self) -> tuple[float, float]:
        """(fastest, slowest) time constant of the non-zero rates in s (T, T without any)."""
        sig = [abs(r.real) for r in self.rates if abs(r.real) > 0]
        if not sig:
            return self.t_ref, self.t_ref
        return self.t_ref / max(sig), self.t_ref / min(sig)

    def grid(self, end: float) -> np.ndarray:
        """Local times in (0, end] that resolve every mode (module docstring), sorted."""
        fast, _ = self.time_scales()
        start = min(GRID_START * fast, 1e-3 * end)
        parts = [np.geomspace(start, end, GRID_POINTS), np.linspace(0, end, GRID_POINTS)[1:]]
        omegas = [abs(r.imag) / self.t_ref for r in self.rates if abs(r.imag) > 0]
        if omegas:
            step = 2 * math.pi / max(omegas) / PER_PERIOD
            count = int(min(end / step, GRID_MAX))
            parts.append(np.linspace(0, end, max(count, 2))[1:])
        return np.unique(np.concatenate(parts))

    def integral(self) -> complex:
        """int_0^inf delta(u) du in unit·s (requires ``decays``)."""
        total = 0j
        for r, a in zip(self.rates, self.coeffs):
            total += sum(am / (-r) ** (m + 1) for m, am in enumerate(a))
        return total * self.t_ref

    def product_integral(self, other: "ExpSum") -> complex:
        """int_0^inf delta(u) delta_other(u) du in unit·unit_other·s (both must decay): each
        pair of terms a u^m/m! e^(r u) b u^n/n! e^(q u) integrates to a b (m+n)!/(m! n!)
        / (-(r+q))^(m+n+1) (the Laplace transform of u^(m+n) at 0)."""
        total = 0j
        for ri, ai in zip(self.rates, self.coeffs):
            for rj, aj in zip(other.rates, other.coeffs):
                mu = -(ri + rj)
                for m, am in enumerate(ai):
                    for n, an in enumerate(aj):
                        total += (am * an * math.factorial(m + n)
                                  / (math.factorial(m) * math.factorial(n) * mu ** (m + n + 1)))
        return total * self.t_ref


# ------------------------------------------------------------------------------- crossings
def _sides(direction: str, lo: float, hi: float) -> bool:
    """Whether going from value-minus-level ``lo`` to ``hi`` is a crossing in ``direction``."""
    if direction == RISING:
        return lo < 0 <= hi
    if direction == FALLING:
        return lo > 0 >= hi
    return (lo < 0 <= hi) or (lo > 0 >= hi)


def _first_root(fun, grid: np.ndarray, values: np.ndarray, direction: str) -> float | None:
    """The first bracketed root of ``fun`` on ``grid`` (with its ``values``) in ``direction``
    (the sign changes of all grid cells found at once, as ``_sides`` defines them)."""
    lo, hi = values[:-1], values[1:]
    up = (lo < 0) & (0 <= hi)
    down = (lo > 0) & (0 >= hi)
    mask = up if direction == RISING else down if direction == FALLING else up | down
    hits = np.flatnonzero(mask)
    if hits.size == 0:
        return None
    i = int(hits[0])
    if values[i + 1] == 0:
        return float(grid[i + 1])
    return _refine(fun, grid[i], grid[i + 1])


def _refine(fun, lo: float, hi: float) -> float:
    """Brent's root of ``fun`` in [lo, hi]; the nearer end where rounding unbrackets it (the
    grid value at u = 0 is the right limit x(t_k+), which a direct evaluation may miss by an
    ulp)."""
    f_lo, f_hi = fun(lo), fun(hi)
    if not (np.isfinite(f_lo) and np.isfinite(f_hi)) or f_lo * f_hi > 0:
        return float(lo if abs(f_lo) <= abs(f_hi) else hi)
    if f_lo == 0 or f_hi == 0:
        return float(lo if f_lo == 0 else hi)
    return brentq(fun, lo, hi, xtol=1e-15 * max(hi, 1e-300), rtol=4 * np.finfo(float).eps,
                  maxiter=200, fa=f_lo, fb=f_hi)


def crossing(ex: ExpSum, level: float, direction: str, end: float, final: float | None,
             next_gap: float | None, band: float = 0.0) -> CrossingValue:
    """First crossing of ``level`` in (0, end] (extended while the tail must still cross).

    Args:
        end: the span's length after t_k in s.
        final: x_inf of the interval, or None.
        next_gap: t_(k+1) - t_k in s, or None for the last interval.
        band: a level within ``band`` of ``final`` is that value (probe unit): a root from
            which the waveform stays within the band is its rounding, and the probe only
            approaches the level (a level at the exact final value, which the closed form's
            x_inf misses by ~1e-12 of the scale, was "crossed" 15 τ after the event).
    """
    after_gap = (lambda u: next_gap is not None and u > next_gap)
    if ex.before is not None and ex.after is not None and \
            _sides(direction, ex.before - level, ex.after - level) and ex.after != level:
        way = RISING if ex.after > ex.before else FALLING
        return CrossingValue(0.0, way, in_jump=True, approaches=final)
    fun = (lambda u: float(ex.value(np.array([u]))[0]) - level)
    grid = np.concatenate([[0.0], ex.grid(end)])
    values = ex.value(grid) - level
    values[0] = (ex.after if ex.after is not None else values[1] + level) - level
    found = _first_root(fun, grid, values, direction)
    for _ in range(60):             # the slow tail still has to reach the level: look further
        if found is not None or final is None or not np.isfinite(values[-1]):
            break
        if not _sides(direction, values[-1], final - level):
            break
        lo, end = grid[-1], 2 * grid[-1]
        grid = np.linspace(lo, end, 200)
        values = ex.value(grid) - level
        found = _first_root(fun, grid, values, direction)
    if found is not None and final is not None and abs(level - final) <= band \
            and _settled(ex, found, end, final, band):
        found = None
    if found is None:
        return CrossingValue(None, approaches=final)
    way = RISING if float(ex.slope(np.array([found]))[0]) > 0 else FALLING
    if direction != "either":
        way = direction
    return CrossingValue(found, way, after_next_event=after_gap(found), approaches=final)


def _settled(ex: ExpSum, start: float, end: float, final: float, band: float) -> bool:
    """Whether the waveform stays within ``band`` of ``final`` from local time ``start`` (s)
    over the span's own grid shifted there (``end`` beyond it: ten slowest τ at least)."""
    grid = start + np.concatenate([[0.0], ex.grid(end)])
    return bool(np.all(np.abs(ex.value(grid) - final) <= band))


# ------------------------------------------------------------------------------- peaks
def _extrema(ex: ExpSum, grid: np.ndarray, rank=np.abs) -> list[tuple[float, float]]:
    """(value, local time) of the extrema of y on ``grid`` (a root of y' refined by Brent's
    method between grid points where y' changes sign; at most ``PEAK_REFINE_MAX``, the
    largest by ``rank`` of y, ``_extremum_cells``)."""
    fun = (lambda u: float(ex.slope(np.array([u]))[0]))
    out = []
    for i in _extremum_cells(ex, grid, rank):
        u = _refine(fun, grid[i], grid[i + 1])
        out.append((float(ex.value(np.array([u]))[0]), u))
    return out


def _ring_end(ex: ExpSum, end: float) -> float:
    """The span an overshoot search must cover (s): ``end``, extended by one damped period
    2π/ω_d of the slowest-oscillating pair.  A pair's tail A e^(−σu) cos(ω_d u + φ) passes its
    final value once every half period, and the first such lobe of a nearly critical pair
    (ζ = 0.96: at π/ω_d = πζ/√(1 − ζ²) = 10.9 envelope τ) lies beyond a 10 τ span."""
    omegas = [abs(r.imag) / ex.t_ref for r in ex.rates if abs(r.imag) > 0]
    if not omegas:
        return end
    return end + 2.0 * math.pi / min(omegas)


def overshoot(ex: ExpSum, end: float, final: float | None) -> float | None:
    """How far y passes its final value, as a fraction of the step x_inf - x(0+): the largest
    sign (y - x_inf) / |x_inf - x(0+)| over the extrema (0 when it never passes), None without
    a final value or a step."""
    if final is None or ex.after is None or not ex.decays:
        return None
    step = final - ex.after
    if not abs(step) > 1e-9 * max(abs(final), abs(ex.after)):
        return None
    grid = np.concatenate([[0.0], ex.grid(_ring_end(ex, end))])
    sign = math.copysign(1.0, step)
    # ranked by how far each passes x_inf, not by |y|: a small ring on a large offset has its
    # largest |y| on the far side of x_inf, and the 64 largest |y| of 66 extrema left out
    # every trough that passes it (overshoot 0 for 247)
    beyond = [sign * (v - final) for v, _ in _extrema(ex, grid, lambda y: sign * (y - final))]
    return max([0.0] + beyond) / abs(step)


def peak(ex: ExpSum, end: float, final: float | None, next_gap: float | None) -> PeakValue:
    """Largest |y| over (0, inf): y(0+), the extrema (roots of y') and the final value."""
    candidates: list[tuple[float, float | None]] = []
    if ex.after is not None:
        candidates.append((ex.after, 0.0))
    grid = np.concatenate([[0.0], ex.grid(end)])
    candidates += _extrema(ex, grid)
    if final is not None:
        candidates.append((final, None))
    else:                           # no final value: the largest magnitude seen on the span
        values = ex.value(grid)
        i = int(np.nanargmax(np.abs(values)))
        candidates.append((float(values[i]), float(grid[i])))
    value, time = max(candidates, key=lambda c: (abs(c[0]), c[1] is not None))
    late = time is not None and next_gap is not None and time > next_gap
    return PeakValue(magnitude=abs(value), value=value, time=time, after_next_event=late)


def _extremum_cells(ex: ExpSum, grid: np.ndarray, rank=np.abs) -> list[int]:
    """Indices i of the grid cells [grid[i], grid[i+1]] where y' changes sign, in grid order;
    past ``PEAK_REFINE_MAX`` cells, the ``PEAK_REFINE_MAX`` whose larger end ``rank(y)`` (|y|
    unless said) is largest."""
    slopes = ex.slope(grid)
    with np.errstate(invalid="ignore", over="ignore"):
        turns = np.isfinite(slopes[:-1]) & np.isfinite(slopes[1:]) & \
            (slopes[:-1] * slopes[1:] < 0)
    cells = np.flatnonzero(turns)
    if cells.size <= PEAK_REFINE_MAX:
        return cells.tolist()
    values = rank(ex.value(grid))
    height = np.nan_to_num(np.maximum(values[cells], values[cells + 1]), nan=-1.0)
    keep = np.argsort(-height, kind="stable")[:PEAK_REFINE_MAX]
    return sorted(cells[keep].tolist())


# ------------------------------------------------------------------------------- energy
def _settled_constant(ex: ExpSum) -> float:
    """The final value, 0 where it is rounding noise of a waveform that decays to zero."""
    c = ex.constant
    if abs(c) <= 1e-12 * max(abs(ex.after or 0.0), abs(ex.before or 0.0), 1e-300):
        return 0.0
    return c


def energy(voltage: ExpSum | None, current: ExpSum, jump_loss: float, next_gap: float | None,
           end: float, until: float | None = None) -> EnergyValue:
    """Energy absorbed by a part over an interval, p = v i under the passive sign convention
    (``harness.results.EnergyValue``): the transient above the steady p_inf = v_inf i_inf as
    c_v int delta_i + c_i int delta_v + int delta_v delta_i (closed form), or with ``until``
    (s) the whole absorbed energy from the event to that time (Gauss-Legendre on the exact
    waveforms).  ``voltage`` None: a part that absorbs nothing outside the jump (an ideal
    switch); ``jump_loss`` (J) is the included jump loss."""
    if voltage is None:
        return EnergyValue(jump_loss, jump=jump_loss,
                           in_interval=None if next_gap is None else jump_loss)
    in_interval = None
    if next_gap is not None:
        in_interval = jump_loss + _product_quad(voltage, current, next_gap, end)
    if not (voltage.decays and current.decays):
        if until is not None:
            return EnergyValue(jump_loss + _product_quad(voltage, current, until, end),
                               jump=jump_loss, in_interval=in_interval)
        return EnergyValue(None, jump=jump_loss)
    cv, ci = _settled_constant(voltage), _settled_constant(current)
    steady = float(cv * ci)
    if until is not None:
        total = jump_loss + _product_quad(voltage, current, until, end)
        return EnergyValue(total, jump=jump_loss, steady_power=steady, in_interval=in_interval)
    transient = float((cv * current.integral() + ci * voltage.integral()
                       + voltage.product_integral(current)).real)
    return EnergyValue(transient + jump_loss, jump=jump_loss, steady_power=steady,
                       in_interval=in_interval)


def _product_quad(a: ExpSum, b: ExpSum, length: float, end: float) -> float:
    """int_0^length a(u) b(u) du by composite Gauss-Legendre on both mode-resolving grids."""
    grid = np.concatenate([[0.0], a.grid(max(length, end)), b.grid(max(length, end))])
    grid = np.unique(np.concatenate([grid[grid < length], [length]]))
    nodes, weights = np.polynomial.legendre.leggauss(GAUSS)
    lo, hi = grid[:-1], grid[1:]
    mid, half = (lo + hi) / 2, (hi - lo) / 2
    u = (mid[:, None] + half[:, None] * nodes[None, :]).ravel()
    y = (a.value(u) * b.value(u)).reshape(len(lo), GAUSS)
    return float(np.sum(half[:, None] * weights[None, :] * y))


# ------------------------------------------------------------------------------- dominant τ
def zero_value_terms(circuit, rth: dict[str, float], r_ref: float) -> dict[str, float]:
    """Storage part -> zero-value time constant in s: R_th C, or L / R_th (inf for no path).
    A capacitor's R_th below ``THEVENIN_SHORT`` * ``r_ref`` (ohms) is a short up to rounding
    (a capacitor across a closed ideal switch): its term is 0."""
    out = {}
    for name, r in rth.items():
        part = circuit.part(name)
        if part.kind == CAPACITOR:
            short = abs(r) < THEVENIN_SHORT * r_ref
            out[name] = 0.0 if short else r * part.value if math.isfinite(r) else math.inf
        elif part.kind == INDUCTOR:
            out[name] = part.value / r if r != 0 else math.inf
    return out


def estimate(terms: dict[str, float]) -> float | None:
    """The dominant-τ estimate in s: the sum of the zero-value ``terms``, None unless finite
    and positive."""
    total = sum(terms.values()) if terms else None
    return total if total is not None and math.isfinite(total) and total > 0 else None


def modes_sum(rates: list[complex]) -> float | None:
    """sum of -1/lambda over the given non-zero rates (1/s), real part; None if any is 0."""
    if any(r == 0 for r in rates):
        return None
    return float(sum((-1.0 / r).real for r in rates))


def visible_rates(ex: ExpSum, threshold: float) -> list[complex]:
    """Rates (1/s) of the clusters visible in the probe (amplitude above ``threshold``), each
    repeated by its cluster size."""
    out = []
    for r, a in zip(ex.rates, ex.coeffs):
        if r != 0 and np.max(np.abs(a)) > threshold:
            out += [r / ex.t_ref] * len(a)
    return out


def dominant(ex: ExpSum, terms: dict[str, float], rates: list[complex], end: float,
             final: float | None) -> DominantTau:
    """The zero-value estimate and its distance from the exact waveform of the probe.

    Args:
        terms: the zero-value time constants of the storage parts coupled to the probe (s).
        rates: the modes visible in the probe (1/s), for ``modes_sum``.
    """
    tau = estimate(terms)
    msum = modes_sum(rates)
    if tau is None or final is None or ex.after is None:
        return DominantTau(tau, dict(terms), msum)
    swing = ex.after - final
    horizon = max(end, 10 * tau)
    grid = ex.grid(horizon)
    values = ex.value(grid)
    excursion = float(np.max(np.abs(values - final), initial=0.0))
    if not abs(swing) > WAVEFORM_SWING_FLOOR * excursion:
        # a pulse that starts and ends near its final value: no one-τ curve describes it
        return DominantTau(tau, dict(terms), msum, None, None, tau * math.log(2))
    one = final + swing * np.exp(-grid / tau)
    deviation = float(np.max(np.abs(one - values)) / abs(swing))
    # the 50 % time of the settling from x(t_k+): a jump across the level is not that crossing
    settling = replace(ex, before=None)
    t50 = crossing(settling, final + swing / 2, "either", horizon, final, None).time
    return DominantTau(tau, dict(terms), msum, deviation, t50, tau * math.log(2))
