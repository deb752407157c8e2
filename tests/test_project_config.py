"""[tool.tauproof] in pyproject.toml, --version, the help topics and the starting file, through
the `tauproof` command in a temporary project folder.

Reference value: the RC charge's τ = R·C = 10 kΩ · 1 µF = 10 ms (common practice).
"""

from __future__ import annotations

import importlib.metadata
import subprocess
import sys
from pathlib import Path

import pytest

from harness import reference
from harness.cli import main
from tests.test_cli import RC_GOOD

#: 3 % above R·C: fails at the default 1 %, passes at 5 %
RC = RC_GOOD.replace('tau = "10 ms"', 'tau = "10.3 ms"')


@pytest.fixture
def project(tmp_path, monkeypatch) -> Path:
    (tmp_path / "circuits").mkdir()
    (tmp_path / "circuits" / "rc.toml").write_text(RC, encoding="utf-8")
    (tmp_path / "work").mkdir()
    monkeypatch.chdir(tmp_path / "work")   # the settings are found by walking up
    return tmp_path


def settings(project: Path, body: str) -> None:
    (project / "pyproject.toml").write_text("[project]\nname = \"x\"\n[tool.tauproof]\n" + body,
                                            encoding="utf-8")


def test_settings_are_found_upward_and_options_override_them(project, capsys):
    settings(project, 'paths = ["circuits"]\nreport-dir = "out"\ntolerance = "5 %"\n'
                      'closed-form-only = true\njobs = 1\nshow = "all"\n')
    assert main(["check"]) == 0, capsys.readouterr()
    assert (project / "out" / "report.html").is_file()
    assert "#1 node out at 0 s" in capsys.readouterr().out          # show = "all"
    assert main(["check", "--report-dir", str(project / "cli")]) == 0
    assert (project / "cli" / "junit.xml").is_file()
    settings(project, 'paths = ["circuits"]\nclosed-form-only = true\n')
    assert main(["check", "--no-report"]) == 1                      # default 1 %: τ is 3 % off


def test_an_unknown_key_names_the_file_and_the_key(project, capsys):
    settings(project, 'paths = ["circuits"]\nreport_dir = "x"\n')
    assert main(["check"]) == 2
    err = capsys.readouterr().err
    assert str(project / "pyproject.toml") in err and "'report_dir'" in err
    assert "did you mean 'report-dir'" in err
    settings(project, 'jobs = 0\n')
    assert main(["check"]) == 2 and "'jobs'" in capsys.readouterr().err


def test_no_paths_anywhere_is_a_usage_error(project, capsys):
    assert main(["check"]) == 2
    assert "no circuit files given" in capsys.readouterr().err


def test_version_is_the_package_metadata():
    done = subprocess.run([sys.executable, "-m", "harness", "--version"], capture_output=True,
                          text=True)
    assert done.stdout.strip() == f"tauproof {importlib.metadata.version('tauproof')}"
    meta = importlib.metadata.metadata("tauproof")
    assert meta["License-Expression"] == "MIT"
    assert any(c.startswith("License ::") or c.startswith("Programming Language")
               for c in meta.get_all("Classifier"))


def test_the_committed_reference_is_what_the_declarations_give(capsys):
    """harness/reference.md is rewritten by `python -m harness.reference`; `help format`
    prints the same text; every kind and every [[expect]] field appears."""
    text = reference.format_reference()
    assert reference.REFERENCE.read_text(encoding="utf-8") == text, \
        "run `python -m harness.reference` and commit harness/reference.md"
    assert main(["help", "format"]) == 0
    assert capsys.readouterr().out == text
    from harness import circuitfile, model
    for word in model.KINDS + circuitfile.EXPECT_KEYS + circuitfile.SETTINGS:
        assert f"`{word}`" in text
    assert main(["help", "config"]) == 0
    assert "`report-dir`" in capsys.readouterr().out


def test_new_writes_a_file_that_checks_cleanly_and_is_never_overwritten(tmp_path, capsys):
    path = tmp_path / "mine.toml"
    assert main(["new", str(path)]) == 0
    assert path.read_text(encoding="utf-8").startswith("# A tauproof circuit file")
    assert main(["check", str(path), "--no-report"]) == 0, capsys.readouterr()
    out = capsys.readouterr()
    assert "warning" not in out.out + out.err
    assert main(["new", str(path)]) == 2
    assert "exists" in capsys.readouterr().err
