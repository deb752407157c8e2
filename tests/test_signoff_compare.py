"""Sign-off fields end to end (issue 7): the reader, the comparator's verdicts and messages, the
JSON keys and the reports.  Hand values are textbook RC results, computed in the test (common
practice: x(t) = x∞ + (x0 − x∞)e^(−t/τ), so t = τ·ln((x0 − x∞)/(level − x∞)); ½CV² dissipated
charging a capacitor through any resistance; inrush V/R at t = 0+).
"""

from __future__ import annotations

import json
import math

import pytest

from harness import closedform
from harness.circuitfile import parse_circuit
from harness.compare import compare_file
from harness.errors import InputError
from harness.outcome import ENGINES_DISAGREE, MISMATCH, PASS, RunResult
from harness.report import console, html, jsonout, markdown

HEAD = """
title = "reset"
[parts]
V1 = { kind = "voltage-source", nodes = ["vcc", "gnd"], value = "0 V", steps = [["0 s", "3.3 V"], ["1 s", "0 V"]] }
R1 = { kind = "resistor", nodes = ["vcc", "rst"], value = "100k" }
C1 = { kind = "capacitor", nodes = ["rst", "gnd"], value = "1u" }
"""
TAU = 100e-3
T_2V = TAU * math.log(3.3 / (3.3 - 2.0))      # RC charging to 2.0 V (common practice)


def _check(expect: str, numeric=None):
    circuit = parse_circuit(HEAD + expect)
    exact = closedform.solve(circuit)
    return circuit, compare_file(circuit, exact, numeric(exact) if numeric else None)


def test_reader_parses_crossing_peak_energy_and_dominant_tau():
    """The new keys parse into the model: time in s after the event, direction default either."""
    circuit = parse_circuit(HEAD + """
[[expect]]
node = "rst"
crossing = { level = "2 V", time = "= R1*C1*ln(3.3/1.3)" }
peak = "3.3 V"
energy = { part = "R1", value = "5.445 uJ" }
dominant-tau = "100 ms"
""")
    exp = circuit.expectations[0]
    assert exp.crossing.level == 2.0 and exp.crossing.direction == "either"
    assert exp.crossing.time == pytest.approx(T_2V, rel=1e-12)
    assert exp.crossing.formulas["time"].startswith("=")
    assert exp.hand["peak"] == pytest.approx(3.3) and exp.hand["dominant_tau"] == 0.1
    assert exp.energy.part == "R1" and exp.energy.value == pytest.approx(5.445e-6)


@pytest.mark.parametrize("block,field,words", [
    ('crossing = { level = "2 A" }', "crossing", "amperes"),
    ('crossing = { time = "1 ms" }', "crossing", "level"),
    ('crossing = { level = "2 V", when = "1 ms" }', "crossing", "when"),
    ('energy = { part = "C1" }', "energy", "capacitor"),
    ('energy = { part = "R9" }', "energy", "R9"),
    ('peak = "3 s"', "peak", "seconds"),
    ('dominant-tau = "-1 ms"', "dominant-tau", "greater than zero"),
])
def test_reader_rejects_bad_signoff_fields(block, field, words):
    """Bad sign-off fields are input errors naming the expectation and the field."""
    with pytest.raises(InputError) as info:
        parse_circuit(HEAD + f'\n[[expect]]\nnode = "rst"\n{block}\n')
    assert info.value.part == "expect #1" and info.value.field == field
    assert words in str(info.value)


def test_right_hand_values_pass_and_json_keeps_the_design_keys():
    """Crossing τ·ln(3.3/1.3), inrush V/R and ½CV² pass; before/after/final/tau stay."""
    _, result = _check(f"""
[[expect]]
node = "rst"
crossing = {{ level = "2.0 V", time = "{T_2V}", direction = "rising" }}

[[expect]]
through = "R1"
peak = "{3.3 / 100e3}"
energy = {{ part = "R1", value = "{0.5 * 1e-6 * 3.3 ** 2}" }}
""")
    assert result.verdict == PASS, [c.messages for c in result.checks]
    doc = json.loads(jsonout.render(RunResult(files=(result,))))
    first, second = doc["files"][0]["checks"]
    assert set(first["fields"]) == {"before", "after", "final", "tau", "crossing"}
    assert set(second["fields"]) == {"before", "after", "final", "tau", "peak", "energy"}
    crossing = first["fields"]["crossing"]
    assert crossing["measured_from"] == "event" and crossing["at"] == pytest.approx(T_2V)
    assert {"hand", "closed_form", "numeric", "verdict"} <= set(crossing)
    assert second["fields"]["peak"]["at"] == 0.0
    assert "dominant_tau" not in first          # first order: no dominant estimate


def test_never_crosses_is_a_finding_with_the_final_value():
    """A 4 V level on a 3.3 V charge: "never crosses 4 V: heads to 3.3 V"."""
    _, result = _check('\n[[expect]]\nnode = "rst"\ncrossing = { level = "4 V" }\n')
    field = {f.name: f for f in result.checks[0].fields}["crossing"]
    assert field.verdict == MISMATCH and field.message.startswith("never crosses 4 V: heads to 3.3 V")


def test_wrong_crossing_time_says_what_tau_it_implies():
    """A hand time computed with τ/2 is a mismatch whose message gives the τ·ln(...) value."""
    _, result = _check(f'\n[[expect]]\nnode = "rst"\ncrossing = {{ level = "2 V", time = "{T_2V / 2}" }}\n')
    field = {f.name: f for f in result.checks[0].fields}["crossing"]
    assert field.verdict == MISMATCH
    assert "crosses at 93.16 ms" in field.message and "after the event, not" in field.message
    assert "your time implies τ = 50 ms" in field.message


def test_crossing_time_measured_from_t0_instead_of_the_event_is_explained():
    """At the 1 s power-off the 1 V crossing counted from t = 0 gets the 'from the event' hint."""
    t_fall = TAU * math.log(3.3 / 1.0)           # discharge from ~3.3 V to 1 V (common practice)
    _, result = _check(f'\n[[expect]]\nnode = "rst"\nat = "1 s"\n'
                       f'crossing = {{ level = "1 V", time = "{1 + t_fall}" }}\n')
    field = {f.name: f for f in result.checks[0].fields}["crossing"]
    assert field.verdict == MISMATCH and "measured from the event" in field.message


def test_wrong_energy_and_peak_are_mismatches():
    """Energy given as CV² (twice ½CV²) and the peak given as the final current are mismatches."""
    _, result = _check(f"""
[[expect]]
through = "R1"
peak = "0 A"
energy = {{ part = "R1", value = "{1e-6 * 3.3 ** 2}" }}
""")
    fields = {f.name: f for f in result.checks[0].fields}
    assert fields["energy"].verdict == MISMATCH and fields["peak"].verdict == MISMATCH
    assert "just after the event" in fields["peak"].message


class _Shifted:
    """A stand-in numeric engine: the exact solution with every crossing 1 % later."""

    engine = "numeric"

    def __init__(self, exact):
        self._exact = exact
        self.circuit, self.warnings = exact.circuit, exact.warnings

    def __getattr__(self, name):
        return getattr(self._exact, name)

    def crossing(self, probe, k, level, direction):
        from dataclasses import replace
        got = self._exact.crossing(probe, k, level, direction)
        return replace(got, time=got.time * 1.01)


def test_engines_disagreeing_on_a_crossing_blame_the_engines():
    """A numeric crossing 1 % off (far beyond 1e-4 of τ) is engines-disagree, not mismatch."""
    _, result = _check(f'\n[[expect]]\nnode = "rst"\ncrossing = {{ level = "2 V", time = "{T_2V}" }}\n',
                       numeric=_Shifted)
    field = {f.name: f for f in result.checks[0].fields}["crossing"]
    assert field.verdict == ENGINES_DISAGREE and "engine problem" in field.message


LADDER = """
title = "ladder"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
R1 = { kind = "resistor", nodes = ["in", "a"], value = "1k" }
C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1u" }
R2 = { kind = "resistor", nodes = ["a", "b"], value = "2k" }
C2 = { kind = "capacitor", nodes = ["b", "gnd"], value = "500n" }

[[expect]]
node = "b"
dominant-tau = "= R1*C1 + (R1 + R2)*C2"
"""


def test_dominant_tau_of_a_ladder_and_the_reports_show_it():
    """Σ zero-value τ = R1C1 + (R1+R2)C2 (open-circuit time constants, textbook) passes; the JSON
    check carries dominant_tau and the reports show stored energy and the field labels."""
    circuit = parse_circuit(LADDER)
    result = compare_file(circuit, closedform.solve(circuit), None)
    assert result.verdict == PASS
    check = result.checks[0]
    assert check.dominant["tau"] == pytest.approx(1e-3 + 3e-3 * 0.5, rel=1e-9)
    run = RunResult(files=(result,))
    doc = json.loads(jsonout.render(run))["files"][0]["checks"][0]
    assert doc["dominant_tau"]["t50_estimate"] == pytest.approx(2.5e-3 * math.log(2))
    page, text = html.render(run), markdown.render(run)
    for out in (page, text):
        assert "Stored energy" in out and "dominant τ" in out
    assert "Σ zero-value τ" in console.render_solve(result)
