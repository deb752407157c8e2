"""A small builder of model.Circuit objects for the closed-form engine's tests (no file reader)."""

from __future__ import annotations

from harness.model import Circuit, Part, Probe


def R(name, p, n, value):
    """A resistor of ``value`` ohms."""
    return Part(name, "resistor", (p, n), value)


def C(name, p, n, value, initial=None):
    """A capacitor of ``value`` farads, optional initial voltage."""
    return Part(name, "capacitor", (p, n), value, initial=initial)


def L(name, p, n, value, initial=None):
    """An inductor of ``value`` henries, optional initial current."""
    return Part(name, "inductor", (p, n), value, initial=initial)


def V(name, p, n, value=0.0, steps=()):
    """A voltage source: ``value`` before the first step, then ``steps`` = ((t, v), ...)."""
    return Part(name, "voltage-source", (p, n), value, steps=tuple(steps))


def I(name, p, n, value=0.0, steps=()):
    """A current source driving ``value`` from p through itself to n."""
    return Part(name, "current-source", (p, n), value, steps=tuple(steps))


def S(name, p, n, closed, steps=(), on=None, off=None):
    """A switch, ``closed`` before its first step; steps = ((t, 1.0 closed / 0.0 open), ...)."""
    return Part(name, "switch", (p, n), None, steps=tuple(steps), closed=closed,
                on_resistance=on, off_resistance=off)


def E(name, p, n, gain, cp, cn):
    """A vcvs: v(p) - v(n) = gain (v(cp) - v(cn))."""
    return Part(name, "vcvs", (p, n), gain, control=(cp, cn))


def G(name, p, n, gain, cp, cn):
    """A vccs: current gain (v(cp) - v(cn)) from p through it to n."""
    return Part(name, "vccs", (p, n), gain, control=(cp, cn))


def H(name, p, n, gain, sensed):
    """A ccvs: v(p) - v(n) = gain i(sensed)."""
    return Part(name, "ccvs", (p, n), gain, control=sensed)


def F(name, p, n, gain, sensed):
    """A cccs: current gain i(sensed) from p through it to n."""
    return Part(name, "cccs", (p, n), gain, control=sensed)


def circuit(*parts, title="test"):
    """A Circuit with ground "gnd"."""
    return Circuit(title=title, parts=tuple(parts))


def node(name):
    return Probe("node", (name,))


def across(name):
    return Probe("across", (name,))


def through(name):
    return Probe("through", (name,))


def between(a, b):
    return Probe("between", (a, b))
