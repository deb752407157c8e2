"""Engineering forms of symbolic results, and their text.

Two texts of one expression: the *formula* (the grammar of ``harness.formula``: ``par(R1, R2)``,
``ln``, numbers with their unit, so it can be pasted as a hand value ``= …``) and the *display*
(``R1‖R2``, ``·``).  Series and parallel combinations are recognised by partial fractions of the
conductance 1/R in each part symbol (a parallel combination is a sum of conductances; Horowitz &
Hill, *The Art of Electronics*, 3rd ed., §1.2.2).  Every rewrite is exact; callers still check
the result numerically against the closed form.
"""

from __future__ import annotations

import sympy as sp
from sympy.printing.str import StrPrinter

#: beyond this many operations an expression is left as the solve gave it (no factoring)
LARGE = 80
#: the parallel combination, 1/(1/a + 1/b + …), as an unevaluated function
par = sp.Function("par")


def parallel(expr: sp.Expr, depth: int = 0) -> sp.Expr:
    """``expr`` (a resistance-like formula) with its series and parallel combinations as
    sums and ``par`` calls; unchanged where none is found."""
    if sp.count_ops(expr) > LARGE:
        return expr
    expr = sp.factor(sp.cancel(expr))
    if depth > 4 or expr.is_Atom or expr.free_symbols == set():
        return expr
    series, s_cost = _split(expr)
    shunt, p_cost = _split(sp.cancel(1 / expr))
    if series is not None and (shunt is None or s_cost <= p_cost):
        return sp.Add(*[parallel(a, depth + 1) for a in series])
    if shunt is not None:
        return par(*[parallel(1 / t, depth + 1) for t in shunt])
    if expr.is_Mul:
        return sp.Mul(*[parallel(a, depth + 1) if a.is_Add else a for a in expr.args])
    return expr


def _split(expr: sp.Expr):
    """The simplest way to write ``expr`` as a sum of simpler positive terms (partial
    fractions in each symbol, or the expanded sum) and its cost, or (None, None)."""
    size = sp.count_ops(expr)
    candidates = [sp.expand(expr)]
    candidates += [sp.apart(expr, x) for x in sorted(expr.free_symbols, key=str)]
    best, score = None, None
    for cand in candidates:
        terms = sp.Add.make_args(cand)
        if len(terms) < 2 or any(t.could_extract_minus_sign() for t in terms):
            continue
        costs = [sp.count_ops(sp.factor(t)) + sp.count_ops(sp.factor(1 / t)) for t in terms]
        if max(costs) < size and (score is None or sum(costs) < score):
            best, score = terms, sum(costs)
    return best, score


def tidy(expr: sp.Expr) -> sp.Expr:
    """A compact factored form (sources and ratios kept together)."""
    if sp.count_ops(expr) > LARGE:
        return expr
    return sp.factor(sp.cancel(expr))


class _Formula(StrPrinter):
    """sympy -> ``harness.formula`` text; quantity symbols print as their number and unit."""

    def __init__(self, quantities: dict) -> None:
        super().__init__({"order": "none"})
        self.quantities = quantities

    def _print_Symbol(self, expr):
        return self.quantities.get(expr.name, expr.name)

    def _print_log(self, expr):
        return f"ln({self._print(expr.args[0])})"

    def _print_Function(self, expr):
        return f"{expr.func.__name__}({', '.join(self._print(a) for a in expr.args)})"


class _Display(_Formula):
    """sympy -> the text a derivation shows: ``R1‖R2``, ``·`` for products."""

    def _print_Function(self, expr):
        if expr.func.__name__ == "par":
            return "(" + "‖".join(self.parenthesize(a, 45) for a in expr.args) + ")"
        return super()._print_Function(expr)

    def _print_Mul(self, expr):
        return super()._print_Mul(expr).replace("*", "·")

    def _print_Pi(self, expr):
        return "π"


def formula_text(expr: sp.Expr, quantities: dict) -> str:
    """The pasteable formula (without the leading ``=``)."""
    return _Formula(quantities).doprint(expr)


def display_text(expr: sp.Expr, quantities: dict) -> str:
    """The formula as a derivation shows it."""
    return _Display(quantities).doprint(expr)


def evaluate(expr: sp.Expr, values: dict) -> float:
    """The expression's float value at the part values (``par`` expanded)."""
    expr = sp.sympify(expr)
    plain = expr.replace(par, lambda *a: 1 / sp.Add(*[1 / x for x in a]))
    return float(sp.sympify(plain.xreplace({k: sp.Float(v, 30) for k, v in values.items()})).evalf(30))
