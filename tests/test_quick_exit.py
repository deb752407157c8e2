"""The console command ends a ``check`` or ``solve`` without the interpreter's teardown
(``cli._leave``): what it writes just before is complete, through a pipe and into a file, the
exit code is main's, ``atexit`` handlers still run, and the usual exit is kept when another
thread is alive.  Checked against the same command run through ``harness.cli.main`` with the
usual exit (a fresh interpreter each)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SMALL = str(ROOT / "circuits/library/logger/button-debounce.toml")
LIBRARY = str(ROOT / "circuits/library")
REVIEW = str(ROOT / "circuits/review-packet")

#: the command through main(), the interpreter exiting as usual
USUAL = "import sys, harness.cli; sys.exit(harness.cli.main(sys.argv[1:]))"
#: the console command (what the ``tauproof`` script runs)
QUICK = "import sys, harness.cli; sys.exit(harness.cli.command())"


def _run(code: str, words: list[str], **kwargs) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", code, *words], cwd=ROOT, timeout=300,
                          **kwargs)


def _small_solve(before: str) -> subprocess.CompletedProcess:
    """The console command solving the small file after ``before`` ran; it passed (code 0)."""
    done = _run(before + QUICK, ["solve", SMALL, "--closed-form-only"], capture_output=True,
                text=True)
    assert done.returncode == 0, done.stderr
    return done


@pytest.mark.parametrize("words, expected", [
    (["solve", LIBRARY, "--closed-form-only", "--json"], 0),   # ~0.3 MB, more than a pipe holds
    (["check", REVIEW, "--closed-form-only", "--no-report"], 1),
    (["solve", str(ROOT / "tests/bad/capacitance_negative.toml"), "--closed-form-only"], 2),
])
def test_output_through_a_pipe_and_into_a_file_is_complete(words, expected, tmp_path):
    usual = _run(USUAL, words, capture_output=True)
    quick = _run(QUICK, words, capture_output=True)
    assert usual.returncode == expected, usual.stderr
    assert (quick.returncode, quick.stdout, quick.stderr) == (
        usual.returncode, usual.stdout, usual.stderr)
    out, err = tmp_path / "out.txt", tmp_path / "err.txt"
    with open(out, "wb") as stdout, open(err, "wb") as stderr:
        to_file = _run(QUICK, words, stdout=stdout, stderr=stderr)
    assert to_file.returncode == expected
    assert (out.read_bytes(), err.read_bytes()) == (usual.stdout, usual.stderr)
    if "--json" in words:
        assert json.loads(quick.stdout)["files"]


def test_the_teardown_is_skipped_and_atexit_handlers_still_run():
    """An ``atexit`` handler (as a coverage collector registers) runs and its output arrives;
    an object's ``__del__`` (module teardown) does not run: the shortcut was taken."""
    code = ("import atexit, sys, harness.cli\n"
            "atexit.register(lambda: print('handler ran', file=sys.stderr))\n"
            "class Noisy:\n"
            "    def __del__(self):\n"
            "        print('teardown ran', file=sys.stderr)\n"
            "kept = Noisy()\n")
    done = _small_solve(code)
    assert "handler ran" in done.stderr
    assert "teardown ran" not in done.stderr
    assert done.stdout.strip()


def test_a_live_thread_keeps_the_usual_exit():
    """A thread still running when the command returns (it starts its work then) is waited
    for, as Python does."""
    code = ("import sys, threading, time, harness.cli\n"
            "returned = threading.Event()\n"
            "def late():\n"
            "    returned.wait()\n"
            "    time.sleep(0.3)\n"
            "    print('thread finished', flush=True)\n"
            "threading.Thread(target=late).start()\n"
            "run = harness.cli.main\n"
            "def main(*words):\n"
            "    try:\n"
            "        return run(*words)\n"
            "    finally:\n"
            "        returned.set()\n"
            "harness.cli.main = main\n")
    done = _small_solve(code)
    assert done.stdout.rstrip().endswith("thread finished")


def test_a_usage_error_exits_as_before():
    """argparse's exit (code 2) never reaches the shortcut: the message and the code are kept."""
    words = ["solve", "--jobs", "0", SMALL]
    usual = _run(USUAL, words, capture_output=True)
    quick = _run(QUICK, words, capture_output=True)
    assert (quick.returncode, quick.stdout, quick.stderr) == (2, usual.stdout, usual.stderr)
