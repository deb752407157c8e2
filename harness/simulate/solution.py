"""NumericSolution: the numerical engine's result, satisfying harness.results.Solution."""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np

from ..errors import InputError
from ..model import CAPACITOR, CONTROLLED, INDUCTOR, RESISTOR, SWITCH, THROUGH, Circuit, Probe
from ..results import (FLAT_RESPONSE, IMPULSIVE_VALUE, NO_FINAL, NOT_REACHED, Diagnostic,
                       Features, Jump, NotComputed)
from ..tolerances import MODE_VISIBILITY, NUMERIC_CURRENT_ROUNDING, SETTLE_FRACTION
from .branches import Layout
from .equations import System
from .features import (FIT_RESIDUAL, GRID, decay, fit_window, mode_fits, nearest_mode,
                       post_pulse, probe_noise, pulse_points, values)
from .integrate import IntervalRun, IntervalStats, interval_origin
from .probes import probe_offset, probe_row, voltage_row
from .regularise import Regularisation, gain_factor
from . import periodic, signoff
from .dominant import dominant as dominant_tau
from .modal import visible as visible_modes
from .loops import undefined_before

ENGINE = "numeric"

#: an impulsive charge below this fraction of (total capacitance x voltage scale) is noise
CHARGE_FLOOR = 1e-9
#: fit windows per time constant below which a mode's share of an after-value is unresolved
#: (``NumericSolution.resolution``)
RESOLVE = 25.0
#: the resolution of a value re-solved at tighter tolerances is this many times the change:
#: |x - x_true| <= |x - x_tight| / (1 - q) where the tighter solve errs by at most q of the
#: first's, taken as q = 1/2 for tolerances 100 times tighter (``refined_resolution``)
REFINE_SAFETY = 2.0
#: a resistor's charge in the pulse is an impulse only above this share of the largest charge
#: another part moves in it (the impulse of a capacitor's current passes on whole)
IMPULSE_SHARE = 1e-3


@dataclass(frozen=True)
class NumericSolution(NotComputed):
    """The narrow-pulse model of one circuit, integrated interval by interval.

    Attributes:
        circuit: the circuit solved.
        warnings: circuit-wide diagnostics (each names the interval's event time).
        regularisation: the regularising values used.
        layout: the state layout.
        pre: the system in force just before t = 0.
        systems: one ODE per interval (index k = event k).
        y0: state at 0-, shape (n,).
        runs: the integrated intervals (fewer than the events if an interval failed).
        rtol: relative tolerance used; atol: absolute tolerances, shape (n,).
        v_scale, i_scale: voltage (V) and current (A) scales of the states.
        plausible: the largest magnitude of each state of an operating point, shape (n,)
            (integrate.interval_origin).
        setup_seconds: wall time outside the integrator (building, DC solve).
        retry: builds this circuit's solution again, the same model at tighter tolerances
            (``engine.solve``), or None (``refined_resolution``).
        factors: the DC factorisations the integration kept by matrix (linsolve.solve),
            reused by the pre-step operating point (the same K_dc, the same switch states).
    """

    circuit: Circuit
    warnings: tuple[str, ...]
    regularisation: Regularisation
    layout: Layout
    pre: System
    systems: tuple[System, ...]
    y0: np.ndarray
    runs: tuple[IntervalRun, ...]
    rtol: float
    atol: np.ndarray
    v_scale: float
    i_scale: float
    plausible: np.ndarray
    setup_seconds: float = 0.0
    retry: Callable[[], "NumericSolution"] | None = field(default=None, compare=False,
                                                           repr=False)
    engine: str = ENGINE
    factors: dict = field(default_factory=dict, compare=False, repr=False)
    _cache: dict = field(default_factory=dict, compare=False, repr=False)

    # ----- counters ------------------------------------------------------------------------
    def stats(self, k: int) -> IntervalStats:
        return self.runs[k].stats

    # ----- helpers -------------------------------------------------------------------------
    def _t(self, k: int) -> float:
        return self.circuit.events[k]

    def _system(self, k: int) -> System:
        return self.pre if k < 0 else self.systems[k]

    def _rows(self, probe: Probe, k: int) -> tuple[np.ndarray, float]:
        """(w, e) of the probe in interval k (k = -1: before t = 0)."""
        key = ("rows", probe, k)
        if key not in self._cache:
            self._cache[key] = probe_row(self.circuit, self.layout, self._system(k), probe)
        return self._cache[key]

    def _origin(self, k: int) -> tuple[np.ndarray, bool, np.ndarray]:
        """(origin over x_d, consistent, origin as a full state) of interval k; for k = -1 the
        pre-step operating point."""
        if k >= 0:
            run = self.runs[k]
            return run.origin, run.consistent, run.origin_full
        if "pre-origin" not in self._cache:
            full, consistent, origin, _ = interval_origin(self.pre, self.y0, self.plausible,
                                                          self.atol / self.rtol, self.factors)
            self._cache["pre-origin"] = (origin, consistent, full)
        return self._cache["pre-origin"]

    def _offset(self, probe: Probe, k: int) -> float:
        """The probe's value at interval k's origin (see harness.simulate.probes)."""
        key = ("offset", probe, k)
        if key not in self._cache:
            origin, consistent, full = self._origin(k)
            self._cache[key] = probe_offset(self.circuit, self.layout, self._system(k), probe,
                                            origin, consistent, full)
        return self._cache[key]

    def _state_before(self, k: int) -> np.ndarray | None:
        if k == 0:
            return self.y0
        if k - 1 < len(self.runs):
            return self.runs[k - 1].y_next
        return None

    def _before(self, probe: Probe, k: int) -> float | None:
        """x(t_k-): the state at 0-, or the previous interval's state at this event."""
        if k - 1 >= len(self.runs):
            return None
        w, _ = self._rows(probe, k - 1)
        if k == 0:
            if self._unset(probe) is not None:
                return None
            origin, _, _ = self._origin(-1)
            y0 = self.pre.reduction.integrated(self.y0)
            return float(w @ (y0 - origin) + self._offset(probe, -1))
        if k - 1 >= len(self.runs) or self.runs[k - 1].y_next is None:
            return None
        run = self.runs[k - 1]
        return float(values(run, w, self._offset(probe, k - 1), np.array([run.length]))[0])

    def _unset(self, probe: Probe) -> Diagnostic | None:
        """Why ``before`` at 0- is not established for ``probe`` (``loops``), else None."""
        key = ("unset", probe)
        if key not in self._cache:
            self._cache[key] = undefined_before(self.circuit, self.pre, self.y0,
                                                     len(self.layout.nodes), probe)
        return self._cache[key]

    def _post(self, probe: Probe, k: int):
        key = ("post", probe, k)
        if key not in self._cache:
            w, _ = self._rows(probe, k)
            reg = self.regularisation
            pp = post_pulse(self.runs[k], w[None, :], np.array([self._offset(probe, k)]),
                            reg.post_pulse, fit_window(reg.post_pulse, reg.t_fast))
            self._cache[key] = pp
        return self._cache[key]

    def _base(self, probe: Probe, k: int) -> tuple[float | None, float | None, float | None]:
        """(before, after, final) of ``probe`` at event k."""
        before = self._before(probe, k)
        if k >= len(self.runs):
            return before, None, None
        run = self.runs[k]
        after = float(self._post(probe, k).at_event()[0])
        final = None
        if run.status == "settled":
            w, _ = self._rows(probe, k)
            final = float(values(run, w, self._offset(probe, k), np.array([run.end]))[0])
        return before, after, final

    def scale(self, probe: Probe) -> float:
        """The probe's scale: its largest magnitude at any event (else the largest source)."""
        mags = [abs(v) for k in range(len(self.circuit.events))
                for v in self._base(probe, k) if v is not None]
        top = max(mags, default=0.0)
        return top if top > 0 else self.circuit.largest_source()

    def resolution(self, k: int) -> float:
        """The fastest time constant (s) whose share of a value just after event k this engine
        resolves: ``RESOLVE`` fit windows.  Its after-value is a quadratic fitted over the
        window W beyond the pulse and extrapolated back to t_k; on e^(-t/tau) that quadratic
        errs by about (W/tau)^3/6 of the mode's share, 1e-5 at W/tau = 1/25.  W is ~1e-4 of
        the fastest mode unless the pulse cannot be made narrow (r_s at least 1e-9 R_min with
        a large capacitor across a source, or the event time's own resolution)."""
        reg = self.regularisation
        return RESOLVE * (reg.post_pulse + fit_window(reg.post_pulse, reg.t_fast))

    def value_resolution(self, probe: Probe, k: int) -> float:
        """The smallest difference in the probe's values over interval k (its unit) this
        engine establishes, the larger over intervals k - 1 (its before-value) and k: the
        integration's tolerance on the states the probe reads, sum |w_i| atol_i (a current read
        through a carrier's 1/r_s carries that carrier's atol, CARRIER_NOISE V / r_s: a
        capacitor straight across a source), plus what the inductor shunts of the narrow-pulse
        model put into it (``_shunt_share``)."""
        key = ("value-resolution", probe, k)
        if key not in self._cache:
            self._cache[key] = max((self._tolerance_share(probe, j) + self._shunt_share(probe)
                                    for j in range(max(k - 1, 0), min(k, len(self.runs) - 1) + 1)),
                                   default=0.0)
        return self._cache[key]

    def refined_resolution(self, probe: Probe, k: int, name: str) -> float | None:
        """This engine's resolution of field ``name`` (``peak``, or a ``Features`` value such
        as ``after``) of the probe in interval k (its unit), established by its own re-solve
        at tighter tolerances (``retry``, every tolerance times ``engine.TIGHTER``):
        ``REFINE_SAFETY`` times the change in the value, plus the inductor shunts' share
        (``_shunt_share``, a modelling perturbation no tolerance moves); None where the
        re-solve is not available or does not give the value, and for ``before`` at t = 0
        (the DC state at 0-, which no tolerance moves).  Far tighter than
        ``value_resolution`` for a current read through a carrier's 1/r_s: 0.85 uA through a
        capacitor across a source moves to 4.7 nA where that bound is 2.0 A."""
        if name == "before" and k == 0:
            return None
        here, tight = self._field(probe, k, name), self._tighter()
        there = None if tight is None else tight._field(probe, k, name)
        if here is None or there is None:
            return None
        return REFINE_SAFETY * abs(here - there) + self._shunt_share(probe)

    def _tighter(self) -> "NumericSolution | None":
        """The re-solve at tighter tolerances (``retry``), built once; None without one or
        where it fails (a refusal, a numerical breakdown)."""
        if "tighter" not in self._cache:
            try:
                self._cache["tighter"] = None if self.retry is None else self.retry()
            except (InputError, ArithmeticError, ValueError, np.linalg.LinAlgError):
                self._cache["tighter"] = None
        return self._cache["tighter"]

    def _field(self, probe: Probe, k: int, name: str) -> float | None:
        """Field ``name`` of the probe in interval k: the peak's magnitude or a ``Features``
        value; None where interval k was not reached or the value is not given."""
        if k >= len(self.runs):
            return None
        if name == "peak":
            found = self.peak(probe, k)
            return None if found is None else found.magnitude
        return getattr(self.features(probe, k), name, None)

    def _tolerance_share(self, probe: Probe, j: int) -> float:
        """sum |w_i| atol_i over the integrated coordinates of interval j (probe's unit)."""
        w, _ = self._rows(probe, j)
        return float(np.abs(w) @ self.atol[self.systems[j].reduction.dyn])

    def _shunt_share(self, probe: Probe) -> float:
        """About what the inductor shunts put into a probe's value (V or A): each
        carries |v_L| / r_shunt with |v_L| up to the voltage scale V; a current injected into a
        resistive network passes at most itself through a branch and raises a voltage by at
        most itself times the sum of the resistances R_sum (a controlled source's gain may
        carry it further; not counted: the gain factor squared made this volts beside a
        Miller stage).  The ideal circuit has no shunt: a probe the closed form gives as 0 V
        beside three 2.1 mH coils reads ~50 nV here (R_sum 10.4 kohm, r_shunt 3.3 Tohm,
        V 8.43 V)."""
        r_shunt = self.regularisation.r_shunt
        inductors = sum(1 for p in self.circuit.parts if p.kind == INDUCTOR)
        if not inductors or not np.isfinite(r_shunt):
            return 0.0
        current = inductors * self.v_scale / r_shunt
        if probe.kind == THROUGH:
            return current
        r_sum = sum(abs(r) for p in self.circuit.parts
                    for r in ((p.value,) if p.kind == RESISTOR else
                              (p.on_resistance, p.off_resistance) if p.kind == SWITCH else ())
                    if r)
        return r_sum * current

    # ----- Solution protocol -----------------------------------------------------------------
    def features(self, probe: Probe, k: int) -> Features:
        """Values of ``probe`` at event k (see harness.simulate for the methods); at 0- a
        current the resistive network leaves free is None with its note (``loops``)."""
        out = self._features(probe, k)
        unset = self._unset(probe) if k == 0 else None
        if unset is not None:
            out = replace(out, notes=(unset,) + tuple(out.notes))
        impulse = self._impulse(probe, k) if k < len(self.runs) else None
        return out if impulse is None else replace(out, after=None,
                                                  notes=(impulse,) + tuple(out.notes))

    def _impulse(self, probe: Probe, k: int) -> Diagnostic | None:
        """The note for a probe that carries an impulse at event k: where this engine's pulse
        moves charge through a resistor (``jump``), a ``through`` probe of such a resistor, or
        a voltage probe whose integral over the pulse window, less the post-pulse fit's,
        exceeds what ten times the voltage scale (times the controlled gains) gives over the
        window (the rule of ``_opening_fluxes``)."""
        key = ("impulse", probe, k)
        if key not in self._cache:
            self._cache[key] = self._impulse_note(probe, k)
        return self._cache[key]

    def impulsive_resistors(self, k: int) -> tuple[str, ...]:
        """The resistors through which this engine's pulse at event k moves an impulse of
        charge: more than a finite current can carry over the pulse window (ten times the
        current scale times the controlled gains, the rule of ``_opening_fluxes``) and more
        than ``IMPULSE_SHARE`` of the largest charge any other part moves in the pulse.  A
        circuit without a controlled source or amplifier has none (each loop that carries an
        impulse is one of capacitors and voltage sources, never through a resistance), so its
        jumps are not computed for this."""
        if not any(p.kind in CONTROLLED for p in self.circuit.parts) or k >= len(self.runs):
            return ()
        charges = self.jump(k).charges
        others = [abs(q) for nm, q in charges.items()
                  if self.circuit.part(nm).kind != RESISTOR]
        floor = max(10.0 * self.i_scale * gain_factor(self.circuit)
                    * self.regularisation.post_pulse,
                    IMPULSE_SHARE * max(others, default=0.0))
        return tuple(nm for nm, q in charges.items()
                     if self.circuit.part(nm).kind == RESISTOR and abs(q) > floor)

    def _impulse_note(self, probe: Probe, k: int) -> Diagnostic | None:
        resistors = self.impulsive_resistors(k)
        if not resistors:
            return None
        note = Diagnostic(IMPULSIVE_VALUE, self._t(k), k, parts=resistors, engine=ENGINE)
        if probe.kind == THROUGH:
            return note if probe.targets[0] in resistors else None
        run, reg = self.runs[k], self.regularisation
        nodes, weights = pulse_points(run, reg.post_pulse)
        if not nodes.size:
            return None
        w, _ = self._rows(probe, k)
        inside = run.probe(w[None, :], np.array([self._offset(probe, k)]), nodes) @ weights
        flux = float(inside[0] - self._post(probe, k).integral()[0])
        floor = 10.0 * self.v_scale * gain_factor(self.circuit) * reg.post_pulse
        return note if abs(flux) > floor else None

    def _features(self, probe: Probe, k: int) -> Features:
        before, after, final = self._base(probe, k)
        if k >= len(self.runs):
            return Features(before, None, None, notes=(
                Diagnostic(NOT_REACHED, self._t(k), k, engine=ENGINE),))
        if final is None:
            return Features(before, after, final, notes=(
                Diagnostic(NO_FINAL, self._t(k), k, detail=self.runs[k].status, engine=ENGINE),))
        scale = self.scale(probe)
        w, _ = self._rows(probe, k)
        noise = probe_noise(w, self.atol[self.systems[k].reduction.dyn])
        seen = visible_modes(self, probe, k, scale)
        tau, modes, notes = self._tau(probe, k, seen, scale, noise)
        if tau is None and any(n.code == FLAT_RESPONSE and n.value("deviation", 0.0) >
                               MODE_VISIBILITY * scale for n in notes):
            refined = self._refined_noise(probe, k)     # visible, within the coarse bound
            if refined is not None and refined < noise:
                tau, modes, notes = self._tau(probe, k, seen, scale, refined)
        if seen is None:
            return Features(before, after, final, tau=tau, order=None, modes=modes, notes=notes)
        return Features(before, after, final, tau=tau, order=seen.order, modes=seen.modes,
                        oscillation=seen.oscillation, notes=notes, rings=seen.rings,
                        order_bounds=seen.bounds)

    def _tau(self, probe: Probe, k: int, seen, scale: float, noise: float) -> tuple:
        """(τ or None, tail modes, notes) of the probe in interval k (``features.decay``, then
        taken to the nearest mode of this engine's pencil ``seen``, or that one mode's
        exponential, ``_one_mode``), the integration's error in the probe being ``noise``."""
        w, _ = self._rows(probe, k)
        final = self._base(probe, k)[2]
        tau, modes, notes = decay(self.runs[k], w, self._offset(probe, k),
                                  self.regularisation.post_pulse, final, scale,
                                  MODE_VISIBILITY * scale, noise, probe.dimension)
        if seen is not None:
            tau = nearest_mode(tau, seen.modes)
            if tau is None and self._one_mode(probe, k, seen, max(FIT_RESIDUAL * scale, noise),
                                              noise):
                tau, notes = seen.modes[0], ()
        return tau, modes, notes

    def _refined_noise(self, probe: Probe, k: int) -> float | None:
        """The integration's error in the probe's response after the pulse in interval k (its
        unit) as this engine's own re-solve at tighter tolerances (``retry``) establishes it:
        ``REFINE_SAFETY`` times the largest change in the response over the fit's grid, plus
        the inductor shunts' share (``refined_resolution``'s rule); None without a re-solve.
        The a-priori bound (``probe_noise``) of a current read through a carrier's 1/r_s is
        far coarser: 14 mA where the response moves by 69 nA and is resolved."""
        tight = self._tighter()
        if tight is None or k >= len(tight.runs):
            return None
        s_a = self.regularisation.post_pulse
        end = min(self.runs[k].end, tight.runs[k].end)
        if not end > s_a:
            return None
        grid = np.geomspace(s_a, end, GRID)
        apart = np.max(np.abs(self.held(probe, k, grid) - tight.held(probe, k, grid)))
        return REFINE_SAFETY * float(apart) + self._shunt_share(probe)

    def _one_mode(self, probe: Probe, k: int, seen, allowed: float, noise: float) -> bool:
        """Whether the probe in interval k is first order in this engine's own pencil (one
        visible real mode) and its held response, above the integration's error ``noise``, is
        that mode's exponential to ``allowed`` (``features.mode_fits``)."""
        if seen.order != 1 or len(seen.modes) != 1 or seen.rings:
            return False
        w, _ = self._rows(probe, k)
        final = self._base(probe, k)[2]
        return mode_fits(self.runs[k], w, self._offset(probe, k),
                         self.regularisation.post_pulse, final, seen.modes[0], allowed, noise)

    def span(self, k: int) -> tuple[float, float]:
        """(t_k, t_end): the event time and the end of the held continuation (s)."""
        t0 = self._t(k)
        if k >= len(self.runs):
            return t0, t0
        return t0, t0 + self.runs[k].end

    def waveform(self, probe: Probe, k: int, times: np.ndarray) -> np.ndarray:
        """Held response of interval k at absolute ``times``, shape (n,); within the pulse
        (before the post-pulse start) the post-pulse polynomial is returned instead."""
        times = np.asarray(times, dtype=float)
        if k >= len(self.runs):  # the integration stopped before this interval
            return np.full(times.shape, np.nan)
        return self.held(probe, k, times - self._t(k))

    def held(self, probe: Probe, k: int, local: np.ndarray) -> np.ndarray:
        """``waveform`` at local times ``local`` = t - t_k (s), shape (n,) (interval k must
        have been integrated)."""
        local = np.asarray(local, dtype=float)
        run = self.runs[k]
        w, _ = self._rows(probe, k)
        out = values(run, w, self._offset(probe, k), local)
        early = local < self.regularisation.post_pulse
        if np.any(early):
            out[early] = self._post(probe, k).value(local[early])[0]
        return out

    def periodic(self, probe: Probe, fraction: float = SETTLE_FRACTION):
        """The probe's periodic steady state by this engine's own route (shooting on its
        integrated model, ``simulate.periodic``; ``harness.results.PeriodicValue``)."""
        key = ("periodic", probe, fraction)
        if key not in self._cache:
            self._cache[key] = periodic.steady_state(self, probe, fraction)
        return self._cache[key]

    def periodic_waveform(self, probe: Probe, offsets: np.ndarray) -> np.ndarray | None:
        """The probe's steady-state values at ``offsets`` (s after the window's first event,
        modulo the period), shape (n,); None without a steady state (``simulate.periodic``)."""
        return periodic.steady_waveform(self, probe, offsets)

    def _periodic_cycle(self) -> "periodic.NumericCycle":
        """The steady-state period, built once (raises ``periodic.NoSteadyState``)."""
        if "periodic" not in self._cache:
            try:
                self._cache["periodic"] = periodic.cycle(self)
            except periodic.NoSteadyState as exc:
                self._cache["periodic"] = exc
        found = self._cache["periodic"]
        if isinstance(found, periodic.NoSteadyState):
            raise found
        return found

    def probe_terms(self, probe: Probe, k: int) -> tuple[np.ndarray, float]:
        """(w, offset) with the probe's value w . z + offset over interval k's deviations z."""
        w, _ = self._rows(probe, k)
        return w, self._offset(probe, k)

    # ----- sign-off quantities (harness.results.Solution) -------------------------------
    def crossing(self, probe: Probe, k: int, level: float, direction: str):
        """First crossing of ``level`` after event k (``results.CrossingValue``; see
        harness.simulate.signoff), or None where interval k was not integrated."""
        return signoff.crossing(self, probe, k, level, direction)

    def peak(self, probe: Probe, k: int):
        """Largest magnitude of ``probe`` in interval k (``results.PeakValue``), or None."""
        return signoff.peak(self, probe, k)

    def overshoot(self, probe: Probe, k: int) -> float | None:
        """How far ``probe`` passes its final value in interval k, as a fraction of the step
        (``signoff.overshoot``)."""
        return signoff.overshoot(self, probe, k)

    def energy(self, part: str, k: int, until: float | None = None):
        """Energy absorbed by ``part`` over interval k, or with ``until`` (s) from the event to
        that time (``results.EnergyValue``), or None."""
        return signoff.energy(self, part, k, until)

    def dominant(self, probe: Probe, k: int):
        """The numerical engine's zero-value time-constant estimate of ``probe`` in interval k
        and its distance from the integrated waveform (``results.DominantTau``; see
        harness.simulate.dominant), or None where interval k was not integrated."""
        key = ("dominant", probe, k)
        if key not in self._cache:
            self._cache[key] = dominant_tau(self, probe, k)
        return self._cache[key]

    def samples(self, probe: Probe, k: int) -> tuple[np.ndarray, np.ndarray]:
        """The raw integration points of interval k: (absolute times, probe values), pulse
        included, shapes (m,), (m,); empty where the integration stopped before interval k."""
        if k >= len(self.runs):
            return np.zeros(0), np.zeros(0)
        run = self.runs[k]
        w, _ = self._rows(probe, k)
        return run.s + self._t(k), w @ run.z + self._offset(probe, k)

    def jump(self, k: int) -> Jump:
        """Charges moved in the pulse at event k, energy dissipated, stored energies."""
        key = ("jump", k)
        if key not in self._cache:
            self._cache[key] = self._jump(k)
        return self._cache[key]

    def _jump(self, k: int) -> Jump:
        t = self._t(k)
        y_before = self._state_before(k)
        if k >= len(self.runs) or y_before is None:
            return Jump(t, energy=None, warnings=(Diagnostic(NOT_REACHED, t, engine=ENGINE),))
        run, system, lay, reg = self.runs[k], self.systems[k], self.layout, self.regularisation
        n = lay.n
        names = list(system.branches)
        caps = [p for p in self.circuit.parts if p.kind == CAPACITOR]
        rows = [system.branches[nm].dense(n) for nm in names]
        rows += [r.current.dense(n) for r in system.regularisers]
        rows += [voltage_row(lay, p.p, p.n) for p in caps]
        consts = [system.branches[nm].const for nm in names]
        consts += [r.current.const for r in system.regularisers]
        consts += [0.0] * len(caps)
        rows, consts = np.array(rows).reshape(-1, n), np.array(consts)
        red = system.reduction
        rows_d = np.asarray(rows @ red.lift)
        consts_d = consts + rows @ red.lift_c
        offsets = rows_d @ run.origin + consts_d
        pp = post_pulse(run, rows_d, offsets, reg.post_pulse,
                        fit_window(reg.post_pulse, reg.t_fast))
        nodes, weights = pulse_points(run, reg.post_pulse)
        cur = run.probe(rows_d, offsets, nodes) if nodes.size else np.zeros((len(rows), 0))
        fit = pp.value(nodes) if nodes.size else cur
        charge = cur @ weights - pp.integral()
        after = pp.at_event()
        nb, nr = len(names), len(system.regularisers)
        q_floor = self._charge_floor()
        charges = {nm: float(charge[i]) for i, nm in enumerate(names)
                   if abs(charge[i]) > q_floor}
        stored_before, stored_after, fluxes = {}, {}, {}
        v_before = rows[nb + nr:] @ y_before + consts[nb + nr:]
        for j, part in enumerate(caps):
            q = part.value * (after[nb + nr + j] - v_before[j])
            if abs(q) > q_floor:
                charges[part.name] = float(q)
            stored_before[part.name] = 0.5 * part.value * float(v_before[j]) ** 2
            stored_after[part.name] = 0.5 * part.value * float(after[nb + nr + j]) ** 2
        for name in lay.inductors:
            part = self.circuit.part(name)
            i0, i1 = float(y_before[lay.part_index[name]]), float(after[names.index(name)])
            stored_before[name], stored_after[name] = 0.5 * part.value * i0 ** 2, 0.5 * part.value * i1 ** 2
            if abs(i1 - i0) > CHARGE_FLOOR * self.i_scale:
                fluxes[name] = part.value * (i1 - i0)
        opened = self._opening_fluxes(k, run, system, nodes, weights)
        fluxes.update(opened)
        energy = float(sum(r.resistance * ((cur[nb + i] ** 2 - fit[nb + i] ** 2) @ weights)
                           for i, r in enumerate(system.regularisers)))
        forced = {nm: (self._clean(y_before[lay.part_index[nm]]),
                       self._clean(after[names.index(nm)])) for nm in fluxes
                  if nm in lay.inductors}
        if any(self.circuit.part(nm).kind in CONTROLLED for nm in charges):
            energy = None
        return Jump(t, charges=charges, fluxes=fluxes, energy=energy,
                    stored_before=stored_before, stored_after=stored_after, forced=forced,
                    opened=tuple(opened))

    def _clean(self, current: float) -> float:
        """A current in A, 0 below ``tolerances.NUMERIC_CURRENT_ROUNDING`` of the circuit's
        current scale (this engine's own noise; ``tolerances`` says why it differs from the
        closed form's)."""
        return 0.0 if abs(current) < NUMERIC_CURRENT_ROUNDING * self.i_scale else float(current)

    def _opening_fluxes(self, k: int, run, system, nodes: np.ndarray,
                        weights: np.ndarray) -> dict[str, float]:
        """Switch name -> the impulsive flux (V s) across each switch opening at event k: the
        integral over the pulse window of its voltage less the post-pulse fit's, where it
        exceeds what ten times the circuit's voltage scale (times the controlled gains) can
        give over the window: a forced inductor current's voltage impulse, read from the
        integrated waveform."""
        t, lay, reg = self._t(k), self.layout, self.regularisation
        opening = [p for p in self.circuit.parts if p.kind == SWITCH
                   and p.is_closed_before(t) and not p.is_closed(t)]
        if not opening or not nodes.size:
            return {}
        rows = np.array([voltage_row(lay, p.p, p.n) for p in opening])
        rows_d = np.asarray(rows @ system.reduction.lift)
        offsets = rows_d @ run.origin + rows @ system.reduction.lift_c
        pp = post_pulse(run, rows_d, offsets, reg.post_pulse,
                        fit_window(reg.post_pulse, reg.t_fast))
        flux = run.probe(rows_d, offsets, nodes) @ weights - pp.integral()
        floor = 10.0 * self.v_scale * gain_factor(self.circuit) * reg.post_pulse
        return {p.name: float(f) for p, f in zip(opening, flux) if abs(f) > floor}

    def _charge_floor(self) -> float:
        """Charges below this (C) are not reported: CHARGE_FLOOR of the capacitors' charge
        scale, ten times what the parasitic capacitances can hold, and, where inductors can be
        forced (their pulses move no finite charge), ten times what a current of the circuit's
        current scale moves during the pulse window."""
        reg = self.regularisation
        c_sum = sum(abs(p.value) for p in self.circuit.parts if p.kind == CAPACITOR)
        parasitic = sum(reg.c_node.values()) * self.v_scale
        forced = 10.0 * self.i_scale * reg.post_pulse if self.layout.inductors else 0.0
        return max(CHARGE_FLOOR * c_sum * self.v_scale, 10.0 * parasitic, forced, 1e-300)
