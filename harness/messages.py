"""The words: every sentence for a diagnostic (``results.Diagnostic``) and a finding, written once.

Engines return diagnostics as data (a code, the parts and nodes, the values, the time or
interval); this module turns each code into its sentence, one function per code, every number
through ``units.format_si`` (one number style).  The report writers (console, CSV, JSON,
Markdown, HTML, JUnit) render a run through ``worded`` (or one item through ``text``); the
comparator uses ``text`` where its own sentence quotes an engine's diagnostic, and
``harness.findings`` uses ``hazard_text`` and ``open_node_text``.

Layering: this module imports the result contract, the verdict types and ``units`` only (no
engine, comparator, report or application module; ``tests/test_layering.py``).
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any, Callable, Iterable

from . import results as r
from .outcome import CheckResult, FileResult, RunResult
from .units import format_exact, format_si

#: the prefix of a diagnostic the numerical engine reports, in a file's warnings
NUMERIC = "numerical engine: "


def _at(d: r.Diagnostic) -> str:
    return format_si(d.time, "s")


def _names(names: Iterable[str]) -> str:
    return ", ".join(names)


def _floating(d: r.Diagnostic) -> str:
    return (f"from {_at(d)} node(s) {_names(d.nodes)} connect to the rest only through open "
            f"switches or current sources: their common voltage is undefined and taken as 0 V")


def _undamped(d: r.Diagnostic) -> str:
    return f"from {_at(d)} an undamped oscillation at {format_si(d.value('frequency'), 'Hz')} " \
           f"never settles"


def _state_overflow(d: r.Diagnostic) -> str:
    return f"at {_at(d)} the state has grown beyond floating point range; nothing is reported"


def _impulse_derivative(d: r.Diagnostic) -> str:
    return f"at {_at(d)} the jump carries a derivative of an impulse; charges are not reported"


def _impulsive_current(d: r.Diagnostic) -> str:
    return (f"impulsive current through {_names(d.parts)} (capacitors in a loop with "
            f"voltage-type parts or with each other)")


def _impulsive_voltage(d: r.Diagnostic) -> str:
    return (f"impulsive voltage across {_names(d.parts)} (inductors in a cutset with current "
            f"sources or opening switches)")


def _response_overflow(d: r.Diagnostic) -> str:
    return "the response has grown beyond floating-point range"


def _no_decay(d: r.Diagnostic) -> str:
    return f"oscillates without decay at {format_si(d.value('frequency'), 'Hz')}"


def _growing_mode(d: r.Diagnostic) -> str:
    return f"grows without bound (a growing mode, rate {format_si(d.value('rate'), '/s')})"


def _no_dc_path(d: r.Diagnostic) -> str:
    return "grows without bound (charge with no DC path)"


def _interval(d: r.Diagnostic) -> str:
    return f"interval {d.interval} (from t = {_at(d)})"


def _pulse_growth(d: r.Diagnostic) -> str:
    growth = d.value("growth")
    what = (f"grows at {format_si(growth, '/s')}, far faster than any mode of the circuit"
            if growth is not None and math.isfinite(growth)
            else "is singular (its Jacobian is not finite)")
    return (f"{_interval(d)}: the numerical engine's narrow-pulse model {what} (a controlled "
            f"source feeds back the current or voltage of a voltage source, vcvs, ccvs or switch "
            f"with a gain that defeats its regularising resistance): values not reported from "
            f"that interval on")


#: the ``unsettled`` diagnostic's detail -> what the response did
_UNSETTLED = {
    "no-operating-point": "grows without bound (no DC operating point: a source drives a node "
                          "or an inductor loop that has no DC path)",
    "blow-up": "grows without bound (a growing mode)",
    "horizon": "does not settle (an undamped or very slow oscillation)",
}


def _unsettled(d: r.Diagnostic) -> str:
    if d.detail == "no-origin":
        return (f"{_interval(d)}: the response settled by t = {format_si(d.value('end'), 's')}, "
                "but the numerical engine could not establish the DC operating point it "
                "settles to (its DC solve gave no equilibrium within the magnitudes the "
                "circuit's sources can drive); values at and after settling are not reported")
    reason = _UNSETTLED.get(d.detail, "could not be integrated")
    where = f"node {d.nodes[0]!r}" if d.nodes else f"the current of {d.parts[0]!r}"
    return (f"{_interval(d)}: the response {reason} by t = {format_si(d.value('end'), 's')}, "
            f"most visibly at {where}; final values are not reported")


def _work_budget(d: r.Diagnostic) -> str:
    steps, evals = int(d.value("step-budget")), int(d.value("eval-budget"))
    which = (f"for the whole solve: {steps} steps or {evals} evaluations" if d.detail == "solve"
             else f"per interval: {steps} steps or {evals} evaluations, reached in interval "
                  f"{d.interval}")
    return (f"the numerical engine stopped after {int(d.value('steps'))} steps at t = {_at(d)} "
            f"(its work budget {which}): values not reported from that interval on")


def _breakdown(d: r.Diagnostic) -> str:
    return (f"the numerical engine's integrator broke down in interval {d.interval} (from t = "
            f"{_at(d)}; an overflowing or singular regularised system): values not reported "
            f"from that interval on")


def _stopped(d: r.Diagnostic) -> str:
    return f"the integration stopped at t = {_at(d)}; later intervals are not reported"


def _not_reached(d: r.Diagnostic) -> str:
    return ("the integration stopped before this interval" if d.interval is not None
            else "the integration stopped before this event")


def _no_final(d: r.Diagnostic) -> str:
    return f"the response did not settle ({d.detail}): no final value"


def _impulsive_value(d: r.Diagnostic) -> str:
    return (f"at {_at(d)} this probe carries an impulse (a Dirac) driven through "
            f"{_names(d.parts)}: in the ideal circuit it is infinite for an instant, so no "
            f"value just after the event is claimed (see the impulsive-response finding)")


def _sign_change(d: r.Diagnostic) -> str:
    return "the post-pulse response changes sign: more than one mode or an oscillation"


def _flat_response(d: r.Diagnostic) -> str:
    deviation, noise = (format_si(d.value(n), d.detail) for n in ("deviation", "noise"))
    return (f"τ not cross-checked: after the pulse its response stays within {deviation} of "
            f"its final value, inside its own integration error in this probe ({noise}), so a "
            f"flat line fits it as well as any time constant; the closed form's τ stands alone: "
            f"a limit of the numerical engine")


def _undefined_current(d: r.Diagnostic) -> str:
    part, loop = d.parts[0], _names(d.parts)
    given = d.detail.replace(",", ", ") or "the initial values"
    return (f"the current of {part} at 0- (before the first event) is not established: {part} "
            f"is in a loop of capacitors and voltage-type parts ({loop}) whose current the "
            f"resistive network at 0- leaves free, and the initial values given ({given}) are "
            f"not the circuit's DC state, so it was not at rest and how the loop's current "
            f"divides depends on how that state was reached; probe a part outside the loop "
            f"(a resistor feeding it), or give initial values that are the DC state")


def _unresolved_mode(d: r.Diagnostic) -> str:
    tau, reach = format_exact(d.value("tau"), "s"), format_exact(d.value("reach"), "s")
    why = (f"mode is faster than the numerical engine resolves here (its narrow pulse and fit "
           f"window reach {reach}: a large capacitor across a source, or the event time's own "
           f"resolution, keeps the pulse wide)")
    if d.detail == "energy":
        part = d.parts[0]
        return (f"energy of {part} not cross-checked: the closed form's {tau} {why}, and the "
                f"energy of {part} carries that mode in its current; the closed form's energy "
                f"stands alone: a limit of the numerical engine")
    return (f"not cross-checked after the event: the closed form's {tau} {why}; the closed "
            f"form's after-value, τ, order, peak, crossing and dominant τ stand alone: a limit "
            f"of the numerical engine")


def _below_resolution(d: r.Diagnostic) -> str:
    field, _, unit = d.detail.partition(" ")
    closed, numeric, res = (format_si(d.value(n), unit) for n in ("closed", "numeric",
                                                                   "resolution"))
    why = ("twice the change in its value when it re-solves at tighter tolerances, and its "
           "inductor shunts" if d.refined else
           "its integration tolerance on the states the probe reads, and its inductor shunts")
    return (f"{field} not cross-checked: the closed form gives {closed} and the numerical engine "
            f"{numeric}, apart by more than the engines' tolerance but less than the numerical "
            f"engine's resolution of this probe, {res} ({why}); the closed form's value stands "
            f"alone: a limit of the numerical engine")


#: diagnostic code -> its sentence (every code ``harness.results`` declares has one)
CODES: dict[str, Callable[[r.Diagnostic], str]] = {
    r.FLOATING_NODES: _floating, r.UNDAMPED_OSCILLATION: _undamped,
    r.STATE_OVERFLOW: _state_overflow, r.IMPULSE_DERIVATIVE: _impulse_derivative,
    r.IMPULSIVE_CURRENT: _impulsive_current, r.IMPULSIVE_VOLTAGE: _impulsive_voltage,
    r.RESPONSE_OVERFLOW: _response_overflow, r.NO_DECAY: _no_decay,
    r.GROWING_MODE: _growing_mode, r.NO_DC_PATH: _no_dc_path, r.PULSE_GROWTH: _pulse_growth,
    r.UNSETTLED: _unsettled, r.WORK_BUDGET: _work_budget, r.BREAKDOWN: _breakdown,
    r.STOPPED: _stopped, r.NOT_REACHED: _not_reached, r.NO_FINAL: _no_final,
    r.SIGN_CHANGE: _sign_change, r.FLAT_RESPONSE: _flat_response,
    r.UNDEFINED_CURRENT: _undefined_current,
    r.IMPULSIVE_VALUE: _impulsive_value, r.UNRESOLVED_MODE: _unresolved_mode,
    r.BELOW_RESOLUTION: _below_resolution,
}


# ----------------------------------------------------------------------------- findings
def open_node_text(node: str, part: str, side: str, near: str | None) -> str:
    """The finding for a node only ``part``'s ``side`` terminal touches (``near``: the node
    name it was probably meant to be)."""
    hint = f" — did you mean {near!r}?" if near else ""
    return (f"node {node!r} is touched only by {part} (its {side} terminal){hint} An open end "
            f"carries no current, so {part} does nothing; if the node is meant to be open (a "
            f"test point), list it in [settings] acknowledge")


def _currents(h: r.Hazard) -> str:
    names = [p for p in h.parts if f"{p}:before" in h.values]
    return ", ".join(f"{n} ({format_si(h.values[f'{n}:before'], 'A')} → "
                     f"{format_si(h.values[f'{n}:after'], 'A')})" for n in names)


def _jump_hazard(h: r.Hazard) -> str:
    when = format_si(h.time, "s")
    switches = [p for p in h.parts if f"{p}:before" not in h.values]
    across = ", ".join(switches) or "the part that opened"
    loss = h.values.get("energy")
    lost = f" and dissipates {format_si(loss, 'J')} in it" if loss else ""
    if h.code == r.INTERRUPTED:
        return (f"at {when} opening {across} interrupts the current of {_currents(h)} with no "
                f"other path: the voltage across {across} is unbounded in the ideal circuit{lost} "
                f"(an arc or avalanche in a real switch); give the coil a flyback path (diode, "
                f"snubber, clamp) or list {across} in [settings] acknowledge")
    return (f"at {when} opening {across} forces the current of {_currents(h)} to jump: an "
            f"impulse of voltage appears across {across}{lost}; a real switch must absorb it "
            f"(or list {across} in [settings] acknowledge)")


def _growth_hazard(h: r.Hazard) -> str:
    when = format_si(h.time, "s")
    if "e-folding" in h.values:
        active = f" (active parts: {', '.join(h.parts)})" if h.parts else ""
        return (f"from {when} a growing mode (e-folding time "
                f"{format_si(h.values['e-folding'], 's')}) makes the response grow without "
                f"bound{active}")
    source = f"from {', '.join(h.parts)} " if h.parts else ""
    return (f"from {when} the current {source}into node(s) {', '.join(h.nodes)} has no DC path: "
            f"the voltage grows without bound")


def _impulse_hazard(h: r.Hazard) -> str:
    when = format_si(h.time, "s")
    weights = ", ".join(f"{p} ({format_si(h.values[f'{p}:flux'], 'V s')})" for p in h.parts
                        if f"{p}:flux" in h.values)
    return (f"at {when} the event drives an impulse of voltage across {weights}: in the ideal "
            f"circuit a node voltage and a resistor current are infinite for an instant (the "
            f"impulse of a capacitor's current carried on through a resistor, as in a "
            f"differentiator without a series resistor); a real amplifier saturates instead, so "
            f"no value just after the event is claimed for the parts it reaches; add a "
            f"resistance in series with the capacitor (or a capacitor across the feedback "
            f"resistor), or list {h.parts[0]} in [settings] acknowledge")


def hazard_text(h: r.Hazard, numeric_sees: bool | None = None) -> str:
    """The finding for a hazard (``numeric_sees`` False: the numerical engine's own jump does
    not show it, which the sentence says)."""
    said = (_growth_hazard(h) if h.code == r.GROWTH else
            _impulse_hazard(h) if h.code == r.IMPULSIVE else
            _feedback_hazard(h) if h.code == r.POSITIVE_FEEDBACK else _jump_hazard(h))
    if numeric_sees is False:
        said += " (the numerical engine's integration does not show this jump: review it)"
    return said


def _feedback_hazard(h: r.Hazard) -> str:
    amplifier, beta, gain = h.parts[0], h.values["beta"], h.values.get("gain")
    where = ("at high frequency (capacitors shorted, inductors open)" if h.values.get("fast")
             else "at DC (capacitors open, inductors shorted)")
    when = "before t = 0" if h.values.get("pre-step") else f"from {format_si(h.time, 's')}"
    loop = (f"the loop gain A·β = {gain * beta:.4g} exceeds 1" if gain is not None
            else "the loop gain is positive")
    return (f"{amplifier} has positive feedback {where} {when}: with its output driven, "
            f"v(+) − v(−) follows it with β = {beta:+.4g}, so {loop}; the ideal model "
            f"solves the stage as if the feedback were negative, but a real amplifier latches "
            f"at a supply rail (a comparator with hysteresis); check which input the feedback "
            f"goes to, or list {amplifier} in [settings] acknowledge if the stage is meant to "
            f"switch")


#: why an engine gives no periodic steady state (``results.PeriodicValue.reason``)
_PERIODIC_REASONS = {
    r.NO_WINDOW: "the circuit has no repeating window",
    r.GROWS: "the one-period map grows (charge pumped where nothing removes it, or a growing "
             "mode): there is no periodic steady state",
    r.NOT_ESTABLISHED: "it could not be established (an ill-conditioned period map, an "
                       "integration that failed, or an interval of the window whose values "
                       "are withheld)",
}


def periodic_reason(reason: str | None) -> str:
    """Why an engine gives no periodic steady state, from ``PeriodicValue.reason``."""
    return _PERIODIC_REASONS.get(reason, "it could not be established")


# ----------------------------------------------------------------------------- rendering
def text(item: r.Diagnostic | str) -> str:
    """The sentence of a diagnostic (a numerical engine's one prefixed ``NUMERIC``); text
    (the trust guard's notes, the comparator's sentences) as it is."""
    if not isinstance(item, r.Diagnostic):
        return item
    said = CODES[item.code](item)
    return NUMERIC + said if item.engine == "numeric" else said


def _texts(items: Iterable[Any]) -> tuple:
    return tuple(text(i) if isinstance(i, r.Diagnostic) else i for i in items)


def _jump(jump: Any) -> Any:
    if not isinstance(jump, dict) or not any(_has(jump.get(k, ())) for k in ("loops", "warnings")):
        return jump
    return {key: list(_texts(v)) if key in ("loops", "warnings") else v
            for key, v in jump.items()}


def worded_check(check: CheckResult) -> CheckResult:
    """``check`` with its messages' diagnostics replaced by their sentences."""
    return replace(check, messages=_texts(check.messages)) if _has(check.messages) else check


def worded_file(file: FileResult) -> FileResult:
    """``file`` with every diagnostic (warnings, jumps' loops and warnings, checks' messages)
    replaced by its sentence; the same object when it holds none."""
    checks = tuple(worded_check(c) for c in file.checks)
    jumps = tuple(_jump(j) for j in file.jumps)
    if not _has(file.warnings) and _same(checks, file.checks) and _same(jumps, file.jumps):
        return file
    return replace(file, warnings=_texts(file.warnings), checks=checks, jumps=jumps)


def worded(run: RunResult) -> RunResult:
    """``run`` with every diagnostic replaced by its sentence (``worded_file``)."""
    files = tuple(worded_file(f) for f in run.files)
    return run if _same(files, run.files) else replace(run, files=files)


def _same(new: tuple, old: tuple) -> bool:
    return all(a is b for a, b in zip(new, old))


def _has(items: Iterable[Any]) -> bool:
    return any(isinstance(i, r.Diagnostic) for i in items)
