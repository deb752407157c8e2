"""Part values that are almost always a prefix slip (``1 MF`` for 1 mF), and what was meant.

Each passive kind has a plausible range; a value outside it is read as written (the check still
runs) but the reader warns, naming the value meant most likely: the same digits with the
case-swapped prefix (``M`` -> ``m``) when that lands in the kind's usual range, else with the
usual-range prefix nearest the written one.  The ranges, in SI units (common practice for
discrete parts; each bound is several decades beyond real parts):

=========  ================  =========================================================
kind       plausible         why the bounds
=========  ================  =========================================================
resistor   1 µΩ to 1 TΩ      current shunts go down to ~50 µΩ, insulation and
                             electrometer resistors up to ~100 GΩ
capacitor  10 aF to 100 kF   parasitics are ~0.1 fF; supercapacitor cells reach ~3 kF
                             and the polarisation capacitance of battery-cell models
                             tens of kF (the bundled cell model uses 1.5 kF)
inductor   1 pH to 1 kH      a bond wire is ~1 nH; mains chokes and relay coils reach
                             tens of henries
=========  ================  =========================================================

Usual ranges (where a suggestion must land): resistor 1 mΩ to 100 MΩ, capacitor 1 pF to 1 F,
inductor 1 nH to 10 H.
"""

from __future__ import annotations

import math

from . import model as m
from .units import format_si

#: kind -> (lowest, highest) plausible value in SI units (module doc)
PLAUSIBLE = {m.RESISTOR: (1e-6, 1e12), m.CAPACITOR: (1e-17, 1e5), m.INDUCTOR: (1e-12, 1e3)}
#: kind -> (lowest, highest) usual value: where a suggested reading must land
USUAL = {m.RESISTOR: (1e-3, 1e8), m.CAPACITOR: (1e-12, 1.0), m.INDUCTOR: (1e-9, 10.0)}
_RANGE_TEXT = {m.RESISTOR: "1 µΩ to 1 TΩ", m.CAPACITOR: "10 aF to 100 kF",
               m.INDUCTOR: "1 pH to 1 kH"}
_UNIT = {m.RESISTOR: "ohm", m.CAPACITOR: "F", m.INDUCTOR: "H"}
#: engineering prefix exponents and their case-swapped slips (m milli <-> M mega)
_SWAP = {6: -3, -3: 6}


def implausible(kind: str, value: float) -> str | None:
    """A message when ``value`` (SI) is outside ``kind``'s plausible range, else None.

    The message names the range and the value most likely meant, e.g. "is implausible for a
    capacitor (plausible: 10 aF to 100 kF): did you mean 1 mF?" (for 1 MF).
    """
    if kind not in PLAUSIBLE or not value > 0:
        return None
    low, high = PLAUSIBLE[kind]
    if low <= value <= high:
        return None
    unit = _UNIT[kind]
    article = "an" if kind[0] in "aeiou" else "a"
    text = f"is implausible for {article} {kind} (plausible: {_RANGE_TEXT[kind]})"
    meant = likely_meant(kind, value)
    return text + (f": did you mean {format_si(meant, unit)}?" if meant is not None else "")


def likely_meant(kind: str, value: float) -> float | None:
    """The same digits with another engineering prefix, in ``kind``'s usual range (module doc);
    None when no prefix brings them there."""
    written = 3 * math.floor(math.log10(value * (1 + 1e-12)) / 3)  # the prefix exponent
    digits = value / 10.0 ** written
    low, high = USUAL[kind]
    fits = [e for e in range(-15, 13, 3) if low <= digits * 10.0 ** e <= high]
    if not fits:
        return None
    swapped = _SWAP.get(written)
    best = swapped if swapped in fits else min(fits, key=lambda e: (abs(e - written), e))
    return digits * 10.0 ** best
