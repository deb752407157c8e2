"""The numerical engine's DC operating point of an interval, on circuits where a small
resistance carries a current far above the one the largest resistance sets.

Both circuits come from the random engine-agreement generator (tests/benchmarks/agree_circuits.py,
seeds 204 and 515, parts as generated, probes reduced).  The reference values are the circuits'
DC states solved by hand-written modified nodal analysis (inductors and a closed ideal switch as
0 V branches, Kirchhoff's laws: common practice) with scipy.linalg.solve, independent of both
engines; the value just after an event is read from KCL at the node (stated beside the check).
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np
import pytest
import scipy.linalg

from harness.circuitfile import parse_circuit
from harness.messages import text as said
from harness.model import Probe
from harness.results import UNSETTLED
from harness.runner import check_file
from harness.simulate import engine, solve

#: seed 204: L9 settles to 0.503 A through R10 = 6.64 ohm beside R2 = 686 kohm
SMALL_R_BESIDE_LARGE = """
    title = "random circuit 204"
    [parts]
    V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "-2.91 V", steps = [["0.0028 s", "-0.36 V"], ["0.005 s", "-3.36 V"]] }
    R2 = { kind = "resistor", nodes = ["n1", "gnd"], value = "6.86e+05 ohm" }
    R4 = { kind = "resistor", nodes = ["n3", "in"], value = "1560 ohm" }
    L6 = { kind = "inductor", nodes = ["n3", "m5"], value = "2.32e-05 H" }
    R7 = { kind = "resistor", nodes = ["m5", "in"], value = "2750 ohm" }
    L9 = { kind = "inductor", nodes = ["n1", "m8"], value = "0.000499 H" }
    R10 = { kind = "resistor", nodes = ["m8", "in"], value = "6.64 ohm" }
    S12 = { kind = "switch", state = "open", steps = [["0.0028 s", "closed"]], nodes = ["n3", "s11"] }
    R13 = { kind = "resistor", nodes = ["s11", "in"], value = "43.2 ohm" }
    S14 = { kind = "switch", state = "open", steps = [["0.005 s", "closed"]], nodes = ["gnd", "n1"], on-resistance = "0.0416 ohm" }
    """

#: seed 515: L12 settles to 7.2 A through R13 = 1.12 ohm beside R2 = 238 kohm
AMPERES_BESIDE_MICROAMPERES = """
    title = "random circuit 515"
    [parts]
    V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0.0 V", steps = [["1.3e-05 s", "-8.1 V"]] }
    R2 = { kind = "resistor", nodes = ["n1", "gnd"], value = "2.38e+05 ohm" }
    C3 = { kind = "capacitor", nodes = ["in", "gnd"], value = "1.64e-09 F" }
    I4 = { kind = "current-source", nodes = ["n1", "in"], value = "0 A", steps = [["1.3e-05 s", "4.68e-05 A"]] }
    L6 = { kind = "inductor", nodes = ["in", "m5"], value = "0.791 H" }
    R7 = { kind = "resistor", nodes = ["m5", "gnd"], value = "99.5 ohm" }
    L9 = { kind = "inductor", nodes = ["gnd", "m8"], value = "0.000156 H" }
    R10 = { kind = "resistor", nodes = ["m8", "in"], value = "26.8 ohm" }
    L12 = { kind = "inductor", nodes = ["in", "m11"], value = "0.0851 H" }
    R13 = { kind = "resistor", nodes = ["m11", "gnd"], value = "1.12 ohm" }
    """


def _mna(nodes, resistors, shorts, volts, amps):
    """DC state by modified nodal analysis: node voltages by name and the current of each
    0 V branch (``shorts``: name -> (p, n), current from p through it to n) and voltage source
    (``volts``: name -> (p, n, V)); ``resistors`` (p, n, ohm); ``amps`` (p, n, A) driven from p
    through the source to n.  Ground is "gnd"."""
    index = {n: i for i, n in enumerate(nodes)}
    branches = list(shorts) + list(volts)
    size = len(nodes) + len(branches)
    A, b = np.zeros((size, size)), np.zeros(size)

    def add(node, col, value):
        if node != "gnd":
            A[index[node], col] += value

    for p, n, r in resistors:
        for a, sign_a in ((p, 1.0), (n, -1.0)):
            for c, sign_c in ((p, 1.0), (n, -1.0)):
                if a != "gnd" and c != "gnd":
                    A[index[a], index[c]] += sign_a * sign_c / r
    for p, n, i in amps:
        if p != "gnd":
            b[index[p]] -= i
        if n != "gnd":
            b[index[n]] += i
    for k, name in enumerate(branches):
        row = len(nodes) + k
        p, n = (shorts[name] if name in shorts else volts[name][:2])
        add(p, row, 1.0)
        add(n, row, -1.0)
        if p != "gnd":
            A[row, index[p]] += 1.0
        if n != "gnd":
            A[row, index[n]] -= 1.0
        b[row] = 0.0 if name in shorts else volts[name][2]
    x = scipy.linalg.solve(A, b)
    state = {n: x[i] for n, i in index.items()}
    state["gnd"] = 0.0
    state.update({name: x[len(nodes) + k] for k, name in enumerate(branches)})
    return state


def _dc_204():
    """The seed-204 circuit's DC state from t = 5 ms: V1 = -3.36 V, S12 closed (ideal: a 0 V
    branch), S14 closed (0.0416 ohm), inductors as 0 V branches."""
    return _mna(["in", "n1", "n3", "m5", "m8", "s11"],
                [("n1", "gnd", 6.86e5), ("n3", "in", 1560.0), ("m5", "in", 2750.0),
                 ("m8", "in", 6.64), ("s11", "in", 43.2), ("gnd", "n1", 0.0416)],
                {"L6": ("n3", "m5"), "L9": ("n1", "m8"), "S12": ("n3", "s11")},
                {"V1": ("in", "gnd", -3.36)}, [])


def _dc_515():
    """The seed-515 circuit's DC state from t = 13 us: V1 = -8.1 V, I4 = 46.8 uA, C3 open,
    inductors as 0 V branches."""
    return _mna(["in", "n1", "m5", "m8", "m11"],
                [("n1", "gnd", 2.38e5), ("m5", "gnd", 99.5), ("m8", "in", 26.8),
                 ("m11", "gnd", 1.12)],
                {"L6": ("in", "m5"), "L9": ("gnd", "m8"), "L12": ("in", "m11")},
                {"V1": ("in", "gnd", -8.1)}, [("n1", "in", 4.68e-5)])


def _node(name: str) -> Probe:
    return Probe("node", (name,))


def _between(a: str, b: str) -> Probe:
    return Probe("between", (a, b))


def _through(part: str) -> Probe:
    return Probe("through", (part,))


def test_amperes_through_a_small_resistance_settle_to_the_dc_state():
    """Seed 204 from t = 5 ms against the MNA reference: the source node and n3 read -3.36 V
    and L9 carries 0.503 A through 6.64 ohm (its operating point used to be rejected as
    implausible, and every value then read against a zero origin, silently)."""
    ref = _dc_204()
    assert ref["L9"] == pytest.approx(0.503, rel=1e-2)   # the current the defect rejected
    sim = solve(parse_circuit(textwrap.dedent(SMALL_R_BESIDE_LARGE)))
    assert not sim.warnings, [said(w) for w in sim.warnings]
    for probe, want in ((_node("in"), ref["in"]), (_node("n3"), ref["n3"]),
                        (_between("m8", "m5"), ref["m8"] - ref["m5"]),
                        (_through("L9"), ref["L9"])):
        got = sim.features(probe, 2)
        assert got.final == pytest.approx(want, rel=1e-6, abs=1e-12), probe
    # KCL at n3 just after 5 ms (common practice): L6 carries no current (it settled with n3,
    # m5 and in at one potential), so R4 and R13 carry none and n3 = v(in) = -3.36 V
    assert sim.features(_node("n3"), 2).after == pytest.approx(-3.36, rel=1e-6)


def test_amperes_beside_microamperes_settle_without_a_growth_warning():
    """Seed 515 from t = 13 us against the MNA reference: L12 carries 7.2 A through 1.12 ohm,
    and no interval is reported as growing without bound."""
    ref = _dc_515()
    assert abs(ref["L12"]) == pytest.approx(7.23, rel=1e-2)
    sim = solve(parse_circuit(textwrap.dedent(AMPERES_BESIDE_MICROAMPERES)))
    assert not sim.warnings, [said(w) for w in sim.warnings]
    for probe, want in ((_node("n1"), ref["n1"]), (_between("n1", "m11"), ref["n1"] - ref["m11"]),
                        (_between("in", "n1"), ref["in"] - ref["n1"]),
                        (_through("L12"), ref["L12"])):
        got = sim.features(probe, 1)
        assert got.final == pytest.approx(want, rel=1e-6, abs=1e-12), probe
    # KCL at n1 just after 13 us (common practice): n1 meets only R2 and I4, so R2 carries
    # I4 at once: v(n1) = -I4 R2 + 0 (in is held at its 0 V through C3 and the inductors)
    assert sim.features(_node("n1"), 1).after == pytest.approx(-4.68e-5 * 2.38e5, rel=1e-6)


def test_an_operating_point_not_established_is_never_read_against_zero(monkeypatch):
    """With the plausibility bound forced back below the true operating point, the interval
    settles to a state its DC solve did not establish: the engine says so (an ``unsettled``
    diagnostic, detail no-origin), gives no final value, still reads the value just after the
    event from its integration (KCL as above: -3.36 V), and a hand value equal to the true
    final value is not passed."""
    monkeypatch.setattr(engine, "PLAUSIBLE", 1e-6)   # leaves only the tolerance-based floor
    sim = solve(parse_circuit(textwrap.dedent(SMALL_R_BESIDE_LARGE)))
    found = [w for w in sim.warnings if w.code == UNSETTLED and w.detail == "no-origin"]
    assert [w.interval for w in found] == [2]
    assert "could not establish the DC operating point" in said(found[0])
    n3 = sim.features(_node("n3"), 2)
    assert n3.final is None
    assert n3.after == pytest.approx(-3.36, rel=1e-6)
    assert sim.features(_node("in"), 2).after == pytest.approx(-3.36, rel=1e-9)


def test_a_check_on_an_unestablished_operating_point_is_not_a_pass(monkeypatch, tmp_path: Path):
    """The same forced bound through the checker: the hand's true final value of n3 (-3.36 V,
    MNA above) is not passed while the numerical engine cannot establish it."""
    text = textwrap.dedent(SMALL_R_BESIDE_LARGE) + textwrap.dedent("""
        [[expect]]
        node = "n3"
        at = "5 ms"
        final = "-3.36 V"
        """)
    path = tmp_path / "seed204.toml"
    path.write_text(text, encoding="utf-8")
    assert check_file(str(path)).verdict == "pass"
    monkeypatch.setattr(engine, "PLAUSIBLE", 1e-6)
    result = check_file(str(path))
    assert result.verdict != "pass"
    final = [f for c in result.checks for f in c.fields if f.name == "final"]
    assert final and final[0].numeric is None and final[0].verdict != "pass"
