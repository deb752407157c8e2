"""summary.csv: one row per field of every check.

Columns (``COLUMNS``): file, title, file_verdict, check (1-based), probe, direction, at (s),
check_verdict, order, modes (s, ``;``-separated, slowest first), deviation (fraction of the
swing), field, unit, hand, closed_form, numeric (SI base units, empty when undefined), verdict,
tolerance (fraction), formula, message, label (what a sign-off field means: crossing level and
direction with its time measured from the event, the part of an energy …).

A file that could not be analysed and has no checks gets one row with an empty ``field``, verdict
``error`` and its errors in ``message``, and a file with nothing to check one row with verdict
``unchecked`` and that message, so every file appears.  Text cells that a spreadsheet
would run as a formula (starting with ``=``, ``+``, ``-``, ``@``, tab or CR) are prefixed with
``'`` (common practice against CSV formula injection); numeric columns are left as numbers.  Read it back with ``read`` (or ``dtype=str`` for the
``TEXT_COLUMNS``), so that a column whose cells are all empty, such as ``formula``, stays text.
"""

from __future__ import annotations

import csv
import io
import math
from typing import TYPE_CHECKING

import numpy as np

from ..messages import worded
from ..outcome import ERROR, RunResult
from . import common
from .context import ReportContext

if TYPE_CHECKING:
    import pandas as pd

COLUMNS = ("file", "title", "file_verdict", "check", "probe", "direction", "at", "check_verdict",
           "order", "modes", "deviation", "field", "unit", "hand", "closed_form", "numeric",
           "verdict", "tolerance", "formula", "message", "label")
TEXT_COLUMNS = _TEXT = ("file", "title", "probe", "direction", "modes", "field", "unit", "formula", "message",
         "label")


def rows(run: RunResult) -> list[dict]:
    """One dict per row (``COLUMNS`` as keys; a key a row has nothing for is left out), the
    run's diagnostics worded, before any cell is formatted."""
    run = worded(run)
    out = []
    for file in run.files:
        head = {"file": file.file, "title": file.title, "file_verdict": file.verdict}
        if not file.checks and file.verdict == ERROR:
            out.append({**head, "verdict": ERROR, "message": "; ".join(file.errors)})
        elif not file.checks and file.messages:
            out.append({**head, "verdict": file.verdict, "message": "; ".join(file.messages)})
        for check in file.checks:
            deviation = None if check.trace is None else check.trace.deviation
            base = {**head, "check": check.index + 1, "probe": check.probe,
                    "direction": check.direction, "at": check.at,
                    "check_verdict": check.verdict, "order": check.order,
                    "modes": ";".join(f"{m:.9g}" for m in check.modes), "deviation": deviation}
            for field in check.fields:
                out.append({**base, "field": field.name, "unit": common.field_unit(field),
                            "hand": _num(field.hand), "closed_form": _num(field.closed_form),
                            "numeric": _num(field.numeric), "verdict": field.verdict,
                            "tolerance": field.tolerance, "formula": field.formula,
                            "message": field.message, "label": common.field_label(field)})
    return out


#: the file this writer writes in the report folder (``harness.report.WRITERS``)
FILE = "summary.csv"


def write(run: RunResult, context: ReportContext) -> str:
    """The report file's text (``harness.report.context``)."""
    return render(run)


def render(run: RunResult) -> str:
    """The CSV text (UTF-8, comma-separated, header row, ``\\n`` line ends, minimal quoting).

    Written with the standard library's ``csv`` module, cell by cell as pandas' ``to_csv`` of a
    frame of these rows writes them (``tests/test_reports.py`` compares the two): a column whose
    values are all numbers is a number column (a float in shortest round-trip form, ``repr``;
    integers as integers while the column holds nothing else, the 1-based ``check`` and
    ``order`` always), a missing value an empty cell, text through ``_defuse``.  Loading pandas
    cost ~0.2 s of every run that writes the reports.
    """
    return text(rows(run))


def text(table: list[dict]) -> str:
    """The CSV text of ``rows`` (``render``)."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(COLUMNS)
    columns = [_column(name, [row.get(name) for row in table]) for name in COLUMNS]
    writer.writerows(zip(*columns))
    return buffer.getvalue()


#: integer columns: an integer or an empty cell (pandas' nullable ``Int64``)
_INTEGER = ("check", "order")


def _column(name: str, values: list) -> list[str]:
    """One column's cells: text columns through ``_defuse``, the others as pandas infers a
    column built from these values (all integers: integers; numbers and missing values: floats;
    anything else: each value's ``str``) and writes it."""
    if name in _TEXT:
        return [str(_defuse(v)) for v in values]
    if name in _INTEGER:
        return ["" if _missing(v) else str(int(v)) for v in values]
    present = [v for v in values if not _missing(v)]
    if present and all(_is_int(v) for v in values):
        return [str(int(v)) for v in values]
    if present and all(_is_number(v) for v in present):
        return ["" if _missing(v) else repr(float(v)) for v in values]
    return ["" if _missing(v) else str(v) for v in values]


def _missing(value) -> bool:
    return value is None or (isinstance(value, float) and math.isnan(value))


def _is_int(value) -> bool:
    return isinstance(value, (int, np.integer)) and not isinstance(value, (bool, np.bool_))


def _is_number(value) -> bool:
    return _is_int(value) or isinstance(value, (float, np.floating))


def read(path) -> pd.DataFrame:
    """summary.csv read back as written: the text columns (``TEXT_COLUMNS``) stay text when
    every cell is empty (a plain ``pandas.read_csv`` makes an all-empty column float)."""
    import pandas as pd
    return pd.read_csv(path, dtype={c: "string" for c in TEXT_COLUMNS}, keep_default_na=False,
                       na_values={c: [""] for c in COLUMNS if c not in TEXT_COLUMNS})


def _num(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(x) else x


def _defuse(cell):
    if not isinstance(cell, str):
        return "" if cell is None or (isinstance(cell, float) and math.isnan(cell)) else cell
    cell = common.printable(cell.replace("\n", " ").replace("\r", " "))
    return "'" + cell if cell[:1] in ("=", "+", "-", "@", "\t") else cell
