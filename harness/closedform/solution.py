"""``solve``: the closed-form engine end to end, and the ``ClosedFormSolution`` it returns."""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import TopologyError
from ..model import (ACROSS, CAPACITOR, CONTROLLED, CURRENT_BRANCHES, CURRENT_SOURCE, NODE,
                     SOURCES, SWITCH, THROUGH, VOLTAGE_CONTROLLED, Circuit, Probe)
from ..results import (FLOATING_NODES, GROWTH, IMPULSIVE, RESPONSE_OVERFLOW,
                       UNDAMPED_OSCILLATION, Conditioning, Diagnostic, Features, Hazard, Jump,
                       NotComputed)
from ..tolerances import CROSSING_AT_FINAL, MODE_VISIBILITY, SETTLE_FRACTION
from ..units import format_si
from .features import SCALE_FLOOR, RawEvent, classify, node_values, probe_scale, raw_event
from .initial import dc_state
from .interval import SingularPencil
from .jumps import Scales, impulse_weights, jump_at
from .impulses import impulse_hazard, probe_impulse
from .mna import Layout, Scale, capacitor_null_basis, interval_groups, pin, scale_of, scaled
from .stamps import layout_of, stamp, stamp_sources
from .modes import UNDAMPED, Mode, mode_of
from .probes import functional
from .snapshot import undefined_before
from .nullity import zero_modes
from .response import IntervalResponse, Kept, Pencil, build, pencil_of
from . import signoff
from .conditioning import assess

ENGINE = "closed_form"


@dataclass(frozen=True)
class ClosedFormSolution(NotComputed):
    """The exact per-interval solution of one circuit (satisfies ``harness.results.Solution``).

    Attributes:
        circuit: the circuit solved.
        layout, scale: the MNA variable layout and the non-dimensionalisation (R0 ohm, T s).
        intervals: interval k's exact response, k = 0 .. len(events) - 1.
        prestep: the pre-step circuit's response, whose value at its start is the state at 0-.
        warnings: circuit-wide diagnostics naming parts and event times.
        hazards: unbounded growth in each interval, as data (``harness.results.Hazard``), in
            event order (interrupted and forced currents are in each ``jump``).

    Frozen; features and jumps are computed on first request and memoised in private caches.
    """

    circuit: Circuit
    layout: Layout
    scale: Scale
    intervals: tuple[IntervalResponse, ...]
    prestep: IntervalResponse
    warnings: tuple[Diagnostic, ...]
    hazards: tuple[Hazard, ...] = ()
    engine: str = ENGINE
    _probe_cache: dict = field(default_factory=dict, repr=False)
    _jump_cache: dict = field(default_factory=dict, repr=False)

    # ----------------------------------------------------------------- the Solution protocol
    def features(self, probe: Probe, k: int) -> Features:
        """Values of ``probe`` at event k (before, after, final, order, modes, tau); a probe
        that carries an impulse at the event has no ``after`` (``impulses``)."""
        raws, scale = self._raw(probe)
        out = classify(raws[k], scale, self.scale.t)
        impulse = self._impulse(probe, k)
        if impulse is not None:
            out = replace(out, after=None, notes=(impulse,) + tuple(
                n for n in out.notes if n.code != RESPONSE_OVERFLOW))
        if out.order is not None and out.order > 1:
            try:
                out = replace(out, dominant_tau=self._dominant_sum(probe, k))
            except (ValueError, ArithmeticError, np.linalg.LinAlgError):
                pass                       # an estimate only: never costs the features
        return out

    def node_voltages(self) -> list[tuple[float, ...]]:
        """Per instant (before, just after and at the end (final) of each interval), the
        voltages in V of every node there that ``features`` gives (not None), shape: a list of
        3·K tuples of at most N values; all nodes at once per interval
        (``features.node_values``), node by node where that shortcut does not apply."""
        layout, instants = self.layout, []
        nodes = [n for n in self.circuit.nodes if n != self.circuit.ground]
        index = np.array([layout.node(n) for n in nodes], dtype=int)
        for k, resp in enumerate(self.intervals):
            prev = self.prestep if k == 0 else self.intervals[k - 1]
            x, dx = (prev.x_plus, prev.dx_plus) if k == 0 else (prev.x_end, prev.dx_end)
            fast = node_values(resp, x, dx, index) if index.size else None
            if fast is not None:
                instants += [tuple(float(v) for v in values) for values in fast]
                continue
            trio: tuple[list, list, list] = ([], [], [])
            for node in nodes:
                raws, scale = self._raw(Probe(NODE, (node,)))
                f = classify(raws[k], scale, self.scale.t)
                for column, v in zip(trio, (f.before, f.after, f.final)):
                    if v is not None:
                        column.append(v)
            instants += [tuple(column) for column in trio]
        return instants

    def jump(self, k: int) -> Jump:
        """Impulsive charges/fluxes and the energy dissipated at event k."""
        if k not in self._jump_cache:
            resp = self.intervals[k]
            x_minus = self._x_minus(k)
            self._jump_cache[k] = jump_at(self.circuit, self.layout, self.scale, resp.kept_g,
                                          resp.kept_c, x_minus, resp.x_plus, resp.start,
                                          resp.values, self._jump_scales())
        return self._jump_cache[k]

    def span(self, k: int) -> tuple[float, float]:
        """(t_k, t_end): t_end = t_k + 10 * slowest tau of interval k (10 T if none), and at
        least t_(k+1)."""
        resp = self.intervals[k]
        taus = self.time_constants(k)
        length = 10.0 * (taus[0] if taus else self.scale.t)
        end = resp.start + length
        if resp.next is not None:
            end = max(end, resp.next)
        return resp.start, end

    def waveform(self, probe: Probe, k: int, times: np.ndarray) -> np.ndarray:
        """Exact values of ``probe`` at ``times`` (s, after t_k) for interval k continued with
        its sources held; shape (n,)."""
        resp = self.intervals[k]
        c, d, const = self._terms(functional(self.circuit, self.layout, probe), resp)
        tau = (np.asarray(times, dtype=float).ravel() - resp.start) / self.scale.t
        return resp.output(tau, c, d) + const

    # ----------------------------------------------------------------- extras
    def thevenin(self, k: int) -> dict[str, float]:
        """Storage part -> Thevenin resistance in ohms it sees in interval k (sources zeroed,
        other capacitors open, other inductors shorted, controlled sources kept)."""
        from .thevenin import thevenin_resistances
        return thevenin_resistances(self.circuit, self.layout, self.scale, self.intervals[k].g)

    def conditioning(self) -> tuple[Conditioning, ...]:
        """One conditioning estimate per interval (``conditioning.assess``)."""
        return assess(self)

    def interval_modes(self, k: int) -> tuple[Mode, ...]:
        """Every mode cluster of interval k with its complex rate in 1/s (slowest first)."""
        resp = self.intervals[k]
        modes = [mode_of(cl, self.scale.t) for cl in resp.dec.clusters]
        return tuple(sorted(modes, key=lambda m: abs(m.rate)))

    def time_constants(self, k: int) -> tuple[float, ...]:
        """tau = -1/Re(lambda) in s of every decaying eigenvalue of interval k (multiplicity
        counted, a complex pair twice), slowest first."""
        taus = []
        for mode in self.interval_modes(k):
            if mode.kind == "decaying":
                taus += [mode.tau] * mode.multiplicity
        return tuple(sorted(taus, reverse=True))

    # ----------------------------------------------------------------- sign-off
    def exponential_sum(self, probe: Probe, k: int) -> "signoff.ExpSum":
        """The probe's exact waveform in interval k as an exponential sum (``signoff``)."""
        raws, _ = self._raw(probe)
        return signoff.ExpSum.of(raws[k], self.scale.t)

    def _held(self, k: int) -> tuple[float, float | None]:
        """(span length after t_k, gap to the next event or None), in s."""
        start, end = self.span(k)
        nxt = self.intervals[k].next
        length = end - start
        if not length > 0:  # 10 tau below the resolution of t_k itself (a 1e-30 F capacitor)
            taus = self.time_constants(k)
            length = 10.0 * (taus[0] if taus else self.scale.t)
        return length, (None if nxt is None else nxt - start)

    def crossing(self, probe: Probe, k: int, level: float, direction: str):
        """First crossing of ``level`` after event k (``harness.results.CrossingValue``)."""
        end, gap = self._held(k)
        _, scale = self._raw(probe)
        return signoff.crossing(self.exponential_sum(probe, k), level, direction, end,
                                self.features(probe, k).final, gap, CROSSING_AT_FINAL * scale)

    def peak(self, probe: Probe, k: int):
        """Largest magnitude of ``probe`` in interval k (``harness.results.PeakValue``)."""
        end, gap = self._held(k)
        return signoff.peak(self.exponential_sum(probe, k), end, self.features(probe, k).final,
                            gap)

    def overshoot(self, probe: Probe, k: int) -> float | None:
        """How far ``probe`` passes its final value in interval k, as a fraction of the step
        (``signoff.overshoot``)."""
        end, _ = self._held(k)
        return signoff.overshoot(self.exponential_sum(probe, k), end,
                                 self.features(probe, k).final)

    def energy(self, part_name: str, k: int, until: float | None = None):
        """Energy absorbed by a resistor, switch or controlled source over interval k, or with
        ``until`` (s) from the event to that time (``harness.results.EnergyValue``)."""
        part = self.circuit.part(part_name)
        end, gap = self._held(k)
        jump = self.jump(k)
        loss = 0.0
        if part.kind == SWITCH and (part_name in jump.charges or part_name in jump.fluxes):
            if jump.energy is None:
                from ..results import EnergyValue
                return EnergyValue(None)
            loss = float(jump.energy)
        closed = self.intervals[k].closed.get(part_name)
        ideal = part.kind == SWITCH and not (part.on_resistance if closed else part.off_resistance)
        voltage = None if ideal else self.exponential_sum(Probe(ACROSS, (part_name,)), k)
        current = self.exponential_sum(Probe(THROUGH, (part_name,)), k)
        return signoff.energy(voltage, current, loss, gap, end, until)

    def dominant(self, probe: Probe, k: int):
        """Zero-value time-constant estimate vs the exact waveform (``results.DominantTau``)."""
        key = ("dominant", probe.label, k)
        if key in self._probe_cache:
            return self._probe_cache[key]
        terms = self._coupled_terms(probe, k)
        end, _ = self._held(k)
        ex = self.exponential_sum(probe, k)
        _, scale = self._raw(probe)
        rates = signoff.visible_rates(ex, MODE_VISIBILITY * scale)
        raws, _ = self._raw(probe)
        final = classify(raws[k], scale, self.scale.t).final
        self._probe_cache[key] = signoff.dominant(ex, terms, rates, end, final)
        return self._probe_cache[key]

    def _coupled_terms(self, probe: Probe, k: int) -> dict[str, float]:
        """Zero-value time constants (s) of the storage parts that reach ``probe`` in interval k
        (``reach.reaching_storage``: a non-zero transfer function to the probe; a controlled
        source couples one way, from control to output), memoised per probe and interval."""
        key = ("coupled", probe.label, k)
        if key not in self._probe_cache:
            self._probe_cache[key] = self._coupled(probe, k)
        return dict(self._probe_cache[key])

    def _coupled(self, probe: Probe, k: int) -> dict[str, float]:
        from .reach import reaching_storage, voltage_of_capacitor
        terms = self._zero_value(k)
        resp, n = self.intervals[k], self.layout.size
        fn = functional(self.circuit, self.layout, voltage_of_capacitor(self.circuit, probe))
        g = resp.g
        row, drow, _ = fn.terms(self.layout, self.scale, g, resp.b, resp.values, n)
        coupled = reaching_storage(self.circuit, self.layout, g[:n, :n], resp.c[:n, :n],
                                   row, drow)
        del g
        if coupled is not None:
            terms = {p: t for p, t in terms.items() if p in coupled}
        return terms

    def _dominant_sum(self, probe: Probe, k: int) -> float | None:
        """The dominant-τ estimate alone (s): the sum of the coupled zero-value time constants,
        None unless finite and positive.  ``features`` needs only this; the deviation and 50 %
        time of ``dominant`` cost a scan of the waveform."""
        return signoff.estimate(self._coupled_terms(probe, k))

    def _zero_value(self, k: int) -> dict[str, float]:
        """Part -> zero-value time constant (s) for interval k, memoised."""
        key = ("zero-value", k)
        if key not in self._jump_cache:
            from .thevenin import pole_time_constants
            terms = signoff.zero_value_terms(self.circuit, self.thevenin(k), self.scale.r0)
            terms.update(pole_time_constants(self.circuit, self.intervals[k].g, self.layout))
            self._jump_cache[key] = terms
        return self._jump_cache[key]

    # ----------------------------------------------------------------- periodic drive
    def periodic(self, probe: Probe, fraction: float = SETTLE_FRACTION):
        """The probe's exact periodic steady state over one period of the circuit's repeating
        window (``harness.results.PeriodicValue``; ``closedform.periodic``)."""
        from . import periodic      # deferred: only files with a repeating window use it
        key = ("periodic", probe.label, fraction)
        if key not in self._probe_cache:
            self._probe_cache[key] = periodic.steady_state(self, probe, fraction)
        return self._probe_cache[key]

    def periodic_waveform(self, probe: Probe, offsets: np.ndarray) -> np.ndarray | None:
        """The probe's steady-state values at ``offsets`` (s after the window's first event,
        modulo the period), shape (n,); None without a steady state (``closedform.periodic``)."""
        from . import periodic
        return periodic.steady_waveform(self, probe, offsets)

    def _periodic_cycle(self) -> "periodic.Cycle":
        """The steady-state period, built once (raises ``periodic.NoSteadyState``)."""
        from . import periodic
        if "periodic" not in self._jump_cache:
            try:
                self._jump_cache["periodic"] = periodic.cycle(self)
            except periodic.NoSteadyState as exc:
                self._jump_cache["periodic"] = exc
        found = self._jump_cache["periodic"]
        if isinstance(found, periodic.NoSteadyState):
            raise found
        return found

    # ----------------------------------------------------------------- internals
    def _impulse(self, probe: Probe, k: int) -> Diagnostic | None:
        """The note of an impulse ``probe`` carries at event k (``impulses``), else None."""
        hazard = next((h for h in self.hazards if h.code == IMPULSIVE
                       and h.time == self.intervals[k].start), None)
        if hazard is None:
            return None
        resp = self.intervals[k]
        fn = functional(self.circuit, self.layout, probe)
        c_probe = self._terms(fn, resp)[0][:resp.n]
        q = impulse_weights(resp.g, resp.c, self._x_minus(k), resp.x_plus)
        return probe_impulse(probe, hazard, k, c_probe, q, self._jump_scales())

    def _x_minus(self, k: int) -> np.ndarray:
        return self.prestep.x_plus if k == 0 else self.intervals[k - 1].x_end

    def _terms(self, fn, resp: IntervalResponse) -> tuple[np.ndarray, np.ndarray, float]:
        g = resp.g if fn.kcl is not None else None       # G~ only where the KCL sum needs it
        return fn.terms(self.layout, self.scale, g, resp.b, resp.values, resp.xp.size)

    def _before(self, k: int, fn) -> tuple:
        """(x~, dx~/dtau, c~, d~, k) at t_k- (from the pre-step response for k = 0)."""
        prev = self.prestep if k == 0 else self.intervals[k - 1]
        x, dx = (prev.x_plus, prev.dx_plus) if k == 0 else (prev.x_end, prev.dx_end)
        return (x, dx) + self._terms(fn, prev)

    def _raw(self, probe: Probe) -> tuple[list[RawEvent], float]:
        key = probe.label
        if key not in self._probe_cache:
            fn = functional(self.circuit, self.layout, probe)
            raws = []
            before = self._before(0, fn)
            for k, resp in enumerate(self.intervals):
                start, end = self.span(k)
                terms = self._terms(fn, resp)    # this interval's, and the next one's "before"
                raws.append(raw_event(resp, before, terms, (end - start) / self.scale.t))
                before = (resp.x_end, resp.dx_end) + terms
            unset = undefined_before(self.circuit, self.layout, self.prestep, probe,
                                     self._jump_cache)
            if unset is not None and raws:
                raws[0] = replace(raws[0], before=None, unset=unset)
            sc = self._jump_scales()
            floor = SCALE_FLOOR * (sc.current if fn.dimension == "A" else sc.voltage)
            self._probe_cache[key] = (raws, probe_scale(raws, floor))
        return self._probe_cache[key]

    def _jump_scales(self) -> Scales:
        if "scales" not in self._jump_cache:
            self._jump_cache["scales"] = _circuit_scales(self)
        return self._jump_cache["scales"]


def _circuit_scales(sol: ClosedFormSolution) -> Scales:
    """Scales from every state at every event and every source value: Vn the largest node
    voltage, Vs the largest scaled value (currents as I R0); charge = Vn C_min, flux = Vn T,
    current = Vs / R0."""
    r0, nn = sol.scale.r0, sol.layout.n_nodes
    mags, volts = [1e-30], [1e-30]
    sources = [p for p in sol.circuit.parts if p.kind in SOURCES]
    for resp in (sol.prestep,) + sol.intervals:
        for x in (resp.x_plus, resp.x_end):
            if x is not None and np.all(np.isfinite(x)) and x.size:
                mags.append(float(np.max(np.abs(x))))     # scaled currents are in volts
                volts.append(float(np.max(np.abs(x[:nn]), initial=0.0)))
        for part in sources:
            v = abs(resp.values.get(part.name, 0.0))
            mags.append(v * (r0 if part.kind == CURRENT_SOURCE else 1.0))
    vs, vn = max(mags), max(volts)
    caps = [p.value for p in sol.circuit.parts if p.kind == CAPACITOR]
    charge = vn * (min(caps) if caps else sol.scale.t / r0)
    return Scales(voltage=vn, charge=charge, flux=vn * sol.scale.t, current=vs / r0)


def _interval_setup(circuit: Circuit, layout: Layout, scale: Scale, time: float, pre: bool):
    """Switch states, source values and floating groups of the interval starting at ``time``."""
    closed = {p.name: (p.is_closed_before(time) if pre else p.is_closed(time))
              for p in circuit.parts if p.kind == SWITCH}
    values = {p.name: (p.source_value_before(time) if pre else p.source_value(time))
              for p in circuit.parts if p.kind in SOURCES}
    groups = interval_groups(circuit, closed)
    return closed, values, groups


def _pencil(circuit, layout, scale, null, closed, groups, cache, time) -> Pencil:
    """The scaled pencil (with floating groups pinned) of a switch configuration, cached."""
    key = tuple(sorted(closed.items()))
    if key not in cache:
        g, c, _ = stamp(circuit, layout, closed, lambda p: 0.0)
        pin(g, layout, groups, 1.0 / scale.r0)
        scaled(g, c, np.zeros(layout.size), layout, scale, overwrite=True)
        zeros = zero_modes(circuit, closed, [group[0] for group in groups], g)
        kept_g, kept_c = Kept(g), Kept(c)
        del g, c                        # a large pencil is kept sparse (``response.Kept``)
        try:
            cache[key] = pencil_of(kept_g, kept_c, null, zeros)
        except SingularPencil:
            raise _singular(circuit, layout, kept_g.dense(), kept_c.dense(), time) from None
    return cache[key]


def _singular(circuit: Circuit, layout: Layout, g: np.ndarray, c: np.ndarray,
              time: float) -> TopologyError:
    """The error for an interval whose equations do not fix the state, naming what is free."""
    _, sv, vh = np.linalg.svd(g + 1.2345 * c)
    free = np.abs(vh[-1])
    names = list(layout.nodes) + list(layout.branches)
    picked = [names[i] for i in np.flatnonzero(free > 0.1 * free.max())]
    branch = [nm for nm in picked if nm in layout.branches]
    part, field = (branch[0], None) if branch else _blamed_part(circuit, picked)
    return TopologyError(
        f"from {format_si(time, 's')} the circuit's equations leave {', '.join(picked)} "
        f"undetermined (a loop of ideal voltage-type parts, a cut of current sources, or a "
        f"controlled source whose gain makes its own equation degenerate)",
        file=circuit.source, part=part, field=field)


def _blamed_part(circuit: Circuit, nodes: list[str]) -> tuple[str | None, str | None]:
    """(part, field) to name for undetermined ``nodes``: a controlled source touching them
    (its gain), else the first part touching them (its nodes)."""
    touching = [p for p in circuit.parts if set(p.nodes) & set(nodes)
                or (p.kind in VOLTAGE_CONTROLLED and set(p.control or ()) & set(nodes))]
    active = [p for p in touching if p.kind in CONTROLLED]
    if active:
        return active[0].name, "gain"
    return (touching[0].name, "nodes") if touching else (None, None)


def _b_scaled(circuit, layout, scale, closed, values) -> np.ndarray:
    b = stamp_sources(circuit, layout, lambda p: values[p.name])
    return scale.row(layout) * b


def solve(circuit: Circuit) -> ClosedFormSolution:
    """Solve ``circuit`` exactly, interval by interval (see the package docstring).

    Raises:
        InitialStateError: initial conditions that contradict the circuit at 0-, or an
            undefined pre-step storage value.
        TopologyError: an interval whose equations do not determine every quantity.
    """
    layout, scale = layout_of(circuit), scale_of(circuit)
    null = capacitor_null_basis(circuit, layout)
    events = circuit.events
    cache: dict = {}
    warnings: list[Diagnostic] = []

    def run(time, index, next_time, x_minus, pre=False):
        closed, values, groups = _interval_setup(circuit, layout, scale, time, pre)
        if groups and not pre:
            warnings.append(_floating_warning(time, groups))
        try:
            pencil = _pencil(circuit, layout, scale, null, closed, groups, cache, time)
        except TopologyError:
            if x_minus is None:             # an error in the state at 0- is reported first
                dc_state(circuit, layout, scale)
            raise
        b = _b_scaled(circuit, layout, scale, closed, values)
        if x_minus is None:                 # the pre-step interval: the DC state at 0-
            reuse = None if groups else (pencil.particular, b)
            x_minus = dc_state(circuit, layout, scale, reuse=reuse)
        return build(layout, pencil, null, b, x_minus, index=index, start=time,
                     next_time=next_time, values=values, closed=closed, t_ref=scale.t)

    prestep = run(0.0, -1, None, None, pre=True)
    intervals = []
    x_minus = prestep.x_plus
    for k, time in enumerate(events):
        nxt = events[k + 1] if k + 1 < len(events) else None
        resp = run(time, k, nxt, x_minus)
        intervals.append(resp)
        warnings += _interval_warnings(circuit, resp, scale)
        x_minus = resp.x_end
    sol = ClosedFormSolution(circuit, layout, scale, tuple(intervals), prestep, ())
    hazards = []
    for k, resp in enumerate(intervals):
        jump = sol.jump(k)
        warnings += list(jump.warnings)
        impulse = impulse_hazard(circuit, jump)
        hazards += ([impulse] if impulse is not None else []) + \
            _interval_hazards(circuit, resp, scale)
    return replace(sol, warnings=tuple(dict.fromkeys(warnings)), hazards=tuple(hazards))


def _floating_warning(time: float, groups: list[list[str]]) -> Diagnostic:
    return Diagnostic(FLOATING_NODES, time, nodes=tuple(n for g in groups for n in g))


def _interval_hazards(circuit: Circuit, resp: IntervalResponse, scale: Scale) -> list[Hazard]:
    """Unbounded growth in one interval: a current into nodes with no DC path (the feeding
    parts named) or a growing mode (its e-folding time, the active parts named)."""
    out = []
    if resp.augmented:
        nodes = set(resp.growth_nodes)
        feeders = tuple(p.name for p in circuit.parts if p.kind in CURRENT_BRANCHES
                        and (p.p in nodes or p.n in nodes))
        out.append(Hazard(GROWTH, resp.start, feeders, tuple(sorted(nodes))))
    active = tuple(p.name for p in circuit.parts if p.kind in CONTROLLED)
    for cl in resp.dec.clusters:
        rate = complex(cl.rate)
        if cl.zero or rate.real < -UNDAMPED * abs(rate):
            continue
        mode = mode_of(cl, scale.t)
        if mode.kind == "growing":
            out.append(Hazard(GROWTH, resp.start, active, (),
                              {"e-folding": 1 / mode.rate.real}))
    return out


def _interval_warnings(circuit: Circuit, resp: IntervalResponse,
                       scale: Scale) -> list[Diagnostic]:
    """Undamped modes of one interval (growth is a ``Hazard``)."""
    out = []
    for cl in resp.dec.clusters:
        rate = complex(cl.rate)
        if cl.zero or rate.real < -UNDAMPED * abs(rate):
            continue                                  # constant or decaying: nothing to say
        mode = mode_of(cl, scale.t)
        if mode.kind == "undamped" and mode.rate.imag > 0:
            out.append(Diagnostic(UNDAMPED_OSCILLATION, resp.start,
                                  values=(("frequency", float(mode.frequency)),)))
    return out
