"""The first-order step response, the one curve the hand method draws."""

from __future__ import annotations

import numpy as np


def first_order(t: np.ndarray, t_k: float, x0: float, x_inf: float, tau: float) -> np.ndarray:
    """x_inf + (x0 - x_inf) e^(-(t - t_k)/tau): the first-order response from x(t_k+) = x0
    towards x_inf with time constant tau (s); ``t`` in s, any shape."""
    return x_inf + (x0 - x_inf) * np.exp(-(t - t_k) / tau)
