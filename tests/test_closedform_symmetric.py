"""The symmetric (eigh) route of the closed-form engine against its general route and sympy.

The general route (shift-invert, ordered Schur form, Sylvester decoupling) is the reference for
the random networks: the symmetric route must give the same features, jumps and waveforms to
1e-9 of the probe's scale.  A small ladder is checked against sympy's inverse Laplace transform
of the circuit's own nodal equations written by hand.
"""

from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

from closedform_circuits import C, I, R, S, V, across, circuit, node, through
from harness.closedform import response, solve, symmetric

REL = 1e-9


@pytest.fixture
def counting(monkeypatch):
    """Count the pencils the symmetric route decomposes (it returns None where it declines),
    with the route enabled for circuits of any size."""
    used = []
    real = symmetric.decompose
    monkeypatch.setattr(symmetric, "MIN_SIZE", 0)      # small test circuits take the route too

    def spy(g, c, null, c_rows=None, zeros=None):
        dec = real(g, c, null, c_rows, zeros)
        used.append(dec is not None)
        return dec

    monkeypatch.setattr(symmetric, "decompose", spy)
    return used


def _general(circ, monkeypatch):
    """Solve with the symmetric route switched off."""
    with monkeypatch.context() as m:
        m.setattr(response.symmetric, "decompose",
                  lambda g, c, null, c_rows=None, zeros=None: None)
        return solve(circ)


def _random_rc(seed: int, n: int | None = None):
    """A random RC network with the structures the reduction must handle: nodes without
    capacitance, a floating capacitor node (trapped charge), a current source, resistive and
    ideal switches (open: i = 0; closed: v = 0) and several events."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(3, 9)) if n is None else n
    nodes = [f"n{k}" for k in range(n)]
    parts = [V("V1", "src", "gnd", 0.0, [(0.0, 1.0), (2e-4, -0.5)]),
             R("Rs", "src", "n0", 100.0),
             I("I1", nodes[-1], "gnd", 0.0, [(3e-4, 1e-4)])]
    for k in range(1, n):
        parts.append(R(f"R{k}", nodes[k], nodes[int(rng.integers(0, k))],
                       float(10 ** rng.uniform(2, 4))))
    parts.append(R("Rg", nodes[int(rng.integers(0, n))], "gnd", float(10 ** rng.uniform(3, 4))))
    for k in range(n):
        if rng.random() < 0.6 or k == 0:
            parts.append(C(f"C{k}", nodes[k], "gnd", float(10 ** rng.uniform(-9, -7))))
    parts += [C("Ca", nodes[0], "fa", 1e-8, initial=0.2),                   # trapped charge
              C("Cb", "fa", "gnd", 2.2e-8, initial=-0.1),
              S("S1", nodes[-1], "gnd", False, [(1e-4, 1.0), (4e-4, 0.0)], on=50.0),
              S("S2", nodes[0], nodes[-1], False, [(2.5e-4, 1.0)], on=220.0, off=1e7),
              S("S3", nodes[1 % n], "gnd", False, [(5e-4, 1.0)], on=330.0),
              S("S4", nodes[-1], "q", True, [(1.5e-4, 0.0), (3.5e-4, 1.0)]),     # ideal
              R("Rq", "q", "gnd", 4.7e3)]
    probes = [node(x) for x in nodes] + [node("fa"), across("Cb"), through("Rs"),
                                         through("S1"), through("Ca"),
                                         through("S4"), node("q")]
    return circuit(*parts), probes


def _close(a, b, scale):
    if a is None or b is None:
        assert a is None and b is None, (a, b)
        return
    assert abs(a - b) <= REL * max(abs(a), abs(b), scale), (a, b)


def _check_routes_agree(circ, probes, monkeypatch):
    fast = solve(circ)
    ref = _general(circ, monkeypatch)
    scale = 1.0
    for k in range(len(circ.events)):
        for probe in probes:
            a, b = fast.features(probe, k), ref.features(probe, k)
            sc = 1e-3 if probe.kind == "through" else scale
            for name in ("before", "after", "final", "tau"):
                _close(getattr(a, name), getattr(b, name), sc if name != "tau" else 0.0)
            assert a.order == b.order and len(a.modes) == len(b.modes)
            for ta, tb in zip(a.modes, b.modes):
                _close(ta, tb, 0.0)
            start, end = fast.span(k)
            times = np.linspace(start, end, 40)[1:]
            np.testing.assert_allclose(fast.waveform(probe, k, times),
                                       ref.waveform(probe, k, times), rtol=0, atol=REL * sc)
        ja, jb = fast.jump(k), ref.jump(k)
        assert set(ja.charges) == set(jb.charges)
        for part, q in ja.charges.items():
            _close(q, jb.charges[part], 1e-14)
        _close(ja.energy, jb.energy, 1e-15)


@pytest.mark.parametrize("seed", range(12))
def test_random_rc_networks_match_the_general_route(seed, counting, monkeypatch):
    """Features, jumps and waveforms of random RC networks agree between both routes."""
    circ, probes = _random_rc(seed)
    _check_routes_agree(circ, probes, monkeypatch)
    assert counting and all(counting), "the symmetric route must handle every interval here"


def test_larger_network_takes_the_route_by_default(monkeypatch):
    """A 40-node random RC network (above MIN_SIZE) takes the symmetric route unpatched and
    agrees with the general one."""
    used = []
    real = symmetric.decompose
    monkeypatch.setattr(symmetric, "decompose",
                        lambda g, c, null, c_rows=None, zeros=None:
                        used.append(real(g, c, null, c_rows, zeros)) or used[-1])
    circ, probes = _random_rc(99, n=40)
    _check_routes_agree(circ, probes[-12:], monkeypatch)
    assert used and all(d is not None for d in used)


def test_trapped_charge_gives_a_zero_mode_and_the_conserved_final_value(counting):
    """Series capacitors with a floating middle node keep its charge (Q = C v, common practice):
    stepping 0 -> 1 V through R onto C1 (in-m) in series with C2 (m-gnd) charged to 0 ends at
    v(m) = C1/(C1 + C2) of the step, 1/3 V for C1 = 1 nF, C2 = 2 nF."""
    circ = circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]), R("R1", "in", "a", 1e3),
                   C("C1", "a", "m", 1e-9, initial=0.0), C("C2", "m", "gnd", 2e-9, initial=0.0))
    sol = solve(circ)
    assert counting and all(counting)
    f = sol.features(node("m"), 0)
    assert abs(f.final - 1.0 / 3.0) <= 1e-12
    _close(f.tau, 1e3 * (1e-9 * 2e-9 / 3e-9), 0.0)


def test_capacitor_loop_with_ideal_switch_falls_back(counting):
    """A closed ideal switch between two capacitors makes their voltages algebraic: the
    symmetric route declines and the general route gives charge sharing (common practice:
    V = (C1 V1 + C2 V2)/(C1 + C2), here (1 nF * 3 V)/(3 nF) = 1 V)."""
    circ = circuit(C("C1", "a", "gnd", 1e-9, initial=3.0), C("C2", "b", "gnd", 2e-9, initial=0.0),
                   S("S1", "a", "b", False, [(1e-3, 1.0)]), R("R1", "b", "gnd", 1e6))
    sol = solve(circ)
    assert False in counting
    assert abs(sol.features(node("b"), 1).after - 1.0) <= 1e-9


def test_two_section_ladder_matches_sympy_laplace(counting):
    """Two-section RC ladder stepped 0 -> 1 V: node voltages from sympy's inverse Laplace
    transform of the nodal equations (s C1 + 1/R1 + 1/R2) V1 - V2/R2 = Vin/R1,
    (s C2 + 1/R2) V2 - V1/R2 = 0 with Vin = 1/s."""
    r1, r2, c1, c2 = 1000, 2200, sp.Rational(1, 10**6), sp.Rational(47, 10**8)
    s, t = sp.symbols("s t", positive=True)
    v1, v2 = sp.symbols("v1 v2")
    eqs = [sp.Eq((s * c1 + sp.Rational(1, r1) + sp.Rational(1, r2)) * v1 - v2 / r2,
                 1 / (s * r1)),
           sp.Eq((s * c2 + sp.Rational(1, r2)) * v2 - v1 / r2, 0)]
    out = sp.solve(eqs, [v1, v2])[v2]
    ref = sp.inverse_laplace_transform(sp.apart(sp.simplify(out), s), s, t)
    ref = sp.lambdify(t, ref.subs(sp.Heaviside(t), 1), "numpy")
    circ = circuit(V("V1", "in", "gnd", 0.0, [(0.0, 1.0)]), R("R1", "in", "a", r1),
                   C("C1", "a", "gnd", float(c1)), R("R2", "a", "b", r2),
                   C("C2", "b", "gnd", float(c2)))
    sol = solve(circ)
    assert counting and all(counting)
    times = np.array([1e-4, 5e-4, 1e-3, 3e-3, 1e-2])
    want = np.array([float(ref(x)) for x in times])
    np.testing.assert_allclose(sol.waveform(node("b"), 0, times), want, rtol=0, atol=1e-12)
    f = sol.features(node("b"), 0)
    assert f.order == 2 and abs(f.final - 1.0) <= 1e-12
