"""A fast, deterministic subset of the reader fuzzing (tests/benchmarks/fuzz.py) and the corpus
of hand-written bad files in tests/bad/.

The property under test is the product's contract (DESIGN.md "Command line"): every file either
gives a result or an input error naming the file and a part, field or line, never a crash.
"""

from __future__ import annotations

import re
import warnings
from pathlib import Path

import pytest

from harness.cli import main
from tests.benchmarks.fuzz import generate, run_case

BAD = sorted((Path(__file__).parent / "bad").glob("*.toml"))
#: seeds of the fast subset: the first 240 cases of the benchmark's default run (seed 1)
SEEDS = range(1, 241)


@pytest.fixture(scope="module")
def outcomes(tmp_path_factory):
    folder = tmp_path_factory.mktemp("fuzz")
    out = {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        numeric_left = 4  # the numerical engine is slow: run it on the first few that read
        for seed in SEEDS:
            path = folder / f"case{seed}.toml"
            path.write_bytes(generate(seed))
            outcome, detail = run_case(str(path), numeric=False)
            if outcome == "result" and numeric_left:
                numeric_left -= 1
                outcome, detail = run_case(str(path), numeric=True)
            out[seed] = (outcome, detail)
    return out


def test_generator_is_deterministic():
    """The same seed gives the same bytes, so a failing case can be replayed by its seed."""
    assert generate(17) == generate(17) and generate(17) != generate(18)


def test_fuzz_subset_has_no_crash_or_unlocated_error(outcomes):
    """Every fuzz case is a result or an input error naming file and part/field/line."""
    bad = {seed: o for seed, o in outcomes.items() if o[0] not in ("result", "input-error")}
    assert bad == {}


def test_fuzz_subset_reaches_the_engines(outcomes):
    """The subset is not all rejected by the reader: some cases are analysed by the engines."""
    results = [o for o in outcomes.values() if o[0] == "result"]
    assert len(results) >= 10


@pytest.mark.parametrize("path", BAD, ids=[p.stem for p in BAD])
def test_bad_file_exits_two_naming_file_and_location(path, capsys):
    """Each hand-written bad file exits 2 with one message naming the file and where."""
    code = main(["check", str(path), "--no-report", "--closed-form-only"])
    out, err = capsys.readouterr()
    assert code == 2, out
    assert "Traceback" not in err
    lines = [line for line in err.splitlines() if line.startswith("tauproof: ")]
    assert len(lines) == 1, err
    head = lines[0].removeprefix("tauproof: ")
    assert head.startswith(str(path))
    rest = head[len(str(path)):]
    assert re.match(r":\d+:|: (part |expect #|field )", rest), head
