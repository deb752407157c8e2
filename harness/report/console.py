"""Console output: the compact table of what did not pass, the one-line summary, the solve table.

Plain text for a terminal (tabulate's ``simple`` format); values carry SI prefixes.
"""

from __future__ import annotations

from tabulate import tabulate

from ..outcome import PASS, CheckResult, FileResult, RunResult
from . import common

#: widest message column before tabulate wraps it
MESSAGE_WIDTH = 60


def render_failures(run: RunResult) -> str:
    """A table of every field (or check, or file) that did not pass; ``""`` when all passed.

    Columns: file, check, field, hand, closed form, numeric, verdict, message.  A failing check
    without a failing field (a check-level message) gets one row with field ``—``; a passing
    field of a failing check that carries a note gets its row with verdict pass and the note; a
    file with nothing to check gets one row saying so.  A file that could not be analysed has no
    row: its message is on stderr and the summary counts it.
    """
    rows = []
    for file in run.files:
        rows += [[file.file, "—", "—", "", "", "", file.verdict, text] for text in file.messages]
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
    rows, shown = [], set()
    for field in check.fields:
        note = common.field_note(field)
        if field.verdict == PASS and not note:
            continue
        shown |= {field.message, f"{field.name}: {field.message}"}
        message = f"note: {field.message}" if note else field.message
        rows.append([file.file, label, common.field_label(field), *common.field_values(field),
                     field.verdict, message])
    failing = [r for r in rows if r[6] != PASS]
    extra = [m for m in check.messages if m not in shown]
    if extra or not failing:
        rows.append([file.file, label, "—", "", "", "", check.verdict,
                     "; ".join(extra) or check.note])
    return rows


def render_findings(run: RunResult) -> str:
    """``finding: <file>: <text>`` for every file's findings (acknowledged ones marked);
    ``""`` when there are none."""
    lines = [f"{line.split(': ', 1)[0]}: {file.file}: {line.split(': ', 1)[1]}"
             for file in run.files for line in common.finding_lines(file)]
    return common.printable("\n".join(lines))


def render_warnings(run: RunResult) -> str:
    """``warning: <file>: <text>`` for every file's warnings, each once per file; ``""`` when
    there are none."""
    lines = []
    for file in run.files:
        lines += [f"warning: {text}" if text.startswith(f"{file.file}:")
                  else f"warning: {file.file}: {text}" for text in dict.fromkeys(file.warnings)]
    return common.printable("\n".join(lines))


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
    out += common.finding_lines(file_result)
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
        hand, closed, numeric = common.field_values(field)
        row = [common.field_label(field)] + ([hand] if with_hand else [])
        row += [closed, numeric, field.verdict]
        rows.append(row)
    headers = ["field"] + (["hand"] if with_hand else []) + ["closed form", "numeric", "verdict"]
    return tabulate(rows, headers=headers, tablefmt="simple", disable_numparse=True)
