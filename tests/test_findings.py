"""Findings that must fail a check unless the file acknowledges them, run through the command line.

References: the energy lost when an opening switch forces two coils into series is
½·L1·L2/(L1 + L2)·ΔI² (flux conservation, the dual of two-capacitor charge sharing; textbook
circuit theory, from memory), and a real switch with a finite off-resistance dissipates it in
the limit R_off → ∞ (checked here with the tool's own finite-R_off circuit, where no ideal jump
is involved).  An open end carries no current (KCL).  A coil current cut with no other path
gives an unbounded voltage in the ideal circuit (common practice: the flyback diode).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

TWO_COILS = """
title = "two coils, a switch opens across the second"
[parts]
V1 = { kind = "voltage-source", nodes = ["vin", "gnd"], value = "10 V" }
R1 = { kind = "resistor", nodes = ["vin", "a"], value = "10" }
L1 = { kind = "inductor", nodes = ["a", "b"], value = "1m", initial = "1 A" }
L2 = { kind = "inductor", nodes = ["b", "gnd"], value = "3m", initial = "0 A" }
S1 = { kind = "switch", nodes = ["b", "gnd"], state = "closed", steps = [["1 ms", "open"]]SWITCH }
SETTINGS
[[expect]]
through = "L1"
at = "1 ms"
after = "0.25 A"
energy = { part = "S1", value = "HAND" }
"""

COIL_CUT = """
title = "relay coil switched off with no freewheel path"
[parts]
V1 = { kind = "voltage-source", nodes = ["vin", "gnd"], value = "12 V" }
R1 = { kind = "resistor", nodes = ["vin", "a"], value = "120" }
K1 = { kind = "inductor", nodes = ["a", "b"], value = "0.5" }
S1 = { kind = "switch", nodes = ["b", "gnd"], state = "closed", steps = [["10 ms", "open"]] }
SETTINGS
[[expect]]
through = "K1"
at = "10 ms"
before = "0.1 A"
"""

TYPO = """
title = "reset RC with a mistyped ground"
[parts]
V1 = { kind = "voltage-source", nodes = ["vcc", "gnd"], value = "0 V", steps = [["0 s", "3.3 V"]] }
R1 = { kind = "resistor", nodes = ["vcc", "rst"], value = "100k" }
C1 = { kind = "capacitor", nodes = ["rst", "gnd"], value = "1u" }
R2 = { kind = "resistor", nodes = ["rst", "gdn"], value = "100k" }
SETTINGS
[[expect]]
node = "rst"
at = "0 s"
tau = "100 ms"
"""

GROWTH = """
title = "a current source charging a capacitor with no DC path"
[parts]
I1 = { kind = "current-source", nodes = ["gnd", "a"], value = "0 A", steps = [["0 s", "1 mA"]] }
C1 = { kind = "capacitor", nodes = ["a", "gnd"], value = "1u", initial = "0 V" }
SETTINGS
[[expect]]
node = "a"
at = "0 s"
before = "0 V"
"""


def _run(tmp_path: Path, text: str, *args: str) -> subprocess.CompletedProcess:
    path = tmp_path / "circuit.toml"
    path.write_text(text)
    return subprocess.run([sys.executable, "-m", "harness.cli", "check", str(path), "--no-report",
                           *args], capture_output=True, text=True, timeout=300)


def _fill(text: str, settings: str = "", **marks: str) -> str:
    text = text.replace("SETTINGS", settings)
    for key, value in marks.items():
        text = text.replace(key, value)
    return text


def _json(done: subprocess.CompletedProcess) -> dict:
    return json.loads(done.stdout, parse_constant=lambda c: pytest.fail(f"non-strict {c}"))


def test_switch_that_forces_two_coils_into_series_dissipates_the_flux_sharing_loss(tmp_path):
    """½·L1L2/(L1+L2)·ΔI² = ½·(1 mH·3 mH/4 mH)·(1 A)² = 0.375 mJ lands in S1, in both engines;
    the right hand value passes, 0 J is a mismatch."""
    done = _run(tmp_path, _fill(TWO_COILS, "[settings]\nacknowledge = [\"S1\"]", SWITCH="",
                                HAND="0.375 mJ"), "--json")
    energy = _json(done)["files"][0]["checks"][0]["fields"]["energy"]
    assert energy["closed_form"] == pytest.approx(0.375e-3, rel=1e-9)
    assert energy["numeric"] == pytest.approx(0.375e-3, rel=1e-5)
    assert energy["verdict"] == "pass" and done.returncode == 0, done.stdout
    done = _run(tmp_path, _fill(TWO_COILS, "[settings]\nacknowledge = [\"S1\"]", SWITCH="",
                                HAND="0 J"), "--json")
    assert _json(done)["files"][0]["checks"][0]["fields"]["energy"]["verdict"] == "mismatch"


def test_the_ideal_loss_is_the_limit_of_a_real_off_resistance(tmp_path):
    """With R_off = 1 GΩ (no ideal jump) S1 dissipates 0.375 mJ to within 1e-7 (the limit)."""
    text = _fill(TWO_COILS, SWITCH=', off-resistance = "1G"', HAND="0.375 mJ")
    energy = _json(_run(tmp_path, text, "--json"))["files"][0]["checks"][0]["fields"]["energy"]
    assert energy["closed_form"] == pytest.approx(0.375e-3, rel=1e-7)


def test_forced_coil_currents_fail_the_check_and_say_what_happens(tmp_path):
    """The forced jump is a finding (exit 1): the message names the switch, both coils with
    their currents before and after, and the energy; it is not called an interruption of L1
    (L1 goes on at 0.25 A through L2), and no rounding-noise current is reported."""
    done = _run(tmp_path, _fill(TWO_COILS, SWITCH="", HAND="0.375 mJ"), "--json")
    assert done.returncode == 1
    found = _json(done)["files"][0]["findings"]
    assert [f["code"] for f in found] == ["forced-current"]
    text = found[0]["message"]
    assert "S1" in text and "L1 (1 A → 250 mA)" in text and "L2 (0 A → 250 mA)" in text
    assert "375 µJ" in text and "interrupt" not in text and "e-16" not in text


def test_an_interrupted_coil_fails_the_check_and_shows_on_the_console(tmp_path):
    """Relay coil cut with no freewheel path: exit 1, the console says so, with the caution."""
    done = _run(tmp_path, _fill(COIL_CUT))
    assert done.returncode == 1, done.stdout + done.stderr
    out = done.stdout + done.stderr
    assert "interrupts the current of K1 (100 mA → 0 A)" in out and "flyback" in out
    assert "Traceback" not in out


def test_an_acknowledged_interruption_passes_but_is_still_reported(tmp_path):
    done = _run(tmp_path, _fill(COIL_CUT, "[settings]\nacknowledge = [\"S1\"]"), "--json")
    assert done.returncode == 0
    found = _json(done)["files"][0]["findings"]
    assert found and found[0]["acknowledged"] is True


def test_a_node_touched_by_one_terminal_is_named_with_the_near_miss(tmp_path):
    """R2 to 'gdn' (meant 'gnd'): exit 1 naming the node, the part and the likely name; the
    right τ (R1·C1 = 100 ms, R2 carries nothing) is not blamed on the Thevenin resistance."""
    done = _run(tmp_path, _fill(TYPO), "--json")
    assert done.returncode == 1
    result = _json(done)["files"][0]
    assert result["verdict"] == "finding"
    text = result["findings"][0]["message"]
    assert "'gdn'" in text and "R2" in text and "did you mean 'gnd'" in text
    assert result["checks"][0]["verdict"] == "pass"


def test_a_test_point_can_be_acknowledged(tmp_path):
    done = _run(tmp_path, _fill(TYPO, "[settings]\nacknowledge = [\"gdn\"]"))
    assert done.returncode == 0, done.stdout


def test_unbounded_growth_fails_the_check(tmp_path):
    """1 mA into 1 µF with no DC path ramps at I/C = 1000 V/s (capacitor law): exit 1."""
    done = _run(tmp_path, _fill(GROWTH), "--json")
    assert done.returncode == 1
    found = _json(done)["files"][0]["findings"]
    assert found[0]["code"] == "unbounded-growth" and "I1" in found[0]["subjects"]


def test_acknowledge_must_be_a_list_of_names(tmp_path):
    done = _run(tmp_path, _fill(TYPO, "[settings]\nacknowledge = \"gdn\""))
    assert done.returncode == 2
    assert "acknowledge" in done.stderr and "Traceback" not in done.stderr
