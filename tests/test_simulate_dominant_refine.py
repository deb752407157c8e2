"""The numerical engine's one step of inverse iteration on a mode (``simulate.dominant._refined``)
is taken whole or not at all.

Reference: a 2 x 2 pencil K v = -λ M v with M = I and K = diag(1, -λ_j), whose modes are
λ_i = -1 with vector e_1 and λ_j with vector e_2 exactly (a diagonal pencil, by hand).  QZ's
vectors are stood in for by e_1 + ε e_2 (right) and e_1 + δ e_2 (left, u^H M): the error a badly
conditioned pair leaves in them.  With the shift σ = λ_i (1 + SHIFT), the step's
w = (K + σ M)^-1 M v = e_1/(σ − λ_i) + ε e_2/(σ − λ_j), and λ_j placed where
δ ε/(σ − λ_j) cancels all but 1e-6 of 1/(σ − λ_i) makes u^H M w nearly vanish: the Rayleigh
step's rate moves by 1e-2 of λ_i (rejected, ``REFINE_MOVE``) and w is e_2 a hundred times over.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import scipy.sparse as sparse

from harness.simulate import dominant as D

EPS = DELTA = 0.1


def _pencil():
    lam_i = -1.0
    sigma = lam_i * (1.0 + D.SHIFT)
    lam_j = sigma + DELTA * EPS * (sigma - lam_i) / (1.0 - 1e-6)
    stiffness = np.diag([-lam_i, -lam_j])
    sol = SimpleNamespace(_cache={}, layout=SimpleNamespace(carriers=(), part_index={}))
    system = SimpleNamespace(K_dc=sparse.csr_matrix(stiffness), M=sparse.identity(2, format="csr"))
    v = np.array([[1.0, 0.0], [EPS, 1.0]])                # columns: QZ's right vectors
    um = np.array([[1.0, DELTA], [0.0, 1.0]])             # rows: u_i^H M
    norm = np.sum(um * v.T, axis=1)
    modes = SimpleNamespace(lam=np.array([lam_i, lam_j], dtype=complex), v=v, um=um, norm=norm)
    return sol, system, modes


def _strength(w, um, norm, row):
    """|r w| |norm| / |u^H M w|: the strength ``observed_modes`` reads from a refined vector
    (reach 1)."""
    return abs(row @ w) * abs(norm) / abs(um @ w)


def test_a_rejected_step_keeps_qz_s_vector_as_well_as_its_rate():
    sol, system, modes = _pencil()
    stiffness, mass = system.K_dc.toarray(), system.M.toarray()
    sigma = modes.lam[0] * (1.0 + D.SHIFT)
    w = np.linalg.solve(stiffness + sigma * mass, mass @ modes.v[:, 0])
    moved = sigma - (modes.um[0] @ modes.v[:, 0]) / (modes.um[0] @ w)
    assert abs(moved - modes.lam[0]) > D.REFINE_MOVE          # the step is rejected
    row = np.array([0.0, 1.0])                                 # a probe that reads e_2 alone
    # read on the step's w, mode i (which the probe sees only through QZ's ε) would be
    # observed at ~1e7 of its scale: the neighbour's vector divided by a near-zero
    assert _strength(w, modes.um[0], modes.norm[0], row) > 1e6
    rate, vector = D._refined(sol, system, modes, 0)
    assert rate == modes.lam[0]
    np.testing.assert_array_equal(vector, modes.v[:, 0])
    assert _strength(vector, modes.um[0], modes.norm[0], row) < 1.0


def test_an_accepted_step_refines_rate_and_vector():
    # the same pencil without the neighbour at the shift (λ_j = -3): the step keeps the mode,
    # its vector's e_2 share falls by (σ − λ_i)/(σ − λ_j) ≈ 5e-9 and the rate is λ_i to
    # δ ε (σ − λ_i) ≈ 1e-10 (the left vector's error times the step's)
    sol, system, modes = _pencil()
    system.K_dc = sparse.csr_matrix(np.diag([1.0, 3.0]))
    modes.lam[1] = -3.0
    rate, vector = D._refined(sol, system, modes, 0)
    assert abs(rate - (-1.0)) < 1e-9
    assert abs(vector[1] / vector[0]) < 1e-8
