"""Op-amp stages the ideal model solves but a real amplifier does not follow: an impulse through
the feedback resistor (a bare differentiator) and positive feedback (a latch).

References: the bare differentiator's output is Vo(s) = −R2·s·C0·V/s (Kirchhoff's current law at
the virtual ground), whose inverse Laplace transform sympy gives as −R2·C0·V·δ(t); the feedback
factor β = R1/(R1 + R2) of a resistive divider from the output to an input (common practice);
a loop is regenerative where its loop gain A·β exceeds 1 (common practice: the Barkhausen
condition at DC).
"""

from __future__ import annotations

import pytest
import sympy as sp

from harness import model as m
from harness.circuitfile import parse_circuit
from harness.closedform import solve as exact
from harness.feedback import positive_feedback
from harness.findings import findings
from harness.results import IMPULSIVE, IMPULSIVE_VALUE, POSITIVE_FEEDBACK
from harness.simulate.engine import solve as numeric

HEAD = ('title = "stage"\n[parts]\nV1 = { kind = "voltage-source", nodes = ["in", "gnd"], '
        'value = "0 V", steps = [["0 s", "1 V"]] }\n')
BARE = '''C0 = { kind = "capacitor", nodes = ["in", "x"], value = "2u" }
R2 = { kind = "resistor", nodes = ["x", "out"], value = "2k" }
U1 = { kind = "opamp", nodes = ["out", "gnd"], control = ["gnd", "x"] }
'''


def _circuit(parts: str):
    return parse_circuit(HEAD + parts, "stage.toml")


def test_bare_differentiator_reference_is_an_impulse():
    t, s = sp.symbols("t s", positive=True)
    r2, c0 = 2000, sp.Rational(2, 10**6)
    vo = sp.inverse_laplace_transform(-r2 * s * c0 / s, s, t)
    assert vo == -sp.Rational(4, 1000) * sp.DiracDelta(t)       # −R2·C0·V·δ(t), V s


def test_closed_form_reports_the_impulse_as_a_hazard_with_its_weight():
    sol = exact(_circuit(BARE))
    (hazard,) = [h for h in sol.hazards if h.code == IMPULSIVE]
    assert hazard.time == 0.0 and "R2" in hazard.parts
    assert hazard.values["R2:flux"] == pytest.approx(4e-3, rel=1e-9)   # R2·C0·V (sympy above)


@pytest.mark.parametrize("solve", [exact, numeric], ids=["closedform", "simulate"])
def test_neither_engine_claims_a_value_just_after_the_impulse(solve):
    sol = solve(_circuit(BARE))
    for probe in (m.Probe(m.NODE, ("out",)), m.Probe(m.THROUGH, ("R2",))):
        fe = sol.features(probe, 0)
        assert fe.after is None
        assert any(n.code == IMPULSIVE_VALUE for n in fe.notes)
    if solve is exact:      # the virtual ground carries no impulse
        assert sol.features(m.Probe(m.NODE, ("x",)), 0).after == pytest.approx(0.0, abs=1e-12)


def test_the_impulse_is_a_finding_both_engines_see():
    circuit = _circuit(BARE)
    (found,) = [f for f in findings(circuit, exact(circuit), numeric(circuit))
                if f.code == IMPULSIVE]
    assert not found.acknowledged and "R2" in found.subjects
    assert "impulse of voltage across R2" in found.message and "review it" not in found.message


def test_a_series_resistor_or_a_feedback_capacitor_takes_the_impulse_away():
    """With Rs the output jumps by −V·R2/Rs (finite); with C1 across R2 the impulse of charge
    goes into C1 (a jump of −V·C0/C1): neither is a hazard."""
    series = BARE.replace('["in", "x"], value = "2u"', '["a", "x"], value = "2u"') + \
        'Rs = { kind = "resistor", nodes = ["in", "a"], value = "500" }\n'
    feedback = BARE + 'C1 = { kind = "capacitor", nodes = ["x", "out"], value = "1u" }\n'
    for parts in (series, feedback):
        assert not [h for h in exact(_circuit(parts)).hazards if h.code == IMPULSIVE]


INVERTING = '''R1 = { kind = "resistor", nodes = ["in", "x"], value = "1k" }
R2 = { kind = "resistor", nodes = ["x", "out"], value = "2k" }
U1 = { kind = "opamp", nodes = ["out", "gnd"], control = ["gnd", "x"]GAIN }
'''


@pytest.mark.parametrize("gain", ["", ', gain = "1000"'])
def test_inverting_amplifier_has_no_finding_and_swapped_inputs_have_one(gain):
    good = _circuit(INVERTING.replace("GAIN", gain))
    assert positive_feedback(good) == []
    swapped = _circuit(INVERTING.replace("GAIN", gain).replace('["gnd", "x"]', '["x", "gnd"]'))
    (found,) = positive_feedback(swapped)
    assert found.code == POSITIVE_FEEDBACK and found.parts == ("U1",)
    assert found.values["fast"] == 0.0 and found.values["pre-step"] == 1.0
    assert found.values["beta"] == pytest.approx(1000 / 3000, rel=1e-9)   # R1/(R1 + R2)


def test_finite_gain_below_unity_loop_gain_is_not_a_latch():
    """A·β = 1.2/3 < 1: positive feedback that does not regenerate."""
    weak = _circuit(INVERTING.replace("GAIN", ', gain = "1.2"')
                    .replace('["gnd", "x"]', '["x", "gnd"]'))
    assert positive_feedback(weak) == []


def test_schmitt_stage_is_a_finding_in_the_file_result():
    schmitt = '''R1 = { kind = "resistor", nodes = ["p", "gnd"], value = "10k" }
R2 = { kind = "resistor", nodes = ["p", "out"], value = "100k" }
R3 = { kind = "resistor", nodes = ["in", "m"], value = "1k" }
U1 = { kind = "opamp", nodes = ["out", "gnd"], control = ["p", "m"] }
'''
    circuit = _circuit(schmitt)
    (found,) = positive_feedback(circuit)
    assert found.values["beta"] == pytest.approx(10 / 110, rel=1e-9)   # R1/(R1 + R2)
    (finding,) = [f for f in findings(circuit, exact(circuit)) if f.code == "positive-feedback"]
    assert finding.subjects == ("U1",) and "latches" in finding.message
    acknowledged = parse_circuit(HEAD + schmitt + '[settings]\nacknowledge = ["U1"]\n', "s.toml")
    (finding,) = [f for f in findings(acknowledged, exact(acknowledged))
                  if f.code == "positive-feedback"]
    assert finding.acknowledged


def test_feedback_through_a_capacitor_to_the_non_inverting_input_is_found_fast():
    """C from the output to the non-inverting input, R to ground: no feedback at DC, β = 1
    with the capacitor shorted (the fast limit)."""
    parts = '''R1 = { kind = "resistor", nodes = ["p", "gnd"], value = "10k" }
C1 = { kind = "capacitor", nodes = ["p", "out"], value = "1n" }
R3 = { kind = "resistor", nodes = ["in", "m"], value = "1k" }
R4 = { kind = "resistor", nodes = ["m", "out"], value = "1k" }
U1 = { kind = "opamp", nodes = ["out", "gnd"], control = ["p", "m"] }
'''
    (found,) = positive_feedback(_circuit(parts))
    assert found.values["fast"] == 1.0
    assert found.values["beta"] == pytest.approx(0.5, rel=1e-9)


def test_check_of_a_bare_differentiator_fails_and_is_not_an_engine_problem(tmp_path):
    """The output's hand `after` cannot pass (no value after an impulse); the virtual ground's
    0 V stands on the closed form alone (the numerical engine's pulse swamps that event), and
    no field blames the engines."""
    from harness.runner import check_file
    path = tmp_path / "bare.toml"
    path.write_text(HEAD + BARE + '[[expect]]\nnode = "out"\nat = "0 s"\nafter = "0 V"\n'
                    '[[expect]]\nnode = "x"\nat = "0 s"\nafter = "0 V"\n')
    result = check_file(str(path))
    assert result.verdict == "finding"
    out, x = result.checks
    assert [f.verdict for f in out.fields if f.name == "after"] == ["mismatch"]
    assert [f.verdict for f in x.fields if f.name == "after"] == ["pass"]
    assert any("not cross-checked" in str(msg) for msg in x.messages)
    assert all(f.verdict != "engines-disagree" for c in result.checks for f in c.fields)
