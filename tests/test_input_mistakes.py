"""Input mistakes a hand calculation makes, reproduced from circuit files through the command line.

Each file in tests/bad/ named below is an error (exit 2, stderr naming file, line, part and field,
no traceback); each file in tests/warn/ is a warning that lets the check run (stderr and the
JSON ``warnings`` name it).  Their expected location and text are in the files' first line.

References: the SI brochure (BIPM, 9th edition, 2019), Table 4 (derived units: V = W/A,
Ω = V/A, F = C/V, H = Wb/A, S = A/V, J = N·m) and Table 7 (prefixes: M = 10⁶, m = 10⁻³,
G = 10⁹, f = 10⁻¹⁵); the TOML 1.0 specification (a bare value must be a number, boolean, date
or array/table; text must be quoted); τ = R·C and τ = L/R (common practice).
"""

from __future__ import annotations

import json
import shlex
import subprocess
import sys
from pathlib import Path

import pytest

from harness.circuitfile import parse_circuit
from harness.errors import InputError

ROOT = Path(__file__).resolve().parents[1]
BAD = Path(__file__).parent / "bad"
WARN = sorted((Path(__file__).parent / "warn").glob("*.toml"))
#: the bad files of this module's checks (the rest of tests/bad/ is tested in test_circuitfile)
MISTAKES = ["formula_tau_not_seconds", "formula_sum_unlike_units", "formula_ln_of_volts",
            "formula_complex_power", "value_unquoted", "capacitor_node_typo",
            "current_source_node_typo", "expect_part_for_through"]


def _header(path: Path) -> dict[str, str]:
    """The ``key=value`` pairs of the file's first line (``# expect-error:`` / ``-warning:``)."""
    first = path.read_text(encoding="utf-8").split("\n", 1)[0]
    return dict(item.split("=", 1) for item in shlex.split(first.split(":", 1)[1]))


def _cli(path: Path, *extra: str) -> subprocess.CompletedProcess:
    """``python -m harness.cli check FILE --no-report`` in the project folder."""
    return subprocess.run([sys.executable, "-m", "harness.cli", "check", str(path), "--no-report",
                           *extra], cwd=ROOT, capture_output=True, text=True, timeout=120)


def _located(stderr: str, path: Path, want: dict[str, str]) -> None:
    """stderr names the file and line, the part (or ``expect #N``) and the field."""
    part = want["part"]
    label = part if part.startswith("expect") else f"part {part}"
    assert f"{path}:{want['line']}: {label}, field {want['field']}:" in stderr, stderr
    assert want["contains"] in stderr, stderr
    assert "Traceback" not in stderr


@pytest.mark.parametrize("stem", MISTAKES)
def test_mistake_exits_two_naming_file_line_part_and_field(stem):
    """Each mistake is an input error on the command line: exit 2, located, no traceback."""
    path = BAD / f"{stem}.toml"
    done = _cli(path)
    assert done.returncode == 2, done.stderr
    _located(done.stderr, path, _header(path))


@pytest.mark.parametrize("path", WARN, ids=lambda p: p.stem)
def test_warning_names_the_part_and_the_check_still_runs(path):
    """A probable slip is a warning on stderr and in the file's JSON warnings; the check runs
    and exits as its verdict says."""
    want = _header(path)
    done = _cli(path, "--json")
    assert done.returncode == int(want["exit"]), done.stderr
    _located(done.stderr, path, want)
    assert "tauproof: warning: " in done.stderr
    result = json.loads(done.stdout)["files"][0]
    assert result["checks"], "the check did not run"
    assert any(want["contains"] in w for w in result["warnings"]), result["warnings"]


def _rc(value: str, tolerance: str = "") -> str:
    """An RC charge with C1 = ``value`` (text as written in the file) and settings."""
    settings = f"[settings]\ntolerance = {tolerance}\n" if tolerance else ""
    return (f'title = "rc"\n{settings}[parts]\n'
            'V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", '
            'steps = [["0 s", "5 V"]] }\n'
            'R1 = { kind = "resistor", nodes = ["in", "out"], value = "10k" }\n'
            f'C1 = {{ kind = "capacitor", nodes = ["out", "gnd"], value = {value} }}\n')


@pytest.mark.parametrize("value, meant", [('"1 MF"', "1 mF"), ('"4M7"', "4.7 mF"),
                                          ("2e6", "2 mF")])
def test_mega_for_milli_suggests_milli(value, meant):
    """SI brochure Table 7: M = 10⁶ and m = 10⁻³; a capacitor in megafarads is 10⁹ times the
    millifarads the same digits give, so the suggestion swaps the prefix's case."""
    (warning,) = parse_circuit(_rc(value)).warnings
    assert warning.endswith(f"did you mean {meant}?") and "part C1, field value" in warning


@pytest.mark.parametrize("value", ['"1 mF"', '"1500 F"', '"10 pF"', '"100 kF"'])
def test_plausible_capacitors_give_no_warning(value):
    """1 mF, a 1.5 kF cell-model capacitance, 10 pF and 100 kF are inside the documented range
    (harness/plausible.py); only values outside it warn."""
    assert parse_circuit(_rc(value)).warnings == ()


@pytest.mark.parametrize("tolerance, warns", [("0.5", True), ("0.3", True), ('"0.5"', True),
                                              ("0.2", False), ('"50 %"', False),
                                              ("0.02", False)])
def test_bare_tolerance_above_a_fifth_warns(tolerance, warns):
    """A bare 0.5 is 50 % (the tolerance field's documented reading); above 0.2 without '%' it
    is probably meant as percent, so the warning offers both spellings."""
    warnings = parse_circuit(_rc('"1u"', tolerance)).warnings
    assert bool(warnings) == warns, warnings
    if warns:
        assert "settings, field tolerance" in warnings[0] and '" or "' in warnings[0]


@pytest.mark.parametrize("value, token", [("4k7", "4k7"), ("10 uF", "10 uF"), ("2R2", "2R2"),
                                          ("1u", "1u")])
def test_unquoted_quantity_is_named_with_its_quoted_form(value, token):
    """TOML 1.0 reads only numbers bare, so ``value = 4k7`` is a syntax error; the message
    quotes the value back (the IEC 60062 codes and SI prefixes still read once quoted)."""
    with pytest.raises(InputError) as caught:
        parse_circuit(_rc(value), "c.toml")
    err = caught.value
    assert (err.part, err.field, err.line) == ("C1", "value", 5), str(err)
    assert f'value = "{token}"' in err.message
    assert parse_circuit(_rc(f'"{token}"')).part("C1").value > 0


def test_unquoted_quantity_in_a_schedule_is_named():
    """The same inside a ``steps`` pair (TOML 1.0: array elements are values too)."""
    text = _rc('"1u"').replace('steps = [["0 s", "5 V"]]', 'steps = [["0 s", 5 V]]')
    with pytest.raises(InputError) as caught:
        parse_circuit(text, "c.toml")
    err = caught.value
    assert (err.part, err.field, err.line) == ("V1", "steps", 3), str(err)
    assert 'steps: 5 V on line 3 is not quoted' in err.message and '"5 V"' in err.message


def test_unquoted_plain_number_is_still_a_number():
    """TOML 1.0: ``1e-6`` is a float, read as farads as before (no error, no warning)."""
    assert parse_circuit(_rc("1e-6")).part("C1").value == 1e-6


def test_floating_capacitor_without_typo_names_its_terminal():
    """Two capacitors in series with no initial leave their middle node without a DC path
    (common practice); no node name is near 'mid', so the fault stays on ``initial``."""
    text = _rc('"1u"').replace('nodes = ["out", "gnd"], value = "1u"',
                               'nodes = ["out", "mid"], value = "1u"')
    text += 'C2 = { kind = "capacitor", nodes = ["mid", "gnd"], value = "1u" }\n'
    with pytest.raises(InputError) as caught:
        parse_circuit(text)
    assert caught.value.field == "initial" and "C1's n terminal is on 'mid'" in str(caught.value)
