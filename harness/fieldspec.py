"""Every hand field of an ``[[expect]]`` block, declared once.

A ``FieldSpec`` says what the reader, the comparator and the reports need to know of one field:
its key in the file, its unit, the rule its hand value obeys, how the comparator finds the
engines' values and compares them (which engine tolerance, which absolute floor, whether values
below the probe's noise floor compare as zero), what may limit it over tolerances, and how the
reports label it.  ``FIELD_SPECS`` lists them in report order; the reader
(``circuitfile``), the comparator (``harness.compare``) and the reports loop over it, so adding
a field is one declaration here plus the engines' computation of it (DEVELOPERS.md, "How to add
a hand field").

This module is part of the model layer: it holds declarations and no behaviour.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

from . import tolerances as tol

#: ``FieldSpec.unit``: the probe's own unit (V for a voltage, A for a current)
PROBE_UNIT = "probe"

#: ``FieldSpec.sign``: any hand value / not below zero / above zero
ANY, NONNEGATIVE, POSITIVE = "any", "nonnegative", "positive"

#: ``FieldSpec.source``: where each engine's value comes from and who compares it -- the
#: attribute of ``results.Features`` of the same name, compared by ``compare.value``; or a
#: routine of its own (crossing, peak, energy, dominant τ, ring and overshoot:
#: ``compare.fields.ROUTINES``)
FEATURES, OWN = "features", "own"

#: ``FieldSpec.floor``: the absolute floor of the engine comparison (and of hand against the
#: closed form): ``tol.ENGINE_FLOOR`` (``tol.HAND_FLOOR``) of the probe's scale; none; the
#: crossing-time rule (a fraction of the interval's τ scale and the value floor at the slope);
#: the energy rule (``compare.energy.energy_floor``); ``tol.ENGINE_FLOOR`` (``tol.HAND_FLOOR``)
#: as an absolute fraction (a ratio such as the overshoot); ``tol.SETTLE_PERIOD_SLACK`` periods
#: (a count of periods)
PROBE_SCALE, NO_FLOOR, TIME_FLOOR, ENERGY_RULE, FRACTION, PERIODS = (
    "probe-scale", "none", "time", "energy", "fraction", "periods")

#: ``FieldSpec.judged``: where the engines' values are judged against each other -- wherever
#: both give one; not where the numerical engine does not resolve the event (a value just
#: after it); or, for a property of the interval's dynamics (τ), only where the closed form
#: gives one, the interval is not below the noise floor and the event is resolved
ALWAYS, RESOLVED, DYNAMICS = "always", "resolved", "dynamics"


@dataclass(frozen=True, eq=False)
class FieldSpec:
    """One hand field.

    Attributes:
        name: the field's name in the model and the results (``dominant_tau``).
        key: its key in an ``[[expect]]`` block (``dominant-tau``).
        unit: ``PROBE_UNIT``, or a fixed unit symbol: ``s``, ``J``, ``Hz``, ``1`` (a ratio).
        help: its description in the file-format reference.
        table: read as an inline table by a reader of its own (crossing, energy), not as one
            quantity.
        signoff: a sign-off field (reported only where asked); else one of the four classical
            fields, reported for every check.
        sign: the rule a hand value obeys: ``ANY``, ``NONNEGATIVE`` or ``POSITIVE``.
        percent: a hand value may be written as a percentage (``"16.3 %"``).
        source: ``FEATURES`` or ``OWN`` (above).
        engine_relative: closed form against numeric, relative (a named tolerance).
        floor: the absolute floor rule (above).
        noise: values below the probe's noise floor (``tol.PROBE_NOISE``) compare as zero.
        judged: where the engines are judged against each other: ``ALWAYS``, ``RESOLVED`` or
            ``DYNAMICS`` (above).
        spec: may carry spec limits judged over the parts' spreads (``Expectation.spec``).
        limited: what of the field the limits bound, where that is not its value (the
            crossing's time: ``" (its time)"``), for the file-format reference.
        label: the field's name in report tables (the crossing, peak and energy labels add
            their level, time and part from the result: ``report.common.field_label``).
        periodic: a value of the periodic steady state over one period of the circuit's
            repeating window (``results.PeriodicValue``, attribute of the same name): the
            circuit must have a ``repeat``, and ``at`` plays no part.
        whole: a count: the hand value is a whole number.
    """

    name: str
    key: str
    unit: str
    help: str
    table: bool = False
    signoff: bool = True
    sign: str = ANY
    percent: bool = False
    source: str = FEATURES
    engine_relative: float = tol.ENGINE_RELATIVE
    floor: str = PROBE_SCALE
    noise: bool = True
    judged: str = ALWAYS
    spec: bool = False
    limited: str = ""
    label: str = ""
    periodic: bool = False
    whole: bool = False

    def unit_for(self, probe_dimension: str) -> str:
        """The field's unit for a probe whose unit is ``probe_dimension`` (``V`` or ``A``)."""
        return probe_dimension if self.unit == PROBE_UNIT else self.unit

    @property
    def fixed_unit(self) -> str:
        """The unit when it does not depend on the probe, else ``""``."""
        return "" if self.unit == PROBE_UNIT else self.unit

    @property
    def help_unit(self) -> str:
        """The unit column of the file-format reference (``probe``, ``s``, … or ``""``)."""
        return "" if self.table or self.unit == "1" else self.unit

    @property
    def title(self) -> str:
        """The field's label in report tables."""
        return self.label or self.name


FIELD_SPECS: tuple[FieldSpec, ...] = (
    FieldSpec("before", "before", PROBE_UNIT, "value just before the event, x(t−)",
              signoff=False, spec=True),
    FieldSpec("after", "after", PROBE_UNIT, "value just after the event, x(t+), jumps included",
              signoff=False, judged=RESOLVED, spec=True),
    FieldSpec("final", "final", PROBE_UNIT,
              "value the interval heads to if nothing else happens, x(∞)",
              signoff=False, spec=True),
    FieldSpec("tau", "tau", "s", "the time constant of a first-order interval",
              signoff=False, sign=POSITIVE, floor=NO_FLOOR, noise=False, judged=DYNAMICS,
              spec=True),
    FieldSpec("crossing", "crossing", "s",
              "{ level = x (probe's unit), time = t (s, after the event; optional), "
              "direction = \"rising\" | \"falling\" | \"either\" }: when the probe "
              "first passes the level", table=True, source=OWN, floor=TIME_FLOOR, noise=False,
              spec=True, limited=" (its time)"),
    FieldSpec("peak", "peak", PROBE_UNIT, "largest magnitude |x| in the interval", source=OWN,
              spec=True),
    FieldSpec("energy", "energy", "J",
              "{ part = \"R1\", value = e (J; optional), until = t (s; optional) }: "
              "energy absorbed by a resistor, switch or controlled source (v·i) above the "
              "steady power, jump loss included (may be negative); with until, the whole "
              "energy from the event to that time", table=True, source=OWN,
              engine_relative=tol.ENERGY_ENGINE_RELATIVE, floor=ENERGY_RULE, noise=False,
              spec=True),
    FieldSpec("dominant_tau", "dominant-tau", "s",
              "a one-τ estimate of a higher-order probe: the sum of the time "
              "constants of the modes that reach it (zero-value time constants)",
              sign=POSITIVE, source=OWN, engine_relative=tol.DOMINANT_ENGINE, floor=NO_FLOOR,
              noise=False, spec=True, label="dominant τ (Σ zero-value τ)"),
    FieldSpec("ring_frequency", "ring-frequency", "Hz",
              "damped frequency f_d of the probe's slowest visible complex pair",
              sign=NONNEGATIVE, source=OWN, engine_relative=tol.RING_ENGINE_RELATIVE,
              floor=NO_FLOOR, noise=False),
    FieldSpec("damping", "damping", "1", "damping ratio ζ of that pair (λ = −ζω_n ± jω_n√(1 − ζ²))",
              sign=NONNEGATIVE, source=OWN, engine_relative=tol.RING_ENGINE_RELATIVE,
              floor=NO_FLOOR, noise=False),
    FieldSpec("q", "q", "1", "its quality factor Q = 1/(2ζ)", sign=NONNEGATIVE, source=OWN,
              engine_relative=tol.RING_ENGINE_RELATIVE, floor=NO_FLOOR, noise=False),
    FieldSpec("overshoot", "overshoot", "1",
              "how far the response passes its final value, as a fraction of the step "
              "(\"16.3 %\"); e^(−πζ/√(1 − ζ²)) for a pure second-order step",
              sign=NONNEGATIVE, percent=True, source=OWN,
              engine_relative=tol.RING_ENGINE_RELATIVE, floor=FRACTION, noise=False),
    FieldSpec("minimum", "minimum", PROBE_UNIT,
              "periodic steady state: the smallest value over a period of the repeating "
              "window (between events)", source=OWN, noise=False, periodic=True, spec=True,
              label="minimum over a period (periodic steady state)"),
    FieldSpec("maximum", "maximum", PROBE_UNIT,
              "periodic steady state: the largest value over a period", source=OWN,
              noise=False, periodic=True, spec=True,
              label="maximum over a period (periodic steady state)"),
    FieldSpec("average", "average", PROBE_UNIT,
              "periodic steady state: the average over a period, impulses at events included",
              source=OWN, noise=False, periodic=True, spec=True,
              label="average over a period (periodic steady state)"),
    FieldSpec("ripple", "ripple", PROBE_UNIT,
              "periodic steady state: maximum − minimum over a period (peak-to-peak)",
              sign=NONNEGATIVE, source=OWN, noise=False, periodic=True, spec=True,
              label="ripple over a period (periodic steady state)"),
    FieldSpec("settle_periods", "settle-periods", "1",
              "periods from the window's first event until the probe stays within "
              "settle-within of its first period's deviation from the steady state",
              sign=NONNEGATIVE, source=OWN, floor=PERIODS, noise=False, periodic=True,
              whole=True, spec=True, label="periods to settle"),
)

#: field name -> its declaration
FIELD_SPEC: Mapping[str, FieldSpec] = {spec.name: spec for spec in FIELD_SPECS}
#: file key -> its declaration
FIELD_BY_KEY: Mapping[str, FieldSpec] = {spec.key: spec for spec in FIELD_SPECS}


def field_spec(name: str) -> FieldSpec:
    """The declaration of the field ``name`` (KeyError for an unknown one)."""
    return FIELD_SPEC[name]
