"""The engine contract (``harness.results.Solution``) is explicit: every engine, and the trust
guard around one, answers every question of the protocol -- the required ones with values, the
optional ones it does not compute with "not computed" (``results.NotComputed``) -- so the
comparator asks them directly and never probes with ``hasattr``.  The reference is the protocol
itself, read from its class body."""

from __future__ import annotations

import ast
import inspect
from pathlib import Path

import pytest

from harness import closedform, simulate
from harness.circuitfile import parse_circuit
from harness.closedform.solution import ClosedFormSolution
from harness.compare.trust import Guarded, guard
from harness.model import Probe
from harness.results import Conditioning, NotComputed, Solution
from harness.simulate.solution import NumericSolution

COMPARE = Path(__file__).resolve().parents[1] / "harness" / "compare"

RC = """
title = "RC step"
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "5 V"]] }
R1 = { kind = "resistor", nodes = ["in", "out"], value = "1 k" }
C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1 uF" }
[[expect]]
node = "out"
final = "5 V"
"""


def _protocol_names() -> set[str]:
    body = inspect.getsource(Solution)
    tree = ast.parse(body).body[0]
    names = {n.name for n in tree.body if isinstance(n, ast.FunctionDef)}
    names |= {n.target.id for n in tree.body if isinstance(n, ast.AnnAssign)}
    return names


@pytest.mark.parametrize("cls", [ClosedFormSolution, NumericSolution, Guarded])
def test_every_engine_class_answers_the_whole_protocol(cls):
    names = _protocol_names()
    assert {"features", "crossing", "resolution", "thevenin", "withheld"} <= names
    fields = getattr(cls, "__dataclass_fields__", {})
    missing = [n for n in names if not hasattr(cls, n) and n not in fields
               and n not in ("engine", "circuit", "warnings", "hazards")]
    assert not missing, f"{cls.__name__} lacks {missing}"


def test_optional_answers_read_not_computed_where_an_engine_does_not_give_them():
    circuit = parse_circuit(RC)
    exact, numeric = closedform.solve(circuit), simulate.solve(circuit)
    assert isinstance(exact, NotComputed) and isinstance(numeric, NotComputed)
    assert numeric.thevenin(0) is None and numeric.conditioning() is None
    assert numeric.hazards == () and numeric.withheld(0) is None
    assert exact.resolution(0) is None and exact.withheld(0) is None
    assert numeric.resolution(0) > 0
    assert set(exact.thevenin(0)) == {"C1"}          # R_th = R1 (the source is a short)
    assert exact.thevenin(0)["C1"] == pytest.approx(1e3, rel=1e-12)
    assert len(exact.conditioning()) == len(circuit.events)


def test_the_trust_guard_wraps_either_engine_from_outside():
    circuit = parse_circuit(RC)
    numeric = simulate.solve(circuit)
    bad = tuple(Conditioning(k, t, 1e17, 1.0) for k, t in enumerate(circuit.events))
    guarded = guard(numeric, bad)
    assert isinstance(guarded, Guarded)
    assert guarded.withheld(0) and guarded.features(Probe("node", ("out",)), 0).final is None
    assert guarded.resolution(0) == numeric.resolution(0)
    assert guard(numeric, None) is numeric
    ok = tuple(Conditioning(k, t, 1.0, 1.0) for k, t in enumerate(circuit.events))
    assert guard(numeric, ok) is numeric


def test_the_comparator_probes_no_solution_with_hasattr():
    for path in sorted(COMPARE.glob("*.py")):
        tree = ast.parse(path.read_text())
        for node in ast.walk(tree):
            if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) and \
                    node.func.id in ("hasattr", "getattr"):
                target = ast.unparse(node.args[0])
                assert target in ("fe", "fn"), f"{path.name}: {ast.unparse(node)}"


def _package_imports(path: Path) -> tuple[set[str], list[str]]:
    """(modules of harness.compare imported at the top of ``path``, imports inside functions)."""
    tree = ast.parse(path.read_text())
    top = set()
    for node in tree.body:
        if isinstance(node, ast.ImportFrom) and node.level == 1:
            top.add(node.module or "")
    nested = [ast.unparse(n) for f in ast.walk(tree)
              if isinstance(f, (ast.FunctionDef, ast.AsyncFunctionDef))
              for n in ast.walk(f) if isinstance(n, (ast.Import, ast.ImportFrom))]
    return top, nested


def test_the_comparator_package_imports_at_the_top_and_has_no_cycle():
    """Every module of harness/compare imports at its top (none inside a function to dodge a
    cycle), and its imports within the package form no cycle (a depth-first search)."""
    graph = {}
    for path in sorted(COMPARE.glob("*.py")):
        top, nested = _package_imports(path)
        assert not nested, f"{path.name} imports inside a function: {nested}"
        graph[path.stem] = {m.split(".")[0] for m in top if m}
    state: dict[str, str] = {}

    def visit(name: str, trail: tuple[str, ...]) -> None:
        assert state.get(name) != "open", f"import cycle: {' -> '.join(trail + (name,))}"
        if state.get(name) == "done":
            return
        state[name] = "open"
        for nxt in sorted(graph.get(name, ())):
            visit(nxt, trail + (name,))
        state[name] = "done"

    for name in graph:
        visit(name, ())
