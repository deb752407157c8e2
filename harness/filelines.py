"""Where things are in a circuit file: line numbers for keys, and located input errors.

The TOML reader returns plain dictionaries with no positions, so ``Locator`` scans the raw text
once for table headers (``[parts]``, ``[parts.R1]``, ``[[expect]]``) and ``key =`` lines and
remembers the first line of every key path.  The scan is line based (it understands quoted keys,
dotted keys and multi-line strings, not the full grammar); it is only used to point messages at a
line, never to read values.  ``Where`` turns a message plus a key path into an ``InputError``
carrying file, part, field and line.
"""

from __future__ import annotations

import difflib
import json
import re
from dataclasses import dataclass, field
from typing import Iterable

from .errors import InputError, InputWarning, UnitError
from .units import parse_quantity

_ATOM = r'(?:"(?:[^"\\\n]|\\.)*"|\'[^\'\n]*\'|[A-Za-z0-9_-]+)'
_KEYPATH = rf"{_ATOM}(?:[ \t]*\.[ \t]*{_ATOM})*"
_ARRAY_RE = re.compile(rf"^[ \t]*\[\[[ \t]*({_KEYPATH})[ \t]*\]\]")
_TABLE_RE = re.compile(rf"^[ \t]*\[[ \t]*({_KEYPATH})[ \t]*\]")
_KEY_RE = re.compile(rf"^[ \t]*({_KEYPATH})[ \t]*=")
_ATOM_RE = re.compile(_ATOM)

Path = tuple  # a key path: str keys, with an int index after an array-of-tables name


def _unquote(atom: str) -> str:
    if atom.startswith('"'):
        try:
            return json.loads(atom)
        except ValueError:
            return atom[1:-1]
    if atom.startswith("'"):
        return atom[1:-1]
    return atom


def _split(text: str) -> tuple[str, ...]:
    return tuple(_unquote(a) for a in _ATOM_RE.findall(text))


@dataclass
class Locator:
    """First line (1-based) of every table header and key path found in a TOML text.

    Attributes:
        lines: the text's lines.
        paths: key path -> first line; ``("parts", "R1")`` for ``R1 = {...}`` under ``[parts]``,
            ``("expect", 0, "node")`` for ``node = ...`` in the first ``[[expect]]`` block,
            ``("expect", 0)`` for that block's header.
        duplicates: (path, first line, repeated line) for every key path seen twice.
        owners: line -> the path that starts on it.
    """

    lines: list[str]
    paths: dict[Path, int] = field(default_factory=dict)
    duplicates: list[tuple[Path, int, int]] = field(default_factory=list)
    owners: dict[int, Path] = field(default_factory=dict)

    @classmethod
    def scan(cls, text: str) -> "Locator":
        loc = cls(text.splitlines())
        table: Path = ()
        counters: dict[tuple[str, ...], int] = {}
        in_multiline = False
        for number, line in enumerate(loc.lines, start=1):
            opens = line.count('"""') + line.count("'''")
            if in_multiline:
                in_multiline = opens % 2 == 0
                continue
            m = _ARRAY_RE.match(line)
            if m:
                name = _split(m.group(1))
                counters[name] = counters.get(name, 0) + 1
                table = name + (counters[name] - 1,)
                loc._record(table, number)
            elif (m := _TABLE_RE.match(line)) is not None:
                table = _split(m.group(1))
                loc._record(table, number)
            elif (m := _KEY_RE.match(line)) is not None:
                key = _split(m.group(1))
                for end in range(1, len(key)):  # dotted keys: R1.kind = ... also locates R1
                    loc.paths.setdefault(table + key[:end], number)
                loc._record(table + key, number)
            in_multiline = opens % 2 == 1
        return loc

    def _record(self, path: Path, number: int) -> None:
        if path in self.paths:
            self.duplicates.append((path, self.paths[path], number))
        else:
            self.paths[path] = number
        self.owners.setdefault(number, path)

    def line_of(self, path: Iterable) -> int | None:
        """The line of ``path`` or of its nearest enclosing entry (at least two keys deep).

        A one-key path (a top-level key or table) is looked up exactly.
        """
        path = tuple(path)
        shortest = 1 if len(path) <= 1 else 2
        for end in range(len(path), shortest - 1, -1):
            if path[:end] in self.paths:
                return self.paths[path[:end]]
        return None

    def text_of(self, line: int | None) -> str:
        """The stripped text of a 1-based line ('' when out of range)."""
        if line is None or not 1 <= line <= len(self.lines):
            return ""
        return self.lines[line - 1].strip()


def expect_label(index: int) -> str:
    """``expect #N`` for the 0-based block index (the form errors and reports use)."""
    return f"expect #{index + 1}"


def closest(word: str, choices: Iterable[str]) -> str | None:
    """The choice closest to ``word`` (difflib ratio ≥ 0.6, case folded), or None."""
    choices = list(dict.fromkeys(str(c) for c in choices))
    folded = {c.lower(): c for c in choices}
    hits = difflib.get_close_matches(str(word).lower(), list(folded), n=1, cutoff=0.6)
    return folded[hits[0]] if hits else None


def suggest(word: str, choices: Iterable[str]) -> str:
    """`` (did you mean 'x'?)`` for the closest of ``choices`` to ``word``, or ''."""
    hit = closest(word, choices)
    return f" (did you mean '{hit}'?)" if hit is not None else ""


def quoted_list(items: Iterable[str], limit: int = 12) -> str:
    """``'a', 'b', 'c'`` (at most ``limit`` items, then ``…``)."""
    items = list(items)
    text = ", ".join(f"'{i}'" for i in items[:limit])
    return text + (", …" if len(items) > limit else "")


@dataclass(frozen=True, eq=False)
class Where:
    """Builds located errors for one file: the source path and its ``Locator``; collects the
    reader's warnings about this file in ``warnings`` (one list per file read)."""

    source: str
    locator: Locator
    warnings: list[InputWarning] = field(default_factory=list, compare=False)

    def warn(self, message: str, *, path: Iterable = (), part: str | None = None,
             field: str | None = None) -> None:
        """Record a warning at key ``path`` (the check still runs)."""
        self.warnings.append(InputWarning(message, file=self.source, part=part, field=field,
                                          line=self.locator.line_of(path)))

    def error(self, message: str, *, path: Iterable = (), part: str | None = None,
              field: str | None = None, cls: type[InputError] = InputError,
              line: int | None = None) -> InputError:
        """An error of type ``cls`` at key ``path`` (its line is looked up unless given)."""
        if line is None:
            line = self.locator.line_of(path)
        return cls(message, file=self.source, part=part, field=field, line=line)

    def quantity(self, raw: object, dimension: str, *, path: Iterable, part: str | None,
                 field: str, allow_percent: bool = False) -> float:
        """``units.parse_quantity`` with the error relocated to this file, part and field."""
        try:
            return parse_quantity(raw, dimension, allow_percent=allow_percent)
        except UnitError as exc:
            raise self.error(exc.message, path=path, part=part, field=field,
                             cls=UnitError) from None


_CONTROL = re.compile(r"[\x00-\x1f\x7f]")
MAX_NAME = 100


def name_problem(name: object, what: str) -> str | None:
    """Why ``name`` cannot name a node or part (``what`` = "node name", "part name"), or None."""
    if not isinstance(name, str):
        return f"a {what} must be a string, got {type(name).__name__} {name!r}"
    if name.strip() == "":
        return f"a {what} must not be empty"
    if name != name.strip():
        return f"{what} {name!r} has leading or trailing spaces; remove them"
    if _CONTROL.search(name):
        return f"{what} {name!r} contains a control character"
    if len(name) > MAX_NAME:
        return f"{what} is {len(name)} characters long; the limit is {MAX_NAME}"
    return None
