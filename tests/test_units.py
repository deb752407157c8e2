"""Quantities: SI prefixes, units, IEC 60062 value codes; formatting and round trips.

Sources: the IEC 60062 letter-and-digit code for resistance and capacitance values (from memory
of IEC 60062: the multiplier letter stands for the decimal point, R for ohms); the SI prefixes
of the BIPM SI Brochure (9th edition: m = 1e-3, M = 1e6, µ = 1e-6 …).
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from harness.errors import UnitError
from harness.units import format_si, parse_quantity


@pytest.mark.parametrize("text, dimension, value", [
    ("4k7", "ohm", 4.7e3), ("2R2", "ohm", 2.2), ("R47", "ohm", 0.47), ("1M0", "ohm", 1.0e6),
    ("4R7", "ohm", 4.7), ("1n5", "F", 1.5e-9), ("6p8", "F", 6.8e-12), ("4u7", "F", 4.7e-6),
    ("2k2 Ω", "ohm", 2.2e3),
])
def test_iec_60062_codes(text, dimension, value):
    """Letter-and-digit codes read as the standard writes them (from memory of IEC 60062)."""
    assert parse_quantity(text, dimension) == pytest.approx(value, rel=1e-15)


@pytest.mark.parametrize("text, dimension, value", [
    ("100k", "ohm", 1e5), ("1 uF", "F", 1e-6), ("1 µF", "F", 1e-6), ("2 mA", "A", 2e-3),
    ("1m", "s", 1e-3), ("1M", "ohm", 1e6), ("3.3 V", "V", 3.3), ("4.7 kΩ", "ohm", 4.7e3),
    ("10 ohm", "ohm", 10.0), ("1 GΩ", "ohm", 1e9), ("1 TΩ", "ohm", 1e12), ("1 fF", "F", 1e-15),
    ("-5 V", "V", -5.0), ("1e-3 s", "s", 1e-3), ("10 mH", "H", 1e-2), ("2 mA/V", "S", 2e-3),
    ("10 V/V", "1", 10.0), ("3 A/A", "1", 3.0), ("1 kV/A", "ohm", 1e3),
])
def test_si_prefixes_and_units(text, dimension, value):
    """SI prefixes scale by the powers of ten of the SI Brochure; case matters (m vs M)."""
    assert parse_quantity(text, dimension) == pytest.approx(value, rel=1e-15)


def test_decimal_scaling_is_exact():
    """'10 µs' is exactly the float 1e-05 (one rounding, as decimal arithmetic gives)."""
    assert parse_quantity("10 µs", "s") == 1e-05
    assert parse_quantity("0.1 ms", "s") == 1e-04


def test_percent():
    """'2%' is 0.02 where a percentage is allowed, and refused elsewhere."""
    assert parse_quantity("2%", "1", allow_percent=True) == pytest.approx(0.02)
    with pytest.raises(UnitError):
        parse_quantity("2%", "V")


def test_numbers_pass_through():
    """TOML numbers are taken in the field's own unit."""
    assert parse_quantity(4700, "ohm") == 4700.0
    assert parse_quantity(1e-6, "F") == 1e-6


@pytest.mark.parametrize("raw", [
    "nan", "inf", "", "   ", "4k7k", "3.3 VV", "k", "1..2", "1 Kohm ohm", "4.7 kk",
    float("nan"), float("inf"), -float("inf"), True, None, [1], {"a": 1}, "1e999",
    "1e999999999", "1e99999999999999999999 V", 10 ** 400, "1" * 80,
])
def test_rejections(raw):
    """Unreadable, non-finite, out-of-range or mistyped input is a UnitError, never another error."""
    with pytest.raises(UnitError):
        parse_quantity(raw, "V")


@pytest.mark.parametrize("text, dimension, words", [
    ("3.3 A", "V", ("amperes", "volts")), ("1 uF", "H", ("farads", "henries")),
    ("4k7", "V", None), ("100 ms", "ohm", ("seconds", "ohms")),
])
def test_wrong_unit_message(text, dimension, words):
    """A unit that does not fit says what it is and what the field wants ('4k7' is a bare number)."""
    if words is None:
        assert parse_quantity(text, dimension) == pytest.approx(4700.0)
        return
    with pytest.raises(UnitError) as caught:
        parse_quantity(text, dimension)
    assert words[0] in caught.value.message and words[1] in caught.value.message


@pytest.mark.parametrize("value, unit, text", [
    (0.0047, "F", "4.7 mF"), (4700.0, "ohm", "4.7 kΩ"), (1e-5, "s", "10 µs"), (0.0, "V", "0 V"),
    (3.3, "V", "3.3 V"), (-0.002, "A", "-2 mA"), (None, "V", "—"),
])
def test_format_si(value, unit, text):
    """Values print with an engineering prefix (SI Brochure prefixes)."""
    assert format_si(value, unit) == text


_MAGNITUDES = st.floats(min_value=1e-15, max_value=1e14, allow_nan=False, allow_infinity=False)


@given(_MAGNITUDES, st.sampled_from([1.0, -1.0]), st.sampled_from(["V", "A", "ohm", "F", "H", "s"]))
def test_round_trip(magnitude, sign, unit):
    """format_si then parse_quantity gives the value back to the printed digits (12 here)."""
    value = sign * magnitude
    assert parse_quantity(format_si(value, unit, digits=12), unit) == pytest.approx(value,
                                                                                    rel=1e-11)


@given(_MAGNITUDES)
def test_round_trip_plain_number(value):
    """A dimensionless value printed with only a prefix ('4.7 k') reads back the same."""
    assert math.isclose(parse_quantity(format_si(value, "1", digits=12), "1"), value,
                        rel_tol=1e-11)


@pytest.mark.parametrize("text, dimension, hint", [
    ("100 nf", "F", "100 nF"), ("10 mv", "V", "10 mV"), ("4.7 uh", "H", "4.7 uH"),
    ("5 hz", "Hz", "5 Hz"), ("3.3 v", "V", "3.3 V"),
])
def test_unit_case_slip_names_the_reading(text, dimension, hint):
    """A unit typed in the wrong letter case ('100 nf') is refused, and the message offers the
    SI spelling (SI Brochure: unit symbols are case-sensitive)."""
    with pytest.raises(UnitError) as caught:
        parse_quantity(text, dimension)
    assert f"did you mean '{hint}'" in caught.value.message


@pytest.mark.parametrize("text", ["1 sec", "3 volts", "10 xy"])
def test_no_case_hint_without_a_single_reading(text):
    """No guess where no unit differs from the text only by case."""
    with pytest.raises(UnitError) as caught:
        parse_quantity(text, "V")
    assert "did you mean" not in caught.value.message
