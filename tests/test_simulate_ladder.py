"""Numerical engine on uniform RC ladders against scipy.signal and the ladder's eigenvalues.

The reference state-space model is the textbook one, written in the test: node i of an N-section
ladder obeys C v_i' = (v_(i-1) - 2 v_i + v_(i+1))/R, the last node C v_N' = (v_(N-1) - v_N)/R,
with v_0 the source.  scipy.signal's LTI step response of that model, and numpy's eigenvalues of
its tridiagonal matrix, are the references; above 50 states the engine runs its sparse path.
"""

from __future__ import annotations

import numpy as np
import scipy.signal

from harness.simulate import solve
from simulate_builder import ladder, node


def ladder_state_space(n: int, r: float, c: float):
    """(A, B) of v' = A v + B v0 for the n-section ladder (the module docstring's equations)."""
    A = np.zeros((n, n))
    for i in range(n):
        A[i, i] = -2.0
        if i > 0:
            A[i, i - 1] = 1.0
        if i < n - 1:
            A[i, i + 1] = 1.0
    A[n - 1, n - 1] = -1.0
    B = np.zeros((n, 1))
    B[0, 0] = 1.0
    return A / (r * c), B / (r * c)


def test_ladder_waveform_matches_scipy_signal_step():
    """A 30-section ladder's first and last node follow scipy.signal's step response (1e-6 V)."""
    n, r, c = 30, 1e3, 1e-9
    A, B = ladder_state_space(n, r, c)
    system = scipy.signal.StateSpace(A, B, np.eye(n)[[0, n - 1]], np.zeros((2, 1)))
    times = np.linspace(0.0, 2e-3, 201)
    _, ref = scipy.signal.step(system, T=times)
    sol = solve(ladder(n, r, c))
    for j, name in enumerate(("n1", f"n{n}")):
        got = sol.waveform(node(name), 0, times[1:])
        assert np.max(np.abs(got - ref[1:, j])) <= 1e-6, name


def test_large_ladder_slowest_mode_and_final_value():
    """A 200-section ladder (sparse path) settles at 1 V with the slowest eigenvalue's tau."""
    n, r, c = 200, 1e3, 1e-9
    A, _ = ladder_state_space(n, r, c)
    slowest = -1.0 / np.max(np.linalg.eigvalsh(A))
    sol = solve(ladder(n, r, c))
    f = sol.features(node(f"n{n}"), 0)
    assert abs(f.final - 1.0) <= 1e-8
    assert f.tau is None and abs(f.modes[0] / slowest - 1.0) <= 1e-5
    stats = sol.stats(0)
    assert stats.steps > 0 and stats.nlu > 0


def test_projected_dense_output_equals_scipys_per_step_evaluation():
    """The dense output evaluated for many times at once, projected on a row (and on stacked
    rows), equals scipy's OdeSolution evaluated time by time and then projected (the
    reference), to rounding, on times spread over every step and at the step ends."""
    from harness.simulate.integrate import projected
    sol = solve(ladder(12, 1e3, 1e-9))
    run = sol.runs[0]
    rng = np.random.default_rng(5)
    rows = rng.standard_normal((3, run.z.shape[0]))
    s = np.concatenate([rng.uniform(0.0, run.end, 400), run.s])
    ref = rows @ run.dense(s)
    scale = np.abs(ref).max()
    np.testing.assert_allclose(projected(run.dense, rows, s), ref, rtol=0, atol=1e-13 * scale)
    np.testing.assert_allclose(projected(run.dense, rows[0], s), ref[0], rtol=0,
                               atol=1e-13 * scale)
