"""The numerical engine's stamp of each part kind: its branch current as an affine function of
the state (``EQUATIONS``), and the state layout those stamps imply.

State y (length n): the voltages of the non-ground nodes, then the currents of the parts whose
kind keeps its current as a state (inductors), then the internal voltage w of each op-amp with a
gain-bandwidth product (its *pole*: ``KindEquations.pole``), then one current i_p per *carrier*
(a part whose kind fixes a voltage: voltage sources, vcvs, ccvs, op-amps and ideal switches).
A carrier's current is u / r_s + i_p with u = v_p − v_n − (its ideal voltage); an open ideal
switch carries its plain (zero) current.  Capacitors have no branch current here: they enter the
capacitance matrix M (``equations._assemble``).  These are this engine's own equations, written
independently of the exact engine's stamps (``closedform/stamps.py``); both read only the
model's declarations.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Mapping

import numpy as np

from ..errors import InputError
from ..model import (CAPACITOR, CCCS, CCVS, CURRENT_SOURCE, GBW, INDUCTOR, KIND_SPECS, OPAMP,
                     RESISTOR, SENSED_CURRENT, SWITCH, SWITCHED, VCCS, VCVS, VOLTAGE_SOURCE,
                     Circuit, Part)
from .regularise import Regularisation


@dataclass(frozen=True)
class Layout:
    """Where each quantity sits in the state vector.

    Attributes:
        nodes: non-ground node names, in ``Circuit.nodes`` order (indices 0..len-1).
        inductors: names of the parts whose current is a state (the next indices).
        carriers: carrier part names (the last indices).
        node_index: node name -> state index (ground is absent).
        part_index: inductor or carrier name -> index of its current state.
        poles: names of the parts with an internal voltage state (between the inductors and
            the carriers); pole_index: their name -> index of that state.
    """

    nodes: tuple[str, ...]
    inductors: tuple[str, ...]
    carriers: tuple[str, ...]
    node_index: Mapping[str, int]
    part_index: Mapping[str, int]
    poles: tuple[str, ...] = ()
    pole_index: Mapping[str, int] = field(default_factory=dict)

    @property
    def n(self) -> int:
        return len(self.nodes) + len(self.inductors) + len(self.poles) + len(self.carriers)

    @property
    def names(self) -> tuple[str, ...]:
        """The name of each state, shape (n,): its node, or the part it belongs to."""
        return self.nodes + self.inductors + self.poles + self.carriers

    @property
    def volts(self) -> np.ndarray:
        """Which states are voltages (nodes, poles) rather than currents, shape (n,) bool."""
        out = np.zeros(self.n, dtype=bool)
        out[:len(self.nodes)] = True
        out[list(self.pole_index.values())] = True
        return out


@dataclass(frozen=True)
class Affine:
    """A quantity coef . y + const, with coef a sparse {state index: coefficient} map."""

    coef: Mapping[int, float]
    const: float = 0.0

    def scaled(self, k: float) -> "Affine":
        return Affine({i: k * a for i, a in self.coef.items()}, k * self.const)

    def plus(self, other: "Affine") -> "Affine":
        coef = dict(self.coef)
        for i, a in other.coef.items():
            coef[i] = coef.get(i, 0.0) + a
        return Affine(coef, self.const + other.const)

    def dense(self, n: int) -> np.ndarray:
        w = np.zeros(n)
        for i, a in self.coef.items():
            w[i] += a
        return w


def difference(lay: Layout, a: str, b: str, k: float = 1.0) -> dict[int, float]:
    """{index: coef} of k (v(a) - v(b)); ground contributes nothing."""
    coef: dict[int, float] = {}
    if a in lay.node_index:
        coef[lay.node_index[a]] = coef.get(lay.node_index[a], 0.0) + k
    if b in lay.node_index:
        coef[lay.node_index[b]] = coef.get(lay.node_index[b], 0.0) - k
    return coef


@dataclass(frozen=True)
class Drive:
    """What one part's stamp reads in one interval: an independent source's value (V or A),
    a switch's state, the sensed current of a current-controlled part (None where none)."""

    value: float | None = None
    closed: bool | None = None
    sensed: Affine | None = None


@dataclass(frozen=True)
class KindEquations:
    """This engine's equations of one part kind.

    Attributes:
        current: (part, layout, drive) -> its branch current p -> n as an Affine (for a
            carrier: its current while it is an open switch); None for a kind without a
            branch current (a capacitor: it enters M).
        ideal: (part, layout, drive) -> u = v_p − v_n − its ideal voltage, for a carrier kind.
        carrier: part -> whether this part is a carrier (default: every part of a kind with
            ``ideal``).
        fixed: its current is the same Affine in every interval (built once per circuit).
        state: its current is a state of y (an inductor: L di/dt = v_p − v_n, with a shunt).
        pole: (part, layout) -> (m, f) for a part with an internal voltage state w of its own,
            m w' = f(y) (m in s, f an Affine in V), or None for this part (no such state).
    """

    current: Callable[[Part, Layout, Drive], Affine] | None = None
    ideal: Callable[[Part, Layout, Drive], Affine] | None = None
    carrier: Callable[[Part], bool] | None = None
    fixed: bool = False
    state: bool = False
    pole: Callable[[Part, Layout], tuple[float, Affine] | None] | None = None


def _voltage(part: Part, lay: Layout) -> Affine:
    return Affine(difference(lay, part.p, part.n))


def _switch_current(part: Part, lay: Layout, drive: Drive) -> Affine:
    """A switch with a given on/off resistance r: (v_p − v_n)/r; an open ideal switch: 0."""
    r = part.on_resistance if drive.closed else part.off_resistance
    return Affine(difference(lay, part.p, part.n, 1.0 / r)) if r else Affine({})


def _amplifier_error(part: Part, lay: Layout, drive: Drive) -> Affine:
    """An operational amplifier's u = v(cn) − v(cp) (+ (v_p − v_n)/gain with a finite gain):
    its output sinks u / r_s + i_p, so an input driven above the other sources current into
    the output node, as a real amplifier with cp its non-inverting input does; u = 0 is the
    ideal (nullor) constraint v(cp) = v(cn).  With a gain-bandwidth product its output is a
    voltage source of its internal voltage w (``_amplifier_pole``): u = v_p − v_n − w."""
    if part.name in lay.pole_index:
        return _voltage(part, lay).plus(Affine({lay.pole_index[part.name]: -1.0}))
    cp, cn = part.control
    u = Affine(difference(lay, cn, cp))
    return u if part.value is None else u.plus(_voltage(part, lay).scaled(1.0 / part.value))


def _amplifier_pole(part: Part, lay: Layout) -> tuple[float, Affine] | None:
    """The single-pole amplifier's internal voltage w, the output it drives: the open-loop
    gain A0/(1 + s/ω_p) with ω_p = ω_t/A0 (ω_t = 2π·gbw) is w' = ω_p (A0 (v_cp − v_cn) − w),
    written divided by A0 as (1/ω_t) w' = v_cp − v_cn − w/A0; without a gain the integrator
    (1/ω_t) w' = v_cp − v_cn (the gain ω_t/s).  None without a ``gbw``."""
    gbw = part.param(GBW)
    if gbw is None:
        return None
    f = Affine(difference(lay, *part.control))
    if part.value is not None:
        f = f.plus(Affine({lay.pole_index[part.name]: -1.0 / part.value}))
    return 1.0 / (2.0 * np.pi * gbw), f


#: kind -> this engine's equations of it
EQUATIONS: Mapping[str, KindEquations] = {
    RESISTOR: KindEquations(
        current=lambda part, lay, drive: Affine(difference(lay, part.p, part.n, 1.0 / part.value)),
        fixed=True),
    CAPACITOR: KindEquations(),
    INDUCTOR: KindEquations(
        current=lambda part, lay, drive: Affine({lay.part_index[part.name]: 1.0}), state=True),
    VOLTAGE_SOURCE: KindEquations(
        ideal=lambda part, lay, drive: Affine(_voltage(part, lay).coef, -drive.value)),
    CURRENT_SOURCE: KindEquations(current=lambda part, lay, drive: Affine({}, drive.value)),
    SWITCH: KindEquations(current=_switch_current,
                          ideal=lambda part, lay, drive: _voltage(part, lay),   # closed: 0 V
                          carrier=lambda part: not part.on_resistance),
    VCVS: KindEquations(ideal=lambda part, lay, drive: _voltage(part, lay).plus(
        Affine(difference(lay, *part.control, -part.value)))),
    VCCS: KindEquations(
        current=lambda part, lay, drive: Affine(difference(lay, *part.control, part.value)),
        fixed=True),
    CCVS: KindEquations(ideal=lambda part, lay, drive: _voltage(part, lay).plus(
        drive.sensed.scaled(-part.value))),
    CCCS: KindEquations(current=lambda part, lay, drive: drive.sensed.scaled(part.value)),
    OPAMP: KindEquations(ideal=_amplifier_error, pole=_amplifier_pole),
}


def is_carrier(part: Part) -> bool:
    """True for a part whose kind fixes a voltage here: voltage sources, vcvs, ccvs and
    switches with no given on-resistance."""
    eq = EQUATIONS[part.kind]
    return eq.ideal is not None and (eq.carrier is None or eq.carrier(part))


def layout(circuit: Circuit) -> Layout:
    """The state layout of ``circuit``."""
    nodes = tuple(n for n in circuit.nodes if n != circuit.ground)
    inductors = tuple(p.name for p in circuit.parts if EQUATIONS[p.kind].state)
    poles = tuple(p.name for p in circuit.parts if has_pole(p))
    carriers = tuple(p.name for p in circuit.parts if is_carrier(p))
    node_index = {name: i for i, name in enumerate(nodes)}
    start = len(nodes) + len(inductors)
    part_index = {name: len(nodes) + i for i, name in enumerate(inductors)}
    part_index.update({name: start + len(poles) + i for i, name in enumerate(carriers)})
    pole_index = {name: start + i for i, name in enumerate(poles)}
    return Layout(nodes, inductors, carriers, node_index, part_index, poles, pole_index)


def has_pole(part: Part) -> bool:
    """True for a part with an internal voltage state (an op-amp with a ``gbw``)."""
    eq = EQUATIONS[part.kind]
    return eq.pole is not None and part.param(GBW) is not None


def pole_rows(circuit: Circuit, lay: Layout) -> list[tuple[int, float, Affine]]:
    """(state index, m, f) of every internal voltage state: m w' = f(y)."""
    by_name = {p.name: p for p in circuit.parts}
    out = []
    for name in lay.poles:
        part = by_name[name]
        m, f = EQUATIONS[part.kind].pole(part, lay)
        out.append((lay.pole_index[name], m, f))
    return out


@dataclass(frozen=True)
class Regulariser:
    """A regularising resistance and the current through it (for the pulse energy).

    ``part`` is the part it belongs to; ``role`` is ``series`` (the r_s of a carrier) or
    ``shunt`` (across an inductor).
    """

    part: str
    role: str
    resistance: float
    current: Affine


@dataclass(frozen=True)
class Branches:
    """The branch expressions of one interval (see ``branch_currents``)."""

    currents: dict[str, Affine]
    voltages: dict[str, Affine | None]  #: carrier name -> u, or None when open
    regularisers: list[Regulariser]
    sources: dict[str, float]
    closed: dict[str, bool]


def _state_of(part: Part, time: float, before: bool) -> tuple[float | None, bool | None]:
    value = closed = None
    declared = KIND_SPECS[part.kind]
    if declared.stepped:
        value = part.source_value_before(time) if before else part.source_value(time)
    if declared.branch == SWITCHED:
        closed = part.is_closed_before(time) if before else part.is_closed(time)
    return value, closed


def _sensed(circuit: Circuit, part: Part, out: Branches) -> Affine | None:
    """The current a current-controlled part senses (built earlier in ``branch_currents``)."""
    if KIND_SPECS[part.kind].control != SENSED_CURRENT:
        return None
    sensed = out.currents.get(part.control)
    if sensed is None:
        raise InputError(f"senses the current of {part.control!r}, which is not a "
                         "voltage source, switch, inductor or resistor",
                         file=circuit.source, part=part.name, field="control",
                         line=part.line)
    return sensed


def branch_currents(circuit: Circuit, lay: Layout, reg: Regularisation, time: float,
                    before: bool, slow: bool = False, fixed: dict | None = None) -> Branches:
    """Branch currents of every part with one (each through its kind's ``EQUATIONS``) with
    sources and switches as just before (``before``) or just after ``time``.  With ``slow`` a
    closed carrier's current is its i_p alone (its u / r_s, zero at an operating point, left
    out), also where a ccvs or cccs senses it: the DC rows then hold no 1/r_s (K_dc, see
    ``equations.System``).  ``fixed``: a dict owned by the caller for one circuit and layout
    that keeps the currents of ``fixed`` kinds (resistors, vccs: the same Affine whatever the
    interval), so that repeated calls build them once."""
    out = Branches({}, {}, [], {}, {})
    g = 1.0 / reg.r_series
    ordered = sorted(circuit.parts, key=lambda p: KIND_SPECS[p.kind].control == SENSED_CURRENT)
    fixed = {} if fixed is None else fixed
    for part in ordered:
        eq = EQUATIONS[part.kind]
        if eq.current is None and eq.ideal is None:
            continue
        if eq.fixed:  # neither a source, a switch nor a regulariser
            cur = fixed.get(part.name)
            if cur is None:
                cur = fixed[part.name] = eq.current(part, lay, Drive())
            out.currents[part.name] = cur
            continue
        value, closed = _state_of(part, time, before)
        if value is not None:
            out.sources[part.name] = value
        if closed is not None:
            out.closed[part.name] = closed
        drive = Drive(value, closed, _sensed(circuit, part, out))
        if is_carrier(part):
            if closed is False:
                out.currents[part.name] = eq.current(part, lay, drive)
                out.voltages[part.name] = None
                continue
            u = eq.ideal(part, lay, drive)
            fast = u.scaled(g)
            out.voltages[part.name] = u
            own = Affine({lay.part_index[part.name]: 1.0})
            out.currents[part.name] = own if slow else fast.plus(own)
            out.regularisers.append(Regulariser(part.name, "series", reg.r_series, fast))
        else:
            out.currents[part.name] = eq.current(part, lay, drive)
        if eq.state:
            shunt = Affine(difference(lay, part.p, part.n, 1.0 / reg.r_shunt))
            out.regularisers.append(Regulariser(part.name, "shunt", reg.r_shunt, shunt))
    return out


def flows(by_name: dict, br: Branches) -> list:
    """(part, current) of every branch current stamped into KCL: each non-capacitor part's
    (a closed carrier's i_p alone in the DC branches of ``branch_currents`` with ``slow``),
    then the inductor shunts'."""
    out = [(by_name[name], cur) for name, cur in br.currents.items()]
    out += [(by_name[r.part], r.current) for r in br.regularisers if r.role == "shunt"]
    return out
