"""Signals sent to a real tauproof process (``python -m harness.cli`` in its own process group)
while plots are drawn and while files are analysed: one line on stderr, no traceback, no worker
left behind holding the output, the previous reports untouched.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from tests.test_reliability_faults import _SCRIPT, rc_files

ROOT = Path(__file__).resolve().parents[1]

#: the command line with plot drawing made slow (and, from the faults tests, the analysis of a
#: file named "slow"), marking the file MARK when either starts
_SLOW = textwrap.dedent("""
    import os, time
    from pathlib import Path
    import harness.report.plots as plots
    draw = plots.plot_check
    def slow_plot(*args, **kwargs):
        Path(os.environ["MARK"]).write_text("plots")
        time.sleep(60)
        return draw(*args, **kwargs)
    plots.plot_check = slow_plot
    """) + _SCRIPT


def start(tmp_path: Path, args: list[str]) -> tuple[subprocess.Popen, Path]:
    """The slowed command line in a new session (its own process group), and its mark file."""
    mark = tmp_path / "started"
    env = dict(os.environ, MARK=str(mark), PYTHONPATH=str(ROOT), MPLBACKEND="Agg")
    proc = subprocess.Popen([sys.executable, "-c", _SLOW, *args], cwd=tmp_path, env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True)
    deadline = time.monotonic() + 60
    while not mark.exists() and time.monotonic() < deadline and proc.poll() is None:
        time.sleep(0.05)
    assert mark.exists(), proc.communicate()
    time.sleep(0.3)  # every worker has its task
    return proc, mark


def group_alive(pgid: int) -> bool:
    try:
        os.killpg(pgid, 0)
    except ProcessLookupError:
        return False
    return True


def wait_group_gone(pgid: int, seconds: float) -> bool:
    deadline = time.monotonic() + seconds
    while group_alive(pgid) and time.monotonic() < deadline:
        time.sleep(0.05)
    return not group_alive(pgid)


def old_reports(folder: Path) -> dict[str, str]:
    folder.mkdir()
    old = {name: f"previous {name}" for name in ("report.html", "report.md", "results.json",
                                                 "summary.csv", "junit.xml")}
    for name, text in old.items():
        (folder / name).write_text(text)
    return old


@pytest.mark.parametrize("jobs", ["1", "2"])
def test_sigint_while_plots_are_drawn_prints_one_line(tmp_path, jobs):
    """Ctrl-C (SIGINT to the whole process group) while plots are drawn: exit 130, the one
    documented line, no traceback, the previous reports untouched, no process left."""
    reports = tmp_path / "reports"
    old = old_reports(reports)
    files = rc_files(tmp_path, [f"f{i}" for i in range(8)])
    proc, _ = start(tmp_path, ["check", *files, "--closed-form-only", "--jobs", jobs,
                               "--report-dir", str(reports)])
    os.killpg(proc.pid, signal.SIGINT)
    out, err = proc.communicate(timeout=30)
    assert proc.returncode == 130, err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert "stopped by SIGINT" in err and "reports not written" in err
    assert {p.name: p.read_text() for p in reports.iterdir()} == old
    assert wait_group_gone(proc.pid, 10)


def test_sigterm_to_the_parent_while_plots_are_drawn_leaves_no_worker(tmp_path):
    """SIGTERM to the parent alone while two plot workers draw: exit 143, one line, and no
    worker survives holding stdout/stderr (reading the output to its end returns)."""
    reports = tmp_path / "reports"
    old = old_reports(reports)
    files = rc_files(tmp_path, [f"f{i}" for i in range(8)])
    proc, _ = start(tmp_path, ["check", *files, "--closed-form-only", "--jobs", "2",
                               "--report-dir", str(reports)])
    proc.send_signal(signal.SIGTERM)
    out, err = proc.communicate(timeout=30)  # returns only when no process holds the pipes
    assert proc.returncode == 143, err
    assert "Traceback" not in err and "stopped by SIGTERM" in err
    assert {p.name: p.read_text() for p in reports.iterdir()} == old
    assert wait_group_gone(proc.pid, 10)


def test_sigkill_of_the_parent_during_analysis_kills_the_workers(tmp_path):
    """SIGKILL to the parent alone while two workers analyse: both workers die with it."""
    files = rc_files(tmp_path, ["a-slow", "b-slow", "c"])
    proc, _ = start(tmp_path, ["check", *files, "--closed-form-only", "--jobs", "2",
                               "--no-report"])
    assert group_alive(proc.pid)
    proc.kill()
    proc.wait(timeout=10)
    gone = wait_group_gone(proc.pid, 10)
    if not gone:
        os.killpg(proc.pid, signal.SIGKILL)
    proc.stdout.close()
    proc.stderr.close()
    assert gone, "a worker outlived its killed parent"
