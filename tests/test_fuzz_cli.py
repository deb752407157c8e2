"""Hostile circuit files through the real command line (``python -m harness.cli`` in a
subprocess): values beyond what the engines represent, unprintable names, a pathological
undamped circuit, noise from the numerical libraries, and a fast seeded subset of the command-line
fuzzer (tests/benchmarks/fuzz_cli.py).

The contract: every file is a result or an input error naming the file, part and field (exit 2,
no traceback); every ``--json`` run prints exactly one strict JSON document; nothing unprintable
reaches the terminal.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from tests.benchmarks import fuzz_cli

ROOT = Path(__file__).resolve().parents[1]
LC_FILTER = ROOT / "circuits" / "library" / "bench-supply" / "lc-output-filter.toml"

RC = """title = "{title}"
[parts]
V1 = {{ kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["1 ms", "{step}"]] }}
{rname} = {{ kind = "resistor", nodes = ["in", "out"], value = "1k" }}
C1 = {{ kind = "capacitor", nodes = ["out", "gnd"], value = "{c}"{init} }}
[[expect]]
node = "out"
at = "1 ms"
final = "{final}"
tau = "1 ms"
"""


def rc(folder: Path, name: str = "rc.toml", **fields) -> Path:
    """A 1 kΩ, 1 µF RC step (tau = 1 ms, common practice) with fields replaced."""
    values = dict(title="rc", step="1 V", rname="R1", c="1u", init="", final="1 V")
    values.update(fields)
    path = folder / name
    path.write_text(RC.format(**values), encoding="utf-8")
    return path


def cli(*args: str, env: dict | None = None, timeout: float = 120):
    """(exit code, stdout, stderr, seconds) of ``python -m harness.cli args``."""
    started = time.monotonic()
    proc = subprocess.run([sys.executable, "-m", "harness.cli", *args], cwd=ROOT,
                          capture_output=True, timeout=timeout,
                          env={**os.environ, "PYTHONPATH": str(ROOT), **(env or {})})
    return (proc.returncode, proc.stdout.decode("utf-8", "replace"),
            proc.stderr.decode("utf-8", "replace"), time.monotonic() - started)


def strict(text: str) -> dict:
    """The one strict JSON document ``text`` must be (no NaN/Infinity, nothing around it)."""
    def reject(constant):
        raise AssertionError(f"non-strict JSON: {constant}")
    return json.loads(text, parse_constant=reject)


@pytest.mark.parametrize("fields, part, field, shown", [
    ({"c": "1e-320 F"}, "C1", "value", "'1e-320 F'"),
    ({"step": "1e308 V"}, "V1", "steps", "'1e308 V'"),
    ({"step": "1e-300 V"}, "V1", "steps", "'1e-300 V'"),
    ({"init": ', initial = "1e200 V"'}, "C1", "initial", "'1e200 V'"),
])
def test_values_beyond_the_engines_are_located_input_errors(tmp_path, fields, part, field, shown):
    """Subnormal values and values near the float limits: exit 2, one message naming the file,
    part, field and the accepted range; --json still prints its strict document."""
    path = rc(tmp_path, **fields)
    code, out, err, _ = cli("check", "--json", "--no-report", str(path))
    assert code == 2 and "Traceback" not in err
    assert f"{path}:" in err and f"part {part}, field {field}" in err
    assert f"{shown} is outside the range tauproof accepts: 0, or a magnitude from 1e-30" in err
    assert "internal error" not in err + out and "DLASCL" not in out + err
    document = strict(out)
    assert document["verdict"] == "error" and document["files"][0]["file"] == str(path)


def test_hand_formula_beyond_the_range_is_an_input_error(tmp_path):
    """A formula whose value is beyond the accepted range is located like a written value."""
    path = rc(tmp_path, final="= 1 V * 2 ** -1000")
    code, out, err, _ = cli("solve", "--json", str(path))
    assert code == 2 and "expect #1, field final" in err and "outside the range" in err
    strict(out)


def test_square_root_of_minus_one_is_an_input_error(tmp_path):
    """``= (-1)**0.5`` is refused where it is written, not an internal error."""
    path = rc(tmp_path, final="= (-1)**0.5")
    code, out, err, _ = cli("check", "--json", "--no-report", str(path))
    assert code == 2 and "expect #1, field final" in err and "internal error" not in err
    strict(out)


def test_undamped_parasitic_tank_with_a_dangling_source_stops_within_seconds(tmp_path):
    """The LC output filter with 1 pF across its inductor and the source's second terminal on a
    node nothing else touches: the tank rings undamped at 1/(2π√(22 µH·1 pF)) = 33.9 MHz with a
    rounding-noise amplitude; the peak search over it is bounded (it took ~55 s)."""
    text = LC_FILTER.read_text().replace('nodes = ["vs", "gnd"]', 'nodes = ["vs", "dangle"]')
    text = text.replace("[parts]\n", '[parts]\nCp = { kind = "capacitor", nodes = ["a", "out"], '
                                     'value = "1p" }\n')
    path = tmp_path / "tank.toml"
    path.write_text(text)
    code, out, err, seconds = cli("solve", "--json", "--closed-form-only", str(path))
    assert seconds < 15, seconds
    assert code in (0, 1) and "internal error" not in err and "Traceback" not in err
    strict(out)


def test_voltage_source_across_a_resistor_beside_a_huge_capacitor(tmp_path):
    """The LC output filter with C1 = 1e30 F (the edge of the accepted range) and a voltage
    source added across the load resistor: analysed or refused, never an internal error (the
    numerical engine's first step exceeded its window)."""
    text = LC_FILTER.read_text().replace('value = "100u"', 'value = "1e30 F"')
    text = text.replace("[parts]\n", '[parts]\nVx = { kind = "voltage-source", '
                                     'nodes = ["out", "gnd"], value = "0 V" }\n')
    path = tmp_path / "across.toml"
    path.write_text(text)
    code, out, err, _ = cli("solve", "--json", str(path))
    assert code in (0, 1, 2) and "internal error" not in err and "Traceback" not in err, err
    strict(out)


def test_mode_faster_than_the_resolution_of_the_event_time(tmp_path):
    """The supervisor reset with C1 = 1e-30 F: 10 tau (~8e-25 s) added to the 200 ms event is
    200 ms again in floating point; the sign-off span is then 10 tau itself, not an empty
    geometric grid (an internal error)."""
    library = ROOT / "circuits" / "library" / "logger" / "supervisor-reset.toml"
    text = library.read_text()
    assert text.count('value = "1u" }') == 1
    path = tmp_path / "fast.toml"
    path.write_text(text.replace('value = "1u" }', 'value = "1e-30 F" }'))
    code, out, err, _ = cli("solve", "--json", str(path))
    assert code in (0, 1) and "internal error" not in err and "Traceback" not in err, err
    strict(out)


def test_values_too_many_decades_apart_blame_the_implausible_part(tmp_path):
    """A 1e30 Ω resistor feeding a 350 mS transconductance: the equations are singular to double
    precision; exit 2 blaming the resistor's value, not an internal error."""
    path = tmp_path / "apart.toml"
    path.write_text(textwrap.dedent("""
        [parts]
        V1 = { kind = "voltage-source", nodes = ["dim", "gnd"], value = "0 V", steps = [["0 s", "1 V"]] }
        R1 = { kind = "resistor", nodes = ["dim", "ctl"], value = "10k" }
        C1 = { kind = "capacitor", nodes = ["ctl", "gnd"], value = "100n" }
        V2 = { kind = "voltage-source", nodes = ["vled", "gnd"], value = "36 V" }
        Rd = { kind = "resistor", nodes = ["vled", "a"], value = "1e30" }
        Vf = { kind = "voltage-source", nodes = ["a", "k"], value = "28 V" }
        G1 = { kind = "vccs", nodes = ["k", "gnd"], value = "350 mS", control = ["ctl", "gnd"] }
        [[expect]]
        node = "k"
        final = "4.5 V"
        """))
    code, out, err, _ = cli("check", "--json", "--no-report", str(path))
    assert code == 2 and "internal error" not in err
    assert f"{path}: part Rd, field value: the circuit's equations are singular" in err
    strict(out)


@pytest.mark.parametrize("args", [["check", "--no-report"], ["solve"],
                                  ["check", "--json", "--no-report"]])
def test_file_name_that_is_not_utf8_prints_as_escapes(tmp_path, args):
    """A file name with the byte 0xff (a lone surrogate in Python) on a strict UTF-8 console:
    no UnicodeEncodeError, the name printed with the escape ``\\udcff``."""
    name = os.fsdecode(b"bad\xffname.toml")
    path = rc(tmp_path, name=name, final="2 V")  # a mismatch, so the table names the file
    code, out, err, _ = cli(*args, str(path), env={"PYTHONIOENCODING": "utf-8"})
    assert code == 1 and "Traceback" not in err, err
    if "--json" in args:
        assert strict(out)["files"][0]["file"] == str(path)
    else:
        assert "bad\\udcffname.toml" in out


def test_usage_error_with_json_prints_a_document():
    """A --json run that fails on its arguments (exit 2) still prints one strict document."""
    code, out, err, _ = cli("check", "--json", "--timeout", "0", "x.toml")
    assert code == 2 and "must be a positive number of seconds" in err
    document = strict(out)
    assert document["verdict"] == "error" and "positive number" in document["errors"][0]


def test_library_noise_on_descriptor_one_never_reaches_stdout():
    """C code printing on file descriptor 1 during an analysis (as LAPACK's argument checker
    does) goes to the null device; what Python printed before and after stays."""
    script = textwrap.dedent("""
        import ctypes, sys
        from harness.runner import native_output_silenced
        print("before", flush=True)
        with native_output_silenced():
            ctypes.CDLL(None).printf(b" ** On entry to DLASCL parameter number  4\\n")
        print("after")
        """)
    proc = subprocess.run([sys.executable, "-c", script], cwd=ROOT, capture_output=True,
                          text=True, env={**os.environ, "PYTHONPATH": str(ROOT)}, timeout=60)
    assert proc.stdout == "before\nafter\n", proc.stdout


def test_fuzz_subset_through_the_command_line(tmp_path):
    """36 seeded cases (random circuits and mutated library circuits, all three modes, some
    under unprintable file names): no traceback, hang, internal error, non-strict JSON, raw
    control character or unlocated error."""
    summary = fuzz_cli.run(36, 1, 30.0, tmp_path, quiet=True)
    defects = {d: summary["outcomes"].get(d) for d in fuzz_cli.DEFECTS
               if summary["outcomes"].get(d)}
    assert defects == {}, summary["examples"]
    assert summary["outcomes"]["ok"] == 36
