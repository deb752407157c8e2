"""Which storage parts can reach a probe: the exact engine's resolvent route.

A controlled source couples one way, from its control to its output, and a current can cancel
exactly (a loop that closes on itself, an open end), so the storage parts that set a probe's
response are not the ones merely *connected* to it.  The closed form answers the question
with its own interval pencil (scaled MNA C~ x' + G~ x = b~, sources zeroed): a storage part's
dynamics enter the equations through its C~ entries, along the injection vector a_X (e_p - e_n
over the KCL rows of a capacitor's terminals; the unit vector of an inductor's branch row, or
of an op-amp's whose gain-bandwidth pole puts −(v(p) − v(n))/ω_t in its row of C~).
Its influence on the probe y = r . x (r the probe's row over x~ and dx~/dtau at s) is the
transfer function

    H_X(s) = r(s)^T (G~ + s C~)^-1 a_X,

and X reaches the probe when H_X is not identically zero.  A rational function that vanishes at
two generic complex points s0 (chosen away from the real axis, where the modes of passive
circuits lie, and with |s0| = O(1) in the scaled time) is zero but for a coincidence, so X
counts when |H_X(s0)| > ``REACH`` * max over the rows of |r^T (G~ + s0 C~)^-1| at either point.
One LU of G~ + s0 C~ and one transposed solve per probe and point.

Rounding can lift an H_X that is exactly zero above ``REACH`` (an inductor loop hanging off an
ideal source's node read 1.4e-13 at a probe it cannot influence), so the numerical test is
preceded by an exact structural one: with a perfect matching of the pencil's equations to its
unknowns (Duff, "On algorithms for obtaining a maximum transversal", ACM TOMS 7 (1981)), each
unknown is set by its matched equation from the unknowns that equation contains; the unknowns
that can influence the probe are those reached from the probe's own unknowns along that
relation, and a storage part none of whose equations is matched to one of them has an H_X that
is zero for every s (the sparsity of a block-triangular inverse).

For a block-triangular pencil the first coefficient of det(G + sC)/det(G) splits over the
diagonal blocks, so the sum of the zero-value time constants of the reaching storage is the
sum of the time constants of the modes that can appear in the probe (its transfer function's
poles; Cochrun & Grabel, IEEE Trans. Circuit Theory 20 (1973) 8-14).  A capacitor's current
C dv/dt has the modes of its voltage, so a through probe of a capacitor is read as the voltage
across it.
"""

from __future__ import annotations

import numpy as np
import scipy.linalg as la

from ..model import ACROSS, CAPACITOR, STORAGE, THROUGH, Circuit, Probe
from .linalg import SPARSE_LU_MIN, _pattern
from .mna import Layout, opamp_omega

#: generic points in scaled time at which the transfer functions are tested
POINTS = (0.8183 + 0.5477j, 2.6971 - 1.3089j)
#: H_X(s0) below this fraction of the probe's largest row sensitivity counts as zero: the
#: rounding of the LU solve, about machine epsilon (2.2e-16) times that sensitivity, with a
#: margin of ~500.  1e-9 dropped a real path: a 44.8 ohm source path to a Miller input read
#: 6.8e-11 of the sensitivity to a 169 kohm node beside it (tests/test_dominant_reach.py)
REACH = 1e-13


def voltage_of_capacitor(circuit: Circuit, probe: Probe) -> Probe:
    """The probe whose row carries the modes of ``probe``: a capacitor's current i = C dv/dt
    has the modes of its voltage (for every non-zero rate), read from the capacitor's own
    nodes rather than from the KCL sum the current functional uses."""
    if probe.kind == THROUGH and circuit.part(probe.targets[0]).kind == CAPACITOR:
        return Probe(ACROSS, probe.targets)
    return probe


def _injection(layout: Layout, part, size: int) -> np.ndarray:
    """a_X over the rows (shape (size,)): where the part's C~ entries enter the equations (an
    inductor's and a gain-bandwidth op-amp's: its own branch row)."""
    a = np.zeros(size)
    if part.kind != CAPACITOR:
        a[layout.branch(part.name)] = 1.0
        return a
    for node, sign in ((part.p, 1.0), (part.n, -1.0)):
        i = layout.node(node)
        if i is not None:
            a[i] += sign
    return a


def _injections(layout: Layout, storage: list, size: int):
    """The rows a_X of every storage part, shape (parts, size), as a sparse matrix (one or two
    entries per row; ``inject @ z`` is then z_p - z_n, the dense product's value)."""
    from scipy.sparse import csr_matrix
    rows, cols, vals = [], [], []
    for k, part in enumerate(storage):
        a = _injection(layout, part, size)
        hit = np.flatnonzero(a)
        rows += [k] * hit.size
        cols += hit.tolist()
        vals += a[hit].tolist()
    return csr_matrix((vals, (rows, cols)), shape=(len(storage), size))


def reaching_storage(circuit: Circuit, layout: Layout, g: np.ndarray, c: np.ndarray,
                     row: np.ndarray, drow: np.ndarray) -> set[str] | None:
    """The capacitors, inductors and gain-bandwidth op-amps whose transfer function to the
    probe is not zero (module
    docstring) in the scaled pencil (g, c) of one interval; ``row``, ``drow``: the probe's
    coefficients over x~ and dx~/dtau (shape (n,)).  None when the pencil is singular at both
    points (then the caller counts every storage part)."""
    storage = [p for p in circuit.parts if p.kind in STORAGE or opamp_omega(p) is not None]
    inject = _injections(layout, storage, g.shape[0])
    reached = np.zeros(len(storage), dtype=bool)
    possible = _structurally_possible(inject, _influencing_rows(g, c, row, drow))
    solved = False
    for s0 in POINTS:
        try:
            z = _transposed_solve(g, c, s0, row + s0 * drow)
        except (la.LinAlgError, ValueError, RuntimeError):
            continue
        solved = True
        top = float(np.max(np.abs(z), initial=0.0))
        reached |= (np.abs(inject @ z) > REACH * top) & possible
    if not solved:
        return None
    return {p.name for p, hit in zip(storage, reached) if hit}


def _influencing_rows(g: np.ndarray, c: np.ndarray, row: np.ndarray,
                      drow: np.ndarray) -> np.ndarray | None:
    """Mask over the equations (shape (n,)) whose matched unknown can influence the probe
    (module docstring), or None when the pencil's pattern has no perfect matching (then the
    structure says nothing and every part stays possible)."""
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import breadth_first_order, maximum_bipartite_matching
    pattern = csr_matrix((g != 0) | (c != 0))
    unknown_of = maximum_bipartite_matching(pattern, perm_type="column")
    if np.any(unknown_of < 0):
        return None
    n = g.shape[0]
    equation_of = np.empty(n, dtype=int)
    equation_of[unknown_of] = np.arange(n)
    # edge u -> v: u's equation contains v, so v influences u; a virtual node n starts at
    # the probe's unknowns
    rows_of_unknown = pattern[equation_of].tocoo()
    probe = np.flatnonzero((row != 0) | (drow != 0))
    src = np.concatenate([rows_of_unknown.row, np.full(probe.size, n)])
    dst = np.concatenate([rows_of_unknown.col, probe])
    graph = csr_matrix((np.ones(src.size), (src, dst)), shape=(n + 1, n + 1))
    seen = breadth_first_order(graph, n, directed=True, return_predecessors=False)
    influencing = np.zeros(n + 1, dtype=bool)
    influencing[seen] = True
    return influencing[unknown_of]


def _structurally_possible(inject, rows: np.ndarray | None) -> np.ndarray:
    """Per storage part (shape (parts,)): whether one of its injection rows is the equation
    of an unknown that can influence the probe (all True without a structure)."""
    if rows is None:
        return np.ones(inject.shape[0], dtype=bool)
    return np.asarray((abs(inject) @ rows.astype(float)) > 0).ravel()


def _transposed_solve(g: np.ndarray, c: np.ndarray, s0: complex,
                      rhs: np.ndarray) -> np.ndarray:
    """z with p^T z = rhs for p = g + s0 c (complex): LAPACK's dense solve, or from
    ``SPARSE_LU_MIN`` unknowns on for a sparse-enough p a sparse LU (SuperLU, partial
    pivoting), O(nnz) fill on MNA matrices instead of O(n^3).  The sparse route forms p only
    on the non-zeros of g and c (the same floats per entry; Im s0 != 0, so those are p's
    non-zeros), never as a dense complex n x n matrix.  Raises ``RuntimeError`` when p is
    exactly singular."""
    pattern = _union_pattern(g, c) if g.shape[0] >= SPARSE_LU_MIN else None
    if pattern is None:
        return la.solve((g + s0 * c).T, rhs, check_finite=True)
    rows, cols = pattern
    entries = g[rows, cols] + s0 * c[rows, cols].astype(complex)
    if not (np.isfinite(entries).all() and np.isfinite(rhs).all()):
        raise ValueError("non-finite pencil")
    from scipy.sparse import csc_matrix
    from scipy.sparse.linalg import splu
    lu = splu(csc_matrix((entries, (rows, cols)), shape=g.shape), diag_pivot_thresh=1.0)
    z = lu.solve(np.asarray(rhs, dtype=complex), trans="T")
    if not np.isfinite(z).all():
        raise la.LinAlgError("singular pencil")
    return z


def _union_pattern(g: np.ndarray, c: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
    """(rows, cols) of the entries where g or c is non-zero, row-major (``linalg._pattern``'s
    order and density rule applied to that union), or None when it is too dense."""
    mask = g != 0
    mask |= c != 0
    return None if _pattern(mask) is None else tuple(np.nonzero(mask))