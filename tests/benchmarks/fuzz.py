"""Fuzzing the circuit-file reader and both engines with seeded, structured TOML files.

Run: ``python -m tests.benchmarks.fuzz [--cases 10000] [--seed 1] [--no-numeric]``.  Not
collected by pytest (tests/test_fuzz_reader.py runs a fast deterministic subset).

Each case is a circuit file built from a seeded ``random.Random``: a small connected circuit
(every part kind, random nodes, values written as SI strings, IEC 60062 codes, bare numbers,
huge and tiny magnitudes, infinities, unicode, empty strings), then 0-4 mutations (a key renamed
or deleted, a value replaced by a wrong type, deep nesting, an unknown field, a corrupted or
truncated text, duplicated lines).  Every case runs the whole path: ``read_circuit``, then for
those that read ``closedform.solve``, ``simulate.solve`` and ``compare_file``.  The outcome of a
case is one of

* ``result``          the circuit was analysed (a FileResult);
* ``input-error``     an InputError naming the file and a part, field or line;
* ``unlocated``       an InputError naming less than that (a defect of the message);
* ``crash``           any other exception (a defect to fix);
* ``slow``            over the per-case limit (``--case-limit`` s; SIGALRM).

The summary prints the counts and the first example of every crash and unlocated error.
"""

from __future__ import annotations

import argparse
import collections
import datetime as dt
import json
import math
import os
import random
import signal
import sys
import tempfile
import time
import traceback
from pathlib import Path

from harness.errors import InputError

KINDS = ("resistor", "capacitor", "inductor", "voltage-source", "current-source", "switch",
         "vcvs", "vccs", "ccvs", "cccs")
UNITS = {"resistor": "Ω", "capacitor": "F", "inductor": "H", "voltage-source": "V",
         "current-source": "A", "vcvs": "", "vccs": "S", "cccs": "", "ccvs": "ohm"}
PREFIXES = ("", "f", "p", "n", "u", "µ", "m", "k", "M", "G", "T", "K", "x")
ODD_STRINGS = ("", " ", "ünïcødé", "💥", "１２３", "1e999", "-0", "NaN", "inf V", "1,5k", "4k7",
               "2R2", "1n5", "R47", "1kk", "=", "= R1*", "= R1/0", "= __import__('os')",
               "\u202e1k", "1 k Ω", "1 kohm", "5 VV", "1 s", "10 %", "1e-400", "1e400 F",
               "0x10", "1_000", "   5 V   ", "5\tV")
FIELDS = ("kind", "nodes", "value", "initial", "steps", "state", "on-resistance",
          "off-resistance", "gain", "control")
EXPECT_FIELDS = ("node", "between", "across", "through", "at", "before", "after", "final",
                 "tau", "tolerance", "note")


# --- generation ----------------------------------------------------------------------------

def _number(rng: random.Random) -> float | int:
    pick = rng.random()
    if pick < 0.05:
        return rng.choice([math.inf, -math.inf, math.nan, 0, -0.0, 10 ** 400, -(10 ** 30)])
    if pick < 0.15:
        return rng.choice([1e308, 1e-308, 5e-324, 1e-30, 1e30, 2 ** 63, -(2 ** 63) - 1])
    value = 10 ** rng.uniform(-15, 13)
    if rng.random() < 0.1:
        value = -value
    return int(value) if rng.random() < 0.2 and value < 1e15 else value


CLEAN_PREFIXES = ("", "p", "n", "u", "m", "k", "M")


def _clean_quantity(rng: random.Random, unit: str, spread: float = 3.0) -> str:
    """A well-formed quantity with the right unit, magnitude 10^(+-spread) around the prefix."""
    mant = rng.choice([1, 2.2, 4.7, 10, 33, 100, 470, 1.5, 3.3, 5])
    return f"{mant} {rng.choice(CLEAN_PREFIXES[:int(spread) + 1])}{unit}"


def _quantity(rng: random.Random, unit: str) -> object:
    if getattr(rng, "clean", False):
        return _clean_quantity(rng, unit)
    pick = rng.random()
    if pick < 0.55:
        mant = rng.choice([1, 2.2, 4.7, 10, 33, 100, 470, 0.5, 1.5, 3.3, 5])
        return f"{mant}{rng.choice(' ') if rng.random() < 0.5 else ''}{rng.choice(PREFIXES)}" \
               f"{unit if rng.random() < 0.6 else ''}"
    if pick < 0.75:
        return _number(rng)
    if pick < 0.9:
        return rng.choice(ODD_STRINGS)
    return _junk(rng, 2)


def _junk(rng: random.Random, depth: int) -> object:
    """A value of a random TOML type (nested up to ``depth``)."""
    pick = rng.randrange(9 if depth > 0 else 6)
    if pick == 0:
        return rng.choice([True, False])
    if pick == 1:
        return _number(rng)
    if pick == 2:
        return rng.choice(ODD_STRINGS)
    if pick == 3:
        return dt.datetime(2000 + rng.randrange(30), 1 + rng.randrange(12), 1 + rng.randrange(28))
    if pick == 4:
        return dt.time(rng.randrange(24), rng.randrange(60))
    if pick == 5:
        return "".join(chr(rng.randrange(32, 0x2FFF)) for _ in range(rng.randrange(0, 12)))
    if pick == 6:
        return [_junk(rng, depth - 1) for _ in range(rng.randrange(0, 4))]
    if pick == 7:
        return {f"k{i}": _junk(rng, depth - 1) for i in range(rng.randrange(0, 3))}
    return [[[[[]]]]] * rng.randrange(1, 3)


def _steps(rng: random.Random, unit: str, switch: bool) -> list:
    out, t = [], 0.0
    clean = getattr(rng, "clean", False)
    for _ in range(rng.randrange(0, 5)):
        if clean:
            t += rng.choice([1e-6, 1e-5, 1e-4, 1e-3, 1e-2])
        else:
            t += 10 ** rng.uniform(-9, 0) if rng.random() < 0.9 else -1e-3
        value = rng.choice(["open", "closed"]) if switch else _quantity(rng, unit)
        out.append([f"{t:.6g} s" if rng.random() < 0.8 else t, value])
    return out


def _part(rng: random.Random, kind: str, nodes: list[str], names: list[str]) -> dict:
    p, n = rng.sample(nodes, 2) if len(nodes) > 1 else (nodes[0], "gnd")
    if getattr(rng, "clean", False) and rng.random() < 0.6:
        p, n = rng.choice(nodes[:-1]), nodes[-1]  # the newest node joins the rest
    spec: dict = {"kind": kind, "nodes": [p, n]}
    unit = UNITS.get(kind, "")
    if kind == "switch":
        spec["state"] = rng.choice(["open", "closed"])
        if rng.random() < 0.5:
            spec["on-resistance"] = _quantity(rng, "Ω")
        if rng.random() < 0.3:
            spec["off-resistance"] = _quantity(rng, "Ω")
        if rng.random() < 0.7:
            spec["steps"] = _steps(rng, "", True)
        return spec
    spec["value" if kind not in ("vcvs", "vccs", "ccvs", "cccs") or rng.random() < 0.3
         else "gain"] = _quantity(rng, unit)
    if kind in ("capacitor", "inductor") and rng.random() < 0.3:
        spec["initial"] = _quantity(rng, "V" if kind == "capacitor" else "A")
    if kind in ("voltage-source", "current-source") and rng.random() < 0.8:
        spec["steps"] = _steps(rng, unit, False)
    if kind in ("vcvs", "vccs"):
        spec["control"] = rng.sample(nodes, 2) if len(nodes) > 1 else [nodes[0], "gnd"]
    if kind in ("ccvs", "cccs"):
        sensors = names if not getattr(rng, "clean", False) else ["V1"]
        spec["control"] = rng.choice(sensors) if sensors else "V1"
    return spec


def circuit_dict(rng: random.Random) -> dict:
    """A random, mostly well-formed circuit as the dict a TOML reader would return."""
    nodes = ["gnd", "n1"]
    parts: dict = {"V1": {"kind": "voltage-source", "nodes": ["n1", "gnd"], "value": "0 V",
                          "steps": [["0 s", _quantity(rng, "V")]]}}
    for i in range(rng.randrange(1, 9)):
        kind = rng.choices(KINDS, weights=(6, 4, 3, 1, 1, 2, 1, 1, 1, 1))[0]
        clean = getattr(rng, "clean", False)
        if rng.random() < 0.5:
            nodes.append(f"n{len(nodes)}" if clean else
                         rng.choice([f"n{len(nodes)}", "ü", "a b", "x" * 80, "out", "∆"]))
        name = (f"{kind[0].upper()}{i + 2}" if clean else
                rng.choice([f"{kind[0].upper()}{i + 2}", f"P{i}", "ÄÖ", "R 1", f"x{i}"]))
        parts[name] = _part(rng, kind, list(dict.fromkeys(nodes)), list(parts))
    data: dict = {"title": rng.choice(["fuzz", "", "ü" * 5, "<b>x</b>", "../../x"]),
                  "parts": parts}
    clean = getattr(rng, "clean", False)
    if rng.random() < 0.2 and not clean:
        data["ground"] = rng.choice(["gnd", "0", "", "n1", "nowhere"])
    if rng.random() < 0.2:
        data["settings"] = {"tolerance": "2 %" if clean else _quantity(rng, "%")}
    events = ["0 s"] + [step[0] for spec in parts.values() if isinstance(spec.get("steps"), list)
                        for step in spec["steps"]]
    data["expect"] = [_expect(rng, list(dict.fromkeys(nodes)), list(parts), events)
                      for _ in range(rng.randrange(0, 4))]
    return data


def _expect(rng: random.Random, nodes: list[str], names: list[str], events: list) -> dict:
    clean = getattr(rng, "clean", False)
    probe = rng.choice(["node", "between", "across", "through"])
    block: dict = {probe: (rng.sample(nodes, 2) if probe == "between" and len(nodes) > 1 else
                           rng.choice(nodes if probe in ("node", "between") else names))}
    if rng.random() < 0.4:
        block["at"] = rng.choice(events) if clean else rng.choice(
            ["0 s", 0, "1 ms", _quantity(rng, "s")] + events)
    unit = "A" if probe == "through" else "V"
    for name in ("before", "after", "final", "tau"):
        if rng.random() < 0.5:
            block[name] = _quantity(rng, "s" if name == "tau" else unit)
    if rng.random() < 0.1 and not clean:
        block["tau"] = rng.choice(["= R2*C3", "= 1/0", "= R2 ** 99999", "= (" * 50])
    if rng.random() < 0.1:
        block["note"] = "a note" if clean else _junk(rng, 1)
    return block


def mutate(rng: random.Random, data: dict) -> dict:
    """0-4 structural mutations of a circuit dict (in place; returned for chaining)."""
    for _ in range(rng.choice([0, 0, 1, 1, 2, 3, 4])):
        target = rng.choice(["top", "part", "part", "expect"])
        if target == "top":
            key = rng.choice(["title", "ground", "parts", "settings", "expect", "zzz", "Parts"])
            if rng.random() < 0.5:
                data.pop(key, None)
            else:
                data[key] = _junk(rng, 3)
        elif target == "part" and isinstance(data.get("parts"), dict) and data["parts"]:
            name = rng.choice(list(data["parts"]))
            spec = data["parts"][name]
            if not isinstance(spec, dict):
                continue
            key = rng.choice(FIELDS + ("colour", ""))
            roll = rng.random()
            if roll < 0.3:
                spec.pop(key, None)
            elif roll < 0.8:
                spec[key] = _junk(rng, 3)
            else:
                data["parts"][rng.choice(["", "R1", "ü", "a.b"])] = spec
        elif isinstance(data.get("expect"), list) and data["expect"]:
            block = rng.choice(data["expect"])
            if isinstance(block, dict):
                block[rng.choice(EXPECT_FIELDS + ("crossing", ""))] = _junk(rng, 2)
    return data


# --- TOML writing --------------------------------------------------------------------------

def _key(key: str) -> str:
    if key and all(c.isascii() and (c.isalnum() or c in "-_") for c in key):
        return key
    return _string(key)


def _string(text: str) -> str:
    out = []
    for ch in text:
        if ch in '"\\':
            out.append("\\" + ch)
        elif ord(ch) < 32 or ord(ch) == 127:
            out.append(f"\\u{ord(ch):04x}")
        else:
            out.append(ch)
    return '"' + "".join(out) + '"'


def toml_value(value: object) -> str:
    """One TOML value (inline tables and arrays for containers)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return _string(value)
    if isinstance(value, (dt.datetime, dt.time)):
        return value.isoformat()
    if isinstance(value, list):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{_key(k)} = {toml_value(v)}" for k, v in value.items()) + " }"
    raise TypeError(type(value))


def to_toml(data: dict) -> str:
    """The circuit dict as TOML text: top-level values, [settings], [parts], [[expect]]."""
    lines, tables = [], []
    for key, value in data.items():
        if key in ("parts", "settings") and isinstance(value, dict):
            tables.append((key, value))
        elif key == "expect" and isinstance(value, list) and all(isinstance(b, dict) for b in value):
            tables.append((key, value))
        else:
            lines.append(f"{_key(key)} = {toml_value(value)}")
    for key, value in tables:
        if key == "expect":
            for block in value:
                lines.append("\n[[expect]]")
                lines += [f"{_key(k)} = {toml_value(v)}" for k, v in block.items()]
        else:
            lines.append(f"\n[{key}]")
            lines += [f"{_key(k)} = {toml_value(v)}" for k, v in value.items()]
    return "\n".join(lines) + "\n"


def corrupt(rng: random.Random, text: str) -> str:
    """A text-level corruption: truncation, a stray byte, a duplicated line, a BOM."""
    pick = rng.randrange(5)
    if pick == 0 and text:
        return text[:rng.randrange(len(text))]
    if pick == 1 and text:
        i = rng.randrange(len(text))
        return text[:i] + rng.choice(['"', "[", "]", "{", "=", "\n", "\\", "'''", "\x00"]) + text[i:]
    if pick == 2:
        lines = text.splitlines(keepends=True)
        if lines:
            i = rng.randrange(len(lines))
            lines.insert(i, lines[i])
        return "".join(lines)
    if pick == 3:
        return "\ufeff" + text
    return text.replace("[parts]", "[parts]\n[parts]", 1)


def generate(seed: int) -> bytes:
    """The bytes of fuzz case ``seed`` (deterministic)."""
    rng = random.Random(seed)
    rng.clean = rng.random() < 0.4   # type: ignore[attr-defined]  # well-formed, to reach the engines
    data = circuit_dict(rng)
    text = to_toml(data if rng.clean else mutate(rng, data))
    if not rng.clean and rng.random() < 0.12:
        text = corrupt(rng, text)
    raw = text.encode("utf-8", "surrogatepass")
    if not rng.clean and rng.random() < 0.01:
        raw = raw[:10] + b"\xff\xfe" + raw[10:]
    return raw


# --- running -------------------------------------------------------------------------------

class _Slow(Exception):
    pass


def _alarm(signum, frame):
    raise _Slow()


def run_case(path: str, numeric: bool = True) -> tuple[str, str]:
    """(outcome, detail) for the circuit file at ``path`` through the whole path."""
    from harness import closedform
    from harness.circuitfile import read_circuit
    from harness.compare import compare_file
    from harness.outcome import RunResult
    from harness.report import jsonout
    try:
        circuit = read_circuit(path)
    except InputError as err:
        return _located(err, path)
    try:
        exact = closedform.solve(circuit)
        sim = None
        if numeric:
            from harness import simulate
            sim = simulate.solve(circuit)
        result = compare_file(circuit, exact, sim)
        jsonout.render(RunResult((result,)))     # the one JSON writer, as --json runs it
    except InputError as err:
        return _located(err, path)
    except _Slow:
        raise
    except Exception as err:
        return "crash", f"{type(err).__name__}: {err}\n{traceback.format_exc(limit=-4)}"
    return "result", result.verdict


def _located(err: InputError, path: str) -> tuple[str, str]:
    if err.file == path and (err.part or err.field or err.line):
        return "input-error", type(err).__name__
    return "unlocated", str(err)


def run(cases: int, seed: int, numeric: bool, case_limit: float, quiet: bool = False,
        out: str | None = None) -> dict:
    """Run ``cases`` cases from ``seed``; return the counts and the first examples (also
    written, every 250 cases, to the JSON file ``out`` when given)."""
    counts: collections.Counter = collections.Counter()
    kinds: collections.Counter = collections.Counter()
    examples: dict[str, list] = collections.defaultdict(list)
    previous = signal.signal(signal.SIGALRM, _alarm)
    started = time.perf_counter()
    try:
        with tempfile.TemporaryDirectory() as folder:
            for i in range(cases):
                path = os.path.join(folder, f"case{seed + i}.toml")
                Path(path).write_bytes(generate(seed + i))
                signal.setitimer(signal.ITIMER_REAL, case_limit)
                try:
                    outcome, detail = run_case(path, numeric)
                except _Slow:
                    outcome, detail = "slow", ""
                finally:
                    signal.setitimer(signal.ITIMER_REAL, 0)
                counts[outcome] += 1
                kinds[f"{outcome}:{detail}" if outcome in ("input-error", "result")
                      else outcome] += 1
                if outcome in ("crash", "unlocated", "slow") and len(examples[outcome]) < 5:
                    examples[outcome].append((seed + i, detail))
                if not quiet and (i + 1) % 1000 == 0:
                    print(f"{i + 1} cases, {dict(counts)}", file=sys.stderr)
                if out and (i + 1) % 250 == 0:
                    Path(out).write_text(json.dumps(
                        {"cases": i + 1, "seconds": time.perf_counter() - started,
                         "outcomes": dict(counts), "kinds": dict(kinds.most_common()),
                         "examples": dict(examples)}, indent=2, default=str))
    finally:
        signal.signal(signal.SIGALRM, previous)
    return {"cases": cases, "seconds": time.perf_counter() - started, "outcomes": dict(counts),
            "kinds": dict(kinds.most_common()), "examples": dict(examples)}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=10_000)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--no-numeric", action="store_true")
    parser.add_argument("--case-limit", type=float, default=30.0)
    parser.add_argument("--out", default=None, help="also write the summary JSON here")
    args = parser.parse_args(argv)
    summary = run(args.cases, args.seed, not args.no_numeric, args.case_limit, out=args.out)
    if args.out:
        Path(args.out).write_text(json.dumps(summary, indent=2, default=str))
    print(json.dumps(summary, indent=2, default=str))
    return 1 if summary["outcomes"].get("crash") or summary["outcomes"].get("unlocated") else 0


if __name__ == "__main__":
    sys.exit(main())
