"""The per-step sparse work of Radau with a constant sparse Jacobian, without scipy.sparse's
per-call wrapping, computing the same floats.

scipy.integrate.Radau, given a sparse Jacobian J (CSC, shape (n, n)), evaluates the right-hand
side J z + r at every Newton iteration and, at every new step size h, forms
``mu / h * I - J`` for mu = MU_REAL and MU_COMPLEX before factorising it with SuperLU.  At the
engine's sizes (100-1,000 states, a few nonzeros per column) the arithmetic of either takes a
few microseconds; the sparse operator dispatch, the format checks and the index-dtype
searches around it take several times that (the RC ladder of 100 sections: ~8 us per
mat-vec, ~0.1 ms per shifted matrix).

* ``matvec``: J z by the routine scipy's CSC ``@`` calls for a vector
  (``scipy.sparse._sparsetools.csc_matvec``, a private module: where it is missing the
  ordinary ``J @ z`` is used), into a fresh zero vector as ``@`` does, hence the same sums in
  the same order.
* ``ShiftedIdentity``: stands for Radau's identity ``I`` (``solver.I``, read only in those two
  expressions).  Its product with the scalar c = mu / h minus J is built on the pattern of
  I - J found once by scipy's own subtraction (``csr_minus_csr`` through ``_binopt``, which
  sorts and merges the two patterns and drops zero results): the data are the elementwise
  differences (c on the diagonal, 0 off it) - J, in the upcast dtype, as that routine
  computes them.  A step whose difference has a zero (c equal to a diagonal entry of J, or an
  explicit zero in J) takes scipy's own expression, which drops it.
* ``factorise``: Radau's ``lu`` hook, SuperLU's factorisation of such a matrix called as
  ``scipy.sparse.linalg.splu`` calls it (``_superlu.gstrf``, a private module, with splu's
  default options) once splu's own checks would pass it unchanged (CSC in canonical form,
  32-bit indices, float or complex data); anything else goes through splu (~20 us a call
  at 100 states, with Radau's ~2 factorisations per new step size).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

try:  # the routine behind scipy.sparse's CSC matrix-vector product
    from scipy.sparse._sparsetools import csc_matvec as _CSC_MATVEC
except ImportError:  # pragma: no cover - another scipy layout: the public operator
    _CSC_MATVEC = None
try:  # the factorisation behind scipy.sparse.linalg.splu
    from scipy.sparse.linalg._dsolve._superlu import gstrf as _GSTRF
except ImportError:  # pragma: no cover - another scipy layout: splu itself
    _GSTRF = None


def factorise(solver) -> object:
    """Radau's ``lu`` hook for a sparse Jacobian: A -> splu(A), counted in ``solver.nlu``
    as Radau's own hook counts it, the same factorisation (module docstring)."""
    def lu(A):
        solver.nlu += 1
        if (_GSTRF is None or A.format != "csc" or not A.has_canonical_format
                or A.indices.dtype != np.intc or A.indptr.dtype != np.intc
                or A.data.dtype not in (np.float64, np.complex128)
                or A.shape[0] != A.shape[1]):
            return spla.splu(A)
        return _GSTRF(A.shape[0], A.nnz, A.data, A.indices, A.indptr,
                      csc_construct_func=sp.csc_array, ilu=False,
                      options=dict(DiagPivotThresh=None, ColPerm=None, PanelSize=None,
                                   Relax=None))
    return lu


def matvec(jac) -> object:
    """A function z -> J z, shape (n,) -> (n,), for a CSC or dense ``jac`` (shape (n, n)),
    equal in every digit to ``jac @ z`` (module docstring)."""
    if not (sp.issparse(jac) and jac.format == "csc") or _CSC_MATVEC is None:
        return jac.__matmul__
    m, n = jac.shape
    indptr, indices, data = jac.indptr, jac.indices, jac.data
    dtype = data.dtype

    def product(z: np.ndarray) -> np.ndarray:
        if z.dtype != dtype or z.ndim != 1:
            return jac @ z
        out = np.zeros(m, dtype=dtype)
        _CSC_MATVEC(m, n, indptr, indices, data, z, out)
        return out
    return product


class _Pattern:
    """Where each entry of I - J comes from: the CSC pattern of scipy's own subtraction, the
    index into J's data of each entry (-1 where J has none) and whether it is diagonal."""

    def __init__(self, jac: sp.csc_matrix) -> None:
        n = jac.shape[0]
        # exact small integers stand for J's entries, a quarter marks the identity's: scipy's
        # subtraction then lays out the merged pattern, and each result names its sources
        marks = sp.csc_matrix((-(np.arange(jac.nnz, dtype=float) + 1.0), jac.indices.copy(),
                               jac.indptr.copy()), shape=jac.shape)
        eye = sp.eye(n, format="csc")
        merged = 0.25 * eye - marks
        whole = np.floor(merged.data)
        self.source = whole.astype(np.intp) - 1
        self.diagonal = (merged.data - whole) == 0.25
        self.indices, self.indptr = merged.indices, merged.indptr
        self.shape = jac.shape
        # SuperLU reads a CSC matrix's arrays only while it factorises (scipy's splu), so a
        # matrix in canonical form may be handed over again with new data; one per dtype
        self.canonical = bool(merged.has_canonical_format)
        self.reused: dict = {}
        self.jac = jac
        self.values = np.append(jac.data, 0.0)      # index -1: no entry of J (0)


class ShiftedIdentity:
    """Radau's identity for a constant CSC Jacobian ``jac``: ``c * self - jac`` is the CSC
    matrix scipy computes for ``c * eye(n, format='csc') - jac`` (module docstring)."""

    def __init__(self, jac: sp.csc_matrix) -> None:
        self._pattern = _Pattern(jac)
        self._eye = sp.eye(jac.shape[0], format="csc")

    def __rmul__(self, scale) -> "_Scaled":
        return _Scaled(scale, self)


class _Scaled:
    """c I for ``ShiftedIdentity``: only its difference with the same Jacobian is fast."""

    def __init__(self, scale, identity: ShiftedIdentity) -> None:
        self.scale, self.identity = scale, identity

    def __sub__(self, other):
        pattern = self.identity._pattern
        if other is not pattern.jac:
            return self.scale * self.identity._eye - other
        scaled = np.ones(1) * self.scale            # the identity's data times c, as scipy
        dtype = np.result_type(scaled.dtype, pattern.jac.dtype)
        shift = np.zeros(pattern.source.size, dtype=dtype)
        shift[pattern.diagonal] = scaled[0]
        data = np.subtract(shift, pattern.values[pattern.source], dtype=dtype)
        if not np.all(data != 0):
            return self.scale * self.identity._eye - other
        if not pattern.canonical:   # splu sorts a non-canonical matrix's indices in place
            return sp.csc_matrix((data, pattern.indices.copy(), pattern.indptr.copy()),
                                 shape=pattern.shape)
        matrix = pattern.reused.get(dtype)
        if matrix is None:
            matrix = pattern.reused[dtype] = sp.csc_matrix(
                (data, pattern.indices.copy(), pattern.indptr.copy()), shape=pattern.shape)
        matrix.data = data
        return matrix
