"""Tests for harness.formula: hand values written as formulas of part values.

References: Python's own float arithmetic and operator precedence (the formula grammar follows
it), the textbook parallel-resistance formula and tau = R*C (common practice), SI prefix
definitions, and the IEC 60062 letter-as-decimal-point value code (from memory).
"""

from __future__ import annotations

import math

import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from harness.errors import InputError, UnitError
from harness.formula import MAX_DEPTH, MAX_LENGTH, FormulaError, evaluate, is_formula, names
from harness.units import parse_quantity

PARTS = {"R1": 1e3, "R2": 2e3, "C1": 1e-6}


# Reference: Python's operator precedence and associativity, computed by Python on the same
# numbers (the right-hand side is ordinary Python float arithmetic, written out in the test).
PRECEDENCE_CASES = [
    ("= 2 + 3 * 4", 2.0 + 3.0 * 4.0),
    ("= 2 - 3 - 4", 2.0 - 3.0 - 4.0),
    ("= 100 / 10 / 5", 100.0 / 10.0 / 5.0),
    ("= 1.5 / 3 * 4", 1.5 / 3.0 * 4.0),
    ("= 2 ** 3 ** 2", 2.0 ** 3.0 ** 2.0),
    ("= 2 ^ 3 ^ 2", 2.0 ** 3.0 ** 2.0),
    ("= -2 ** 2", -2.0 ** 2.0),
    ("= 2 ** -1", 2.0 ** -1.0),
    ("= 2 * -3 ** 2", 2.0 * -3.0 ** 2.0),
    ("= 4 / 2 ** -2", 4.0 / 2.0 ** -2.0),
    ("= 3 - 2 ** 2 * 5", 3.0 - 2.0 ** 2.0 * 5.0),
    ("= 7 - -2", 7.0 - -2.0),
    ("= -3 * -4", -3.0 * -4.0),
    ("= +5 - +2", +5.0 - +2.0),
    ("= --2", --2.0),
    ("= (1 + 2) * 3", (1.0 + 2.0) * 3.0),
    ("= 0.1 + 0.2 * 3 - 0.7 / 0.3", 0.1 + 0.2 * 3.0 - 0.7 / 0.3),
    ("= 2 × 3 ÷ 4 · 5 − 1", 2.0 * 3.0 / 4.0 * 5.0 - 1.0),
    ("= 1e3 * 2.5e-4 + .5", 1e3 * 2.5e-4 + 0.5),
]


@pytest.mark.parametrize("text, expected", PRECEDENCE_CASES)
def test_precedence_and_associativity_match_python(text, expected):
    """Operators bind and associate as in Python, giving bit-identical float results."""
    assert evaluate(text, {}) == expected


def test_par_matches_textbook_parallel_formula():
    """par() equals 1/(1/R1 + 1/R2 + ...) and two equal resistors give half (common practice)."""
    r1, r2, r3 = 4700.0, 10e3, 220.0
    values = {"R1": r1, "R2": r2, "R3": r3}
    assert evaluate("= par(R1, R2)", values) == pytest.approx(1 / (1 / r1 + 1 / r2), rel=1e-15)
    assert evaluate("= par(R1, R2, R3)", values) == pytest.approx(
        1 / (1 / r1 + 1 / r2 + 1 / r3), rel=1e-15)
    assert evaluate("= par(R1, R1)", values) == pytest.approx(r1 / 2, rel=1e-15)
    assert evaluate("= par(R1, 0)", values) == 0.0  # a short in parallel shorts the pair


def test_time_constants_are_r_times_c_and_l_over_r():
    """tau = R*C and tau = L/R of the part values (common practice), with quantities mixed in."""
    values = {"R1": 4.7e3, "C1": 100e-9, "L1": 10e-3}
    assert evaluate("= R1*C1", values, "s") == pytest.approx(4.7e3 * 100e-9, rel=1e-15)
    assert evaluate("= L1 / R1", values, "s") == pytest.approx(10e-3 / 4.7e3, rel=1e-15)
    assert evaluate("= (R1 + 4k7) * 100 nF", values, "s") == pytest.approx(
        (4.7e3 + 4700.0) * 100e-9, rel=1e-15)


def test_examples_from_the_issue():
    """The divider, parallel-current and one-tau examples evaluate as written on paper."""
    r1, r2 = 1e3, 2e3
    values = {"R1": r1, "R2": r2}
    assert evaluate("= 3.3 V * R2/(R1+R2)", values) == pytest.approx(3.3 * r2 / (r1 + r2))
    assert evaluate("= par(R1, R2) * 2 mA", values) == pytest.approx(
        1 / (1 / r1 + 1 / r2) * 2e-3)
    assert evaluate("= 5 V * (1 - exp(-2))", values) == pytest.approx(5 * (1 - math.exp(-2)))
    assert evaluate("= 2 * pi * sqrt(R1) + ln(R2) - log10(R1) + abs(-R1) - min(R1, R2) "
                    "+ max(R1, R2, 3)", values) == pytest.approx(
        2 * math.pi * math.sqrt(r1) + math.log(r2) - math.log10(r1) + r1 - r1 + r2)


# From memory of IEC 60062: the multiplier letter stands in for the decimal point.
@pytest.mark.parametrize("code, expected", [
    ("4k7", 4.7e3), ("2R2", 2.2), ("0R47", 0.47), ("1n5", 1.5e-9), ("1M0", 1.0e6),
    ("4k7 Ω", 4.7e3), ("10k", 10e3), ("2u2", 2.2e-6), ("6p8", 6.8e-12),
])
def test_iec_60062_codes(code, expected):
    """IEC 60062 value codes read as their decimal values."""
    assert evaluate(f"= {code}", {}) == pytest.approx(expected, rel=1e-15)


# SI prefix definitions (f p n u/µ m k M G T are 1e-15 ... 1e12; common practice).
@pytest.mark.parametrize("text, dimension, expected", [
    ("2.2 uF", "F", 2.2e-6), ("100 ms", "s", 0.1), ("3.3 V", "V", 3.3), ("10 µs", "s", 1e-5),
    ("2 mA", "A", 2e-3), ("100 nF", "F", 1e-7), ("4.7 kΩ", "ohm", 4.7e3), ("1e-6", "F", 1e-6),
    ("5 %", "1", 0.05), ("2mA", "A", 2e-3), ("1.5 MHz", "Hz", 1.5e6), ("2 kWb", None, None),
])
def test_quantities_read_as_si_and_as_units_module(text, dimension, expected):
    """Quantities equal their SI definition and what harness.units reads in any other field."""
    if expected is None:  # a unit no field takes in a formula: an error, not a guess
        with pytest.raises(FormulaError, match="2 kWb"):
            evaluate(f"= {text}", {})
        return
    assert evaluate(f"= {text}", {}) == pytest.approx(expected, rel=1e-15)
    assert evaluate(f"= {text}", {}) == parse_quantity(text, dimension, allow_percent=True)


def test_unit_binds_to_the_number_it_follows():
    """'3.3 V' is 3.3 volts even with a part named V; '3.3 * V' uses the part."""
    values = {"V": 7.0, "S": 0.5}
    assert evaluate("= 3.3 V", values) == 3.3
    assert evaluate("= 3.3 * V", values) == 3.3 * 7.0
    assert evaluate("= 2 S + S", values) == 2.0 + 0.5


def test_names_lists_parts_only():
    """names() returns the part names used, not functions or the constant pi."""
    text = "= par(R1, R2) * 2 mA + pi * C_load / exp(Vin) - R1"
    assert names(text) == {"R1", "R2", "C_load", "Vin"}
    assert is_formula("  = R1*C1") and not is_formula("4k7") and not is_formula(3.0)


ERROR_CASES = [
    ("= R9*C1", "R9", 3, "unknown part 'R9' at column 3 in '= R9*C1' (parts: R1, R2, C1)"),
    ("= R1*C1)", ")", 8, "unexpected ')' at column 8"),
    ("= (R1", "(", 3, "unclosed '(' at column 3"),
    ("= 2 R1", "R1", 5, "unexpected part name 'R1' at column 5"),
    ("= 2Meg", "2Meg", 3, "cannot read '2Meg' at column 3"),
    ("= 1e400", "1e400", 3, "cannot read '1e400' at column 3"),
    ("= 3 $ 4", "$", 5, "unexpected character '$' at column 5"),
    ("= 1 +", "end of formula", 6, "unexpected end of formula"),
    ("=", "end of formula", 2, "unexpected end of formula"),
    ("= min()", ")", 7, "unexpected ')' at column 7"),
    ("= 1, 2", ",", 4, "unexpected ',' at column 4"),
    ("= log(2)", "log", 3, "unknown function 'log' at column 3"),
    ("= exp * 2", "exp", 3, "function 'exp' at column 3 needs its arguments"),
    ("= exp(1, 2)", "exp", 3, "exp() at column 3 takes 1 argument, got 2"),
    ("= R1/(R2-R2)", "/", 5, "division by zero at '/' at column 5"),
    ("= 0^-1", "^", 4, "division by zero"),
    ("= 10^400", "^", 5, "overflow at '^' at column 5"),
    ("= 1e308 * 10", "*", 9, "overflow at '*' at column 9"),
    ("= exp(1000)", "exp", 3, "overflow at 'exp' at column 3"),
    ("= (-8)^(1/3)", "^", 7, "fractional power"),
    ("= ln(0)", "ln", 3, "ln() at column 3 needs a positive argument"),
    ("= log10(-R1)", "log10", 3, "needs a positive argument"),
    ("= sqrt(-4)", "sqrt", 3, "needs a non-negative argument"),
    ("= par(R1, -R1)", "par", 3, "sum to zero"),
]


@pytest.mark.parametrize("text, token, column, fragment", ERROR_CASES)
def test_every_error_names_its_token_and_column(text, token, column, fragment):
    """Each kind of bad formula raises FormulaError whose message names the token and column."""
    with pytest.raises(FormulaError) as info:
        evaluate(text, PARTS)
    assert fragment in info.value.message
    assert (info.value.token, info.value.column) == (token, column)


def test_formula_error_is_an_input_error_that_keeps_its_location():
    """FormulaError is a UnitError/InputError and located() keeps class, token and column."""
    with pytest.raises(FormulaError) as info:
        evaluate("= R9", PARTS)
    err = info.value.located(file="a.toml", part="expect #2", field="tau")
    assert isinstance(err, FormulaError) and isinstance(err, UnitError)
    assert isinstance(err, InputError)
    assert (err.token, err.column, err.file, err.part, err.field) == (
        "R9", 3, "a.toml", "expect #2", "tau")
    assert str(err).startswith("a.toml: expect #2, field tau: unknown part 'R9'")


@pytest.mark.parametrize("text, fragment", [
    ("R1*C1", "starts with '='"),
    ("= R1 + " + "1 + " * 200, "too long"),
    ("= 3.3 V", "is in volts, but this field is in seconds"),
    ("= -100 mA", "is in amperes, but this field is in seconds"),
])
def test_text_level_errors(text, fragment):
    """A missing '=', an over-long text and a lone quantity of the wrong unit are errors."""
    with pytest.raises(FormulaError, match=fragment):
        evaluate(text, PARTS, "s")


def test_limits_on_length_and_depth():
    """Exactly the limits pass; one more character or nesting level fails."""
    longest = "= " + "1+" * ((MAX_LENGTH - 3) // 2) + "1"
    longest += "0" * (MAX_LENGTH - len(longest))
    assert len(longest) == MAX_LENGTH
    assert evaluate(longest, {}) > 0
    with pytest.raises(FormulaError, match="too long"):
        evaluate(longest + "0", {})
    deep = "= " + "(" * MAX_DEPTH + "R1" + ")" * MAX_DEPTH
    assert evaluate(deep, PARTS) == PARTS["R1"]
    with pytest.raises(FormulaError, match="nesting deeper"):
        evaluate("= (" + deep[2:] + ")", PARTS)
    with pytest.raises(FormulaError, match="nesting deeper"):
        evaluate("= " + "-" * (MAX_DEPTH + 1) + "1", PARTS)
    side_by_side = "= " + " + ".join(["(1)"] * (MAX_DEPTH + 10))
    assert evaluate(side_by_side, {}) == MAX_DEPTH + 10  # siblings do not add to the depth


def test_bad_inputs_to_the_api():
    """A part without a finite value and a non-text formula are FormulaErrors."""
    with pytest.raises(FormulaError, match="'R1' at column 3 has no finite value"):
        evaluate("= R1", {"R1": math.nan})
    with pytest.raises(FormulaError, match="has no value to use"):
        evaluate("= R1", {"R1": None})
    with pytest.raises(FormulaError, match="text starting with '='"):
        evaluate(3.0, {})


# ---- property tests: random expression trees -------------------------------------------------

TREE_PARTS = ["R1", "R2", "C_load", "Vin"]
PREFIX_EXPONENTS = {"f": -15, "p": -12, "n": -9, "u": -6, "µ": -6, "m": -3, "": 0, "k": 3,
                    "M": 6, "G": 9}
SYMBOLS = {"+": ["+"], "-": ["-", "−"], "*": ["*", "×", "·"], "/": ["/", "÷"], "**": ["**", "^"]}


class Invalid(Exception):
    """The tree has no finite real value under plain float arithmetic."""


def _number_leaf():
    return st.floats(min_value=1e-3, max_value=1e3).map(lambda x: ("num", repr(x), x))


def _quantity_leaf():
    def build(m, prefix, unit, space):
        value = float(f"{m}e{PREFIX_EXPONENTS[prefix]}")  # SI prefix definition, rounded once
        return ("num", f"{m}{' ' if space else ''}{prefix}{unit}", value)
    return st.builds(build, st.integers(1, 999), st.sampled_from(sorted(PREFIX_EXPONENTS)),
                     st.sampled_from(["", "V", "A", "F", "s", "H", "Ω"]), st.booleans())


def _iec_leaf():
    def build(whole, letter, frac):
        exponent = {"R": 0, "k": 3, "M": 6, "u": -6, "n": -9, "p": -12}[letter]
        return ("num", f"{whole}{letter}{frac}", float(f"{whole}.{frac}e{exponent}"))
    return st.builds(build, st.integers(0, 99), st.sampled_from("RkMunp"),
                     st.sampled_from(["1", "2", "47", "5", "82"]))


def _extend(children):
    binary = st.tuples(st.just("bin"), st.sampled_from(sorted(SYMBOLS)), children, children,
                       st.integers(0, 1))
    negate = st.tuples(st.just("neg"), children)
    one_arg = st.tuples(st.just("call"), st.sampled_from(["exp", "ln", "log10", "sqrt", "abs"]),
                        st.lists(children, min_size=1, max_size=1))
    many = st.tuples(st.just("call"), st.sampled_from(["min", "max", "par"]),
                     st.lists(children, min_size=1, max_size=3))
    return st.one_of(binary, negate, one_arg, many)


TREES = st.recursive(
    st.one_of(_number_leaf(), _quantity_leaf(), _iec_leaf(),
              st.sampled_from(TREE_PARTS).map(lambda n: ("part", n)), st.just(("pi",))),
    _extend, max_leaves=10)


def render(node) -> str:
    """The tree as formula text, every compound subexpression in parentheses."""
    kind = node[0]
    if kind == "num":
        return node[1]
    if kind == "part":
        return node[1]
    if kind == "pi":
        return "pi"
    if kind == "neg":
        return f"(-{render(node[1])})"
    if kind == "bin":
        symbol = SYMBOLS[node[1]][node[4] % len(SYMBOLS[node[1]])]
        return f"({render(node[2])} {symbol} {render(node[3])})"
    return f"{node[1]}({', '.join(render(arg) for arg in node[2])})"


def direct(node, values) -> float:
    """The tree's value by plain Python float arithmetic; Invalid when it is not finite/real."""
    kind = node[0]
    if kind == "num":
        result = node[2]
    elif kind == "part":
        result = values[node[1]]
    elif kind == "pi":
        result = math.pi
    elif kind == "neg":
        result = -direct(node[1], values)
    elif kind == "bin":
        result = _direct_binary(node[1], direct(node[2], values), direct(node[3], values))
    else:
        result = _direct_call(node[1], [direct(arg, values) for arg in node[2]])
    if isinstance(result, complex) or not math.isfinite(result):
        raise Invalid
    return result


def _direct_binary(op, a, b):
    try:
        if op == "+":
            return a + b
        if op == "-":
            return a - b
        if op == "*":
            return a * b
        if op == "/":
            return a / b
        return a ** b
    except (ZeroDivisionError, OverflowError):
        raise Invalid from None


def _direct_call(name, args):
    functions = {"exp": math.exp, "ln": math.log, "log10": math.log10, "sqrt": math.sqrt,
                 "abs": abs}
    try:
        if name == "par":  # textbook 1/(1/a + 1/b + ...); a zero argument is a short
            return 0.0 if 0 in args else 1.0 / sum(1.0 / x for x in args)
        if name in ("min", "max"):
            return min(args) if name == "min" else max(args)
        return functions[name](*args)
    except (ZeroDivisionError, OverflowError, ValueError):
        raise Invalid from None


PART_VALUES = st.fixed_dictionaries(
    {name: st.floats(min_value=-1e4, max_value=1e4) for name in TREE_PARTS})


@settings(max_examples=300, deadline=None)
@given(tree=TREES, values=PART_VALUES)
def test_random_trees_evaluate_like_plain_python(tree, values):
    """A random expression tree rendered to text evaluates to its plain-Python value, or errs."""
    text = "= " + render(tree)
    assume(len(text) <= MAX_LENGTH)
    try:
        expected = direct(tree, values)
    except Invalid:
        with pytest.raises(FormulaError):
            evaluate(text, values)
        return
    assert evaluate(text, values) == expected
    assert names(text) == {n for n in TREE_PARTS if _uses(tree, n)}


def _uses(node, name) -> bool:
    """Whether part ``name`` occurs in the tree."""
    if node[0] == "part":
        return node[1] == name
    if node[0] == "neg":
        return _uses(node[1], name)
    if node[0] == "bin":
        return _uses(node[2], name) or _uses(node[3], name)
    return node[0] == "call" and any(_uses(arg, name) for arg in node[2])


FORMULA_ALPHABET = list("0123456789.eE+-*/^(),% _ ×÷·−µΩkmunpMRFVAsS") + [
    "R1", "C1", "R2", "exp", "ln", "log10", "sqrt", "par", "min", "max", "abs", "pi", "**",
    "4k7", "1n5", "2.2 uF", "\t", "\u202f", "R9", "$", "=", "1e308", "1e-308"]


@settings(max_examples=400, deadline=None)
@given(st.one_of(st.text(max_size=60),
                 st.lists(st.sampled_from(FORMULA_ALPHABET), max_size=40).map(
                     lambda parts: "=" + "".join(parts))))
def test_arbitrary_text_raises_only_formula_errors(text):
    """Any text yields a finite float or a FormulaError, never another exception."""
    for dimension in (None, "s"):
        try:
            value = evaluate(text, PARTS, dimension)
        except FormulaError:
            continue
        assert isinstance(value, float) and math.isfinite(value)
    try:
        assert all(isinstance(name, str) for name in names(text))
    except FormulaError:
        pass


def test_a_part_without_a_value_is_named_as_such_not_as_unknown():
    """A formula naming a switch (no value) says the part has no value to use, not that the
    part is unknown (a user who typed the right name must not hunt for a typo)."""
    with pytest.raises(FormulaError, match="part 'S1' at column 6 has no value to use"):
        evaluate("= R1*S1", {"R1": 1e3, "S1": None})
    with pytest.raises(FormulaError, match="unknown part 'S2'"):
        evaluate("= R1*S2", {"R1": 1e3, "S1": None})
