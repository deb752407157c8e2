"""The three-way comparison: hand values against the closed form, the closed form against numerics.

One rule (``tolerances.agree``) decides every comparison.  Hand vs closed form uses the
expectation's tolerance (default 1 %); closed form vs numeric uses ``ENGINE_RELATIVE``.  When the
engines disagree the field is ``engines-disagree`` and the hand value is not blamed; otherwise a
hand value outside tolerance is a ``mismatch`` whose message comes from ``diagnose``.
"""

from __future__ import annotations

import math
from dataclasses import replace
from functools import cached_property

import numpy as np

from . import tolerances as tol
from .compare_signoff import (dominant_json, engine_message, hand_relative, signoff_fields,
                              withheld)
from .diagnose import explain
from .findings import findings
from .model import ACROSS, BETWEEN, FIELDS, NODE, RESISTOR, THROUGH, Circuit, Expectation, Probe
from .outcome import (ENGINES_DISAGREE, FINDING, MISMATCH, PASS, CheckResult, FieldResult,
                      FileResult, Trace, worst)
from .results import Features, Solution
from .schedule import schedule
from .units import format_exact

#: plot and waveform-comparison grid size per check
GRID_POINTS = 400


def direction(probe: Probe, circuit: Circuit) -> str:
    """The probe's reference direction in words (passive sign convention)."""
    if probe.kind == NODE:
        return f"v({probe.targets[0]}) − v({circuit.ground})"
    if probe.kind == BETWEEN:
        return f"v({probe.targets[0]}) − v({probe.targets[1]})"
    part = circuit.part(probe.targets[0])
    if probe.kind == ACROSS:
        return f"v({part.p}) − v({part.n}), + at {part.p}"
    return f"current from {part.p} through {part.name} to {part.n}"


def event_index(circuit: Circuit, at: float) -> int:
    """Index of the event at time ``at`` (the reader guarantees it is one)."""
    events = np.asarray(circuit.events)
    return int(np.argmin(np.abs(events - at)))


def probe_scale(circuit: Circuit, exact: Solution, probe: Probe) -> float:
    """Largest magnitude the probe takes at any event (before, after, final), for tolerance
    floors; a probe that is ~0 at every event (a pulse through a coupling capacitor, a current
    sensed while a capacitor charges) takes its peaks within the intervals as well, so that its
    rounding noise at the events is not judged against its own noise."""
    values = []
    for k in range(len(circuit.events)):
        f = exact.features(probe, k)
        values += [abs(v) for v in (f.before, f.after, f.final) if v is not None]
    scale = max(values, default=0.0)
    if scale <= tol.SCALE_FROM_PEAKS * circuit.largest_source() and hasattr(exact, "peak"):
        for k in range(len(circuit.events)):
            if withheld(exact, k):
                continue
            try:
                magnitude = exact.peak(probe, k).magnitude
            except (ValueError, ArithmeticError, np.linalg.LinAlgError):
                continue
            if magnitude is not None and math.isfinite(magnitude):
                scale = max(scale, abs(magnitude))
    return scale if scale > 0 else circuit.largest_source()


def _engine_ok(name: str, closed: float | None, numeric: float | None, floor: float) -> bool:
    if name == "tau" and closed is None:
        return True  # numeric τ is only compared where the closed form says first order
    return tol.agree(closed, numeric, tol.ENGINE_RELATIVE, floor)


def snap_zero(value: float | None, scale: float) -> float | None:
    """0.0 for a closed-form value that is rounding noise (below ``tol.ZERO_NOISE`` of the scale)."""
    if value is not None and abs(value) < tol.ZERO_NOISE * scale:
        return 0.0
    return value


def below_noise(value: float | None, noise: float) -> float | None:
    """0.0 for a value below the probe's noise floor (``tol.PROBE_NOISE``), else the value."""
    if value is not None and math.isfinite(value) and abs(value) < noise:
        return 0.0
    return value


def compare_field(name: str, exp: Expectation, fe: Features, fn: Features | None,
                  ctx: "CheckContext") -> FieldResult:
    """Verdict and message for one field of one expectation.  Values below the probe's noise
    floor compare as zero; τ is not judged between the engines in a quiet interval."""
    hand = exp.hand.get(name)
    closed = getattr(fe, name)
    if name != "tau":
        closed = below_noise(snap_zero(closed, ctx.scale), ctx.noise)
    numeric = getattr(fn, name) if fn is not None else None
    if name != "tau":
        numeric = below_noise(numeric, ctx.noise)
    if (name == "tau" and ctx.quiet) or (name in ("after", "tau") and ctx.unresolved):
        fn = None
    unit = "s" if name == "tau" else exp.probe.dimension
    relative = hand_relative(exp, ctx)
    floor = 0.0 if name == "tau" else ctx.scale
    verdict, message = PASS, ""
    if fn is not None and not _engine_ok(name, closed, numeric, tol.ENGINE_FLOOR * floor):
        verdict = ENGINES_DISAGREE
        message = engine_message(closed, numeric, unit)
    elif hand is not None and not (closed is not None and
                                   tol.agree(hand, closed, relative, tol.HAND_FLOOR * floor)):
        verdict = MISMATCH
        message = explain(name, hand, exp, fe, ctx)
    return FieldResult(name=name, hand=hand, closed_form=closed, numeric=numeric,
                       verdict=verdict, unit=unit, message=message,
                       formula=exp.formulas.get(name, ""), tolerance=relative,
                       floor=tol.ENGINE_FLOOR * floor)


class CheckContext:
    """What the comparison of one expectation needs to know beyond its own values."""

    def __init__(self, circuit: Circuit, exact: Solution, numeric: Solution | None,
                 probe: Probe, k: int) -> None:
        self.circuit = circuit
        self.exact = exact
        self.numeric = numeric
        self.probe = probe
        self.k = k

    @cached_property
    def scale(self) -> float:
        """The probe's scale (``probe_scale``), at least its noise floor, computed on first
        use."""
        return max(probe_scale(self.circuit, self.exact, self.probe), self.noise)

    @cached_property
    def noise(self) -> float:
        """The probe's noise floor in its unit: ``tol.PROBE_NOISE`` of the circuit's scale."""
        return tol.PROBE_NOISE * _kind_scale(self.circuit, self.probe)

    @cached_property
    def unresolved(self) -> str:
        """Why the numerical engine's values just after event k are not judged, or "": the
        closed form sees a mode in the probe faster than that engine resolves after the event
        (``resolution``: its pulse cannot be made narrow enough there), a limit of that
        engine, not a disagreement."""
        ask = getattr(self.numeric, "resolution", None)
        if ask is None:
            return ""
        fe = self.exact.features(self.probe, self.k)
        limit = ask(self.k)
        fast = [t for t in fe.modes if t < limit]
        if not fast:
            return ""
        return (f"not cross-checked after the event: the closed form's {format_exact(min(fast), 's')}"
                f" mode is faster than the numerical engine resolves here (its narrow pulse "
                f"and fit window reach {format_exact(limit, 's')}: a large capacitor across a "
                f"source, or the event time's own resolution, keeps the pulse wide); the "
                f"closed form's after-value, τ, order, peak, crossing and dominant τ stand "
                f"alone: a limit of the numerical engine")

    @property
    def unjudged(self) -> bool:
        """Whether the interval's dynamics (crossing, peak, dominant τ, ring, order, waveform)
        get no engine verdict: below the noise floor, or unresolved by the numerical engine."""
        return self.quiet or bool(self.unresolved)

    @cached_property
    def quiet(self) -> bool:
        """Whether the probe stays below its noise floor in interval k: its values at the
        event and its closed-form peak (nothing there for the engines to time or fit)."""
        fe = self.exact.features(self.probe, self.k)
        values = [abs(v) for v in (fe.before, fe.after, fe.final) if v is not None]
        if max(values, default=0.0) >= self.noise:
            return False
        if withheld(self.exact, self.k) or not hasattr(self.exact, "peak"):
            return True
        try:
            magnitude = self.exact.peak(self.probe, self.k).magnitude
        except (ValueError, ArithmeticError, np.linalg.LinAlgError):
            return True
        return magnitude is None or not magnitude >= self.noise




def compare_check(circuit: Circuit, exp: Expectation, exact: Solution,
                  numeric: Solution | None) -> CheckResult:
    """Compare one expectation's hand values with both engines; return its CheckResult."""
    k = event_index(circuit, exp.at)
    ctx = CheckContext(circuit, exact, numeric, exp.probe, k)
    fe = exact.features(exp.probe, k)
    fn = numeric.features(exp.probe, k) if numeric is not None else None
    fields = tuple(compare_field(name, exp, fe, fn, ctx) for name in FIELDS)
    fields += tuple(signoff_fields(exp, fe, ctx))
    dominant = None
    if fe.order is not None and fe.order > 1 and hasattr(exact, "dominant"):
        dominant = exact.dominant(exp.probe, k)
    trace = _with_marks(make_trace(ctx, exp, fe), fields, dominant, circuit.events[k],
                       fe.final)
    messages = [f"{f.name}: {f.message}" for f in fields if f.message]
    if numeric is not None and ctx.unresolved:
        messages.append(ctx.unresolved)
    verdicts = [f.verdict for f in fields]
    order = "" if ctx.unjudged else order_problem(fe, fn, ctx)
    if order:
        verdicts.append(ENGINES_DISAGREE)
        messages.append(order)
    if trace.deviation is not None and trace.deviation > tol.WAVEFORM_RELATIVE \
            and not ctx.unjudged:
        verdicts.append(ENGINES_DISAGREE)
        messages.append(f"waveform: the numerical waveform departs from the closed form by "
                        f"{trace.deviation:.2%} of the swing (limit {tol.WAVEFORM_RELATIVE:.1%})")
    return CheckResult(index=exp.index, probe=exp.probe.label, at=circuit.events[k],
                       verdict=worst(verdicts), fields=fields, order=fe.order, modes=fe.modes,
                       rings=fe.rings,
                       messages=tuple(messages) + fe.notes, note=exp.note,
                       direction=direction(exp.probe, circuit), trace=trace,
                       dominant=dominant_json(dominant))


def _kind_scale(circuit: Circuit, probe: Probe) -> float:
    """The circuit's own scale in the probe's unit: the largest source voltage (or source
    current times the largest resistance) for a voltage, V_s / R_min + I_s for a current."""
    from .compare_signoff import _source_magnitudes
    v_s, i_s = _source_magnitudes(circuit)
    res = [abs(p.value) for p in circuit.parts if p.kind == RESISTOR and p.value]
    if probe.kind == THROUGH:
        return v_s / min(res, default=1.0) + i_s
    return max(v_s, i_s * max(res, default=1.0))


def order_problem(fe: Features, fn: Features | None, ctx: CheckContext) -> str:
    """Where the numerical engine's own modes (its QZ and integrated response) see a different
    order than the closed form's: the message, else "".  Not judged for a probe whose values
    are below ``tol.ENGINE_FLOOR`` of the circuit's scale in its unit (its modes are rounding
    noise in either engine; the probe's own values at the event are the measure, since
    ``ctx.scale`` falls back to the largest source for a probe that is zero), where an engine
    has no order, or where the closed form's order lies within the numerical engine's
    ``order_bounds`` (a mode whose amplitude is near the visibility threshold)."""
    if fn is None or fn.order is None or fe.order is None or fe.order == fn.order:
        return ""
    low, high = fn.order_bounds or (fn.order, fn.order)
    if low <= fe.order <= high:
        return ""                 # within the band the numerical engine cannot resolve
    seen_values = [abs(v) for f in (fe, fn) for v in (f.before, f.after, f.final)
                   if v is not None and math.isfinite(v)]
    if max(seen_values, default=0.0) < tol.ENGINE_FLOOR * _kind_scale(ctx.circuit, ctx.probe):
        return ""
    def seen(f: Features) -> str:
        taus = ", ".join(format_exact(t, "s") for t in f.modes) or "no decaying mode"
        return f"order {f.order} ({taus})"
    return (f"order: the closed form sees {seen(fe)} but the numerical engine sees {seen(fn)}: "
            f"an engine problem, not a hand-calculation error")


def _with_marks(trace: Trace, fields, dominant, t_k: float, final: float | None) -> Trace:
    """The trace with the crossing/peak marks, the crossing level and the one-τ estimate."""
    marks, levels = [], []
    for f in fields:
        if f.name == "crossing":
            level = f.extra["level"]
            levels.append((f"level {format_exact(level, trace.unit)}", level))
            if f.extra.get("at") is not None:
                marks.append(("crossing", f.extra["at"], f.extra["level"]))
        elif f.name == "peak" and f.extra.get("at") is not None:
            marks.append(("peak", f.extra["at"], f.extra["value"]))
    est_t = est_x = None
    if dominant is not None and dominant.tau and trace.after is not None and final is not None:
        est_t = trace.closed_t
        est_x = final + (trace.after - final) * np.exp(-(est_t - t_k) / dominant.tau)
    return replace(trace, marks=tuple(marks), levels=tuple(levels), estimate_t=est_t,
                   estimate_x=est_x)


def _grid(exact: Solution, k: int) -> np.ndarray:
    start, end = exact.span(k)
    width = end - start
    return start + width * np.linspace(1e-4, 1.0, GRID_POINTS)


def make_trace(ctx: CheckContext, exp: Expectation, fe: Features) -> Trace:
    """Waveforms of the check's interval: closed form, numeric and the hand-predicted curve."""
    t = _grid(ctx.exact, ctx.k)
    closed = np.asarray(ctx.exact.waveform(exp.probe, ctx.k, t), dtype=float)
    numeric_t, numeric_x, deviation = t, np.full_like(t, np.nan), None
    if ctx.numeric is not None:
        numeric_x = np.asarray(ctx.numeric.waveform(exp.probe, ctx.k, t), dtype=float)
        swing = max(abs((fe.after or 0.0) - (fe.final if fe.final is not None else closed[-1])),
                    float(np.ptp(closed)), tol.WAVEFORM_SWING_FLOOR * ctx.scale,
                    ctx.noise / tol.WAVEFORM_RELATIVE, 1e-300)
        deviation = float(np.nanmax(np.abs(numeric_x - closed)) / swing)
    hand_t, hand_x = _hand_curve(exp, fe, t)
    events = ctx.circuit.events
    return Trace(unit=exp.probe.dimension, numeric_t=numeric_t, numeric_x=numeric_x,
                 closed_t=t, closed_x=closed, hand_t=hand_t, hand_x=hand_x,
                 event=events[ctx.k], before=snap_zero(fe.before, ctx.scale),
                 after=snap_zero(fe.after, ctx.scale),
                 deviation=deviation, scale=ctx.scale,
                 next_event=events[ctx.k + 1] if ctx.k + 1 < len(events) else None)


def _hand_curve(exp: Expectation, fe: Features, t: np.ndarray):
    """x∞ + (x(0+) − x∞)·e^(−(t − t_k)/τ) from the hand values, computed ones filling gaps."""
    after = exp.hand.get("after", fe.after)
    final = exp.hand.get("final", fe.final)
    tau = exp.hand.get("tau", fe.tau)
    if after is None or final is None or tau is None or tau <= 0:
        return None, None
    return t, final + (after - final) * np.exp(-(t - exp.at) / tau)


def compare_file(circuit: Circuit, exact: Solution, numeric: Solution | None,
                 cautions: tuple[str, ...] = (), seconds: float = 0.0) -> FileResult:
    """Compare every expectation of a circuit; collect warnings, jumps and cautions."""
    checks = tuple(compare_check(circuit, exp, exact, numeric) for exp in circuit.expectations)
    warnings = list(circuit.warnings) + list(exact.warnings)
    if numeric is not None:
        warnings += [w for w in numeric.warnings if w not in exact.warnings]
    found = findings(circuit, exact, numeric)
    open_findings = [FINDING for f in found if not f.acknowledged]
    probes = list(dict.fromkeys(exp.probe for exp in circuit.expectations))
    return FileResult(file=circuit.source, title=circuit.title,
                      verdict=worst([c.verdict for c in checks] + open_findings), checks=checks,
                      findings=tuple(f.to_json() for f in found),
                      warnings=tuple(warnings), cautions=cautions,
                      jumps=tuple(_jump_json(exact, k) for k in range(len(circuit.events))),
                      seconds=seconds, input_warnings=circuit.warnings,
                      schedule=schedule(circuit, exact, numeric, probes,
                                        [probe_scale(circuit, exact, p) for p in probes]))


def _jump_json(exact: Solution, k: int) -> dict:
    j = exact.jump(k)
    return {"at": j.time, "charges": dict(j.charges), "energy": j.energy,
            "loops": list(j.loops), "stored_before": dict(j.stored_before),
            "stored_after": dict(j.stored_after), "warnings": list(j.warnings),
            "forced": {n: list(pair) for n, pair in j.forced.items()}, "opened": list(j.opened)}
