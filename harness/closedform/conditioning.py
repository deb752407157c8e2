"""How far the closed form's digits can be trusted: a conditioning estimate per interval.

Two numbers bound the relative error of an interval's values (Higham, *Accuracy and Stability of
Numerical Algorithms*, 2nd ed., ch. 7: a linear solve loses about log10 kappa digits; Golub &
Van Loan, *Matrix Computations*, 4th ed., sec. 7.2: an eigenvector expansion amplifies rounding by
the condition number of its basis):

* ``kappa_pencil``: the 2-norm condition number of the shift-invert matrix G~ + s0 C~ after the
  same Ruiz equilibration the engine applies (``linalg.equilibrate``), i.e. the conditioning of
  every solve the interval's decomposition rests on;
* ``kappa_modes``: the condition number of the eigenvector basis of the interval's dynamics A
  (columns normalised), which multiplies the rounding in the mode amplitudes; infinite for a
  defective A, where the engine's cluster blocks take over, so it is only counted for A with
  distinct eigenvalues.

``assess(solution)`` gives one ``results.Conditioning`` per interval (the closed form's answer
to ``Solution.conditioning``).  The conditioning belongs to the circuit's equations, so it is
estimated on the exact engine's pencil; what follows from it for both engines' values is judged
outside either engine, by the trust guard (``harness.compare.trust``).

Costs one SVD and one eigendecomposition per distinct switch configuration (O(n^3)).
"""

from __future__ import annotations

import numpy as np

from .. import tolerances as tol
from ..results import Conditioning
from .linalg import _pattern, equilibrate


def pencil_condition(g: np.ndarray, c: np.ndarray, s0: float, own: bool = False) -> float:
    """2-norm condition number of the equilibrated G + s0 C (inf if singular or not finite).
    ``own``: g and c are the caller's copies to spend (|G| + |s0| |C| is then formed in them:
    two n x n temporaries fewer, the same floats)."""
    if g.size == 0:
        return 1.0
    p = s0 * c                      # G + s0 C, formed in place (the same floats)
    p += g
    if not np.all(np.isfinite(p)):
        return float("inf")
    if own:                         # |G| + |s0| |C|, likewise
        weight = np.abs(c, out=c)
        weight *= abs(s0)
        weight += np.abs(g, out=g)
    else:
        weight = np.abs(c)
        weight *= abs(s0)
        weight += np.abs(g)
    del g, c
    dr, dc = equilibrate(weight)
    del weight
    p *= dr[:, None]
    p *= dc[None, :]
    if p.shape[0] >= SPARSE_CONDITION_MIN:
        pattern = _pattern(p)
        if pattern is not None:
            return sparse_condition(p, pattern)
    return float(np.linalg.cond(p))


#: from this many unknowns a sparse pencil's condition number is found by Lanczos iterations
#: on its sparse LU (``sparse_condition``) instead of a dense SVD (O(n^3): 30 s at 2,500)
SPARSE_CONDITION_MIN = 500
#: relative tolerance of those Lanczos iterations (the number is reported to one digit and
#: compared with limits decades apart)
LANCZOS_TOL = 1e-8


def sparse_condition(p: np.ndarray, pattern) -> float:
    """sigma_max / sigma_min of a large sparse square p (non-zeros in ``linalg._pattern``):
    the largest eigenvalues of p^T p and of (p^T p)^-1 = p^-1 p^-T by implicitly restarted
    Lanczos (ARPACK, scipy.sparse.linalg.eigsh; Lehoucq, Sorensen & Yang, *ARPACK Users'
    Guide*, 1998), the inverse through one sparse LU of p; inf where p is singular."""
    from scipy.sparse import csc_matrix
    from scipy.sparse.linalg import LinearOperator, eigsh, splu
    n = p.shape[0]
    rows, cols = pattern[0], pattern[1]
    sparse = csc_matrix((p[rows, cols], (rows, cols)), shape=p.shape)
    try:
        lu = splu(sparse)
    except RuntimeError:                          # exactly singular
        return float("inf")
    gram = LinearOperator((n, n), matvec=lambda x: sparse.T @ (sparse @ x), dtype=float)
    inverse = LinearOperator((n, n), matvec=lambda x: lu.solve(lu.solve(x, trans="T")),
                             dtype=float)
    start = np.ones(n)
    with np.errstate(all="ignore"):
        try:
            big = eigsh(gram, k=1, which="LA", tol=LANCZOS_TOL, v0=start,
                        return_eigenvectors=False)[0]
            small = eigsh(inverse, k=1, which="LA", tol=LANCZOS_TOL, v0=start,
                          return_eigenvectors=False)[0]
        except (ArithmeticError, ValueError, RuntimeError):
            return float("inf")
    kappa = float(np.sqrt(big * small))
    return kappa if np.isfinite(kappa) and kappa > 0 else float("inf")


def modes_condition(a: np.ndarray) -> float:
    """Condition number of A's normalised eigenvector basis (1 for none; 1 where A is defective
    to working precision: the engine's Schur clusters, not eigenvectors, carry those)."""
    if a.size == 0 or not np.all(np.isfinite(a)):
        return 1.0 if a.size == 0 else float("inf")
    if not np.any(a - np.diag(np.diagonal(a))):
        return 1.0                      # diagonal: the eigenvectors are the unit vectors
    values, vectors = np.linalg.eig(a)
    gaps = np.abs(values[:, None] - values[None, :]) + np.eye(values.size)
    if np.min(gaps) <= tol.MODE_MERGE * max(np.max(np.abs(values)), 1e-300):
        return 1.0
    vectors = vectors / np.linalg.norm(vectors, axis=0, keepdims=True)
    return float(np.linalg.cond(vectors))


def assess(solution) -> tuple[Conditioning, ...]:
    """One ``Conditioning`` per interval of a ``ClosedFormSolution`` (cached per configuration)."""
    seen: dict[int, tuple[float, float]] = {}
    out = []
    for k, resp in enumerate(solution.intervals):
        key = id(resp.dec)
        if key not in seen:
            seen[key] = (pencil_condition(resp.g, resp.c, resp.dec.s0,
                                          own=resp.kept_g.sparse is not None
                                          and resp.kept_c.sparse is not None),
                         1.0 if resp.dec.diagonal else modes_condition(resp.dec.a))
        out.append(Conditioning(k, resp.start, *seen[key]))
    return tuple(out)
