"""Console output: what needs attention grouped by file, the one-line summary, the solve table.

Text for a terminal (tabulate's ``simple`` format), fitted to the width and coloured as
``report.style.Style`` says (colour only on a terminal, never when piped unless asked); values
carry SI prefixes.  The solve tables of plain one-line text are laid out here (``simple_table``,
the same bytes as tabulate); tabulate itself, whose import reads its package metadata (~4 ms of
a small ``solve``), is loaded for the rest.
"""

from __future__ import annotations

import unicodedata
from typing import TYPE_CHECKING

from ..messages import worded, worded_file
from ..outcome import PASS, CheckResult, FileResult, RunResult
from . import common

if TYPE_CHECKING:  # imported where a check's text is styled: solve's tables are plain
    from .style import Style

#: widest message column when the width is unknown (output piped, no ``COLUMNS``)
MESSAGE_WIDTH = 60
#: narrowest message column however narrow the terminal
MIN_MESSAGE_WIDTH = 24
_HEADERS = ["check", "field", "hand", "closed form", "numeric", "verdict", "message"]


def tabulate(rows, **options) -> str:
    """``tabulate.tabulate``, imported on first use."""
    from tabulate import tabulate as table
    return table(rows, **options)


def _style(**options) -> Style:
    """A ``report.style.Style`` (the module loads on first use: solve's tables are plain)."""
    from .style import Style
    return Style(**options)


def _one_column(text: str) -> bool:
    """Whether every character of ``text`` is printable and one column wide by any width rule
    tabulate may use (``len``, or ``wcwidth`` where installed): no control, combining, wide
    (East Asian W/F) or zero-width character, none past the general punctuation and symbol
    blocks."""
    if not text.isprintable():
        return False
    return text.isascii() or all(
        c <= "~" or ((c < "\u1100" or "\u2010" <= c < "\u2e00")
                     and unicodedata.east_asian_width(c) not in "WF"
                     and not unicodedata.category(c).startswith("M")) for c in text)


def simple_table(rows: list[list[str]], headers: list[str]) -> str:
    """``tabulate(rows, headers=headers, tablefmt="simple", disable_numparse=True)``, byte for
    byte: each column as wide as its widest stripped cell and at least its header plus 2, cells
    left-aligned, columns 2 spaces apart, a dashed rule under the headers, trailing spaces
    stripped.  Cells that are not one-line plain strings (``_one_column``), or no rows, go to
    tabulate itself."""
    cells = [[c.strip() for c in row] if all(isinstance(c, str) for c in row) else None
             for row in rows]
    if not rows or any(row is None or len(row) != len(headers) for row in cells) or \
            not all(_one_column(c) for row in cells for c in row) or \
            not all(isinstance(h, str) and _one_column(h) for h in headers):
        return tabulate(rows, headers=headers, tablefmt="simple", disable_numparse=True)
    widths = [max(len(h) + 2, *(len(row[i]) for row in cells)) for i, h in enumerate(headers)]
    lines = [headers, ["-" * w for w in widths]] + cells
    return "\n".join("  ".join(c.ljust(w) for c, w in zip(line, widths)).rstrip()
                     for line in lines)


def render_failures(run: RunResult, style: Style | None = None, show_all: bool = False) -> str:
    """Per file that needs attention a heading line (path, title, verdict) and a table of every
    field (or check) that did not pass; ``""`` when all passed.

    Columns: check, field, hand, closed form, numeric, verdict, message (wrapped to the width
    ``style`` gives).  A failing check without a failing field (a check-level message) gets one
    row with field ``—``; a passing field of a failing check that carries a note gets its row
    with verdict pass and the note; a file with nothing to check gets one row saying so.  A file
    that could not be analysed has no rows: its message is on stderr and the summary counts it.
    ``show_all`` lists passing files and checks too, row by row.
    """
    run = worded(run)
    style = style or _style()
    blocks = []
    for file in run.files:
        rows = [["—", "—", "", "", "", file.verdict, text] for text in file.messages]
        for check in file.checks:
            if check.verdict != PASS:
                rows.extend(_failure_rows(check, _spec_rows(file, check), show_all))
            elif show_all:
                rows.extend(_passing_rows(check))
        if rows:
            blocks.append(_file_block(file, rows, style))
    return "\n\n".join(blocks)


def _file_block(file: FileResult, rows: list[list[str]], style: Style) -> str:
    """The file's heading line and its table, the message column fitted to the width; when
    the width leaves the messages too little room they go under their rows, full width."""
    title = f" — {file.title}" if file.title and file.title != file.file else ""
    head = _coloured_tail(wrap(common.printable(f"{file.file}{title}  {file.verdict}"), style),
                          file.verdict, style)
    rows = [[common.printable(c) for c in row] for row in rows]
    # tabulate's simple format: a column is at least its header plus 2, columns 2 apart
    widest = [max(len(h) + 2, *(len(r[i]) for r in rows)) for i, h in enumerate(_HEADERS[:-1])]
    room = MESSAGE_WIDTH if style.width is None else \
        style.width - sum(widest) - 2 * len(widest) - 2
    if style.width is not None and sum(widest) + 2 * len(widest) + 2 > style.width:
        return head + "\n" + _stacked(rows, style)
    messages = [row.pop() for row in rows] if room < MIN_MESSAGE_WIDTH else None
    for row in rows:
        row[5] = style.verdict(row[5])
    headers = _HEADERS if messages is None else _HEADERS[:-1]
    table = tabulate(rows, headers=headers, tablefmt="simple", disable_numparse=True,
                     maxcolwidths=[None] * 6 + [room] * (messages is None)).splitlines()
    if messages is not None:
        under = _style(width=(style.width or MESSAGE_WIDTH) - 4)
        table = table[:2] + [line for row, text in zip(table[2:], messages)
                             for line in [row] + ["  " + t for t in wrap(text, under)
                                                  .splitlines() if t.strip()]]
    return head + "\n" + "\n".join("  " + line for line in table)


def _stacked(rows: list[list[str]], style: Style) -> str:
    """Rows as wrapped lines for a terminal too narrow for the table: ``#1 node x at 0 s ·
    after: hand 0 V, closed form 3.8 V, numeric — → mismatch``, the message under it."""
    out = []
    for check, field, hand, closed, numeric, verdict, message in rows:
        line = wrap(f"{check} · {field}: hand {hand or '—'}, closed form {closed or '—'}, "
                    f"numeric {numeric or '—'} → {verdict}", _style(width=style.width - 2))
        out.append(_coloured_tail(line, verdict, style))
        if message:
            out.append(wrap(message, _style(width=style.width - 4)).replace("\n", "\n  ")
                       .join(("  ", "")))
    return "\n".join("  " + line for text in out for line in text.splitlines())


def _coloured_tail(text: str, verdict: str, style: Style) -> str:
    """``text`` (wrapped, ending in ``verdict``) with that last word coloured."""
    body, _, _ = text.rpartition(verdict)
    return body + style.verdict(verdict)


def _passing_rows(check: CheckResult) -> list[list[str]]:
    label = common.check_label(check)
    return [[label, common.field_label(f), *common.field_values(f), f.verdict,
             common.field_note(f) and f"note: {f.message}"] for f in common.shown_fields(check)]


def _spec_rows(file: FileResult, check: CheckResult) -> list[list[str]]:
    """A row per spec'd field of ``check`` that fails over the parts' tolerances (its figures
    are on the spec line under the table)."""
    return [[common.check_label(check), f"{s.name} spec", "", "", "", s.verdict,
             "outside its limits over the parts' tolerances (its spec line is below)"]
            for _, s in common.failing_specs(file, check)]


def _failure_rows(check: CheckResult, specs: list[list[str]] = (),
                  show_all: bool = False) -> list[list[str]]:
    """The rows of a failing check: its failing fields, its fields with a note (every field
    with ``show_all``), its failing specs, and one ``—`` row for check-level messages or for a
    check that fails for none of these."""
    label = common.check_label(check)
    rows, shown = [], set()
    for field in check.fields:
        note = common.field_note(field)
        if field.verdict == PASS and not note and not show_all:
            continue
        shown |= {field.message, f"{field.name}: {field.message}"}
        message = f"note: {field.message}" if note else field.message
        rows.append([label, common.field_label(field), *common.field_values(field),
                     field.verdict, message])
    rows.extend(specs)
    failing = [r for r in rows if r[5] != PASS]
    extra = [m for m in check.messages if m not in shown]
    if extra or not failing:
        rows.append([label, "—", "", "", "", check.verdict, "; ".join(extra) or check.note])
    return rows


def render_passes(run: RunResult) -> str:
    """One line summarising the passes not listed: ``120 checks passed (36 files with every
    check passing); --all lists them``; ``""`` when nothing passed."""
    files = [f for f in run.files if f.verdict == PASS]
    checks = sum(1 for f in run.files for c in f.checks if c.verdict == PASS)
    if not checks:
        return ""
    return (f"{common.plural(checks, 'check')} passed ({common.plural(len(files), 'file')} "
            f"with every check passing); --all lists them")


def render_findings(run: RunResult) -> str:
    """``finding: <file>: <text>`` for every file's findings (acknowledged ones marked);
    ``""`` when there are none."""
    lines = [f"{line.split(': ', 1)[0]}: {file.file}: {line.split(': ', 1)[1]}"
             for file in run.files for line in common.finding_lines(file)]
    return common.printable("\n".join(lines))


def render_warnings(run: RunResult) -> str:
    """``warning: <file>: <text>`` for every file's warnings, each once per file; ``""`` when
    there are none."""
    run = worded(run)
    lines = []
    for file in run.files:
        lines += [f"warning: {text}" if text.startswith(f"{file.file}:")
                  else f"warning: {file.file}: {text}" for text in dict.fromkeys(file.warnings)]
    return common.printable("\n".join(lines))


def render_summary(run: RunResult, style: Style | None = None) -> str:
    """One line: number of files and checks, counts per verdict, the exit code and its meaning;
    the leading verdict coloured where ``style`` colours."""
    style = style or _style()
    line = wrap(common.printable(common.summary_line(run)), style)
    head, _, rest = line.partition(":")
    return f"{style.verdict(head, run.verdict)}:{rest}"


def wrap(text: str, style: Style) -> str:
    """Each line of ``text`` wrapped to ``style.width`` (continuations indented two spaces);
    ``text`` as it is when the width is unknown."""
    if style.width is None or not text:
        return text
    import textwrap
    return "\n".join(textwrap.fill(line, style.width, subsequent_indent="  ",
                                    break_on_hyphens=False) or line
                      for line in text.splitlines())


def render_solve(file_result: FileResult) -> str:
    """The full per-file table ``tauproof solve`` prints: every check's fields, both engines.

    A header (title, file, warnings, errors, cautions, jumps), then per check its label, the
    probe's reference direction, order and visible modes, and a table of
    field / hand / closed form / numeric / verdict (the hand column only when a hand value exists).
    """
    file_result = worded_file(file_result)
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
                simple_table(rows, headers)]
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
    return simple_table(rows, headers)
