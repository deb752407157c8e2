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


def _dc_matrix(circuit, closed):
    """The interval's scaled, pinned DC matrix G~ as the closed form decomposes it."""
    import numpy as np
    from harness.closedform.mna import interval_groups, pin, scale_of, scaled
    from harness.closedform.stamps import layout_of, stamp
    layout = layout_of(circuit)
    g, c, _ = stamp(circuit, layout, closed, lambda p: 0.0)
    groups = interval_groups(circuit, closed)
    scale = scale_of(circuit)
    pin(g, layout, groups, 1.0 / scale.r0)
    scaled(g, c, np.zeros(layout.size), layout, scale, overwrite=True)
    return g, [group[0] for group in groups]


@pytest.mark.parametrize("parts, count", CASES)
def test_the_nonsingularity_certificate_agrees_with_the_graph(parts, count):
    # without a controlled part the graph's count is exact: the DC matrix is certified
    # nonsingular exactly where it finds no zero mode
    from harness.closedform.nullity import nonsingular
    circuit = _circuit(parts)
    closed = {p.name: p.is_closed(0.0) for p in circuit.parts if p.kind == "switch"}
    g, _ = _dc_matrix(circuit, closed)
    assert nonsingular(g) == (count == 0)


MILLER = """
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
R1 = { kind = "resistor", nodes = ["in", "n"], value = "1M" }
C1 = { kind = "capacitor", nodes = ["n", "out"], value = "1u" }
E1 = { kind = "vcvs", nodes = ["out", "gnd"], control = ["n", "gnd"], gain = -GAIN }
R2 = { kind = "resistor", nodes = ["out", "gnd"], value = "10k" }
R3 = { kind = "resistor", nodes = ["in", "f"], value = "1" }
C3 = { kind = "capacitor", nodes = ["f", "n"], value = "1p" }
"""


@pytest.mark.parametrize("gain", [1e6, 1e8])
def test_a_miller_stages_slow_mode_18_decades_below_the_fastest_is_no_trapped_charge(gain):
    # Reference 1, mpmath (50 digits): with v(out) = -A v(n), KCL at n and f gives
    # M x' = -K x + b for x = (v(n), v(f)), M = [[C1 (1 + A) + C3, -C3], [-C3, C3]],
    # K = diag(1/R1, 1/R3): time constants 1 ps and R1 C1 (1 + A) + ... = 1e6 s (1e8 s).
    # Reference 2, the DC solve by hand: C1 and C3 open, no current in R1, v(n) = 1 V and
    # v(out) = -A volts.  Before the DC matrix's nonsingularity was certified the 1e6 s mode
    # fell in the zero cluster (18 decades below the fastest): order 1 with τ = 1 ps and a
    # final value of ~-1 µV, the step's start read as trapped charge
    import mpmath as mp
    from harness import closedform
    from harness.model import Probe
    mp.mp.dps = 50
    r1, c1, r3, c3, a = (mp.mpf(x) for x in ("1e6", "1e-6", "1", "1e-12", repr(gain)))
    m = mp.matrix([[c1 * (1 + a) + c3, -c3], [-c3, c3]])
    k = mp.matrix([[1 / r1, 0], [0, 1 / r3]])
    slow = max(1 / e for e in mp.eig(mp.inverse(m) * k)[0])
    circuit = parse_circuit("[parts]\n" + MILLER.replace("GAIN", repr(gain)))
    g, pins = _dc_matrix(circuit, {})
    assert zero_modes(circuit, {}, pins, g) == 0
    solution = closedform.solve(circuit)
    out = solution.features(Probe("node", ("out",)), 0)
    node = solution.features(Probe("node", ("n",)), 0)
    assert out.final == pytest.approx(-gain, rel=1e-9)
    assert node.final == pytest.approx(1.0, rel=1e-9)
    # the slowest mode of a pencil spanning 18-20 decades is resolved to ~1e-6 (measured)
    assert max(out.modes) == pytest.approx(float(slow), rel=1e-5)


def test_a_singular_dc_matrix_with_a_controlled_part_leaves_the_count_to_the_eigenvalues():
    # a follower (gain 1, exact) whose output drives its own input through R2 and holds C1's
    # charge: at DC v(a) = v(o) and no current flows, so v(a) is free (G~ singular, by hand):
    # not certified, no count
    circuit = _circuit('E1 = { kind = "vcvs", nodes = ["o", "gnd"], gain = 1, '
                       'control = ["a", "gnd"] }\n'
                       'R2 = { kind = "resistor", nodes = ["o", "a"], value = "1 kohm" }\n'
                       'C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1 uF" }\n'
                       'R1 = { kind = "resistor", nodes = ["in", "gnd"], value = "1 kohm" }\n')
    g, pins = _dc_matrix(circuit, {})
    assert zero_modes(circuit, {}, pins, g) is None
