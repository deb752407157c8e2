"""The numerical engine at an extreme corner: its own value of the spec'd fields there."""

from __future__ import annotations

import numpy as np

from .. import model as m
from .fieldvalue import field_values
from .quantities import Quantity, apply


def numeric_at(circuit: m.Circuit, exp: m.Expectation, names: tuple[str, ...],
               quantities: tuple[Quantity, ...], corner: np.ndarray) -> np.ndarray:
    """The numerical engine's values of ``names`` at one corner (NaN where it gives none or
    fails)."""
    from ..simulate import solve as numeric_solve
    varied_circuit, varied_exp = apply(circuit, exp, quantities, corner)
    try:
        solution = numeric_solve(varied_circuit)
    except (ValueError, ArithmeticError, np.linalg.LinAlgError, RuntimeError):
        return np.full(len(names), np.nan)
    return field_values(solution, varied_circuit, varied_exp, names)
