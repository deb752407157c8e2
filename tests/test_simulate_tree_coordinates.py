"""The numerical engine's tree coordinates keep a closed carrier's 1/r_s on its own row, also
where the carrier joins two capacitor-less nodes, so the elimination of those nodes rounds no
false conductance into the circuit.

Circuits come from ``tests/benchmarks/agree_circuits.py`` (seeds named in each test) or are
written here; each test names its outside reference.
"""

from __future__ import annotations

import mpmath
import numpy as np
import pytest

from harness import simulate, tolerances as tol
from harness.circuitfile import parse_circuit
from harness.model import Probe
from harness.simulate import equations
from tests.benchmarks.agree_circuits import circuit_text

_ISLAND = """
title = "a switch between two capacitor-less nodes"

[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["1e-3 s", "5 V"]] }
R2 = { kind = "resistor", nodes = ["in", "a"], value = "1 kohm" }
S3 = { kind = "switch", state = "closed", nodes = ["a", "b"] }
R4 = { kind = "resistor", nodes = ["b", "gnd"], value = "470 kohm" }
R5 = { kind = "resistor", nodes = ["in", "c"], value = "1 kohm" }
C6 = { kind = "capacitor", nodes = ["c", "gnd"], value = "1 uF" }

[[expect]]
node = "b"
at = "1e-3 s"
after = "1 V"
"""


def test_a_closed_switch_between_capacitor_less_nodes_keeps_its_conductance_on_one_row(
        monkeypatch):
    # a carrier's 1/r_s must sit on its own cutset row only (the tree formulation: Chua & Lin,
    # *Computer-Aided Analysis of Electronic Circuits*, ch. 4, fundamental cutsets; from memory);
    # the nodes a and b have no capacitance, so both are eliminated
    captured = []
    real = equations.assemble

    def spy(*args, **kwargs):
        out = real(*args, **kwargs)
        captured.append((out[0].toarray(), args[4]))   # (K_x, L_p of this model)
        return out

    monkeypatch.setattr(equations, "assemble", spy)
    reg = simulate.solve(parse_circuit(_ISLAND)).regularisation
    big = 0.5 / reg.r_series
    solved = [K for K, l_p in captured if l_p == reg.r_series * reg.t_pulse]  # not the pilot's
    assert solved
    for K in solved:
        rows = np.flatnonzero((np.abs(K) >= big).any(axis=1))
        # V1 and S3: each its own row, never a row of 1/r_s on two node coordinates
        assert rows.size == 2


def test_the_island_divider_after_the_step_is_the_hand_value():
    # hand KCL (common practice): b = 5 V x 470 k / 471 k, C6 plays no part in that branch
    solution = simulate.solve(parse_circuit(_ISLAND))
    hand = 5.0 * 470e3 / 471e3
    assert solution.features(Probe("node", ("b",)), 1).after == pytest.approx(hand, rel=1e-9)


def test_a_current_source_step_beside_a_picosecond_coil():
    # 882 at 600 us: I19 steps to 6.46 mA (n3 -> n1), V1 to -7.27 V.  Hand KCL just after the
    # step (common practice: the coil's current holds): the n7/s12 island (closed S13 between
    # two capacitor-less nodes) carries no current, so
    # v(n5) = v(n3) = v(n3)- - R4 I19 = 3.5123770 V - 58.5 ohm x 6.46 mA = 3.1344670 V
    from harness import closedform
    from tests.benchmarks import agree
    circuit = parse_circuit(circuit_text(882))
    exact, numeric = closedform.solve(circuit), simulate.solve(circuit)
    probe = Probe("node", ("n5",))
    hand = exact.features(probe, 4).before - 58.5 * 6.46e-3
    assert exact.features(probe, 4).after == pytest.approx(hand, rel=1e-9)
    assert numeric.features(probe, 4).before == pytest.approx(3.5123770, rel=1e-7)
    assert numeric.features(probe, 4).after == pytest.approx(hand, rel=tol.ENGINE_RELATIVE / 10)
    run = agree.run_one(882, seconds=120.0)
    assert not run["disagree"] and not run["errors"]


def _reference_668_n1() -> tuple[float, float]:
    """v(n1) of seed 668 at 3 us and 3.1 us (V), by mpmath's matrix exponential of the circuit's
    two-state model written by hand: S11 closed (n7 = s10), S17 open (n3 carries nothing), the
    ideal vcvs E21 holding y19 = -684 x18, so v(x18) = v_C22 / 685; states i(L15) and v(C22)."""
    mpmath.mp.dps = 30
    r2, r6, r8, r12, r16, r20 = (mpmath.mpf(x) for x in ("4.85e5", "1.46e5", "5.32e4", "325",
                                                          "988", "4780"))
    ind, cap, gain = mpmath.mpf("2.94e-5"), mpmath.mpf("2.83e-8"), mpmath.mpf(684)

    def nodes(i_l, v_c, v_in):   # KCL at n1 and at n7 (hand nodal analysis)
        v_x = v_c / (1 + gain)
        v1 = (-i_l + v_x / r20) / (1 / r2 + 1 / r20)
        v7 = (v_in / r8 + i_l) / (1 / r8 + 1 / (r12 + r6))
        return v1, v7, v_x

    def rates(i_l, v_c, v_in):   # L di/dt = v(n1) - v(m14), C dv/dt = i(R20)
        v1, v7, v_x = nodes(i_l, v_c, v_in)
        return (v1 - v7 - r16 * i_l) / ind, (v1 - v_x) / r20 / cap

    def advance(x, v_in, t):
        f0, fi, fc = rates(0, 0, v_in), rates(1, 0, 0), rates(0, 1, 0)
        a = mpmath.matrix([[fi[0], fc[0]], [fi[1], fc[1]]])
        x_inf = -mpmath.lu_solve(a, mpmath.matrix([f0[0], f0[1]]))
        return x_inf + mpmath.expm(a * t) * (x - x_inf)

    v_c0 = mpmath.mpf("2.31")    # 0-: C22 held, the coil a short (DC)
    i_l0 = mpmath.findroot(lambda i: (lambda n: n[0] - n[1] - r16 * i)(nodes(i, v_c0, 0)), 0)
    x1 = advance(mpmath.matrix([i_l0, v_c0]), 0, mpmath.mpf("3e-6"))
    x2 = advance(x1, mpmath.mpf("0.97"), mpmath.mpf("1e-7"))
    return float(nodes(x1[0], x1[1], 0)[0]), float(nodes(x2[0], x2[1], 0)[0])


def test_a_100_ns_interval_beside_a_closed_switch_island_is_the_matrix_exponential():
    # 668: the interval 3 us .. 3.1 us; the closed S11 joins the capacitor-less n7 and s10.
    # Reference: mpmath expm of the hand-written state model (above)
    from tests.benchmarks import agree
    at_3us, at_3_1us = _reference_668_n1()
    numeric = simulate.solve(parse_circuit(circuit_text(668)))
    probe = Probe("node", ("n1",))
    assert numeric.features(probe, 1).before == pytest.approx(at_3us, rel=1e-7)
    assert numeric.features(probe, 2).before == pytest.approx(at_3_1us, rel=1e-7)
    run = agree.run_one(668, seconds=120.0)
    assert not run["disagree"] and not run["errors"]
