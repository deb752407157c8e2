"""Hostile mutations of the bundled library circuits, for the command-line fuzzer.

Each kind edits a circuit dict (as ``tomllib`` reads it) in place:

* ``unprintable``: control characters (ESC sequences, BEL, the C1 control U+009B), bidi
  overrides (U+202E) and lone surrogates in the title, a part name, a node name or a note;
* ``magnitude``: a value, an initial value or a step value near the float limits or subnormal
  (1e-320 F, 1e308 V, 1e-300 V, ``initial = "1e200 V"``) or at the edge of the accepted range;
* ``parasitic``: a small capacitor across an inductor;
* ``dangling``: a source's second terminal moved to a node nothing else touches;
* ``formula``: a hostile hand formula (``= (-1)**0.5``, huge exponents, deep nesting);
* ``source-across``: a voltage source added across a resistor.
"""

from __future__ import annotations

import random
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
LIBRARY = sorted((ROOT / "circuits" / "library").rglob("*.toml"))

UNPRINTABLE = ("\x1b]0;title\x07", "\x1b[2J", "\x9b31m", "\u202e", "\u2066", "\x00", "\x7f",
               "\udc00", "\ud800", "\x08\x08", "\r", "\u2028")
MAGNITUDES = {"F": ("1e-320 F", "5e-324 F", "1e308 F", "1e-31 F", "1e-30 F", "1e30 F"),
              "V": ("1e308 V", "1e-300 V", "1e200 V", "-1e308 V", "1e-30 V", "2e30 V",
                    "1.7976931348623157e308 V"),
              "A": ("1e-320 A", "1e300 A", "1e-30 A", "1e31 A"),
              "Ω": ("1e-320", "1e308 Ω", "1e30", "1e-30 Ω"),
              "H": ("1e-320 H", "1e300 H", "1e-30 H", "1e30 H"),
              "s": ("1e-320 s", "1e-300 s", "1e30 s", "1e-30 s", "1e300 s")}
FORMULAS = ("= (-1)**0.5", "= (-8)**(1/3)", "= 10 ** 400", "= 2 ** -1080", "= {p} ** 99999",
            "= {p} ** -99999", "= exp(1000)", "= exp(-1000)", "= ln(0)", "= ln(-1)",
            "= sqrt(-1)", "= 1/0", "= 0/0", "= 1e308 * 1e308", "= " + "(" * 300 + "1" + ")" * 300,
            "= " + "-" * 500 + "1", "= " + " + ".join(["{p}"] * 400), "= {p} / ({p} - {p})",
            "= 1e-320 s", "= {p} * 1e-300")
UNIT_OF = {"capacitor": "F", "inductor": "H", "resistor": "Ω", "voltage-source": "V",
           "current-source": "A"}
KINDS = ("unprintable", "magnitude", "parasitic", "dangling", "formula", "source-across")


def library_case(rng: random.Random) -> tuple[dict, list[str]]:
    """A library circuit with 1-3 mutations: (the circuit dict, the kinds applied)."""
    data = tomllib.loads(rng.choice(LIBRARY).read_text(encoding="utf-8"))
    kinds = [rng.choice(KINDS) for _ in range(rng.choice([1, 1, 1, 2, 3]))]
    for kind in kinds:
        MUTATE[kind](rng, data)
    return data, kinds


def _parts(data: dict, *kinds: str) -> list[str]:
    parts = data.get("parts") if isinstance(data.get("parts"), dict) else {}
    return [n for n, spec in parts.items()
            if isinstance(spec, dict) and (not kinds or spec.get("kind") in kinds)]


def _unprintable(rng: random.Random, data: dict) -> None:
    bad = "".join(rng.choice(UNPRINTABLE) for _ in range(rng.randrange(1, 3)))
    where = rng.choice(["title", "part", "node", "note"])
    names = _parts(data)
    if where == "title" or not names:
        data["title"] = rng.choice([bad, f"{data.get('title', '')} {bad}"])
    elif where == "part":
        old = rng.choice(names)
        data["parts"][f"{old}{bad}"] = data["parts"].pop(old)
    elif where == "node":
        spec = data["parts"][rng.choice(names)]
        if isinstance(spec.get("nodes"), list) and spec["nodes"]:
            spec["nodes"][0] = f"{spec['nodes'][0]}{bad}"
    elif isinstance(data.get("expect"), list) and data["expect"]:
        rng.choice(data["expect"])["note"] = bad


def _magnitude(rng: random.Random, data: dict) -> None:
    names = _parts(data, *UNIT_OF)
    if not names:
        return
    spec = data["parts"][rng.choice(names)]
    unit = UNIT_OF[spec["kind"]]
    roll = rng.random()
    if roll < 0.3 and spec["kind"] in ("capacitor", "inductor"):
        spec["initial"] = rng.choice(MAGNITUDES["V" if spec["kind"] == "capacitor" else "A"])
    elif roll < 0.6 and isinstance(spec.get("steps"), list) and spec["steps"]:
        step = rng.choice(spec["steps"])
        if isinstance(step, list) and len(step) == 2:
            step[rng.choice([0, 1, 1])] = rng.choice(MAGNITUDES["s"] if rng.random() < 0.3
                                                     else MAGNITUDES[unit])
    else:
        spec["value"] = rng.choice(MAGNITUDES[unit])


def _parasitic(rng: random.Random, data: dict) -> None:
    names = _parts(data, "inductor")
    if names:
        nodes = data["parts"][rng.choice(names)].get("nodes")
        data["parts"][f"Cpar{rng.randrange(100)}"] = {
            "kind": "capacitor", "nodes": list(nodes) if isinstance(nodes, list) else nodes,
            "value": rng.choice(["1p", "1 fF", "10 aF", "1n", "100p"])}


def _dangling(rng: random.Random, data: dict) -> None:
    names = _parts(data, "voltage-source", "current-source", "vcvs", "vccs", "ccvs", "cccs")
    if names:
        spec = data["parts"][rng.choice(names)]
        if isinstance(spec.get("nodes"), list) and len(spec["nodes"]) == 2:
            spec["nodes"][rng.choice([1, 1, 0])] = f"dangle{rng.randrange(100)}"


def _formula(rng: random.Random, data: dict) -> None:
    blocks = data.get("expect") if isinstance(data.get("expect"), list) else []
    if not blocks:
        return
    part = rng.choice(_parts(data) or ["R1"])
    text = rng.choice(FORMULAS).replace("{p}", part)
    rng.choice(blocks)[rng.choice(["tau", "final", "after", "before"])] = text


def _source_across(rng: random.Random, data: dict) -> None:
    names = _parts(data, "resistor")
    if names:
        nodes = data["parts"][rng.choice(names)].get("nodes")
        spec = {"kind": "voltage-source", "nodes": nodes, "value": rng.choice(["1 V", "0 V"])}
        if rng.random() < 0.5:
            spec["steps"] = [[rng.choice(["0 s", "1 ms", "1 us"]), "5 V"]]
        data["parts"][f"Vx{rng.randrange(100)}"] = spec


MUTATE = {"unprintable": _unprintable, "magnitude": _magnitude, "parasitic": _parasitic,
          "dangling": _dangling, "formula": _formula, "source-across": _source_across}
