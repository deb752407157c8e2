"""Probes as affine functions of the state, and their accurately computed constant parts.

A probe's value in interval k is w . x_d + e = w . z + (w . x_o + e), with x_d the integrated
coordinates (capacitor-less nodes eliminated, equations.py) and z their deviation from the
interval's origin x_o (integrate.py).  The dynamic part w . z is as precise as z itself.  The
constant part, the probe's value at the origin, is evaluated on the refined full DC state (the
elimination's lift is only as accurate as the conditioning of the eliminated block allows),
except where even that formula loses digits at a consistent operating point:

* the current of a carrier (voltage source, vcvs, ccvs, ideal switch) is u / r_s + i_p, and u,
  exactly zero at the operating point, is there a difference of voltages rounded to 1 ulp, worth
  ~1e-16 |v| / r_s of current; the constant part is i_p alone (and gain * i_p for a cccs that
  senses a carrier);
* a capacitor's current is exactly zero at an operating point.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from ..errors import InputError
from ..model import ACROSS, BETWEEN, CAPACITOR, CCCS, NODE, THROUGH, Circuit, Part, Probe
from .branches import Affine, Layout, difference
from .equations import System


def voltage_row(lay: Layout, a: str, b: str) -> np.ndarray:
    """Row w with w . y = v(a) - v(b), shape (n,)."""
    return Affine(difference(lay, a, b)).dense(lay.n)


def capacitor_current(system: System, lay: Layout, part: Part) -> tuple[np.ndarray, float]:
    """(w, e) over x_d with C (v_p - v_n)' = w . x_d + e for capacitor ``part``: its voltage
    a . x_d is a combination of integrated coordinates, whose rate is a . (J x_d + c)."""
    a, _ = system.reduction.row(voltage_row(lay, part.p, part.n), 0.0)
    if sp.issparse(system.jac):
        w = np.asarray(system.jac.T @ a).ravel()
    else:
        w = a @ system.jac
    return part.value * w, float(part.value * (a @ system.c))


def _part(circuit: Circuit, probe: Probe) -> Part:
    if probe.kind in (NODE, BETWEEN):
        missing = [t for t in probe.targets if t not in circuit.nodes]
        if missing:
            raise InputError(f"the probe {probe.label!r} names node {missing[0]!r}, which no part "
                             "connects to", file=circuit.source, field="probe")
        return None
    try:
        return circuit.part(probe.targets[0])
    except KeyError:
        raise InputError(f"the probe {probe.label!r} names a part that is not in the circuit",
                         file=circuit.source, field="probe") from None


def full_row(circuit: Circuit, lay: Layout, system: System, probe: Probe) -> tuple[np.ndarray, float]:
    """(w, e) with probe value = w . y + e over the full state y (not for capacitor currents)."""
    part = _part(circuit, probe)
    if probe.kind == NODE:
        return voltage_row(lay, probe.targets[0], circuit.ground), 0.0
    if probe.kind == BETWEEN:
        return voltage_row(lay, probe.targets[0], probe.targets[1]), 0.0
    if probe.kind == ACROSS:
        return voltage_row(lay, part.p, part.n), 0.0
    if probe.kind == THROUGH and part.kind != CAPACITOR:
        cur = system.branches[part.name]
        return cur.dense(lay.n), cur.const
    raise InputError(f"unknown probe kind {probe.kind!r}", file=circuit.source, field="probe")


def _stiff(circuit: Circuit, lay: Layout, system: System) -> set[str]:
    """Parts whose current is computed through a carrier's 1/r_s in this interval."""
    stiff = {n for n in lay.carriers if system.closed.get(n, True)}
    return stiff | {p.name for p in circuit.parts if p.kind == CCCS and p.control in stiff}


def carrier_kcl_row(circuit: Circuit, lay: Layout, system: System,
                    part: Part) -> tuple[np.ndarray, float] | None:
    """A carrier's current over x_d from KCL at one of its terminals, or None.

    The direct row u / r_s + i_p multiplies the rounding of the eliminated nodes' lift by
    1/r_s; at a terminal (not ground, without parasitic capacitance) whose other parts are not
    carriers, the carrier's current is minus the sum of theirs (capacitors' included), each
    computed at the scale of its own resistance.
    """
    stiff = _stiff(circuit, lay, system)
    shunts = {r.part: r.current for r in system.regularisers if r.role == "shunt"}
    red = system.reduction
    for terminal, sign in ((part.p, -1.0), (part.n, 1.0)):
        if terminal == circuit.ground or system_parasitic(system, lay, terminal):
            continue
        others = [p for p in circuit.parts if p.name != part.name and terminal in p.nodes]
        if any(p.name in stiff for p in others):
            continue
        w, e = np.zeros(system.n), 0.0
        for other in others:
            out = 1.0 if other.p == terminal else -1.0
            if other.kind == CAPACITOR:
                cw, ce = capacitor_current(system, lay, other)
                w, e = w + out * cw, e + out * ce
                continue
            flows = [system.branches[other.name]] + ([shunts[other.name]]
                                                      if other.name in shunts else [])
            for cur in flows:
                cw, ce = red.row(cur.dense(lay.n), cur.const)
                w, e = w + out * cw, e + out * ce
        return sign * w, sign * e
    return None


def system_parasitic(system: System, lay: Layout, node: str) -> bool:
    """True when the node carries a parasitic capacitance in this system (its M diagonal
    exceeds what its capacitors give)."""
    return bool(system.parasitic.get(node, 0.0) > 0.0)


def probe_row(circuit: Circuit, lay: Layout, system: System, probe: Probe) -> tuple[np.ndarray, float]:
    """(w, e) with probe value = w . x_d + e over the integrated coordinates (w shape (n_d,))."""
    part = _part(circuit, probe)
    if probe.kind == THROUGH and part.kind == CAPACITOR:
        return capacitor_current(system, lay, part)
    if probe.kind == THROUGH and part.name in lay.carriers and system.closed.get(part.name, True):
        row = carrier_kcl_row(circuit, lay, system, part)
        if row is not None:
            return row
    w, e = full_row(circuit, lay, system, probe)
    return system.reduction.row(w, e)


def probe_offset(circuit: Circuit, lay: Layout, system: System, probe: Probe,
                 origin: np.ndarray, consistent: bool, origin_full: np.ndarray) -> float:
    """The probe's value at the interval's origin (origin over x_d, shape (n_d,), and as the
    refined full state, shape (n,)), computed as the module docstring says."""
    part = _part(circuit, probe)
    if probe.kind == THROUGH and part.kind == CAPACITOR:
        if consistent:
            return 0.0
        w, e = capacitor_current(system, lay, part)
        return float(w @ origin + e)
    if consistent and probe.kind == THROUGH:
        gain, sensed = 1.0, part
        if part.kind == CCCS:
            gain, sensed = part.value, circuit.part(part.control)
        if sensed.name in lay.carriers:
            if not system.closed.get(sensed.name, True):
                return 0.0
            return gain * float(origin_full[lay.part_index[sensed.name]])
    w, e = full_row(circuit, lay, system, probe)
    return float(w @ origin_full + e)
