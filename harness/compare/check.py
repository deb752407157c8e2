"""One check and one file: every field of each expectation, the engines' order and waveform,
and the file's findings, warnings, jumps and schedule."""

from __future__ import annotations

import math

from .. import tolerances as tol
from ..findings import findings
from ..model import Circuit, Expectation
from ..outcome import ENGINES_DISAGREE, FINDING, CheckResult, FileResult, worst
from ..results import Features, Solution
from ..schedule import schedule
from ..units import format_exact
from .context import CheckContext, circuit_scale, direction, probe_scale
from .dominant import dominant_json
from .fields import field_results
from .trace import make_trace, with_marks


def compare_check(circuit: Circuit, exp: Expectation, exact: Solution,
                  numeric: Solution | None) -> CheckResult:
    """Compare one expectation's hand values with both engines; return its CheckResult."""
    k = circuit.event_index(exp.at)
    ctx = CheckContext(circuit, exact, numeric, exp.probe, k)
    fe = exact.features(exp.probe, k)
    fn = numeric.features(exp.probe, k) if numeric is not None else None
    fields = field_results(exp, fe, fn, ctx)
    dominant = None
    if fe.order is not None and fe.order > 1:
        dominant = exact.dominant(exp.probe, k)
    trace = with_marks(make_trace(ctx, exp, fe), fields, dominant, circuit.events[k],
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
                       messages=tuple(messages) + fe.notes + ctx.stopped, note=exp.note,
                       direction=direction(exp.probe, circuit), trace=trace,
                       dominant=dominant_json(dominant))


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
    if max(seen_values, default=0.0) < tol.ENGINE_FLOOR * circuit_scale(ctx.circuit, ctx.probe):
        return ""
    def seen(f: Features) -> str:
        taus = ", ".join(format_exact(t, "s") for t in f.modes) or "no decaying mode"
        return f"order {f.order} ({taus})"
    return (f"order: the closed form sees {seen(fe)} but the numerical engine sees {seen(fn)}: "
            f"an engine problem, not a hand-calculation error")


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
