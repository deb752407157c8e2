"""Reading the sign-off-over-tolerances declarations of a circuit file.

A part's (or a crossing level's) ``spread``, the ``[variation]`` table and an expectation's
``spec`` limits.  Only the reader calls this module; it knows the model, the units and the file
locations, nothing of the engines.

A part's ``tempco`` over the file's ``temperature`` range and its ``ageing`` drift fold into its
spread (``box``): the relative deviations add linearly, the end-of-life tolerance of worst-case
circuit analysis (initial tolerance + temperature drift + ageing; common practice).  The
temperature drift spans tc·(T − 25 °C) over the range for every tc of the tempco band.  Each
part's drift is taken on its own edge, as if each part could sit at its own temperature: the
board shares one temperature, so this box is conservative (it contains every common-temperature
point).  Monte Carlo draws over the same box.

Spread letters follow IEC 60062:2016 ("Marking codes for resistors and capacitors", Table 5,
tolerance letter codes): B 0.1 %, C 0.25 %, D 0.5 %, F 1 %, G 2 %, J 5 %, K 10 %, M 20 %.
"""

from __future__ import annotations

import re

from .. import model as m
from ..filelines import Where, quoted_list, suggest
from ..units import UnitError, parse_quantity

#: IEC 60062 tolerance letters -> symmetric relative spread
IEC_LETTERS = {"B": 0.001, "C": 0.0025, "D": 0.005, "F": 0.01, "G": 0.02, "J": 0.05,
               "K": 0.10, "M": 0.20}
VARIATION_KEYS = ("methods", "samples", "seed", "distribution", "sigmas", "temperature")
VARIATION_HELP = {
    "methods": f"list of {quoted_list(m.METHODS)} (default all three)",
    "samples": "Monte Carlo sample count, 10 to 1,000,000 (default 2000)",
    "seed": "the random generator's seed, an integer ≥ 0 (default 1): a run is reproducible",
    "distribution": "\"uniform\" over each spread (default) or \"normal\" with the spread edge at "
                    "`sigmas` standard deviations",
    "sigmas": "k of the normal distribution: the spread is k·σ (default 3)",
    "temperature": "[min, max] operating range in °C (\"-40 °C\" or -40) over which each part's "
                   "`tempco` widens its spread, referred to 25 °C",
}
#: |tempco| above this (1/K; 10 %/K) is surely a slip of units
MAX_TEMPCO = 0.1
# patterns compiled on first use (re's cache): only files with spreads or tempcos read them
_TEMPCO = (r"^\s*(±|\+/-)?\s*([+-]?[0-9.]+(?:e[+-]?[0-9]+)?)\s*"
           r"(ppm\s*/\s*(?:K|°C|C))?\s*$")
_CELSIUS = r"^\s*([+-−]?[0-9.]+)\s*(?:°\s*C|C)?\s*$"
LIMIT_KEYS = ("min", "max", "hand-min", "hand-max")
MAX_SAMPLES = 1_000_000
_PAIR = r"^\s*([+-−]?[^/]+?)\s*/\s*([+-]?[^/]+?)\s*$"


def parse_spread(raw: object) -> tuple[float, float]:
    """``"1%"``, ``"±1 %"``, ``0.01``, ``"-20%/+80%"`` or an IEC 60062 letter -> relative
    (low, high), low ≤ 0 ≤ high, low > -1.

    Raises:
        ValueError: saying what is accepted.
    """
    if isinstance(raw, str) and raw.strip().upper() in IEC_LETTERS and len(raw.strip()) == 1:
        edge = IEC_LETTERS[raw.strip().upper()]
        return (-edge, edge)
    if isinstance(raw, str) and "/" in raw:
        match = re.match(_PAIR, raw)
        if not match:
            raise ValueError(f"spread {raw!r} is not \"-low%/+high%\"")
        low = _fraction(match.group(1).replace("−", "-"))
        high = _fraction(match.group(2))
        if not (low <= 0 <= high):
            raise ValueError(f"spread {raw!r} needs the low side ≤ 0 and the high side ≥ 0, "
                             f"as in \"-20%/+80%\"")
    else:
        text = raw.strip().lstrip("±").replace("+/-", "") if isinstance(raw, str) else raw
        edge = _fraction(text)
        if edge < 0:
            raise ValueError(f"a symmetric spread is written without a sign, got {raw!r}")
        low, high = -edge, edge
    if not (low > -1 and high < 10):
        raise ValueError(f"spread {raw!r} must stay above -100 % and below +1000 %")
    if low == 0 and high == 0:
        raise ValueError("a spread of 0 % varies nothing: leave it out")
    return (low, high)


def _fraction(raw: object) -> float:
    if isinstance(raw, bool) or not isinstance(raw, (int, float, str)):
        raise ValueError(f"a spread is \"1%\", \"-20%/+80%\" or an IEC 60062 letter "
                         f"({', '.join(IEC_LETTERS)}), got {raw!r}")
    try:
        return parse_quantity(raw.strip() if isinstance(raw, str) else raw, "1",
                              allow_percent=True)
    except UnitError as exc:
        raise ValueError(f"a spread is \"1%\", \"-20%/+80%\" or an IEC 60062 letter "
                         f"({', '.join(IEC_LETTERS)}): {exc}") from None


def read_spread(raw: object, where: Where, path: tuple, part: str, field: str):
    """``parse_spread`` with the error located in the file."""
    try:
        return parse_spread(raw)
    except ValueError as exc:
        raise where.error(str(exc), path=path, part=part, field=field) from None


def parse_tempco(raw: object) -> tuple[float, float]:
    """``"100 ppm/K"``, ``"-3930 ppm/K"``, ``"±30 ppm/K"`` or a number of ppm/K -> the band
    (low, high) in 1/K.

    Raises:
        ValueError: saying what is accepted.
    """
    text = str(raw) if isinstance(raw, (int, float)) and not isinstance(raw, bool) else raw
    match = re.match(_TEMPCO, text, re.IGNORECASE) if isinstance(text, str) else None
    try:
        value = float(match.group(2)) * 1e-6 if match else None
    except ValueError:
        value = None
    if value is None or not value == value or abs(value) > MAX_TEMPCO:
        raise ValueError(f"a tempco is \"100 ppm/K\", \"-3930 ppm/K\" or \"±30 ppm/K\" "
                         f"(at most {MAX_TEMPCO * 1e6:,.0f} ppm/K), got {raw!r}")
    if match.group(1):
        return (-abs(value), abs(value))
    return (value, value)


def read_tempco(raw: object, where: Where, path: tuple, part: str) -> tuple[float, float]:
    """``parse_tempco`` with the error located in the file."""
    try:
        return parse_tempco(raw)
    except ValueError as exc:
        raise where.error(str(exc), path=path, part=part, field="tempco") from None


def box(part: m.Part, variation: m.Variation) -> tuple[float, float] | None:
    """The part's relative (low, high) deviations from its value: spread + tempco·(T − 25 °C)
    over the temperature range + ageing, added edge by edge; None when nothing varies it."""
    pieces = [part.spread, part.ageing]
    if part.tempco is not None and variation.temperature is not None:
        heat = [tc * (t - m.REFERENCE_TEMPERATURE) for tc in part.tempco
                for t in variation.temperature]
        pieces.append((min(heat), max(heat)))
    pieces = [p for p in pieces if p is not None]
    if not pieces:
        return None
    return (sum(p[0] for p in pieces), sum(p[1] for p in pieces))


def check_drifts(parts: tuple[m.Part, ...], variation: m.Variation, where: Where) -> None:
    """A tempco needs the file's temperature range; the folded box must keep the value above
    zero."""
    for part in parts:
        path = ("parts", part.name)
        if part.tempco is not None and variation.temperature is None:
            raise where.error("a tempco needs the operating range: [variation] temperature = "
                              "[\"-40 °C\", \"85 °C\"]", path=path + ("tempco",),
                              part=part.name, field="tempco")
        edges = box(part, variation)
        if edges is not None and edges[0] <= -1:
            field = "tempco" if part.tempco is not None else "ageing"
            raise where.error(f"spread, temperature drift and ageing together reach "
                              f"{100 * edges[0]:.1f} %: the value would reach zero",
                              path=path + (field,), part=part.name, field=field)


def read_variation(raw: object, where: Where) -> m.Variation:
    """The ``[variation]`` table (defaults for what it leaves out)."""
    path = ("variation",)
    if not isinstance(raw, dict):
        raise where.error("[variation] must be a table", path=path, part="variation")
    for key in raw:
        if key not in VARIATION_KEYS:
            raise where.error(f"unknown key {key!r}{suggest(key, VARIATION_KEYS)}; [variation] "
                              f"takes {quoted_list(VARIATION_KEYS)}", path=path + (key,),
                              part="variation", field=key)

    def fail(key: str, message: str):
        return where.error(message, path=path + (key,), part="variation", field=key)

    base = m.Variation()
    methods = raw.get("methods", list(base.methods))
    if not isinstance(methods, list) or not methods or \
            any(x not in m.METHODS for x in methods):
        raise fail("methods", f"methods must be a non-empty list of {quoted_list(m.METHODS)}, "
                              f"got {methods!r}")
    samples = raw.get("samples", base.samples)
    if isinstance(samples, bool) or not isinstance(samples, int) or \
            not 10 <= samples <= MAX_SAMPLES:
        raise fail("samples", f"samples must be a whole number from 10 to {MAX_SAMPLES:,}, "
                              f"got {samples!r}")
    seed = raw.get("seed", base.seed)
    if isinstance(seed, bool) or not isinstance(seed, int) or not 0 <= seed < 2 ** 63:
        raise fail("seed", f"seed must be a whole number ≥ 0, got {seed!r}")
    dist = raw.get("distribution", base.distribution)
    if dist not in m.DISTRIBUTIONS:
        raise fail("distribution", f"distribution must be {quoted_list(m.DISTRIBUTIONS)}, got "
                                   f"{dist!r}{suggest(str(dist), m.DISTRIBUTIONS)}")
    sigmas = raw.get("sigmas", base.sigmas)
    if isinstance(sigmas, bool) or not isinstance(sigmas, (int, float)) or \
            not 0.5 <= sigmas <= 10:
        raise fail("sigmas", f"sigmas must be a number from 0.5 to 10, got {sigmas!r}")
    return m.Variation(methods=tuple(dict.fromkeys(methods)), samples=samples, seed=seed,
                       distribution=dist, sigmas=float(sigmas),
                       temperature=_temperature(raw, fail))


def _temperature(raw: dict, fail) -> tuple[float, float] | None:
    """``temperature = ["-40 °C", "85 °C"]`` (or numbers in °C) -> (min, max)."""
    if "temperature" not in raw:
        return None
    value = raw["temperature"]
    out = []
    for item in value if isinstance(value, list) and len(value) == 2 else ():
        text = str(item) if isinstance(item, (int, float)) and not isinstance(item, bool) \
            else item
        match = re.match(_CELSIUS, text) if isinstance(text, str) else None
        if match:
            out.append(float(match.group(1).replace("−", "-")))
    if len(out) != 2 or not -273.15 < out[0] <= out[1] < 1000:
        raise fail("temperature", f"temperature must be [min, max] in °C, min ≤ max, such as "
                                  f"[\"-40 °C\", \"85 °C\"], got {value!r}")
    return (out[0], out[1])


def read_spec(raw: object, units: dict, where: Where, index: int, label: str) -> dict:
    """``spec = { crossing = { min = "95 ms", max = "130 ms" }, final = { max = "3 V" } }``
    -> field name -> ``Limits``; ``units`` maps each field to its dimension word."""
    path = ("expect", index, "spec")
    if not isinstance(raw, dict) or not raw:
        raise where.error("spec must be an inline table such as spec = { crossing = "
                          "{ max = \"120 ms\" } }", path=path, part=label, field="spec")
    out = {}
    for key, table in raw.items():
        name = key.replace("-", "_")
        field = f"spec.{key}"
        if name not in m.SPEC_FIELDS:
            names = [f.replace("_", "-") for f in m.SPEC_FIELDS]
            raise where.error(f"spec has no field {key!r}{suggest(key, names)}; it takes "
                              f"{quoted_list(names)}", path=path, part=label, field=field)
        if name not in units:
            raise where.error(f"spec.{key} needs the block to ask for {key} (a crossing "
                              f"level, an energy part)", path=path, part=label, field=field)
        out[name] = _limits(table, units[name], where, path + (key,), label, field)
    return out


def _limits(table: object, dimension: str, where: Where, path: tuple, label: str,
            field: str) -> m.Limits:
    if not isinstance(table, dict) or not table:
        raise where.error(f"{field} must be a table of {quoted_list(LIMIT_KEYS)}",
                          path=path, part=label, field=field)
    values = {}
    for key, raw in table.items():
        if key not in LIMIT_KEYS:
            raise where.error(f"{field} has no key {key!r}{suggest(key, LIMIT_KEYS)}; it takes "
                              f"{quoted_list(LIMIT_KEYS)}", path=path, part=label, field=field)
        values[key.replace("-", "_")] = where.quantity(raw, dimension, path=path + (key,),
                                                       part=label, field=f"{field}.{key}")
    for low, high in (("min", "max"), ("hand_min", "hand_max")):
        if low in values and high in values and not values[low] <= values[high]:
            raise where.error(f"{field}: {low.replace('_', '-')} is above "
                              f"{high.replace('_', '-')}", path=path, part=label, field=field)
    if "min" not in values and "max" not in values:
        raise where.error(f"{field} needs min or max", path=path, part=label, field=field)
    return m.Limits(**values)
