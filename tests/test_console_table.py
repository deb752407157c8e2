"""The solve tables laid out without tabulate are tabulate's ``simple`` format byte for byte
(tabulate itself is the reference), and anything the layout does not cover goes to tabulate."""

from __future__ import annotations

import random

from tabulate import tabulate as reference

from harness.report.console import simple_table

#: characters of the kind the tables carry (SI prefixes, Greek, arrows, dashes, padding), and
#: some the plain layout must hand to tabulate (wide, combining, control, zero-width)
PLAIN = list("abcXYZ019 .-+=|:()%µΩτΣ°±→∞—–…") + ["  ", " 4.7 kΩ ", ""]
AWKWARD = ["\t", "\n", "漢", "e\u0301", "\u200b", "\x1b[31m", "😀", "\u00ad"]


def _cell(rng: random.Random, awkward: bool) -> str:
    pool = PLAIN + (AWKWARD if awkward else [])
    return "".join(rng.choice(pool) for _ in range(rng.randint(0, 6)))


def _same(rows, headers) -> None:
    want = reference(rows, headers=headers, tablefmt="simple", disable_numparse=True)
    assert simple_table(rows, headers) == want, (rows, headers)


def test_plain_tables_equal_tabulate():
    rng = random.Random(11)
    for _ in range(400):
        cols = rng.randint(1, 6)
        headers = [_cell(rng, False).strip() or "h" for _ in range(cols)]
        rows = [[_cell(rng, False) for _ in range(cols)] for _ in range(rng.randint(1, 5))]
        _same(rows, headers)


def test_awkward_cells_empty_tables_and_non_text_equal_tabulate():
    rng = random.Random(12)
    for _ in range(300):
        cols = rng.randint(1, 4)
        headers = [_cell(rng, True) or "h" for _ in range(cols)]
        rows = [[_cell(rng, True) for _ in range(cols)] for _ in range(rng.randint(0, 4))]
        _same(rows, headers)
    _same([], ["field", "closed form"])
    _same([[None, 1.5, "x"]], ["a", "b", "c"])
    _same([["a", "b"], ["c"]], ["h1", "h2"])


def test_a_solve_table():
    rows = [["after (t = 0+)", "3.3 V", "3.3 V", "3.3 V", "pass"],
            ["crossing 1.65 V falling (time after the event)", "6.93 ms", "6.931 ms",
             "6.931 ms", "pass"],
            ["τ", "10 ms", "10 ms", "—", "pass"]]
    _same(rows, ["field", "hand", "closed form", "numeric", "verdict"])
