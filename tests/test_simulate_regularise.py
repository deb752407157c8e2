"""The regularisation rule: values from the circuit's own parts, pulses decades faster.

The checks restate the rule of harness.simulate's docstring on small circuits whose fastest
real time constant is known in closed form (an RC pair: tau = RC; an RL pair: tau = L/R,
common practice), and that the choice reads part values only.
"""

from __future__ import annotations

import math

from harness.model import Expectation, Probe
from harness.simulate import solve
from harness.simulate.regularise import R_SERIES_FLOOR, choose, unanchored
from simulate_builder import circuit, divider, node, part, rc, step_source


def test_pulse_is_many_decades_faster_than_the_fastest_mode():
    """For RC = 1 ms the pulse bound is eps times a lower estimate of it, r_s <= eps R."""
    reg = choose(rc(1e3, 1e-6), pulse_ratio=1e-7)
    assert reg.t_fast <= 1e-3
    assert reg.t_pulse <= 1e-7 * 1e-3
    assert reg.r_series <= 1e-7 * 1e3
    assert reg.post_pulse <= 1e-4 * reg.t_fast


def test_inductor_shunt_leaks_at_most_eps():
    """The shunt across an inductor is at least R_sum / eps, and L / r_shunt <= t_pulse."""
    c = circuit("rl", step_source("V1", "in", "gnd", 0.0, (0.0, 1.0)),
                part("R1", "resistor", "in", "a", 10.0), part("L1", "inductor", "a", "gnd", 1e-3))
    reg = choose(c, pulse_ratio=1e-6)
    assert reg.r_shunt >= 10.0 / 1e-6
    assert 1e-3 / reg.r_shunt <= reg.t_pulse * (1 + 1e-12)
    assert reg.t_fast <= 1e-3 / 10.0


def test_series_resistance_floor_keeps_double_precision():
    """r_s never drops below 1e-9 R_min; the pulse bound grows to 4 r_s C_loop instead (C2 is
    straight across the source, so in a carrier loop; C1 sits behind R1)."""
    c = circuit("wide", step_source("V1", "in", "gnd", 0.0, (0.0, 1.0)),
                part("R1", "resistor", "in", "a", 1e3), part("C1", "capacitor", "a", "gnd", 1e-12),
                part("C2", "capacitor", "in", "gnd", 1e-3))
    reg = choose(c)
    assert reg.r_series >= R_SERIES_FLOOR * 1e3 * (1 - 1e-12)
    assert reg.t_pulse >= 4 * reg.r_series * 1e-3 * (1 - 1e-12)


def test_only_floating_capacitor_less_nodes_get_a_parasitic_capacitance():
    """A node reachable only through an open switch floats; every other node is eliminated."""
    c = circuit("dangling", step_source("V1", "in", "gnd", 0.0, (0.0, 1.0)),
                part("R1", "resistor", "in", "a", 1e3), part("C1", "capacitor", "a", "gnd", 1e-6),
                part("S1", "switch", "a", "x", closed=False, steps=((1e-3, 1.0),)),
                part("R2", "resistor", "x", "y", 1e3))
    assert unanchored(c) == {"x", "y"}
    reg = choose(c)
    assert reg.c_node["x"] > 0 and reg.c_node["y"] > 0
    assert reg.c_node["in"] == 0.0 and reg.c_node["a"] == 0.0
    assert reg.c_node["x"] <= reg.pulse_ratio * 1e-6


def test_choice_reads_part_values_only():
    """Hand values and probes do not change the regularisation (only parts do)."""
    plain = divider()
    with_hand = type(plain)(plain.title, plain.parts, expectations=(
        Expectation(0, Probe("node", ("a",)), at=1e-3, hand={"after": 0.4, "tau": 5.0}),))
    assert choose(plain) == choose(with_hand)


def test_node_behind_a_closing_switch_jumps_to_the_capacitor_voltage():
    """Closing S1 onto 1 Gohm: x jumps from 0 to v_a = 1 - e^(-10) (ten time constants)."""
    c = circuit("dangling", step_source("V1", "in", "gnd", 0.0, (0.0, 1.0)),
                part("R1", "resistor", "in", "a", 1e3), part("C1", "capacitor", "a", "gnd", 1e-6),
                part("R3", "resistor", "x", "gnd", 1e9),
                part("S1", "switch", "a", "x", closed=False, steps=((1e-2, 1.0),)))
    sol = solve(c)
    f = sol.features(node("x"), 1)
    assert abs(f.before) <= 1e-12
    assert abs(f.after - (1 - math.exp(-10))) <= 1e-6
