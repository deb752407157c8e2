"""Per-probe, per-event features from the exact interval responses.

For a probe y = c~.x~ + d~.dx~/dtau + k (``probes.Functional.terms``) and interval k:

* after  = y at tau = 0+ (the right limit, after any impulse);
* before = y at t_k- from interval k-1 (or from the pre-step response at 0-);
* per mode cluster j the output row h_j = c~ Q1 V_j + d~ Q1 V_j T_j and the polynomial
  coefficients a_m = h_j N_j^m W_j z0 (``modes.poly_coefficients``);
* final  = c~.x_p + k + a_0 of the zero cluster (trapped charge), or None when a growing mode, an
  undamped oscillation or polynomial growth of the zero cluster is visible in the probe.

A cluster is visible when max_m |a_m| / sigma^m exceeds ``MODE_VISIBILITY`` times the probe's
scale (sigma = |Re lambda|, the mode's own time scale); its order contribution is 1 + the highest
visible m (a repeated non-defective mode shows as one exponential, a defective one of size m as
a polynomial of degree m-1).  The probe's scale is the largest magnitude it takes at any event
(before, after, final), or, for a probe that is below a small fraction of the circuit's own
voltage (current) scale at every event, its mode amplitudes, floored by that fraction so that
rounding noise in a probe that is identically zero stays invisible.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..results import (GROWING_MODE, NO_DC_PATH, NO_DECAY, RESPONSE_OVERFLOW, Diagnostic,
                       Features)
from ..tolerances import MODE_MERGE, MODE_VISIBILITY
from .modes import UNDAMPED, poly_coefficients
from .response import IntervalResponse

#: the scale floor, as a fraction of the circuit's voltage (current) scale
SCALE_FLOOR = 1e-9


@dataclass(frozen=True)
class RawEvent:
    """Unclassified values of one probe at one event (SI units).

    Attributes:
        before, after, constant: y(t_k-), y(t_k+), and the constant part of interval k.
        clusters: (scaled rate, polynomial coefficients a_m) per non-zero cluster.
        growth: a_m for m >= 1 of the zero cluster (polynomial growth), shape (m-1,).
        span: the length of interval k's span in scaled time (for growth amplitudes).
        unset: why ``before`` is None although the state is finite (a current at 0- the
            resistive network at 0- leaves free, ``snapshot.undefined_before``), else None.
    """

    before: float | None
    after: float | None
    constant: float | None
    clusters: tuple[tuple[complex, np.ndarray], ...]
    growth: np.ndarray
    span: float
    unset: Diagnostic | None = None


def _finite(value: complex | float) -> float | None:
    value = complex(value)
    return value.real if math.isfinite(value.real) and math.isfinite(value.imag) else None


def raw_event(resp: IntervalResponse, before: tuple[np.ndarray, np.ndarray, np.ndarray,
                                                   np.ndarray, float],
              after: tuple[np.ndarray, np.ndarray, float], span: float) -> RawEvent:
    """Raw values of a probe at the start of ``resp``.

    Args:
        before: (x~, dx~/dtau, c~, d~, k) just before the event: the state and the probe's
            terms in the previous interval (shapes (n,)).
        after: the probe's terms (c~, d~, k) in this interval, padded to ``resp.xp.size``.
        span: the length of the interval's span in scaled time.
    """
    x_m, dx_m, c_m, d_m, k_m = before
    ca, da, k = after
    n = resp.n
    clusters = []
    growth = np.zeros(0, dtype=complex)
    with np.errstate(invalid="ignore", over="ignore"):     # a state beyond range reads None
        value_before = _finite(c_m[:n] @ x_m + d_m[:n] @ dx_m + k_m)
        value_after = _finite(ca[:n] @ resp.x_plus + da[:n] @ resp.dx_plus + k)
        constant = complex(ca @ resp.xp + k)
        for cluster, h, g in _output_rows(resp, ca, da):
            coeffs = poly_coefficients(h, cluster, g)
            if cluster.zero:
                constant += coeffs[0]
                growth = coeffs[1:]
            else:
                clusters.append((complex(cluster.rate), coeffs))
    return RawEvent(value_before, value_after, _finite(constant), tuple(clusters), growth, span)


def _unit_clusters(resp: IntervalResponse) -> bool:
    """A is diagonal and every cluster a unit selection of its coordinates (the symmetric
    route), so the cluster rows are entries of one row over all modes."""
    return resp.dec.diagonal and all(cl.index is not None for cl in resp.dec.clusters)


def _output_rows(resp: IntervalResponse, ca: np.ndarray, da: np.ndarray):
    """Per cluster j: (cluster, h_j = c~ Q1 V_j + d~ Q1 V_j T_j, g_j = W_j z0).  For a diagonal
    A the rows of all clusters come from one product over the modes, c~ Q1 + (d~ Q1) * lambda,
    O(n f) with no per-cluster complex copy of Q1 (``resp.clusters`` is not built)."""
    if not _unit_clusters(resp):
        for data in resp.clusters:
            yield data.cluster, ca @ data.qv + da @ data.qvt, data.g
        return
    dec = resp.dec
    row = ca @ dec.q1 + (da @ dec.q1) * dec.diagonal_rates
    for cl in dec.clusters:
        idx = list(cl.index)
        yield cl, row[idx].astype(complex), resp.z0[idx].astype(complex)


def _amplitudes(rate: complex, coeffs: np.ndarray) -> np.ndarray:
    sigma = abs(rate.real) if abs(rate.real) > UNDAMPED * abs(rate) else abs(rate)
    return np.array([abs(a) / sigma ** m for m, a in enumerate(coeffs)])


def probe_scale(events: list[RawEvent], floor: float) -> float:
    """The probe's scale: its largest magnitude over all events (before, after, final), as
    ``tolerances`` defines it; where that is below ``floor`` (the probe moves only within the
    intervals) its mode amplitudes count too, and it is at least ``floor``.  (Mode amplitudes
    counted everywhere hid a mode at 1e-3 of an interval's own swing behind a large excursion
    of the probe in another interval.)"""
    mags = [abs(v) for ev in events for v in (ev.before, ev.after, ev.constant)
            if v is not None]
    if max(mags, default=0.0) >= floor:
        return max(mags)
    mags.append(floor)
    for ev in events:
        for rate, coeffs in ev.clusters:
            amps = _amplitudes(rate, coeffs)
            if np.all(np.isfinite(amps)):
                mags.append(float(amps.max()))
    return max(mags)


def _merge(taus: list[float]) -> tuple[float, ...]:
    out: list[float] = []
    for tau in sorted(taus, reverse=True):
        if not out or abs(out[-1] - tau) > MODE_MERGE * max(out[-1], tau):
            out.append(tau)
    return tuple(out)


def classify(ev: RawEvent, scale: float, t_ref: float) -> Features:
    """Features of one probe at one event from its raw values (``t_ref`` = T in s)."""
    thr = MODE_VISIBILITY * scale
    order, taus, freqs, notes, rings = 0, [], [], [], []
    real_visible, complex_visible = 0, 0
    bounded = True
    for rate, coeffs in ev.clusters:
        amps = _amplitudes(rate, coeffs)
        if not np.all(np.isfinite(amps)):
            bounded = False
            notes.append(Diagnostic(RESPONSE_OVERFLOW))
            continue
        visible = np.flatnonzero(amps > thr)
        if visible.size == 0:
            continue
        lam = rate / t_ref
        if abs(lam.real) <= UNDAMPED * abs(lam):
            bounded = False
            if lam.imag > 0:
                freqs.append(lam.imag / (2 * math.pi))
                notes.append(Diagnostic(NO_DECAY, values=(
                    ("frequency", float(lam.imag / (2 * math.pi))),)))
        elif lam.real > 0:
            bounded = False
            notes.append(Diagnostic(GROWING_MODE, values=(("rate", float(lam.real)),)))
        else:
            order += 1 + int(visible.max())
            taus.append(-1.0 / lam.real)
            if abs(lam.imag) > MODE_MERGE * abs(lam):
                complex_visible += 1
                if lam.imag > 0:
                    freqs.append(lam.imag / (2 * math.pi))
                    rings.append((-1.0 / lam.real, lam.imag / (2 * math.pi), -lam.real / abs(lam)))
            else:
                real_visible += 1
    if ev.growth.size and np.any(
            [abs(a) * ev.span ** (m + 1) / math.factorial(m + 1) > thr
             for m, a in enumerate(ev.growth)]):
        bounded = False
        notes.append(Diagnostic(NO_DC_PATH))
    if ev.unset is not None:
        notes.append(ev.unset)
    if (ev.before is None and ev.unset is None) or ev.after is None:
        notes.append(Diagnostic(RESPONSE_OVERFLOW))
    notes = list(dict.fromkeys(notes))
    modes = _merge(taus)
    tau = modes[0] if (order == 1 and real_visible == 1 and complex_visible == 0) else None
    final = ev.constant if bounded else None
    return Features(before=ev.before, after=ev.after, final=final, tau=tau, order=order,
                    modes=modes, oscillation=tuple(sorted(set(freqs))), notes=tuple(notes),
                    rings=tuple((f, z) for _, f, z in sorted(rings, reverse=True)))


def node_values(resp: IntervalResponse, x_m: np.ndarray, dx_m: np.ndarray,
                nodes: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """(before, after, final) in V of the voltage of every node in ``nodes`` (indices into x~,
    shape (m,)) at the start of ``resp``, each shape (m,): what ``classify(raw_event(...))`` of
    each node's probe gives, O(n) per cluster for all nodes at once instead of per node.

    A node row is a unit row, so each value is one entry of x~ (exact); the final value adds the
    zero cluster's coefficient.  None where that shortcut does not hold exactly (a value or a
    cluster row that is not finite, a mode that is not decaying, a cluster of several modes,
    polynomial growth): the caller classifies node by node then.
    """
    vectors = (x_m, dx_m, resp.x_plus, resp.dx_plus, resp.xp)
    if resp.augmented or not all(np.isfinite(v).all() for v in vectors):
        return None
    if _unit_clusters(resp):
        final = _diagonal_final(resp, nodes)
        return None if final is None else (x_m[nodes] + 0.0, resp.x_plus[nodes] + 0.0, final)
    zero = None
    with np.errstate(over="ignore", invalid="ignore"):
        for data in resp.clusters:
            lam = complex(data.cluster.rate)
            if data.cluster.size != 1 or not (np.isfinite(data.qv).all()
                                              and np.isfinite(data.qvt).all()
                                              and np.isfinite(data.g).all()):
                return None
            if data.cluster.zero:
                zero = data
            elif not (lam.real < 0 and abs(lam.real) > UNDAMPED * abs(lam)) \
                    or not np.isfinite(data.qv[nodes, 0] * data.g[0]).all():
                return None
    final = resp.xp[nodes].astype(complex)
    if zero is not None:       # the same dot product per node as ``raw_event``'s h @ g
        final += np.array([complex(zero.qv[i] @ zero.g) for i in nodes])
    if not np.isfinite(final).all():
        return None
    return x_m[nodes] + 0.0, resp.x_plus[nodes] + 0.0, final.real


def _diagonal_final(resp: IntervalResponse, nodes: np.ndarray) -> np.ndarray | None:
    """``node_values``' final values for a diagonal A of unit clusters, shape (m,), without
    building ``resp.clusters``: x_p plus the zero mode's column times its coordinate; None
    under the same conditions (a cluster of several modes, a mode that is not decaying, a
    value that is not finite; finiteness of the products is judged by the largest entries,
    which can only send a finite case to the node-by-node route)."""
    dec = resp.dec
    if any(cl.size != 1 for cl in dec.clusters):
        return None
    rates, z0, q1 = dec.diagonal_rates, resp.z0, dec.q1
    zero = [cl.index[0] for cl in dec.clusters if cl.zero]
    moving = np.array([cl.index[0] for cl in dec.clusters if not cl.zero], dtype=int)
    with np.errstate(over="ignore", invalid="ignore"):
        big = max(float(q1.max(initial=0.0)), -float(q1.min(initial=0.0)))
        sizes = (big, big * float(np.abs(rates).max(initial=0.0)),
                 big * float(np.abs(z0).max(initial=0.0)))
        if not (np.isfinite(sizes).all() and np.isfinite(z0).all()):
            return None
        lam = rates[moving]
        if not np.all((lam.real < 0) & (np.abs(lam.real) > UNDAMPED * np.abs(lam))):
            return None
        final = resp.xp[nodes].astype(complex)
        if zero:                # the same product per node as ``raw_event``'s h @ g
            final += q1[nodes, zero[0]] * complex(z0[zero[0]])
    return final.real if np.isfinite(final).all() else None
