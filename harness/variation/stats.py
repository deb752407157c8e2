"""Statistics of the samples: yield with its Wilson interval, percentiles, random deviations."""

from __future__ import annotations

import math

import numpy as np

from .. import model as m

#: two-sided 95 % normal quantile
Z95 = 1.959963984540054
PERCENTILES = (0.135, 2.5, 50.0, 97.5, 99.865)


def wilson(passed: int, count: int, z: float = Z95) -> tuple[float, float]:
    """Wilson score interval of a binomial proportion (E. B. Wilson, "Probable inference, the
    law of succession, and statistical inference", J. Amer. Statist. Assoc. 22 (1927) 209-212):
    (p̂ + z²/2n ± z·√(p̂(1−p̂)/n + z²/4n²)) / (1 + z²/n)."""
    if count == 0:
        return (0.0, 1.0)
    p = passed / count
    denom = 1.0 + z * z / count
    centre = (p + z * z / (2 * count)) / denom
    half = z * math.sqrt(p * (1 - p) / count + z * z / (4 * count * count)) / denom
    return (max(0.0, centre - half), min(1.0, centre + half))


def deviations(rng: np.random.Generator, low: np.ndarray, high: np.ndarray, count: int,
               variation: m.Variation) -> np.ndarray:
    """``count`` random relative deviations, shape (count, n): uniform over [low, high], or
    normal about the spread's centre with σ = (high − low)/(2k) (not truncated)."""
    if variation.distribution == m.NORMAL:
        centre, sigma = (low + high) / 2, (high - low) / (2 * variation.sigmas)
        return rng.normal(centre, sigma, (count, len(low)))
    return rng.uniform(low, high, (count, len(low)))


def inside(values: np.ndarray, limits: m.Limits) -> np.ndarray:
    """Boolean mask: within [min, max] (NaN, no value, is outside)."""
    ok = np.isfinite(values)
    if limits.min is not None:
        ok &= values >= limits.min
    if limits.max is not None:
        ok &= values <= limits.max
    return ok


def counts(count: int, finite: int, passed: int) -> dict:
    """The sample count, how many have no value, how many pass, and the yield with its Wilson
    95 % interval."""
    return {"count": count, "without_value": count - finite, "passed": passed,
            "yield": passed / count if count else None, "yield_95": list(wilson(passed, count))}


def percentiles(finite: np.ndarray) -> dict:
    """``PERCENTILES`` of finite values (linear interpolation, numpy's default)."""
    return {f"{p:g}": float(np.percentile(finite, p)) for p in PERCENTILES} if finite.size \
        else {}
