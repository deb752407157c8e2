"""A bare charge amplifier: a source, C1 to the inverting input x, C2 from the output back to x,
an ideal op-amp, and no resistor anywhere.

Well-posed: the given initial voltages fix every node at 0- (v(x) = 0 by the op-amp, v(in) by
V1, v(out) = v(x) + v(C2)), and afterwards the charge on node x, which only capacitors touch,
is conserved (charge conservation, common practice).  Only the current circulating in the loop
V1-C1-C2-U1 is not fixed by the network at 0-; at rest it is 0.  Both engines solve it; initial
voltages the loop contradicts are refused up front, naming the file, the part and the field.
"""

from __future__ import annotations

import pytest
import sympy as sp

from harness import closedform, simulate
from harness.circuitfile import parse_circuit
from harness.errors import InitialStateError
from harness.model import Probe

AMPLIFIER = '''title = "charge amplifier"
[parts]
V1 = {{ kind = "voltage-source", nodes = ["in", "gnd"], value = "{v0} V", steps = [["1 ms", "2 V"]] }}
C1 = {{ kind = "capacitor", nodes = ["in", "x"], value = "10 nF", initial = "{c1} V" }}
C2 = {{ kind = "capacitor", nodes = ["out", "x"], value = "1 nF", initial = "{c2} V" }}
U1 = {{ kind = "opamp", nodes = ["out", "gnd"], control = ["gnd", "x"] }}
'''


def _hand_out(v0: float, c1: float, c2: float) -> float:
    """v(out) after V1 steps to 2 V, from the charge on node x (sympy): before it
    -C1 v(C1) - C2 v(C2); after it -C1 (2 - v_x) - C2 (v_out - v_x) with v_x = 0."""
    v_out = sp.symbols("v_out")
    c_1, c_2 = sp.Rational(10, 10**9), sp.Rational(1, 10**9)
    before = -c_1 * sp.nsimplify(c1) - c_2 * sp.nsimplify(c2)
    after = -c_1 * 2 - c_2 * v_out
    return float(sp.solve(sp.Eq(before, after), v_out)[0])


@pytest.mark.parametrize("v0, c1, c2", [(0, 0, 0), (1, 1, 3)])
def test_both_engines_solve_a_bare_charge_amplifier(v0, c1, c2):
    circuit = parse_circuit(AMPLIFIER.format(v0=v0, c1=c1, c2=c2))
    expected = _hand_out(v0, c1, c2)                    # -20 V and -7 V
    out, c1_current = Probe("node", ("out",)), Probe("through", ("C1",))
    for solution in (closedform.solve(circuit), simulate.solve(circuit)):
        before = solution.features(out, 1).before
        assert before == pytest.approx(c2, abs=1e-9)     # v(out) = v(x) + v(C2), v(x) = 0
        fe = solution.features(out, 1)
        assert fe.after == pytest.approx(expected, rel=1e-6)
        assert fe.final == pytest.approx(expected, rel=1e-6)
        # at rest before the step: no current through C1 (i = C dv/dt, nothing moves)
        assert solution.features(c1_current, 0).before == pytest.approx(0.0, abs=1e-12)


def test_initial_voltages_the_loop_contradicts_are_refused():
    # V1 = 1 V at 0- and v(x) = 0 fix v(C1) = 1 V: 0.5 V contradicts it (hand KVL)
    text = AMPLIFIER.format(v0=1, c1=0.5, c2=3)
    with pytest.raises(InitialStateError) as caught:
        closedform.solve(parse_circuit(text, source="amp.toml"))
    assert caught.value.part == "C1" and caught.value.field == "initial"
    assert "amp.toml" in str(caught.value)
    with pytest.raises(InitialStateError):
        simulate.solve(parse_circuit(text, source="amp.toml"))
