"""Modified nodal analysis: the variable layout, the scaling and the graph of C x' + G x = b
(the stamps of each part kind are ``stamps.py``).

The state x holds the node voltages (ground removed, in ``Circuit.nodes`` order) followed by one
branch current for every voltage-type part (voltage source, vcvs, ccvs, inductor) and for every
switch, in file order.  A switch keeps its current variable in every interval, so the layout is the
same across intervals and only the switch's branch row changes (open ideal: i = 0; open with
off-resistance: v - R_off i = 0; closed ideal: v = 0; closed with on-resistance: v - R_on i = 0).

Rows: one KCL row per node (the sum of the currents leaving the node through its parts equals the
current injected into it by independent sources), then one branch row per branch variable.
Units of the unscaled system: KCL rows in A, branch rows in V.

Scaling (the engine's non-dimensionalisation): currents are measured in units of V/R0 and time in
units of T, where R0 is the geometric mean of the resistances present (resistors and switch
on-resistances) and T the geometric mean of the products R0*C and L/R0 over all capacitors and
inductors and of 1/ω_t over the op-amps with a gain-bandwidth product.  With
D = diag(1 for voltages, 1/R0 for currents) (x = D x~) and row weights
E = diag(R0 for KCL rows, 1 for branch rows), the scaled system is

    C~ dx~/dtau + G~ x~ = b~,   C~ = E C D / T,  G~ = E G D,  b~ = E b,  t = T tau,

whose entries are O(1) when part values are typical of one another and whose modes are O(1).
"""

from __future__ import annotations

from functools import partial
import math
import weakref
from dataclasses import dataclass, field
from typing import Callable, Mapping

import numpy as np

from ..model import (CAPACITOR, CURRENT_TYPE, GBW, INDUCTOR, KIND_SPECS, OPAMP, RESISTOR, SWITCH,
                     SWITCHED, Circuit, Part)

#: from this many parts on, node groups come from scipy.sparse.csgraph and resistors and
#: capacitors are stamped in one vectorised call (below, the plain Python loops are faster)
GRAPH_MIN_PARTS = 48


@dataclass(frozen=True)
class Layout:
    """Positions of the unknowns in x.

    Attributes:
        ground: the reference node (not an unknown).
        nodes: non-ground node names; node i is x[i].
        branches: names of parts with a branch current; branch j is x[len(nodes) + j].
    """

    ground: str
    nodes: tuple[str, ...]
    branches: tuple[str, ...]

    @property
    def size(self) -> int:
        return len(self.nodes) + len(self.branches)

    @property
    def n_nodes(self) -> int:
        return len(self.nodes)

    def node(self, name: str) -> int | None:
        """Index of node ``name`` in x, None for ground (KeyError if unknown)."""
        if name == self.ground:
            return None
        return self._node_index[name]

    def branch(self, part: str) -> int:
        """Index in x of the branch current of ``part`` (KeyError if it has none)."""
        return len(self.nodes) + self._branch_index[part]

    def __post_init__(self) -> None:
        object.__setattr__(self, "_node_index", {n: i for i, n in enumerate(self.nodes)})
        object.__setattr__(self, "_branch_index", {b: j for j, b in enumerate(self.branches)})


@dataclass(frozen=True)
class Scale:
    """The non-dimensionalisation: resistance R0 in ohms and time T in seconds."""

    r0: float
    t: float

    def var(self, layout: Layout) -> np.ndarray:
        """D as a vector, shape (n,): x = D * x~ (1 for voltages, 1/R0 for currents)."""
        d = np.ones(layout.size)
        d[layout.n_nodes:] = 1.0 / self.r0
        return d

    def row(self, layout: Layout) -> np.ndarray:
        """E as a vector, shape (n,): R0 on KCL rows, 1 on branch rows."""
        e = np.ones(layout.size)
        e[:layout.n_nodes] = self.r0
        return e


def _geomean(values: list[float]) -> float:
    return math.exp(sum(math.log(v) for v in values) / len(values))


def scale_of(circuit: Circuit) -> Scale:
    """R0 = geometric mean of resistances; T = geometric mean of R0*C, L/R0 and each op-amp's
    1/ω_t (its gain-bandwidth pole, ``opamp_omega``) (DESIGN step 1)."""
    res = [p.value for p in circuit.parts if p.kind == RESISTOR and p.value and p.value > 0]
    res += [p.on_resistance for p in circuit.parts
            if p.kind == SWITCH and p.on_resistance and p.on_resistance > 0]
    caps = [p.value for p in circuit.parts if p.kind == CAPACITOR and p.value and p.value > 0]
    inds = [p.value for p in circuit.parts if p.kind == INDUCTOR and p.value and p.value > 0]
    if res:
        r0 = _geomean(res)
    elif caps and inds:
        r0 = math.sqrt(_geomean(inds) / _geomean(caps))
    else:
        r0 = 1.0
    times = [r0 * c for c in caps] + [ell / r0 for ell in inds]
    times += [1.0 / w for w in map(opamp_omega, circuit.parts) if w is not None]
    return Scale(r0=r0, t=_geomean(times) if times else 1.0)


def opamp_omega(part: Part) -> float | None:
    """ω_t = 2π·gbw in rad/s of an op-amp with a gain-bandwidth product, else None."""
    gbw = part.param(GBW) if part.kind == OPAMP else None
    return None if gbw is None else 2.0 * math.pi * gbw


def voltage_row(layout: Layout, p: str, n: str) -> np.ndarray:
    """Coefficients of v(p) - v(n) over x, shape (n,)."""
    row = np.zeros(layout.size)
    ip, in_ = layout.node(p), layout.node(n)
    if ip is not None:
        row[ip] += 1.0
    if in_ is not None:
        row[in_] -= 1.0
    return row


@dataclass(frozen=True)
class Index:
    """Derived, read-only lookups of one circuit, built once (see ``index_of``).

    Attributes:
        nodes: ``circuit.nodes`` (ground first).
        parts: part name -> part.
        terminals: per part (file order), the positions in ``nodes`` of its p and n terminals,
            shape (parts, 2), int.
        positions: per node of ``nodes``, its position in the state x of ``layout_of`` (the
            ground: n_nodes, where a padded zero sits), shape (nodes,), int.
        components: memo of derived values: ``floating_groups`` (which parts connect, as the
            bytes of the mask -> the groups), ``_stamp_admittances`` (per kind), ``layout_of``
            and ``capacitor_null_basis``.
    """

    nodes: tuple[str, ...]
    parts: dict
    terminals: np.ndarray
    positions: np.ndarray
    components: dict = field(default_factory=dict, compare=False, repr=False)


_INDEX: dict[int, tuple[weakref.ref, Index]] = {}


def index_of(circuit: Circuit) -> Index:
    """The ``Index`` of ``circuit``, built once per circuit.

    Keyed by the circuit's identity and checked through a weak reference, so a new circuit at a
    recycled address gets a fresh index (the circuit is frozen, so the index never goes stale).
    """
    entry = _INDEX.get(id(circuit))
    if entry is None or entry[0]() is not circuit:
        if len(_INDEX) > 64:
            for key in [k for k, (ref, _) in _INDEX.items() if ref() is None]:
                del _INDEX[key]
        nodes = circuit.nodes
        where = {n: i for i, n in enumerate(nodes)}
        terminals = np.array([[where[p.p], where[p.n]] for p in circuit.parts],
                             dtype=int).reshape(-1, 2)
        positions = np.empty(len(nodes), dtype=int)
        others = [i for i, n in enumerate(nodes) if n != circuit.ground]
        positions[others] = np.arange(len(others))
        positions[[i for i, n in enumerate(nodes) if n == circuit.ground]] = len(others)
        entry = (weakref.ref(circuit), Index(nodes, {p.name: p for p in circuit.parts},
                                             terminals, positions))
        _INDEX[id(circuit)] = entry
    return entry[1]


def part_named(circuit: Circuit, name: str) -> Part:
    """``circuit.part(name)`` through the circuit's ``Index`` (KeyError if none)."""
    return index_of(circuit).parts[name]


def part_voltages(circuit: Circuit, layout: Layout, x: np.ndarray) -> np.ndarray:
    """v(p) - v(n) of every part (file order) for the state ``x`` (shape (n,) or (n, k)),
    shape (parts,) or (parts, k): the rows ``voltage_row`` gives, applied all at once."""
    idx = index_of(circuit)
    pos = layout_positions(idx, layout)
    xe = np.concatenate([np.asarray(x)[:layout.n_nodes], np.zeros((1,) + np.shape(x)[1:])])
    return xe[pos[idx.terminals[:, 0]]] - xe[pos[idx.terminals[:, 1]]]


def layout_positions(idx: Index, layout: Layout) -> np.ndarray:
    """Position in x of every node of ``idx.nodes`` (ground: n_nodes, a padded zero)."""
    if layout.ground == idx.nodes[0] and layout.nodes == idx.nodes[1:]:
        return idx.positions                      # the layout of ``layout_of``
    return np.array([layout.n_nodes if n == layout.ground else layout.node(n)
                     for n in idx.nodes], dtype=int)


def scaled(g: np.ndarray, c: np.ndarray, b: np.ndarray, layout: Layout,
           scale: Scale, overwrite: bool = False) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(G~, C~, b~) = (E G D, E C D / T, E b) as in the module docstring (each product taken
    left to right as written, the later ones in place: no temporaries of shape (n, n)).
    ``overwrite``: G~ and C~ are g and c themselves, scaled in place (the same floats: the
    products commute), so a large pencil is never held twice."""
    d, e = scale.var(layout), scale.row(layout)
    if overwrite:
        gs, cs = g, c
        gs *= e[:, None]
        cs *= e[:, None]
    else:
        gs, cs = e[:, None] * g, e[:, None] * c
    gs *= d[None, :]
    cs *= d[None, :]
    cs /= scale.t
    return gs, cs, e * b


def find_root(parent: dict, x):
    """The representative of ``x`` in ``parent`` (node -> parent; new nodes join as their own
    set), halving the path on the way (Tarjan's union-find)."""
    parent.setdefault(x, x)
    while parent[x] != x:
        parent[x] = parent[parent[x]]
        x = parent[x]
    return x


def capacitor_null_basis(circuit: Circuit, layout: Layout) -> np.ndarray:
    """Orthonormal basis of the null space of C (and of C~), shape (n, m), built from the graph.

    C is the capacitor Laplacian on the node block plus diag(-L) on the inductor currents, and
    on the branch row of an op-amp with a gain-bandwidth product −(v(p) − v(n))/ω_t, so its
    null space is spanned by (a) every branch current that is not an inductor's, and (b) for each
    set of nodes joined by capacitors and such op-amps' outputs that does not reach ground, the
    (normalised) indicator of that set (a node without either is a set of its own): an
    indicator of a union of capacitor groups meets an op-amp row as a(p) − a(n), zero exactly
    when its output terminals are in one set.  Exact, with no rank decision.
    Built once per circuit and layout (read-only).
    """
    memo = index_of(circuit).components
    key = ("null", layout)
    if key not in memo:
        basis = _capacitor_null_basis(circuit, layout)
        basis.flags.writeable = False
        memo[key] = basis
    return memo[key]


def _capacitor_null_basis(circuit: Circuit, layout: Layout) -> np.ndarray:
    parent = {n: n for n in index_of(circuit).nodes}

    find = partial(find_root, parent)

    for part in circuit.parts:
        if part.kind == CAPACITOR or opamp_omega(part) is not None:
            parent[find(part.p)] = find(part.n)
    groups: dict[str, list[int]] = {}
    for i, node in enumerate(layout.nodes):
        root = find(node)
        if root != find(layout.ground):
            groups.setdefault(root, []).append(i)
    cols = []
    for members in groups.values():
        col = np.zeros(layout.size)
        col[members] = 1.0 / math.sqrt(len(members))
        cols.append(col)
    for name in layout.branches:
        if part_named(circuit, name).kind != INDUCTOR:
            col = np.zeros(layout.size)
            col[layout.branch(name)] = 1.0
            cols.append(col)
    return np.array(cols).T if cols else np.zeros((layout.size, 0))


def floating_groups(circuit: Circuit, connects: Callable[[Part], bool]) -> list[list[str]]:
    """Sets of non-ground nodes with no path to ground through parts for which ``connects`` holds.

    Control terminals of vcvs/vccs never connect.  Returned in node order, each group in node
    order; such groups have an undefined common-mode voltage.  Connected components by
    union-find for small circuits, by scipy.sparse.csgraph (breadth-first search in C) from
    GRAPH_MIN_PARTS parts on; memoised per circuit by which parts connect (intervals with the
    same switch states share the answer).
    """
    idx = index_of(circuit)
    mask = np.fromiter((connects(p) for p in circuit.parts), bool, len(circuit.parts))
    return _groups_of(circuit, idx, mask)


def _groups_of(circuit: Circuit, idx: Index, mask: np.ndarray) -> list[list[str]]:
    """The floating groups when the parts in ``mask`` connect, memoised by the mask."""
    key = mask.tobytes()
    if key not in idx.components:
        if len(idx.components) > 256:
            for stale in [k for k in idx.components if isinstance(k, bytes)]:
                del idx.components[stale]
        idx.components[key] = _components(circuit, idx, mask)
    return [list(g) for g in idx.components[key]]


def _components(circuit: Circuit, idx: Index, mask: np.ndarray) -> tuple[tuple[str, ...], ...]:
    """The node groups off ground when the parts in ``mask`` connect (``floating_groups``)."""
    nodes, ground = idx.nodes, circuit.ground
    if len(circuit.parts) < GRAPH_MIN_PARTS:
        parent = {n: n for n in nodes}
        find = partial(find_root, parent)
        for part, joins in zip(circuit.parts, mask):
            if joins:
                parent[find(part.p)] = find(part.n)
        label = [find(n) for n in nodes]
    else:
        import scipy.sparse as sp               # deferred: small circuits never need it
        from scipy.sparse import csgraph
        ends = idx.terminals[mask]
        graph = sp.coo_matrix((np.ones(len(ends)), (ends[:, 0], ends[:, 1])),
                              shape=(len(nodes), len(nodes)))
        label = csgraph.connected_components(graph, directed=False)[1].tolist()
    home = label[nodes.index(ground)]
    groups: dict = {}
    for node, lab in zip(nodes, label):
        if node != ground and lab != home:
            groups.setdefault(lab, []).append(node)
    return tuple(tuple(g) for g in groups.values())


def interval_groups(circuit: Circuit, closed: Mapping[str, bool]) -> list[list[str]]:
    """``floating_groups(circuit, connects_in_interval(closed))``, the mask built from arrays:
    every part but current-type outputs connects, a switch when closed or resistive when open
    (the static part of the mask and the switch positions are kept in the circuit's index)."""
    idx = index_of(circuit)
    if "interval-mask" not in idx.components:
        parts = circuit.parts
        base = np.array([KIND_SPECS[p.kind].branch not in (CURRENT_TYPE, SWITCHED)
                         for p in parts], dtype=bool)
        switches = [i for i, p in enumerate(parts) if p.kind == SWITCH]
        idx.components["interval-mask"] = (
            base, np.array(switches, dtype=int), tuple(parts[i].name for i in switches),
            np.array([bool(parts[i].off_resistance) for i in switches], dtype=bool))
    base, where, names, resistive = idx.components["interval-mask"]
    mask = base.copy()
    if where.size:
        mask[where] = np.array([bool(closed[n]) for n in names], dtype=bool) | resistive
    return _groups_of(circuit, idx, mask)


def connects_in_interval(closed: Mapping[str, bool]) -> Callable[[Part], bool]:
    """Which parts join their two nodes in an interval: all but current-type outputs and open
    ideal switches."""
    def connects(part: Part) -> bool:
        if KIND_SPECS[part.kind].current_branch:
            return False
        if part.kind == SWITCH:
            return bool(closed[part.name]) or bool(part.off_resistance)
        return True
    return connects


def pin(g: np.ndarray, layout: Layout, groups: list[list[str]], conductance: float) -> None:
    """Tie the first node of each floating group to ground with ``conductance`` (in place)."""
    for group in groups:
        i = layout.node(group[0])
        g[i, i] += conductance
