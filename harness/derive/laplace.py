"""The probe's Laplace transform in part names, and what the hand method reads from it.

Method: solve (G + sC)·Y(s) = b + s·C·x(t_k−) for Y = s·X over the field of rational functions
of the part symbols and s (sympy ``DomainMatrix``, fraction-free LU, results in lowest terms),
then the initial- and final-value theorems of the Laplace transform (Doetsch, *Introduction to
the Theory and Application of the Laplace Transformation*, §33–34):

    x(t_k+) = lim_{s→∞} s·X(s)       x(∞) = lim_{s→0} s·X(s)

The first carries the charge balance of a capacitor loop with a voltage source (and the flux
balance of an inductor cutset) without writing it; the second gives trapped charge where G is
singular.  The probe's denominator, reduced by the numerator and by the zero modes s = 0, is the
characteristic polynomial of the modes that reach the probe; its degree is the order, and for a
first-order probe τ = d₁/d₀ (s).  Units follow the probe: V or A.
"""

from __future__ import annotations

from dataclasses import dataclass

import sympy as sp
from sympy.polys.matrices import DomainMatrix

from .. import model as m
from .network import Network, Symbols

S = sp.Symbol("s")


@dataclass(frozen=True)
class Transform:
    """s·X(s) of one probe as numerator / denominator polynomials in ``S``."""

    num: sp.Poly
    den: sp.Poly

    def initial(self) -> sp.Expr | None:
        """lim s→∞ s·X(s): the value just after the event (None: an impulse)."""
        dn, dd = self.num.degree(), self.den.degree()
        if self.num.is_zero or dn < dd:
            return sp.Integer(0)
        if dn > dd:
            return None
        return sp.factor(self.num.LC() / self.den.LC())

    def final(self) -> sp.Expr | None:
        """lim s→0 s·X(s): the value the interval heads to (None: unbounded)."""
        low = _lowest(self.den)
        nums = dict(zip(*_coeffs(self.num)))
        if any(nums.get(i, 0) != 0 for i in range(low)):
            return None
        return sp.factor(nums.get(low, sp.Integer(0)) / dict(zip(*_coeffs(self.den)))[low])

    def characteristic(self) -> sp.Poly:
        """The denominator without its zero modes, normalised to a constant term of 1 where it
        has one (engineering form 1 + a₁s + a₂s² …)."""
        low = _lowest(self.den)
        poly = sp.Poly(sp.cancel(self.den.as_expr() / S ** low), S)
        c0 = poly.coeff_monomial(1)
        if c0 != 0:
            poly = sp.Poly(sp.expand(poly.as_expr()), S)
            poly = sp.Poly([sp.factor(c / c0) for c in poly.all_coeffs()], S)
        return poly


def _coeffs(poly: sp.Poly) -> tuple[list[int], list[sp.Expr]]:
    terms = poly.terms()
    return [t[0][0] for t in terms], [t[1] for t in terms]


def _lowest(poly: sp.Poly) -> int:
    return min(t[0][0] for t in poly.terms())


def solve(net: Network, state: dict) -> list:
    """Y(s) = s·X(s) of every unknown as a sympy fraction (rational in s and the symbols).

    ``state``: storage name -> its symbolic value at t_k− (capacitor voltage, inductor current,
    a gain-bandwidth op-amp's output voltage).
    """
    n = len(net.index)
    rhs = sp.Matrix(net.b)
    for name, value in state.items():
        key = f"i:{name}"
        if key in net.index:                       # inductor: L·i(t_k−) on its branch row
            k = net.index[key]
            rhs[k] += S * net.c[k, k] * value
    rhs += S * _capacitor_charges(net, state)
    for name, (k, tau) in net.poles.items():       # an op-amp's pole: −(1/ω_t)·v_out(t_k−)
        rhs[k] -= S * tau * state.get(name, 0)
    if n == 0:
        return []
    return fraction_free(net.g + S * net.c, rhs)


def fraction_free(mat: sp.Matrix, rhs: sp.Matrix) -> list:
    """mat⁻¹·rhs by a fraction-free solve over the polynomial ring (Bareiss; rows cleared
    of their denominators first), the quotients cancelled at the end only: an LU over the
    field of fractions takes a gcd at every step and was ~100 times slower on a 5-section
    ladder.  Raises ZeroDivisionError-like sympy errors when mat is singular."""
    aug = DomainMatrix.from_Matrix(mat.row_join(rhs))
    aug = aug.convert_to(aug.domain.get_field())
    _, cleared = aug.clear_denoms_rowwise(convert=True)
    n = mat.shape[1]
    a, b = cleared[:, :n], cleared[:, n:]
    num, den = a.solve_den(b)
    den = den.as_expr() if hasattr(den, "as_expr") else a.domain.to_sympy(den)
    return [sp.cancel(x / den) for x in num.to_Matrix()]


def _capacitor_charges(net: Network, state: dict) -> sp.Matrix:
    """C·x(t_k−) restricted to the capacitor stamps: ±C·v_C(t_k−) at its nodes."""
    out = sp.zeros(len(net.index), 1)
    for name, (p, n, cap) in net.capacitors.items():
        v0 = state.get(name, 0)
        for node, sign in ((p, 1), (n, -1)):
            if node is not None:
                out[node] += sign * cap * v0
    return out


def probe_value(probe: m.Probe, circuit: m.Circuit, net: Network, y: list, syms: Symbols,
                state: dict) -> sp.Expr:
    """s·X(s) of the probe, from the unknowns' Y(s)."""
    def v(node: str) -> sp.Expr:
        key = f"v:{node}"
        return y[net.index[key]] if key in net.index else sp.Integer(0)

    if probe.kind == m.NODE:
        return v(probe.targets[0])
    if probe.kind == m.BETWEEN:
        return v(probe.targets[0]) - v(probe.targets[1])
    part = circuit.part(probe.targets[0])
    across = v(part.p) - v(part.n)
    if probe.kind == m.ACROSS:
        return across
    return _through(part, net, y, syms, state, across, v)


def _through(part: m.Part, net: Network, y, syms: Symbols, state, across, v) -> sp.Expr:
    key = f"i:{part.name}"
    if key in net.index:
        return y[net.index[key]]
    if part.name in net.capacitors:                # i = C·(s·V − v0), times s
        return syms.part(part.name) * (S * across - S * state.get(part.name, 0))
    if part.kind == m.RESISTOR:
        return across / syms.part(part.name)
    if part.name in net.conductances:
        return across * net.conductances[part.name]
    if part.name in net.currents:
        return net.currents[part.name](v, y)
    return sp.Integer(0)


def transform(expr: sp.Expr) -> Transform:
    """The probe's s·X(s) as (numerator, denominator) polynomials in s, in lowest terms."""
    num, den = sp.fraction(sp.cancel(sp.together(expr)))
    return Transform(sp.Poly(num, S), sp.Poly(den, S))
