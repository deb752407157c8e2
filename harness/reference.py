"""The circuit-file reference and the settings reference, written from the declarations.

Everything here is read from the tables the reader itself checks files against — the kinds with
their help, fields and units (``model.KIND_SPECS``), what each part field means
(``fields.FIELD_HELP``), the top level, ``[settings]`` and ``[[expect]]`` keys
(``circuitfile.TOP_LEVEL`` … ``EXPECT_HELP``), the prefixes and units (``units``) and the
``[tool.tauproof]`` keys (``config.KEYS``) — so the reference cannot drift from what the reader
accepts: a key without a description raises ``KeyError`` here.  ``harness/reference.md`` is the
committed output of ``format_reference`` (``python -m harness.reference`` rewrites it; a test
fails when it differs).
"""

from __future__ import annotations

import sys
from pathlib import Path

from . import circuitfile as cf
from . import config
from . import fields as fd
from . import model as m
from . import units
from .variation import declare as vd

#: the committed reference, beside this module
REFERENCE = Path(__file__).with_name("reference.md")

_UNIT_WORDS = {"ohm": "Ω", "1": "plain number", "S": "S (A/V)", "V": "V", "A": "A", "F": "F",
               "H": "H", "s": "s"}


def format_reference() -> str:
    """The circuit-file reference as Markdown."""
    out = ["# The circuit file", "",
           "<!-- written by `python -m harness.reference` from the reader's declarations; "
           "do not edit -->", "",
           "A circuit file is TOML (UTF-8). `tauproof new FILE` writes a commented one to start "
           "from; `tauproof help format` prints this page.", "", "## Top level", ""]
    out += _table(("key", "meaning"), [(f"`{k}`", cf.TOP_LEVEL_HELP[k]) for k in cf.TOP_LEVEL])
    out += _quantities() + _parts() + _settings() + _variation() + _expect()
    return "\n".join(out) + "\n"


def _table(headers: tuple[str, ...], rows) -> list[str]:
    lines = ["| " + " | ".join(headers) + " |", "|" + "---|" * len(headers)]
    lines += ["| " + " | ".join(str(c).replace("|", "\\|") for c in row) + " |" for row in rows]
    return lines + [""]


def _quantities() -> list[str]:
    prefixes = ", ".join(f"`{p}` {v:g}" for p, v in units.PREFIXES.items())
    spellings = ", ".join(f"`{u}`" for u in units.UNITS)
    return ["## Values and units", "",
            "Quote every value that carries a unit or prefix (`value = \"4k7\"`; `value = 4k7` "
            "is not TOML). A plain TOML number is taken in the field's own unit.", "",
            f"- SI prefixes (case matters: `m` milli, `M` mega): {prefixes}.",
            f"- Unit spellings: {spellings}.",
            "- IEC 60062 codes, the letter standing for the decimal point: `4k7` = 4.7 kΩ, "
            "`2R2` = 2.2 Ω, `R47` = 0.47 Ω, `1n5` = 1.5 nF, `1M0` = 1 MΩ.",
            "- Percentages where a tolerance is asked for: `\"2 %\"` = 0.02.",
            "- Hand values may be formulas of part values, starting with `=`: "
            "`tau = \"= R1*C1\"`, `final = \"= 3.3 V * R2/(R1+R2)\"`; their units are "
            "checked (a part carries its kind's unit).", ""]


def _parts() -> list[str]:
    out = ["## Parts", "",
           "`[parts]` holds one inline table per part: `R1 = { kind = \"resistor\", nodes = "
           "[\"in\", \"out\"], value = \"10k\" }`. Every part takes `kind` and `nodes`.", ""]
    rows = []
    for kind, declared in m.KIND_SPECS.items():
        value = declared.units.get("value")
        unit = "—" if value is None else _UNIT_WORDS[value]
        initial = declared.units.get("initial")
        rows.append((f"`{kind}`", declared.help, ", ".join(f"`{f}`" for f in declared.fields),
                     unit + (f"; initial in {initial}" if initial else "")))
    out += _table(("kind", "what it is", "fields beside kind and nodes", "value unit"), rows)
    out += ["### Part fields", ""]
    names = dict.fromkeys(("kind", "nodes") + tuple(f for declared in m.KIND_SPECS.values()
                                                    for f in declared.fields))
    own = {n: text for declared in m.KIND_SPECS.values()
           for n, text in declared.field_help.items()}
    out += _table(("field", "meaning"),
                  [(f"`{n}`", fd.FIELD_HELP[n] if n in fd.FIELD_HELP else own[n]) for n in names])
    return out


def _settings() -> list[str]:
    return ["## [settings]", ""] + _table(("key", "meaning"),
                                         [(f"`{k}`", cf.SETTINGS_HELP[k]) for k in cf.SETTINGS])


def _variation() -> list[str]:
    out = ["## [variation]", "",
           "Sign-off over tolerances. Each part may carry a `spread` (and a crossing its "
           "`level-spread`); each `[[expect]]` field may carry spec limits in `spec`. For every "
           "limited field tauproof computes the nominal value, the normalised sensitivities "
           "∂x/∂p·p/x, the extremes over the box of spreads with their corner (every vertex for "
           "at most 16 varied quantities, else sensitivity-signed corners refined by a bounded "
           "local search; an interior turn on each axis is searched as well), root-sum-square "
           "bounds and a Monte Carlo spread with its yield (Wilson 95 % interval). The "
           "numerical engine is run at each extreme corner. Verdicts: `pass` when the limits "
           "hold at the extremes, `holds-statistically` when an extreme breaks them but no "
           "sample does, `mismatch` when samples break them (the yield is given) or a hand "
           "worst case differs from the computed extreme, `engines-disagree` when the "
           "numerical engine differs at a corner. A part's `tempco` over `temperature` "
           "(referred to 25 °C) and its `ageing` add linearly to its spread: the box edge is "
           "spread + tempco·(T − 25 °C) at the worse end of the range + ageing, each part "
           "taken at its own worse temperature (conservative: the board shares one).", ""]
    return out + _table(("key", "meaning"),
                        [(f"`{k}`", vd.VARIATION_HELP[k]) for k in vd.VARIATION_KEYS])


def _expect() -> list[str]:
    out = ["## [[expect]]", "",
           "Each block checks one probe at one event. Give exactly one probe key (`node`, "
           "`between`, `across`, `through`) and any of the value fields; a value field left out "
           "is computed and shown but not checked. Voltage probes are in V, `through` in A "
           "(\"probe's unit\" below).", ""]
    rows = []
    for key in cf.EXPECT_KEYS:
        unit, text = cf.EXPECT_HELP[key]
        unit = {"probe": "probe's unit (V or A)", "": "—"}.get(unit, unit)
        rows.append((f"`{key}`", unit, text))
    out += _table(("field", "unit", "meaning"), rows)
    out += [f"`crossing` takes {', '.join(f'`{k}`' for k in cf.CROSSING_KEYS)}; `direction` is "
            f"one of {', '.join(f'`{d}`' for d in m.DIRECTIONS)}. `energy` takes "
            f"{', '.join(f'`{k}`' for k in cf.ENERGY_KEYS)}; its part is a "
            f"{' or '.join(m.DISSIPATIVE)}.", ""]
    return out


def config_reference() -> str:
    """The ``[tool.tauproof]`` keys as Markdown."""
    out = ["# Project settings: [tool.tauproof] in pyproject.toml", "",
           "tauproof reads the nearest `pyproject.toml` with a `[tool.tauproof]` table, going "
           "up from the working directory. Paths are relative to that file's folder; options on "
           "the command line override these keys; an unknown key is an error (exit 2).", ""]
    out += _table(("key", "type", "meaning"),
                  [(f"`{k}`", kind, text) for k, (kind, text) in config.KEYS.items()])
    return "\n".join(out)


def main(argv: list[str]) -> int:
    """``python -m harness.reference``: rewrite ``reference.md`` (``--check``: exit 1 when it
    differs from what the declarations give)."""
    text = format_reference()
    if argv[:1] == ["--check"]:
        return 0 if REFERENCE.read_text(encoding="utf-8") == text else 1
    REFERENCE.write_text(text, encoding="utf-8")
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main(sys.argv[1:]))
