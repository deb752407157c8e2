"""The sign-off over tolerances in the report set: the histogram and the ranked sensitivity
chart per spec'd field (in the HTML page and linked from Markdown), the samples as CSV, the
console line.  Values checked against the first-order formula."""

import csv
import io
import json
import math
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from harness.outcome import RunResult
from harness.report import write_all
from harness.report.spreads import console
from harness.runner import check_file

FILE = Path(__file__).resolve().parent.parent / "circuits" / "library" / "tolerance" / \
    "reset-delay-spread.toml"


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    run = RunResult(files=(check_file(str(FILE), numeric=False),))
    folder = tmp_path_factory.mktemp("reports")
    write_all(run, folder)
    return run, folder


def _facts(path: Path) -> dict:
    """The JSON facts in the chart's SVG ``<metadata>``."""
    return json.loads(ET.parse(path).getroot().find("{http://www.w3.org/2000/svg}metadata").text)


def test_sensitivity_chart_ranks_the_first_order_sensitivities(written):
    """t = RC·ln(V/(V − L)) (first-order step response): ∂ln t/∂ln R = ∂ln t/∂ln C = 1 and
    ∂ln t/∂ln L = −∂ln t/∂ln V = (L/(V − L))/ln(V/(V − L)) = 1.652 at V = 3.3 V, L = 2 V
    (differentiated by hand); the chart lists them largest first."""
    _, folder = written
    facts = _facts(folder / "plots" / "001-spec-sensitivity-s2.svg")      # the crossing
    assert facts["field"] == "crossing"
    x = (2.0 / 1.3) / math.log(3.3 / 1.3)
    values = dict(zip(facts["quantities"], facts["sensitivities"]))
    assert values == pytest.approx({"level": x, "V1": -x, "R1": 1.0, "C1": 1.0}, rel=1e-6)
    assert [abs(v) for v in facts["sensitivities"]] == sorted(
        (abs(v) for v in facts["sensitivities"]), reverse=True)
    tau = _facts(folder / "plots" / "001-spec-sensitivity-s1.svg")    # τ = R·C
    assert dict(zip(tau["quantities"], tau["sensitivities"])) == pytest.approx(
        {"R1": 1.0, "C1": 1.0, "V1": 0.0, "level": 0.0}, abs=1e-6)


def test_html_and_markdown_carry_both_plots(written):
    _, folder = written
    page = (folder / "report.html").read_text()
    assert page.count('aria-label="sensitivities of ') == 2
    assert page.count('aria-label="histogram of ') == 2
    md = (folder / "report.md").read_text()
    assert "(plots/001-spec-sensitivity-s2.svg)" in md and "(plots/001-spec-s2.svg)" in md


def test_samples_csv_and_console_line(written):
    run, folder = written
    rows = list(csv.DictReader(io.StringIO((folder / "spec-samples.csv").read_text())))
    assert len(rows) == 2 * 10000                       # [variation] samples, per spec'd field
    assert {r["field"] for r in rows} == {"tau", "crossing"}
    lines = console(run).splitlines()
    assert len(lines) == 2 and all("nominal" in ln and "yield" in ln for ln in lines)


LOCK = '''title = "lock solenoid pull-in"
[variation]
samples = 400
seed = 7
[parts]
V1 = { kind = "voltage-source", nodes = ["sup", "gnd"], value = "24 V", spread = "5%" }
Sw = { kind = "switch", nodes = ["coil", "gnd"], state = "open", steps = [["0 s", "closed"]] }
Rc = { kind = "resistor", nodes = ["sup", "mid"], value = "48", spread = "K" }
Lc = { kind = "inductor", nodes = ["mid", "coil"], value = "120m", spread = "M" }
Rfw = { kind = "resistor", nodes = ["sup", "coil"], value = "1k" }
[[expect]]
through = "Lc"
crossing = { level = "0.4 A", time = "4.02 ms", direction = "rising" }
spec = { crossing = { max = "5 ms" } }
'''


def test_failing_spec_has_its_row_in_the_table_and_its_limit_on_the_line(tmp_path):
    """A check that fails only over the tolerances names the failing spec in the console table
    (not a bare row), and the spec line gives the limit beside the extremes.  Reference for the
    extremes: the first-order RL rise i(t) = V/R·(1 − e^(−t·R/L)) (common practice), so the
    crossing of 0.4 A is at (L/R)·ln(I∞/(I∞ − 0.4 A)), I∞ = V/R, taken at the eight corners of
    V ±5 %, R ±10 % (IEC 60062 letter K), L ±20 % (letter M)."""
    from harness.report.console import render_failures
    path = tmp_path / "lock.toml"
    path.write_text(LOCK)
    run = RunResult(files=(check_file(str(path), numeric=False),))
    table, line = render_failures(run), console(run)
    assert "crossing spec" in table and "mismatch" in table
    assert "limit ≤ 5 ms" in line and "of 400 samples outside the limits" in line
    times = [(l / r) * math.log((v / r) / (v / r - 0.4)) for v in (22.8, 25.2)
             for r in (43.2, 52.8) for l in (0.096, 0.144)]
    write_all(run, tmp_path / "reports")
    page = (tmp_path / "reports" / "report.html").read_text()
    # the failing check's card links to the spec's section, which carries that id
    assert 'spec over the parts\' tolerances: <a href="#spec-1-1">' in page
    assert '<h3 id="spec-1-1">' in page
    junit = (tmp_path / "reports" / "junit.xml").read_text()
    assert "message=\"spec over the parts' tolerances: crossing: mismatch  limit ≤ 5 ms" in junit
    text = (tmp_path / "reports" / "report.md").read_text()
    assert "- **spec over the parts' tolerances: crossing: mismatch  limit ≤ 5 ms" in text
    spread = run.files[0].spreads[0]
    assert spread.high == pytest.approx(max(times), rel=1e-6)
    assert spread.low == pytest.approx(min(times), rel=1e-6)


TWINS = """
title = "two checks of one probe at one time"
[variation]
samples = 2000
seed = 3
distribution = "uniform"
[parts]
V1 = { kind = "voltage-source", nodes = ["a", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
R1 = { kind = "resistor", nodes = ["a", "b"], value = "1k", spread = "5%" }
C1 = { kind = "capacitor", nodes = ["b", "gnd"], value = "1u", spread = "10%" }
[[expect]]
node = "b"
tau = "1 ms"
spec = { tau = { max = "1.0 ms" } }
[[expect]]
node = "b"
tau = "1 ms"
spec = { tau = { max = "2 ms" } }
"""


def test_two_checks_that_share_their_words_keep_their_own_spreads(tmp_path):
    """Two expectations of one probe at one time: τ = RC = 1 ms nominal, 0.855-1.155 ms over
    R ±5 %, C ±10 % (the textbook worst case of a product, RC(1 ± a)(1 ± b)); about half the
    uniform samples exceed 1.0 ms, none exceeds 2 ms.  Each check takes the verdict of its own
    spread, and the reports list a failing spread under its own check, even where the two
    spreads' words are made the same (the match is by the expectation's index)."""
    import dataclasses
    from harness.report import common
    path = tmp_path / "twins.toml"
    path.write_text(TWINS, encoding="utf-8")
    result = check_file(str(path), numeric=False)
    first, second = result.checks
    assert [s.index for s in result.spreads] == [0, 1]
    assert result.spreads[0].high == pytest.approx(1e-3 * 1.05 * 1.10, rel=1e-9)
    assert (first.verdict, second.verdict) == ("mismatch", "pass")
    same = dataclasses.replace(result, spreads=tuple(
        dataclasses.replace(s, check="node b at 0 s") for s in result.spreads))
    assert common.failing_specs(same, first) == [(0, same.spreads[0])]
    assert common.failing_specs(same, second) == []
    # and the other way round: the failing spread under the second check only
    swapped = dataclasses.replace(same, spreads=tuple(
        dataclasses.replace(s, index=1 - s.index) for s in same.spreads))
    assert common.failing_specs(swapped, first) == []
    assert common.failing_specs(swapped, second) == [(0, swapped.spreads[0])]
