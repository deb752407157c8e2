"""Console output: the compact table of what did not pass, the one-line summary, the solve table.

Plain text for a terminal (tabulate's ``simple`` format); values carry SI prefixes.
"""

from __future__ import annotations

from tabulate import tabulate

from ..outcome import ERROR, PASS, CheckResult, FileResult, RunResult
from . import common

#: widest message column before tabulate wraps it
MESSAGE_WIDTH = 60


def render_failures(run: RunResult) -> str:
    """A table of every field (or check, or file) that did not pass; ``""`` when all passed.

    Columns: file, check, field, hand, closed form, numeric, verdict, message.  A failing check
    without a failing field (a check-level message) gets one row with field ``—``; a file that
    could not be analysed gets one row with its errors.
    """
    rows = []
    for file in run.files:
        if file.verdict == ERROR and not file.checks:
            rows.append([file.file, "—", "—", "", "", "", ERROR, "; ".join(file.errors)])
            continue
        for check in file.checks:
            if check.verdict == PASS:
                continue
            rows.extend(_failure_rows(file, check))
    if not rows:
        return ""
    headers = ["file", "check", "field", "hand", "closed form", "numeric", "verdict", "message"]
    widths = [None, None, None, None, None, None, None, MESSAGE_WIDTH]
    return common.printable(tabulate(rows, headers=headers, tablefmt="simple",
                                     maxcolwidths=widths, disable_numparse=True))


def _failure_rows(file: FileResult, check: CheckResult) -> list[list[str]]:
    label = common.check_label(check)
    rows, names = [], []
    for field in common.failing_fields(check):
        names.append(field.name)
        unit = common.field_unit(field)
        rows.append([file.file, label, common.field_label(field), common.value(field.hand, unit),
                     common.value(field.closed_form, unit), common.value(field.numeric, unit),
                     field.verdict, field.message])
    shown = {r[-1] for r in rows} | {f"{n}: {r[-1]}" for n, r in zip(names, rows)}
    extra = [m for m in check.messages if m not in shown]
    if extra or not rows:
        rows.append([file.file, label, "—", "", "", "", check.verdict,
                     "; ".join(extra) or check.note])
    return rows


def render_summary(run: RunResult) -> str:
    """One line: number of files and checks, counts per verdict, the exit code and its meaning."""
    return common.printable(common.summary_line(run))


def render_solve(file_result: FileResult) -> str:
    """The full per-file table ``tauproof solve`` prints: every check's fields, both engines.

    A header (title, file, warnings, errors, cautions, jumps), then per check its label, the
    probe's reference direction, order and visible modes, and a table of
    field / hand / closed form / numeric / verdict (the hand column only when a hand value exists).
    """
    out = [f"{file_result.title or file_result.file}", f"file: {file_result.file}",
           f"verdict: {file_result.verdict}"]
    for label, items in (("error", file_result.errors), ("warning", file_result.warnings),
                         ("caution", file_result.cautions)):
        out += [f"{label}: {text}" for text in items]
    out += [f"jump {text}" for text in common.jump_lines(file_result)]
    headers, rows = common.stored_rows(file_result)
    if rows:
        out += ["stored energy in each capacitor and inductor, just before and after each event:",
                tabulate(rows, headers=headers, tablefmt="simple", disable_numparse=True)]
    for check in file_result.checks:
        out.append("")
        out.append(_check_heading(check))
        out.append(_check_table(check))
        out += [f"  ! {text}" for text in common.check_messages(check)]
    return common.printable("\n".join(out))


def _check_heading(check: CheckResult) -> str:
    bits = [common.check_label(check)]
    if check.direction:
        bits.append(f"({check.direction})")
    bits.append(f"— {common.modes_text(check)}")
    if check.dominant is not None and check.dominant.get("tau"):
        bits.append(f"— {common.dominant_text(check)}")
    if check.trace is not None and check.trace.deviation is not None:
        bits.append(f"— waveform deviation {common.deviation_text(check)}")
    return " ".join(bits)


def _check_table(check: CheckResult) -> str:
    with_hand = any(f.hand is not None for f in check.fields)
    rows = []
    for field in common.shown_fields(check):
        unit = common.field_unit(field)
        row = [common.field_label(field)]
        if with_hand:
            row.append(common.value(field.hand, unit))
        row += [common.value(field.closed_form, unit), common.value(field.numeric, unit),
                field.verdict]
        rows.append(row)
    headers = ["field"] + (["hand"] if with_hand else []) + ["closed form", "numeric", "verdict"]
    return tabulate(rows, headers=headers, tablefmt="simple", disable_numparse=True)
