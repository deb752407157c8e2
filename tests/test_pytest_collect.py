"""pytest collects circuit files through the plugin entry point, in a subprocess as a user runs it.

The expected counts come from the circuit files themselves: every [[expect]] block of the
library passes, and the review packet's deliberate slips fail exactly the blocks
circuits/README.md lists (8 of its 11 blocks).
"""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
import textwrap
import tomllib
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
#: the review packet's failing blocks (circuits/README.md, "Review packet"), the worst-corner
#: reset delay included
REVIEW_FAILING = 9


def _blocks(folder: Path) -> int:
    return sum(len(tomllib.loads(p.read_text(encoding="utf-8")).get("expect", []))
               for p in folder.rglob("*.toml"))


@pytest.fixture(scope="module")
def project(tmp_path_factory) -> Path:
    """A user's project: the bundled circuits and [tool.tauproof] (closed form, for speed)."""
    top = tmp_path_factory.mktemp("project")
    for name in ("library", "review-packet"):
        shutil.copytree(ROOT / "circuits" / name, top / "circuits" / name)
    (top / "pyproject.toml").write_text(textwrap.dedent("""
        [tool.tauproof]
        paths = ["circuits/library"]
        closed-form-only = true
        """), encoding="utf-8")
    return top


def _pytest(where: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:randomly", *args],
                          cwd=where, capture_output=True, text=True, timeout=600)


def _counts(out: str) -> dict[str, int]:
    return {word: int(n) for n, word in re.findall(r"(\d+) (passed|failed|error|skipped)", out)}


def test_library_and_review_packet_collect_as_tests_with_xdist_and_junit(project):
    """Each block an item, each file a `file` item; the library passes, the packet fails its
    slips; runs under xdist; --junitxml names every item."""
    library, packet = project / "circuits" / "library", project / "circuits" / "review-packet"
    files = len(list(library.rglob("*.toml"))) + len(list(packet.rglob("*.toml")))
    blocks = _blocks(library) + _blocks(packet)
    done = _pytest(project, "circuits", "-n", "2", "--dist", "loadfile",
                   "--junitxml", "junit.xml")
    assert done.returncode == 1, done.stdout[-3000:] + done.stderr[-2000:]
    assert _counts(done.stdout) == {"passed": blocks + files - REVIEW_FAILING,
                                    "failed": REVIEW_FAILING}, done.stdout[-3000:]
    assert "wrong-thevenin.toml::node rst at 0 s" in done.stdout
    assert "check the\n" in done.stdout or "Thevenin resistance" in done.stdout
    cases = ET.parse(project / "junit.xml").getroot().iter("testcase")
    assert sum(1 for _ in cases) == blocks + files


def test_k_selects_one_item_and_the_diagnosis_is_the_consoles(tmp_path):
    """-k picks one block; --lf then runs only what failed before.  The project is this test's
    own: pytest's cache of failures lives in the project folder, and the module's shared
    project may have been run in another order (or not at all) by this xdist worker."""
    shutil.copytree(ROOT / "circuits" / "review-packet", tmp_path / "packet")
    (tmp_path / "pyproject.toml").write_text("[tool.tauproof]\nclosed-form-only = true\n",
                                             encoding="utf-8")
    done = _pytest(tmp_path, "packet", "-k", "wrong and rst")
    assert _counts(done.stdout) == {"failed": 1}, done.stdout
    assert "C1 sees R_th = 68.75 kΩ" in done.stdout
    assert "mismatch" in done.stdout and "Traceback" not in done.stdout
    whole = _pytest(tmp_path, "packet")
    assert _counts(whole.stdout)["failed"] == REVIEW_FAILING, whole.stdout
    assert _counts(whole.stdout)["passed"] > 0, whole.stdout
    again = _pytest(tmp_path, "packet", "--lf")   # only what failed before runs
    assert _counts(again.stdout) == {"failed": REVIEW_FAILING}, again.stdout   # none passed


def test_a_bare_run_collects_the_configured_paths(project):
    """`pytest` with no arguments collects [tool.tauproof] paths (the library: all pass)."""
    done = _pytest(project, "--collect-only")
    assert "library/logger/supervisor-reset.toml" in done.stdout
    assert "review-packet" not in done.stdout


def test_file_item_fails_on_nothing_to_check_and_on_findings(tmp_path):
    """A file without [[expect]] and a coil cut with no freewheel path fail as their file."""
    (tmp_path / "bare.toml").write_text(textwrap.dedent("""
        [parts]
        V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "5 V" }
        R1 = { kind = "resistor", nodes = ["in", "gnd"], value = "1k" }
        """), encoding="utf-8")
    (tmp_path / "cut.toml").write_text(textwrap.dedent("""
        [parts]
        V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "12 V" }
        S1 = { kind = "switch", nodes = ["in", "a"], state = "closed", steps = [["1 ms", "open"]] }
        K1 = { kind = "inductor", nodes = ["a", "gnd"], value = "10 mH", initial = "0 A" }
        R1 = { kind = "resistor", nodes = ["a", "gnd"], value = "1k" }
        [[expect]]
        through = "K1"
        at = "0 s"
        """), encoding="utf-8")
    done = _pytest(tmp_path, ".", "-p", "no:cacheprovider")
    assert "bare.toml::file FAILED" in done.stdout or "FAILED bare.toml::file" in done.stdout
    assert "nothing was checked" in done.stdout


def test_the_projects_own_run_collects_no_circuits_and_the_plugin_imports_light():
    """Test data written as TOML under testpaths stays data; importing the plugin loads no
    engine (numpy, scipy)."""
    done = _pytest(ROOT, "--collect-only", "tests/bad", "-p", "no:cacheprovider")
    assert ".toml" not in done.stdout
    probe = subprocess.run([sys.executable, "-c", "import sys, harness.pytest_plugin; "
                            "print(sorted(m for m in ('numpy', 'scipy', 'harness.runner') "
                            "if m in sys.modules))"], capture_output=True, text=True)
    assert probe.stdout.strip() == "[]", probe.stdout + probe.stderr
