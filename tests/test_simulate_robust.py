"""Robustness of the numerical engine on circuits the fuzz harness found (tests/benchmarks/fuzz.py).

Each circuit is a reduced form of a fuzz case (seed named in the docstring); the expected values
come from Kirchhoff's laws stated beside each check (common practice), from tau = RC (common
practice) or from sympy's exact solution of the DC equations.
"""

from __future__ import annotations

import textwrap
import time
import types

import numpy as np
import pytest
import sympy

from harness.circuitfile import parse_circuit
from harness.errors import InitialStateError
from harness.model import Circuit, Part, Probe
from harness.simulate import engine, integrate, solve
from harness.simulate.regularise import choose, loop_capacitance
from harness.messages import text as said
from harness.results import PULSE_GROWTH, WORK_BUDGET


def _parse(text: str):
    return parse_circuit(textwrap.dedent(text))


def _node(name: str) -> Probe:
    return Probe("node", (name,))


CCCS_SENSES_SOURCE = """
    title = "cccs senses a source next to a 470 pOhm loop (fuzz seed 259)"
    [parts]
    V1 = { kind = "voltage-source", nodes = ["n1", "gnd"], value = "0 V", steps = [["0 s", "3.3 V"]] }
    L2 = { kind = "inductor", nodes = ["n2", "gnd"], value = "1 nH" }
    F4 = { kind = "cccs", nodes = ["n2", "n3"], gain = "2.2", control = "V1" }
    R5 = { kind = "resistor", nodes = ["n3", "n2"], value = "1.5 Ω" }
    V6 = { kind = "voltage-source", nodes = ["n4", "n1"], value = "1 V" }
    R7 = { kind = "resistor", nodes = ["n4", "n1"], value = "470 pΩ" }
    """


def test_cccs_sensing_a_source_has_a_defined_dc_state():
    """KVL/KCL (common practice): v(n4) = V1 + V6, and V1 carries nothing, so F4 and R5 do not."""
    sim = solve(_parse(CCCS_SENSES_SOURCE))
    n4 = sim.features(_node("n4"), 0)
    assert n4.before == pytest.approx(1.0, rel=1e-9)
    assert n4.after == pytest.approx(4.3, rel=1e-6)
    assert n4.final == pytest.approx(4.3, rel=1e-9)
    assert abs(sim.features(_node("n3"), 0).final) < 1e-9


def test_cccs_dc_operating_point_matches_sympy():
    """The 0- state of a cccs (gain 3) sensing a source through 1 mOhm, against sympy's exact
    nodal solution."""
    text = """
        title = "cccs gain 3 senses V1"
        [parts]
        V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "2 V", steps = [["1 ms", "1 V"]] }
        R1 = { kind = "resistor", nodes = ["in", "a"], value = "1 mΩ" }
        R2 = { kind = "resistor", nodes = ["a", "gnd"], value = "1 kΩ" }
        F1 = { kind = "cccs", nodes = ["gnd", "b"], gain = "3", control = "V1" }
        R3 = { kind = "resistor", nodes = ["b", "gnd"], value = "10 Ω" }
        C1 = { kind = "capacitor", nodes = ["b", "gnd"], value = "1 uF" }
        """
    va, vb, i1 = sympy.symbols("va vb i1")
    V, R1, R2, R3 = sympy.Integer(2), sympy.Rational(1, 1000), 1000, 10
    # i1 = the current of V1 from "in" through it to ground = -(current into R1)
    sol = sympy.solve([(V - va) / R1 - va / R2, i1 + (V - va) / R1, 3 * i1 - vb / R3],
                      [va, vb, i1], dict=True)[0]
    sim = solve(_parse(text))
    assert sim.features(_node("a"), 0).before == pytest.approx(float(sol[va]), rel=1e-9)
    assert sim.features(_node("b"), 0).before == pytest.approx(float(sol[vb]), rel=1e-6)


def test_held_inductor_feeding_a_current_only_group_names_the_inductor():
    """KCL (common practice): L2's given 470 nA must leave nodes n2, n3, n4 through F8, which
    carries 2.2 pA/A of V1's current; the contradiction names L2's initial (fuzz seed 1765)."""
    text = """
        title = "held inductor into a group left only by a cccs"
        [parts]
        V1 = { kind = "voltage-source", nodes = ["n1", "gnd"], value = "0 V", steps = [["0 s", "10 pV"]] }
        L2 = { kind = "inductor", nodes = ["n1", "n2"], value = "2.2 uH", initial = "470 nA" }
        L3 = { kind = "inductor", nodes = ["n2", "n3"], value = "470 H" }
        R4 = { kind = "resistor", nodes = ["n2", "n4"], value = "33 pΩ" }
        C5 = { kind = "capacitor", nodes = ["n2", "n4"], value = "470 pF" }
        R7 = { kind = "resistor", nodes = ["gnd", "n6"], value = "3.3 nΩ" }
        F8 = { kind = "cccs", nodes = ["n3", "n6"], gain = "2.2 p", control = "V1" }
        L9 = { kind = "inductor", nodes = ["gnd", "n6"], value = "10 nH" }
        """
    with pytest.raises(InitialStateError) as info:
        solve(_parse(text))
    assert info.value.part == "L2" and info.value.field == "initial"


def test_node_fed_only_by_a_current_source_names_a_part():
    """A node reached only through a current source has no DC voltage (common practice); the
    engine's own check names a part at that node (the circuit is built directly, past the
    reader's topology check)."""
    circuit = Circuit("current-source-only node", (
        Part("V1", "voltage-source", ("in", "gnd"), 1.0),
        Part("R1", "resistor", ("in", "gnd"), 1e3),
        Part("I1", "current-source", ("in", "x"), 1e-3)))
    with pytest.raises(InitialStateError) as info:
        solve(circuit)
    assert info.value.part == "I1" and info.value.field == "nodes"


UNSTABLE_PULSE = """
    title = "cccs across the source it senses (fuzz seed 2504)"
    [parts]
    V1 = { kind = "voltage-source", nodes = ["n1", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
    F2 = { kind = "cccs", nodes = ["gnd", "n1"], gain = "GAIN", control = "V1" }
    C3 = { kind = "capacitor", nodes = ["gnd", "n1"], value = "2.2 uF" }
    R4 = { kind = "resistor", nodes = ["n1", "gnd"], value = "1 kΩ" }
    """


def test_growing_pulse_model_is_reported_not_crashed():
    """Gain 3.3 makes r_s look negative: a warning and no values, never an exception."""
    sim = solve(_parse(UNSTABLE_PULSE.replace("GAIN", "3.3")))
    assert any(w.code == PULSE_GROWTH and "narrow-pulse model grows" in said(w)
               for w in sim.warnings)
    feats = sim.features(_node("n1"), 0)
    assert feats.before == pytest.approx(0.0, abs=1e-12)
    assert feats.after is None and feats.final is None


def test_stable_gain_across_the_source_still_solves():
    """With gain 0.5 the node is the source's voltage: after = final = 1 V (KVL, common
    practice), and no warning."""
    sim = solve(_parse(UNSTABLE_PULSE.replace("GAIN", "0.5")))
    assert not sim.warnings
    feats = sim.features(_node("n1"), 0)
    assert feats.after == pytest.approx(1.0, rel=1e-5)
    assert feats.final == pytest.approx(1.0, rel=1e-9)


def test_overflowing_integration_is_a_failed_run():
    """A Jacobian whose products overflow double precision (entries 1e308) ends the run as
    ``failed`` instead of raising inside Radau."""
    system = types.SimpleNamespace(jac=np.full((2, 2), 1e308))
    with np.errstate(over="ignore", invalid="ignore"):
        *_, status, _ = integrate._run(system, np.zeros(2), np.ones(2), 0.0, 1.0, 1e-6,
                                       np.full(2, 1e-9), None, first_step=1e-3)
    assert status == "failed"


def test_step_budget_stops_with_a_warning(monkeypatch):
    """Past the work budget the engine says where it stopped and reports no values there."""
    monkeypatch.setattr(engine, "STEP_BUDGET", 40)
    text = """
        title = "rc"
        [parts]
        V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
        R1 = { kind = "resistor", nodes = ["in", "a"], value = "1 kΩ" }
        C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1 uF" }
        """
    sim = solve(_parse(text))
    assert any(w.code == WORK_BUDGET and "stopped after" in said(w)
               and "values not reported" in said(w) for w in sim.warnings)
    feats = sim.features(_node("a"), 0)
    assert feats.after is None and feats.final is None


def test_step_collapse_case_is_bounded():
    """Fuzz seed 2678 (1 uOhm against 1 uF and 100 pF: 17 decades) once took 50 s; it ends well
    within 20 s.  Its operating point (the current scale of 1 pOhm) is within the engine's
    plausibility bound, so the interval settles about it instead of stepping the absolute
    state until the work budget stops it: n4 follows n1 through S4's 1 uOhm to 10 V, and n5,
    reached only through capacitors, keeps its charge: C5 holds its 100 V, v(n5) = 10 - 100 V
    (charge conservation, common practice)."""
    text = """
        title = "step collapse"
        [parts]
        V1 = { kind = "voltage-source", nodes = ["n1", "gnd"], value = "0 V", steps = [["0 s", "10 V"]] }
        R2 = { kind = "resistor", nodes = ["n2", "n1"], value = "2.2 nΩ" }
        R3 = { kind = "resistor", nodes = ["gnd", "n3"], value = "33 uΩ" }
        S4 = { kind = "switch", nodes = ["n1", "n4"], state = "open", on-resistance = "1 pΩ", off-resistance = "1 uΩ", steps = [["0.01 s", "open"]] }
        C5 = { kind = "capacitor", nodes = ["n1", "n5"], value = "100 pF", initial = "100 V" }
        C6 = { kind = "capacitor", nodes = ["n4", "n5"], value = "2.2 pF" }
        C7 = { kind = "capacitor", nodes = ["n4", "n5"], value = "1 uF" }
        """
    started = time.perf_counter()
    sim = solve(_parse(text))
    assert time.perf_counter() - started < 20.0
    assert sim.features(_node("n4"), 0).final == pytest.approx(10.0, rel=1e-9)
    assert sim.features(_node("n5"), 0).final == pytest.approx(-90.0, rel=1e-9)


TWELVE = """
    title = "time constants 1 ns and 1000 s"
    [parts]
    V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
    R1 = { kind = "resistor", nodes = ["in", "a"], value = "1 kΩ" }
    C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1 pF" }
    R2 = { kind = "resistor", nodes = ["in", "b"], value = "1 MΩ" }
    C2 = { kind = "capacitor", nodes = ["b", "gnd"], value = "1 mF" }
    """


def test_twelve_decades_keep_the_fast_mode():
    """tau = RC = 1 ns and 1000 s (common practice), no jump on either capacitor: the pulse stays
    many decades below 1 ns."""
    circuit = _parse(TWELVE)
    sim = solve(circuit)
    assert sim.regularisation.t_pulse <= 1e-6 * 1e-9
    for name, tau in (("a", 1e-9), ("b", 1e3)):
        feats = sim.features(_node(name), 0)
        assert feats.after == pytest.approx(0.0, abs=1e-6)
        assert feats.final == pytest.approx(1.0, rel=1e-6)
        assert feats.tau == pytest.approx(tau, rel=1e-4)


def test_loop_capacitance_counts_only_carrier_loops():
    """C2 straight across the source is in a carrier loop; C1 behind R1 is not."""
    text = TWELVE.replace('R2 = { kind = "resistor", nodes = ["in", "b"], value = "1 MΩ" }',
                          'R2 = { kind = "resistor", nodes = ["b", "gnd"], value = "1 MΩ" }')
    text = text.replace('C2 = { kind = "capacitor", nodes = ["b", "gnd"]',
                        'C2 = { kind = "capacitor", nodes = ["in", "gnd"]')
    circuit = _parse(text)
    assert loop_capacitance(circuit) == pytest.approx(1e-3, rel=1e-12)
    assert loop_capacitance(_parse(TWELVE)) == 0.0
    assert choose(_parse(TWELVE)).t_pulse < choose(circuit).t_pulse
