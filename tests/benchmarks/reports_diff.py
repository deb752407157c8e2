"""Whether two report folders hold the same report set, timings and the run's own facts aside.

    python -m tests.benchmarks.reports_diff FOLDER_A FOLDER_B
    python -m tests.benchmarks.reports_diff --run [--jobs 1 2] [--keep DIR] [PATHS ...]

The first form compares two folders a ``tauproof check`` wrote: every file (the plots too) must
exist in both and hold the same bytes once these are masked: each file's analysis time (JUnit's
``time="…"``, the HTML's ``· 0.25 s``) and the provenance's date and time, command line and git
commit of the circuits (they name the run, not its results).  The second form runs
``tauproof check`` on PATHS (default: the bundled library) once per ``--jobs`` value, each into
its own folder, and compares every folder with the first.  Prints what differs; exit 1 if
anything does.  ``--jobs 2`` starts two workers only where ``pool.free_cores()`` finds two
free cores (a busy machine runs the files in one process, as --jobs 1 does); with
``--force-workers`` each run's ``free_cores`` answers 2, so ``--jobs 2`` has two workers
however busy the machine is.
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
import tempfile
from pathlib import Path

#: (pattern, replacement) applied to every text file before the comparison
MASKS = (
    (re.compile(rb'time="[0-9.]+"'), b'time="*"'),                       # junit.xml
    (re.compile(rb" \xc2\xb7 [0-9.]+ s<"), b" \xc2\xb7 * s<"),           # HTML file heading
    (re.compile(rb" \xc2\xb7 [0-9.]+ s"), b" \xc2\xb7 * s"),
    (re.compile(rb"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d[+-]\d\d:\d\d"), b"*time*"),
    (re.compile(rb"tauproof check[^<\n]*"), b"tauproof check *"),
    (re.compile(rb"\b[0-9a-f]{40}\b( with local changes to the circuit files)?"), b"*commit*"),
)


def masked(data: bytes) -> bytes:
    """``data`` with the run's timings, time, command and commit replaced by ``*``."""
    for pattern, replacement in MASKS:
        data = pattern.sub(replacement, data)
    return data


def differences(a: Path, b: Path) -> list[str]:
    """What differs between the report folders ``a`` and ``b``: a line per file."""
    names_a = {p.relative_to(a) for p in a.rglob("*") if p.is_file()}
    names_b = {p.relative_to(b) for p in b.rglob("*") if p.is_file()}
    out = [f"only in {a}: {n}" for n in sorted(names_a - names_b)]
    out += [f"only in {b}: {n}" for n in sorted(names_b - names_a)]
    for name in sorted(names_a & names_b):
        if masked((a / name).read_bytes()) != masked((b / name).read_bytes()):
            out.append(f"differs: {name}")
    return out


#: the command line with ``pool.free_cores`` answering 2 (``--force-workers``)
_FORCED = ("import sys, harness.pool as pool; pool.free_cores = lambda: 2; "
           "import harness.cli as cli; sys.exit(cli.main(sys.argv[1:]))")


def check_into(folder: Path, paths: list[str], jobs: int, force: bool = False) -> int:
    """``tauproof check PATHS --jobs N --report-dir folder``; its exit code."""
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1")
    command = ["-c", _FORCED] if force else ["-m", "harness.cli"]
    done = subprocess.run([sys.executable, *command, "check", *paths, "--jobs", str(jobs),
                           "--report-dir", str(folder)], capture_output=True, env=env)
    return done.returncode


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("folders", nargs="*")
    parser.add_argument("--run", action="store_true")
    parser.add_argument("--jobs", type=int, nargs="+", default=[1, 2])
    parser.add_argument("--keep", help="write the report folders under this folder")
    parser.add_argument("--force-workers", action="store_true")
    args = parser.parse_args(argv)
    if not args.run:
        if len(args.folders) != 2:
            parser.error("give two report folders, or --run")
        found = differences(Path(args.folders[0]), Path(args.folders[1]))
    else:
        paths = args.folders or ["circuits/library"]
        top = Path(args.keep or tempfile.mkdtemp(prefix="reports-diff-"))
        folders = [top / f"jobs{j}" for j in args.jobs]
        codes = [check_into(folder, paths, j, args.force_workers)
                 for folder, j in zip(folders, args.jobs)]
        print(f"exit codes {dict(zip(args.jobs, codes))}; folders under {top}")
        found = [f"--jobs {j}: {line}" for folder, j in zip(folders[1:], args.jobs[1:])
                 for line in differences(folders[0], folder)]
        if len(set(codes)) > 1:
            found.append(f"exit codes differ: {codes}")
    print("\n".join(found) if found else "same report set (timings aside)")
    return 1 if found else 0


if __name__ == "__main__":
    raise SystemExit(main())
