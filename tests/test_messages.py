"""Diagnostics are data; their sentences are written once (``harness.messages``).

The engines return ``results.Diagnostic`` values; every code has one sentence, every number in
it goes through ``units.format_si``; diagnostics are de-duplicated by their data; every report
writer shows the same sentence for the same diagnostic.  The expected texts below are this
project's own wording (no outside reference applies to wording).
"""

from __future__ import annotations

import json

import pytest

from harness import messages, results
from harness.closedform import solve
from harness.outcome import CheckResult, FileResult, RunResult
from harness import report
from harness.report import console, csvout, html, jsonout, junit, markdown
from harness.report.context import ReportContext
from harness.results import Diagnostic

from closedform_circuits import C, L, R, S, V, circuit


def test_every_code_has_one_sentence():
    """The contract's codes and the sentences' codes are the same set."""
    assert set(results.DIAGNOSTIC_CODES) == set(messages.CODES)
    assert len(results.DIAGNOSTIC_CODES) == len(set(results.DIAGNOSTIC_CODES))


@pytest.mark.parametrize("code", results.DIAGNOSTIC_CODES)
def test_every_sentence_renders_from_its_data(code):
    """A diagnostic carrying what its code documents renders without error or placeholders."""
    d = Diagnostic(code, 1e-3, 2, parts=("L1",), nodes=("a",),
                   values=(("frequency", 1.5e6), ("rate", 2500.0), ("growth", 3.2e9),
                           ("end", 0.25), ("steps", 1200), ("step-budget", 1000),
                           ("eval-budget", 5000)),
                   detail="horizon")
    said = messages.text(d)
    assert said and "{" not in said and "None" not in said


def test_numbers_go_through_format_si():
    """One number style: SI prefixes with four significant digits, never ``%g`` forms."""
    d = Diagnostic(results.UNSETTLED, 1e-3, 1, nodes=("out",), values=(("end", 0.0123),),
                   detail="horizon", engine="numeric")
    assert messages.text(d) == (
        "numerical engine: interval 1 (from t = 1 ms): the response does not settle (an "
        "undamped or very slow oscillation) by t = 12.3 ms, most visibly at node 'out'; final "
        "values are not reported")
    note = Diagnostic(results.NO_DECAY, values=(("frequency", 1591549.43),))
    assert messages.text(note) == "oscillates without decay at 1.592 MHz"


@pytest.mark.parametrize("refined, why", [
    (False, "its integration tolerance on the states the probe reads"),
    (True, "twice the change in its value when it re-solves at tighter tolerances")])
def test_a_re_solved_resolution_is_a_field_of_the_diagnostic(refined, why):
    """Whether the numerical engine's re-solve established the resolution is the diagnostic's
    ``refined`` field, not a word in its ``detail`` (which names the field and its unit
    alone); the sentence says which bound it is.  Two such diagnostics differ as data."""
    d = Diagnostic(results.BELOW_RESOLUTION, 1e-3, 1, values=(
        ("closed", 2.5), ("numeric", 2.501), ("resolution", 5e-3)), detail="after V",
        refined=refined)
    assert messages.text(d) == (
        "after not cross-checked: the closed form gives 2.5 V and the numerical engine "
        "2.501 V, apart by more than the engines' tolerance but less than the numerical "
        f"engine's resolution of this probe, 5 mV ({why}, and its inductor shunts); the "
        "closed form's value stands alone: a limit of the numerical engine")
    assert d != Diagnostic(d.code, d.time, d.interval, values=d.values, detail=d.detail,
                           refined=not refined)


def test_same_data_is_one_diagnostic():
    """Equality and hashing follow the data (the reporting engine is not part of it)."""
    a = Diagnostic(results.FLOATING_NODES, 1e-3, nodes=("m",))
    b = Diagnostic(results.FLOATING_NODES, 1e-3, nodes=("m",), engine="numeric")
    c = Diagnostic(results.FLOATING_NODES, 2e-3, nodes=("m",))
    assert a == b and hash(a) == hash(b) and a != c
    assert tuple(dict.fromkeys([a, b, c])) == (a, c)


def test_the_closed_form_returns_data():
    """An open switch isolating a node and a jump through a capacitor loop: both diagnostics are
    data naming the node, the parts and the time; the sentences come from harness.messages."""
    sol = solve(circuit(V("V1", "in", "gnd", 3.0), S("S1", "in", "m", False, [(1e-3, 1.0)]),
                        S("S2", "m", "gnd", False), R("R1", "in", "gnd", 1e3),
                        C("C1", "m", "gnd", 1e-6, 0.0)))
    assert all(isinstance(w, Diagnostic) for w in sol.warnings)
    loops = sol.jump(1).loops
    assert loops and loops[0].code == results.IMPULSIVE_CURRENT and loops[0].time == 1e-3
    assert set(loops[0].parts) >= {"C1", "S1"}
    assert messages.text(loops[0]).startswith("impulsive current through ")


def _run(warning: Diagnostic, note: Diagnostic) -> RunResult:
    check = CheckResult(index=0, probe="node out", at=0.0, verdict="mismatch", fields=(),
                        messages=("tau: off", note))
    jump = {"at": 0.0, "loops": [note], "warnings": [warning]}
    return RunResult((FileResult(file="x.toml", title="x", verdict="mismatch", checks=(check,),
                                 warnings=(warning, "a reader warning"), jumps=(jump,)),))


def test_every_writer_shows_the_one_sentence():
    """JSON, console, CSV, Markdown, HTML and JUnit all show the sentence of harness.messages."""
    warning = Diagnostic(results.STOPPED, 2e-3, 1, engine="numeric")
    note = Diagnostic(results.GROWING_MODE, values=(("rate", 2500.0),))
    run = _run(warning, note)
    said, noted = messages.text(warning), messages.text(note)
    assert said == ("numerical engine: the integration stopped at t = 2 ms; later intervals are "
                    "not reported")
    doc = json.loads(jsonout.render(run))
    assert doc["files"][0]["warnings"] == [said, "a reader warning"]
    assert doc["files"][0]["checks"][0]["messages"] == ["tau: off", noted]
    assert doc["files"][0]["jumps"][0] == {"at": 0.0, "loops": [noted], "warnings": [said]}
    assert said in console.render_warnings(run)
    assert noted in console.render_failures(run, show_all=True)
    assert said in console.render_solve(run.files[0])
    assert noted in markdown.render(run) and said in markdown.render(run)
    assert said in html.render(run) and noted in html.render(run)
    assert said in junit.render(run)
    assert "Diagnostic(" not in csvout.render(run)


@pytest.mark.parametrize("writer", report.WRITERS, ids=lambda w: w.FILE)
def test_no_registered_writer_prints_a_diagnostic_raw(writer):
    """Every report-file writer (a new one too) renders diagnostics as sentences."""
    run = _run(Diagnostic(results.STOPPED, 2e-3, 1, engine="numeric"),
               Diagnostic(results.NO_DC_PATH))
    assert "Diagnostic(" not in writer.write(run, ReportContext())


def test_worded_leaves_plain_text_alone():
    """A run without diagnostics comes back as the same object."""
    run = RunResult((FileResult(file="x.toml", title="x", verdict="pass",
                                warnings=("a reader warning",)),))
    assert messages.worded(run) is run


def test_an_inductor_cut_is_a_finding_in_the_same_words():
    """The finding's sentence (harness.messages.hazard_text) names the switch and the current."""
    from harness.findings import findings
    circ = circuit(V("V1", "in", "gnd", 1.0), R("R1", "in", "a", 10.0),
                   S("S1", "a", "b", True, [(1e-3, 0.0)]), L("L1", "b", "gnd", 1e-3))
    found = findings(circ, solve(circ))
    cut = [f for f in found if f.code == results.INTERRUPTED]
    assert cut and cut[0].message.startswith("at 1 ms opening S1 interrupts the current of L1 (")
