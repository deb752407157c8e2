"""Modified nodal analysis: the variable layout, the scaling and the stamps C x' + G x = b.

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
inductors.  With D = diag(1 for voltages, 1/R0 for currents) (x = D x~) and row weights
E = diag(R0 for KCL rows, 1 for branch rows), the scaled system is

    C~ dx~/dtau + G~ x~ = b~,   C~ = E C D / T,  G~ = E G D,  b~ = E b,  t = T tau,

whose entries are O(1) when part values are typical of one another and whose modes are O(1).
"""

from __future__ import annotations

from functools import partial
import math
import weakref
from dataclasses import dataclass
from typing import Callable, Mapping

import numpy as np

from ..model import (CAPACITOR, CCCS, CCVS, CURRENT_SOURCE, INDUCTOR, RESISTOR, SWITCH, VCCS,
                     VCVS, VOLTAGE_SOURCE, Circuit, Part)

#: part kinds that own a branch-current variable
BRANCH_KINDS = (VOLTAGE_SOURCE, VCVS, CCVS, INDUCTOR, SWITCH)


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


def layout_of(circuit: Circuit) -> Layout:
    """The variable layout of ``circuit`` (fixed for all intervals)."""
    nodes = tuple(n for n in circuit.nodes if n != circuit.ground)
    branches = tuple(p.name for p in circuit.parts if p.kind in BRANCH_KINDS)
    return Layout(circuit.ground, nodes, branches)


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
    """R0 = geometric mean of resistances; T = geometric mean of R0*C and L/R0 (DESIGN step 1)."""
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
    return Scale(r0=r0, t=_geomean(times) if times else 1.0)


def _stamp_pair(m: np.ndarray, layout: Layout, row_p: str, row_n: str, col: np.ndarray) -> None:
    """Add ``col`` (a coefficient row vector) to the KCL row of row_p and subtract it at row_n."""
    ip, in_ = layout.node(row_p), layout.node(row_n)
    if ip is not None:
        m[ip] += col
    if in_ is not None:
        m[in_] -= col


def voltage_row(layout: Layout, p: str, n: str) -> np.ndarray:
    """Coefficients of v(p) - v(n) over x, shape (n,)."""
    row = np.zeros(layout.size)
    ip, in_ = layout.node(p), layout.node(n)
    if ip is not None:
        row[ip] += 1.0
    if in_ is not None:
        row[in_] -= 1.0
    return row


_PART_INDEX: dict[int, tuple[weakref.ref, dict[str, Part]]] = {}


def part_named(circuit: Circuit, name: str) -> Part:
    """``circuit.part(name)`` through a name index built once per circuit (KeyError if none).

    The index is keyed by the circuit's identity and checked through a weak reference, so a
    new circuit at a recycled address gets a fresh index.
    """
    entry = _PART_INDEX.get(id(circuit))
    if entry is None or entry[0]() is not circuit:
        if len(_PART_INDEX) > 64:
            for key in [k for k, (ref, _) in _PART_INDEX.items() if ref() is None]:
                del _PART_INDEX[key]
        entry = (weakref.ref(circuit), {p.name: p for p in circuit.parts})
        _PART_INDEX[id(circuit)] = entry
    return entry[1][name]


def current_row(circuit: Circuit, layout: Layout, name: str) -> np.ndarray:
    """Coefficients over x of the current p -> n through a current-sensing part, shape (n,).

    Voltage sources, switches and inductors give their branch variable; resistors (vp - vn)/R;
    vcvs and ccvs their branch variable; vccs and cccs their controlled output current.
    """
    part = part_named(circuit, name)
    if part.kind in BRANCH_KINDS:
        row = np.zeros(layout.size)
        row[layout.branch(name)] = 1.0
        return row
    if part.kind == RESISTOR:
        return voltage_row(layout, part.p, part.n) / part.value
    if part.kind == VCCS:
        return part.value * voltage_row(layout, *part.control)
    if part.kind == CCCS:
        return part.value * current_row(circuit, layout, part.control)
    raise KeyError(name)


def _switch_row(part: Part, closed: bool, size: int, j: int, vrow: np.ndarray) -> np.ndarray:
    """Branch row of a switch in the given state (see the module docstring)."""
    row = np.zeros(size)
    if closed:
        row += vrow
        if part.on_resistance:
            row[j] -= part.on_resistance
    elif part.off_resistance:
        row += vrow
        row[j] -= part.off_resistance
    else:
        row[j] = 1.0
    return row


def stamp(circuit: Circuit, layout: Layout, closed: Mapping[str, bool],
          value: Callable[[Part], float]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Unscaled MNA matrices (G, C, b), shapes (n, n), (n, n), (n,).

    Args:
        closed: switch name -> closed in this interval.
        value: independent source -> its value (V or A) in this interval.
    """
    size = layout.size
    g, c, b = np.zeros((size, size)), np.zeros((size, size)), np.zeros(size)
    for part in circuit.parts:
        if part.kind == RESISTOR:
            _stamp_two(g, layout, part.p, part.n, 1.0 / part.value)
            continue
        if part.kind == CAPACITOR:
            _stamp_two(c, layout, part.p, part.n, part.value)
            continue
        if part.kind == CURRENT_SOURCE:
            _inject(b, layout, part.p, part.n, value(part))
            continue
        vrow = voltage_row(layout, part.p, part.n)
        if part.kind in (VCCS, CCCS):
            _stamp_pair(g, layout, part.p, part.n, current_row(circuit, layout, part.name))
        else:
            _stamp_branch(circuit, layout, part, vrow, closed, value, g, c, b)
    return g, c, b


def _stamp_two(m: np.ndarray, layout: Layout, p: str, n: str, y: float) -> None:
    """Add the two-terminal admittance ``y`` between p and n (the entries ``_stamp_pair`` adds
    for ``y * voltage_row(p, n)``, written one by one: O(1) instead of O(n))."""
    ip, in_ = layout.node(p), layout.node(n)
    if ip is not None:
        m[ip, ip] += y
        if in_ is not None:
            m[ip, in_] -= y
    if in_ is not None:
        m[in_, in_] += y
        if ip is not None:
            m[in_, ip] -= y


def _inject(b: np.ndarray, layout: Layout, p: str, n: str, amps: float) -> None:
    """A current ``amps`` flowing from p through a source to n: it leaves node p, enters node n."""
    ip, in_ = layout.node(p), layout.node(n)
    if ip is not None:
        b[ip] -= amps
    if in_ is not None:
        b[in_] += amps


def _stamp_branch(circuit: Circuit, layout: Layout, part: Part, vrow: np.ndarray,
                  closed: Mapping[str, bool], value: Callable[[Part], float], g: np.ndarray,
                  c: np.ndarray, b: np.ndarray) -> None:
    """KCL column and branch row of a part with a branch current variable."""
    j = layout.branch(part.name)
    unit = np.zeros(layout.size)
    unit[j] = 1.0
    _stamp_pair(g, layout, part.p, part.n, unit)
    if part.kind == VOLTAGE_SOURCE:
        g[j] = vrow
        b[j] = value(part)
    elif part.kind == INDUCTOR:
        g[j] = vrow
        c[j, j] = -part.value
    elif part.kind == VCVS:
        g[j] = vrow - part.value * voltage_row(layout, *part.control)
    elif part.kind == CCVS:
        g[j] = vrow - part.value * current_row(circuit, layout, part.control)
    elif part.kind == SWITCH:
        g[j] = _switch_row(part, closed[part.name], layout.size, j, vrow)


def scaled(g: np.ndarray, c: np.ndarray, b: np.ndarray, layout: Layout,
           scale: Scale) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(G~, C~, b~) = (E G D, E C D / T, E b) as in the module docstring."""
    d, e = scale.var(layout), scale.row(layout)
    return e[:, None] * g * d[None, :], e[:, None] * c * d[None, :] / scale.t, e * b


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

    C is the capacitor Laplacian on the node block plus diag(-L) on the inductor currents, so its
    null space is spanned by (a) every branch current that is not an inductor's, and (b) for each
    set of nodes joined by capacitors that does not reach ground, the (normalised) indicator of
    that set (a node without capacitors is a set of its own).  Exact, with no rank decision.
    """
    parent = {n: n for n in circuit.nodes}

    find = partial(find_root, parent)

    for part in circuit.parts:
        if part.kind == CAPACITOR:
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
    order; such groups have an undefined common-mode voltage.
    """
    parent = {n: n for n in circuit.nodes}

    find = partial(find_root, parent)

    for part in circuit.parts:
        if connects(part):
            parent[find(part.p)] = find(part.n)
    groups: dict[str, list[str]] = {}
    for node in circuit.nodes:
        if node != circuit.ground and find(node) != find(circuit.ground):
            groups.setdefault(find(node), []).append(node)
    return list(groups.values())


def connects_in_interval(closed: Mapping[str, bool]) -> Callable[[Part], bool]:
    """Which parts join their two nodes in an interval: all but current-type outputs and open
    ideal switches."""
    def connects(part: Part) -> bool:
        if part.kind in (CURRENT_SOURCE, VCCS, CCCS):
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
