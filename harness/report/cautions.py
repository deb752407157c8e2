"""The safety note for circuits at hazardous voltage or storing hazardous energy.

Thresholds (both are common practice, not a ruling of any one standard):

* ``HAZARD_VOLTAGE`` = 60 V: the usual upper limit of extra-low-voltage DC circuits that may be
  touched in dry conditions (the 60 V DC figure of the SELV/ES1 classes in the IEC safety
  standards, quoted from memory).  A circuit *above* 60 V gets the note; 60 V itself does not.
* ``HAZARD_ENERGY`` = 1 J: the conservative end of "a few joules" of stored energy.  Laboratory
  safety guidance commonly treats a capacitor holding about a joule or more as able to injure by
  shock, burn or arc flash on a short (from memory; no single standard fixes the number).

The note is generic: it lists the usual cautions and defers to local codes and licensed practice.
It never says a circuit is safe.

Where parts spread (``spread``, ``tempco``, ``ageing``: ``harness.variation.declare.box``) the
note is judged at the worst corner, not at nominal: a 400 V source at +10 % is 440 V.  Source
values and steps take their magnitude's high edge; a capacitor's or inductor's value its high
edge for the ½CV² / ½LI² estimates.  Voltages and stored energies an engine computed at nominal
are scaled by the largest source factor s (energies by s² and the part's own factor): exact when
only sources spread, an estimate otherwise; the extremes of spec'd voltage fields
(``corner_voltages``) are worst-corner values computed as such.
"""

from __future__ import annotations

from typing import Iterable, Mapping

from ..model import CAPACITOR, CURRENT_SOURCE, INDUCTOR, SOURCES, VOLTAGE_SOURCE, Circuit, Part
from ..units import format_si
from ..variation.declare import box

#: volts; a circuit reaching more than this gets the note (common practice: 60 V DC)
HAZARD_VOLTAGE = 60.0
#: joules; a capacitor or inductor that can hold more than this gets the note
HAZARD_ENERGY = 1.0

#: where a computed voltage came from, in the hazardous-voltage caution (node voltages of the
#: closed form, and the extremes of spec'd voltage fields)
COMPUTED = "a voltage the engines computed in the circuit"

DEFERRAL = ("These notes are general reminders, not a safety assessment: follow the local "
            "electrical codes, the product safety standards that apply, and licensed practice for "
            "work on this circuit.")


def cautions_for(circuit: Circuit, *, voltages: Iterable[float] = (), jumps: Iterable = (),
                 corner_voltages: Iterable[float] = ()) -> tuple[str, ...]:
    """The safety note for ``circuit``: an empty tuple, or the cautions as sentences.

    Args:
        circuit: the parsed circuit.  Its source values and steps and its capacitor initial
            voltages are the voltages it certainly reaches.
        voltages: computed voltages in V the caller knows (probe values from an engine, any
            sign, at nominal values); they raise the highest voltage considered, scaled to the
            worst corner where sources spread.
        jumps: ``harness.results.Jump`` objects (or objects with ``stored_before``,
            ``stored_after`` and ``energy``); their stored energies replace the estimate below
            for the parts they name, and their dissipated energies are quoted for pulse ratings.
        corner_voltages: voltages in V already computed at worst corners (the extremes of
            spec'd voltage fields), taken as they are.

    Without computed energies a capacitor's energy is estimated as ½·C·V² at the higher of its
    initial voltage and the circuit's highest voltage (an upper estimate), and an inductor's as
    ½·L·I² at the higher of its initial current and the largest current-source magnitude.
    """
    jumps = tuple(jumps)
    scale = max([factor(circuit, p) for p in circuit.parts if p.kind in SOURCES] + [1.0])
    peak, where = _highest_voltage(circuit, [v * scale for v in voltages if v is not None],
                                   COMPUTED if scale == 1.0 else
                                   COMPUTED + " scaled to the sources' worst corner")
    for value in corner_voltages:
        if value is not None and abs(value) > peak and abs(value) != float("inf"):
            peak, where = abs(value), "a spec'd value at an extreme corner of the spreads"
    stored = _stored_energies(circuit, peak, jumps, scale)
    hot = {name: (joules, how) for name, (joules, how) in stored.items() if joules > HAZARD_ENERGY}
    cut = [j for j in jumps if getattr(j, "forced", None) and getattr(j, "opened", ())]
    if peak <= HAZARD_VOLTAGE and not hot and not cut:
        return ()
    notes: list[str] = []
    if cut:
        notes.append("Interrupted coil current: opening a switch in series with an inductor "
                     "gives a voltage spike limited only by what breaks down (the switch, its "
                     "insulation, a person touching the circuit); give every coil a flyback path "
                     "(diode, snubber or clamp) rated for its current and stored energy.")
    if peak > HAZARD_VOLTAGE:
        notes.append(f"Hazardous voltage: the circuit reaches {format_si(peak, 'V')} ({where}), "
                     f"above the {format_si(HAZARD_VOLTAGE, 'V')} DC that common practice treats "
                     f"as extra-low voltage.")
    for name, (joules, how) in sorted(hot.items(), key=lambda item: -item[1][0]):
        notes.append(f"Stored energy: {name} {how}, above the {format_si(HAZARD_ENERGY, 'J')} "
                     f"this report flags.")
    notes.extend(_storage_notes(circuit))
    notes.append("Pulse ratings: the parts that absorb a step's pulse (series and pre-charge "
                 "resistors, switches, snubbers, fuses) must be rated for the pulse energy and "
                 "peak voltage, not only for average power." + _pulse_text(jumps))
    if peak > HAZARD_VOLTAGE:
        notes.append("Insulation: creepage, clearance and insulation ratings of parts, board and "
                     "wiring must suit the working voltage; use probes and meters rated for it.")
    notes.append(DEFERRAL)
    return tuple(notes)


def _storage_notes(circuit: Circuit) -> list[str]:
    """The cautions about stored charge and discharge paths, for the storage kinds the circuit
    holds: a coil-only circuit gets no note about capacitors, and the other way round."""
    kinds = {part.kind for part in circuit.parts}
    notes: list[str] = []
    if CAPACITOR in kinds:
        notes.append("Stored charge after power-off: capacitors can stay charged long after the "
                     "supply is removed or a fuse opens; measure the voltage before touching, and "
                     "do not rely on a calculated time constant alone.")
        notes.append("Discharge paths: provide a bleeder or discharge path rated for the voltage "
                     "and energy, and check it brings the voltage below a safe level in the "
                     "required time (after 5 τ about 0.7 % remains)"
                     + ("; inductor currents need a flyback path." if INDUCTOR in kinds else "."))
    elif INDUCTOR in kinds:
        notes.append("Discharge paths: inductor currents need a flyback path rated for the "
                     "current and stored energy whenever the supply or a switch can open.")
    return notes


def factor(circuit: Circuit, part: Part) -> float:
    """The factor on the magnitude of ``part``'s value at the high edge of its box (1 when it
    does not spread)."""
    edges = box(part, circuit.variation)
    return 1.0 if edges is None else 1.0 + edges[1]


def _highest_voltage(circuit: Circuit, voltages: Iterable[float],
                     computed: str = COMPUTED) -> tuple[float, str]:
    """The highest voltage magnitude in V the circuit is known to reach, and where (a source
    at the high edge of its spread)."""
    peak, where = 0.0, "nowhere"
    for part in circuit.parts:
        candidates: list[float] = []
        scale = 1.0
        if part.kind == VOLTAGE_SOURCE:
            scale = factor(circuit, part)
            candidates = [scale * v for v in [part.value or 0.0] + [v for _, v in part.steps]]
        elif part.kind == CAPACITOR and part.initial is not None:
            candidates = [part.initial]
        for value in candidates:
            if abs(value) > peak:
                peak, where = abs(value), part.name if scale == 1.0 else \
                    f"{part.name} at {100 * (scale - 1):+.3g} % of its value, the edge of " \
                    f"its spread"
    for value in voltages:
        if value is not None and abs(value) > peak and abs(value) != float("inf"):
            peak, where = abs(value), computed
    return peak, where


def _stored_energies(circuit: Circuit, peak: float, jumps: tuple,
                     scale: float = 1.0) -> dict[str, tuple[float, str]]:
    """Part name -> (energy in J, wording) for every capacitor and inductor; ``scale`` is the
    largest source factor at the worst corner (computed energies grow with its square)."""
    computed: dict[str, float] = {}
    for jump in jumps:
        for table in (getattr(jump, "stored_before", {}), getattr(jump, "stored_after", {})):
            for name, joules in _items(table):
                computed[name] = max(computed.get(name, 0.0), abs(joules))
    largest_current = max([factor(circuit, p) * abs(v) for p in circuit.parts
                           if p.kind == CURRENT_SOURCE
                           for v in [p.value or 0.0] + [v for _, v in p.steps]] + [0.0])
    out: dict[str, tuple[float, str]] = {}
    for part in circuit.parts:
        grow = factor(circuit, part) * scale ** 2
        if part.name in computed and grow != 1.0:
            joules = computed[part.name] * grow
            out[part.name] = (joules, f"holds about {format_si(joules, 'J')} at an event at the "
                                      f"worst corner of the spreads (computed at nominal: "
                                      f"{format_si(computed[part.name], 'J')})")
        elif part.name in computed:
            joules = computed[part.name]
            out[part.name] = (joules, f"holds {format_si(joules, 'J')} at an event (computed)")
        elif part.kind == CAPACITOR and part.value:
            volts = max(abs(part.initial or 0.0), peak)
            joules = 0.5 * factor(circuit, part) * part.value * volts ** 2
            out[part.name] = (joules, f"can hold up to {format_si(joules, 'J')} "
                                      f"(½CV² at {format_si(volts, 'V')})")
        elif part.kind == INDUCTOR and part.value:
            amps = max(abs(part.initial or 0.0), largest_current)
            joules = 0.5 * factor(circuit, part) * part.value * amps ** 2
            out[part.name] = (joules, f"can hold up to {format_si(joules, 'J')} "
                                      f"(½LI² at {format_si(amps, 'A')})")
    return out


def _items(table) -> list[tuple[str, float]]:
    if isinstance(table, Mapping):
        return [(str(k), float(v)) for k, v in table.items() if v is not None]
    return []


def _pulse_text(jumps: tuple) -> str:
    """`` The largest pulse dissipates 2 J at t = 1 ms.`` or ``""``."""
    best = None
    for jump in jumps:
        energy = getattr(jump, "energy", None)
        if energy is not None and (best is None or energy > best[0]):
            best = (energy, getattr(jump, "time", 0.0))
    if best is None or best[0] <= 0:
        return ""
    return (f" The largest step here dissipates {format_si(best[0], 'J')} at "
            f"t = {format_si(best[1], 's')}.")
