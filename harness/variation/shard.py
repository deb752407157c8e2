"""One file's Monte Carlo split into pieces, for runs spread over processes or machines.

``plan(circuit)`` names the pieces of every spec'd expectation whose Monte Carlo is larger than
one piece: expectation index -> sample ranges [start, stop), each a whole number of
``sampling.CHUNK`` chunks (``sampling.PIECE`` samples but the last).  ``summary(circuit, index, start, stop)`` evaluates one piece where it
runs (``harness.cluster`` makes it a task) and returns its streamed summary
(``sampling.Accumulator``); the pieces' summaries merged in order are what
``analyse.analyse_expectation`` computes in one process: each chunk's samples come from their
own generator (``sampling``), so a sample is the same whoever evaluates it.  Nothing here
knows of the cluster.
"""

from __future__ import annotations

from .. import model as m
from . import batch, sampling
from .analyse import EXACT_MAX_SAMPLES, spec_names
from .quantities import varied



def plan(circuit: m.Circuit) -> dict[int, list[tuple[int, int]]]:
    """Expectation index -> its Monte Carlo's sample ranges, for the expectations whose samples
    span more than one piece of ``sampling.PIECE`` samples (the others are left to the file's
    own analysis); the exact engine's route (a circuit ``batch.qualifies`` does not take) runs
    at most ``analyse.EXACT_MAX_SAMPLES`` samples."""
    variation = circuit.variation
    if m.MONTE_CARLO not in variation.methods:
        return {}
    out = {}
    for index, exp in enumerate(circuit.expectations):
        if not exp.spec or not varied(circuit, exp):
            continue
        fast = batch.qualifies(circuit, exp, spec_names(exp))
        total = variation.samples if fast else min(variation.samples, EXACT_MAX_SAMPLES)
        if total > sampling.PIECE:
            out[index] = [(start, min(start + sampling.PIECE, total))
                          for start in range(0, total, sampling.PIECE)]
    return out


def summary(circuit: m.Circuit, index: int, start: int, stop: int) -> sampling.Accumulator:
    """The streamed summary of samples [start, stop) of expectation ``index``'s spec'd fields
    (``sampling.accumulate_range``)."""
    return sampling.accumulate_range(circuit, circuit.expectations[index], start, stop)


def merged(pieces: list[sampling.Accumulator]) -> sampling.Accumulator:
    """The summaries of consecutive pieces folded into the first, in order."""
    whole = pieces[0]
    for piece in pieces[1:]:
        whole.merge(piece)
    return whole
