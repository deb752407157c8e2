"""summary.csv: one row per field of every check (pandas).

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

import math
from typing import TYPE_CHECKING

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


def frame(run: RunResult) -> pd.DataFrame:
    """The summary as a DataFrame with ``COLUMNS``, one row per field."""
    run = worded(run)
    rows = []
    for file in run.files:
        head = {"file": file.file, "title": file.title, "file_verdict": file.verdict}
        if not file.checks and file.verdict == ERROR:
            rows.append({**head, "verdict": ERROR, "message": "; ".join(file.errors)})
        elif not file.checks and file.messages:
            rows.append({**head, "verdict": file.verdict, "message": "; ".join(file.messages)})
        for check in file.checks:
            deviation = None if check.trace is None else check.trace.deviation
            base = {**head, "check": check.index + 1, "probe": check.probe,
                    "direction": check.direction, "at": check.at,
                    "check_verdict": check.verdict, "order": check.order,
                    "modes": ";".join(f"{m:.9g}" for m in check.modes), "deviation": deviation}
            for field in check.fields:
                rows.append({**base, "field": field.name, "unit": common.field_unit(field),
                             "hand": _num(field.hand), "closed_form": _num(field.closed_form),
                             "numeric": _num(field.numeric), "verdict": field.verdict,
                             "tolerance": field.tolerance, "formula": field.formula,
                             "message": field.message, "label": common.field_label(field)})
    import pandas as pd               # imported when writing: a run without reports skips it
    table = pd.DataFrame(rows, columns=list(COLUMNS))
    for column in _TEXT:
        table[column] = table[column].map(_defuse)
    table["check"] = table["check"].astype("Int64")
    table["order"] = table["order"].astype("Int64")
    return table


#: the file this writer writes in the report folder (``harness.report.WRITERS``)
FILE = "summary.csv"


def write(run: RunResult, context: ReportContext) -> str:
    """The report file's text (``harness.report.context``)."""
    return render(run)


def render(run: RunResult) -> str:
    """The CSV text (UTF-8, comma-separated, header row, floats in shortest round-trip form)."""
    return frame(run).to_csv(index=False, lineterminator="\n")


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
