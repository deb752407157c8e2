"""solve(): regularise, build each interval's ODE, find 0-, integrate interval by interval."""

from __future__ import annotations

import math
import time as _time
from dataclasses import replace
from functools import partial

import numpy as np

from ..model import (CAPACITOR, CONTROLLED, CURRENT_SOURCE, INDUCTOR, RESISTOR, SWITCH,
                     VOLTAGE_SOURCE, Circuit)
from ..results import BREAKDOWN, PULSE_GROWTH, STOPPED, UNSETTLED, WORK_BUDGET, Diagnostic
from .coordinates import Unreduced
from .branches import layout
from .equations import build
from .features import fit_window
from .initial import initial_state
from .integrate import integrate_interval
from .nodesets import find_root
from .regularise import PILOT_SPLIT, Survey, choose, gain_factor, survey
from .solution import ENGINE, NumericSolution

#: the absolute tolerance of a state is rtol times this fraction of its kind's scale
ATOL_FRACTION = 1e-4
#: a carrier current is never asked to be more precise than this many times the rounding of
#: its voltage u = v_p - v_n - E, i.e. CARRIER_NOISE * V / r_s (below it Radau's steps stall);
#: likewise a node voltage is never asked to be more precise than CARRIER_NOISE * V
#: (``_resistive_atol``)
CARRIER_NOISE = 1e-14
#: the factor on every tolerance (rtol, each atol and the floors above) of the re-solve that
#: establishes the engine's resolution of a value (``NumericSolution.refined_resolution``)
TIGHTER = 1e-2
#: an interval's DC operating point is plausible up to this many times the largest magnitude
#: the circuit's sources can drive in each kind of state (``_plausible``); beyond it the solve
#: is taken to have found no equilibrium (a nearly singular system's rounding)
PLAUSIBLE = 1e5
#: pulse ratio of the pilot model that locates the fastest real mode
PILOT_RATIO = 1e-3
#: the pilot is skipped above this many integrated states (dense eigenvalues)
PILOT_MAX_STATES = 300
#: the first step of an interval, as a fraction of the pulse width
FIRST_STEP = 1e-3
#: rtol = pulse_ratio by default, kept within these bounds
RTOL_BOUNDS = (1e-8, 1e-4)
#: work budget of one interval (all its runs): accepted steps and right-hand-side evaluations.
#: A step collapse (a pulse and a settling horizon ~30 decades apart, Newton failing at ~10
#: evaluations per step) stops here within a few seconds; that interval and the later ones are
#: not reported.  A typical interval uses 100-600 steps.
STEP_BUDGET = 30_000
EVAL_BUDGET = 300_000
#: work budget of one solve over all its intervals: bounds the total time (~0.15 ms per step
#: and ~20 us per evaluation here, so about a minute at most) while a schedule of ~1,000
#: RC intervals (~400 steps each) keeps every value
SOLVE_STEP_BUDGET = 450_000
SOLVE_EVAL_BUDGET = 3_000_000


def _source_max(circuit: Circuit, kind: str) -> float:
    vals = [abs(p.value or 0.0) for p in circuit.parts if p.kind == kind]
    vals += [abs(v) for p in circuit.parts if p.kind == kind for _, v in p.steps]
    return max(vals, default=0.0)


def _scales(circuit: Circuit, lay, y0: np.ndarray) -> tuple[float, float]:
    """(V, A) scales of node voltages and inductor currents from sources, initials and 0-."""
    res = [abs(p.value) for p in circuit.parts if p.kind == RESISTOR and p.value]
    v_src, i_src = _source_max(circuit, VOLTAGE_SOURCE), _source_max(circuit, CURRENT_SOURCE)
    v_init = max([abs(p.initial) for p in circuit.parts
                  if p.kind == CAPACITOR and p.initial is not None], default=0.0)
    i_init = max([abs(p.initial) for p in circuit.parts
                  if p.kind == INDUCTOR and p.initial is not None], default=0.0)
    volts = lay.volts
    v = max(float(np.max(np.abs(y0[volts]), initial=0.0)), v_src, v_init)
    if res:
        v = max(v, i_src * max(res))
    i = max(float(np.max(np.abs(y0[~volts]), initial=0.0)), i_src, i_init)
    if res:
        i = max(i, v / max(res))
    v = v if v > 0 else 1.0
    i = i if i > 0 else 1.0
    return v, i


def _plausible(circuit: Circuit, lay, atol: np.ndarray, rtol: float, v_scale: float,
               i_scale: float, gain: float) -> np.ndarray:
    """The largest plausible magnitude of each state of an operating point, shape (n,), for
    integrate.interval_origin.

    From the circuit's own scales: a node voltage reaches at most the voltage scale, or the
    largest source current through the largest resistance (a switch's off-resistance
    included), times the controlled sources' gain factor ``gain`` (regularise.gain_factor);
    a current reaches at most that
    voltage through the smallest resistance (a switch's on-resistance included) plus the
    largest source current.  Each is taken ``PLAUSIBLE`` times, and never below 1e9 times the
    state's absolute-tolerance base atol / rtol (the carriers' floor included).  A current
    scale read from the largest resistance alone (``_scales``, which sets the tolerances) is
    far below what a small resistance carries: 0.503 A settles through 6.64 ohm beside
    686 kohm, 1e5 times a 4.9 uA scale.
    """
    res = [abs(p.value) for p in circuit.parts if p.kind == RESISTOR and p.value]
    res += [abs(r) for p in circuit.parts if p.kind == SWITCH
            for r in (p.on_resistance, p.off_resistance) if r]
    i_src = _source_max(circuit, CURRENT_SOURCE)
    volts = max(v_scale, i_src * max(res, default=0.0)) * gain
    amps = max(i_scale, volts / min(res) + i_src if res else 0.0)
    physical = np.where(lay.volts, PLAUSIBLE * volts, PLAUSIBLE * amps)
    return np.maximum(1e9 * atol / rtol, physical)


def _carrier_floor(lay, systems, atol: np.ndarray, v: float, r_series: float,
                   noise: float = CARRIER_NOISE) -> np.ndarray:
    """atol with each carrier current raised to noise * |u| / r_s (``noise`` CARRIER_NOISE
    unless tightened), |u| bounded by the sum of its voltage coefficients times ``v``, the
    gain-scaled voltage scale (V)."""
    atol = atol.copy()
    nn = len(lay.nodes)
    systems = _distinct(systems)
    for name in lay.carriers:
        r = lay.part_index[name]
        weight = max(float(np.abs(sys_.K[[r], :nn].toarray()).sum()) for sys_ in systems)
        atol[r] = max(atol[r], noise * max(weight, 1.0) * v / r_series)
    return atol


def _resistive_atol(circuit: Circuit, lay, atol: np.ndarray, v_scale: float,
                    i_atol: float, noise: float = CARRIER_NOISE) -> np.ndarray:
    """atol with each node voltage lowered to ``i_atol`` (A, the currents' absolute tolerance)
    times the smallest resistance at the node, never below noise * V (``noise``
    CARRIER_NOISE unless tightened): the current
    through that resistance, (v_a - v_b)/R, is then resolved like an inductor current.
    Without it a 40 uA current through a closed 1.18 mohm switch (48 nV across it) was
    integrated to atol = 5e-11 V, 1e-3 of its swing."""
    atol = atol.copy()
    smallest: dict[str, float] = {}
    for part in circuit.parts:
        values = ([part.value] if part.kind == RESISTOR else
                  [part.on_resistance, part.off_resistance] if part.kind == SWITCH else [])
        for r in (abs(v) for v in values if v):
            for node in part.nodes:
                smallest[node] = min(smallest.get(node, math.inf), r)
    for node, r in smallest.items():
        if node in lay.node_index:
            i = lay.node_index[node]
            atol[i] = max(min(atol[i], i_atol * r), noise * v_scale)
    return atol


def _warning(circuit: Circuit, lay, run, k: int, run_dyn: np.ndarray) -> Diagnostic | None:
    """The circuit-wide diagnostic for an interval that did not settle, or None."""
    if run.status == "settled":
        return None
    t = circuit.events[k]
    change = np.abs(run.y[:, -1] - run.y[:, 0]) / np.maximum(np.abs(run.y).max(axis=1), 1e-300)
    names = lay.names
    dyn = run_dyn
    index = int(dyn[int(np.argmax(change))]) if dyn.size else 0
    name = names[index] if len(names) else "?"
    where = {"nodes": (name,)} if index < len(lay.nodes) else {"parts": (name,)}
    if run.status == "no-origin":
        reason = "no-origin"
    elif not run.consistent:
        reason = "no-operating-point"
    elif run.status in ("blow-up", "horizon"):
        reason = run.status
    else:
        reason = "failed"
    return Diagnostic(UNSETTLED, t, k, values=(("end", t + run.end),), detail=reason,
                      engine=ENGINE, **where)


def _fastest_real_mode(circuit: Circuit, lay, surveyed: Survey) -> float | None:
    """The fastest real time constant (s) of a coarse pilot model (pulse ratio PILOT_RATIO),
    from the eigenvalues of its intervals' Jacobians, or None (too large, or no real mode).

    The pilot's regularising modes are faster than 1/(4 t_pulse); eigenvalues below
    PILOT_SPLIT / t_pulse in magnitude are the circuit's own.  A part-value estimate of the
    fastest mode must be a lower bound and is often decades too low (a gain, a node with many
    conductances); the pilot's figure lets the real model's pulse sit just eps below it.
    ``lay``: the circuit's layout; ``surveyed``: its ``regularise.survey``.
    """
    if _states_at_least(circuit, lay) > PILOT_MAX_STATES:
        return None
    pilot = choose(circuit, PILOT_RATIO, surveyed=surveyed)
    try:
        _, systems = _build_all(circuit, lay, pilot, jac_only=True)
    except Unreduced:
        return None
    rates = []
    for system in {id(s.jac): s for s in systems}.values():  # one per distinct Jacobian
        if system.n > PILOT_MAX_STATES:
            return None
        jac = system.jac.toarray() if hasattr(system.jac, "toarray") else system.jac
        if jac.size == 0 or not np.all(np.isfinite(jac)):
            continue
        lam = np.abs(np.linalg.eigvals(jac))
        rates += list(lam[(lam > 0) & (lam < PILOT_SPLIT / pilot.t_pulse)])
    return 1.0 / max(rates) if rates else None


def _states_at_least(circuit: Circuit, lay) -> int:
    """A lower bound on the integrated states of any interval, without building one: every
    inductor and carrier current, plus the rank of the capacitance matrix over the nodes (the
    nodes on capacitors, less one per capacitor group that does not reach ground)."""
    parent: dict[str, str] = {}
    for part in circuit.parts:
        if part.kind == CAPACITOR and part.value and part.p != part.n:
            parent[find_root(parent, part.p)] = find_root(parent, part.n)
    ground = find_root(parent, circuit.ground)
    roots = {find_root(parent, node) for node in list(parent)}
    floating = sum(1 for root in roots if root != ground)
    touched = len(parent) - 1  # the nodes on capacitors, ground excluded
    inductors = sum(1 for p in circuit.parts if p.kind == INDUCTOR and p.value)
    return inductors + len(lay.poles) + len(lay.carriers) + max(touched - floating, 0)


def _pulse_growth(circuit: Circuit, system, reg) -> float | None:
    """The growth rate (1/s) of a growing mode of the regularised model at the pulse scale
    (real part above PILOT_SPLIT / t_pulse), or None.

    Such a mode belongs to the regularisation, not to the circuit: a ccvs/cccs (or vcvs) feeds
    back the current (or voltage) of a carrier with a gain that makes r_s look negative, e.g.
    a cccs of gain > 1 across a voltage source that senses it, so the pulse grows instead of
    decaying.  Checked only where there are controlled sources (a passive network with positive
    r_s has no growing mode) and up to PILOT_MAX_STATES states (dense eigenvalues).
    """
    if system.n == 0 or system.n > PILOT_MAX_STATES or not any(
            p.kind in CONTROLLED for p in circuit.parts):
        return None
    jac = system.jac.toarray() if hasattr(system.jac, "toarray") else system.jac
    if not np.all(np.isfinite(jac)):
        return math.inf
    growth = float(np.max(np.linalg.eigvals(jac).real))
    return growth if growth > PILOT_SPLIT / reg.t_pulse else None


#: settling is not judged before this many of the interval's slowest time constants
#: (e^-25 ~ 1.4e-11: a mode has then decayed to the settle threshold integrate.SETTLE)
SETTLE_SPAN = 25.0


def _earliest_settle(system, reg) -> float:
    """Local time (s) before which an interval is not judged settled: reg.t_fast, and at least
    SETTLE_SPAN times the slowest decaying circuit mode of this interval's own Jacobian (up to
    PILOT_MAX_STATES states; the pulse-scale modes and modes slower than the horizon left
    out), capped at the horizon.  Without it a 10 s mode beside a 1 ps one read as settled
    after 35 ps: its rate times the elapsed time was still below the threshold."""
    if system.n == 0 or system.n > PILOT_MAX_STATES:
        return reg.t_fast
    jac = system.jac.toarray() if hasattr(system.jac, "toarray") else system.jac
    if not np.all(np.isfinite(jac)):
        return reg.t_fast
    decay = -np.linalg.eigvals(jac).real
    circuit_modes = decay[(decay > 1.0 / reg.horizon) & (decay < PILOT_SPLIT / reg.t_pulse)]
    slowest = 1.0 / float(np.min(circuit_modes)) if circuit_modes.size else 0.0
    return min(max(reg.t_fast, SETTLE_SPAN * slowest), reg.horizon)


def _stopped(circuit: Circuit, k: int, run, steps: int, evals: int) -> Diagnostic | None:
    """The warning for an interval whose values are not reported (integrator breakdown or
    a work budget: ``steps``, ``evals`` are the solve's totals so far), or None."""
    t = circuit.events[k] + (run.end if run.status == "budget" else 0.0)
    if run.status == "budget":
        whole = steps >= SOLVE_STEP_BUDGET or evals >= SOLVE_EVAL_BUDGET
        budget = (SOLVE_STEP_BUDGET, SOLVE_EVAL_BUDGET) if whole else (STEP_BUDGET, EVAL_BUDGET)
        return Diagnostic(WORK_BUDGET, t, k, values=(("steps", steps), ("step-budget", budget[0]),
                                                     ("eval-budget", budget[1])),
                          detail="solve" if whole else "interval", engine=ENGINE)
    if run.status == "failed":
        return Diagnostic(BREAKDOWN, t, k, engine=ENGINE)
    return None


def _build_all(circuit: Circuit, lay, reg, jac_only: bool = False):
    """(pre-step system, one system per interval).  Intervals with the same switch states and
    source values share one System object (``equations.build``'s cache), those with the same
    switch states share its matrices.  ``jac_only``: the pilot's build (``build``)."""
    cache: dict = {}
    pre = build(circuit, lay, reg, 0.0, before=True, cache=cache, jac_only=jac_only)
    return pre, [build(circuit, lay, reg, t, cache=cache, jac_only=jac_only)
                 for t in circuit.events]


def _distinct(systems) -> list:
    """The distinct System objects of ``systems``, in order of first appearance."""
    return list({id(s): s for s in systems}.values())


def _dynamic(circuit: Circuit, lay) -> np.ndarray:
    """Boolean mask over the full state, shape (n,): node voltages with a real capacitor and
    inductor currents (the states settling is judged on)."""
    dynamic = np.zeros(lay.n, dtype=bool)
    for part in circuit.parts:
        if part.kind == CAPACITOR:
            dynamic[[lay.node_index[x] for x in part.nodes if x in lay.node_index]] = True
        elif part.kind == INDUCTOR:
            dynamic[lay.part_index[part.name]] = True
    dynamic[list(lay.pole_index.values())] = True
    return dynamic


def _growth_warning(k: int, t_k: float, growth: float) -> Diagnostic:
    """The warning for an interval whose regularised model grows at the pulse scale (an
    infinite ``growth``: its Jacobian is not finite)."""
    rate = float(growth) if math.isfinite(growth) else math.inf
    return Diagnostic(PULSE_GROWTH, t_k, k, values=(("growth", rate),), engine=ENGINE)


def _march(circuit: Circuit, lay, systems, y0: np.ndarray, reg, rtol: float,
           atol: np.ndarray, plausible: np.ndarray,
           factors: dict) -> tuple[list, list[Diagnostic]]:
    """Integrate interval after interval from y(0-) = ``y0`` (shape (n,)); stop at the first
    interval with pulse-scale growth, a spent work budget or a failed integration.
    ``plausible``: the operating points' magnitude bound, shape (n,) (``_plausible``);
    ``factors``: receives the DC factorisations by matrix (``linsolve.solve``).

    Returns:
        (runs, warnings): one ``IntervalRun`` per interval reached, and the warnings.
    """
    dynamic = _dynamic(circuit, lay)
    window = reg.post_pulse + fit_window(reg.post_pulse, reg.t_fast)
    events = circuit.events
    runs, warnings = [], []
    y = y0
    steps = evals = 0
    growths: dict[int, float | None] = {}
    earliest: dict[int, float] = {}
    for k, t_k in enumerate(events):
        system = systems[k]
        length = events[k + 1] - t_k if k + 1 < len(events) else None
        if id(system.jac) not in growths:  # intervals sharing a Jacobian share its eigenvalues
            growths[id(system.jac)] = _pulse_growth(circuit, system, reg)
        growth = growths[id(system.jac)]
        if growth is not None:
            warnings.append(_growth_warning(k, t_k, growth))
            break
        if id(system.jac) not in earliest:
            earliest[id(system.jac)] = _earliest_settle(system, reg)
        run = integrate_interval(system, y, t_k, length, reg.horizon, rtol, atol,
                                 reg.post_pulse, earliest[id(system.jac)], dynamic, window,
                                 reg.t_pulse * FIRST_STEP, plausible,
                                 budget=(min(STEP_BUDGET, SOLVE_STEP_BUDGET - steps),
                                         min(EVAL_BUDGET, SOLVE_EVAL_BUDGET - evals)),
                                 factors=factors)
        steps, evals = steps + run.stats.steps, evals + run.stats.nfev
        stopped = _stopped(circuit, k, run, steps, evals)
        if stopped:
            warnings.append(stopped)
            break
        runs.append(run)
        message = _warning(circuit, lay, run, k, system.reduction.dyn)
        if message:
            warnings.append(message)
        if length is not None and run.y_next is None:
            warnings.append(Diagnostic(STOPPED, t_k, k, engine=ENGINE))
            break
        y = run.y_next
    return runs, warnings


def solve(circuit: Circuit, *, pulse_ratio: float | None = None,
          rtol: float | None = None, tighten: float = 1.0) -> NumericSolution:
    """Integrate the narrow-pulse model of ``circuit`` (see the package docstring).

    Args:
        circuit: the parsed circuit.
        pulse_ratio: eps, ratio of the regularising to the real time constants (default 1e-7).
        rtol: the integrator's relative tolerance (default: eps within RTOL_BOUNDS).
        tighten: a factor on every tolerance (rtol, each atol, the CARRIER_NOISE floors); the
            solution of the default 1 can re-solve itself at ``TIGHTER`` (its ``retry``), the
            same model, for ``NumericSolution.refined_resolution``.

    Raises:
        InitialStateError: the state at 0- is undefined or contradicts the circuit.
        InputError: a probe or a controlled source names something that does not exist.
    """
    started = _time.perf_counter()
    lay, surveyed = layout(circuit), survey(circuit)
    reg = choose(circuit, pulse_ratio, fastest=_fastest_real_mode(circuit, lay, surveyed),
                 surveyed=surveyed)
    rtol = float(np.clip(reg.pulse_ratio, *RTOL_BOUNDS)) if rtol is None else float(rtol)
    retry = partial(solve, circuit, pulse_ratio=pulse_ratio, rtol=rtol, tighten=TIGHTER) \
        if tighten == 1.0 else None
    rtol, noise = rtol * tighten, CARRIER_NOISE * tighten
    try:
        pre, systems = _build_all(circuit, lay, reg)
    except Unreduced:  # give every capacitor-less node a parasitic capacitance instead
        reg = replace(reg, c_node={n: c or reg.c_base for n, c in reg.c_node.items()})
        pre, systems = _build_all(circuit, lay, reg)
    y0 = initial_state(circuit, lay, pre)
    v_scale, i_scale = _scales(circuit, lay, y0)
    atol = np.where(lay.volts, rtol * ATOL_FRACTION * v_scale, rtol * ATOL_FRACTION * i_scale)
    atol = _resistive_atol(circuit, lay, atol, v_scale, rtol * ATOL_FRACTION * i_scale, noise)
    gain = gain_factor(circuit)
    atol = _carrier_floor(lay, [pre] + list(systems), atol, v_scale * gain, reg.r_series,
                          noise)
    plausible = _plausible(circuit, lay, atol, rtol, v_scale, i_scale, gain)
    factors: dict = {}
    runs, warnings = _march(circuit, lay, systems, y0, reg, rtol, atol, plausible, factors)
    total = _time.perf_counter() - started
    stepping = sum(run.stats.seconds for run in runs)
    return NumericSolution(circuit=circuit, warnings=tuple(warnings), regularisation=reg,
                           layout=lay, pre=pre, systems=tuple(systems), y0=y0, runs=tuple(runs),
                           rtol=rtol, atol=atol, v_scale=v_scale, i_scale=i_scale,
                           plausible=plausible, setup_seconds=total - stepping, retry=retry,
                           factors=factors)
