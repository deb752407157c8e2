"""The crossing field: when the probe first passes a level after the event.

Hand vs closed form with the expectation's tolerance and a floor of ``tol.CROSSING_HAND_FLOOR``
of the interval's τ scale; closed form vs numeric by ``crossing_engines_agree``.  Times are
measured from the event t_k (the ``at`` of the expectation): a reset delay is counted from
power-on, a debounce delay from the press.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .. import tolerances as tol
from ..model import Expectation
from ..outcome import ENGINES_DISAGREE, MISMATCH, PASS, FieldResult
from ..results import Features
from ..units import exact_digits, format_apart, format_exact, format_si
from .context import CheckContext, hand_relative, tau_scale
from .message import engine_message


def _slope(ctx: CheckContext, t_abs: float, scale: float) -> float:
    """|dx/dt| of the exact waveform at ``t_abs`` (central difference), unit/s."""
    start, _ = ctx.exact.span(ctx.k)
    h = max(1e-6 * scale, 1e-12 * max(abs(t_abs), 1e-300))
    lo = max(t_abs - h, start + 0.5 * (t_abs - start)) if t_abs > start else t_abs
    times = np.array([lo, t_abs + h])
    if not times[1] > times[0] or not times[0] > start:
        return math.inf
    x = np.asarray(ctx.exact.waveform(ctx.probe, ctx.k, times), dtype=float)
    return abs(float(x[1] - x[0]) / float(times[1] - times[0]))


def compare_crossing(exp: Expectation, fe: Features, ctx: CheckContext) -> FieldResult:
    """Crossing time after the event: hand vs closed form vs numeric, with "never crosses"."""
    want = exp.crossing
    ce = ctx.exact.crossing(ctx.probe, ctx.k, want.level, want.direction)
    cn = None if ctx.numeric is None else ctx.numeric.crossing(ctx.probe, ctx.k, want.level,
                                                               want.direction)
    t_k = ctx.circuit.events[ctx.k]
    scale_t = tau_scale(fe, ctx)
    unit = exp.probe.dimension
    verdict, message = PASS, ""
    if cn is not None and not ctx.unjudged and \
            not crossing_engines_agree(ce.time, cn.time, ctx, t_k, scale_t):
        verdict, message = ENGINES_DISAGREE, engine_message(ce.time, cn.time, "s")
    elif ce.time is None:
        verdict = MISMATCH
        message = never_crosses(want, ce.approaches, unit)
    elif want.time is not None and not tol.agree(want.time, ce.time, hand_relative(exp, ctx),
                                                 tol.CROSSING_HAND_FLOOR * scale_t):
        verdict = MISMATCH
        message = crossing_hint(want, ce.time, fe, t_k)
    notes = []
    if ce.in_jump:
        notes.append(f"it crosses in the jump at the event itself "
                     f"({format_si(fe.before, unit)} → {format_si(fe.after, unit)})")
    if ce.after_next_event:
        nxt = ctx.circuit.events[ctx.k + 1]
        notes.append(f"the next event at {format_si(nxt, 's')} intervenes: the crossing is on "
                     f"the waveform continued with this interval's sources held, and the circuit "
                     f"changes before it")
    message = "; ".join(([message] if message else []) + notes)
    extra: dict[str, Any] = {
        "level": want.level, "level_unit": unit, "direction": want.direction,
        "measured_from": "event",
        "event": t_k, "at": None if ce.time is None else t_k + ce.time,
        "crossed": ce.direction, "in_jump": ce.in_jump,
        "after_next_event": ce.after_next_event, "approaches": ce.approaches}
    if cn is not None:
        extra["numeric_at"] = None if cn.time is None else t_k + cn.time
    formula = " ; ".join(f"{k} {v}" for k, v in want.formulas.items())
    return FieldResult(name="crossing", hand=want.time, closed_form=ce.time,
                       numeric=None if cn is None else cn.time, verdict=verdict, unit="s",
                       message=message, formula=formula, tolerance=hand_relative(exp, ctx),
                       extra=extra)


def never_crosses(want, approaches: float | None, unit: str) -> str:
    """``never crosses 1.79978 V rising: heads to 1.8 V`` (the level as written, the value it
    heads to with the digits that tell them apart)."""
    way = "" if want.direction == "either" else " " + want.direction
    if approaches is None:
        return f"never crosses {format_exact(want.level, unit)}{way} (the response does not settle)"
    level, heads = format_apart([want.level, approaches], unit,
                                digits=exact_digits(want.level))
    return f"never crosses {level}{way}: heads to {heads}"


def crossing_engines_agree(te, tn, ctx, t_k: float, scale_t: float) -> bool:
    if te is None or tn is None:
        return te is None and tn is None
    slope = _slope(ctx, t_k + te, scale_t) if te > 0 else math.inf
    value_floor = tol.ENGINE_FLOOR * ctx.scale / slope if slope > 0 else math.inf
    floor = max(tol.CROSSING_ENGINE * scale_t, value_floor)
    return tol.agree(te, tn, tol.ENGINE_RELATIVE, floor)


def crossing_hint(want, computed: float, fe: Features, t_k: float) -> str:
    """``crosses at 52 ms, not 69.3 ms (τ·ln(...) suggests ...)``."""
    computed_text, hand_text = format_apart([computed, want.time], "s")
    text = f"crosses at {computed_text} after the event, not {hand_text}"
    hints = []
    if t_k > 0 and tol.agree(want.time, t_k + computed, 0.01):
        hints.append(f"your time fits t = {format_si(t_k + computed, 's')} from t = 0; crossing "
                     f"times are measured from the event at {format_si(t_k, 's')}")
    after, final = fe.after, fe.final
    ratio = None
    if after is not None and final is not None and want.level != final:
        ratio = (after - final) / (want.level - final)
    if ratio is not None and ratio > 1:
        if fe.tau is not None:
            hints.append(f"τ·ln((x(0+) − x∞)/(level − x∞)) = {format_si(fe.tau, 's')}·ln("
                         f"{ratio:.4g}) = {format_si(fe.tau * math.log(ratio), 's')}; your time "
                         f"implies τ = {format_si(want.time / math.log(ratio), 's')}")
        elif fe.dominant_tau is not None:
            hints.append(f"not first order (τ = {', '.join(format_si(t, 's') for t in fe.modes)}"
                         f"); the one-τ estimate Σ zero-value τ·ln({ratio:.4g}) = "
                         f"{format_si(fe.dominant_tau * math.log(ratio), 's')}")
    return text + (f" ({'; '.join(hints)})" if hints else "")
