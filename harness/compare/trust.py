"""The trust guard: which intervals' values are reported, judged from outside either engine.

The conditioning of the circuit's equations (``Solution.conditioning``: the closed form
estimates it on its own pencil, ``harness.closedform.conditioning``) bounds the digits any
engine's values can carry, so it is applied to both engines' results alike (Higham, *Accuracy
and Stability of Numerical Algorithms*, 2nd ed., ch. 7: about log10 kappa digits are lost):

* above ``tolerances.CONDITION_WARN`` the solution carries a warning naming the interval and
  the estimate;
* above ``tolerances.CONDITION_LIMIT`` every value of that interval (before/after of its event,
  final, tau, modes) is None, its waveform NaN, and ``notes`` say "conditioning 1e17 beyond
  1e12: values not reported"; ``withheld(k)`` says so to the sign-off comparisons.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Mapping

import numpy as np

from .. import tolerances as tol
from ..model import Probe
from ..results import (NOT_ESTABLISHED, Conditioning, CrossingValue, DominantTau, EnergyValue,
                       Features, Hazard, Jump, PeakValue, PeriodicValue, Solution)
from ..units import format_si


def trusted(c: Conditioning) -> bool:
    """Whether interval ``c.index``'s values are reported (kappa within ``CONDITION_LIMIT``)."""
    return c.kappa <= tol.CONDITION_LIMIT


def note(c: Conditioning) -> str:
    """Why interval ``c.index``'s values are not reported."""
    return (f"conditioning {c.kappa:.0e} beyond {tol.CONDITION_LIMIT:.0e} from "
            f"{format_si(c.start, 's')} on: values not reported (the interval's equations "
            f"are too close to singular for their digits to be trusted)")


def _warning(c: Conditioning) -> str:
    verdict = ("values not reported" if not trusted(c) else
               f"values may carry a relative error up to ~{c.kappa * np.finfo(float).eps:.0e}")
    return (f"from {format_si(c.start, 's')} the equations are ill-conditioned (conditioning "
            f"{c.kappa:.0e}, bound {tol.CONDITION_LIMIT:.0e}): {verdict}")


def guard(solution: Solution, conditioning: tuple[Conditioning, ...] | None) -> Solution:
    """``solution`` itself when every interval is within ``CONDITION_WARN`` (or no conditioning
    is known), else ``Guarded``."""
    if conditioning is None or all(c.kappa <= tol.CONDITION_WARN for c in conditioning):
        return solution
    return Guarded(solution, conditioning)


class Guarded:
    """An engine solution whose untrustworthy intervals report None (a ``Solution``).

    ``features``, ``waveform``, ``withheld`` and ``warnings`` are the guard's own; every other
    answer is the wrapped engine's (the sign-off comparisons ask ``withheld`` before using
    ``crossing``, ``peak``, ``overshoot``, ``energy`` and ``dominant``).
    """

    def __init__(self, inner: Solution, conditioning: tuple[Conditioning, ...]) -> None:
        self._inner = inner
        self.engine = inner.engine
        self.circuit = inner.circuit
        self.hazards: tuple[Hazard, ...] = inner.hazards
        self._conditioning = conditioning
        warn = [_warning(c) for c in conditioning if c.kappa > tol.CONDITION_WARN]
        self.warnings = tuple(inner.warnings) + tuple(dict.fromkeys(warn))

    def features(self, probe: Probe, k: int) -> Features:
        f = self._inner.features(probe, k)
        bad_here = not trusted(self._conditioning[k])
        bad_before = k > 0 and not trusted(self._conditioning[k - 1])
        if not (bad_here or bad_before):
            return f
        why = note(self._conditioning[k if bad_here else k - 1])
        if bad_here:
            return replace(f, before=None if bad_before else f.before, after=None, final=None,
                           tau=None, order=None, modes=(), oscillation=(),
                           notes=f.notes + (why,))
        return replace(f, before=None, notes=f.notes + (why,))

    def withheld(self, k: int) -> str | None:
        """The note saying why interval k's values are not reported, or None when they are."""
        c = self._conditioning[k]
        return None if trusted(c) else note(c)

    def waveform(self, probe: Probe, k: int, times: np.ndarray) -> np.ndarray:
        values = np.asarray(self._inner.waveform(probe, k, times), dtype=float)
        return np.full_like(values, np.nan) if not trusted(self._conditioning[k]) else values

    def conditioning(self) -> tuple[Conditioning, ...]:
        return self._conditioning

    def node_voltages(self) -> list[tuple[float, ...]] | None:
        """The engine's node voltages per instant (three per interval: before, just after,
        final) with what ``features`` withholds left out: the before of an interval whose
        previous one is untrusted, the after and final of an untrusted one."""
        inner = self._inner.node_voltages()
        if inner is None:
            return None
        out = []
        for i, values in enumerate(inner):
            k, which = divmod(i, 3)
            held = not trusted(self._conditioning[k]) if which else \
                k > 0 and not trusted(self._conditioning[k - 1])
            out.append(() if held else values)
        return out

    # ----- the wrapped engine's answers ------------------------------------------------------
    def jump(self, k: int) -> Jump:
        return self._inner.jump(k)

    def span(self, k: int) -> tuple[float, float]:
        return self._inner.span(k)

    def crossing(self, probe: Probe, k: int, level: float, direction: str) -> CrossingValue:
        return self._inner.crossing(probe, k, level, direction)

    def peak(self, probe: Probe, k: int) -> PeakValue:
        return self._inner.peak(probe, k)

    def overshoot(self, probe: Probe, k: int) -> float | None:
        return self._inner.overshoot(probe, k)

    def energy(self, part: str, k: int, until: float | None = None) -> EnergyValue:
        return self._inner.energy(part, k, until)

    def dominant(self, probe: Probe, k: int) -> DominantTau:
        return self._inner.dominant(probe, k)

    def periodic(self, probe: Probe, fraction: float) -> PeriodicValue:
        """The wrapped engine's steady state, or "not established" when an interval of the
        repeating window is withheld (its digits cannot carry the steady state either)."""
        window = self.circuit.periodic
        if window is not None and any(
                not trusted(c) for c in self._conditioning
                if window.start - 1e-12 * window.period <= c.start < window.end):
            return PeriodicValue.without(window, fraction, NOT_ESTABLISHED)
        return self._inner.periodic(probe, fraction)

    def periodic_waveform(self, probe: Probe, offsets: np.ndarray) -> np.ndarray | None:
        """The wrapped engine's steady-state waveform, or None where ``periodic`` is withheld."""
        if self.periodic(probe, tol.SETTLE_FRACTION).reason is not None:
            return None
        return self._inner.periodic_waveform(probe, offsets)

    def resolution(self, k: int) -> float | None:
        return self._inner.resolution(k)

    def value_resolution(self, probe: Probe, k: int) -> float | None:
        return self._inner.value_resolution(probe, k)

    def refined_resolution(self, probe: Probe, k: int, name: str) -> float | None:
        return self._inner.refined_resolution(probe, k, name)

    def thevenin(self, k: int) -> Mapping[str, float | None] | None:
        return self._inner.thevenin(k)
