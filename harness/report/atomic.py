"""The report folder's error type, its creation and check, and safe file names inside it.

The report set itself is put in place by ``reportset.publish`` (staged, then swapped).
"""

from __future__ import annotations

import os
import re
from pathlib import Path


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
