"""Quantities: text with SI prefixes, units and IEC 60062 value codes to floats, and back.

Accepted forms (case-sensitive prefixes: ``m`` is milli, ``M`` mega):

* TOML numbers: ``4700``, ``1e-6``;
* a number, optional space, optional SI prefix, optional unit: ``3.3 V``, ``100k``, ``4.7 kΩ``,
  ``1 uF``, ``10 µs``, ``2 mA``, ``5%``;
* IEC 60062 resistance and capacitance codes, where the prefix letter stands for the decimal
  point: ``4k7`` (4.7e3), ``2R2`` (2.2), ``R47`` (0.47), ``1n5`` (1.5e-9), ``1M0``.

Units are named by a *dimension* so that a field can demand one: ``V``, ``A``, ``ohm``, ``F``,
``H``, ``s``, ``S`` (siemens), ``1`` (dimensionless) and ``%``.  A number without a unit is taken
in the field's own unit.  Hand parsing is deliberate: the IEC codes, bare prefixes such as
``100k`` and the case rule are not what general units libraries read.
"""

from __future__ import annotations

import math
import re
from decimal import Decimal

from .errors import UnitError

PREFIXES: dict[str, float] = {
    "f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "μ": 1e-6, "m": 1e-3,
    "k": 1e3, "K": 1e3, "M": 1e6, "G": 1e9, "T": 1e12,
}

#: unit spelling -> dimension
UNITS: dict[str, str] = {
    "V": "V", "A": "A", "Ω": "ohm", "ohm": "ohm", "Ohm": "ohm", "ohms": "ohm", "R": "ohm",
    "F": "F", "H": "H", "s": "s", "S": "S", "%": "%",
    "V/V": "1", "A/A": "1", "A/V": "S", "V/A": "ohm",
    "J": "J", "W": "W", "Hz": "Hz",
}

DIMENSION_NAMES = {"V": "volts", "A": "amperes", "ohm": "ohms", "F": "farads", "H": "henries",
                   "s": "seconds", "S": "siemens", "1": "a plain number", "%": "a percentage",
                   "J": "joules", "W": "watts", "Hz": "hertz"}

_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_PLAIN = re.compile(rf"^\s*({_NUMBER})\s*(\S*)\s*$")
_IEC = re.compile(r"^\s*([+-]?)(\d*)([RrKkMGTpnuµμmf])(\d+)\s*(\S*)\s*$")
_IEC_SCALE = {"R": 1.0, "r": 1.0, "K": 1e3, "k": 1e3, "M": 1e6, "G": 1e9, "T": 1e12,
              "p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "μ": 1e-6, "m": 1e-3, "f": 1e-15}


def _split_suffix(suffix: str) -> tuple[float, str | None]:
    """Split ``kΩ`` into (1e3, "ohm"); ``""`` into (1, None). Raises ValueError when unreadable."""
    if suffix == "":
        return 1.0, None
    if suffix in UNITS:
        return 1.0, UNITS[suffix]
    if suffix[0] in PREFIXES:
        rest = suffix[1:]
        if rest == "":
            return PREFIXES[suffix[0]], None
        if rest in UNITS and UNITS[rest] != "%":
            return PREFIXES[suffix[0]], UNITS[rest]
    raise ValueError(suffix)


def parse_quantity(raw: object, dimension: str, *, allow_percent: bool = False,
                   ranged: bool = True) -> float:
    """Read a quantity for a field of the given dimension; return it in SI base units.

    Args:
        raw: a TOML value (int, float or str).
        dimension: the field's dimension, one of the values of ``UNITS`` (``"V"``, ``"ohm"`` …).
        allow_percent: accept ``%`` (the result is a fraction: ``"1%"`` -> 0.01).
        ranged: refuse a value outside ``check_magnitude``'s range (False for a number inside a
            formula, whose result is checked instead).

    Raises:
        UnitError: the text is not a quantity, the unit does not fit, the value is not finite,
            or (``ranged``) it is neither 0 nor of a magnitude in the accepted range.
    """
    if isinstance(raw, bool) or not isinstance(raw, (int, float, str)):
        raise UnitError(f"expected a number or a quantity such as '4k7' or '3.3 V', "
                        f"got {type(raw).__name__} {raw!r}")
    if isinstance(raw, (int, float)):
        try:
            value = float(raw)
        except OverflowError:
            raise UnitError("the integer is too large (beyond the floating-point range)") from None
    else:
        value = _parse_text(raw, dimension, allow_percent)
    if not math.isfinite(value):
        raise UnitError(f"value {raw!r} is not finite")
    return check_magnitude(value, dimension, raw) if ranged else value


#: the accepted magnitudes of a non-zero quantity (in its SI unit): the range of the SI prefixes,
#: quecto to quetta.  Within it every square and product of three values the engines form stays
#: a normal float; a subnormal or a value near the float limits does not.
MAGNITUDE_MIN = 1e-30
MAGNITUDE_MAX = 1e30


def check_magnitude(value: float, dimension: str, raw: object = None) -> float:
    """``value`` when it is 0 or its magnitude lies in [``MAGNITUDE_MIN``, ``MAGNITUDE_MAX``].

    Raises:
        UnitError: naming the value as written (``raw``) and the accepted range in the unit.
    """
    if value == 0 or MAGNITUDE_MIN <= abs(value) <= MAGNITUDE_MAX:
        return value
    unit = _SYMBOL.get(dimension, "")
    unit = f" {unit}" if unit else ""
    shown = raw if isinstance(raw, str) else f"{value:g}{unit}"
    low, high = (f"{bound:g}".replace("e+", "e") for bound in (MAGNITUDE_MIN, MAGNITUDE_MAX))
    raise UnitError(f"{shown!r} is outside the range tauproof accepts: 0, or a magnitude from "
                    f"{low}{unit} to {high}{unit}")


def _parse_text(text: str, dimension: str, allow_percent: bool) -> float:
    if len(text) > 64:
        raise UnitError(f"quantity text is too long ({len(text)} characters)")
    m = _PLAIN.match(text)
    if m:
        try:
            scale, dim = _split_suffix(m.group(2))
        except ValueError:
            scale, dim = None, None
        if scale is not None:
            return _apply(_scaled(m.group(1), scale), dim, dimension, allow_percent, text)
    m = _IEC.match(text)
    if m and (m.group(2) or m.group(3) in "Rr"):
        sign, whole, letter, frac, unit = m.groups()
        number = _scaled(f"{whole or '0'}.{frac}", _IEC_SCALE[letter])
        if sign == "-":
            number = -number
        dim = None
        if unit:
            if unit not in UNITS or UNITS[unit] == "%":
                raise UnitError(f"cannot read {text!r}: unknown unit {unit!r}")
            dim = UNITS[unit]
        return _apply(number, dim, dimension, allow_percent, text)
    hint = _case_hint(text)
    if hint:
        raise UnitError(f"cannot read {text!r} as a quantity: unit letters are case-sensitive "
                        f"(m is milli, M mega); did you mean {hint!r}?")
    raise UnitError(f"cannot read {text!r} as a quantity (examples: '4k7', '3.3 V', '100 ms', '1 uF')")


def _case_hint(text: str) -> str | None:
    """``text`` with its unit's letter case corrected (``'100 nf'`` -> ``'100 nF'``), when that
    reading is the only one; None otherwise.  The prefix keeps its case: ``m`` and ``M`` differ
    by nine decades, so a wrong prefix case is never guessed."""
    m = _PLAIN.match(text)
    if not m or not m.group(2):
        return None
    suffix = m.group(2)
    readings = set()
    for cut in (0, 1):
        prefix, unit = suffix[:cut], suffix[cut:]
        if (cut and prefix not in PREFIXES) or not unit:
            continue
        readings.update(prefix + known for known in UNITS
                        if known.lower() == unit.lower() and known != unit)
    return f"{m.group(1)} {readings.pop()}" if len(readings) == 1 else None


def has_suffix(text: str) -> bool:
    """True when ``text`` is quantity text with a prefix or unit (``100k``, ``4k7``, ``10 uF``):
    what TOML cannot read unquoted, unlike a plain number."""
    m = _PLAIN.match(text)
    if m and m.group(2):
        try:
            _split_suffix(m.group(2))
            return True
        except ValueError:
            pass
    m = _IEC.match(text)
    return bool(m and (m.group(2) or m.group(3) in "Rr") and m.group(5) in ("", *UNITS))


def _scaled(digits: str, scale: float) -> float:
    """``digits`` times a power-of-ten ``scale``, rounded once (so ``10 µs`` is exactly 1e-05)."""
    if not digits.lstrip("+-"):
        raise UnitError("missing number")
    exponent = round(math.log10(scale))
    try:
        return float(Decimal(digits).scaleb(exponent))
    except ArithmeticError:  # decimal.Overflow / InvalidOperation for exponents beyond Decimal's
        raise UnitError(f"the number {digits!r} is out of range") from None


def _apply(number: float, dim: str | None, dimension: str, allow_percent: bool, text: str) -> float:
    if dim is None:
        return number
    if dim == "%":
        if not allow_percent:
            raise UnitError(f"{text!r}: a percentage does not fit a field in "
                            f"{DIMENSION_NAMES[dimension]}")
        return number / 100.0
    if dim != dimension:
        raise UnitError(f"{text!r} is in {DIMENSION_NAMES[dim]}, but this field is "
                        f"{'' if dimension == '1' else 'in '}{DIMENSION_NAMES[dimension]}")
    return number


_ENG = [(1e12, "T"), (1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "µ"),
        (1e-9, "n"), (1e-12, "p"), (1e-15, "f")]
_SYMBOL = {"ohm": "Ω", "1": "", "V": "V", "A": "A", "F": "F", "H": "H", "s": "s", "S": "S",
           "J": "J", "C": "C", "W": "W", "%": "%"}


def format_si(value: float | None, unit: str = "", digits: int = 4) -> str:
    """Format ``value`` (SI base units) with an engineering prefix: ``format_si(0.0047, "F")`` -> ``4.7 mF``.

    ``unit`` is a dimension name or symbol (``"ohm"`` prints as Ω; ``"1"``, a plain number,
    prints without a prefix); ``None`` prints as ``—``.
    The value is rounded to ``digits`` significant digits before the prefix is chosen, so
    0.99997e-3 J prints as ``1 mJ``, never ``1000 µJ``.
    """
    if value is None:
        return "—"
    if unit == "1":                     # a plain number (a damping ratio, a fraction): no prefix
        return f"{value:.{digits}g}"
    symbol = _SYMBOL.get(unit, unit)
    if value == 0 or not math.isfinite(value):
        return f"{value:g} {symbol}".rstrip()
    rounded = float(f"{value:.{digits}g}")
    mag = abs(rounded)
    if mag < 1e-15 * 0.9999995 or mag >= 1e15:
        return f"{value:.{digits}g} {symbol}".rstrip()
    for scale, prefix in _ENG:
        if mag >= scale * 0.9999995:
            break
    else:
        scale, prefix = _ENG[-1]
    text = f"{rounded / scale:.{digits}g}"
    return f"{text} {prefix}{symbol}".rstrip()


#: most significant digits ``format_apart`` and ``format_exact`` use (a double holds about 16)
MOST_DIGITS = 12


def exact_digits(value: float | None, digits: int = 4) -> int:
    """The significant digits (at least ``digits``, at most ``MOST_DIGITS``) at which ``value``
    reads back exactly: 6 for 1.79978."""
    n = digits
    if value is None or not math.isfinite(value):
        return n
    while n < MOST_DIGITS and float(f"{value:.{n}g}") != value:
        n += 1
    return n


def format_exact(value: float | None, unit: str = "", digits: int = 4) -> str:
    """``format_si`` with the digits the value needs to read back exactly (``exact_digits``): a
    threshold written 1.79978 V prints as such, not as 1.8 V."""
    return format_si(value, unit, exact_digits(value, digits))


def format_apart(values, unit: str = "", digits: int = 4, apart=None) -> list[str]:
    """``format_si`` of each value with the fewest significant digits, from ``digits`` up to
    ``MOST_DIGITS``, at which every two values that ``apart(a, b)`` calls different print
    differently (default: any two values that are not equal).  Nones print as ``—``.

    Values in SI base units; ``apart`` takes two floats and returns a bool.
    """
    values = list(values)
    if apart is None:
        def apart(a, b):
            return a != b
    pairs = [(i, j) for i in range(len(values)) for j in range(i + 1, len(values))
             if values[i] is not None and values[j] is not None and apart(values[i], values[j])]
    for n in range(digits, MOST_DIGITS + 1):
        texts = [format_si(v, unit, n) for v in values]
        if all(texts[i] != texts[j] for i, j in pairs):
            return texts
    return texts
