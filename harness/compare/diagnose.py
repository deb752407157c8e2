"""Messages that tell the engineer which hand step went wrong.

Each rule looks at one kind of slip the classical step-response method invites: a reversed
reference direction, a missed jump at a capacitor–source loop, trapped charge ignored, a wrong
Thevenin resistance, a τ given to a probe that is not first order.  The first rule that fits
wins; the fallback states the two values and their difference.
"""

from __future__ import annotations

from .. import tolerances as tol
from ..fieldspec import PROBE_UNIT, field_spec
from ..messages import text
from ..model import CAPACITOR, INDUCTOR, Expectation
from ..results import Features
from ..topology import trapped_nodes
from ..units import format_apart, format_si
from .context import CheckContext, direction, hand_relative


def explain(name: str, hand: float, exp: Expectation, fe: Features, ctx: CheckContext) -> str:
    """Why the hand value ``hand`` of field ``name`` does not match the closed form."""
    unit = field_spec(name).unit_for(exp.probe.dimension)
    computed = getattr(fe, name)
    if computed is None:
        return _undefined(name, hand, fe, ctx)
    relative = hand_relative(exp, ctx)
    hand_text, computed_text = format_apart([hand, computed], unit)
    base = f"hand {hand_text}, closed form {computed_text} ({_percent(hand, computed)})"
    floor = tol.HAND_FLOOR * ctx.scale
    for rule in (_sign_rule, _jump_rule, _trapped_rule, _thevenin_rule):
        hint = rule(name, hand, computed, fe, ctx, relative, floor)
        if hint:
            return f"{base}; {hint}"
    return base


def _percent(hand: float, computed: float) -> str:
    if computed == 0:
        return f"off by {format_si(hand - computed)}".rstrip()
    return f"{(hand - computed) / abs(computed):+.2%}"


def _undefined(name: str, hand: float, fe: Features, ctx: CheckContext) -> str:
    if name == "tau":
        if fe.order and fe.order > 1:
            modes = ", ".join(format_si(t, "s") for t in fe.modes)
            osc = (" with oscillation at " + ", ".join(format_si(f, "Hz") for f in fe.oscillation)
                   if fe.oscillation else "")
            return (f"not first order: {fe.order} modes are visible in this probe (τ = {modes})"
                    f"{osc}; a single τ does not describe it — give before/after/final only, or "
                    f"probe a quantity set by one storage part")
        return "no decaying mode is visible in this probe in this interval, so it has no τ"
    if name == "final":
        notes = "; ".join(map(text, fe.notes + tuple(ctx.exact.warnings))) \
            or "the response does not settle"
        return f"there is no final value: {notes}"
    return "the closed form has no value here: " + ("; ".join(map(text, fe.notes)) or "undefined")


def _sign_rule(name, hand, computed, fe, ctx, relative, floor) -> str:
    if field_spec(name).unit == PROBE_UNIT and computed != 0 and \
            tol.agree(-hand, computed, relative, floor):
        return (f"the sign is reversed: this probe is measured as "
                f"{direction(ctx.probe, ctx.circuit)}; your value "
                f"fits the opposite direction")
    return ""


def _jump_rule(name, hand, computed, fe, ctx, relative, floor) -> str:
    if name != "after" or fe.before is None or tol.agree(fe.before, computed, relative, floor):
        return ""
    if not tol.agree(hand, fe.before, relative, floor):
        return ""
    jump = ctx.exact.jump(ctx.k)
    why = "; ".join(map(text, jump.loops)) or "impulsive current at the event"
    moved = ", ".join(f"{p} {format_si(q, 'C')}" for p, q in jump.charges.items())
    return (f"you kept the value from before the event, but it jumps at "
            f"{format_si(ctx.circuit.events[ctx.k], 's')}: {why}"
            + (f" (charge moved: {moved})" if moved else ""))


def _trapped_rule(name, hand, computed, fe, ctx, relative, floor) -> str:
    if name != "final":
        return ""
    groups = trapped_nodes(ctx.circuit, ctx.k)
    if not groups:
        return ""
    names = "; ".join(", ".join(g) for g in groups)
    return (f"charge is trapped on node(s) {names} (reached only through capacitors), so the "
            f"final value is set by the conserved charge, not by a DC divider")


def _thevenin_rule(name, hand, computed, fe, ctx, relative, floor) -> str:
    if name != "tau":
        return ""
    seen = ctx.exact.thevenin(ctx.k)
    if not seen:
        return ""
    bits = []
    for part_name, rth in seen.items():
        part = ctx.circuit.part(part_name)
        if rth is None or part.value is None:
            continue
        if part.kind == CAPACITOR:
            bits.append(f"{part_name} sees R_th = {format_si(rth, 'ohm')} "
                        f"(R_th·C = {format_si(rth * part.value, 's')})")
        elif part.kind == INDUCTOR and rth > 0:
            bits.append(f"{part_name} sees R_th = {format_si(rth, 'ohm')} "
                        f"(L/R_th = {format_si(part.value / rth, 's')})")
    if not bits:
        return ""
    implied = ""
    if len(seen) == 1:
        part = ctx.circuit.part(next(iter(seen)))
        if part.kind == CAPACITOR and part.value:
            implied = f"; your τ implies R_th = {format_si(hand / part.value, 'ohm')}"
        elif part.kind == INDUCTOR and hand > 0:
            implied = f"; your τ implies R_th = {format_si(part.value / hand, 'ohm')}"
    return "check the Thevenin resistance: " + "; ".join(bits) + implied
