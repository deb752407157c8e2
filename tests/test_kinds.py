"""Each part kind is declared once (``model.KIND_SPECS``) and each engine finds its own stamp of
it by the kind; the engines' modules form no import cycle.

The declared branch types and gain units are checked against the usual classification of
network elements (common practice in nodal analysis: an ideal or controlled voltage source fixes
its voltage and carries any current; a current source fixes its current; a transconductance is
in A/V = S, a transresistance in V/A = Ω, voltage and current gains are ratios).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from harness import model as m
from harness.closedform.stamps import STAMPS as EXACT
from harness.derive.network import STAMPS as SYMBOLIC
from harness.simulate.branches import EQUATIONS as NUMERIC
from test_independence import imported_modules

HARNESS = Path(__file__).resolve().parents[1] / "harness"


@pytest.mark.parametrize("registry", [EXACT, NUMERIC, SYMBOLIC],
                         ids=["closedform", "simulate", "derive"])
def test_every_declared_kind_has_one_stamp(registry):
    """Each route has a stamp for exactly the declared kinds (no stale, none missing)."""
    assert set(registry) == set(m.KIND_SPECS)


def test_declarations_follow_the_usual_element_classes():
    """Voltage-type, current-type and controlled kinds, and the gain units (common practice)."""
    assert m.VOLTAGE_BRANCHES == (m.VOLTAGE_SOURCE, m.VCVS, m.CCVS, m.OPAMP)
    assert m.CURRENT_BRANCHES == (m.CURRENT_SOURCE, m.VCCS, m.CCCS)
    assert m.SOURCES == (m.VOLTAGE_SOURCE, m.CURRENT_SOURCE)
    assert m.STORAGE == (m.CAPACITOR, m.INDUCTOR)
    assert m.VOLTAGE_CONTROLLED == (m.VCVS, m.VCCS, m.OPAMP)
    assert m.CURRENT_CONTROLLED == (m.CCVS, m.CCCS)
    gains = {kind: m.KIND_SPECS[kind].units["gain"] for kind in m.CONTROLLED}
    assert gains == {m.VCVS: "1", m.VCCS: "S", m.CCVS: "ohm", m.CCCS: "1", m.OPAMP: "1"}
    for spec in m.KIND_SPECS.values():
        assert set(spec.required) <= set(spec.fields), spec.name
        assert set(spec.units) <= set(spec.fields), spec.name


def _cycle(package: str) -> list[str] | None:
    """A cycle of imports among the modules of ``package`` (imports inside functions count),
    as a list of module names, or None."""
    folder = HARNESS / package.split(".", 1)[1].replace(".", "/")
    modules = {f"{package}.{p.stem}": p for p in folder.glob("*.py") if p.stem != "__init__"}
    graph = {name: sorted(imported_modules(path, package) & set(modules) - {name})
             for name, path in modules.items()}
    state: dict[str, int] = {}
    path: list[str] = []

    def visit(name: str) -> list[str] | None:
        state[name] = 1
        path.append(name)
        for nxt in graph[name]:
            if state.get(nxt) == 1:
                return path[path.index(nxt):] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        state[name] = 2
        path.pop()
        return None

    for name in sorted(modules):
        if name not in state:
            found = visit(name)
            if found:
                return found
    return None


@pytest.mark.parametrize("package", ["harness.simulate", "harness.closedform"])
def test_engine_modules_form_no_import_cycle(package):
    """No engine module imports, directly or through others, a module that imports it."""
    assert _cycle(package) is None


def test_the_cycle_check_sees_a_cycle(tmp_path, monkeypatch):
    """Self-test: two modules importing each other are reported."""
    pkg = tmp_path / "harness" / "loop"
    pkg.mkdir(parents=True)
    (pkg / "__init__.py").write_text("")
    (pkg / "a.py").write_text("from .b import x\n")
    (pkg / "b.py").write_text("def f():\n    from .a import y\n")
    monkeypatch.setitem(globals(), "HARNESS", tmp_path / "harness")
    assert _cycle("harness.loop") in (["harness.loop.a", "harness.loop.b", "harness.loop.a"],
                                      ["harness.loop.b", "harness.loop.a", "harness.loop.b"])


#: an operational amplifier with a gain-bandwidth field as a declaration only (a nullor: the output fixes its voltage
#: and carries whatever current the circuit demands, the inputs sense a voltage pair; the
#: open-loop gain and the gain-bandwidth product optional) — the shape the declarations must
#: be able to express; no engine stamps it
OPAMP = m.KindSpec("gbw-opamp", "an ideal operational amplifier", "operational amplifier",
                   ("control", "gain", "value", "gbw"), {"gain": "1", "value": "1", "gbw": "Hz"},
                   m.VOLTAGE_TYPE, required=("control",), control=m.VOLTAGE_PAIR,
                   field_help={"gbw": "gain-bandwidth product (default: no pole)"})


def _with_opamp(monkeypatch):
    monkeypatch.setattr(m, "KIND_SPECS", {**m.KIND_SPECS, OPAMP.name: OPAMP})


def test_reader_reads_a_newly_declared_kind(monkeypatch):
    """A four-terminal kind with an unknown output current and optional quantity fields is
    read from its declaration alone: optional gain left out (None), gbw into ``params``."""
    from harness.circuitfile import parse_circuit
    _with_opamp(monkeypatch)
    text = '''
title = "follower"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "1 V" }
U1 = { kind = "gbw-opamp", nodes = ["out", "gnd"], control = ["in", "out"], gbw = "1 MHz" }
RL = { kind = "resistor", nodes = ["out", "gnd"], value = "1k" }
'''
    part = parse_circuit(text, "f.toml").part("U1")
    assert (part.value, part.control, part.param("gbw")) == (None, ("in", "out"), 1e6)
    with_gain = parse_circuit(text.replace('gbw = "1 MHz"', 'gain = "1e5"'), "f.toml")
    assert with_gain.part("U1").value == 1e5 and with_gain.part("U1").params == ()


def test_topology_and_reference_read_a_newly_declared_kind(monkeypatch):
    """Its output is voltage-type for the graph checks (two in parallel with a source is a
    source loop) and the reference lists it with its fields."""
    from harness.circuitfile import parse_circuit
    from harness.errors import TopologyError
    from harness.reference import format_reference
    _with_opamp(monkeypatch)
    text = '''
title = "output against a source"
[parts]
V1 = { kind = "voltage-source", nodes = ["out", "gnd"], value = "1 V" }
U1 = { kind = "gbw-opamp", nodes = ["out", "gnd"], control = ["a", "gnd"] }
R1 = { kind = "resistor", nodes = ["a", "gnd"], value = "1k" }
'''
    with pytest.raises(TopologyError, match="V1 and U1 form a loop"):
        parse_circuit(text, "loop.toml")
    reference = format_reference()
    assert "| `gbw-opamp` | an ideal operational amplifier | `control`, `gain`, `value`, `gbw` |" \
        in reference
    assert "| `gbw` | gain-bandwidth product (default: no pole) |" in reference
