"""Fuzzing the whole command line: seeded circuit files through ``check --json``, ``solve
--json`` and the console table, each case in its own forked process with a time bound.

Run: ``python -m tests.benchmarks.fuzz_cli [--cases 10000] [--seed 1] [--case-limit 20]``.  Not
collected by pytest (tests/test_fuzz_cli.py runs a fast seeded subset).

Case ``n`` is, by turns, a random circuit of ``fuzz.generate(n)`` or a bundled library circuit
with ``fuzz_mutations`` applied (unprintable text, magnitudes near the float limits, parasitic
capacitors across inductors, dangling source terminals, hostile formulas, a voltage source across
a resistor); one case in four is written under a file name holding unprintable characters.  The
case runs one mode, also by turns: ``check --json``, ``solve --json`` or ``check`` (the console
table; every tenth writes the reports too).  The process is forked from a parent that has the
engines imported, its stdout and stderr are files (stderr encoded strictly, so an unencodable
character is a traceback, as on a strict console), and it is killed past the time bound.
Each case is counted under every defect it shows:

* ``traceback``   a Python traceback on stderr, or an exit code other than 0, 1 or 2;
* ``hang``        still running at ``--case-limit`` seconds (killed);
* ``internal``    "internal error while analysing" anywhere in the output;
* ``json``        (``--json``) stdout is not exactly one strict JSON document;
* ``raw-control`` an unprintable character (ESC, BEL, C1, bidi override) in stdout, stderr or a
                  report file;
* ``unlocated``   exit 2 without a message naming the file.

A case with none of them is ``ok``.
"""

from __future__ import annotations

import argparse
import collections
import io
import json
import os
import random
import re
import signal
import sys
import tempfile
import time
import traceback
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("MPLBACKEND", "Agg")

from tests.benchmarks import fuzz, fuzz_mutations  # noqa: E402

MODES = (("check", "--json", "--no-report"), ("solve", "--json"), ("check", "--no-report"))
DEFECTS = ("traceback", "hang", "internal", "json", "raw-control", "unlocated")
#: what must never reach a terminal or a report raw
_RAW = re.compile("[\x00-\x08\x0b-\x0c\x0e-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")
_NAMES = ("esc\x1b[2J", "bidi\u202etxt", "c1\x9b", "bel\x07", "\udcff")


def case_bytes(seed: int) -> tuple[bytes, str]:
    """(the file's bytes, what it is) of case ``seed`` (deterministic)."""
    if seed % 2 == 0:
        return fuzz.generate(seed), "random"
    rng = random.Random(seed)
    data, kinds = fuzz_mutations.library_case(rng)
    text = fuzz.to_toml(data)
    return text.encode("utf-8", "surrogatepass"), "+".join(sorted(set(kinds)))


def case_name(seed: int) -> str:
    """The case file's name: one case in four carries unprintable characters."""
    if seed % 4 == 3:
        return f"case{seed}-{_NAMES[(seed // 4) % len(_NAMES)]}.toml"
    return f"case{seed}.toml"


def mode_of(seed: int) -> tuple[str, ...]:
    return MODES[(seed // 2) % len(MODES)]


def _child(argv: list[str], out: str, err: str) -> None:
    """In the forked process: run the command line with stdout/stderr on files; never returns."""
    code = 99
    try:
        for fd, name in ((1, out), (2, err)):
            handle = os.open(name, os.O_WRONLY | os.O_CREAT | os.O_TRUNC)
            os.dup2(handle, fd)
            os.close(handle)
        sys.stdout = io.TextIOWrapper(open(1, "wb", closefd=False), encoding="utf-8")
        sys.stderr = io.TextIOWrapper(open(2, "wb", closefd=False), encoding="utf-8",
                                      line_buffering=True)
        from harness.cli import main
        try:
            code = main(argv)
        except SystemExit as stop:
            code = stop.code if isinstance(stop.code, int) else 98
    except BaseException:
        traceback.print_exc(file=sys.__stderr__ if sys.stderr is None else sys.stderr)
        code = 99
    finally:
        for stream in (sys.stdout, sys.stderr):
            try:
                stream.flush()
            except Exception:
                pass
        os._exit(code)


def run_one(path: Path, argv: list[str], limit: float) -> tuple[int | None, str, str, float]:
    """(exit code or None when killed at ``limit`` s, stdout, stderr, seconds) of one run."""
    out, err = f"{path}.out", f"{path}.err"
    started = time.monotonic()
    pid = os.fork()
    if pid == 0:
        _child(argv, out, err)
    code = None
    while time.monotonic() - started < limit:
        done, status = os.waitpid(pid, os.WNOHANG)
        if done:
            code = os.waitstatus_to_exitcode(status)
            break
        time.sleep(0.005)
    if code is None:
        os.kill(pid, signal.SIGKILL)
        os.waitpid(pid, 0)
    seconds = time.monotonic() - started
    texts = [Path(name).read_bytes().decode("utf-8", "replace") for name in (out, err)]
    return code, texts[0], texts[1], seconds


def judge(code: int | None, out: str, err: str, json_mode: bool, path: Path,
          reports: Path | None) -> list[str]:
    """The defects one run shows (``DEFECTS``)."""
    found = []
    if code is None:
        return ["hang"]
    if "Traceback" in err or code not in (0, 1, 2):
        found.append("traceback")
    if "internal error while analysing" in out + err:
        found.append("internal")
    if json_mode:
        try:
            json.loads(out, parse_constant=_reject)
        except ValueError:
            found.append("json")
    texts = [out, err]
    if reports is not None and reports.is_dir():
        texts += [p.read_text("utf-8", "replace") for p in reports.iterdir() if p.is_file()]
    if any(_RAW.search(text) for text in texts):
        found.append("raw-control")
    if code == 2 and "Traceback" not in err and not _names_file(err, path):
        found.append("unlocated")
    return found


def _reject(constant: str):
    raise ValueError(f"non-strict JSON constant {constant}")


def _names_file(err: str, path: Path) -> bool:
    from harness.safetext import printable
    return printable(str(path)) in err


def run(cases: int, seed: int, limit: float, folder: Path, quiet: bool = False,
        save: str | None = None) -> dict:
    """Run ``cases`` cases from ``seed`` in ``folder``; the counts, slowest case and examples
    (also written, every 500 cases, to the JSON file ``save`` when given)."""
    import harness.cli  # noqa: F401  (imported once here, so every forked case starts warm)
    from harness import closedform, compare, simulate  # noqa: F401
    from harness.report import console, jsonout  # noqa: F401
    counts: collections.Counter = collections.Counter()
    per_kind: collections.Counter = collections.Counter()
    codes: collections.Counter = collections.Counter()
    examples: dict[str, list] = collections.defaultdict(list)
    slowest, started = (0.0, None), time.perf_counter()

    def summary() -> dict:
        return {"cases": sum(codes.values()), "seed": seed, "case_limit_s": limit,
                "seconds": round(time.perf_counter() - started, 1), "outcomes": dict(counts),
                "exit_codes": dict(codes), "cases_per_kind": dict(per_kind),
                "slowest_case": {"seconds": round(slowest[0], 2), "seed": slowest[1]},
                "examples": dict(examples)}

    for n in range(seed, seed + cases):
        raw, kind = case_bytes(n)
        path = folder / case_name(n)
        path.write_bytes(raw)
        argv = list(mode_of(n))
        reports = None
        if argv == ["check", "--no-report"] and n % 10 == 1:
            reports = folder / f"reports{n}"
            argv = ["check", "--report-dir", str(reports)]
        code, out, err, seconds = run_one(path, argv + [str(path)], limit)
        found = judge(code, out, err, "--json" in argv, path, reports)
        counts.update(found or ["ok"])
        per_kind[kind.split("+")[0] if kind != "random" else "random"] += 1
        codes[str(code)] += 1
        slowest = max(slowest, (seconds, n))
        for defect in found:
            if len(examples[defect]) < 5:
                examples[defect].append({"seed": n, "mode": " ".join(argv), "kind": kind,
                                         "stderr": err[-600:]})
        for leftover in (f"{path}.out", f"{path}.err", path):
            Path(leftover).unlink(missing_ok=True)
        if (n - seed + 1) % 500 == 0:
            if not quiet:
                print(f"{n - seed + 1} cases, {dict(counts)}", file=sys.stderr, flush=True)
            if save:
                Path(save).write_text(json.dumps(summary(), indent=2, default=str))
    return summary()


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=10_000)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--case-limit", type=float, default=20.0)
    parser.add_argument("--out", default=None, help="also write the summary JSON here")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as folder:
        summary = run(args.cases, args.seed, args.case_limit, Path(folder), save=args.out)
    text = json.dumps(summary, indent=2, default=str)
    if args.out:
        Path(args.out).write_text(text)
    print(text)
    return 1 if any(summary["outcomes"].get(d) for d in DEFECTS) else 0


if __name__ == "__main__":
    sys.exit(main())
