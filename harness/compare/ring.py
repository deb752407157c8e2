"""The ring fields (damped frequency, damping ratio, Q of the slowest visible complex pair) and
the overshoot, each engine from its own modes and its own waveform."""

from __future__ import annotations

import math

from .. import tolerances as tol
from ..fieldspec import field_spec
from ..model import Expectation
from ..outcome import ENGINES_DISAGREE, MISMATCH, PASS, FieldResult
from ..results import Features
from ..units import format_apart, format_si
from .context import CheckContext, hand_relative
from .message import engine_message

#: an engine that did not compute a value (never a disagreement)
_NOT_COMPUTED = object()


def _ring_value(features: Features | None, name: str) -> float | None:
    """f_d (Hz), zeta or Q = 1/(2 zeta) of the slowest visible complex pair, or None."""
    if features is None or not features.rings:
        return None
    frequency, zeta = features.rings[0]
    if name == "ring_frequency":
        return frequency
    return zeta if name == "damping" else 1.0 / (2.0 * zeta)


def _ring_values(ctx: CheckContext, fe: Features, name: str) -> tuple:
    """(closed form, numeric) of a ring field or the overshoot."""
    if name == "overshoot":
        numeric = None if ctx.numeric is None else ctx.numeric.overshoot(ctx.probe, ctx.k)
        return ctx.exact.overshoot(ctx.probe, ctx.k), numeric
    numeric = None if ctx.numeric is None else ctx.numeric.features(ctx.probe, ctx.k)
    if numeric is not None and numeric.order is None:
        return _ring_value(fe, name), _NOT_COMPUTED          # its modes were not computed
    return _ring_value(fe, name), _ring_value(numeric, name)


def _step(fe: Features) -> float | None:
    """The closed form's step x_inf - x(t_k+) of the probe (its unit), None without both."""
    return fe.final - fe.after if fe.final is not None and fe.after is not None else None


def _engine_ring_floor(name: str, fe: Features, ctx: CheckContext,
                       values: tuple, scale: float) -> float:
    """The floor of a ring field between the engines: 0 for f_d, ζ and Q; for the overshoot
    o = e/s (excursion e beyond x_inf over the step s = x_inf - x(t_k+)), ``tol.ENGINE_FLOOR``
    or the error both carry, δo = δ(1 + o)/s with δ = ``tol.ENGINE_FLOOR`` of ``scale``
    (the probe's, else its scale in the interval, ``CheckContext.interval_scale``: the
    engines' absolute error on e and on s; a 14 nA step under a 3.9 mA ring is an overshoot
    of 1.9e5 read 2e-5 apart), whichever is larger; no verdict where
    the step is below the probe's noise floor (a pulse that starts and ends at 0: 1e-15 V over
    a 5.5 V excursion made an overshoot of 3e11 against 1e13)."""
    if name != "overshoot":
        return 0.0
    step = abs(_step(fe) or 0.0)
    if not step >= ctx.noise:
        return math.inf
    largest = max([abs(v) for v in values if isinstance(v, float)], default=0.0)
    return max(tol.ENGINE_FLOOR, tol.ENGINE_FLOOR * scale * (1.0 + largest) / step)


def _noise_step_message(fe: Features, ctx: CheckContext) -> str:
    """Why the overshoot of a probe whose step x_inf - x(t_k+) (closed form) is below its noise
    floor is not established: the overshoot is excursion over step, and the step is rounding,
    so its value (0 or 1e14 by the sign of that rounding) is no finding."""
    step = _step(fe)
    unit = field_spec("after").unit_for(ctx.probe.dimension)
    shown = "none" if step is None else format_si(step, unit)
    return (f"no overshoot is defined: the probe has no step above its noise floor to settle "
            f"from (x(∞) − x(0+) = {shown}, noise floor {format_si(ctx.noise, unit)})")


def compare_ring(exp: Expectation, fe: Features, ctx: CheckContext, name: str) -> FieldResult:
    """The ring of the probe's slowest visible complex pair (damped frequency, damping ratio,
    Q) or its overshoot (a fraction of the step): hand vs closed form vs numeric; each engine
    from its own modes (the closed form's exact pencil, the numerical engine's own QZ and
    integrated response) and its own waveform (the overshoot)."""
    closed, numeric = _ring_values(ctx, fe, name)
    computed = ctx.numeric is not None and numeric is not _NOT_COMPUTED and not ctx.unjudged
    numeric = None if numeric is _NOT_COMPUTED else numeric
    hand, unit = exp.hand[name], field_spec(name).unit_for(exp.probe.dimension)
    floor = tol.ENGINE_FLOOR if name == "overshoot" else 0.0
    verdict, message = PASS, ""
    noise_step = name == "overshoot" and not abs(_step(fe) or 0.0) >= ctx.noise
    if noise_step:
        computed = False              # a step below the noise floor: no engine verdict
    if computed and (closed is None) != (numeric is None) or (
            closed is not None and numeric is not None and not any(
                tol.agree(closed, numeric, tol.RING_ENGINE_RELATIVE,
                          _engine_ring_floor(name, fe, ctx, (closed, numeric), scale()))
                for scale in (lambda: ctx.scale, lambda: ctx.interval_scale))):
        verdict, message = ENGINES_DISAGREE, engine_message(closed, numeric, unit)
    elif closed is None:
        verdict = MISMATCH
        message = ("no overshoot is defined: the probe has no step to settle from"
                   if name == "overshoot" else
                   f"the probe shows no decaying complex pair in this interval (order "
                   f"{fe.order}, modes {', '.join(format_si(t, 's') for t in fe.modes) or 'none'})")
    elif noise_step:
        verdict, message = MISMATCH, _noise_step_message(fe, ctx)
    elif not tol.agree(hand, closed, hand_relative(exp, ctx), tol.HAND_FLOOR if floor else 0.0):
        verdict = MISMATCH
        hand_text, closed_text = format_apart([hand, closed], unit)
        message = f"hand {hand_text}, closed form {closed_text}"
        if name == "overshoot" and fe.rings:
            zeta = fe.rings[0][1]
            pure = math.exp(-math.pi * zeta / math.sqrt(1 - zeta * zeta))
            message += (f" (a pure second-order step with ζ = {zeta:.4g} overshoots by "
                        f"e^(−πζ/√(1−ζ²)) = {pure:.4g}; zeros and other modes change it)")
    return FieldResult(name=name, hand=hand, closed_form=closed, numeric=numeric,
                       verdict=verdict, unit=unit, message=message,
                       formula=exp.formulas.get(name, ""), tolerance=hand_relative(exp, ctx),
                       floor=floor)
