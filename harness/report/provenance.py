"""Where a report came from: the tool and library versions, the time, the command, each input
file's SHA-256, the git commit of the circuits, and each file's parts as the engineer wrote them.

``collect`` gathers it once per run (the command line calls it before writing the reports); the
HTML and Markdown reports print it at the head of the page and of each file's section.  The
parts are read from the file's own TOML text, not from the parsed model, so the reviewer sees
the values as written (``4k7``, ``"= R1*C1"``), not as the engines read them.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import platform
import shlex
import subprocess
import tomllib
from pathlib import Path
from typing import Any, Sequence

from ..outcome import RunResult

#: seconds a ``git`` query may take before the commit is left out
GIT_TIMEOUT = 5


def collect(run: RunResult, argv: Sequence[str] | None = None) -> dict[str, Any]:
    """The provenance of ``run``: ``tool``, ``time``, ``command``, ``versions``, ``commits``
    (folder -> commit text) and ``files`` (path -> {``sha256``, ``parts``})."""
    from .. import __version__
    files = {f.file: _file_facts(Path(f.file)) for f in run.files if Path(f.file).is_file()}
    return {"tool": f"tauproof {__version__}",
            "time": _dt.datetime.now().astimezone().isoformat(timespec="seconds"),
            "command": shlex.join(["tauproof", *(argv or [])]),
            "versions": _versions(),
            "commits": _commits(files),
            "files": files}


def _versions() -> str:
    import numpy
    import scipy
    return f"Python {platform.python_version()}, numpy {numpy.__version__}, " \
           f"scipy {scipy.__version__}"


def _file_facts(path: Path) -> dict[str, Any]:
    try:
        data = path.read_bytes()
    except OSError:
        return {"sha256": "", "parts": []}
    return {"sha256": hashlib.sha256(data).hexdigest(), "parts": written_parts(data)}


def written_parts(data: bytes) -> list[dict[str, str]]:
    """Each part of a circuit file as written: name, kind, nodes, value, initial, schedule
    (text; empty where the file says nothing); [] when the file cannot be read as TOML."""
    try:
        parts = tomllib.loads(data.decode("utf-8").removeprefix("\ufeff")).get("parts", {})
    except (UnicodeDecodeError, tomllib.TOMLDecodeError, RecursionError, ValueError):
        return []
    if not isinstance(parts, dict):
        return []
    rows = []
    for name, spec in parts.items():
        spec = spec if isinstance(spec, dict) else {}
        value = spec.get("value", spec.get("gain", ""))
        extra = {k: spec[k] for k in ("on-resistance", "off-resistance", "control") if k in spec}
        if extra:
            value = ", ".join([_text(value)] * bool(value != "")
                              + [f"{k} {_text(v)}" for k, v in extra.items()])
        rows.append({"name": str(name), "kind": _text(spec.get("kind", "")),
                     "nodes": _text(spec.get("nodes", "")), "value": _text(value),
                     "initial": _text(spec.get("initial", "")),
                     "schedule": _schedule(spec)})
    return rows


def _schedule(spec: dict) -> str:
    """``closed, 1 ms → open, 2 ms → closed`` / ``1 ms → 5 V``."""
    out = [str(spec["state"])] if "state" in spec else []
    steps = spec.get("steps", [])
    if isinstance(steps, list):
        out += [f"{_text(s[0])} → {_text(s[1])}" if isinstance(s, list) and len(s) == 2
                else _text(s) for s in steps]
    return ", ".join(out)


def _text(value: object) -> str:
    if isinstance(value, list):
        return ", ".join(_text(v) for v in value)
    return "" if value is None else str(value)


def _commits(files: dict[str, Any]) -> dict[str, str]:
    """Folder -> ``<commit>`` (``… with local changes`` when the files differ from it) for
    every folder of the inputs inside a git work tree."""
    out: dict[str, str] = {}
    for folder in sorted({str(Path(f).resolve().parent) for f in files}):
        top = _git(folder, "rev-parse", "--show-toplevel")
        if not top or top in out:
            continue
        commit = _git(folder, "rev-parse", "HEAD")
        if not commit:
            continue
        inside = [str(Path(f).resolve()) for f in files if str(Path(f).resolve()).startswith(top)]
        dirty = _git(top, "status", "--porcelain", "--", *inside)
        out[top] = commit + (" with local changes to the circuit files" if dirty else "")
    return out


def _git(folder: str, *args: str) -> str:
    try:
        done = subprocess.run(["git", "-C", folder, *args], capture_output=True, text=True,
                              timeout=GIT_TIMEOUT, check=False)
    except (OSError, subprocess.SubprocessError):
        return ""
    return done.stdout.strip() if done.returncode == 0 else ""
