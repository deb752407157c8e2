"""The comparison of the sign-off fields: crossing, peak, energy, dominant τ.

Same rule as the four classical fields (``tolerances.agree``): hand vs closed form with the
expectation's tolerance, closed form vs numeric with the engine tolerances of
``harness.tolerances`` (a disagreement there blames the engines, never the hand).  An engine
without the sign-off method (``results.SignoffSolution``) reads as "not computed": its column is
null and no engine comparison is made.  Fields appear only when the expectation asks for them.

Times of crossings and peaks are measured from the event t_k (the ``at`` of the expectation):
the reset delay is counted from power-on, the debounce delay from the press.
"""

from __future__ import annotations

import itertools
import math
from typing import TYPE_CHECKING, Any

import numpy as np

from . import tolerances as tol
from .model import (CURRENT_SOURCE, RESISTOR, RING_FIELDS, SIGNOFF_FIELDS, SWITCH,
                    VOLTAGE_SOURCE, Expectation)
from .outcome import ENGINES_DISAGREE, MISMATCH, PASS, FieldResult
from .results import DominantTau, Features
from .units import exact_digits, format_apart, format_exact, format_si

if TYPE_CHECKING:  # pragma: no cover
    from .compare import CheckContext


def _call(solution, name: str, *args):
    """``solution.name(*args)``, or None when the engine lacks it or is absent."""
    method = getattr(solution, name, None) if solution is not None else None
    return method(*args) if method is not None else None


def hand_relative(exp: Expectation, ctx: "CheckContext") -> float:
    """The expectation's relative hand tolerance, else the file's."""
    return exp.tolerance if exp.tolerance is not None else ctx.circuit.settings.tolerance


def engine_message(closed, numeric, unit: str) -> str:
    """The message of an engines-disagree verdict."""
    closed_text, numeric_text = format_apart([closed, numeric], unit)
    return (f"the closed form gives {closed_text} but the numerical engine gives "
            f"{numeric_text}: an engine problem, not a hand-calculation error")


def tau_scale(fe: Features, ctx: "CheckContext") -> float:
    """The interval's τ scale: the probe's slowest visible τ, else a tenth of the span."""
    if fe.modes:
        return fe.modes[0]
    start, end = ctx.exact.span(ctx.k)
    return max((end - start) / 10.0, 1e-300)


def signoff_fields(exp: Expectation, fe: Features, ctx: "CheckContext") -> list[FieldResult]:
    """FieldResults of the sign-off fields the expectation asks for, in ``SIGNOFF_FIELDS``
    order."""
    makers = {"crossing": compare_crossing, "peak": compare_peak, "energy": compare_energy,
              "dominant_tau": compare_dominant, "ring_frequency": compare_ring,
              "damping": compare_ring, "q": compare_ring, "overshoot": compare_ring}
    note = withheld(ctx.exact, ctx.k)
    if note:
        return [_withheld_field(name, exp, note) for name in SIGNOFF_FIELDS if exp.wants(name)]
    return [_made(makers[name], name, exp, fe, ctx) for name in SIGNOFF_FIELDS
            if exp.wants(name)]


def _made(maker, name: str, exp: Expectation, fe: Features, ctx: "CheckContext") -> FieldResult:
    return maker(exp, fe, ctx, name) if maker is compare_ring else maker(exp, fe, ctx)


def withheld(solution, k: int) -> str | None:
    """Why interval k's values are not reported (a conditioning guard), or None."""
    ask = getattr(solution, "withheld", None)
    return ask(k) if ask is not None else None


def _withheld_field(name: str, exp: Expectation, note: str) -> FieldResult:
    """A sign-off field of an interval whose values are not reported: no engine value; a hand
    value cannot be confirmed (mismatch, as for the four classical fields)."""
    extra: dict[str, Any] = {}
    if name == "crossing":
        hand, unit = exp.crossing.time, "s"
        extra = {"level": exp.crossing.level, "direction": exp.crossing.direction, "at": None}
    elif name == "energy":
        hand, unit, extra = exp.energy.value, "J", {"part": exp.energy.part}
    else:
        hand, unit = exp.hand[name], ("s" if name == "dominant_tau" else
                                      RING_FIELDS.get(name, exp.probe.dimension))
    return FieldResult(name=name, hand=hand, closed_form=None, numeric=None,
                       verdict=MISMATCH if hand is not None else PASS, unit=unit, message=note,
                       extra=extra)


# ------------------------------------------------------------------------------- crossing
def _slope(ctx: "CheckContext", t_abs: float, scale: float) -> float:
    """|dx/dt| of the exact waveform at ``t_abs`` (central difference), unit/s."""
    start, _ = ctx.exact.span(ctx.k)
    h = max(1e-6 * scale, 1e-12 * max(abs(t_abs), 1e-300))
    lo = max(t_abs - h, start + 0.5 * (t_abs - start)) if t_abs > start else t_abs
    times = np.array([lo, t_abs + h])
    if not times[1] > times[0] or not times[0] > start:
        return math.inf
    x = np.asarray(ctx.exact.waveform(ctx.probe, ctx.k, times), dtype=float)
    return abs(float(x[1] - x[0]) / float(times[1] - times[0]))


def compare_crossing(exp: Expectation, fe: Features, ctx: "CheckContext") -> FieldResult:
    """Crossing time after the event: hand vs closed form vs numeric, with "never crosses"."""
    want = exp.crossing
    ce = ctx.exact.crossing(ctx.probe, ctx.k, want.level, want.direction)
    cn = _call(ctx.numeric, "crossing", ctx.probe, ctx.k, want.level, want.direction)
    t_k = ctx.circuit.events[ctx.k]
    scale_t = tau_scale(fe, ctx)
    unit = exp.probe.dimension
    verdict, message = PASS, ""
    if cn is not None and not ctx.unjudged and \
            not _crossing_engines_agree(ce.time, cn.time, ctx, t_k, scale_t):
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


def _crossing_engines_agree(te, tn, ctx, t_k: float, scale_t: float) -> bool:
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


# ------------------------------------------------------------------------------- peak
def _quiet(value: float | None, noise: float) -> float | None:
    """0.0 for a magnitude below the probe's noise floor (``tol.PROBE_NOISE``)."""
    return 0.0 if value is not None and abs(value) < noise else value


def compare_peak(exp: Expectation, fe: Features, ctx: "CheckContext") -> FieldResult:
    """Largest magnitude in the interval (and when): hand vs closed form vs numeric."""
    pe = ctx.exact.peak(ctx.probe, ctx.k)
    pn = _call(ctx.numeric, "peak", ctx.probe, ctx.k)
    hand = abs(exp.hand["peak"])
    unit = exp.probe.dimension
    t_k = ctx.circuit.events[ctx.k]
    verdict, message = PASS, ""
    numeric = None if pn is None else _quiet(pn.magnitude, ctx.noise)
    closed = _quiet(pe.magnitude, ctx.noise)
    if pn is not None and not ctx.unresolved and not tol.agree(closed, numeric,
                                                               tol.ENGINE_RELATIVE,
                                        tol.ENGINE_FLOOR * ctx.scale):
        verdict, message = ENGINES_DISAGREE, engine_message(pe.magnitude, numeric, unit)
    elif not tol.agree(hand, closed, hand_relative(exp, ctx), tol.HAND_FLOOR * ctx.scale):
        verdict = MISMATCH
        message = peak_hint(hand, pe, fe, unit, hand_relative(exp, ctx), ctx.scale)
    elif pe.after_next_event:
        message = (f"the peak at {format_si(pe.time, 's')} after the event lies beyond the next "
                   f"event at {format_si(ctx.circuit.events[ctx.k + 1], 's')} (continued "
                   f"waveform)")
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


# ------------------------------------------------------------------------------- energy
def _source_magnitudes(circuit) -> tuple[float, float]:
    """(largest independent voltage source value in V, largest current source value in A)."""
    volts, amps = [0.0], [0.0]
    for p in circuit.parts:
        if p.kind in (VOLTAGE_SOURCE, CURRENT_SOURCE):
            mags = [abs(p.value or 0.0)] + [abs(v) for _, v in p.steps]
            (volts if p.kind == VOLTAGE_SOURCE else amps).extend(mags)
    return max(volts), max(amps)


def _noise_energy(ctx: "CheckContext") -> float:
    """R_min I_f^2 T in J: what rounding noise dissipates, with R_min the circuit's smallest
    resistance, I_f = ``tol.CURRENT_NOISE`` times its current scale V_s / R_min + I_s (largest
    source voltage and current) and T the interval's τ scale (a tenth of the exact span)."""
    resistances = [abs(p.value) for p in ctx.circuit.parts if p.kind == RESISTOR and p.value]
    resistances += [abs(r) for p in ctx.circuit.parts if p.kind == SWITCH
                    for r in (p.on_resistance, p.off_resistance) if r]
    if not resistances:
        return 0.0
    v_s, i_s = _source_magnitudes(ctx.circuit)
    r_min = min(resistances)
    noise = tol.CURRENT_NOISE * (v_s / r_min + i_s)
    start, end = ctx.exact.span(ctx.k)
    return r_min * noise ** 2 * (end - start) / 10.0


def engine_energy_floor(ctx: "CheckContext", ee, part_name: str) -> float:
    """The floor (J) of the two engines' energies of one part: ``energy_floor`` and the
    numerical engine's noise on an energy *above* a steady dissipation p_inf,
    ``tol.ENGINE_FLOOR`` of p_inf over the interval's τ scale (a tenth of the exact span): its
    integrated i^2 carries relative errors of about its tolerance on the whole current."""
    start, end = ctx.exact.span(ctx.k)
    steady = tol.ENGINE_FLOOR * abs(ee.steady_power or 0.0) * (end - start) / 10.0
    return max(energy_floor(ctx, ee.energy, part_name), steady)


def energy_floor(ctx: "CheckContext", value: float | None, part_name: str | None = None) -> float:
    """The absolute floor in J below which two energies of one part compare as equal: small
    against the energy itself (``tol.ENERGY_FLOOR`` of it), or the rounding noise where the
    energy is at the noise (``_noise_energy``), and for an ideal closed switch, whose only
    dissipation is a jump loss computed as a difference of stored energies, that difference's
    rounding (``tol.JUMP_ENERGY_NOISE`` of the energy stored at the event).  Never a scale of
    the part's peak current times the interval's span: a nanosecond spike of 0.1 A beside a
    10 ms tail made such a floor larger than the energy."""
    floors = [tol.ENERGY_FLOOR * (0.0 if value is None else abs(value)), _noise_energy(ctx)]
    if part_name is not None and _ideal_switch(ctx, part_name):
        floors += [tol.JUMP_ENERGY_NOISE * v for v in _stored_at_event(ctx)]
    return max(floors + [1e-300])


def _ideal_switch(ctx: "CheckContext", part_name: str) -> bool:
    """Whether the part is a switch with no resistance in interval k (closed and ideal)."""
    part = ctx.circuit.part(part_name)
    return (part.kind == SWITCH and part.is_closed(ctx.circuit.events[ctx.k])
            and not part.on_resistance)


def _stored_at_event(ctx: "CheckContext") -> list[float]:
    """Stored energies (J) of every capacitor and inductor just before and after event k: the
    scale of an ideal switch's only dissipation, the jump loss, which cannot exceed them."""
    jump = ctx.exact.jump(ctx.k)
    return [abs(v) for v in list(jump.stored_before.values()) + list(jump.stored_after.values())]


def compare_energy(exp: Expectation, fe: Features, ctx: "CheckContext") -> FieldResult:
    """Energy dissipated in a part over the interval continued until settled."""
    want = exp.energy
    ee = ctx.exact.energy(want.part, ctx.k, want.until)
    en = _call(ctx.numeric, "energy", want.part, ctx.k, want.until)
    floor = energy_floor(ctx, ee.energy, want.part)
    verdict, message = PASS, ""
    numeric = None if en is None else en.energy
    if en is not None and not tol.agree(ee.energy, numeric, tol.ENERGY_ENGINE_RELATIVE,
                                        engine_energy_floor(ctx, ee, want.part)):
        verdict, message = ENGINES_DISAGREE, engine_message(ee.energy, numeric, "J")
    elif ee.energy is None:
        verdict = MISMATCH if want.value is not None else PASS
        message = "the response does not settle, so the dissipated energy is unbounded"
    elif want.value is not None and not tol.agree(want.value, ee.energy, hand_relative(exp, ctx),
                                                  floor):
        verdict = MISMATCH
        message = energy_hint(want.value, ee, ctx)
    notes = energy_notes(ee, ctx, want.part)
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


def energy_hint(hand: float, ee, ctx: "CheckContext") -> str:
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


def energy_notes(ee, ctx: "CheckContext", part: str) -> list[str]:
    notes = []
    if ee.jump:
        notes.append(f"includes {format_si(ee.jump, 'J')} lost in the jump at the event "
                     f"(impulse through {part})")
    if ee.steady_power and ee.energy is not None and ee.steady_power > 0:
        notes.append(f"plus a steady {format_si(ee.steady_power, 'W')} for as long as the "
                     f"sources are held (not included)")
    return notes


# ------------------------------------------------------------------------------- dominant τ
def dominant_json(dv: DominantTau | None) -> dict[str, Any] | None:
    """The JSON form of a ``DominantTau`` (None stays None)."""
    if dv is None:
        return None
    out = {"tau": dv.tau, "terms": dict(dv.terms), "modes_sum": dv.modes_sum,
           "deviation": dv.deviation, "t50": dv.t50, "t50_estimate": dv.t50_estimate,
           "t50_error": dv.t50_error}
    if dv.weak:
        out["weak"] = list(dv.weak)
    return out


def compare_dominant(exp: Expectation, fe: Features, ctx: "CheckContext") -> FieldResult:
    """Hand dominant τ vs the sum of zero-value time constants, and the closed form's estimate
    vs the numerical engine's own (``harness.simulate.dominant``): τ within
    ``tol.DOMINANT_ENGINE``; where the swing is above ``tol.WAVEFORM_SWING_FLOOR`` of the
    probe's scale, the deviation within the whole-waveform tolerance and the 50 % time within
    the crossing tolerance (``dominant_engine_problems``)."""
    dv = ctx.exact.dominant(ctx.probe, ctx.k)
    dn = _call(ctx.numeric, "dominant", ctx.probe, ctx.k)
    hand = exp.hand["dominant_tau"]
    verdict, message = PASS, ""
    numeric = None if dn is None else dn.tau
    problems = [] if dn is None or ctx.unjudged else dominant_engine_problems(dv, dn, fe, ctx)
    if problems:
        verdict = ENGINES_DISAGREE
        message = "; ".join(problems) + ": an engine problem, not a hand-calculation error"
    elif not tol.agree(hand, dv.tau, hand_relative(exp, ctx)):
        verdict = MISMATCH
        terms = ", ".join(f"{p} {format_si(t, 's')}" for p, t in dv.terms.items())
        message = (f"hand {format_si(hand, 's')}, the zero-value time constants sum to "
                   f"{format_si(dv.tau, 's')} ({terms}); each is R_th·C (L/R_th) with the "
                   f"other capacitors open and the other inductors shorted")
    if dv.deviation is not None:
        message = "; ".join(([message] if message else []) + [dominant_summary(dv)])
    if not problems and weak_note(dv, dn):
        message = "; ".join(([message] if message else []) + [weak_note(dv, dn)])
    extra = dict(dominant_json(dv) or {})
    if dn is not None:
        extra["numeric"] = dominant_json(dn)
    return FieldResult(name="dominant_tau", hand=hand, closed_form=dv.tau, numeric=numeric,
                       verdict=verdict, unit="s", message=message,
                       formula=exp.formulas.get("dominant_tau", ""),
                       tolerance=hand_relative(exp, ctx), extra=extra)


def dominant_engine_problems(dv: DominantTau, dn: DominantTau, fe: Features,
                             ctx: "CheckContext") -> list[str]:
    """Where the engines' dominant-τ estimates disagree (empty when they agree).

    τ: ``tol.DOMINANT_ENGINE`` (relative).  Deviation and 50 % time only where the swing
    s = |x(t_k+) - x_inf| is at least ``tol.WAVEFORM_SWING_FLOOR`` of both the probe's scale
    and the waveform's excursion from x_inf (at most (1 + deviation) s), since both are
    normalised by, or defined from, the swing (a current that starts and ends at 0 has no
    meaningful one-τ curve): the deviations, in units of the swing, within
    ``tol.WAVEFORM_RELATIVE`` absolute or relative (|max|f| - max|g|| <= max|f - g|, so this
    is no stricter than the whole-waveform comparison of the two engines; the relative part
    covers the sampling of the maximum of a ringing waveform, proportional to its
    excursion); the 50 % times by the crossing rule (``_crossing_engines_agree``)."""
    out = []
    plain = tol.agree(dv.tau, dn.tau, tol.DOMINANT_ENGINE)
    if not plain and _with_weak_modes(dv.tau, dn) is None:
        out.append(f"dominant τ: {_engine_pair(dv.tau, dn.tau, 's')}")
    swing = None if fe.after is None or fe.final is None else abs(fe.after - fe.final)
    excursion = 1.0 + (dv.deviation or 0.0)          # >= max |x - x_inf| / swing
    if not swing or swing < tol.WAVEFORM_SWING_FLOOR * max(ctx.scale, excursion * swing):
        return out
    if plain and dv.deviation is not None and dn.deviation is not None and not tol.agree(
            dv.deviation, dn.deviation, tol.WAVEFORM_RELATIVE, tol.WAVEFORM_RELATIVE):
        out.append(f"one-τ curve deviation: the closed form gives {dv.deviation:.6g} of the "
                   f"swing but the numerical engine gives {dn.deviation:.6g}")
    t_k = ctx.circuit.events[ctx.k]
    if dv.tau is not None and dn.tau is not None and \
            not _crossing_engines_agree(dv.t50, dn.t50, ctx, t_k, tau_scale(fe, ctx)):
        out.append(f"50 % time: {_engine_pair(dv.t50, dn.t50, 's')}")
    return out


def _with_weak_modes(closed: float | None, dn: DominantTau) -> tuple[float, ...] | None:
    """The modes (s) the numerical engine observes only weakly (``DominantTau.weak``: a
    storage part reached through a path too faint for that engine to tell from rounding)
    whose time constants, added to its own τ, give the closed form's dominant τ within
    ``tol.DOMINANT_ENGINE``, or None: every such sum is that engine's value as much as its
    own τ is, and a coincidence to 1e-6 is not expected.  (The one-τ deviation is then not
    compared: each engine's is measured against its own τ.)"""
    if closed is None or not dn.weak:
        return None
    base = dn.tau or 0.0
    for size in range(1, len(dn.weak) + 1):
        for subset in itertools.combinations(dn.weak, size):
            total = base + sum(subset)
            if abs(total - closed) <= tol.DOMINANT_ENGINE * max(total, closed):
                return subset
    return None


def weak_note(dv: DominantTau, dn: DominantTau | None) -> str:
    """The note of a dominant τ cross-checked with weakly observed modes, or ""."""
    if dn is None or tol.agree(dv.tau, dn.tau, tol.DOMINANT_ENGINE):
        return ""
    subset = _with_weak_modes(dv.tau, dn)
    if not subset:
        return ""
    faint = ", ".join(format_si(t, "s") for t in subset)
    own = "nothing" if dn.tau is None else format_si(dn.tau, "s")
    return (f"cross-checked as the numerical engine's {own} plus its faintly observed "
            f"mode{'s' if len(subset) > 1 else ''} {faint} (a storage part that reaches the "
            f"probe through a path too weak for that engine to tell from rounding)")


def _engine_pair(closed, numeric, unit: str) -> str:
    def text(v):
        return "none" if v is None else format_si(v, unit)
    return f"the closed form gives {text(closed)} but the numerical engine gives {text(numeric)}"


def dominant_summary(dv: DominantTau) -> str:
    """``one-τ curve within 3.1 % of the swing; 50 % time 7.2 ms vs τ·ln 2 = 6.9 ms (−4 %)``."""
    text = f"a one-τ curve with {format_si(dv.tau, 's')} departs by {dv.deviation:.2%} of the swing"
    if dv.t50 is not None and dv.t50_error is not None:
        text += (f"; 50 % time {format_si(dv.t50, 's')} exact vs τ·ln 2 = "
                 f"{format_si(dv.t50_estimate, 's')} ({dv.t50_error:+.1%})")
    return text


# ------------------------------------------------------------------------------- ring, overshoot
def _ring_value(features: Features | None, name: str) -> float | None:
    """f_d (Hz), zeta or Q = 1/(2 zeta) of the slowest visible complex pair, or None."""
    if features is None or not features.rings:
        return None
    frequency, zeta = features.rings[0]
    if name == "ring_frequency":
        return frequency
    return zeta if name == "damping" else 1.0 / (2.0 * zeta)


def _ring_values(ctx: "CheckContext", fe: Features, name: str) -> tuple:
    """(closed form, numeric) of a ring field or the overshoot."""
    if name == "overshoot":
        return ctx.exact.overshoot(ctx.probe, ctx.k), _call(ctx.numeric, "overshoot",
                                                              ctx.probe, ctx.k)
    numeric = None if ctx.numeric is None else ctx.numeric.features(ctx.probe, ctx.k)
    if numeric is not None and numeric.order is None:
        return _ring_value(fe, name), _NOT_COMPUTED          # its modes were not computed
    return _ring_value(fe, name), _ring_value(numeric, name)


def _engine_ring_floor(name: str, fe: Features, ctx: "CheckContext",
                       values: tuple) -> float:
    """The floor of a ring field between the engines: 0 for f_d, ζ and Q; for the overshoot
    o = e/s (excursion e beyond x_inf over the step s = x_inf - x(t_k+)), ``tol.ENGINE_FLOOR``
    or the error both carry, δo = δ(1 + o)/s with δ = ``tol.ENGINE_FLOOR`` of the probe's
    scale (the engines' absolute error on e and on s), whichever is larger; no verdict where
    the step is below the probe's noise floor (a pulse that starts and ends at 0: 1e-15 V over
    a 5.5 V excursion made an overshoot of 3e11 against 1e13)."""
    if name != "overshoot":
        return 0.0
    step = abs(fe.final - fe.after) if fe.final is not None and fe.after is not None else 0.0
    if not step >= ctx.noise:
        return math.inf
    largest = max([abs(v) for v in values if isinstance(v, float)], default=0.0)
    return max(tol.ENGINE_FLOOR, tol.ENGINE_FLOOR * ctx.scale * (1.0 + largest) / step)


#: an engine that did not compute a value (never a disagreement)
_NOT_COMPUTED = object()


def compare_ring(exp: Expectation, fe: Features, ctx: "CheckContext", name: str) -> FieldResult:
    """The ring of the probe's slowest visible complex pair (damped frequency, damping ratio,
    Q) or its overshoot (a fraction of the step): hand vs closed form vs numeric; each engine
    from its own modes (the closed form's exact pencil, the numerical engine's own QZ and
    integrated response) and its own waveform (the overshoot)."""
    closed, numeric = _ring_values(ctx, fe, name)
    computed = ctx.numeric is not None and numeric is not _NOT_COMPUTED and not ctx.unjudged
    numeric = None if numeric is _NOT_COMPUTED else numeric
    hand, unit = exp.hand[name], RING_FIELDS[name]
    floor = tol.ENGINE_FLOOR if name == "overshoot" else 0.0
    verdict, message = PASS, ""
    if computed and (closed is None) != (numeric is None) or (
            closed is not None and numeric is not None
            and not tol.agree(closed, numeric, tol.RING_ENGINE_RELATIVE,
                              _engine_ring_floor(name, fe, ctx, (closed, numeric)))):
        verdict, message = ENGINES_DISAGREE, engine_message(closed, numeric, unit)
    elif closed is None:
        verdict = MISMATCH
        message = ("no overshoot is defined: the probe has no step to settle from"
                   if name == "overshoot" else
                   f"the probe shows no decaying complex pair in this interval (order "
                   f"{fe.order}, modes {', '.join(format_si(t, 's') for t in fe.modes) or 'none'})")
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
