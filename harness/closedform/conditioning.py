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
from .linalg import equilibrate


def pencil_condition(g: np.ndarray, c: np.ndarray, s0: float) -> float:
    """2-norm condition number of the equilibrated G + s0 C (inf if singular or not finite)."""
    if g.size == 0:
        return 1.0
    p = g + s0 * c
    if not np.all(np.isfinite(p)):
        return float("inf")
    dr, dc = equilibrate(np.abs(g) + abs(s0) * np.abs(c))
    return float(np.linalg.cond(dr[:, None] * p * dc[None, :]))


def modes_condition(a: np.ndarray) -> float:
    """Condition number of A's normalised eigenvector basis (1 for none; 1 where A is defective
    to working precision: the engine's Schur clusters, not eigenvectors, carry those)."""
    if a.size == 0 or not np.all(np.isfinite(a)):
        return 1.0 if a.size == 0 else float("inf")
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
            seen[key] = (pencil_condition(resp.g, resp.c, resp.dec.s0),
                         modes_condition(resp.dec.a))
        out.append(Conditioning(k, resp.start, *seen[key]))
    return tuple(out)
