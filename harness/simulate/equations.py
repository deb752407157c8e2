"""The regularised nodal equations of one interval: M y' = -K y + b, i.e. y' = J y + c.

State y (length n): the voltages of the non-ground nodes, then the inductor currents, then one
current
i_p per *carrier*: every voltage source, vcvs, ccvs and ideal switch.  A carrier is its ideal
voltage (E, mu (v_cp - v_cn), rho i_x, or 0 V for a closed switch) in series with the element
r_s || L_p: with u = v_p - v_n - (ideal voltage), its current is u / r_s + i_p and
L_p di_p/dt = u.  Fast changes (an impulse of current into a capacitor loop) pass through r_s as
a pulse of width ~ r_s C; at DC and for the slow response the element is a short (L_p is
t_pulse r_s, a pulse-scale inductance), so the operating point is exactly that of the ideal
circuit and a loop of inductors and carriers keeps its flux instead of decaying through r_s.  An
open ideal switch carries nothing; its i_p decays on its own with time constant t_pulse.

Each non-capacitor part contributes a branch current from p to n that is affine in y (its kind's
stamp in ``branches.EQUATIONS``):

* resistor R: (v_p - v_n)/R;  current source I: I;  vccs g: g (v_cp - v_cn);  cccs: beta i_x;
* carrier: u / r_s + i_p (above);  a switch with a given on/off resistance r: (v_p - v_n)/r;
* inductor: its state current, plus a shunt (v_p - v_n)/r_shunt across it.

KCL at each node, with the capacitance matrix M from the capacitors and c_node, gives the node
rows; L di/dt = v_p - v_n the inductor rows; m w' = f(y) the rows of the op-amps' internal
voltages (``branches.KindEquations.pole``); L_p di_p/dt = u the carrier rows.  This full form
gives the DC operating points.  The ODE itself is written in tree coordinates and the rows
without capacitance are eliminated (coordinates.py), so that no artificial capacitance makes
capacitor-less nodes stiff and no 1/r_s drowns a slow mode; a node that would float in some
interval keeps a parasitic capacitance instead (regularise.py).  The reduced
J = -M_dd^-1 K_r is constant in an interval and is the exact (analytic) Jacobian; it is a
scipy.sparse matrix above ``SPARSE_ABOVE`` states unless its LU factors fill in
(``_stays_sparse``).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np
import scipy.linalg
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from ..model import CAPACITOR, Circuit
from .branches import (Affine, Branches, Layout, Regulariser, branch_currents, difference,
                       flows, pole_rows)
from .coordinates import SPARSE_ABOVE, Reducer, assemble, constants, forest
from .regularise import Regularisation

#: use a sparse Jacobian above coordinates.SPARSE_ABOVE states only while the LU factors of
#: I - h J fill at most this share of the dense matrix (tests/benchmarks/RESULTS.md "Numerical
#: engine: sparse or dense": an RC ladder's fill 1.3 %, sparse 6x faster; random RC networks'
#: 50-64 %, dense 1.15-1.75x faster)
SPARSE_LU_FILL = 0.2


@dataclass(frozen=True)
class System:
    """One interval's ODE and branch expressions.

    Attributes:
        jac: J over the integrated states y_d (``reduction.dyn``), shape (n_d, n_d), dense
            ndarray or scipy.sparse CSC matrix.
        c: shape (n_d,), so that y_d' = J y_d + c.
        K, b, M: the unsolved full form M y' = -K y + b (K, M as CSC matrices, shape (n, n)).
        K_dc, b_dc: the same rows with each carrier's fast current u / r_s left out (also
            where a ccvs or cccs senses it).  At an
            operating point u = 0, so K_dc y = b_dc has the same solutions as K y = b (it is the
            ideal circuit's MNA system), without adding 1/r_s to 1/R in one rounded entry.
        branches: part name -> its current (p to n) as an Affine, every non-capacitor part.
        regularisers: the regularising resistances in force in this interval.
        sources: part name -> the value in force (V, A) for independent sources.
        closed: switch name -> True when closed in this interval.
        reduction: the integrated tree coordinates and the map back (coordinates.Reduction).
        parasitic: node name -> parasitic capacitance in F (0 where there is none).
    """

    jac: object
    c: np.ndarray
    K: sp.csc_matrix
    b: np.ndarray
    M: sp.csc_matrix
    K_dc: sp.csc_matrix
    b_dc: np.ndarray
    branches: Mapping[str, Affine]
    regularisers: tuple[Regulariser, ...]
    sources: Mapping[str, float]
    closed: Mapping[str, bool]
    reduction: object
    parasitic: Mapping[str, float]

    @property
    def n(self) -> int:
        """Number of integrated states n_d."""
        return self.c.shape[0]


def _assemble(circuit: Circuit, lay: Layout, reg: Regularisation,
              brs: tuple[Branches, ...]) -> tuple[list[sp.csc_matrix], sp.csc_matrix]:
    """([K for each of ``brs``], M) of M y' = -K y + b for the branches ``brs`` (the DC
    branches leave the carriers' u / r_s out of KCL): M, the same for all, is stamped once.
    b, the only part that depends on the sources' values, is ``_constants``."""
    by_name = {p.name: p for p in circuit.parts}      # Circuit.part is a linear search
    poles = list(pole_rows(circuit, lay))
    return [_stiffness(lay, reg, br, by_name, poles) for br in brs], \
        _capacitance(circuit, lay, reg, by_name, poles)


def _stiffness(lay: Layout, reg: Regularisation, br: Branches, by_name: dict,
               poles: list) -> sp.csc_matrix:
    """K of ``_assemble`` for the branches ``br``: KCL of each branch current at the nodes,
    then the inductor, amplifier-pole and carrier rows."""
    n = lay.n
    rows, cols, vals = [], [], []

    def stamp_k(i: int, aff: Affine, sign: float) -> None:
        for j, a in aff.coef.items():
            rows.append(i), cols.append(j), vals.append(sign * a)

    for part, cur in flows(by_name, br):
        for node, sign in ((part.p, 1.0), (part.n, -1.0)):
            if node in lay.node_index:
                stamp_k(lay.node_index[node], cur, sign)
    for name in lay.inductors:  # L di/dt = v_p - v_n
        part = by_name[name]
        stamp_k(lay.part_index[name], Affine(difference(lay, part.p, part.n)), -1.0)
    for r, _, f in poles:  # an amplifier's internal voltage: m w' = f
        stamp_k(r, f, -1.0)
    l_p = reg.r_series * reg.t_pulse
    for name in lay.carriers:  # L_p di_p/dt = u, or i_p' = -i_p / t_pulse when open
        r = lay.part_index[name]
        u = br.voltages[name]
        stamp_k(r, u if u is not None else Affine({r: -l_p / reg.t_pulse}), -1.0)
    K = sp.csc_matrix((vals, (rows, cols)), shape=(n, n))
    K.sum_duplicates()
    return K


def _capacitance(circuit: Circuit, lay: Layout, reg: Regularisation, by_name: dict,
                 poles: list) -> sp.csc_matrix:
    """M of ``_assemble``: the inductances, the amplifier poles' m, the carriers' L_p, the
    parasitic and the real capacitances."""
    n = lay.n
    mrows, mcols, mvals = [], [], []

    def stamp_m(i: int, j: int, v: float) -> None:
        mrows.append(i), mcols.append(j), mvals.append(v)

    for name in lay.inductors:
        r = lay.part_index[name]
        stamp_m(r, r, by_name[name].value)
    for r, m, _ in poles:
        stamp_m(r, r, m)
    l_p = reg.r_series * reg.t_pulse
    for name in lay.carriers:
        r = lay.part_index[name]
        stamp_m(r, r, l_p)
    for node in lay.nodes:
        i = lay.node_index[node]
        stamp_m(i, i, reg.c_node[node])
    for part in circuit.parts:
        if part.kind != CAPACITOR:
            continue
        for a, sa in ((part.p, 1.0), (part.n, -1.0)):
            for c, sc in ((part.p, 1.0), (part.n, -1.0)):
                if a in lay.node_index and c in lay.node_index:
                    stamp_m(lay.node_index[a], lay.node_index[c], sa * sc * part.value)
    M = sp.csc_matrix((mvals, (mrows, mcols)), shape=(n, n))
    M.sum_duplicates()
    return M


def _constants(circuit: Circuit, lay: Layout, br: Branches) -> np.ndarray:
    """b of ``_assemble``'s rows, shape (n,): the constant terms of the same stamps, in the
    same order (only parts with a constant term contribute)."""
    b = np.zeros(lay.n)
    by_name = {p.name: p for p in circuit.parts}
    for part, cur in flows(by_name, br):
        if cur.const:
            for node, sign in ((part.p, 1.0), (part.n, -1.0)):
                if node in lay.node_index:
                    b[lay.node_index[node]] -= sign * cur.const
    for name in lay.carriers:
        u = br.voltages[name]
        if u is not None and u.const:
            b[lay.part_index[name]] += u.const
    return b


def _jacobian(K: sp.csc_matrix, M: sp.csc_matrix, trial: bool = True):
    """(J, solve) with J = -M^-1 K (sparse above SPARSE_ABOVE states unless its LU fills in,
    ``_stays_sparse``; dense otherwise) and
    solve(b) = M^-1 b, shape (n,); M is factorised once.  Without ``trial`` J is returned
    sparse wherever it is computed sparse (the same entries; no trial LU)."""
    n = K.shape[0]
    off = M - sp.diags(M.diagonal())
    if off.count_nonzero() == 0:
        inv = 1.0 / M.diagonal()
        jac = -(sp.diags(inv) @ K).tocsc()
        return (jac if not trial or _stays_sparse(jac) else jac.toarray()), (lambda b: inv * b)
    if n <= SPARSE_ABOVE:
        lu = scipy.linalg.lu_factor(M.toarray())
        return -scipy.linalg.lu_solve(lu, K.toarray()), (lambda b: scipy.linalg.lu_solve(lu, b))
    lu = spla.splu(M.tocsc())
    jac = -sp.csc_matrix(lu.solve(K.toarray()))
    jac.eliminate_zeros()
    return (jac if not trial or _stays_sparse(jac) else jac.toarray()), lu.solve


def _stays_sparse(jac: sp.csc_matrix) -> bool:
    """Whether the integrator should factor I - h J sparse: more than SPARSE_ABOVE states and
    a trial sparse LU of I - J / max|J_ii| (SuperLU, its own column ordering) whose factors
    fill at most SPARSE_LU_FILL of the dense matrix."""
    n = jac.shape[0]
    if n <= SPARSE_ABOVE:
        return False
    scale = float(np.abs(jac.diagonal()).max(initial=0.0))
    trial = sp.identity(n, format="csc") - jac / (scale if scale > 0 else 1.0)
    try:
        lu = spla.splu(trial.tocsc())
    except RuntimeError:                   # singular trial matrix: keep the size rule
        return True
    return lu.L.nnz + lu.U.nnz <= SPARSE_LU_FILL * n * n


@dataclass(frozen=True)
class _Shape:
    """What an interval's ODE shares with every interval of the same switch states: the
    matrices, the tree transform, the elimination and the factorised M_dd."""

    K: sp.csc_matrix
    M: sp.csc_matrix
    K_dc: sp.csc_matrix
    transform: object
    reducer: object
    jac: object
    solve: object


def _shape(circuit: Circuit, lay: Layout, reg: Regularisation, br: Branches,
           br_dc: Branches | None) -> _Shape:
    """The shared part of an interval's ODE; without ``br_dc`` (a Jacobian-only build) the
    unreduced K, M, K_dc are None and J is sparse wherever it is computed sparse."""
    K = M = K_dc = None
    if br_dc is not None:
        (K, K_dc), M = _assemble(circuit, lay, reg, (br, br_dc))
    closed = [name for name, u in br.voltages.items() if u is not None]
    owners: dict[str, int] = {}
    parents = forest(circuit, lay, closed, reg.c_node, owners)
    K_x, M_x, T, Tinv, tr = assemble(circuit, lay, br, parents, reg.r_series * reg.t_pulse,
                                     reg.t_pulse, reg.c_node, owners)
    reducer = Reducer(K_x, M_x, T, Tinv)
    jac, solve = _jacobian(reducer.K_r, reducer.M_r, trial=br_dc is not None)
    return _Shape(K, M, K_dc, tr, reducer, jac, solve)


def build(circuit: Circuit, lay: Layout, reg: Regularisation, time: float,
          before: bool = False, cache: dict | None = None, jac_only: bool = False) -> System:
    """The ODE in force just after ``time`` (or just before it when ``before``).

    ``jac_only`` (a pilot model whose Jacobians alone are read, engine.py): the same
    reduction, J and c, with the unreduced full and DC forms (K, b, M, K_dc, b_dc) left None
    and J sparse wherever it is computed sparse; a cache is for one kind of build only.

    ``cache`` (a dict owned by the caller, for one circuit and one Regularisation) keeps what
    is built: an interval whose switch states and source values equal an earlier one's gets
    the same System, one whose switch states alone are equal shares its matrices and
    factorisations (only the constant terms, linear in the sources, are recomputed).

    Raises:
        coordinates.Unreduced: the algebraic block is singular in this interval.
    """
    cache = {} if cache is None else cache
    fixed = cache.setdefault("fixed", {})
    br = branch_currents(circuit, lay, reg, time, before, fixed=fixed)
    s_key = ("shape", tuple(br.closed.items()))
    key = (s_key, tuple(br.sources.items()))
    if key in cache:
        return cache[key]
    br_dc = None if jac_only else branch_currents(circuit, lay, reg, time, before, slow=True,
                                                  fixed=fixed)
    if s_key not in cache:
        cache[s_key] = _shape(circuit, lay, reg, br, br_dc)
    shape = cache[s_key]
    b = b_dc = None
    if not jac_only:
        b, b_dc = _constants(circuit, lay, br), _constants(circuit, lay, br_dc)
    red, b_r = shape.reducer.constants(constants(circuit, lay, br, shape.transform))
    system = System(shape.jac, shape.solve(b_r), shape.K, b, shape.M, shape.K_dc, b_dc,
                    br.currents, tuple(br.regularisers), br.sources, br.closed, red,
                    dict(reg.c_node))
    cache[key] = system
    return system
