"""Runs circuit files and folders: read, solve with both engines, compare; failures isolated.

Each file is analysed on its own; an input error or an engine fault in one file becomes that
file's ``error`` result and never stops the others.  With ``jobs > 1`` files run in worker
processes; a worker that dies loses only the file it was working on (the survivors are retried
one by one in fresh processes to find it).
"""

from __future__ import annotations

import os
import sys
import time
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass
from pathlib import Path
from typing import Iterable

from .errors import InputError
from .outcome import ERROR, FileResult, RunResult


@dataclass(frozen=True)
class RunOptions:
    """How to run: ``numeric`` runs the numerical engine too; ``jobs`` worker processes."""

    numeric: bool = True
    jobs: int = 1
    progress: bool = False


def collect(paths: Iterable[str]) -> tuple[list[str], list[FileResult]]:
    """Expand files and folders (recursive ``*.toml``, sorted) into file paths.

    Returns (files, errors): a path that does not exist or holds no circuit files becomes an
    ``error`` result naming it.
    """
    files: list[str] = []
    missing: list[FileResult] = []
    for raw in paths:
        path = Path(raw)
        if path.is_dir():
            found = sorted(str(p) for p in path.rglob("*.toml") if p.is_file())
            if not found:
                missing.append(_error_result(raw, f"{raw}: no circuit files (*.toml) in this folder"))
            files += found
        elif path.is_file():
            files.append(str(path))
        else:
            missing.append(_error_result(raw, f"{raw}: no such file or folder"))
    return list(dict.fromkeys(files)), missing


def _error_result(file: str, message: str, title: str = "") -> FileResult:
    return FileResult(file=file, title=title, verdict=ERROR, errors=(message,))


def check_file(path: str, numeric: bool = True) -> FileResult:
    """Analyse one circuit file; never raises (faults become an ``error`` result)."""
    from .circuitfile import read_circuit
    from . import closedform
    from .compare import compare_file
    from .report.cautions import cautions_for

    started = time.perf_counter()
    try:
        circuit = read_circuit(path)
    except InputError as err:
        return _error_result(path, str(err.located(file=path)))
    try:
        exact = closedform.solve(circuit)
        sim = None
        if numeric:
            from . import simulate
            sim = simulate.solve(circuit)
        return compare_file(circuit, exact, sim, cautions=cautions_for(circuit),
                            seconds=time.perf_counter() - started)
    except InputError as err:
        return _error_result(path, str(err.located(file=path)), circuit.title)
    except Exception as err:  # an engine fault must not take the run down with it
        if os.environ.get("TAUPROOF_DEBUG"):
            raise
        return _error_result(path, f"{path}: internal error while analysing: "
                                   f"{type(err).__name__}: {err}", circuit.title)


def run(paths: Iterable[str], options: RunOptions = RunOptions()) -> RunResult:
    """Check every file under ``paths``; results in the order the files were collected."""
    files, missing = collect(paths)
    if options.jobs <= 1 or len(files) <= 1:
        results = [check_file(f, options.numeric) for f in _progress(files, options)]
    else:
        results = _run_parallel(files, options)
    return RunResult(files=tuple(missing) + tuple(results))


def _progress(files: list[str], options: RunOptions):
    if options.progress and len(files) > 3 and sys.stderr.isatty():
        from tqdm import tqdm
        return tqdm(files, unit="file", leave=False)
    return files


def _run_parallel(files: list[str], options: RunOptions) -> list[FileResult]:
    done: dict[str, FileResult] = {}
    try:
        with ProcessPoolExecutor(max_workers=options.jobs) as pool:
            futures = {pool.submit(check_file, f, options.numeric): f for f in files}
            for future in _progress_futures(futures, options):
                try:
                    done[futures[future]] = future.result()
                except BrokenProcessPool:
                    pass
    except BrokenProcessPool:
        pass
    for f in files:  # what a dead worker took with it: retry alone, each in a fresh process
        if f not in done:
            done[f] = _run_isolated(f, options.numeric)
    return [done[f] for f in files]


def _progress_futures(futures, options: RunOptions):
    iterator = as_completed(futures)
    if options.progress and len(futures) > 3 and sys.stderr.isatty():
        from tqdm import tqdm
        return tqdm(iterator, total=len(futures), unit="file", leave=False)
    return iterator


def _run_isolated(path: str, numeric: bool) -> FileResult:
    try:
        with ProcessPoolExecutor(max_workers=1) as pool:
            return pool.submit(check_file, path, numeric).result()
    except BrokenProcessPool:
        return _error_result(path, f"{path}: the worker process died while analysing this file")
