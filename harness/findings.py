"""Findings: what makes a checked circuit unsafe or probably not the circuit meant.

A finding fails the file (verdict ``finding``, exit 1) unless the file acknowledges it in
``[settings] acknowledge = [...]`` by a node or part name the finding names; an acknowledged
finding is still reported.  Kinds (``Finding.code``):

* ``open-node``: a node other than ground that exactly one part terminal touches (and no
  controlled source senses): an open end, usually a mistyped node name (``topology``);
* ``interrupted-current``: an opening switch cuts an inductor's current to zero with no other
  path: the voltage across the switch is unbounded in the ideal circuit (from the engines'
  ``Jump.forced`` / ``Jump.opened``);
* ``forced-current``: an opening switch forces inductor currents to jump: an impulse of voltage
  across the switch dissipates the jump's energy in it;
* ``unbounded-growth``: a current into nodes with no DC path, or a growing mode
  (``ClosedFormSolution.hazards``);
* ``impulsive-response``: an event drives an impulse of voltage across a resistor or an
  amplifier's output (a step into a bare differentiator): a node voltage and a resistor current
  are infinite for an instant in the ideal circuit (``ClosedFormSolution.hazards``; the sentence
  says where the numerical engine's pulse moves no charge through a resistor);
* ``positive-feedback``: an op-amp whose feedback is positive (``harness.feedback``).

The jump findings come from the closed form's jump; where the numerical engine, by its own
integration, sees a different set of forced inductors, the message says so.  Their sentences
are written in ``harness.messages``.
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass

from .feedback import positive_feedback
from .messages import hazard_text, open_node_text
from .model import Circuit
from .results import FORCED, GROWTH, IMPULSIVE, INTERRUPTED, Hazard, Jump
from .topology import dangling_nodes

OPEN_NODE = "open-node"


@dataclass(frozen=True, eq=False)
class Finding:
    """One finding: its kind, the node and part names it concerns, the sentence
    (``harness.messages``), and whether the file acknowledges it."""

    code: str
    subjects: tuple[str, ...]
    message: str
    acknowledged: bool = False

    def to_json(self) -> dict:
        return {"code": self.code, "subjects": list(self.subjects), "message": self.message,
                "acknowledged": self.acknowledged}


def jump_hazards(jump: Jump) -> list[Hazard]:
    """An interrupted current (an inductor forced to 0 A from a non-zero current) or forced
    currents at an event, from one engine's jump; empty when no inductor current jumps."""
    if not jump.forced:
        return []
    cut = any(i1 == 0.0 and i0 != 0.0 for i0, i1 in jump.forced.values())
    values = {f"{n}:{side}": v for n, pair in jump.forced.items()
              for side, v in zip(("before", "after"), pair)}
    if jump.energy is not None:
        values["energy"] = float(jump.energy)
    return [Hazard(INTERRUPTED if cut else FORCED, jump.time,
                   tuple(jump.opened) + tuple(jump.forced), (), values)]


def _open_node(circuit: Circuit, node: str, part: str) -> Finding:
    owner = circuit.part(part)
    side = "p" if owner.p == node else "n"
    others = [n for n in circuit.nodes if n != node]
    near = difflib.get_close_matches(node, others, n=1, cutoff=0.6)
    return Finding(OPEN_NODE, (node, part),
                   open_node_text(node, part, side, near[0] if near else None))


def _hazard_finding(h: Hazard, numeric_sees: bool | None) -> Finding:
    return Finding(h.code, tuple(h.parts) + tuple(h.nodes), hazard_text(h, numeric_sees))


def _numeric_sees(h: Hazard, numeric, k: int) -> bool | None:
    """Whether the numerical engine's own jump forces the same inductors, or (an impulse)
    moves charge through a resistor (None: not run)."""
    if numeric is None or h.code == GROWTH:
        return None
    jump = numeric.jump(k)
    if jump.energy is None and not jump.forced and jump.warnings:
        return None                              # it stopped before this event
    if h.code == IMPULSIVE:
        return bool(numeric.impulsive_resistors(k))
    return set(jump.forced) == {p for p in h.parts if f"{p}:before" in h.values}


def findings(circuit: Circuit, exact, numeric=None) -> tuple[Finding, ...]:
    """Every finding of a solved circuit, acknowledged ones marked (module docstring)."""
    out = [_open_node(circuit, node, part) for node, part in dangling_nodes(circuit)]
    for k in range(len(circuit.events)):
        for h in jump_hazards(exact.jump(k)):
            out.append(_hazard_finding(h, _numeric_sees(h, numeric, k)))
    seen = set()
    for h in exact.hazards:
        key = (h.code, h.parts, h.nodes, tuple(sorted(h.values)))
        if key not in seen:
            seen.add(key)
            sees = (_numeric_sees(h, numeric, circuit.events.index(h.time))
                    if h.code == IMPULSIVE and h.time in circuit.events else None)
            out.append(_hazard_finding(h, sees))
    out += [_hazard_finding(h, None) for h in positive_feedback(circuit)]
    ack = set(circuit.settings.acknowledge)
    return tuple(Finding(f.code, f.subjects, f.message, bool(ack & set(f.subjects)))
                 for f in out)
