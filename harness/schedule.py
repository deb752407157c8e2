"""Every probe of a circuit across its whole schedule, for the reports' schedule plot.

Each interval k is sampled from its event t_k to the next event t_(k+1) (the last one until it
settles, ``Solution.span``), so the waveform is the one the circuit really follows: a pulse ends
when its switch opens, not when the held interval would have settled.  Both engines are sampled
on the same times; an interval whose values an engine cannot give is NaN there (a gap).
"""

from __future__ import annotations

import numpy as np

from .model import Circuit, Probe
from .outcome import ProbeSchedule, Schedule
from .results import Solution

#: samples per probe over the whole schedule, shared by its intervals
SCHEDULE_POINTS = 6000
#: samples per interval, at least and at most
INTERVAL_POINTS = (16, 300)


def schedule(circuit: Circuit, exact: Solution, numeric: Solution | None,
             probes: list[Probe], scales: list[float]) -> Schedule:
    """The probes' waveforms over every interval; ``scales`` their tolerance scales (own unit)."""
    events = tuple(circuit.events)
    lo, hi = INTERVAL_POINTS
    per = int(min(hi, max(lo, SCHEDULE_POINTS // max(len(events), 1))))
    times = [_interval_times(exact, events, k, per) for k in range(len(events))]
    curves = []
    for probe, scale in zip(probes, scales):
        closed = np.concatenate([_sample(exact, probe, k, t) for k, t in enumerate(times)])
        sim = None
        if numeric is not None:
            sim = np.concatenate([_sample(numeric, probe, k, t) for k, t in enumerate(times)])
        curves.append(ProbeSchedule(probe=probe.label, unit=probe.dimension,
                                    t=np.concatenate(times), closed_x=closed, numeric_x=sim,
                                    scale=scale))
    return Schedule(events=events, probes=tuple(curves))


def _interval_times(exact: Solution, events: tuple[float, ...], k: int,
                    points: int) -> np.ndarray:
    """``points`` times (s) from event k to the next event, or to the end of the last span."""
    start, end = exact.span(k)
    if k + 1 < len(events):
        end = events[k + 1]
    return np.linspace(start, end, points)


def _sample(solution: Solution, probe: Probe, k: int, t: np.ndarray) -> np.ndarray:
    """The solution's waveform of ``probe`` in interval k at ``t``; NaN where it has none."""
    try:
        x = np.asarray(solution.waveform(probe, k, t), dtype=float)
    except (ValueError, ArithmeticError, np.linalg.LinAlgError):
        return np.full(t.shape, np.nan)
    return x if x.shape == t.shape else np.full(t.shape, np.nan)
