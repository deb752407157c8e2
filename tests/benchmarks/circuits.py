"""Benchmark circuits built in memory: RC ladders, random RC networks, switched and stepped
variants (invented circuits, for timing only; no result of the project is checked here)."""

from __future__ import annotations

import numpy as np

from harness.model import Circuit, Expectation, Part, Probe


def _source(n_events: int, period: float) -> Part:
    """A voltage source into node n0 stepping 0 -> 1 V at t = 0 and toggling every ``period``."""
    steps = tuple((k * period, float((k + 1) % 2)) for k in range(n_events))
    return Part("V1", "voltage-source", ("n0", "gnd"), 0.0, steps=steps)


def rc_ladder(n: int, r: float = 1e3, c: float = 1e-9, events: int = 1,
              period: float | None = None) -> Circuit:
    """An n-section RC ladder driven at n0 (n + 1 nodes with the source node); probe at the far
    end.  ``events`` source steps, ``period`` s apart (default 10 x the ladder's slowest tau)."""
    period = period if period is not None else 0.5 * r * c * n * n + r * c
    parts = [_source(events, period)]
    for k in range(1, n + 1):
        parts.append(Part(f"R{k}", "resistor", (f"n{k - 1}", f"n{k}"), r))
        parts.append(Part(f"C{k}", "capacitor", (f"n{k}", "gnd"), c))
    probe = Probe("node", (f"n{n}",))
    return Circuit(title=f"rc ladder {n}", parts=tuple(parts),
                   expectations=(Expectation(0, probe, at=0.0),))


def random_rc(n: int, seed: int = 0, extra: float = 1.0, cap_share: float = 0.7,
              events: int = 1) -> Circuit:
    """A random connected RC network of n nodes besides ground: a random spanning tree of
    resistors plus ``extra * n`` random resistors, a grounded capacitor on ``cap_share`` of the
    nodes and floating capacitors between random node pairs; a 1 V step at node n0 through a
    resistor."""
    rng = np.random.default_rng(seed)
    names = [f"n{k}" for k in range(n)]
    parts: list[Part] = [_source(events, 1.0)]
    parts.append(Part("Rs", "resistor", ("n0", "src"), 50.0))
    parts[0] = Part("V1", "voltage-source", ("src", "gnd"), 0.0, steps=parts[0].steps)
    count = 0

    def add(kind, a, b, value):
        nonlocal count
        count += 1
        parts.append(Part(f"{kind[0].upper()}{count}", kind, (a, b), float(value)))

    for k in range(1, n):
        add("resistor", names[k], names[int(rng.integers(0, k))], 10 ** rng.uniform(2, 5))
    for _ in range(int(extra * n)):
        a, b = rng.choice(n, 2, replace=False)
        add("resistor", names[a], names[b], 10 ** rng.uniform(2, 5))
    add("resistor", names[int(rng.integers(0, n))], "gnd", 10 ** rng.uniform(3, 5))
    for k in range(n):
        if rng.random() < cap_share or k == 0:
            add("capacitor", names[k], "gnd", 10 ** rng.uniform(-10, -7))
    for _ in range(max(1, n // 5)):
        a, b = rng.choice(n, 2, replace=False)
        add("capacitor", names[a], names[b], 10 ** rng.uniform(-10, -8))
    probe = Probe("node", (names[-1],))
    return Circuit(title=f"random rc {n}", parts=tuple(parts),
                   expectations=(Expectation(0, probe, at=0.0),))


def switched_rc(n_events: int) -> Circuit:
    """Two capacitors and a switch toggling ``n_events`` times (charge sharing at every close)."""
    steps = tuple((1e-3 * (k + 1), float(k % 2 == 0)) for k in range(n_events - 1))
    parts = (Part("V1", "voltage-source", ("in", "gnd"), 0.0, steps=((0.0, 5.0),)),
             Part("R1", "resistor", ("in", "a"), 1e3),
             Part("C1", "capacitor", ("a", "gnd"), 1e-7),
             Part("S1", "switch", ("a", "b"), None, steps=steps, closed=False),
             Part("C2", "capacitor", ("b", "gnd"), 2e-7, initial=0.0),
             Part("R2", "resistor", ("b", "gnd"), 1e5))
    probe = Probe("node", ("b",))
    return Circuit(title=f"switched rc {n_events}", parts=parts,
                   expectations=(Expectation(0, probe, at=0.0),))
