"""The worked derivation (``harness.derive``) written out in English, as plain text lines.

Each expectation gets the five steps of the classical method (Hayt, Kemmerly & Durbin,
*Engineering Circuit Analysis*, ch. 8): time constant, value before, value after, final value,
and the complete response, formulas in part names first, then the numbers in SI units.
Markdown and HTML embed the same lines (``lines``).
"""

from __future__ import annotations

import math

from ..messages import text as said
from ..units import format_si


def _value(f, unit: str) -> str:
    """``formula = number`` or the number alone (numbers only)."""
    if f is None:
        return "none"
    number = format_si(f.value, unit)
    if f.display is None:
        return f"{number} (numbers only)"
    return f"{f.display} = {number}"


def _tau_lines(d) -> list[str]:
    out = []
    zeroed = [s for s in d.storage if s.resistance is not None]
    if zeroed:
        out.append("Time constant: independent sources zeroed (V shorted, I opened), other "
                   "capacitors open, other inductors shorted:")
    for s in zeroed:
        rule = "τ = R_th·C" if s.kind == "capacitor" else "τ = L/R_th"
        out.append(f"  {s.name} sees R_th = {_value(s.resistance, 'Ω')}; {rule} = "
                   f"{_value(s.tau, 's')}")
    for name, gbw in d.poles:
        out.append(f"  {name}'s gain-bandwidth product GBW = {format_si(gbw, 'Hz')} is a pole "
                   f"of its open-loop gain (ω_t = 2π·GBW; 1/ω_t = "
                   f"{format_si(1 / (2 * math.pi * gbw), 's')}); its output voltage is a state")
    if d.tau is not None:
        out.append(f"  first order: τ = {_value(d.tau, 's')}")
    elif d.order:
        out.append(f"  not first order (order {d.order}): characteristic polynomial "
                   f"1 + a1·s + a2·s² …")
        for i, c in enumerate(d.coefficients, start=1):
            out.append(f"    a{i} = {_value(c, 's' if i == 1 else f's^{i}')}")
        if d.dominant is not None:
            out.append(f"  sum of the zero-value time constants that reach the probe = "
                       f"{_value(d.dominant, 's')}")
        shown = ", ".join(format_si(t, "s") for t in d.modes)
        out.append(f"  exact modes: τ = {shown or 'none'}")
    return out


def _jump_lines(d) -> list[str]:
    unit = d.unit
    if not d.jump_parts:
        outputs = " and ".join(name for name, _ in d.poles)
        states = ("capacitor voltages, inductor currents and the output voltage of "
                  f"{outputs} (a pole's state) are" if d.poles else
                  "capacitor voltages and inductor currents are")
        return ["Just after: no capacitor loop with a voltage source and no inductor cutset "
                f"with a current source moves at the event, so {states} continuous:",
                f"  x(t_k+) = {_value(d.after, unit)}"]
    out = [f"Just after: {said(loop)}" for loop in d.loops] or ["Just after: the event moves charge"]
    out.append("  charge (flux) balance over the loop, solved for the states after the event:")
    for name, (before, after) in d.jump_parts.items():
        out.append(f"    {name}: {_value(before, '')} before → {_value(after, '')} after")
    for name, _ in d.poles:
        out.append(f"    {name}: its output voltage is a pole's state and does not jump")
    out.append(f"  x(t_k+) = {_value(d.after, unit)}")
    return out


def lines(d) -> list[str]:
    """The derivation of one expectation as text lines."""
    unit = d.unit
    out = [f"{d.label}: {d.probe} at {format_si(d.at, 's')}"]
    if d.limited:
        out.append(f"  symbolic budget exceeded ({d.limited}): numbers only")
    out += _tau_lines(d)
    out.append(f"Before the event (the previous interval's settled state): "
               f"x(t_k−) = {_value(d.before, unit)}")
    out += _jump_lines(d)
    out.append(f"Final value (capacitors open, inductors shorted, charge trapped where it "
               f"cannot leave): x(∞) = {_value(d.final, unit)}")
    if d.tau is not None and d.after is not None and d.final is not None:
        a, f = d.after.value, d.final.value
        out.append(f"Response: x(t) = x(∞) + (x(t_k+) − x(∞))·e^(−(t − t_k)/τ) = "
                   f"{format_si(f, unit)} + ({format_si(a - f, unit)})·"
                   f"e^(−(t − t_k)/{format_si(d.tau.value, 's')})")
    if d.crossing is not None and d.crossing[1] is not None:
        level, t = d.crossing
        out.append(f"Crossing of {format_si(level, unit)}: t − t_k = "
                   f"τ·ln((x(t_k+) − x(∞))/(level − x(∞))) = {_value(t, 's')}")
    return out


def text(derivations) -> str:
    """Every derivation of a file, blank-line separated."""
    return "\n\n".join("\n".join(lines(d)) for d in derivations) + "\n"
