"""The immutable circuit model that both engines read.

Everything here is a frozen dataclass holding SI base-unit floats; nothing in it computes circuit
behaviour.  The reader (``circuitfile``) builds it, the shared checks (``topology``) inspect it,
and the two engines (``closedform`` and ``simulate``) each derive their own equations from it.

Reference directions follow the passive sign convention for every part: the part's voltage is
v(p) - v(n) and its current flows from p through the part to n.  A current source's ``value`` is
the current it drives from p through itself to n.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import Mapping

RESISTOR = "resistor"
CAPACITOR = "capacitor"
INDUCTOR = "inductor"
VOLTAGE_SOURCE = "voltage-source"
CURRENT_SOURCE = "current-source"
SWITCH = "switch"
VCVS = "vcvs"
VCCS = "vccs"
CCVS = "ccvs"
CCCS = "cccs"

KINDS = (RESISTOR, CAPACITOR, INDUCTOR, VOLTAGE_SOURCE, CURRENT_SOURCE, SWITCH, VCVS, VCCS, CCVS,
         CCCS)
#: what each kind is, in a sentence (the file-format reference is written from it)
KIND_HELP = {
    RESISTOR: "a linear resistor",
    CAPACITOR: "a linear capacitor; its voltage v(p) − v(n) is a state",
    INDUCTOR: "a linear inductor; its current from p to n is a state",
    VOLTAGE_SOURCE: "an ideal voltage source: v(p) − v(n) = value, stepped by `steps`",
    CURRENT_SOURCE: "an ideal current source driving `value` from p through itself to n, "
                    "stepped by `steps`",
    SWITCH: "an ideal switch (a short when closed, open when open) or, with `on-resistance` / "
            "`off-resistance`, a resistance that changes with its state",
    VCVS: "voltage-controlled voltage source: v(p) − v(n) = gain · (v(cp) − v(cn))",
    VCCS: "voltage-controlled current source: current gain · (v(cp) − v(cn)) from p through "
          "itself to n",
    CCVS: "current-controlled voltage source: v(p) − v(n) = gain · i(control part)",
    CCCS: "current-controlled current source: current gain · i(control part) from p through "
          "itself to n",
}
SOURCES = (VOLTAGE_SOURCE, CURRENT_SOURCE)
STORAGE = (CAPACITOR, INDUCTOR)
VOLTAGE_CONTROLLED = (VCVS, VCCS)
CURRENT_CONTROLLED = (CCVS, CCCS)
#: every controlled source
CONTROLLED = VOLTAGE_CONTROLLED + CURRENT_CONTROLLED
#: parts whose current a ccvs/cccs may sense
CURRENT_SENSORS = (VOLTAGE_SOURCE, SWITCH, INDUCTOR, RESISTOR)

#: probe kinds
NODE, BETWEEN, ACROSS, THROUGH = "node", "between", "across", "through"
PROBE_KINDS = (NODE, BETWEEN, ACROSS, THROUGH)

#: hand-value fields of an expectation, in report order
FIELDS = ("before", "after", "final", "tau")
#: sign-off fields, reported only where an expectation asks for them, in report order;
#: ``peak`` and ``dominant_tau`` hand values live in ``Expectation.hand`` like the four above
SIGNOFF_FIELDS = ("crossing", "peak", "energy", "dominant_tau", "ring_frequency", "damping",
                  "q", "overshoot")
#: hand fields that describe the probe's slowest visible complex pair (ring) and its step
#: response's overshoot (a fraction of the step), with their units
RING_FIELDS = {"ring_frequency": "Hz", "damping": "1", "q": "1", "overshoot": "1"}
#: crossing directions
RISING, FALLING, EITHER = "rising", "falling", "either"
DIRECTIONS = (RISING, FALLING, EITHER)
#: the part kinds whose dissipated energy an expectation may ask for
DISSIPATIVE = (RESISTOR, SWITCH, VCVS, VCCS, CCVS, CCCS)


@dataclass(frozen=True)
class Part:
    """One circuit element.

    Attributes:
        name: unique part name (``R1``).
        kind: one of ``KINDS``.
        nodes: (p, n) node names.
        value: ohms (resistor), farads, henries, volts/amperes before the first step (sources),
            gain (controlled sources: V/V, A/V, V/A, A/A); None for switches.
        initial: capacitor voltage or inductor current at t = 0-, or None.
        steps: (time s, new value) pairs in time order; for sources the new value in V or A, for
            switches 1.0 (closed) or 0.0 (open).
        closed: switch state before the first step (None for other kinds).
        on_resistance, off_resistance: switch resistances in ohms; None means ideal (short/open).
        control: (cp, cn) node names for vcvs/vccs; the sensed part's name for ccvs/cccs.
        line: 1-based line of the part in its file where known.
    """

    name: str
    kind: str
    nodes: tuple[str, str]
    value: float | None = None
    initial: float | None = None
    steps: tuple[tuple[float, float], ...] = ()
    closed: bool | None = None
    on_resistance: float | None = None
    off_resistance: float | None = None
    control: tuple[str, str] | str | None = None
    line: int | None = None
    #: manufacturing spread of ``value`` as relative (low, high), e.g. (-0.2, 0.8) for
    #: "-20%/+80%"; None when the part is held at its nominal value (``harness.variation``)
    spread: tuple[float, float] | None = None
    #: the repeating schedule the file gave (already expanded into ``steps``), or None
    repeat: "Repeat | None" = None

    @property
    def p(self) -> str:
        return self.nodes[0]

    @property
    def n(self) -> str:
        return self.nodes[1]

    def source_value(self, time: float) -> float:
        """Source value in force just after ``time`` (steps at ``time`` included), in V or A."""
        value = self.value if self.value is not None else 0.0
        for when, new in self.steps:
            if when <= time:
                value = new
        return value

    def source_value_before(self, time: float) -> float:
        """Source value in force just before ``time`` (steps at ``time`` excluded)."""
        value = self.value if self.value is not None else 0.0
        for when, new in self.steps:
            if when < time:
                value = new
        return value

    def is_closed(self, time: float) -> bool:
        """Switch state just after ``time`` (steps at ``time`` included)."""
        state = bool(self.closed)
        for when, new in self.steps:
            if when <= time:
                state = bool(new)
        return state

    def is_closed_before(self, time: float) -> bool:
        """Switch state just before ``time`` (steps at ``time`` excluded)."""
        state = bool(self.closed)
        for when, new in self.steps:
            if when < time:
                state = bool(new)
        return state


@dataclass(frozen=True)
class Repeat:
    """A schedule that repeats, as the file gave it (the reader expands it into ``Part.steps``).

    Attributes:
        start: s, the start of the first period.
        period: s, the length of one period (> 0).
        count: the number of periods (>= 1).
        pattern: (offset s within the period, value) pairs, offsets strictly increasing in
            [0, period); values as in ``Part.steps`` (V, A, or 1.0 closed / 0.0 open).
    """

    start: float
    period: float
    count: int
    pattern: tuple[tuple[float, float], ...]

    @property
    def end(self) -> float:
        """s: the end of the last period, start + count * period."""
        return self.start + self.count * self.period


@dataclass(frozen=True)
class Periodic:
    """The circuit's repeating window, shared by every part with a ``repeat``.

    Every repeating part has the same start, period and count, and no other step falls inside
    the window, so every period sees the same sequence of intervals.

    Attributes:
        start, period, count: as in ``Repeat`` (s, s, periods).
        offsets: the distinct event offsets (s) within a period over all repeating parts,
            sorted; the period map runs from ``first`` (start + offsets[0]) to first + period.
    """

    start: float
    period: float
    count: int
    offsets: tuple[float, ...]

    @property
    def first(self) -> float:
        """s: the first event of the window, where the one-period map starts."""
        return self.start + self.offsets[0]

    @property
    def end(self) -> float:
        """s: the end of the window, start + count * period."""
        return self.start + self.count * self.period


@dataclass(frozen=True)
class Probe:
    """What an expectation looks at.

    ``node X`` is v(X) - v(ground); ``between a b`` is v(a) - v(b); ``across P`` is v(p) - v(n) of
    part P; ``through P`` is the current of part P from p through it to n.
    """

    kind: str
    targets: tuple[str, ...]

    @property
    def label(self) -> str:
        """Canonical text: ``node rst``, ``between a b``, ``across C1``, ``through R1``."""
        return f"{self.kind} {' '.join(self.targets)}"

    @property
    def dimension(self) -> str:
        """``"A"`` for ``through`` probes, ``"V"`` otherwise."""
        return "A" if self.kind == THROUGH else "V"


@dataclass(frozen=True)
class Crossing:
    """Hand value for the first time the probe crosses ``level`` after the event.

    Attributes:
        level: the threshold in the probe's unit (V or A).
        time: the hand value of the crossing time in s, measured from the event t_k (the time
            *after the event*, as a reset delay is measured from power-on), or None when only
            the computed crossing is wanted.
        direction: "rising" (from below to above), "falling" or "either".
        formulas: sub-field ("level", "time") -> the formula text it was evaluated from.
    """

    level: float
    time: float | None = None
    direction: str = "either"  # "rising", "falling" or "either"
    formulas: Mapping[str, str] = field(default_factory=dict)
    #: relative (low, high) spread of ``level`` (a supervisor's threshold ±2 %), or None
    level_spread: tuple[float, float] | None = None


@dataclass(frozen=True)
class EnergyCheck:
    """Hand value for the energy dissipated in one part over an interval.

    Attributes:
        part: a resistor, a switch (its on-/off-resistance; an ideal switch dissipates only
            the loss of a jump whose impulse it carries) or a controlled source (the power it
            absorbs, v·i under the passive sign convention: a transconductance stage sinking
            current).
        value: the hand value in J, or None when only the computed energy is wanted.  The
            quantity is defined in ``harness.results.EnergyValue``; it may be negative (the
            transient above a steady dissipation falls when the dissipation falls).
        until: s after the event: when given, the energy is the whole dissipation from the
            event to that time (steady part included, never negative for a resistor).
        formula: the formula text ``value`` was evaluated from, or "".
    """

    part: str
    value: float | None = None
    formula: str = ""
    until: float | None = None


@dataclass(frozen=True)
class Expectation:
    """One hand calculation: one probe at one event.

    Attributes:
        index: 0-based position among the file's ``[[expect]]`` blocks.
        probe: what is observed.
        at: the event time in seconds (an element of ``Circuit.events``).
        hand: field name -> hand value in SI units (only the fields given); fields from ``FIELDS``
            and the scalar sign-off fields ``peak`` (largest magnitude, V or A),
            ``dominant_tau`` (the first-order estimate of a higher-order probe, s) and
            ``RING_FIELDS``: ``ring_frequency`` (damped frequency f_d of the slowest visible
            complex pair, Hz), ``damping`` (its zeta), ``q`` (1/(2 zeta)), ``overshoot`` (how far
            the response passes its final value, a fraction of the step).
        formulas: field name -> the formula text the value was evaluated from (``"= R1*C1"``).
        tolerance: relative tolerance for hand vs computed, or None for the file's setting.
        note: free text from the file, shown in reports.
        line: 1-based line of the block where known.
    """

    index: int
    probe: Probe
    at: float = 0.0
    hand: Mapping[str, float] = field(default_factory=dict)
    formulas: Mapping[str, str] = field(default_factory=dict)
    tolerance: float | None = None
    note: str = ""
    line: int | None = None
    crossing: Crossing | None = None
    energy: EnergyCheck | None = None
    #: field name (``SPEC_FIELDS``) -> its spec limits and hand worst case
    spec: Mapping[str, "Limits"] = field(default_factory=dict)

    @property
    def label(self) -> str:
        return f"expect #{self.index + 1}"

    def wants(self, name: str) -> bool:
        """Whether the sign-off field ``name`` (``SIGNOFF_FIELDS``) is asked for."""
        if name == "crossing":
            return self.crossing is not None
        if name == "energy":
            return self.energy is not None
        return name in self.hand


#: fields that may carry spec limits (``Expectation.spec``); ``crossing`` is the crossing time
SPEC_FIELDS = ("before", "after", "final", "tau", "crossing", "peak", "energy", "dominant_tau")
#: sign-off over tolerances: the methods a file may ask for, and the distributions
EXTREMES, RSS, MONTE_CARLO = "extremes", "rss", "monte-carlo"
METHODS = (EXTREMES, RSS, MONTE_CARLO)
UNIFORM, NORMAL = "uniform", "normal"
DISTRIBUTIONS = (UNIFORM, NORMAL)


@dataclass(frozen=True)
class Limits:
    """Spec limits of one field, and the engineer's own worst case of it (all in the field's
    unit: V, A, s or J; None where not given)."""

    min: float | None = None
    max: float | None = None
    hand_min: float | None = None
    hand_max: float | None = None


@dataclass(frozen=True)
class Variation:
    """The ``[variation]`` table: how the spec limits are judged over the parts' spreads.

    Attributes:
        methods: a subset of ``METHODS``.
        samples: Monte Carlo sample count.
        seed: the random generator's seed (runs are reproducible).
        distribution: ``uniform`` over each spread, or ``normal`` with the spread as k·σ.
        sigmas: k of the normal distribution (the spread edge is k standard deviations).
    """

    methods: tuple[str, ...] = METHODS
    samples: int = 2000
    seed: int = 1
    distribution: str = UNIFORM
    sigmas: float = 3.0


@dataclass(frozen=True)
class Settings:
    """File-wide settings.

    Attributes:
        tolerance: relative tolerance for hand vs computed values (fraction, 0.01 = 1 %).
        acknowledge: node and part names whose findings (an open node, an interrupted coil
            current, unbounded growth) the file accepts: they are reported but do not fail it.
    """

    tolerance: float = 0.01
    acknowledge: tuple[str, ...] = ()


@dataclass(frozen=True)
class Circuit:
    """A parsed, validated circuit file.

    Attributes:
        title: the file's title.
        ground: the reference node's name.
        parts: parts in file order (names unique).
        expectations: the ``[[expect]]`` blocks in file order.
        settings: file-wide settings.
        source: the path the circuit was read from (for messages), or ``"<memory>"``.
        warnings: the reader's warnings about what the file says (probable slips that still
            run, each naming file, line, part and field), in file order.
    """

    title: str
    parts: tuple[Part, ...]
    ground: str = "gnd"
    expectations: tuple[Expectation, ...] = ()
    settings: Settings = Settings()
    source: str = "<memory>"
    warnings: tuple[str, ...] = ()
    #: the ``[variation]`` table (defaults when absent)
    variation: Variation = Variation()
    #: the repeating window of the parts' ``repeat`` schedules, or None (``Periodic``)
    periodic: Periodic | None = None

    def part(self, name: str) -> Part:
        """The part called ``name`` (KeyError if there is none)."""
        return self._by_name[name]

    @cached_property
    def _by_name(self) -> dict[str, Part]:
        """Name -> part, built once (a derived index, not state: the parts never change)."""
        return {part.name: part for part in self.parts}

    @cached_property
    def nodes(self) -> tuple[str, ...]:
        """All node names, ground first, then in order of first appearance (built once)."""
        seen = {self.ground: None}
        for part in self.parts:
            for node in part.nodes:
                seen.setdefault(node, None)
            if part.kind in VOLTAGE_CONTROLLED and isinstance(part.control, tuple):
                for node in part.control:
                    seen.setdefault(node, None)
        return tuple(seen)

    @cached_property
    def events(self) -> tuple[float, ...]:
        """Event times in seconds, sorted: 0 and every step time of every source and switch
        (built once)."""
        times = {0.0}
        for part in self.parts:
            times.update(when for when, _ in part.steps)
        return tuple(sorted(times))

    def storage_parts(self) -> tuple[Part, ...]:
        return tuple(p for p in self.parts if p.kind in STORAGE)

    def largest_source(self) -> float:
        """Largest magnitude any independent source or initial condition takes (V or A).

        The scale for absolute tolerance floors; at least 1e-30 so it can divide.
        """
        mags = [abs(p.value or 0.0) for p in self.parts if p.kind in SOURCES]
        mags += [abs(v) for p in self.parts if p.kind in SOURCES for _, v in p.steps]
        mags += [abs(p.initial) for p in self.parts if p.initial is not None]
        return max(mags + [1e-30])
