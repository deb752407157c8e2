"""Closed-form engine against sympy's exact solutions of the circuits' own differential equations.

Every reference here is derived inside the test from the circuit's equations written by hand
(Kirchhoff's laws, the part laws) and solved exactly by sympy: ``sympy.dsolve`` for first-order
ODEs, ``sympy.Matrix.exp`` for state-space systems, and ``sympy.inverse_laplace_transform`` of
the s-domain circuit with initial-condition sources (capacitor: impedance 1/(sC) with the term
C v(0-); the textbook way to handle jumps, e.g. charge sharing).
"""

from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

from closedform_circuits import (C, E, F, G, H, L, R, S, V, across, between, circuit, node,
                                 through)
from harness.closedform import solve

t, s = sp.symbols("t s", positive=True)
REL = 1e-9


def _close(a, b, rel=REL, scale=1.0):
    assert abs(a - b) <= rel * max(abs(a), abs(b), scale), (a, b)


def _check_wave(sol, probe, k, expr, times, scale):
    """Engine waveform vs the sympy expression of t (absolute time) at ``times``."""
    f = sp.lambdify(t, expr, "numpy")
    got = sol.waveform(probe, k, np.asarray(times))
    want = np.array([float(f(tt)) for tt in times])
    assert np.max(np.abs(got - want)) <= REL * scale, (got, want)


def _ilt(expr):
    """Inverse Laplace transform for t > 0 (Heaviside factors dropped)."""
    out = sp.inverse_laplace_transform(sp.apart(sp.simplify(expr), s), s, t)
    return sp.simplify(out.subs(sp.Heaviside(t), 1))


def test_rc_charge_matches_dsolve():
    """RC charging from a 5 V step: v(t) from dsolve of C v' = (V - v)/R, v(0) = 0."""
    r, c, v0 = sp.Rational(4700), sp.Rational(1, 10**6), sp.Integer(5)
    v = sp.Function("v")
    ref = sp.dsolve(sp.Eq(c * v(t).diff(t), (v0 - v(t)) / r), v(t), ics={v(0): 0}).rhs
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 5.0)]), R("R1", "in", "out", 4700),
                        C("C1", "out", "gnd", 1e-6)))
    tau = float(r * c)
    _check_wave(sol, node("out"), 0, ref, [0.1 * tau, tau, 3 * tau], 5.0)
    f = sol.features(node("out"), 0)
    _close(f.before, 0.0, scale=5)
    _close(f.after, float(ref.subs(t, 0)), scale=5)
    _close(f.final, float(sp.limit(ref, t, sp.oo)))
    _close(f.tau, tau)
    assert f.order == 1


def test_rl_with_initial_current_matches_dsolve():
    """RL from i(0) = 0.5 A toward 12 V / 10 ohm: dsolve of L i' + R i = V."""
    r, ell, v0, i0 = sp.Integer(10), sp.Rational(1, 100), sp.Integer(12), sp.Rational(1, 2)
    i = sp.Function("i")
    ref = sp.dsolve(sp.Eq(ell * i(t).diff(t) + r * i(t), v0), i(t), ics={i(0): i0}).rhs
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 12.0)]), R("R1", "in", "a", 10.0),
                        L("L1", "a", "gnd", 0.01, initial=0.5)))
    tau = float(ell / r)
    _check_wave(sol, through("L1"), 0, ref, [0.2 * tau, tau, 4 * tau], 1.2)
    f = sol.features(through("L1"), 0)
    _close(f.before, 0.5)
    _close(f.after, 0.5)
    _close(f.final, 1.2)
    _close(f.tau, tau)
    # across L1 at 0+: V - R i(0+) from the same equation
    _close(sol.features(across("L1"), 0).after, float(v0 - r * i0))


def test_charge_sharing_through_closing_switch_matches_laplace():
    """C1 = 1 uF at 5 V meets C2 = 3 uF at 1 V through an ideal switch, R to ground: s-domain."""
    c1, c2, v1, v2, r = sp.Rational(1, 10**6), sp.Rational(3, 10**6), 5, 1, sp.Integer(1000)
    # one node after closing: (C1 + C2) s V - (C1 v1 + C2 v2) + V / R = 0
    vs = (c1 * v1 + c2 * v2) / ((c1 + c2) * s + 1 / r)
    ref = _ilt(vs)
    sol = solve(circuit(C("C1", "a", "gnd", 1e-6, initial=5.0),
                        S("S1", "a", "b", False, [(0.0, 1.0)]),
                        C("C2", "b", "gnd", 3e-6, initial=1.0), R("R1", "b", "gnd", 1000.0)))
    tau = float(r * (c1 + c2))
    _check_wave(sol, node("a"), 0, ref, [0.5 * tau, 2 * tau], 5.0)
    f = sol.features(node("a"), 0)
    _close(f.before, 5.0)
    _close(f.after, float(sp.limit(s * vs, s, sp.oo)))        # initial-value theorem
    _close(f.tau, tau)
    _close(sol.features(node("b"), 0).before, 1.0)


def test_capacitive_divider_source_loop_jump_matches_laplace():
    """A 10 V step onto C1 in series with C2 || R2: v_m jumps by C1/(C1+C2) (s-domain)."""
    c1, c2, r2, v0 = sp.Rational(1, 10**6), sp.Rational(3, 10**6), sp.Integer(1000), 10
    vm = sp.solve(sp.Eq((sp.Symbol("x") - v0 / s) * s * c1 + sp.Symbol("x") * (s * c2 + 1 / r2),
                        0), sp.Symbol("x"))[0]
    i_source = -(v0 / s - vm) * s * c1             # p -> n through V1
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 10.0)]), C("C1", "in", "m", 1e-6),
                        C("C2", "m", "gnd", 3e-6), R("R2", "m", "gnd", 1000.0)))
    tau = float(r2 * (c1 + c2))
    _check_wave(sol, node("m"), 0, _ilt(vm), [0.3 * tau, tau, 3 * tau], 10.0)
    f = sol.features(node("m"), 0)
    _close(f.after, float(sp.limit(s * vm, s, sp.oo)))
    _close(f.after, 10.0 * 1 / 4)
    # the impulse weight of the source current: the constant of I(s) as s -> oo
    _close(sol.jump(0).charges["V1"], float(sp.limit(i_source, s, sp.oo)))


def test_series_capacitors_trapped_charge_match_laplace():
    """Series C1, C2 with initial voltages charged through R: x_inf set by the charge on node m."""
    c1, c2, r, v0 = sp.Rational(2, 10**6), sp.Rational(3, 10**6), sp.Integer(1000), 10
    v1, v2 = 1, 2
    va, vm = sp.symbols("va vm")
    eqs = [sp.Eq((va - v0 / s) / r + s * c1 * (va - vm) - c1 * v1, 0),
           sp.Eq(-(s * c1 * (va - vm) - c1 * v1) + s * c2 * vm - c2 * v2, 0)]
    res = sp.solve(eqs, [va, vm])
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 10.0)]), R("R1", "in", "a", 1000.0),
                        C("C1", "a", "m", 2e-6, initial=1.0),
                        C("C2", "m", "gnd", 3e-6, initial=2.0)))
    tau = float(r * c1 * c2 / (c1 + c2))
    _check_wave(sol, node("m"), 0, _ilt(res[vm]), [0.5 * tau, 2 * tau], 10.0)
    f = sol.features(node("m"), 0)
    final_ref = float(sp.limit(s * res[vm], s, 0))             # final-value theorem
    _close(f.final, final_ref)
    # the same from the conserved charge on node m: C2 vm - C1 (va - vm) = C2 v2 - C1 v1
    _close(f.final, float((c2 * v2 - c1 * v1 + c1 * v0) / (c1 + c2)))
    _close(f.tau, tau)
    _close(f.before, 2.0)


def test_two_section_ladder_matches_matrix_exponential():
    """Two-section RC ladder: x(t) = x_inf + expm(A t)(x0 - x_inf) with sympy's Matrix.exp."""
    r1, r2 = sp.Integer(1000), sp.Integer(2200)
    c1, c2 = sp.Rational(1, 10**6), sp.Rational(47, 10**8)
    a = sp.Matrix([[-1 / (r1 * c1) - 1 / (r2 * c1), 1 / (r2 * c1)],
                   [1 / (r2 * c2), -1 / (r2 * c2)]])
    x_inf = sp.Matrix([1, 1])
    x = x_inf + (a * t).exp() * (sp.Matrix([0, 0]) - x_inf)
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]), R("R1", "in", "n1", 1000.0),
                        C("C1", "n1", "gnd", 1e-6), R("R2", "n1", "n2", 2200.0),
                        C("C2", "n2", "gnd", 4.7e-7)))
    taus = sorted((float(-1 / sp.re(lam)) for lam in a.eigenvals()), reverse=True)
    times = [taus[1], taus[0], 3 * taus[0]]
    _check_wave(sol, node("n1"), 0, x[0], times, 1.0)
    _check_wave(sol, node("n2"), 0, x[1], times, 1.0)
    f = sol.features(node("n2"), 0)
    assert f.order == 2 and f.tau is None
    for got, want in zip(f.modes, taus):
        _close(got, want)
    for got, want in zip(sol.time_constants(0), taus):
        _close(got, want)


def test_miller_vcvs_matches_dsolve_and_thevenin():
    """Inverting gain -A with feedback capacitor: C_eff = (1 + A) C, R_th = R (1 + A) exactly."""
    r, cf, gain, v0 = sp.Integer(10000), sp.Rational(1, 10**9), 99, 1
    va = sp.Function("va")
    # KCL at a: (V - va)/R = Cf d(va - vo)/dt with vo = -A va
    ref = sp.dsolve(sp.Eq((v0 - va(t)) / r, cf * (1 + gain) * va(t).diff(t)), va(t),
                    ics={va(0): 0}).rhs
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]), R("R1", "in", "a", 1e4),
                        C("Cf", "a", "out", 1e-9), E("E1", "out", "gnd", -99.0, "a", "gnd")))
    tau = float(r * cf * (1 + gain))
    _check_wave(sol, node("a"), 0, ref, [0.5 * tau, 2 * tau], 1.0)
    _check_wave(sol, node("out"), 0, -gain * ref, [0.5 * tau, 2 * tau], 100.0)
    _close(sol.thevenin(0)["Cf"], float(r * (1 + gain)), rel=1e-12)
    _close(sol.features(node("out"), 0).tau, sol.thevenin(0)["Cf"] * 1e-9)


def test_miller_vccs_matches_dsolve_and_open_circuit_resistance():
    """Transconductance stage with Cf from input to output: R_th = Rs + Ro + gm Rs Ro."""
    rs, ro, gm, cf, v0 = sp.Integer(1000), sp.Integer(5000), sp.Rational(1, 100), \
        sp.Rational(1, 10**9), 1
    vc, ic = sp.Function("vc"), sp.Symbol("ic")
    # va = V - Rs ic, vo = va - vc, ic = gm va + vo/Ro (KCL at the output), Cf vc' = ic
    va = v0 - rs * ic
    ic_of = sp.solve(sp.Eq(ic, gm * va + (va - vc(t)) / ro), ic)[0]
    ref = sp.dsolve(sp.Eq(cf * vc(t).diff(t), ic_of), vc(t), ics={vc(0): 0}).rhs
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]), R("Rs", "in", "a", 1000.0),
                        C("Cf", "a", "o", 1e-9), G("G1", "o", "gnd", 0.01, "a", "gnd"),
                        R("Ro", "o", "gnd", 5000.0)))
    rth = float(rs + ro + gm * rs * ro)
    _close(sol.thevenin(0)["Cf"], rth, rel=1e-12)
    tau = rth * 1e-9
    _check_wave(sol, across("Cf"), 0, ref, [0.5 * tau, 2 * tau], 1.0)
    _close(sol.features(across("Cf"), 0).tau, tau)


def test_current_controlled_sources_match_dsolve():
    """cccs mirroring a source current into R || C, ccvs sensing a resistor current."""
    r1, r2, cc, beta, v0 = sp.Integer(1000), sp.Integer(2000), sp.Rational(1, 10**6), 3, 2
    v = sp.Function("v")
    i_v1 = -sp.Integer(v0) / r1                      # p -> n through V1 after the step
    ref = sp.dsolve(sp.Eq(cc * v(t).diff(t) + v(t) / r2, -beta * i_v1), v(t), ics={v(0): 0}).rhs
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 2.0)]), R("R1", "in", "gnd", 1000.0),
                        F("F1", "out", "gnd", 3.0, "V1"), R("R2", "out", "gnd", 2000.0),
                        C("C2", "out", "gnd", 1e-6),
                        H("H1", "h", "gnd", 500.0, "R1"), R("R3", "h", "hh", 100.0),
                        C("C3", "hh", "gnd", 1e-7)))
    tau = float(r2 * cc)
    _check_wave(sol, node("out"), 0, ref, [0.5 * tau, 2 * tau], 12.0)
    # ccvs: v(h) = 500 * i(R1) = 500 * 2 / 1000 = 1 V at once; hh charges with 100 ohm * 0.1 uF
    vh = sp.Function("vh")
    ref_h = sp.dsolve(sp.Eq(sp.Rational(1, 10**7) * vh(t).diff(t), (1 - vh(t)) / 100), vh(t),
                      ics={vh(0): 0}).rhs
    _check_wave(sol, node("hh"), 0, ref_h, [1e-5, 3e-5], 1.0)
    _close(sol.features(node("h"), 0).after, 1.0)


def test_two_step_pulse_matches_piecewise_dsolve():
    """5 V pulse of width 0.5 tau into RC: second interval starts from the first one's end."""
    r, c = sp.Integer(1000), sp.Rational(1, 10**6)
    tau = r * c
    t1 = tau / 2
    v = sp.Function("v")
    up = sp.dsolve(sp.Eq(c * v(t).diff(t), (5 - v(t)) / r), v(t), ics={v(0): 0}).rhs
    v_t1 = up.subs(t, t1)
    down = sp.dsolve(sp.Eq(c * v(t).diff(t), (0 - v(t)) / r), v(t), ics={v(t1): v_t1}).rhs
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 5.0), (float(t1), 0.0)]),
                        R("R1", "in", "out", 1000.0), C("C1", "out", "gnd", 1e-6)))
    _check_wave(sol, node("out"), 0, up, [float(t1) / 2], 5.0)
    _check_wave(sol, node("out"), 1, down, [float(t1) * 1.5, float(t1) * 4], 5.0)
    f = sol.features(node("out"), 1)
    _close(f.before, float(v_t1))
    _close(f.after, float(v_t1))
    _close(f.final, 0.0, scale=5.0)
    _close(f.tau, float(tau))
    # the resistor current jumps at the falling edge: from (5 - v)/R to -v/R
    g = sol.features(through("R1"), 1)
    _close(g.before, float((5 - v_t1) / r))
    _close(g.after, float(-v_t1 / r))


def test_underdamped_rlc_complex_modes_match_dsolve():
    """Series RLC step: complex pair, envelope tau = 2L/R and frequency from sympy's roots."""
    r, ell, cc = sp.Integer(10), sp.Rational(1, 1000), sp.Rational(1, 10**6)
    v = sp.Function("v")
    ode = sp.Eq(ell * cc * v(t).diff(t, 2) + r * cc * v(t).diff(t) + v(t), 1)
    ref = sp.dsolve(ode, v(t), ics={v(0): 0, v(t).diff(t).subs(t, 0): 0}).rhs
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]), R("R1", "in", "a", 10.0),
                        L("L1", "a", "b", 1e-3), C("C1", "b", "gnd", 1e-6)))
    _check_wave(sol, node("b"), 0, ref, [1e-5, 1e-4, 5e-4], 2.0)
    roots = sp.Poly(ell * cc * s**2 + r * cc * s + 1, s).nroots(n=30)
    f = sol.features(node("b"), 0)
    assert f.order == 2 and f.tau is None
    _close(f.modes[0], float(-1 / sp.re(roots[0])))
    _close(f.oscillation[0], float(abs(sp.im(roots[0])) / (2 * sp.pi)))
    _close(f.final, 1.0)


def test_defective_cascade_matches_inverse_laplace():
    """Two identical RC sections with a unity buffer between: 1/(s (1 + s tau)^2), a Jordan pair."""
    r, c = sp.Integer(1000), sp.Rational(1, 10**6)
    tau = r * c
    ref = _ilt(1 / (s * (1 + s * tau) ** 2))
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]), R("R1", "in", "a", 1000.0),
                        C("C1", "a", "gnd", 1e-6), E("E1", "b", "gnd", 1.0, "a", "gnd"),
                        R("R2", "b", "o", 1000.0), C("C2", "o", "gnd", 1e-6)))
    _check_wave(sol, node("o"), 0, ref, [0.5e-3, 1e-3, 4e-3], 1.0)
    f = sol.features(node("o"), 0)
    assert f.order == 2 and f.tau is None
    assert len(f.modes) == 1
    _close(f.modes[0], float(tau), rel=1e-6)
    assert sol.features(node("a"), 0).order == 1


@pytest.mark.parametrize("probe", [between("in", "out"), across("R1")])
def test_between_and_across_agree_with_dsolve(probe):
    """v(in) - v(out) across the resistor of an RC charge: V e^(-t/tau) from dsolve."""
    r, c = sp.Integer(1000), sp.Rational(1, 10**6)
    v = sp.Function("v")
    ref = sp.dsolve(sp.Eq(c * v(t).diff(t), (3 - v(t)) / r), v(t), ics={v(0): 0}).rhs
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 3.0)]), R("R1", "in", "out", 1000.0),
                        C("C1", "out", "gnd", 1e-6)))
    _check_wave(sol, probe, 0, 3 - ref, [5e-4, 2e-3], 3.0)
