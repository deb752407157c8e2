"""Statistics of the samples: yield with its Wilson interval, percentiles, random deviations.

The Monte Carlo samples of a run form one stream cut into chunks of ``CHUNK`` samples; chunk k
is drawn from its own generator, seeded by the k-th child of ``SeedSequence(seed)`` (numpy's
``SeedSequence.spawn``, "Parallel random number generation" in the numpy documentation).  A
sample's deviations therefore depend only on the seed and its index, never on how a run is
split over processes or machines (``stream``).
"""

from __future__ import annotations

import math

import numpy as np

from .. import model as m

#: two-sided 95 % normal quantile
Z95 = 1.959963984540054
PERCENTILES = (0.135, 2.5, 50.0, 97.5, 99.865)
#: samples per chunk of the Monte Carlo stream (fixed: it decides which generator draws a sample)
CHUNK = 1024


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


def chunk_generator(seed: int, k: int) -> np.random.Generator:
    """The generator of chunk ``k`` of the stream of ``seed``: the one seeded by
    ``SeedSequence(seed).spawn(k + 1)[k]``, made without spawning the k children before it."""
    return np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(k,)))


def stream(low: np.ndarray, high: np.ndarray, variation: m.Variation, start: int,
           stop: int) -> np.ndarray:
    """The deviations of samples [start, stop) of the run's stream, shape (stop − start, n):
    sample s is row s mod ``CHUNK`` of chunk s // ``CHUNK``, each chunk (the last one holds
    what remains of ``variation.samples``) drawn whole by ``deviations`` from its own
    generator."""
    parts = [np.zeros((0, len(low)))]
    for k in range(start // CHUNK, -(-stop // CHUNK)):
        first = k * CHUNK
        count = min(CHUNK, variation.samples - first)
        drawn = deviations(chunk_generator(variation.seed, k), low, high, count, variation)
        parts.append(drawn[max(start - first, 0):stop - first])
    return np.vstack(parts)


def inside(values: np.ndarray, limits: m.Limits) -> np.ndarray:
    """Boolean mask: within [min, max] (NaN, no value, is outside)."""
    ok = np.isfinite(values)
    if limits.min is not None:
        ok &= values >= limits.min
    if limits.max is not None:
        ok &= values <= limits.max
    return ok


def summary(values: np.ndarray, limits: m.Limits) -> dict:
    """Mean, σ, min, max, percentiles and yield (with its Wilson 95 % interval)."""
    finite = values[np.isfinite(values)]
    passed = int(inside(values, limits).sum())
    out = {"count": int(values.size), "without_value": int(values.size - finite.size),
           "passed": passed, "yield": passed / values.size if values.size else None,
           "yield_95": list(wilson(passed, int(values.size)))}
    if finite.size:
        out.update(mean=float(finite.mean()), std=float(finite.std(ddof=1)) if finite.size > 1
                   else 0.0, min=float(finite.min()), max=float(finite.max()),
                   percentiles={f"{p:g}": float(np.percentile(finite, p)) for p in PERCENTILES})
    return out
