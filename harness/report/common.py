"""Formatting shared by the report writers: values with SI prefixes, labels, counts, jumps.

Everything here returns plain (unescaped) text; each writer escapes for its own format.
"""

from __future__ import annotations

import math
from typing import Any, Iterable, Mapping

from .. import tolerances as tol
from ..fieldspec import FIELD_SPEC
from ..outcome import ENGINES_DISAGREE, ERROR, FINDING, MISMATCH, PASS, UNCHECKED, VERDICT_ORDER, \
    CheckResult, FieldResult, FileResult, RunResult
from ..safetext import printable  # noqa: F401  (the writers' one filter of untrusted text)
from ..units import format_apart, format_exact, format_si

#: what each exit code means, for the summary line
EXIT_MEANING = {0: "every check passed",
                1: "a hand value, the engines, a finding or a file with nothing checked need "
                   "review",
                2: "a file could not be analysed"}




def plural(count: int, noun: str) -> str:
    """``1 check`` / ``3 checks``."""
    return f"{count} {noun}{'' if count == 1 else 's'}"


def field_unit(field: FieldResult) -> str:
    """The field's unit symbol; where the comparator left it blank, the declared unit when it
    does not depend on the probe (``fieldspec.FieldSpec.fixed_unit``)."""
    if field.unit:
        return field.unit
    spec = FIELD_SPEC.get(field.name)
    return "" if spec is None else spec.fixed_unit


def field_label(field: FieldResult) -> str:
    """The field's name for tables, saying what a sign-off value means.

    ``crossing`` and ``peak`` times are measured from the event (the check's ``at``):
    ``crossing 2 V rising (time after the event)``, ``peak |x| (at 12 ms after the event)``,
    ``energy in R1 (J)``, ``dominant τ (Σ zero-value τ)``, ``periods to settle (within 1 % of
    the start)``; the classical fields keep their name.
    """
    extra = field.extra or {}
    if field.name == "crossing":
        level = format_exact(extra.get("level"), extra.get("level_unit", ""))
        way = extra.get("direction", "either")
        return (f"crossing {level}{'' if way == 'either' else ' ' + way} "
                f"(time after the event)")
    if field.name == "peak":
        when = extra.get("after_event")
        at = "as t → ∞" if when is None else f"at {time(when)} after the event"
        return f"peak |x| ({at})"
    if field.name == "energy":
        return f"energy in {extra.get('part', '?')}"
    if field.name == "settle_periods" and extra.get("settle_within") is not None:
        return f"periods to settle (within {extra['settle_within'] * 100:.3g} % of the start)"
    spec = FIELD_SPEC.get(field.name)
    return field.name if spec is None else spec.title


def value(x: float | None, unit: str = "") -> str:
    """``format_si`` with 4 significant digits; None as ``—``, non-finite as ``inf``/``nan``."""
    if x is None:
        return "—"
    if not math.isfinite(x):
        return f"{x}"
    return format_si(x, unit, digits=4)


def field_values(field: FieldResult) -> list[str]:
    """The field's hand, closed-form and numeric values as text, side by side.

    Engine values below the field's noise floor (``FieldResult.floor``) print as 0; every value
    gets the digits (4 or more) that keep two values apart that differ beyond the finer of the
    hand and the engine tolerance, so a mismatch never reads ``180 µA`` against ``180 µA``.
    """
    unit = field_unit(field)
    values = [field.hand] + [_noise_to_zero(v, field.floor)
                             for v in (field.closed_form, field.numeric)]
    relative = min(field.tolerance if field.tolerance is not None else tol.HAND_RELATIVE,
                   _engine_relative(field.name))

    def apart(a: float, b: float) -> bool:
        return not tol.agree(a, b, relative, field.floor)

    texts = format_apart([v if v is None or math.isfinite(v) else None for v in values], unit,
                         apart=apart)
    return [text if v is None or math.isfinite(v) else f"{v}" for text, v in zip(texts, values)]


def _engine_relative(name: str) -> float:
    """The field's declared closed form vs numeric tolerance (relative)."""
    spec = FIELD_SPEC.get(name)
    return tol.ENGINE_RELATIVE if spec is None else spec.engine_relative


def _noise_to_zero(x: float | None, floor: float) -> float | None:
    return 0.0 if x is not None and math.isfinite(x) and abs(x) < floor else x


def time(t: float | None) -> str:
    """An event time such as ``1 ms``."""
    return value(t, "s")


def check_label(check: CheckResult) -> str:
    """``#2 node rst at 1 ms``."""
    return f"#{check.index + 1} {check.probe} at {time(check.at)}"


def modes_text(check: CheckResult) -> str:
    """``order 1, τ = 100 ms`` / ``order 2, τ = 10 ms, 1 ms`` / ``order unknown``."""
    order = "order unknown" if check.order is None else f"order {check.order}"
    if not check.modes:
        return order + (", no decaying mode" if check.order == 0 else "")
    rings = "".join(f"; rings at {format_si(f, 'Hz')} (ζ = {z:.4g}, Q = {1 / (2 * z):.4g})"
                    for f, z in check.rings)
    return order + ", τ = " + ", ".join(time(t) for t in check.modes) + rings


def dominant_text(check: CheckResult) -> str:
    """``dominant τ ≈ 300 ms (Σ zero-value τ: C1 100 ms + C2 200 ms); one-τ curve off by 20 % of
    the swing; 50 % at 106 ms vs τ·ln 2 = 208 ms`` or ``""`` for a first-order check."""
    dom = check.dominant
    if not dom or not dom.get("tau"):
        return ""
    terms = " + ".join(f"{p} {time(t)}" for p, t in dict(dom.get("terms", {})).items())
    text = f"dominant τ ≈ {time(dom['tau'])} (Σ zero-value τ: {terms})"
    if dom.get("deviation") is not None:
        text += f"; one-τ curve off by {dom['deviation']:.1%} of the swing"
    if dom.get("t50") is not None and dom.get("t50_estimate") is not None:
        text += f"; 50 % at {time(dom['t50'])} vs τ·ln 2 = {time(dom['t50_estimate'])}"
    return text


def deviation_text(check: CheckResult) -> str:
    """The whole-waveform deviation as a fraction of the swing, or ``—``."""
    if check.trace is None or check.trace.deviation is None:
        return "—"
    return f"{check.trace.deviation:.2g} of the swing"


def tolerance_text(field: FieldResult) -> str:
    """``1 %`` or ``""``."""
    if field.tolerance is None:
        return ""
    return f"{field.tolerance * 100:g} %"


def check_counts(run: RunResult) -> dict[str, int]:
    """Verdict -> number of checks, every verdict present (files without checks not counted)."""
    counts = {v: 0 for v in VERDICT_ORDER}
    for file in run.files:
        for check in file.checks:
            counts[check.verdict] = counts.get(check.verdict, 0) + 1
    return counts


def file_counts(run: RunResult) -> dict[str, int]:
    """Verdict -> number of files, every verdict present."""
    counts = {v: 0 for v in VERDICT_ORDER}
    for file in run.files:
        counts[file.verdict] = counts.get(file.verdict, 0) + 1
    return counts


def summary_line(run: RunResult) -> str:
    """One line: files, checks, counts per verdict and what the exit code means.

    A file that could not be analysed counts as one error (it has no checks to count), and a
    file with nothing to check is named; an error of the run itself (reports not written) is
    what its exit code means when no file failed."""
    files, checks = file_counts(run), check_counts(run)
    n_checks = sum(checks.values())
    errors = checks[ERROR] + sum(1 for f in run.files if f.verdict == ERROR and not f.checks)
    counts = {**checks, ERROR: errors}
    per = ", ".join(f"{counts[v]} {v}" for v in (PASS, MISMATCH, ENGINES_DISAGREE, ERROR))
    file_part = plural(len(run.files), "file")
    if files[ERROR]:
        file_part += f" ({files[ERROR]} could not be analysed)"
    if files[UNCHECKED]:
        file_part += f" ({files[UNCHECKED]} with nothing checked)"
    if files[FINDING]:
        file_part += f" ({files[FINDING]} with findings to review)"
    code = run.exit_code
    meaning = EXIT_MEANING[code] if files[ERROR] or not run.errors else "; ".join(run.errors)
    return (f"{run.verdict.upper()}: {file_part}, {plural(n_checks, 'check')} — {per}; "
            f"exit {code}: {meaning}")


def attention_order(run: RunResult) -> list[int]:
    """Indexes of ``run.files``, the worst verdicts first (collection order within a verdict)."""
    return sorted(range(len(run.files)),
                  key=lambda i: -VERDICT_ORDER.index(run.files[i].verdict))


def shown_fields(check: CheckResult) -> list[FieldResult]:
    """The fields of ``check`` worth a table row: all but those with no hand value and no value
    from either engine (τ of a probe that is not first order, say), which carry nothing."""
    return [f for f in check.fields
            if f.verdict != PASS or any(v is not None for v in (f.hand, f.closed_form, f.numeric))]


#: the words that head a spec'd field failing over the parts' tolerances, before its summary
#: (``spreads.summary``), in every report that lists it under its check
FAILING_SPEC = "spec over the parts' tolerances"


def failing_specs(file: FileResult, check: CheckResult) -> list[tuple[int, Any]]:
    """(index in ``file.spreads``, spread) of each spec'd field of ``check`` that does not pass
    over the parts' tolerances: the check's own fields may all pass while these fail it.
    Matched by the expectation's index the spread carries, never by its words."""
    return [(j, s) for j, s in enumerate(file.spreads)
            if s.index == check.index and s.verdict != PASS]


def field_note(field: FieldResult) -> str:
    """The message of a field that passed, as the check's messages hold it (``crossing: …``),
    or ``""``: such a message is a note, never a reason for the check's verdict."""
    return f"{field.name}: {field.message}" if field.message and field.verdict == PASS else ""


def split_messages(check: CheckResult) -> tuple[list[str], list[str]]:
    """(the check's messages that explain a verdict, the notes of its passing fields)."""
    notes = {field_note(f) for f in check.fields} - {""}
    messages = check_messages(check)
    return [m for m in messages if m not in notes], [m for m in messages if m in notes]


def check_messages(check: CheckResult) -> list[str]:
    """The check's messages followed by the messages of its fields (no duplicates)."""
    out: list[str] = []
    for text in list(check.messages) + [f"{f.name}: {f.message}" for f in check.fields
                                        if f.message]:
        if text and text not in out:
            out.append(text)
    return out


def finding_lines(file: FileResult) -> list[str]:
    """``finding: <text>`` for each finding that fails the file, then ``acknowledged finding:
    <text>`` for each the file acknowledges (harness.findings)."""
    open_ = [f"finding: {f['message']}" for f in file.findings if not f["acknowledged"]]
    known = [f"acknowledged finding: {f['message']}" for f in file.findings if f["acknowledged"]]
    return open_ + known


def jump_lines(file: FileResult) -> list[str]:
    """One sentence per event with something to say: the charge moved and the energy dissipated.

    Reads the JSON-ready ``FileResult.jumps`` dicts tolerantly: ``time`` (s), ``charges``
    (part -> C), ``energy`` (J or None), and optionally ``loops`` and ``warnings`` (lists of text).
    """
    lines = []
    for jump in file.jumps:
        text = jump_text(jump)
        if text:
            lines.append(text)
    return lines


def jump_text(jump: Mapping[str, Any]) -> str:
    """``t = 1 ms: charge C1 -3.3 µC, V1 3.3 µC; dissipated 5.4 µJ (C1 and V1 form a loop)``."""
    charges = _mapping(jump.get("charges"))
    moved = [(k, v) for k, v in charges.items() if v]
    energy = jump.get("energy")
    loops = [str(x) for x in _seq(jump.get("loops"))]
    warnings = [str(x) for x in _seq(jump.get("warnings"))]
    if not moved and not energy and not loops and not warnings:
        return ""
    bits = []
    if moved:
        bits.append("charge " + ", ".join(f"{k} {value(v, 'C')}" for k, v in moved))
    if energy is not None:
        bits.append(f"dissipated {value(energy, 'J')}")
    elif moved:
        bits.append("dissipated energy undefined")
    when = jump.get("time", jump.get("at"))
    text = f"t = {time(when)}: " + "; ".join(bits or ["no charge moved"])
    if loops:
        text += " (" + "; ".join(loops) + ")"
    if warnings:
        text += " — " + "; ".join(warnings)
    return text


def stored_rows(file: FileResult) -> tuple[list[str], list[list[str]]]:
    """The stored-energy table: headers (``event``, then ``P before``/``P after`` per storage
    part) and one row per event, values in J with SI prefixes; ([], []) without storage parts.

    Reads ``stored_before``/``stored_after`` (part -> J) of the JSON-ready jumps.
    """
    parts: list[str] = []
    for jump in file.jumps:
        for name in list(_mapping(jump.get("stored_before"))) + \
                list(_mapping(jump.get("stored_after"))):
            if name not in parts:
                parts.append(name)
    if not parts:
        return [], []
    headers = ["event"] + [f"{p} {side}" for p in parts for side in ("before", "after")]
    rows = []
    for jump in file.jumps:
        before, after = _mapping(jump.get("stored_before")), _mapping(jump.get("stored_after"))
        row = [time(jump.get("time", jump.get("at")))]
        for p in parts:
            row += [_energy(before.get(p)), _energy(after.get(p))]
        rows.append(row)
    return headers, rows


def _energy(x: float | None) -> str:
    """Stored energy in J; rounding noise below 1e-30 J reads as 0."""
    if x is None:
        return "—"
    return value(0.0 if abs(x) < 1e-30 else x, "J")


def _mapping(obj: Any) -> dict[str, float]:
    if isinstance(obj, Mapping):
        return {str(k): float(v) for k, v in obj.items() if isinstance(v, (int, float))}
    return {}


def _seq(obj: Any) -> Iterable:
    if obj is None or isinstance(obj, (str, bytes)):
        return [obj] if obj else []
    return list(obj)
