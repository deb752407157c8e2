"""Ill-posed and extreme circuits are diagnosed, not guessed.

Ill-posed kinds go through the command line (exit 2, the part named, no traceback).  Extreme part
values are checked against sympy's exact solution of the nodal equations (the matrix exponential
of the exact rational system); the conditioning bound is checked on a circuit whose equations are
within 1e-13 of singular, where no digit can be trusted.
"""

from __future__ import annotations

import json
import re
import shlex
import textwrap
import warnings
from pathlib import Path

import numpy as np
import pytest
import sympy as sp

from harness import closedform, simulate
from harness.circuitfile import parse_circuit
from harness.cli import main
from harness.closedform.conditioning import assess
from harness.compare.trust import trusted
from harness.model import Probe
from harness.outcome import ENGINES_DISAGREE, MISMATCH, PASS

BAD = Path(__file__).parent / "bad"
#: ill-posed kinds of the issue, each a file in tests/bad/ (with its expect-error header)
ILL_POSED = {
    "floating_subcircuit": "floating sub-circuit",
    "voltage_source_loop": "loop of voltage sources",
    "closed_switch_shorts_source": "closed switch across a source",
    "current_source_cutset": "cutset of current sources",
    "vccs_cutset": "cutset of a controlled current source",
    "initial_contradicts_source": "initial voltage against a source",
    "initial_capacitor_loop_sum": "initial voltages around a loop that do not add up",
    "initial_series_inductors": "series inductors with different initial currents",
    "initial_parallel_capacitors": "parallel capacitors with different initial voltages",
    "undefined_series_capacitor": "capacitor with no DC path and no initial",
    "switch_closes_on_source_later": "switch closing onto a source at a later event",
    "switch_closes_vcvs_loop_later": "switch closing a vcvs loop at a later event",
    "switch_opens_floating_later": "switch opening a current-source cutset at a later event",
}


def header(path: Path) -> dict[str, str]:
    first = path.read_text(encoding="utf-8").split("\n", 1)[0]
    return dict(item.split("=", 1) for item in shlex.split(first.split(":", 1)[1]))


@pytest.mark.parametrize("stem", sorted(ILL_POSED))
def test_ill_posed_kind_exits_two_naming_the_part(stem, capsys):
    """Each ill-posed kind exits 2 with a one-line message naming file, part and (later) time."""
    path = BAD / f"{stem}.toml"
    want = header(path)
    code = main(["check", str(path), "--no-report"])
    out, err = capsys.readouterr()
    assert code == 2
    assert "Traceback" not in err
    assert f"part {want['part']}" in err and str(path) in err
    if "later" in stem:
        assert want["contains"] in err  # the event time, e.g. "2 ms"


def test_degenerate_controlled_source_is_named(tmp_path, capsys):
    """A vcvs whose unit gain leaves a node undetermined (found by the engine) names the part."""
    path = tmp_path / "degenerate.toml"
    path.write_text(textwrap.dedent("""
        [parts]
        V1 = { kind = "voltage-source", nodes = ["n1", "gnd"], value = "0 V", steps = [["0 s", "1 uV"]] }
        C2 = { kind = "capacitor", nodes = ["n1", "n2"], value = "3.3 uF" }
        R4 = { kind = "resistor", nodes = ["n2", "gnd"], value = "1k" }
        E1 = { kind = "vcvs", nodes = ["gnd", "n3"], gain = 1, control = ["n1", "n3"] }
        R2 = { kind = "resistor", nodes = ["n3", "gnd"], value = "1k" }
        """), encoding="utf-8")
    code = main(["check", str(path), "--no-report"])
    err = capsys.readouterr().err
    assert code == 2 and "part E1" in err and "from 0 s" in err and "Traceback" not in err


EXTREME = textwrap.dedent("""
    title = "values from 1 fF to 1 F and 1 mOhm to 1 TOhm"
    [parts]
    V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
    R1 = { kind = "resistor", nodes = ["in", "a"], value = "1 mΩ" }
    C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "0.1 F" }
    R2 = { kind = "resistor", nodes = ["a", "b"], value = "1 TΩ" }
    C2 = { kind = "capacitor", nodes = ["b", "gnd"], value = "1 fF" }
    R4 = { kind = "resistor", nodes = ["in", "d"], value = "1 Ω" }
    C4 = { kind = "capacitor", nodes = ["d", "gnd"], value = "1 F" }
    """)


def sympy_ladder(times):
    """Exact node voltages (a, b, d) of EXTREME at ``times`` (s) and its eigenvalues (1/s).

    Nodal equations C v' = -G v + g_in * 1 V from zero state (no jump: no capacitor loops),
    v(t) = v_inf + expm(A t) (v(0) - v_inf), A = -C^-1 G (sympy, exact rationals).
    """
    r1, r2, r4 = sp.Rational(1, 1000), sp.Integer(10) ** 12, sp.Integer(1)
    c1, c2, c4 = sp.Rational(1, 10), sp.Integer(10) ** -15, sp.Integer(1)
    g = sp.Matrix([[1 / r1 + 1 / r2, -1 / r2, 0], [-1 / r2, 1 / r2, 0], [0, 0, 1 / r4]])
    c = sp.diag(c1, c2, c4)
    b = sp.Matrix([1 / r1, 0, 1 / r4])
    a = -c.inv() * g
    v_inf = g.inv() * b
    values = [[float(x) for x in v_inf + (a * sp.nsimplify(t)).exp() * (-v_inf)]
              for t in times]
    rates = sorted(float(-1 / e) for e in a.eigenvals())
    return np.array(values), v_inf, rates


@pytest.fixture(scope="module")
def extreme():
    circuit = parse_circuit(EXTREME)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return circuit, closedform.solve(circuit), simulate.solve(circuit)


def test_extreme_values_closed_form_matches_sympy(extreme):
    """Closed form with parts 1 fF..1 F and 1 mOhm..1 TOhm: values and modes match sympy."""
    circuit, exact, _ = extreme
    times = [1e-4, 1e-3, 0.5, 3.0]
    ref, v_inf, taus = sympy_ladder(times)
    for j, node in enumerate("abd"):
        probe = Probe("node", (node,))
        got = exact.waveform(probe, 0, np.array(times))
        np.testing.assert_allclose(got, ref[:, j], rtol=1e-9, atol=1e-12)
        assert exact.features(probe, 0).final == pytest.approx(float(v_inf[j]), rel=1e-12)
    assert sorted(exact.time_constants(0)) == pytest.approx(taus, rel=1e-9)
    assert all(trusted(c) for c in assess(exact))


def test_extreme_values_numeric_matches_sympy(extreme):
    """The numerical engine on the same circuit: finals and waveform within its 1e-4 rule."""
    circuit, _, numeric = extreme
    times = [1e-4, 1e-3, 0.5, 3.0]
    ref, v_inf, _ = sympy_ladder(times)
    for j, node in enumerate("abd"):
        probe = Probe("node", (node,))
        np.testing.assert_allclose(numeric.waveform(probe, 0, np.array(times)), ref[:, j],
                                   rtol=1e-4, atol=1e-6)
        assert numeric.features(probe, 0).final == pytest.approx(float(v_inf[j]), rel=1e-4)


TWELVE = textwrap.dedent("""
    title = "time constants 1 ns and 1000 s"
    [parts]
    V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
    R1 = { kind = "resistor", nodes = ["in", "a"], value = "1 kΩ" }
    C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1 pF" }
    R2 = { kind = "resistor", nodes = ["in", "b"], value = "1 MΩ" }
    C2 = { kind = "capacitor", nodes = ["b", "gnd"], value = "1 mF" }
    [[expect]]
    node = "a"
    after = "0 V"
    final = "1 V"
    tau = "1 ns"
    [[expect]]
    node = "b"
    after = "0 V"
    final = "1 V"
    tau = "1000 s"
    """)


def test_twelve_decades_right_or_flagged(tmp_path, capsys):
    """tau = RC of 1 ns and 1000 s (common practice): the closed form is exact; each check either
    passes or is flagged engines-disagree, never a wrong number passed silently."""
    path = tmp_path / "twelve.toml"
    path.write_text(TWELVE, encoding="utf-8")
    code = main(["check", str(path), "--json", "--no-report"])
    data = json.loads(capsys.readouterr().out)
    checks = data["files"][0]["checks"]
    for check, tau in zip(checks, (1e-9, 1e3)):
        fields = check["fields"]
        assert fields["tau"]["closed_form"] == pytest.approx(tau, rel=1e-9)
        assert fields["final"]["closed_form"] == pytest.approx(1.0, rel=1e-12)
        assert fields["after"]["closed_form"] == pytest.approx(0.0, abs=1e-12)
        numeric_ok = all(f["numeric"] is not None and
                         abs(f["numeric"] - f["closed_form"]) <= 1e-4 * max(abs(f["closed_form"]), 1)
                         for f in fields.values())
        assert check["verdict"] == (PASS if numeric_ok else ENGINES_DISAGREE)
    assert code in (0, 1)


NEAR_SINGULAR = textwrap.dedent("""
    title = "vcvs within 1e-13 of a degenerate gain"
    [parts]
    V1 = { kind = "voltage-source", nodes = ["n1", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
    R1 = { kind = "resistor", nodes = ["n1", "n2"], value = "1k" }
    C1 = { kind = "capacitor", nodes = ["n2", "gnd"], value = "1u" }
    E1 = { kind = "vcvs", nodes = ["gnd", "n3"], gain = 1.0000000000001, control = ["n1", "n3"] }
    R2 = { kind = "resistor", nodes = ["n3", "gnd"], value = "1k" }
    [[expect]]
    node = "n3"
    final = "10 TV"
    """)


def test_conditioning_beyond_bound_reports_no_digits(tmp_path, capsys):
    """Equations 1e-13 from singular (kappa ~ 1e13 > 1e12): values None, note and warning say so."""
    path = tmp_path / "near.toml"
    path.write_text(NEAR_SINGULAR, encoding="utf-8")
    main(["check", str(path), "--json", "--no-report"])
    data = json.loads(capsys.readouterr().out)
    file = data["files"][0]
    fields = file["checks"][0]["fields"]
    assert fields["final"]["closed_form"] is None and fields["final"]["numeric"] is None
    assert any(re.search(r"conditioning \de\+1\d beyond 1e\+12 from 0 s on: values not reported",
                         m) for m in file["checks"][0]["messages"])
    assert any("ill-conditioned" in w for w in file["warnings"])


def test_conditioning_beyond_bound_withholds_the_signoff_values_too(tmp_path, capsys):
    """The same near-singular circuit with a crossing, a peak and an energy asked for: none of
    them is reported from either engine, each says why, and a hand value is not confirmed."""
    path = tmp_path / "near.toml"
    path.write_text(NEAR_SINGULAR + textwrap.dedent("""
        crossing = { level = "1 V", time = "1 ms" }
        peak = "10 TV"
        energy = { part = "R1" }
        """), encoding="utf-8")
    main(["check", str(path), "--json", "--no-report"])
    fields = json.loads(capsys.readouterr().out)["files"][0]["checks"][0]["fields"]
    for name in ("crossing", "peak", "energy"):
        assert fields[name]["closed_form"] is None and fields[name]["numeric"] is None, name
        assert "values not reported" in fields[name]["message"], name
    assert fields["crossing"]["verdict"] == fields["peak"]["verdict"] == MISMATCH
    assert fields["energy"]["verdict"] == PASS        # no hand value: nothing to confirm


def test_conditioning_estimate_tracks_distance_to_singular():
    """kappa of the equilibrated pencil grows like 1/(gain - 1) (Higham 2002, ch. 7)."""
    kappas = []
    for eps in (1e-3, 1e-6, 1e-9):
        circuit = parse_circuit(NEAR_SINGULAR.replace("1.0000000000001", repr(1 + eps)))
        kappas.append(assess(closedform.solve(circuit))[0].kappa)
    ratios = np.diff(np.log10(kappas))
    assert np.all(np.abs(ratios - 3) < 0.5), kappas
