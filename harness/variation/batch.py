"""A whole array of samples of a single-storage circuit at once (the fast route).

For a circuit with one capacitor or inductor, built of resistors, switches and independent
sources, every interval is first order: the storage sees a Thévenin (capacitor) or Norton
(inductor) equivalent.  Replacing the capacitor by a voltage source s (the inductor by a current
source s) leaves a resistive network; its nodal equations, stacked for all samples and solved
by ``numpy.linalg.solve`` on (S, N, N) arrays, give each probe as y = y_src + s·y_unit and the
storage's own current (voltage) likewise.  Then τ = −C/i_unit (−L/v_unit), s∞ = −i_src/i_unit,
and s(t) = s∞ + (s(t_k) − s∞)·e^(−(t − t_k)/τ) from interval to interval, the state continuous
at every event (no jumps with one storage part).  Method: modified nodal analysis and the
first-order step response, as in any circuit-theory text (e.g. Desoer & Kuh, "Basic Circuit
Theory", 1969, ch. 4 and 9).

``plan`` says whether a circuit qualifies; ``analyse.py`` checks this route against the exact
engine at the nominal point and at every extreme corner and falls back to the exact engine,
sample by sample, where it does not qualify or disagrees.
"""

from __future__ import annotations

import numpy as np

from .. import model as m
from .quantities import Quantity

SUPPORTED = (m.RESISTOR, m.CAPACITOR, m.INDUCTOR, m.VOLTAGE_SOURCE, m.CURRENT_SOURCE, m.SWITCH)
FIELDS = ("before", "after", "final", "tau", "crossing", "peak", "dominant_tau")


def qualifies(circuit: m.Circuit, exp: m.Expectation, names: tuple[str, ...]) -> bool:
    """One storage part, supported kinds only, and every asked field computable here."""
    if any(p.kind not in SUPPORTED for p in circuit.parts):
        return False
    if len(circuit.storage_parts()) != 1 or any(n not in FIELDS for n in names):
        return False
    probe = exp.probe
    if probe.kind == m.THROUGH and circuit.part(probe.targets[0]).kind == m.CURRENT_SOURCE:
        return False
    return True


class Network:
    """The resistive network of one circuit, indexed once, evaluated for many samples."""

    def __init__(self, circuit: m.Circuit, quantities: tuple[Quantity, ...]):
        self.circuit = circuit
        self.nodes = {n: i for i, n in enumerate(x for x in circuit.nodes if x != circuit.ground)}
        self.store = circuit.storage_parts()[0]
        self.column = {q.name: i for i, q in enumerate(quantities) if not q.is_level}
        # branch currents: voltage sources, ideal switches, a capacitor (as a source)
        self.branch = [p.name for p in circuit.parts
                       if p.kind in (m.VOLTAGE_SOURCE, m.SWITCH) or p is self.store
                       and p.kind == m.CAPACITOR]
        self.size = len(self.nodes) + len(self.branch)

    def _value(self, part: m.Part, values: np.ndarray, base: float) -> np.ndarray:
        col = self.column.get(part.name)
        if col is None:
            return np.full(len(values), base)
        return values[:, col] * base     # ``values`` holds the factors 1 + d

    def solve(self, values: np.ndarray, time: float, pre: bool) -> np.ndarray:
        """Node voltages and branch currents for s = 0 with the sources on (column 0) and
        for s = 1 with them off (column 1); shape (S, N, 2)."""
        count, size = len(values), self.size
        a = np.zeros((count, size, size))
        b = np.zeros((count, size, 2))
        for part in self.circuit.parts:
            self._stamp(part, a, b, values, time, pre)
        return np.linalg.solve(a, b)

    def _stamp(self, part, a, b, values, time, pre) -> None:
        p, n = self.nodes.get(part.p), self.nodes.get(part.n)
        if part.kind == m.RESISTOR or (part.kind == m.SWITCH and self._resistance(part, time,
                                                                                  pre)):
            r = self._value(part, values, part.value) if part.kind == m.RESISTOR else \
                np.full(len(values), self._resistance(part, time, pre))
            self._conductance(a, p, n, 1.0 / r)
            if part.kind == m.SWITCH:   # its branch row: a zero current
                j = len(self.nodes) + self.branch.index(part.name)
                a[:, j, j] = 1.0
            return
        if part.kind == m.CURRENT_SOURCE or (part.kind == m.INDUCTOR):
            level = self._level(part, values, time, pre)
            for node, sign in ((p, -1.0), (n, 1.0)):
                if node is not None:
                    b[:, node, :] += sign * level
            return
        j = len(self.nodes) + self.branch.index(part.name)
        if part.kind == m.SWITCH and not (part.is_closed_before(time) if pre
                                          else part.is_closed(time)):
            a[:, j, j] = 1.0          # open ideal switch: its current is zero
            return
        for node, sign in ((p, 1.0), (n, -1.0)):
            if node is not None:
                a[:, node, j] += sign
                a[:, j, node] += sign
        if part.kind != m.SWITCH:
            b[:, j, :] = self._level(part, values, time, pre)

    def _resistance(self, part, time, pre) -> float | None:
        closed = part.is_closed_before(time) if pre else part.is_closed(time)
        return part.on_resistance if closed else part.off_resistance

    def _level(self, part, values, time, pre) -> np.ndarray:
        """(S, 2): the source's value with sources on / off; the storage's 0 / 1."""
        out = np.zeros((len(values), 2))
        if part is self.store:
            out[:, 1] = 1.0
            return out
        base = part.source_value_before(time) if pre else part.source_value(time)
        out[:, 0] = self._value(part, values, base)
        return out

    @staticmethod
    def _conductance(a, p, n, g) -> None:
        for i, j, sign in ((p, p, 1), (n, n, 1), (p, n, -1), (n, p, -1)):
            if i is not None and j is not None:
                a[:, i, j] += sign * g

    def probe(self, x: np.ndarray, probe: m.Probe, values: np.ndarray, time: float,
              pre: bool) -> np.ndarray:
        """The probe's (y_src, y_unit), shape (S, 2), from a solution ``x`` (S, N, 2)."""
        def v(node):
            i = self.nodes.get(node)
            return np.zeros(x[:, 0, :].shape) if i is None else x[:, i, :]
        if probe.kind == m.NODE:
            return v(probe.targets[0])
        if probe.kind == m.BETWEEN:
            return v(probe.targets[0]) - v(probe.targets[1])
        part = self.circuit.part(probe.targets[0])
        across = v(part.p) - v(part.n)
        if probe.kind == m.ACROSS:
            return across
        resistive = part.kind == m.SWITCH and self._resistance(part, time, pre)
        if part.name in self.branch and not resistive:
            return x[:, len(self.nodes) + self.branch.index(part.name), :]
        if part is self.store:                       # the inductor's own current
            return np.tile([0.0, 1.0], (len(values), 1))
        r = self._value(part, values, part.value) if part.kind == m.RESISTOR else \
            np.full(len(values), self._resistance(part, time, pre) or np.inf)
        return across / r[:, None]

    def storage(self, x: np.ndarray, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(τ, s∞) of the interval, each shape (S,)."""
        part = self.store
        size = self._value(part, values, part.value)
        if part.kind == m.CAPACITOR:
            cur = x[:, len(self.nodes) + self.branch.index(part.name), :]
            rate = -cur[:, 1]           # the capacitor's current is i_src + s·i_unit
            with np.errstate(divide="ignore", invalid="ignore"):
                return size / rate, cur[:, 0] / rate
        volt = self._volt(x, part)
        rate = -volt[:, 1]
        with np.errstate(divide="ignore", invalid="ignore"):
            return size / rate, volt[:, 0] / rate

    def _volt(self, x, part):
        p, n = self.nodes.get(part.p), self.nodes.get(part.n)
        zero = np.zeros(x[:, 0, :].shape)
        return (zero if p is None else x[:, p, :]) - (zero if n is None else x[:, n, :])


def evaluate(circuit: m.Circuit, exp: m.Expectation, names: tuple[str, ...],
             quantities: tuple[Quantity, ...], deviations: np.ndarray) -> np.ndarray:
    """Field values at each row of ``deviations`` (S, n) -> (S, len(names)); NaN where a
    sample's network is singular or the field has no value."""
    deviations = np.atleast_2d(deviations)
    values = 1.0 + deviations           # factors on each nominal value
    net = Network(circuit, quantities)
    events = circuit.events
    k = int(np.argmin(np.abs(np.asarray(events) - exp.at)))
    with np.errstate(all="ignore"):
        try:
            return _walk(net, exp, names, quantities, values, events, k)
        except np.linalg.LinAlgError:
            return np.full((len(values), len(names)), np.nan)


def _walk(net, exp, names, quantities, values, events, k) -> np.ndarray:
    x = net.solve(values, events[0], pre=True)
    tau, s_inf = net.storage(x, values)
    init = net.store.initial
    state = s_inf if init is None else np.full(len(values), init)
    before = _at(net.probe(x, exp.probe, values, events[0], True), state)
    for i in range(k + 1):
        x = net.solve(values, events[i], pre=False)
        tau, s_inf = net.storage(x, values)
        y = net.probe(x, exp.probe, values, events[i], False)
        if i < k:
            gap = events[i + 1] - events[i]
            state = s_inf + (state - s_inf) * np.exp(-gap / tau)
            before = _at(y, state)
    after, final = _at(y, state), _at(y, s_inf)
    level = exp.crossing.level if exp.crossing else None
    if level is not None and any(q.is_level for q in quantities):
        col = [i for i, q in enumerate(quantities) if q.is_level][0]
        level = exp.crossing.level * values[:, col]
    cols = {"before": before, "after": after, "final": final, "tau": tau,
            "dominant_tau": tau, "peak": np.maximum(np.abs(after), np.abs(final))}
    if "crossing" in names:
        cols["crossing"] = _crossing(before, after, final, tau, level, exp.crossing.direction)
    return np.stack([cols[n] for n in names], axis=1)


def _at(y: np.ndarray, state: np.ndarray) -> np.ndarray:
    return y[:, 0] + state * y[:, 1]


def _crossing(before, after, final, tau, level, direction) -> np.ndarray:
    """First time after the event the held exponential passes ``level`` (s; 0 when the jump
    at the event crosses it; NaN when it never does)."""
    level = np.broadcast_to(level, after.shape)
    rising = direction in (m.RISING, m.EITHER)
    falling = direction in (m.FALLING, m.EITHER)
    jump = ((before < level) & (after >= level) & rising) | \
        ((before > level) & (after <= level) & falling)
    up = (after < level) & (final > level) & rising
    down = (after > level) & (final < level) & falling
    t = tau * np.log((after - final) / (level - final))
    out = np.where(up | down, t, np.nan)
    return np.where(jump, 0.0, out)
