"""The numerical engine's own dominant-τ estimate: zero-value time constants of its interval model.

Method (the zero-value / open-circuit time-constant method; Cochrun & Grabel, IEEE Trans.
Circuit Theory 20 (1973) 8-14, also in Gray & Meyer's and Sedra & Smith's textbooks).  Write the
interval's equations as M y' = -K y + b (equations.py: node voltages, inductor currents, carrier
currents; M holds every capacitance and inductance, K no storage at all).  Then
det(K + s M) / det(K) = 1 + b1 s + ..., and

    b1 = tr(K^-1 M) = -tr(J^-1) = sum over the modes of -1/lambda,

J = -M^-1 K being the Jacobian (in any coordinates: the engine's tree coordinates and their Kron
reduction are a similarity and a Schur complement of this form, so the trace is the same).
M is a sum of rank-one stamps, M = sum_C C a a^T + sum_L L e_L e_L^T (a = e_p - e_n), so b1
splits into one term per storage part:

* capacitor: C a^T K^-1 a = C R_th, R_th the resistance seen at its terminals with the other
  capacitors open (K holds none), the inductors shorted (a K inductor row reads v_p - v_n = 0)
  and the sources zeroed;
* inductor: L (K^-1)_LL = L G_th, G_th the conductance seen with the same zeroed states.

Regularisation (harness.simulate.__init__): in these zero-value states every carrier's L_p is
shorted, so its r_s carries nothing and the capacitor and inductor terms are exactly those of
``System.K_dc`` (the ideal circuit's rows, no 1/r_s anywhere: better conditioned than K).  The
inductor shunts r_shunt stay in K_dc (each adds L / r_shunt <= t_pulse).  The model's own extra
storage -- every carrier's L_p (a term of about t_pulse each) and the parasitic node
capacitances -- is excluded: those terms are pulse-scale, about ``pulse_ratio`` of the real
time constants, and belong to no part of the circuit file (the tests measure the excluded part
of -tr(J^-1) against ``tolerances.DOMINANT_ENGINE``).

Coupling: the closed form sums only the storage that can reach the probe.  Here: with the
sources zeroed, the nodes joined to ground by closed voltage sources and ideal switches form
the reference class (their voltages are pinned to 0); the connected components of the sparsity
graph of K_dc + M over the remaining states (the pinning carriers' currents dropped) are the
dynamically independent groups, and the storage parts with a terminal in a group the probe's
nodes touch are the ones counted.  A probe that touches only the reference class counts every
storage part (as the closed form does).  The regularised Jacobian itself couples every group
through the carriers' r_s (entries ~ r_s / R of the real ones), so its sparsity graph is not
used.

Cost: one sparse LU of K_dc (linsolve's equilibrated factorisation, scipy.sparse.linalg.splu
above 50 unknowns) and one refined solve per storage part: O(n_storage * solve), never a dense
inverse.

deviation and t50 come from interval k's integrated held waveform on the sign-off scan grid
(signoff.scan_grid, refined by Brent's method on the dense output); modes_sum from the
eigenvalues of the Jacobian restricted to the coupled coordinates, for up to
``EIGEN_UP_TO`` of them.
"""

from __future__ import annotations

from functools import partial
import math

import numpy as np
import scipy.sparse as sp
from scipy.optimize import brentq
from scipy.sparse.csgraph import connected_components

from ..model import (BETWEEN, CAPACITOR, CCCS, CCVS, INDUCTOR, NODE, SWITCH, VOLTAGE_SOURCE,
                     Probe)
from ..results import DominantTau
from ..tolerances import WAVEFORM_SWING_FLOOR
from .equations import is_carrier
from . import linsolve
from .linsolve import Singular
from .nodesets import find_root
from .regularise import PILOT_SPLIT
from .signoff import scan_grid

#: modes_sum from the restricted Jacobian's eigenvalues up to this many coupled coordinates
EIGEN_UP_TO = 300


# ------------------------------------------------------------------------------- coupling
def reference_nodes(circuit, system) -> set[str]:
    """Nodes tied to ground by closed voltage sources and closed ideal switches (sources
    zeroed): the reference class, ground included."""
    parent: dict[str, str] = {n: n for n in circuit.nodes}
    find = partial(find_root, parent)
    for part in circuit.parts:
        pinning = part.kind == VOLTAGE_SOURCE or (
            part.kind == SWITCH and is_carrier(part) and system.closed.get(part.name))
        if pinning:
            parent[find(part.p)] = find(part.n)
    return {n for n in circuit.nodes if find(n) == find(circuit.ground)}


def _pinned_states(circuit, lay, reference: set[str]) -> np.ndarray:
    """Boolean mask over the full state (shape (n,)): reference node voltages and the currents
    of carriers with both terminals in the reference class."""
    pinned = np.zeros(lay.n, dtype=bool)
    for node in reference:
        if node in lay.node_index:
            pinned[lay.node_index[node]] = True
    for name in lay.carriers:
        part = circuit.part(name)
        if part.p in reference and part.n in reference:
            pinned[lay.part_index[name]] = True
    return pinned


def groups(circuit, lay, system) -> tuple[np.ndarray, np.ndarray]:
    """(label, pinned): the connected component of each full state (shape (n,), -1 where
    pinned) in the sparsity graph of K_dc + M without the pinned states."""
    reference = reference_nodes(circuit, system)
    pinned = _pinned_states(circuit, lay, reference)
    pattern = (abs(system.K_dc) + abs(system.M)).tocoo()
    rows, cols = _sensing_edges(circuit, lay, reference)
    rows = np.concatenate([pattern.row, rows]).astype(int)
    cols = np.concatenate([pattern.col, cols]).astype(int)
    keep = ~pinned[rows] & ~pinned[cols]
    n = lay.n
    graph = sp.coo_matrix((np.ones(int(keep.sum())), (rows[keep], cols[keep])), shape=(n, n))
    _, label = connected_components(graph, directed=False)
    label = np.where(pinned, -1, label)
    return label, pinned


def _sensing_edges(circuit, lay, reference: set[str]) -> tuple[np.ndarray, np.ndarray]:
    """Extra graph edges (rows, cols of node states) for a ccvs/cccs that reads the current of
    a part with both terminals in the reference class (a grounded source): that current is the
    sum of the currents of the parts meeting it at its ungrounded terminal (KCL), but the
    reference rows that carry that sum are left out of the graph, so the controlled source's
    output nodes are joined to those parts' other nodes here."""
    rows, cols = [], []
    for part in circuit.parts:
        if part.kind not in (CCVS, CCCS) or not isinstance(part.control, str):
            continue
        sensed = circuit.part(part.control)
        if not (sensed.p in reference and sensed.n in reference):
            continue
        terminal = sensed.p if sensed.p != circuit.ground else sensed.n
        far = {n for q in circuit.parts if q.name != sensed.name and terminal in q.nodes
               for n in q.nodes if n != terminal}
        out = [lay.node_index[n] for n in part.nodes if n in lay.node_index]
        for node in far:
            if node in lay.node_index:
                rows += out
                cols += [lay.node_index[node]] * len(out)
    return np.array(rows, dtype=int), np.array(cols, dtype=int)


def coupled_storage(circuit, lay, system, probe: Probe) -> set[str] | None:
    """The capacitors and inductors whose dynamics can reach ``probe`` in this interval (see the
    module docstring), or None when the probe touches only the reference class."""
    label, _ = groups(circuit, lay, system)
    if probe.kind in (NODE, BETWEEN):
        touched = set(probe.targets)
    else:
        touched = set(circuit.part(probe.targets[0]).nodes)
    comps = {int(label[lay.node_index[n]]) for n in touched if n in lay.node_index}
    comps.discard(-1)
    if not comps:
        return None
    return {p.name for p in circuit.parts if p.kind in (CAPACITOR, INDUCTOR)
            and any(n in lay.node_index and int(label[lay.node_index[n]]) in comps
                    for n in p.nodes)}


# ------------------------------------------------------------------------------- terms
def _rhs(lay, part) -> np.ndarray:
    """The stamp vector of a storage part: e_p - e_n for a capacitor, e_L for an inductor."""
    rhs = np.zeros(lay.n)
    if part.kind == INDUCTOR:
        rhs[lay.part_index[part.name]] = 1.0
        return rhs
    for node, sign in ((part.p, 1.0), (part.n, -1.0)):
        if node in lay.node_index:
            rhs[lay.node_index[node]] += sign
    return rhs


def _solver(K: sp.csc_matrix):
    """A refined solve function for K (``linsolve.solve``: equilibrated LU, factorised once,
    extended-precision refinement); raises linsolve.Singular at once for a singular K."""
    factors: dict = {}
    linsolve.solve(K, np.zeros(K.shape[0]), factors)
    return lambda rhs: linsolve.solve(K, rhs, factors)


def zero_value_terms(circuit, lay, system, names: set[str]) -> dict[str, float] | None:
    """Part name -> zero-value time constant in s (C R_th or L G_th, module docstring) for the
    storage parts ``names``, from K_dc; None where K_dc restricted to the states of their
    groups is singular (a part with no resistive path: an infinite term)."""
    parts = [p for p in circuit.parts if p.name in names]
    if not parts:
        return {}
    K = sp.csc_matrix(system.K_dc)
    try:
        solve, index = _solver(K), np.arange(lay.n)
    except Singular:
        label, _ = groups(circuit, lay, system)
        comps = {int(label[i]) for p in parts for i in np.flatnonzero(_rhs(lay, p))} - {-1}
        index = np.flatnonzero(np.isin(label, sorted(comps)))
        try:
            solve = _solver(sp.csc_matrix(K[index][:, index]))
        except Singular:
            return None
    out = {}
    for part in parts:
        rhs = _rhs(lay, part)[index]
        x = solve(rhs)
        out[part.name] = float(part.value * (rhs @ x))
    return out


# ------------------------------------------------------------------------------- modes
def modes_sum(sol, k: int, names: set[str]) -> float | None:
    """sum of -1/lambda (s) over the eigenvalues of interval k's Jacobian restricted to the
    coordinates of the groups of ``names``, pulse modes (|lambda| t_pulse > PILOT_SPLIT) and
    modes not decaying within the held run left out; None above EIGEN_UP_TO coordinates."""
    system, lay = sol.systems[k], sol.layout
    label, _ = groups(sol.circuit, lay, system)
    comps = {int(label[i]) for p in sol.circuit.parts if p.name in names
             for i in np.flatnonzero(_rhs(lay, p))} - {-1}
    dyn = np.asarray(system.reduction.dyn)
    keep = np.flatnonzero(np.isin(label[dyn], sorted(comps)))
    if keep.size == 0 or keep.size > EIGEN_UP_TO:
        return None
    jac = system.jac.toarray() if sp.issparse(system.jac) else np.asarray(system.jac)
    block = jac[np.ix_(keep, keep)]
    if not np.all(np.isfinite(block)):
        return None
    try:
        lam = np.linalg.eigvals(block)
    except np.linalg.LinAlgError:
        return None
    slow = 1.0 / max(sol.runs[k].end, 1e-300) if k < len(sol.runs) else 0.0
    fast = PILOT_SPLIT / sol.regularisation.t_pulse
    lam = lam[(np.abs(lam) < fast) & (np.abs(lam) > 1e-3 * slow)]
    return float(np.sum((-1.0 / lam).real)) if lam.size else None


# ------------------------------------------------------------------------------- waveform
def _first_crossing(sol, probe: Probe, k: int, grid: np.ndarray, values: np.ndarray,
                    level: float) -> float | None:
    """First local time where the held waveform crosses ``level`` (either way) on ``grid``,
    refined by Brent's method on the dense output; None when it never does."""
    d = values - level
    for i in range(len(grid) - 1):
        if d[i] == 0:
            return float(grid[i])
        if d[i] * d[i + 1] < 0:
            fun = lambda s: float(sol.held(probe, k, np.array([s]))[0]) - level  # noqa: E731
            lo, hi = float(grid[i]), float(grid[i + 1])
            if fun(lo) * fun(hi) > 0:         # s = 0 holds x(t_k+), the dense output may not
                return hi if abs(d[i + 1]) < abs(d[i]) else lo
            return float(brentq(fun, lo, hi, xtol=1e-15 * max(hi, 1e-300), rtol=1e-14))
    return None


def dominant(sol, probe: Probe, k: int) -> DominantTau | None:
    """The numerical engine's ``results.DominantTau`` of ``probe`` in interval k, or None where
    interval k was not integrated (see the module docstring)."""
    if k >= len(sol.runs):
        return None
    circuit, lay, system = sol.circuit, sol.layout, sol.systems[k]
    coupled = coupled_storage(circuit, lay, system, probe)
    if coupled is None:
        coupled = {p.name for p in circuit.parts if p.kind in (CAPACITOR, INDUCTOR)}
    terms = zero_value_terms(circuit, lay, system, coupled)
    if terms is None:
        return DominantTau(None, {}, None)
    total = sum(terms.values()) if terms else None
    tau = total if total is not None and math.isfinite(total) and total > 0 else None
    msum = modes_sum(sol, k, coupled)
    fe = sol.features(probe, k)
    if tau is None or fe.final is None or fe.after is None:
        return DominantTau(tau, terms, msum)
    swing = fe.after - fe.final
    grid = scan_grid(sol, k)
    values = sol.held(probe, k, grid)
    values[0] = fe.after
    excursion = float(np.max(np.abs(values - fe.final), initial=0.0))
    if not abs(swing) > WAVEFORM_SWING_FLOOR * excursion:
        # a pulse that starts and ends near its final value: no one-τ curve describes it
        return DominantTau(tau, terms, msum, None, None, tau * math.log(2))
    one = fe.final + swing * np.exp(-grid / tau)
    deviation = float(np.max(np.abs(one - values)) / abs(swing))
    t50 = _first_crossing(sol, probe, k, grid, values, fe.final + swing / 2)
    return DominantTau(tau, terms, msum, deviation, t50, tau * math.log(2))
