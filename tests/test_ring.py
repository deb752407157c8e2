"""Oscillation and damping are first-class: rings (f_d, ζ, Q), overshoot, and the numerical
engine's own order and modes.

References: the series RLC step response, derived here with sympy (the roots of
L C s² + R C s + 1 and the inverse Laplace transform of the capacitor voltage); the textbook
second-order relations ω_n = 1/√(LC), ζ = (R/2)·√(C/L), f_d = ω_n√(1 − ζ²)/2π, Q = 1/(2ζ)
and the overshoot of a pure second-order step e^(−πζ/√(1 − ζ²)) (common practice, from
memory; checked here against sympy's waveform).
"""

from __future__ import annotations

import json
import math
import subprocess
import sys

import pytest
import sympy as sp

from harness import closedform
from harness.circuitfile import parse_circuit
from harness.compare import compare_file
from harness.model import Probe
from harness.simulate import solve as numeric

RLC = """
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
R1 = { kind = "resistor", nodes = ["in", "a"], value = "RVALUE" }
L1 = { kind = "inductor", nodes = ["a", "b"], value = "1m" }
C1 = { kind = "capacitor", nodes = ["b", "gnd"], value = "10u" }
"""


def _sympy_reference(r: float):
    """(f_d, ζ, overshoot) of v(b) from sympy: poles of 1/(LCs² + RCs + 1), and the largest
    value of the inverse-Laplace waveform over its first half period beyond the final 1 V."""
    s, t = sp.symbols("s t", positive=True)
    L, C, R = sp.Rational(1, 1000), sp.Rational(1, 100000), sp.nsimplify(r)
    poles = sp.Poly(L * C * s ** 2 + R * C * s + 1, s).all_roots()
    pole = next(p for p in poles if sp.im(p) > 0)
    wn = abs(complex(pole))
    zeta = -float(sp.re(pole)) / wn
    f_d = float(sp.im(pole)) / (2 * math.pi)
    v = sp.inverse_laplace_transform(1 / (s * (L * C * s ** 2 + R * C * s + 1)), s, t)
    t_peak = math.pi / (2 * math.pi * f_d)                      # dv/dt = 0 at half a period
    return f_d, zeta, float(v.subs(t, t_peak)) - 1.0


@pytest.mark.parametrize("r", [10.0, 2.0, 16.0])
def test_both_engines_give_the_ring_and_overshoot_of_a_series_rlc(r):
    f_d, zeta, over = _sympy_reference(r)
    assert zeta == pytest.approx(r / 2 * math.sqrt(1e-5 / 1e-3), rel=1e-12)    # textbook ζ
    assert over == pytest.approx(math.exp(-math.pi * zeta / math.sqrt(1 - zeta ** 2)), rel=1e-9)
    circuit = parse_circuit(RLC.replace("RVALUE", repr(r)))
    probe = Probe("node", ("b",))
    for sol, rel in ((closedform.solve(circuit), 1e-9), (numeric(circuit), 1e-6)):
        fe = sol.features(probe, 0)
        assert fe.order == 2 and len(fe.rings) == 1
        assert fe.rings[0][0] == pytest.approx(f_d, rel=rel)
        assert fe.rings[0][1] == pytest.approx(zeta, rel=rel)
        assert sol.overshoot(probe, 0) == pytest.approx(over, rel=rel)


def test_critical_damping_has_no_ring_but_order_two():
    """R = 2√(L/C) = 20 Ω: a double real pole at -1/√(LC) (ζ = 1): order 2, no ring, no
    overshoot, in both engines; the JSON tells it from an underdamped pair."""
    circuit = parse_circuit(RLC.replace("RVALUE", "20"))
    probe = Probe("node", ("b",))
    for sol in (closedform.solve(circuit), numeric(circuit)):
        fe = sol.features(probe, 0)
        assert fe.order == 2 and fe.rings == ()
        assert sol.overshoot(probe, 0) == pytest.approx(0.0, abs=1e-6)


def _check(tmp_path, fields: str):
    path = tmp_path / "rlc.toml"
    path.write_text(RLC.replace("RVALUE", "10") + '[[expect]]\nnode = "b"\n' + fields)
    done = subprocess.run([sys.executable, "-m", "harness.cli", "check", str(path), "--json",
                           "--no-report"], capture_output=True, text=True, timeout=300)
    return done.returncode, json.loads(done.stdout)["files"][0]["checks"][0]


def test_hand_ring_values_pass_and_wrong_ones_are_named(tmp_path):
    """Right: f_d, ζ = 0.5, Q = 1 and 16.3 % pass; a ζ of 0.7 and an overshoot of 4.6 % (the
    value for ζ = 0.7) are mismatches, the overshoot message quoting the pure second-order
    formula at the real ζ."""
    code, check = _check(tmp_path, 'ring-frequency = "= sqrt(1/(L1*C1) - (R1/(2*L1))**2)/(2*pi)"'
                                   '\ndamping = "= R1/2*sqrt(C1/L1)"\nq = "1"\n'
                                   'overshoot = "16.3 %"\n')
    assert code == 0, check
    assert check["rings"] == [pytest.approx({"frequency": 1378.3222385544805, "damping": 0.5,
                                             "q": 1.0})]
    code, check = _check(tmp_path, 'damping = "0.7"\novershoot = "4.6 %"\n')
    assert code == 1
    assert check["fields"]["damping"]["verdict"] == "mismatch"
    assert "e^(−πζ/√(1−ζ²)) = 0.163" in check["fields"]["overshoot"]["message"]


def test_a_ring_asked_of_a_first_order_probe_says_there_is_none(tmp_path):
    path = tmp_path / "rc.toml"
    path.write_text("""
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
R1 = { kind = "resistor", nodes = ["in", "a"], value = "1k" }
C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1u" }
[[expect]]
node = "a"
ring-frequency = "1 kHz"
""")
    circuit = parse_circuit(path.read_text())
    result = compare_file(circuit, closedform.solve(circuit), numeric(circuit))
    field = next(f for f in result.checks[0].fields if f.name == "ring_frequency")
    assert field.verdict == "mismatch" and "no decaying complex pair" in field.message


def test_the_numerical_engine_reports_its_own_order_and_modes_on_the_library():
    """Every probe of the bundled library: the numerical engine's own order (its QZ and its
    integrated response) equals the closed form's wherever both have one and the probe is
    above the noise (the comparator would call anything else engines-disagree)."""
    from pathlib import Path
    from harness.runner import check_file
    root = Path(__file__).resolve().parent.parent / "circuits" / "library"
    for path in sorted(root.rglob("*.toml")):
        result = check_file(str(path))
        assert not any(isinstance(m, str) and "order: the closed form sees" in m
                       for c in result.checks for m in c.messages), path


@pytest.mark.parametrize("r", [19.2, 19.6])
def test_overshoot_of_a_nearly_critical_ring_lies_beyond_ten_envelope_tau(r):
    # ζ = 0.96 and 0.98: the overshoot's extremum at half a damped period is πζ/√(1 − ζ²)
    # = 10.9 and 15.5 envelope time constants after the step, beyond a 10 τ span; reference:
    # sympy's inverse Laplace transform at t = π/ω_d (and e^(−πζ/√(1 − ζ²)), textbook)
    _, zeta, over = _sympy_reference(r)
    assert over == pytest.approx(math.exp(-math.pi * zeta / math.sqrt(1 - zeta ** 2)), rel=1e-9)
    circuit = parse_circuit(RLC.replace("RVALUE", repr(r)))
    probe = Probe("node", ("b",))
    assert closedform.solve(circuit).overshoot(probe, 0) == pytest.approx(over, rel=1e-6)
    assert numeric(circuit).overshoot(probe, 0) == pytest.approx(over, rel=1e-3)


BANDPASS_PULSE = """
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "5 V"]] }
R1 = { kind = "resistor", nodes = ["in", "b"], value = "10k" }
C1 = { kind = "capacitor", nodes = ["b", "gnd"], value = "10n" }
C2 = { kind = "capacitor", nodes = ["b", "a"], value = "100n" }
R2 = { kind = "resistor", nodes = ["a", "gnd"], value = "100k" }
[[expect]]
node = "a"
overshoot = HAND
"""


@pytest.mark.parametrize("hand", ["0", "0.5"])
def test_an_overshoot_of_a_step_below_the_noise_floor_never_passes(hand):
    # Hand analysis (written out): at 0+ both capacitors hold 0 V (a capacitor's voltage is
    # continuous, textbook), so v(a) = 0; at DC C2 blocks and R2 pulls a to 0 V, so
    # x(∞) = 0: the step x(∞) − x(0+) is 0 and v(a) is a hump from 0 back to 0, with no step
    # to overshoot.  The engines' steps are rounding (fV against a 5 V source), so the
    # overshoot, excursion over step, is 0 or ~1e14 by the sign of that rounding: the hand
    # 0 passed.  It is a mismatch naming the step and the noise floor, whatever the hand says.
    circuit = parse_circuit(BANDPASS_PULSE.replace("HAND", hand))
    exact = closedform.solve(circuit)
    fe = exact.features(Probe("node", ("a",)), 0)
    assert abs(fe.after) < 1e-12 and abs(fe.final) < 1e-12
    result = compare_file(circuit, exact, numeric(circuit))
    field = next(f for f in result.checks[0].fields if f.name == "overshoot")
    assert field.verdict == "mismatch", field
    assert "no step above its noise floor" in field.message
    assert "noise floor 5 nV" in field.message          # PROBE_NOISE 1e-9 of the 5 V source
