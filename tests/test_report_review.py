"""The reports a reviewer opens, written by `tauproof check` and read by real consumers: the
provenance, the parts as written, failures first, the verdict filter; summary.csv through pandas,
junit.xml through an XML parser, results.json as strict JSON; the page in headless Chromium."""

from __future__ import annotations

import hashlib
import json
import shutil
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from harness.report import csvout

ROOT = Path(__file__).resolve().parents[1]
PACKET = ROOT / "circuits" / "review-packet"


@pytest.fixture(scope="module")
def reports(tmp_path_factory) -> Path:
    """The review packet checked by absolute path (closed form, for speed)."""
    folder = tmp_path_factory.mktemp("reports")
    done = subprocess.run([sys.executable, "-m", "harness", "check", str(PACKET),
                           "--closed-form-only", "--report-dir", str(folder)],
                          capture_output=True, text=True, cwd=ROOT)
    assert done.returncode == 1, done.stderr
    return folder


def test_html_heads_with_provenance_and_lists_parts_as_written(reports):
    page = (reports / "report.html").read_text(encoding="utf-8")
    from harness import __version__
    assert f"tauproof {__version__}" in page and "numpy" in page and "scipy" in page
    assert "tauproof check " in page and "--closed-form-only" in page
    for path in PACKET.glob("*.toml"):
        assert hashlib.sha256(path.read_bytes()).hexdigest() in page
    commit = subprocess.run(["git", "-C", str(ROOT), "rev-parse", "HEAD"], capture_output=True,
                            text=True).stdout.strip()
    if commit:
        assert commit in page
    assert "<th>initial</th>" in page and "<th>schedule</th>" in page
    assert 'id="show-attention"' in page and 'href="#top"' in page and "@media print" in page


def test_failures_come_first_and_passes_fold(reports):
    page = (reports / "report.html").read_text(encoding="utf-8")
    sign = page.index("deliberate slip: sign convention")
    assert page.index('class="check c-mismatch"', sign) < page.index('class="passes"', sign)
    md = (reports / "report.md").read_text(encoding="utf-8")
    assert "**Parts** (as written)" in md and "SHA-256 of the file" in md


def test_machine_outputs_read_by_real_consumers(reports):
    table = csvout.read(reports / "summary.csv")
    assert str(table["formula"].dtype) == "string" and len(table) > 0
    assert table["hand"].dtype.kind == "f"
    json.loads((reports / "results.json").read_text(encoding="utf-8"),
               parse_constant=lambda c: pytest.fail(f"non-strict JSON constant {c}"))
    root = ET.parse(reports / "junit.xml").getroot()
    names = [c.get("classname") for c in root.iter("testcase")]
    assert names and not any(n.startswith(".") or "/" in n for n in names)
    assert all(n.startswith("work.") or "review-packet" in n for n in names)
    assert int(root.get("failures")) == 9   # the worst-corner reset delay included


def _browser() -> str | None:
    return next((shutil.which(n) for n in ("chromium", "chromium-browser", "google-chrome")
                 if shutil.which(n)), None)


@pytest.mark.skipif(_browser() is None, reason="no headless Chromium installed (.ci/run "
                                               "installs Debian's chromium)")
def test_the_page_renders_in_headless_chromium(reports, tmp_path):
    """Chromium loads the page under its own Content-Security-Policy and prints it to PDF."""
    pdf = tmp_path / "report.pdf"
    flags = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
             "--disable-background-networking", "--disable-component-update", "--disable-sync",
             f"--user-data-dir={tmp_path / 'profile'}"]
    dom = subprocess.run([_browser(), *flags, "--dump-dom", (reports / "report.html").as_uri()],
                         capture_output=True, text=True, timeout=120)
    assert "tauproof discrepancy report" in dom.stdout, dom.stderr[-2000:]
    assert 'id="show-failing"' in dom.stdout
    subprocess.run([_browser(), *flags, f"--print-to-pdf={pdf}", "--no-pdf-header-footer",
                    (reports / "report.html").as_uri()], capture_output=True, timeout=120)
    assert pdf.is_file() and pdf.read_bytes().startswith(b"%PDF")
