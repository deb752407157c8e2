"""The ``repeat`` field of a source or switch: a schedule that repeats, read and expanded.

A file writes one period and how often it repeats, instead of every step:

    repeat = { period = "100 us", duty = "30 %", levels = ["5 V", "0 V"], count = 40 }
    repeat = { start = "1 ms", period = "10 us", until = "3 ms",
               steps = [["0 s", "closed"], ["4 us", "open"]] }

Keys: ``period`` (required, > 0); the pattern either as ``duty`` (a fraction strictly between 0
and 1) with ``levels`` = [the value during the duty, the value for the rest of the period], or
as ``steps`` = [[offset within the period, value], …] (offsets strictly increasing, from 0 s and
below the period); the length as ``count`` (whole periods) or ``until`` (an end time: every
step before it happens, ``count`` is the number of periods that start before it); ``start``
(default 0 s).  A part may also have ordinary ``steps``, before the window or from its end on.

The reader expands the repeat into the part's ordinary steps (``expand``), so both engines see
an ordinary schedule, and records the window (``model.Periodic``, ``periodic_window``) for the
periodic steady state.  Every repeating part must share start, period and count, and no other
step may fall inside the window: otherwise the periods would not all be alike.
"""

from __future__ import annotations

import math

from . import model as m
from .errors import InputError
from .filelines import Where, quoted_list, suggest

#: keys of a ``repeat`` table
REPEAT_KEYS = ("start", "period", "duty", "levels", "steps", "count", "until")
_STATES = {"open": 0.0, "closed": 1.0}
#: relative slack when counting the periods that start before ``until`` (rounding of t/T)
_COUNT_SLACK = 1e-9


def read_repeat(name: str, raw: object, where: Where, dimension: str | None,
                max_steps: int) -> m.Repeat:
    """The ``repeat`` table of part ``name``; ``dimension`` the unit of its values (None: a
    switch's "open"/"closed").

    Raises:
        InputError (or UnitError): naming the part and ``repeat.<key>``.
    """
    path = ("parts", name, "repeat")

    def fail(key: str, message: str) -> InputError:
        return where.error(message, path=path + ((key,) if key else ()), part=name,
                           field=f"repeat.{key}" if key else "repeat")

    if not isinstance(raw, dict):
        raise fail("", "repeat must be a table such as { period = \"100 us\", duty = \"30 %\", "
                       "levels = [...], count = 40 }")
    for key in raw:
        if key not in REPEAT_KEYS:
            raise fail(key, f"repeat has no key {key!r}{suggest(key, REPEAT_KEYS)}; it takes "
                            f"{quoted_list(REPEAT_KEYS)}")
    if "period" not in raw:
        raise fail("period", "repeat needs a period (the length of one period, e.g. \"100 us\")")
    period = _time(raw["period"], "period", where, path, name)
    if not period > 0:
        raise fail("period", f"the period must be greater than zero, got {raw['period']!r}")
    start = _time(raw.get("start", 0.0), "start", where, path, name)
    if start < 0:
        raise fail("start", f"start {raw['start']!r} is before t = 0")
    pattern = _pattern(name, raw, where, path, period, dimension, fail)
    count = _count(raw, where, path, name, start, period, pattern, fail)
    if count * len(pattern) > max_steps:
        key = "count" if "count" in raw else "until"
        raise fail(key, f"the repeat expands to {count * len(pattern)} steps; the limit is "
                        f"{max_steps} per schedule (the periodic steady state is computed from "
                        f"one period, whatever the count: fewer periods are enough)")
    return m.Repeat(start=start, period=period, count=count, pattern=pattern)


def _time(raw: object, key: str, where: Where, path: tuple, name: str) -> float:
    return where.quantity(raw, "s", path=path + (key,), part=name, field=f"repeat.{key}")


def _level(raw: object, key: str, where: Where, path: tuple, name: str,
           dimension: str | None, fail) -> float:
    if dimension is None:
        if not isinstance(raw, str) or raw not in _STATES:
            raise fail(key, f"a switch repeats \"open\" or \"closed\", got {raw!r}")
        return _STATES[raw]
    return where.quantity(raw, dimension, path=path + (key,), part=name, field=f"repeat.{key}")


def _pattern(name: str, raw: dict, where: Where, path: tuple, period: float,
             dimension: str | None, fail) -> tuple[tuple[float, float], ...]:
    """((offset s, value), ...) of one period, from ``duty`` + ``levels`` or ``steps``."""
    if ("steps" in raw) == ("duty" in raw or "levels" in raw):
        raise fail("steps", "give the pattern of one period either as duty = \"30 %\" with "
                            "levels = [during, rest], or as steps = [[offset, value], ...]")
    if "steps" not in raw:
        if "duty" not in raw or "levels" not in raw:
            missing = "levels" if "duty" in raw else "duty"
            raise fail(missing, f"duty and levels go together: {missing} is missing")
        duty = where.quantity(raw["duty"], "1", path=path + ("duty",), part=name,
                              field="repeat.duty", allow_percent=True)
        if not 0 < duty < 1:
            raise fail("duty", f"duty must be strictly between 0 and 1 (0 % and 100 %), got "
                               f"{raw['duty']!r}")
        levels = raw["levels"]
        if not isinstance(levels, list) or len(levels) != 2:
            raise fail("levels", f"levels must be [value during the duty, value for the rest], "
                                 f"got {levels!r}")
        on, off = (_level(v, "levels", where, path, name, dimension, fail) for v in levels)
        return ((0.0, on), (duty * period, off))
    steps = raw["steps"]
    if not isinstance(steps, list) or not steps:
        raise fail("steps", "steps must be a non-empty list of [offset, value] pairs")
    out, last = [], -math.inf
    for i, item in enumerate(steps, start=1):
        if not isinstance(item, list) or len(item) != 2:
            raise fail("steps", f"step {i} must be an [offset, value] pair, got {item!r}")
        offset = _time(item[0], "steps", where, path, name)
        if not 0 <= offset < period:
            raise fail("steps", f"step {i}: offset {item[0]!r} is not within the period "
                                f"(from 0 s, below the period)")
        if not offset > last:
            raise fail("steps", f"step {i}: offset {item[0]!r} is not after the previous one")
        last = offset
        out.append((offset, _level(item[1], "steps", where, path, name, dimension, fail)))
    return tuple(out)


def _count(raw: dict, where: Where, path: tuple, name: str, start: float, period: float,
           pattern: tuple, fail) -> int:
    """Whole periods: ``count`` as given, or the periods that start before ``until``."""
    if ("count" in raw) == ("until" in raw):
        raise fail("count", "give the length as count = N (periods) or until = t (an end time), "
                            "one of them")
    if "count" in raw:
        count = raw["count"]
        if isinstance(count, bool) or not isinstance(count, int) or count < 1:
            raise fail("count", f"count must be a whole number of periods, 1 or more, got "
                                f"{count!r}")
        return count
    until = _time(raw["until"], "until", where, path, name)
    if not until > start + pattern[0][0]:
        raise fail("until", f"until {raw['until']!r} ends the repeat before its first step")
    return max(1, math.ceil((until - start) / period * (1 - _COUNT_SLACK)))


def expand(repeat: m.Repeat) -> tuple[tuple[float, float], ...]:
    """The ordinary steps ((time s, value), ...) of a repeat: t = start + n T + offset."""
    return tuple((repeat.start + n * repeat.period + offset, value)
                 for n in range(repeat.count) for offset, value in repeat.pattern)


def merge(name: str, steps: tuple, repeat: m.Repeat, where: Where) -> tuple:
    """The part's ordinary ``steps`` and its expanded repeat as one schedule; an ordinary step
    inside the window [start, end) is an error."""
    inside = [t for t, _ in steps if repeat.start <= t < repeat.end]
    if inside:
        raise where.error(f"a step at {inside[0]:g} s lies inside the repeat's window "
                          f"[{repeat.start:g} s, {repeat.end:g} s): put it before the window, "
                          f"after it, or into the repeat's pattern",
                          path=("parts", name, "steps"), part=name, field="steps")
    return tuple(sorted(steps + expand(repeat)))


def periodic_window(parts: tuple[m.Part, ...], where: Where) -> m.Periodic | None:
    """The circuit's ``model.Periodic`` from its repeating parts, or None when none repeats.

    Raises:
        InputError: two repeats differ in start, period or count, or another part steps inside
            the window.
    """
    repeating = [p for p in parts if p.repeat is not None]
    if not repeating:
        return None
    first = repeating[0].repeat
    for part in repeating[1:]:
        rep = part.repeat
        for key, mine, theirs in (("start", rep.start, first.start),
                                  ("period", rep.period, first.period),
                                  ("count", rep.count, first.count)):
            if not math.isclose(mine, theirs, rel_tol=1e-12, abs_tol=1e-18):
                raise where.error(f"every repeat shares start, period and count; {part.name}'s "
                                  f"{key} differs from {repeating[0].name}'s",
                                  path=("parts", part.name, "repeat", key), part=part.name,
                                  field=f"repeat.{key}")
    for part in parts:
        if part.repeat is None:
            inside = [t for t, _ in part.steps
                      if first.start + min(o for o, _ in first.pattern) <= t < first.end]
            if inside:
                raise where.error(f"a step at {inside[0]:g} s lies inside the repeating window "
                                  f"[{first.start:g} s, {first.end:g} s) of "
                                  f"{repeating[0].name}: the periods would not all be alike",
                                  path=("parts", part.name, "steps"), part=part.name,
                                  field="steps")
    offsets = sorted({off for p in repeating for off, _ in p.repeat.pattern})
    return m.Periodic(start=first.start, period=first.period, count=first.count,
                      offsets=tuple(offsets))
