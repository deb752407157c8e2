"""Tests of the report writers (harness.report): they parse, contain every check, escape untrusted
text, write atomically, fail clearly, and add the safety note where common practice calls for it.

The fixtures are RunResult objects built directly (the comparator is not needed): waveforms are
first-order exponentials x_inf + (x0 - x_inf)·exp(-(t - t_k)/τ), the textbook step response.
"""

from __future__ import annotations

import json
import os
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from harness import report
from harness.model import CAPACITOR, INDUCTOR, RESISTOR, VOLTAGE_SOURCE, Circuit, Part
from harness.outcome import (ENGINES_DISAGREE, ERROR, MISMATCH, PASS, CheckResult, FieldResult,
                             FileResult, RunResult, Trace, worst)
from harness.report import atomic, cautions, console, csvout, html, jsonout, junit, markdown
from harness.report.cautions import HAZARD_ENERGY, HAZARD_VOLTAGE, cautions_for

EVIL_TITLE = '<script>alert("x")</script> ../../etc/passwd'
EVIL_PART = "R|1`rm -rf`"


def _exp(t, t_k, x0, x_inf, tau):
    return x_inf + (x0 - x_inf) * np.exp(-(t - t_k) / tau)


def _trace(t_k, before, x0, x_inf, tau, unit="V", skew=0.0):
    """A trace over [t_k - tau, t_k + 6 tau]; the numeric curve is the closed one times (1+skew)."""
    t_pre = np.linspace(t_k - tau, t_k, 20, endpoint=False)
    t_post = np.linspace(t_k, t_k + 6 * tau, 200)
    t = np.concatenate([t_pre, t_post])
    x = np.concatenate([np.full(t_pre.shape, before), _exp(t_post, t_k, x0, x_inf, tau)])
    return Trace(unit=unit, numeric_t=t, numeric_x=x * (1 + skew), closed_t=t, closed_x=x,
                 event=t_k, before=before, after=x0, deviation=abs(skew) or 3e-6)


def _field(name, hand, closed, numeric=None, unit="V", verdict=PASS, message="", formula=""):
    if numeric is None:
        numeric = closed + 1e-3 * (abs(closed) + 1e-3) if verdict == ENGINES_DISAGREE else closed
    return FieldResult(name, hand, closed, numeric, verdict, unit=unit, message=message,
                       formula=formula, tolerance=0.01 if hand is not None else None)


def _check(index, probe, at, before, after, final, tau, hands, *, verdicts=None, messages=(),
           direction="", unit="V", skew=0.0):
    verdicts = verdicts or {}
    values = {"before": before, "after": after, "final": final, "tau": tau}
    fields = tuple(_field(name, hands.get(name), values[name], unit="s" if name == "tau" else unit,
                          verdict=verdicts.get(name, PASS),
                          message=f"{name} differs" if verdicts.get(name, PASS) != PASS else "",
                          formula="R1*C1" if name == "tau" and "tau" in hands else "")
                   for name in values)
    verdict = worst(f.verdict for f in fields)
    return CheckResult(index=index, probe=probe, at=at, verdict=verdict, fields=fields, order=1,
                       modes=(tau,), messages=tuple(messages), direction=direction,
                       trace=_trace(at, before, after, final, tau, unit, skew))


def make_run() -> RunResult:
    """Four files: a pass, a mismatch with an engine disagreement, an error, untrusted text."""
    good = FileResult(
        file="circuits/logger/reset.toml", title="Logger board: supervisor reset delay",
        verdict=PASS, seconds=0.4,
        checks=(_check(0, "node rst", 0.0, 0.0, 0.0, 3.3, 0.1,
                       {"before": 0.0, "after": 0.0, "final": 3.3, "tau": 0.1},
                       direction="voltage of rst with respect to gnd"),))
    slips = FileResult(
        file="circuits/review/share.toml", title="Sample-and-hold charge sharing (slips marked)",
        verdict=ENGINES_DISAGREE, warnings=("C2 starts from its given initial value",),
        jumps=({"time": 1e-3, "charges": {"C1": -1.65e-9, "S1": 1.65e-9}, "energy": 1.36e-9,
                "loops": ["C1, C2 and S1 form a loop"]},),
        checks=(_check(0, "across C2", 1e-3, 0.0, 1.65, 1.65, 2e-6,
                       {"before": 0.0, "after": 0.0, "tau": 2e-6},
                       verdicts={"after": MISMATCH}, direction="v(hold) − v(gnd), + at hold",
                       messages=("a jump was missed: C1, C2 and S1 form a loop",)),
                _check(1, "through R1", 0.0, 0.0, 3.3e-3, 0.0, 1e-3, {"after": 3.3e-3},
                       verdicts={"final": ENGINES_DISAGREE}, unit="A", skew=2e-3,
                       direction="current from in through R1 to hold")))
    broken = FileResult(file="circuits/broken.toml", title="", verdict=ERROR,
                        errors=("circuits/broken.toml:4: part R9, field value: cannot read 'abc'",))
    evil = FileResult(
        file="circuits/evil|`x`.toml", title=EVIL_TITLE, verdict=MISMATCH,
        cautions=cautions_for(_rc_circuit(400.0, 10e-6)),
        checks=(_check(0, f"through {EVIL_PART}", 0.0, 0.0, 4e-3, 0.0, 1e-3, {"final": 1e-3},
                       verdicts={"final": MISMATCH}, unit="A",
                       messages=(f"<b>{EVIL_PART}</b> | sees 100 kΩ",)),))
    return RunResult(files=(good, slips, broken, evil))


def _rc_circuit(volts: float, farads: float, name: str = "R1") -> Circuit:
    """A source stepping to ``volts`` charging ``farads`` through a 100 kΩ resistor."""
    return Circuit(title="rc", parts=(
        Part("V1", VOLTAGE_SOURCE, ("in", "gnd"), value=0.0, steps=((0.0, volts),)),
        Part(name, RESISTOR, ("in", "out"), value=100e3),
        Part("C1", CAPACITOR, ("out", "gnd"), value=farads, initial=0.0)))


def _all_checks(run):
    return [(f, c) for f in run.files for c in f.checks]


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    folder = tmp_path_factory.mktemp("reports")
    run = make_run()
    paths = report.write_all(run, folder)
    return run, folder, paths


class _Collector(HTMLParser):
    def __init__(self):
        super().__init__()
        self.stack, self.srcs, self.hrefs, self.text, self.tags = [], [], [], [], []

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        self.tags.append(tag)
        if tag not in ("meta", "img", "br", "link", "input"):
            self.stack.append(tag)
        self.srcs += [attrs["src"]] if "src" in attrs else []
        self.hrefs += [attrs["href"]] if "href" in attrs else []

    def handle_endtag(self, tag):
        assert self.stack and self.stack[-1] == tag, f"unbalanced </{tag}> after {self.stack[-3:]}"
        self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)


def test_write_all_returns_the_five_files_and_one_plot_per_check(written):
    """write_all writes the five report files first, then one SVG per check with a trace."""
    run, folder, paths = written
    files = len(report.REPORT_FILES)
    assert [p.name for p in paths[:files]] == list(report.REPORT_FILES)
    plots = paths[files:]
    assert len(plots) == len(_all_checks(run))
    for p in paths:
        assert p.is_file()
        assert p.resolve().parent in (folder.resolve(), (folder / "plots").resolve())
    for p in plots:          # well-formed XML whose root is an SVG element (xml.etree)
        assert p.suffix == ".svg"
        assert ET.parse(p).getroot().tag == "{http://www.w3.org/2000/svg}svg"


def test_csv_has_one_row_per_field_and_every_check(written):
    """summary.csv read back with pandas has one row per field, all checks, and the error file."""
    run, folder, _ = written
    table = pd.read_csv(folder / "summary.csv", keep_default_na=False)
    assert list(table.columns) == list(csvout.COLUMNS)
    field_rows = table[table["field"] != ""]
    assert len(field_rows) == sum(len(c.fields) for _, c in _all_checks(run))
    got = {(r.file, int(r.check)) for r in field_rows.itertuples()}
    assert got == {(f.file, c.index + 1) for f, c in _all_checks(run)}
    error_rows = table[table["field"] == ""]
    assert list(error_rows["file"]) == ["circuits/broken.toml"]
    assert list(error_rows["verdict"]) == [ERROR]
    tau = field_rows[(field_rows.file == "circuits/logger/reset.toml")
                     & (field_rows.field == "tau")]
    assert float(tau["closed_form"].iloc[0]) == 0.1


def test_csv_defuses_spreadsheet_formulas():
    """A cell starting with '=' gets a leading quote (common practice against CSV injection)."""
    run = RunResult(files=(FileResult(file="a.toml", title="=HYPERLINK(1)", verdict=ERROR,
                                      errors=("x",)),))
    table = pd.read_csv(__import__("io").StringIO(csvout.render(run)), keep_default_na=False)
    assert table["title"].iloc[0] == "'=HYPERLINK(1)"


def test_json_is_the_run_document(written):
    """results.json parses and equals RunResult.to_json() (the --json contract)."""
    run, folder, _ = written
    doc = json.loads((folder / "results.json").read_text(encoding="utf-8"))
    assert doc == json.loads(json.dumps(run.to_json()))
    assert doc["verdict"] == ERROR and len(doc["files"]) == 4


def test_json_turns_non_finite_values_into_null():
    """A NaN or infinite value becomes null so strict JSON parsers read the file."""
    fields = (FieldResult("final", None, float("inf"), float("nan"), PASS),)
    run = RunResult(files=(FileResult("a.toml", "a", PASS, checks=(
        CheckResult(0, "node a", 0.0, PASS, fields),)),))
    doc = json.loads(jsonout.render(run))
    assert doc["files"][0]["checks"][0]["fields"]["final"] == {
        "hand": None, "closed_form": None, "numeric": None, "verdict": PASS}


def test_junit_has_one_testcase_per_check_and_failures_where_not_pass(written):
    """junit.xml parses; one testcase per check, failure/error exactly where the verdict fails."""
    run, folder, _ = written
    root = ET.parse(folder / "junit.xml").getroot()
    assert root.tag == "testsuites"
    suites = root.findall("testsuite")
    assert len(suites) == len(run.files)
    for suite, file in zip(suites, run.files):
        cases = suite.findall("testcase")
        if not file.checks:
            assert [c.get("name") for c in cases] == ["analyse"]
            assert cases[0].find("error") is not None
            continue
        assert len(cases) == len(file.checks)
        for case, check in zip(cases, file.checks):
            bad = case.findall("failure") + case.findall("error")
            assert len(bad) == (0 if check.verdict == PASS else 1)
            if bad:
                assert bad[0].get("type") == check.verdict
                assert check.messages[0] in bad[0].text if check.messages else True
        assert int(suite.get("tests")) == len(cases)
    assert int(root.get("failures")) == sum(c.verdict != PASS for _, c in _all_checks(run))
    assert int(root.get("errors")) == 1


def test_html_parses_holds_every_probe_and_fetches_nothing(written):
    """report.html parses with balanced tags, names every probe, holds one inline SVG plot per
    check and loads nothing (no src, no outside link)."""
    run, folder, _ = written
    page = (folder / "report.html").read_text(encoding="utf-8")
    parser = _Collector()
    parser.feed(page)
    parser.close()
    assert parser.stack == []
    text = " ".join(parser.text)
    for _, check in _all_checks(run):
        assert check.probe in text
        assert check.direction in text
    assert parser.srcs == []
    assert page.count('<div class="plot"') == len(_all_checks(run))
    assert all(href.startswith("#") for href in parser.hrefs)
    assert "script" not in parser.tags and "link" not in parser.tags
    assert "Safety cautions" in text and "dissipated 1.36 nJ" in text


def test_html_escapes_untrusted_text():
    """A title with <script> and a part name with | and backticks appear only as escaped text."""
    page = html.render(make_run())
    assert "<script" not in page and "<b>R|1" not in page
    assert "&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt;" in page
    assert "R|1`rm -rf`" in page


def test_markdown_escapes_untrusted_text():
    """In report.md no raw HTML tag survives and | and ` in names cannot break tables or spans."""
    text = markdown.render(make_run())
    assert "<script" not in text and "<b>" not in text
    assert "&lt;script&gt;" in text
    assert r"R\|1\`rm \-rf\`" in text or r"R\|1\`rm -rf\`" in text
    for line in text.splitlines():
        if line.startswith("| through"):
            assert line.replace("\\|", "").count("|") == 8


def test_plot_names_stay_inside_the_report_folder(written):
    """The plot of a check whose title is '../../etc/passwd' is written inside plots/."""
    run, folder, paths = written
    evil = [p for p in paths if p.name.startswith("004-")]
    assert len(evil) == 1
    assert evil[0].resolve().parent == (folder / "plots").resolve()
    assert ".." not in evil[0].name and "/" not in atomic.safe_name("../../etc")
    assert atomic.safe_name("../../etc") == "etc" and atomic.safe_name("..") == "circuit"


def test_report_set_keeps_the_old_files_when_a_move_fails(tmp_path, monkeypatch):
    """If a move into place fails, every move is undone: the old files are intact, ReportError
    is raised, no hidden staging folder remains."""
    from harness.report import reportset
    run = make_run()
    report.write_all(run, tmp_path, with_plots=False)
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    real, failed = os.replace, []

    def broken(src, dst):
        if Path(dst).name == "junit.xml" and Path(dst).parent == tmp_path and not failed:
            failed.append(dst)
            raise PermissionError(13, "denied")
        real(src, dst)
    monkeypatch.setattr(reportset.os, "replace", broken)
    with pytest.raises(report.ReportError, match="cannot put the reports in place"):
        report.write_all(make_run(), tmp_path, with_plots=False)
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir()} == before


def test_atomic_write_keeps_the_old_files_when_a_serializer_raises(tmp_path, monkeypatch):
    """A serializer that raises (junit, the last) leaves all old files and plots as they were."""
    run = make_run()
    report.write_all(run, tmp_path)
    before = {p.relative_to(tmp_path): p.read_bytes() for p in tmp_path.rglob("*")
              if p.is_file()}

    def boom(*args, **kwargs):
        raise RuntimeError("serializer failed")
    monkeypatch.setattr(junit, "render", boom)
    with pytest.raises(RuntimeError):
        report.write_all(RunResult(files=run.files[:1]), tmp_path)
    after = {p.relative_to(tmp_path): p.read_bytes() for p in tmp_path.rglob("*") if p.is_file()}
    assert after == before


def test_stale_plots_are_removed_and_other_files_kept(tmp_path):
    """A second, smaller run removes the first run's extra plots but not a file of the user's."""
    run = make_run()
    report.write_all(run, tmp_path)
    (tmp_path / "plots" / "notes.txt").write_text("mine")
    paths = report.write_all(RunResult(files=run.files[:1]), tmp_path)
    assert sorted(p.name for p in (tmp_path / "plots").iterdir()) == sorted(
        [p.name for p in paths[len(report.REPORT_FILES):]] + ["notes.txt"])
    assert len(paths) == len(report.REPORT_FILES) + 1


def test_checks_without_trace_or_single_tau_still_report(tmp_path):
    """A higher-order check plots without a hand curve; a check without a trace has no image."""
    fields = (_field("before", None, 0.0), _field("after", None, 0.0), _field("final", None, 1.0),
              _field("tau", None, None, None, unit="s"))
    trace = _trace(0.0, 0.0, 0.0, 1.0, 1e-3)
    higher = CheckResult(0, "node out", 0.0, PASS, fields, order=2, modes=(1e-3, 1e-4),
                         trace=trace)
    bare = CheckResult(1, "node mid", 0.0, PASS, fields, order=2, modes=(1e-3, 1e-4))
    run = RunResult(files=(FileResult("two.toml", "two poles", PASS, checks=(higher, bare)),))
    assert report.plots.hand_curve(higher) is None
    paths = report.write_all(run, tmp_path)
    assert len(paths) == len(report.REPORT_FILES) + 1
    page = (tmp_path / "report.html").read_text(encoding="utf-8")
    assert page.count('<div class="plot"') == 1
    assert "order 2, τ = 1 ms, 100 µs" in page and "node mid" in page


def test_tables_leave_out_fields_that_carry_no_value(tmp_path):
    """A τ with no hand value and no value from either engine (not first order) gets no row in
    the HTML, Markdown and console tables; a field with a value keeps its row."""
    fields = (_field("before", None, 0.0), _field("after", None, 0.0), _field("final", 1.0, 1.0),
              _field("tau", None, None, None, unit="s"))
    check = CheckResult(0, "node out", 0.0, PASS, fields, order=2, modes=(1e-3, 1e-4))
    run = RunResult(files=(FileResult("two.toml", "two poles", PASS, checks=(check,)),))
    report.write_all(run, tmp_path)
    page = (tmp_path / "report.html").read_text(encoding="utf-8")
    text = (tmp_path / "report.md").read_text(encoding="utf-8")
    assert "<td>final</td>" in page and "<td>tau</td>" not in page
    assert "| final |" in text and "| tau |" not in text
    assert [f.name for f in report.common.shown_fields(check)] == ["before", "after", "final"]


def test_unwritable_report_folder_raises_report_error(tmp_path):
    """A report folder that cannot be created raises ReportError, an OSError, naming the folder."""
    blocker = tmp_path / "afile"
    blocker.write_text("x")
    with pytest.raises(report.ReportError) as info:
        report.write_all(make_run(), blocker / "reports", with_plots=False)
    assert isinstance(info.value, OSError)
    assert "reports" in str(info.value)


def test_console_failures_and_summary():
    """The failure table lists each failing field; the error file is left to stderr (printed
    once) and the summary counts it as an error."""
    run = make_run()
    table = console.render_failures(run)
    assert "circuits/broken.toml" not in table and "cannot read" not in table
    assert table.count("mismatch") >= 2 and "engines-disagree" in table
    assert "circuits/logger/reset.toml" not in table
    line = console.render_summary(run)
    assert "\n" not in line
    assert "4 files (1 could not be analysed)" in line
    assert "4 checks — 1 pass, 2 mismatch, 1 engines-disagree, 1 error" in line
    assert "exit 2" in line
    passing = RunResult(files=run.files[:1])
    assert console.render_failures(passing) == ""
    assert "exit 0: every check passed" in console.render_summary(passing)


def test_console_solve_table_lists_every_field():
    """render_solve shows each check's probe, direction, mode and all four fields in SI units."""
    file = make_run().files[1]
    text = console.render_solve(file)
    assert "#1 across C2 at 1 ms" in text and "v(hold) − v(gnd)" in text
    assert "1.65 V" in text and "2 µs" in text and "3.3 mA" in text
    for name in ("before", "after", "final", "tau"):
        assert sum(line.startswith(name + " ") for line in text.splitlines()) == 2
    assert "C1, C2 and S1 form a loop" in text


def test_console_strips_terminal_escapes():
    """Control characters in untrusted text (an ANSI escape) never reach the terminal."""
    run = RunResult(files=(FileResult("a.toml", "x", ERROR, errors=("bad \x1b[2J name",)),))
    assert "\x1b" not in console.render_failures(run)


def test_hand_curve_uses_hand_values_and_falls_back_to_closed_form():
    """The hand curve is x_inf + (x0 - x_inf)·e^(-(t - t_k)/τ), closed form where hand is absent."""
    check = make_run().files[1].checks[0]  # hand after = 0 V, tau = 2 µs; final from closed form
    t, x = report.plots.hand_curve(check)
    expected = 1.65 + (0.0 - 1.65) * np.exp(-(t - 1e-3) / 2e-6)
    np.testing.assert_allclose(x, expected)
    # after one τ the response has covered 63.2 % of the step (common practice: 1 - 1/e)
    assert np.interp(1e-3 + 2e-6, t, x) == pytest.approx(0.632 * 1.65, rel=2e-3)


def test_cautions_for_400_v_and_not_for_3v3():
    """400 V is above the 60 V DC extra-low-voltage limit (common practice); 3.3 V is not."""
    hot = cautions_for(_rc_circuit(400.0, 1e-9))
    assert hot and "400 V" in hot[0]
    joined = " ".join(hot)
    for topic in ("Stored charge after power-off", "Discharge paths", "Pulse ratings",
                  "Insulation", "local electrical codes", "licensed practice"):
        assert topic in joined
    assert cautions_for(_rc_circuit(3.3, 1e-6)) == ()


def test_cautions_speak_of_the_storage_parts_the_circuit_holds():
    """A coil-only circuit at 400 V gets the flyback caution and none about capacitors' stored
    charge; an RC circuit gets no sentence about coils (common practice: a capacitor needs a
    bleeder, a coil a flyback path)."""
    coil = Circuit(title="rl", parts=(
        Part("V1", VOLTAGE_SOURCE, ("in", "gnd"), value=0.0, steps=((0.0, 400.0),)),
        Part("R1", RESISTOR, ("in", "out"), value=100.0),
        Part("L1", INDUCTOR, ("out", "gnd"), value=1e-3)))
    joined = " ".join(cautions_for(coil))
    assert "flyback path" in joined and "capacitors" not in joined and "bleeder" not in joined
    joined = " ".join(cautions_for(_rc_circuit(400.0, 1e-9)))
    assert "bleeder" in joined and "inductor" not in joined and "flyback" not in joined


def test_cautions_threshold_is_above_60_v():
    """Exactly 60 V gets no note and 61 V does (the limit is 'above 60 V DC', common practice)."""
    assert HAZARD_VOLTAGE == 60.0
    assert cautions_for(_rc_circuit(60.0, 1e-9)) == ()
    assert cautions_for(_rc_circuit(61.0, 1e-9)) != ()


def test_cautions_for_stored_energy_at_low_voltage():
    """1 F at 5 V holds ½CV² = 12.5 J (textbook formula) and gets the note; 10 µF does not."""
    assert HAZARD_ENERGY == 1.0
    hot = cautions_for(_rc_circuit(5.0, 1.0))
    assert any("C1" in c and "12.5 J" in c for c in hot)
    assert not any(c.startswith("Hazardous voltage") for c in hot)
    assert cautions_for(_rc_circuit(5.0, 10e-6)) == ()


def test_cautions_use_computed_values_when_given():
    """A computed probe voltage above 60 V and computed stored energies are taken into account."""
    assert cautions_for(_rc_circuit(12.0, 1e-9), voltages=[-120.0]) != ()

    class _Jump:
        time, energy = 1e-3, 2.5
        stored_before, stored_after = {"C1": 3.0}, {"C1": 0.5}
    notes = cautions_for(_rc_circuit(12.0, 1e-9), jumps=[_Jump()])
    assert any("C1 holds 3 J" in n for n in notes)
    assert any("dissipates 2.5 J at t = 1 ms" in n for n in notes)
    assert cautions.DEFERRAL in notes


def test_plot_draws_odd_text_as_it_is():
    """A probe name with '$\\frac$' and '<b>&' is drawn as plain text: the SVG parses and its
    y-axis label reads exactly the name."""
    check = make_run().files[0].checks[0]
    name = "through R$\\frac{$1 <b>&"
    odd = CheckResult(0, name, 0.0, PASS, check.fields, order=1, modes=(0.1,),
                      trace=check.trace)
    root = ET.fromstring(report.plots.plot_check(odd))
    texts = ["".join(t.itertext()) for t in root.iter("{http://www.w3.org/2000/svg}text")]
    assert name in texts and not list(root.iter("{http://www.w3.org/2000/svg}b"))


SPLIT_RAILS = """
title = "split ±40 V rails across a load"
[parts]
VP = { kind = "voltage-source", nodes = ["pos", "gnd"], value = "40 V" }
VN = { kind = "voltage-source", nodes = ["gnd", "neg"], value = "40 V" }
RL = { kind = "resistor", nodes = ["pos", "neg"], value = "10k" }
R1 = { kind = "resistor", nodes = ["pos", "out"], value = "1k" }
C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1u", initial = "0 V" }
[[expect]]
node = "out"
at = "0 s"
final = "40 V"
"""


def test_cautions_judge_the_voltage_between_two_nodes_not_only_to_ground(tmp_path):
    """±40 V rails: no node is above 60 V from ground, but pos and neg are 80 V apart, above
    the 60 V DC extra-low-voltage limit (common practice: the limit applies between any two
    accessible conductors)."""
    from harness.runner import check_file
    path = tmp_path / "rails.toml"
    path.write_text(SPLIT_RAILS, encoding="utf-8")
    result = check_file(str(path), numeric=False)
    assert any(c.startswith("Hazardous voltage") and "80 V" in c for c in result.cautions), \
        result.cautions
