"""The report set on disk is all new or all old, never written through a link, never left
beside a full disk; the summary never claims success when the reports failed; nothing
unprintable reaches stderr or a report.  Every case runs the real command line
(``python -m harness.cli``); the read-only mount and the full disk are real (a private mount
namespace via ``unshare``), skipped with the reason where the machine does not allow one.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from tests.test_reliability_faults import rc_files

ROOT = Path(__file__).resolve().parents[1]
REPORT_FILES = ("report.html", "report.md", "summary.csv", "results.json", "junit.xml")
#: what must never reach a terminal or a report raw: C0/C1 controls but tab/newline/CR, bidi
RAW = [chr(c) for c in range(0x20) if chr(c) not in "\t\n\r"] + \
    [chr(c) for c in range(0x7f, 0xa0)] + ["\u202a", "\u202b", "\u202c", "\u202d", "\u202e",
                                          "\u2066", "\u2067", "\u2068", "\u2069"]


def cli(*args: str, cwd: Path = ROOT, prefix: list[str] | None = None):
    """(exit code, stdout, stderr) of ``python -m harness.cli args`` (after ``prefix``)."""
    proc = subprocess.run([*(prefix or []), sys.executable, "-m", "harness.cli", *args],
                          cwd=cwd, capture_output=True, timeout=180,
                          env={**os.environ, "PYTHONPATH": str(ROOT), "MPLBACKEND": "Agg"})
    return proc.returncode, proc.stdout.decode("utf-8", "replace"), \
        proc.stderr.decode("utf-8", "replace")


def previous_set(folder: Path) -> dict[str, bytes]:
    """An earlier run's report set (text files and one plot), as bytes by relative path."""
    (folder / "plots").mkdir(parents=True)
    old = {name: f"previous {name}".encode() for name in REPORT_FILES}
    old["plots/001-old-c1.png"] = b"previous plot"
    for name, data in old.items():
        (folder / name).write_bytes(data)
    return old


def contents(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*"))
            if p.is_file()}


def namespace_prefix(script: str) -> list[str]:
    """``unshare`` into a private mount namespace running ``script`` first, or a skip."""
    probe = subprocess.run(["unshare", "-rm", "sh", "-c", "mount -t tmpfs -o size=64k tmpfs "
                            "/mnt 2>/dev/null || mount -t tmpfs tmpfs /tmp"],
                           capture_output=True) if shutil.which("unshare") else None
    if probe is None or probe.returncode != 0:
        pytest.skip("this machine allows no private mount namespace (unshare -rm with a tmpfs "
                    "mount failed), so no real read-only or full file system can be made")
    return ["unshare", "-rm", "sh", "-c", f'{script} && exec "$@"', "sh"]


def test_report_md_being_a_folder_leaves_the_old_set_whole(tmp_path):
    """report.md is a directory: exit 2 naming it, and every previous report file and plot is
    unchanged, with no new plot beside them (the set is all old)."""
    reports = tmp_path / "reports"
    old = previous_set(reports)
    (reports / "report.md").unlink()
    (reports / "report.md").mkdir()
    del old["report.md"]
    files = rc_files(tmp_path, ["a", "b"])
    code, out, err = cli("check", *files, "--closed-form-only", "--report-dir", str(reports))
    assert code == 2 and "Traceback" not in err
    assert f"{reports / 'report.md'} is not a regular file" in err
    assert "exit 2" in out and "exit 0" not in out and "every check passed" not in out
    assert contents(reports) == old
    assert not [p for p in reports.iterdir() if p.name.startswith(".tauproof")]


def test_report_folder_under_a_file_does_not_claim_success(tmp_path):
    """An unwritable report folder (under a regular file): exit 2, the folder named on stderr,
    and the summary line says exit 2 and why, never "exit 0: every check passed"."""
    files = rc_files(tmp_path, ["a"])
    blocker = tmp_path / "file"
    blocker.write_text("x")
    code, out, err = cli("check", *files, "--closed-form-only", "--report-dir",
                         str(blocker / "reports"))
    assert code == 2
    assert str(blocker / "reports") in err
    summary = [line for line in out.splitlines() if "exit" in line][-1]
    assert "exit 2: could not write the reports" in summary and "every check passed" not in out


def test_read_only_report_folder(tmp_path):
    """A report folder on a read-only mount: exit 2 naming it, previous reports unchanged, the
    summary does not say exit 0, and --json's document carries the error."""
    reports = tmp_path / "reports"
    old = previous_set(reports)
    files = rc_files(tmp_path, ["a"])
    prefix = namespace_prefix(f"mount --bind {reports} {reports} && "
                              f"mount -o remount,bind,ro {reports}")
    code, out, err = cli("check", *files, "--closed-form-only", "--report-dir", str(reports),
                         prefix=prefix)
    assert code == 2 and str(reports) in err and "Traceback" not in err
    assert "exit 0" not in out and "exit 2" in out
    code, out, err = cli("check", *files, "--json", "--closed-form-only", "--report-dir",
                         str(reports), prefix=prefix)
    document = json.loads(out)
    assert code == 2 and document["verdict"] == "error" and str(reports) in document["errors"][0]
    assert contents(reports) == old


def test_full_disk_leaves_the_old_set_and_no_new_plots(tmp_path):
    """A 200 kB file system that the new plots fill part-way: exit 2, the previous set whole,
    no new plot beside it and nothing of the attempt left taking the space."""
    disk = tmp_path / "disk"
    disk.mkdir()
    prefix = namespace_prefix(f"mount -t tmpfs -o size=200k tmpfs {disk} && "
                              f"mkdir {disk}/reports && "
                              f"cp -r {tmp_path}/seed/. {disk}/reports/")
    old = previous_set(tmp_path / "seed")
    files = rc_files(tmp_path, [f"f{i}" for i in range(12)])
    listing = tmp_path / "after.txt"
    script = prefix[:-2] + [prefix[-2].replace('exec "$@"', f'"$@"; code=$?; cd {disk}/reports '
                                               f'&& find . -type f | sort > {listing} && '
                                               f'cat results.json plots/001-old-c1.png > '
                                               f'{tmp_path}/kept.txt; exit $code'), "sh"]
    code, out, err = cli("check", *files, "--closed-form-only", "--report-dir",
                         str(disk / "reports"), prefix=script)
    assert code == 2 and "Traceback" not in err, err
    assert "No space left on device" in err and str(disk / "reports") in err
    found = listing.read_text().split()
    assert sorted(found) == sorted(f"./{name}" for name in old)
    assert (tmp_path / "kept.txt").read_bytes() == old["results.json"] + old["plots/001-old-c1.png"]


def test_plots_link_is_never_followed(tmp_path):
    """``plots`` in the report folder is a symbolic link to another folder holding a file named
    like one of our plots: exit 2 naming the link, nothing written or deleted in its target."""
    reports, target = tmp_path / "reports", tmp_path / "elsewhere"
    reports.mkdir()
    target.mkdir()
    (target / "001-a-c1.png").write_bytes(b"not ours")
    (target / "002-b-c1.png").write_bytes(b"not ours either")
    (reports / "plots").symlink_to(target)
    files = rc_files(tmp_path, ["a"])
    code, out, err = cli("check", *files, "--closed-form-only", "--report-dir", str(reports))
    assert code == 2 and f"{reports / 'plots'} is a symbolic link" in err
    assert contents(target) == {"001-a-c1.png": b"not ours", "002-b-c1.png": b"not ours either"}
    assert sorted(p.name for p in reports.iterdir()) == ["plots"]


def test_control_and_bidi_characters_never_reach_stderr_or_a_report(tmp_path):
    """A file named with ESC ]0;…BEL ESC [2J, a title with U+202E and a part name with U+009B:
    stdout, stderr and every report file show them as escapes."""
    name = "x\x1b]0;owned\x07\x1b[2J.toml"
    path = tmp_path / name
    path.write_text(
        'title = "evil \u202e txt \x9b1m"\n[parts]\n'
        'V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", '
        'steps = [["0 s", "5 V"]] }\n'
        '"R\x9b1" = { kind = "resistor", nodes = ["in", "out"], value = "1k" }\n'
        '"C\u202e1" = { kind = "capacitor", nodes = ["out", "gnd"], value = "1u" }\n'
        '[[expect]]\nthrough = "R\x9b1"\nfinal = "1 A"\ntau = "2 ms"\n'
        'note = "bell \\u0007 here"\n', encoding="utf-8")
    reports = tmp_path / "reports"
    for args in (["check", "--report-dir", str(reports)], ["solve"],
                 ["check", "--json", "--no-report"]):
        code, out, err = cli(*args, str(path), "--closed-form-only")
        assert code == 1, err
        for text in (out, err):
            assert not [c for c in RAW if c in text], (args, text)
        if "--json" not in args:
            assert "\\x1b]0;owned\\x07" in out + err
    for report in REPORT_FILES:
        text = (reports / report).read_text(encoding="utf-8")
        assert not [c for c in RAW if c in text], report
        assert "\\u202e" in text or report == "results.json", report
