"""Hand values written as formulas of part values: ``"= 3.3 V * R2/(R1+R2)"`` -> a float in SI.

A formula is text starting with ``=``.  A small tokenizer and a recursive-descent parser (one
method per precedence level) turn it into a tree of tuples, evaluated in plain floating point.
Nothing reaches the Python interpreter: no eval, exec, compile or ast.  Grammar, loosest first,
with Python's precedence and associativity::

    sum     := product (('+' | '-') product)*        left-associative
    product := signed (('*' | '/') signed)*          left-associative
    signed  := ('+' | '-') signed | power
    power   := atom [('**' | '^') signed]            right-associative; -2^2 = -(2^2)
    atom    := quantity | part | 'pi' | function '(' sum (',' sum)* ')' | '(' sum ')'

Also ``×`` ``·`` ``⋅`` (multiply), ``÷`` (divide), ``−`` (minus).  Functions: exp, ln, log10,
sqrt, abs, min, max and ``par(a, b, ...) = 1/(1/a + 1/b + ...)`` (a zero argument is a short, so
par gives 0).  ``pi`` is the constant and cannot name a part.

Quantities are read by :func:`harness.units.parse_quantity`, so ``4k7``, ``1n5``, ``2R2``,
``2.2 uF``, ``100 ms``, ``10 µs``, ``3.3 V``, ``5 %`` mean what they mean in any other field.  A
prefix/unit word binds to the number it follows, with or without a space: ``3.3 V`` is 3.3 volts
even when a part is named ``V`` (write ``3.3 * V`` for the part) and ``2 S`` is two siemens.  A
word that is not a suffix (``2 R1``) is not multiplied implicitly: it is an error.  Identifiers
start with a letter, so ``R47`` is a part name here (write ``0R47`` for 0.47 Ω).  Compound units
such as ``V/V`` are not read: ``/`` is always division.

Units: the value is a float in SI base units, and with ``units`` given the formula is also
dimension-checked (:mod:`harness.dimension`).  A part name carries its kind's unit (resistor Ω,
capacitor F, inductor H, voltage source V, current source A, switch Ω; gains: vcvs and cccs a
plain number, vccs S, ccvs Ω), a quantity its unit (``3.3 ms``), a bare number, ``%`` and ``pi``
none.  ``*`` and ``/`` multiply and divide dimensions; ``+``, ``-``, ``min``, ``max`` and
``par`` need like units; ``exp``, ``ln`` and ``log10`` need a plain-number argument; ``sqrt``
halves the exponents; ``**`` needs a plain-number exponent, a constant (a ratio with a small
denominator) when the base has a unit.  The result must be in the field's unit (``R1*C1`` for a
time constant).  A formula of bare numbers alone (no part, no unit) is a plain number taken in
the field's unit, as a bare number is in any other field.  A formula that is a single quantity
with a unit (``= 100 ms``) must fit the field even without ``units``.

Every failure is a :class:`FormulaError` naming the token and its 1-based column.  Limits: at
most 500 characters, nesting (parentheses, signs, exponents) at most 50 deep, and every
intermediate result must be a finite real float (overflow, division by zero and complex powers
are errors; powers are float powers, never expanded as integers, so they cannot hang).
"""

from __future__ import annotations

import math
import operator
import re
from dataclasses import dataclass
from fractions import Fraction
from typing import Callable, Mapping

from .dimension import ONE, Dimension, describe, of_unit
from .errors import UnitError
from .units import DIMENSION_NAMES, PREFIXES, UNITS, parse_quantity

MAX_LENGTH = 500
MAX_DEPTH = 50
#: largest denominator of a fractional power of a quantity with a unit (``sqrt`` is 1/2)
MAX_DENOMINATOR = 12

_NUMBER = re.compile(r"(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")
_IEC = re.compile(r"[0-9]+[RrKkMGTpnuµμmf][0-9]+")
_OPERATORS = {"+": "+", "-": "-", "−": "-", "*": "*", "×": "*", "·": "*", "⋅": "*", "/": "/",
              "÷": "/", "^": "**", "(": "(", ")": ")", ",": ","}
_BINARY = {"+": operator.add, "-": operator.sub, "*": operator.mul, "/": operator.truediv,
           "**": operator.pow}


class FormulaError(UnitError):
    """A formula that cannot be read or evaluated; ``token`` and ``column`` (1-based) locate it."""

    def __init__(self, message: str, *, file: str | None = None, part: str | None = None,
                 field: str | None = None, line: int | None = None, token: str | None = None,
                 column: int | None = None) -> None:
        super().__init__(message, file=file, part=part, field=field, line=line)
        self.token, self.column = token, column

    def located(self, *, file: str | None = None, part: str | None = None,
                field: str | None = None) -> "FormulaError":
        """Return a copy with missing location fields filled in; token and column are kept."""
        err = super().located(file=file, part=part, field=field)
        err.token, err.column = self.token, self.column
        return err


@dataclass(frozen=True, eq=False)
class _Token:
    """``kind``: "num", "name", "end" or a canonical operator; ``value``, ``unit``: quantities."""

    kind: str
    text: str
    column: int
    value: float = 0.0
    unit: str | None = None


def is_formula(raw: object) -> bool:
    """True when a field value is formula text (a string whose first non-blank is '=')."""
    return isinstance(raw, str) and raw.lstrip().startswith("=")


def evaluate(text: str, values: Mapping[str, float], dimension: str | None = None,
             units: Mapping[str, str] | None = None) -> float:
    """Evaluate formula ``text`` with part names bound to ``values``; return the SI float.

    Args:
        text: the formula, starting with ``=`` (leading blanks allowed).
        values: part name -> value in SI base units (ohms, farads, henries, volts, amperes, gain),
            or None for a part that has none (naming it is an error that says so).
        dimension: the field's dimension (``"s"``, ``"V"`` ...), a units.py dimension word.
        units: part name -> the dimension word of its value (``"ohm"``, ``"F"`` ...); with it
            and ``dimension`` the formula is dimension-checked (module doc, "Units").  A part
            missing from it has an unknown unit and leaves what it touches unchecked.

    Raises:
        FormulaError: unreadable text, unknown part or function, a result that is not finite,
            or (with ``units``) unlike units combined or a result not in the field's unit.
    """
    tree = _Parser(text).tree
    lone = tree
    while lone[0] == "neg":
        lone = lone[1]
    unit = lone[2].unit if lone[0] == "num" else None
    if dimension is not None and unit not in (None, "%", dimension):
        raise _fail(f"{lone[2].text!r} at column {lone[2].column} is in "
                    f"{DIMENSION_NAMES.get(unit, unit)}, but this field is in "
                    f"{DIMENSION_NAMES.get(dimension, dimension)}", text, lone[2].text,
                    lone[2].column)
    value = _Evaluator(text, values).run(tree)
    if dimension is not None and units is not None:
        _Dimensions(text, values, units).check(tree, dimension)
    return value


def names(text: str) -> set[str]:
    """The part names formula ``text`` refers to (functions and ``pi`` excluded)."""
    return set(_Parser(text).names)


def _fail(message: str, text: str, token: str | None = None, column: int | None = None,
          tail: str = "") -> FormulaError:
    """The error: ``message`` names the token and column, then the formula, then ``tail``."""
    shown = text if len(text) <= 80 else text[:77] + "..."
    return FormulaError(f"{message} in {shown!r}{tail}", token=token, column=column)


def _tokenize(text: str, i: int) -> list[_Token]:
    """Split ``text[i:]`` into tokens; columns are 1-based positions in ``text``."""
    tokens: list[_Token] = []
    while i < len(text):
        c = text[i]
        if c.isspace():
            i += 1
        elif c in "0123456789" or (c == "." and text[i + 1:i + 2] in tuple("0123456789")):
            token, i = _quantity(text, i)
            tokens.append(token)
        elif c.isalpha():
            j = _word_end(text, i + 1)
            tokens.append(_Token("name", text[i:j], i + 1))
            i = j
        elif c in _OPERATORS or text.startswith("**", i):
            op = "**" if text.startswith("**", i) else c
            tokens.append(_Token(_OPERATORS.get(op, op), op, i + 1))
            i += len(op)
        else:
            raise _fail(f"unexpected character {c!r} at column {i + 1}", text, c, i + 1)
    tokens.append(_Token("end", "end of formula", len(text) + 1))
    return tokens


def _word_end(text: str, i: int) -> int:
    """Index just past the identifier characters (letters, digits, '_') from ``i``."""
    while i < len(text) and (text[i].isalnum() or text[i] == "_"):
        i += 1
    return i


def _suffix_unit(word: str, iec: bool) -> tuple[bool, str | None]:
    """Whether ``word`` is a prefix/unit suffix as harness.units reads it, and its dimension."""
    if word in UNITS:
        return True, UNITS[word]
    if not iec and word and word[0] in PREFIXES:  # an IEC code already carries its prefix
        rest = word[1:]
        if rest == "" or (rest in UNITS and UNITS[rest] != "%"):
            return True, UNITS.get(rest)
    return False, None


def _quantity(text: str, i: int) -> tuple[_Token, int]:
    """Read the number at ``text[i]`` with the suffix bound to it; return the token, next index."""
    iec = _IEC.match(text, i)
    end = iec.end() if iec else _NUMBER.match(text, i).end()
    k = end
    while k < len(text) and text[k].isspace():
        k += 1
    w = k
    while w < len(text) and (text[w].isalpha() or text[w] == "%"):
        w += 1
    is_suffix, unit = _suffix_unit(text[k:w], iec is not None)
    if w > k and is_suffix and _word_end(text, w) == w:
        end = w
    elif k == end and _word_end(text, k) > k:
        bad = text[i:_word_end(text, k)]
        raise _fail(f"cannot read {bad!r} at column {i + 1} as a quantity", text, bad, i + 1,
                    " (examples: '4k7', '2.2 uF', '100 ms'; write '*' before a part name)")
    else:
        unit = None
    raw = text[i:end]
    try:
        value = parse_quantity(raw, unit or "1", allow_percent=True, ranged=False)
    except UnitError as err:
        raise _fail(f"cannot read {raw!r} at column {i + 1}", text, raw, i + 1,
                    f": {err.message}") from None
    return _Token("num", raw, i + 1, value, unit), end


class _Parser:
    """Recursive descent over the token list, one method per precedence level (module doc).

    After construction ``tree`` is the parse tree and ``names`` the part names met, in order.
    Tree nodes: ("num", value, token), ("name", token), ("neg", node), ("call", token, [nodes]),
    ("chain", first, [(operator token, node), ...]) for left-associative runs of + - or * /,
    and ("pow", base, exponent, token).
    """

    def __init__(self, text: object) -> None:
        if not isinstance(text, str):
            raise FormulaError(f"a formula is text starting with '=', got {type(text).__name__}")
        if len(text) > MAX_LENGTH:
            raise _fail(f"formula is too long ({len(text)} characters; at most {MAX_LENGTH})",
                        text)
        start = len(text) - len(text.lstrip())
        if not text.startswith("=", start):
            raise _fail("a formula starts with '='", text)
        self.text, self.tokens = text, _tokenize(text, start + 1)
        self.pos, self.depth, self.names = 0, 0, []
        self.tree = self.sum()
        if self.peek().kind != "end":
            raise self.unexpected(self.peek(), after_operand=True)

    def peek(self) -> _Token:
        return self.tokens[self.pos]

    def take(self) -> _Token:
        token = self.tokens[self.pos]
        self.pos = min(self.pos + 1, len(self.tokens) - 1)
        return token

    def unexpected(self, token: _Token, after_operand: bool = False) -> FormulaError:
        """The error for ``token`` out of place (``after_operand``: an operator was due)."""
        if token.kind == "end":
            return _fail("unexpected end of formula", self.text, token.text, token.column,
                         " (expected a number, a part name or '(')")
        what = {"num": "number ", "name": "part name "}.get(token.kind, "")
        missing = after_operand and token.kind in ("num", "name", "(")
        return _fail(f"unexpected {what}{token.text!r} at column {token.column}", self.text,
                     token.text, token.column,
                     " (is an operator such as '*' missing?)" if missing else "")

    def nested(self, token: _Token, parse: Callable[[], tuple]) -> tuple:
        """Run ``parse`` one nesting level deeper (parenthesis, sign or exponent at ``token``)."""
        self.depth += 1
        if self.depth > MAX_DEPTH:
            raise _fail(f"nesting deeper than {MAX_DEPTH} levels at column {token.column}",
                        self.text, token.text, token.column)
        node = parse()
        self.depth -= 1
        return node

    def chain(self, ops: tuple[str, ...], operand: Callable[[], tuple]) -> tuple:
        first, rest = operand(), []
        while self.peek().kind in ops:
            op = self.take()
            rest.append((op, operand()))
        return ("chain", first, rest) if rest else first

    def sum(self) -> tuple:
        return self.chain(("+", "-"), self.product)

    def product(self) -> tuple:
        return self.chain(("*", "/"), self.signed)

    def signed(self) -> tuple:
        token = self.peek()
        if token.kind not in ("+", "-"):
            return self.power()
        self.take()
        operand = self.nested(token, self.signed)
        return ("neg", operand) if token.kind == "-" else operand

    def power(self) -> tuple:
        base = self.atom()
        if self.peek().kind != "**":
            return base
        op = self.take()
        return ("pow", base, self.nested(op, self.signed), op)

    def atom(self) -> tuple:
        token = self.take()
        if token.kind == "num":
            return ("num", token.value, token)
        if token.kind == "(":
            return self.nested(token, lambda: self.closed(self.sum(), token))
        if token.kind != "name":
            raise self.unexpected(token)
        if self.peek().kind == "(":
            opening = self.take()
            return self.nested(opening, lambda: ("call", token, self.arguments(opening)))
        if token.text in _FUNCTIONS:
            raise _fail(f"function {token.text!r} at column {token.column} needs its arguments "
                        f"in parentheses", self.text, token.text, token.column)
        if token.text == "pi":
            return ("num", math.pi, token)
        self.names.append(token.text)
        return ("name", token)

    def arguments(self, opening: _Token) -> list[tuple]:
        items = [self.sum()]
        while self.peek().kind == ",":
            self.take()
            items.append(self.sum())
        return self.closed(items, opening)

    def closed(self, result, opening: _Token):
        """Consume the ')' matching ``opening`` and return ``result``."""
        closing = self.take()
        if closing.kind == "end":
            raise _fail(f"unclosed '(' at column {opening.column}", self.text, "(",
                        opening.column)
        if closing.kind != ")":
            raise self.unexpected(closing, after_operand=True)
        return result


def _par(*xs: float) -> float:
    """Parallel combination 1/(1/x1 + 1/x2 + ...); a zero argument (a short) gives 0."""
    if any(x == 0 for x in xs):
        return 0.0
    total = sum(1.0 / x for x in xs)
    if total == 0:
        raise ValueError("the reciprocals of the arguments sum to zero")
    return 1.0 / total


#: name -> (takes exactly one argument?, function, domain test, domain wording)
_FUNCTIONS: dict[str, tuple[bool, Callable[..., float], Callable[[float], bool], str]] = {
    "exp": (True, math.exp, math.isfinite, ""),
    "ln": (True, math.log, lambda x: x > 0, "positive"),
    "log10": (True, math.log10, lambda x: x > 0, "positive"),
    "sqrt": (True, math.sqrt, lambda x: x >= 0, "non-negative"),
    "abs": (True, abs, math.isfinite, ""),
    "min": (False, lambda *xs: min(xs), math.isfinite, ""),
    "max": (False, lambda *xs: max(xs), math.isfinite, ""),
    "par": (False, _par, math.isfinite, ""),
}


class _Walker:
    """Folds a parse tree bottom-up (node kinds: ``_Parser``); a subclass says what a number,
    a part name, a sign, a power, a call and a ``+ - * /`` step give."""

    def run(self, node: tuple):
        kind = node[0]
        if kind == "num":
            return self.number(node)
        if kind == "name":
            return self.lookup(node[1])
        if kind == "neg":
            return self.negate(self.run(node[1]))
        if kind == "pow":
            return self.power(node[1], node[2], node[3])
        if kind == "call":
            return self.call(node[1], [self.run(arg) for arg in node[2]])
        acc = self.run(node[1])
        for op, sub in node[2]:
            acc = self.binary(op, acc, self.run(sub))
        return acc


class _Evaluator(_Walker):
    """Evaluates a parse tree in floating point; every intermediate result must be finite."""

    def __init__(self, text: str, values: Mapping[str, float]) -> None:
        self.text, self.values = text, values

    def number(self, node: tuple) -> float:
        return node[1]

    def negate(self, value: float) -> float:
        return -value

    def power(self, base: tuple, exponent: tuple, op: _Token) -> float:
        return self.binary(op, self.run(base), self.run(exponent))

    def lookup(self, token: _Token) -> float:
        where = f"{token.text!r} at column {token.column}"
        if token.text not in self.values:
            known = ", ".join(list(self.values)[:20]) or "none"
            raise _fail(f"unknown part {where}", self.text, token.text, token.column,
                        f" (parts: {known})")
        value = self.values[token.text]
        if value is None:
            raise _fail(f"part {where} has no value to use (a switch, an ideal op-amp without a "
                        f"gain or a part given no `value`)", self.text, token.text, token.column)
        if isinstance(value, bool) or not isinstance(value, (int, float)) \
                or not math.isfinite(value):
            raise _fail(f"part {where} has no finite value ({value!r})", self.text,
                        token.text, token.column)
        return float(value)

    def binary(self, op: _Token, a: float, b: float) -> float:
        where = f"at {op.text!r} at column {op.column}"
        if op.kind == "/" and b == 0:
            raise _fail(f"division by zero {where}", self.text, op.text, op.column)
        try:
            result = _BINARY[op.kind](a, b)
        except ZeroDivisionError:
            raise _fail(f"division by zero (zero to a negative power) {where}", self.text,
                        op.text, op.column) from None
        except OverflowError:
            result = math.inf
        if isinstance(result, complex):
            raise _fail(f"negative base {a:g} to the fractional power {b:g} {where}",
                        self.text, op.text, op.column)
        return self.finite(result, op)

    def call(self, token: _Token, args: list[float]) -> float:
        name, where = token.text, f"at column {token.column}"
        if name not in _FUNCTIONS:
            hint = " (use ln or log10)" if name == "log" else ""
            raise _fail(f"unknown function {name!r} {where}", self.text, name, token.column,
                        f"{hint} (functions: {', '.join(sorted(_FUNCTIONS))})")
        single, fn, ok, need = _FUNCTIONS[name]
        if single and len(args) != 1:
            raise _fail(f"{name}() {where} takes 1 argument, got {len(args)}", self.text,
                        name, token.column)
        if single and not ok(args[0]):
            raise _fail(f"{name}() {where} needs a {need} argument, got {args[0]:g}", self.text,
                        name, token.column)
        try:
            result = fn(*args)
        except OverflowError:
            result = math.inf
        except ValueError as err:
            raise _fail(f"{name}() {where}: {err}", self.text, name, token.column) from None
        return self.finite(result, token)

    def finite(self, result: float, token: _Token) -> float:
        if not math.isfinite(result):
            raise _fail(f"overflow at {token.text!r} at column {token.column} (the result is "
                        f"not a finite number)", self.text, token.text, token.column)
        return result


class _Dimensions(_Walker):
    """The dimension of each node of a parse tree (module doc, "Units"); None means unknown
    (a part without a known unit).  ``carried`` records whether a part or a unit was met."""

    def __init__(self, text: str, values: Mapping[str, float], units: Mapping[str, str]) -> None:
        self.text, self.values, self.units, self.carried = text, values, units, False

    def check(self, tree: tuple, dimension: str) -> None:
        """Raise FormulaError unless the formula's result is in ``dimension``."""
        found, want = self.run(tree), of_unit(dimension)
        if found is None or not self.carried or found == want:
            return
        raise _fail(f"the formula gives {describe(found)}, but this field is in "
                    f"{describe(want)}", self.text,
                    tail=" (a part carries its unit: resistor Ω, capacitor F, inductor H, "
                         "voltage source V, current source A; so R·C and L/R are in seconds, "
                         "V/R in amperes)")

    def number(self, node: tuple) -> Dimension:
        unit = node[2].unit
        self.carried |= unit not in (None, "%", "1")
        return of_unit(unit)

    def lookup(self, token: _Token) -> Dimension | None:
        self.carried = True
        unit = self.units.get(token.text)
        return None if unit is None else of_unit(unit)

    def negate(self, dim: Dimension | None) -> Dimension | None:
        return dim

    def binary(self, op: _Token, a: Dimension | None, b: Dimension | None) -> Dimension | None:
        if a is None or b is None:
            return None
        if op.kind == "*":
            return a * b
        if op.kind == "/":
            return a / b
        if a != b:
            verb = "adds" if op.kind == "+" else "subtracts"
            raise _fail(f"{op.text!r} at column {op.column} {verb} unlike units: "
                        f"{describe(a)} and {describe(b)}", self.text, op.text, op.column,
                        _plain_hint(a, b))
        return a

    def power(self, base: tuple, exponent: tuple, op: _Token) -> Dimension | None:
        """``base ** exponent``: a plain-number exponent, constant when the base has a unit."""
        dim, power = self.run(base), self.run(exponent)
        where = f"{op.text!r} at column {op.column}"
        if power is not None and not power.dimensionless:
            raise _fail(f"the exponent of {where} is in {describe(power)}; an exponent must "
                        f"be a plain number", self.text, op.text, op.column)
        if dim is None or dim.dimensionless:
            return dim
        value = _Evaluator(self.text, self.values).run(exponent)
        ratio = Fraction(value).limit_denominator(MAX_DENOMINATOR)
        if abs(ratio - value) > 1e-9 * max(1.0, abs(value)):
            raise _fail(f"{describe(dim)} to the power {value:g} at {where} has no unit; raise "
                        f"a quantity with a unit only to a whole or simple fractional power",
                        self.text, op.text, op.column)
        return dim ** ratio

    def call(self, token: _Token, dims: list[Dimension | None]) -> Dimension | None:
        name, where = token.text, f"at column {token.column}"
        if any(d is None for d in dims):
            return None
        if name in ("exp", "ln", "log10"):
            if not dims[0].dimensionless:
                raise _fail(f"{name}() {where} needs a plain-number argument, got "
                            f"{describe(dims[0])} (write a ratio such as V1/(1 V))", self.text,
                            name, token.column)
            return ONE
        if name == "sqrt":
            return dims[0] ** Fraction(1, 2)
        for d in dims[1:]:
            if d != dims[0]:
                raise _fail(f"{name}() {where} mixes unlike units: {describe(dims[0])} and "
                            f"{describe(d)}", self.text, name, token.column,
                            _plain_hint(dims[0], d))
        return dims[0]


def _plain_hint(a: Dimension, b: Dimension) -> str:
    """A hint when one of two unlike operands is a plain number (a number written without its
    unit, which in a formula stays a plain number)."""
    if a.dimensionless or b.dimensionless:
        return " (a number without a unit is a plain number in a formula: write its unit, " \
               "e.g. '4k7 Ω' or '0 V')"
    return ""
