"""solve(): regularise, build each interval's ODE, find 0-, integrate interval by interval."""

from __future__ import annotations

import math
import time as _time
from dataclasses import replace

import numpy as np

from ..model import (CAPACITOR, CCCS, CCVS, CURRENT_SOURCE, INDUCTOR, RESISTOR, VCCS, VCVS,
                     VOLTAGE_SOURCE, Circuit)
from .coordinates import Unreduced
from .equations import build, layout
from .features import fit_window
from .initial import initial_state
from .integrate import integrate_interval
from .regularise import choose
from .solution import NumericSolution

#: the absolute tolerance of a state is rtol times this fraction of its kind's scale
ATOL_FRACTION = 1e-4
#: a carrier current is never asked to be more precise than this many times the rounding of
#: its voltage u = v_p - v_n - E, i.e. CARRIER_NOISE * V / r_s (below it Radau's steps stall)
CARRIER_NOISE = 1e-14
#: pulse ratio of the pilot model that locates the fastest real mode
PILOT_RATIO = 1e-3
#: eigenvalues below this over the pilot's t_pulse are real modes
PILOT_SPLIT = 0.03
#: the pilot is skipped above this many integrated states (dense eigenvalues)
PILOT_MAX_STATES = 300
#: the first step of an interval, as a fraction of the pulse width
FIRST_STEP = 1e-3
#: rtol = pulse_ratio by default, kept within these bounds
RTOL_BOUNDS = (1e-8, 1e-4)
#: work budget of one solve, over all intervals: accepted steps and right-hand-side
#: evaluations (about 0.2-0.5 ms each on small systems: together ~10-15 s at most); past it the
#: interval and the later ones are not reported
STEP_BUDGET = 30_000
EVAL_BUDGET = 300_000


def _source_max(circuit: Circuit, kind: str) -> float:
    vals = [abs(p.value or 0.0) for p in circuit.parts if p.kind == kind]
    vals += [abs(v) for p in circuit.parts if p.kind == kind for _, v in p.steps]
    return max(vals, default=0.0)


def _scales(circuit: Circuit, lay, y0: np.ndarray) -> tuple[float, float]:
    """(V, A) scales of node voltages and inductor currents from sources, initials and 0-."""
    nn = len(lay.nodes)
    res = [abs(p.value) for p in circuit.parts if p.kind == RESISTOR and p.value]
    v_src, i_src = _source_max(circuit, VOLTAGE_SOURCE), _source_max(circuit, CURRENT_SOURCE)
    v_init = max([abs(p.initial) for p in circuit.parts
                  if p.kind == CAPACITOR and p.initial is not None], default=0.0)
    i_init = max([abs(p.initial) for p in circuit.parts
                  if p.kind == INDUCTOR and p.initial is not None], default=0.0)
    v = max(float(np.max(np.abs(y0[:nn]), initial=0.0)), v_src, v_init)
    if res:
        v = max(v, i_src * max(res))
    i = max(float(np.max(np.abs(y0[nn:]), initial=0.0)), i_src, i_init)
    if res:
        i = max(i, v / max(res))
    v = v if v > 0 else 1.0
    i = i if i > 0 else 1.0
    return v, i


def _gain(circuit: Circuit) -> float:
    """1 + the controlled sources' gains made dimensionless: how far voltages may exceed the
    sources' (an amplifier's output is its gain times its input)."""
    res = [abs(p.value) for p in circuit.parts if p.kind == RESISTOR and p.value]
    gain = 1.0
    for part in circuit.parts:
        g = abs(part.value or 0.0)
        if part.kind in (VCVS, CCCS):
            gain += g
        elif part.kind == VCCS and res:
            gain += g * max(res)
        elif part.kind == CCVS and res:
            gain += g / min(res)
    return gain


def _carrier_floor(circuit: Circuit, lay, systems, atol: np.ndarray, v_scale: float,
                   r_series: float) -> np.ndarray:
    """atol with each carrier current raised to CARRIER_NOISE * |u| / r_s, |u| bounded by the
    sum of its voltage coefficients times the (gain-scaled) voltage scale."""
    atol = atol.copy()
    nn = len(lay.nodes)
    v = v_scale * _gain(circuit)
    for name in lay.carriers:
        r = lay.part_index[name]
        weight = max(float(np.abs(sys_.K[[r], :nn].toarray()).sum()) for sys_ in systems)
        atol[r] = max(atol[r], CARRIER_NOISE * max(weight, 1.0) * v / r_series)
    return atol


def _warning(circuit: Circuit, lay, run, k: int, run_dyn: np.ndarray) -> str | None:
    """The circuit-wide diagnostic for an interval that did not settle, or None."""
    if run.status == "settled":
        return None
    t = circuit.events[k]
    change = np.abs(run.y[:, -1] - run.y[:, 0]) / np.maximum(np.abs(run.y).max(axis=1), 1e-300)
    names = lay.nodes + lay.inductors + lay.carriers
    dyn = run_dyn
    index = int(dyn[int(np.argmax(change))]) if dyn.size else 0
    name = names[index] if len(names) else "?"
    what = "node" if index < len(lay.nodes) else "the current of"
    if not run.consistent:
        reason = ("grows without bound (no DC operating point: a source drives a node or an "
                  "inductor loop that has no DC path)")
    elif run.status == "blow-up":
        reason = "grows without bound (a growing mode)"
    elif run.status == "horizon":
        reason = "does not settle (an undamped or very slow oscillation)"
    else:
        reason = "could not be integrated"
    return (f"interval {k} (from t = {t:.6g} s): the response {reason} by t = "
            f"{t + run.end:.6g} s, most visibly at {what} {name!r}; final values are not "
            "reported")


def _fastest_real_mode(circuit: Circuit) -> float | None:
    """The fastest real time constant (s) of a coarse pilot model (pulse ratio PILOT_RATIO),
    from the eigenvalues of its intervals' Jacobians, or None (too large, or no real mode).

    The pilot's regularising modes are faster than 1/(4 t_pulse); eigenvalues below
    PILOT_SPLIT / t_pulse in magnitude are the circuit's own.  A part-value estimate of the
    fastest mode must be a lower bound and is often decades too low (a gain, a node with many
    conductances); the pilot's figure lets the real model's pulse sit just eps below it.
    """
    pilot = choose(circuit, PILOT_RATIO)
    lay = layout(circuit)
    try:
        _, systems = _build_all(circuit, lay, pilot)
    except Unreduced:
        return None
    rates = []
    for system in systems:
        if system.n > PILOT_MAX_STATES:
            return None
        jac = system.jac.toarray() if hasattr(system.jac, "toarray") else system.jac
        if jac.size == 0 or not np.all(np.isfinite(jac)):
            continue
        lam = np.abs(np.linalg.eigvals(jac))
        rates += list(lam[(lam > 0) & (lam < PILOT_SPLIT / pilot.t_pulse)])
    return 1.0 / max(rates) if rates else None


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
            p.kind in (VCVS, VCCS, CCVS, CCCS) for p in circuit.parts):
        return None
    jac = system.jac.toarray() if hasattr(system.jac, "toarray") else system.jac
    if not np.all(np.isfinite(jac)):
        return math.inf
    growth = float(np.max(np.linalg.eigvals(jac).real))
    return growth if growth > PILOT_SPLIT / reg.t_pulse else None


def _stopped(circuit: Circuit, k: int, run, steps: int) -> str | None:
    """The warning for an interval whose values are not reported (integrator breakdown or
    the work budget), or None."""
    t = circuit.events[k] + (run.end if run.status == "budget" else 0.0)
    if run.status == "budget":
        return (f"the numerical engine stopped after {steps} steps at t = {t:.6g} s (its work "
                "budget): values not reported from that interval on")
    if run.status == "failed":
        return (f"the numerical engine's integrator broke down in interval {k} (from t = "
                f"{t:.6g} s; an overflowing or singular regularised system): values not "
                "reported from that interval on")
    return None


def _build_all(circuit: Circuit, lay, reg):
    """(pre-step system, one system per interval)."""
    pre = build(circuit, lay, reg, 0.0, before=True)
    return pre, [build(circuit, lay, reg, t) for t in circuit.events]


def solve(circuit: Circuit, *, pulse_ratio: float | None = None,
          rtol: float | None = None) -> NumericSolution:
    """Integrate the narrow-pulse model of ``circuit`` (see the package docstring).

    Args:
        circuit: the parsed circuit.
        pulse_ratio: eps, ratio of the regularising to the real time constants (default 1e-7).
        rtol: the integrator's relative tolerance (default: eps within RTOL_BOUNDS).

    Raises:
        InitialStateError: the state at 0- is undefined or contradicts the circuit.
        InputError: a probe or a controlled source names something that does not exist.
    """
    started = _time.perf_counter()
    reg = choose(circuit, pulse_ratio, fastest=_fastest_real_mode(circuit))
    rtol = float(np.clip(reg.pulse_ratio, *RTOL_BOUNDS)) if rtol is None else float(rtol)
    lay = layout(circuit)
    try:
        pre, systems = _build_all(circuit, lay, reg)
    except Unreduced:  # give every capacitor-less node a parasitic capacitance instead
        reg = replace(reg, c_node={n: c or reg.c_base for n, c in reg.c_node.items()})
        pre, systems = _build_all(circuit, lay, reg)
    y0 = initial_state(circuit, lay, pre)
    v_scale, i_scale = _scales(circuit, lay, y0)
    nn = len(lay.nodes)
    atol = np.full(lay.n, rtol * ATOL_FRACTION * v_scale)
    atol[nn:] = rtol * ATOL_FRACTION * i_scale
    atol = _carrier_floor(circuit, lay, [pre] + list(systems), atol, v_scale, reg.r_series)
    dynamic = np.zeros(lay.n, dtype=bool)
    for part in circuit.parts:
        if part.kind == CAPACITOR:
            dynamic[[lay.node_index[x] for x in part.nodes if x in lay.node_index]] = True
        elif part.kind == INDUCTOR:
            dynamic[lay.part_index[part.name]] = True
    window = reg.post_pulse + fit_window(reg.post_pulse, reg.t_fast)
    events = circuit.events
    runs, warnings = [], []
    y = y0
    steps = evals = 0
    for k, t_k in enumerate(events):
        system = systems[k]
        length = events[k + 1] - t_k if k + 1 < len(events) else None
        growth = _pulse_growth(circuit, system, reg)
        if growth is not None:
            what = (f"grows at {growth:.3g}/s, far faster than any mode of the circuit"
                    if math.isfinite(growth) else "is singular (its Jacobian is not finite)")
            warnings.append(
                f"interval {k} (from t = {t_k:.6g} s): the numerical engine's narrow-pulse "
                f"model {what} (a controlled source feeds back the current or voltage of a "
                "voltage source, vcvs, ccvs or switch with a gain that defeats its "
                "regularising resistance): values not reported from that interval on")
            break
        run = integrate_interval(system, y, t_k, length, reg.horizon, rtol, atol,
                                 reg.post_pulse, reg.t_fast, dynamic, window,
                                 reg.t_pulse * FIRST_STEP,
                                 budget=(STEP_BUDGET - steps, EVAL_BUDGET - evals))
        steps, evals = steps + run.stats.steps, evals + run.stats.nfev
        stopped = _stopped(circuit, k, run, steps)
        if stopped:
            warnings.append(stopped)
            break
        runs.append(run)
        message = _warning(circuit, lay, run, k, system.reduction.dyn)
        if message:
            warnings.append(message)
        if length is not None and run.y_next is None:
            warnings.append(f"the integration stopped at t = {t_k:.6g} s; later intervals are "
                            "not reported")
            break
        y = run.y_next
    total = _time.perf_counter() - started
    stepping = sum(run.stats.seconds for run in runs)
    return NumericSolution(circuit=circuit, warnings=tuple(warnings), regularisation=reg,
                           layout=lay, pre=pre, systems=tuple(systems), y0=y0, runs=tuple(runs),
                           rtol=rtol, atol=atol, v_scale=v_scale, i_scale=i_scale,
                           setup_seconds=total - stepping)
