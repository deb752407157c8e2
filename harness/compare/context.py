"""What the comparison of one expectation knows beyond its own values.

``CheckContext`` carries the circuit, both engines' solutions, the probe and the event, and the
scales every comparison is judged against: the probe's scale (``probe_scale``, the tolerance
floors), its noise floor (``tol.PROBE_NOISE`` of the circuit's scale in its unit), whether the
interval is quiet (below that floor) or unresolved by the numerical engine.  The circuit's
scales in volts and amperes (``source_magnitudes``, ``current_scale``) are defined once here.
"""

from __future__ import annotations

import math
from functools import cached_property

import numpy as np

from .. import tolerances as tol
from ..model import (ACROSS, BETWEEN, CURRENT_SOURCE, NODE, RESISTOR, THROUGH, VOLTAGE_SOURCE,
                     Circuit, Expectation, Probe)
from ..messages import text
from ..results import (BELOW_RESOLUTION, IMPULSIVE, NOT_REACHED, UNRESOLVED_MODE, Diagnostic,
                       Features, Solution)


def direction(probe: Probe, circuit: Circuit) -> str:
    """The probe's reference direction in words (passive sign convention)."""
    if probe.kind == NODE:
        return f"v({probe.targets[0]}) − v({circuit.ground})"
    if probe.kind == BETWEEN:
        return f"v({probe.targets[0]}) − v({probe.targets[1]})"
    part = circuit.part(probe.targets[0])
    if probe.kind == ACROSS:
        return f"v({part.p}) − v({part.n}), + at {part.p}"
    return f"current from {part.p} through {part.name} to {part.n}"


def probe_scale(circuit: Circuit, exact: Solution, probe: Probe) -> float:
    """Largest magnitude the probe takes at any event (before, after, final), for tolerance
    floors; a probe that is ~0 at every event (a pulse through a coupling capacitor, a current
    sensed while a capacitor charges) takes its peaks within the intervals as well, so that its
    rounding noise at the events is not judged against its own noise."""
    values = []
    for k in range(len(circuit.events)):
        f = exact.features(probe, k)
        values += [abs(v) for v in (f.before, f.after, f.final) if v is not None]
    scale = max(values, default=0.0)
    if scale <= tol.SCALE_FROM_PEAKS * circuit.largest_source():
        for k in range(len(circuit.events)):
            if exact.withheld(k):
                continue
            try:
                magnitude = exact.peak(probe, k).magnitude
            except (ValueError, ArithmeticError, np.linalg.LinAlgError):
                continue
            if magnitude is not None and math.isfinite(magnitude):
                scale = max(scale, abs(magnitude))
    return scale if scale > 0 else circuit.largest_source()


def snap_zero(value: float | None, scale: float) -> float | None:
    """0.0 for a closed-form value that is rounding noise (below ``tol.ZERO_NOISE`` of the scale)."""
    if value is not None and abs(value) < tol.ZERO_NOISE * scale:
        return 0.0
    return value


def below_noise(value: float | None, noise: float) -> float | None:
    """0.0 for a value below the probe's noise floor (``tol.PROBE_NOISE``), else the value."""
    if value is not None and math.isfinite(value) and abs(value) < noise:
        return 0.0
    return value


def hand_relative(exp: Expectation, ctx: CheckContext) -> float:
    """The expectation's relative hand tolerance, else the file's."""
    return exp.tolerance if exp.tolerance is not None else ctx.circuit.settings.tolerance


def tau_scale(fe: Features, ctx: CheckContext) -> float:
    """The interval's τ scale: the probe's slowest visible τ, else a tenth of the span."""
    if fe.modes:
        return fe.modes[0]
    start, end = ctx.exact.span(ctx.k)
    return max((end - start) / 10.0, 1e-300)


class CheckContext:
    """What the comparison of one expectation needs to know beyond its own values."""

    def __init__(self, circuit: Circuit, exact: Solution, numeric: Solution | None,
                 probe: Probe, k: int) -> None:
        self.circuit = circuit
        self.exact = exact
        self.numeric = numeric
        self.probe = probe
        self.k = k

    @cached_property
    def scale(self) -> float:
        """The probe's scale (``probe_scale``), at least its noise floor, computed on first
        use."""
        return max(probe_scale(self.circuit, self.exact, self.probe), self.noise)

    @cached_property
    def interval_scale(self) -> float:
        """The probe's scale in interval k for the engines' floors: ``scale``, or the largest
        magnitude the closed form's waveform takes in the interval (its peak) where that is
        larger.  Each engine's absolute error on a value follows what the waveform does around
        it: 13 nA at an event before a 0.67 mA ring 1.3 us later was read 1.6e-12 A apart
        (1.3e-4 of it, 2.4e-9 of the ring)."""
        if self.exact.withheld(self.k):
            return self.scale
        try:
            magnitude = self.exact.peak(self.probe, self.k).magnitude
        except (ValueError, ArithmeticError, np.linalg.LinAlgError):
            return self.scale
        if magnitude is None or not math.isfinite(magnitude):
            return self.scale
        return max(self.scale, abs(magnitude))

    @cached_property
    def noise(self) -> float:
        """The probe's noise floor in its unit: ``tol.PROBE_NOISE`` of the circuit's scale."""
        return tol.PROBE_NOISE * circuit_scale(self.circuit, self.probe)

    @cached_property
    def unresolved(self) -> str:
        """Why the numerical engine's values just after event k are not judged, or "": the
        closed form sees a mode in the probe faster than that engine resolves after the event
        (``resolution``: its pulse cannot be made narrow enough there), a limit of that
        engine, not a disagreement (the ``unresolved-mode`` diagnostic's sentence)."""
        return self._unresolved(self.probe, "probe")

    def unresolved_energy(self, part: str) -> str:
        """Why the numerical engine's energy of ``part`` in interval k is not judged, or "":
        the closed form sees a mode in the part's current faster than that engine resolves
        after the event (the energy's first instants carry it), a limit of that engine."""
        return self._unresolved(Probe(THROUGH, (part,)), "energy")

    def _unresolved(self, probe: Probe, detail: str) -> str:
        limit = None if self.numeric is None else self.numeric.resolution(self.k)
        if limit is None:
            return ""
        impulse = next((h for h in self.exact.hazards if h.code == IMPULSIVE
                        and h.time == self.circuit.events[self.k]), None)
        if impulse is not None:
            return (f"not cross-checked after the event: it drives an impulse through "
                    f"{', '.join(impulse.parts)} (the impulsive-response finding), whose "
                    f"narrow pulse in the numerical engine swamps what follows it; the closed "
                    f"form's after-value, τ, order, peak, crossing and dominant τ stand alone: "
                    f"a limit of the numerical engine")
        fast = [t for t in self.exact.features(probe, self.k).modes if t < limit]
        if not fast:
            return ""
        parts = probe.targets if detail == "energy" else ()
        return text(Diagnostic(UNRESOLVED_MODE, self.circuit.events[self.k], self.k,
                               parts=parts, values=(("tau", min(fast)), ("reach", limit)),
                               detail=detail))

    def below_resolution(self, name: str, closed: float | None, numeric: float | None,
                         unit: str) -> str:
        """Why the engines' values of field ``name`` (the probe's unit) are not judged though
        apart by more than the engines' tolerance, or "": they differ by less than the
        numerical engine's own resolution of the probe (``value_resolution``, the one
        comparison rule with that as its floor), a limit of that engine (the
        ``below-resolution`` diagnostic's sentence).  Where that bound is the reason, the
        engine's own re-solve at tighter tolerances (``refined_resolution``) narrows it: a
        current through a capacitor across a source, bounded by 2.0 A, is then established
        to ~10 nA, and a difference beyond that is a disagreement."""
        limit = None if self.numeric is None else self.numeric.value_resolution(self.probe,
                                                                                self.k)
        if limit is None or closed is None or numeric is None \
                or not tol.agree(closed, numeric, 0.0, limit):
            return ""
        refined = self.numeric.refined_resolution(self.probe, self.k, name)
        narrowed = refined is not None and refined < limit
        if narrowed:
            limit = refined
            if not tol.agree(closed, numeric, 0.0, limit):
                return ""
        return text(Diagnostic(BELOW_RESOLUTION, self.circuit.events[self.k], self.k,
                               values=(("closed", closed), ("numeric", numeric),
                                       ("resolution", limit)), detail=f"{name} {unit}",
                               refined=narrowed))

    @property
    def unjudged(self) -> bool:
        """Whether the interval's dynamics (crossing, peak, dominant τ, ring, order, waveform)
        get no engine verdict: below the noise floor, unresolved by the numerical engine, or
        not reached by it."""
        return self.quiet or bool(self.unresolved) or bool(self.stopped)

    @cached_property
    def stopped(self) -> tuple[Diagnostic, ...]:
        """The numerical engine's ``not-reached`` note when its integration stopped before
        interval k (a work budget, a breakdown: the file's warnings say which), else (): its
        missing values there are its reported limit, not a disagreement."""
        if self.numeric is None:
            return ()
        notes = self.numeric.features(self.probe, self.k).notes
        return tuple(n for n in notes if isinstance(n, Diagnostic) and n.code == NOT_REACHED)

    @cached_property
    def quiet(self) -> bool:
        """Whether the probe stays below its noise floor in interval k: its values at the
        event and its closed-form peak (nothing there for the engines to time or fit)."""
        fe = self.exact.features(self.probe, self.k)
        values = [abs(v) for v in (fe.before, fe.after, fe.final) if v is not None]
        if max(values, default=0.0) >= self.noise:
            return False
        if self.exact.withheld(self.k):
            return True
        try:
            magnitude = self.exact.peak(self.probe, self.k).magnitude
        except (ValueError, ArithmeticError, np.linalg.LinAlgError):
            return True
        return magnitude is None or not magnitude >= self.noise


def source_magnitudes(circuit: Circuit) -> tuple[float, float]:
    """(largest independent voltage source value in V, largest current source value in A)."""
    volts, amps = [0.0], [0.0]
    for p in circuit.parts:
        if p.kind in (VOLTAGE_SOURCE, CURRENT_SOURCE):
            mags = [abs(p.value or 0.0)] + [abs(v) for _, v in p.steps]
            (volts if p.kind == VOLTAGE_SOURCE else amps).extend(mags)
    return max(volts), max(amps)


def current_scale(circuit: Circuit, r_min: float) -> float:
    """V_s / r_min + I_s in A: the largest current the circuit's sources (largest source
    voltage V_s, largest source current I_s) drive through a resistance ``r_min``."""
    v_s, i_s = source_magnitudes(circuit)
    return v_s / r_min + i_s


def circuit_scale(circuit: Circuit, probe: Probe) -> float:
    """The circuit's own scale in the probe's unit: the largest source voltage (or source
    current times the largest resistance) for a voltage, V_s / R_min + I_s for a current."""
    res = [abs(p.value) for p in circuit.parts if p.kind == RESISTOR and p.value]
    if probe.kind == THROUGH:
        return current_scale(circuit, min(res, default=1.0))
    v_s, i_s = source_magnitudes(circuit)
    return max(v_s, i_s * max(res, default=1.0))
