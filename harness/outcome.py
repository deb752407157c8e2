"""Verdicts: the results of comparing hand values with both engines, and their JSON form.

The comparator builds these; the console table, the report writers and ``--json`` read them.
All values are SI base-unit floats or None.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

PASS = "pass"
MISMATCH = "mismatch"
ENGINES_DISAGREE = "engines-disagree"
ERROR = "error"
#: worst last: the overall verdict of several is the worst of them
VERDICT_ORDER = (PASS, MISMATCH, ENGINES_DISAGREE, ERROR)


def worst(verdicts) -> str:
    """The worst of the given verdicts (``pass`` for none)."""
    rank = max((VERDICT_ORDER.index(v) for v in verdicts), default=0)
    return VERDICT_ORDER[rank]


@dataclass(frozen=True)
class FieldResult:
    """One field (before, after, final, tau …) of one check.

    ``verdict`` is ``pass`` when no hand value is given and the engines agree.  ``message`` says
    what the engineer should look at when it is not ``pass``.
    """

    name: str
    hand: float | None
    closed_form: float | None
    numeric: float | None
    verdict: str
    unit: str = ""
    message: str = ""
    formula: str = ""
    tolerance: float | None = None
    extra: Mapping[str, Any] = field(default_factory=dict)

    def to_json(self) -> dict[str, Any]:
        out: dict[str, Any] = {"hand": self.hand, "closed_form": self.closed_form,
                               "numeric": self.numeric, "verdict": self.verdict}
        if self.message:
            out["message"] = self.message
        if self.formula:
            out["formula"] = self.formula
        for key, item in self.extra.items():   # sign-off details: "at", "level", "part" …
            out.setdefault(key, item)
        return out


@dataclass(frozen=True)
class Trace:
    """Waveforms of one check's interval for plotting, all shape (n,) on their own time axes (s)."""

    unit: str
    numeric_t: np.ndarray
    numeric_x: np.ndarray
    closed_t: np.ndarray
    closed_x: np.ndarray
    hand_t: np.ndarray | None = None
    hand_x: np.ndarray | None = None
    event: float = 0.0
    before: float | None = None
    after: float | None = None
    deviation: float | None = None  # largest |numeric - closed| relative to the swing
    #: sign-off marks (label, absolute time s, value): crossing, peak
    marks: tuple[tuple[str, float, float], ...] = ()
    #: horizontal lines (label, value): a crossing level
    levels: tuple[tuple[str, float], ...] = ()
    #: the one-τ curve of the dominant (zero-value) time constant, absolute times
    estimate_t: np.ndarray | None = None
    estimate_x: np.ndarray | None = None


@dataclass(frozen=True)
class CheckResult:
    """One ``[[expect]]`` block: one probe at one event."""

    index: int
    probe: str
    at: float
    verdict: str
    fields: tuple[FieldResult, ...]
    order: int | None = None
    modes: tuple[float, ...] = ()
    messages: tuple[str, ...] = ()
    note: str = ""
    direction: str = ""   # the probe's reference direction in words
    trace: Trace | None = None
    #: for a probe that is not first order: the zero-value estimate (JSON-ready, see
    #: harness.results.DominantTau): tau, terms, modes_sum, deviation, t50, t50_estimate …
    dominant: Mapping[str, Any] | None = None

    def to_json(self) -> dict[str, Any]:
        out = {"probe": self.probe, "at": self.at, "verdict": self.verdict, "order": self.order,
               "modes": list(self.modes), "messages": list(self.messages),
               "fields": {f.name: f.to_json() for f in self.fields}}
        if self.dominant is not None:
            out["dominant_tau"] = dict(self.dominant)
        return out


@dataclass(frozen=True)
class FileResult:
    """One circuit file.  ``warnings`` holds the reader's warnings about the file first (also in
    ``input_warnings``, which the command line prints on stderr), then the engines'."""

    file: str
    title: str
    verdict: str
    checks: tuple[CheckResult, ...] = ()
    warnings: tuple[str, ...] = ()
    errors: tuple[str, ...] = ()
    cautions: tuple[str, ...] = ()
    jumps: tuple[dict, ...] = ()   # per event: time, charges, energy (JSON-ready)
    seconds: float = 0.0
    input_warnings: tuple[str, ...] = ()

    def to_json(self) -> dict[str, Any]:
        return {"file": self.file, "title": self.title, "verdict": self.verdict,
                "warnings": list(self.warnings), "errors": list(self.errors),
                "cautions": list(self.cautions), "jumps": list(self.jumps),
                "checks": [c.to_json() for c in self.checks]}


@dataclass(frozen=True)
class RunResult:
    """A whole run over files and folders."""

    files: tuple[FileResult, ...] = field(default_factory=tuple)

    @property
    def verdict(self) -> str:
        return worst(f.verdict for f in self.files)

    @property
    def exit_code(self) -> int:
        """0 all pass, 1 any mismatch or engines-disagree, 2 any file that could not be analysed."""
        if any(f.verdict == ERROR for f in self.files):
            return 2
        return 0 if self.verdict == PASS else 1

    def to_json(self) -> dict[str, Any]:
        return {"verdict": self.verdict, "files": [f.to_json() for f in self.files]}
