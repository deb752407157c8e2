"""The result of the sign-off over tolerances of one spec'd field, and its JSON form."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..outcome import HOLDS_STATISTICALLY  # noqa: F401  (an extreme fails, no sample does)


@dataclass(frozen=True)
class SpreadResult:
    """One spec'd field of one expectation, over the parts' spreads.

    Values are in the field's unit (V, A, s or J); corners map each varied quantity's name to
    its relative deviation from nominal there (-0.3 is 30 % below its value).
    """

    check: str                      # "expect #1: node rst at 0 s" (words, for the reports)
    index: int                      # its expectation's index (``Expectation.index``): the key
    name: str                       # field name (model.SPEC_FIELDS)
    unit: str
    verdict: str
    limits: dict                    # min, max, hand_min, hand_max (None where absent)
    nominal: float | None
    sensitivities: tuple[tuple[str, float], ...]   # (quantity, ∂x/∂p·p/x), ranked by |·|
    low: float | None = None        # extremes over the box
    high: float | None = None
    low_corner: dict = field(default_factory=dict)
    high_corner: dict = field(default_factory=dict)
    extreme_method: str = ""
    rss: tuple[float, float] | None = None
    monte_carlo: dict = field(default_factory=dict)
    numeric_low: float | None = None     # the numerical engine at the two corners
    numeric_high: float | None = None
    route: str = ""                  # which exact route evaluated the samples
    messages: tuple[str, ...] = ()
    units: dict = field(default_factory=dict)
    samples: np.ndarray | None = field(default=None, repr=False, compare=False)
    sample_deviations: np.ndarray | None = field(default=None, repr=False, compare=False)

    def to_json(self) -> dict[str, Any]:
        return {"check": self.check, "field": self.name, "unit": self.unit,
                "verdict": self.verdict, "limits": self.limits, "nominal": self.nominal,
                "sensitivities": [{"quantity": q, "normalised": s}
                                  for q, s in self.sensitivities],
                "extremes": {"min": self.low, "max": self.high, "method": self.extreme_method,
                             "min_corner": self.low_corner, "max_corner": self.high_corner,
                             "numeric_at_min": self.numeric_low,
                             "numeric_at_max": self.numeric_high},
                "rss": list(self.rss) if self.rss else None,
                "monte_carlo": self.monte_carlo, "route": self.route,
                "messages": list(self.messages)}
