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


@dataclass(frozen=True)
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
        notes: diagnostics about this probe at this event (unbounded growth, no decay …).
    """

    before: float | None
    after: float | None
    final: float | None
    tau: float | None = None
    order: int | None = None
    modes: tuple[float, ...] = ()
    oscillation: tuple[float, ...] = ()
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
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
        loops: human-readable descriptions of why the jump happens (``C1, C2 and S1 form a
            loop``); may be empty.
        warnings: diagnostics (an inductor current interrupted with no other path …).
    """

    time: float
    charges: Mapping[str, float] = field(default_factory=dict)
    fluxes: Mapping[str, float] = field(default_factory=dict)
    energy: float | None = 0.0
    stored_before: Mapping[str, float] = field(default_factory=dict)
    stored_after: Mapping[str, float] = field(default_factory=dict)
    loops: tuple[str, ...] = ()
    warnings: tuple[str, ...] = ()


class Solution(Protocol):
    """The result of one engine on one circuit."""

    engine: str                  #: "closed_form" or "numeric"
    circuit: Circuit
    warnings: tuple[str, ...]    #: circuit-wide diagnostics, each naming the parts and event time

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
