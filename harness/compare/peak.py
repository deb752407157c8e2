"""The peak field: the largest magnitude of the probe in the interval, and when."""

from __future__ import annotations

from .. import tolerances as tol
from ..model import Expectation
from ..outcome import ENGINES_DISAGREE, MISMATCH, PASS, FieldResult
from ..results import Features
from ..units import format_apart, format_si
from .context import CheckContext, below_noise, hand_relative
from .message import engine_message


def compare_peak(exp: Expectation, fe: Features, ctx: CheckContext) -> FieldResult:
    """Largest magnitude in the interval (and when): hand vs closed form vs numeric."""
    pe = ctx.exact.peak(ctx.probe, ctx.k)
    pn = None if ctx.numeric is None else ctx.numeric.peak(ctx.probe, ctx.k)
    hand = abs(exp.hand["peak"])
    unit = exp.probe.dimension
    t_k = ctx.circuit.events[ctx.k]
    verdict, message = PASS, ""
    numeric = None if pn is None else below_noise(pn.magnitude, ctx.noise)
    closed = below_noise(pe.magnitude, ctx.noise)
    apart = pn is not None and not ctx.unresolved and not tol.agree(
        closed, numeric, tol.ENGINE_RELATIVE, tol.ENGINE_FLOOR * ctx.scale)
    limit = ctx.below_resolution("peak", closed, numeric, unit) if apart else ""
    if apart and not limit:
        verdict, message = ENGINES_DISAGREE, engine_message(pe.magnitude, numeric, unit)
    elif not tol.agree(hand, closed, hand_relative(exp, ctx), tol.HAND_FLOOR * ctx.scale):
        verdict = MISMATCH
        message = peak_hint(hand, pe, fe, unit, hand_relative(exp, ctx), ctx.scale)
    elif pe.after_next_event:
        message = (f"the peak at {format_si(pe.time, 's')} after the event lies beyond the next "
                   f"event at {format_si(ctx.circuit.events[ctx.k + 1], 's')} (continued "
                   f"waveform)")
    message = "; ".join(m for m in (message, limit) if m)
    extra = {"at": None if pe.time is None else t_k + pe.time,
             "after_event": pe.time, "value": pe.value, "measured_from": "event",
             "after_next_event": pe.after_next_event}
    if pn is not None:
        extra["numeric_at"] = None if pn.time is None else t_k + pn.time
    return FieldResult(name="peak", hand=hand, closed_form=pe.magnitude, numeric=numeric,
                       verdict=verdict, unit=unit, message=message,
                       formula=exp.formulas.get("peak", ""), tolerance=hand_relative(exp, ctx),
                       extra=extra, floor=tol.ENGINE_FLOOR * ctx.scale)


def peak_hint(hand: float, pe, fe: Features, unit: str, relative: float, scale: float) -> str:
    """Why a hand peak does not fit: where the largest magnitude really is."""
    when = ("as t → ∞ (the final value)" if pe.time is None else
            "just after the event, x(t_k+)" if pe.time == 0 else
            f"at {format_si(pe.time, 's')} after the event")
    computed_text, hand_text = format_apart([pe.magnitude, hand], unit)
    text = f"the largest magnitude is {computed_text} {when}, not {hand_text}"
    floor = tol.HAND_FLOOR * scale
    if fe.final is not None and pe.time is not None and \
            tol.agree(hand, abs(fe.final), relative, floor):
        text += "; your value is the final value — the response overshoots it"
    elif fe.before is not None and pe.time == 0 and tol.agree(hand, abs(fe.before), relative,
                                                              floor):
        text += "; your value is the one before the event: the probe jumps at the event"
    return text
