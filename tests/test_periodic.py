"""Periodic drive: the ``repeat`` schedule and the exact periodic steady state of both engines.

References outside the project: the RC low-pass under a two-level drive solved by sympy from
its two exponential segments and the periodicity condition; the small-ripple formula
V·D(1−D)·T/(R·C) (common practice, valid for T ≪ RC); the no-load charge-pump doubler as a
geometric series of ideal charge sharing (charge conservation: V_out ← (C_O·V_out + C_F·2V) /
(C_F + C_O)); the first-order settle count ln(f) / ln(e^(−T/τ)).
"""

from __future__ import annotations

import math

import numpy as np

import pytest
import sympy as sp

from harness.circuitfile import parse_circuit
from harness.closedform import solve as exact_solve
from harness.model import Probe
from harness.results import GROWS, NO_WINDOW
from harness.simulate import solve as numeric_solve

OUT = Probe("node", ("out",))


def _pwm(period: str, duty: str = "30 %", count: int = 20) -> str:
    """An RC low-pass (10 kΩ, 10 nF: τ = 100 µs) driven 0/5 V by a repeating source."""
    return f"""
title = "pwm filter"
[parts]
R1 = {{ kind = "resistor", nodes = ["in", "out"], value = "10k" }}
C1 = {{ kind = "capacitor", nodes = ["out", "gnd"], value = "10n", initial = "0 V" }}
[parts.V1]
kind = "voltage-source"
nodes = ["in", "gnd"]
value = "0 V"
repeat = {{ period = "{period}", duty = "{duty}", levels = ["5 V", "0 V"], count = {count} }}
"""


def _doubler(count: int, load: str = "") -> str:
    """A charge-pump doubler with ideal switches: C_F = 1 µF charged to 5 V, then stacked on
    the input and shared with C_O = 4 µF (no resistance: pure charge sharing)."""
    phase = ('steps = [["0 s", "{a}"], ["5 us", "{b}"]], period = "10 us", '
             f'count = {count}')
    one = phase.format(a="closed", b="open")
    two = phase.format(a="open", b="closed")
    return f"""
title = "doubler"
[parts]
V1 = {{ kind = "voltage-source", nodes = ["vin", "gnd"], value = "5 V" }}
S1 = {{ kind = "switch", nodes = ["vin", "a"], state = "closed", repeat = {{ {one} }} }}
S2 = {{ kind = "switch", nodes = ["b", "gnd"], state = "closed", repeat = {{ {one} }} }}
S3 = {{ kind = "switch", nodes = ["vin", "b"], state = "open", repeat = {{ {two} }} }}
S4 = {{ kind = "switch", nodes = ["a", "out"], state = "open", repeat = {{ {two} }} }}
CF = {{ kind = "capacitor", nodes = ["a", "b"], value = "1u" }}
CO = {{ kind = "capacitor", nodes = ["out", "gnd"], value = "4u", initial = "0 V" }}
{load}
"""


# ----------------------------------------------------------------------------- the reader
def test_repeat_expands_into_ordinary_steps_and_records_the_window():
    """duty + levels give two steps per period at n·T and n·T + D·T; the window is recorded."""
    circuit = parse_circuit(_pwm("100 us", count=3))
    v1 = circuit.part("V1")
    want = [(0.0, 5.0), (30e-6, 0.0), (100e-6, 5.0), (130e-6, 0.0), (200e-6, 5.0),
            (230e-6, 0.0)]
    assert [(pytest.approx(t, abs=1e-18), v) for t, v in v1.steps] == want
    window = circuit.periodic
    assert (window.start, window.period, window.count) == (0.0, 100e-6, 3)
    assert window.offsets == pytest.approx((0.0, 30e-6))


def test_repeat_until_and_ordinary_steps_before_the_window():
    """``until`` counts the periods that start before it; a step before ``start`` stays."""
    circuit = parse_circuit("""
[parts]
S1 = { kind = "switch", nodes = ["in", "out"], state = "open", steps = [["0.5 ms", "closed"]], repeat = { start = "1 ms", period = "1 ms", until = "3.5 ms", steps = [["0.2 ms", "open"], ["0.7 ms", "closed"]] } }
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "1 V" }
R1 = { kind = "resistor", nodes = ["out", "gnd"], value = "1k" }
""")
    steps = circuit.part("S1").steps
    assert steps[0] == (0.5e-3, 1.0)
    assert [t for t, _ in steps[1:]] == pytest.approx([1.2e-3, 1.7e-3, 2.2e-3, 2.7e-3, 3.2e-3,
                                                       3.7e-3])
    assert circuit.periodic.count == 3
    assert circuit.periodic.first == pytest.approx(1.2e-3)


# ----------------------------------------------------------------------------- RC under PWM
def _rc_pwm_reference(ratio: float, duty: float, volts: float = 5.0):
    """(v_min, v_max, average) of the RC low-pass's periodic steady state, solved by sympy:
    on for D·T: v = V + (v0 − V)·e^(−t/τ); off for (1−D)·T: v = v1·e^(−t/τ); periodic."""
    t, tau, big_t, d, v = sp.symbols("t tau T D V", positive=True)
    v0, v1 = sp.symbols("v0 v1")
    on = v + (v0 - v) * sp.exp(-t / tau)
    off = v1 * sp.exp(-t / tau)
    sol = sp.solve([sp.Eq(on.subs(t, d * big_t), v1),
                    sp.Eq(off.subs(t, (1 - d) * big_t), v0)], [v0, v1], dict=True)[0]
    mean = (sp.integrate(on, (t, 0, d * big_t)) + sp.integrate(off, (t, 0, (1 - d) * big_t))) \
        / big_t
    values = {tau: 1, big_t: sp.nsimplify(ratio), d: sp.nsimplify(duty), v: sp.nsimplify(volts)}
    vmin, vmax = (float(sol[x].subs(values).evalf(40)) for x in (v0, v1))
    avg = float(mean.subs(sol).subs(values).evalf(40))
    return vmin, vmax, avg


@pytest.mark.parametrize("ratio", [0.01, 0.37, 1.0, 5.0])
def test_rc_pwm_steady_state_matches_the_sympy_solution(ratio):
    """T/RC from 0.01 to 5: minimum, maximum, ripple and average (sympy, above)."""
    period = f"{ratio * 100:g} us"
    vmin, vmax, avg = _rc_pwm_reference(ratio, 0.3)
    got = exact_solve(parse_circuit(_pwm(period))).periodic(OUT)
    assert got.reason is None
    assert got.minimum == pytest.approx(vmin, rel=1e-9)
    assert got.maximum == pytest.approx(vmax, rel=1e-9)
    assert got.ripple == pytest.approx(vmax - vmin, rel=1e-8)
    assert got.average == pytest.approx(avg, rel=1e-9)
    assert avg == pytest.approx(5.0 * 0.3, rel=1e-12)       # the filter passes the mean V·D


@pytest.mark.parametrize("ratio, holds", [(0.01, True), (5.0, False)])
def test_small_ripple_approximation_holds_only_for_short_periods(ratio, holds):
    """V·D(1−D)·T/(RC) (common practice) is within 0.1 % of the exact ripple at T = RC/100;
    at T = 5·RC it overstates it by more than 30 % (it even exceeds V)."""
    got = exact_solve(parse_circuit(_pwm(f"{ratio * 100:g} us"))).periodic(OUT)
    approx = 5.0 * 0.3 * 0.7 * ratio
    error = abs(approx / got.ripple - 1)
    assert (error < 1e-3) if holds else (error > 0.3)


def test_rc_settle_count_is_the_first_order_count():
    """From 0 V the deviation shrinks by e^(−T/τ) per period: it is within 1 % of the first
    period's after ceil(ln 0.01 / (−T/τ)) periods."""
    got = exact_solve(parse_circuit(_pwm("37 us"))).periodic(OUT, fraction=0.01)
    want = math.ceil(math.log(0.01) / (-0.37))
    assert got.settle_periods == want
    assert got.settle_time == pytest.approx(want * 37e-6)


def test_capacitor_current_averages_zero_and_resistor_current_too():
    """In the steady state a capacitor's average current is 0 (charge balance), and here the
    resistor carries the capacitor's current."""
    solution = exact_solve(parse_circuit(_pwm("50 us")))
    cap = solution.periodic(Probe("through", ("C1",)))
    res = solution.periodic(Probe("through", ("R1",)))
    assert abs(cap.average) < 1e-12 * cap.maximum
    assert abs(res.average) < 1e-12 * res.maximum
    assert cap.maximum == pytest.approx(res.maximum, rel=1e-9)


# ----------------------------------------------------------------------------- charge pump
def test_doubler_after_n_cycles_follows_the_geometric_series():
    """No load, ideal switches: after cycle N, V_out = 2V·(1 − a^N), a = C_O/(C_F + C_O) = 0.8;
    the steady state is 2V with no ripple and settles to 1 % of 2V after
    ceil(ln 0.01 / ln 0.8) = 21 periods.  Both engines."""
    circuit = parse_circuit(_doubler(count=6))
    exact = exact_solve(circuit)
    numeric = numeric_solve(circuit)
    for n in range(1, 7):
        k = 2 * n - 1                                  # the sharing event of cycle n
        want = 10.0 * (1 - 0.8 ** n)
        assert exact.features(OUT, k).after == pytest.approx(want, rel=1e-12)
        assert numeric.features(OUT, k).after == pytest.approx(want, rel=1e-4)
    for engine, rel in ((exact, 1e-12), (numeric, 1e-5)):
        got = engine.periodic(OUT)
        assert got.average == pytest.approx(10.0, rel=rel)
        assert got.ripple == pytest.approx(0.0, abs=rel * 10)
        assert got.settle_periods == math.ceil(math.log(0.01) / math.log(0.8))


# ----------------------------------------------------------------------------- engines agree
LOADED = _doubler(count=4, load='RL = { kind = "resistor", nodes = ["out", "gnd"], '
                                 'value = "1k" }')
RL_PWM = """
title = "coil under pwm"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", repeat = { period = "20 us", duty = "60 %", levels = ["12 V", "0 V"], count = 3 } }
R1 = { kind = "resistor", nodes = ["in", "x"], value = "47" }
L1 = { kind = "inductor", nodes = ["x", "gnd"], value = "1m" }
R2 = { kind = "resistor", nodes = ["x", "gnd"], value = "220" }
"""


@pytest.mark.parametrize("text, probe", [
    (_pwm("100 us", count=3), OUT),
    (_pwm("100 us", count=3), Probe("through", ("C1",))),
    (LOADED, OUT),
    (LOADED, Probe("through", ("CF",))),
    (RL_PWM, Probe("through", ("L1",))),
], ids=["rc-out", "rc-cap-current", "pump-out", "pump-flying-current", "rl-coil-current"])
def test_engines_agree_on_the_periodic_steady_state(text, probe):
    """The closed form's exact steady state and the numerical engine's shooting agree within
    the engine tolerance (1e-4 of the probe's size), settle counts exactly."""
    circuit = parse_circuit(text)
    exact, numeric = exact_solve(circuit).periodic(probe), numeric_solve(circuit).periodic(probe)
    assert exact.reason is None and numeric.reason is None
    size = max(abs(exact.minimum), abs(exact.maximum))
    for name in ("minimum", "maximum", "average"):
        assert getattr(numeric, name) == pytest.approx(getattr(exact, name), abs=1e-4 * size)
    assert numeric.settle_periods == exact.settle_periods


def test_steady_state_equals_the_numerical_engine_after_many_periods():
    """The numerical engine's ordinary integration through 30 periods (T = RC: the deviation is
    e^(−30) ~ 1e-13 of the start) reaches the closed form's steady state: before each on-edge
    the minimum, before each off-edge the maximum."""
    circuit = parse_circuit(_pwm("100 us", count=30))
    pss = exact_solve(circuit).periodic(OUT)
    numeric = numeric_solve(circuit)
    k_on, k_off = 2 * 29, 2 * 29 + 1                    # the last period's two events
    assert numeric.features(OUT, k_on).before == pytest.approx(pss.minimum, rel=1e-4)
    assert numeric.features(OUT, k_off).before == pytest.approx(pss.maximum, rel=1e-4)


def test_ramp_with_reset_switch_has_its_steady_state_in_both_engines():
    """A 1 mA source ramps 1 µF for 0.98 ms (no DC path: an unbounded interval), a 10 Ω reset
    switch pulls it towards I·R for 20 µs (2 τ).  Steady state by hand: v0 = I R + (v0 + I t/C
    − I R)·e^(−2), so v0 = (I R (1 − e^(−2)) + e^(−2)·0.98 V)/(1 − e^(−2)), maximum v0 + 0.98 V."""
    circuit = parse_circuit("""
[parts]
I1 = { kind = "current-source", nodes = ["gnd", "out"], value = "1 mA" }
C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1u", initial = "0 V" }
S1 = { kind = "switch", nodes = ["out", "gnd"], state = "open", on-resistance = "10", repeat = { period = "1 ms", steps = [["0 s", "open"], ["0.98 ms", "closed"]], count = 3 } }
""")
    a = math.exp(-2)
    v0 = (10e-3 * (1 - a) + a * 0.98) / (1 - a)
    for engine, rel in ((exact_solve(circuit), 1e-9), (numeric_solve(circuit), 1e-5)):
        got = engine.periodic(OUT)
        assert got.minimum == pytest.approx(v0, rel=rel)
        assert got.maximum == pytest.approx(v0 + 0.98, rel=rel)


def test_trapped_charge_is_kept_from_the_start():
    """Series capacitors under PWM: the middle node's charge C2·v_m − C1·(v_a − v_m) = −100 nC
    (C1 starts at 1 V) never changes, so the steady-state average of v_m is
    (C1·⟨v_a⟩ − 100 nC)/(C1 + C2) with ⟨v_a⟩ = 2.5 V: 150/147 V (charge conservation)."""
    circuit = parse_circuit("""
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", repeat = { period = "100 us", duty = "50 %", levels = ["5 V", "0 V"], count = 3 } }
R1 = { kind = "resistor", nodes = ["in", "a"], value = "1k" }
C1 = { kind = "capacitor", nodes = ["a", "m"], value = "100n", initial = "1 V" }
C2 = { kind = "capacitor", nodes = ["m", "gnd"], value = "47n", initial = "0 V" }
""")
    middle = Probe("node", ("m",))
    for engine, rel in ((exact_solve(circuit), 1e-12), (numeric_solve(circuit), 1e-6)):
        assert engine.periodic(middle).average == pytest.approx(150 / 147, rel=rel)


# ----------------------------------------------------------------------------- no steady state
def test_no_repeat_means_no_window():
    circuit = parse_circuit("""
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "1 V" }
R1 = { kind = "resistor", nodes = ["in", "out"], value = "1k" }
C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1u" }
""")
    assert circuit.periodic is None
    assert exact_solve(circuit).periodic(OUT).reason == NO_WINDOW


def test_charge_pumped_into_a_node_without_dc_path_grows():
    """A current source charging a capacitor that nothing discharges has no steady state."""
    circuit = parse_circuit("""
[parts]
I1 = { kind = "current-source", nodes = ["gnd", "out"], value = "0 A", repeat = { period = "1 ms", duty = "50 %", levels = ["1 mA", "0 A"], count = 3 } }
C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1u", initial = "0 V" }
[settings]
acknowledge = ["out"]
""")
    assert exact_solve(circuit).periodic(OUT).reason == GROWS
    assert numeric_solve(circuit).periodic(OUT).reason == GROWS


# ----------------------------------------------------------------------------- hand fields
def _check(text: str):
    """The one check of ``text`` through the comparator (both engines)."""
    from harness.compare import compare_file
    circuit = parse_circuit(text)
    result = compare_file(circuit, exact_solve(circuit), numeric_solve(circuit))
    return {f.name: f for f in result.checks[0].fields}


def test_hand_fields_pass_and_a_half_ripple_is_named():
    """Hand steady-state values from the sympy solution pass; a ripple given as the peak
    amplitude (half of peak-to-peak) is a mismatch that says so."""
    vmin, vmax, avg = _rc_pwm_reference(0.5, 0.3)
    text = _pwm("50 us", count=3) + f"""
[[expect]]
node = "out"
minimum = "{vmin:.6f} V"
maximum = "{vmax:.6f} V"
average = "{avg:.6f} V"
ripple = "{(vmax - vmin) / 2:.6f} V"
settle-periods = {math.ceil(math.log(0.01) / -0.5)}
"""
    fields = _check(text)
    for name in ("minimum", "maximum", "average", "settle_periods"):
        assert fields[name].verdict == "pass", fields[name]
    assert fields["ripple"].verdict == "mismatch"
    assert "peak-to-peak" in fields["ripple"].message


def test_no_steady_state_never_passes():
    """A hand average where the period map grows is a mismatch saying why, not a pass."""
    text = """
[parts]
I1 = { kind = "current-source", nodes = ["gnd", "out"], value = "0 A", repeat = { period = "1 ms", duty = "50 %", levels = ["1 mA", "0 A"], count = 3 } }
C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1u", initial = "0 V" }
[settings]
acknowledge = ["out"]
[[expect]]
node = "out"
average = "1 V"
"""
    field = _check(text)["average"]
    assert field.verdict == "mismatch"
    assert "no periodic steady state" in field.message


def test_settle_within_sets_the_band_and_at_plays_no_part():
    """settle-within "5 %": the first-order count ceil(ln 0.05 / (−T/τ)) (the module's
    reference), T/τ = 0.37; the same block at a later event of the window gives the same
    verdicts (the steady state belongs to the window, not to an event)."""
    want = math.ceil(math.log(0.05) / -0.37)
    vmin, vmax, avg = _rc_pwm_reference(0.37, 0.3)
    block = f"""
[[expect]]
node = "out"
at = "{{at}}"
average = "{avg:.6f} V"
ripple = "{vmax - vmin:.6f} V"
settle-periods = {want}
settle-within = "5 %"
"""
    for at in ("0 s", "111 us"):
        fields = _check(_pwm("37 us") + block.format(at=at))
        assert {f.verdict for f in fields.values() if f.name in
                ("average", "ripple", "settle_periods")} == {"pass"}, fields
        assert fields["settle_periods"].extra["settle_within"] == pytest.approx(0.05)
        assert fields["settle_periods"].closed_form == want


class _Unestablished:
    """A numerical engine's solution whose periodic steady state is not established (or
    grows): every other answer is the engine's own."""

    def __init__(self, inner, reason):
        self._inner, self._reason = inner, reason

    def __getattr__(self, name):
        return getattr(self._inner, name)

    def periodic(self, probe, fraction=0.01):
        from harness.results import PeriodicValue
        return PeriodicValue.without(self._inner.circuit.periodic, fraction, self._reason)


@pytest.mark.parametrize("reason, verdict", [("not-established", "pass"),
                                             (GROWS, "engines-disagree")])
def test_a_numerical_engine_without_a_steady_state_is_never_a_silent_pass(reason, verdict):
    """The numerical engine that cannot establish the steady state leaves the closed form's
    value standing alone with a note saying why; one that says the period map grows where the
    closed form finds a steady state is an engine disagreement."""
    from harness.compare import compare_file
    _, _, avg = _rc_pwm_reference(0.5, 0.3)
    circuit = parse_circuit(_pwm("50 us") + f'[[expect]]\nnode = "out"\naverage = "{avg:.6f} V"\n')
    numeric = _Unestablished(numeric_solve(circuit), reason)
    field = compare_file(circuit, exact_solve(circuit), numeric).checks[0].fields[-1]
    assert field.name == "average" and field.verdict == verdict
    assert field.numeric is None
    assert ("not cross-checked" if verdict == "pass" else "grows") in field.message


def test_periodic_fields_are_labelled_in_the_reports():
    """Every report names the fields by their declaration; the settle count says its band."""
    from harness.report.common import field_label
    fields = _check(_pwm("50 us") + '[[expect]]\nnode = "out"\nripple = "1 V"\n'
                    'settle-periods = 10\n')
    assert field_label(fields["ripple"]) == "ripple over a period (periodic steady state)"
    assert field_label(fields["settle_periods"]) == "periods to settle (within 1 % of the start)"


def test_spec_limits_of_the_ripple_over_a_resistor_spread():
    """R1 = 10 kΩ ± 10 %: the ripple falls as τ grows, so its extremes are the sympy steady
    state (above) at T/τ = 50/110 and 50/90; the settle count's at its corners too."""
    from harness.variation import analyse
    text = _pwm("50 us", count=4).replace('value = "10k"', 'value = "10k", spread = "10%"')
    circuit = parse_circuit(text + """
[variation]
samples = 50
seed = 3
[[expect]]
node = "out"
ripple = "0.5 V"
spec = { ripple = { max = "1.5 V" }, settle-periods = { max = 12 } }
""")
    spreads = {s.name: s for s in analyse.analyse_circuit(circuit, numeric=False)}
    low, high = (_rc_pwm_reference(ratio, 0.3) for ratio in (50 / 110, 50 / 90))
    assert spreads["ripple"].low == pytest.approx(low[1] - low[0], rel=1e-7)
    assert spreads["ripple"].high == pytest.approx(high[1] - high[0], rel=1e-7)
    counts = [math.ceil(math.log(0.01) / -ratio) for ratio in (50 / 110, 50 / 90)]
    assert (spreads["settle_periods"].low, spreads["settle_periods"].high) == \
        (min(counts), max(counts))


@pytest.mark.parametrize("name", ["pwm-current-setpoint.toml", "gate-bias-doubler.toml"])
def test_periodic_library_circuits_pass_their_steady_state_fields(name):
    """The bundled periodic-drive circuits (hand values from the two-exponential steady state,
    the small-ripple estimate and the charge-sharing recursion in each file's comments) pass
    every periodic field, both engines computing it."""
    from pathlib import Path
    from harness.runner import check_file
    path = Path(__file__).resolve().parents[1] / "circuits" / "library" / "periodic" / name
    result = check_file(str(path))
    periodic = [f for c in result.checks for f in c.fields
                if f.name in ("minimum", "maximum", "average", "ripple", "settle_periods")]
    assert result.verdict == "pass"
    assert len(periodic) >= 6
    assert all(f.verdict == "pass" and f.numeric is not None for f in periodic), periodic


def test_plot_shows_the_steady_state_periods_beside_the_hand_ripple():
    """A check with periodic fields gets a second panel: three periods of the periodic steady
    state in both engines (time from a period's start), the steady state's extremes and the
    hand ripple about the hand average (the legend and the panel's y-range are in the SVG's
    metadata).  Reference: the two-exponential steady state of the RC filter (sympy)."""
    import json
    import xml.etree.ElementTree as ET
    from harness.report.plots import plot_check
    from harness.compare import compare_file
    vmin, vmax, avg = _rc_pwm_reference(0.5, 0.3)
    circuit = parse_circuit(_pwm("50 us", count=30) + f"""
[[expect]]
node = "out"
average = "{avg:.6f} V"
ripple = "{vmax - vmin:.6f} V"
""")
    check = compare_file(circuit, exact_solve(circuit), numeric_solve(circuit)).checks[0]
    trace = check.trace
    assert trace.periods_steady
    assert 0 < trace.periods_t[0] and trace.periods_t[-1] == pytest.approx(3 * 50e-6)
    assert abs(trace.periods_closed.min() - vmin) < 1e-9 * vmax
    assert abs(trace.periods_closed.max() - vmax) < 1e-9 * vmax
    assert np.max(np.abs(trace.periods_numeric - trace.periods_closed)) < 1e-4 * vmax
    meta = ET.fromstring(plot_check(check)).find("{http://www.w3.org/2000/svg}metadata")
    facts = json.loads(meta.text)
    assert {"steady-state minimum", "steady-state maximum"} <= set(facts["legend"])
    assert any(label.startswith("hand ripple") for label in facts["legend"])
    low, high = facts["ylims"][1]
    assert low <= vmin and high >= vmax


def test_doubler_plot_shows_the_window_its_check_judges():
    """The gate-bias doubler's window is 6 periods but settles in 49: its last periods
    (6-10 V) are not the steady state the periodic fields judge (24 V).  The periods panel
    shows that steady state in both engines, and the first panel has points inside its 5 µs
    interval (the held decay lasts 110 ms).  Reference: the charge-sharing recursion of the
    file's comment, v_a = 2·Vin·CF·k/(CF + CO − k·CO), v_b = (CO·v_a + 2·Vin·CF)/(CF + CO)
    with k = e^(−5 µs/(RL·CO) − 5 µs/(RL·(CF + CO))) (charge conservation when capacitors
    are connected, and the RC decay between sharings: common practice)."""
    from pathlib import Path
    from harness.circuitfile import read_circuit
    from harness.compare import compare_file
    path = Path(__file__).resolve().parents[1] / "circuits" / "library" / "periodic" / \
        "gate-bias-doubler.toml"
    circuit = read_circuit(str(path))
    vin, cf, co, rl = 12.0, 1e-6, 10e-6, 1e4
    k = math.exp(-5e-6 / (rl * co) - 5e-6 / (rl * (cf + co)))
    v_a = 2 * vin * cf * k / (cf + co - k * co)
    v_b = (co * v_a + 2 * vin * cf) / (cf + co)
    check = compare_file(circuit, exact_solve(circuit), numeric_solve(circuit)).checks[1]
    trace = check.trace
    assert trace.periods_steady and circuit.periodic.count < 49
    assert trace.periods_closed.min() == pytest.approx(v_a, rel=1e-9)
    assert trace.periods_closed.max() == pytest.approx(v_b, rel=1e-9)
    assert np.max(np.abs(trace.periods_numeric - trace.periods_closed)) < 1e-6 * v_b
    inside = (trace.closed_t > 5e-6) & (trace.closed_t < 10e-6)
    assert np.count_nonzero(inside) >= 100
    assert trace.closed_x[inside] == pytest.approx(24 * cf / (cf + co), rel=1e-3)
