"""The number of zero modes of an interval from the circuit's graph (``closedform.nullity``).

Reference for each count: nodal analysis by hand (common practice): a node set the DC network
(capacitors open, inductors shorted) cuts off from ground keeps its charge for ever, and a loop
of inductors and ideal sources keeps its current; each is one mode at exactly zero.  Each count
is also checked against the closed form's own eigenvalues where they are well separated.
"""

from __future__ import annotations

import pytest

from harness.circuitfile import parse_circuit
from harness.closedform.nullity import zero_modes

SOURCE = 'V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["1 ms", "2 V"]] }\n'


def _circuit(parts: str):
    return parse_circuit("[parts]\n" + SOURCE + parts)


CASES = [
    # R into C to ground: every node reaches ground through V1 or R1: no zero mode
    ('R1 = { kind = "resistor", nodes = ["in", "a"], value = "1 kohm" }\n'
     'C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1 uF" }\n', 0),
    # two capacitors in series off the source: their middle node m has no DC path: one
    ('R1 = { kind = "resistor", nodes = ["in", "a"], value = "1 kohm" }\n'
     'C1 = { kind = "capacitor", nodes = ["a", "m"], value = "1 uF", initial = "0 V" }\n'
     'C2 = { kind = "capacitor", nodes = ["m", "gnd"], value = "2 uF", initial = "0 V" }\n', 1),
    # a coil across a closed ideal switch keeps its current in that loop; L2 decays through R2
    ('R1 = { kind = "resistor", nodes = ["in", "p"], value = "1 kohm" }\n'
     'S0 = { kind = "switch", nodes = ["p", "gnd"], state = "closed" }\n'
     'L1 = { kind = "inductor", nodes = ["p", "gnd"], value = "1 mH", initial = "0 A" }\n'
     'R2 = { kind = "resistor", nodes = ["in", "b"], value = "10 ohm" }\n'
     'L2 = { kind = "inductor", nodes = ["b", "gnd"], value = "1 mH" }\n', 1),
]


@pytest.mark.parametrize("parts, count", CASES)
def test_zero_modes_from_the_graph(parts, count):
    from harness import closedform
    from harness.closedform.interval import _zero_count
    circuit = _circuit(parts)
    assert zero_modes(circuit, {p.name: p.is_closed(0.0) for p in circuit.parts
                                if p.kind == "switch"}) == count
    solution = closedform.solve(circuit)
    assert _zero_count(solution.intervals[0].dec) == count


def test_an_open_ideal_switch_cuts_and_a_closed_one_joins():
    # S1 open (ideal) leaves b on C1 and C2 alone, and c hangs on C2 alone: two islands; S1
    # closed joins b to the source: c alone; c tied to ground (``mna.pin``) is no island
    circuit = _circuit('S1 = { kind = "switch", nodes = ["in", "b"], state = "open", '
                       'steps = [["2 ms", "closed"]] }\n'
                       'C1 = { kind = "capacitor", nodes = ["b", "gnd"], value = "1 uF", '
                       'initial = "0 V" }\n'
                       'C2 = { kind = "capacitor", nodes = ["b", "c"], value = "1 uF", '
                       'initial = "0 V" }\n')
    assert zero_modes(circuit, {"S1": False}) == 2
    assert zero_modes(circuit, {"S1": True}) == 1
    assert zero_modes(circuit, {"S1": True}, pinned=["c"]) == 0


def test_a_controlled_part_leaves_the_count_to_the_eigenvalues():
    circuit = _circuit('R1 = { kind = "resistor", nodes = ["in", "a"], value = "1 kohm" }\n'
                       'E1 = { kind = "vcvs", nodes = ["o", "gnd"], gain = 2, '
                       'control = ["a", "gnd"] }\n'
                       'C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1 uF" }\n'
                       'R2 = { kind = "resistor", nodes = ["o", "gnd"], value = "1 kohm" }\n')
    assert zero_modes(circuit, {}) is None
