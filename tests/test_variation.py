"""Sign-off over tolerances: each numerical check names its outside source."""

import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy import integrate

from harness import model as m
from harness.circuitfile import parse_circuit
from harness.errors import InputError
from harness.outcome import MISMATCH
from harness.variation import analyse, stats
from harness.variation.declare import parse_spread

RC = """
[variation]
samples = {n}
seed = 5
distribution = "{dist}"
[parts]
V1 = {{ kind = "voltage-source", nodes = ["a", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }}
R1 = {{ kind = "resistor", nodes = ["a", "b"], value = "1k", spread = "{a}" }}
C1 = {{ kind = "capacitor", nodes = ["b", "gnd"], value = "1u", spread = "{b}" }}
[[expect]]
node = "b"
crossing = {{ level = "0.5 V", direction = "rising" }}
spec = {{ tau = {{ max = "2 ms" }}, crossing = {{ max = "{cmax}" }} }}
"""


def _run(a="5%", b="10%", n=2000, dist="uniform", cmax="1 s"):
    c = parse_circuit(RC.format(a=a, b=b, n=n, dist=dist, cmax=cmax))
    return {s.name: s for s in analyse.analyse_circuit(c, numeric=False)}


def test_iec_60062_letters():
    # IEC 60062:2016 Table 5: F 1 %, G 2 %, J 5 %, K 10 %, M 20 %
    for letter, edge in zip("FGJKM", (0.01, 0.02, 0.05, 0.10, 0.20)):
        assert parse_spread(letter) == pytest.approx((-edge, edge))
    assert parse_spread("-20%/+80%") == pytest.approx((-0.2, 0.8))
    assert parse_spread("1 %") == pytest.approx((-0.01, 0.01))


def test_worst_case_of_rc():
    # textbook worst case of a product: RC(1 ± a)(1 ± b)
    s = _run()["tau"]
    assert s.low == pytest.approx(1e-3 * 0.95 * 0.90, rel=1e-9)
    assert s.high == pytest.approx(1e-3 * 1.05 * 1.10, rel=1e-9)
    assert s.sensitivities[0][1] == pytest.approx(1.0, rel=1e-6)


def test_rss_of_a_product():
    # RSS of a product of independent parts: τ₀(1 ± √(a² + b²)) to first order
    s = _run()["tau"]
    half = 1e-3 * math.hypot(0.05, 0.10)
    assert s.rss[0] == pytest.approx(1e-3 - half, rel=1e-6)
    assert s.rss[1] == pytest.approx(1e-3 + half, rel=1e-6)


@pytest.mark.parametrize("dist", ["uniform", "normal"])
def test_monte_carlo_mean_and_sigma_of_tau(dist):
    # exact moments of a product of independent factors: E[XY] = E[X]E[Y],
    # Var = E[X²]E[Y²] − E[X]²E[Y]²; uniform on ±a: Var = a²/3; normal: σ = a/3
    a, b, n = 0.05, 0.10, 20000
    s = _run(n=n, dist=dist)["tau"]
    var = (lambda e: e * e / 3) if dist == "uniform" else (lambda e: (e / 3) ** 2)
    mean = 1e-3
    sd = 1e-3 * math.sqrt((1 + var(a)) * (1 + var(b)) - 1)
    mc = s.monte_carlo
    assert abs(mc["mean"] - mean) < 4 * sd / math.sqrt(n)    # 4σ of the sample mean
    assert abs(mc["std"] - sd) < 4 * sd / math.sqrt(2 * (n - 1)) * 1.5


def test_yield_of_a_crossing_time_against_scipy():
    # t = RC ln 2 with R, C uniform on ±5 %, ±10 %; P(t ≤ T) by numerical integration of the
    # exact distribution (scipy.integrate.quad over R of the conditional probability in C)
    limit = 0.7e-3
    s = _run(n=20000, cmax="0.7 ms")["crossing"]

    def conditional(r):
        c_max = limit / (r * math.log(2))
        return min(max((c_max - 0.9e-6) / 0.2e-6, 0.0), 1.0) / (0.1e3)
    p, _ = integrate.quad(conditional, 0.95e3, 1.05e3, points=[1e3])
    low, high = s.monte_carlo["yield_95"]
    assert low <= p <= high
    assert s.verdict == MISMATCH


NONMONO = """
[variation]
samples = 300
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "10 V"]] }
Rs = { kind = "resistor", nodes = ["in", "a"], value = "1k" }
RL = { kind = "resistor", nodes = ["a", "gnd"], value = "700", spread = "-30%/+100%" }
C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1n" }
[[expect]]
node = "a"
energy = { part = "RL", until = "1 ms" }
spec = { energy = { max = "30 uJ" } }
"""


def _load_energy(rl: float) -> float:
    """Energy into RL over 1 ms from a 10 V step through Rs = 1 kΩ with 1 nF across RL:
    v = v∞(1 − e^(−t/τ)), v∞ = V·RL/(Rs + RL), τ = (Rs‖RL)·C, integrated by hand."""
    v, rs, c, t = 10.0, 1e3, 1e-9, 1e-3
    vinf, tau = v * rl / (rs + rl), rs * rl / (rs + rl) * c
    return vinf ** 2 / rl * (t - 2 * tau * (1 - np.exp(-t / tau))
                             + tau / 2 * (1 - np.exp(-2 * t / tau)))


def test_a_field_that_turns_inside_the_box_is_found_at_its_interior_extreme():
    """Maximum power transfer (textbook: P is largest at RL = Rs): the load energy over RL in
    490..1400 Ω peaks inside the box near 1 kΩ, not at a vertex.  Reference: scipy's bounded
    scalar search on the hand-integrated energy; the minimum is at the low vertex."""
    from scipy.optimize import minimize_scalar
    s = {x.name: x for x in analyse.analyse_circuit(parse_circuit(NONMONO), numeric=False)}
    best = minimize_scalar(lambda r: -_load_energy(r), bounds=(490, 1400), method="bounded",
                           options={"xatol": 1e-9})
    energy = s["energy"]
    assert energy.high == pytest.approx(-best.fun, rel=1e-9)
    assert 700 * (1 + energy.high_corner["RL"]) == pytest.approx(best.x, rel=1e-3)
    assert 490 < 700 * (1 + energy.high_corner["RL"]) < 1400          # interior, not a vertex
    assert energy.low == pytest.approx(_load_energy(490.0), rel=1e-9)


def test_wilson_interval():
    # Wilson (1927) score interval, computed by hand from its formula with z = 1.96:
    # 0 of 10 -> upper bound z²/(n + z²) = 3.8416/13.8416 = 0.27753
    assert stats.wilson(0, 10)[1] == pytest.approx(0.27753, abs=1e-4)


def test_bad_spread_is_located():
    text = RC.format(a="5%", b="-5%/x", n=100, dist="uniform", cmax="1 s")
    with pytest.raises(InputError) as err:
        parse_circuit(text, source="f.toml")
    assert err.value.part == "C1" and err.value.field == "spread" and err.value.line == 9


@settings(max_examples=15, deadline=None)
@given(st.floats(0.001, 0.5), st.floats(0.001, 0.5), st.integers(0, 1000))
def test_extremes_bracket_every_sample(a, b, seed):
    text = RC.format(a=a, b=b, n=200, dist="uniform", cmax="1 s").replace("seed = 5",
                                                                         f"seed = {seed}")
    for s in analyse.analyse_circuit(parse_circuit(text), numeric=False):
        finite = s.samples[np.isfinite(s.samples)]
        assert s.low <= finite.min() * (1 + 1e-12) and finite.max() <= s.high * (1 + 1e-12)
        if s.name == "tau":    # and the extremes are the textbook worst case RC(1 ± a)(1 ± b)
            assert s.low == pytest.approx(1e-3 * (1 - a) * (1 - b), rel=1e-9)
            assert s.high == pytest.approx(1e-3 * (1 + a) * (1 + b), rel=1e-9)


DRIFT = """
[variation]
samples = 400
temperature = ["-40 °C", "85 °C"]
[parts]
V1 = { kind = "voltage-source", nodes = ["a", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
R1 = { kind = "resistor", nodes = ["a", "b"], value = "1k", spread = "F", tempco = "100 ppm/K", ageing = "0.5%" }
C1 = { kind = "capacitor", nodes = ["b", "gnd"], value = "1u", spread = "K", tempco = "±30 ppm/K" }
[[expect]]
node = "b"
spec = { tau = { max = "2 ms" } }
"""


def test_tempco_and_ageing_widen_the_box_linearly():
    """Hand-derived end-of-life box (tolerance + tempco·(T − 25 °C) + ageing, summed edge by
    edge; the linear stacking of worst-case circuit analysis, common practice): R1 ±1 %
    (IEC 60062 F), 100 ppm/K over −40…85 °C is −0.65 %…+0.60 %, ageing ±0.5 % -> −2.15 %…+2.10 %;
    C1 ±10 % (K), ±30 ppm/K -> ±0.195 %.  τ's worst case is then RC(1 ± a)(1 ± b) (exact for a
    product) with those edges."""
    (s,) = analyse.analyse_circuit(parse_circuit(DRIFT), numeric=False)
    assert s.low_corner == pytest.approx({"R1": -0.0215, "C1": -0.10195}, rel=1e-12)
    assert s.high_corner == pytest.approx({"R1": 0.0210, "C1": 0.10195}, rel=1e-12)
    assert s.low == pytest.approx(1e-3 * (1 - 0.0215) * (1 - 0.10195), rel=1e-9)
    assert s.high == pytest.approx(1e-3 * (1 + 0.0210) * (1 + 0.10195), rel=1e-9)
    finite = s.samples[np.isfinite(s.samples)]
    assert s.low <= finite.min() and finite.max() <= s.high


def test_tempco_forms():
    # 1 ppm = 1e-6 (SI brochure); a ± band is symmetric, a signed value is one-sided
    from harness.variation.declare import parse_tempco
    assert parse_tempco("3930 ppm/K") == pytest.approx((3.93e-3, 3.93e-3))
    assert parse_tempco("±30 ppm/°C") == pytest.approx((-3e-5, 3e-5))
    assert parse_tempco(-150) == pytest.approx((-1.5e-4, -1.5e-4))
    with pytest.raises(ValueError):
        parse_tempco("15%")


def test_temperature_range_off_the_reference_shifts_the_box():
    """A range that does not hold 25 °C (a hot enclosure, 40…70 °C) moves the box off nominal:
    100 ppm/K gives +0.15 %…+0.45 % on top of the tolerance (hand arithmetic)."""
    text = DRIFT.replace('["-40 °C", "85 °C"]', "[40, 70]")
    (s,) = analyse.analyse_circuit(parse_circuit(text), numeric=False)
    assert s.low_corner["R1"] == pytest.approx(-0.01 + 0.0015 - 0.005, rel=1e-12)
    assert s.high_corner["R1"] == pytest.approx(0.01 + 0.0045 + 0.005, rel=1e-12)


LINK = """
[parts]
V1 = {{ kind = "voltage-source", nodes = ["bus", "gnd"], value = "0 V", steps = [["0 s", "{volts}"]]{spread} }}
R1 = {{ kind = "resistor", nodes = ["bus", "link"], value = "47" }}
C1 = {{ kind = "capacitor", nodes = ["link", "gnd"], value = "{farads}"{cspread} }}
"""


def _cautions(volts, spread="", farads="1u", cspread=""):
    from harness.report.cautions import cautions_for
    return cautions_for(parse_circuit(LINK.format(volts=volts, spread=spread, farads=farads,
                                                  cspread=cspread)))


def test_cautions_are_judged_at_the_worst_corner():
    """A 400 V link at +10 % is 440 V (hand arithmetic); 58 V is below the 60 V DC extra-low-
    voltage limit (common practice) at nominal but 60.9 V at +5 %, so the note appears only
    with the spread."""
    assert "440 V" in _cautions("400 V", ', spread = "10%"')[0]
    assert _cautions("58 V") == ()
    hot = _cautions("58 V", ', spread = "5%"')
    assert hot and "60.9 V" in hot[0] and "edge of its spread" in hot[0]


def test_stored_energy_caution_at_the_worst_corner():
    """½CV² (textbook) at the corner: 50 mF -20 %/+80 % at 12 V ±10 % holds at most
    ½ · 90 mF · (13.2 V)² = 7.841 J, against 3.6 J at nominal."""
    text = " ".join(_cautions("12 V", ', spread = "10%"', "50m", ', spread = "-20%/+80%"'))
    assert "7.841 J" in text
    assert "3.6 J" in " ".join(_cautions("12 V", farads="50m"))


def test_sample_ranges_are_independent_of_who_evaluates_them():
    """Samples [i, j) evaluated apart are the rows of the whole run, and merging the streamed
    summaries of two ranges gives the one-pass summary; mean and σ against numpy's two-pass
    mean and std (ddof = 1) of the same values."""
    from harness.variation import sampling
    c = parse_circuit(RC.format(a="5%", b="10%", n=3 * sampling.CHUNK, dist="normal", cmax="1 s"))
    (exp,) = c.expectations
    dev, values, names, route = sampling.evaluate_range(c, exp, 0, 3 * sampling.CHUNK)
    assert names == ("tau", "crossing") and route == "batched first order"
    cut = sampling.CHUNK + 123                      # across a chunk boundary
    dev_b, values_b, _, _ = sampling.evaluate_range(c, exp, cut, 3 * sampling.CHUNK)
    np.testing.assert_array_equal(dev_b, dev[cut:])
    np.testing.assert_array_equal(values_b, values[cut:])
    limits = tuple(exp.spec[n] for n in names)
    whole, first, second = (sampling.Accumulator(limits, 2, keep=10) for _ in range(3))
    whole.add(dev, values)
    first.add(dev[:cut], values[:cut])
    second.add(dev_b, values_b)
    first.merge(second)
    for acc in (whole, first):
        for col in range(2):
            s = acc.summary(col)
            assert s["mean"] == pytest.approx(values[:, col].mean(), rel=1e-12)
            assert s["std"] == pytest.approx(values[:, col].std(ddof=1), rel=1e-9)
            assert s["max"] == values[:, col].max() and s["count"] == len(values)
            assert s["passed"] == int(stats.inside(values[:, col], limits[col]).sum())
            assert s["percentiles_of"] == 10
    assert first.samples()[0].shape == (10, 2)


def test_monte_carlo_evaluated_in_pieces_gives_the_same_sign_off():
    """Summaries of consecutive ranges, merged in order and handed to the analysis, give the
    result of the one-piece run (count, yield, mean within rounding, the kept samples)."""
    from harness.variation import sampling
    c = parse_circuit(RC.format(a="5%", b="10%", n=9000, dist="uniform", cmax="0.7 ms"))
    (exp,) = c.expectations
    whole = analyse.analyse_expectation(c, exp, numeric=False)
    acc = sampling.accumulate_range(c, exp, 0, 5000)
    acc.merge(sampling.accumulate_range(c, exp, 5000, 9000))
    pieces = analyse.analyse_expectation(c, exp, numeric=False, samples=acc)
    for a, b in zip(whole, pieces):
        assert a.verdict == b.verdict and (a.low, a.high) == (b.low, b.high)
        assert a.monte_carlo["passed"] == b.monte_carlo["passed"]
        assert a.monte_carlo["mean"] == pytest.approx(b.monte_carlo["mean"], rel=1e-12)
        np.testing.assert_array_equal(a.samples, b.samples)


LADDER = """
[variation]
samples = 70
[parts]
V1 = { kind = "voltage-source", nodes = ["a", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
R1 = { kind = "resistor", nodes = ["a", "b"], value = "1k", spread = "J" }
C1 = { kind = "capacitor", nodes = ["b", "gnd"], value = "1u" }
R2 = { kind = "resistor", nodes = ["b", "c"], value = "1k" }
C2 = { kind = "capacitor", nodes = ["c", "gnd"], value = "1u" }
R3 = { kind = "resistor", nodes = ["c", "gnd"], value = "2k", spread = "J" }
[[expect]]
node = "c"
spec = { final = { min = "0.4 V", max = "0.6 V" } }
"""


def test_exact_engine_route_runs_a_bounded_reproducible_sample(monkeypatch):
    """A second-order ladder is not for the batched route: the exact engine solves the first
    EXACT_MAX_SAMPLES samples only, the report says so, and the same file gives the same
    figures.  final = R3/(R1 + R2 + R3) (resistive divider, hand arithmetic) at the corners:
    1.9k/(1.05k + 1k + 1.9k) … 2.1k/(0.95k + 1k + 2.1k)."""
    monkeypatch.setattr(analyse, "EXACT_MAX_SAMPLES", 30)     # the mechanism, at a test's cost
    c = parse_circuit(LADDER)
    (s,) = analyse.analyse_circuit(c, numeric=False)
    assert s.route == "exact engine per sample"
    assert s.monte_carlo["count"] == 30
    assert any("first 30 of the 70 samples" in m for m in s.messages)
    assert s.low == pytest.approx(1.9 / 3.95, rel=1e-9)
    assert s.high == pytest.approx(2.1 / 4.05, rel=1e-9)
    (exp,) = c.expectations             # the same first samples again: reproducible
    quantities = analyse.varied(c, exp)
    fn, _ = analyse.evaluator(c, exp, ("final",), quantities)
    low, high = analyse.edges(quantities)
    again = analyse.monte_carlo(fn, low, high, c.variation, (exp.spec["final"],), most=30)
    assert again.summary(0) == s.monte_carlo
