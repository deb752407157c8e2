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

``assess(solution)`` gives one ``Conditioning`` per interval; ``guard(solution)`` wraps an engine
solution (either engine: the conditioning belongs to the circuit's equations, so it is judged on
the exact engine's pencil and applied to both) so that

* above ``tolerances.CONDITION_WARN`` the solution carries a warning naming the interval and the
  estimate;
* above ``tolerances.CONDITION_LIMIT`` every value of that interval (before/after of its event,
  final, tau, modes) is None and ``notes`` say "conditioning 1e17 beyond 1e12: values not
  reported".

Costs one SVD and one eigendecomposition per distinct switch configuration (O(n^3)).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from .. import tolerances as tol
from ..model import NODE, Probe
from ..results import Features
from ..units import format_si
from .linalg import _pattern, equilibrate


@dataclass(frozen=True)
class Conditioning:
    """Conditioning of interval k: ``kappa`` = max(kappa_pencil, kappa_modes), dimensionless."""

    index: int
    start: float
    kappa_pencil: float
    kappa_modes: float

    @property
    def kappa(self) -> float:
        return max(self.kappa_pencil, self.kappa_modes)

    @property
    def trusted(self) -> bool:
        return self.kappa <= tol.CONDITION_LIMIT

    def note(self) -> str:
        return (f"conditioning {self.kappa:.0e} beyond {tol.CONDITION_LIMIT:.0e} from "
                f"{format_si(self.start, 's')} on: values not reported (the interval's equations "
                f"are too close to singular for their digits to be trusted)")


def pencil_condition(g: np.ndarray, c: np.ndarray, s0: float) -> float:
    """2-norm condition number of the equilibrated G + s0 C (inf if singular or not finite)."""
    if g.size == 0:
        return 1.0
    p = g + s0 * c
    if not np.all(np.isfinite(p)):
        return float("inf")
    dr, dc = equilibrate(np.abs(g) + abs(s0) * np.abs(c))
    p = dr[:, None] * p * dc[None, :]
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
            seen[key] = (pencil_condition(resp.g, resp.c, resp.dec.s0),
                         modes_condition(resp.dec.a))
        out.append(Conditioning(k, resp.start, *seen[key]))
    return tuple(out)


class Guarded:
    """An engine solution whose untrustworthy intervals report None (``Solution`` protocol).

    Attributes other than ``features``, ``waveform``, ``withheld`` and ``warnings`` pass to the
    wrapped one.
    """

    def __init__(self, inner, conditioning: tuple[Conditioning, ...]) -> None:
        self._inner = inner
        self.conditioning = conditioning
        warn = [_warning(c) for c in conditioning if c.kappa > tol.CONDITION_WARN]
        self.warnings = tuple(inner.warnings) + tuple(dict.fromkeys(warn))

    def __getattr__(self, name):
        return getattr(self._inner, name)

    def features(self, probe, k: int) -> Features:
        f = self._inner.features(probe, k)
        bad_here = not self.conditioning[k].trusted
        bad_before = k > 0 and not self.conditioning[k - 1].trusted
        if not (bad_here or bad_before):
            return f
        note = self.conditioning[k if bad_here else k - 1].note()
        if bad_here:
            return replace(f, before=None if bad_before else f.before, after=None, final=None,
                           tau=None, order=None, modes=(), oscillation=(),
                           notes=f.notes + (note,))
        return replace(f, before=None, notes=f.notes + (note,))

    def node_voltages(self) -> list[float]:
        """``ClosedFormSolution.node_voltages`` with this guard's values withheld."""
        if all(c.trusted for c in self.conditioning):
            return self._inner.node_voltages()
        circuit, values = self._inner.circuit, []
        for node in (n for n in circuit.nodes if n != circuit.ground):
            for k in range(len(circuit.events)):
                f = self.features(Probe(NODE, (node,)), k)
                values += [v for v in (f.before, f.after, f.final) if v is not None]
        return values

    def withheld(self, k: int) -> str | None:
        """The note saying why interval k's values are not reported, or None when they are
        (the sign-off comparisons ask this before using ``crossing``, ``peak``, ``energy``
        and ``dominant``, which pass through unguarded)."""
        return None if self.conditioning[k].trusted else self.conditioning[k].note()

    def waveform(self, probe, k: int, times):
        values = np.asarray(self._inner.waveform(probe, k, times), dtype=float)
        return np.full_like(values, np.nan) if not self.conditioning[k].trusted else values


def _warning(c: Conditioning) -> str:
    verdict = ("values not reported" if not c.trusted else
               f"values may carry a relative error up to ~{c.kappa * np.finfo(float).eps:.0e}")
    return (f"from {format_si(c.start, 's')} the equations are ill-conditioned (conditioning "
            f"{c.kappa:.0e}, bound {tol.CONDITION_LIMIT:.0e}): {verdict}")


def guard(solution, conditioning: tuple[Conditioning, ...]):
    """``solution`` itself when every interval is within ``CONDITION_WARN``, else ``Guarded``."""
    if all(c.kappa <= tol.CONDITION_WARN for c in conditioning):
        return solution
    return Guarded(solution, conditioning)
