"""Named tolerances and the one comparison rule every check uses.

Two values a and b agree when |a - b| <= max(relative * max(|a|, |b|), floor).  The floor is an
absolute amount in the probe's own unit, taken as a fraction of the probe's scale (the largest
magnitude the probe takes at any event, or the circuit's largest source where that is zero), so
that 0 against 1e-15 passes.
"""

from __future__ import annotations

import math

#: hand value vs closed form, unless the file sets its own (DESIGN.md: 1 %)
HAND_RELATIVE = 0.01
#: absolute floor for hand vs closed form, as a fraction of the probe's scale
HAND_FLOOR = 1e-6
#: closed-form values below this fraction of the probe's scale are rounding noise, shown as 0
ZERO_NOISE = 1e-13
#: a probe whose values at every event (before, after, final) are below this fraction of the
#: circuit's largest source takes its tolerance scale from its peaks within the intervals too
#: (compare.probe_scale): it is ~0 at the events only, like a pulse through a coupling capacitor
SCALE_FROM_PEAKS = 1e-9
#: closed form vs numeric (DESIGN.md: 1e-4); a failure here blames the engines, not the hand
ENGINE_RELATIVE = 1e-4
#: absolute floor for closed form vs numeric, as a fraction of the probe's scale
ENGINE_FLOOR = 1e-6
#: the probe's noise floor, as a fraction of the circuit's scale in the probe's unit (largest
#: source voltage, or that over the smallest resistance plus the largest source current): a
#: value below it is rounding noise in either engine and compares as zero in every field; an
#: interval whose values and peak are all below it gives no engine verdict on its crossing,
#: dominant τ, ring, order or waveform.  Measured (tests/benchmarks/agree.py, random
#: well-posed circuits with sources of 0.01-10 V): probes the closed form finds identically
#: zero read up to ~1e-14 of that scale in the numerical engine (-9.3 fV, 2.9e-16 V beside
#: volt sources), and the smallest genuine value seen was ~1e-7 of it; 1e-9 sits between
PROBE_NOISE = 1e-9
#: whole-waveform comparison: largest deviation relative to the interval's swing
WAVEFORM_RELATIVE = 1e-3
#: the swing used for that comparison is at least this fraction of the probe's scale, so an
#: interval where the probe hardly moves is not judged on its noise
WAVEFORM_SWING_FLOOR = 1e-2
#: a mode is visible in a probe when its amplitude exceeds this fraction of the probe's scale
MODE_VISIBILITY = 1e-6
#: two modes are the same mode when their rates agree to this relative amount
MODE_MERGE = 1e-6
#: periodic steady state: a probe has settled when its deviation from the steady state stays
#: within this fraction of its deviation over the first period (``results.PeriodicValue``)
SETTLE_FRACTION = 0.01
#: periods: the slack of a count of periods to settle beside the relative tolerance, between
#: hand and closed form and between the engines (a hand ln(100)·τ/T rounds either way; the
#: numerical engine's own period map moves the count across a whole number)
SETTLE_PERIOD_SLACK = 1.0


def agree(a: float | None, b: float | None, relative: float, floor: float = 0.0) -> bool:
    """True when a and b agree under the rule above; two Nones agree, one None does not."""
    if a is None or b is None:
        return a is None and b is None
    if not (math.isfinite(a) and math.isfinite(b)):
        return a == b
    return abs(a - b) <= max(relative * max(abs(a), abs(b)), floor)


def relative_error(a: float, b: float, floor: float = 0.0) -> float:
    """|a - b| / max(|a|, |b|, floor); 0 when both are 0."""
    denom = max(abs(a), abs(b), floor)
    return 0.0 if denom == 0 else abs(a - b) / denom

# ---- sign-off fields: crossings, peaks, energy, dominant τ --------------------------
#: crossing time, hand vs closed form: the expectation's hand tolerance (relative), with an
#: absolute floor of this fraction of the interval's τ scale (its slowest visible τ)
CROSSING_HAND_FLOOR = 1e-6
#: crossing time, closed form vs numeric: this fraction of the interval's τ scale, or the time
#: the engine value floor (ENGINE_FLOOR of the probe's scale) amounts to at the crossing's slope,
#: or ENGINE_RELATIVE of the time, whichever is largest.  Measured (harness.simulate.signoff on
#: the default pulse ratio 1e-7): at most 8.0e-8 of τ on the bundled circuits and 8.1e-7 on 195
#: random circuits of tests/simulate_random.py (levels at 10-99 % of every swing); 1e-5 keeps a
#: margin of about 12
CROSSING_ENGINE = 1e-5
#: a crossing level within this fraction of the probe's scale of the interval's final value
#: is that value: the probe approaches it, and a root from which the waveform stays within
#: the band is rounding of the final value, not a crossing (the closed form's x_inf of a
#: probe settling at exactly -V1 was 6.4e-13 of the scale off; the numerical engine's own
#: band is ``simulate.signoff.NOISE``, the same fraction of its scale)
CROSSING_AT_FINAL = 1e-9
#: dissipated energy, closed form vs numeric (relative; the numeric value is a Gauss-Legendre
#: quadrature of i^2 R on the integrator's dense output of the regularised model).  Measured: at
#: most 1.4e-9 on the bundled circuits and 4.3e-7 on the same random circuits; 1e-5 keeps a
#: margin of about 20 (the error is first order in the pulse ratio)
ENERGY_ENGINE_RELATIVE = 1e-5
#: dominant τ, closed form (zero-value time constants of the storage that reaches the probe)
#: vs numeric (sum of -1/lambda over the modes of its own pencil observed in the probe),
#: relative.  Measured: at most 1.0e-7 over 1,748 probe-intervals of 300 random circuits of
#: tests/simulate_random.py (the inductor shunts r_shunt of the narrow-pulse model, which add
#: about pulse_ratio to an inductor's time constant); 1e-6 keeps a margin of 10
DOMINANT_ENGINE = 1e-6
#: damped frequency, damping ratio, Q and overshoot, closed form vs numeric (relative; the
#: numerical engine's QZ of its own pencil and its integrated waveform).  Measured on the
#: series RLC of tests/test_ring.py: 3.3e-8 (frequency), 2.5e-8 (damping), 6e-8 (overshoot)
RING_ENGINE_RELATIVE = 1e-5
#: a Thevenin resistance below this fraction of the circuit's reference resistance (the
#: geometric mean of its resistances) is a short up to rounding: its zero-value term is 0 and
#: the part has no mode of its own (a capacitor across a closed ideal switch or a source)
THEVENIN_SHORT = 1e-12
#: a part's current scale for the energy floor is at least this fraction of the circuit's
#: current scale (largest source voltage over the smallest resistance plus the largest source
#: current), so a part that carries only rounding noise is not judged on it
CURRENT_NOISE = 1e-9
#: absolute floor for energies, as a fraction of the energy itself (compare.energy.
#: energy_floor, beside the rounding-noise floor R_min I_f^2 T): a hand energy of 0 J, or half
#: or twice the computed one, is never within it
ENERGY_FLOOR = 1e-6
#: rounding of a jump loss computed as stored energy before - after (+ source work), as a
#: fraction of the energies stored at the event (double precision: ~1e-16 per term)
JUMP_ENERGY_NOISE = 1e-13

# ---- each engine's own rounding of a jump's inductor currents ----------------------------
# An inductor current forced by an opening switch is reported as (i-, i+); a value below the
# engine's own noise is reported as 0 A, so that "interrupted" (i+ = 0) is told from "forced"
# (i+ != 0).  The two engines keep separate values on purpose: each is the noise of that
# engine's own route, not a comparison between them (the comparator compares neither).
#: closed form (closedform.jumps): i+ comes from charge and flux conservation in one linear
#: solve of the pencil, exact to double rounding (~2.2e-16) times its conditioning: 1e-9 of
#: the circuit's current scale covers a conditioning up to ~1e6 with a margin of ~4
EXACT_CURRENT_ROUNDING = 1e-9
#: numerical engine (simulate.solution): i+ is a quadratic fitted after the narrow pulse and
#: extrapolated back to the event, on an integration at rtol = the pulse ratio (1e-7).
#: Measured on the two coils of tests/test_findings.py: 0.250000003 A for 0.25 A (1.25e-8 of
#: the 1 A scale); 1e-6 leaves a margin of ~100 above that, where 1e-9 would not
NUMERIC_CURRENT_ROUNDING = 1e-6

#: conditioning (harness.closedform.conditioning) above which a solution carries a warning:
#: relative errors up to ~CONDITION_WARN * 2.2e-16 = 2e-8 (Higham 2002, ch. 7: log10 kappa digits)
CONDITION_WARN = 1e8
#: conditioning above which an interval's values are not reported (None with a note): errors
#: could reach ~2e-4, beyond ENGINE_RELATIVE, so no digit of the engines' comparison is safe
CONDITION_LIMIT = 1e12
