"""pytest collects circuit files: each file a test module, each ``[[expect]]`` block a test item.

Registered through the ``pytest11`` entry point, so it is active wherever the package is
installed.  A ``*.toml`` file is collected when it lies under a path of ``[tool.tauproof]
paths`` (``harness.config``), or under a file or folder named on pytest's command line that is
not inside the ``testpaths`` folders (a bare ``pytest`` run of a project's own tests never
collects circuits, and test data written as TOML stays data).  Each file gives one item per
``[[expect]]`` block, named by its probe and event (``node rst at 0 s``), and one item ``file``
that fails on what belongs to the file: it could not be analysed, it holds nothing to check,
or it has findings it does not acknowledge.  A failing item prints the console's diagnosis.

The file is analysed once per process, when its first item runs (``[tool.tauproof]``
``closed-form-only`` and ``tolerance`` apply); under pytest-xdist ``--dist loadfile`` keeps a
file's items on one worker.  Importing this module costs nothing: the engines load when the
first circuit item runs.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

_SCOPE = pytest.StashKey["_Scope"]()


def pytest_configure(config: pytest.Config) -> None:
    config.stash[_SCOPE] = _Scope(config)


def pytest_collect_file(file_path: Path, parent: pytest.Collector):
    if file_path.suffix != ".toml":
        return None
    scope = parent.config.stash.get(_SCOPE, None)
    if scope is None or not scope.wants(file_path):
        return None
    return CircuitFile.from_parent(parent, path=file_path)


class _Scope:
    """Which TOML files are circuits to collect; the project settings, read once."""

    def __init__(self, config: pytest.Config) -> None:
        self._config = config
        self._settings = None
        where = config.invocation_params.dir
        self._explicit: list[Path] = []
        if config.args_source == pytest.Config.ArgsSource.ARGS:
            self._explicit = [(where / a.split("::")[0]).resolve() for a in config.args]
        testpaths = config.getini("testpaths") or []
        self._excluded = [(config.rootpath / p).resolve() for p in testpaths]

    @property
    def settings(self):
        """The ``[tool.tauproof]`` settings (``config.ProjectConfig``), read on first use."""
        if self._settings is None:
            from .config import ConfigError, load
            try:
                self._settings = load(self._config.invocation_params.dir)
            except ConfigError as err:
                raise pytest.UsageError(str(err)) from None
        return self._settings

    def wants(self, path: Path) -> bool:
        path = path.resolve()
        if any(_under(path, Path(p)) for p in self.settings.paths):
            return True
        return any(_under(path, arg) for arg in self._explicit) and \
            not any(_under(path, folder) for folder in self._excluded)


def _under(path: Path, top: Path) -> bool:
    return path == top or top in path.parents


class CircuitFailure(Exception):
    """A circuit item that did not pass; the text is the console's diagnosis."""


class CircuitFile(pytest.File):
    """One circuit file: its ``[[expect]]`` items and the ``file`` item."""

    _result = None

    def collect(self):
        blocks = _expect_blocks(self.path)
        names: set[str] = set()
        for index, (name, line) in enumerate(blocks):
            unique = name if name not in names else f"{name} (#{index + 1})"
            names.add(unique)
            yield ExpectItem.from_parent(self, name=unique, index=index, line=line)
        yield FileItem.from_parent(self, name="file")

    def result(self):
        """The file's ``FileResult`` (``check``'s view: nothing checked is not a pass), once."""
        if self._result is None:
            from .outcome import RunResult, require_checks
            from .runner import check_file
            settings = self.config.stash[_SCOPE].settings
            found = check_file(_shown(self.path, self.config), not settings.closed_form_only,
                               settings.tolerance)
            self._result = require_checks(RunResult((found,))).files[0]
        return self._result


def _shown(path: Path, config: pytest.Config) -> str:
    """``path`` relative to where pytest was started when it lies below it."""
    try:
        return str(path.relative_to(config.invocation_params.dir))
    except ValueError:
        return str(path)


def _expect_blocks(path: Path) -> list[tuple[str, int | None]]:
    """(``probe at event`` as written, line) of each ``[[expect]]`` block; [] when the file
    cannot be read (the ``file`` item then reports why)."""
    try:
        text = path.read_text(encoding="utf-8")
        blocks = tomllib.loads(text).get("expect", [])
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError, RecursionError, ValueError):
        return []
    if not isinstance(blocks, list):
        return []
    from .filelines import Locator
    locator = Locator.scan(text)
    out = []
    for index, block in enumerate(blocks):
        block = block if isinstance(block, dict) else {}
        probe = next((f"{key} {_words(block[key])}" for key in ("node", "between", "across",
                                                                 "through") if key in block),
                     f"expect #{index + 1}")
        at = block.get("at", "0 s")
        out.append((f"{probe} at {at if isinstance(at, str) else f'{at:g} s'}",
                    locator.line_of(("expect", index))))
    return out


def _words(value: object) -> str:
    return " ".join(map(str, value)) if isinstance(value, list) else str(value)


class _CircuitItem(pytest.Item):
    """Shared failure text and location of the circuit items."""

    line: int | None = None

    def repr_failure(self, excinfo, style=None):
        if isinstance(excinfo.value, CircuitFailure):
            return str(excinfo.value)
        return super().repr_failure(excinfo, style)

    def reportinfo(self):
        return self.path, (self.line - 1 if self.line else None), f"{self.path.name}::{self.name}"


class ExpectItem(_CircuitItem):
    """One ``[[expect]]`` block: passes when its check's verdict is ``pass``."""

    def __init__(self, *, index: int, line: int | None = None, **kwargs) -> None:
        super().__init__(**kwargs)
        self.index, self.line = index, line

    def runtest(self) -> None:
        from dataclasses import replace
        from .outcome import PASS, RunResult
        from .report.console import render_failures
        file = self.parent.result()
        check = next((c for c in file.checks if c.index == self.index), None)
        if check is None:
            pytest.skip("the file could not be analysed (see its `file` item)")
        if check.verdict != PASS:
            only = replace(file, checks=(check,), messages=())
            raise CircuitFailure(render_failures(RunResult((only,))))


class FileItem(_CircuitItem):
    """What belongs to the file: it was analysed, it holds checks, its findings are accepted."""

    def runtest(self) -> None:
        from .report import common
        file = self.parent.result()
        found = [f["message"] for f in file.findings if not f.get("acknowledged")]
        problems = list(file.errors) + list(file.messages) + [f"finding: {m}" for m in found]
        if problems:
            lines = [f"{file.file}: {file.verdict}"] + [common.printable(p) for p in problems]
            raise CircuitFailure("\n".join(lines))
