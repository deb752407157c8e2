"""Dimension checking of hand-value formulas (harness.dimension, harness.formula "Units").

References: the SI brochure (BIPM, 9th edition, 2019), Table 4, derived units in base units:
V = kg·m²·s⁻³·A⁻¹, Ω = V/A, F = C/V = kg⁻¹·m⁻²·s⁴·A², H = Wb/A = kg·m²·s⁻²·A⁻², S = A/V,
J = kg·m²·s⁻², W = J/s, C = A·s; and common practice for τ = R·C, τ = L/R, i = V/R, ½CV²,
the LC time scale √(LC) and the ratio inside ln() of a crossing time τ·ln(V₀/V₁).
"""

from __future__ import annotations

import math

import pytest

from harness.dimension import ONE, Dimension, describe, of_unit
from harness.errors import InputError
from harness.formula import FormulaError, evaluate

VALUES = {"R1": 10e3, "R2": 4.7e3, "C1": 1e-6, "L1": 10e-3, "V1": 5.0, "I1": 2e-3,
          "E1": 2.0, "G1": 1e-3, "H1": 50.0, "F1": 3.0}
UNITS = {"R1": "ohm", "R2": "ohm", "C1": "F", "L1": "H", "V1": "V", "I1": "A",
         "E1": "1", "G1": "S", "H1": "ohm", "F1": "1"}


def check(text: str, dimension: str) -> float:
    return evaluate(text, VALUES, dimension, UNITS)


def test_derived_units_in_base_units():
    """SI brochure Table 4: the vectors of V, Ω, F, H, S, J, W, C over kg, m, s, A."""
    assert of_unit("V") == Dimension.of(kg=1, m=2, s=-3, A=-1)
    assert of_unit("ohm") == of_unit("V") / of_unit("A")
    assert of_unit("F") == of_unit("C") / of_unit("V")
    assert of_unit("H") == of_unit("V") * of_unit("s") / of_unit("A")   # Wb/A, Wb = V·s
    assert of_unit("S") == of_unit("A") / of_unit("V")
    assert of_unit("J") == of_unit("W") * of_unit("s")
    assert of_unit("C") == of_unit("A") * of_unit("s")


@pytest.mark.parametrize("text, dimension, expected", [
    ("= R1*C1", "s", 10e3 * 1e-6),                       # Ω·F = s
    ("= L1/R1", "s", 10e-3 / 10e3),                      # H/Ω = s
    ("= V1/R1", "A", 5.0 / 10e3),                        # V/Ω = A
    ("= I1*par(R1, R2)", "V", 2e-3 / (1 / 10e3 + 1 / 4.7e3)),   # A·Ω = V
    ("= 0.5*C1*V1^2", "J", 0.5 * 1e-6 * 25.0),           # F·V² = J
    ("= sqrt(L1*C1)", "s", math.sqrt(10e-3 * 1e-6)),     # √(H·F) = s
    ("= R1*C1*ln(V1/(2 V))", "s", 1e-2 * math.log(2.5)),  # V/V is a plain number
    ("= E1*V1", "V", 10.0),                              # vcvs gain: plain number
    ("= G1*V1", "A", 5e-3),                              # vccs gain: S·V = A
    ("= H1*I1", "V", 0.1),                               # ccvs gain: Ω·A = V
    ("= F1*I1", "A", 6e-3),                              # cccs gain: plain number
    ("= 3.3 V * R2/(R1+R2)", "V", 3.3 * 4.7e3 / 14.7e3),
    ("= (R1 + 4k7 Ω) * 100 nF", "s", (10e3 + 4.7e3) * 100e-9),  # IEC 60062 code with Ω
    ("= 2 * 5", "s", 10.0),                              # no part, no unit: the field's unit
    ("= 100 ms * 5 %", "s", 5e-3),                       # % is a plain number
    ("= abs(-(R1*C1))", "s", 1e-2),
])
def test_formulas_in_the_field_unit_pass(text, dimension, expected):
    """Each formula's dimension is the field's (the comment names the identity)."""
    assert check(text, dimension) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("text, dimension, words", [
    ("= R1 / C1", "s", "gives Ω/F, but this field is in seconds (s)"),
    ("= R1*L1", "s", "but this field is in seconds (s)"),
    ("= V1*R1", "A", "but this field is in amperes (A)"),
    ("= C1*V1", "J", "gives coulombs (C), but this field is in joules (J)"),
    ("= sqrt(R1)", "V", "gives Ω¹ᐟ²"),
    ("= E1", "V", "gives a plain number, but this field is in volts (V)"),
    ("= 3.3 ms + 0 V", "V", "'+' at column 10 adds unlike units: seconds (s) and volts (V)"),
    ("= R1*C1 - 1", "s", "subtracts unlike units: seconds (s) and a plain number"),
    ("= ln(V1)", "1", "ln() at column 3 needs a plain-number argument, got volts (V)"),
    ("= exp(R1*C1)", "1", "exp() at column 3 needs a plain-number argument, got seconds"),
    ("= log10(R1)", "1", "needs a plain-number argument, got ohms"),
    ("= min(R1, C1)", "ohm", "min() at column 3 mixes unlike units: ohms (Ω) and farads (F)"),
    ("= par(R1, 0)", "ohm", "par() at column 3 mixes unlike units"),
    ("= (R1 + 4k7) * C1", "s", "a number without a unit is a plain number in a formula"),
    ("= R1 ** C1", "ohm", "the exponent of '**' at column 6 is in farads (F)"),
    ("= R1 ** 0.3183", "ohm", "to the power 0.3183"),
])
def test_formulas_in_another_unit_are_input_errors(text, dimension, words):
    """A result or a sum in unlike units is a FormulaError (an InputError) naming both units."""
    with pytest.raises(FormulaError) as caught:
        check(text, dimension)
    assert isinstance(caught.value, InputError)
    assert words in caught.value.message, caught.value.message


@pytest.mark.parametrize("text", ["= (-1)**0.5", "= (-8)^(1/3)", "= sqrt(-R1)", "= (-R1)**0.5"])
def test_complex_results_are_input_errors(text):
    """A negative base to a fractional power (or √ of a negative) has no real value: an input
    error, never an internal one (the real-valued powers of IEEE 754 arithmetic)."""
    with pytest.raises(FormulaError):
        check(text, "s")


def test_a_part_of_unknown_unit_leaves_its_terms_unchecked():
    """Without a unit for a part (``units`` not given) the old float evaluation is unchanged."""
    assert evaluate("= R1 / C1", VALUES, "s") == pytest.approx(1e10)
    assert evaluate("= R1 / C1", VALUES, "s", {"R1": "ohm"}) == pytest.approx(1e10)


def test_unnamed_dimensions_read_as_simple_products():
    """Ω/F and V·s are named as written by hand, not in base units; 1/s is the hertz."""
    assert describe(of_unit("ohm") / of_unit("F")) == "Ω/F"
    assert describe(of_unit("V") * of_unit("s")) == "s·V"
    assert describe(ONE / of_unit("s")) == "hertz (Hz)"     # SI: Hz = 1/s (a ring's frequency)
    assert describe(ONE) == "a plain number"
