"""What varies, and the circuit at given values of it.

A varied quantity is a part's ``value`` (a source's steps scale with it) or a crossing's level.
Its relative box (low, high: the spread with the tempco and ageing folded in, ``declare.box``)
is what the extremes are searched over; a sample is a vector of relative deviations d, the value
being nominal·(1 + d).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from .. import model as m
from .declare import box


@dataclass(frozen=True)
class Quantity:
    """One varied quantity.

    Attributes:
        name: the part's name, or ``level`` for the expectation's crossing level.
        nominal: its nominal value in SI units (Ω, F, H, V, A).
        low, high: relative spread edges (low ≤ 0 ≤ high).
        unit: the SI unit word for reports.
    """

    name: str
    nominal: float
    low: float
    high: float
    unit: str = ""

    @property
    def is_level(self) -> bool:
        return self.name == LEVEL


LEVEL = "level"
_UNITS = {m.RESISTOR: "Ω", m.CAPACITOR: "F", m.INDUCTOR: "H", m.VOLTAGE_SOURCE: "V",
          m.CURRENT_SOURCE: "A"}


def varied(circuit: m.Circuit, exp: m.Expectation) -> tuple[Quantity, ...]:
    """The parts with a spread, in file order, then the crossing level if it spreads."""
    boxes = {p.name: box(p, circuit.variation) for p in circuit.parts}
    out = [Quantity(p.name, float(p.value), *boxes[p.name], _UNITS.get(p.kind, ""))
           for p in circuit.parts if boxes[p.name] is not None and p.value is not None]
    cross = exp.crossing
    if cross is not None and cross.level_spread is not None:
        out.append(Quantity(LEVEL, cross.level, cross.level_spread[0], cross.level_spread[1],
                            exp.probe.dimension))
    return tuple(out)


def edges(quantities: tuple[Quantity, ...]) -> tuple[np.ndarray, np.ndarray]:
    """The box's relative lower and upper edges, each shape (n,)."""
    return (np.array([q.low for q in quantities]), np.array([q.high for q in quantities]))


def values(quantities: tuple[Quantity, ...], deviations: np.ndarray) -> np.ndarray:
    """Absolute values nominal·(1 + d), shape as ``deviations`` (…, n)."""
    nominal = np.array([q.nominal for q in quantities])
    return nominal * (1.0 + deviations)


def apply(circuit: m.Circuit, exp: m.Expectation, quantities: tuple[Quantity, ...],
          deviation: np.ndarray) -> tuple[m.Circuit, m.Expectation]:
    """The circuit and expectation at one vector of relative deviations, shape (n,)."""
    factors = {q.name: 1.0 + float(d) for q, d in zip(quantities, deviation)}
    parts = []
    for part in circuit.parts:
        f = factors.get(part.name)
        if f is None:
            parts.append(part)
            continue
        steps = tuple((t, v * f) for t, v in part.steps) if part.kind in m.SOURCES \
            else part.steps
        parts.append(replace(part, value=part.value * f, steps=steps))
    if LEVEL in factors and exp.crossing is not None:
        exp = replace(exp, crossing=replace(exp.crossing,
                                            level=exp.crossing.level * factors[LEVEL]))
    return replace(circuit, parts=tuple(parts)), exp
