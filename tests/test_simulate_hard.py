"""Numerical engine on the known hard cases (issue 3) against exact references.

* time constants six decades apart in one circuit (1 us and 1 s): independent branches checked
  against the first-order facts x(t) = x_inf + (x0 - x_inf) e^(-t/tau) (common practice), a
  coupled ladder against sympy's roots of its characteristic polynomial;
* a jump and a slow mode together (capacitive divider after a previous step);
* an interval shorter than its fastest mode (a 1 us pulse into a 1 ms RC), against the
  textbook piecewise solution;
* unbounded growth (a current source into a capacitor with no DC path: v = I t / C, the
  capacitor law) and a growing mode (positive feedback): no final value, a warning, no crash.
"""

from __future__ import annotations

import math

import numpy as np
import sympy as sp

from harness.simulate import solve
from harness.messages import text as said
from harness.results import UNSETTLED
from simulate_builder import circuit, close, node, part, step_source, through

s = sp.symbols("s")




def _two_branches():
    """V1 steps 0 -> 2 V into R1-C1 (1 us) and R2-C2 (1 s), both from node in."""
    return circuit("six decades", step_source("V1", "in", "gnd", 0.0, (0.0, 2.0)),
                   part("R1", "resistor", "in", "a", 1e3), part("C1", "capacitor", "a", "gnd", 1e-9),
                   part("R2", "resistor", "in", "b", 1e6), part("C2", "capacitor", "b", "gnd", 1e-6))


def test_six_decades_independent_modes():
    """Each branch is first order with its own RC (1 us and 1 s) and heads to 2 V."""
    sol = solve(_two_branches())
    fa, fb = sol.features(node("a"), 0), sol.features(node("b"), 0)
    close(fa.tau, 1e-6)
    close(fb.tau, 1.0)
    close(fa.final, 2.0, 2.0)
    close(fb.final, 2.0, 2.0)
    close(fb.after, 0.0, 2.0)
    # the slow node is still at 2 (1 - e^(-1e-5)) after ten fast time constants
    value = sol.waveform(node("b"), 0, np.array([1e-5]))[0]
    assert abs(value - 2.0 * (1 - math.exp(-1e-5))) <= 1e-9 * 2.0
    # the source current is the sum of both branch currents: 2/R1 + 2/R2 just after the step
    close(sol.features(through("V1"), 0).after, -(2.0 / 1e3 + 2.0 / 1e6), 2e-3)


def test_six_decades_coupled_slowest_mode_matches_sympy():
    """R1-C1 (1 us) feeding R2-C2 (1 s): the slow node's time constant is the slower root of
    the characteristic polynomial (sympy), the fast node is not first order."""
    r1, c1, r2, c2 = 1e3, 1e-9, 1e6, 1e-6
    circ = circuit("coupled", step_source("V1", "in", "gnd", 0.0, (0.0, 1.0)),
                   part("R1", "resistor", "in", "a", r1), part("C1", "capacitor", "a", "gnd", c1),
                   part("R2", "resistor", "a", "b", r2), part("C2", "capacitor", "b", "gnd", c2))
    # nodal equations with the source shorted: det of the 2x2 admittance matrix
    Y = sp.Matrix([[s * c1 + 1 / r1 + 1 / r2, -1 / r2], [-1 / r2, s * c2 + 1 / r2]])
    roots = sp.Poly(Y.det(), s).nroots(n=30)
    slow = max(-1 / float(sp.re(r)) for r in roots)
    sol = solve(circ)
    fb = sol.features(node("b"), 0)
    close(fb.tau, slow)
    close(fb.final, 1.0)
    fa = sol.features(node("a"), 0)
    assert fa.tau is None and fa.modes and abs(fa.modes[0] / slow - 1) <= 1e-3


def test_jump_and_slow_mode_after_a_previous_step():
    """A divider stepped twice: at 2 ms the second step adds C1/(C1+C2) of its size to what is
    left of the first jump, v_a(2 ms-) = 0.5 e^(-1 ms / 2 ms) (first-order decay)."""
    c1 = c2 = 1e-6
    circ = circuit("divider twice", step_source("V1", "in", "gnd", 0.0, (1e-3, 1.0), (2e-3, 3.0)),
                   part("C1", "capacitor", "in", "a", c1), part("C2", "capacitor", "a", "gnd", c2),
                   part("R2", "resistor", "a", "gnd", 1e3))
    sol = solve(circ)
    f = sol.features(node("a"), 2)
    before = 0.5 * math.exp(-1e-3 / 2e-3)
    close(f.before, before, 3.0)
    close(f.after, before + 2.0 * c1 / (c1 + c2), 3.0)
    close(f.final, 0.0, 3.0)
    close(f.tau, 1e3 * (c1 + c2))


def test_interval_shorter_than_its_fastest_mode():
    """A 1 us pulse into a 1 ms RC: v(1 us) = 1 - e^(-1e-3), then it decays from there; the
    pulse interval's own final and tau are those of the held source."""
    circ = circuit("short pulse", step_source("V1", "in", "gnd", 0.0, (0.0, 1.0), (1e-6, 0.0)),
                   part("R1", "resistor", "in", "a", 1e3), part("C1", "capacitor", "a", "gnd", 1e-6))
    sol = solve(circ)
    f0, f1 = sol.features(node("a"), 0), sol.features(node("a"), 1)
    peak = 1 - math.exp(-1e-6 / 1e-3)
    close(f0.final, 1.0)
    close(f0.tau, 1e-3)
    close(f1.before, peak, 1.0)
    close(f1.after, peak, 1.0)
    close(f1.final, 0.0, 1.0)
    close(f1.tau, 1e-3)
    assert sol.span(0)[1] > 1e-2  # the held continuation ran well past the next event


def test_current_into_capacitor_grows_without_bound():
    """1 mA into 1 uF with no DC path ramps at I/C = 1000 V/s: no final value, a warning."""
    circ = circuit("ramp", step_source("I1", "gnd", "a", 0.0, (0.0, 1e-3), kind="current-source"),
                   part("C1", "capacitor", "a", "gnd", 1e-6, initial=0.0))
    sol = solve(circ)
    f = sol.features(node("a"), 0)
    assert f.final is None and f.notes
    assert sol.warnings and sol.warnings[0].code == UNSETTLED
    assert "grows without bound" in said(sol.warnings[0])
    t = np.array([1e-3, 2e-3])
    assert np.allclose(sol.waveform(node("a"), 0, t), 1e3 * t, rtol=1e-6)


def test_growing_mode_is_reported_not_integrated_forever():
    """A vcvs of gain 3 feeding back through R1 = R0 makes C1 grow as e^(t/RC): no final value."""
    circ = circuit("positive feedback", step_source("V1", "in", "gnd", 0.0, (0.0, 0.1)),
                   part("R0", "resistor", "in", "a", 1e3), part("C1", "capacitor", "a", "gnd", 1e-6),
                   part("E1", "vcvs", "o", "gnd", 3.0, control=("a", "gnd")),
                   part("R1", "resistor", "o", "a", 1e3))
    sol = solve(circ)
    assert sol.features(node("a"), 0).final is None
    assert sol.warnings
