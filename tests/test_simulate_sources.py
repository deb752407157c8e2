"""Numerical engine with controlled sources and initial conditions, against exact references.

References: the circuits' equations written by hand and solved by ``sympy.dsolve`` (first
order) or by sympy's exact linear solve (DC values); the initial-state rules of DESIGN.md
("Initial state"), whose violations must be InputErrors naming the part and field.
"""

from __future__ import annotations

import pytest
import sympy as sp

from harness.errors import InitialStateError
from harness.simulate import solve
from simulate_builder import circuit, close, first_order, node, part, step_source, through

t = sp.symbols("t", nonnegative=True)






def _check(sol, probe, expr, tau, scale):
    f = sol.features(probe, 0)
    close(f.after, float(expr.subs(t, 0)), scale)
    close(f.final, float(sp.limit(expr, t, sp.oo)), scale)
    close(f.tau, tau)


def test_vcvs_amplifier_into_rc():
    """E1 = 2 v(in) drives R1-C1: v_a = 2 V (1 - e^(-t/RC)) (dsolve of RC v' + v = 2 V)."""
    r, c, v = 1e3, 1e-7, 1.5
    circ = circuit("vcvs", step_source("V1", "in", "gnd", 0.0, (0.0, v)),
                   part("E1", "vcvs", "o", "gnd", 2.0, control=("in", "gnd")),
                   part("R1", "resistor", "o", "a", r), part("C1", "capacitor", "a", "gnd", c))
    _check(solve(circ), node("a"), first_order(sp.Float(r * c), 0, 2 * v), r * c, 2 * v)


def test_vccs_into_parallel_rc():
    """G1 drives g v(in) from ground into node a loaded by R || C: v_a = g V R (1 - e^(-t/RC))."""
    g, r, c, v = 2e-3, 5e3, 2e-8, 1.0
    circ = circuit("vccs", step_source("V1", "in", "gnd", 0.0, (0.0, v)),
                   part("Rin", "resistor", "in", "gnd", 1e3),
                   part("G1", "vccs", "gnd", "a", g, control=("in", "gnd")),
                   part("R1", "resistor", "a", "gnd", r), part("C1", "capacitor", "a", "gnd", c))
    _check(solve(circ), node("a"), first_order(sp.Float(r * c), 0, g * v * r), r * c, g * v * r)


def test_ccvs_senses_the_source_current():
    """H1 = rho i(V1) across C2 via R2: i(V1) = -V/R1 at DC, so v_b -> -rho V / R1."""
    rho, r1, r2, c2, v = 500.0, 1e3, 2e3, 1e-7, 2.0
    circ = circuit("ccvs", step_source("V1", "in", "gnd", 0.0, (0.0, v)),
                   part("R1", "resistor", "in", "gnd", r1),
                   part("H1", "ccvs", "o", "gnd", rho, control="V1"),
                   part("R2", "resistor", "o", "b", r2), part("C2", "capacitor", "b", "gnd", c2))
    expr = first_order(sp.Float(r2 * c2), 0, -rho * v / r1)
    _check(solve(circ), node("b"), expr, r2 * c2, rho * v / r1)


def test_cccs_mirrors_a_capacitor_charging_current():
    """F1 = 3 i(V1) from ground into R2: v_b = 3 i(V1) R2 with i(V1) = -(V/R1) e^(-t/R1C1)."""
    r1, c1, r2, v = 1e3, 1e-6, 100.0, 1.0
    circ = circuit("cccs", step_source("V1", "in", "gnd", 0.0, (0.0, v)),
                   part("R1", "resistor", "in", "a", r1), part("C1", "capacitor", "a", "gnd", c1),
                   part("F1", "cccs", "gnd", "b", 3.0, control="V1"),
                   part("R2", "resistor", "b", "gnd", r2))
    vc = first_order(sp.Float(r1 * c1), 0, v)
    i_v1 = -sp.Float(c1) * vc.diff(t)  # the source supplies the capacitor's charging current
    sol = solve(circ)
    _check(sol, node("b"), 3 * i_v1 * r2, r1 * c1, 3 * v / r1 * r2)
    _check(sol, through("V1"), i_v1, r1 * c1, v / r1)


def test_held_capacitor_with_dc_elsewhere():
    """C1 held at 1 V, C2 (no initial) takes the DC value of its divider: 10 V R3/(R2+R3)."""
    circ = circuit("initial", part("V1", "voltage-source", "in", "gnd", 10.0),
                   part("R1", "resistor", "in", "a", 1e3), part("C1", "capacitor", "a", "gnd", 1e-6,
                                                              initial=1.0),
                   part("R2", "resistor", "in", "b", 3e3), part("R3", "resistor", "b", "gnd", 1e3),
                   part("C2", "capacitor", "b", "gnd", 1e-6))
    sol = solve(circ)
    close(sol.features(node("a"), 0).before, 1.0, 10.0)
    close(sol.features(node("b"), 0).before, 2.5, 10.0)
    close(sol.features(through("R1"), 0).before, 9.0 / 1e3, 1e-2)  # (10 - 1) V / R1 at 0-
    close(sol.features(node("a"), 0).final, 10.0, 10.0)


def test_undefined_pre_step_voltage_is_an_input_error():
    """A capacitor on a node with no DC path and no initial value: InitialStateError naming it."""
    circ = circuit("floating", step_source("V1", "in", "gnd", 0.0, (0.0, 1.0)),
                   part("C1", "capacitor", "in", "a", 1e-6), part("C2", "capacitor", "a", "gnd", 1e-6))
    with pytest.raises(InitialStateError) as err:
        solve(circ)
    assert err.value.part in ("C1", "C2") and err.value.field == "initial"


def test_capacitor_held_against_a_source_is_an_input_error():
    """A capacitor held at 2 V straight across a 1 V source contradicts the circuit at 0-."""
    circ = circuit("contradiction", part("V1", "voltage-source", "in", "gnd", 1.0),
                   part("C1", "capacitor", "in", "gnd", 1e-6, initial=2.0),
                   part("R1", "resistor", "in", "gnd", 1e3))
    with pytest.raises(InitialStateError) as err:
        solve(circ)
    assert err.value.part in ("V1", "C1")


def test_series_inductors_with_different_currents_are_an_input_error():
    """Two inductors in series held at different currents contradict KCL at their node."""
    circ = circuit("series", part("R1", "resistor", "a", "gnd", 10.0),
                   part("L1", "inductor", "a", "m", 1e-3, initial=1.0),
                   part("L2", "inductor", "m", "gnd", 1e-3, initial=0.5))
    with pytest.raises(InitialStateError) as err:
        solve(circ)
    assert err.value.part in ("L1", "L2") and err.value.field == "initial"


def test_dc_values_before_the_first_step_match_an_exact_linear_solve():
    """Pre-step node voltages of a bridge with a vcvs equal sympy's exact nodal solution."""
    circ = circuit("bridge", part("V1", "voltage-source", "in", "gnd", 5.0),
                   part("R1", "resistor", "in", "a", 1e3), part("R2", "resistor", "a", "gnd", 2e3),
                   part("R3", "resistor", "in", "b", 3e3), part("R4", "resistor", "b", "gnd", 1e3),
                   part("E1", "vcvs", "o", "gnd", 4.0, control=("a", "b")),
                   part("R5", "resistor", "o", "b", 5e3))
    va, vb = sp.symbols("va vb")
    vo = 4 * (va - vb)
    sol_exact = sp.solve([(va - 5) / 1000 + va / 2000,
                          (vb - 5) / 3000 + vb / 1000 + (vb - vo) / 5000], [va, vb])
    sol = solve(circ)
    close(sol.features(node("a"), 0).before, float(sol_exact[va]), 5.0)
    close(sol.features(node("b"), 0).before, float(sol_exact[vb]), 5.0)
    close(sol.features(node("o"), 0).before, float(vo.subs(sol_exact)), 5.0)
