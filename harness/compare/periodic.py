"""The periodic steady-state fields: minimum, maximum, average, ripple over one period of the
circuit's repeating window and the periods to settle (``FieldSpec.periodic``; each engine's
``Solution.periodic``, a ``results.PeriodicValue``).

Same rule as every field (``tolerances.agree``): hand vs closed form with the expectation's
tolerance and ``tol.HAND_FLOOR`` of the probe's scale, closed form vs numeric with the field's
declared engine tolerance and ``tol.ENGINE_FLOOR`` of the probe's scale (a disagreement blames
the engines).  A count of periods has ``tol.SETTLE_PERIOD_SLACK`` periods of slack instead of
the scale floor.  ``at`` plays no part: the values belong to the window, not to an event.

Nothing the tool could not establish passes: a steady state the closed form cannot establish
is a mismatch saying why; one that only the numerical engine cannot establish is "not
computed" there, the field a pass on the closed form alone with a note saying why (a limit of
that engine); a steady state one engine finds and the other says grows is engines-disagree.
"""

from __future__ import annotations

from .. import tolerances as tol
from ..fieldspec import PERIODS, field_spec
from ..messages import periodic_reason
from ..model import Expectation
from ..outcome import ENGINES_DISAGREE, MISMATCH, PASS, FieldResult
from ..results import GROWS, Features, PeriodicValue
from ..units import format_apart
from .context import CheckContext, hand_relative
from .message import engine_message

#: the field's words in a sentence
_WORDS = {"minimum": "the steady-state minimum", "maximum": "the steady-state maximum",
          "average": "the steady-state average", "ripple": "the steady-state ripple",
          "settle_periods": "the periods to settle"}
#: the field's value in a ``PeriodicValue`` (named, not looked up by attribute name: the
#: comparator asks the contract directly)
_FIELDS = {"minimum": lambda v: v.minimum, "maximum": lambda v: v.maximum,
           "average": lambda v: v.average, "ripple": lambda v: v.ripple,
           "settle_periods": lambda v: v.settle_periods}


def _periodic(solution, exp: Expectation) -> PeriodicValue | None:
    """``solution.periodic(probe, band)`` with the block's ``settle-within`` band, or None
    without an engine."""
    if solution is None:
        return None
    within = exp.settle_within if exp.settle_within is not None else tol.SETTLE_FRACTION
    return solution.periodic(exp.probe, within)


def _value(result: PeriodicValue | None, name: str) -> float | None:
    """The field ``name`` of a ``PeriodicValue`` (None where it gives none)."""
    if result is None or result.reason is not None:
        return None
    value = _FIELDS[name](result)
    return None if value is None else float(value)


def _floors(name: str, ctx: CheckContext) -> tuple[float, float]:
    """(hand floor, engine floor) of the field in its unit."""
    if field_spec(name).floor == PERIODS:
        return tol.SETTLE_PERIOD_SLACK, tol.SETTLE_PERIOD_SLACK
    return tol.HAND_FLOOR * ctx.scale, tol.ENGINE_FLOOR * ctx.scale


def _engines_disagree(exact, numeric, closed, other, name: str, floor: float) -> bool:
    """Whether the engines disagree: both give values outside the declared tolerance, or one
    finds a steady state where the other says the period map grows."""
    if closed is not None and other is not None:
        return not tol.agree(closed, other, field_spec(name).engine_relative, floor)
    if numeric is None:
        return False
    return (exact.reason == GROWS and other is not None) or \
        (numeric.reason == GROWS and closed is not None)


def compare_periodic(exp: Expectation, fe: Features, ctx: CheckContext,
                     name: str) -> FieldResult:
    """One periodic steady-state field: hand vs closed form vs numeric."""
    exact, numeric = _periodic(ctx.exact, exp), _periodic(ctx.numeric, exp)
    closed, other = _value(exact, name), _value(numeric, name)
    spec = field_spec(name)
    unit, hand, relative = spec.unit_for(exp.probe.dimension), exp.hand[name], \
        hand_relative(exp, ctx)
    hand_floor, engine_floor = _floors(name, ctx)
    verdict, message = PASS, ""
    if _engines_disagree(exact, numeric, closed, other, name, engine_floor):
        verdict = ENGINES_DISAGREE
        message = engine_message(closed, other, unit) if closed is not None and \
            other is not None else _existence(exact, numeric)
    elif closed is None:
        verdict = MISMATCH
        message = f"{_WORDS[name]} is not known: {periodic_reason(exact.reason)}"
    elif not tol.agree(hand, closed, relative, hand_floor):
        verdict = MISMATCH
        hand_text, closed_text = format_apart([hand, closed], unit)
        message = f"{_WORDS[name]} is {closed_text}, not {hand_text}" + \
            _hint(name, hand, exact)
    elif numeric is not None and other is None:
        message = (f"not cross-checked: the numerical engine gives no steady state "
                   f"({periodic_reason(numeric.reason)}); the closed form's value stands "
                   f"alone: a limit of the numerical engine")
    return FieldResult(name=name, hand=hand, closed_form=closed, numeric=other,
                       verdict=verdict, unit=unit, message=message,
                       formula=exp.formulas.get(name, ""), tolerance=relative,
                       extra=_extra(exact, name), floor=engine_floor)


def _existence(exact: PeriodicValue, numeric: PeriodicValue) -> str:
    """The engines-disagree message when one engine finds a steady state and the other says
    the period map grows."""
    grows, finds = ("the closed form", "the numerical engine") if exact.reason == GROWS \
        else ("the numerical engine", "the closed form")
    return (f"{finds} finds a periodic steady state but {grows} says the period map grows: "
            f"an engine problem, not a hand-calculation error")


def _hint(name: str, hand: float, exact: PeriodicValue) -> str:
    """A slip the field invites: a hand ripple half the computed one is the peak amplitude
    taken for the peak-to-peak ripple."""
    ripple = exact.ripple
    if name == "ripple" and ripple and abs(hand / ripple - 0.5) < 0.02:
        return "; your value is half of it: the ripple is peak-to-peak, maximum − minimum"
    return ""


def _extra(exact: PeriodicValue, name: str) -> dict:
    """The window's period and start (s) for the reports; for the settle count its band and
    time (s after the window's first event)."""
    if exact.reason is not None:
        return {}
    extra = {"period": exact.period, "window_start": exact.start}
    if name == "settle_periods":
        extra.update(settle_within=exact.fraction, settle_time=exact.settle_time)
    return extra
