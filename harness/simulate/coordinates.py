"""Tree (cutset) coordinates and the elimination of the algebraic ones.

Why: a closed carrier couples its two nodes through 1/r_s, up to ~1e12 times the circuit's own
conductances.  In node voltages, a slow mode shared by the two nodes is then carried by the last
digits of entries of size 1/r_s, and rounding (1e-16 of them) swamps it: the integrator's error
estimate sees noise and its steps stall.  The cure is the classical tree formulation:

* a spanning forest of the graph of closed carriers (taken first) and capacitors (and the
  parasitic capacitances, node to ground), rooted at ground where a tree reaches it;
* one coordinate per node: x_m = v_m - v_parent(m) for a node in a tree (its tree edge's
  voltage), x_m = v_m for a root or a node outside every tree; so v_m is the sum of x over the
  path from m to its root (the tree edge of a carrier of an op-amp's internal voltage w is
  shifted by w, so that its coordinate is the carrier's u: ``_Transform``);
* KCL is written per coordinate as the fundamental cutset of its tree edge (the sum of the KCL
  rows below it).  Each branch is stamped on its own, with integer path multipliers and exactly
  rounded sums, so a carrier's 1/r_s cancels exactly from every cutset except its own.

Then the rows where the transformed capacitance matrix vanishes (capacitor-less coordinates,
the root of a tree without ground: its common mode) are algebraic and are eliminated (Kron
reduction); a carrier's 1/r_s only ever sits on its own row, so the Schur complement subtracts
nothing large.
"""

from __future__ import annotations

from functools import partial
import math
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from ..model import CAPACITOR, Circuit
from .branches import Affine, Branches, Layout, flows, pole_rows
from .nodesets import find_root

Path = dict[int, int]  # coordinate index -> integer multiplier
#: use scipy.sparse matrices for systems with more states than this
SPARSE_ABOVE = 50


class Unreduced(Exception):
    """The algebraic coordinates cannot be eliminated (their block is singular)."""


@dataclass(frozen=True)
class Reduction:
    """The integrated coordinates x_d and the map back to the full state.

    Attributes:
        dyn: indices of the integrated coordinates, shape (n_d,): a node coordinate is indexed
            by its node (its tree edge's child), currents by their own index.
        lift, lift_c: full state = lift @ x_d + lift_c; lift shape (n, n_d) (ndarray, or sparse
            CSR above SPARSE_ABOVE states), lift_c shape (n,).
        position: full index -> position in x_d, or -1 for an eliminated coordinate; (n,).
        to_d: sparse matrix, shape (n_d, n), giving x_d from a full state.
    """

    dyn: np.ndarray
    lift: object
    lift_c: np.ndarray
    position: np.ndarray
    to_d: object

    def integrated(self, y: np.ndarray) -> np.ndarray:
        """The integrated coordinates x_d of a full state y, shape (n_d,)."""
        return np.asarray(self.to_d @ y).ravel()

    def row(self, w: np.ndarray, e: float) -> tuple[np.ndarray, float]:
        """A full-state row (w, e) as a row over x_d: (w @ lift, e + w @ lift_c)."""
        return np.asarray(w @ self.lift).ravel(), float(e + w @ self.lift_c)


def forest(circuit: Circuit, lay: Layout, closed: list[str], parasitic: dict[str, float],
           owners: dict[str, int] | None = None) -> dict[int, int]:
    """Node index -> parent node index (-1 for ground) of the spanning forest described in the
    module docstring; nodes absent are roots or outside every tree.  ``owners``, when given,
    receives closed carrier name -> the node index of the child of its tree edge (carriers
    that close a loop of carriers are chords and absent)."""
    edges = [(circuit.part(name).nodes, name) for name in closed]
    edges += [(p.nodes, None) for p in circuit.parts if p.kind == CAPACITOR]
    edges += [((n, circuit.ground), None) for n, c in parasitic.items() if c > 0]
    parent_uf: dict[str, str] = {}

    find = partial(find_root, parent_uf)

    adjacency: dict[str, list[tuple[str, str | None]]] = {}
    for (a, b), label in edges:
        ra, rb = find(a), find(b)
        if ra != rb:
            parent_uf[ra] = rb
            adjacency.setdefault(a, []).append((b, label))
            adjacency.setdefault(b, []).append((a, label))
    out: dict[int, int] = {}
    seen = set()
    for root in [circuit.ground] + list(lay.nodes):
        if root in seen or root not in adjacency:
            continue
        seen.add(root)
        stack = [root]
        while stack:
            here = stack.pop()
            for there, label in adjacency.get(here, []):
                if there in seen:
                    continue
                seen.add(there)
                out[lay.node_index[there]] = lay.node_index.get(here, -1)
                if owners is not None and label is not None:
                    owners[label] = lay.node_index[there]
                stack.append(there)
    return out


def _paths(n_nodes: int, parents: dict[int, int]) -> list[Path]:
    """For each node index m, the coordinates whose sum is v_m (multiplier 1 each)."""
    paths = []
    for m in range(n_nodes):
        path, here = {}, m
        while here != -1:
            path[here] = 1
            if here not in parents:
                break
            here = parents[here]
        paths.append(path)
    return paths


def _combine(items) -> Path:
    """Sum of integer-weighted paths, zero entries dropped (exact integer arithmetic)."""
    out: dict[int, int] = {}
    for path, weight in items:
        for k, m in path.items():
            out[k] = out.get(k, 0) + weight * m
    return {k: m for k, m in out.items() if m}


def _capacitors(circuit: Circuit, parasitic: dict[str, float]) -> list[tuple[str, str, float]]:
    """(p, n, C in F) of every capacitor, then of each parasitic capacitance to ground."""
    caps = [(p.p, p.n, p.value) for p in circuit.parts if p.kind == CAPACITOR]
    return caps + [(node, circuit.ground, c) for node, c in parasitic.items() if c > 0]


def _null_directions(circuit: Circuit, lay: Layout,
                     caps: list[tuple[str, str, float]]) -> list[np.ndarray]:
    """Integer node-voltage directions that change no capacitor voltage (the null space of M):
    each capacitor-less node, and the common mode of each capacitor group without ground.
    ``caps``: ``_capacitors``."""
    nn = len(lay.nodes)
    touched = {n for p, q, _ in caps for n in (p, q)}
    out = []
    for node in lay.nodes:
        if node not in touched:
            v = np.zeros(nn, dtype=np.int64)
            v[lay.node_index[node]] = 1
            out.append(v)
    parent = {n: n for n in circuit.nodes}

    find = partial(find_root, parent)

    for p, q, _ in caps:
        parent[find(p)] = find(q)
    groups: dict[str, list[int]] = {}
    for node in touched:
        if node in lay.node_index and find(node) != find(circuit.ground):
            groups.setdefault(find(node), []).append(lay.node_index[node])
    for members in groups.values():
        v = np.zeros(nn, dtype=np.int64)
        v[members] = 1
        out.append(v)
    return out


def _node_capacitance(lay: Layout, caps: list[tuple[str, str, float]]) -> sp.csr_matrix:
    """The capacitance matrix over the node voltages (F), shape (nodes, nodes): the capacitors
    and the parasitic capacitances to ground (``_capacitors``), as M's node block."""
    nn = len(lay.nodes)
    rows, cols, vals = [], [], []
    for p, q, c in caps:
        for a, sa in ((p, 1.0), (q, -1.0)):
            for b, sb in ((p, 1.0), (q, -1.0)):
                if a in lay.node_index and b in lay.node_index:
                    rows.append(lay.node_index[a]), cols.append(lay.node_index[b])
                    vals.append(sa * sb * c)
    return sp.csr_matrix((vals, (rows, cols)), shape=(nn, nn))


def _null_axis(m_nodes: sp.csr_matrix, T: sp.csr_matrix, k: int) -> bool:
    """True when coordinate k already changes no capacitor voltage: M T e_k = 0 exactly.
    T e_k is column k of the integer T, taken as an exact integer product (a column slice of
    a CSR matrix costs several times more)."""
    e_k = np.zeros(T.shape[1], dtype=T.dtype)
    e_k[k] = 1
    column = np.asarray(T @ e_k, dtype=float).ravel()
    return not np.any(m_nodes @ column)


class _Transform:
    """Maps full-state expressions to tree coordinates (see the module docstring).

    The node part of the map is an integer unimodular matrix: y_nodes = T x_nodes (held as
    sparse int64 matrices, so every product is exact).  Starting from the forest's paths, each
    null direction of M that is not yet a coordinate axis is made one by the column operation
    x = S x' with S = I + (n - e_k) e_k^T (n the direction in x, k a coordinate where it is
    +-1), so its row of the transformed M vanishes exactly; T S and S^-1 T^-1 are rank-one
    updates of T and T^-1.  A direction already spanned by coordinates without capacitance
    (``m_nodes``: M's node block; M T e_k = 0) is left alone, and the pivot k is taken among
    the coordinates with capacitance where it can be: otherwise two capacitor-less nodes joined
    by a closed carrier would be turned back into node voltages, 1/r_s would sit on both rows,
    and the elimination would round it into a false conductance ~1e-16 / r_s to ground (with
    r_s = 0.5 uohm, 2e-10 S: 4e-5 of a 375 kohm path).

    ``shifts`` (tree-edge child index -> {pole state index: integer a}) moves the coordinate of
    a closed carrier whose ideal voltage is an op-amp's internal voltage w: x = (its tree edge's
    voltage) - a w, so that the coordinate is the carrier's u itself (up to sign) rather than
    the difference of two moving volt-sized states, whose rounding through 1/r_s is a noise
    current that stalls the integrator's Newton iterations (a charge amplifier: C to the
    inverting input, C back from the output).  Then y_nodes = T x_nodes + P w with
    P = T_0 D (T_0 the forest's paths before the null directions, D the shifts), every entry an
    integer.
    """

    def __init__(self, lay: Layout, parents: dict[int, int], nulls: list[np.ndarray],
                 shifts: dict[int, dict[int, int]] | None = None,
                 m_nodes: sp.csr_matrix | None = None) -> None:
        self.nn = nn = len(lay.nodes)
        self.n = lay.n
        paths = _paths(nn, parents)
        self.poles = [_combine([(shifts[k], 1) for k in path if k in shifts])
                      for path in paths] if shifts else [{} for _ in paths]
        self.shifted = any(self.poles)
        rows = np.repeat(np.arange(nn), [len(path) for path in paths])
        cols = np.fromiter((k for path in paths for k in path), dtype=np.int64, count=rows.size)
        T = sp.csr_matrix((np.ones(rows.size, dtype=np.int64), (rows, cols)), shape=(nn, nn))
        child = np.array([m for m, p in parents.items() if p >= 0], dtype=np.int64)
        parent = np.array([p for p in parents.values() if p >= 0], dtype=np.int64)
        Tinv = sp.identity(nn, dtype=np.int64, format="csr") + sp.csr_matrix(
            (-np.ones(child.size, dtype=np.int64), (child, parent)), shape=(nn, nn))
        pivots: set[int] = set()
        for direction in nulls:
            v = np.asarray(Tinv @ direction).ravel()
            support = np.flatnonzero(v)
            null = {int(k) for k in support if m_nodes is not None and _null_axis(m_nodes, T, k)}
            if len(null) == support.size:   # already spanned by coordinates without capacitance
                continue
            units = [k for k in support if abs(v[k]) == 1 and k not in pivots]
            units = [k for k in units if k not in null] or units
            if not units:
                continue
            k = int(units[0])
            pivots.add(k)
            if np.count_nonzero(v) == 1:
                continue
            e_k = np.zeros(nn, dtype=np.int64)
            e_k[k] = 1
            # T S = T + (T (v - e_k)) e_k^T
            T = T + sp.csr_matrix(np.asarray(T @ (v - e_k)).reshape(-1, 1)) @ sp.csr_matrix(
                e_k.reshape(1, -1))
            # S^-1 = I + (s - e_k) e_k^T, s = -(v - e_k) v_k with s_k = v_k (v_k = +-1);
            # S^-1 T^-1 = T^-1 + (s - e_k) (row k of T^-1)
            s_col = -(v - e_k) * v[k]
            s_col[k] = v[k]
            Tinv = Tinv + sp.csr_matrix((s_col - e_k).reshape(-1, 1)) @ Tinv[[k]]
        T.eliminate_zeros()
        Tinv.eliminate_zeros()
        self.T, self.Tinv = T.tocsr(), Tinv.tocsr()
        self.T.sort_indices()
        self.paths = [dict(zip(self.T.indices[a:b].tolist(), self.T.data[a:b].tolist()))
                      for a, b in zip(self.T.indptr[:-1], self.T.indptr[1:])]

    def state(self, i: int) -> Path:
        """Coordinates (with integer multipliers) summing to full state i."""
        if i >= self.nn:
            return {i: 1}
        return {**self.paths[i], **self.poles[i]} if self.poles[i] else self.paths[i]

    def row(self, i: int) -> Path:
        """The cutset rows (integer multipliers) that node i's KCL enters: its node part of T
        (the shifts move columns only; the internal voltages keep their own rows)."""
        return self.paths[i]

    def coef(self, aff: Affine) -> dict[int, float]:
        """The Affine's coefficients over x, each an exactly rounded sum (math.fsum)."""
        parts: dict[int, list[float]] = {}
        for i, a in aff.coef.items():
            for k, m in self.state(i).items():
                parts.setdefault(k, []).append(m * a)
        out = {k: math.fsum(v) for k, v in parts.items()}
        return {k: v for k, v in out.items() if v != 0.0}

    def matrices(self) -> tuple[sp.csr_matrix, sp.csr_matrix]:
        """(T, T^-1) over the full state (identity on the currents)."""
        extra = self.n - self.nn
        T = sp.block_diag([self.T.astype(float), sp.identity(extra)], "csr")
        Tinv = sp.block_diag([self.Tinv.astype(float), sp.identity(extra)], "csr")
        if self.shifted:                  # y_nodes = T x + P w, so x = T^-1 (y_nodes - P w)
            rows = [m for m, ws in enumerate(self.poles) for _ in ws]
            cols = [j for ws in self.poles for j in ws]
            vals = [float(a) for ws in self.poles for a in ws.values()]
            P = sp.csr_matrix((vals, (rows, cols)), shape=(self.n, self.n))
            T = (T + P).tocsr()
            Tinv = (Tinv - Tinv @ P).tocsr()
        return T, Tinv


def assemble(circuit: Circuit, lay: Layout, br: Branches, parents: dict[int, int],
             l_p: float, t_pulse: float, parasitic: dict[str, float],
             owners: dict[str, int] | None = None):
    """(K_x, M_x, T, T^-1, transform) of M_x x' = -K_x x + b_x in tree coordinates; b_x, the
    only part that depends on the sources' values, comes from ``constants`` with the same
    transform.  ``owners``: the closed carriers' tree edges (``forest``), for the shifted
    coordinates of carriers of an internal voltage (``_shifts``)."""
    caps = _capacitors(circuit, parasitic)
    tr = _Transform(lay, parents, _null_directions(circuit, lay, caps),
                    _shifts(circuit, lay, br, owners or {}), _node_capacitance(lay, caps))
    n = lay.n
    K: dict[tuple[int, int], list[float]] = {}
    M: dict[tuple[int, int], list[float]] = {}

    def stamp(rowpath: Path, aff: Affine, sign: float) -> None:
        coef = tr.coef(aff)
        for r, m in rowpath.items():
            for j, a in coef.items():
                K.setdefault((r, j), []).append(sign * m * a)

    by_name = {p.name: p for p in circuit.parts}      # Circuit.part is a linear search
    for part, cur in flows(by_name, br):
        stamp(_cutset(tr, lay, part.p, part.n), cur, 1.0)
    for name in lay.inductors + lay.carriers:  # L di/dt = v_p - v_n; L_p di_p/dt = u
        part, r = by_name[name], lay.part_index[name]
        if name in lay.inductors:
            u = Affine(_voltage(lay, part.p, part.n))
            M.setdefault((r, r), []).append(part.value)
        else:
            u = br.voltages[name] if br.voltages[name] is not None else Affine({r: -l_p / t_pulse})
            M.setdefault((r, r), []).append(l_p)
        stamp({r: 1}, u, -1.0)
    for r, m, f in pole_rows(circuit, lay):  # an amplifier's internal voltage: m w' = f
        M.setdefault((r, r), []).append(m)
        stamp({r: 1}, f, -1.0)
    for p, q, c in caps:
        d = _cutset(tr, lay, p, q)
        d_col = _cutset(tr, lay, p, q, column=True) if tr.shifted else d
        for k, mk in d.items():
            for l_, ml in d_col.items():
                M.setdefault((k, l_), []).append(c * mk * ml)
    T, Tinv = tr.matrices()
    return _matrix(K, n), _matrix(M, n), T, Tinv, tr


def constants(circuit: Circuit, lay: Layout, br: Branches, tr: _Transform) -> np.ndarray:
    """b_x, shape (n,): the constant terms of ``assemble``'s rows for the branch expressions
    ``br`` (the same stamps, each row an exactly rounded sum, math.fsum).  Only parts whose
    current or voltage has a constant term contribute."""
    b: list[list[float]] = [[] for _ in range(lay.n)]
    by_name = {p.name: p for p in circuit.parts}
    for part, cur in flows(by_name, br):
        if cur.const:
            for r, m in _cutset(tr, lay, part.p, part.n).items():
                b[r].append(-m * cur.const)
    for name in lay.carriers:  # L_p di_p/dt = u: the row of u (an open switch has none)
        u = br.voltages[name]
        if u is not None and u.const:
            b[lay.part_index[name]].append(u.const)
    return np.array([math.fsum(v) for v in b])


def _cutset(tr: _Transform, lay: Layout, p: str, q: str, column: bool = False) -> Path:
    """The cutset rows (integer multipliers) a branch from p to q enters; with ``column`` the
    coordinates of v_p - v_q (the same but for the shifted carriers' internal voltages)."""
    path = tr.state if column else tr.row
    return _combine([(path(lay.node_index[x]), s) for x, s in ((p, 1), (q, -1))
                     if x in lay.node_index])


def _shifts(circuit: Circuit, lay: Layout, br: Branches, owners: dict[str, int]
            ) -> dict[int, dict[int, int]]:
    """The tree-edge child index -> {pole state index: integer multiplier} of ``_Transform``:
    for each closed carrier in the forest whose u = v_p - v_n + sum a_j w_j holds internal
    voltages w_j (an op-amp with a gain-bandwidth product, a_j = -1), D = -a_j with its tree
    edge's child on p, +a_j on n, so that its coordinate is +-u."""
    out: dict[int, dict[int, int]] = {}
    poles = set(lay.pole_index.values())
    for name, child in owners.items():
        u = br.voltages.get(name)
        extra = {} if u is None else {j: a for j, a in u.coef.items() if j in poles}
        if not extra or any(a != round(a) for a in extra.values()):
            continue
        sign = 1 if lay.node_index.get(circuit.part(name).p) == child else -1
        out[child] = {j: -sign * int(a) for j, a in extra.items()}
    return out


def _voltage(lay: Layout, a: str, b: str) -> dict[int, float]:
    coef: dict[int, float] = {}
    if a in lay.node_index:
        coef[lay.node_index[a]] = 1.0
    if b in lay.node_index:
        coef[lay.node_index[b]] = coef.get(lay.node_index[b], 0.0) - 1.0
    return coef


def _matrix(entries: dict[tuple[int, int], list[float]], n: int) -> sp.csr_matrix:
    keys = [k for k, v in entries.items()]
    vals = [math.fsum(entries[k]) for k in keys]
    rows = [k[0] for k in keys]
    cols = [k[1] for k in keys]
    A = sp.csr_matrix((vals, (rows, cols)), shape=(n, n))
    A.eliminate_zeros()
    return A


class Reducer:
    """The elimination of the coordinates whose M row is zero (Kron reduction), factorised once
    per set of matrices and applied to any constant vector b (``constants``).

    With a those coordinates and d the rest, 0 = -K_aa x_a - K_ad x_d + b_a gives
    x_a = P x_d + p (P = -K_aa^-1 K_ad, p = K_aa^-1 b_a), and M_dd x_d' = -K_r x_d + b_r with
    K_r = K_dd + K_da P, b_r = b_d - K_da p.

    Attributes:
        K_r, M_r: the reduced matrices (CSC), shape (n_d, n_d).

    Raises:
        Unreduced: K_aa is singular (on construction).
    """

    def __init__(self, K: sp.csr_matrix, M: sp.csr_matrix, T: sp.csr_matrix,
                 Tinv: sp.csr_matrix) -> None:
        n = K.shape[0]
        has_m = np.asarray(abs(M).sum(axis=1)).ravel() > 0
        self.dyn, self.alg = dyn, alg = np.flatnonzero(has_m), np.flatnonzero(~has_m)
        self.position = -np.ones(n, dtype=int)
        self.position[dyn] = np.arange(dyn.size)
        K = K.tocsr()
        K_dd, self.K_da = K[dyn][:, dyn], K[dyn][:, alg]
        K_ad, K_aa = K[alg][:, dyn], K[alg][:, alg]
        self.lu = None
        if alg.size:
            try:
                self.lu = spla.splu(K_aa.tocsc())
            except RuntimeError:
                raise Unreduced() from None
            P = -self.lu.solve(K_ad.toarray()) if dyn.size else np.zeros((alg.size, 0))
            if not np.all(np.isfinite(P)):
                raise Unreduced()
        else:
            P = np.zeros((0, dyn.size))
        # lift_x: identity on the integrated coordinates, P on the eliminated ones
        pr, pc = np.nonzero(P)
        lift_x = sp.csr_matrix((np.concatenate([np.ones(dyn.size), P[pr, pc]]),
                                (np.concatenate([dyn, alg[pr]]),
                                 np.concatenate([np.arange(dyn.size), pc]))),
                               shape=(n, dyn.size))
        lift = (T @ lift_x).tocsr()
        self.T, self.to_d = T, Tinv[dyn]
        self.K_r = sp.csc_matrix(K_dd + self.K_da @ sp.csr_matrix(P))
        self.M_r = M.tocsr()[dyn][:, dyn].tocsc()
        self.lift = lift if n > SPARSE_ABOVE else lift.toarray()

    def constants(self, b: np.ndarray) -> tuple[Reduction, np.ndarray]:
        """(reduction, b_r) for the constant vector b of the unreduced rows, shape (n,).

        Raises:
            Unreduced: p = K_aa^-1 b_a is not finite.
        """
        alg = self.alg
        if alg.size:
            p = self.lu.solve(b[alg])
            if not np.all(np.isfinite(p)):
                raise Unreduced()
        else:
            p = np.zeros(0)
        lift_cx = np.zeros(b.shape[0])
        lift_cx[alg] = p
        lift_c = np.asarray(self.T @ lift_cx).ravel()
        b_r = b[self.dyn] - self.K_da @ p
        return Reduction(self.dyn, self.lift, lift_c, self.position, self.to_d), b_r

