"""The numerical engine's stamped equations against the textbook nodal equations.

Reference: nodal analysis (KCL at each node, Ohm's law per resistor, i = g (v_cp - v_cn) for a
vccs), written out in the test.  The systems are built the way a solve builds them (one cache
for the state before t = 0 and every interval), so that the resistor and vccs currents reused
across intervals and across the DC rows are checked in each of them.
"""

from __future__ import annotations

import numpy as np

from harness.simulate.branches import layout
from harness.simulate.equations import build
from harness.simulate.regularise import choose
from simulate_builder import circuit, ladder, part, step_source


def _systems(circ):
    """(layout, [system before 0, system of each interval]) built with one shared cache."""
    lay, reg, cache = layout(circ), choose(circ, None), {}
    pre = build(circ, lay, reg, 0.0, before=True, cache=cache)
    return lay, [pre] + [build(circ, lay, reg, t, cache=cache) for t in circ.events]


def test_ladder_rows_are_the_textbook_conductance_matrix():
    """Rows n1..nN of K (and of K_dc) of a 60-section ladder are G of nodal analysis:
    G_ii = 2/R (1/R at the end), G_i,i+-1 = -1/R, and row n1 couples to the source node n0 by
    -1/R; the source's value changes between 0- and 0+, the conductances do not."""
    n, r = 60, 1e3
    circ = ladder(n, r)
    lay, systems = _systems(circ)
    idx = [lay.node_index[f"n{k}"] for k in range(0, n + 1)]
    G = np.zeros((n, n + 1))                     # columns n0..nN, rows n1..nN
    for i in range(1, n + 1):
        G[i - 1, i] = 2.0 / r if i < n else 1.0 / r
        G[i - 1, i - 1] = -1.0 / r
        if i < n:
            G[i - 1, i + 1] = -1.0 / r
    assert len(systems) == 2 and systems[0].sources != systems[1].sources
    for system in systems:
        for K in (system.K, system.K_dc):
            rows = K.toarray()[np.ix_(idx[1:], idx)]
            np.testing.assert_allclose(rows, G, rtol=1e-15, atol=1e-15 / r)


def test_branch_currents_follow_ohms_law_and_vccs_gain_in_every_interval():
    """Each resistor's branch current is (v_p - v_n)/R and the vccs's g (v_cp - v_cn) in the
    system before 0 and in both intervals (a source stepping 0 -> 2 V at 0 and back at 1 ms)."""
    g = 2e-3
    circ = circuit("vccs", step_source("V1", "a", "gnd", 0.0, (0.0, 2.0), (1e-3, 0.0)),
                   part("R1", "resistor", "a", "b", 1e3),
                   part("C1", "capacitor", "b", "gnd", 1e-6),
                   part("G1", "vccs", "gnd", "c", g, control=("b", "gnd")),
                   part("R2", "resistor", "c", "gnd", 2e3),
                   part("C2", "capacitor", "c", "gnd", 1e-6))
    lay, systems = _systems(circ)
    a, b, c = (lay.node_index[x] for x in "abc")
    expect = {"R1": {a: 1e-3, b: -1e-3}, "R2": {c: 1.0 / 2e3}, "G1": {b: g}}
    assert len(systems) == 3
    for system in systems:
        for name, coef in expect.items():
            want = np.zeros(lay.n)
            for i, v in coef.items():
                want[i] = v
            cur = system.branches[name]
            np.testing.assert_allclose(cur.dense(lay.n), want, rtol=1e-15, atol=0.0)
            assert cur.const == 0.0
