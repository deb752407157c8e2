"""The ``tauproof`` command: ``check`` (compare and report) and ``solve`` (computed values).

Exit codes: 0 every check passed; 1 at least one mismatch or engines-disagree, or (``check``) a
file with no ``[[expect]]`` block, where nothing was checked; 2 at least one
file could not be analysed (message on stderr naming file, part and field; never a traceback),
timed out, lost its worker, or the reports could not be written; 130 stopped by SIGINT (Ctrl-C),
143 stopped by SIGTERM (the previous reports are then left as they were).
"""

from __future__ import annotations

import argparse
import contextlib
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


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="tauproof",
        description="Check hand-calculated RC/RL step responses against an exact and a "
                    "numerical engine. Settings come from [tool.tauproof] in the nearest "
                    "pyproject.toml (`tauproof help config`); options here override them.")
    parser.add_argument("--version", action="version", version=f"tauproof {_version()}")
    sub = parser.add_subparsers(dest="command", required=True)
    check = sub.add_parser("check", help="compare hand values with both engines and write reports")
    check.add_argument("paths", nargs="*", metavar="PATH",
                       help="circuit files or folders (default: [tool.tauproof] paths)")
    check.add_argument("--report-dir", default=None,
                       help="where reports go (default: reports/)")
    check.add_argument("--no-report", action="store_true", help="do not write report files")
    check.add_argument("--all", action="store_true", dest="show_all",
                       help="list every check on the console, passes too (default: what needs "
                            "attention in full, passes summarised)")
    solve = sub.add_parser("solve", help="print the computed values for every expectation's probe")
    solve.add_argument("paths", nargs="*", metavar="FILE",
                       help="circuit files or folders (default: [tool.tauproof] paths)")
    for sp in (check, solve):
        sp.add_argument("--json", action="store_true", help="machine-readable result on stdout")
        sp.add_argument("--jobs", type=_positive, default=None, metavar="N",
                        help="files analysed in parallel processes (default 1)")
        sp.add_argument("--closed-form-only", action="store_true", default=None,
                        help="skip the numerical engine (faster; no engine cross-check)")
        sp.add_argument("--timeout", type=_seconds, default=None, metavar="SECONDS",
                        help="stop a file's analysis after this many seconds (it becomes an "
                             "error; the other files go on)")
    helper = sub.add_parser("help", help="print a help topic: format (the circuit file "
                                         "reference) or config ([tool.tauproof] keys)")
    helper.add_argument("topic", nargs="?", default="format", choices=("format", "config"))
    new = sub.add_parser("new", help="write a commented starting circuit file")
    new.add_argument("file", metavar="FILE", help="the file to create (never overwritten)")
    return parser


def _version() -> str:
    from . import __version__
    return __version__


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
#: exit code when the reports could not be written
EXIT_REPORTS = 2
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
    previous, sys.stdout = sys.stdout, _PipeSafe(sys.stdout)
    try:
        return _main(argv)
    finally:
        sys.stdout = previous


def _main(argv: list[str] | None) -> int:
    args = _parser().parse_args(argv)
    if args.command in ("help", "new"):
        from . import starter
        return starter.main(args)
    from .config import ConfigError, load
    try:
        settings = _settings(args, load())
    except ConfigError as err:
        print(f"tauproof: {err}", file=sys.stderr)
        return EXIT_USAGE
    if not args.paths:
        print("tauproof: no circuit files given: name files or folders, or set paths in "
              "[tool.tauproof] of pyproject.toml (tauproof help config)", file=sys.stderr)
        return EXIT_USAGE
    from .progress import Progress
    from .runner import RunInterrupted, RunOptions, run
    bar = Progress(enabled=not args.json)
    options = RunOptions(numeric=not args.closed_form_only, jobs=args.jobs, progress=bar,
                         timeout=args.timeout, tolerance=settings.tolerance)
    try:
        with _sigterm_raises(), warnings.catch_warnings():
            _quiet_numerics()
            result = run(args.paths, options)
    except RunInterrupted as stop:
        bar.close()
        return _interrupted(stop)
    try:
        return _report(args, argv, result, bar)
    finally:
        bar.close()


def _settings(args, settings):
    """Fill every option the command line left unset from the project settings (in place);
    returns the settings."""
    args.paths = args.paths or list(settings.paths)
    args.jobs = args.jobs or settings.jobs or 1
    args.timeout = args.timeout if args.timeout is not None else settings.timeout
    if args.closed_form_only is None:
        args.closed_form_only = bool(settings.closed_form_only)
    if getattr(args, "report_dir", "") is None:
        args.report_dir = settings.report_dir or "reports"
    if not getattr(args, "show_all", True):
        args.show_all = settings.show == "all"
    return settings


def _report(args, argv, result, bar) -> int:
    """Messages, ``--json``, the reports and the console text of a finished run."""
    if args.command == "check":
        from .outcome import require_checks
        result = require_checks(result)
    for file in result.files:
        for message in file.input_warnings if args.json or args.command != "check" else ():
            print(f"tauproof: warning: {message}", file=sys.stderr)  # check's table lists them
        for message in file.errors:
            print(f"tauproof: {message}", file=sys.stderr)
    if args.json:
        from .report import jsonout
        sys.stdout.write(jsonout.render(result))
    code = result.exit_code
    if args.command == "check":
        if not _finish_check(args, argv, result, bar):
            code = max(code, EXIT_REPORTS)
    elif not args.json:
        from .report.console import render_solve
        for file in result.files:
            if file.verdict != ERROR or file.checks:
                print(render_solve(file))
    return code


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


def _interrupted(stop) -> int:
    """One line on stderr for a run stopped by a signal; the exit code 128 + signal."""
    name = {signal.SIGINT: "SIGINT", signal.SIGTERM: "SIGTERM"}.get(stop.signum,
                                                                   f"signal {stop.signum}")
    finished = sum(1 for f in stop.partial.files if f.file)
    print(f"tauproof: stopped by {name} after {finished} of {stop.total} file(s); reports not "
          f"written (the previous reports are left as they were)", file=sys.stderr)
    return EXIT_SIGNAL_BASE + stop.signum


def _finish_check(args, argv, result, bar) -> bool:
    """Reports and the console text of a check run; False when the reports could not be written
    (the message, naming the folder, is on stderr; the console text is still printed)."""
    from .report import write_all
    from .report.console import (render_failures, render_findings, render_passes,
                                  render_summary, render_warnings, wrap)
    from .report.style import for_stream
    ok, written = True, []
    if not args.no_report:
        from .report.provenance import collect
        facts = collect(result, sys.argv[1:] if argv is None else argv)
        try:
            written = write_all(result, Path(args.report_dir), jobs=args.jobs, progress=bar,
                                provenance=facts)
        except OSError as err:
            print(f"tauproof: could not write the reports to the folder {args.report_dir}: "
                  f"{err}", file=sys.stderr)
            ok = False
    bar.close()
    if not args.json:
        style = for_stream(sys.stdout)
        texts = [render_failures(result, style, args.show_all),
                 wrap(render_findings(result), style), wrap(render_warnings(result), style),
                 "" if args.show_all else wrap(render_passes(result), style)]
        for text in texts:
            if text:
                print(text)
        print(render_summary(result, style))
        main_files = [p for p in written if p.parent == Path(args.report_dir)]
        if main_files:
            print(wrap(f"reports in {args.report_dir}/: "
                       f"{', '.join(p.name for p in main_files)}"
                       f" (+{len(written) - len(main_files)} plots)", style))
    return ok


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
