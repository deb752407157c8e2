"""What the command prints and writes must never mislead: each test runs a circuit file through
``python -m harness.cli`` and reads the output with a real consumer (a strict JSON parser,
pandas, xml.etree, the SVG plots' metadata).

Reference values: the RC charge x(t) = V·(1 − e^(−t/RC)) and its crossing time
τ·ln((x(0+) − x∞)/(level − x∞)) (common practice); a resistive divider's output V·R2/(R1 + R2)
(Ohm's law); the gate RC τ = ((2.2 + 4.7) Ω ‖ 10 kΩ)·4.7 nF = 32.41 ns (the bundled
circuits/library/motor-drive/gate-drive-rc.toml).
"""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
import textwrap
import xml.etree.ElementTree as ET
from pathlib import Path

import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parent.parent

#: a current source charging capacitors with no DC path: the zero-value τ terms are unbounded
GROWING = """
title = "Current into a capacitor ladder"
[parts]
I1 = { kind = "current-source", nodes = ["gnd", "out"], value = "0 A", steps = [["0 s", "1 mA"]] }
C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1u", initial = "0 V" }
R1 = { kind = "resistor", nodes = ["out", "x"], value = "1k" }
C2 = { kind = "capacitor", nodes = ["x", "gnd"], value = "1u", initial = "0 V" }
R3 = { kind = "resistor", nodes = ["out", "y"], value = "1k" }
C3 = { kind = "capacitor", nodes = ["y", "gnd"], value = "3u", initial = "0 V" }
[[expect]]
node = "x"
before = "0 V"
dominant-tau = "1 ms"
"""

#: the bundled 100 ns gate pulse (its parts) with two checks: the 14.5 V crossing of the held
#: charge comes after the pulse has ended (32.41 ns · ln(14.99/0.49) = 110.9 ns > 100 ns), and
#: the hand τ is wrong (30 ns, not 32.41 ns)
_GATE_FILE = ROOT / "circuits" / "library" / "motor-drive" / "gate-drive-rc.toml"
GATE = _GATE_FILE.read_text(encoding="utf-8").split("[[expect]]")[0] + """
[[expect]]
node = "g"
at = "0 s"
before = "0 V"
final = "14.99 V"
tau = "30 ns"
crossing = { level = "14.5 V", direction = "rising" }
[[expect]]
through = "Rg"
at = "100 ns"
before = "100.8 mA"
after = "-2.073 A"
"""

#: a divider (3.3 V · 11.62k/21.62k = 1.7736 V) that another branch couples to through 1 TΩ:
#: it moves by a few parts in 1e12 when V2 steps, which is not a change worth a plot's scale
STEADY = """
title = "Divider that stays put while another branch switches"
[parts]
V1 = { kind = "voltage-source", nodes = ["vcc", "gnd"], value = "3.3 V" }
R1 = { kind = "resistor", nodes = ["vcc", "ref"], value = "10k" }
R2 = { kind = "resistor", nodes = ["ref", "gnd"], value = "11.62k" }
C1 = { kind = "capacitor", nodes = ["ref", "gnd"], value = "100n" }
V2 = { kind = "voltage-source", nodes = ["led", "gnd"], value = "0 V", steps = [["1 ms", "2 V"]] }
R3 = { kind = "resistor", nodes = ["led", "k"], value = "1k" }
C2 = { kind = "capacitor", nodes = ["k", "gnd"], value = "1u" }
R4 = { kind = "resistor", nodes = ["k", "ref"], value = "1T" }
[[expect]]
node = "ref"
at = "1 ms"
before = "1.7736 V"
after = "1.7736 V"
final = "1.7736 V"
"""

#: an RC charging to 1.8 V: a 1.79978 V threshold, a 0.001 % tolerance on the initial current
#: (1.8 V / 10 kΩ = 180 µA, hand 179.99 µA) and a hand energy of 999.97 µJ (½CV² = 1.62 µJ)
FORMAT = """
title = "RC to 1.8 V with a tight threshold"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "1.8 V"]] }
R1 = { kind = "resistor", nodes = ["in", "out"], value = "10k" }
C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1u" }
[[expect]]
node = "out"
final = "1.8 V"
crossing = { level = "1.79978 V", time = "1 ms", direction = "rising" }
[[expect]]
through = "R1"
tolerance = "0.001%"
after = "179.99 uA"
energy = { part = "R1", value = "999.97 uJ" }
"""

RC = """
title = "RC charge"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "5 V"]] }
R1 = { kind = "resistor", nodes = ["in", "out"], value = "10k" }
C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1u" }
"""
RC_EXPECT = """
[[expect]]
node = "out"
final = "5 V"
tau = "10 ms"
"""


def write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def cli(*args: str) -> subprocess.CompletedProcess:
    env = {**os.environ, "MPLBACKEND": "Agg"}
    return subprocess.run([sys.executable, "-m", "harness.cli", *map(str, args)], cwd=ROOT,
                          env=env, capture_output=True, text=True, timeout=300)


def _no_constant(name: str):
    raise ValueError(f"not strict JSON: {name}")


def strict_json(text: str):
    """``json.loads`` that refuses NaN, Infinity and -Infinity."""
    return json.loads(text, parse_constant=_no_constant)


def plot_facts(path: Path) -> dict:
    """The facts a plot writes into its SVG ``<metadata>`` (JSON): legend labels, axis limits."""
    found = ET.parse(path).getroot().find("{http://www.w3.org/2000/svg}metadata")
    return json.loads(found.text)


# ------------------------------------------------------------------ one strict JSON writer
def test_json_on_stdout_is_strict_and_is_the_results_file(tmp_path):
    """Unbounded zero-value τ terms are null, not Infinity, on stdout and in results.json, and
    the two documents are the same bytes."""
    path = write(tmp_path, "grow.toml", GROWING)
    done = cli("check", path, "--json", "--report-dir", tmp_path / "r")
    assert done.returncode == 1, done.stderr
    doc = strict_json(done.stdout)
    terms = doc["files"][0]["checks"][0]["dominant_tau"]["terms"]
    assert terms == {"C1": None, "C2": None, "C3": None}
    assert done.stdout == (tmp_path / "r" / "results.json").read_text(encoding="utf-8")
    solved = cli("solve", path, "--json")
    assert strict_json(solved.stdout)["files"][0]["checks"][0]["dominant_tau"]["terms"] == terms


def test_json_run_with_a_file_error_prints_the_whole_document(tmp_path):
    """A bad file beside a good one: stdout is still one strict JSON document naming the error."""
    write(tmp_path, "a.toml", RC + RC_EXPECT)
    write(tmp_path, "b.toml", (RC + RC_EXPECT).replace('value = "10k"', 'value = "10 uF"'))
    done = cli("check", tmp_path, "--json", "--no-report")
    assert done.returncode == 2
    doc = strict_json(done.stdout)
    files = {Path(f["file"]).name: f for f in doc["files"]}
    assert files["a.toml"]["verdict"] == "pass" and files["b.toml"]["verdict"] == "error"
    assert "R1" in files["b.toml"]["errors"][0]
    assert done.stderr.count("b.toml:") == 1


# ------------------------------------------------------------------ plots
def test_check_plot_stops_at_the_next_event_and_marks_the_held_continuation(tmp_path):
    """The 0 s check of a 100 ns pulse is drawn to the pulse's end (plus a short 'if held'
    continuation), not for the 320 ns the held charge needs; the crossing after the pulse is
    marked as on the held waveform."""
    path = write(tmp_path, "gate.toml", GATE)
    done = cli("check", path, "--report-dir", tmp_path / "r")
    assert done.returncode == 1, done.stderr
    plots = tmp_path / "r" / "plots"
    facts = plot_facts(next(plots.glob("001-*-c1.svg")))
    labels = facts["legend"]
    assert "next event t = 100 ns" in labels
    assert any("if held" in label for label in labels)
    crossing = [label for label in labels if label.startswith("crossing")]
    assert crossing and all("if held" in label for label in crossing), labels
    assert facts["xlim"][1] < 200e-9        # the held span is 10 τ = 324 ns
    assert facts["curves_end"] == pytest.approx(100e-9, rel=1e-6)


def test_each_file_gets_a_whole_schedule_plot_in_both_reports(tmp_path):
    """One plot per file of every probe across every event, in the HTML and the Markdown."""
    path = write(tmp_path, "gate.toml", GATE)
    cli("check", path, "--report-dir", tmp_path / "r")
    schedule = next((tmp_path / "r" / "plots").glob("001-*-schedule.svg"))
    facts = plot_facts(schedule)
    assert {"node g", "through Rg"} <= set(facts["legend"])
    assert facts["xlim"][0] <= 0.0 and facts["xlim"][1] > 100e-9
    assert f"plots/{schedule.name}" in \
        (tmp_path / "r" / "report.md").read_text(encoding="utf-8")
    assert 'aria-label="whole schedule of' in (tmp_path / "r" / "report.html").read_text(encoding="utf-8")


def test_steady_probe_is_not_plotted_at_the_scale_of_its_rounding(tmp_path):
    """A probe that moves by 1e-12 of itself gets a y-axis span of at least 1 % of its scale,
    and its legend does not speak of a jump."""
    path = write(tmp_path, "steady.toml", STEADY)
    done = cli("check", path, "--report-dir", tmp_path / "r")
    assert done.returncode == 0, done.stdout + done.stderr
    facts = plot_facts(next((tmp_path / "r" / "plots").glob("001-*-c1.svg")))
    low, high = facts["ylim"]
    assert high - low >= 0.01 * 1.7736
    assert not any(label.startswith("jump") for label in facts["legend"]), facts["legend"]
    schedule = plot_facts(next((tmp_path / "r" / "plots").glob("001-*-schedule.svg")))
    assert schedule["ylims"][0][1] - schedule["ylims"][0][0] >= 0.01 * 1.7736


def test_a_real_jump_is_named_in_the_legend(tmp_path):
    """The gate current reverses at the end of the pulse: 100.8 mA → −2.073 A."""
    path = write(tmp_path, "gate.toml", GATE)
    cli("check", path, "--report-dir", tmp_path / "r")
    facts = plot_facts(next((tmp_path / "r" / "plots").glob("001-*-c2.svg")))
    assert "jump 100.8 mA → -2.073 A" in facts["legend"]


# ------------------------------------------------------------------ numbers
def test_values_that_differ_print_differently_and_noise_prints_as_zero(tmp_path):
    """The 1.79978 V level is not rounded onto the 1.8 V final value; a 179.99 µA hand value
    judged at 0.001 % is not printed as the 180 µA it fails against; 999.97 µJ is not '1000 µJ';
    the numerical engine's fV and aA residues print as 0."""
    path = write(tmp_path, "fmt.toml", FORMAT)
    done = cli("check", path, "--no-report")
    out = done.stdout
    assert "crossing 1.79978 V rising" in out
    row = next(line for line in out.splitlines() if "#2 through R1" in line and " after " in line)
    assert "179.99 µA" in row and "180 µA" in row
    assert "hand 179.99 µA, closed form 180 µA" in out
    assert "1000 µJ" not in out and ("999.97 µJ" in out or "1 mJ" in out)
    solved = cli("solve", path).stdout
    assert not re.search(r"\d [fa]V|\d [fa]A|e-1\d", solved), solved


# ------------------------------------------------------------------ notes and verdicts
def test_a_note_on_a_passing_field_keeps_its_pass_verdict(tmp_path):
    """The crossing passes (no hand time) but carries a note; the τ slip fails the check.  The
    note shows as a note with verdict pass, in the console and the HTML."""
    path = write(tmp_path, "gate.toml", GATE)
    done = cli("check", path, "--report-dir", tmp_path / "r")
    rows = [line for line in done.stdout.splitlines() if "#1 node g" in line]
    crossing = [line for line in rows if "crossing 14.5 V" in line]
    assert crossing and " pass " in crossing[0] and "note: the next event" in crossing[0]
    assert not any("mismatch" in line and "intervenes" in line for line in rows)
    page = (tmp_path / "r" / "report.html").read_text(encoding="utf-8")
    failing = re.findall(r'<ul class="msg">(.*?)</ul>', page, re.S)
    assert failing and not any("intervenes" in block for block in failing)
    assert re.search(r'<ul class="notes">.*?intervenes.*?</ul>', page, re.S)


def test_a_file_error_is_printed_once_and_counted(tmp_path):
    """The error is on stderr once, not again as a table row, and the summary counts it."""
    path = write(tmp_path, "bad.toml", (RC + RC_EXPECT).replace('value = "10k"',
                                                                  'value = "10 uF"'))
    done = cli("check", path, "--no-report")
    assert done.returncode == 2
    assert done.stderr.count("bad.toml:") == 1
    assert "bad.toml:" not in done.stdout
    assert "1 error;" in done.stdout and "0 error" not in done.stdout


def test_warnings_are_printed_under_the_table_once(tmp_path):
    """The growing circuit's warnings (no DC path, the impulse derivative) reach the console,
    each once."""
    path = write(tmp_path, "grow.toml", GROWING)
    out = cli("check", path, "--no-report").stdout
    lines = [line for line in out.splitlines() if line.startswith("warning: ")]
    assert any("grows without bound" in line for line in lines), out
    assert len(lines) == len(set(lines))
    assert out.index("warning: ") > out.index("#1 node x")


def test_a_file_without_expectations_fails_check_but_not_solve(tmp_path):
    """Nothing checked is not a pass: exit 1, a clear line, a failing JUnit case and CSV row."""
    path = write(tmp_path, "bare.toml", RC)
    done = cli("check", path, "--report-dir", tmp_path / "r")
    assert done.returncode == 1
    assert "no [[expect]] blocks: nothing was checked" in done.stdout
    suite = ET.parse(tmp_path / "r" / "junit.xml").getroot().find("testsuite")
    assert suite.get("tests") == "1" and suite.get("failures") == "1"
    table = pd.read_csv(tmp_path / "r" / "summary.csv")
    assert list(table["verdict"]) == ["unchecked"]
    assert strict_json((tmp_path / "r" / "results.json").read_text())["verdict"] == "unchecked"
    solved = cli("solve", path)
    assert solved.returncode == 0, solved.stdout + solved.stderr
