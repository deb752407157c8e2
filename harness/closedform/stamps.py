"""The exact engine's stamp of each part kind: its entries in C x' + G x = b (``STAMPS``).

One ``KindStamp`` per kind of ``model.KIND_SPECS``, found by the part's kind; ``stamp`` and
``stamp_sources`` assemble the matrices from them, ``current_row`` and ``layout_of`` ask them
which parts own a branch-current variable and how each other part's current reads off x.  These
are this engine's own equations (the numerical engine writes its own, ``simulate/branches.py``).

Conventions of ``mna.py``: KCL rows count the currents leaving a node through its parts; a part
with a branch variable j gets +1 in the KCL row of p and −1 in that of n in column j, and its
branch row j; every part follows the passive sign convention (current from p through it to n).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Mapping

import numpy as np

from ..model import (CAPACITOR, CCCS, CCVS, CURRENT_SOURCE, INDUCTOR, OPAMP, RESISTOR,
                     SWITCH, VCCS, VCVS, VOLTAGE_SOURCE, Circuit, Part)
from .mna import (GRAPH_MIN_PARTS, Layout, layout_positions, index_of, opamp_omega, part_named,
                  voltage_row)


@dataclass(frozen=True)
class Stamping:
    """What a kind's stamp writes into and reads from: the unscaled G, C (shape (n, n)) and b
    (shape (n,)) of one interval, its switch states and its independent sources' values."""

    circuit: Circuit
    layout: Layout
    closed: Mapping[str, bool]
    value: Callable[[Part], float]
    g: np.ndarray
    c: np.ndarray
    b: np.ndarray


@dataclass(frozen=True)
class KindStamp:
    """The closed form's equations of one part kind.

    Attributes:
        stamp: (Stamping, part) -> None: adds the part's entries (for a part with a branch
            variable: its branch row; its KCL column is added for it beforehand).
        branch: the part owns a branch-current variable in x.
        current: (circuit, layout, part) -> coefficients over x of its current p -> n, shape
            (n,), for a part without a branch variable whose current can be read off x (None:
            it has no such row; a part with a branch variable reads its variable).
        admittance: ("g" or "c", value -> admittance in S or F) for a two-terminal admittance,
            which circuits from ``GRAPH_MIN_PARTS`` parts on stamp in one vectorised call.
        drive: (b, layout, part, value) -> None for an independent source: its value in b.
    """

    stamp: Callable[[Stamping, Part], None]
    branch: bool = False
    current: Callable[[Circuit, Layout, Part], np.ndarray] | None = None
    admittance: tuple[str, Callable[[float], float]] | None = None
    drive: Callable[[np.ndarray, Layout, Part, float], None] | None = None


def _stamp_pair(m: np.ndarray, layout: Layout, row_p: str, row_n: str, col: np.ndarray) -> None:
    """Add ``col`` (a coefficient row vector) to the KCL row of row_p and subtract it at row_n."""
    ip, in_ = layout.node(row_p), layout.node(row_n)
    if ip is not None:
        m[ip] += col
    if in_ is not None:
        m[in_] -= col


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


def _inject(b: np.ndarray, layout: Layout, part: Part, amps: float) -> None:
    """A current ``amps`` flowing from p through a source to n: it leaves node p, enters node n."""
    ip, in_ = layout.node(part.p), layout.node(part.n)
    if ip is not None:
        b[ip] -= amps
    if in_ is not None:
        b[in_] += amps


def _branch_value(b: np.ndarray, layout: Layout, part: Part, volts: float) -> None:
    """A voltage source's value on its branch row."""
    b[layout.branch(part.name)] = volts


def _resistor(st: Stamping, part: Part) -> None:
    _stamp_two(st.g, st.layout, part.p, part.n, 1.0 / part.value)


def _capacitor(st: Stamping, part: Part) -> None:
    _stamp_two(st.c, st.layout, part.p, part.n, part.value)


def _current_source(st: Stamping, part: Part) -> None:
    _inject(st.b, st.layout, part, st.value(part))


def _controlled_current(st: Stamping, part: Part) -> None:
    """A vccs or cccs: its output current row into the KCL rows of p and n."""
    _stamp_pair(st.g, st.layout, part.p, part.n, current_row(st.circuit, st.layout, part.name))


def _voltage_source(st: Stamping, part: Part) -> None:
    j = st.layout.branch(part.name)
    st.g[j] = voltage_row(st.layout, part.p, part.n)
    _branch_value(st.b, st.layout, part, st.value(part))


def _inductor(st: Stamping, part: Part) -> None:
    """v(p) − v(n) − L di/dt = 0 on its branch row."""
    j = st.layout.branch(part.name)
    st.g[j] = voltage_row(st.layout, part.p, part.n)
    st.c[j, j] = -part.value


def _vcvs(st: Stamping, part: Part) -> None:
    st.g[st.layout.branch(part.name)] = (voltage_row(st.layout, part.p, part.n)
                                         - part.value * voltage_row(st.layout, *part.control))


def _ccvs(st: Stamping, part: Part) -> None:
    st.g[st.layout.branch(part.name)] = (
        voltage_row(st.layout, part.p, part.n)
        - part.value * current_row(st.circuit, st.layout, part.control))


def _opamp(st: Stamping, part: Part) -> None:
    """The nullor: v(cp) − v(cn) = 0 on its branch row (its output current is the branch
    variable, its output voltage free); with a gain A: v(cp) − v(cn) − (v(p) − v(n))/A = 0.

    With a gain-bandwidth product (``gbw``, ω_t = 2π·gbw in rad/s) the open-loop gain
    A(s) = A/(1 + s·A/ω_t) (or ω_t/s without a gain) gives, on the same row,
    v(cp) − v(cn) − (v(p) − v(n))/A − (v(p) − v(n))′/ω_t = 0: the entry −1/ω_t on the output
    voltage in C makes v(p) − v(n) a state of the pencil (the single pole)."""
    j = st.layout.branch(part.name)
    out = voltage_row(st.layout, part.p, part.n)
    row = voltage_row(st.layout, *part.control)
    if part.value is not None:
        row = row - out / part.value
    st.g[j] = row
    omega = opamp_omega(part)
    if omega is not None:
        st.c[j] -= out / omega


def _switch(st: Stamping, part: Part) -> None:
    """Open ideal: i = 0; open with off-resistance: v − R_off i = 0; closed ideal: v = 0;
    closed with on-resistance: v − R_on i = 0."""
    j = st.layout.branch(part.name)
    row = np.zeros(st.layout.size)
    if st.closed[part.name]:
        row += voltage_row(st.layout, part.p, part.n)
        if part.on_resistance:
            row[j] -= part.on_resistance
    elif part.off_resistance:
        row += voltage_row(st.layout, part.p, part.n)
        row[j] -= part.off_resistance
    else:
        row[j] = 1.0
    st.g[j] = row


def _resistor_current(circuit: Circuit, layout: Layout, part: Part) -> np.ndarray:
    return voltage_row(layout, part.p, part.n) / part.value


def _vccs_current(circuit: Circuit, layout: Layout, part: Part) -> np.ndarray:
    return part.value * voltage_row(layout, *part.control)


def _cccs_current(circuit: Circuit, layout: Layout, part: Part) -> np.ndarray:
    return part.value * current_row(circuit, layout, part.control)


#: kind -> its stamp; in ``model.KIND_SPECS`` order (large circuits stamp the vectorised
#: admittances in this order, then every other part in file order)
STAMPS: Mapping[str, KindStamp] = {
    RESISTOR: KindStamp(_resistor, current=_resistor_current,
                        admittance=("g", lambda v: 1.0 / v)),
    CAPACITOR: KindStamp(_capacitor, admittance=("c", lambda v: v)),
    INDUCTOR: KindStamp(_inductor, branch=True),
    VOLTAGE_SOURCE: KindStamp(_voltage_source, branch=True, drive=_branch_value),
    CURRENT_SOURCE: KindStamp(_current_source, drive=_inject),
    SWITCH: KindStamp(_switch, branch=True),
    VCVS: KindStamp(_vcvs, branch=True),
    VCCS: KindStamp(_controlled_current, current=_vccs_current),
    CCVS: KindStamp(_ccvs, branch=True),
    CCCS: KindStamp(_controlled_current, current=_cccs_current),
    OPAMP: KindStamp(_opamp, branch=True),
}


def layout_of(circuit: Circuit) -> Layout:
    """The variable layout of ``circuit`` (fixed for all intervals; built once per circuit):
    a branch current for every part whose kind's stamp owns one, in file order."""
    memo = index_of(circuit).components
    if "layout" not in memo:
        nodes = tuple(n for n in index_of(circuit).nodes if n != circuit.ground)
        branches = tuple(p.name for p in circuit.parts if STAMPS[p.kind].branch)
        memo["layout"] = Layout(circuit.ground, nodes, branches)
    return memo["layout"]


def current_row(circuit: Circuit, layout: Layout, name: str) -> np.ndarray:
    """Coefficients over x of the current p -> n through a current-sensing part, shape (n,).

    A part with a branch variable gives it; any other its kind's ``current`` (a resistor
    (vp - vn)/R, a vccs or cccs its controlled output current); KeyError for a part with none.
    """
    part = part_named(circuit, name)
    kind = STAMPS[part.kind]
    if kind.branch:
        row = np.zeros(layout.size)
        row[layout.branch(name)] = 1.0
        return row
    if kind.current is None:
        raise KeyError(name)
    return kind.current(circuit, layout, part)


def stamp(circuit: Circuit, layout: Layout, closed: Mapping[str, bool],
          value: Callable[[Part], float]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Unscaled MNA matrices (G, C, b), shapes (n, n), (n, n), (n,).

    From GRAPH_MIN_PARTS parts on, the two-terminal admittances (resistors, capacitors) are
    stamped all at once (``_stamp_admittances``); every other part (and, below that size, every
    part) one by one in file order, through its kind's ``KindStamp``.

    Args:
        closed: switch name -> closed in this interval.
        value: independent source -> its value (V or A) in this interval.
    """
    size = layout.size
    st = Stamping(circuit, layout, closed, value, np.zeros((size, size)), np.zeros((size, size)),
                  np.zeros(size))
    together = set()
    if len(circuit.parts) >= GRAPH_MIN_PARTS:
        for kind, entry in STAMPS.items():
            if entry.admittance is not None:
                matrix, admittance = entry.admittance
                _stamp_admittances(st.g if matrix == "g" else st.c, circuit, layout, kind,
                                   admittance)
                together.add(kind)
    for part in circuit.parts:
        if part.kind in together:
            continue
        entry = STAMPS[part.kind]
        if entry.branch:                  # its KCL column
            unit = np.zeros(size)
            unit[layout.branch(part.name)] = 1.0
            _stamp_pair(st.g, layout, part.p, part.n, unit)
        entry.stamp(st, part)
    return st.g, st.c, st.b


def stamp_sources(circuit: Circuit, layout: Layout, value: Callable[[Part], float]) -> np.ndarray:
    """The right side b alone, shape (n,): what ``stamp`` gives for b (each independent
    source's ``drive``), in O(parts)."""
    b = np.zeros(layout.size)
    for part in circuit.parts:
        drive = STAMPS[part.kind].drive
        if drive is not None:
            drive(b, layout, part, value(part))
    return b


def _stamp_admittances(m: np.ndarray, circuit: Circuit, layout: Layout, kind: str,
                       admittance: Callable[[float], float]) -> None:
    """Add every two-terminal admittance of the parts of ``kind`` (in file order, each as
    ``_stamp_two`` would, in the same order of accumulation) with one ``np.add.at``; the
    entries are built once per circuit (memoised in its ``Index`` for the standard layout)."""
    idx = index_of(circuit)
    pos = layout_positions(idx, layout)
    key = ("admittances", kind)
    entries = idx.components.get(key) if pos is idx.positions else None
    if entries is None:
        rows = [i for i, p in enumerate(circuit.parts) if p.kind == kind]
        ip, in_ = pos[idx.terminals[rows, 0]], pos[idx.terminals[rows, 1]]
        y = np.array([admittance(circuit.parts[i].value) for i in rows], dtype=float)
        nn = layout.n_nodes                       # the ground's padded position
        r = np.stack([ip, ip, in_, in_], axis=1).ravel()
        col = np.stack([ip, in_, in_, ip], axis=1).ravel()
        val = np.stack([y, -y, y, -y], axis=1).ravel()
        keep = (r != nn) & (col != nn)
        entries = (r[keep], col[keep], val[keep])
        if pos is idx.positions:
            idx.components[key] = entries
    if entries[0].size:
        np.add.at(m, (entries[0], entries[1]), entries[2])
