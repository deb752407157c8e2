"""The ``tauproof`` command end to end: exit codes, messages on stderr, the JSON contract.

Reference values: the first-order RC charge x(t) = V·(1 − e^(−t/RC)) with τ = R·C (common
practice); the capacitive divider's jump v(0+) = V·C1/(C1 + C2) from charge conservation
(common practice, the impulse-current argument).
"""

from __future__ import annotations

import json
import textwrap
from pathlib import Path

import pytest

from harness.cli import main

RC_GOOD = textwrap.dedent("""
    title = "Test: RC charge"
    [parts]
    V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "5 V"]] }
    R1 = { kind = "resistor", nodes = ["in", "out"], value = "10k" }
    C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1u" }
    [[expect]]
    node = "out"
    before = "0 V"
    after = "0 V"
    final = "5 V"
    tau = "10 ms"
    """)


def write(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def run(capsys, *args: str) -> tuple[int, str, str]:
    code = main(list(args))
    out, err = capsys.readouterr()
    return code, out, err


def test_good_file_passes_with_exit_zero(tmp_path, capsys):
    """A correct RC hand calculation (τ = RC, common practice) exits 0."""
    path = write(tmp_path, "rc.toml", RC_GOOD)
    code, out, err = run(capsys, "check", str(path), "--report-dir", str(tmp_path / "r"))
    assert code == 0, out + err
    assert (tmp_path / "r" / "report.html").exists()


def test_wrong_tau_exits_one_and_names_thevenin(tmp_path, capsys):
    """A τ off by a factor of two (should be R·C = 10 ms) is a mismatch naming R_th."""
    path = write(tmp_path, "rc.toml", RC_GOOD.replace('tau = "10 ms"', 'tau = "20 ms"'))
    code, out, err = run(capsys, "check", str(path), "--no-report")
    assert code == 1
    assert "Thevenin" in out or "R_th" in out


def test_bad_value_exits_two_naming_file_part_field(tmp_path, capsys):
    """A resistor in farads is an input error: exit 2, message names file, part and field."""
    path = write(tmp_path, "bad.toml", RC_GOOD.replace('value = "10k"', 'value = "10 uF"'))
    code, out, err = run(capsys, "check", str(path), "--no-report")
    assert code == 2
    assert "bad.toml" in err and "R1" in err and "value" in err
    assert "Traceback" not in err


def test_folder_with_one_bad_and_one_good_file(tmp_path, capsys):
    """A bad file gives exit 2 but the good file beside it is still checked and reported."""
    write(tmp_path, "a_good.toml", RC_GOOD)
    write(tmp_path, "b_bad.toml", RC_GOOD.replace('kind = "resistor"', 'kind = "resistr"'))
    code, out, err = run(capsys, "check", str(tmp_path), "--json", "--report-dir",
                         str(tmp_path / "r"))
    assert code == 2
    doc = json.loads(out)
    verdicts = {Path(f["file"]).name: f["verdict"] for f in doc["files"]}
    assert verdicts == {"a_good.toml": "pass", "b_bad.toml": "error"}
    assert "resistr" in err


def test_solve_json_contract(tmp_path, capsys):
    """solve --json gives every field with hand, closed_form and numeric (DESIGN.md contract)."""
    path = write(tmp_path, "rc.toml", RC_GOOD)
    code, out, err = run(capsys, "solve", str(path), "--json")
    doc = json.loads(out)
    check = doc["files"][0]["checks"][0]
    assert check["probe"] == "node out" and check["order"] == 1
    assert set(check["fields"]) == {"before", "after", "final", "tau"}
    tau = check["fields"]["tau"]
    # τ = R·C = 10 kΩ · 1 µF = 10 ms (common practice)
    assert tau["closed_form"] == pytest.approx(10e-3, rel=1e-9)
    assert tau["numeric"] == pytest.approx(10e-3, rel=1e-4)
    assert check["modes"] == [pytest.approx(10e-3, rel=1e-9)]


def test_divider_jump_missed_is_explained(tmp_path, capsys):
    """Hand 'after' equal to 'before' at a capacitive divider names the jump (C1/(C1+C2) rule)."""
    text = textwrap.dedent("""
        title = "Test: capacitive divider"
        [parts]
        V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["1 ms", "10 V"]] }
        C1 = { kind = "capacitor", nodes = ["in", "mid"], value = "1n" }
        C2 = { kind = "capacitor", nodes = ["mid", "gnd"], value = "3n" }
        R1 = { kind = "resistor", nodes = ["mid", "gnd"], value = "1M" }
        [[expect]]
        node = "mid"
        at = "1 ms"
        before = "0 V"
        after = "0 V"
        """)
    path = write(tmp_path, "div.toml", text)
    code, out, err = run(capsys, "check", str(path), "--json", "--no-report")
    doc = json.loads(out)
    after = doc["files"][0]["checks"][0]["fields"]["after"]
    # v(0+) = 10 V · C1/(C1 + C2) = 2.5 V (charge conservation, common practice)
    assert after["closed_form"] == pytest.approx(2.5, rel=1e-9)
    assert after["verdict"] == "mismatch" and "jumps" in after["message"]
    assert code == 1


def test_missing_path_exits_two(tmp_path, capsys):
    """A path that does not exist is reported by name with exit 2."""
    code, out, err = run(capsys, "check", str(tmp_path / "nope.toml"), "--no-report")
    assert code == 2 and "nope.toml" in err


def test_a_closed_stdout_pipe_costs_neither_the_reports_nor_the_exit_code(tmp_path):
    """``tauproof check … | head`` closing the pipe early: no traceback, the reports are still
    written and the exit code is the run's (0 for the bundled supervisor circuit, which passes).
    A reader that exits at once is the usual way a pipe closes (common practice: EPIPE)."""
    import os
    import subprocess
    import sys
    read_end, write_end = os.pipe()
    os.close(read_end)                       # the reader is gone before the first line
    out = tmp_path / "reports"
    proc = subprocess.run(
        [sys.executable, "-m", "harness", "check", "circuits/library/logger/supervisor-reset.toml",
         "--closed-form-only", "--report-dir", str(out)],
        stdout=write_end, stderr=subprocess.PIPE, text=True,
        cwd=Path(__file__).resolve().parent.parent, timeout=120)
    os.close(write_end)
    assert proc.returncode == 0, proc.stderr
    assert "Traceback" not in proc.stderr
    assert (out / "report.html").exists() and (out / "junit.xml").exists()
