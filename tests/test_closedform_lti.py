"""Closed-form engine against scipy.signal LTI step responses of random RC ladders.

The reference builds the ladder's state-space model by hand (capacitor voltages as states,
v_i' = ((v_(i-1) - v_i)/R_i - (v_i - v_(i+1))/R_(i+1)) / C_i, v_0 = the step input) and takes
its step response from ``scipy.signal.lsim`` (zero-order hold, exact for a step) and its poles
as the eigenvalues of that state matrix (numpy.linalg.eigvals).
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.signal as sig

from closedform_circuits import C, R, V, circuit, node
from harness.closedform import solve


def _ladder(rs, cs):
    parts = [V("V1", "n0", "gnd", 0.0, [(0.0, 1.0)])]
    for i, (r, c) in enumerate(zip(rs, cs), start=1):
        parts += [R(f"R{i}", f"n{i - 1}", f"n{i}", r), C(f"C{i}", f"n{i}", "gnd", c)]
    return circuit(*parts)


def _state_space(rs, cs):
    n = len(rs)
    a = np.zeros((n, n))
    b = np.zeros((n, 1))
    for i in range(n):
        a[i, i] -= 1 / (rs[i] * cs[i])
        if i == 0:
            b[0, 0] = 1 / (rs[0] * cs[0])
        else:
            a[i, i - 1] += 1 / (rs[i] * cs[i])
        if i + 1 < n:
            a[i, i] -= 1 / (rs[i + 1] * cs[i])
            a[i, i + 1] += 1 / (rs[i + 1] * cs[i])
    return sig.StateSpace(a, b, np.eye(n), np.zeros((n, 1)))


@pytest.mark.parametrize("seed", range(12))
def test_random_ladder_matches_lsim_step(seed):
    """Every node of a random 3-8 section ladder (R 100 ohm..100 kohm, C 1 nF..1 uF) vs lsim."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(3, 9))
    rs = 10 ** rng.uniform(2, 5, n)
    cs = 10 ** rng.uniform(-9, -6, n)
    sol = _ladder(rs, cs)
    sol = solve(sol)
    ss = _state_space(rs, cs)
    taus = np.sort(-1 / np.linalg.eigvals(ss.A).real)[::-1]
    got = np.array(sol.time_constants(0))
    np.testing.assert_allclose(got, taus, rtol=1e-6)
    times = np.geomspace(taus[-1], 5 * taus[0], 9)
    for tt in times:
        _, y, _ = sig.lsim(ss, U=[1.0, 1.0], T=[0.0, tt])
        for i in range(n):
            wave = sol.waveform(node(f"n{i + 1}"), 0, np.array([tt]))[0]
            assert abs(wave - y[-1, i]) <= 1e-7, (i, tt, wave, y[-1, i])


@pytest.mark.parametrize("seed", range(6))
def test_random_ladder_visible_modes_follow_residues(seed):
    """Visible modes of each node follow the modal amplitudes of the state-space model."""
    # With A = W diag(lambda) W^-1 (numpy.linalg.eig), node i's step response is
    # 1 + sum_j W[i, j] (W^-1 (0 - 1))_j e^(lambda_j t); a mode is visible when its amplitude
    # exceeds MODE_VISIBILITY (1e-6) of the 1 V swing.  Amplitudes within a factor 10 of that
    # threshold are not asserted either way.
    rng = np.random.default_rng(100 + seed)
    n = int(rng.integers(3, 9))
    rs = 10 ** rng.uniform(2, 5, n)
    cs = 10 ** rng.uniform(-9, -6, n)
    sol = solve(_ladder(rs, cs))
    lam, w = np.linalg.eig(_state_space(rs, cs).A)
    coef = np.linalg.solve(w, -np.ones(n))
    for i in range(n):
        f = sol.features(node(f"n{i + 1}"), 0)
        assert abs(f.final - 1.0) < 1e-9
        amps = np.abs(w[i] * coef)
        taus = -1 / lam.real
        clear = taus[amps > 1e-5]
        hidden = taus[amps < 1e-7]
        assert len(clear) <= f.order <= n - len(hidden)
        for tau in clear:
            assert np.min(np.abs(np.array(f.modes) - tau) / tau) < 1e-6
        for tau in hidden:
            assert not f.modes or np.min(np.abs(np.array(f.modes) - tau) / tau) > 1e-6
