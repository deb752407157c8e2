"""Spec'd field values from the exact engine, one circuit at a time (the general route).

Every field is the closed form's own value (``harness.closedform``): before, after, final and
τ from its features, the crossing time, peak magnitude, energy and dominant τ from its sign-off
methods, the periodic steady-state fields from its ``periodic``.  A value the engine does not
give (no crossing, not first order, no steady state) is NaN.
"""

from __future__ import annotations

import math

import numpy as np

from .. import model as m
from ..closedform import solve as closed_solve
from ..fieldspec import FEATURES, field_spec
from ..tolerances import SETTLE_FRACTION
from .quantities import Quantity, apply

_FAILURES = (ValueError, ArithmeticError, np.linalg.LinAlgError)


def field_values(solution, circuit: m.Circuit, exp: m.Expectation,
                 names: tuple[str, ...]) -> np.ndarray:
    """The values of ``names`` (``model.SPEC_FIELDS``) of ``exp`` in ``solution`` (an engine's
    Solution), shape (len(names),), NaN where there is none."""
    k = circuit.event_index(exp.at)
    out = np.full(len(names), np.nan)
    try:
        feats = solution.features(exp.probe, k)
    except _FAILURES:
        return out
    for i, name in enumerate(names):
        try:
            out[i] = _one(solution, feats, exp, k, name)
        except _FAILURES:
            pass
    return out


def _one(solution, feats, exp: m.Expectation, k: int, name: str) -> float:
    spec = field_spec(name)
    if spec.source == FEATURES:
        value = getattr(feats, name)
    elif spec.periodic:
        within = exp.settle_within if exp.settle_within is not None else SETTLE_FRACTION
        value = getattr(solution.periodic(exp.probe, within), name)
    elif name == "crossing":
        c = exp.crossing
        value = solution.crossing(exp.probe, k, c.level, c.direction).time
    elif name == "peak":
        value = solution.peak(exp.probe, k).magnitude
    elif name == "energy":
        e = exp.energy
        value = solution.energy(e.part, k, e.until).energy
    else:  # dominant_tau
        value = solution.dominant(exp.probe, k).tau
    return math.nan if value is None else float(value)


def evaluate(circuit: m.Circuit, exp: m.Expectation, names: tuple[str, ...],
             quantities: tuple[Quantity, ...], deviations: np.ndarray) -> np.ndarray:
    """Field values at each row of ``deviations`` (shape (S, n)) -> shape (S, len(names)),
    one exact solve per row."""
    out = np.empty((len(deviations), len(names)))
    for row, dev in enumerate(np.atleast_2d(deviations)):
        varied_circuit, varied_exp = apply(circuit, exp, quantities, dev)
        try:
            solution = closed_solve(varied_circuit)
        except _FAILURES:
            out[row] = np.nan
            continue
        out[row] = field_values(solution, varied_circuit, varied_exp, names)
    return out
