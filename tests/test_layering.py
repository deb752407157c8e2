"""Every layering rule of the house is a test (DEVELOPERS.md, "Architecture").

Rules, each checked on every module's import statements (parsed with ``ast``; relative imports
resolved; imports inside functions count too):

* the model and the result contract import no engine, comparator, report or application module;
* an engine imports no report, comparator or application module (and not the other engine:
  ``tests/test_independence.py``);
* the comparator imports no report writer, command line, runner or pool;
* report writers import no engine or application module (they may use the worker pool and the
  progress bar, shared infrastructure);
* the words (``harness.messages``, every sentence for a diagnostic) import no engine,
  comparator, report or application module, and no engine imports them: engines return data.

Beside them, on the same parsed files: no import cycle among the modules of ``harness``
(module-level imports: those inside functions and under ``if TYPE_CHECKING`` run later or
never), no module over ``MODULE_LINES`` lines and no function over ``FUNCTION_LINES`` (the few
exemptions are listed with their reason).
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from test_independence import imported_modules

HARNESS = Path(__file__).resolve().parents[1] / "harness"
ENGINES = ("harness.closedform", "harness.simulate")
COMPARATOR = ("harness.compare", "harness.findings", "harness.feedback")
#: the command line and what drives a run (the worker pool and the progress bar are shared
#: infrastructure: the report writers draw plots in the same pool)
APPLICATION = ("harness.cli", "harness.runner", "harness.config", "harness.starter",
               "harness.pytest_plugin", "harness.cluster", "harness.clusterparts",
               "harness.derivecmd")
INFRASTRUCTURE = ("harness.pool", "harness.progress")
REPORT = ("harness.report",)
WORDS = ("harness.messages",)

RULES = {
    "model": (("harness.model", "harness.fieldspec", "harness.results", "harness.units",
               "harness.errors"),
              ENGINES + COMPARATOR + REPORT + APPLICATION + WORDS),
    "engines": (ENGINES, REPORT + COMPARATOR + APPLICATION + INFRASTRUCTURE + WORDS),
    "comparator": (COMPARATOR, REPORT + APPLICATION + INFRASTRUCTURE),
    "report": (REPORT, ENGINES + APPLICATION),
    "words": (WORDS, ENGINES + COMPARATOR + REPORT + APPLICATION + INFRASTRUCTURE),
}

#: the size limits of the house (DEVELOPERS.md): lines of a module, of a function (its
#: definition to its last line, docstring included)
MODULE_LINES = 600
FUNCTION_LINES = 60
#: "module:function" -> why it may be longer
LONG_FUNCTIONS: dict[str, str] = {}


def _module_name(path: Path) -> str:
    rel = path.relative_to(HARNESS.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _modules(prefixes: tuple[str, ...]):
    for path in sorted(HARNESS.rglob("*.py")):
        name = _module_name(path)
        if any(name == p or name.startswith(p + ".") for p in prefixes):
            package = name if path.name == "__init__.py" else name.rsplit(".", 1)[0]
            yield name, path, package


def _hits(imported: set[str], forbidden: tuple[str, ...]) -> list[str]:
    return sorted(m for m in imported
                  if any(m == f or m.startswith(f + ".") for f in forbidden))


@pytest.mark.parametrize("rule", sorted(RULES))
def test_layering_rule(rule):
    layer, forbidden = RULES[rule]
    bad = []
    for name, path, package in _modules(layer):
        hits = _hits(imported_modules(path, package), forbidden)
        if hits:
            bad.append(f"{name} imports {', '.join(hits)}")
    assert not bad, "\n".join(bad)


def test_the_rules_see_every_layer():
    """Each layer names modules that exist (a renamed module must not empty a rule)."""
    for rule, (layer, _) in RULES.items():
        assert list(_modules(layer)), f"rule {rule!r}: no module of {layer} exists"


def _all_modules() -> dict[str, tuple[Path, str]]:
    return {name: (path, package) for name, path, package in _modules(("harness",))}


def _is_type_checking(test: ast.expr) -> bool:
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or \
        (isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING")


def _module_level(body: list[ast.stmt]):
    """The import statements that run when the module is imported (not inside a function or
    class, not under ``if TYPE_CHECKING``)."""
    for node in body:
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            yield node
        elif isinstance(node, ast.If) and not _is_type_checking(node.test):
            yield from _module_level(node.body + node.orelse)
        elif isinstance(node, ast.Try):
            yield from _module_level(node.body + node.orelse + node.finalbody
                                     + [s for h in node.handlers for s in h.body])


def _import_graph() -> dict[str, set[str]]:
    """harness module -> the harness modules its module-level imports load (``from p import
    x`` counts as the module p.x where that is a module, else as p)."""
    known = _all_modules()
    graph = {}
    for name, (path, package) in known.items():
        edges = set()
        for node in _module_level(ast.parse(path.read_text(encoding="utf-8")).body):
            if isinstance(node, ast.Import):
                edges.update(a.name for a in node.names)
                continue
            base = package.split(".")[: len(package.split(".")) - node.level + 1] \
                if node.level else []
            module = ".".join(base + ([node.module] if node.module else []))
            edges.update(f"{module}.{a.name}" if f"{module}.{a.name}" in known else module
                         for a in node.names)
        graph[name] = {e for e in edges if e in known and e != name}
    return graph


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """The strongly connected components of more than one module (Tarjan, iterative)."""
    index, low, stack, on, out, counter = {}, {}, [], set(), [], 0
    for root in sorted(graph):
        if root in index:
            continue
        work = [(root, iter(sorted(graph[root])))]
        index[root] = low[root] = counter = counter + 1
        stack.append(root)
        on.add(root)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is not None:
                if child not in index:
                    index[child] = low[child] = counter = counter + 1
                    stack.append(child)
                    on.add(child)
                    work.append((child, iter(sorted(graph[child]))))
                elif child in on:
                    low[node] = min(low[node], index[child])
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                group = []
                while True:
                    member = stack.pop()
                    on.discard(member)
                    group.append(member)
                    if member == node:
                        break
                if len(group) > 1:
                    out.append(sorted(group))
    return out


def test_no_import_cycles():
    """No two modules of harness import each other, directly or round a longer loop, at module
    level."""
    assert _cycles(_import_graph()) == []


def test_the_cycle_check_sees_a_cycle():
    """Self-test: a loop of three and a pair are found, a chain is not."""
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"e"}, "e": {"d"}, "f": {"a"}}
    assert sorted(_cycles(graph)) == [["a", "b", "c"], ["d", "e"]]
    assert _cycles({"a": {"b"}, "b": set()}) == []


def test_modules_and_functions_stay_small():
    """No module over MODULE_LINES lines, no function over FUNCTION_LINES (LONG_FUNCTIONS
    excepted, each with its reason)."""
    bad = []
    for name, (path, _) in _all_modules().items():
        text = path.read_text(encoding="utf-8")
        if len(text.splitlines()) > MODULE_LINES:
            bad.append(f"{name}: {len(text.splitlines())} lines")
        for node in ast.walk(ast.parse(text)):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                length = node.end_lineno - node.lineno + 1
                if length > FUNCTION_LINES and f"{name}:{node.name}" not in LONG_FUNCTIONS:
                    bad.append(f"{name}:{node.name}: {length} lines")
    assert not bad, "\n".join(bad)


def test_exemptions_are_still_needed():
    """An exempt function that has come within the limit leaves LONG_FUNCTIONS."""
    known = _all_modules()
    for key in LONG_FUNCTIONS:
        name, function = key.split(":")
        if name not in known:
            continue
        tree = ast.parse(known[name][0].read_text(encoding="utf-8"))
        lengths = [n.end_lineno - n.lineno + 1 for n in ast.walk(tree)
                   if isinstance(n, ast.FunctionDef) and n.name == function]
        assert lengths and max(lengths) > FUNCTION_LINES, f"{key} is short now: drop it"
