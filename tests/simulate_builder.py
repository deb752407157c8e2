"""A small builder of harness.model circuits for the numerical engine's tests (not a test file)."""

from __future__ import annotations

import sympy as sp

from harness.model import Circuit, Part, Probe


def part(name: str, kind: str, p: str, n: str, value: float | None = None, **kw) -> Part:
    """A Part with nodes (p, n); keyword arguments are Part fields."""
    return Part(name, kind, (p, n), value, **kw)


def circuit(title: str, *parts: Part) -> Circuit:
    """A Circuit of the given parts with ground ``gnd``."""
    return Circuit(title, tuple(parts))


def node(name: str) -> Probe:
    return Probe("node", (name,))


def through(name: str) -> Probe:
    return Probe("through", (name,))


def across(name: str) -> Probe:
    return Probe("across", (name,))


def step_source(name: str, p: str, n: str, before: float, *steps: tuple[float, float],
                kind: str = "voltage-source") -> Part:
    """A piecewise-constant source: ``before`` until the first step, then (time, value) steps."""
    return part(name, kind, p, n, before, steps=tuple(steps))


def rc(r: float = 1e3, c: float = 1e-6, v: float = 1.0) -> Circuit:
    """V1 steps 0 -> v at t = 0 into R1 then C1 to ground; node ``a`` is the capacitor."""
    return circuit("rc", step_source("V1", "in", "gnd", 0.0, (0.0, v)),
                   part("R1", "resistor", "in", "a", r), part("C1", "capacitor", "a", "gnd", c))


def ladder(sections: int, r: float = 1e3, c: float = 1e-9, v: float = 1.0) -> Circuit:
    """A uniform RC ladder: V1 steps 0 -> v at t = 0 into n0; section i is R{i} from n{i-1}
    to n{i} and C{i} from n{i} to ground."""
    parts = [step_source("V1", "n0", "gnd", 0.0, (0.0, v))]
    for i in range(1, sections + 1):
        parts.append(part(f"R{i}", "resistor", f"n{i - 1}", f"n{i}", r))
        parts.append(part(f"C{i}", "capacitor", f"n{i}", "gnd", c))
    return circuit(f"ladder {sections}", *parts)


def divider(c1: float = 1e-6, c2: float = 1e-6, r2: float = 1e3, v: float = 1.0,
            at: float = 1e-3) -> Circuit:
    """Capacitive divider with a source loop: V1 steps 0 -> v at ``at`` across C1 (in-a) in
    series with C2 || R2 (a-gnd)."""
    return circuit("divider", step_source("V1", "in", "gnd", 0.0, (at, v)),
                   part("C1", "capacitor", "in", "a", c1),
                   part("C2", "capacitor", "a", "gnd", c2), part("R2", "resistor", "a", "gnd", r2))


def sharing(c1: float = 1e-6, c2: float = 3e-6, v1: float = 1.0, v2: float = 0.0,
            at: float = 1e-3) -> Circuit:
    """Charge sharing: C1 (a) held at v1 and C2 (b) at v2 until S1 closes between a and b."""
    return circuit("sharing", part("C1", "capacitor", "a", "gnd", c1, initial=v1),
                   part("S1", "switch", "a", "b", closed=False, steps=((at, 1.0),)),
                   part("C2", "capacitor", "b", "gnd", c2, initial=v2))


#: agreement of the numerical engine with an exact reference in its tests: issue 3's target
#: (1e-5 relative), with a floor of 1e-9 of the quantity's scale
REL = 1e-5


def close(a, b, scale=1.0, rel=REL):
    """Assert a and b agree within ``rel`` relative, floor 1e-9 * scale."""
    assert a is not None and b is not None, (a, b)
    assert abs(a - b) <= max(rel * max(abs(a), abs(b)), 1e-9 * scale), (a, b)


def first_order(tau, x0, xinf):
    """sympy.dsolve of tau x' + x = xinf with x(0) = x0, as an expression of
    t = sympy.symbols("t", nonnegative=True)."""
    t = sp.symbols("t", nonnegative=True)
    x = sp.Function("x")
    return sp.dsolve(sp.Eq(tau * x(t).diff(t) + x(t), xinf), x(t), ics={x(0): x0}).rhs
