"""The two engines agree on random well-posed circuits (hypothesis property test).

The reference here is the other engine: the exact closed form (harness.closedform) and the
numerical narrow-pulse model (harness.simulate) share no code, so agreement within
``tolerances.ENGINE_RELATIVE`` (floor ``ENGINE_FLOOR`` times the probe's scale, at least 1e-9 of
the circuit's scale in the probe's unit, the floor issue 3 sets) on before, after,
final and tau of every node and every part's current, at every event, is evidence that both are
right.  A probe's scale is its largest magnitude at the events or anywhere in the held
response (at least 1e-6 of the circuit's scale in its unit); tau is compared where the exact
engine finds the probe first order and its swing is at least 1e-3 of that scale.  Circuits come
from ``simulate_random.random_circuit``: R, C, L, a stepped voltage source, current sources and
switches, well-posed by construction.
"""

from __future__ import annotations

import random

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings, strategies as st

from harness import closedform
from harness import tolerances as T
from harness.model import Probe
from harness.simulate import solve as numeric
from simulate_random import kind_scale, probes, random_circuit, ringing


def waveform_peak(num, probe: Probe, k: int) -> float:
    """Largest magnitude the probe takes between the events of interval k after the pulse (the
    numerical engine's own integration points): a probe that is zero at every event may still
    swing in between, and its errors scale with that."""
    times, values = num.samples(probe, k)
    later = times - times[0] >= num.regularisation.post_pulse
    return float(np.max(np.abs(values[later]), initial=0.0))


def mismatches(circuit, exact, num) -> list[str]:
    """Every field where the engines disagree, as readable lines."""
    out = []
    events = range(len(circuit.events))
    for probe in probes(circuit):
        fe = [exact.features(probe, k) for k in events]
        fn = [num.features(probe, k) for k in events]
        mags = [abs(v) for f in fe for v in (f.before, f.after, f.final) if v is not None]
        mags += [waveform_peak(num, probe, k) for k in range(len(num.runs))]
        scale = max(max(mags, default=0.0), 1e-6 * kind_scale(circuit, probe))
        # the floor: 1e-9 of the largest source (in the probe's unit)
        floor = max(T.ENGINE_FLOOR * scale, 1e-9 * kind_scale(circuit, probe))
        for k in events:
            for field in ("before", "after", "final"):
                a, b = getattr(fe[k], field), getattr(fn[k], field)
                if not T.agree(a, b, T.ENGINE_RELATIVE, floor):
                    out.append(f"{probe.label} k={k} {field}: exact {a!r} numeric {b!r}")
            swing = abs((fe[k].after or 0.0) - (fe[k].final or 0.0))
            if fe[k].tau is not None and swing > 1e-3 * scale:
                if not T.agree(fe[k].tau, fn[k].tau, T.ENGINE_RELATIVE):
                    out.append(f"{probe.label} k={k} tau: exact {fe[k].tau!r} "
                               f"numeric {fn[k].tau!r} {fn[k].notes}")
    return out


@settings(max_examples=40, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(st.randoms(use_true_random=False))
def test_engines_agree_on_random_circuits(rng):
    """Closed form and numeric agree on before/after/final/tau of every probe and event."""
    circuit = random_circuit(rng)
    exact = closedform.solve(circuit)
    assume(not exact.warnings and not ringing(circuit, exact))
    num = numeric(circuit)
    assert not num.warnings, num.warnings
    bad = mismatches(circuit, exact, num)
    assert not bad, "\n".join(bad[:10])


@pytest.mark.parametrize("seed", [9, 20, 68, 71])
def test_engines_agree_on_recorded_hard_circuits(seed):
    """Circuits that once exposed engine differences (stiff pulses into inductors, floating
    capacitor groups, nanosecond modes) still agree."""
    circuit = random_circuit(random.Random(seed))
    exact = closedform.solve(circuit)
    bad = mismatches(circuit, exact, numeric(circuit))
    assert not bad, "\n".join(bad[:10])
