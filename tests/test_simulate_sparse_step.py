"""The sparse per-step helpers give scipy's own floats: the mat-vec and mu / h * I - J against
scipy.sparse's operators (source: scipy.sparse, the expressions scipy.integrate.Radau
evaluates), SuperLU's factors of the shifted matrix against scipy.sparse.linalg.splu's, and
a whole Radau run with them against one without."""

import numpy as np
import pytest
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.integrate import Radau

from harness.simulate.sparse_step import ShiftedIdentity, factorise, matvec

#: Radau's real shift, scipy.integrate._ivp.radau MU_REAL (its closed form in that source);
#: the complex shift below is any complex scale of the same kind
_MU = 3.0 + 3.0 ** (2.0 / 3.0) - 3.0 ** (1.0 / 3.0)


def _jacobians(seed: int):
    rng = np.random.default_rng(seed)
    for _ in range(30):
        n = int(rng.integers(2, 80))
        jac = sp.random(n, n, density=rng.uniform(0.02, 0.3), random_state=rng, format="csc")
        jac.data -= 0.5
        if rng.uniform() < 0.5:
            jac = (jac - sp.diags(rng.uniform(1.0, 3.0, n))).tocsc()
        if rng.uniform() < 0.3:                      # unsorted row indices within columns
            order = np.concatenate([a + rng.permutation(b - a) for a, b in
                                    zip(jac.indptr[:-1], jac.indptr[1:])]).astype(int)
            jac = sp.csc_matrix((jac.data[order], jac.indices[order], jac.indptr.copy()),
                                shape=jac.shape)
        yield rng, jac


@pytest.mark.parametrize("seed", [0, 1])
def test_shifted_matrix_and_matvec_are_scipys(seed):
    for rng, jac in _jacobians(seed):
        shifted, eye = ShiftedIdentity(jac), sp.eye(jac.shape[0], format="csc")
        for _ in range(3):
            for scale in (_MU / rng.uniform(0.1, 10.0), complex(2.68, 3.05) / rng.uniform(0.1, 10)):
                ours, theirs = scale * shifted - jac, scale * eye - jac
                assert ours.dtype == theirs.dtype
                assert np.array_equal(ours.indptr, theirs.indptr)
                assert np.array_equal(ours.indices, theirs.indices)
                assert ours.data.tobytes() == theirs.data.tobytes()
        z = rng.normal(size=jac.shape[0])
        assert matvec(jac)(z).tobytes() == (jac @ z).tobytes()


@pytest.mark.parametrize("seed", [0, 1])
def test_factorisation_is_splus(seed):
    """The factorisation hook gives scipy.sparse.linalg.splu's factors (the same L, U and
    permutations, so the same solves) and counts each call, for real and complex shifts."""
    class Counter:
        nlu = 0
    counter = Counter()
    lu = factorise(counter)
    calls = 0
    for rng, jac in _jacobians(seed):
        shifted = ShiftedIdentity(jac)
        for scale in (_MU / rng.uniform(0.1, 10.0), complex(2.68, 3.05) / rng.uniform(0.1, 10)):
            matrix = scale * shifted - jac
            try:
                theirs = spla.splu(matrix)
            except RuntimeError:                  # singular: both refuse it
                with pytest.raises(RuntimeError):
                    lu(matrix)
                calls += 1
                continue
            ours = lu(matrix)
            calls += 1
            for a, b in ((ours.L, theirs.L), (ours.U, theirs.U)):
                assert a.data.tobytes() == b.data.tobytes()
                assert np.array_equal(a.indices, b.indices)
            assert np.array_equal(ours.perm_r, theirs.perm_r)
            assert np.array_equal(ours.perm_c, theirs.perm_c)
            b = rng.normal(size=jac.shape[0]).astype(matrix.dtype)
            assert ours.solve(b).tobytes() == theirs.solve(b).tobytes()
    assert counter.nlu == calls > 0


def test_a_zero_on_the_diagonal_takes_scipys_expression():
    jac = sp.csc_matrix(np.array([[2.0, 1.0], [0.0, -1.0]]))
    ours = 2.0 * ShiftedIdentity(jac) - jac
    theirs = 2.0 * sp.eye(2, format="csc") - jac
    assert ours.nnz == theirs.nnz == 2                 # the (0, 0) zero is dropped
    assert ours.data.tobytes() == theirs.data.tobytes()


def test_radau_run_unchanged():
    n = 60
    main = -2.0 * np.ones(n)
    jac = sp.diags([main, np.ones(n - 1), np.ones(n - 1)], [0, -1, 1], format="csc") * 1e3
    r = np.zeros(n)
    r[0] = 1e3

    def run(hooked: bool):
        product = matvec(jac) if hooked else jac.__matmul__
        solver = Radau(lambda _t, z: product(z) + r, 0.0, np.zeros(n), 1.0, jac=jac,
                       rtol=1e-7, atol=1e-12)
        if hooked:
            solver.I = ShiftedIdentity(solver.J)
        states = []
        while solver.status == "running":
            solver.step()
            states.append(solver.y.copy())
        return np.array(states), solver.nlu

    (ours, nlu_ours), (theirs, nlu_theirs) = run(True), run(False)
    assert nlu_ours == nlu_theirs > 2
    assert ours.tobytes() == theirs.tobytes()
