"""Dominant τ of a probe fed by a current-controlled source that reads a grounded source.

Circuit: V1 steps 1 V into R1 = 1 kΩ and C1 = 1 µF; a cccs of gain 1 copies V1's current into
R2 = 1 kΩ ‖ C2 = 2 µF.  The probe v(b) sees both sections, one way through the cccs, so its
exact modes are 1/(R1 C1) and 1/(R2 C2) and, by the textbook identity Σ zero-value τ = Σ exact τ
(the first denominator coefficient b1), the estimate is R1 C1 + R2 C2 = 3 ms.  V1's current is
set at its ungrounded terminal by R1 (KCL), so C1 counts although V1 ties both its terminals
to the reference.  v(b) starts and ends at 0 V (a pulse): no one-τ curve describes it, so the
deviation and 50 % time are not given.
"""

from __future__ import annotations

import pytest

from harness import closedform
from harness.circuitfile import parse_circuit
from harness.compare import compare_file
from harness.model import Probe
from harness.outcome import PASS
from harness.simulate import solve as numeric

TEXT = """
title = "cccs reads a grounded source"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
R1 = { kind = "resistor", nodes = ["in", "a"], value = "1k" }
C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1u" }
F1 = { kind = "cccs", nodes = ["gnd", "b"], gain = "1", control = "V1" }
R2 = { kind = "resistor", nodes = ["b", "gnd"], value = "1k" }
C2 = { kind = "capacitor", nodes = ["b", "gnd"], value = "2u" }

[[expect]]
node = "b"
at = "0 s"
before = "0 V"
final = "0 V"
dominant-tau = "= R1*C1 + R2*C2"
"""


def test_both_engines_count_the_section_behind_the_sensed_source():
    """Both engines sum C1's and C2's zero-value τ: R1 C1 + R2 C2 = 3 ms (textbook identity)."""
    circuit = parse_circuit(TEXT)
    exact, num = closedform.solve(circuit), numeric(circuit)
    probe = Probe("node", ("b",))
    assert set(exact.dominant(probe, 0).terms) == {"C1", "C2"}
    # the numerical engine's own route: the two modes (1 ms, 2 ms) its equations show in v(b)
    assert sorted(num.dominant(probe, 0).terms.values()) == pytest.approx([1e-3, 2e-3], rel=1e-6)
    for dom in (exact.dominant(probe, 0), num.dominant(probe, 0)):
        assert dom.tau == pytest.approx(3e-3, rel=1e-6)
        assert dom.deviation is None and dom.t50 is None
    assert sum(exact.time_constants(0)) == pytest.approx(3e-3, rel=1e-9)


def test_the_pulse_probe_passes_with_its_femtovolt_noise():
    """v(b) is 0 V at the event and at the end: the engines' rounding noise there (fV) is
    judged against the pulse's own peak (common practice: a tolerance floor scaled to the
    signal), not against its noise, so before/final/dominant τ all pass."""
    circuit = parse_circuit(TEXT)
    check = compare_file(circuit, closedform.solve(circuit), numeric(circuit)).checks[0]
    assert check.verdict == PASS, [(f.name, f.closed_form, f.numeric, f.message)
                                   for f in check.fields]
