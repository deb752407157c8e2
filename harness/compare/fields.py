"""Every field of one check, in ``fieldspec.FIELD_SPECS`` order.

The classical fields (``FieldSpec.signoff`` false) are compared for every check; a sign-off
field only where the expectation asks for it.  A field whose engine values are ``Features``
attributes (``fieldspec.FEATURES``) is compared by ``value.compare_field``; the others by the
routine ``ROUTINES`` names for them.  Where the trust guard withholds the interval's values a
sign-off field gets none (``_withheld_field``); a periodic steady-state field belongs to the
repeating window, not to the event, and the trust guard's own ``periodic`` withholds it where an
interval of the window is withheld.
"""

from __future__ import annotations

from functools import partial
from typing import Any, Callable

from ..fieldspec import FEATURES, FIELD_SPECS, field_spec
from ..model import Expectation
from ..outcome import MISMATCH, PASS, FieldResult
from ..results import Features
from .context import CheckContext
from .crossing import compare_crossing
from .dominant import compare_dominant
from .energy import compare_energy
from .peak import compare_peak
from .periodic import compare_periodic
from .ring import compare_ring
from .value import compare_field

#: field name -> its comparison (exp, fe, ctx) -> FieldResult, for every field that is not
#: compared as a ``Features`` attribute
ROUTINES: dict[str, Callable[..., FieldResult]] = {
    "crossing": compare_crossing, "peak": compare_peak, "energy": compare_energy,
    "dominant_tau": compare_dominant,
    **{name: partial(compare_ring, name=name)
       for name in ("ring_frequency", "damping", "q", "overshoot")},
    **{spec.name: partial(compare_periodic, name=spec.name)
       for spec in FIELD_SPECS if spec.periodic}}


def field_results(exp: Expectation, fe: Features, fn: Features | None,
                  ctx: CheckContext) -> tuple[FieldResult, ...]:
    """The FieldResults of one check: the classical fields, then the sign-off fields asked
    for, in ``FIELD_SPECS`` order."""
    out = [compare_field(spec.name, exp, fe, fn, ctx) for spec in FIELD_SPECS
           if not spec.signoff]
    return tuple(out + signoff_fields(exp, fe, fn, ctx))


def signoff_fields(exp: Expectation, fe: Features, fn: Features | None,
                   ctx: CheckContext) -> list[FieldResult]:
    """FieldResults of the sign-off fields the expectation asks for, in ``FIELD_SPECS``
    order."""
    wanted = [spec for spec in FIELD_SPECS if spec.signoff and exp.wants(spec.name)]
    note = ctx.exact.withheld(ctx.k)
    return [_withheld_field(spec.name, exp, note) if note and not spec.periodic
            else compare_field(spec.name, exp, fe, fn, ctx) if spec.source == FEATURES
            else ROUTINES[spec.name](exp, fe, ctx) for spec in wanted]


def _withheld_field(name: str, exp: Expectation, note: str) -> FieldResult:
    """A sign-off field of an interval whose values are not reported: no engine value; a hand
    value cannot be confirmed (mismatch, as for the four classical fields)."""
    extra: dict[str, Any] = {}
    if name == "crossing":
        hand = exp.crossing.time
        extra = {"level": exp.crossing.level, "direction": exp.crossing.direction, "at": None}
    elif name == "energy":
        hand, extra = exp.energy.value, {"part": exp.energy.part}
    else:
        hand = exp.hand[name]
    unit = field_spec(name).unit_for(exp.probe.dimension)
    return FieldResult(name=name, hand=hand, closed_form=None, numeric=None,
                       verdict=MISMATCH if hand is not None else PASS, unit=unit, message=note,
                       extra=extra)
