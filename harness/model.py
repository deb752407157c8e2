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
from types import MappingProxyType
from typing import Mapping

from .fieldspec import FIELD_SPECS

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
OPAMP = "opamp"
#: the op-amp's gain-bandwidth product field (Hz): its single pole (``KindSpec.field_help``)
GBW = "gbw"

#: branch types of a part kind (``KindSpec.branch``): it fixes its voltage and carries any
#: current; it fixes its current; it relates the two by a resistance; it stores charge (its
#: voltage is a state); it stores flux (its current is a state); it is voltage-type, open or
#: resistive according to its switch state
VOLTAGE_TYPE, CURRENT_TYPE, RESISTIVE = "voltage-type", "current-type", "resistive"
CAPACITIVE, INDUCTIVE, SWITCHED = "capacitive", "inductive", "switched"
#: what a controlled part senses (``KindSpec.control``): the voltage v(cp) − v(cn) of a node
#: pair given in ``control = ["cp", "cn"]``, or the current of the part named in ``control``
VOLTAGE_PAIR, SENSED_CURRENT = "voltage-pair", "sensed-current"


@dataclass(frozen=True)
class KindSpec:
    """Everything the program asks of a part kind, declared once (``KIND_SPECS``).

    The reader, the reference, the graph checks and both engines ask these questions instead of
    listing kinds; each engine keeps its own stamp per kind, keyed by ``name``.  Every kind has
    the terminals p and n (``nodes``); a ``VOLTAGE_PAIR`` control adds the sensing nodes cp and
    cn (``control``), so a four-terminal part (an amplifier: output p, n; inputs cp, cn) is a
    voltage-type kind with a voltage-pair control.

    Attributes:
        name: the kind as written in a file (``kind = "resistor"``).
        help: what it is, in a sentence (the file-format reference is written from it).
        noun: the kind in prose (``voltage-controlled voltage source``).
        fields: the fields it takes beside ``kind`` and ``nodes``, in reference order.
        units: quantity field -> its dimension in ``units.UNITS`` terms (``value`` of a
            controlled source is a synonym of ``gain`` and has the gain's unit).
        required: the fields a file must give (``value`` also through ``gain``); an optional
            ``value``/``gain`` is read when given (``Part.value`` None otherwise).
        branch: one of the branch types above; for a switched kind the state decides.
        control: ``VOLTAGE_PAIR``, ``SENSED_CURRENT`` or None (not controlled).
        stepped: its ``steps`` change its ``value`` (an independent source's drive).
        positive: its value must be greater than zero.
        sensed: a current-controlled part may sense its current.
        dissipative: an expectation may ask for the energy it absorbs.
        field_help: what each of its fields that no other kind has means (the reference is
            written from it; shared fields are described in ``fields.FIELD_HELP``).
        positive_params: its further quantity fields (``Part.params``) that must be greater
            than zero when given.
    """

    name: str
    help: str
    noun: str
    fields: tuple[str, ...]
    units: Mapping[str, str]
    branch: str
    required: tuple[str, ...] = ("value",)
    control: str | None = None
    stepped: bool = False
    positive: bool = False
    sensed: bool = False
    dissipative: bool = False
    field_help: Mapping[str, str] = field(default_factory=dict)
    positive_params: tuple[str, ...] = ()

    @property
    def storage(self) -> bool:
        """It holds a state (a capacitor's voltage or an inductor's current)."""
        return self.branch in (CAPACITIVE, INDUCTIVE)

    @property
    def voltage_branch(self) -> bool:
        """It fixes its voltage and carries whatever current the circuit demands."""
        return self.branch == VOLTAGE_TYPE

    @property
    def current_branch(self) -> bool:
        """It fixes its current whatever the voltage across it."""
        return self.branch == CURRENT_TYPE

    @property
    def article(self) -> str:
        """``a`` or ``an`` before the kind's name."""
        return "an" if self.name[0] in "aeiou" else "a"


def _controlled(name: str, noun: str, gain: str, help: str, branch: str,
                control: str) -> KindSpec:
    """A controlled source: ``gain`` (``value`` a synonym) in ``gain`` units, and a control."""
    return KindSpec(name, help, noun, ("gain", "value", "control"),
                    {"gain": gain, "value": gain}, branch, required=("value", "control"),
                    control=control, dissipative=True)


#: the fields that vary a part's value for the sign-off over tolerances (``harness.variation``)
_SPREADS = ("spread", "tempco", "ageing")
#: every part kind, in reference order
KIND_SPECS: Mapping[str, KindSpec] = MappingProxyType({spec.name: spec for spec in (
    KindSpec(RESISTOR, "a linear resistor", "resistor", ("value",) + _SPREADS,
             {"value": "ohm"}, RESISTIVE, positive=True, sensed=True, dissipative=True),
    KindSpec(CAPACITOR, "a linear capacitor; its voltage v(p) − v(n) is a state", "capacitor",
             ("value", "initial") + _SPREADS, {"value": "F", "initial": "V"}, CAPACITIVE,
             positive=True),
    KindSpec(INDUCTOR, "a linear inductor; its current from p to n is a state", "inductor",
             ("value", "initial") + _SPREADS, {"value": "H", "initial": "A"}, INDUCTIVE,
             positive=True, sensed=True),
    KindSpec(VOLTAGE_SOURCE, "an ideal voltage source: v(p) − v(n) = value, stepped by `steps`",
             "voltage source", ("value", "steps", "repeat") + _SPREADS, {"value": "V"},
             VOLTAGE_TYPE, stepped=True, sensed=True),
    KindSpec(CURRENT_SOURCE, "an ideal current source driving `value` from p through itself "
             "to n, stepped by `steps`", "current source",
             ("value", "steps", "repeat") + _SPREADS, {"value": "A"}, CURRENT_TYPE,
             stepped=True),
    KindSpec(SWITCH, "an ideal switch (a short when closed, open when open) or, with "
             "`on-resistance` / `off-resistance`, a resistance that changes with its state",
             "switch", ("state", "steps", "repeat", "on-resistance", "off-resistance"),
             {"on-resistance": "ohm", "off-resistance": "ohm"}, SWITCHED, required=("state",),
             sensed=True, dissipative=True),
    _controlled(VCVS, "voltage-controlled voltage source", "1",
                "voltage-controlled voltage source: v(p) − v(n) = gain · (v(cp) − v(cn))",
                VOLTAGE_TYPE, VOLTAGE_PAIR),
    _controlled(VCCS, "voltage-controlled current source", "S",
                "voltage-controlled current source: current gain · (v(cp) − v(cn)) from p "
                "through itself to n", CURRENT_TYPE, VOLTAGE_PAIR),
    _controlled(CCVS, "current-controlled voltage source", "ohm",
                "current-controlled voltage source: v(p) − v(n) = gain · i(control part)",
                VOLTAGE_TYPE, SENSED_CURRENT),
    _controlled(CCCS, "current-controlled current source", "1",
                "current-controlled current source: current gain · i(control part) from p "
                "through itself to n", CURRENT_TYPE, SENSED_CURRENT),
    KindSpec(OPAMP, "an ideal operational amplifier: output p, n; inputs cp (non-inverting) "
             "and cn (inverting) held at v(cp) = v(cn), drawing no current; with `gain`, "
             "v(p) − v(n) = gain · (v(cp) − v(cn)); with `gbw`, a single-pole amplifier "
             "(one more state)", "operational amplifier",
             ("control", "gain", "value", GBW), {"gain": "1", "value": "1", GBW: "Hz"},
             VOLTAGE_TYPE, required=("control",), control=VOLTAGE_PAIR, positive=True,
             field_help={GBW: "gain-bandwidth product, the frequency where the open-loop gain "
                              "falls to 1 (\"10 MHz\"): with `gain` A0 the open-loop gain is "
                              "A0 / (1 + s·A0 / (2π·gbw)), without it the integrator "
                              "2π·gbw / s (default: no pole)"},
             positive_params=(GBW,)),
)})


def kinds_where(question) -> tuple[str, ...]:
    """The kinds whose declaration answers ``question(spec)`` truthfully, in reference order."""
    return tuple(name for name, spec in KIND_SPECS.items() if question(spec))


KINDS = tuple(KIND_SPECS)
#: independent sources (their steps change their value)
SOURCES = kinds_where(lambda s: s.stepped)
STORAGE = kinds_where(lambda s: s.storage)
VOLTAGE_CONTROLLED = kinds_where(lambda s: s.control == VOLTAGE_PAIR)
CURRENT_CONTROLLED = kinds_where(lambda s: s.control == SENSED_CURRENT)
#: every controlled source
CONTROLLED = kinds_where(lambda s: s.control is not None)
#: parts whose current a ccvs/cccs may sense
CURRENT_SENSORS = kinds_where(lambda s: s.sensed)
#: kinds that fix their voltage (voltage sources, vcvs, ccvs) / their current
VOLTAGE_BRANCHES = kinds_where(lambda s: s.voltage_branch)
CURRENT_BRANCHES = kinds_where(lambda s: s.current_branch)

#: probe kinds
NODE, BETWEEN, ACROSS, THROUGH = "node", "between", "across", "through"
PROBE_KINDS = (NODE, BETWEEN, ACROSS, THROUGH)

#: hand-value fields of an expectation, in report order: each declared once in
#: ``harness.fieldspec.FIELD_SPECS`` (unit, sign rule, comparison, label)
FIELDS = tuple(s.name for s in FIELD_SPECS if not s.signoff)
#: sign-off fields, reported only where an expectation asks for them, in report order;
#: ``peak`` and ``dominant_tau`` hand values live in ``Expectation.hand`` like the four above
SIGNOFF_FIELDS = tuple(s.name for s in FIELD_SPECS if s.signoff)
#: crossing directions
RISING, FALLING, EITHER = "rising", "falling", "either"
DIRECTIONS = (RISING, FALLING, EITHER)
#: the part kinds whose dissipated energy an expectation may ask for
DISSIPATIVE = kinds_where(lambda s: s.dissipative)


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
    #: temperature coefficient band of ``value`` in 1/K as (low, high) (100 ppm/K is
    #: (1e-4, 1e-4), ±30 ppm/K is (-3e-5, 3e-5)); None when not given
    tempco: tuple[float, float] | None = None
    #: relative ageing drift of ``value`` over life as (low, high), like ``spread``
    ageing: tuple[float, float] | None = None
    #: (field, SI value) of the further quantity fields its kind declares (``KindSpec.units``
    #: beyond value, gain, initial and the switch resistances), in declaration order
    params: tuple[tuple[str, float], ...] = ()
    #: the repeating schedule the file gave (already expanded into ``steps``), or None
    repeat: "Repeat | None" = None

    @property
    def p(self) -> str:
        return self.nodes[0]

    @property
    def n(self) -> str:
        return self.nodes[1]

    def param(self, name: str) -> float | None:
        """The further quantity field ``name`` (``params``), or None where the file left it
        out."""
        return dict(self.params).get(name)

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
            ``dominant_tau`` (the first-order estimate of a higher-order probe, s) and the
            ring fields: ``ring_frequency`` (damped frequency f_d of the slowest visible
            complex pair, Hz), ``damping`` (its zeta), ``q`` (1/(2 zeta)), ``overshoot`` (how far
            the response passes its final value, a fraction of the step); the periodic
            steady-state fields ``minimum``, ``maximum``, ``average``, ``ripple`` (probe's unit)
            and ``settle_periods`` (a count), where ``at`` plays no part.
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
    #: the band of ``settle_periods`` as a fraction of the first period's deviation, or None
    #: for ``tolerances.SETTLE_FRACTION``
    settle_within: float | None = None

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
SPEC_FIELDS = tuple(s.name for s in FIELD_SPECS if s.spec)
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
        temperature: the operating range (min, max) in °C the parts' ``tempco`` spans, or
            None; tempcos are referred to ``REFERENCE_TEMPERATURE``.
    """

    methods: tuple[str, ...] = METHODS
    samples: int = 2000
    seed: int = 1
    distribution: str = UNIFORM
    sigmas: float = 3.0
    temperature: tuple[float, float] | None = None


#: °C; the temperature at which a part's value and tolerance hold (data-sheet convention,
#: common practice)
REFERENCE_TEMPERATURE = 25.0


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

    def event_index(self, at: float) -> int:
        """Index k of the event nearest ``at`` s in ``events`` (the reader makes every
        expectation's ``at`` one of them)."""
        return min(range(len(self.events)), key=lambda k: abs(self.events[k] - at))

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
