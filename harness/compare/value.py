"""The comparison of a field whose engine values are ``results.Features`` attributes: before,
after, final and τ (``fieldspec.FEATURES``).

One rule (``tolerances.agree``): hand vs closed form with the expectation's tolerance, closed
form vs numeric with the field's declared engine tolerance and floor.  When the engines
disagree the field is ``engines-disagree`` and the hand value is not blamed; otherwise a hand
value outside tolerance is a ``mismatch`` whose message comes from ``diagnose``.
"""

from __future__ import annotations

from .. import tolerances as tol
from ..fieldspec import DYNAMICS, PROBE_SCALE, RESOLVED, FieldSpec, field_spec
from ..model import Expectation
from ..outcome import ENGINES_DISAGREE, MISMATCH, PASS, FieldResult
from ..messages import text
from ..results import FLAT_RESPONSE, Diagnostic, Features
from .context import CheckContext, below_noise, hand_relative, snap_zero
from .diagnose import explain
from .message import engine_message


def _engine_ok(spec: FieldSpec, closed: float | None, numeric: float | None,
               floor: float) -> bool:
    if spec.judged == DYNAMICS and closed is None:
        return True  # e.g. numeric τ is only compared where the closed form says first order
    return tol.agree(closed, numeric, spec.engine_relative, floor)


def _unestablished(name: str, closed: float | None, numeric: float | None,
                   fn: Features) -> str:
    """Why the numerical engine gives no τ where the closed form has one, or "": its response
    stays within its own integration error in the probe (its ``flat-response`` note), so no
    fit establishes one; the closed form's τ stands alone and the field says so (a limit of
    that engine, never a silent pass)."""
    if name != "tau" or closed is None or numeric is not None:
        return ""
    return "; ".join(text(n) for n in fn.notes
                     if isinstance(n, Diagnostic) and n.code == FLAT_RESPONSE)


def _judged(spec: FieldSpec, ctx: CheckContext) -> bool:
    """Whether the engines' values of the field are judged against each other here
    (``FieldSpec.judged``); nowhere the numerical engine did not reach."""
    if ctx.stopped:
        return False
    if spec.judged == DYNAMICS:
        return not (ctx.quiet or ctx.unresolved)
    return not (spec.judged == RESOLVED and ctx.unresolved)


def compare_field(name: str, exp: Expectation, fe: Features, fn: Features | None,
                  ctx: CheckContext) -> FieldResult:
    """Verdict and message for one field of one expectation, by its declaration: values below
    the probe's noise floor compare as zero where it says so (``FieldSpec.noise``); the engines
    are judged where ``FieldSpec.judged`` allows (τ not in a quiet interval)."""
    spec = field_spec(name)
    hand = exp.hand.get(name)
    closed = getattr(fe, name)
    if spec.noise:
        closed = below_noise(snap_zero(closed, ctx.scale), ctx.noise)
    numeric = getattr(fn, name) if fn is not None else None
    if spec.noise:
        numeric = below_noise(numeric, ctx.noise)
    if not _judged(spec, ctx):
        fn = None
    unit = spec.unit_for(exp.probe.dimension)
    relative = hand_relative(exp, ctx)
    floor = ctx.scale if spec.floor == PROBE_SCALE else 0.0
    engine_floor = tol.ENGINE_FLOOR * floor
    verdict, message = PASS, ""
    apart = fn is not None and not _engine_ok(spec, closed, numeric, engine_floor)
    if apart and floor:  # the probe's scale in this interval, asked for only where needed
        engine_floor = tol.ENGINE_FLOOR * ctx.interval_scale
        apart = not _engine_ok(spec, closed, numeric, engine_floor)
    limit = ctx.below_resolution(name, closed, numeric, unit) \
        if apart and spec.floor == PROBE_SCALE else ""
    if apart and not limit:
        limit = _unestablished(name, closed, numeric, fn)
    if apart and not limit:
        verdict = ENGINES_DISAGREE
        message = engine_message(closed, numeric, unit)
    elif hand is not None and not (closed is not None and
                                   tol.agree(hand, closed, relative, tol.HAND_FLOOR * floor)):
        verdict = MISMATCH
        message = explain(name, hand, exp, fe, ctx)
    message = "; ".join(m for m in (message, limit) if m)
    return FieldResult(name=name, hand=hand, closed_form=closed, numeric=numeric,
                       verdict=verdict, unit=unit, message=message,
                       formula=exp.formulas.get(name, ""), tolerance=relative,
                       floor=engine_floor)
