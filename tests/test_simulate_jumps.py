"""Numerical engine on impulsive steps: the narrow-pulse model against exact references.

References: sympy's s-domain solution of the ideal circuit (initial- and final-value theorems
and the pole give x(0+), x(inf) and tau without any charge-conservation argument); the textbook
facts of charge sharing (charge C1C2/(C1+C2) dV moves, 1/2 C1C2/(C1+C2) dV^2 is dissipated
whatever the resistance) and their duals for inductors (flux L1 i1 + L2 i2 is conserved when
two inductors are forced into series, 1/2 L1L2/(L1+L2) di^2 is dissipated).  Both facts are
from memory of standard circuit-theory texts.
"""

from __future__ import annotations

import pytest
import sympy as sp

from harness.simulate import solve
from simulate_builder import circuit, close, divider, node, part, sharing, through

s = sp.symbols("s", positive=True)




def divider_reference(c1, c2, r2, v):
    """(v_a(0+), v_a(inf), tau) of the divider from its s-domain KCL solved by sympy."""
    va = sp.symbols("va")
    vin = v / s
    eq = sp.Eq((va - vin) * s * c1 + va * s * c2 + va / r2, 0)
    Va = sp.solve(eq, va)[0]
    after = sp.limit(s * Va, s, sp.oo)
    final = sp.limit(s * Va, s, 0)
    z = sp.symbols("z")  # unrestricted, so the negative pole is found
    poles = sp.solve(sp.denom(sp.together(Va)).subs(s, z), z)
    tau = max(-1 / p for p in poles if p != 0)
    return float(after), float(final), float(tau)


def test_capacitive_divider_jump_and_slow_mode():
    """A step across C1 + (C2 || R2) jumps by C1/(C1+C2) and then decays with R2 (C1+C2)."""
    c1, c2, r2, v = 2.2e-6, 4.7e-6, 1e3, 5.0
    after, final, tau = divider_reference(c1, c2, r2, v)
    sol = solve(divider(c1, c2, r2, v))
    f = sol.features(node("a"), 1)
    close(f.before, 0.0, v)
    close(f.after, after, v)
    close(f.final, final, v)
    close(f.tau, tau)


def test_divider_pulse_charges():
    """The source and C1 carry the impulsive charge C1 dV_C1 = C1 C2/(C1+C2) V (Q = C dV)."""
    c1, c2, v = 1e-6, 3e-6, 2.0
    jump = solve(divider(c1, c2, 1e3, v)).jump(1)
    q = c1 * c2 / (c1 + c2) * v
    close(jump.charges["C1"], q, q)
    close(jump.charges["C2"], q, q)
    close(-jump.charges["V1"], q, q)  # the source delivers it: passive sign, p to n inside
    assert "R2" not in jump.charges
    assert jump.stored_before == {"C1": 0.0, "C2": 0.0}
    close(jump.stored_after["C1"], 0.5 * c1 * (v * c2 / (c1 + c2)) ** 2, 1e-12)


@pytest.mark.parametrize("ratio", [1e-5, 1e-6, 1e-7, 1e-8, 1e-9])
def test_charge_sharing_energy_over_four_decades(ratio):
    """Closing S1 between C1 at 1 V and C2 at 0 V dissipates 1/2 C1C2/(C1+C2) dV^2 (to 1e-4),
    for a regularising resistance swept over four decades."""
    c1, c2 = 1e-6, 3e-6
    sol = solve(sharing(c1, c2, 1.0, 0.0), pulse_ratio=ratio)
    jump = sol.jump(1)
    expected = 0.5 * c1 * c2 / (c1 + c2)
    assert abs(jump.energy - expected) <= 1e-4 * expected
    q = c1 * c2 / (c1 + c2)
    assert abs(jump.charges["S1"] - q) <= 1e-4 * q
    after = sol.features(node("b"), 1).after
    assert abs(after - c1 / (c1 + c2)) <= 1e-4


def test_charge_sharing_voltages_conserve_charge():
    """After sharing both nodes sit at (C1 V1 + C2 V2)/(C1 + C2) (charge conservation)."""
    c1, c2, v1, v2 = 4.7e-6, 1e-6, 3.0, -1.0
    sol = solve(sharing(c1, c2, v1, v2))
    shared = (c1 * v1 + c2 * v2) / (c1 + c2)
    for name in ("a", "b"):
        f = sol.features(node(name), 1)
        close(f.after, shared, 3.0)
        close(f.final, shared, 3.0)
    close(sol.features(node("a"), 1).before, v1, 3.0)


def test_jump_error_is_first_order_in_the_pulse_ratio():
    """Halving the regularising values at least halves the error of the divider's jump and of
    its pulse energy (1/2 C1C2/(C1+C2) V^2 for the ideal jump, the charge-sharing fact)."""
    after, _, _ = divider_reference(1e-6, 1e-6, 1e3, 1.0)
    energy = 0.5 * 0.5e-6 * 1.0 ** 2
    after_errors, energy_errors = [], []
    for ratio in (2e-3, 1e-3, 5e-4):
        sol = solve(divider(), pulse_ratio=ratio, rtol=1e-8)
        after_errors.append(abs(sol.features(node("a"), 1).after - after))
        energy_errors.append(abs(sol.jump(1).energy - energy))
    for errors in (after_errors, energy_errors):
        assert errors[0] >= 1.9 * errors[1] and errors[1] >= 1.9 * errors[2], errors


def _series_inductors(l1, l2, i1):
    """I1 (1 A into a) feeds L1 (a-m) then L2 (m-gnd); S1 across L2 opens at 1 ms, forcing
    L1 and L2 into series; R0 (a-gnd) takes the rest of I1."""
    return circuit("series inductors", part("I1", "current-source", "gnd", "a", i1),
                   part("R0", "resistor", "a", "gnd", 1e3),
                   part("L1", "inductor", "a", "m", l1, initial=i1),
                   part("L2", "inductor", "m", "gnd", l2, initial=0.0),
                   part("S1", "switch", "m", "gnd", closed=True, steps=((1e-3, 0.0),)))


def test_inductors_forced_into_series_conserve_flux():
    """Opening S1 forces L1 (1 A) and L2 (0 A) into series: i = L1 i1/(L1 + L2) (flux), then
    both head for 1 A with tau = (L1 + L2)/R0; the energy lost is 1/2 L1L2/(L1+L2) di^2."""
    l1, l2 = 1e-3, 3e-3
    sol = solve(_series_inductors(l1, l2, 1.0))
    shared = l1 * 1.0 / (l1 + l2)
    for name in ("L1", "L2"):
        f = sol.features(through(name), 1)
        close(f.after, shared, 1.0)
        close(f.final, 1.0, 1.0)
        close(f.tau, (l1 + l2) / 1e3)
    jump = sol.jump(1)
    expected = 0.5 * l1 * l2 / (l1 + l2) * 1.0 ** 2
    assert abs(jump.energy - expected) <= 1e-4 * expected
    close(jump.fluxes["L1"], l1 * (shared - 1.0), 1e-3)
    # the forced jump is reported as data: both coils, and the switch that carries the impulse
    assert set(jump.forced) == {"L1", "L2"} and jump.opened == ("S1",)
    close(jump.forced["L2"][1], shared, 1.0)


def test_no_jump_without_impulse():
    """A step through a resistor moves no impulsive charge and dissipates nothing at once."""
    from simulate_builder import rc
    jump = solve(rc()).jump(0)
    assert jump.charges == {} and abs(jump.energy) <= 1e-6 * 0.5e-6  # c_par holds ~eps of it
