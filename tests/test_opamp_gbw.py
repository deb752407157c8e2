"""The op-amp's gain-bandwidth product (``gbw``, the single-pole model) in both engines.

The references are outside the project: each stage's closed-loop step response is derived here
from the circuit's own equations (Kirchhoff's current law at the inverting input, the op-amp's
open-loop gain A(s) = A0/(1 + s·A0/ω_t) with ω_t = 2π·GBW, or ω_t/s without a DC gain) and
inverted exactly by sympy (``inverse_laplace_transform``); ``scipy.signal.lti`` steps the same
transfer functions as a second reference.  Common practice, named beside its check: the
closed-loop bandwidth of a stage is GBW divided by its noise gain, so a unity-gain follower
settles with τ = 1/(2π·GBW).
"""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest
import scipy.signal
import sympy as sp
from hypothesis import given, settings
from hypothesis import strategies as st

from harness import model as m
from harness.circuitfile import parse_circuit
from harness.closedform import solve as exact
from harness.simulate.engine import solve as numeric

t = sp.Symbol("t", positive=True)
s = sp.Symbol("s")
#: each engine with the agreement the project holds it to (tests/test_opamp.py: the closed
#: form to rounding, the numerical engine to its default tolerance)
ENGINES = [pytest.param(exact, 1e-9, id="closedform"), pytest.param(numeric, 2e-5, id="simulate")]
V = 1                    # the step of every input source, V


def _circuit(parts: str):
    head = ('title = "op-amp stage with a gain-bandwidth product"\n[parts]\n'
            'V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", '
            'steps = [["0 s", "1 V"]] }\n')
    return parse_circuit(head + parts, "stage.toml")


def _node(name: str) -> m.Probe:
    return m.Probe(m.NODE, (name,))


def _omega(gbw) -> sp.Expr:
    return 2 * sp.pi * sp.nsimplify(gbw)


def _open_loop(gbw, a0=None) -> sp.Expr:
    """A(s): the single pole A0/(1 + s·A0/ω_t), or the integrator ω_t/s without a gain."""
    wt = _omega(gbw)
    return wt / s if a0 is None else a0 / (1 + s * a0 / wt)


def _step(transfer: sp.Expr) -> sp.Expr:
    """The exact step response V·H(s)/s for t > 0 (sympy inverse Laplace; left unsimplified,
    and evaluated in 30 digits by ``_at``, since e^(−a·t)·cosh(b·t) overflows in floats)."""
    out = sp.inverse_laplace_transform(sp.apart(sp.cancel(V * transfer / s), s), s, t)
    return out.subs(sp.Heaviside(t), 1)


def _at(expr: sp.Expr, x: float) -> float:
    """The real value of ``expr`` at t = x, evaluated in 30 significant digits."""
    return float(sp.re(expr.evalf(30, subs={t: sp.Float(x, 30)})))


def _lti_step(transfer: sp.Expr, times: np.ndarray) -> np.ndarray:
    """scipy.signal.lti's step response of the same transfer function (second reference)."""
    num, den = sp.fraction(sp.cancel(sp.together(transfer)))
    num = [float(c) for c in sp.Poly(num, s).all_coeffs()]
    den = [float(c) for c in sp.Poly(den, s).all_coeffs()]
    system = scipy.signal.lti(num, den)
    return V * np.array([system.step(T=[0.0, x])[1][1] for x in times])   # evenly spaced T


def _check(solve, rel, circuit, probe, expr, times, scale) -> None:
    got = solve(circuit).waveform(probe, 0, np.asarray(times))
    want = np.array([_at(expr, x) for x in times])
    assert np.max(np.abs(got - want)) <= rel * scale, (got, want)


FOLLOWER = '''R1 = { kind = "resistor", nodes = ["out", "gnd"], value = "10k" }
U1 = { kind = "opamp", nodes = ["out", "gnd"], control = ["in", "out"], gbw = "1 MHz" }
'''


@pytest.mark.parametrize("solve,rel", ENGINES)
def test_follower_with_gbw_alone_is_first_order_with_tau_one_over_omega_t(solve, rel):
    """Unity-gain follower, A(s) = ω_t/s: Vo = A/(1 + A)·V/s = ω_t/(s + ω_t)·V/s (sympy
    inverse Laplace), 1 − e^(−ω_t·t); τ = 1/(2π·GBW) (common practice: bandwidth = GBW over
    a noise gain of 1).  The output cannot jump any more: after = before = 0."""
    a = _open_loop(10**6)
    ref = _step(a / (1 + a))
    tau = 1 / (2 * math.pi * 1e6)
    assert sp.simplify(ref - (1 - sp.exp(-_omega(10**6) * t))) == 0
    circuit = _circuit(FOLLOWER)
    _check(solve, rel, circuit, _node("out"), ref, [0.1 * tau, tau, 3 * tau, 8 * tau], 1.0)
    f = solve(circuit).features(_node("out"), 0)
    assert f.tau == pytest.approx(tau, rel=max(rel, 1e-9) * 10)
    assert abs(f.after) <= 1e-6 and f.final == pytest.approx(1.0, rel=1e-6)


NONINVERTING = '''R1 = { kind = "resistor", nodes = ["x", "gnd"], value = "1k" }
R2 = { kind = "resistor", nodes = ["x", "out"], value = "3k" }
U1 = { kind = "opamp", nodes = ["out", "gnd"], control = ["in", "x"], gain = "1000", \
gbw = "1 MHz" }
'''


def _noninverting_transfer(a0=1000, gbw=10**6) -> sp.Expr:
    """Vo/Vin = A/(1 + A·β), β = R1/(R1 + R2) = 1/4 (the noise gain G = 4)."""
    a = _open_loop(gbw, a0)
    return a / (1 + a * sp.Rational(1000, 4000))


@pytest.mark.parametrize("solve,rel", ENGINES)
def test_noninverting_amplifier_with_finite_gain_and_gbw(solve, rel):
    """Noise gain G = 1 + R2/R1 = 4, A0 = 1000, GBW = 1 MHz: Vo = A/(1 + A/G)·V/s (sympy
    inverse Laplace).  τ is read off the closed loop's pole as sympy finds it, not written by
    hand; it is close to G/(2π·GBW) (common practice) and the final value to G/(1 + G/A0)."""
    h = _noninverting_transfer()
    pole = sp.solve(sp.denom(sp.cancel(h)), s)
    assert len(pole) == 1
    tau = float(-1 / pole[0])
    assert tau == pytest.approx(4 / (2 * math.pi * 1e6), rel=5e-3)
    ref = _step(h)
    circuit = _circuit(NONINVERTING)
    _check(solve, rel, circuit, _node("out"), ref, [0.2 * tau, tau, 4 * tau], 4.0)
    f = solve(circuit).features(_node("out"), 0)
    assert f.tau == pytest.approx(tau, rel=max(rel, 1e-9) * 10)
    assert f.final == pytest.approx(float(sp.limit(h, s, 0)), rel=1e-6)
    assert f.final == pytest.approx(4 / (1 + 4 / 1000), rel=1e-9)


INTEGRATOR = '''R1 = { kind = "resistor", nodes = ["in", "x"], value = "1k" }
C1 = { kind = "capacitor", nodes = ["x", "out"], value = "1u", initial = "0 V" }
U1 = { kind = "opamp", nodes = ["out", "gnd"], control = ["gnd", "x"], gbw = "1 kHz" }
'''


def _integrator_transfer() -> sp.Expr:
    """Inverting integrator, KCL at x: (Vin − Vx)/R = s·C·(Vx − Vo), Vo = −A(s)·Vx with
    A = ω_t/s (no DC gain): solved for Vo/Vin by sympy."""
    r, c = 1000, sp.Rational(1, 10**6)
    vin, vx, vo = sp.symbols("vin vx vo")
    a = _open_loop(10**3)
    sol = sp.solve([sp.Eq((vin - vx) / r, s * c * (vx - vo)), sp.Eq(vo, -a * vx)], [vx, vo],
                   dict=True)[0]
    return sp.cancel(sol[vo] / vin)


@pytest.mark.parametrize("solve,rel", ENGINES)
def test_inverting_integrator_with_finite_gbw_is_second_order(solve, rel):
    """R = 1 kΩ, C = 1 µF, GBW = 1 kHz: Vo/Vin is second order (sympy); its inverse Laplace
    is the reference.  Long after the poles, the ideal ramp −V·t/(R·C) (common practice) is
    followed with the lag of the finite loop gain."""
    h = _integrator_transfer()
    assert sp.degree(sp.denom(h), s) == 2
    ref = _step(h)
    circuit = _circuit(INTEGRATOR)
    times = [2e-5, 1e-4, 3e-4, 1e-3, 3e-3]
    _check(solve, rel, circuit, _node("out"), ref, times, 3.0)
    sol = solve(circuit)
    if solve is exact:         # the non-zero pole (the other is the integrator's s = 0)
        poles = [p for p in sp.solve(sp.denom(h), s) if p != 0]
        assert sol.time_constants(0) == pytest.approx([float(-1 / p) for p in poles], rel=1e-9)
    late = sol.waveform(_node("out"), 0, np.array([5e-3, 6e-3]))
    slope = _at(ref.diff(t), 5.5e-3)
    assert (late[1] - late[0]) / 1e-3 == pytest.approx(slope, rel=max(rel, 1e-9) * 100)
    assert slope == pytest.approx(-V / 1e-3, rel=0.2)       # near the ideal ramp −V/(R·C)


@pytest.mark.parametrize("name,parts,transfer,times,scale", [
    ("follower", FOLLOWER, lambda: (lambda a: a / (1 + a))(_open_loop(10**6)),
     [1e-8, 1.6e-7, 5e-7, 1.2e-6], 1.0),
    ("non-inverting", NONINVERTING, _noninverting_transfer, [1e-7, 6e-7, 2e-6, 5e-6], 4.0),
    ("integrator", INTEGRATOR, _integrator_transfer, [2e-5, 1e-4, 3e-4, 1e-3, 3e-3], 3.0),
])
def test_both_engines_against_scipy_lti_step(name, parts, transfer, times, scale):
    """scipy.signal.lti(num, den).step of the same transfer functions: a reference that
    shares nothing with sympy's inverse Laplace transform (LTI state-space stepping)."""
    want = _lti_step(transfer(), np.asarray(times))
    circuit = _circuit(parts)
    for solve, rel in ((exact, 1e-7), (numeric, 2e-5)):
        got = solve(circuit).waveform(_node("out"), 0, np.asarray(times))
        assert np.max(np.abs(got - want)) <= rel * scale, (name, solve, got, want)


CHARGE_AMPLIFIER = '''C0 = { kind = "capacitor", nodes = ["in", "x"], value = "2u" }
R2 = { kind = "resistor", nodes = ["x", "out"], value = "2k" }
C1 = { kind = "capacitor", nodes = ["x", "out"], value = "1u" }
U1 = { kind = "opamp", nodes = ["out", "gnd"], control = ["gnd", "x"], gbw = "100 kHz" }
'''


def _charge_amplifier_transfer() -> sp.Expr:
    """Charge amplifier (source – C0 – x – C1 ‖ R2 – output), KCL at x:
    (Vin − Vx)·s·C0 = (Vx − Vo)·(s·C1 + 1/R2), Vo = −A(s)·Vx with A = ω_t/s: Vo/Vin by sympy."""
    c0, r2, c1 = sp.Rational(2, 10**6), 2000, sp.Rational(1, 10**6)
    vin, vx, vo = sp.symbols("vin vx vo")
    a = _open_loop(10**5)
    sol = sp.solve([sp.Eq((vin - vx) * s * c0, (vx - vo) * (s * c1 + 1 / r2)),
                    sp.Eq(vo, -a * vx)], [vx, vo], dict=True)[0]
    return sp.cancel(sol[vo] / vin)


@pytest.mark.parametrize("solve,rel", ENGINES)
def test_charge_amplifier_with_gbw(solve, rel):
    """The source's step reaches the output through a loop of capacitors (C0, C1) and the
    amplifier's output, whose voltage is its internal state w: the output cannot jump and
    follows the fast mode of the loop (τ ≈ (1 + C0/C1)/ω_t, the noise gain over ω_t, common
    practice), then decays with R2·C1 from about −V·C0/C1 (common practice).  Reference: sympy
    inverse Laplace of ``_charge_amplifier_transfer``.  The numerical engine integrates it in
    a few hundred steps, without a warning (its carrier voltage u = v_out − w is then its own
    coordinate, not a difference of two volt-sized states)."""
    h = _charge_amplifier_transfer()
    poles = sorted(float(-1 / p) for p in sp.solve(sp.denom(h), s))
    assert poles == pytest.approx([3 / (2 * math.pi * 1e5), 2e-3], rel=5e-3)
    ref = _step(h)
    circuit = _circuit(CHARGE_AMPLIFIER)
    sol = solve(circuit)
    assert not sol.warnings, sol.warnings
    _check(solve, rel, circuit, _node("out"), ref, [1e-7, 1e-6, 5e-6, 2e-5, 1e-3, 5e-3], 2.0)
    f = sol.features(_node("out"), 0)
    assert abs(f.after) <= 1e-6 * 2.0 and abs(f.final) <= 1e-6 * 2.0
    if solve is numeric:
        assert sum(run.stats.steps for run in sol.runs) < 5_000


def test_derive_keeps_the_charge_amplifiers_output_through_the_charge_balance():
    """At the step the loop C0–C1 shares charge (C0·V/(C0 + C1) on C1, charge conservation:
    common practice) while the output, the pole's state, stays at 0 V (sympy: the initial
    value theorem on ``_charge_amplifier_transfer``·V/s is 0); the derivation says both."""
    from harness.derive import derive
    from harness.report.derivation import lines
    assert sp.limit(_charge_amplifier_transfer(), s, sp.oo) == 0
    circuit = _circuit(CHARGE_AMPLIFIER + '[[expect]]\nnode = "out"\nat = "0 s"\n')
    (d,) = derive(circuit, exact(circuit))
    text = "\n".join(lines(d))
    assert "C1: 0 = 0 before → C0·1.0 V/(C0 + C1) = 666.7 m after" in text, text
    assert "U1: its output voltage is a pole's state and does not jump" in text, text
    assert abs(d.after.value) < 1e-12


FEEDBACK_CAP = '''R1 = { kind = "resistor", nodes = ["x", "gnd"], value = "1k" }
R2 = { kind = "resistor", nodes = ["x", "out"], value = "3k" }
C1 = { kind = "capacitor", nodes = ["x", "out"], value = "470n" }
U1 = { kind = "opamp", nodes = ["out", "gnd"], control = ["in", "x"]GBW }
'''


@pytest.mark.parametrize("solve,rel", ENGINES)
def test_pole_keeps_the_output_from_jumping(solve, rel):
    """Non-inverting stage with a feedback capacitor: with the ideal op-amp the output steps
    by V at the event (tests/test_opamp.py); with GBW = 1 MHz the output voltage is a state,
    so x(t_k+) = x(t_k−) = 0 and the step is carried by a fast mode instead.  Reference: sympy
    inverse Laplace of Vo = V/s·A/(1 + A·Z1/(Z1 + Z2)), Z2 = R2 ‖ 1/(sC), A = ω_t/s."""
    r1, r2, c = 1000, 3000, sp.Rational(47, 10**8)
    z2 = r2 / (1 + s * r2 * c)
    a = _open_loop(10**6)
    ref = _step(a / (1 + a * r1 / (r1 + z2)))
    circuit = _circuit(FEEDBACK_CAP.replace("GBW", ', gbw = "1 MHz"'))
    _check(solve, rel, circuit, _node("out"), ref, [5e-8, 3e-7, 1e-6, 1e-4, 1e-3, 5e-3], 4.0)
    f = solve(circuit).features(_node("out"), 0)
    assert abs(f.after) <= 1e-6 * 4.0 and f.final == pytest.approx(4.0, rel=1e-6)
    jump = solve(circuit).jump(0)
    assert not jump.charges or max(abs(q) for q in jump.charges.values()) < 1e-12


@pytest.mark.parametrize("solve,rel", ENGINES)
def test_large_gbw_returns_the_nullor_values(solve, rel):
    """GBW -> infinity: the single-pole stage's waveform after its fast mode and its final value
    approach the ideal op-amp's (sympy's V/s·(1 + Z2/R1) of tests/test_opamp.py) as 1/GBW."""
    r1, r2, c = 1000, 3000, sp.Rational(47, 10**8)
    ideal = _step(1 + r2 / (1 + s * r2 * c) / r1)
    times = np.array([1e-5, 3e-4, 1.41e-3, 5e-3])
    want = np.array([_at(ideal, x) for x in times])
    nullor = solve(_circuit(FEEDBACK_CAP.replace("GBW", ""))).waveform(_node("out"), 0, times)
    assert np.max(np.abs(nullor - want)) <= rel * 4.0
    errors = []
    for gbw in ("10 MHz", "1 GHz"):
        circuit = _circuit(FEEDBACK_CAP.replace("GBW", f', gbw = "{gbw}"'))
        sol = solve(circuit)
        got = sol.waveform(_node("out"), 0, times)
        errors.append(np.max(np.abs(got - want)))
        assert sol.features(_node("out"), 0).final == pytest.approx(4.0, rel=1e-6)
    assert errors[1] <= max(errors[0] / 50, rel * 4.0)
    assert errors[1] <= 1e-4 * 4.0


@settings(max_examples=25, deadline=None)
@given(r=st.floats(1.0, 1e6), c=st.floats(1e-12, 1e-3), gbw=st.floats(1e3, 1e9))
def test_follower_tau_is_one_over_two_pi_gbw_for_any_load(r, c, gbw):
    """For any positive R, C and GBW, a follower driving an R–C load: its output's closed-form
    τ is 1/(2π·GBW) (common practice; the load cannot reach an ideal output) within 1e-9."""
    circuit = _circuit(f'''R1 = {{ kind = "resistor", nodes = ["out", "y"], value = "{r!r}" }}
C1 = {{ kind = "capacitor", nodes = ["y", "gnd"], value = "{c!r}" }}
U1 = {{ kind = "opamp", nodes = ["out", "gnd"], control = ["in", "out"], gbw = "{gbw!r}" }}
''')
    tau = exact(circuit).features(_node("out"), 0).tau
    assert tau == pytest.approx(1 / (2 * math.pi * gbw), rel=1e-9)


POSITIVE_FEEDBACK = '''title = "comparator wired by mistake: feedback to the non-inverting input"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
R1 = { kind = "resistor", nodes = ["in", "x"], value = "10k" }
R2 = { kind = "resistor", nodes = ["x", "out"], value = "10k" }
U1 = { kind = "opamp", nodes = ["out", "gnd"], control = ["x", "gnd"], gbw = "1 MHz" }

[[expect]]
node = "out"
at = "0 s"
before = "0 V"
final = "-1 V"
'''


def test_positive_feedback_with_gbw_grows_and_fails_the_check(tmp_path):
    """Feedback to the non-inverting input: w' = ω_t·v_x with v_x = (v_in + v_out)/2 grows as
    e^(ω_t·t/2) (the circuit's own equation).  The nullor would settle at the inverting
    gain's −1 V (the hand value written here), which must not pass: the growth hazard reports
    it and the check exits 1."""
    circuit = parse_circuit(POSITIVE_FEEDBACK, "pf.toml")
    sol = exact(circuit)
    assert sol.hazards, "the growing mode is a hazard"
    rates = [mode.rate.real for mode in sol.interval_modes(0)]
    assert max(rates) == pytest.approx(2 * math.pi * 1e6 / 2, rel=1e-9)
    path = tmp_path / "pf.toml"
    path.write_text(POSITIVE_FEEDBACK)
    done = subprocess.run([sys.executable, "-m", "harness", "check", str(path), "--json",
                           "--no-report"], capture_output=True, text=True, timeout=300)
    assert done.returncode == 1, done.stdout + done.stderr
    result = json.loads(done.stdout)["files"][0]
    assert result["verdict"] != "pass"
    assert any(f["code"] == "unbounded-growth" for f in result["findings"]), result


def test_dominant_tau_counts_the_pole_as_a_zero_value_term():
    """The sum of the zero-value time constants equals the sum of the modes' time constants,
    the first coefficient of the characteristic polynomial (Cochrun & Grabel, IEEE Trans.
    Circuit Theory 20 (1973) 8-14), so the pole's own term must be in it: for the feedback-
    capacitor stage with GBW = 1 MHz, sympy's denominator coefficient is the reference, and the
    numerical engine's sum over its own modes agrees."""
    r1, r2, c = 1000, 3000, sp.Rational(47, 10**8)
    z2 = r2 / (1 + s * r2 * c)
    a = _open_loop(10**6)
    den = sp.Poly(sp.denom(sp.cancel(a / (1 + a * r1 / (r1 + z2)))), s)
    b0, b1 = den.all_coeffs()[-1], den.all_coeffs()[-2]
    want = float(b1 / b0)
    circuit = _circuit(FEEDBACK_CAP.replace("GBW", ', gbw = "1 MHz"'))
    closed = exact(circuit).dominant(_node("out"), 0)
    assert closed.tau == pytest.approx(want, rel=1e-9)
    assert closed.terms["U1"] == pytest.approx(4 / (2 * math.pi * 1e6), rel=1e-9)
    assert numeric(circuit).dominant(_node("out"), 0).tau == pytest.approx(want, rel=2e-5)


def test_derive_carries_the_pole_and_the_output_state(tmp_path, capsys):
    """``tauproof derive`` on the non-inverting stage with a second event: τ is the closed
    loop's pole, A0·(R1 + R2)/(2π·GBW·(R1 + R2 + R1·A0)) (sympy's pole of A/(1 + A·β),
    ``test_noninverting_amplifier_with_finite_gain_and_gbw``: 634.1 ns at G = 4, A0 = 1000,
    GBW = 1 MHz), the GBW shown as such (ω_t = 2π·GBW, 1/ω_t = 159.2 ns) rather than as a
    bare 1/ω_t, and at the second event the output starts from the value it held (its
    state), G·V/(1 + G/A0) = 3.984 V, instead of jumping: the continuity sentence names it.
    The pasteable τ, read back by the hand-value evaluator, is sympy's pole."""
    from harness import formula
    from harness.derive import derive
    from harness.derive.network import Symbols
    from harness.cli import main
    tau = float(-1 / sp.solve(sp.denom(sp.cancel(_noninverting_transfer())), s)[0])
    path = tmp_path / "ni.toml"
    path.write_text('title = "ni"\n[parts]\nV1 = { kind = "voltage-source", nodes = ["in", '
                    '"gnd"], value = "0 V", steps = [["0 s", "1 V"], ["20 us", "0 V"]] }\n'
                    + NONINVERTING + '[[expect]]\nnode = "out"\nat = "20 us"\nfinal = "0 V"\n')
    main(["derive", str(path)])
    out = capsys.readouterr().out
    assert f"= {tau * 1e9:.4g} ns" in out, out
    assert "τ = U1·(R1 + R2)/(2·π·1000000.0 Hz·(R1 + R2 + R1·U1))" in out, out
    assert "GBW = 1 MHz" in out and "1/ω_t = 159.2 ns" in out, out
    assert "1.5915494309189535e-07" not in out, out
    assert ("capacitor voltages, inductor currents and the output voltage of U1 (a pole's "
            "state) are continuous") in out, out
    assert "x(t_k+) = U1·1.0 V·(R1 + R2)/(R1 + R2 + R1·U1) = 3.984 V" in out, out
    circuit = parse_circuit(path.read_text(), str(path))
    (d,) = derive(circuit, exact(circuit))
    values, units = Symbols(circuit).scope()
    assert d.tau.formula == "U1*(R1 + R2)/(2*pi*1000000.0 Hz*(R1 + R2 + R1*U1))"
    assert formula.evaluate("= " + d.tau.formula, values, "s", units) == pytest.approx(
        tau, rel=1e-12)
