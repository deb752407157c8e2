"""Runs circuit files and folders: read, solve with both engines, compare; failures isolated.

Each file is analysed on its own; an input error or an engine fault in one file becomes that
file's ``error`` result and never stops the others.  With ``jobs > 1`` or a ``timeout`` files run
in worker processes (``harness.pool``): a file over the time limit is stopped and becomes
"timed out after N s", a worker that dies loses only the file it was working on, and SIGINT or
SIGTERM stops the run with ``RunInterrupted`` carrying the results that finished.
"""

from __future__ import annotations

import contextlib
import ctypes
import os
import re
import sys
import time
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Iterable

from .closedform.interval import SingularPencil
from .errors import InputError, location
from .outcome import ERROR, FileResult, RunResult, worst
from .pool import Interrupted, run_tasks, usable_jobs
from .pool import RunInterrupted as PoolInterrupted
from .progress import Progress


@dataclass(frozen=True, eq=False)
class RunOptions:
    """How to run: ``numeric`` runs the numerical engine too; ``jobs`` worker processes;
    ``timeout`` the limit in s per file (None: none; any limit runs files in workers);
    ``tolerance`` the relative tolerance of files whose ``[settings]`` give none (None: the
    model's default); ``progress`` a bar on stderr (a ``report.progress.Progress`` or True);
    ``pieces`` a ``report.pieces.Drawn``: a file analysed in a worker process has its report
    pieces (plots, sample rows) drawn there too and added to it (None: none drawn)."""

    numeric: bool = True
    jobs: int = 1
    progress: object = False
    timeout: float | None = None
    tolerance: float | None = None
    pieces: object = None


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


def _error_result(file: str, message: str, title: str = "",
                  warnings: tuple[str, ...] = ()) -> FileResult:
    return FileResult(file=file, title=title, verdict=ERROR, errors=(message,),
                      warnings=warnings, input_warnings=warnings)


def check_file(path: str, numeric: bool = True, tolerance: float | None = None,
               samples: dict | None = None, derivations: bool = True) -> FileResult:
    """Analyse one circuit file; never raises (faults become an ``error`` result).
    ``tolerance`` is the default for a file whose ``[settings]`` give none; ``samples`` maps an
    expectation's index to its Monte Carlo summary computed elsewhere (``variation.shard``);
    ``derivations=False`` leaves out the worked derivations of mismatching checks (a courtesy
    that changes no verdict, up to ``DERIVE_BUDGET`` s of symbolic work a file)."""
    from .circuitfile import read_circuit

    started = time.perf_counter()
    try:
        circuit = read_circuit(path, tolerance)
    except InputError as err:
        return _error_result(path, str(err.located(file=path)))
    try:
        with native_output_silenced():
            return _analyse(path, circuit, numeric, started, samples, derivations)
    except InputError as err:
        return _error_result(path, str(err.located(file=path)), circuit.title, circuit.warnings)
    except SingularPencil:
        return _error_result(path, _singular_message(path, circuit), circuit.title,
                             circuit.warnings)
    except Exception as err:  # an engine fault must not take the run down with it
        if os.environ.get("TAUPROOF_DEBUG"):
            raise
        return _error_result(path, f"{path}: internal error while analysing: "
                                   f"{type(err).__name__}: {err}", circuit.title,
                             circuit.warnings)


def _singular_message(path: str, circuit) -> str:
    """Why the closed form found no regular pencil, blaming the parts whose values are outside
    their plausible ranges (the reader warned about them) when there are any."""
    from .plausible import PLAUSIBLE
    limit = ("the circuit's equations are singular to working precision at every shift tried: "
             "part values this many decades apart cannot be solved in double precision")
    odd = [p.name for p in circuit.parts if p.kind in PLAUSIBLE and p.value
           and not PLAUSIBLE[p.kind][0] <= abs(p.value) <= PLAUSIBLE[p.kind][1]]
    if not odd:
        return f"{path}: {limit} (look for values many decades apart)"
    return f"{location(path, None, odd[0], 'value')}: {limit}" + \
        (f" (also {', '.join(odd[1:])})" if odd[1:] else "")


def _analyse(path: str, circuit, numeric: bool, started: float,
             samples: dict | None = None, derivations: bool = True) -> FileResult:
    """Both engines, the trust guard, the cautions and the comparison of one read circuit."""
    from . import closedform
    from .compare import compare_file
    from .report.cautions import cautions_for
    from .compare.trust import guard

    exact = closedform.solve(circuit)
    trust = exact.conditioning()  # beyond tolerances.CONDITION_LIMIT both engines report None
    exact, sim = guard(exact, trust), None
    if numeric:
        from . import simulate
        sim = guard(simulate.solve(circuit), trust)
    volts, jumps = _node_voltages(circuit, exact), [exact.jump(k) for k in
                                                    range(len(circuit.events))]
    cautions = cautions_for(circuit, voltages=volts, jumps=jumps)
    result = compare_file(circuit, exact, sim, cautions=cautions,
                          seconds=time.perf_counter() - started)
    if any(exp.spec for exp in circuit.expectations):
        from .variation.analyse import analyse_circuit
        spreads = analyse_circuit(circuit, numeric, samples)
        checks = tuple(replace(c, verdict=worst([c.verdict] + [
            s.verdict for s in spreads if s.index == c.index])) for c in result.checks)
        corner = [v for s in spreads if s.unit == "V" for v in (s.low, s.high)]
        if corner:   # the cautions again, with the worst-corner voltages the analysis found
            cautions = cautions_for(circuit, voltages=volts, jumps=jumps,
                                    corner_voltages=corner)
        result = replace(result, spreads=spreads, checks=checks, cautions=cautions,
                         verdict=worst([result.verdict] + [s.verdict for s in spreads]),
                         seconds=time.perf_counter() - started)
    return _with_derivations(circuit, exact, result) if derivations else result


#: seconds of symbolic work spent on the derivations of one file's mismatching checks
DERIVE_BUDGET = 5.0


def _with_derivations(circuit, exact, result: FileResult) -> FileResult:
    """``result`` with the worked derivation (``harness.derive``) beside each mismatching
    check, within ``DERIVE_BUDGET``; unchanged when nothing mismatches or the symbolic work
    cannot run (it never costs a passing file anything)."""
    from dataclasses import replace
    wanted = {c.index for c in result.checks if c.verdict == "mismatch"}
    if not wanted:
        return result
    try:
        from .derive import derive
        from .report.derivation import lines
        done = {d.index: tuple(lines(d)[1:])
                for d in derive(circuit, exact, wanted, budget=DERIVE_BUDGET)}
    except Exception:  # the derivation is a courtesy: the check's verdict stands without it
        return result
    checks = tuple(replace(c, derivation=done.get(c.index, ())) for c in result.checks)
    return replace(result, checks=checks)


@contextlib.contextmanager
def native_output_silenced():
    """File descriptor 1 goes to the null device for the block: the linear-algebra libraries'
    C code prints there on its own (LAPACK's "On entry to DLASCL parameter number 4 had an
    illegal value"), which would corrupt ``--json`` on stdout.  Python's and C's buffers are
    flushed on both sides, so nothing of ours is lost and nothing of theirs leaks later."""
    try:
        sys.stdout.flush()
        saved = os.dup(1)
    except (OSError, ValueError, AttributeError):  # no usable descriptor 1: nothing to guard
        yield
        return
    null = os.open(os.devnull, os.O_WRONLY)
    try:
        os.dup2(null, 1)
        yield
    finally:
        _flush_c_streams()
        os.dup2(saved, 1)
        os.close(saved)
        os.close(null)


def _flush_c_streams() -> None:
    try:
        ctypes.CDLL(None).fflush(None)
    except (OSError, AttributeError):  # pragma: no cover - no C library to flush
        pass


#: node-voltage evaluations spent looking for hazardous voltages (nodes × events)
CAUTION_BUDGET = 2000


def _node_voltages(circuit, exact) -> list[float]:
    """The largest voltage between any two nodes (ground included) before, just after and at
    the end of each interval (closed form): max − min over the nodes at each instant, since
    a person or a probe can touch any two (±40 V rails are 80 V apart).

    Catches what source values alone miss: an inductor's flyback, a controlled source's gain.
    Skipped past ``CAUTION_BUDGET`` evaluations.
    """
    nodes = [n for n in circuit.nodes if n != circuit.ground]
    if len(nodes) * len(circuit.events) > CAUTION_BUDGET:
        return []
    return [max(v + (0.0,)) - min(v + (0.0,)) for v in exact.node_voltages() or []]


def run(paths: Iterable[str], options: RunOptions = RunOptions()) -> RunResult:
    """Check every file under ``paths``; results in the order the files were collected.

    Files run in this process when ``jobs`` is 1 (or only one core is free: ``pool.usable_jobs``)
    and no ``timeout`` is set, otherwise in worker processes (``harness.pool``): a file over the
    time limit or whose worker dies becomes an ``error`` result and the others go on.

    Raises:
        RunInterrupted: SIGINT or SIGTERM stopped the run; ``partial`` holds the results of the
            files that had finished (in collection order), ``signum`` the signal.
    """
    files, missing = collect(paths)
    if options.jobs > 1 and len(files) > 1:
        options = replace(options, jobs=usable_jobs(options.jobs))
    if options.jobs <= 1 and options.timeout is None:
        results = _run_here(files, options, missing)
    else:
        results = _run_workers(files, options, missing)
    return RunResult(files=tuple(missing) + tuple(results))


class RunInterrupted(Exception):
    """A run stopped by a signal: ``signum`` (2 SIGINT, 15 SIGTERM) and the ``partial`` result."""

    def __init__(self, signum: int, partial: RunResult, total: int) -> None:
        super().__init__(f"interrupted by signal {signum}")
        self.signum = int(signum)
        self.partial = partial
        self.total = total


def _run_here(files: list[str], options: RunOptions, missing: list[FileResult]) -> list:
    results: list[FileResult] = []
    bar = _bar(files, options)
    try:
        for f in files:
            results.append(_check_task(f, options.numeric, options.tolerance))
            bar.step()
    except KeyboardInterrupt:
        raise RunInterrupted(2, RunResult(tuple(missing) + tuple(results)), len(files)) from None
    except Interrupted as stop:
        raise RunInterrupted(stop.signum, RunResult(tuple(missing) + tuple(results)),
                             len(files)) from None
    finally:
        _done(bar, options)
    return results


def _bar(files: list[str], options: RunOptions) -> Progress:
    """The run's bar (``options.progress`` when the caller made one) with the files added."""
    bar = options.progress if isinstance(options.progress, Progress) \
        else Progress(bool(options.progress))
    bar.add(len(files), "analysing")
    return bar


def _done(bar: Progress, options: RunOptions) -> None:
    """Close a bar the runner made itself; the caller's bar goes on (plots come next)."""
    if bar is not options.progress:
        bar.close()


def _check_task(path: str, numeric: bool, tolerance: float | None = None,
                samples: dict | None = None) -> FileResult:
    """What a worker runs: ``check_file`` looked up at call time (tests may replace it); the
    tolerance and precomputed samples are passed only when there are some."""
    if samples:
        return check_file(path, numeric, tolerance, samples)
    if tolerance is None:
        return check_file(path, numeric)
    return check_file(path, numeric, tolerance)


def _drawing_task(path: str, numeric: bool, tolerance: float | None,
                  with_plots: bool) -> tuple:
    """What a worker runs when the reports' pieces are wanted: (the file's result, its pieces
    drawn from it, ``report.pieces.draw``)."""
    from .report.pieces import draw
    result = _check_task(path, numeric, tolerance)
    return result, draw(result, with_plots)


def _preload(numeric: bool, drawing: bool = False) -> None:
    """Import the engines (and the plot writers when the workers draw pieces) before the
    workers fork, so each worker starts with them loaded."""
    from . import circuitfile, closedform, compare  # noqa: F401
    from .report import cautions  # noqa: F401
    if numeric:
        from . import simulate  # noqa: F401
    if drawing:
        from .report import pieces, plots, spreads  # noqa: F401


def _run_workers(files: list[str], options: RunOptions, missing: list[FileResult]) -> list:
    """Every file in a worker process (``pool.run_tasks``); faults become error results."""
    limit = options.timeout
    drawn = options.pieces
    _preload(options.numeric, drawn is not None)
    bar = _bar(files, options)

    def timed_out(i: int) -> FileResult:
        return _error_result(files[i], f"{files[i]}: timed out after {limit:g} s (the --timeout "
                                       f"limit); the analysis was stopped")

    def died(i: int, how: str) -> FileResult:
        return _error_result(files[i], f"{files[i]}: the worker process analysing this file "
                                       f"{how}; the file's result is lost (the other files "
                                       f"are not affected)")

    tasks = [(f, options.numeric, options.tolerance) for f in files]
    if drawn is not None:
        tasks = [task + (drawn.with_plots,) for task in tasks]
    order = heavy_first([weigh(f) for f in files])
    try:
        done = run_tasks(tasks, _check_task if drawn is None else _drawing_task,
                         jobs=options.jobs, timeout=limit, on_timeout=timed_out, on_death=died,
                         on_done=lambda i: bar.step(), order=order)
        done = {i: _kept(result, drawn) for i, result in done.items()}
    except PoolInterrupted as stop:
        stop.done = {i: _kept(result, None) for i, result in stop.done.items()}
        finished = tuple(stop.done[i] for i in sorted(stop.done))
        raise RunInterrupted(stop.signum, RunResult(tuple(missing) + finished),
                             len(files)) from None
    finally:
        _done(bar, options)
    return [done[i] for i in range(len(files))]


#: what marks a file whose spec'd fields are analysed over tolerances: a ``spec`` key (bare or
#: quoted, in an inline table, dotted or in a table header; not inside a quoted string such as a
#: title) or a ``[variation]`` table.  Read from the text alone: a file is only read, not
#: parsed, to be weighed (a false mark costs a parse, a missed one the cluster's split of its
#: Monte Carlo; never a result)
_SPREAD = re.compile(rb"(?<![\w\"'-])([\"']?)spec\1[ \t]*[=.\]]|^[ \t]*\[[ \t]*variation[ \t]*\]",
                     re.MULTILINE)


@dataclass(frozen=True)
class Weight:
    """A file's work as its text shows it (``weigh``): ``spread`` whether it has spec'd fields
    (extremes and a Monte Carlo, several times a plain file's work: ``_SPREAD``), ``size`` its
    length in bytes (a rough measure of the rest)."""

    spread: bool = False
    size: int = 0

    @classmethod
    def of(cls, data: bytes) -> "Weight":
        """The weight of a file's bytes."""
        return cls(_SPREAD.search(data) is not None, len(data))


def weigh(path: str) -> Weight:
    """The file's ``Weight``, its bytes read once; a file that cannot be read weighs nothing
    (its analysis says why)."""
    try:
        with open(path, "rb") as handle:
            return Weight.of(handle.read())
    except OSError:
        return Weight()


def heavy_first(weights: list[Weight], parts: list[int] | None = None) -> list[int]:
    """The order files are handed out in (the worker pool's and the cluster's), as indices into
    ``weights``: by their tasks apart from their own (``parts``: a cluster's Monte Carlo
    pieces and corner runs, most first), then those with spec'd fields, then by size, largest
    first, collection order among equals; so the run does not end on a heavy file while the
    other workers are idle (measured on the library: its spec'd files took 0.1-0.35 s each
    against ~0.05 s for most others, which their size does not show; spread over two workers
    the measured durations end 0.08 s sooner in this order than by size alone:
    tests/benchmarks/RESULTS.md).  The order changes nothing in the results, which stay in
    collection order."""
    parts = parts or [0] * len(weights)
    return sorted(range(len(weights)),
                  key=lambda i: (-parts[i], not weights[i].spread, -weights[i].size))


def _kept(outcome, drawn) -> FileResult:
    """A worker's (result, pieces) or a bare result (timed out, lost): the result, its pieces
    added to ``drawn`` (a ``report.pieces.Drawn``, or None)."""
    if not isinstance(outcome, tuple):
        return outcome
    result, pieces = outcome
    if drawn is not None:
        drawn.add(result.file, pieces)
    return result
