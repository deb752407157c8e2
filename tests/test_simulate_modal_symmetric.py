"""The numerical engine's own modes by its symmetric route (``modal._symmetric``: eigh of the
Schur complement on the storage states, rates as Rayleigh quotients) and by QZ.

Reference: the n-section RC ladder driven at one end and open at the other has the rates
lambda_k = -4 sin^2((2k - 1) pi / (2 (2n + 1))) / RC, k = 1..n (the eigenvalues of the path
graph's Laplacian with one fixed and one free end, a textbook result of finite differences;
e.g. the discrete sine transform of type IV, here cited from memory and checked for n = 2 by
hand: RC lambda = -(3 -+ sqrt 5) / 2).  Both routes must give them; the symmetric one is
taken where the pencil is symmetric definite, QZ elsewhere (an inductor's incidence makes
the pencil non-symmetric).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from harness.simulate import modal, solve
from tests.simulate_builder import circuit, ladder, node, part, step_source

R, C = 1e3, 1e-9


def _exact(n: int) -> np.ndarray:
    k = np.arange(1, n + 1)
    return np.sort(-4.0 * np.sin((2 * k - 1) * np.pi / (2 * (2 * n + 1))) ** 2 / (R * C))


def _rates(sol) -> np.ndarray:
    return np.sort(modal.decompose(sol, sol.systems[0]).lam.real)


def test_two_sections_by_hand():
    """The reference formula itself at n = 2 against the hand-solved quadratic."""
    assert np.allclose(_exact(2) * R * C, np.sort([-(3 + math.sqrt(5)) / 2,
                                                   -(3 - math.sqrt(5)) / 2]), rtol=1e-15)


def test_symmetric_route_matches_the_ladder_rates(monkeypatch):
    n = 120
    sol = solve(ladder(n, R, C))
    system = sol.systems[0]
    K, M = system.K_dc.toarray(), system.M.toarray()
    carriers = [sol.layout.part_index[x] for x in sol.layout.carriers]
    M[carriers, :] = 0.0
    M[:, carriers] = 0.0
    assert modal._symmetric(K, M) is not None            # the route is taken
    eigh_rates = _rates(sol)
    assert np.max(np.abs(eigh_rates / _exact(n) - 1)) < 1e-13
    monkeypatch.setattr(modal, "SYMMETRIC_FROM", 10 ** 9)
    qz = solve(ladder(n, R, C))
    assert np.max(np.abs(_rates(qz) / _exact(n) - 1)) < 1e-10


def test_vectors_expand_the_response_like_qz(monkeypatch):
    """The far node's visible modes and order are the same by either route."""
    n = 80
    probe = node(f"n{n}")
    fast = solve(ladder(n, R, C)).features(probe, 0)
    monkeypatch.setattr(modal, "SYMMETRIC_FROM", 10 ** 9)
    slow = solve(ladder(n, R, C)).features(probe, 0)
    assert fast.order == slow.order and fast.order_bounds == slow.order_bounds
    assert fast.modes == pytest.approx(slow.modes, rel=1e-10)


def test_inductor_with_a_capacitor_is_left_to_qz():
    """Series RLC: the inductor's incidence rows (v = L di/dt against C dv/dt = -i) make the
    storage pencil skew, not symmetric."""
    circ = circuit("rlc", step_source("V1", "in", "gnd", 0.0, (0.0, 1.0)),
                   part("R1", "resistor", "in", "a", 10.0),
                   part("L1", "inductor", "a", "b", 1e-3),
                   part("C1", "capacitor", "b", "gnd", 1e-6))
    sol = solve(circ)
    system = sol.systems[0]
    K, M = system.K_dc.toarray(), system.M.toarray()
    carriers = [sol.layout.part_index[x] for x in sol.layout.carriers]
    M[carriers, :] = 0.0
    M[:, carriers] = 0.0
    assert modal._symmetric(K, M) is None
