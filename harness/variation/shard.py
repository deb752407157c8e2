"""One file's Monte Carlo split into pieces, for runs spread over processes or machines.

``plan(circuit)`` names the pieces of every spec'd expectation whose Monte Carlo is larger than
one piece: expectation index -> sample ranges [start, stop), each a whole number of
``stats.CHUNK`` chunks.  ``values(circuit, index, start, stop)`` evaluates one piece where it
runs (``harness.cluster`` makes it a task); the pieces' values, joined in order, are what
``analyse.monte_carlo`` computes in one process, bit for bit: each chunk's samples come from
their own generator (``stats.stream``) and are evaluated as one array either way
(``analyse.evaluate_range``).  Nothing here knows of the cluster.
"""

from __future__ import annotations

import numpy as np

from .. import model as m
from . import batch, stats
from .analyse import evaluate_range, evaluator, field_names
from .quantities import edges, varied

#: chunks per piece on the batched first-order route (~1 µs per sample: ~0.3 s a piece)
BATCHED_CHUNKS = 256
#: chunks per piece on the exact engine's route (~20 ms per sample: ~20 s a piece)
EXACT_CHUNKS = 1


def plan(circuit: m.Circuit) -> dict[int, list[tuple[int, int]]]:
    """Expectation index -> its Monte Carlo's sample ranges, for the expectations whose samples
    span more than one piece (the others are left to the file's own analysis).  A piece holds
    ``BATCHED_CHUNKS`` chunks where the batched route applies (``batch.qualifies``), else
    ``EXACT_CHUNKS``."""
    variation = circuit.variation
    if m.MONTE_CARLO not in variation.methods:
        return {}
    out = {}
    for index, exp in enumerate(circuit.expectations):
        if not exp.spec or not varied(circuit, exp):
            continue
        fast = batch.qualifies(circuit, exp, field_names(exp))
        size = stats.CHUNK * (BATCHED_CHUNKS if fast else EXACT_CHUNKS)
        if variation.samples > size:
            out[index] = [(start, min(start + size, variation.samples))
                          for start in range(0, variation.samples, size)]
    return out


def values(circuit: m.Circuit, index: int, start: int, stop: int) -> np.ndarray:
    """The spec'd fields' values of samples [start, stop) of expectation ``index``, shape
    (stop − start, F), F the fields in ``analyse.field_names`` order; NaN where a sample's
    field has no value."""
    exp = circuit.expectations[index]
    names = field_names(exp)
    quantities = varied(circuit, exp)
    fn, _ = evaluator(circuit, exp, names, quantities)
    low, high = edges(quantities)
    return evaluate_range(fn, low, high, circuit.variation, start, stop, len(names))
