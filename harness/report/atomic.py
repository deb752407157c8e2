"""Atomic file writes and safe file names inside a report folder.

A report file is written to a temporary file in the same folder and moved over the old one with
``os.replace`` (atomic on POSIX and Windows within one file system), so a reader never sees a
half-written report and a failed run leaves the previous report intact.
"""

from __future__ import annotations

import os
import re
import tempfile
from pathlib import Path
from typing import Callable


class ReportError(OSError):
    """A report file could not be written (folder missing, not writable, disk full …).

    An ``OSError`` subclass, so callers that already catch ``OSError`` keep working.  ``path`` is
    the file or folder concerned and the message says what went wrong.
    """

    def __init__(self, message: str, path: Path | str | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.path = None if path is None else Path(path)

    def __str__(self) -> str:
        return self.message


def ensure_dir(folder: Path) -> Path:
    """Create ``folder`` (and parents) if needed and check it is a writable folder.

    Raises:
        ReportError: it exists as a file, cannot be created, or is not writable.
    """
    folder = Path(folder)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ReportError(f"cannot create report folder {folder}: {exc.strerror or exc}",
                          folder) from exc
    if not folder.is_dir():
        raise ReportError(f"report folder {folder} exists but is not a folder", folder)
    if not os.access(folder, os.W_OK | os.X_OK):
        raise ReportError(f"report folder {folder} is not writable", folder)
    return folder


def write_atomic(path: Path, produce: Callable[[], bytes | str]) -> Path:
    """Write what ``produce()`` returns to ``path`` atomically and return ``path``.

    ``produce`` runs before anything touches the folder's old file, so an exception from the
    serializer leaves the old file as it was.  ``str`` is written as UTF-8.  The temporary file
    (``.<name>.*.tmp`` in the same folder) is removed on every failure.

    Raises:
        ReportError: the file could not be written or moved into place (the cause is chained).
        Exceptions from ``produce`` itself pass through unchanged.
    """
    path = Path(path)
    data = produce()
    if isinstance(data, str):
        data = data.encode("utf-8")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    except OSError as exc:
        raise ReportError(f"cannot write {path}: {exc.strerror or exc}", path) from exc
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(tmp, 0o644)
        os.replace(tmp, path)
    except OSError as exc:
        _discard(tmp)
        raise ReportError(f"cannot write {path}: {exc.strerror or exc}", path) from exc
    except BaseException:
        _discard(tmp)
        raise
    return path


def _discard(tmp: str) -> None:
    try:
        os.unlink(tmp)
    except FileNotFoundError:
        pass


_UNSAFE = re.compile(r"[^A-Za-z0-9_-]+")


def safe_name(text: str, *, limit: int = 48, fallback: str = "circuit") -> str:
    """A file-name stem made from untrusted ``text`` that cannot leave its folder.

    Keeps ASCII letters, digits, ``_`` and ``-``; every other run of characters (``/``, ``.``,
    ``\\``, spaces, NUL …) becomes one ``-``; leading and trailing ``-`` are stripped and the
    result is cut to ``limit`` characters.  ``"../../etc"`` becomes ``"etc"``; an empty result
    becomes ``fallback``.  Dots are removed, so the stem is never ``.`` or ``..``.
    """
    stem = _UNSAFE.sub("-", text).strip("-")[:limit].strip("-")
    return stem or fallback


def inside(folder: Path, name: str) -> Path:
    """``folder / name``, checked to resolve inside ``folder`` (ValueError otherwise)."""
    base = Path(folder).resolve()
    target = (base / name).resolve()
    if target.parent != base:
        raise ValueError(f"file name {name!r} would leave the report folder")
    return target
