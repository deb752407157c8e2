"""Property tests (hypothesis) of the closed-form engine on random well-posed RC/RL networks.

The networks (R 1 ohm..1 Mohm, C 0.1 nF..10 uF, L 0.1 uH..0.1 H): a random spanning tree of
resistors (so every node has a DC path and no cutset is
free of resistors: inductor currents never jump), extra resistors, random capacitors (loops of
capacitors with the voltage source and switches are allowed: those jumps are what is tested),
random inductors and ideal switches kept out of loops with the voltage source and each other, a
current source, and steps of the sources and switches at random times.

Checked facts (Kirchhoff's laws and the part laws; the impulse argument of charge conservation,
common practice):
* at every jump the capacitor charge changes sum to zero at each node that touches no voltage
  source or switch, and the impulsive charges of all parts satisfy KCL at every node;
* x(t_k+) satisfies the circuit's equations with the post-step sources: KCL at every node, Ohm's
  law, source values, switch states, continuity of inductor currents;
* the energy dissipated at an instant is never negative (passive network).
"""

from __future__ import annotations

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from closedform_circuits import C, I, L, R, S, V, across, circuit, through
from harness.closedform import solve


class _Forest:
    """Union-find to keep zero-impedance parts (and DC shorts) out of loops."""

    def __init__(self):
        self.parent = {}

    def find(self, x):
        self.parent.setdefault(x, x)
        while self.parent[x] != x:
            x = self.parent[x]
        return x

    def join(self, a, b):
        ra, rb = self.find(a), self.find(b)
        if ra == rb:
            return False
        self.parent[ra] = rb
        return True


def _value(draw, lo, hi):
    return float(10 ** draw(st.floats(lo, hi)))


@st.composite
def networks(draw):
    k = draw(st.integers(2, 5))
    nodes = ["gnd"] + [f"n{i}" for i in range(1, k + 1)]
    pair = lambda: tuple(draw(st.permutations(nodes))[:2])
    parts, forest = [], _Forest()
    for i in range(1, k + 1):
        parts.append(R(f"RT{i}", nodes[i], nodes[draw(st.integers(0, i - 1))], _value(draw, 0, 6)))
    t1 = _value(draw, -6, -3)
    for i in range(draw(st.integers(0, 2))):
        a, b = pair()
        parts.append(R(f"RX{i}", a, b, _value(draw, 0, 6)))
    src = nodes[draw(st.integers(1, k))]
    forest.join(src, "gnd")
    parts.append(V("V1", src, "gnd", draw(st.floats(-5, 5)),
                   [(0.0, draw(st.floats(-10, 10))), (t1, draw(st.floats(-10, 10)))]))
    for i in range(draw(st.integers(0, 2))):
        a, b = pair()
        if forest.join(a, b):
            on = _value(draw, -2, 2) if draw(st.booleans()) else None
            parts.append(S(f"S{i}", a, b, draw(st.booleans()),
                           [(draw(st.sampled_from([0.0, t1])), float(draw(st.booleans())))], on=on))
    for i in range(draw(st.integers(0, 2))):
        a, b = pair()
        if forest.join(a, b):
            parts.append(L(f"L{i}", a, b, _value(draw, -7, -1)))
    for i in range(draw(st.integers(1, 4))):
        a, b = pair()
        held = draw(st.booleans()) and forest.join(a, b)
        parts.append(C(f"C{i}", a, b, _value(draw, -10, -5),
                       initial=draw(st.floats(-5, 5)) if held else None))
    if draw(st.booleans()):
        a, b = pair()
        parts.append(I("I1", a, b, draw(st.floats(-1e-2, 1e-2)),
                       [(t1, draw(st.floats(-1e-2, 1e-2)))]))
    return circuit(*parts)


def _scale(sol):
    mags = [1.0]
    for k in range(len(sol.circuit.events)):
        for p in sol.circuit.parts:
            f = sol.features(across(p.name), k)
            mags += [abs(f.before), abs(f.after)]
    return max(mags)


SETTINGS = settings(max_examples=60, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])


@SETTINGS
@given(networks())
def test_charge_is_conserved_across_every_jump(net):
    """At each node without a voltage source or switch, capacitor charge changes sum to zero."""
    sol = solve(net)
    vs = _scale(sol)
    cmax = max(p.value for p in net.parts if p.kind == "capacitor")
    for k in range(len(net.events)):
        jump = sol.jump(k)
        for nd in net.nodes[1:]:
            kinds = {p.kind for p in net.parts if nd in p.nodes}
            total, size = 0.0, 0.0
            for p in net.parts:
                q = jump.charges.get(p.name, 0.0)
                if nd in p.nodes:
                    total += q if p.p == nd else -q
                    size += abs(q)
            assert abs(total) <= 1e-8 * (size + cmax * vs), (k, nd, jump.charges)
            if not kinds & {"voltage-source", "switch"}:
                dq = sum(p.value * (sol.features(across(p.name), k).after
                                    - sol.features(across(p.name), k).before)
                         * (1 if p.p == nd else -1)
                         for p in net.parts if p.kind == "capacitor" and nd in p.nodes)
                assert abs(dq) <= 1e-8 * cmax * vs, (k, nd)
        stored = sum(jump.stored_before.values()) + sum(jump.stored_after.values())
        assert jump.energy is None or jump.energy >= -1e-9 * (stored + cmax * vs * vs)


@SETTINGS
@given(networks())
def test_state_after_each_step_satisfies_the_circuit_equations(net):
    """x(t_k+) satisfies KCL, Ohm's law, the post-step source values and switch states."""
    sol = solve(net)
    vs = _scale(sol)
    rmin = min(p.value for p in net.parts if p.kind == "resistor")
    amp = vs / rmin + 1e-2
    for k, tk in enumerate(net.events):
        after = {p.name: (sol.features(across(p.name), k).after,
                          sol.features(through(p.name), k).after) for p in net.parts}
        for nd in net.nodes[1:]:
            kcl = sum(after[p.name][1] * (1 if p.p == nd else -1) for p in net.parts
                      if nd in p.nodes and p.p != p.n)
            assert abs(kcl) <= 1e-8 * amp, (k, nd, kcl)
        for p in net.parts:
            v, i = after[p.name]
            if p.kind == "resistor":
                assert abs(v - p.value * i) <= 1e-8 * vs
            elif p.kind == "voltage-source":
                assert abs(v - p.source_value(tk)) <= 1e-8 * vs
            elif p.kind == "current-source":
                assert abs(i - p.source_value(tk)) <= 1e-12
            elif p.kind == "switch" and p.is_closed(tk):
                assert abs(v - (p.on_resistance or 0.0) * i) <= 1e-8 * vs
            elif p.kind == "switch":
                assert abs(i) <= 1e-8 * amp
            elif p.kind == "inductor":
                before = sol.features(through(p.name), k).before
                assert abs(i - before) <= 1e-8 * amp
