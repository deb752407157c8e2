"""Numerical engine on first-order circuits against sympy's exact solutions of their ODEs.

The references are the circuits' differential equations written by hand in each test (KCL and
the part laws of the ideal circuit) and solved by ``sympy.dsolve``; the engine's features,
waveforms and current probes must match them within the issue's target, 1e-5 relative with a
floor of 1e-9 of the largest source.
"""

from __future__ import annotations

import numpy as np
import pytest
import sympy as sp

from harness.simulate import NumericSolution, solve
from simulate_builder import circuit, close, first_order, node, part, rc, step_source, through

t = sp.symbols("t", nonnegative=True)






def test_rc_charging_matches_dsolve():
    """A step into R-C gives v = V (1 - e^(-t/RC)): before, after, final and tau match dsolve."""
    r, c, v = 4.7e3, 2.2e-7, 3.3
    sol = solve(rc(r, c, v))
    ref = first_order(sp.Float(r * c), 0, v)
    f = sol.features(node("a"), 0)
    close(f.before, 0.0, v)
    close(f.after, float(ref.subs(t, 0)), v)
    close(f.final, float(ref.subs(t, sp.oo)), v)
    close(f.tau, r * c)


def test_rc_waveform_matches_dsolve():
    """The whole held waveform of the RC node matches the dsolve expression within 1e-6 of V."""
    r, c, v = 1e3, 1e-6, 1.0
    sol = solve(rc(r, c, v))
    expr = sp.lambdify(t, first_order(sp.Float(r * c), 0, v), "numpy")
    times = np.linspace(1e-6, 8e-3, 400)
    assert np.max(np.abs(sol.waveform(node("a"), 0, times) - expr(times))) <= 1e-6 * v


def test_rc_one_tau_is_632_percent():
    """At one time constant the RC node reaches 63.2 % of the step (common practice, 1 - 1/e)."""
    sol = solve(rc(1e3, 1e-6, 1.0))
    value = sol.waveform(node("a"), 0, np.array([1e-3]))[0]
    assert abs(value - (1 - np.exp(-1))) <= 1e-6
    assert round(value, 3) == 0.632


def test_capacitor_and_source_currents():
    """Through C1 is C dv/dt = (V/R) e^(-t/RC); through V1 is its negative (passive sign)."""
    r, c, v = 1e3, 1e-6, 2.0
    sol = solve(rc(r, c, v))
    vc = first_order(sp.Float(r * c), 0, v)
    ic = sp.Float(c) * vc.diff(t)
    fc, fv = sol.features(through("C1"), 0), sol.features(through("V1"), 0)
    close(fc.after, float(ic.subs(t, 0)), v / r)
    close(fv.after, -float(ic.subs(t, 0)), v / r)
    close(fc.final, 0.0, v / r)
    close(fv.final, 0.0, v / r)
    close(fc.tau, r * c)
    times = np.linspace(1e-5, 5e-3, 50)
    ref = sp.lambdify(t, ic, "numpy")(times)
    assert np.max(np.abs(sol.waveform(through("C1"), 0, times) - ref)) <= 1e-6 * v / r


def test_rl_step_matches_dsolve():
    """A step into R-L: i = (V/R)(1 - e^(-tR/L)), v_L jumps to V and decays with tau = L/R."""
    r, l, v = 10.0, 1e-3, 1.0
    c = circuit("rl", step_source("V1", "in", "gnd", 0.0, (0.0, v)),
                part("R1", "resistor", "in", "a", r), part("L1", "inductor", "a", "gnd", l))
    sol = solve(c)
    i_ref = first_order(sp.Float(l / r), 0, v / r)
    vl_ref = sp.Float(l) * i_ref.diff(t)
    fi, fv = sol.features(through("L1"), 0), sol.features(node("a"), 0)
    close(fi.after, 0.0, v / r)
    close(fi.final, float(i_ref.subs(t, sp.oo)), v / r)
    close(fi.tau, l / r)
    close(fv.after, float(vl_ref.subs(t, 0)), v)
    close(fv.final, 0.0, v)
    close(fv.tau, l / r)


def test_rc_discharge_from_initial_voltage():
    """A capacitor held at 5 V at 0- discharges through R: v = 5 e^(-t/RC) (dsolve)."""
    r, c = 2e3, 5e-7
    circ = circuit("discharge", part("C1", "capacitor", "a", "gnd", c, initial=5.0),
                   part("R1", "resistor", "a", "gnd", r))
    sol = solve(circ)
    ref = first_order(sp.Float(r * c), 5, 0)
    f = sol.features(node("a"), 0)
    close(f.before, 5.0, 5.0)
    close(f.after, float(ref.subs(t, 0)), 5.0)
    close(f.final, 0.0, 5.0)
    close(f.tau, r * c)


def test_solution_protocol_and_counters():
    """The result names its engine, spans the settled response and counts integrator work."""
    sol = solve(rc())
    assert isinstance(sol, NumericSolution) and sol.engine == "numeric"
    t0, t1 = sol.span(0)
    # settled (within rtol 1e-7 = e^-16) only after ~16 τ, τ = 1 ms here (common practice: a
    # first-order step is within e^-n of its final value after n τ)
    assert t0 == 0.0 and t1 >= 16e-3
    stats = sol.stats(0)
    assert stats.steps > 0 and stats.nfev >= stats.steps and stats.nlu > 0 and stats.seconds > 0
    times, values = sol.samples(node("a"), 0)
    assert times.shape == values.shape and times[0] == 0.0 and np.all(np.diff(times) > 0)
    assert sol.warnings == ()


def test_unknown_probe_is_an_input_error():
    """A probe naming a node or part that does not exist raises InputError with field probe."""
    from harness.errors import InputError
    sol = solve(rc())
    with pytest.raises(InputError) as err:
        sol.features(node("nowhere"), 0)
    assert err.value.field == "probe"
    with pytest.raises(InputError):
        sol.features(through("R9"), 0)
