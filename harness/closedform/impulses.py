"""Impulses (Diracs) in node voltages and resistor currents at an event, from the exact jump.

Capacitor and source currents may carry an impulse (charge moved in no time: ``jumps``), and
inductor kicks put one across an opening switch (the forced- and interrupted-current findings).
An impulse of voltage across a resistor or across an amplifier's or controlled source's output
is another thing: a node voltage and a resistor current are infinite for an instant in the ideal
circuit, which no real amplifier follows (a step into a bare differentiator: the capacitor's
impulse of current flows on through the feedback resistor).  Such a jump is a hazard
(``results.IMPULSIVE``), and a probe that carries the impulse has no value "just after" worth
claiming: ``after`` is None with the note ``results.IMPULSIVE_VALUE``.

Method: the jump's impulse weights q (``jumps.impulse_weights``; Jump.fluxes per part) name the
parts; a probe's own impulse is its functional applied to q~ (its voltage-time integral over the
instant, scaled), significant above ``SHARE`` of the circuit's voltage (current) scale.
"""

from __future__ import annotations

import numpy as np

from ..model import CONTROLLED, RESISTOR, THROUGH, Circuit, Probe
from ..results import IMPULSIVE, IMPULSIVE_VALUE, Diagnostic, Hazard, Jump
from .jumps import Scales

#: a probe's impulse weight (scaled: V or A times the scaled time) above this fraction of the
#: circuit's voltage or current scale is an impulse in that probe
SHARE = 1e-6


def impulse_hazard(circuit: Circuit, jump: Jump) -> Hazard | None:
    """The hazard of an impulse across a resistor (or, where no inductor is forced, across a
    controlled source's or amplifier's output) in ``jump``, else None."""
    parts = []
    for name in jump.fluxes:
        kind = circuit.part(name).kind
        if kind == RESISTOR or (kind in CONTROLLED and not jump.forced):
            parts.append(name)
    if not parts:
        return None
    return Hazard(IMPULSIVE, jump.time, tuple(parts), (),
                  {f"{p}:flux": float(jump.fluxes[p]) for p in parts})


def probe_impulse(probe: Probe, hazard: Hazard, k: int, c_probe: np.ndarray,
                  q_scaled: np.ndarray | None, scales: Scales) -> Diagnostic | None:
    """The note for a probe that carries the impulse of ``hazard`` at event k (``c_probe``:
    its functional on x~, shape (n,); ``q_scaled``: the jump's scaled impulse weights)."""
    note = Diagnostic(IMPULSIVE_VALUE, hazard.time, k, parts=hazard.parts)
    if probe.kind == THROUGH:
        return note if probe.targets[0] in hazard.parts else None
    if q_scaled is None:
        return note
    weight = abs(float(c_probe[:q_scaled.size] @ q_scaled))
    return note if weight > SHARE * scales.voltage else None
