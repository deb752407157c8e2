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
import time
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
    every folder of the inputs inside a git work tree.  The queries of one round run side by
    side (``_git_all``: the top of every folder, then the commit and the status of every top;
    one after the other they were ~50 ms of a library run's serial work)."""
    folders = sorted({str(Path(f).resolve().parent) for f in files})
    firsts: dict[str, str] = {}               # top -> the first folder found in it
    for folder, top in zip(folders, _git_all([(f, ("rev-parse", "--show-toplevel"))
                                              for f in folders])):
        if top and top not in firsts:
            firsts[top] = folder
    resolved = [str(Path(f).resolve()) for f in files]
    queries = []
    for top, folder in firsts.items():
        inside = [f for f in resolved if Path(f).is_relative_to(top)]   # not /x/repo2 for /x/repo
        queries += [(folder, ("rev-parse", "HEAD")), (top, ("status", "--porcelain", "--", *inside))]
    answers = _git_all(queries)
    out: dict[str, str] = {}
    for n, top in enumerate(firsts):
        commit, dirty = answers[2 * n], answers[2 * n + 1]
        if commit:
            out[top] = commit + (" with local changes to the circuit files" if dirty else "")
    return out


def _git_all(queries: list[tuple[str, tuple]]) -> list[str]:
    """Each (folder, git arguments) query's output, stripped ("" when git fails, is missing or
    takes over ``GIT_TIMEOUT`` s); the git processes run side by side."""
    started = []
    for folder, args in queries:
        try:
            started.append(subprocess.Popen(["git", "-C", folder, *args], stdout=subprocess.PIPE,
                                            stderr=subprocess.DEVNULL, stdin=subprocess.DEVNULL,
                                            text=True))
        except (OSError, subprocess.SubprocessError):
            started.append(None)
    deadline = time.monotonic() + GIT_TIMEOUT
    return [_answer(process, deadline) for process in started]


def _answer(process, deadline: float) -> str:
    if process is None:
        return ""
    try:
        out, _ = process.communicate(timeout=max(0.0, deadline - time.monotonic()))
    except subprocess.TimeoutExpired:
        process.kill()
        process.communicate()
        return ""
    return out.strip() if process.returncode == 0 else ""
