"""The numerical engine keeps its Jacobian sparse only where a sparse LU pays.

References: the LU factors of a tridiagonal matrix have no fill beyond its band (Golub & Van
Loan, *Matrix Computations*, 4th ed., sec. 4.3, from memory); a matrix with most entries
non-zero fills its factors almost completely.  Which form is faster was measured
(tests/benchmarks/RESULTS.md, "Numerical engine: sparse or dense").
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from harness.simulate import equations


def _tridiagonal(n: int) -> sp.csc_matrix:
    off = np.ones(n - 1)
    return sp.diags([off, np.full(n, -2.0), off], [-1, 0, 1], format="csc")


def test_a_ladders_banded_jacobian_stays_sparse():
    assert equations._stays_sparse(_tridiagonal(400))


def test_a_fill_heavy_jacobian_goes_dense():
    rng = np.random.default_rng(7)
    n = 120
    dense = rng.standard_normal((n, n)) * (rng.random((n, n)) < 0.3)
    dense -= np.diag(np.abs(dense).sum(axis=1) + 1.0)      # diagonally dominant, regular
    assert not equations._stays_sparse(sp.csc_matrix(dense))


def test_small_systems_stay_dense_whatever_their_pattern():
    assert not equations._stays_sparse(_tridiagonal(equations.SPARSE_ABOVE))
