"""Random well-posed RC/RL circuit files with every kind of check, for the engine-agreement run.

Well-posed by construction (the reader's ``topology.check`` confirms it): a resistor tree joins
every node to ground; each inductor sits in series with its own resistor; every switch has an
on-/off-resistance or a series resistor and joins two nodes of the tree (so it never interrupts
an inductor); controlled sources drive feed-forward stages (a new node with its own resistor to
ground, never sensed upstream) or an inverting Miller capacitor (vcvs gain −A from ``in`` to
``out``, C from ``in`` to ``out``, ``in`` fed through a resistor).  Part values span decades:
R 10 Ω–1 MΩ, C 1 pF–100 µF, L 1 µH–1 H.

``circuit_text(seed)`` returns TOML text; ``expectations`` adds checks of every probe kind
(``node``, ``between``, ``through``) at every event with every sign-off field: a crossing at a
random fraction of the step (levels from a first closed-form solve of the parts), a peak, the
energy of a dissipative part, a dominant τ, and the ring fields where the closed form sees a
visible ring.  Hand values are placeholders: only the engines' agreement is judged.
"""

from __future__ import annotations

import math
import random
from dataclasses import dataclass, field


def log_uniform(rng: random.Random, lo: float, hi: float) -> float:
    """A value log-uniform in [lo, hi], rounded to 3 significant digits."""
    return float(f"{math.exp(rng.uniform(math.log(lo), math.log(hi))):.3g}")


def q(value: float, unit: str) -> str:
    """A quoted TOML quantity."""
    return f'"{value:.4g} {unit}"'


@dataclass
class Builder:
    """Parts collected as TOML lines, with the bookkeeping the generator needs."""

    rng: random.Random
    lines: list[str] = field(default_factory=list)
    nodes: list[str] = field(default_factory=lambda: ["gnd"])
    tree: list[str] = field(default_factory=list)        # nodes of the resistor tree
    dissipative: list[str] = field(default_factory=list)
    sensors: list[str] = field(default_factory=list)     # resistors a ccvs/cccs may sense
    names: list[str] = field(default_factory=list)
    count: int = 0
    initial: bool = True                                 # capacitors may carry `initial`

    def new_node(self, stem: str = "n") -> str:
        self.count += 1
        name = f"{stem}{self.count}"
        self.nodes.append(name)
        return name

    def part(self, stem: str, body: str) -> str:
        self.count += 1
        name = f"{stem}{self.count}"
        self.lines.append(f"{name} = {{ {body} }}")
        self.names.append(name)
        return name

    def resistor(self, a: str, b: str, lo: float = 10.0, hi: float = 1e6) -> str:
        name = self.part("R", f'kind = "resistor", nodes = ["{a}", "{b}"], '
                              f'value = {q(log_uniform(self.rng, lo, hi), "ohm")}')
        self.dissipative.append(name)
        self.sensors.append(name)
        return name


def _times(rng: random.Random, count: int) -> list[float]:
    return sorted({float(f"{log_uniform(rng, 1e-6, 1e-2):.2g}") for _ in range(count)})


def _sources(b: Builder) -> list[float]:
    """The stepped voltage source V1 at ``in`` (and maybe a current source); the step times."""
    rng = b.rng
    times = _times(rng, rng.randint(1, 2))
    v0 = rng.choice([0.0, round(rng.uniform(-5, 5), 2)])
    steps = ", ".join(f'["{t:.3g} s", "{round(rng.uniform(-10, 10), 2)} V"]' for t in times)
    b.nodes.append("in")
    b.tree.append("in")
    b.lines.append(f'V1 = {{ kind = "voltage-source", nodes = ["in", "gnd"], '
                   f'value = "{v0} V", steps = [{steps}] }}')
    b.names.append("V1")
    return times


def _tree(b: Builder, size: int) -> None:
    for _ in range(size):
        other = b.rng.choice(b.tree + ["gnd"])
        node = b.new_node()
        b.resistor(node, other)
        b.tree.append(node)


def _capacitor(b: Builder, a: str, c: str) -> None:
    init = ""
    if b.rng.random() < 0.2 and b.initial:
        init = f', initial = "{round(b.rng.uniform(-3, 3), 2)} V"'
    b.part("C", f'kind = "capacitor", nodes = ["{a}", "{c}"], '
                f'value = {q(log_uniform(b.rng, 1e-12, 1e-4), "F")}{init}')


def _inductor(b: Builder, a: str, c: str) -> None:
    mid = b.new_node("m")
    b.part("L", f'kind = "inductor", nodes = ["{a}", "{mid}"], '
                f'value = {q(log_uniform(b.rng, 1e-6, 1.0), "H")}')
    b.resistor(mid, c, 1.0, 1e4)


def _switch(b: Builder, a: str, c: str, times: list[float]) -> None:
    rng = b.rng
    closed = rng.random() < 0.5
    when = rng.choice(times + _times(rng, 1))
    state = "closed" if closed else "open"
    flip = "open" if closed else "closed"
    body = f'kind = "switch", state = "{state}", steps = [["{when:.3g} s", "{flip}"]]'
    if rng.random() < 0.5:
        on = log_uniform(rng, 1e-3, 1e2)
        extra = f', on-resistance = {q(on, "ohm")}'
        if rng.random() < 0.5:
            extra += f', off-resistance = {q(on * log_uniform(rng, 1e3, 1e9), "ohm")}'
        b.dissipative.append(b.part("S", f'{body}, nodes = ["{a}", "{c}"]{extra}'))
    else:
        mid = b.new_node("s")
        b.dissipative.append(b.part("S", f'{body}, nodes = ["{a}", "{mid}"]'))
        b.resistor(mid, c)
    if rng.random() < 0.3 and when not in times:
        times.append(when)


def _stage(b: Builder) -> None:
    """A feed-forward stage: a controlled source drives a new node with its own load."""
    rng = b.rng
    kind = rng.choice(["vcvs", "vccs", "ccvs", "cccs"])
    out = b.new_node("o")
    sign = rng.choice([-1, 1])
    if kind in ("vcvs", "vccs"):
        cp = rng.choice(b.tree)
        control = f'["{cp}", "gnd"]'
        gain = sign * (log_uniform(rng, 0.1, 100) if kind == "vcvs" else
                       log_uniform(rng, 1e-5, 1e-2))
    else:
        control = f'"{rng.choice(b.sensors)}"'
        gain = sign * (log_uniform(rng, 10, 1e5) if kind == "ccvs" else
                       log_uniform(rng, 0.1, 100))
    b.dissipative.append(b.part("E" if kind[0] == "v" and kind[3] == "v" else kind[:2].upper(),
                                f'kind = "{kind}", nodes = ["{out}", "gnd"], '
                                f'gain = {gain:.4g}, control = {control}'))
    if kind in ("vccs", "cccs"):
        b.resistor(out, "gnd")
    load = b.new_node("o")
    b.resistor(out, load)
    b.resistor(load, "gnd")
    _capacitor(b, load, "gnd")


def _miller(b: Builder) -> None:
    """An inverting Miller stage: vcvs −A from ``x`` to ``y``, C from x to y, x fed by R."""
    rng = b.rng
    x, y = b.new_node("x"), b.new_node("y")
    b.resistor(rng.choice(b.tree), x)
    gain = -log_uniform(rng, 1, 1e4)
    b.dissipative.append(b.part("E", f'kind = "vcvs", nodes = ["{y}", "gnd"], '
                                     f'gain = {gain:.4g}, control = ["{x}", "gnd"]'))
    _capacitor(b, x, y)
    b.resistor(y, "gnd")


def parts_text(seed: int, initial: bool = True) -> tuple[str, list[str], list[float], Builder]:
    """The ``[parts]`` table of circuit ``seed``: (text, probe-able nodes, events, builder);
    ``initial`` lets some capacitors carry an initial voltage."""
    rng = random.Random(seed)
    b = Builder(rng, initial=initial)
    times = _sources(b)
    _tree(b, rng.randint(1, 4))
    for _ in range(rng.randint(1, 5)):
        a, c = rng.sample(b.tree + ["gnd"], 2)
        what = rng.choice("CCCLLSSI")
        if what == "C":
            _capacitor(b, a, c)
        elif what == "L":
            _inductor(b, a, c)
        elif what == "S":
            _switch(b, a, c, times)
        else:
            t = rng.choice(times)
            b.part("I", f'kind = "current-source", nodes = ["{a}", "{c}"], value = "0 A", '
                        f'steps = [["{t:.3g} s", {q(log_uniform(rng, 1e-6, 1e-2), "A")}]]')
    for _ in range(rng.choice([0, 0, 1, 1, 2])):
        (_stage if rng.random() < 0.6 else _miller)(b)
    text = "[parts]\n" + "\n".join(b.lines) + "\n"
    events = sorted({0.0, *times})
    return text, [n for n in b.nodes if n != "gnd"], events, b


def _probes(rng: random.Random, circuit, nodes: list[str]) -> list[tuple[str, str]]:
    """A few probes as (TOML key = value text, unit): node, between and through."""
    out = []
    for _ in range(rng.randint(2, 4)):
        kind = rng.choice(["node", "node", "between", "through", "through"])
        if kind == "node":
            out.append((f'node = "{rng.choice(nodes)}"', "V"))
        elif kind == "between" and len(nodes) > 1:
            a, c = rng.sample(nodes, 2)
            out.append((f'between = ["{a}", "{c}"]', "V"))
        else:
            out.append((f'through = "{rng.choice(circuit.parts).name}"', "A"))
    return list(dict.fromkeys(out))


def _probe_model(text: str):
    from harness.model import Probe
    key, _, value = text.partition(" = ")
    targets = tuple(v.strip().strip('"') for v in value.strip("[]").split(","))
    return Probe(key, targets)


def _block(rng: random.Random, probe: str, unit: str, at: float, fe, b: Builder) -> str:
    """One ``[[expect]]`` block asking for every field that applies (placeholder hand values)."""
    lines = ["[[expect]]", probe, f'at = "{at:.3g} s"', f'peak = "1 {unit}"',
             'dominant-tau = "1 s"']
    if fe.after is not None and fe.final is not None and \
            abs(fe.after - fe.final) > 1e-6 * max(abs(fe.after), abs(fe.final), 1e-3):
        level = fe.after + rng.uniform(0.1, 0.9) * (fe.final - fe.after)
        lines.append(f'crossing = {{ level = "{level:.6g} {unit}", direction = "either" }}')
    if b.dissipative:
        lines.append(f'energy = {{ part = "{rng.choice(b.dissipative)}" }}')
    if fe.rings:
        lines += ['ring-frequency = "1 Hz"', "damping = 0.5", 'overshoot = "10 %"']
    return "\n".join(lines)


def circuit_text(seed: int) -> str:
    """The whole circuit file of ``seed``: parts, then checks of a few probes at every event.
    Crossing levels and ring fields come from a closed-form solve of the parts alone."""
    from harness import closedform
    from harness.circuitfile import parse_circuit
    from harness.errors import InputError
    parts, nodes, _, b = parts_text(seed)
    try:
        circuit = parse_circuit(parts)
    except InputError:       # an initial voltage in a loop with a source: leave them out
        parts, nodes, _, b = parts_text(seed, initial=False)
        circuit = parse_circuit(parts)
    exact = closedform.solve(circuit)
    rng = random.Random(seed + 10**9)
    blocks = []
    for probe, unit in _probes(rng, circuit, nodes):
        model = _probe_model(probe)
        for k, at in enumerate(circuit.events):
            blocks.append(_block(rng, probe, unit, at, exact.features(model, k), b))
    return f'title = "random circuit {seed}"\n\n{parts}\n' + "\n\n".join(blocks) + "\n"
