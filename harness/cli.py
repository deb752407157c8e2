"""The ``tauproof`` command: ``check`` (compare and report) and ``solve`` (computed values).

Exit codes: 0 every check passed; 1 at least one mismatch or engines-disagree, or (``check``) a
file with no ``[[expect]]`` block, where nothing was checked; 2 at least one
file could not be analysed (message on stderr naming file, part and field; never a traceback),
timed out, lost its worker, the reports could not be written, or the ``--cluster`` scheduler
could not be reached; 130 stopped by SIGINT (Ctrl-C),
143 stopped by SIGTERM (the previous reports are then left as they were).
"""

from __future__ import annotations

import argparse
import contextlib
import gc
import math
import os
import signal
import sys
import warnings
from pathlib import Path

# One BLAS thread per process unless the user says otherwise: the engines' matrices are small,
# and threaded BLAS on a loaded 2-core machine measured 10-14x slower (tests/benchmarks/RESULTS.md).
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

from .outcome import ERROR  # noqa: E402  (after the BLAS setting, which must precede numpy)
from .safetext import printable  # noqa: E402


class _Parser(argparse.ArgumentParser):
    """An argument parser whose usage errors, when ``json_errors``, are also a JSON document on
    stdout (verdict ``error``, the message in ``errors``) before the exit with code 2."""

    def __init__(self, *args, json_errors: bool = False, **kwargs) -> None:
        super().__init__(*args, **kwargs)
        self.json_errors = json_errors

    def error(self, message: str):
        if not self.json_errors:
            super().error(message)
        from .outcome import RunResult
        from .report import jsonout
        say(f"error: {message}")
        sys.stdout.write(jsonout.render(RunResult(errors=(f"usage: {message}",))))
        raise SystemExit(2)


def _parser(json_errors: bool = False) -> argparse.ArgumentParser:
    parser = _Parser(
        prog="tauproof", json_errors=json_errors,
        description="Check hand-calculated RC/RL step responses against an exact and a "
                    "numerical engine. Settings come from [tool.tauproof] in the nearest "
                    "pyproject.toml (`tauproof help config`); options here override them.")
    parser.add_argument("--version", action=_VersionAction, nargs=0,
                        help="show the version and exit")
    sub = parser.add_subparsers(dest="command", required=True)
    check = sub.add_parser("check", help="compare hand values with both engines and write reports",
                           json_errors=json_errors)
    check.add_argument("paths", nargs="*", metavar="PATH",
                       help="circuit files or folders (default: [tool.tauproof] paths)")
    check.add_argument("--report-dir", default=None,
                       help="where reports go (default: reports/)")
    check.add_argument("--no-report", action="store_true", help="do not write report files")
    check.add_argument("--no-plots", action="store_true",
                       help="write the reports without plots (no plots/ files, no plots in "
                            "the HTML page)")
    check.add_argument("--all", action="store_true", dest="show_all",
                       help="list every check on the console, passes too (default: what needs "
                            "attention in full, passes summarised)")
    solve = sub.add_parser("solve", help="print the computed values for every expectation's probe",
                           json_errors=json_errors)
    solve.add_argument("paths", nargs="*", metavar="FILE",
                       help="circuit files or folders (default: [tool.tauproof] paths)")
    solve.add_argument("--formulas", action="store_true",
                       help="also print each computed field as a formula of part names, to "
                            "paste as a hand value (= ...)")
    derive = sub.add_parser("derive", help="print the hand method done right for every check: "
                                           "formulas in part names, then numbers",
                            json_errors=json_errors)
    derive.add_argument("paths", nargs="+", metavar="FILE", help="circuit files or folders")
    derive.add_argument("--budget", type=_seconds, default=None, metavar="SECONDS",
                        help="symbolic work per file before the rest is numbers only")
    for sp in (check, solve):
        sp.add_argument("--json", action="store_true", help="machine-readable result on stdout")
        sp.add_argument("--jobs", type=_positive, default=None, metavar="N",
                        help="files analysed in parallel processes (default 1)")
        sp.add_argument("--closed-form-only", action="store_true", default=None,
                        help="skip the numerical engine (faster; no engine cross-check)")
        sp.add_argument("--timeout", type=_seconds, default=None, metavar="SECONDS",
                        help="stop a file's analysis after this many seconds (it becomes an "
                             "error; the other files go on)")
        sp.add_argument("--cluster", default=None, metavar="ADDRESS",
                        help="analyse the files on a Dask cluster: a scheduler's address "
                             "(tcp://host:8786) or local:N (N worker processes started for the "
                             "run); needs the 'cluster' extra")
    helper = sub.add_parser("help", help="print a help topic: format (the circuit file "
                                         "reference) or config ([tool.tauproof] keys)")
    helper.add_argument("topic", nargs="?", default="format", choices=("format", "config"))
    new = sub.add_parser("new", help="write a commented starting circuit file")
    new.add_argument("file", metavar="FILE", help="the file to create (never overwritten)")
    return parser


def common_printable(text: str) -> str:
    """Untrusted text (part names) made safe for the console."""
    from .safetext import printable
    return printable(text)


def _version() -> str:
    from . import __version__
    return __version__


class _VersionAction(argparse.Action):
    """``--version``: the version is read from the package metadata only when asked for
    (``importlib.metadata`` is a noticeable share of a small run's start-up)."""

    def __call__(self, parser, namespace, values, option_string=None):
        print(f"tauproof {_version()}")
        parser.exit()


def _seconds(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number of seconds, got {text!r}") from None
    if not (math.isfinite(value) and value > 0):
        raise argparse.ArgumentTypeError("must be a positive number of seconds")
    return value


def _positive(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError("must be at least 1")
    return value


#: exit code for a run stopped by a signal: 128 + the signal number (common practice)
EXIT_SIGNAL_BASE = 128
#: exit code for unusable project settings or no circuit files to check
EXIT_USAGE = 2


class _PipeSafe:
    """stdout that survives a reader closing the pipe (``tauproof check … | head``): the rest
    of the output is dropped, the reports are still written and the exit code is kept."""

    def __init__(self, stream) -> None:
        self._stream, self._broken = stream, False

    def write(self, text: str) -> int:
        if not self._broken:
            try:
                return self._stream.write(text)
            except BrokenPipeError:
                self._drop()
        return len(text)

    def flush(self) -> None:
        if not self._broken:
            try:
                self._stream.flush()
            except BrokenPipeError:
                self._drop()

    def _drop(self) -> None:
        self._broken = True
        with contextlib.suppress(OSError, ValueError):   # no later flush may raise at exit
            os.dup2(os.open(os.devnull, os.O_WRONLY), self._stream.fileno())

    def __getattr__(self, name):
        return getattr(self._stream, name)


def main(argv: list[str] | None = None) -> int:
    """Entry point of the console script; returns the exit code."""
    streams = _escape_unencodable()
    previous, sys.stdout = sys.stdout, _PipeSafe(sys.stdout)
    try:
        return _main(argv)
    finally:
        sys.stdout = previous
        for stream, errors in streams:
            with contextlib.suppress(Exception):
                stream.reconfigure(errors=errors)


def command() -> int:
    """The ``tauproof`` console script and ``python -m harness``: ``main`` on the process's
    arguments; its exit code.

    A process that lives for one command spends ~15 % of a small ``solve``'s CPU in the cyclic
    garbage collector otherwise (0.26 s through ``main``, 0.22 s here, side by side;
    tests/benchmarks/RESULTS.md, "Start-up and small circuits"): its passes over the objects
    numpy, scipy and the engines make at import, which live as long as the process, find
    nothing to free.  So for ``check`` and ``solve`` those modules
    are imported first with the collector off and their objects set aside (``gc.freeze``:
    later passes skip them), and on the way out every object still alive is set aside too, so
    the interpreter's passes at exit have nothing to traverse either.  ``main`` itself leaves
    the collector alone, so a process that calls it many times (the tests) is unaffected.

    A ``check`` or ``solve`` that returns then ends the process at once (``_leave``): its
    ``atexit`` handlers run and stdout and stderr are flushed, and the interpreter's teardown,
    which would only free memory the process is about to give back, is skipped."""
    analyses = _command_word(sys.argv[1:]) in ("check", "solve")
    code = _command(analyses)
    if analyses:
        _leave(code)
    return code


def _command(analyses: bool) -> int:
    """``main`` on the process's arguments, the engines imported first when it ``analyses``
    files, and every object alive at the end frozen (see ``command``); its exit code."""
    if analyses:
        _import_engines()
    try:
        return main()
    finally:
        gc.freeze()


def _leave(code: int) -> None:
    """End the process with ``code`` now, skipping the interpreter's teardown, when nothing is
    pending that the teardown would finish; otherwise return (the caller exits as usual).

    What still runs, in the interpreter's own order: every ``atexit`` handler (the libraries'
    and any a tool such as a coverage collector registered; ``weakref.finalize`` callbacks
    with ``atexit`` set, such as a temporary folder's removal), then stdout and stderr are
    flushed.  What is skipped: the cyclic collector's passes at exit and the clearing of every
    module, so ``__del__`` methods of objects still alive do not run (the engines and the
    report writers leave none that matter: files are written and closed inside ``with``
    blocks).  Not taken, so the usual exit follows: another thread is alive (a cluster
    client's, a pool's watchdog), a ``multiprocessing`` child is still running, the exit
    code is not a number, a stream cannot be flushed (a reader that closed the pipe: the
    interpreter reports it as before), or this Python has no ``atexit._run_exitfuncs``.
    Saves ~7 ms of a small ``solve``'s ~0.2 s (tests/benchmarks/RESULTS.md, "Start-up and
    small circuits")."""
    import atexit
    import threading
    run_handlers = getattr(atexit, "_run_exitfuncs", None)
    children = sys.modules.get("multiprocessing")
    if (run_handlers is None or not isinstance(code, int) or threading.active_count() > 1
            or (children is not None and children.active_children())):
        return
    if not _flushed():
        return
    run_handlers()
    getattr(atexit, "_clear", lambda: None)()    # run once, even if the usual exit follows
    if _flushed():
        os._exit(code)


def _flushed() -> bool:
    """stdout and stderr flushed; False when one could not be (left to the usual exit)."""
    try:
        for stream in (sys.stdout, sys.stderr):
            if stream is not None:
                stream.flush()
    except (OSError, ValueError):
        return False
    return True


def _command_word(words: list[str]) -> str | None:
    """The sub-command the parser will see: the first word that is not an option (the
    top-level options, ``--help`` and ``--version``, take no value)."""
    return next((word for word in words if not word.startswith("-")), None)


def _import_engines() -> None:
    """numpy, scipy.linalg, the reader, the exact engine and the comparator imported with the
    collector off, then frozen (see ``command``)."""
    enabled = gc.isenabled()
    gc.disable()
    try:
        from .runner import _preload
        _preload(numeric=False)
    finally:
        gc.freeze()
        if enabled:
            gc.enable()


def _escape_unencodable() -> list:
    """stdout and stderr write what their encoding cannot hold as escapes, never raising
    (a lone surrogate from a file name that is not UTF-8); returns what to restore."""
    changed = []
    for stream in (sys.stdout, sys.stderr):
        try:
            errors = stream.errors
            stream.reconfigure(errors="backslashreplace")
            changed.append((stream, errors))
        except (AttributeError, ValueError, OSError):  # not a text stream we can reconfigure
            pass
    return changed


def say(text: str) -> None:
    """One line on stderr, ``tauproof: <text>``, untrusted text shown as escapes."""
    print(f"tauproof: {printable(text)}", file=sys.stderr)


def _main(argv: list[str] | None) -> int:
    args = _parse(argv)
    if args.command in ("help", "new"):
        from . import starter
        return starter.main(args)
    if args.command == "derive":
        from .derivecmd import derive_text
        text, code = derive_text(args.paths, args.budget)
        print(common_printable(text), end="")
        return code
    from .config import ConfigError, load
    try:
        settings = _settings(args, load())
    except ConfigError as err:
        say(str(err))
        return EXIT_USAGE
    if not args.paths:
        say("no circuit files given: name files or folders, or set paths in [tool.tauproof] "
            "of pyproject.toml (tauproof help config)")
        return EXIT_USAGE
    from .pool import Interrupted
    from .progress import Progress
    from .runner import RunInterrupted, RunOptions, run
    bar = Progress(enabled=not args.json)
    pieces = _pieces(args)
    options = RunOptions(numeric=not args.closed_form_only, jobs=args.jobs, progress=bar,
                         timeout=args.timeout, tolerance=settings.tolerance, pieces=pieces)
    result, written = None, []
    try:
        with _sigterm_raises(), warnings.catch_warnings():
            _quiet_numerics()
            result = _run(args, options) if args.cluster else run(args.paths, options)
            if result is None:
                bar.close()
                return EXIT_USAGE
            if args.command == "check":
                from .outcome import require_checks
                result, written = _write_reports(args, argv, require_checks(result), bar,
                                                 pieces)
    except RunInterrupted as stop:
        bar.close()
        return _interrupted(args, stop.signum, stop.partial, stop.total, False)
    except (KeyboardInterrupt, Interrupted) as stop:  # while the reports were being written
        bar.close()
        return _interrupted(args, getattr(stop, "signum", signal.SIGINT), result,
                            len(result.files) if result else 0,
                            getattr(stop, "reports_written", False))
    bar.close()
    return _report(args, result, written)


def _run(args, options):
    """The run on the cluster ``args.cluster`` (``harness.cluster``), or None when it cannot be
    had: the address is not usable, the extra is not installed or no scheduler answered (said
    on stderr)."""
    try:
        from . import cluster
    except ImportError as err:
        say(f"--cluster needs Dask's distributed scheduler: pip install 'tauproof[cluster]' "
            f"({err})")
        return None
    try:
        address = cluster.check_address(args.cluster)
    except ValueError as err:
        say(f"--cluster: {err}")
        return None
    try:
        return cluster.run(args.paths, options, address)
    except cluster.ClusterUnreachable as err:
        say(str(err))
        return None


def _settings(args, settings):
    """Fill every option the command line left unset from the project settings (in place);
    returns the settings."""
    args.paths = args.paths or list(settings.paths)
    args.jobs = args.jobs or settings.jobs or 1
    args.timeout = args.timeout if args.timeout is not None else settings.timeout
    args.cluster = args.cluster or settings.cluster
    if args.closed_form_only is None:
        args.closed_form_only = bool(settings.closed_form_only)
    if getattr(args, "report_dir", "") is None:
        args.report_dir = settings.report_dir or "reports"
    if not getattr(args, "show_all", True):
        args.show_all = settings.show == "all"
    return settings


def _report(args, result, written: list) -> int:
    """Messages, ``--json`` and the console text of a finished run; its exit code."""
    for file in result.files:
        for message in file.input_warnings if args.json or args.command != "check" else ():
            say(f"warning: {message}")  # check's table lists them
        for message in file.errors:
            say(message)
    for message in result.errors:
        say(message)
    if args.json:
        from .report import jsonout
        sys.stdout.write(jsonout.render(result))
    elif args.command == "check":
        _print_check(args, result, written)
    else:
        from .report.console import render_solve
        for file in result.files:
            if file.verdict != ERROR or file.checks:
                print(render_solve(file))
                if getattr(args, "formulas", False):
                    from .derivecmd import formula_lines
                    print(common_printable("\n".join(formula_lines(file.file))))
    return result.exit_code


def _parse(argv: list[str] | None) -> argparse.Namespace:
    """The parsed arguments.  A usage error exits 2; with ``--json`` among the arguments its
    message is also a JSON document on stdout."""
    words = sys.argv[1:] if argv is None else list(argv)
    return _parser(json_errors="--json" in words).parse_args(words)


def _quiet_numerics() -> None:
    """Hide the linear-algebra libraries' own warnings (singular steps the engines handle and
    report in their own words); the user sees messages, never library source lines."""
    warnings.filterwarnings("ignore", category=RuntimeWarning, module=r"(numpy|scipy)\.")
    warnings.filterwarnings("ignore", message=r".*(encountered in|Singular matrix|exactly zero|All-NaN)")
    try:
        from scipy.linalg import LinAlgWarning
        warnings.filterwarnings("ignore", category=LinAlgWarning)
    except ImportError:  # pragma: no cover
        pass
    warnings.showwarning = _show_warning


def _show_warning(message, category, filename, lineno, file=None, line=None) -> None:
    """A warning that reaches the user: ``tauproof: warning: <text>``, never a source line; the
    numerical libraries' own warnings (their categories) are dropped."""
    if category.__module__.split(".")[0] in ("numpy", "scipy"):
        return
    say(f"warning: {message}")


@contextlib.contextmanager
def _sigterm_raises():
    """While running, SIGTERM raises ``pool.Interrupted`` (as SIGINT raises KeyboardInterrupt)."""
    from .pool import Interrupted

    def stop(signum, frame):
        raise Interrupted(signum)

    try:
        previous = signal.signal(signal.SIGTERM, stop)
    except ValueError:  # not the main thread: leave signals alone
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)


def _interrupted(args, signum: int, partial, total: int, reports_written: bool) -> int:
    """One line on stderr for a run stopped by a signal (with ``--json`` also the document of
    what had finished, the stop in its ``errors``); the exit code 128 + signal."""
    from .outcome import RunResult
    name = {signal.SIGINT: "SIGINT", signal.SIGTERM: "SIGTERM"}.get(signum, f"signal {signum}")
    files = partial.files if partial is not None else ()
    finished = sum(1 for f in files if f.file)
    reports = ("the reports were written" if reports_written else
               "reports not written (the previous reports are left as they were)")
    text = f"stopped by {name} after {finished} of {total} file(s); {reports}"
    say(text)
    if args.json:
        from .report import jsonout
        sys.stdout.write(jsonout.render(RunResult(files=tuple(files), errors=(text,))))
    return EXIT_SIGNAL_BASE + int(signum)


def _pieces(args):
    """Where a check run's workers put each file's report pieces (``report.pieces``), or None
    when no reports are written."""
    if args.command != "check" or args.no_report:
        return None
    from .report.pieces import Drawn
    return Drawn(with_plots=not args.no_plots)


def _write_reports(args, argv, result, bar, pieces=None):
    """(the result, the paths written): the reports of a check run, unless ``--no-report``,
    headed by the run's provenance; a failure to write them becomes an error of the run,
    naming the folder."""
    from .outcome import RunResult
    from .report import write_all
    from .report.provenance import collect
    if args.no_report:
        return result, []
    facts = collect(result, sys.argv[1:] if argv is None else argv)
    try:
        return result, write_all(result, Path(args.report_dir), jobs=args.jobs, progress=bar,
                                 provenance=facts, with_plots=not args.no_plots, pieces=pieces)
    except OSError as err:
        problem = f"could not write the reports to the folder {args.report_dir}: {err}"
        return RunResult(files=result.files, errors=result.errors + (problem,)), []


def _print_check(args, result, written: list) -> None:
    """The console text of a check run: failures, findings, warnings, passes, summary, paths."""
    from .report.console import (render_failures, render_findings, render_passes,
                                  render_summary, render_warnings, wrap)
    from .report.style import for_stream
    style = for_stream(sys.stdout)
    texts = [render_failures(result, style, args.show_all),
             wrap(render_findings(result), style), wrap(render_warnings(result), style),
             "" if args.show_all else wrap(render_passes(result), style)]
    for text in texts:
        if text:
            print(text)
    from .report.spreads import console as spread_lines
    for text in spread_lines(result).splitlines():
        print(wrap(text, style))
    print(render_summary(result, style))
    main_files = [p for p in written if p.parent == Path(args.report_dir)]
    if main_files:
        print(wrap(printable(f"reports in {args.report_dir}/: "
                             f"{', '.join(p.name for p in main_files)}"
                             f" (+{len(written) - len(main_files)} plots)"), style))


if __name__ == "__main__":  # pragma: no cover
    sys.exit(command())
