"""The sign of each op-amp's feedback: positive feedback is a finding (``positive-feedback``).

An ideal amplifier (the nullor) is solved algebraically whatever the sign of its feedback: with
the feedback taken to the non-inverting input it gives the same kind of finite answer as an
inverting stage, but a real amplifier there latches at a rail (a comparator with hysteresis:
common practice).  The test is the sign of the loop's feedback factor

    beta = d(v(cp) - v(cn)) / d(v(p) - v(n))

with the amplifier's output driven by a 1 V source in place of the amplifier, every independent
source at zero (voltage sources shorted, current sources open), the other amplifiers as they
are, and the storage in two limits: at DC (capacitors open, inductors shorted) and fast
(capacitors shorted, inductors open), in every switch configuration the schedule visits.
The loop gain is A·beta: an ideal amplifier (A -> infinity) latches where beta > 0 in either
limit (at DC its rest state is unstable; fast, the amplifier's own pole grows); an amplifier
with a finite gain A and no pole where A·beta > 1 (a regenerative loop: common practice).
A beta the network does not fix (a node that floats in that limit, a driven output shorted by
a capacitor) is not judged.

Method: a sparse-tableau system of its own (node voltages and every part's current; Kirchhoff's
current law at each node, one constitutive row per part), solved densely with an SVD: beta is
judged only where the null space leaves it fixed and the system is consistent.  It shares no code
with the engines (the comparator layer: findings).
"""

from __future__ import annotations

import numpy as np

from .model import (CAPACITOR, CCCS, CCVS, CURRENT_SOURCE, INDUCTOR, OPAMP, RESISTOR, SWITCH,
                    VCCS, VCVS, VOLTAGE_SOURCE, Circuit, Part)
from .results import POSITIVE_FEEDBACK, Hazard

DC, FAST = "dc", "fast"
#: beta (or A·beta - 1 for a finite gain) above this is positive feedback; the network's own
#: rounding is ~1e-15
MARGIN = 1e-9
#: singular values below this fraction of the largest span the null space
RCOND = 1e-12
#: larger systems are not analysed (a dense SVD)
MAX_UNKNOWNS = 600


class _Unknown(Exception):
    """A part kind this test has no equation for: the circuit is not judged."""


class _Tableau:
    """Unknowns: node voltages (ground excluded), then one current per part (p -> n)."""

    def __init__(self, circuit: Circuit) -> None:
        self.circuit = circuit
        self.nodes = [n for n in circuit.nodes if n != circuit.ground]
        self.node = {n: i for i, n in enumerate(self.nodes)}
        self.part = {p.name: len(self.nodes) + j for j, p in enumerate(circuit.parts)}
        self.size = len(self.nodes) + len(circuit.parts)

    def volt(self, a: str, b: str) -> np.ndarray:
        row = np.zeros(self.size)
        if a in self.node:
            row[self.node[a]] += 1.0
        if b in self.node:
            row[self.node[b]] -= 1.0
        return row

    def amp(self, name: str, scale: float = 1.0) -> np.ndarray:
        row = np.zeros(self.size)
        row[self.part[name]] = scale
        return row


def _row(t: _Tableau, part: Part, closed: dict, condition: str, driven: str) -> tuple:
    """(row, right-hand side) of one part's constitutive equation."""
    v, i = t.volt(part.p, part.n), t.amp(part.name)
    kind = part.kind
    if part.name == driven:
        return v, 1.0
    if kind == RESISTOR:
        return v - part.value * i, 0.0
    if kind == CAPACITOR:
        return (i if condition == DC else v), 0.0
    if kind == INDUCTOR:
        return (v if condition == DC else i), 0.0
    if kind == VOLTAGE_SOURCE:
        return v, 0.0
    if kind == CURRENT_SOURCE:
        return i, 0.0
    if kind == SWITCH:
        r = part.on_resistance if closed[part.name] else part.off_resistance
        if r is None:
            return (v if closed[part.name] else i), 0.0
        return v - r * i, 0.0
    if kind in (VCVS, VCCS):
        return (v if kind == VCVS else i) - part.value * t.volt(*part.control), 0.0
    if kind in (CCVS, CCCS):
        return (v if kind == CCVS else i) - part.value * t.amp(part.control), 0.0
    if kind == OPAMP:
        sense = t.volt(*part.control)
        return (sense if part.value is None else v - part.value * sense), 0.0
    raise _Unknown(kind)


def _beta(circuit: Circuit, amp: Part, closed: dict, condition: str) -> float | None:
    """beta of ``amp`` in one switch configuration and limit, None where it is not fixed."""
    t = _Tableau(circuit)
    rows, rhs = [], []
    for node in t.nodes:                        # Kirchhoff's current law, currents leaving
        row = np.zeros(t.size)
        for part in circuit.parts:
            if part.p == node:
                row[t.part[part.name]] += 1.0
            if part.n == node:
                row[t.part[part.name]] -= 1.0
        rows.append(row), rhs.append(0.0)
    for part in circuit.parts:
        row, value = _row(t, part, closed, condition, amp.name)
        rows.append(row), rhs.append(value)
    a, b = np.array(rows), np.array(rhs)
    u, sv, vh = np.linalg.svd(a)
    keep = sv > RCOND * sv[0]
    x = vh[keep].T @ ((u[:, keep].T @ b) / sv[keep])
    if np.linalg.norm(a @ x - b) > 1e-9 * max(1.0, float(np.abs(b).max())):
        return None                             # inconsistent: the drive is shorted
    probe = t.volt(*amp.control)
    null = vh[~keep]
    if null.size and float(np.abs(null @ probe).max()) > 1e-9:
        return None                             # the inputs' difference is not fixed
    return float(probe @ x)


def _configurations(circuit: Circuit) -> list[tuple[float | None, dict]]:
    """(from when, switch name -> closed) of every configuration the schedule visits."""
    switches = [p for p in circuit.parts if p.kind == SWITCH]
    seen, out = set(), []
    for time in [None] + list(circuit.events):
        closed = {p.name: bool(p.is_closed_before(0.0) if time is None else p.is_closed(time))
                  for p in switches}
        key = tuple(sorted(closed.items()))
        if key not in seen:
            seen.add(key)
            out.append((time, closed))
    return out


def positive_feedback(circuit: Circuit) -> list[Hazard]:
    """Every op-amp whose feedback is positive (module docstring), once each, as a
    ``results.POSITIVE_FEEDBACK`` hazard."""
    amps = [p for p in circuit.parts if p.kind == OPAMP]
    if not amps or len(circuit.nodes) + len(circuit.parts) > MAX_UNKNOWNS:
        return []
    try:
        found = [_first(circuit, amp) for amp in amps]
    except _Unknown:
        return []
    return [f for f in found if f is not None]


def _first(circuit: Circuit, amp: Part) -> Hazard | None:
    """The first configuration and limit in which ``amp``'s feedback is positive, or None."""
    for time, closed in _configurations(circuit):
        for condition in (DC, FAST):
            beta = _beta(circuit, amp, closed, condition)
            if beta is None:
                continue
            loop = beta if amp.value is None else amp.value * beta - 1.0
            if loop > MARGIN:
                values = {"beta": beta, "fast": float(condition == FAST),
                          "pre-step": float(time is None)}
                if amp.value is not None:
                    values["gain"] = amp.value
                return Hazard(POSITIVE_FEEDBACK, 0.0 if time is None else time, (amp.name,),
                              (), values)
    return None
