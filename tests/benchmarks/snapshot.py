"""Byte-for-byte guard for refactors: the bundled circuits' ``solve --json`` and ``check --json``.

    python -m tests.benchmarks.snapshot save  DIR   # before a change
    python -m tests.benchmarks.snapshot compare DIR # after it: lists every output that differs

Each output is written as DIR/<name>.json; ``compare`` reruns them and prints a unified diff of
the first differing lines (timings are not part of the JSON documents, so they compare as bytes).
"""

from __future__ import annotations

import difflib
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
RUNS = {
    "library-solve": ["solve", "circuits/library", "--json"],
    "library-check": ["check", "circuits/library", "--json", "--no-report", "--jobs", "2"],
    "review-check": ["check", "circuits/review-packet", "--json", "--no-report"],
}


def _run(args: list[str]) -> str:
    done = subprocess.run([sys.executable, "-m", "harness.cli", *args], cwd=ROOT,
                          capture_output=True, text=True, check=False)
    return done.stdout


def main(argv: list[str]) -> int:
    if len(argv) != 2 or argv[0] not in ("save", "compare"):
        print(__doc__)
        return 2
    folder = Path(argv[1])
    folder.mkdir(parents=True, exist_ok=True)
    differ = 0
    for name, args in RUNS.items():
        out = _run(args)
        path = folder / f"{name}.json"
        if argv[0] == "save":
            path.write_text(out)
            print(f"saved {path} ({len(out)} bytes)")
            continue
        old = path.read_text()
        if old == out:
            print(f"{name}: identical")
            continue
        differ += 1
        diff = difflib.unified_diff(old.splitlines(), out.splitlines(), "before", "after",
                                    lineterm="", n=1)
        print(f"{name}: DIFFERS")
        print("\n".join(list(diff)[:80]))
    return 1 if differ else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
