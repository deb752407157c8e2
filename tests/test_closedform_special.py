"""Closed-form engine on the hard cases: wide time-constant spans, repeated modes, unbounded
growth, growing modes, interrupted inductors, trapped flux, initial-state errors, Thevenin.

References: sympy (exact eigenvalues, inverse Laplace transforms of hand-written s-domain
equations), Thevenin's theorem and Kirchhoff's laws (textbook facts, common practice).
"""

from __future__ import annotations

import ast
import pathlib

import numpy as np
import pytest
import sympy as sp

from closedform_circuits import (C, E, I, L, R, S, V, across, between, circuit, node, through)
from harness.closedform import solve
from harness.errors import InitialStateError
from harness.messages import text as said
from harness.results import FLOATING_NODES, NO_DC_PATH, UNDAMPED_OSCILLATION

s, t = sp.symbols("s t", positive=True)


def _rel(a, b):
    return abs(a - b) / max(abs(a), abs(b))


def _ilt(expr):
    out = sp.inverse_laplace_transform(sp.apart(sp.simplify(expr), s), s, t)
    return out.subs(sp.Heaviside(t), 1)


def test_independent_sections_from_1ps_to_1000s_classify():
    """Three RC sections with tau = 1 ps, 1 us and 1000 s on one source: each is first order."""
    # source: tau = R C of an RC section driven by an ideal source (textbook, common practice)
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]),
                        R("R1", "in", "a", 1.0), C("C1", "a", "gnd", 1e-12),
                        R("R2", "in", "b", 1e3), C("C2", "b", "gnd", 1e-9),
                        R("R3", "in", "c", 1e6), C("C3", "c", "gnd", 1e-3)))
    for name, tau in (("a", 1e-12), ("b", 1e-6), ("c", 1e3)):
        f = sol.features(node(name), 0)
        assert f.order == 1 and _rel(f.tau, tau) < 1e-6, (name, f)
    assert all(_rel(a, b) < 1e-6 for a, b in zip(sol.time_constants(0), (1e3, 1e-6, 1e-12)))
    assert sol.span(0)[1] == pytest.approx(1e4, rel=1e-6)


def test_coupled_1ps_and_1000s_modes_match_sympy_roots():
    """Coupled ladder R1 C1 = 1 ps, R2 C2 = 1000 s: both modes equal sympy's exact roots."""
    r1, c1, r2, c2 = sp.Integer(1), sp.Rational(1, 10**12), sp.Integer(1000), sp.Integer(1)
    a = sp.Matrix([[-1 / (r1 * c1) - 1 / (r2 * c1), 1 / (r2 * c1)],
                   [1 / (r2 * c2), -1 / (r2 * c2)]])
    exact = sorted((float(-1 / lam) for lam in a.eigenvals()), reverse=True)
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]), R("R1", "in", "n1", 1.0),
                        C("C1", "n1", "gnd", 1e-12), R("R2", "n1", "n2", 1e3),
                        C("C2", "n2", "gnd", 1.0)))
    got = sol.time_constants(0)
    assert len(got) == 2 and all(_rel(g, e) < 1e-6 for g, e in zip(got, exact))
    f1, f2 = sol.features(node("n1"), 0), sol.features(node("n2"), 0)
    assert f1.order == 2 and f1.tau is None
    assert f2.order == 1 and _rel(f2.tau, exact[0]) < 1e-6
    # n1 jumps to R2/(R1+R2) within picoseconds (divider of R1, R2 while C2 still holds 0 V)
    v = sol.waveform(node("n1"), 0, np.array([1e-9]))[0]
    assert abs(v - 1000 / 1001) < 1e-6


def test_identical_sections_merge_into_one_mode():
    """Identical independent RC sections: one tau per probe, order 1, difference order 0."""
    # source: each section is v = V (1 - e^(-t/RC)) (textbook); differences of such sections are
    # single exponentials with the same RC
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]),
                        V("V2", "in2", "gnd", 0.0, [(0.0, 3.0)]),
                        R("R1", "in", "a", 1e3), C("C1", "a", "gnd", 1e-6),
                        R("R2", "in2", "b", 1e3), C("C2", "b", "gnd", 1e-6),
                        R("R3", "in", "c", 1e3), C("C3", "c", "gnd", 1e-6)))
    assert sol.time_constants(0) == pytest.approx((1e-3, 1e-3, 1e-3), rel=1e-9)
    modes = [m for m in sol.interval_modes(0) if m.kind == "decaying"]
    assert len(modes) == 1 and modes[0].multiplicity == 3
    f = sol.features(between("a", "b"), 0)          # 1 - 3 (1 - e^-t/tau): one exponential
    assert f.order == 1 and f.tau == pytest.approx(1e-3, rel=1e-9)
    assert f.final == pytest.approx(-2.0, rel=1e-12)
    g = sol.features(between("a", "c"), 0)           # identically zero
    assert g.order == 0 and g.modes == ()


def test_unbounded_growth_warns_and_keeps_exact_ramp():
    """1 mA into C1 || (R + C2) with no DC path: ramp plus a mode, from the inverse Laplace."""
    i0, c1, c2, r = sp.Rational(1, 1000), sp.Rational(1, 10**6), sp.Rational(2, 10**6), 1000
    z = 1 / (s * c1 + 1 / (r + 1 / (s * c2)))
    va = i0 / s * z
    i_r = va / (r + 1 / (s * c2))
    sol = solve(circuit(I("I1", "gnd", "a", 0.0, [(0.0, 1e-3)]), C("C1", "a", "gnd", 1e-6, 0.0),
                        R("R1", "a", "b", 1e3), C("C2", "b", "gnd", 2e-6, 0.0)))
    assert any(h.code == "unbounded-growth" and "I1" in h.parts and "a" in h.nodes
               for h in sol.hazards)
    f = sol.features(node("a"), 0)
    assert f.final is None
    assert any(n.code == NO_DC_PATH and "without bound" in said(n) for n in f.notes)
    ref = sp.lambdify(t, _ilt(va))
    times = np.array([1e-4, 1e-3, 5e-3])
    got = sol.waveform(node("a"), 0, times)
    assert np.max(np.abs(got - [float(ref(x)) for x in times])) < 1e-9 * 5
    # the resistor current settles: I C2/(C1 + C2) by the final-value theorem
    g = sol.features(through("R1"), 0)
    assert g.final == pytest.approx(float(sp.limit(s * i_r, s, 0)), rel=1e-9)
    assert g.tau == pytest.approx(float(r * c1 * c2 / (c1 + c2)), rel=1e-9)


def test_growing_mode_warns_and_final_is_none():
    """Positive feedback through a vcvs: C v' = (V - v)/2k + v/1k grows as e^(t/(2k C))."""
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]), R("R1", "in", "a", 2e3),
                        C("C1", "a", "gnd", 1e-6), E("E1", "o", "gnd", 2.0, "a", "gnd"),
                        R("R2", "o", "a", 1e3)))
    f = sol.features(node("a"), 0)
    assert f.final is None and f.order == 0
    assert any(h.code == "unbounded-growth" and "E1" in h.parts and
               h.values["e-folding"] == pytest.approx(2e-3, rel=1e-9) for h in sol.hazards)
    growing = [m for m in sol.interval_modes(0) if m.kind == "growing"]
    assert len(growing) == 1 and growing[0].rate.real == pytest.approx(1 / 2e-3, rel=1e-9)
    # exact: v' = (V + v)/(2k C) solved by hand: v = V (e^(t/tau) - 1), tau = 2 ms
    assert sol.waveform(node("a"), 0, np.array([2e-3]))[0] == pytest.approx(np.e - 1, rel=1e-9)


def test_lossless_lc_oscillates_without_a_final_value():
    """Series LC from a step: f = 1/(2 pi sqrt(L C)) (textbook), no decay, no final value."""
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]), L("L1", "in", "a", 1e-3),
                        C("C1", "a", "gnd", 1e-6)))
    f = sol.features(node("a"), 0)
    assert f.final is None and f.order == 0 and f.tau is None
    assert f.oscillation == pytest.approx((1 / (2 * np.pi * np.sqrt(1e-9)),), rel=1e-9)
    assert any(w.code == UNDAMPED_OSCILLATION and "undamped" in said(w) for w in sol.warnings)
    assert not sol.jump(0).charges and sol.jump(0).energy == pytest.approx(0.0, abs=1e-18)
    # v(t) = 1 - cos(w t) (the same textbook solution)
    w = 1 / np.sqrt(1e-9)
    times = np.array([1e-5, 7e-5, 2e-4])
    np.testing.assert_allclose(sol.waveform(node("a"), 0, times), 1 - np.cos(w * times),
                               atol=1e-9)


def test_growth_beyond_float_range_reads_none_without_crashing():
    """A growing mode left for 5000 e-folding times, then a step: None values and notes."""
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0), (10.0, 0.0)]),
                        R("R1", "in", "a", 2e3), C("C1", "a", "gnd", 1e-6),
                        E("E1", "o", "gnd", 2.0, "a", "gnd"), R("R2", "o", "a", 1e3)))
    f = sol.features(node("a"), 1)
    assert f.before is None and f.final is None and f.notes
    assert sol.jump(1).energy is None


def test_interrupted_inductor_warns_and_reports_the_flux():
    """Opening S1 at 5 ms cuts 2 A in L1 with no other path: warning, flux L I across S1."""
    sol = solve(circuit(V("V1", "in", "gnd", 10.0), R("R1", "in", "a", 5.0),
                        L("L1", "a", "b", 1e-3), S("S1", "b", "gnd", True, [(5e-3, 0.0)])))
    jump = sol.jump(1)
    assert jump.forced == {"L1": (pytest.approx(2.0, rel=1e-12), 0.0)} and jump.opened == ("S1",)
    assert jump.fluxes["S1"] == pytest.approx(1e-3 * 2.0, rel=1e-9)
    assert jump.energy == pytest.approx(0.5 * 1e-3 * 4.0, rel=1e-9)   # L I^2 / 2 into the arc
    f = sol.features(through("L1"), 1)
    assert f.before == pytest.approx(2.0, rel=1e-12) and abs(f.after) < 1e-9


def test_off_resistance_carries_the_inductor_current():
    """R_off = 1 kohm carries the 2 A on: v(S1, 0+) = 2 kV (KCL), tau = L/(R + R_off)."""
    sol = solve(circuit(V("V1", "in", "gnd", 10.0), R("R1", "in", "a", 5.0),
                        L("L1", "a", "b", 1e-3),
                        S("S1", "b", "gnd", True, [(5e-3, 0.0)], off=1e3)))
    assert not sol.warnings
    f = sol.features(across("S1"), 1)
    assert f.after == pytest.approx(2000.0, rel=1e-9)
    assert f.tau == pytest.approx(1e-3 / 1005.0, rel=1e-9)
    assert sol.features(through("L1"), 1).final == pytest.approx(10 / 1005, rel=1e-9)


def test_shorted_inductor_traps_its_current():
    """S1 closing across L1 traps its 2 A (lambda = 0); after V1 drops to 0 the loop keeps it."""
    sol = solve(circuit(V("V1", "in", "gnd", 10.0, [(2e-3, 0.0)]), R("R1", "in", "a", 5.0),
                        L("L1", "a", "gnd", 1e-3), R("R2", "a", "gnd", 5.0),
                        S("S1", "a", "gnd", False, [(1e-3, 1.0)])))
    f = sol.features(through("L1"), 1)
    assert f.final == pytest.approx(2.0, rel=1e-9) and f.order == 0
    assert any(m.kind == "constant" for m in sol.interval_modes(1))
    # after V1 drops: KCL at a, 0 = i(L1) + i(S1) + i(R2), with v(a) = 0 so i(R2) = 0
    assert sol.features(through("L1"), 2).final == pytest.approx(2.0, rel=1e-9)
    assert sol.features(through("S1"), 2).final == pytest.approx(-2.0, rel=1e-9)


def test_on_resistance_switch_discharge_follows_thevenin():
    """R_on closing across C: tau = (R || R_on) C, final V R_on/(R + R_on) (Thevenin)."""
    sol = solve(circuit(V("V1", "in", "gnd", 5.0), R("R1", "in", "a", 1e4),
                        C("C1", "a", "gnd", 1e-6),
                        S("S1", "a", "gnd", False, [(0.1, 1.0)], on=100.0)))
    f = sol.features(node("a"), 1)
    rp = 1e4 * 100 / (1e4 + 100)
    assert f.tau == pytest.approx(rp * 1e-6, rel=1e-9)
    assert f.final == pytest.approx(5 * 100 / 10100, rel=1e-9)
    assert f.before == pytest.approx(5.0, rel=1e-9) and f.after == pytest.approx(5.0, rel=1e-9)
    assert sol.thevenin(1)["C1"] == pytest.approx(rp, rel=1e-12)
    assert sol.thevenin(0)["C1"] == pytest.approx(1e4, rel=1e-12)


def test_thevenin_of_an_inductor_and_an_open_capacitor():
    """L sees R1 + (R2 || R3) with V shorted; a capacitor with no DC path sees an infinite R."""
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]), R("R1", "in", "a", 100.0),
                        R("R2", "a", "gnd", 300.0), R("R3", "a", "b", 600.0),
                        L("L1", "b", "gnd", 1e-3), C("C9", "b", "f", 1e-9, 0.0)))
    rth = sol.thevenin(0)
    assert rth["L1"] == pytest.approx(600 + 100 * 300 / 400, rel=1e-12)
    assert rth["C9"] == float("inf")


def test_capacitor_current_before_zero_with_initial_values():
    """C1 held at 2 V behind 1 kohm from 5 V: i(C1, 0-) = 3 mA from the resistive network at 0-."""
    sol = solve(circuit(V("V1", "in", "gnd", 5.0), R("R1", "in", "a", 1e3),
                        C("C1", "a", "gnd", 1e-6, initial=2.0)))
    f = sol.features(through("C1"), 0)
    assert f.before == pytest.approx(3e-3, rel=1e-12) and f.after == pytest.approx(3e-3, rel=1e-12)
    assert sol.features(node("a"), 0).before == pytest.approx(2.0, rel=1e-12)


def test_floating_node_between_open_switches_is_reported_not_fatal():
    """A node reached only through two open switches: a warning; closing S1 then gives v = V."""
    sol = solve(circuit(V("V1", "in", "gnd", 3.0), S("S1", "in", "m", False, [(1e-3, 1.0)]),
                        S("S2", "m", "gnd", False), R("R1", "in", "gnd", 1e3)))
    assert any(w.code == FLOATING_NODES and w.nodes == ("m",) and "undefined" in said(w)
               for w in sol.warnings)
    assert sol.features(node("m"), 1).after == pytest.approx(3.0, rel=1e-12)


@pytest.mark.parametrize("parts, culprit", [
    ((V("V1", "in", "gnd", 5.0), C("C1", "in", "gnd", 1e-6, initial=3.0)), "C1"),
    ((V("V1", "in", "gnd", 5.0), R("R1", "in", "a", 1e3), L("L1", "a", "b", 1e-3, initial=1.0),
      L("L2", "b", "gnd", 1e-3, initial=2.0)), "L"),
    ((V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]), C("C1", "in", "m", 1e-6),
      C("C2", "m", "gnd", 1e-6)), "C"),
])
def test_contradicting_or_undefined_initial_state_raises(parts, culprit):
    """Initial values that contradict the circuit, or an undefined pre-step value, name the part."""
    with pytest.raises(InitialStateError) as err:
        solve(circuit(*parts))
    assert err.value.part is not None and err.value.part.startswith(culprit)
    assert err.value.field == "initial"


def test_span_reaches_the_next_event_and_ten_tau():
    """span(k) ends at t_k + 10 tau, or at the next event when that comes later."""
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0), (0.5, 0.0)]),
                        R("R1", "in", "out", 1e3), C("C1", "out", "gnd", 1e-6)))
    assert sol.span(0) == pytest.approx((0.0, 0.5))
    assert sol.span(1) == pytest.approx((0.5, 0.51))


def test_engine_does_not_import_the_numerical_engine():
    """The closed-form package never imports harness.simulate (DESIGN: engines independent)."""
    pkg = pathlib.Path(__file__).resolve().parents[1] / "harness" / "closedform"
    for path in pkg.glob("*.py"):
        tree = ast.parse(path.read_text())
        for nd in ast.walk(tree):
            if isinstance(nd, ast.ImportFrom):
                mod = ("." * nd.level) + (nd.module or "")
                assert "simulate" not in mod, (path, mod)
            elif isinstance(nd, ast.Import):
                assert all("simulate" not in a.name for a in nd.names), path
