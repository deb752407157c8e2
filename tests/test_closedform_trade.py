"""Closed-form engine against facts of the trade (each marked "common practice").

Crossing times are found by root-finding on the engine's own exact waveform (scipy.optimize.brentq)
and dissipated energies by integrating i^2 R over it (scipy.integrate.quad), so these checks test
the waveform itself, not a formula inside the engine.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq

from closedform_circuits import C, R, S, V, circuit, node, through
from harness.closedform import solve


def _rc(r=1e3, c=1e-6, v=1.0):
    return solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, v)]), R("R1", "in", "out", r),
                         C("C1", "out", "gnd", c)))


def _at(sol, probe, tt):
    return float(sol.waveform(probe, 0, np.array([tt]))[0])


def test_632_percent_at_one_tau():
    """Common practice: a first-order step response reaches 63.2 % (1 - e^-1) of its swing at
    t = tau."""
    sol = _rc(r=3.3e3, c=2.2e-6)
    tau = sol.features(node("out"), 0).tau
    assert _at(sol, node("out"), tau) == pytest.approx(1 - math.exp(-1), rel=1e-9)


def test_993_percent_after_five_tau():
    """Common practice: after 5 tau a first-order response is within 0.7 % (e^-5) of its final
    value."""
    sol = _rc(r=47e3, c=10e-9)
    tau = sol.features(node("out"), 0).tau
    assert _at(sol, node("out"), 5 * tau) == pytest.approx(1 - math.exp(-5), rel=1e-9)


def test_rise_time_is_tau_ln9():
    """Common practice: the 10-90 % rise time of a first-order response is tau ln 9 (~2.2 tau)."""
    sol = _rc(r=1e4, c=1e-7, v=5.0)
    tau = sol.features(node("out"), 0).tau
    f = lambda tt, lvl: _at(sol, node("out"), tt) - lvl
    t10 = brentq(f, 1e-12, 10 * tau, args=(0.5,), xtol=1e-15)
    t90 = brentq(f, 1e-12, 10 * tau, args=(4.5,), xtol=1e-15)
    assert abs((t90 - t10) / (tau * math.log(9)) - 1) < 1e-8


@pytest.mark.parametrize("r", [1.0, 1e3, 1e6])
def test_charging_through_any_resistance_dissipates_half_cv2(r):
    """Common practice: charging C from a step V through any R dissipates C V^2 / 2 in R."""
    c, v = 1e-6, 10.0
    sol = _rc(r=r, c=c, v=v)
    tau = r * c
    i = lambda tt: _at(sol, through("R1"), tt)
    heat, _ = quad(lambda tt: i(tt) ** 2 * r, 0, 40 * tau, limit=200, epsabs=0, epsrel=1e-10)
    assert abs(heat / (0.5 * c * v * v) - 1) < 1e-7


@pytest.mark.parametrize("r", [1e-2, 10.0, 1e5])
def test_charge_sharing_loses_half_c1c2_over_sum_dv2_whatever_r(r):
    """Common practice: charge sharing between C1 and C2 loses C1 C2/(C1+C2) dV^2 / 2 for any R."""
    c1, c2, v1, v2 = 2e-6, 0.5e-6, 12.0, 3.0
    sol = solve(circuit(C("C1", "a", "gnd", c1, initial=v1), S("S1", "a", "b", False, [(0.0, 1.0)]),
                        R("R1", "b", "c", r), C("C2", "c", "gnd", c2, initial=v2)))
    expected = 0.5 * c1 * c2 / (c1 + c2) * (v1 - v2) ** 2
    tau = sol.features(through("R1"), 0).tau
    i = lambda tt: _at(sol, through("R1"), tt)
    heat, _ = quad(lambda tt: i(tt) ** 2 * r, 0, 40 * tau, limit=200, epsabs=0, epsrel=1e-10)
    assert abs(heat / expected - 1) < 1e-7
    stored = sol.jump(0)
    assert abs(stored.energy) < 1e-12 * expected        # no impulse through a resistor


def test_ideal_charge_sharing_jump_energy():
    """Common practice: with an ideal switch the same C1 C2/(C1+C2) dV^2 / 2 is lost at once."""
    c1, c2, v1, v2 = 2e-6, 0.5e-6, 12.0, 3.0
    sol = solve(circuit(C("C1", "a", "gnd", c1, initial=v1), S("S1", "a", "b", False, [(0.0, 1.0)]),
                        C("C2", "b", "gnd", c2, initial=v2), R("R1", "b", "gnd", 1e3)))
    jump = sol.jump(0)
    expected = 0.5 * c1 * c2 / (c1 + c2) * (v1 - v2) ** 2
    assert abs(jump.energy / expected - 1) < 1e-9
    # the charge that moves: C1 C2/(C1+C2) dV through the switch, p -> n (a -> b)
    assert abs(jump.charges["S1"] / (c1 * c2 / (c1 + c2) * (v1 - v2)) - 1) < 1e-9


def test_step_onto_capacitor_divider_loses_half_cs_v2():
    """Common practice: a step V straight onto capacitors loses half the energy the source gives."""
    c1, c2, v = 1e-6, 3e-6, 10.0
    sol = solve(circuit(V("V1", "in", "gnd", 0.0, [(0.0, v)]), C("C1", "in", "m", c1),
                        C("C2", "m", "gnd", c2), R("R2", "m", "gnd", 1e3)))
    cs = c1 * c2 / (c1 + c2)
    jump = sol.jump(0)
    assert abs(jump.energy / (0.5 * cs * v * v) - 1) < 1e-9
    assert abs(sum(jump.stored_after.values()) / (0.5 * cs * v * v) - 1) < 1e-9
