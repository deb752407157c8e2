"""The console in a real terminal (a pty) and piped: colour, width, what is listed, the bar."""

from __future__ import annotations

import fcntl
import os
import pty
import re
import select
import struct
import subprocess
import sys
import termios
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PACKET = str(ROOT / "circuits" / "review-packet")
_ANSI = re.compile(r"\x1b\[[0-9;?]*[A-Za-z]")


def in_pty(args: list[str], env: dict[str, str], bar: bool = False) -> str:
    """Run ``tauproof ARGS`` with stdout and stderr on a pty of 100 columns (a new pty has
    none, which draws an empty bar); everything it wrote.  Stderr (the bar) goes to the pty
    too when ``bar``, else nowhere."""
    main, child = pty.openpty()
    fcntl.ioctl(child, termios.TIOCSWINSZ, struct.pack("HHHH", 30, 100, 0, 0))
    proc = subprocess.Popen([sys.executable, "-m", "harness", *args], stdin=subprocess.DEVNULL,
                            stdout=child, stderr=child if bar else subprocess.DEVNULL,
                            cwd=ROOT, env=env)
    os.close(child)
    chunks = []
    while True:
        ready, _, _ = select.select([main], [], [], 120)
        if not ready:
            break
        try:
            data = os.read(main, 65536)
        except OSError:        # the child closed its end
            break
        if not data:
            break
        chunks.append(data)
    proc.wait(timeout=120)
    os.close(main)
    return b"".join(chunks).decode("utf-8", "replace").replace("\r\n", "\n")


def piped(args: list[str], env: dict[str, str]) -> str:
    return subprocess.run([sys.executable, "-m", "harness", *args], capture_output=True,
                          text=True, cwd=ROOT, env=env).stdout


def environ(**extra: str) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if k not in ("NO_COLOR", "FORCE_COLOR",
                                                             "COLUMNS")}
    return {**env, **extra}


CHECK = ["check", PACKET, "--no-report", "--closed-form-only"]


def test_colour_on_a_terminal_fitted_to_its_width():
    out = in_pty(CHECK, environ(COLUMNS="72"))
    assert "\x1b[1;31mmismatch\x1b[0m" in out
    lines = _ANSI.sub("", out).splitlines()
    assert lines and max(len(line) for line in lines) <= 72, max(lines, key=len)
    assert sum("review-packet/wrong-thevenin.toml" in line for line in lines) == 1  # grouped


def test_no_colour_when_piped_or_asked_and_forced_colour_when_asked():
    assert "\x1b[" not in piped(CHECK, environ())
    assert "\x1b[" not in in_pty(CHECK, environ(NO_COLOR="1", COLUMNS="100"))
    assert "\x1b[1;31mmismatch" in piped(CHECK, environ(FORCE_COLOR="1"))
    assert "\x1b[" not in piped(CHECK, environ(FORCE_COLOR="1", NO_COLOR="1"))


def test_passes_are_summarised_unless_all_is_asked():
    """The packet's 3 passing blocks: one summary line by default, their rows with --all."""
    default = piped(CHECK, environ())
    assert "3 checks passed" in default and "--all lists them" in default
    assert "#1 node hold at 0 s" not in default        # sign-slip's passing block
    every = piped(CHECK + ["--all"], environ())
    assert "#1 node hold at 0 s" in every and "--all lists them" not in every


def test_the_width_of_the_terminal_itself_is_used():
    lines = _ANSI.sub("", in_pty(CHECK, environ())).splitlines()
    assert max(len(line) for line in lines) <= 100 and max(len(line) for line in lines) > 80


def test_the_bar_runs_through_the_plots(tmp_path):
    """On a terminal the bar counts the plots too (its last description is "plots")."""
    out = in_pty(["check", PACKET, "--closed-form-only", "--report-dir", str(tmp_path)],
                 environ(), bar=True)
    assert "plots:" in out and "analysing:" in out
    assert (tmp_path / "report.html").is_file()
