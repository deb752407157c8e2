"""The bundled library: every circuit under circuits/library passes; the review packet is caught.

The library's hand values were worked out independently of both engines (first-order formulas,
charge conservation, and sympy for the second-order files; see circuits/README.md), so a pass
here is agreement between three routes. Each review-packet file holds one deliberate slip named
in its title; the check asserts the verdict and the diagnostic the report must give for it.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from harness.outcome import MISMATCH, PASS
from harness.runner import check_file

ROOT = Path(__file__).resolve().parent.parent / "circuits"
LIBRARY = sorted((ROOT / "library").rglob("*.toml"))


def test_library_is_large_enough():
    """The library holds at least 30 circuits (issue 4)."""
    assert len(LIBRARY) >= 30


@pytest.mark.parametrize("path", LIBRARY, ids=lambda p: str(p.relative_to(ROOT)))
def test_library_file_passes(path):
    """Every library circuit passes hand vs closed form vs numeric."""
    result = check_file(str(path))
    failing = [(c.probe, c.at, c.messages) for c in result.checks if c.verdict != PASS]
    assert result.verdict == PASS, (result.errors, failing)


#: file -> (field that must be flagged, words its message must contain)
SLIPS = {
    "wrong-thevenin.toml": ("tau", "Thevenin"),
    "missed-jump.toml": ("after", "jumps"),
    "trapped-charge-ignored.toml": ("final", "trapped"),
    "sign-slip.toml": ("after", "sign is reversed"),
    "tau-second-order.toml": ("tau", "not first order"),
}


@pytest.mark.parametrize("name", sorted(SLIPS))
def test_review_packet_slip_is_diagnosed(name):
    """Each deliberate slip is a mismatch whose message names the hand step that went wrong."""
    field, words = SLIPS[name]
    result = check_file(str(ROOT / "review-packet" / name))
    assert result.verdict == MISMATCH
    messages = [f.message for c in result.checks for f in c.fields
                if f.name == field and f.verdict == MISMATCH]
    assert messages and any(words in m for m in messages), messages
