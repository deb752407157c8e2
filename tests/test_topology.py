"""Shared topology checks: ill-posed circuits refused, well-posed ones accepted, jump facts.

Sources: Kirchhoff's voltage and current laws and the classical conditions of network topology
(a loop of ideal voltage sources or a cutset of ideal current sources leaves the network without
a unique solution; a node with no conducting path to the reference has no defined voltage) —
common practice, as in any circuit-theory textbook; the jump conditions of DESIGN.md (capacitor
voltages jump only in loops with voltage-type parts, inductor currents only in cutsets with
current sources or opening switches).
"""

from __future__ import annotations

import pytest

from harness import errors, topology
from harness.circuitfile import parse_circuit
from harness.model import Circuit, Part


def circuit(*parts: str, source: str = "t.toml") -> Circuit:
    """Parse a circuit from part lines ``NAME = { ... }`` (runs topology.check)."""
    return parse_circuit('title = "t"\n[parts]\n' + "\n".join(parts) + "\n", source)


def refused(cls, *parts: str) -> errors.InputError:
    with pytest.raises(cls) as caught:
        circuit(*parts)
    assert caught.value.file == "t.toml"
    return caught.value


V5 = 'V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "5 V" }'
VSTEP = 'V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "5 V"]] }'
R_IN_OUT = 'R1 = { kind = "resistor", nodes = ["in", "out"], value = "1k" }'
C_OUT = 'C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1u" }'


# --- floating sub-circuits and current-type cutsets ---------------------------------------

def test_floating_subcircuit():
    """A sub-circuit with no conducting path to ground has no defined voltage (common practice)."""
    err = refused(errors.TopologyError, V5, R_IN_OUT, C_OUT,
                  'R2 = { kind = "resistor", nodes = ["a", "b"], value = "1k" }')
    assert err.part == "R2" and err.field == "nodes" and err.line == 6
    assert "'a', 'b'" in err.message


def test_current_source_cutset():
    """A current source whose only path is itself violates KCL (common practice)."""
    err = refused(errors.TopologyError,
                  'I1 = { kind = "current-source", nodes = ["gnd", "x"], value = "1 mA" }',
                  'R1 = { kind = "resistor", nodes = ["x", "y"], value = "1k" }')
    assert err.part == "I1" and "current source I1" in err.message


def test_open_switch_isolates_node():
    """An ideal open switch does not conduct, so the node behind it floats (common practice)."""
    err = refused(errors.TopologyError, V5,
                  'S1 = { kind = "switch", nodes = ["in", "x"], state = "open" }',
                  'R1 = { kind = "resistor", nodes = ["x", "y"], value = "1k" }')
    assert (err.part, err.field) == ("S1", "state")


def test_conducting_for_connectivity():
    """Capacitors, inductors and off-resistance switches do connect a node to ground."""
    circuit(VSTEP, R_IN_OUT, C_OUT, 'C2 = { kind = "capacitor", nodes = ["out", "x"], '
            'value = "1u", initial = "0 V" }',
            'C3 = { kind = "capacitor", nodes = ["x", "gnd"], value = "1u", initial = "0 V" }')
    circuit(V5, 'S1 = { kind = "switch", nodes = ["in", "x"], state = "open", '
            'off-resistance = "1G" }', 'R1 = { kind = "resistor", nodes = ["x", "gnd"], value = 1 }')
    circuit('I1 = { kind = "current-source", nodes = ["gnd", "x"], value = "1 mA" }',
            'L1 = { kind = "inductor", nodes = ["x", "gnd"], value = "1m" }')


def test_current_source_with_capacitor_cutset_allowed():
    """A current source charging a node through a capacitor with a given initial is the
    engines' business (unbounded growth), not a topology error (DESIGN.md)."""
    circuit('I1 = { kind = "current-source", nodes = ["gnd", "x"], value = "1 mA" }',
            'C1 = { kind = "capacitor", nodes = ["x", "gnd"], value = "1u", initial = "0 V" }')


# --- loops of voltage-type parts -----------------------------------------------------------

def test_voltage_source_loop():
    """Two ideal voltage sources in parallel have no unique current (common practice)."""
    err = refused(errors.TopologyError, V5, R_IN_OUT, C_OUT,
                  'V2 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "5 V" }')
    assert err.part == "V2" and "V1" in err.message


def test_vcvs_in_source_loop():
    """A vcvs output across a voltage source is a loop of voltage-type parts (common practice)."""
    err = refused(errors.TopologyError, V5, R_IN_OUT, C_OUT,
                  'E1 = { kind = "vcvs", nodes = ["in", "gnd"], gain = 2, control = ["out", "gnd"] }')
    assert err.part == "E1"


def test_capacitor_loop_allowed():
    """A capacitor straight across a stepping source is a jump, not an error (DESIGN.md)."""
    circuit(VSTEP, 'C1 = { kind = "capacitor", nodes = ["in", "gnd"], value = "1u" }',
            'R1 = { kind = "resistor", nodes = ["in", "gnd"], value = "1k" }')


def test_switch_closing_later_shorts_source():
    """Closing an ideal switch across V1 at 5 ms is named with that event's time."""
    err = refused(errors.TopologyError, V5, R_IN_OUT, C_OUT,
                  'S1 = { kind = "switch", nodes = ["in", "gnd"], state = "open", '
                  'steps = [["5 ms", "closed"]] }')
    assert (err.part, err.field) == ("S1", "steps")
    assert "closing S1 at t = 5 ms shorts V1" in err.message


def test_second_switch_at_later_event():
    """Two switches that short V1 only together are blamed on the one closing last (3 ms)."""
    err = refused(errors.TopologyError, V5, R_IN_OUT, C_OUT,
                  'S1 = { kind = "switch", nodes = ["in", "m"], state = "open", '
                  'steps = [["1 ms", "closed"]] }',
                  'R2 = { kind = "resistor", nodes = ["m", "gnd"], value = "1k" }',
                  'S2 = { kind = "switch", nodes = ["m", "gnd"], state = "open", '
                  'steps = [["3 ms", "closed"]] }')
    assert err.part == "S2" and "3 ms" in err.message and "S1" in err.message


def test_switch_with_on_resistance_allowed():
    """A switch with an on-resistance closing across V1 is a load, not a short."""
    circuit(V5, R_IN_OUT, C_OUT, 'S1 = { kind = "switch", nodes = ["in", "gnd"], '
            'state = "open", steps = [["5 ms", "closed"]], on-resistance = "1" }')


def test_switch_opening_later_floats_node():
    """Opening the only return path of a current source at 2 ms names that time."""
    err = refused(errors.TopologyError,
                  'I1 = { kind = "current-source", nodes = ["gnd", "x"], value = "1 mA" }',
                  'S1 = { kind = "switch", nodes = ["x", "y"], state = "closed", '
                  'steps = [["2 ms", "open"]] }',
                  'R1 = { kind = "resistor", nodes = ["y", "gnd"], value = "1k" }')
    assert (err.part, err.field) == ("S1", "steps") and "t = 2 ms" in err.message


def test_direct_check_on_model():
    """topology.check works on a hand-built Circuit and reports its source and part line."""
    c = Circuit(title="m", source="built.toml", parts=(
        Part("V1", "voltage-source", ("a", "gnd"), value=1.0, line=3),
        Part("V2", "voltage-source", ("a", "gnd"), value=2.0, line=4)))
    with pytest.raises(errors.TopologyError) as caught:
        topology.check(c)
    assert (caught.value.file, caught.value.part, caught.value.line) == ("built.toml", "V2", 4)


# --- the state before t = 0 ---------------------------------------------------------------

def test_initial_contradicts_source():
    """KVL: a capacitor straight across 5 V cannot start at 3 V (DESIGN.md initial state)."""
    err = refused(errors.InitialStateError, V5, 'R1 = { kind = "resistor", nodes = ["in", "gnd"], '
                  'value = 1 }', 'C1 = { kind = "capacitor", nodes = ["in", "gnd"], value = "1u", '
                  'initial = "3 V" }')
    assert (err.part, err.field) == ("C1", "initial") and "5 V" in err.message


@pytest.mark.parametrize("v1, v2, ok", [("2 V", "3 V", True), ("2 V", "2 V", False),
                                         ("2 V", "3.000000000001 V", True),
                                         ("2 V", "3.0001 V", False)])
def test_series_capacitors_sum(v1, v2, ok):
    """KVL around V1, C1, C2: the initial voltages must add up to 5 V (to 1e-9 relative)."""
    parts = [V5, f'C1 = {{ kind = "capacitor", nodes = ["in", "m"], value = "1u", initial = "{v1}" }}',
             f'C2 = {{ kind = "capacitor", nodes = ["m", "gnd"], value = "1u", initial = "{v2}" }}',
             'R1 = { kind = "resistor", nodes = ["in", "gnd"], value = 1 }']
    if ok:
        circuit(*parts)
    else:
        assert refused(errors.InitialStateError, *parts).part == "C2"


def test_closed_switch_discharged_capacitor():
    """A closed ideal switch across a capacitor holds it at 0 V before t = 0 (KVL)."""
    sw = 'S1 = { kind = "switch", nodes = ["out", "gnd"], state = "closed", steps = [["0 s", "open"]] }'
    cap = 'C1 = {{ kind = "capacitor", nodes = ["out", "gnd"], value = "1u", initial = "{}" }}'
    circuit(V5, R_IN_OUT, sw, cap.format("0 V"))
    assert refused(errors.InitialStateError, V5, R_IN_OUT, sw, cap.format("1 V")).part == "C1"


@pytest.mark.parametrize("i2, ok", [("1 A", True), ("0.5 A", False)])
def test_series_inductors(i2, ok):
    """KCL at the node between two series inductors: their initial currents must be equal."""
    parts = [V5, 'R1 = { kind = "resistor", nodes = ["in", "a"], value = 10 }',
             'L1 = { kind = "inductor", nodes = ["a", "mid"], value = "1m", initial = "1 A" }',
             f'L2 = {{ kind = "inductor", nodes = ["mid", "gnd"], value = "1m", initial = "{i2}" }}']
    if ok:
        circuit(*parts)
    else:
        err = refused(errors.InitialStateError, *parts)
        assert (err.part, err.field) == ("L2", "initial") and "mid" in err.message


def test_inductor_sign_convention():
    """An inductor reversed against the current source carries -1 A in its own direction (KCL)."""
    src = 'I1 = { kind = "current-source", nodes = ["gnd", "a"], value = "1 A" }'
    ind = 'L1 = {{ kind = "inductor", nodes = [{}], value = "1m", initial = "{}" }}'
    circuit(src, ind.format('"a", "gnd"', "1 A"))
    circuit(src, ind.format('"gnd", "a"', "-1 A"))
    refused(errors.InitialStateError, src, ind.format('"gnd", "a"', "1 A"))


def test_undefined_capacitor_voltage():
    """Series capacitors without initial have no DC path at their middle node (DESIGN.md)."""
    parts = [VSTEP, 'R1 = { kind = "resistor", nodes = ["in", "a"], value = "1k" }',
             'C1 = { kind = "capacitor", nodes = ["a", "mid"], value = "1u" }',
             'C2 = {{ kind = "capacitor", nodes = ["mid", "gnd"], value = "1u"{} }}']
    err = refused(errors.InitialStateError, *parts[:3], parts[3].format(""))
    assert (err.part, err.field) == ("C1", "initial")
    assert "C1's voltage before t = 0 is undefined: node 'mid' has no DC path" in err.message
    # with C2 given, mid is held by it, and C1's voltage follows from the DC solve
    circuit(*parts[:3], parts[3].format(', initial = "1 V"'))


def test_undefined_inductor_current():
    """An inductor without initial straight across a source closes a zero-resistance loop."""
    err = refused(errors.InitialStateError, V5,
                  'L1 = { kind = "inductor", nodes = ["in", "gnd"], value = "1m" }')
    assert (err.part, err.field) == ("L1", "initial")
    circuit(V5, 'L1 = { kind = "inductor", nodes = ["in", "gnd"], value = "1m", initial = "0 A" }')


def test_parallel_inductors_undefined_split():
    """Two parallel inductors without initial: the DC current split is undefined."""
    err = refused(errors.InitialStateError, V5, 'R1 = { kind = "resistor", nodes = ["in", "a"], value = 1 }',
                  'L1 = { kind = "inductor", nodes = ["a", "gnd"], value = "1m" }',
                  'L2 = { kind = "inductor", nodes = ["a", "gnd"], value = "2m" }')
    assert err.part == "L2" and "L1" in err.message


# --- facts for the comparator ---------------------------------------------------------------

def test_voltage_loops_capacitive_divider():
    """A stepping source across two series capacitors forces both to jump (DESIGN.md)."""
    c = circuit(VSTEP, 'C1 = { kind = "capacitor", nodes = ["in", "mid"], value = "1u" }',
                'C2 = { kind = "capacitor", nodes = ["mid", "gnd"], value = "2u" }',
                'R1 = { kind = "resistor", nodes = ["mid", "gnd"], value = "1k" }')
    assert [set(loop) for loop in topology.voltage_loops(c, 0)] == [{"V1", "C1", "C2"}]


def test_voltage_loops_charge_sharing():
    """An ideal switch closing between two capacitors at 1 ms is a jump loop at event 1 only."""
    c = circuit('C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1u", initial = "5 V" }',
                'S1 = { kind = "switch", nodes = ["a", "b"], state = "open", steps = [["1 ms", "closed"]] }',
                'C2 = { kind = "capacitor", nodes = ["b", "gnd"], value = "1u", initial = "0 V" }',
                'R1 = { kind = "resistor", nodes = ["b", "gnd"], value = "1M" }')
    assert c.events == (0.0, 0.001)
    assert topology.voltage_loops(c, 0) == []
    assert [set(loop) for loop in topology.voltage_loops(c, 1)] == [{"S1", "C1", "C2"}]


def test_voltage_loops_rc_has_none():
    """A plain RC driven through a resistor has no jump loop (the resistor limits the current)."""
    c = circuit(VSTEP, R_IN_OUT, C_OUT)
    assert topology.voltage_loops(c, 0) == []


def test_trapped_nodes():
    """The node between series capacitors is reached only through capacitors: charge is trapped."""
    c = circuit(VSTEP, 'R1 = { kind = "resistor", nodes = ["in", "a"], value = "1k" }',
                'C1 = { kind = "capacitor", nodes = ["a", "mid"], value = "1u", initial = "0 V" }',
                'C2 = { kind = "capacitor", nodes = ["mid", "gnd"], value = "1u", initial = "0 V" }')
    assert topology.trapped_nodes(c, 0) == [("mid",)]


def test_trapped_nodes_sample_and_hold():
    """After the sampling switch opens at 1 ms, the hold node keeps its charge (interval 1 only)."""
    c = circuit(V5, 'S1 = { kind = "switch", nodes = ["in", "h"], state = "closed", '
                'steps = [["1 ms", "open"]], on-resistance = "100" }',
                'C1 = { kind = "capacitor", nodes = ["h", "gnd"], value = "1n" }')
    assert topology.trapped_nodes(c, 0) == []
    assert topology.trapped_nodes(c, 1) == [("h",)]


def test_storage_cutsets_interrupted_inductor():
    """Opening an ideal switch in series with an inductor cuts its current at that event."""
    c = circuit(V5, 'R1 = { kind = "resistor", nodes = ["in", "a"], value = 10 }',
                'S1 = { kind = "switch", nodes = ["a", "b"], state = "closed", steps = [["1 ms", "open"]] }',
                'L1 = { kind = "inductor", nodes = ["b", "gnd"], value = "1m" }')
    assert topology.storage_cutsets(c, 0) == []
    assert topology.storage_cutsets(c, 1) == [("S1", "L1")]


def test_storage_cutsets_current_step():
    """A current source stepping straight into an inductor forces the inductor current to jump."""
    c = circuit('I1 = { kind = "current-source", nodes = ["gnd", "a"], value = "0 A", '
                'steps = [["1 ms", "1 A"]] }',
                'L1 = { kind = "inductor", nodes = ["a", "gnd"], value = "1m" }')
    assert topology.storage_cutsets(c, 1) == [("I1", "L1")]
    assert topology.storage_cutsets(c, 0) == []
