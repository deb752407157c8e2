"""Every layering rule of the house is a test (DEVELOPERS.md, "Architecture").

Rules, each checked on every module's import statements (parsed with ``ast``; relative imports
resolved; imports inside functions count too):

* the model and the result contract import no engine, comparator, report or application module;
* an engine imports no report, comparator or application module (and not the other engine:
  ``tests/test_independence.py``);
* the comparator imports no report writer, command line, runner or pool;
* report writers import no engine or application module (they may use the worker pool and the
  progress bar, shared infrastructure).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from test_independence import imported_modules

HARNESS = Path(__file__).resolve().parents[1] / "harness"
ENGINES = ("harness.closedform", "harness.simulate")
COMPARATOR = ("harness.compare", "harness.findings")
#: the command line and what drives a run (the worker pool and the progress bar are shared
#: infrastructure: the report writers draw plots in the same pool)
APPLICATION = ("harness.cli", "harness.runner", "harness.config", "harness.starter",
               "harness.pytest_plugin")
INFRASTRUCTURE = ("harness.pool", "harness.progress")
REPORT = ("harness.report",)

RULES = {
    "model": (("harness.model", "harness.fieldspec", "harness.results", "harness.units",
               "harness.errors"),
              ENGINES + COMPARATOR + REPORT + APPLICATION),
    "engines": (ENGINES, REPORT + COMPARATOR + APPLICATION + INFRASTRUCTURE),
    "comparator": (COMPARATOR, REPORT + APPLICATION + INFRASTRUCTURE),
    "report": (REPORT, ENGINES + APPLICATION),
}


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
