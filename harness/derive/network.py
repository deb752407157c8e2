"""Symbolic modified nodal analysis of one interval, with part values as symbols.

Method: the textbook MNA stamps (Vlach & Singhal, *Computer Methods for Circuit Analysis and
Design*, ch. 4), written here with sympy so every entry is a formula of part names.  Unknowns
are the node voltages (ground removed) and one branch current for every voltage source, ideal
closed switch, inductor, vcvs and ccvs.  With the Laplace transform of C x' + G x = b (b held
constant from the event on) and the state x(t_k−) written into C·x(t_k−)::

    (G + s C) X(s) = b / s + C x(t_k−)

Units: resistances in Ω, capacitances in F, inductances in H, sources in V or A; every equation
row is a current (A) or a voltage (V).  Part values are symbols named as the parts, so a result
is a formula the user may paste as a hand value.  A source whose value in the interval differs
from its file ``value`` (a step) and a switch resistance are numbers, not symbols.

This module builds the matrices only; ``laplace`` solves them.  Nothing here imports an engine.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import sympy as sp

from .. import model as m

#: largest MNA size the symbolic work is attempted for (beyond it: numbers only)
MAX_UNKNOWNS = 16


class TooLarge(Exception):
    """The network is beyond the symbolic budget (size or time); the message says which."""


@dataclass
class Symbols:
    """Part name -> sympy symbol (positive for R, C, L; real otherwise) and the numbers that
    stand for values that are not part names (``number`` keeps their unit word)."""

    circuit: m.Circuit
    table: dict = field(default_factory=dict)

    def part(self, name: str) -> sp.Symbol:
        if name not in self.table:
            kind = self.circuit.part(name).kind
            positive = m.KIND_SPECS[kind].positive
            self.table[name] = sp.Symbol(name, positive=True) if positive \
                else sp.Symbol(name, real=True)
        return self.table[name]

    quantities: dict = field(default_factory=dict)

    def quantity(self, value: float, unit: str) -> sp.Expr:
        """A number with a unit (V, A, Ω) that is not a part value: a symbol of its own, so
        the formula keeps the unit (``15 V``); 0 stays the number 0."""
        if value == 0:
            return sp.Integer(0)
        key = (float(value), unit)
        if key not in self.quantities:
            self.quantities[key] = sp.Symbol(f"_q{len(self.quantities)}", positive=value > 0,
                                             negative=value < 0)
        return self.quantities[key]

    def text_of(self) -> dict:
        """Quantity symbol name -> its text in a formula (``15 V``, ``(-3 V)``)."""
        out = {}
        for (value, unit), sym in self.quantities.items():
            text = f"{value!r} {unit}"
            out[sym.name] = f"({text})" if value < 0 else text
        return out

    def values(self) -> dict:
        """Symbol -> its SI value, for numerical checks."""
        out = {sym: float(self.circuit.part(name).value) for name, sym in self.table.items()}
        out.update({sym: value for (value, _), sym in self.quantities.items()})
        return out

    def scope(self) -> tuple[dict, dict]:
        """(values, units) for ``harness.formula.evaluate`` of a produced formula."""
        parts = [p for p in self.circuit.parts if p.value is not None]
        return ({p.name: p.value for p in parts},
                {p.name: m.KIND_SPECS[p.kind].units["value"] for p in parts})


@dataclass
class Network:
    """The symbolic MNA of one interval (or the pre-step circuit).

    Attributes:
        index: unknown name -> row/column (``v:node``, ``i:part``).
        g, c: sympy matrices (n × n); b: the source vector (n × 1).
        storage: the capacitors and inductors of the interval (names).
        capacitors: name -> (row of p or None, row of n or None, its symbol).
        conductances: resistive switch -> its conductance (S) in the interval.
        currents: current source, vccs, cccs -> fn(v, y) giving its current from Y(s).
        poles: op-amp with a gain-bandwidth product -> (its branch row, 1/ω_t in s): its
            output voltage v(p) − v(n) is a state, entering C·x(t_k−) as −(1/ω_t)·v_out.
    """

    index: dict
    g: sp.Matrix
    c: sp.Matrix
    b: sp.Matrix
    storage: tuple
    capacitors: dict = field(default_factory=dict)
    conductances: dict = field(default_factory=dict)
    currents: dict = field(default_factory=dict)
    poles: dict = field(default_factory=dict)


def _closed(part: m.Part, time: float, pre: bool) -> bool:
    return part.is_closed_before(0.0) if pre else part.is_closed(time)


def _source(part: m.Part, time: float, pre: bool, syms: Symbols) -> sp.Expr:
    """The source's value in the interval: its symbol when it equals the file's ``value``."""
    value = part.source_value_before(0.0) if pre else part.source_value(time)
    if part.value is not None and value == part.value and value != 0:
        return syms.part(part.name)
    return syms.quantity(value, "V" if part.kind == m.VOLTAGE_SOURCE else "A")


def _switch_resistance(part: m.Part, closed: bool, syms: Symbols | None = None):
    """None for an ideal closed switch (a branch), 0 for an ideal open one, else Ω."""
    r = part.on_resistance if closed else part.off_resistance
    if r is None:
        return None if closed else 0
    return syms.quantity(r, "Ω") if syms is not None else r


def _layout(circuit: m.Circuit, time: float, pre: bool, opened: frozenset,
            short: frozenset) -> dict:
    index = {f"v:{n}": i for i, n in enumerate(circuit.nodes[1:])}
    for part in circuit.parts:
        if part.name in opened:
            continue
        has_branch = STAMPS[part.kind].branch
        if part.name in short or (has_branch is not None and has_branch(part, time, pre)):
            index[f"i:{part.name}"] = len(index)
    if len(index) > MAX_UNKNOWNS:
        raise TooLarge(f"{len(index)} unknowns in the nodal equations (the symbolic budget is "
                       f"{MAX_UNKNOWNS})")
    return index


def build(circuit: m.Circuit, time: float, syms: Symbols, pre: bool = False,
          zeroed: bool = False, open_parts: frozenset = frozenset(),
          short: frozenset = frozenset()) -> Network:
    """The symbolic MNA of the interval starting at ``time`` (``pre``: before t = 0).

    ``zeroed`` sets independent sources to zero (the time-constant network); ``open_parts``
    leaves parts out (capacitors open); ``short`` makes parts 0-V branches (inductors shorted).
    """
    index = _layout(circuit, time, pre, open_parts, short)
    n = len(index)
    g, c, b = sp.zeros(n, n), sp.zeros(n, n), sp.zeros(n, 1)
    row = {nd: index.get(f"v:{nd}") for nd in circuit.nodes}
    stamps = _Stamps(g, c, b, row, index, {}, {}, {}, {})
    for part in circuit.parts:
        if part.name in open_parts:
            continue
        if part.name in short:
            stamps.voltage(part, sp.Integer(0))
            continue
        STAMPS[part.kind].stamp(part, _Interval(circuit, time, pre, zeroed, syms), stamps)
    storage = tuple(p.name for p in circuit.parts if p.kind in m.STORAGE
                    and p.name not in open_parts and p.name not in short)
    return Network(index, g, c, b, storage, stamps.capacitors, stamps.conductances,
                   stamps.currents, stamps.poles)


@dataclass
class _Stamps:
    g: sp.Matrix
    c: sp.Matrix
    b: sp.Matrix
    row: dict
    index: dict
    capacitors: dict
    conductances: dict
    currents: dict
    poles: dict

    def pair(self, mat, p, n, value, cp=None, cn=None) -> None:
        """Stamp ``value`` between rows (p, n) and columns (cp, cn) (a conductance pattern)."""
        cp, cn = (p, n) if cp is None else (cp, cn)
        for r, rs in ((self.row[p], 1), (self.row[n], -1)):
            for col, cs in ((self.row[cp], 1), (self.row[cn], -1)):
                if r is not None and col is not None:
                    mat[r, col] += rs * cs * value

    def branch_kcl(self, part: m.Part) -> int:
        k = self.index[f"i:{part.name}"]
        for node, sign in ((part.p, 1), (part.n, -1)):
            if self.row[node] is not None:
                self.g[self.row[node], k] += sign
        return k

    def voltage(self, part: m.Part, value) -> int:
        """v(p) − v(n) = value, with the branch current as an unknown."""
        k = self.branch_kcl(part)
        for node, sign in ((part.p, 1), (part.n, -1)):
            if self.row[node] is not None:
                self.g[k, self.row[node]] += sign
        self.b[k] += value
        return k

    def current(self, part: m.Part, value) -> None:
        """A current ``value`` from p through the part to n."""
        for node, sign in ((part.p, -1), (part.n, 1)):
            if self.row[node] is not None:
                self.b[self.row[node]] += sign * value

    def sensed(self, name: str, circuit: m.Circuit, syms: Symbols):
        """(column, coefficient) pairs whose sum is the current of the sensed part."""
        part = circuit.part(name)
        key = f"i:{name}"
        if key in self.index:
            return [(self.index[key], sp.Integer(1))]
        if part.kind == m.RESISTOR:
            g = 1 / syms.part(name)
            return [(self.row[nd], s * g) for nd, s in ((part.p, 1), (part.n, -1))
                    if self.row[nd] is not None]
        return []                                  # an open switch senses no current


@dataclass(frozen=True)
class _Interval:
    """What a kind's symbolic stamp reads: the circuit, the interval (its start ``time``;
    ``pre`` before t = 0), whether independent sources are zeroed, and the symbols."""

    circuit: m.Circuit
    time: float
    pre: bool
    zeroed: bool
    syms: Symbols


def _resistor(part: m.Part, iv: _Interval, st: _Stamps) -> None:
    st.pair(st.g, part.p, part.n, 1 / iv.syms.part(part.name))


def _capacitor(part: m.Part, iv: _Interval, st: _Stamps) -> None:
    st.pair(st.c, part.p, part.n, iv.syms.part(part.name))
    st.capacitors[part.name] = (st.row[part.p], st.row[part.n], iv.syms.part(part.name))


def _inductor(part: m.Part, iv: _Interval, st: _Stamps) -> None:
    k = st.branch_kcl(part)
    st.c[k, k] = iv.syms.part(part.name)          # L di/dt − (v_p − v_n) = 0
    for node, sign in ((part.p, -1), (part.n, 1)):
        if st.row[node] is not None:
            st.g[k, st.row[node]] += sign


def _voltage_source(part: m.Part, iv: _Interval, st: _Stamps) -> None:
    st.voltage(part, 0 if iv.zeroed else _source(part, iv.time, iv.pre, iv.syms))


def _current_source(part: m.Part, iv: _Interval, st: _Stamps) -> None:
    value = sp.Integer(0) if iv.zeroed else _source(part, iv.time, iv.pre, iv.syms)
    st.current(part, value)
    st.currents[part.name] = lambda v, y, value=value: value


def _switch(part: m.Part, iv: _Interval, st: _Stamps) -> None:
    r = _switch_resistance(part, _closed(part, iv.time, iv.pre), iv.syms)
    if r is None:
        st.voltage(part, 0)
    elif r != 0:
        st.pair(st.g, part.p, part.n, 1 / r)
        st.conductances[part.name] = 1 / r


def _vcvs(part: m.Part, iv: _Interval, st: _Stamps) -> None:
    gain, (cp, cn) = iv.syms.part(part.name), part.control
    k = st.voltage(part, 0)                    # v_p − v_n − gain·(v_cp − v_cn) = 0
    for node, sign in ((cp, -1), (cn, 1)):
        if st.row[node] is not None:
            st.g[k, st.row[node]] += sign * gain


def _vccs(part: m.Part, iv: _Interval, st: _Stamps) -> None:
    gain, (cp, cn) = iv.syms.part(part.name), part.control
    st.pair(st.g, part.p, part.n, gain, cp, cn)
    st.currents[part.name] = lambda v, y: gain * (v(cp) - v(cn))


def _ccvs(part: m.Part, iv: _Interval, st: _Stamps) -> None:
    gain, terms = iv.syms.part(part.name), st.sensed(part.control, iv.circuit, iv.syms)
    k = st.voltage(part, 0)
    for col, coef in terms:
        st.g[k, col] -= gain * coef


def _cccs(part: m.Part, iv: _Interval, st: _Stamps) -> None:
    gain, terms = iv.syms.part(part.name), st.sensed(part.control, iv.circuit, iv.syms)
    st.currents[part.name] = lambda v, y: gain * sum(coef * y[col] for col, coef in terms)
    for node, sign in ((part.p, 1), (part.n, -1)):     # cccs: gain·i leaves p, enters n
        if st.row[node] is not None:
            for col, coef in terms:
                st.g[st.row[node], col] += sign * gain * coef


def _opamp(part: m.Part, iv: _Interval, st: _Stamps) -> None:
    """v_cp − v_cn = 0 (the nullor), or v_cp − v_cn − (v_p − v_n)/gain = 0, on the row of
    its output current; with a gain-bandwidth product the single pole A(s) = gain/(1 + s·gain/ω_t)
    (ω_t/s without a gain) adds −(1/ω_t)·(v_p − v_n)′ to the row: −1/ω_t in C, written
    1/(2π·GBW) with the GBW a number in Hz (``Symbols.quantity``), so a formula shows what the
    pole is; its output voltage is a state (``Network.poles``)."""
    k = st.branch_kcl(part)
    terms = [(part.control[0], 1), (part.control[1], -1)]
    if part.value is not None:
        gain = iv.syms.part(part.name)
        terms += [(part.p, -1 / gain), (part.n, 1 / gain)]
    for node, coef in terms:
        if st.row[node] is not None:
            st.g[k, st.row[node]] += coef
    gbw = part.param(m.GBW)
    if gbw is not None:
        tau = 1 / (2 * sp.pi * iv.syms.quantity(gbw, "Hz"))     # 1/ω_t, shown as 2π·GBW
        for node, sign in ((part.p, -1), (part.n, 1)):
            if st.row[node] is not None:
                st.c[k, st.row[node]] += sign * tau
        st.poles[part.name] = (k, tau)


def _always(part: m.Part, time: float, pre: bool) -> bool:
    return True


def _ideal_closed(part: m.Part, time: float, pre: bool) -> bool:
    return _closed(part, time, pre) and _switch_resistance(part, True) is None


@dataclass(frozen=True)
class _KindStamp:
    """The symbolic stamp of one part kind, and when it has a branch-current unknown
    ((part, time, pre) -> bool; None: never)."""

    stamp: Callable[[m.Part, _Interval, _Stamps], None]
    branch: Callable[[m.Part, float, bool], bool] | None = None


#: kind -> its symbolic stamp (the textbook MNA stamps, in part names)
STAMPS: dict[str, _KindStamp] = {
    m.RESISTOR: _KindStamp(_resistor),
    m.CAPACITOR: _KindStamp(_capacitor),
    m.INDUCTOR: _KindStamp(_inductor, _always),
    m.VOLTAGE_SOURCE: _KindStamp(_voltage_source, _always),
    m.CURRENT_SOURCE: _KindStamp(_current_source),
    m.SWITCH: _KindStamp(_switch, _ideal_closed),
    m.VCVS: _KindStamp(_vcvs, _always),
    m.VCCS: _KindStamp(_vccs),
    m.CCVS: _KindStamp(_ccvs, _always),
    m.CCCS: _KindStamp(_cccs),
    m.OPAMP: _KindStamp(_opamp, _always),
}
