"""What happens at the instant of an event: impulsive charges and fluxes, dissipated energy.

Integrating C~ x' + G~ x = b~ over the instant (b~ is finite, so its integral vanishes) gives

    C~ (x+ - x-) + G~ q = 0,     q = integral of x over the instant,

the impulse weights: impulsive charge for currents, impulsive flux (V s) for voltages.  For the
index-2 structures of MNA with step inputs the response carries no derivative of an impulse, so
C~ q = 0 as well (a capacitor voltage or inductor current is never itself impulsive); together
these fix q uniquely for a regular pencil, solved here by least squares on the stacked system.
This is the textbook impulse-current argument ("only capacitor and source currents can be
impulsive") made general.

Energy dissipated at the instant = stored before - stored after + work of the independent
sources during the impulse (a voltage source V delivers -V(t_k+) q, q its charge p -> n through
it; a current source I delivers -I(t_k+) phi, phi its impulsive flux p - n).  It is None when a
controlled source or a resistor carries an impulse (the product of an impulse with a jump, or an
impulse squared, has no value).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..model import CAPACITOR, INDUCTOR, KIND_SPECS, RESISTOR, STORAGE, SWITCH, SWITCHED, Circuit
from ..results import (IMPULSE_DERIVATIVE, IMPULSIVE_CURRENT, IMPULSIVE_VOLTAGE, STATE_OVERFLOW,
                       Diagnostic, Jump)
from ..tolerances import EXACT_CURRENT_ROUNDING
from .linalg import least_squares
from .mna import Layout, Scale, index_of, part_voltages
from .stamps import STAMPS, current_row

#: impulse weights below this fraction of the circuit's charge (flux) scale count as zero
SIGNIFICANT = 1e-9
#: ... and so do those below this fraction of the largest one in the same jump (rounding)
RELATIVE = 1e-9
#: a capacitor's charge change below this fraction of C times the node-voltage scale is rounding
CAP_ROUNDING = 1e-12


@dataclass(frozen=True)
class Scales:
    """Magnitudes that set the 'zero' of a jump: the largest node voltage V in V, charge V C_min
    in C, flux V T in V s, current in A."""

    voltage: float
    charge: float
    flux: float
    current: float


def _significant(circuit: Circuit, charges: dict, fluxes: dict, scales: Scales,
                 rounding: tuple[float, float]) -> tuple[dict, dict]:
    """The charges and fluxes that are not rounding.

    A capacitor's charge counts above CAP_ROUNDING * C * V (its own scale); other charges and all
    fluxes above the largest of: SIGNIFICANT times the circuit's scale, the rounding level of the
    impulse solve, RELATIVE times the largest of their kind.
    """
    qv = np.fromiter(charges.values(), float, len(charges))
    fv = np.fromiter(fluxes.values(), float, len(fluxes))
    q_big = float(np.abs(qv).max(initial=0.0))
    f_big = float(np.abs(fv).max(initial=0.0))
    q_floor = max(SIGNIFICANT * scales.charge, rounding[0], RELATIVE * q_big)
    f_floor = max(SIGNIFICANT * scales.flux, rounding[1], RELATIVE * f_big)
    cap_value = _capacitances(circuit, tuple(charges))
    floor = np.where(np.isnan(cap_value), q_floor, CAP_ROUNDING * cap_value * scales.voltage)
    q_names, q_vals = list(charges), list(charges.values())
    f_names, f_vals = list(fluxes), list(fluxes.values())
    sig_q = {q_names[i]: q_vals[i] for i in np.flatnonzero(np.abs(qv) > floor).tolist()}
    return sig_q, {f_names[i]: f_vals[i] for i in np.flatnonzero(np.abs(fv) > f_floor).tolist()}


def _capacitances(circuit: Circuit, names: tuple[str, ...]) -> np.ndarray:
    """C in F of each named part (NaN for a part that is not a capacitor), memoised per
    circuit and name list."""
    memo = index_of(circuit).components
    key = ("capacitances", names)
    if key not in memo:
        parts = index_of(circuit).parts
        memo[key] = np.array([parts[n].value if parts[n].kind == CAPACITOR else np.nan
                              for n in names], dtype=float)
    return memo[key]


def impulse_weights(g: np.ndarray, c: np.ndarray, x_minus: np.ndarray,
                    x_plus: np.ndarray) -> np.ndarray | None:
    """Scaled q~ with G~ q~ = -C~ (x+ - x-) and C~ q~ = 0, shape (n,); None if inconsistent.

    A row's charge/flux change below its rounding level (1e-12 times the row's largest entry of
    |C~| times the largest |x|) counts as none.  ``g`` and ``c`` may be the interval's kept
    matrices (``response.Kept``): where they are sparse the test for a change is made on the
    non-zeros, and dense arrays are formed only when there is a change to solve for.
    """
    if hasattr(c, "dense"):
        if c.sparse is None or g.sparse is None:
            g, c = g.dense(), c.dense()
        else:
            rhs_top = -(c.sparse @ (x_plus - x_minus))
            row_max = abs(c.sparse).max(axis=1).toarray().ravel()
            if not np.any(_significant_change(rhs_top, row_max, x_minus, x_plus)):
                return np.zeros(g.shape[0])
            g, c = g.dense(), c.dense()
    rhs_top = -(c @ (x_plus - x_minus))           # the same floats as (-C~) @ dx
    rhs_top = _significant_change(rhs_top, np.abs(c).max(axis=1, initial=0.0), x_minus, x_plus)
    if not np.any(rhs_top):
        return np.zeros(g.shape[0])
    stack = np.vstack([g, c])
    rhs = np.concatenate([rhs_top, np.zeros(c.shape[0])])
    q, _, consistent = least_squares(stack, rhs)
    return q if consistent else None


def _significant_change(rhs_top: np.ndarray, row_max: np.ndarray, x_minus: np.ndarray,
                        x_plus: np.ndarray) -> np.ndarray:
    """``rhs_top`` with the rows at or below their rounding level (1e-12 times the row's
    largest |C~| entry ``row_max`` times the largest |x|) set to zero, in place."""
    size = max(np.abs(x_minus).max(initial=0.0), np.abs(x_plus).max(initial=0.0))
    noise = 1e-12 * row_max * size
    rhs_top[np.abs(rhs_top) <= noise] = 0.0
    return rhs_top


@dataclass(frozen=True)
class _PartArrays:
    """Per-circuit arrays for the per-part sums of a jump, in file order (built once per
    circuit and layout; ``_arrays``).

    Attributes:
        names: every part's name.
        storage: positions (in parts) of the capacitors and inductors; storage_names their
            names; storage_value C or L; storage_branch the inductor's branch index in x (-1
            for a capacitor); storage_cap whether a capacitor.
        carriers: positions of the parts whose impulsive charge is reported (capacitors,
            branch parts, resistors, vccs/cccs); carrier_names; carrier_kind 0 capacitor,
            1 branch, 2 resistor, 3 controlled output; carrier_value C or R; carrier_branch
            the branch index (-1 where none).
    """

    names: tuple[str, ...]
    storage: np.ndarray
    storage_names: tuple[str, ...]
    storage_value: np.ndarray
    storage_branch: np.ndarray
    storage_cap: np.ndarray
    carriers: np.ndarray
    carrier_names: tuple[str, ...]
    carrier_kind: np.ndarray
    carrier_value: np.ndarray
    carrier_branch: np.ndarray


def _carrier_kind(kind: str) -> int | None:
    """How ``_charges`` reads the impulsive charge of a part of ``kind``: 0 C dv (a
    capacitor), 1 its branch variable, 2 its flux / R (a resistor), 3 its kind's current row
    applied to the impulse; None when it carries none (a current source)."""
    entry = STAMPS[kind]
    if entry.branch:
        return 1
    if kind in (CAPACITOR, RESISTOR):
        return 0 if kind == CAPACITOR else 2
    return 3 if entry.current is not None else None


def _arrays(circuit: Circuit, layout: Layout) -> _PartArrays:
    """The ``_PartArrays`` of ``circuit`` under ``layout``, memoised in the circuit's index."""
    memo = index_of(circuit).components
    key = ("jump-arrays", layout.nodes, layout.branches)
    if key not in memo:
        parts = circuit.parts
        st = [i for i, p in enumerate(parts) if p.kind in STORAGE]
        ca = [i for i, p in enumerate(parts) if _carrier_kind(p.kind) is not None]
        kinds = [_carrier_kind(parts[i].kind) for i in ca]
        memo[key] = _PartArrays(
            tuple(p.name for p in parts), np.array(st, dtype=int),
            tuple(parts[i].name for i in st),
            np.array([parts[i].value for i in st], dtype=float),
            np.array([layout.branch(parts[i].name) if parts[i].kind == INDUCTOR else -1
                      for i in st], dtype=int),
            np.array([parts[i].kind == CAPACITOR for i in st], dtype=bool),
            np.array(ca, dtype=int), tuple(parts[i].name for i in ca),
            np.array(kinds, dtype=int),
            np.array([parts[i].value if k in (0, 2) else 0.0 for i, k in zip(ca, kinds)],
                     dtype=float),
            np.array([layout.branch(parts[i].name) if k == 1 else -1
                      for i, k in zip(ca, kinds)], dtype=int))
    return memo[key]


def stored_energy(circuit: Circuit, layout: Layout, x: np.ndarray) -> dict[str, float]:
    """Energy in J of each capacitor (C v^2 / 2) and inductor (L i^2 / 2) for unscaled x,
    shape (n,): one array expression over the storage parts (``_arrays``), file order."""
    arr = _arrays(circuit, layout)
    if arr.storage.size == 0:
        return {}
    volts = part_voltages(circuit, layout, x)[arr.storage]
    amps = np.asarray(x)[np.maximum(arr.storage_branch, 0)]
    q = np.where(arr.storage_cap, volts, amps)
    return dict(zip(arr.storage_names, (0.5 * arr.storage_value * q * q).tolist()))


def _charges(circuit: Circuit, layout: Layout, q: np.ndarray, dx: np.ndarray) -> dict[str, float]:
    """Impulsive charge p -> n through every part (unscaled q, dx), file order: C dv for a
    capacitor, the branch variable of q for a branch part, phi / R for a resistor, the output
    current row applied to q for a vccs/cccs."""
    arr = _arrays(circuit, layout)
    if arr.carriers.size == 0:
        return {}
    dv = part_voltages(circuit, layout, dx)[arr.carriers]
    flux = part_voltages(circuit, layout, q)[arr.carriers]
    kind = arr.carrier_kind
    with np.errstate(invalid="ignore", over="ignore", divide="ignore"):
        out = np.where(kind == 0, arr.carrier_value * dv,
                       np.where(kind == 2, flux / np.where(kind == 2, arr.carrier_value, 1.0),
                                q[np.maximum(arr.carrier_branch, 0)]))
    for j in np.flatnonzero(kind == 3):
        out[j] = current_row(circuit, layout, arr.carrier_names[j]) @ q
    return dict(zip(arr.carrier_names, out.tolist()))


def _fluxes(circuit: Circuit, layout: Layout, q: np.ndarray) -> dict[str, float]:
    flux = part_voltages(circuit, layout, q)
    return dict(zip(_arrays(circuit, layout).names, flux.tolist()))


def _energy(circuit: Circuit, before: dict, after: dict, charges: dict, fluxes: dict,
            values: dict) -> float | None:
    """Stored energy lost plus source work during the impulse (None if undefined).

    ``charges`` and ``fluxes`` hold the significant impulse weights only.
    """
    work = 0.0
    for part in circuit.parts:
        q, phi = charges.get(part.name, 0.0), fluxes.get(part.name, 0.0)
        declared = KIND_SPECS[part.kind]
        if declared.stepped:      # an independent source's work: E q or I phi
            work -= values[part.name] * (q if declared.voltage_branch else phi)
        elif not (declared.storage or declared.branch == SWITCHED) and (q or phi):
            return None           # an impulse through a resistance or a controlled source
    return float(sum(before.values()) - sum(after.values()) + work)


#: an inductor current change above this fraction of the circuit's current scale is a jump
FORCED_JUMP = 1e-6


def _forced(circuit: Circuit, layout: Layout, time: float, x_minus: np.ndarray,
            x_plus: np.ndarray, fluxes: dict, scales: Scales):
    """(forced, opened): inductor -> (i-, i+) in A for the inductors whose current jumps
    (currents below ``tolerances.EXACT_CURRENT_ROUNDING`` of the scale set to 0), and the
    switches opening at ``time`` that carry the voltage impulse (in ``fluxes``)."""
    def clean(i: float) -> float:
        return 0.0 if abs(i) < EXACT_CURRENT_ROUNDING * scales.current else float(i)

    forced = {}
    for p in circuit.parts:
        if p.kind != INDUCTOR:
            continue
        i0, i1 = x_minus[layout.branch(p.name)], x_plus[layout.branch(p.name)]
        if abs(i1 - i0) > FORCED_JUMP * scales.current:
            forced[p.name] = (clean(i0), clean(i1))
    opened = tuple(p.name for p in circuit.parts if p.kind == SWITCH and p.name in fluxes
                   and p.is_closed_before(time) and not p.is_closed(time))
    return forced, opened


def _loops(time: float, charges: dict, fluxes: dict) -> tuple[Diagnostic, ...]:
    """Why the jump happens: the parts carrying an impulse of current, of voltage."""
    out = []
    if charges:
        out.append(Diagnostic(IMPULSIVE_CURRENT, time, parts=tuple(charges)))
    if fluxes:
        out.append(Diagnostic(IMPULSIVE_VOLTAGE, time, parts=tuple(fluxes)))
    return tuple(out)


def jump_at(circuit: Circuit, layout: Layout, scale: Scale, g: np.ndarray, c: np.ndarray,
            x_minus: np.ndarray, x_plus: np.ndarray, time: float, values: dict,
            scales: Scales) -> Jump:
    """The Jump at ``time`` from the scaled states just before and after, shapes (n,).

    ``g``, ``c`` are the scaled matrices of the interval that starts at ``time`` (arrays, or as
    the interval keeps them: ``impulse_weights``); ``values`` the independent source values in
    that interval.
    """
    d = scale.var(layout)
    xm, xp = d * x_minus, d * x_plus
    with np.errstate(invalid="ignore", over="ignore"):
        before, after = stored_energy(circuit, layout, xm), stored_energy(circuit, layout, xp)
    if not (np.all(np.isfinite(xm)) and np.all(np.isfinite(xp))):
        return Jump(time, energy=None, stored_before=before, stored_after=after,
                    warnings=(Diagnostic(STATE_OVERFLOW, time),))
    q_scaled = impulse_weights(g, c, x_minus, x_plus)
    if q_scaled is None:
        return Jump(time, energy=None, stored_before=before, stored_after=after,
                    warnings=(Diagnostic(IMPULSE_DERIVATIVE, time),))
    q = scale.t * d * q_scaled
    charges = _charges(circuit, layout, q, xp - xm)
    fluxes = _fluxes(circuit, layout, q)
    qmax = float(np.abs(q_scaled).max(initial=0.0))     # rounding is relative to this, scaled
    rounding = (RELATIVE * qmax * scale.t / scale.r0, RELATIVE * qmax * scale.t)
    charges, fluxes = _significant(circuit, charges, fluxes, scales, rounding)
    energy = _energy(circuit, before, after, charges, fluxes, values) if charges or fluxes \
        else 0.0                                  # nothing impulsive: storage is continuous
    forced, opened = _forced(circuit, layout, time, xm, xp, fluxes, scales)
    loops = _loops(time, charges, fluxes)
    return Jump(time, charges, fluxes, energy, before, after, loops, (), forced, opened)
