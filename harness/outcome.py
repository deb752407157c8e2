"""Verdicts: the results of comparing hand values with both engines, and their JSON form.

The comparator builds these; the console table, the report writers and ``--json`` read them.
All values are SI base-unit floats or None.  Warnings, check messages and the jumps' loops and
warnings may hold an engine's ``results.Diagnostic`` (data) beside text: the writers render it
through ``harness.messages``, so ``to_json()`` is JSON-ready only through ``report.jsonout``.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any, Mapping

if TYPE_CHECKING:  # annotations only: the command line imports this module before numpy
    import numpy as np

PASS = "pass"
MISMATCH = "mismatch"
ENGINES_DISAGREE = "engines-disagree"
ERROR = "error"
#: a file ``check`` read and solved but that holds nothing to check (no ``[[expect]]`` block)
UNCHECKED = "unchecked"
#: a file with a finding it does not acknowledge (harness.findings): an open node, an
#: interrupted coil current, unbounded growth
FINDING = "finding"
#: worst last: the overall verdict of several is the worst of them
#: a spec limit broken at an extreme of the parts' spreads but by no Monte Carlo sample
HOLDS_STATISTICALLY = "holds-statistically"
VERDICT_ORDER = (PASS, HOLDS_STATISTICALLY, UNCHECKED, MISMATCH, ENGINES_DISAGREE, FINDING, ERROR)
#: the message of an unchecked file
NOTHING_CHECKED = "no [[expect]] blocks: nothing was checked"


def worst(verdicts) -> str:
    """The worst of the given verdicts (``pass`` for none)."""
    rank = max((VERDICT_ORDER.index(v) for v in verdicts), default=0)
    return VERDICT_ORDER[rank]


# eq=False: results are never compared or hashed by value (identity is enough), and a frozen
# dataclass without eq compiles two methods fewer at import (start-up; DEVELOPERS.md)
@dataclass(frozen=True, eq=False)
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
    #: the probe's noise floor in the field's unit: engine values below it are rounding noise
    #: (the absolute floor the engines are compared with; 0 where there is none)
    floor: float = 0.0

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


@dataclass(frozen=True, eq=False)
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
    #: the next event's time (s) or None for the last interval: the curves past it show the
    #: interval continued with its sources held, which the circuit never does
    next_event: float | None = None
    #: the probe's scale (its unit): the largest magnitude it takes, as for the tolerances
    scale: float = 0.0
    #: periods of the circuit's repeating window, for a check with periodic steady-state
    #: fields (``periods_steady``): times (s), closed form and numeric values, shape (n,)
    periods_t: np.ndarray | None = None
    periods_closed: np.ndarray | None = None
    periods_numeric: np.ndarray | None = None
    #: horizontal lines over those periods (label, value): the exact steady state's minimum
    #: and maximum, and the hand ones (or the hand ripple about the steady state's middle)
    ripple_lines: tuple[tuple[str, float], ...] = ()
    #: True when those periods are the periodic steady state the fields judge (times in s
    #: from a period's start at the window's first event); False: the window's last periods
    periods_steady: bool = False


@dataclass(frozen=True, eq=False)
class ProbeSchedule:
    """One probe over the whole schedule: each interval from its event to the next (the last
    until it settles), closed form and numeric on the same absolute times (s); an event's time
    appears twice, at the end of one interval and the start of the next, so jumps are drawn."""

    probe: str
    unit: str
    t: np.ndarray
    closed_x: np.ndarray
    numeric_x: np.ndarray | None
    scale: float


@dataclass(frozen=True, eq=False)
class Schedule:
    """Every probe of a file across every event (s), for the reports' whole-schedule plot."""

    events: tuple[float, ...]
    probes: tuple[ProbeSchedule, ...]


@dataclass(frozen=True, eq=False)
class CheckResult:
    """One ``[[expect]]`` block: one probe at one event."""

    index: int
    probe: str
    at: float
    verdict: str
    fields: tuple[FieldResult, ...]
    order: int | None = None
    modes: tuple[float, ...] = ()
    #: (damped frequency Hz, damping ratio) of each visible decaying complex pair (closed form)
    rings: tuple[tuple[float, float], ...] = ()
    messages: tuple[str, ...] = ()
    note: str = ""
    direction: str = ""   # the probe's reference direction in words
    trace: Trace | None = None
    #: for a probe that is not first order: the zero-value estimate (JSON-ready, see
    #: harness.results.DominantTau): tau, terms, modes_sum, deviation, t50, t50_estimate …
    dominant: Mapping[str, Any] | None = None
    #: for a mismatching check: the hand method carried out correctly, formulas in part names
    #: then numbers (harness.derive, written by harness.report.derivation), one line each
    derivation: tuple[str, ...] = ()

    def to_json(self) -> dict[str, Any]:
        out = {"probe": self.probe, "at": self.at, "verdict": self.verdict, "order": self.order,
               "modes": list(self.modes),
               "rings": [{"frequency": f, "damping": z, "q": 1.0 / (2.0 * z)}
                         for f, z in self.rings],
               "messages": list(self.messages),
               "fields": {f.name: f.to_json() for f in self.fields}}
        if self.dominant is not None:
            out["dominant_tau"] = dict(self.dominant)
        if self.derivation:
            out["derivation"] = list(self.derivation)
        return out


@dataclass(frozen=True, eq=False)
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
    #: harness.findings.Finding.to_json() of each finding, acknowledged ones included
    findings: tuple[dict, ...] = ()
    #: what the file's verdict rests on beside its checks (``NOTHING_CHECKED``)
    messages: tuple[str, ...] = ()
    #: every probe of the file across the whole schedule, for the reports' schedule plot
    schedule: Schedule | None = None
    input_warnings: tuple[str, ...] = ()
    #: the sign-off over tolerances of each spec'd field (harness.variation.SpreadResult)
    spreads: tuple = ()

    def to_json(self) -> dict[str, Any]:
        out = {"file": self.file, "title": self.title, "verdict": self.verdict,
               "findings": list(self.findings),
               "warnings": list(self.warnings), "errors": list(self.errors),
               "cautions": list(self.cautions), "jumps": list(self.jumps),
               "checks": [c.to_json() for c in self.checks]}
        if self.messages:
            out["messages"] = list(self.messages)
        if self.spreads:
            out["spec"] = [s.to_json() for s in self.spreads]
        return out


@dataclass(frozen=True, eq=False)
class RunResult:
    """A whole run over files and folders."""

    files: tuple[FileResult, ...] = field(default_factory=tuple)
    #: what went wrong with the run itself, not with a file (the reports could not be written,
    #: a signal stopped it, the command line was wrong); each makes the verdict ``error``
    errors: tuple[str, ...] = ()

    @property
    def verdict(self) -> str:
        return ERROR if self.errors else worst(f.verdict for f in self.files)

    @property
    def exit_code(self) -> int:
        """0 all pass, 1 any mismatch, engines-disagree or unchecked file, 2 any file that could
        not be analysed or an error of the run itself."""
        if self.errors or any(f.verdict == ERROR for f in self.files):
            return 2
        return 0 if self.verdict == PASS else 1

    def to_json(self) -> dict[str, Any]:
        """``verdict``, ``files`` and, only when the run itself failed, ``errors``."""
        out: dict[str, Any] = {"verdict": self.verdict, "files": [f.to_json() for f in self.files]}
        if self.errors:
            out["errors"] = list(self.errors)
        return out


def require_checks(run: RunResult) -> RunResult:
    """``run`` with every file that was analysed but holds no ``[[expect]]`` block made
    ``unchecked`` (with ``NOTHING_CHECKED``): for ``check`` nothing checked is not a pass."""
    files = tuple(replace(f, verdict=UNCHECKED, messages=f.messages + (NOTHING_CHECKED,))
                  if not f.checks and f.verdict == PASS else f for f in run.files)
    return RunResult(files=files, errors=run.errors)
