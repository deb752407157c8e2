"""Project settings: the ``[tool.tauproof]`` table of the nearest ``pyproject.toml``.

``find`` walks up from a folder (the working directory) to the first ``pyproject.toml`` that
holds a ``[tool.tauproof]`` table, as other Python tools look for their settings; ``load`` reads
and checks it into a frozen ``ProjectConfig``.  Paths in the table are relative to the folder of
that ``pyproject.toml``.  Command-line options override every key (``harness.cli``).  An unknown
key, or a value of the wrong type, is a ``ConfigError`` naming the file and the key.

This module imports nothing heavy: the pytest plugin reads it while pytest starts.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from pathlib import Path

from .errors import InputError

#: the settings file looked for in each folder on the way up
PYPROJECT = "pyproject.toml"
#: what the console shows: "attention" (what needs it, in full; passes summarised) or "all"
SHOW_CHOICES = ("attention", "all")

#: every key of [tool.tauproof]: (TOML type in words, description). The reference and the
#: README's table are written from this.
KEYS: dict[str, tuple[str, str]] = {
    "paths": ("list of text", "circuit files or folders checked when the command line names "
                              "none; also what `pytest` collects as circuit tests"),
    "report-dir": ("text", "folder the reports are written to (default `reports`)"),
    "jobs": ("whole number", "files analysed in parallel worker processes (default 1)"),
    "timeout": ("number of seconds", "limit per file; past it the file is an error "
                                     "(default: none)"),
    "closed-form-only": ("true/false", "skip the numerical engine (default false)"),
    "tolerance": ("number or percent text", "relative tolerance for hand values of files whose "
                                            "`[settings]` give none (default \"1 %\")"),
    "show": ("text", "console rows: \"attention\" (failures in full, passes summarised; "
                     "default) or \"all\""),
    "cluster": ("text", "Dask scheduler the files are analysed on, as `--cluster`: "
                        "`tcp://host:8786`, or `local:N` for N local worker processes "
                        "(default: none, this machine)"),
}


class ConfigError(InputError):
    """``[tool.tauproof]`` cannot be used: an unknown key or a value of the wrong type."""


@dataclass(frozen=True, eq=False)
class ProjectConfig:
    """The checked ``[tool.tauproof]`` settings; None where the table does not set a key.

    Attributes:
        file: the ``pyproject.toml`` they came from, or None when none was found.
        paths: circuit files or folders, made absolute against the file's folder.
    """

    file: Path | None = None
    paths: tuple[str, ...] = ()
    report_dir: str | None = None
    jobs: int | None = None
    timeout: float | None = None
    closed_form_only: bool | None = None
    tolerance: float | None = None
    show: str | None = None
    cluster: str | None = None


def find(start: Path | None = None) -> tuple[Path, dict] | None:
    """(pyproject path, its [tool.tauproof] table) nearest ``start`` (default: the working
    directory) going up, or None.  A ``pyproject.toml`` without the table is passed over."""
    folder = Path(start or Path.cwd()).resolve()
    for place in (folder, *folder.parents):
        candidate = place / PYPROJECT
        if not candidate.is_file():
            continue
        try:
            data = tomllib.loads(candidate.read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
            raise ConfigError(f"cannot read the project settings: {exc}",
                              file=str(candidate)) from None
        table = data.get("tool", {}).get("tauproof") if isinstance(data.get("tool"), dict) \
            else None
        if table is not None:
            return candidate, table
    return None


def load(start: Path | None = None) -> ProjectConfig:
    """The project settings found from ``start`` (``ProjectConfig()`` when there are none).

    Raises:
        ConfigError: naming the file and the key at fault.
    """
    found = find(start)
    if found is None:
        return ProjectConfig()
    path, table = found
    return parse(table, path)


def parse(table: object, path: Path) -> ProjectConfig:
    """Check a ``[tool.tauproof]`` table read from ``path``."""
    def fail(key: str, message: str) -> ConfigError:
        return ConfigError(f"[tool.tauproof] key {key!r}: {message}", file=str(path))

    if not isinstance(table, dict):
        raise fail("", "must be a table")
    for key in table:
        if key not in KEYS:
            from .filelines import quoted_list, suggest
            raise fail(key, f"unknown key{suggest(key, tuple(KEYS))}; the keys are "
                            f"{quoted_list(tuple(KEYS))}")
    base = path.parent
    values: dict = {"file": path}
    for key, raw in table.items():
        check = _CHECKS[key]
        try:
            values[key.replace("-", "_")] = check(raw, base)
        except (TypeError, ValueError) as exc:
            raise fail(key, str(exc)) from None
    return ProjectConfig(**values)


def _paths(raw: object, base: Path) -> tuple[str, ...]:
    if isinstance(raw, str):
        raw = [raw]
    if not isinstance(raw, list) or not raw or not all(isinstance(p, str) and p for p in raw):
        raise TypeError('must be a list of file or folder names, e.g. paths = ["circuits"]')
    return tuple(str(base / p) for p in raw)


def _folder(raw: object, base: Path) -> str:
    if not isinstance(raw, str) or not raw:
        raise TypeError('must be a folder name, e.g. report-dir = "reports"')
    return str(base / raw)


def _jobs(raw: object, base: Path) -> int:
    if isinstance(raw, bool) or not isinstance(raw, int) or raw < 1:
        raise ValueError(f"must be a whole number of at least 1, got {raw!r}")
    return raw


def _timeout(raw: object, base: Path) -> float:
    if isinstance(raw, bool) or not isinstance(raw, (int, float)) \
            or not (math.isfinite(raw) and raw > 0):
        raise ValueError(f"must be a positive number of seconds, got {raw!r}")
    return float(raw)


def _flag(raw: object, base: Path) -> bool:
    if not isinstance(raw, bool):
        raise TypeError(f"must be true or false, got {raw!r}")
    return raw


def _tolerance(raw: object, base: Path) -> float:
    from .units import parse_quantity
    try:
        value = parse_quantity(raw, "1", allow_percent=True)
    except InputError as exc:
        raise ValueError(exc.message) from None
    if not 0 < value < 1:
        raise ValueError(f'must be between 0 and 1 (or 0 % and 100 %), got {raw!r}; write '
                         f'"2 %" or 0.02')
    return value


def _show(raw: object, base: Path) -> str:
    if raw not in SHOW_CHOICES:
        raise ValueError(f"must be \"attention\" or \"all\", got {raw!r}")
    return raw


def _text(raw: object, base: Path) -> str:
    if not isinstance(raw, str):
        raise TypeError(f"must be text, got {raw!r}")
    return raw


_CHECKS = {"paths": _paths, "report-dir": _folder, "jobs": _jobs, "timeout": _timeout,
           "closed-form-only": _flag, "tolerance": _tolerance, "show": _show,
           "cluster": _text}
