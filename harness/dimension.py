"""Physical dimensions as exponent vectors over the SI base units kg, m, s and A.

A ``Dimension`` is the exponents of kg, m, s and A (the base units the circuit quantities need;
SI brochure, 9th edition, Table 2) as exact fractions, so ``sqrt`` can halve them.  Products add
exponents, quotients subtract them, powers scale them.  ``of_unit`` maps the dimension words of
:mod:`harness.units` (``"ohm"``, ``"F"`` …) to vectors; ``describe`` names a vector in the
project's unit words (``seconds (s)``) or, when it has no name, as the shortest product of two
named units (``Ω²/s`` for R/C), falling back to the base units.

This module knows nothing of formulas or circuits; ``harness.formula`` walks a formula's tree
with it.  Why not a general units library: DEVELOPERS.md, "Decisions".
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache
from itertools import product

BASES = ("kg", "m", "s", "A")


@dataclass(frozen=True)
class Dimension:
    """Exponents of kg, m, s, A (in that order) as exact fractions."""

    exponents: tuple[Fraction, Fraction, Fraction, Fraction]

    @classmethod
    def of(cls, kg: int = 0, m: int = 0, s: int = 0, A: int = 0) -> "Dimension":
        return cls(tuple(Fraction(x) for x in (kg, m, s, A)))

    def __mul__(self, other: "Dimension") -> "Dimension":
        return Dimension(tuple(a + b for a, b in zip(self.exponents, other.exponents)))

    def __truediv__(self, other: "Dimension") -> "Dimension":
        return Dimension(tuple(a - b for a, b in zip(self.exponents, other.exponents)))

    def __pow__(self, power: Fraction) -> "Dimension":
        return Dimension(tuple(a * Fraction(power) for a in self.exponents))

    @property
    def dimensionless(self) -> bool:
        return not any(self.exponents)


ONE = Dimension.of()
#: the units.py dimension words -> vectors (SI brochure, 9th ed., Table 4: V = W/A, Ω = V/A,
#: F = C/V, H = Wb/A, S = A/V, J = N·m, W = J/s, C = A·s)
UNIT_DIMENSIONS: dict[str, Dimension] = {
    "1": ONE, "%": ONE,
    "s": Dimension.of(s=1), "A": Dimension.of(A=1),
    "V": Dimension.of(kg=1, m=2, s=-3, A=-1),
    "ohm": Dimension.of(kg=1, m=2, s=-3, A=-2),
    "S": Dimension.of(kg=-1, m=-2, s=3, A=2),
    "F": Dimension.of(kg=-1, m=-2, s=4, A=2),
    "H": Dimension.of(kg=1, m=2, s=-2, A=-2),
    "J": Dimension.of(kg=1, m=2, s=-2),
    "W": Dimension.of(kg=1, m=2, s=-3),
    "Hz": Dimension.of(s=-1),
    "C": Dimension.of(s=1, A=1),
}
_WORDS = {"1": "a plain number", "s": "seconds (s)", "A": "amperes (A)", "V": "volts (V)",
          "ohm": "ohms (Ω)", "S": "siemens (S)", "F": "farads (F)", "H": "henries (H)",
          "J": "joules (J)", "W": "watts (W)", "C": "coulombs (C)", "Hz": "hertz (Hz)"}
#: unit word -> symbol, in the order ``symbol`` prefers them
_SYMBOLS = {"s": "s", "V": "V", "A": "A", "ohm": "Ω", "F": "F", "H": "H", "S": "S", "J": "J",
            "W": "W", "C": "C", "Hz": "Hz"}
_POWERS = [Fraction(k, 2) for k in range(-6, 7)]
_SUPERSCRIPT = str.maketrans("0123456789-/", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻ᐟ")


def of_unit(unit: str | None) -> Dimension:
    """The vector of a units.py dimension word; ``None`` (a bare number) is dimensionless."""
    return ONE if unit is None else UNIT_DIMENSIONS[unit]


def describe(dim: Dimension) -> str:
    """Words for ``dim``: ``seconds (s)``; unnamed ones as ``Ω²/s`` or in base units."""
    for unit, named in UNIT_DIMENSIONS.items():
        if named == dim and unit in _WORDS:
            return _WORDS[unit]
    return symbol(dim)


def symbol(dim: Dimension) -> str:
    """A compact symbol for ``dim``: the named unit, else the simplest U^a·W^b of one or two
    named units (|a|, |b| ≤ 3 in halves; whole powers, fewer units and smaller powers first,
    then units earlier in ``_SYMBOLS``), else the base-unit product (``kg·m²·s⁻³``)."""
    if dim.dimensionless:
        return "1"
    terms = _named_products().get(dim)
    if terms is None:
        terms = [(base, e) for base, e in zip(BASES, dim.exponents) if e]
    return _product(terms)


@lru_cache(maxsize=1)
def _named_products() -> dict[Dimension, list[tuple[str, Fraction]]]:
    """Every U^a·W^b of ``symbol``'s search -> its simplest terms (built once, ~0.1 s)."""
    order = list(_SYMBOLS)
    best: dict[Dimension, tuple[tuple, list]] = {}
    for (u, w), (a, b) in product(product(order, repeat=2), product(_POWERS, repeat=2)):
        if order.index(u) >= order.index(w) or a == 0:
            continue
        dim = UNIT_DIMENSIONS[u] ** a * UNIT_DIMENSIONS[w] ** b
        cost = ((a.denominator > 1) + (b.denominator > 1), bool(b), abs(a) + abs(b),
                order.index(u) + (order.index(w) if b else 0))
        if dim not in best or cost < best[dim][0]:
            best[dim] = (cost, [(_SYMBOLS[u], a), (_SYMBOLS[w], b)])
    return {dim: terms for dim, (_, terms) in best.items()}


def _product(terms: list[tuple[str, Fraction | int]]) -> str:
    """``Ω²/s`` from [("Ω", 2), ("s", -1)]: positive powers first, then ``/`` and the rest."""
    def power(name: str, e: Fraction | int) -> str:
        return name if e == 1 else name + str(e).translate(_SUPERSCRIPT)

    terms = [(n, e) for n, e in terms if e]
    up = [power(n, e) for n, e in terms if e > 0]
    down = [power(n, -e) for n, e in terms if e < 0]
    under = "·".join(down) if len(down) == 1 else f"({'·'.join(down)})"
    return ("·".join(up) or "1") + ("/" + under if down else "")
