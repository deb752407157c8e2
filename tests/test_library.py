"""The bundled library: every circuit under circuits/library passes; the review packet is caught.

The library's hand values were worked out independently of both engines (first-order formulas,
charge conservation, and sympy for the second-order files; see circuits/README.md), so a pass
here is agreement between three routes. Each review-packet file holds one deliberate slip named
in its title; the check asserts the verdict and the diagnostic the report must give for it.
"""

from __future__ import annotations

import math
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


def test_library_has_six_tolerance_sign_offs():
    """At least six bundled circuits carry spreads and spec limits, and every one passes its
    spec at the extremes (their verdicts are covered by test_library_file_passes)."""
    spec = [p for p in LIBRARY if "spec = {" in p.read_text()]
    assert len(spec) >= 6, spec
    for path in spec:
        spreads = check_file(str(path)).spreads
        assert spreads and all(s.low is not None and s.high is not None for s in spreads)


def test_review_packet_worst_corner_is_a_mismatch_that_passes_at_nominal():
    """The reset delay inside its 80-110 ms window at nominal (93.16 ms: τ·ln(3.3/1.3), the
    first-order formula) but outside it at the long corner: the report says so, with the
    yield."""
    limits = (80e-3, 110e-3)
    result = check_file(str(ROOT / "review-packet" / "reset-delay-worst-corner.toml"))
    assert result.verdict == MISMATCH
    (s,) = result.spreads
    assert limits[0] <= s.nominal <= limits[1]
    assert s.nominal == pytest.approx(100e-3 * math.log(3.3 / 1.3), rel=1e-6)
    # hand worst case of the long corner: 105 k · 1.2 µF · ln(3.3 / (3.3 − 2.06)), first order
    assert s.high == pytest.approx(105e3 * 1.2e-6 * math.log(3.3 / (3.3 - 2.06)), rel=1e-6)
    assert s.high > limits[1] and s.verdict == MISMATCH
    mc = s.monte_carlo
    assert any("outside the limits at an extreme" in m and
               f"{mc['count'] - mc['passed']} of {mc['count']} samples outside" in m
               for m in s.messages) and mc["yield"] < 1
