"""Untrusted text in reports, file names that try to leave the report folder, and report writes
interrupted part-way (the previous report files must stay whole).

The hostile circuit is still a real RC charge, checked against tau = R*C (common practice), so
escaping can only pass if the report still carries the right values.
"""

from __future__ import annotations

import csv
import json
import os
import signal
import subprocess
import sys
import textwrap
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from harness.cli import main
from harness.report import REPORT_FILES

ROOT = Path(__file__).resolve().parents[1]
SCRIPT = "<script>alert('t')</script>"
IMG = "<img src=x onerror=alert(1)>"
HOSTILE = textwrap.dedent("""
    title = "{title}"
    [parts]
    V1 = {{ kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["0 s", "5 V"]] }}
    'R|1**' = {{ kind = "resistor", nodes = ["in", "{node}"], value = "10k" }}
    '{img}' = {{ kind = "capacitor", nodes = ["{node}", "gnd"], value = "1u" }}
    [[expect]]
    across = '{img}'
    final = "5 V"
    tau = "20 ms"
    note = "[click](javascript:alert(1)) | =cmd|' /C calc'!A0 <b>bold</b> \\u001b[31mred"
    [[expect]]
    through = 'R|1**'
    after = "0.5 mA"
    """)


def hostile(tmp_path: Path, title: str, name: str = "hostile.toml") -> Path:
    path = tmp_path / name
    text = HOSTILE.format(title=title, node="o|ut<b>", img=IMG)
    path.write_text(text, encoding="utf-8")
    return path


def check(tmp_path: Path, *paths: Path, reports: Path | None = None) -> tuple[int, Path]:
    reports = reports or tmp_path / "reports"
    code = main(["check", *map(str, paths), "--report-dir", str(reports),
                 "--closed-form-only"])
    return code, reports


def test_hostile_text_is_escaped_in_every_report(tmp_path, capsys):
    """Markup, table pipes, links and terminal escapes in a file are inert in every report."""
    path = hostile(tmp_path, f"{SCRIPT} **bold** | \\u001b[2J")
    code, reports = check(tmp_path, path)
    out, err = capsys.readouterr()
    assert code == 1  # tau 20 ms is wrong (R*C = 10 ms, common practice): a real mismatch
    assert "\x1b" not in out + err
    page = (reports / "report.html").read_text(encoding="utf-8")
    md = (reports / "report.md").read_text(encoding="utf-8")
    for raw in (SCRIPT, IMG, "<b>bold</b>", "\x1b"):
        assert raw not in page and raw not in md
    assert "&lt;script&gt;" in page and "&lt;img src=x onerror=alert(1)&gt;" in page
    assert "&lt;script&gt;" in md
    assert "[click](javascript:" not in md and "\\[click\\]" in md  # no live link
    for line in md.splitlines():  # an escaped | cannot split a table cell
        if line.startswith("| tau"):
            assert line.replace("\\|", "").count("|") == 8
    ET.parse(reports / "junit.xml")  # well-formed XML despite the markup
    rows = list(csv.DictReader((reports / "summary.csv").open(encoding="utf-8")))
    assert rows and all(not r["title"].startswith(("=", "+", "-", "@")) for r in rows)
    data = json.loads((reports / "results.json").read_text(encoding="utf-8"))
    tau = data["files"][0]["checks"][0]["fields"]["tau"]
    assert tau["closed_form"] == pytest.approx(10e3 * 1e-6, rel=1e-9)  # R*C, common practice


@pytest.mark.parametrize("title", ["../../x", "/etc/passwd", "..", "", "C:\\\\Windows\\\\x",
                                   "./../../../tmp/evil", "a/../../b"])
def test_titles_cannot_place_files_outside_the_report_folder(tmp_path, title, capsys):
    """Every file a run writes lies inside the report folder, whatever the title says."""
    path = hostile(tmp_path, title)
    reports = tmp_path / "deep" / "reports"
    before = {p for p in tmp_path.rglob("*")}
    check(tmp_path, path, reports=reports)
    capsys.readouterr()
    created = {p for p in tmp_path.rglob("*")} - before
    assert created, "the run wrote nothing"
    for p in created:
        assert p == reports.parent or reports in p.parents or p == reports, p
    assert sorted(p.name for p in reports.iterdir() if p.is_file()) == sorted(REPORT_FILES)
    plots = list((reports / "plots").iterdir())
    assert plots and all(p.suffix == ".svg" and not p.name.startswith(".") for p in plots)


def test_circuit_file_named_like_a_path_stays_inside(tmp_path, capsys):
    """A circuit file whose own name has dots and no title is reported inside the folder."""
    sub = tmp_path / "x"
    sub.mkdir()
    path = hostile(sub, "", name="..weird..name.toml")
    text = path.read_text(encoding="utf-8").replace('title = ""\n', "")
    path.write_text(text, encoding="utf-8")
    reports = tmp_path / "reports"
    check(tmp_path, path, reports=reports)
    capsys.readouterr()
    assert all(reports in p.parents for p in (reports / "plots").iterdir())


def _previous(reports: Path) -> dict[str, str]:
    reports.mkdir(parents=True, exist_ok=True)
    old = {name: f"previous {name}\n" for name in REPORT_FILES}
    for name, text in old.items():
        (reports / name).write_text(text, encoding="utf-8")
    return old


def _whole(reports: Path, old: dict[str, str]) -> int:
    """Assert each report file is the previous one or complete; return how many are new."""
    new = 0
    for name in REPORT_FILES:
        text = (reports / name).read_text(encoding="utf-8")
        if text == old[name]:
            continue
        new += 1
        if name == "results.json":
            json.loads(text)
        elif name.endswith(".xml"):
            ET.fromstring(text)
        elif name.endswith(".html"):
            assert text.rstrip().endswith("</html>")
    return new


def test_write_interrupted_in_process_leaves_the_old_set(tmp_path, monkeypatch, capsys):
    """Ctrl-C at the rename of summary.csv into place: the swap is undone, so every report is
    the previous one (the set is all old), the one documented line, nothing temporary left."""
    from harness.report import reportset
    reports = tmp_path / "reports"
    old = _previous(reports)
    path = hostile(tmp_path, "plain")
    real, raised = os.replace, []

    def replace(src, dst):
        if Path(dst).name == "summary.csv" and Path(dst).parent == reports and not raised:
            raised.append(dst)
            raise KeyboardInterrupt
        real(src, dst)

    monkeypatch.setattr(reportset.os, "replace", replace)
    code = main(["check", str(path), "--report-dir", str(reports), "--closed-form-only"])
    out, err = capsys.readouterr()
    assert code == 130 and "stopped by SIGINT" in err and "reports not written" in err
    assert _whole(reports, old) == 0
    assert sorted(p.name for p in reports.iterdir()) == sorted(old)


#: the command line killed at the KILL_AT-th file the report set writes (its mode is set right
#: after its bytes are written, before the set is synced and swapped)
_KILL_SCRIPT = textwrap.dedent("""
    import os, signal, sys
    calls = [0]
    real = os.chmod
    def chmod(path, mode, **kwargs):
        calls[0] += 1
        if calls[0] == int(os.environ["KILL_AT"]):
            os.kill(os.getpid(), signal.SIGKILL)
        real(path, mode, **kwargs)
    os.chmod = chmod
    from harness.cli import main
    sys.exit(main(sys.argv[1:]))
    """)


@pytest.mark.parametrize("kill_at", [3, 5])
def test_killed_while_writing_leaves_whole_files(tmp_path, kill_at):
    """SIGKILL between writing and renaming a report file: every report is old or complete."""
    reports = tmp_path / "reports"
    old = _previous(reports)
    path = hostile(tmp_path, "plain")
    env = dict(os.environ, KILL_AT=str(kill_at), PYTHONPATH=str(ROOT))
    proc = subprocess.run([sys.executable, "-c", _KILL_SCRIPT, "check", str(path),
                           "--report-dir", str(reports), "--closed-form-only"],
                          env=env, capture_output=True, text=True, timeout=120)
    assert proc.returncode == -signal.SIGKILL
    _whole(reports, old)
    # files written after the kill point cannot exist: at least the last ones stay old
    assert (reports / REPORT_FILES[-1]).read_text(encoding="utf-8") == old[REPORT_FILES[-1]]
