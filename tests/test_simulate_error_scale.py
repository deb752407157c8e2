"""The numerical engine's error scale per step (integrate._step_tolerances) and what it buys.

References: the rule's values worked out by hand below; the exact solution of a random RC
network's nodal ODE by scipy.linalg.eigh of its pencil (tests/benchmarks/numeric_accuracy.py
writes the ODE and the solution out) and scipy.integrate.solve_ivp's Radau at the engine's own
tolerances on that ODE.
"""

from __future__ import annotations

import numpy as np
import pytest

from harness import simulate
from harness.simulate.integrate import SWING_FLOOR, _step_tolerances


def test_step_tolerances_by_hand():
    """Four states at rtol 1e-7, atol 1e-12 (values worked out by hand):

    0. rising from 0 V towards 1 V (origin 1, z -0.9, so y = 0.1, the largest value so far):
       moving from its start, rtol scaled by 0.1 / 0.9, atol kept;
    1. a coordinate that reached 0.2 and now crosses 0 towards its final 0.01 (z -0.0105,
       y -0.0005): not moving from its start, plain rtol, atol raised to 0.03 * 1e-7 * 0.2
       (its largest deviation after the pulse) = 6e-10;
    2. a deviation decayed to 1e-3 of a 0.5 V swing: plain rtol, atol 0.03 * 1e-7 * 0.5
       = 1.5e-9;
    3. before the pulse has died its peak is the tolerance base atol / rtol = 1e-5: the floor
       0.03 * 1e-12 stays below atol, so atol is kept."""
    assert SWING_FLOOR == 0.03
    rtol, atol = 1e-7, np.full(4, 1e-12)
    origin = np.array([1.0, 0.01, 1.0, 0.0])
    z = np.array([-0.9, -0.0105, 1e-3, 2e-6])
    peak = np.array([0.9, 0.2, 0.5, 1e-5])
    reached = np.array([0.1, 0.2, 1.5, 2e-6])
    rel, abs_ = _step_tolerances(rtol, atol, origin, z, peak, reached)
    assert rel == pytest.approx([1e-7 * 0.1 / 0.9, 1e-7, 1e-7, 1e-7], rel=1e-15)
    assert abs_ == pytest.approx([1e-12, 6e-10, 1.5e-9, 1e-12], rel=1e-15)
    # no state moving: the scalar rtol (Radau takes it for every state alike)
    rel, abs_ = _step_tolerances(rtol, atol[1:3], origin[1:3], z[1:3], peak[1:3],
                                 reached[1:3])
    assert rel == 1e-7
    assert abs_ == pytest.approx([6e-10, 1.5e-9], rel=1e-15)


def test_random_network_within_a_bare_radau_at_equal_tolerance():
    """The 78-state random RC network of the accuracy benchmark (coordinates whose value
    crosses 0 late in the response, floating capacitors): the engine's largest error against
    the exact solution, over every capacitor node on the benchmark's two grids, is at most a
    bare Radau's (solve_ivp, analytic Jacobian) at the engine's own rtol and atol on the same
    ODE (measured: 9.6e-9 / 6.0e-9 V against 2.1e-8 V), in fewer than 520 steps (488 measured;
    580 when a coordinate crossing 0 was held to rtol of its value and every state to rtol of
    its deviation until all were within 1e-2 of their swing)."""
    from tests.benchmarks import numeric_accuracy as na
    circ = next(c for c in na.circuits(quick=True) if c.title == "random rc 100")
    jac, rhs, names, gr, cd, br = na.hand_network(circ)
    sol = simulate.solve(circ)
    at, t_end = na.reference(gr, cd, br)
    atol = na._node_atol(sol, names)
    bare = na.bare(jac, rhs, t_end, sol.rtol, atol, dense_output=True)
    for which, times in na.grids(10 * sol.regularisation.post_pulse, t_end).items():
        ref = at(times)
        engine_err = np.max(np.abs(na.engine_values(sol, names, times) - ref))
        bare_err = np.max(np.abs(bare.sol(times) - ref))
        assert engine_err <= bare_err, which
    assert sol.stats(0).steps < 520
