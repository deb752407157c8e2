"""What an engine returns: the contract both engines fill and the comparator reads.

Neither engine imports the other; both return an object that satisfies ``Solution``.  All values
are in SI base units.  Event index k refers to ``Circuit.events[k]``; interval k runs from event k
to event k+1 (the last one is open-ended).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping, Protocol

import numpy as np

from .model import Circuit, Probe


# ----------------------------------------------------------------------------- diagnostics
@dataclass(frozen=True)
class Diagnostic:
    """A condition an engine reports, as data; engines write no English.  The sentence for each
    ``code`` is written in one place, ``harness.messages`` (one function per code, every number
    through ``units.format_si``).  Two diagnostics are the same when their code, time, interval,
    parts, nodes, values and detail are: that is how they are de-duplicated (``engine`` is not
    part of that identity).

    Attributes:
        code: what happened, one of ``DIAGNOSTIC_CODES`` (below, each with what it carries).
        time: the event or moment it concerns, in s (None where none applies).
        interval: the interval index k it concerns (None where none applies).
        parts: the parts involved, in the order the sentence names them.
        nodes: the nodes involved.
        values: (name, value) pairs in SI units (a tuple, so the diagnostic is hashable); read
            one with ``value(name)``.
        detail: a machine token refining the code (an integrator status such as ``horizon``),
            never a sentence; empty where none.
        refined: whether its values were established by the numerical engine's re-solve at
            tighter tolerances (``below-resolution``: ``Solution.refined_resolution``) rather
            than from its integration tolerance; False where that does not apply.
        engine: ``numeric`` when the numerical engine reports it (the reports name that
            engine), else empty.
    """

    code: str
    time: float | None = None
    interval: int | None = None
    parts: tuple[str, ...] = ()
    nodes: tuple[str, ...] = ()
    values: tuple[tuple[str, float], ...] = ()
    detail: str = ""
    refined: bool = False
    engine: str = field(default="", compare=False)

    def value(self, name: str, default: float | None = None) -> float | None:
        """The value named ``name`` (SI units), or ``default``."""
        return dict(self.values).get(name, default)


# The diagnostic codes, each with what it carries.  Closed form, circuit-wide
# (``Solution.warnings``, ``Jump.warnings``):
FLOATING_NODES = "floating-nodes"          # time, nodes: only open switches reach them (0 V)
UNDAMPED_OSCILLATION = "undamped-oscillation"  # time, value frequency (Hz): never settles
STATE_OVERFLOW = "state-overflow"          # time: the state left floating-point range
IMPULSE_DERIVATIVE = "impulse-derivative"  # time: the jump carries a derivative of an impulse
# Why a jump happens (``Jump.loops``):
IMPULSIVE_CURRENT = "impulsive-current"    # time, parts: capacitors in a loop
IMPULSIVE_VOLTAGE = "impulsive-voltage"    # time, parts: inductors in a cutset
# One probe at one event (``Features.notes``):
RESPONSE_OVERFLOW = "response-overflow"    # the response left floating-point range
NO_DECAY = "no-decay"                      # value frequency (Hz): oscillates without decay
GROWING_MODE = "growing-mode"              # value rate (1/s): grows without bound
NO_DC_PATH = "no-dc-path"                  # charge with no DC path: grows without bound
# The numerical engine (``engine="numeric"``):
PULSE_GROWTH = "pulse-growth"              # interval, time, value growth (1/s; inf: singular)
# interval, time, value end (s), the node (nodes) or inductor/carrier (parts) most visible;
# detail no-operating-point, blow-up, horizon, failed or no-origin (settled, to an operating
# point its DC solve did not establish):
UNSETTLED = "unsettled"
# interval, time, values steps, step-budget, eval-budget; detail solve or interval:
WORK_BUDGET = "work-budget"
BREAKDOWN = "integrator-breakdown"         # interval, time: an overflowing or singular system
STOPPED = "integration-stopped"            # interval, time: later intervals not reported
NOT_REACHED = "not-reached"                # time (interval for a probe): stopped before it
NO_FINAL = "no-final-value"                # interval, time; detail: the integrator's status
SIGN_CHANGE = "sign-change"                # the post-pulse response changes sign
# values deviation (the largest |x - x_inf| after the pulse) and noise (the integration's own
# error in the probe), both in the probe's unit (detail: that unit): the deviation is within
# that error, so no time constant is established
FLAT_RESPONSE = "flat-response"
# Either engine, one probe at one event (``Features.notes``): time, interval, parts the
# resistors and outputs carrying the impulse (``IMPULSIVE`` hazard): the probe itself carries
# an impulse there, so no value just after the event is claimed (``after`` is None):
IMPULSIVE_VALUE = "impulsive-value"
# Either engine, one probe at t = 0- (``Features.notes``): time 0, parts the probed part then
# the rest of the loop of capacitors and voltage-type parts its current circulates in, detail
# the parts with ``initial`` (comma-separated names): the state at 0- is not at rest, so the
# resistive network at 0- does not fix that current (``before`` is None):
UNDEFINED_CURRENT = "undefined-loop-current"
# Found by the comparator from the numerical engine's ``resolution``: interval, time, values
# tau (s, the closed form's fastest mode there) and reach (s, what the numerical engine
# resolves after the event); detail ``probe`` (the probe's values after the event) or
# ``energy`` (parts: the part whose current carries the mode):
UNRESOLVED_MODE = "unresolved-mode"
# Found by the comparator from the numerical engine's ``value_resolution``: interval, time,
# detail the field, values closed (the closed form's value), numeric (the numerical engine's)
# and resolution (that engine's resolution of the probe, in the probe's unit: the two differ
# by less, though by more than the engines' tolerance); detail "FIELD UNIT"; ``refined``
# where that engine's re-solve at tighter tolerances established the resolution
# (``refined_resolution``):
BELOW_RESOLUTION = "below-resolution"
#: every diagnostic code an engine may report (each has its sentence in ``harness.messages``)
DIAGNOSTIC_CODES = (FLOATING_NODES, UNDAMPED_OSCILLATION, STATE_OVERFLOW, IMPULSE_DERIVATIVE,
                    IMPULSIVE_CURRENT, IMPULSIVE_VOLTAGE, RESPONSE_OVERFLOW, NO_DECAY,
                    GROWING_MODE, NO_DC_PATH, PULSE_GROWTH, UNSETTLED, WORK_BUDGET, BREAKDOWN,
                    STOPPED, NOT_REACHED, NO_FINAL, SIGN_CHANGE, FLAT_RESPONSE, UNDEFINED_CURRENT,
                    IMPULSIVE_VALUE, UNRESOLVED_MODE, BELOW_RESOLUTION)


# eq=False: results are never compared or hashed by value (identity is enough), and a frozen
# dataclass without eq compiles two methods fewer at import (start-up; DEVELOPERS.md)
@dataclass(frozen=True, eq=False)
class Features:
    """One engine's values for one probe at one event.

    Attributes:
        before: x(t_k-), the value just before the event.
        after: x(t_k+), the value just after any impulse at the event.
        final: x-infinity of interval k (the value it heads to with its sources held), or None
            where it is unbounded or oscillates without decay.
        tau: the time constant in s when the probe is first order in interval k, else None.
        order: how many decaying modes are visible in the probe in interval k (a complex pair
            counts 2, a repeated defective mode counts its multiplicity); None if the engine
            cannot tell.
        modes: visible time constants in s, slowest first, identical ones merged (for a complex
            pair, the envelope time constant -1/Re(lambda) once).
        oscillation: frequencies in Hz of visible complex pairs (empty for real modes).
        notes: diagnostics about this probe at this event (unbounded growth, no decay …), as
            ``Diagnostic`` data (the trust guard adds its own note as text).
        dominant_tau: for a probe that is not first order, the first-order estimate an
            engineer would make: the sum of the zero-value time constants of interval k (see
            ``DominantTau``), in s; None for first-order probes or where the engine has none.
        rings: (damped frequency f_d in Hz, damping ratio zeta) of every visible decaying
            complex pair lambda = -zeta w_n +- j w_n sqrt(1 - zeta^2), slowest envelope first;
            Q = 1 / (2 zeta).
        order_bounds: (lowest, highest) order the engine would give with its visibility
            threshold 100 times higher and lower, where its amplitudes carry errors that could
            move a mode across the threshold (None: ``order`` is exact).
    """

    before: float | None
    after: float | None
    final: float | None
    tau: float | None = None
    order: int | None = None
    modes: tuple[float, ...] = ()
    oscillation: tuple[float, ...] = ()
    notes: tuple[Diagnostic | str, ...] = ()
    dominant_tau: float | None = None
    rings: tuple[tuple[float, float], ...] = ()
    order_bounds: tuple[int, int] | None = None


@dataclass(frozen=True, eq=False)
class Jump:
    """What happens at the instant of event k.

    Attributes:
        time: the event time in s.
        charges: part name -> impulsive charge in C moved through the part (p to n) at the instant,
            for every part that carries one (capacitors, voltage sources, ideal switches, inductors
            …); empty when nothing jumps.
        fluxes: part name -> impulsive voltage-time integral in V·s across the part, for parts
            that see an impulse of voltage (an interrupted or forced inductor current).
        energy: energy in J dissipated at the instant (stored energy lost plus work done by the
            independent sources during the impulse), or None where it is undefined (impulses
            through controlled sources).
        stored_before, stored_after: part name -> energy in J held by each capacitor and
            inductor just before and just after the instant.
        loops: why the jump happens, as ``Diagnostic`` data (impulsive current through
            capacitors in a loop, impulsive voltage across inductors in a cutset); may be empty.
        warnings: ``Diagnostic`` data (a state beyond floating-point range …).
        forced: inductor name -> (i(t_k-), i(t_k+)) in A for every inductor whose current the
            event forces to jump (an impulse of voltage across it); values below the circuit's
            current noise floor are 0.  An inductor forced to 0 from a non-zero current is an
            interrupted current.
        opened: the switches opening at the event that carry the impulse of voltage (where the
            jump's energy is dissipated in the ideal limit).
    """

    time: float
    charges: Mapping[str, float] = field(default_factory=dict)
    fluxes: Mapping[str, float] = field(default_factory=dict)
    energy: float | None = 0.0
    stored_before: Mapping[str, float] = field(default_factory=dict)
    stored_after: Mapping[str, float] = field(default_factory=dict)
    loops: tuple[Diagnostic, ...] = ()
    warnings: tuple[Diagnostic, ...] = ()
    forced: Mapping[str, tuple[float, float]] = field(default_factory=dict)
    opened: tuple[str, ...] = ()


@dataclass(frozen=True, eq=False)
class Hazard:
    """A condition that makes a circuit unsafe or its analysis meaningless, as data (the report
    side writes the English, ``harness.findings``).

    Attributes:
        code: ``interrupted-current`` (an inductor's current cut to zero with no other path),
            ``forced-current`` (inductor currents forced to jump: an impulse of voltage across
            the opening switch), ``unbounded-growth`` (a current into nodes with no DC path, or a
            growing mode).
        time: the event time in s from which it holds.
        parts: the parts involved (switch first, then the inductors; or the feeding parts).
        nodes: the nodes involved (unbounded growth), else empty.
        values: named numbers in SI units: ``"<inductor>:before"``, ``"<inductor>:after"`` (A),
            ``"energy"`` (J, the jump's loss), ``"e-folding"`` (s, for a growing mode).
    """

    code: str
    time: float
    parts: tuple[str, ...] = ()
    nodes: tuple[str, ...] = ()
    values: Mapping[str, float] = field(default_factory=dict)


INTERRUPTED = "interrupted-current"
FORCED = "forced-current"
GROWTH = "unbounded-growth"
#: an event drives an impulse (a Dirac) through a resistor or across an amplifier's or
#: controlled source's output: a node voltage or a resistor current is infinite for an instant
#: in the ideal circuit (a step into a bare differentiator); parts: the resistors and outputs
#: that carry it, values ``"<part>:flux"`` (V s, the impulse's weight across each)
IMPULSIVE = "impulsive-response"
#: an op-amp's feedback is positive (``harness.feedback``): time the event from which the
#: switch configuration holds (0 for the pre-step one, with ``"pre-step"`` 1), parts the
#: amplifier, values ``"beta"`` (V/V), ``"gain"`` (finite gain A, absent for the nullor),
#: ``"fast"`` (1: with capacitors shorted and inductors open, 0: at DC)
POSITIVE_FEEDBACK = "positive-feedback"


@dataclass(frozen=True, eq=False)
class CrossingValue:
    """When a probe first crosses a level after event k, on interval k's held waveform.

    Attributes:
        time: the crossing time in s measured from the event t_k (0 when the jump at the event
            itself crosses the level), or None when it never crosses.
        direction: "rising" or "falling": how it actually crosses (None when it never does).
        in_jump: True when the crossing is the jump x(t_k-) -> x(t_k+) itself.
        after_next_event: True when the next event t_(k+1) comes before the crossing (it is
            found on the waveform continued with interval k's sources held).
        approaches: the final value the probe heads to (for "never crosses" messages), or None.
    """

    time: float | None
    direction: str | None = None
    in_jump: bool = False
    after_next_event: bool = False
    approaches: float | None = None


@dataclass(frozen=True, eq=False)
class PeakValue:
    """The largest magnitude of a probe in interval k (held waveform, t_k+ included).

    Attributes:
        magnitude: max |x(t)| over t > t_k, x(t_k+) included and the final value as its limit.
        value: the signed value there.
        time: where it occurs, in s after the event (0 for x(t_k+)), or None when the largest
            magnitude is only approached as t -> infinity (the final value).
        after_next_event: True when that time lies beyond the next event.
    """

    magnitude: float
    value: float
    time: float | None
    after_next_event: bool = False


@dataclass(frozen=True, eq=False)
class EnergyValue:
    """Energy absorbed by one part over interval k, continued until settled.

    E = E_jump + integral from t_k+ to infinity of (p(t) - p_inf) dt, with p = v i the power the
    part absorbs under the passive sign convention (i^2 R for a resistor, or a switch with its
    on-/off-resistance in interval k; a controlled source's v i, negative where it delivers
    power) and p_inf the steady power the held interval ends in; E is negative where the power
    falls below p_inf.  With ``until`` (s) given: E = E_jump + integral from t_k to t_k + until
    of p dt, the whole absorbed energy over that window.  E_jump is the jump's own loss at t_k (impulsive
    currents through ideal parts) when the part is a switch that carries the impulse; a resistor
    never carries one.  With p_inf = 0 this is the whole energy; with p_inf > 0 the steady part
    (which grows without bound as long as the sources are held) is reported separately.

    Attributes:
        energy: E in J, or None where the waveform does not settle.
        jump: E_jump in J (0 when nothing is included).
        steady_power: p_inf in W.
        in_interval: the total energy (steady part included) from t_k to t_(k+1) in J, or None
            for the last (open-ended) interval.
    """

    energy: float | None
    jump: float = 0.0
    steady_power: float = 0.0
    in_interval: float | None = None


@dataclass(frozen=True, eq=False)
class DominantTau:
    """The first-order estimate of a higher-order response (zero-value time constants).

    tau = sum of tau_j over the storage parts: R_th,j * C_j for a capacitor and L_j / R_th,j for
    an inductor, each R_th,j seen with the sources zeroed, the other capacitors open and the
    other inductors shorted (their zero-value states).  It equals the sum of -1/lambda_i over
    the interval's modes (the first-order coefficient of the characteristic polynomial), so it
    estimates the slowest time constant when one mode dominates.

    Attributes:
        tau: the sum in s, or None where one term is infinite (a part with no resistive path).
        terms: part name -> tau_j in s.
        modes_sum: sum of -1/lambda_i over the interval's decaying modes (s), the identity's
            other side.
        deviation: largest |x_1tau(t) - x(t)| over the held waveform, relative to the swing
            |x(t_k+) - x_inf|, where x_1tau = x_inf + (x(t_k+) - x_inf) e^(-(t - t_k)/tau).
        t50: the exact 50 % time (first crossing of the midpoint of x(t_k+) and x_inf), s after
            the event, or None.
        t50_estimate: tau * ln 2.
        weak: time constants (s) of modes an engine sees in the probe too weakly to tell
            whether they reach it (the numerical engine's modes between rounding and its
            observation threshold); tau leaves them out, and tau plus any of them is as much
            that engine's value.
    """

    tau: float | None
    terms: Mapping[str, float] = field(default_factory=dict)
    modes_sum: float | None = None
    deviation: float | None = None
    t50: float | None = None
    t50_estimate: float | None = None
    weak: tuple[float, ...] = ()

    @property
    def t50_error(self) -> float | None:
        """(t50_estimate - t50) / t50, or None."""
        if self.t50 is None or self.t50_estimate is None or self.t50 == 0:
            return None
        return (self.t50_estimate - self.t50) / self.t50


@dataclass(frozen=True, eq=False)
class Conditioning:
    """How far interval k's values can be trusted: ``kappa`` = max(kappa_pencil, kappa_modes),
    dimensionless (Higham 2002, ch. 7: a solve loses about log10 kappa digits).

    Attributes:
        index: the interval k.
        start: its start t_k in s.
        kappa_pencil: condition number of the interval's equilibrated shift-invert matrix.
        kappa_modes: condition number of its normalised eigenvector basis.
    """

    index: int
    start: float
    kappa_pencil: float
    kappa_modes: float

    @property
    def kappa(self) -> float:
        return max(self.kappa_pencil, self.kappa_modes)


class Solution(Protocol):
    """The result of one engine on one circuit: what every engine must answer, and the optional
    answers an engine gives where it computes them.

    Required: the attributes and methods down to ``periodic``.  Optional: ``hazards``,
    ``resolution``, ``thevenin``, ``conditioning`` and ``withheld``; an engine declares the
    ones it gives by overriding ``NotComputed`` (which both engines inherit), and every other
    one answers "not computed" (None, or no hazards) -- never an engine disagreement.  The
    comparator asks these methods directly; nothing is probed with ``hasattr``.
    """

    engine: str                  #: "closed_form" or "numeric"
    circuit: Circuit
    #: circuit-wide diagnostics (``Diagnostic``; the trust guard adds its own as text)
    warnings: tuple[Diagnostic | str, ...]
    hazards: tuple[Hazard, ...]  #: optional: conditions found while solving, in event order

    def features(self, probe: Probe, k: int) -> Features:
        """Values of ``probe`` at event k (before, after, final, modes …)."""

    def jump(self, k: int) -> Jump:
        """Impulsive charges and the energy dissipated at event k."""

    def span(self, k: int) -> tuple[float, float]:
        """(t_k, t_end) in s: the start of interval k and the time by which, with interval k's
        sources held, the response has settled (beyond the next event where it comes sooner)."""

    def waveform(self, probe: Probe, k: int, times: np.ndarray) -> np.ndarray:
        """Values of ``probe`` at ``times`` (shape (n,), within ``span(k)``, strictly after t_k)
        for the response of interval k continued with its sources held; shape (n,)."""

    def crossing(self, probe: Probe, k: int, level: float, direction: str) -> CrossingValue:
        """First crossing of ``level`` (direction "rising", "falling" or "either")."""

    def peak(self, probe: Probe, k: int) -> PeakValue:
        """Largest magnitude of ``probe`` in interval k."""

    def overshoot(self, probe: Probe, k: int) -> float | None:
        """How far the probe passes its final value in interval k, a fraction of the step
        x_inf - x(t_k+); None where there is no step to settle from."""

    def energy(self, part: str, k: int, until: float | None = None) -> EnergyValue:
        """Energy absorbed by ``part`` over interval k (or from the event to ``until`` s)."""

    def dominant(self, probe: Probe, k: int) -> DominantTau:
        """The zero-value time-constant estimate and how far it is from the exact waveform."""

    def periodic(self, probe: Probe, fraction: float) -> "PeriodicValue":
        """The probe's periodic steady state over one period of the circuit's repeating window
        (``model.Periodic``), ``fraction`` the band of its settle count."""

    def periodic_waveform(self, probe: Probe, offsets: np.ndarray) -> np.ndarray | None:
        """Optional: the probe's periodic steady state at ``offsets`` (s after the window's
        first event, modulo the period), shape (n,), the waveform ``periodic`` judges; None
        without a steady state."""

    def resolution(self, k: int) -> float | None:
        """Optional: the fastest time constant in s the engine resolves just after event k
        (faster modes are not judged there), or None."""

    def value_resolution(self, probe: Probe, k: int) -> float | None:
        """Optional: the smallest difference in the probe's values over interval k (in its
        unit, V or A) the engine can establish (its integration tolerance and modelling
        perturbation carried to the probe), or None."""

    def refined_resolution(self, probe: Probe, k: int, name: str) -> float | None:
        """Optional: the engine's resolution of field ``name`` (``peak`` or a ``Features``
        value) of the probe in interval k (its unit), established by its own re-solve at
        tighter tolerances (the change in the value, with a safety factor); None where not
        established (``value_resolution`` then stands)."""

    def thevenin(self, k: int) -> Mapping[str, float | None] | None:
        """Optional: storage part -> the Thevenin resistance in ohm it sees in interval k
        (None where unbounded), for the diagnosis of a hand τ; or None."""

    def conditioning(self) -> tuple[Conditioning, ...] | None:
        """Optional: one ``Conditioning`` per interval of the circuit's equations, or None."""

    def withheld(self, k: int) -> str | None:
        """Optional: why interval k's values are not reported, or None when they are (answered
        by the trust guard around an engine, ``harness.compare.trust``)."""

    def node_voltages(self) -> list[tuple[float, ...]] | None:
        """Optional: per instant (before, just after and at the end of each interval), every
        node's voltage in V there (for the safety cautions), or None."""


class NotComputed:
    """The optional answers of ``Solution``, each "not computed".  Both engines inherit this and
    override the answers they give: the closed form ``hazards``, ``thevenin``,
    ``conditioning`` and ``node_voltages``; the numerical engine ``resolution`` and
    ``value_resolution``; both ``periodic_waveform``."""

    hazards: tuple[Hazard, ...] = ()

    def resolution(self, k: int) -> float | None:
        return None

    def value_resolution(self, probe: Probe, k: int) -> float | None:
        return None

    def refined_resolution(self, probe: Probe, k: int, name: str) -> float | None:
        return None

    def thevenin(self, k: int) -> Mapping[str, float | None] | None:
        return None

    def conditioning(self) -> tuple[Conditioning, ...] | None:
        return None

    def periodic_waveform(self, probe: Probe, offsets: np.ndarray) -> np.ndarray | None:
        return None

    def withheld(self, k: int) -> str | None:
        return None

    def node_voltages(self) -> list[tuple[float, ...]] | None:
        """Per instant, every node's voltage in V there, or None when not computed."""
        return None


#: why an engine gives no periodic steady state (``PeriodicValue.reason``)
NO_WINDOW = "no-window"            # the circuit has no repeating window (no ``repeat``)
GROWS = "grows"                    # a period map that grows: no steady state exists
NOT_ESTABLISHED = "not-established"  # the engine could not establish it (ill-conditioned map,
                                     # an integration that failed, a state beyond range)


@dataclass(frozen=True, eq=False)
class PeriodicValue:
    """A probe's exact periodic steady state over one period of the repeating window.

    The period runs from ``start`` (the window's first event, ``model.Periodic.first``) for
    ``period`` seconds; values are in the probe's unit (V or A) unless said otherwise.

    Attributes:
        minimum, maximum: the extremes over the period between events (an impulse at an event,
            the charge a part carries in zero time, is not a value).
        average: (1/period) · ∫ over the period, impulses at events included (a capacitor's
            average current is 0 in the steady state).
        ripple: maximum − minimum.
        settle_periods: the number of periods from ``start`` after which the probe stays
            within ``fraction`` of its first period's deviation from the steady state (its
            largest |x − x_pss| over a period); 0 when it starts there; None where not
            established.
        settle_time: settle_periods · period, in s after ``start``, or None.
        fraction: the band of ``settle_periods`` as a fraction of the first period's deviation.
        reason: None, or why nothing is given (``NO_WINDOW``, ``GROWS``, ``NOT_ESTABLISHED``).
    """

    start: float
    period: float
    minimum: float | None = None
    maximum: float | None = None
    average: float | None = None
    settle_periods: int | None = None
    fraction: float = 0.0
    reason: str | None = None

    @property
    def ripple(self) -> float | None:
        """maximum − minimum in the probe's unit, or None."""
        if self.minimum is None or self.maximum is None:
            return None
        return self.maximum - self.minimum

    @property
    def settle_time(self) -> float | None:
        """s after ``start``: settle_periods · period, or None."""
        return None if self.settle_periods is None else self.settle_periods * self.period

    @classmethod
    def without(cls, window, fraction: float, reason: str) -> "PeriodicValue":
        """No values, for ``reason``, over ``window`` (a ``model.Periodic`` or None)."""
        if window is None:
            return cls(start=0.0, period=0.0, fraction=fraction, reason=reason)
        return cls(start=window.first, period=window.period, fraction=fraction, reason=reason)
