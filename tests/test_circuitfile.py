"""The circuit-file reader: the bad-file corpus, a good file's model values, reading limits.

Sources: the file format of DESIGN.md ("Circuit file format", "The circuit model"); the
expected errors of each file in tests/bad/ are recorded in its ``# expect-error:`` header.
"""

from __future__ import annotations

import math
import shlex
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from harness import errors, model
from harness.circuitfile import MAX_FILE_BYTES, parse_circuit, read_circuit

BAD = Path(__file__).parent / "bad"
BAD_FILES = sorted(BAD.glob("*.toml"))


def _header(path: Path) -> dict[str, str]:
    """The ``key=value`` pairs of the file's ``# expect-error:`` first line."""
    first = path.read_bytes().split(b"\n", 1)[0].decode("ascii")
    assert first.startswith("# expect-error:"), f"{path.name} has no expect-error header"
    return dict(item.split("=", 1) for item in shlex.split(first.split(":", 1)[1]))


def test_corpus_is_there():
    """The bad-file corpus holds at least one file per error kind listed in issue 2 (~80)."""
    assert len(BAD_FILES) >= 80


@pytest.mark.parametrize("path", BAD_FILES, ids=lambda p: p.stem)
def test_bad_file(path):
    """Each bad file gives an InputError of the recorded type, part, field and line (DESIGN.md)."""
    want = _header(path)
    with pytest.raises(errors.InputError) as caught:
        read_circuit(path)
    err = caught.value
    assert err.file == str(path)
    assert type(err).__name__ == want.get("type", type(err).__name__)
    assert err.part == want.get("part"), str(err)
    assert err.field == want.get("field"), str(err)
    if "line" in want:
        assert err.line == int(want["line"]), str(err)
    if "contains" in want:
        assert want["contains"] in err.message, str(err)
    assert "Traceback" not in str(err)


def test_file_that_is_not_utf8_names_the_line(tmp_path):
    """A Latin-1 µ (byte 0xb5) where TOML requires UTF-8 (TOML 1.0 spec) is an InputError naming
    line 3 and UTF-8.  Written here rather than kept in tests/bad so that every stored file of
    the project reads as UTF-8."""
    path = tmp_path / "not_utf8.toml"
    path.write_bytes(b'# a Latin-1 byte where UTF-8 is required\n\ntitle = "latin-1 \xb5"\n'
                     b'[parts]\nR1 = { kind = "resistor", nodes = ["a", "gnd"], value = "1k" }\n')
    with pytest.raises(errors.InputError) as caught:
        read_circuit(path)
    assert caught.value.line == 3 and "UTF-8" in caught.value.message
    assert caught.value.file == str(path)


GOOD = '''
title = "Good: every kind"
ground = "0"

[settings]
tolerance = "2%"

[parts]
V1 = { kind = "voltage-source", nodes = ["in", "0"], value = "0 V", steps = [["0 s", "3.3 V"], ["10 ms", "0 V"]] }
R1 = { kind = "resistor", nodes = ["in", "a"], value = "4k7" }
C1 = { kind = "capacitor", nodes = ["a", "0"], value = "1n5", initial = "0 V" }
L1 = { kind = "inductor", nodes = ["a", "b"], value = "10 mH" }
R2 = { kind = "resistor", nodes = ["b", "0"], value = "2R2" }
S1 = { kind = "switch", nodes = ["a", "0"], state = "open", steps = [["5 ms", "closed"], ["7 ms", "open"]], on-resistance = "10", off-resistance = "10M" }
I1 = { kind = "current-source", nodes = ["0", "c"], value = "1 mA", steps = [["1 ms", "-2 mA"]] }
R3 = { kind = "resistor", nodes = ["c", "0"], value = "R47" }
E1 = { kind = "vcvs", nodes = ["d", "0"], gain = "10 V/V", control = ["a", "0"] }
R4 = { kind = "resistor", nodes = ["d", "0"], value = "1k" }
G1 = { kind = "vccs", nodes = ["0", "e"], gain = "2 mA/V", control = ["a", "b"] }
R5 = { kind = "resistor", nodes = ["e", "0"], value = "1k" }
H1 = { kind = "ccvs", nodes = ["f", "0"], value = "1k", control = "V1" }
R6 = { kind = "resistor", nodes = ["f", "0"], value = "1k" }
F1 = { kind = "cccs", nodes = ["0", "g"], gain = -3, control = "L1" }
R7 = { kind = "resistor", nodes = ["g", "0"], value = "1k" }

[[expect]]
node = "a"
before = "0 V"
final = "= 3.3 V * R2/(R1+R2)"
tau = "7 us"
note = "charging"

[[expect]]
between = ["a", "b"]
at = "5 ms"
after = 0.1

[[expect]]
across = "C1"
at = 0.010000000000001

[[expect]]
through = "L1"
at = "1 ms"
final = "700 uA"
tolerance = 0.05
'''


@pytest.fixture(scope="module")
def good():
    return parse_circuit(GOOD, "lib/good.toml")


def test_good_parts(good):
    """Every kind reads into SI values; IEC 60062 codes 4k7, 1n5, 2R2, R47 (from memory of IEC 60062)."""
    p = {part.name: part for part in good.parts}
    assert good.title == "Good: every kind" and good.ground == "0"
    assert good.settings.tolerance == pytest.approx(0.02)
    assert p["R1"].value == pytest.approx(4.7e3) and p["R1"].nodes == ("in", "a")
    assert p["C1"].value == pytest.approx(1.5e-9) and p["C1"].initial == 0.0
    assert p["R2"].value == pytest.approx(2.2) and p["R3"].value == pytest.approx(0.47)
    assert p["L1"].value == pytest.approx(0.01) and p["L1"].initial is None
    assert p["V1"].steps == ((0.0, 3.3), (0.01, 0.0)) and p["V1"].value == 0.0
    assert p["S1"].closed is False and p["S1"].steps == ((0.005, 1.0), (0.007, 0.0))
    assert (p["S1"].on_resistance, p["S1"].off_resistance) == (10.0, 1e7)
    assert p["I1"].steps == ((0.001, -0.002),)
    assert p["E1"].value == 10.0 and p["E1"].control == ("a", "0")
    assert p["G1"].value == pytest.approx(2e-3) and p["G1"].control == ("a", "b")
    assert p["H1"].value == 1e3 and p["H1"].control == "V1"
    assert p["F1"].value == -3.0 and p["F1"].control == "L1"


def test_good_lines(good):
    """Parts and expectations carry the line they start on."""
    lines = GOOD.splitlines()
    assert lines[good.part("R1").line - 1].startswith("R1 =")
    assert lines[good.part("F1").line - 1].startswith("F1 =")
    assert [lines[e.line - 1] for e in good.expectations] == ["[[expect]]"] * 4


def test_good_expectations(good):
    """Probes, events, hand values and formulas read as DESIGN.md describes them."""
    e = good.expectations
    assert [x.probe.label for x in e] == ["node a", "between a b", "across C1", "through L1"]
    assert [x.at for x in e] == [0.0, 0.005, 0.01, 0.001]
    # the divider formula, evaluated by hand: 3.3 * 2.2 / (4700 + 2.2)
    assert e[0].hand["final"] == pytest.approx(3.3 * 2.2 / 4702.2, rel=1e-12)
    assert e[0].formulas == {"final": "= 3.3 V * R2/(R1+R2)"}
    assert e[0].hand["tau"] == pytest.approx(7e-6) and e[0].note == "charging"
    assert e[1].hand == {"after": 0.1} and e[1].tolerance is None
    assert e[3].hand == {"final": pytest.approx(7e-4)} and e[3].tolerance == 0.05
    assert e[2].at == 0.01  # 0.010000000000001 s matches the 10 ms event within 1e-12 + 1e-15 s


def test_events(good):
    """Events are t = 0 and every step time of every source and switch, sorted (DESIGN.md)."""
    assert good.events == (0.0, 0.001, 0.005, 0.007, 0.01)


def test_defaults():
    """Title defaults to the file stem, ground to 'gnd', tolerance to 1 % (DESIGN.md)."""
    text = '[parts]\nV1 = { kind = "voltage-source", nodes = ["a", "gnd"], value = 1 }\n' \
           'R1 = { kind = "resistor", nodes = ["a", "gnd"], value = 1 }\n'
    c = parse_circuit(text, "some/dir/reset_delay.toml")
    assert (c.title, c.ground, c.settings.tolerance) == ("reset_delay", "gnd", 0.01)
    assert c.source == "some/dir/reset_delay.toml"
    assert parse_circuit(text).title == "untitled"


def test_table_form_lines():
    """A part written as a [parts.NAME] table gets its field's line in errors."""
    text = ('[parts.V1]\nkind = "voltage-source"\nnodes = ["a", "gnd"]\nvalue = 1\n\n'
            '[parts.R1]\nkind = "resistor"\nnodes = ["a", "gnd"]\nvalue = "-1k"\n')
    with pytest.raises(errors.InputError) as caught:
        parse_circuit(text, "t.toml")
    assert (caught.value.part, caught.value.field, caught.value.line) == ("R1", "value", 9)


def test_missing_file(tmp_path):
    """A path that does not exist is an InputError naming it."""
    with pytest.raises(errors.InputError) as caught:
        read_circuit(tmp_path / "nope.toml")
    assert caught.value.file == str(tmp_path / "nope.toml")


def test_directory(tmp_path):
    """A folder given as a file is an InputError, not an OSError."""
    with pytest.raises(errors.InputError):
        read_circuit(tmp_path)


def test_too_large(tmp_path):
    """A file over the 1 MB limit is refused before it is parsed."""
    path = tmp_path / "big.toml"
    path.write_bytes(b"#" * (MAX_FILE_BYTES + 1))
    with pytest.raises(errors.InputError) as caught:
        read_circuit(path)
    assert "larger" in caught.value.message and caught.value.file == str(path)


def test_byte_order_mark(tmp_path):
    """A UTF-8 byte-order mark (as some editors write) is accepted."""
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + GOOD.encode())
    assert read_circuit(path).title == "Good: every kind"


def test_deep_nesting():
    """Arrays nested far beyond any real file give an InputError, not a RecursionError."""
    with pytest.raises(errors.InputError):
        parse_circuit("title = " + "[" * 50000)


def test_huge_integer():
    """An integer beyond the float range is a UnitError, not an OverflowError."""
    text = GOOD.replace('value = "4k7"', "value = 1" + "0" * 400)
    with pytest.raises(errors.UnitError) as caught:
        parse_circuit(text)
    assert (caught.value.part, caught.value.field) == ("R1", "value")


def test_too_many_steps():
    """A schedule longer than the documented limit is an InputError naming its field."""
    steps = ", ".join(f'["{i} ms", "{i % 2} V"]' for i in range(1, 10002))
    text = GOOD.replace('steps = [["0 s", "3.3 V"], ["10 ms", "0 V"]]', f"steps = [{steps}]")
    with pytest.raises(errors.InputError) as caught:
        parse_circuit(text)
    assert (caught.value.part, caught.value.field) == ("V1", "steps")


def test_many_events_fast():
    """A switch toggling 2000 times is read and checked (each switch state once)."""
    steps = ", ".join(f'["{5 * i} us", "{"closed" if i % 2 else "open"}"]' for i in range(1, 2001))
    text = GOOD.replace('steps = [["5 ms", "closed"], ["7 ms", "open"]]', f"steps = [{steps}]")
    assert len(parse_circuit(text).events) > 2000


_KEYS = st.sampled_from(["kind", "nodes", "value", "initial", "steps", "state", "gain",
                         "control", "on-resistance", "off-resistance", "x", ""])
_SCALARS = st.one_of(
    st.sampled_from(["resistor", "capacitor", "inductor", "voltage-source", "current-source",
                     "switch", "vcvs", "vccs", "ccvs", "cccs", "open", "closed", "1k", "4k7",
                     "1 uF", "-1", "0", "3.3 V", "1 A", "= R1*2", "1e999", "", "µ", "gnd", "a",
                     "R1", "V1"]),
    st.integers(-10**30, 10**30), st.floats(allow_nan=True, allow_infinity=True),
    st.booleans(), st.text(max_size=6))
_VALUES = st.recursive(_SCALARS, lambda inner: st.lists(inner, max_size=3), max_leaves=6)


def _toml(value) -> str:
    """Our own tiny TOML writer for generated values (strings, numbers, booleans, lists)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf") \
            if math.isinf(value) else repr(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, str):
        return '"' + "".join(c if c.isprintable() and c not in '"\\' else f"\\u{ord(c):04x}"
                             for c in value) + '"'
    return "[" + ", ".join(_toml(v) for v in value) + "]"


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(st.dictionaries(_KEYS, _VALUES, max_size=6), min_size=1, max_size=4),
       st.dictionaries(st.sampled_from(["node", "across", "through", "at", "before", "tau",
                                        "tolerance", "between"]), _VALUES, max_size=4))
def test_fuzz_never_crashes(parts, expect):
    """Random part tables either read into a Circuit or raise InputError (issue 5, item 1)."""
    lines = ['title = "fuzz"', "[parts]",
             'V1 = { kind = "voltage-source", nodes = ["a", "gnd"], value = "1 V" }']
    for i, spec in enumerate(parts):
        lines.append(f"R{i} = {{ " + ", ".join(f'"{k}" = {_toml(v)}' for k, v in spec.items())
                     + " }")
    lines.append("[[expect]]")
    lines += [f'"{k}" = {_toml(v)}' for k, v in expect.items()]
    try:
        circuit = parse_circuit("\n".join(lines) + "\n", "fuzz.toml")
    except errors.InputError as err:
        assert err.file == "fuzz.toml"
    else:
        assert isinstance(circuit, model.Circuit)


def test_dotted_key_lines():
    """Parts written with dotted keys (R1.value = ...) are located on the field's line."""
    text = ('[parts]\nV1.kind = "voltage-source"\nV1.nodes = ["a", "gnd"]\nV1.value = 1\n'
            'R1.kind = "resistor"\nR1.nodes = ["a", "gnd"]\nR1.value = "x"\n')
    with pytest.raises(errors.UnitError) as caught:
        parse_circuit(text)
    assert (caught.value.part, caught.value.field, caught.value.line) == ("R1", "value", 7)


@pytest.mark.parametrize("text, part, field, line", [
    ('title = "a"\ntitle = "b"\n', None, "title", 2),
    ('[parts]\nV1 = { kind = "voltage-source", nodes = ["a", "gnd"], value = 1 }\n'
     '[[expect]]\nnode = "a"\nnode = "gnd"\n', "expect #1", "node", 5),
])
def test_duplicate_keys(text, part, field, line):
    """A key given twice is named with both lines (TOML forbids it; the message says where)."""
    with pytest.raises(errors.InputError) as caught:
        parse_circuit(text)
    assert (caught.value.part, caught.value.field, caught.value.line) == (part, field, line)
    assert "twice" in caught.value.message
