"""Monte Carlo samples, drawn and evaluated in chunks and summarised as they stream past.

Sample i of a file is the same whatever the sample count and whoever evaluates it: chunk c
(samples c·CHUNK … (c+1)·CHUNK − 1) is drawn from its own generator, seeded by
``numpy.random.SeedSequence(seed, spawn_key=(c,))`` (NumPy's independent-stream mechanism), so
any range [start, stop) can be evaluated apart (``evaluate_range``: the entry point for running
chunks on other machines) and the partial summaries merged (``Accumulator.merge``).

Memory stays flat in the sample count: a chunk's arrays (CHUNK × quantities) and per field the
running count, pass count, mean and sum of squared deviations (Chan, Golub & LeVeque, "Updating
formulae and a pairwise algorithm for computing sample variances", 1979), min and max with the
deviations that gave them; only the first ``KEEP`` samples are kept, for the reports (CSV,
histogram) and the percentiles (exact up to ``KEEP`` samples, taken from the first ``KEEP``
beyond it: the samples are independent, so those are a random sample of the whole).
"""

from __future__ import annotations

import numpy as np

from .. import model as m
from . import stats

#: samples drawn and evaluated at once
CHUNK = 4096
#: samples kept for the reports' CSV and histograms and for the percentiles
KEEP = 100_000
#: samples summarised apart before their summaries are merged (``Accumulator.merge``): the unit
#: a cluster run hands out (``shard``), and the same cut in one process so both give the same
#: bits (64 chunks: ~0.3 s of the batched route)
PIECE = 64 * CHUNK


def chunk_deviations(low: np.ndarray, high: np.ndarray, variation: m.Variation,
                     chunk: int) -> np.ndarray:
    """The relative deviations of chunk ``chunk``, shape (CHUNK, n)."""
    rng = np.random.default_rng(np.random.SeedSequence(variation.seed, spawn_key=(chunk,)))
    return stats.deviations(rng, low, high, CHUNK, variation)


def deviations(low: np.ndarray, high: np.ndarray, variation: m.Variation, start: int,
               stop: int) -> np.ndarray:
    """The relative deviations of samples [start, stop), shape (stop − start, n)."""
    if stop <= start:
        return np.zeros((0, len(low)))
    first, last = start // CHUNK, (stop - 1) // CHUNK
    rows = np.vstack([chunk_deviations(low, high, variation, c) for c in range(first, last + 1)])
    return rows[start - first * CHUNK:stop - first * CHUNK]


def evaluate_range(circuit: m.Circuit, exp: m.Expectation, start: int, stop: int):
    """Samples [start, stop) of ``exp``'s spec'd fields: (deviations (S, n), values (S, F),
    field names (F,), route).  Self-contained (it builds the varied quantities and the
    evaluator itself), for evaluating chunks apart and merging their ``Accumulator``s."""
    from .analyse import evaluator, spec_names
    from .quantities import edges, varied
    names = spec_names(exp)
    quantities = varied(circuit, exp)
    fn, route = evaluator(circuit, exp, names, quantities)
    low, high = edges(quantities)
    dev = deviations(low, high, circuit.variation, start, stop)
    return dev, fn(dev), names, route


def accumulate_range(circuit: m.Circuit, exp: m.Expectation, start: int, stop: int,
                     keep: int = KEEP) -> "Accumulator":
    """The streamed summary of samples [start, stop) of ``exp``'s spec'd fields, evaluated
    chunk by chunk; merge the summaries of consecutive ranges in order (``merge``) and hand
    the result to ``analyse.analyse_expectation(..., samples=)``."""
    from .analyse import evaluator, spec_names
    from .quantities import edges, varied
    names = spec_names(exp)
    quantities = varied(circuit, exp)
    fn, _ = evaluator(circuit, exp, names, quantities)
    low, high = edges(quantities)
    acc = Accumulator(tuple(exp.spec[n] for n in names), len(quantities), keep)
    for piece in _pieces(start, stop):
        dev = deviations(low, high, circuit.variation, *piece)
        acc.add(dev, fn(dev))
    return acc


def _pieces(start: int, stop: int) -> list[tuple[int, int]]:
    """[start, stop) cut at the chunk boundaries."""
    out, at = [], start
    while at < stop:
        end = min(stop, (at // CHUNK + 1) * CHUNK)
        out.append((at, end))
        at = end
    return out


class Accumulator:
    """Streaming summary of the samples of F fields (values in each field's unit)."""

    def __init__(self, limits: tuple[m.Limits, ...], quantities: int, keep: int = KEEP):
        fields = len(limits)
        self.limits, self.keep = limits, keep
        self.count = 0
        self.passed = np.zeros(fields, dtype=np.int64)
        self.finite = np.zeros(fields, dtype=np.int64)
        self.mean = np.zeros(fields)
        self.m2 = np.zeros(fields)             # sum of squared deviations from the mean
        self.low = np.full(fields, np.inf)
        self.high = np.full(fields, -np.inf)
        self.at_low = np.zeros((fields, quantities))
        self.at_high = np.zeros((fields, quantities))
        self.kept_values: list[np.ndarray] = []
        self.kept_deviations: list[np.ndarray] = []
        self.kept = 0

    def add(self, dev: np.ndarray, values: np.ndarray) -> None:
        """One chunk: deviations (S, n) and values (S, F), in sample order."""
        self.count += len(values)
        if self.kept < self.keep:
            take = min(len(values), self.keep - self.kept)
            self.kept_values.append(values[:take])
            self.kept_deviations.append(dev[:take])
            self.kept += take
        for col in range(values.shape[1]):
            column = values[:, col]
            self.passed[col] += int(stats.inside(column, self.limits[col]).sum())
            ok = np.isfinite(column)
            n = int(ok.sum())
            if not n:
                continue
            part = column[ok]
            mean = float(part.mean())
            self._merge_moments(col, n, mean, float(((part - mean) ** 2).sum()))
            lo, hi = int(np.argmin(np.where(ok, column, np.inf))), \
                int(np.argmax(np.where(ok, column, -np.inf)))
            if column[lo] < self.low[col]:
                self.low[col], self.at_low[col] = column[lo], dev[lo]
            if column[hi] > self.high[col]:
                self.high[col], self.at_high[col] = column[hi], dev[hi]

    def _merge_moments(self, col: int, n: int, mean: float, m2: float) -> None:
        total = self.finite[col] + n
        delta = mean - self.mean[col]
        self.m2[col] += m2 + delta * delta * self.finite[col] * n / total
        self.mean[col] += delta * n / total
        self.finite[col] = total

    def merge(self, other: "Accumulator") -> None:
        """Fold in the summary of a later range of samples (chunks evaluated elsewhere)."""
        for col in range(len(self.mean)):
            if other.finite[col]:
                self._merge_moments(col, int(other.finite[col]), float(other.mean[col]),
                                    float(other.m2[col]))
            if other.low[col] < self.low[col]:
                self.low[col], self.at_low[col] = other.low[col], other.at_low[col]
            if other.high[col] > self.high[col]:
                self.high[col], self.at_high[col] = other.high[col], other.at_high[col]
        self.count += other.count
        self.passed += other.passed
        for values, dev in zip(other.kept_values, other.kept_deviations):
            take = min(len(values), self.keep - self.kept)
            if take > 0:
                self.kept_values.append(values[:take])
                self.kept_deviations.append(dev[:take])
                self.kept += take

    def samples(self) -> tuple[np.ndarray, np.ndarray]:
        """The kept values (K, F) and deviations (K, n) (joined once, then shared)."""
        if not self.kept_values:
            return np.zeros((0, len(self.mean))), np.zeros((0, self.at_low.shape[1]))
        if len(self.kept_values) > 1:
            self.kept_values = [np.vstack(self.kept_values)]
            self.kept_deviations = [np.vstack(self.kept_deviations)]
        return self.kept_values[0], self.kept_deviations[0]

    def extremes(self) -> tuple[np.ndarray, np.ndarray]:
        """Every sample's min and max per field as points: deviations (2F, n), values (2F, F)
        (each row the field's own extreme in its column, NaN elsewhere)."""
        fields = len(self.mean)
        points = np.vstack([self.at_low, self.at_high])
        values = np.full((2 * fields, fields), np.nan)
        for col in range(fields):
            if self.finite[col]:
                values[col, col], values[fields + col, col] = self.low[col], self.high[col]
        return points, values

    def summary(self, col: int) -> dict:
        """Field ``col``'s count, yield with its Wilson 95 % interval, mean, σ (n − 1), min,
        max and percentiles."""
        kept, _ = self.samples()
        out = stats.counts(self.count, int(self.finite[col]), int(self.passed[col]))
        n = int(self.finite[col])
        if n:
            column = kept[:, col]
            out.update(mean=float(self.mean[col]),
                       std=float(np.sqrt(self.m2[col] / (n - 1))) if n > 1 else 0.0,
                       min=float(self.low[col]), max=float(self.high[col]),
                       percentiles=stats.percentiles(column[np.isfinite(column)]))
            if self.count > self.kept:
                out["percentiles_of"] = self.kept
        return out
