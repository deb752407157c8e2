"""Values at 0- of parts in a loop of capacitors and voltage-type parts (DESIGN.md "Initial
state": the resistive network at 0- with capacitors replaced by their voltages).

Outside reference: sympy's ``linsolve`` of that resistive network, written here from Kirchhoff's
laws: it fixes every voltage and the resistor currents, and leaves the loop's current a free
parameter.  When the given initial values are the DC state the circuit is at rest and every
capacitor current is 0 (a capacitor carries C·dv/dt, and nothing changes at rest: common
practice); otherwise neither engine may claim a value for the loop's parts.
"""

from __future__ import annotations

import sympy as sp

from harness import model as m
from harness.circuitfile import parse_circuit
from harness.closedform import solve as exact
from harness.results import UNDEFINED_CURRENT
from harness.simulate.engine import solve as numeric

LOOP = '''title = "loop"
[parts]
V1 = {{ kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["1 ms", "2 V"]] }}
C1 = {{ kind = "capacitor", nodes = ["in", "m"], value = "1u", initial = "{initial}" }}
C2 = {{ kind = "capacitor", nodes = ["m", "gnd"], value = "3u" }}
R1 = {{ kind = "resistor", nodes = ["m", "gnd"], value = "1k" }}
'''


def _through(name: str) -> m.Probe:
    return m.Probe(m.THROUGH, (name,))


def _snapshot_reference():
    """The network at 0- (V1 = 0 V, C1 a 1 V source, C2 a source at the voltage the DC solve
    respecting C1 gives, -1 V): sympy's general solution."""
    v_in, v_m, i_v1, i_c1, i_c2, i_r1 = sp.symbols("v_in v_m i_v1 i_c1 i_c2 i_r1")
    eqs = [v_in, v_in - v_m - 1, v_m + 1,            # V1, C1, C2 fix the voltages
           i_v1 + i_c1,                              # KCL at in (currents p -> n)
           -i_c1 + i_c2 + i_r1,                      # KCL at m
           i_r1 - v_m / 1000]                        # Ohm's law
    (sol,) = sp.linsolve(eqs, [v_in, v_m, i_v1, i_c1, i_c2, i_r1])
    return dict(zip(["v_in", "v_m", "i_v1", "i_c1", "i_c2", "i_r1"], sol))


def test_reference_leaves_the_loop_current_free():
    ref = _snapshot_reference()
    assert ref["i_r1"] == sp.Rational(-1, 1000) and ref["v_m"] == -1
    assert ref["i_c2"].free_symbols and ref["i_v1"].free_symbols


def test_both_engines_leave_the_loop_parts_unestablished_when_not_at_rest():
    ref = _snapshot_reference()
    circuit = parse_circuit(LOOP.format(initial="1 V"), "loop.toml")
    for solution in (exact(circuit), numeric(circuit)):
        for name in ("C1", "C2", "V1"):
            fe = solution.features(_through(name), 0)
            assert fe.before is None
            (note,) = [n for n in fe.notes if n.code == UNDEFINED_CURRENT]
            assert note.parts[0] == name and set(note.parts) == {"C1", "C2", "V1"}
            assert note.detail == "C1"
        r1 = solution.features(_through("R1"), 0).before      # fixed by the network
        assert abs(r1 - float(ref["i_r1"])) < 1e-9
        node = solution.features(m.Probe(m.NODE, ("m",)), 0).before
        assert abs(node - float(ref["v_m"])) < 1e-9
        after = solution.features(_through("C2"), 0).after    # after the event: defined
        assert after is not None


def test_at_rest_the_loop_carries_no_current():
    """C1 at 0 V is the DC state (V1 = 0 V, R1 pulls m to 0 V): every current is 0."""
    circuit = parse_circuit(LOOP.format(initial="0 V"), "loop.toml")
    for solution in (exact(circuit), numeric(circuit)):
        for name in ("C1", "C2", "V1", "R1"):
            fe = solution.features(_through(name), 0)
            assert fe.before is not None and abs(fe.before) < 1e-12
            assert not [n for n in fe.notes if n.code == UNDEFINED_CURRENT]


def test_a_hand_value_for_the_loop_fails_with_the_loop_named(tmp_path, capsys):
    from harness.cli import main
    path = tmp_path / "loop.toml"
    path.write_text(LOOP.format(initial="1 V") + '[[expect]]\nthrough = "C2"\nat = "0 s"\n'
                    'before = "-0.75 mA"\n')
    assert main(["check", str(path), "--no-report", "--json"]) == 1
    out = capsys.readouterr().out
    assert "is not established" in out and "C2, V1, C1" in out


def test_random_circuit_with_a_loop_of_capacitors_and_a_source_agrees():
    """Seed 68 of the project's random generator: C9 (initial 0.63 V) and C16 in a loop with
    V1; the closed form used to split R4's current by capacitance and the numerical engine
    gave 0 A.  Both now give no value, and no field is engines-disagree."""
    from tests.benchmarks.agree import run_one
    out = run_one(68, seconds=120.0)
    assert out["errors"] == [] and out["disagree"] == []
