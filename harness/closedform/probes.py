"""Probe functionals: every probe as y = c.x + d.x' + k in SI units, per interval.

``node X``, ``between a b`` and ``across P`` are differences of node voltages.  ``through P`` is
the current of P from p through it to n: a branch variable for voltage sources, vcvs, ccvs,
inductors and switches; (vp - vn)/R for a resistor; the controlled output current for vccs and
cccs; the source's own value for an independent current source.

A capacitor's current C d(vp - vn)/dt is read from values, never from derivatives.  With A the
node-by-capacitor incidence (ground removed), C = diag of the capacitances and r = (b - G x) on
the node rows (the capacitor current leaving each node, by KCL), the capacitor currents are
i = C A^T v' where the node voltages' derivatives v' solve A C A^T v' = r (KCL with each
capacitor's own law): any two solutions differ by a d with A C A^T d = 0, hence
||C^(1/2) A^T d|| = 0 and the same currents.  So

    i_caps = C A^T (A C A^T)^-1 r

on the nodes that carry a capacitor, with one node of every group of capacitors that touches
no ground pinned (v' = 0 there: the group's common derivative moves no charge); this divides a
loop current between parallel capacitors by their capacitances exactly.  The derivative of the
exponential form was used for the loop part before: a fast mode that leaks into a slow node at
rounding (1e-10 of a 0.4 V step beside a 0.42 ns mode) came back multiplied by its rate, and
put 1.4e-3 into a 41.7 nA current.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..model import (ACROSS, BETWEEN, CAPACITOR, CURRENT_SOURCE, NODE, THROUGH, Circuit, Probe)
from .mna import Layout, Scale, voltage_row
from .stamps import current_row


@dataclass(frozen=True)
class Functional:
    """y = c . x + d . dx/dt + [source value] + [w . (b - G x) on node rows] (unscaled x).

    Attributes:
        c: coefficients over x, shape (n,).
        d: coefficients over dx/dt in s, shape (n,).
        source: name of the independent current source whose value adds to y, or None.
        dimension: "V" or "A".
        kcl: weights w over the node rows of b - G x, shape (n_nodes,), or None.
    """

    c: np.ndarray
    d: np.ndarray
    source: str | None
    dimension: str
    kcl: np.ndarray | None = None

    def terms(self, layout: Layout, scale: Scale, g: np.ndarray, b: np.ndarray,
              values: dict, size: int) -> tuple[np.ndarray, np.ndarray, float]:
        """(c~, d~, k) over the scaled state x~ (and dx~/dtau) of an interval whose scaled
        matrices are ``g``, ``b``; zero-padded to ``size`` (augmented systems).  ``g`` is read
        only for a KCL sum (``kcl``) and may be None otherwise."""
        dvec = scale.var(layout)
        c = np.zeros(size)
        d = np.zeros(size)
        c[:layout.size] = self.c * dvec
        d[:layout.size] = self.d * dvec / scale.t
        const = values.get(self.source, 0.0) if self.source else 0.0
        if self.kcl is not None:
            w = self.kcl / scale.r0                # node rows of b~, G~ are scaled by R0
            c[:layout.size] -= w @ g[:layout.n_nodes]
            const += float(w @ b[:layout.n_nodes])
        return c, d, const


def _known_node(circuit: Circuit, probe: Probe, node: str) -> str:
    if node not in circuit.nodes:
        raise InputError(f"{probe.label}: unknown node {node!r}", file=circuit.source)
    return node


def _known_part(circuit: Circuit, probe: Probe, name: str):
    try:
        return circuit.part(name)
    except KeyError:
        raise InputError(f"{probe.label}: unknown part {name!r}", file=circuit.source) from None


def _capacitor(circuit: Circuit, layout: Layout, name: str) -> Functional:
    """The capacitor-current functional of the module docstring: KCL weights over the node
    rows, no derivative."""
    caps = [p for p in circuit.parts if p.kind == CAPACITOR]
    inc = np.array([voltage_row(layout, p.p, p.n)[:layout.n_nodes] for p in caps]).T
    values = np.array([p.value for p in caps])
    keep = _unpinned(inc)
    sub = inc[keep]                                          # (kept nodes, caps)
    laplacian = (sub * values) @ sub.T
    d = np.sqrt(np.diag(laplacian))
    j = [p.name for p in caps].index(name)
    kcl = np.zeros(layout.n_nodes)
    if keep.any():
        solved = np.linalg.solve(laplacian / np.outer(d, d), sub[:, j] / d)
        kcl[keep] = values[j] * solved / d
    return Functional(np.zeros(layout.size), np.zeros(layout.size), None, "A", kcl=kcl)


def _unpinned(inc: np.ndarray) -> np.ndarray:
    """The nodes (rows of the incidence ``inc``, shape (nodes, caps)) whose derivatives the
    capacitor law fixes: those that carry a capacitor, less one node of every group joined by
    capacitors that has none to ground (boolean, shape (nodes,))."""
    nodes = inc.shape[0]
    parent = list(range(nodes + 1))                          # index ``nodes`` is ground

    def root(i: int) -> int:
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for column in inc.T:
        ends = [int(i) for i in np.flatnonzero(column)] or []
        a, b = (ends + [nodes, nodes])[:2]
        parent[root(a)] = root(b)
    keep = np.abs(inc).sum(axis=1) > 0
    for i in range(nodes):
        if keep[i] and root(i) == i and root(nodes) != i:
            keep[i] = False                                  # the pinned node of its group
    return keep


def functional(circuit: Circuit, layout: Layout, probe: Probe) -> Functional:
    """The functional of ``probe`` (InputError for an unknown node or part)."""
    zero = np.zeros(layout.size)
    if probe.kind == NODE:
        node = _known_node(circuit, probe, probe.targets[0])
        return Functional(voltage_row(layout, node, circuit.ground), zero, None, "V")
    if probe.kind == BETWEEN:
        a, b = (_known_node(circuit, probe, t) for t in probe.targets[:2])
        return Functional(voltage_row(layout, a, b), zero, None, "V")
    part = _known_part(circuit, probe, probe.targets[0])
    if probe.kind == ACROSS:
        return Functional(voltage_row(layout, part.p, part.n), zero, None, "V")
    if probe.kind != THROUGH:
        raise InputError(f"unknown probe kind {probe.kind!r}", file=circuit.source)
    if part.kind == CAPACITOR:
        return _capacitor(circuit, layout, part.name)
    if part.kind == CURRENT_SOURCE:
        return Functional(zero, zero, part.name, "A")
    return Functional(current_row(circuit, layout, part.name), zero, None, "A")
