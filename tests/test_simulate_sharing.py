"""The numerical engine's reuse of work across intervals, its work budgets, and the bridge rule
of the loop capacitance.

References: the first-order RC step response v(t) = V + (v0 - V) e^(-t/RC) (textbook; each
interval of a toggling source starts from the previous one's end value), conservation of charge
when an ideal switch joins two capacitors (textbook: v = (C1 v1 + C2 v2) / (C1 + C2)), and the
definition of a bridge (an edge whose removal disconnects its two ends, checked by search).
"""

from __future__ import annotations

import math
import textwrap

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from harness.circuitfile import parse_circuit
from harness.model import Probe
from harness.simulate import engine, solve
from harness.simulate.regularise import _bridges
from harness.messages import text as said

R, C, V = 1e3, 1e-6, 1.0
TAU = R * C
PERIOD = 5 * TAU  # the source toggles every 5 tau

TOGGLING = f"""
    title = "rc, source toggling every 5 tau"
    [parts]
    V1 = {{ kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1 V"], ["{PERIOD} s", "0 V"], ["{2 * PERIOD} s", "1 V"], ["{3 * PERIOD} s", "0 V"], ["{4 * PERIOD} s", "1 V"]] }}
    R1 = {{ kind = "resistor", nodes = ["in", "a"], value = "{R} Ω" }}
    C1 = {{ kind = "capacitor", nodes = ["a", "gnd"], value = "{C} F" }}
    """


def _toggling():
    return parse_circuit(textwrap.dedent(TOGGLING))


def _textbook_before(k: int) -> float:
    """v(t_k-) of the toggling RC (textbook first-order response, interval by interval)."""
    v = 0.0
    for j in range(k):
        target = V if j % 2 == 0 else 0.0
        v = target + (v - target) * math.exp(-PERIOD / TAU)
    return v


def test_intervals_with_equal_states_share_one_system():
    """The source is 1 V in intervals 0, 2, 4 and 0 V before t = 0 and in 1, 3: one System per
    value, and the 0 V and 1 V systems share their matrices (only the constant terms differ);
    the values are the textbook response."""
    sim = solve(_toggling())
    systems = sim.systems
    assert systems[0] is systems[2] is systems[4]
    assert systems[1] is systems[3] is sim.pre
    assert systems[0].jac is systems[1].jac and systems[0] is not systems[1]
    for k in range(5):
        feats = sim.features(Probe("node", ("a",)), k)
        assert feats.before == pytest.approx(_textbook_before(k), abs=1e-6 * V)
        assert feats.final == pytest.approx(V if k % 2 == 0 else 0.0, abs=1e-6 * V)
        assert feats.tau == pytest.approx(TAU, rel=1e-5)


SHARING = """
    title = "charge sharing, switch closing twice"
    [parts]
    V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "5 V" }
    R1 = { kind = "resistor", nodes = ["in", "a"], value = "1 kΩ" }
    C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "100 nF" }
    S1 = { kind = "switch", nodes = ["a", "b"], state = "open", steps = [["1 ms", "closed"], ["2 ms", "open"], ["3 ms", "closed"]] }
    C2 = { kind = "capacitor", nodes = ["b", "gnd"], value = "200 nF", initial = "0 V" }
    R2 = { kind = "resistor", nodes = ["b", "gnd"], value = "100 kΩ" }
    """


def test_reused_switch_state_conserves_charge_at_each_close():
    """Intervals 1 and 3 (switch closed) share one System; at both closings the after-value is
    the charge-weighted mean of the before-values (textbook charge conservation)."""
    sim = solve(parse_circuit(textwrap.dedent(SHARING)))
    assert sim.systems[1] is sim.systems[3]
    c1, c2 = 100e-9, 200e-9
    assert sim.circuit.events == pytest.approx((0.0, 1e-3, 2e-3, 3e-3))
    for k in (1, 3):  # the closings at 1 ms and 3 ms
        va = sim.features(Probe("node", ("a",)), k).before
        vb = sim.features(Probe("node", ("b",)), k).before
        after = sim.features(Probe("node", ("b",)), k).after
        assert after == pytest.approx((c1 * va + c2 * vb) / (c1 + c2), abs=1e-6 * 5.0)


def test_budget_is_per_interval(monkeypatch):
    """With a budget per interval below the whole schedule's steps, every interval keeps its
    values (a budget per solve of the same size would have stopped in interval 2 or 3)."""
    monkeypatch.setattr(engine, "STEP_BUDGET", 700)
    sim = solve(_toggling())
    steps = [run.stats.steps for run in sim.runs]
    assert len(sim.runs) == 5 and max(steps) <= 700 < sum(steps)
    assert not sim.warnings
    feats = sim.features(Probe("node", ("a",)), 4)
    assert feats.before == pytest.approx(_textbook_before(4), abs=1e-6 * V)


def test_solve_budget_bounds_the_whole_schedule(monkeypatch):
    """Past the budget of the whole solve the engine stops with a warning saying so; the
    intervals before keep their (textbook) values."""
    monkeypatch.setattr(engine, "SOLVE_STEP_BUDGET", 900)
    sim = solve(_toggling())
    assert any(w.detail == "solve" and "for the whole solve: 900 steps" in said(w)
               and "values not reported" in said(w) for w in sim.warnings)
    assert 1 <= len(sim.runs) < 5
    feats = sim.features(Probe("node", ("a",)), 0)
    assert feats.final == pytest.approx(V, abs=1e-6 * V)
    last = sim.features(Probe("node", ("a",)), 4)
    assert last.before is None or last.final is None


def _is_bridge(edges: list[tuple[int, int]], i: int) -> bool:
    """The definition: without edge i, its two ends are no longer connected (breadth-first)."""
    a, b = edges[i]
    if a == b:
        return False
    adjacency: dict[int, list[int]] = {}
    for j, (p, q) in enumerate(edges):
        if j != i:
            adjacency.setdefault(p, []).append(q)
            adjacency.setdefault(q, []).append(p)
    seen, frontier = {a}, [a]
    while frontier:
        frontier = [m for n in frontier for m in adjacency.get(n, []) if m not in seen]
        seen.update(frontier)
    return b not in seen


@settings(max_examples=300, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 7), st.integers(0, 7)), min_size=1, max_size=14))
def test_bridges_match_the_definition(pairs):
    """Tarjan's low-link bridges equal the edges whose removal disconnects their ends, on
    random multigraphs with parallel edges and self-loops."""
    edges = [(str(a), str(b)) for a, b in pairs]
    expected = {i for i in range(len(pairs)) if _is_bridge(pairs, i)}
    assert _bridges(edges) == expected


def test_bridges_of_a_long_chain_need_no_recursion():
    """A 5000-edge path is all bridges; closing it into a ring leaves none (definition)."""
    chain = [(f"n{k}", f"n{k + 1}") for k in range(5000)]
    assert _bridges(chain) == set(range(5000))
    assert _bridges(chain + [("n5000", "n0")]) == set()


def test_state_bound_is_the_capacitance_rank():
    """The pilot is skipped above PILOT_MAX_STATES integrated states by a bound computed without
    building a system: inductors + carriers + the rank of the node capacitance matrix.  The rank
    is checked against numpy's matrix_rank of that matrix (stamped here from the capacitors),
    and the bound against every built system's size, on random circuits."""
    import random

    from harness.simulate.coordinates import Unreduced
    from harness.simulate.branches import layout
    from harness.simulate.regularise import choose
    from tests.simulate_random import random_circuit

    checked = 0
    for seed in range(120):
        circuit = random_circuit(random.Random(seed))
        lay = layout(circuit)
        cap = np.zeros((len(lay.nodes), len(lay.nodes)))
        for part in circuit.parts:
            if part.kind == "capacitor" and part.value:
                idx = [lay.node_index.get(x) for x in part.nodes]
                for a, sa in zip(idx, (1, -1)):
                    for b, sb in zip(idx, (1, -1)):
                        if a is not None and b is not None:
                            cap[a, b] += sa * sb * part.value
        d = np.sqrt(np.where(np.diag(cap) > 0, np.diag(cap), 1.0)) if cap.size else cap
        rank = np.linalg.matrix_rank(cap / np.outer(d, d), tol=1e-9) if cap.size else 0
        inductors = sum(1 for p in circuit.parts if p.kind == "inductor" and p.value)
        bound = engine._states_at_least(circuit, lay)
        assert bound == inductors + len(lay.carriers) + rank
        try:
            pre, systems = engine._build_all(circuit, lay, choose(circuit))
        except Unreduced:
            continue
        assert bound <= min(s.n for s in [pre] + systems)
        checked += 1
    assert checked >= 100


def test_direct_lapack_steps_equal_scipy_radau():
    """integrate._run calls LAPACK getrf/getrs directly for dense systems; its steps must be
    those of scipy's own Radau (reference: an unmodified scipy.integrate.Radau on the same
    ODE), digit for digit."""
    import types

    from scipy.integrate import Radau

    from harness.simulate import integrate

    rng = np.random.default_rng(3)
    a = rng.normal(size=(6, 6))
    jac = -(a @ a.T + 6 * np.eye(6)) * 1e3   # stable, stiff-ish
    r = rng.normal(size=6)
    z0 = rng.normal(size=6)
    atol = np.full(6, 1e-12)
    ss, zs, _, status, stats = integrate._run(types.SimpleNamespace(jac=jac), r, z0, 0.0, 0.01,
                                              1e-7, atol, None, first_step=1e-9)
    ref = Radau(lambda _t, z: jac @ z + r, 0.0, z0, 0.01, jac=jac, rtol=1e-7, atol=atol,
                first_step=1e-9)
    ts, ys = [0.0], [z0]
    while ref.status == "running":
        ref.step()
        ts.append(ref.t)
        ys.append(ref.y.copy())
    assert status == "reached" and ref.status == "finished"
    assert np.array_equal(np.asarray(ss), np.asarray(ts))
    assert np.array_equal(np.column_stack(zs), np.column_stack(ys))
    assert (stats.nfev, stats.nlu) == (ref.nfev, ref.nlu)
