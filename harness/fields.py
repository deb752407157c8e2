"""The ``[parts]`` table of a circuit file: each part's fields checked and turned into ``Part``.

Per kind (DESIGN.md, "The circuit model"): resistor, capacitor and inductor take a positive
``value`` (ohm, F, H), capacitor and inductor an optional ``initial`` (V, A); voltage and current
sources a ``value`` (V, A; the value before the first step) and optional ``steps``; switches a
``state`` ("open"/"closed"), optional ``steps`` and optional ``on-resistance`` /
``off-resistance``; controlled sources a ``gain`` (``value`` is accepted as a synonym) and a
``control``.  Every part has ``kind`` and ``nodes = [p, n]``.
"""

from __future__ import annotations

import math

from . import model as m
from .errors import InputError
from .filelines import Where, name_problem, quoted_list, suggest
from .plausible import implausible
from .repeat import merge, read_repeat
from .variation.declare import read_spread, read_tempco

#: upper limits a user can rely on (past them: an input error, not a hang); measured in
#: tests/benchmarks/RESULTS.md "Large circuits": a 2,001-part RC ladder checked with both
#: engines, crossings, peaks and the reports in ~3 s of CPU, 4,999 parts in ~15-18 s and
#: ~1.2 GB; "Reliability": 2500 steps ~1 s (closed form)
MAX_PARTS = 5000
MAX_STEPS = 2500

_COMMON = ("kind", "nodes")
#: quantity fields read into ``Part`` attributes of their own; any other quantity field a kind
#: declares (``KindSpec.units``) is read into ``Part.params``
_OWN_ATTRIBUTE = ("value", "gain", "initial", "on-resistance", "off-resistance")
#: what each field of a part means (the file-format reference is written from it)
FIELD_HELP = {
    "kind": "the part kind (below)",
    "nodes": "[\"p\", \"n\"]: the two node names it connects; its voltage is v(p) − v(n) and "
             "its current flows from p through it to n",
    "value": "its value; for a source the value before the first step; for a controlled "
             "source a synonym of `gain`",
    "initial": "the state at t = 0−: a capacitor's voltage or an inductor's current (default: "
               "the DC solution before t = 0)",
    "steps": "[[time, new value], …] in increasing time order, each time ≥ 0 s; a switch steps "
             "to \"open\" or \"closed\"",
    "repeat": "a schedule that repeats: { period = t, duty = \"30 %\", levels = [during, rest] "
              "or steps = [[offset, value], …] within the period, count = N or until = t, "
              "start = t (default 0 s) }; expanded into steps, and the periodic steady state "
              "is computed from one period",
    "state": "\"open\" or \"closed\": the switch's state before its first step",
    "on-resistance": "resistance when closed (default: an ideal short)",
    "off-resistance": "resistance when open, greater than on-resistance (default: ideal open)",
    "gain": "the gain (unit below)",
    "spread": "manufacturing tolerance of `value` for the sign-off over tolerances: \"1%\", "
              "\"-20%/+80%\" or an IEC 60062 letter (B 0.1 %, C 0.25 %, D 0.5 %, F 1 %, G 2 %, "
              "J 5 %, K 10 %, M 20 %); a source's steps spread with its value",
    "tempco": "temperature coefficient of `value`: \"100 ppm/K\", \"-3930 ppm/K\" or a band "
              "\"±30 ppm/K\"; over [variation] `temperature` it widens the spread (below)",
    "ageing": "drift of `value` over life, written like `spread` (\"0.5%\", \"-10%/+0%\"); it "
              "adds linearly to the spread",
    "control": ", ".join(m.VOLTAGE_CONTROLLED) + ": [\"cp\", \"cn\"], the nodes whose voltage "
               "v(cp) − v(cn) it senses; " + ", ".join(m.CURRENT_CONTROLLED) + ": the name of "
               "the part whose current it senses (a "
               + ", ".join(m.CURRENT_SENSORS) + ")",
}
_STATES = {"open": 0.0, "closed": 1.0}


def _a(kind: str) -> str:
    return f"{m.KIND_SPECS[kind].article} {kind}"


def parse_parts(table: object, where: Where) -> tuple[m.Part, ...]:
    """All parts of the ``[parts]`` table, in file order, with their controls checked.

    Raises:
        InputError (or UnitError): naming the part and field at fault.
    """
    if not isinstance(table, dict):
        raise where.error("[parts] must be a table of name = { kind = ..., nodes = [...] }",
                          path=("parts",), field="parts")
    if not table:
        raise where.error("the circuit has no parts; add them under [parts]", path=("parts",),
                          field="parts")
    if len(table) > MAX_PARTS:
        raise where.error(f"the circuit has {len(table)} parts; the limit is {MAX_PARTS}",
                          path=("parts",), field="parts")
    specs = {name: _kind_of(name, spec, where) for name, spec in table.items()}
    nodes = {node for spec in specs.values() for node in spec["nodes"]}
    parts = []
    for name, spec in specs.items():
        _check_control(name, spec, specs, nodes, where)
        parts.append(m.Part(line=where.locator.line_of(("parts", name)), **spec))
    return tuple(parts)


def _kind_of(name: str, spec: object, where: Where) -> dict:
    """The ``Part`` keyword arguments of one entry (control resolved later)."""
    path = ("parts", name)
    problem = name_problem(name, "part name")
    if problem:
        raise where.error(problem, path=path, part=repr(name))
    if not isinstance(spec, dict):
        raise where.error(f"part {name} must be an inline table such as "
                          f"{{ kind = \"resistor\", nodes = [\"a\", \"b\"], value = \"1k\" }}, "
                          f"got {type(spec).__name__}", path=path, part=name)
    kind, kinds = spec.get("kind"), tuple(m.KIND_SPECS)
    if kind is None:
        raise where.error(f"part {name} has no kind; give one of {quoted_list(kinds)}",
                          path=path, part=name, field="kind")
    if kind not in kinds:
        raise where.error(f"unknown kind {kind!r}{suggest(str(kind), kinds)}; the kinds are "
                          f"{quoted_list(kinds)}", path=path + ("kind",), part=name,
                          field="kind")
    declared = m.KIND_SPECS[kind]
    allowed = _COMMON + declared.fields
    for key in spec:
        if key not in allowed:
            raise where.error(_unknown_field(key, kind, allowed), path=path + (key,), part=name,
                              field=key)
    out = {"name": name, "kind": kind, "nodes": _nodes(name, spec, where)}
    if declared.branch == m.SWITCHED:
        out.update(_switch(name, spec, where))
    if "value" in declared.required or "value" in spec or "gain" in spec:
        out["value"] = _value(name, kind, spec, where)
    if "initial" in declared.fields and "initial" in spec:
        out["initial"] = where.quantity(spec["initial"], declared.units["initial"],
                                        path=path + ("initial",), part=name, field="initial")
    if declared.stepped and "steps" in spec:
        out["steps"] = _steps(name, spec["steps"], where, declared.units["value"])
    if "repeat" in spec:
        dimension = None if declared.branch == m.SWITCHED else declared.units["value"]
        out["repeat"] = read_repeat(name, spec["repeat"], where, dimension, MAX_STEPS)
        out["steps"] = merge(name, out.get("steps", ()), out["repeat"], where)
    if declared.control is not None:
        out["control"] = spec.get("control")
    if "spread" in spec:
        out["spread"] = read_spread(spec["spread"], where, path + ("spread",), name, "spread")
    if "ageing" in spec:
        out["ageing"] = read_spread(spec["ageing"], where, path + ("ageing",), name, "ageing")
    if "tempco" in spec:
        out["tempco"] = read_tempco(spec["tempco"], where, path + ("tempco",), name)
    params = tuple((key, where.quantity(spec[key], unit, path=path + (key,), part=name,
                                        field=key))
                   for key, unit in declared.units.items()
                   if key not in _OWN_ATTRIBUTE and key in spec)
    for key, value in params:
        if key in declared.positive_params and not value > 0:
            raise where.error(f"{key} must be greater than zero, got {spec[key]!r} (leave it "
                              "out for none)", path=path + (key,), part=name, field=key)
    if params:
        out["params"] = params
    return out


def _unknown_field(key: str, kind: str, allowed: tuple[str, ...]) -> str:
    owners = [k for k, declared in m.KIND_SPECS.items() if key in declared.fields]
    text = f"{_a(kind)} has no field {key!r}"
    if owners:
        text += f" (it belongs to {', '.join(owners)})"
    else:
        text += suggest(key, allowed)
    return text + f"; {_a(kind)} takes {quoted_list(allowed)}"


def _nodes(name: str, spec: dict, where: Where) -> tuple[str, str]:
    path = ("parts", name, "nodes")
    raw = spec.get("nodes")
    if raw is None:
        raise where.error("no nodes; give nodes = [\"p\", \"n\"]", path=path, part=name,
                          field="nodes")
    if not isinstance(raw, list) or len(raw) != 2:
        shown = f"{len(raw)} nodes" if isinstance(raw, list) else type(raw).__name__
        raise where.error(f"nodes must be a list of two node names [\"p\", \"n\"], got {shown}",
                          path=path, part=name, field="nodes")
    for node in raw:
        problem = name_problem(node, "node name")
        if problem:
            raise where.error(problem, path=path, part=name, field="nodes")
    if raw[0] == raw[1]:
        raise where.error(f"both terminals are on node {raw[0]!r}: a part must connect two "
                          f"different nodes", path=path, part=name, field="nodes")
    return (raw[0], raw[1])


def _value(name: str, kind: str, spec: dict, where: Where) -> float:
    declared = m.KIND_SPECS[kind]
    field_name = "value"
    if "gain" in declared.fields:
        if "gain" in spec and "value" in spec:
            raise where.error("give the gain once: 'gain' and 'value' mean the same here",
                              path=("parts", name, "value"), part=name, field="value")
        field_name = "gain" if "value" not in spec else "value"
    path = ("parts", name, field_name)
    if field_name not in spec:
        raise where.error(f"{_a(kind)} needs a {field_name}", path=path, part=name,
                          field=field_name)
    value = where.quantity(spec[field_name], declared.units[field_name], path=path, part=name,
                           field=field_name)
    if declared.positive and not value > 0:
        hint = (" (for a short use a switch with state = \"closed\")"
                if kind == m.RESISTOR and value == 0 else "")
        raise where.error(f"{_a(kind)}'s value must be greater than zero, got "
                          f"{spec[field_name]!r}{hint}", path=path, part=name, field=field_name)
    slip = implausible(kind, value)
    if slip is not None:
        where.warn(f"{name} = {_shown(spec[field_name])} {slip}", path=path, part=name,
                   field=field_name)
    return value


def _shown(raw: object) -> str:
    """A value as the file wrote it: text as is, numbers as TOML numbers."""
    return raw if isinstance(raw, str) else repr(raw)


def _switch(name: str, spec: dict, where: Where) -> dict:
    path = ("parts", name)
    state = spec.get("state")
    if state is None:
        raise where.error("a switch needs state = \"open\" or \"closed\" (its state before the "
                          "first step)", path=path + ("state",), part=name, field="state")
    if not isinstance(state, str) or state not in _STATES:
        raise where.error(f"state must be \"open\" or \"closed\", got {state!r}"
                          f"{suggest(str(state), _STATES)}", path=path + ("state",), part=name,
                          field="state")
    out: dict = {"closed": state == "closed"}
    for key, attr in (("on-resistance", "on_resistance"), ("off-resistance", "off_resistance")):
        if key in spec:
            value = where.quantity(spec[key], "ohm", path=path + (key,), part=name, field=key)
            if not value > 0:
                raise where.error(f"{key} must be greater than zero, got {spec[key]!r} (leave "
                                  f"it out for an ideal switch)", path=path + (key,), part=name,
                                  field=key)
            out[attr] = value
    on, off = out.get("on_resistance"), out.get("off_resistance")
    if on is not None and off is not None and not off > on:
        raise where.error(f"off-resistance ({spec['off-resistance']!r}) must be greater than "
                          f"on-resistance ({spec['on-resistance']!r})",
                          path=path + ("off-resistance",), part=name, field="off-resistance")
    if "steps" in spec:
        out["steps"] = _steps(name, spec["steps"], where, None)
    return out


def _steps(name: str, raw: object, where: Where, dimension: str | None) -> tuple:
    """``steps`` as ((time s, value), ...); ``dimension`` None means switch states."""
    path = ("parts", name, "steps")

    def fail(message: str):
        return where.error(message, path=path, part=name, field="steps")

    example = '[["1 ms", "closed"]]' if dimension is None else '[["1 ms", "5 V"]]'
    if not isinstance(raw, list):
        raise fail(f"steps must be a list of [time, value] pairs such as {example}")
    if len(raw) > MAX_STEPS:
        raise fail(f"{len(raw)} steps; the limit is {MAX_STEPS} per schedule")
    steps, last = [], -math.inf
    for i, item in enumerate(raw, start=1):
        if not isinstance(item, list) or len(item) != 2:
            raise fail(f"step {i} must be a [time, value] pair such as {example}, got {item!r}")
        try:
            when = where.quantity(item[0], "s", path=path, part=name, field="steps")
        except InputError as exc:
            raise fail(f"step {i}: time: {exc.message}") from None
        if when < 0:
            raise fail(f"step {i}: time {item[0]!r} is before t = 0; steps start at 0 s or later")
        if not when > last:
            raise fail(f"step {i}: time {item[0]!r} is not after the previous step; give the "
                       f"steps in strictly increasing time order")
        last = when
        if dimension is None:
            if not isinstance(item[1], str) or item[1] not in _STATES:
                raise fail(f"step {i}: a switch steps to \"open\" or \"closed\", got "
                           f"{item[1]!r}")
            value = _STATES[item[1]]
        else:
            try:
                value = where.quantity(item[1], dimension, path=path, part=name, field="steps")
            except InputError as exc:
                raise fail(f"step {i}: value: {exc.message}") from None
        steps.append((when, value))
    return tuple(steps)


def _check_control(name: str, spec: dict, specs: dict, nodes: set, where: Where) -> None:
    kind = spec["kind"]
    path = ("parts", name, "control")
    raw = spec.get("control")

    def fail(message: str):
        return where.error(message, path=path, part=name, field="control")

    control = m.KIND_SPECS[kind].control
    if control == m.VOLTAGE_PAIR:
        if not (isinstance(raw, list) and len(raw) == 2 and all(isinstance(x, str) for x in raw)):
            raise fail(f"{_a(kind)} needs control = [\"cp\", \"cn\"]: the two nodes whose "
                       f"voltage v(cp) - v(cn) it senses, got {raw!r}")
        for node in raw:
            if node not in nodes:
                raise fail(f"control node {node!r} is not a node of this circuit"
                           f"{suggest(node, nodes)}")
        if raw[0] == raw[1]:
            raise fail(f"both control nodes are {raw[0]!r}: the sensed voltage would always be 0")
        spec["control"] = (raw[0], raw[1])
    elif control == m.SENSED_CURRENT:
        if not isinstance(raw, str):
            raise fail(f"{_a(kind)} needs control = \"Vx\": the name of the part whose current "
                       f"it senses, got {raw!r}")
        if raw not in specs:
            sensors = [n for n, s in specs.items() if s["kind"] in m.CURRENT_SENSORS]
            raise fail(f"control part {raw!r} is not a part of this circuit"
                       f"{suggest(raw, sensors)}; the parts whose current can be sensed are "
                       f"{quoted_list(sensors)}")
        sensed = specs[raw]["kind"]
        if sensed not in m.CURRENT_SENSORS:
            raise fail(f"control part {raw} is {_a(sensed)}; the sensed current must be that "
                       f"of a {', '.join(m.CURRENT_SENSORS[:-1])} or {m.CURRENT_SENSORS[-1]}")
