"""summary.csv is written with the standard library's ``csv`` module; the reference here is
pandas' ``DataFrame.to_csv`` of the same rows (the way the file was written before: a frame of
the rows, text columns through the writer's defusing, ``check`` and ``order`` as nullable
integers).  The two must give the same bytes: for random rows of every kind of cell (hypothesis)
and for real runs of library circuits, a tolerance file and a missing file among them."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from harness.outcome import require_checks
from harness.report import csvout
from harness.runner import run

LIBRARY = "circuits/library"


def _pandas_text(rows: list[dict]) -> str:
    """The reference: pandas' frame of the rows written by ``to_csv``."""
    table = pd.DataFrame(rows, columns=list(csvout.COLUMNS))
    for column in csvout.TEXT_COLUMNS:
        table[column] = table[column].map(csvout._defuse)
    table["check"] = table["check"].astype("Int64")
    table["order"] = table["order"].astype("Int64")
    return table.to_csv(index=False, lineterminator="\n")


_TEXT = st.text(alphabet=st.characters(codec="utf-8", exclude_categories=("Cs",)), max_size=12) \
    | st.sampled_from(["=SUM(A1)", "+1", "-x", "@a", "\tz", 'say "hi", then\nstop', "", "a,b"])
_FLOAT = st.floats(allow_nan=True, allow_infinity=True) | st.sampled_from([0.0, -0.0, 1e16, 1e-7])
_NUMBER = st.one_of(st.none(), st.integers(-10**6, 10**6), _FLOAT)
_ANY = st.one_of(_NUMBER, _TEXT, st.booleans())


@st.composite
def _rows(draw):
    """Rows as the writer builds them: some keys left out (an error file's row), text, numbers
    and missing values, the integer columns whole numbers or missing; a column draws its cells
    from one kind (numbers, text or anything) so that all-number and all-integer columns
    occur."""
    count = draw(st.integers(0, 6))
    kinds = {name: draw(st.sampled_from(["number", "int", "text", "any"]))
             for name in csvout.COLUMNS}
    rows = []
    for _ in range(count):
        row = {}
        for name in csvout.COLUMNS:
            if draw(st.integers(0, 5)) == 0:
                continue                                    # the key is left out
            if name in ("check", "order"):
                row[name] = draw(st.none() | st.integers(1, 99))
            elif name in csvout.TEXT_COLUMNS:
                row[name] = draw(st.none() | _TEXT)
            else:
                row[name] = draw({"number": _NUMBER, "int": st.integers(-9, 9),
                                  "text": _TEXT, "any": _ANY}[kinds[name]])
        rows.append(row)
    return rows


@settings(max_examples=300, deadline=None)
@given(_rows())
def test_the_csv_module_writes_what_pandas_writes(rows):
    assert csvout.text(rows) == _pandas_text(rows)


def test_numpy_scalars_and_non_finite_values_as_pandas_writes_them():
    rows = [{"at": np.float64(0.1), "hand": math.inf, "tolerance": 1, "deviation": None},
            {"at": 2, "hand": -math.inf, "tolerance": 2, "deviation": float("nan")},
            {"at": np.int64(3), "hand": None, "tolerance": np.int64(3)}]
    assert csvout.text(rows) == _pandas_text(rows)


def test_a_library_run_is_written_as_pandas_writes_it():
    """Library circuits with every kind of field, a spec'd one and a file that does not
    exist (its error row): the same bytes as pandas' ``to_csv``."""
    paths = [f"{LIBRARY}/logger/button-debounce.toml", f"{LIBRARY}/periodic/pwm-current-setpoint.toml",
             f"{LIBRARY}/tolerance/soft-start-spread.toml", f"{LIBRARY}/charger/ntc-sense-filter.toml",
             "circuits/no-such-file.toml"]
    result = require_checks(run(paths))
    text = csvout.render(result)
    assert text == _pandas_text(csvout.rows(result))
    assert text.count("\n") == 1 + sum(max(1, sum(len(c.fields) for c in f.checks))
                                       for f in result.files)
