"""The energy field: the energy a part absorbs over the interval, and its floors.

The floor is ``tol.ENERGY_FLOOR`` of the energy itself beside a rounding-noise floor
(``energy_floor``); the engine comparison adds the numerical engine's noise on a steady power
(``engine_energy_floor``).
"""

from __future__ import annotations

from .. import tolerances as tol
from ..model import ACROSS, CONTROLLED, RESISTOR, SWITCH, Expectation, Probe
from ..outcome import ENGINES_DISAGREE, MISMATCH, PASS, FieldResult
from ..results import Features
from ..units import format_apart, format_si
from .context import CheckContext, current_scale, hand_relative, probe_scale
from .message import engine_message


def _noise_energy(ctx: CheckContext) -> float:
    """R_min I_f^2 T in J: what rounding noise dissipates, with R_min the circuit's smallest
    resistance, I_f = ``tol.CURRENT_NOISE`` times its current scale V_s / R_min + I_s (largest
    source voltage and current) and T the interval's τ scale (a tenth of the exact span)."""
    resistances = [abs(p.value) for p in ctx.circuit.parts if p.kind == RESISTOR and p.value]
    resistances += [abs(r) for p in ctx.circuit.parts if p.kind == SWITCH
                    for r in (p.on_resistance, p.off_resistance) if r]
    if not resistances:
        return 0.0
    r_min = min(resistances)
    noise = tol.CURRENT_NOISE * current_scale(ctx.circuit, r_min)
    start, end = ctx.exact.span(ctx.k)
    return r_min * noise ** 2 * (end - start) / 10.0


def _controlled_noise_energy(ctx: CheckContext, part_name: str) -> float:
    """V_p I_f T in J for a controlled source (0 for another part): what a current at the
    noise, I_f as in ``_noise_energy``, absorbs across the part's own voltage scale V_p (its
    largest magnitude at any event, ``probe_scale``) over the interval's τ scale T.  Its
    voltage is not tied to its current as a resistor's is: a stage whose control current is
    zero by KCL carries a rounding current of ~1e-18 A beside a volt at its output, 1e-18 J
    over a slow capacitor's discharge, where R_min I_f^2 T is 1e-22 J."""
    if ctx.circuit.part(part_name).kind not in CONTROLLED:
        return 0.0
    volts = probe_scale(ctx.circuit, ctx.exact, Probe(ACROSS, (part_name,)))
    r_min = min([abs(p.value) for p in ctx.circuit.parts if p.kind == RESISTOR and p.value]
                + [abs(r) for p in ctx.circuit.parts if p.kind == SWITCH
                   for r in (p.on_resistance, p.off_resistance) if r], default=1.0)
    start, end = ctx.exact.span(ctx.k)
    return volts * tol.CURRENT_NOISE * current_scale(ctx.circuit, r_min) * (end - start) / 10.0


def engine_energy_floor(ctx: CheckContext, ee, part_name: str) -> float:
    """The floor (J) of the two engines' energies of one part: ``energy_floor`` and what
    the engines' agreement on the part's current allows an energy *above* a steady
    dissipation p_inf: 2 ``tol.ENGINE_RELATIVE`` of p_inf over the interval's τ scale (a
    tenth of the exact span), the power i^2 R (or v i) of currents that may differ by
    ``ENGINE_RELATIVE``.  A transient of 1.6e-10 A on 1.434 uA through an opened 5970 ohm
    switch is 55 fJ above a steady 12.3 nW; the numerical engine's current 1.7e-5 low (the
    values agree) made it 46 fJ (first-order reference: 54.609 fJ, the closed form's)."""
    start, end = ctx.exact.span(ctx.k)
    steady = 2.0 * tol.ENGINE_RELATIVE * abs(ee.steady_power or 0.0) * (end - start) / 10.0
    return max(energy_floor(ctx, ee.energy, part_name), steady)


def energy_floor(ctx: CheckContext, value: float | None, part_name: str | None = None) -> float:
    """The absolute floor in J below which two energies of one part compare as equal: small
    against the energy itself (``tol.ENERGY_FLOOR`` of it), or the rounding noise where the
    energy is at the noise (``_noise_energy``; for a controlled source across its own voltage,
    ``_controlled_noise_energy``), and for an ideal closed switch, whose only
    dissipation is a jump loss computed as a difference of stored energies, that difference's
    rounding (``tol.JUMP_ENERGY_NOISE`` of the energy stored at the event).  Never a scale of
    the part's peak current times the interval's span: a nanosecond spike of 0.1 A beside a
    10 ms tail made such a floor larger than the energy."""
    floors = [tol.ENERGY_FLOOR * (0.0 if value is None else abs(value)), _noise_energy(ctx)]
    if part_name is not None:
        floors.append(_controlled_noise_energy(ctx, part_name))
    if part_name is not None and _ideal_switch(ctx, part_name):
        floors += [tol.JUMP_ENERGY_NOISE * v for v in _stored_at_event(ctx)]
    return max(floors + [1e-300])


def _ideal_switch(ctx: CheckContext, part_name: str) -> bool:
    """Whether the part is a switch with no resistance in interval k (closed and ideal)."""
    part = ctx.circuit.part(part_name)
    return (part.kind == SWITCH and part.is_closed(ctx.circuit.events[ctx.k])
            and not part.on_resistance)


def _stored_at_event(ctx: CheckContext) -> list[float]:
    """Stored energies (J) of every capacitor and inductor just before and after event k: the
    scale of an ideal switch's only dissipation, the jump loss, which cannot exceed them."""
    jump = ctx.exact.jump(ctx.k)
    return [abs(v) for v in list(jump.stored_before.values()) + list(jump.stored_after.values())]


def compare_energy(exp: Expectation, fe: Features, ctx: CheckContext) -> FieldResult:
    """Energy dissipated in a part over the interval continued until settled."""
    want = exp.energy
    ee = ctx.exact.energy(want.part, ctx.k, want.until)
    en = None if ctx.numeric is None else ctx.numeric.energy(want.part, ctx.k, want.until)
    floor = energy_floor(ctx, ee.energy, want.part)
    verdict, message = PASS, ""
    numeric = None if en is None else en.energy
    apart = en is not None and not tol.agree(ee.energy, numeric, tol.ENERGY_ENGINE_RELATIVE,
                                             engine_energy_floor(ctx, ee, want.part))
    limit = ctx.unresolved_energy(want.part) if apart else ""
    if apart and not limit:
        verdict, message = ENGINES_DISAGREE, engine_message(ee.energy, numeric, "J")
    elif ee.energy is None:
        verdict = MISMATCH if want.value is not None else PASS
        message = "the response does not settle, so the dissipated energy is unbounded"
    elif want.value is not None and not tol.agree(want.value, ee.energy, hand_relative(exp, ctx),
                                                  floor):
        verdict = MISMATCH
        message = energy_hint(want.value, ee, ctx)
    notes = energy_notes(ee, ctx, want.part) + ([limit] if limit else [])
    message = "; ".join(([message] if message else []) + notes)
    extra = {"part": want.part, "jump": ee.jump, "steady_power": ee.steady_power,
             "in_interval": ee.in_interval,
             "until": want.until,
             "includes": ("the whole absorbed energy from t_k to t_k + until, plus the jump's loss "
                          "where the part carries its impulse" if want.until is not None else
                          "the transient above the steady dissipation, from t_k+ until settled,"
                          " plus the jump's loss where the part carries its impulse")}
    return FieldResult(name="energy", hand=want.value, closed_form=ee.energy, numeric=numeric,
                       verdict=verdict, unit="J", message=message, formula=want.formula,
                       tolerance=hand_relative(exp, ctx), extra=extra, floor=floor)


def energy_hint(hand: float, ee, ctx: CheckContext) -> str:
    """The hand energy against the computed one, with the stored-energy change beside it."""
    hand_text, closed_text = format_apart([hand, ee.energy], "J")
    text = f"hand {hand_text}, closed form {closed_text}"
    jump, nxt = ctx.exact.jump(ctx.k), None
    if ctx.k + 1 < len(ctx.circuit.events):
        nxt = ctx.exact.jump(ctx.k + 1)
    if nxt is not None:
        change = {p: nxt.stored_before.get(p, 0.0) - jump.stored_after.get(p, 0.0)
                  for p in jump.stored_after}
        moved = ", ".join(f"{p} {format_si(v, 'J')}" for p, v in change.items() if v)
        if moved:
            text += (f"; stored energy changes over the interval by {moved} (charging a "
                     f"capacitor from a step through any resistance dissipates as much as it "
                     f"stores, ½CV²)")
    return text


def energy_notes(ee, ctx: CheckContext, part: str) -> list[str]:
    notes = []
    if ee.jump:
        notes.append(f"includes {format_si(ee.jump, 'J')} lost in the jump at the event "
                     f"(impulse through {part})")
    if ee.steady_power and ee.energy is not None and ee.steady_power > 0:
        notes.append(f"plus a steady {format_si(ee.steady_power, 'W')} for as long as the "
                     f"sources are held (not included)")
    return notes
