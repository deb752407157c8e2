"""The two engines share no code: neither package imports the other (DESIGN.md, issue 3).

Every module of harness/simulate and harness/closedform is parsed with ``ast`` and each import
statement (absolute, and relative resolved against the module's package) is checked.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

HARNESS = Path(__file__).resolve().parents[1] / "harness"
ENGINES = {"simulate": "harness.closedform", "closedform": "harness.simulate"}


def imported_modules(path: Path, package: str) -> set[str]:
    """Fully qualified names of every module imported by the file at ``path`` (a module of
    ``package``), relative imports resolved, ``from X import y`` counted as X and X.y."""
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    names: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                parts = package.split(".")
                base = parts[: len(parts) - node.level + 1]
                module = ".".join(base + ([node.module] if node.module else []))
            else:
                module = node.module or ""
            names.add(module)
            names.update(f"{module}.{alias.name}" for alias in node.names)
    return names


def _violations(engine: str) -> list[str]:
    forbidden = ENGINES[engine]
    package = f"harness.{engine}"
    bad = []
    for path in sorted((HARNESS / engine).rglob("*.py")):
        sub = path.relative_to(HARNESS / engine).with_suffix("").parts[:-1]
        pkg = ".".join([package, *sub])
        for name in imported_modules(path, pkg):
            if name == forbidden or name.startswith(forbidden + "."):
                bad.append(f"{path.relative_to(HARNESS.parent)} imports {name}")
    return bad


@pytest.mark.parametrize("engine", sorted(ENGINES))
def test_engine_does_not_import_the_other(engine):
    """No module of one engine imports the other engine's package (absolute or relative)."""
    assert (HARNESS / engine).is_dir(), f"harness/{engine} is missing"
    assert list((HARNESS / engine).rglob("*.py")), f"harness/{engine} has no modules"
    assert _violations(engine) == []


def test_the_check_sees_relative_imports(tmp_path):
    """The checker resolves ``from ..closedform import x`` inside harness.simulate (self-test)."""
    module = tmp_path / "probe.py"
    module.write_text("from ..closedform import solve\nfrom . import engine\nimport numpy\n")
    names = imported_modules(module, "harness.simulate")
    assert "harness.closedform" in names and "harness.closedform.solve" in names
    assert "harness.simulate.engine" in names and "numpy" in names
