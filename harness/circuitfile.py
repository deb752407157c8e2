"""Circuit files (TOML, DESIGN.md "Circuit file format") to the immutable ``model.Circuit``.

``read_circuit`` reads a file, ``parse_circuit`` a text; both validate everything they read and
end with ``topology.check``, so a returned circuit is well-posed.  Every failure is an
``InputError`` (or a subclass) carrying the file, the part (or ``expect #N`` / ``settings``), the
field and, where it can be found, the line.  Parts are read by ``harness.fields``; line numbers
come from ``harness.filelines``.
"""

from __future__ import annotations

import math
import os
import re
import tomllib
from dataclasses import dataclass, replace
from pathlib import Path

from . import model as m
from . import topology
from .errors import InputError, UnitError
from .fields import parse_parts
from .fieldspec import FIELD_SPECS, NONNEGATIVE, POSITIVE
from .filelines import Locator, Where, expect_label, name_problem, quoted_list, suggest
from .repeat import periodic_window
from .units import check_magnitude, format_si, has_suffix
from .variation.declare import check_drifts, read_spec, read_spread, read_variation

#: upper limits a user can rely on (past them: an input error, not a hang)
MAX_FILE_BYTES = 1_000_000
MAX_EXPECTATIONS = 2000
MAX_TEXT = 2000
#: distinct event times over all schedules (the numerical engine takes ~0.13 s per event)
MAX_EVENTS = 2500

TOP_LEVEL = ("title", "ground", "settings", "variation", "parts", "expect")
SETTINGS = ("tolerance", "acknowledge")
PROBE_KEYS = (m.NODE, m.BETWEEN, m.ACROSS, m.THROUGH)
#: sign-off keys of an [[expect]] block: file key -> field name (``fieldspec.FIELD_SPECS``)
SIGNOFF_KEYS = {spec.key: spec.name for spec in FIELD_SPECS if spec.signoff}
#: words a user may write for what an [[expect]] block probes, and the probe key meant: a
#: spelling match cannot know that ``part = "L1"`` means the current through L1
PROBE_WORDS = {"part": m.THROUGH, "current": m.THROUGH, "branch": m.THROUGH,
               "component": m.THROUGH, "element": m.THROUGH, "voltage": m.NODE, "net": m.NODE,
               "pin": m.NODE, "differential": m.BETWEEN, "pair": m.BETWEEN}
EXPECT_KEYS = PROBE_KEYS + ("at",) + tuple(spec.key for spec in FIELD_SPECS) + (
    "settle-within", "spec", "tolerance", "note")
CROSSING_KEYS = ("level", "time", "direction", "level-spread")
ENERGY_KEYS = ("part", "value", "until")
#: a tolerance given as a bare fraction above this gets a warning (0.5 is 50 %, seldom meant)
BARE_TOLERANCE_WARNING = 0.2
#: an ``at`` matches an event within this relative amount plus ``EVENT_ABS`` seconds
EVENT_REL, EVENT_ABS = 1e-12, 1e-15

#: what each key means, for the file-format reference (harness/reference.py writes it from these)
TOP_LEVEL_HELP = {
    "title": "text naming the circuit in the reports (default: the file name)",
    "ground": "the reference node's name (default \"gnd\"); it must be a terminal of a part",
    "settings": "a table of file-wide settings (below)",
    "variation": "how spec limits are judged over the parts' spreads (below)",
    "parts": "a table of name = { kind = …, nodes = [p, n], … } (below)",
    "expect": "[[expect]] blocks: the hand values to check (below)",
}
SETTINGS_HELP = {
    "tolerance": "relative tolerance for hand against computed values: \"1 %\" or 0.01 "
                 "(default 1 %, or the project's `tolerance`); a bare number above 0.2 warns",
    "acknowledge": "list of node and part names whose findings (an open node, an interrupted "
                   "coil current, unbounded growth) the file accepts: reported, not failed",
}
EXPECT_HELP = {
    m.NODE: ("", "probe: the voltage of this node against ground"),
    m.BETWEEN: ("", "probe: [\"a\", \"b\"], the voltage v(a) − v(b)"),
    m.ACROSS: ("", "probe: a part's voltage v(p) − v(n)"),
    m.THROUGH: ("", "probe: a part's current from p through it to n"),
    "at": ("s", "the event: t = 0 (default) or the time of a step of any source or switch"),
    **{spec.key: (spec.help_unit, spec.help) for spec in FIELD_SPECS},
    "settle-within": ("", "the band of settle-periods, a fraction of the first period's "
                          "deviation (default 1 %)"),
    "spec": ("", "{ field = { min = …, max = …, hand-min = …, hand-max = … } }: spec limits "
                 "judged over every part's `spread` (see [variation]) for "
                 + ", ".join(spec.key + spec.limited for spec in FIELD_SPECS if spec.spec)
                 + "; hand-min/hand-max are the engineer's worst case, compared with the "
                   "computed extremes"),
    "tolerance": ("", "this block's own relative tolerance (as in [settings])"),
    "note": ("", "free text shown in the reports"),
}

_QUOTED = re.compile(r'"(?:[^"\\\n]|\\.)*"|\'[^\'\n]*\'')
_BARE_VALUE = re.compile(r"([=\[,])[ \t]*([+-]?[0-9.][^,}\]\[#=\"']*?)[ \t]*(?=[,}\]#]|$)")
_KEY_BEFORE = re.compile(r"([A-Za-z0-9_-]+)[ \t]*=")
_TOML_WHERE = re.compile(r"\s*\((?:at line (\d+), column (\d+)|at end of document)\)\s*$")


def read_circuit(path: str | os.PathLike, default_tolerance: float | None = None) -> m.Circuit:
    """Read, validate and check the circuit file at ``path``; ``default_tolerance`` replaces
    ``Settings.tolerance`` for a file whose ``[settings]`` give none (a project setting).

    Raises:
        InputError: the file cannot be read, is larger than ``MAX_FILE_BYTES``, is not UTF-8,
            is not TOML, or describes an invalid or ill-posed circuit (subclasses UnitError,
            TopologyError, InitialStateError say which).
    """
    source = os.fsdecode(path)
    try:
        with open(source, "rb") as handle:
            data = handle.read(MAX_FILE_BYTES + 1)
    except OSError as exc:
        raise InputError(f"cannot read the file: {exc.strerror or exc}", file=source) from None
    if len(data) > MAX_FILE_BYTES:
        raise InputError(f"the file is larger than {MAX_FILE_BYTES:,} bytes (the limit for a "
                         f"circuit file)", file=source)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data[:exc.start].count(b"\n") + 1
        raise InputError(f"the file is not UTF-8 text (byte 0x{data[exc.start]:02x} on line "
                         f"{line}); save it as UTF-8", file=source, line=line) from None
    return parse_circuit(text, source, default_tolerance)


def parse_circuit(text: str, source: str = "<memory>",
                  default_tolerance: float | None = None) -> m.Circuit:
    """Parse, validate and check circuit-file ``text``; ``source`` names it in messages.

    A missing ``title`` defaults to the file name's stem (``untitled`` for ``<memory>``).
    """
    if len(text) > MAX_FILE_BYTES:
        raise InputError(f"the text is longer than {MAX_FILE_BYTES:,} characters (the limit "
                         f"for a circuit file)", file=source)
    text = text.removeprefix("\ufeff")
    where = Where(source, Locator.scan(text))
    data = _load_toml(text, where)
    circuit = _build(data, where, default_tolerance)
    topology.check(circuit)
    ordered = sorted(where.warnings, key=lambda w: w.line or 0)
    return replace(circuit, warnings=tuple(str(w) for w in ordered))


def _load_toml(text: str, where: Where) -> dict:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise _toml_error(str(exc), where) from None
    except RecursionError:
        line = _deepest_line(where.locator.lines)
        part, field = _owner_labels(where.locator.owners.get(line, ())) if line else (None, None)
        raise where.error(f"arrays or tables are nested too deeply to read (on line {line})",
                          part=part, field=field, line=line) from None
    except ValueError as exc:  # an integer with more digits than Python converts
        raise where.error(f"a number in the file cannot be read: {exc}") from None


def _deepest_line(lines: list[str]) -> int:
    """1-based line holding the most opening brackets and braces (where nesting runs deep)."""
    counts = [line.count("[") + line.count("{") for line in lines] or [0]
    return counts.index(max(counts)) + 1


def _toml_error(message: str, where: Where) -> InputError:
    """A TOML syntax error as an InputError with the line, and duplicate keys spelled out."""
    loc = where.locator
    found = _TOML_WHERE.search(message)
    body = message[:found.start()] if found else message
    line = None
    if found:
        line = int(found.group(1)) if found.group(1) else max(len(loc.lines), 1)
    if body.startswith(("Cannot overwrite", "Cannot declare")) and loc.duplicates:
        dups = [d for d in loc.duplicates if d[2] == line] or loc.duplicates[-1:]
        return _duplicate_error(dups[0], where)
    owner = loc.owners.get(line, ()) if line else ()
    part, field = _owner_labels(owner)
    dup = re.match(r"Duplicate inline table key '(.*)'", body)
    if dup:
        return where.error(f"field {dup.group(1)!r} is given twice on line {line}; give each "
                           f"field once", part=part, field=dup.group(1), line=line)
    shown = loc.text_of(line)
    bare = _unquoted_quantity(shown)
    if bare is not None:
        key, token, listed = bare
        what, quoted = (f"{key}: {token}", f'"{token}"') if listed else \
            (f"{key} = {token}", f'{key} = "{token}"')
        return where.error(f"{what} on line {line} is not quoted: TOML reads only plain numbers "
                           f"without quotes, so quote values with units or prefixes, e.g. "
                           f"{quoted}", part=part, field=key, line=line)
    at = f" on line {line}" if line else ""
    return where.error(f"not valid TOML: {body}{at}" + (f": {shown}" if shown else ""),
                       part=part, field=field, line=line)


def _unquoted_quantity(line: str) -> tuple[str, str, bool] | None:
    """(key, text, in an array) of the first unquoted quantity text on ``line`` (a number with a
    prefix or unit that is not a TOML number: ``value = 100k``, ``steps = [["1 ms", 5 V]]``)."""
    plain = _QUOTED.sub('""', line).split("#", 1)[0]
    for found in _BARE_VALUE.finditer(plain):
        token = found.group(2)
        if has_suffix(token):
            try:
                tomllib.loads(f"x = {token}")
            except tomllib.TOMLDecodeError:
                keys = _KEY_BEFORE.findall(plain[:found.start(2)])
                return (keys[-1] if keys else "value"), token, found.group(1) != "="
    return None


def _owner_labels(path: tuple) -> tuple[str | None, str | None]:
    """(part label, field) for a key path such as ("parts", "R1", "value")."""
    if len(path) >= 2 and path[0] == "parts":
        return str(path[1]), (str(path[2]) if len(path) > 2 else None)
    if len(path) >= 2 and path[0] == "expect" and isinstance(path[1], int):
        return expect_label(path[1]), (str(path[2]) if len(path) > 2 else None)
    if len(path) >= 1 and path[0] == "settings":
        return "settings", (str(path[1]) if len(path) > 1 else None)
    return None, (str(path[0]) if path else None)


def _duplicate_error(dup: tuple, where: Where) -> InputError:
    path, first, again = dup
    part, field = _owner_labels(path)
    if path[:1] == ("parts",) and len(path) == 2:
        text = (f"part name {path[1]!r} is used twice (lines {first} and {again}); every part "
                f"needs its own name")
    elif field is not None:
        text = f"{field!r} is given twice (lines {first} and {again}); give it once"
    else:
        text = f"[{'.'.join(map(str, path))}] appears twice (lines {first} and {again})"
    return where.error(text, part=part, field=field, line=again)


def _build(data: dict, where: Where, default_tolerance: float | None = None) -> m.Circuit:
    for key in data:
        if key not in TOP_LEVEL:
            hint = suggest(key, TOP_LEVEL) or f"; the top level takes {quoted_list(TOP_LEVEL)}"
            raise where.error(f"unknown top-level key {key!r}{hint}", path=(key,), field=key)
    title = data.get("title", _default_title(where.source))
    problem = _text_problem(title, "title")
    if problem:
        raise where.error(problem, path=("title",), field="title")
    ground = data.get("ground", "gnd")
    problem = name_problem(ground, "ground node name")
    if problem:
        raise where.error(problem, path=("ground",), field="ground")
    if "parts" not in data:
        raise where.error("the file has no [parts] table", field="parts")
    parts = parse_parts(data["parts"], where)
    _check_event_count(parts, where)
    terminals = {node for part in parts for node in part.nodes}
    if ground not in terminals:
        raise where.error(f"the ground node {ground!r} is not a terminal of any part"
                          f"{suggest(ground, terminals)}; set ground = \"...\" to the reference "
                          f"node or connect a part to {ground!r}", path=("ground",),
                          field="ground")
    variation = read_variation(data["variation"], where) if "variation" in data \
        else m.Variation()
    check_drifts(parts, variation, where)
    circuit = m.Circuit(title=title, parts=parts, ground=ground,
                        settings=_settings(data.get("settings", {}), where, default_tolerance),
                        source=where.source, variation=variation,
                        periodic=periodic_window(parts, where))
    return replace(circuit, expectations=_expectations(data.get("expect", []), circuit, where))


def _check_event_count(parts: tuple[m.Part, ...], where: Where) -> None:
    """At most ``MAX_EVENTS`` distinct step times over all schedules (t = 0 counted)."""
    times = {0.0}.union(when for part in parts for when, _ in part.steps)
    if len(times) > MAX_EVENTS:
        busiest = max(parts, key=lambda p: len(p.steps))
        raise where.error(f"the schedules give {len(times)} distinct event times; the limit is "
                          f"{MAX_EVENTS} per circuit (the busiest schedule is {busiest.name}'s, "
                          f"with {len(busiest.steps)} steps)", path=("parts", busiest.name,
                                                                   "steps"),
                          part=busiest.name, field="steps")


def _text_problem(value: object, what: str) -> str | None:
    if not isinstance(value, str):
        return f"{what} must be text (a quoted string), got {type(value).__name__} {value!r}"
    if len(value) > MAX_TEXT:
        return f"{what} is {len(value)} characters long; the limit is {MAX_TEXT}"
    return None


def _default_title(source: str) -> str:
    return "untitled" if source == "<memory>" else Path(source).stem


def _settings(raw: object, where: Where, default_tolerance: float | None = None) -> m.Settings:
    if not isinstance(raw, dict):
        raise where.error("[settings] must be a table", path=("settings",), part="settings")
    for key in raw:
        if key not in SETTINGS:
            raise where.error(f"unknown setting {key!r}{suggest(key, SETTINGS)}; [settings] "
                              f"takes {quoted_list(SETTINGS)}", path=("settings", key),
                              part="settings", field=key)
    tolerance = m.Settings.tolerance if default_tolerance is None else default_tolerance
    if "tolerance" in raw:
        tolerance = _tolerance(raw["tolerance"], where, ("settings", "tolerance"), "settings")
    return m.Settings(tolerance=tolerance, acknowledge=_acknowledge(raw, where))


def _acknowledge(raw: dict, where: Where) -> tuple[str, ...]:
    """[settings] acknowledge: node and part names whose findings the file accepts."""
    names = raw.get("acknowledge", [])
    path = ("settings", "acknowledge")
    if not isinstance(names, list) or not all(isinstance(n, str) for n in names):
        raise where.error("acknowledge must be a list of node or part names, e.g. "
                          "acknowledge = [\"tp1\", \"S1\"]", path=path, part="settings",
                          field="acknowledge")
    return tuple(names)


def _tolerance(raw: object, where: Where, path: tuple, part: str) -> float:
    value = where.quantity(raw, "1", path=path, part=part, field="tolerance", allow_percent=True)
    if not 0 < value < 1:
        raise where.error(f"tolerance must be between 0 and 1 (or 0 % and 100 %), got {raw!r}; "
                          f"write \"2%\" or 0.02", path=path, part=part, field="tolerance")
    if value > BARE_TOLERANCE_WARNING and not (isinstance(raw, str) and "%" in raw):
        where.warn(f"tolerance = {raw!r} without '%' means {value * 100:g} %; write "
                   f"\"{value:g} %\" or \"{value * 100:g} %\" to say which is meant", path=path,
                   part=part, field="tolerance")
    return value


def _expectations(raw: object, circuit: m.Circuit, where: Where) -> tuple[m.Expectation, ...]:
    if isinstance(raw, dict):
        raw = [raw]
    if not isinstance(raw, list):
        raise where.error("expect must be written as [[expect]] blocks", path=("expect",),
                          field="expect")
    if len(raw) > MAX_EXPECTATIONS:
        raise where.error(f"{len(raw)} [[expect]] blocks; the limit is {MAX_EXPECTATIONS}",
                          path=("expect",), field="expect")
    scope = _Scope({p.name: p.value for p in circuit.parts},
                    {p.name: m.KIND_SPECS[p.kind].units["value"] for p in circuit.parts
                     if p.value is not None})
    return tuple(_expectation(i, block, circuit, scope, where) for i, block in enumerate(raw))


@dataclass(frozen=True, eq=False)
class _Scope:
    """What a hand-value formula may name: part name -> SI value (None for a part without one),
    and -> its dimension word."""

    values: dict
    units: dict


#: what each probe key names, for the hint above
_PROBE_MEANING = {m.THROUGH: "through = \"L1\" probes the current through part L1",
                  m.NODE: "node = \"out\" probes the voltage of node out to ground",
                  m.BETWEEN: "between = [\"a\", \"b\"] probes the voltage of node a over node b"}


def _expectation(index: int, raw: object, circuit: m.Circuit, scope: _Scope,
                 where: Where) -> m.Expectation:
    label, base = expect_label(index), ("expect", index)
    if not isinstance(raw, dict):
        raise where.error("an [[expect]] block must be a table", path=base, part=label)
    for key in raw:
        if key not in EXPECT_KEYS:
            meant = PROBE_WORDS.get(str(key).lower())
            hint = (f" (did you mean '{meant}'? {_PROBE_MEANING[meant]})" if meant
                    else suggest(key, EXPECT_KEYS))
            raise where.error(f"unknown field {key!r}{hint}; an [[expect]] block takes "
                              f"{quoted_list(EXPECT_KEYS, 20)}", path=base + (key,), part=label,
                              field=key)
    probe = _probe(raw, circuit, where, index)
    at = _event(raw.get("at", 0.0), circuit, where, index)
    hand, formulas = {}, {}
    for spec in FIELD_SPECS:
        if spec.table or spec.key not in raw:
            continue
        name, key = spec.name, spec.key
        _whole_periodic(spec, raw[key], circuit, where, index)
        hand[name], text = _hand_value(raw[key], spec.unit_for(probe.dimension), scope, where,
                                       index, key, allow_percent=spec.percent)
        if spec.sign == NONNEGATIVE and not hand[name] >= 0:
            raise where.error(f"{key} must not be negative, got {raw[key]!r}",
                              path=base + (key,), part=label, field=key)
        if text is not None:
            formulas[name] = text
        if spec.sign == POSITIVE and not hand[name] > 0:
            raise where.error(f"{key} must be greater than zero, got {raw[key]!r}",
                              path=base + (key,), part=label, field=key)
    crossing = _crossing(raw["crossing"], probe, scope, where, index) \
        if "crossing" in raw else None
    energy = _energy(raw["energy"], circuit, scope, where, index) if "energy" in raw else None
    tolerance = None
    if "tolerance" in raw:
        tolerance = _tolerance(raw["tolerance"], where, base + ("tolerance",), label)
    note = raw.get("note", "")
    problem = _text_problem(note, "note")
    if problem:
        raise where.error(problem, path=base + ("note",), part=label, field="note")
    spec = {}
    if "spec" in raw:
        units = _spec_units(probe, crossing, energy)
        spec = read_spec(raw["spec"], units, where, index, label)
    within = _settle_within(raw, hand, where, index) if "settle-within" in raw else None
    return m.Expectation(index=index, probe=probe, at=at, hand=hand, formulas=formulas,
                         tolerance=tolerance, note=note, line=where.locator.line_of(base),
                         crossing=crossing, energy=energy, spec=spec, settle_within=within)


def _whole_periodic(spec, raw: object, circuit: m.Circuit, where: Where, index: int) -> None:
    """A periodic steady-state field (``FieldSpec.periodic``) needs a repeating window; a count
    (``FieldSpec.whole``) is a whole number."""
    label, key = expect_label(index), spec.key
    path = ("expect", index, key)
    if spec.periodic and circuit.periodic is None:
        raise where.error(f"{key} is a value of the periodic steady state, and no source or "
                          f"switch of this circuit has a repeat", path=path, part=label,
                          field=key)
    if spec.whole and (isinstance(raw, bool) or not isinstance(raw, int)):
        raise where.error(f"{key} is a whole number of periods, 0 or more, got {raw!r}",
                          path=path, part=label, field=key)


def _settle_within(raw: dict, hand: dict, where: Where, index: int) -> float:
    """``settle-within``: a fraction strictly between 0 and 1, beside ``settle-periods``."""
    label, path = expect_label(index), ("expect", index, "settle-within")
    if "settle_periods" not in hand:
        raise where.error("settle-within is the band of settle-periods: give settle-periods too",
                          path=path, part=label, field="settle-within")
    value = where.quantity(raw["settle-within"], "1", path=path, part=label,
                           field="settle-within", allow_percent=True)
    if not 0 < value < 1:
        raise where.error(f"settle-within must be between 0 and 1 (0 % and 100 %), got "
                          f"{raw['settle-within']!r}", path=path, part=label,
                          field="settle-within")
    return value


def _spec_units(probe: m.Probe, crossing, energy) -> dict:
    """The dimension word of each field a ``spec`` table may limit in this block (a table
    field only where the block has that table)."""
    present = {"crossing": crossing is not None, "energy": energy is not None}
    return {spec.name: spec.unit_for(probe.dimension) for spec in FIELD_SPECS
            if spec.spec and present.get(spec.name, True)}


def _subtable(raw: object, keys: tuple[str, ...], required: str, example: str, where: Where,
              index: int, name: str) -> dict:
    """An inline sign-off table checked for its keys (``required`` must be present)."""
    label, path = expect_label(index), ("expect", index, name)
    if not isinstance(raw, dict):
        raise where.error(f"{name} must be an inline table such as {example}, got {raw!r}",
                          path=path, part=label, field=name)
    for key in raw:
        if key not in keys:
            raise where.error(f"{name} has no field {key!r}{suggest(key, keys)}; it takes "
                              f"{quoted_list(keys)}", path=path, part=label, field=name)
    if required not in raw:
        raise where.error(f"{name} needs {required}: write it as {example}", path=path,
                          part=label, field=name)
    return raw


def _crossing(raw: object, probe: m.Probe, scope: _Scope, where: Where,
              index: int) -> m.Crossing:
    """``crossing = { level = "2 V", time = "69.3 ms", direction = "rising" }``; the time is
    measured from the event (``at``), the level is in the probe's unit."""
    example = 'crossing = { level = "2.0 V", time = "69.3 ms", direction = "rising" }'
    table = _subtable(raw, CROSSING_KEYS, "level", example, where, index, "crossing")
    label, path = expect_label(index), ("expect", index, "crossing")
    formulas = {}
    level, text = _hand_value(table["level"], probe.dimension, scope, where, index, "crossing")
    if text is not None:
        formulas["level"] = text
    time = None
    if "time" in table:
        time, text = _hand_value(table["time"], "s", scope, where, index, "crossing")
        if text is not None:
            formulas["time"] = text
        if time < 0:
            raise where.error(f"crossing time must not be negative (it is the time after the "
                              f"event), got {table['time']!r}", path=path, part=label,
                              field="crossing")
    direction = table.get("direction", m.EITHER)
    if direction not in m.DIRECTIONS:
        raise where.error(f"crossing direction must be {quoted_list(m.DIRECTIONS)}, got "
                          f"{direction!r}{suggest(str(direction), m.DIRECTIONS)}", path=path,
                          part=label, field="crossing")
    spread = None
    if "level-spread" in table:
        spread = read_spread(table["level-spread"], where, path + ("level-spread",), label,
                             "crossing.level-spread")
    return m.Crossing(level=level, time=time, direction=direction, formulas=formulas,
                      level_spread=spread)


def _energy(raw: object, circuit: m.Circuit, scope: _Scope, where: Where,
            index: int) -> m.EnergyCheck:
    """``energy = { part = "R1", value = "12.5 mJ", until = "5 ms" }`` for a resistor, a switch
    or a controlled source (``until`` optional)."""
    example = 'energy = { part = "R1", value = "12.5 mJ" }'
    table = _subtable(raw, ENERGY_KEYS, "part", example, where, index, "energy")
    label, path = expect_label(index), ("expect", index, "energy")
    name = table["part"]
    names = [p.name for p in circuit.parts]
    if not isinstance(name, str) or name not in names:
        raise where.error(f"energy part {name!r} is not in this circuit"
                          f"{suggest(str(name), names)}", path=path, part=label,
                          field="energy")
    kind = circuit.part(name).kind
    if kind not in m.DISSIPATIVE:
        raise where.error(f"energy part {name} is a {kind}; dissipated energy is reported for "
                          f"resistors, switches and controlled sources (stored energy of "
                          f"capacitors and inductors is in the report at every event)",
                          path=path, part=label, field="energy")
    value, text = None, None
    if "value" in table:
        value, text = _hand_value(table["value"], "J", scope, where, index, "energy")
    until = None
    if "until" in table:
        until = where.quantity(table["until"], "s", path=path + ("until",), part=label,
                               field="energy.until")
        if not until > 0:
            raise where.error(f"energy until must be a time after the event, got "
                              f"{table['until']!r}", path=path + ("until",), part=label,
                              field="energy.until")
    return m.EnergyCheck(part=name, value=value, formula=text or "", until=until)


def _probe(raw: dict, circuit: m.Circuit, where: Where, index: int) -> m.Probe:
    label, base = expect_label(index), ("expect", index)
    given = [key for key in PROBE_KEYS if key in raw]
    if len(given) != 1:
        what = "none" if not given else " and ".join(given)
        raise where.error(f"give exactly one of node = \"x\", between = [\"a\", \"b\"], "
                          f"across = \"C1\", through = \"R1\" (found {what})",
                          path=base + tuple(given[1:2]), part=label,
                          field=given[1] if len(given) > 1 else m.NODE)
    kind = given[0]
    value, path = raw[kind], base + (kind,)
    names = [p.name for p in circuit.parts]
    nodes = circuit.nodes

    def fail(message: str):
        return where.error(message, path=path, part=label, field=kind)

    if kind == m.BETWEEN:
        if not (isinstance(value, list) and len(value) == 2
                and all(isinstance(v, str) for v in value)):
            raise fail(f"between must be two node names [\"a\", \"b\"], got {value!r}")
        if value[0] == value[1]:
            raise fail(f"between names node {value[0]!r} twice; the voltage would always be 0")
        targets = tuple(value)
    else:
        if not isinstance(value, str):
            raise fail(f"{kind} must be a {'node' if kind == m.NODE else 'part'} name, got "
                       f"{value!r}")
        targets = (value,)
    pool, noun = (nodes, "node") if kind in (m.NODE, m.BETWEEN) else (names, "part")
    for target in targets:
        if target not in pool:
            raise fail(f"{noun} {target!r} is not in this circuit{suggest(target, pool)}; "
                       f"its {noun}s are {quoted_list(pool)}")
    return m.Probe(kind, targets)


def _event(raw: object, circuit: m.Circuit, where: Where, index: int) -> float:
    label, path = expect_label(index), ("expect", index, "at")
    at = where.quantity(raw, "s", path=path, part=label, field="at")
    for event in circuit.events:
        if abs(at - event) <= EVENT_REL * abs(event) + EVENT_ABS:
            return event
    shown = ", ".join(format_si(e, "s") for e in circuit.events[:12])
    more = ", …" if len(circuit.events) > 12 else ""
    raise where.error(f"at = {raw!r} is not an event of this circuit; the events (t = 0 and "
                      f"every step of a source or switch) are {shown}{more}", path=path,
                      part=label, field="at")


def _hand_value(raw: object, dimension: str, scope: _Scope, where: Where, index: int,
                name: str, allow_percent: bool = False) -> tuple[float, str | None]:
    """(value in SI, formula text or None) for one hand field."""
    label, path = expect_label(index), ("expect", index, name)
    if not (isinstance(raw, str) and raw.lstrip().startswith("=")):
        return where.quantity(raw, dimension, path=path, part=label, field=name,
                              allow_percent=allow_percent), None
    try:
        from . import formula
    except ImportError as exc:
        raise where.error(f"formulas cannot be evaluated here ({exc})", path=path, part=label,
                          field=name) from None
    try:
        value = formula.evaluate(raw, scope.values, dimension, scope.units)
    except InputError as exc:
        err = exc.located(file=where.source, part=label, field=name)
        err.line = where.locator.line_of(path)
        raise err from None
    if isinstance(value, bool) or not isinstance(value, (int, float)) \
            or not math.isfinite(value):
        raise where.error(f"formula {raw!r} did not give a finite number", path=path,
                          part=label, field=name, cls=UnitError)
    try:
        check_magnitude(float(value), dimension, f"{raw.strip()} = {float(value):g}")
    except InputError as exc:
        raise where.error(exc.message, path=path, part=label, field=name, cls=UnitError) from None
    return float(value), raw.strip()
