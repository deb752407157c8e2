"""The engine's lean Radau step takes scipy's own steps, bit for bit: every accepted time,
state, derivative, interpolant and counter against scipy.integrate.Radau (the reference: the
same method run by scipy itself) on stiff linear systems with dense and sparse constant
Jacobians, tolerances changed between steps as the engine changes them, bounded and unbounded
steps, rejected steps and Newton failures."""

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.integrate import Radau

from harness.simulate.stepper import LeanRadau


def _system(seed: int, n: int, sparse: bool):
    """A stable stiff J (eigenvalues over ~6 decades) and a constant drive r."""
    rng = np.random.default_rng(seed)
    q, _ = np.linalg.qr(rng.normal(size=(n, n)))
    rates = -np.logspace(0, 6, n)
    jac = q @ np.diag(rates) @ q.T + 0.1 * rng.normal(size=(n, n))
    if sparse:
        band = np.abs(np.subtract.outer(np.arange(n), np.arange(n))) <= 2
        jac = sp.csc_matrix(np.where(band, jac, 0.0))
    return jac, rng.normal(size=n), rng


def _trace(cls, jac, r, z0, t_end, retune, **options):
    """Every accepted step of a run: (t, y, f, Q of the interpolant, nfev, nlu, njev)."""
    solver = cls(lambda _t, z: jac @ z + r, 0.0, z0, t_end, jac=jac, **options)
    steps = []
    while solver.status == "running" and len(steps) < 3000:
        if retune is not None:
            solver.rtol, solver.atol = retune(solver.y)
        solver.step()
        sol = solver.dense_output()
        steps.append((solver.t, solver.y.tobytes(), solver.f.tobytes(),
                      getattr(sol, "Q", np.zeros(0)).tobytes(), solver.nfev, solver.nlu,
                      solver.njev))
    return steps, solver.status


@pytest.mark.parametrize("seed,n,sparse", [(0, 8, False), (1, 30, False), (2, 70, True),
                                           (3, 5, False)])
@pytest.mark.parametrize("options", [
    {"rtol": 1e-7, "atol": 1e-12},
    {"rtol": 1e-4, "atol": 1e-6, "first_step": 1e-1},       # a first step far too long
    {"rtol": 1e-9, "atol": 1e-14, "first_step": 1e-9, "max_step": 1e-3},
])
def test_same_steps_as_scipy(seed, n, sparse, options):
    jac, r, rng = _system(seed, n, sparse)
    z0 = rng.normal(size=n)
    ours = _trace(LeanRadau, jac, r, z0, 2.0, None, **options)
    theirs = _trace(Radau, jac, r, z0, 2.0, None, **options)
    assert len(theirs[0]) > 5
    assert ours == theirs


def test_tolerances_changed_between_steps_as_the_engine_does():
    """Per-state rtol and atol arrays set before each step (integrate._step_tolerances): a
    scalar rtol where no state is singled out, arrays elsewhere."""
    jac, r, rng = _system(4, 12, False)
    z0 = rng.normal(size=12)

    def retune(y):
        small = np.abs(y) < 0.3
        rel = np.where(small, 1e-9, 1e-6) if small.any() else 1e-6
        return rel, np.full(y.size, 1e-12) + 1e-9 * np.abs(y).max()
    ours = _trace(LeanRadau, jac, r, z0, 3.0, retune, rtol=1e-6, atol=1e-12)
    theirs = _trace(Radau, jac, r, z0, 3.0, retune, rtol=1e-6, atol=1e-12)
    assert ours == theirs


def test_newton_failure_and_rejection_paths_are_scipys():
    """A huge first step on a fast transient: Newton fails and steps are rejected before the
    first is accepted; both solvers count the same evaluations and factorisations."""
    jac, r, rng = _system(5, 6, False)
    z0 = 1e3 * rng.normal(size=6)
    ours = _trace(LeanRadau, jac, r, z0, 1.0, None, rtol=1e-10, atol=1e-13, first_step=0.5)
    theirs = _trace(Radau, jac, r, z0, 1.0, None, rtol=1e-10, atol=1e-13, first_step=0.5)
    first_nlu = theirs[0][0][5]
    assert first_nlu > 2                                    # something was redone
    assert ours == theirs


def test_a_jacobian_function_is_refused():
    with pytest.raises(ValueError):
        LeanRadau(lambda _t, z: -z, 0.0, np.ones(2), 1.0, jac=lambda _t, z: -np.eye(2))
