"""Sign-off quantities of the exact engine (issue 7): crossings, peaks, energy, dominant τ.

References, named beside each check: sympy's exact solutions of the circuit ODEs (crossings,
energy), numpy.linalg.eigvals of the RC network built here (the zero-value identity), and facts
of the trade marked as common practice.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from harness import closedform
from harness.circuitfile import parse_circuit
from harness.model import Probe

NODE = lambda name: Probe("node", (name,))  # noqa: E731
THROUGH = lambda name: Probe("through", (name,))  # noqa: E731


def _solve(text: str):
    circuit = parse_circuit(text)
    return circuit, closedform.solve(circuit)


RC = """
title = "rc"
[parts]
V1 = {{ kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "{v} V"]] }}
R1 = {{ kind = "resistor", nodes = ["in", "out"], value = "{r}" }}
C1 = {{ kind = "capacitor", nodes = ["out", "gnd"], value = "{c}" }}
"""

LADDER = """
title = "ladder"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
R1 = { kind = "resistor", nodes = ["in", "a"], value = "1" }
C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1" }
R2 = { kind = "resistor", nodes = ["a", "b"], value = "2" }
C2 = { kind = "capacitor", nodes = ["b", "gnd"], value = "0.5" }
"""


def _ladder_sympy():
    """sympy exact solution of the two-section ladder: v' = A v + B, v(0) = 0 (1 V step)."""
    t = sp.symbols("t", positive=True)
    r1, r2, c1, c2 = sp.Integer(1), sp.Integer(2), sp.Integer(1), sp.Rational(1, 2)
    a = sp.Matrix([[-(1 / r1 + 1 / r2) / c1, 1 / (r2 * c1)], [1 / (r2 * c2), -1 / (r2 * c2)]])
    b = sp.Matrix([1 / (r1 * c1), 0])
    v = a.inv() * ((a * t).exp() - sp.eye(2)) * b
    return t, sp.simplify(v[0]), sp.simplify(v[1]), r2


# ------------------------------------------------------------------------------- crossings
def test_crossing_matches_sympy_root_on_a_second_order_ladder():
    """The first time v(b) reaches 0.6 V equals sympy's root of v_b(t) = 0.6 (sympy exact)."""
    t, _, vb, _ = _ladder_sympy()
    ref = float(sp.nsolve(vb - sp.Rational(3, 5), t, 2.0, prec=30))
    _, sol = _solve(LADDER)
    got = sol.crossing(NODE("b"), 0, 0.6, "rising")
    assert got.time == pytest.approx(ref, rel=1e-9)
    assert got.direction == "rising" and not got.in_jump


@pytest.mark.parametrize("r,c", [("1k", "1u"), ("47", "470u"), ("10M", "10p")])
def test_fifty_percent_at_tau_ln2_and_rise_time_tau_ln9(r, c):
    """50 % at τ·ln 2 and 10–90 % rise time τ·ln 9 of an RC step (common practice)."""
    circuit, sol = _solve(RC.format(v=5, r=r, c=c))
    tau = circuit.part("R1").value * circuit.part("C1").value
    half = sol.crossing(NODE("out"), 0, 2.5, "rising").time
    t10 = sol.crossing(NODE("out"), 0, 0.5, "rising").time
    t90 = sol.crossing(NODE("out"), 0, 4.5, "rising").time
    assert half == pytest.approx(tau * math.log(2), rel=1e-9)
    assert t90 - t10 == pytest.approx(tau * math.log(9), rel=1e-9)


def test_never_crosses_reports_the_final_value():
    """A level beyond x∞ is never crossed; the value it approaches is the final value V."""
    _, sol = _solve(RC.format(v=3.3, r="1k", c="1u"))
    got = sol.crossing(NODE("out"), 0, 4.0, "either")
    assert got.time is None and got.approaches == pytest.approx(3.3, rel=1e-12)
    assert sol.crossing(NODE("out"), 0, 2.0, "falling").time is None


SWITCHED = """
title = "switched"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "5 V" }
R1 = { kind = "resistor", nodes = ["in", "out"], value = "1k" }
C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1u" }
S1 = { kind = "switch", nodes = ["out", "gnd"], state = "open", steps = [["1 ms", "closed"], ["1.5 ms", "open"]], on-resistance = "100" }
"""


def test_crossing_time_is_after_the_event_and_flags_an_intervening_event():
    """At 1 ms the switch discharges C1 with τ = (1k‖100)·C; the 1 V crossing is measured from
    the event, and a 0.46 V crossing past the next event (1.5 ms) is flagged (RC formula,
    common practice)."""
    _, sol = _solve(SWITCHED)
    tau, final = (1000 * 100 / 1100) * 1e-6, 5 * 100 / 1100
    ref = tau * math.log((5 - final) / (1 - final))
    got = sol.crossing(NODE("out"), 1, 1.0, "falling")
    assert got.time == pytest.approx(ref, rel=1e-9) and not got.after_next_event
    late = sol.crossing(NODE("out"), 1, 0.46, "falling")
    assert late.time == pytest.approx(tau * math.log((5 - final) / (0.46 - final)), rel=1e-9)
    assert late.time > 0.5e-3 and late.after_next_event


def test_a_jump_across_the_level_is_a_crossing_at_the_event():
    """Node a of a resistive divider jumps at the switch: the crossing is at t = t_k (0 after)."""
    text = """
title = "jump"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "3 V"]] }
R1 = { kind = "resistor", nodes = ["in", "a"], value = "1k" }
R2 = { kind = "resistor", nodes = ["a", "out"], value = "1k" }
C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1u" }
"""
    _, sol = _solve(text)
    got = sol.crossing(NODE("a"), 0, 1.0, "rising")
    assert got.time == 0.0 and got.in_jump


# ------------------------------------------------------------------------------- peaks
def test_peak_inrush_of_rc_precharge_is_v_over_r_at_t0():
    """The peak inrush of an RC pre-charge is V/R at t = 0+ (common practice)."""
    _, sol = _solve(RC.format(v=400, r="47", c="470u"))
    got = sol.peak(THROUGH("R1"), 0)
    assert got.magnitude == pytest.approx(400 / 47, rel=1e-9) and got.time == 0.0


def test_peak_of_a_charging_capacitor_is_its_final_value_as_t_goes_to_infinity():
    """A first-order rise never overshoots: the largest magnitude is x∞, approached as t → ∞."""
    _, sol = _solve(RC.format(v=5, r="1k", c="1u"))
    got = sol.peak(NODE("out"), 0)
    assert got.time is None and got.magnitude == pytest.approx(5.0, rel=1e-12)


def test_peak_overshoot_of_an_underdamped_series_rlc():
    """Series RLC step, capacitor voltage: peak 1 + exp(-ζπ/√(1-ζ²)) at t = π/ω_d (second-order
    step response, standard control-theory textbook result, from memory)."""
    r, l, c = 20.0, 1e-3, 1e-6
    text = f"""
title = "rlc"
[parts]
V1 = {{ kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }}
R1 = {{ kind = "resistor", nodes = ["in", "a"], value = "{r}" }}
L1 = {{ kind = "inductor", nodes = ["a", "b"], value = "{l}" }}
C1 = {{ kind = "capacitor", nodes = ["b", "gnd"], value = "{c}" }}
"""
    _, sol = _solve(text)
    wn = 1 / math.sqrt(l * c)
    zeta = r / 2 * math.sqrt(c / l)
    wd = wn * math.sqrt(1 - zeta ** 2)
    got = sol.peak(NODE("b"), 0)
    assert got.magnitude == pytest.approx(1 + math.exp(-zeta * math.pi / math.sqrt(1 - zeta ** 2)),
                                          rel=1e-9)
    assert got.time == pytest.approx(math.pi / wd, rel=1e-7)


# ------------------------------------------------------------------------------- energy
@pytest.mark.parametrize("r", ["1", "47", "10k", "2M2"])
def test_energy_charging_a_capacitor_through_any_r_is_half_cv2(r):
    """Charging C from a step V through any R dissipates ½CV² in R (common practice)."""
    _, sol = _solve(RC.format(v=12, r=r, c="100u"))
    got = sol.energy("R1", 0)
    assert got.energy == pytest.approx(0.5 * 100e-6 * 144, rel=1e-9)
    assert got.steady_power == 0.0 and got.jump == 0.0


def test_energy_in_the_second_ladder_resistor_matches_sympy_integral():
    """∫ i_R2² R2 dt over [0, ∞) of the ladder equals sympy's symbolic integral (sympy exact)."""
    t, va, vb, r2 = _ladder_sympy()
    ref = float(sp.integrate(sp.expand(((va - vb) / r2) ** 2 * r2), (t, 0, sp.oo)))
    _, sol = _solve(LADDER)
    assert sol.energy("R2", 0).energy == pytest.approx(ref, rel=1e-9)


def test_energy_above_a_steady_current_and_within_the_interval():
    """With a bleeder the pre-charge resistor's energy above the steady loss follows from
    i = i∞ + (i0 - i∞)e^(-t/τ): R[(i0 - i∞)²τ/2 + 2 i∞(i0 - i∞)τ] (integral of the first-order
    response, common practice); the steady power is i∞² R."""
    text = RC.format(v=400, r="47", c="470u") + \
        'Rb = { kind = "resistor", nodes = ["out", "gnd"], value = "47k" }\n'
    _, sol = _solve(text)
    r, rb, c = 47.0, 47e3, 470e-6
    tau = c * r * rb / (r + rb)
    i0, iinf = 400 / r, 400 / (r + rb)
    ref = r * ((i0 - iinf) ** 2 * tau / 2 + 2 * iinf * (i0 - iinf) * tau)
    got = sol.energy("R1", 0)
    assert got.energy == pytest.approx(ref, rel=1e-9)
    assert got.steady_power == pytest.approx(iinf ** 2 * r, rel=1e-9)


def test_switch_energy_includes_the_charge_sharing_loss():
    """An ideal switch closing between C1 (5 V) and C2 (0 V) loses ½·C1C2/(C1+C2)·ΔV² in the
    jump whatever the resistance (charge sharing, textbook); it is counted in the switch."""
    text = """
title = "share"
[parts]
C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1u", initial = "5 V" }
C2 = { kind = "capacitor", nodes = ["b", "gnd"], value = "2u", initial = "0 V" }
S1 = { kind = "switch", nodes = ["a", "b"], state = "open", steps = [["1 ms", "closed"]] }
R1 = { kind = "resistor", nodes = ["b", "gnd"], value = "1M" }
"""
    _, sol = _solve(text)
    got = sol.energy("S1", 1)
    assert got.jump == pytest.approx(0.5 * (1e-6 * 2e-6 / 3e-6) * 25, rel=1e-9)
    assert got.energy == pytest.approx(got.jump, rel=1e-12)


# ------------------------------------------------------------------------------- dominant τ
def _random_rc(rng: np.random.Generator, sections: int):
    """A random RC ladder with an extra bridging resistor and a floating capacitor; returns
    the circuit text and the exact time constants from numpy.linalg.eigvals of C⁻¹G built
    here from the same values."""
    nodes = [f"n{i}" for i in range(1, sections + 1)]
    lines = ['title = "random rc"', "[parts]",
             'V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", '
             'steps = [["0 s", "1 V"]] }']
    g = np.zeros((sections, sections))
    cm = np.zeros((sections, sections))
    idx = {name: i for i, name in enumerate(nodes)}

    def res(name, a, b, value):
        lines.append(f'{name} = {{ kind = "resistor", nodes = ["{a}", "{b}"], value = {value!r} }}')
        for x, y in ((a, b), (b, a)):
            if x in idx:
                g[idx[x], idx[x]] += 1 / value
                if y in idx:
                    g[idx[x], idx[y]] -= 1 / value

    def cap(name, a, b, value):
        lines.append(f'{name} = {{ kind = "capacitor", nodes = ["{a}", "{b}"], value = {value!r} }}')
        for x, y in ((a, b), (b, a)):
            if x in idx:
                cm[idx[x], idx[x]] += value
                if y in idx:
                    cm[idx[x], idx[y]] -= value

    prev = "in"
    for i, node in enumerate(nodes):
        res(f"R{i + 1}", prev, node, float(10 ** rng.uniform(2, 5)))
        cap(f"C{i + 1}", node, "gnd", float(10 ** rng.uniform(-9, -6)))
        prev = node
    res("Rx", "in", nodes[-1], float(10 ** rng.uniform(3, 6)))
    if sections > 1:
        cap("Cx", nodes[0], nodes[-1], float(10 ** rng.uniform(-9, -7)))
    taus = 1.0 / np.linalg.eigvals(np.linalg.solve(cm, g)).real
    return "\n".join(lines) + "\n", taus


@pytest.mark.parametrize("seed", range(8))
def test_zero_value_time_constants_sum_to_the_exact_ones_on_random_rc_networks(seed):
    """Σ R_th,j C_j (others open) = Σ τ_i of the exact modes for RC networks (textbook identity;
    exact modes from numpy.linalg.eigvals of the network built in the test)."""
    rng = np.random.default_rng(seed)
    text, taus = _random_rc(rng, int(rng.integers(2, 6)))
    _, sol = _solve(text)
    dom = sol.dominant(NODE("n1"), 0)
    assert dom.tau == pytest.approx(float(np.sum(taus)), rel=1e-8)
    assert sum(sol.time_constants(0)) == pytest.approx(float(np.sum(taus)), rel=1e-8)


def test_dominant_estimate_reports_deviation_and_fifty_percent_time():
    """On the ladder the one-τ estimate's 50 % time is τ_dom·ln 2 (common practice) and the exact
    50 % time is sympy's root of v_b = 0.5 (sympy exact)."""
    t, _, vb, _ = _ladder_sympy()
    ref = float(sp.nsolve(vb - sp.Rational(1, 2), t, 1.0, prec=30))
    _, sol = _solve(LADDER)
    dom = sol.dominant(NODE("b"), 0)
    assert dom.tau == pytest.approx(1 * 1 + (1 + 2) * 0.5, rel=1e-12)  # R1·C1 + (R1+R2)·C2
    assert dom.t50_estimate == pytest.approx(dom.tau * math.log(2), rel=1e-12)
    assert dom.t50 == pytest.approx(ref, rel=1e-9)
    grid = np.linspace(0.0, 30 * dom.tau, 200_001)
    exact = sp.lambdify(t, vb, "numpy")(grid)
    # the one-τ curve's largest departure, from sympy's exact v_b sampled densely (sympy exact)
    assert dom.deviation == pytest.approx(
        float(np.max(np.abs((1 - np.exp(-grid / dom.tau)) - exact))), rel=1e-3)
    assert sol.features(NODE("b"), 0).dominant_tau == pytest.approx(dom.tau, rel=1e-12)


def test_dominant_fifty_percent_time_of_a_current_that_jumps_across_its_half_level():
    """The input current of the ladder jumps from 0 to 1 A at the step and settles to 0: its
    50 % time is sympy's root of i_R1 = (1 − v_a)/R1 = 0.5, not the jump at t = 0 (sympy exact)."""
    t, va, _, _ = _ladder_sympy()
    ref = float(sp.nsolve((1 - va) / 1 - sp.Rational(1, 2), t, 0.5, prec=30))
    _, sol = _solve(LADDER)
    dom = sol.dominant(THROUGH("R1"), 0)
    assert dom.t50 == pytest.approx(ref, rel=1e-9)
    assert dom.t50 > 0


def test_thevenin_resistance_through_an_open_switch_is_its_off_resistance():
    """With the switch open, the hold capacitor's only path is the 10 GΩ off-resistance to the
    zeroed source: R_th = 10 GΩ (common practice: the Thevenin resistance of a single path is
    its resistance), not 'no resistive path' because that resistance is a large MNA entry."""
    _, sol = _solve("""
title = "hold through an off-switch"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "1 V" }
S1 = { kind = "switch", nodes = ["in", "hold"], state = "closed", steps = [["1 us", "open"]], on-resistance = "200", off-resistance = "10G" }
Ch = { kind = "capacitor", nodes = ["hold", "gnd"], value = "1n" }
""")
    assert sol.thevenin(0)["Ch"] == pytest.approx(200.0, rel=1e-12)
    assert sol.thevenin(1)["Ch"] == pytest.approx(1e10, rel=1e-9)
