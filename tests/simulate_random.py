"""Random well-posed circuits of R, C, L, sources and switches (for the engine-agreement test).

Well-posed by construction: every node is joined to the rest by a tree of resistors (so every
node has a DC path and no inductor or current source forms a cutset), and no loop is made of
voltage sources, inductors and switches alone (a union-find over those parts rejects any part
that would close one), so no DC operating point is a short circuit or undefined.
"""

from __future__ import annotations

import math
import random

from harness.model import Circuit, Part, Probe

#: a high-Q ring (envelope time constant times frequency above this) takes the stiff
#: integrator too many steps to settle for a property test; such circuits are left out
MAX_RINGING = 5.0


def _log_uniform(rng: random.Random, lo: float, hi: float) -> float:
    """A value log-uniform in [lo, hi], rounded to 3 significant digits."""
    x = math.exp(rng.uniform(math.log(lo), math.log(hi)))
    return float(f"{x:.3g}")


class _Loops:
    """Union-find over nodes joined by voltage sources, inductors and switches."""

    def __init__(self) -> None:
        self.parent: dict[str, str] = {}

    def find(self, x: str) -> str:
        self.parent.setdefault(x, x)
        while self.parent[x] != x:
            x = self.parent[x]
        return x

    def join(self, a: str, b: str) -> bool:
        """Join a and b; False (and nothing joined) if they were already connected."""
        ra, rb = self.find(a), self.find(b)
        if ra == rb:
            return False
        self.parent[ra] = rb
        return True


def _times(rng: random.Random, count: int) -> list[float]:
    return sorted(float(f"{_log_uniform(rng, 1e-5, 1e-2):.2g}") for _ in range(count))


def random_circuit(rng: random.Random, max_nodes: int = 5, max_extras: int = 4) -> Circuit:
    """A random well-posed circuit with ground ``gnd``; see the module docstring."""
    loops = _Loops()
    nodes = ["gnd", "n1"]
    v_steps = tuple((t, round(rng.uniform(-5, 5), 2)) for t in _times(rng, rng.randint(1, 2)))
    parts = [Part("V1", "voltage-source", ("n1", "gnd"), round(rng.uniform(-5, 5), 2),
                  steps=v_steps)]
    loops.join("n1", "gnd")
    for i in range(2, rng.randint(2, max_nodes) + 1):
        other = rng.choice(nodes)
        parts.append(Part(f"R{i}", "resistor", (f"n{i}", other), _log_uniform(rng, 1e2, 1e5)))
        nodes.append(f"n{i}")
    count = {"R": len(parts), "C": 0, "L": 0, "S": 0, "I": 0}
    for _ in range(rng.randint(1, max_extras)):
        kind = rng.choice("RCCLSI")
        p, n = rng.sample(nodes, 2)
        count[kind] += 1
        name = f"{kind}{count[kind]}x"
        if kind == "R":
            parts.append(Part(name, "resistor", (p, n), _log_uniform(rng, 1e2, 1e5)))
        elif kind == "C":
            parts.append(Part(name, "capacitor", (p, n), _log_uniform(rng, 1e-9, 1e-6)))
        elif kind == "I":
            steps = tuple((t, _log_uniform(rng, 1e-5, 1e-3)) for t in _times(rng, 1))
            parts.append(Part(name, "current-source", (p, n), 0.0, steps=steps))
        elif loops.join(p, n):
            if kind == "L":
                parts.append(Part(name, "inductor", (p, n), _log_uniform(rng, 1e-4, 1e-1)))
            else:
                closed = rng.random() < 0.5
                steps = tuple((t, float(not closed)) for t in _times(rng, 1))
                parts.append(Part(name, "switch", (p, n), closed=closed, steps=steps))
    return Circuit("random", tuple(parts))


def kind_scale(circuit, probe: Probe) -> float:
    """The circuit's scale in the probe's unit: the largest source voltage (V), or that over
    the smallest resistance plus the largest source current (A)."""
    volts = [abs(p.value or 0.0) for p in circuit.parts if p.kind == "voltage-source"]
    volts += [abs(v) for p in circuit.parts if p.kind == "voltage-source" for _, v in p.steps]
    amps = [abs(v) for p in circuit.parts if p.kind == "current-source" for _, v in p.steps]
    r_min = min(p.value for p in circuit.parts if p.kind == "resistor")
    if probe.kind == "through":
        return max(volts) / r_min + max(amps, default=0.0)
    return max(volts)


def probes(circuit):
    nodes = [Probe("node", (n,)) for n in circuit.nodes if n != circuit.ground]
    return nodes + [Probe("through", (p.name,)) for p in circuit.parts]


def ringing(circuit, exact) -> bool:
    """True when some interval rings with a high quality factor (see MAX_RINGING)."""
    for probe in probes(circuit):
        for k in range(len(circuit.events)):
            f = exact.features(probe, k)
            if f.oscillation and f.modes and max(f.modes) * max(f.oscillation) > MAX_RINGING:
                return True
    return False
