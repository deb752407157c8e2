"""Faults during a run: time limits, dying workers, unwritable report folders, signals, and
reports interrupted while being written.

The survivors are checked against the first-order RC charge, tau = R*C and x(inf) = V (common
practice), so a fault that corrupted the other files' results would fail these tests.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from harness import pool, runner
from harness.cli import main
from harness.outcome import ERROR, PASS
from harness.runner import RunOptions, run

ROOT = Path(__file__).resolve().parents[1]
RC = textwrap.dedent("""
    title = "RC charge {n}"
    [parts]
    V1 = {{ kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "5 V"]] }}
    R1 = {{ kind = "resistor", nodes = ["in", "out"], value = "{r}k" }}
    C1 = {{ kind = "capacitor", nodes = ["out", "gnd"], value = "1u" }}
    [[expect]]
    node = "out"
    final = "5 V"
    tau = "{tau} ms"
    """)


def rc_files(folder: Path, names: list[str]) -> list[str]:
    """One RC file per name, R = (i+1) kOhm, with the hand tau = R*C (common practice)."""
    paths = []
    for i, name in enumerate(names):
        path = folder / f"{name}.toml"
        path.write_text(RC.format(n=i, r=i + 1, tau=i + 1), encoding="utf-8")
        paths.append(str(path))
    return paths


def faulty(kind: str):
    """A check_file that misbehaves for files whose name contains ``kind``."""
    original = runner.check_file

    def check(path: str, numeric: bool = True):
        name = Path(path).name
        if "slow" in name:
            time.sleep(60)
        if "exit" in name:
            os._exit(3)
        if "kill" in name:
            os.kill(os.getpid(), signal.SIGKILL)
        return original(path, numeric)

    return check


def assert_survivor(result, index: int) -> None:
    """The survivor passed with the closed form's tau equal to R*C (common practice)."""
    assert result.verdict == PASS, result.errors
    tau = result.checks[0].fields[3]
    assert tau.closed_form == pytest.approx((index + 1) * 1e3 * 1e-6, rel=1e-9)


def test_timeout_stops_only_the_slow_file(tmp_path, monkeypatch):
    """A file over --timeout becomes "timed out after 1 s" while the files around it pass."""
    monkeypatch.setattr(runner, "check_file", faulty("slow"))
    files = rc_files(tmp_path, ["a", "b-slow", "c"])
    started = time.monotonic()
    result = run(files, RunOptions(numeric=False, jobs=1, timeout=1.0))
    assert time.monotonic() - started < 20
    a, slow, c = result.files
    assert_survivor(a, 0)
    assert_survivor(c, 2)
    assert slow.verdict == ERROR and "timed out after 1 s" in slow.errors[0]
    assert slow.file == files[1]


def test_dead_workers_lose_only_their_files(tmp_path, monkeypatch):
    """A worker that calls os._exit or is SIGKILLed costs one error result each; others pass."""
    monkeypatch.setattr(runner, "check_file", faulty("x"))
    monkeypatch.setattr(pool, "free_cores", lambda: 2)   # workers, however busy the machine
    files = rc_files(tmp_path, ["a", "b-exit", "c", "d-kill", "e"])
    result = run(files, RunOptions(numeric=False, jobs=2))
    by_name = {Path(f.file).stem: f for f in result.files}
    for i, name in ((0, "a"), (2, "c"), (4, "e")):
        assert_survivor(by_name[name], i)
    assert "exited with code 3" in by_name["b-exit"].errors[0]
    assert "killed by signal SIGKILL" in by_name["d-kill"].errors[0]
    assert result.exit_code == 2


def test_timeout_option_through_cli(tmp_path, capsys, monkeypatch):
    """--timeout on the command line: exit 2, the message names the file and the limit."""
    monkeypatch.setattr(runner, "check_file", faulty("slow"))
    files = rc_files(tmp_path, ["ok", "z-slow"])
    code = main(["check", *files, "--timeout", "0.5", "--closed-form-only", "--no-report"])
    out, err = capsys.readouterr()
    assert code == 2
    assert f"{files[1]}: timed out after 0.5 s" in err
    assert "Traceback" not in err


@pytest.mark.parametrize("bad", ["0", "-1", "nan", "soon"])
def test_timeout_must_be_positive(bad, capsys):
    """--timeout rejects zero, negative, NaN and non-numbers with a usage error (exit 2)."""
    with pytest.raises(SystemExit) as stop:
        main(["check", "x.toml", "--timeout", bad])
    assert stop.value.code == 2


def test_unwritable_report_folder_exits_two_and_prints_results(tmp_path, capsys):
    """A report folder under a regular file: exit 2, the folder named, the table still printed."""
    files = rc_files(tmp_path, ["a"])
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("x")
    folder = blocker / "reports"
    code = main(["check", *files, "--report-dir", str(folder), "--closed-form-only"])
    out, err = capsys.readouterr()
    assert code == 2
    assert str(folder) in err and "could not write the reports" in err
    assert "1 pass" in out and "exit 2: could not write the reports" in out
    assert "exit 0" not in out
    assert "Traceback" not in err


def test_unwritable_report_folder_with_json_keeps_stdout(tmp_path, capsys):
    """With --json the result is still printed in full when the reports cannot be written, the
    run's verdict error and the reason in its ``errors``."""
    files = rc_files(tmp_path, ["a"])
    blocker = tmp_path / "file"
    blocker.write_text("x")
    code = main(["check", *files, "--json", "--report-dir", str(blocker), "--closed-form-only"])
    out, err = capsys.readouterr()
    assert code == 2
    data = json.loads(out)
    assert data["verdict"] == ERROR and data["files"][0]["verdict"] == PASS
    assert "could not write the reports" in data["errors"][0]
    assert str(blocker) in err


_SCRIPT = textwrap.dedent("""
    import os, sys, time
    from pathlib import Path
    import harness.runner as runner
    original = runner.check_file
    def check(path, numeric=True):
        if "slow" in Path(path).name:
            Path(os.environ["MARK"]).write_text("started")
            time.sleep(60)
        return original(path, numeric)
    runner.check_file = check
    from harness.cli import main
    sys.exit(main(sys.argv[1:]))
    """)


def _run_until_marked(tmp_path: Path, args: list[str], signum: int):
    """Start the CLI in a subprocess, wait until the slow file starts, send ``signum``."""
    mark = tmp_path / "started"
    env = dict(os.environ, MARK=str(mark), PYTHONPATH=str(ROOT))
    proc = subprocess.Popen([sys.executable, "-c", _SCRIPT, *args], cwd=tmp_path, env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 30
    while not mark.exists() and time.monotonic() < deadline and proc.poll() is None:
        time.sleep(0.05)
    assert mark.exists(), proc.communicate()
    proc.send_signal(signum)
    out, err = proc.communicate(timeout=30)
    return proc.returncode, out, err


@pytest.mark.parametrize("signum, code, extra", [
    (signal.SIGINT, 130, []),
    (signal.SIGTERM, 143, ["--jobs", "2"]),
])
def test_signal_stops_cleanly_and_keeps_previous_reports(tmp_path, signum, code, extra):
    """SIGINT/SIGTERM mid-run: exit 130/143, one line on stderr, previous reports untouched."""
    reports = tmp_path / "reports"
    reports.mkdir()
    old = {name: f"previous {name}" for name in ("report.html", "results.json", "junit.xml")}
    for name, text in old.items():
        (reports / name).write_text(text)
    files = rc_files(tmp_path, ["a", "b-slow", "c"])
    rc, out, err = _run_until_marked(tmp_path, ["check", *files, "--report-dir", str(reports),
                                                "--closed-form-only", *extra], signum)
    assert rc == code, err
    assert "Traceback" not in err
    assert len(err.strip().splitlines()) == 1 and "stopped by" in err
    for name, text in old.items():
        assert (reports / name).read_text() == text
    assert sorted(p.name for p in reports.iterdir()) == sorted(old)
