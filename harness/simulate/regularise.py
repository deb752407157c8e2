"""The regularising values of the narrow-pulse model, chosen from the circuit's own part values.

Nothing here looks at a solution: the values follow from the resistances, capacitances,
inductances, gains and event times written in the circuit (see the package docstring for the rule
and why it is safe).  All values are in SI base units.
"""

from __future__ import annotations

from functools import partial
import math
from dataclasses import dataclass, field
from typing import Mapping

from .nodesets import find_root
from ..model import (CAPACITOR, GBW, INDUCTIVE, INDUCTOR, KIND_SPECS, RESISTIVE, RESISTOR, SWITCH,
                     VOLTAGE_TYPE, Circuit)

#: default ratio of the regularising time constants to the fastest real one (and of r_s to R)
DEFAULT_PULSE_RATIO = 1e-7
#: safety factor applied to the per-node estimate of the fastest real time constant
FAST_SAFETY = 0.25
#: the settle horizon of an interval, in units of the slowest-mode bound
HORIZON_FACTOR = 1e3
#: eigenvalues of the regularised model below this over its t_pulse are the circuit's own
#: modes, above it the regularisation's pulse modes (engine's pilot model, dominant.modes_sum)
PILOT_SPLIT = 0.03
#: r_s is at least this fraction of the smallest resistance: a conductance 1/r_s beyond ~1e9
#: times 1/R leaves too few digits of 1/R where the two meet in one KCL row or elimination
R_SERIES_FLOOR = 1e-9
#: t_fast is this fraction of the fastest real time constant found by the pilot model
PILOT_SAFETY = 0.5
#: fall-back time scale (s) for circuits with no resistance, capacitance or inductance scale
FALLBACK_TIME = 1.0
#: the post-pulse window starts this many pulse time constants after the event
PULSE_DECAY = 100.0


@dataclass(frozen=True)
class Regularisation:
    """The narrow-pulse model's values for one circuit.

    Attributes:
        pulse_ratio: eps, the ratio used throughout (dimensionless).
        t_fast: s, lower estimate of the fastest real time constant.
        t_slow: s, upper estimate of the slowest real time constant.
        t_pulse: s, upper bound intended for every regularising time constant: eps * t_fast,
            or 4 r_s C_sum where the floor on r_s makes that longer.
        r_series: ohms of r_s in the r_s || L_p element of every carrier (voltage source,
            vcvs, ccvs, ideal switch), with L_p = r_series * t_pulse henries.
        r_on: equal to r_series (the r_s of an ideal closed switch).
        c_base: farads of parasitic capacitance for a node that would otherwise float.
        c_node: node name -> parasitic capacitance in F to ground: c_base for a capacitor-less
            node that reaches neither ground nor a capacitor in some interval, 0 elsewhere
            (capacitor-less nodes are eliminated, equations.py).
        r_shunt: ohms across every inductor (math.inf when there is none).
        horizon: s, the longest time an interval is continued while waiting for it to settle.
        post_pulse: s after the event from which the waveform is taken to be free of the pulse.
    """

    pulse_ratio: float
    t_fast: float
    t_slow: float
    t_pulse: float
    r_series: float
    r_on: float
    c_base: float
    c_node: Mapping[str, float] = field(default_factory=dict)
    r_shunt: float = math.inf
    horizon: float = 1.0
    post_pulse: float = 0.0


@dataclass(frozen=True)
class _Values:
    """The part values the rule reads (all positive magnitudes)."""

    resistances: tuple[float, ...]
    capacitances: tuple[float, ...]
    inductances: tuple[float, ...]
    gain_factor: float
    gaps: tuple[float, ...]


def _gain_unit(part) -> str | None:
    """The unit of a controlled part's gain (``1``, ``S``, ``ohm``), None for other parts."""
    return KIND_SPECS[part.kind].units.get("gain")


def _values(circuit: Circuit) -> _Values:
    res, caps, inds, gains = [], [], [], 0.0
    for part in circuit.parts:
        if part.kind == RESISTOR and part.value:
            res.append(abs(part.value))
        elif part.kind == SWITCH:
            res += [abs(r) for r in (part.on_resistance, part.off_resistance) if r]
        elif part.kind == CAPACITOR and part.value:
            caps.append(abs(part.value))
        elif part.kind == INDUCTOR and part.value:
            inds.append(abs(part.value))
        elif _gain_unit(part) == "1":
            gains += abs(part.value or 0.0)
    r_sum = sum(res)
    for part in circuit.parts:  # transconductances and transresistances, made dimensionless
        if _gain_unit(part) == "S" and r_sum:
            gains += abs(part.value or 0.0) * r_sum
        elif _gain_unit(part) == "ohm" and res:
            gains += abs(part.value or 0.0) / min(res)
    events = circuit.events
    gaps = tuple(b - a for a, b in zip(events, events[1:]) if b > a)
    return _Values(tuple(res), tuple(caps), tuple(inds), 1.0 + gains, gaps)


def _node_rc_time(circuit: Circuit) -> float:
    """Smallest C/(2G) over nodes with a capacitor: a Gershgorin-style bound on the fastest RC rate.

    C is the smallest capacitor at the node, G the sum of the real conductances at the node
    (resistors, given switch resistances, transconductances).  math.inf when there is none.
    """
    cap: dict[str, float] = {}
    cond: dict[str, float] = {}
    for part in circuit.parts:
        g = 0.0
        if part.kind == RESISTOR and part.value:
            g = 1.0 / abs(part.value)
        elif part.kind == SWITCH:
            g = max([1.0 / abs(r) for r in (part.on_resistance, part.off_resistance) if r] or [0.0])
        elif _gain_unit(part) == "S":       # a transconductance
            g = abs(part.value or 0.0)
        elif part.kind == CAPACITOR and part.value:
            for node in part.nodes:
                cap[node] = min(cap.get(node, math.inf), abs(part.value))
        for node in part.nodes:
            cond[node] = cond.get(node, 0.0) + g
    times = [cap[n] / (2.0 * cond[n]) for n in cap if n != circuit.ground and cond.get(n, 0.0) > 0]
    return min(times, default=math.inf)


def loop_capacitance(circuit: Circuit) -> float:
    """F: the total capacitance of the capacitors that lie in a loop of carriers (voltage
    sources, vcvs, ccvs, switches without an on-resistance, whatever their state) and other
    capacitors.  Only these can carry a pulse through r_s alone, of width ~ r_s C; a capacitor
    with a resistance in every loop sees r_s in series with it and no pulse of its own.
    (Bounding r_s by the total capacitance instead would tie the pulse of a 1 pF loop to a 1 mF
    capacitor behind a resistor, and with the floor on r_s push the pulse up to the fastest
    real mode.)

    A capacitor lies in such a loop exactly when it is not a bridge of the multigraph of these
    parts (a self-loop or a parallel edge is a loop); bridges are found in one depth-first
    search (Tarjan's low-link rule), O(parts).
    """
    edges = [p for p in circuit.parts if KIND_SPECS[p.kind].voltage_branch or (
        p.kind == SWITCH and not p.on_resistance) or (p.kind == CAPACITOR and p.value)]
    bridges = _bridges([(p.p, p.n) for p in edges])
    return sum(abs(p.value) for i, p in enumerate(edges)
               if p.kind == CAPACITOR and i not in bridges)


def _bridges(edges: list[tuple[str, str]]) -> set[int]:
    """Indices of the bridges of the undirected multigraph ``edges`` (node pairs): the edges
    whose removal disconnects their two ends.  Iterative depth-first search with low-link
    values (Tarjan 1974); each edge is entered once by its index, so parallel edges and
    self-loops are never bridges."""
    adjacency: dict[str, list[tuple[str, int]]] = {}
    for i, (a, b) in enumerate(edges):
        adjacency.setdefault(a, []).append((b, i))
        adjacency.setdefault(b, []).append((a, i))
    order: dict[str, int] = {}
    low: dict[str, int] = {}
    out: set[int] = set()
    for root in adjacency:
        if root in order:
            continue
        order[root] = low[root] = len(order)
        stack = [(root, -1, iter(adjacency[root]))]
        while stack:
            here, via, it = stack[-1]
            for there, i in it:
                if i == via:
                    continue
                if there in order:
                    low[here] = min(low[here], order[there])
                else:
                    order[there] = low[there] = len(order)
                    stack.append((there, i, iter(adjacency[there])))
                    break
            else:
                stack.pop()
                if stack:
                    parent = stack[-1][0]
                    low[parent] = min(low[parent], low[here])
                    if low[here] > order[parent]:
                        out.add(via)
    return out


def _time_scales(circuit: Circuit, v: _Values) -> tuple[float, float]:
    """(t_fast, t_slow) in s from part values and event gaps (see the package docstring)."""
    r_sum = sum(v.resistances)
    fast = [FAST_SAFETY * _node_rc_time(circuit)]
    slow = []
    if v.capacitances and v.resistances:
        slow.append(r_sum * sum(v.capacitances))
    if v.inductances and v.resistances:
        fast.append(min(v.inductances) / r_sum)
        slow.append(sum(v.inductances) / min(v.resistances))
    if v.inductances and v.capacitances:
        fast.append(math.sqrt(min(v.inductances) * min(v.capacitances)) / (2 * math.pi))
        slow.append(2 * math.pi * math.sqrt(sum(v.inductances) * sum(v.capacitances)))
    for omega in _amplifier_poles(circuit):    # a closed loop around a gain-bandwidth pole
        fast.append(1.0 / omega)
        slow.append(r_sum / min(v.resistances) / omega if v.resistances else 1.0 / omega)
    fast += list(v.gaps)
    t_fast = min([t for t in fast if math.isfinite(t) and t > 0], default=FALLBACK_TIME)
    t_slow = max(slow + [t_fast], default=FALLBACK_TIME)
    if v.gaps:
        t_slow = max(t_slow, max(v.gaps))
    return t_fast / v.gain_factor, t_slow * v.gain_factor


def _amplifier_poles(circuit: Circuit) -> list[float]:
    """ω_t = 2π·gbw (rad/s) of every op-amp with a gain-bandwidth product: its closed loop
    settles no faster than about 1/ω_t (a follower: exactly) and no slower than the noise
    gain, at most the resistance spread R_sum/R_min, times 1/ω_t."""
    return [2.0 * math.pi * p.param(GBW) for p in circuit.parts
            if KIND_SPECS[p.kind].units.get(GBW) and p.param(GBW) is not None]


def _conducts(part, time: float, before: bool) -> bool:
    """True when the part joins its nodes by a conductance or a voltage in that interval."""
    if KIND_SPECS[part.kind].branch in (RESISTIVE, INDUCTIVE, VOLTAGE_TYPE):
        return True
    if part.kind == SWITCH:
        closed = part.is_closed_before(time) if before else part.is_closed(time)
        return closed or bool(part.off_resistance)
    return False


def unanchored(circuit: Circuit) -> set[str]:
    """Capacitor-less nodes that, in some interval (or at 0-), reach neither ground nor a node
    with a capacitor through parts that conduct there.  Such a node's voltage is not fixed by the
    others, so it keeps a parasitic capacitance instead of being eliminated (equations.py)."""
    cap_nodes = {n for p in circuit.parts if p.kind == CAPACITOR for n in p.nodes}
    anchors = cap_nodes | {circuit.ground}
    nodes = circuit.nodes
    out: set[str] = set()
    seen: set[tuple[bool, ...]] = set()
    for time, before in [(0.0, True)] + [(t, False) for t in circuit.events]:
        conducting = tuple(_conducts(part, time, before) for part in circuit.parts)
        if conducting in seen:  # the same parts conduct as in an earlier interval
            continue
        seen.add(conducting)
        parent = {n: n for n in nodes}

        find = partial(find_root, parent)

        for part, conducts in zip(circuit.parts, conducting):
            if conducts:
                parent[find(part.p)] = find(part.n)
        anchored = {find(n) for n in anchors}
        out |= {n for n in nodes if n not in anchors and find(n) not in anchored}
    return out


@dataclass(frozen=True)
class Survey:
    """What ``choose`` reads from a circuit whatever the pulse ratio (``survey``).

    Attributes:
        values: the part values and event gaps; t_fast, t_slow: s, the part-value time scales
        (``_time_scales``); c_loop: F, ``loop_capacitance``; floating: ``unanchored``."""

    values: _Values
    t_fast: float
    t_slow: float
    c_loop: float
    floating: frozenset


def survey(circuit: Circuit) -> Survey:
    """The pulse-ratio-independent part of ``choose``, for a pilot model and the model itself
    to share (engine.py)."""
    v = _values(circuit)
    t_fast, t_slow = _time_scales(circuit, v)
    return Survey(v, t_fast, t_slow, loop_capacitance(circuit), frozenset(unanchored(circuit)))


def choose(circuit: Circuit, pulse_ratio: float | None = None,
           fastest: float | None = None, surveyed: Survey | None = None) -> Regularisation:
    """The regularising values for ``circuit`` (the rule is stated in the package docstring).

    Args:
        circuit: the parsed circuit.
        pulse_ratio: eps; default ``DEFAULT_PULSE_RATIO``.
        fastest: s, the fastest real time constant where known (from a pilot model's modes,
            engine.py); t_fast is then half of it (and at most the shortest event gap) instead
            of the part-value estimate.
        surveyed: ``survey(circuit)`` where the caller has it.
    """
    eps = DEFAULT_PULSE_RATIO if pulse_ratio is None else float(pulse_ratio)
    if not 0 < eps < 1:
        raise ValueError(f"pulse_ratio must lie in (0, 1), got {eps}")
    surveyed = survey(circuit) if surveyed is None else surveyed
    v = surveyed.values
    t_fast, t_slow = surveyed.t_fast, surveyed.t_slow
    if fastest is not None and math.isfinite(fastest) and fastest > 0:
        t_fast = min([PILOT_SAFETY * fastest] + list(v.gaps))
    t_pulse = eps * t_fast
    r_sum = sum(v.resistances)
    r_cands = [eps * min(v.resistances)] if v.resistances else []
    c_loop = surveyed.c_loop
    if c_loop:  # r_s C_loop <= t_pulse / 4 keeps a capacitor loop's pulse over-damped
        r_cands.append(t_pulse / (4.0 * c_loop))
    r_series = min(r_cands, default=eps * 1.0)
    if v.resistances:  # keep 1/r_s within double precision of 1/R
        r_series = max(r_series, R_SERIES_FLOOR * min(v.resistances))
    if c_loop:  # the pulse lasts up to 4 r_s C_loop where the floor applied
        t_pulse = max(t_pulse, 4.0 * r_series * c_loop)
    r_shunt = math.inf
    if v.inductances:
        r_shunt = max(r_sum / eps, max(v.inductances) / t_pulse)
    nodes = [n for n in circuit.nodes if n != circuit.ground]
    c_cands = [eps * min(v.capacitances)] if v.capacitances else []
    if v.resistances:
        c_cands.append(t_pulse / (r_sum * max(len(nodes), 1)))
    if v.inductances:  # keeps the tank of an interrupted inductor and c_par over-damped
        c_cands.append(min(v.inductances) / (8.0 * r_shunt ** 2))
    c_cands.append(t_pulse / (4.0 * r_series * max(len(nodes), 1)))
    c_base = min(c_cands)
    c_node = {n: 0.0 for n in nodes}
    for n in surveyed.floating:
        c_node[n] = c_base
    return Regularisation(
        pulse_ratio=eps, t_fast=t_fast, t_slow=t_slow, t_pulse=t_pulse, r_series=r_series,
        r_on=r_series, c_base=c_base, c_node=c_node, r_shunt=r_shunt,
        horizon=HORIZON_FACTOR * t_slow, post_pulse=PULSE_DECAY * t_pulse)


def gain_factor(circuit: Circuit) -> float:
    """1 + the controlled sources' gains made dimensionless: how far voltages may exceed the
    sources' (an amplifier's output is its gain times its input)."""
    res = [abs(p.value) for p in circuit.parts if p.kind == RESISTOR and p.value]
    gain = 1.0
    for part in circuit.parts:
        unit = _gain_unit(part)
        if unit is None:
            continue
        g = abs(part.value or 0.0)
        if unit == "1":
            gain += g
        elif unit == "S" and res:
            gain += g * max(res)
        elif unit == "ohm" and res:
            gain += g / min(res)
    return gain
