"""The ``tauproof`` command: ``check`` (compare and report) and ``solve`` (computed values).

Exit codes: 0 every check passed; 1 at least one mismatch or engines-disagree; 2 at least one
file could not be analysed (message on stderr naming file, part and field; never a traceback).
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from .outcome import ERROR


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="tauproof",
        description="Check hand-calculated RC/RL step responses against an exact and a "
                    "numerical engine.")
    sub = parser.add_subparsers(dest="command", required=True)
    check = sub.add_parser("check", help="compare hand values with both engines and write reports")
    check.add_argument("paths", nargs="+", metavar="PATH", help="circuit files or folders")
    check.add_argument("--report-dir", default="reports", help="where reports go (default: reports/)")
    check.add_argument("--no-report", action="store_true", help="do not write report files")
    solve = sub.add_parser("solve", help="print the computed values for every expectation's probe")
    solve.add_argument("paths", nargs="+", metavar="FILE", help="circuit files or folders")
    for sp in (check, solve):
        sp.add_argument("--json", action="store_true", help="machine-readable result on stdout")
        sp.add_argument("--jobs", type=_positive, default=1, metavar="N",
                        help="files analysed in parallel processes (default 1)")
        sp.add_argument("--closed-form-only", action="store_true",
                        help="skip the numerical engine (faster; no engine cross-check)")
    return parser


def _positive(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError("must be at least 1")
    return value


def main(argv: list[str] | None = None) -> int:
    """Entry point of the console script; returns the exit code."""
    args = _parser().parse_args(argv)
    from .runner import RunOptions, run
    options = RunOptions(numeric=not args.closed_form_only, jobs=args.jobs,
                         progress=not args.json)
    result = run(args.paths, options)
    for file in result.files:
        for message in file.errors:
            print(f"tauproof: {message}", file=sys.stderr)
    if args.json:
        print(json.dumps(result.to_json(), indent=2))
    if args.command == "check":
        _finish_check(args, result)
    elif not args.json:
        from .report.console import render_solve
        for file in result.files:
            if file.verdict != ERROR or file.checks:
                print(render_solve(file))
    return result.exit_code


def _finish_check(args, result) -> None:
    from .report import write_all
    from .report.console import render_failures, render_summary
    if not args.no_report:
        try:
            written = write_all(result, Path(args.report_dir))
        except OSError as err:
            print(f"tauproof: could not write reports to {args.report_dir}: {err}", file=sys.stderr)
            written = []
    else:
        written = []
    if not args.json:
        table = render_failures(result)
        if table:
            print(table)
        print(render_summary(result))
        main_files = [p for p in written if p.parent == Path(args.report_dir)]
        if main_files:
            print(f"reports in {args.report_dir}/: {', '.join(p.name for p in main_files)}"
                  f" (+{len(written) - len(main_files)} plots)")


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
