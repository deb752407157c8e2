"""One file's spread analysis split into parts, for runs spread over processes or machines.

``plan(circuit)`` names the pieces of every spec'd expectation whose Monte Carlo is larger than
one piece: expectation index -> sample ranges [start, stop), each a whole number of
``sampling.CHUNK`` chunks (``sampling.PIECE`` samples but the last).  ``summary(circuit,
index, start, stop)`` evaluates one piece where it runs (``harness.cluster`` makes it a task)
and returns its streamed summary (``sampling.Accumulator``); the pieces' summaries merged in
order are what ``analyse.analyse_expectation`` computes in one process: each chunk's samples
come from their own generator (``sampling``), so a sample is the same whoever evaluates it.

The numerical engine at the extreme corners (four runs for two fields, about half of what is
left to the file's own analysis once the samples are in) is started before the samples are:
``corners`` finds the corners the extreme search reaches from the box's vertices alone, and
``corner_value`` runs the engine at one of them, both without the Monte Carlo.  The analysis
(``evaluated``: the merged summaries and these values) takes a value wherever its own search,
Monte Carlo points included, ends on the same corner (the same call on the same bytes, so the
same bits) and runs the engine itself where it does not (a Monte Carlo sample more extreme
than every vertex).  Nothing here knows of the cluster.
"""

from __future__ import annotations

import numpy as np

from .. import model as m
from . import batch, sampling
from .analyse import EXACT_MAX_SAMPLES, Evaluated, basis, spec_names
from .extremes import search
from .quantities import varied
from .verify import numeric_at


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


def corner_count(circuit: m.Circuit, index: int) -> int:
    """How many corners ``corners`` gives for expectation ``index``: a min and a max per spec'd
    field where the extremes are asked for and something varies, else none."""
    exp = circuit.expectations[index]
    if m.EXTREMES not in circuit.variation.methods or not varied(circuit, exp):
        return 0
    return 2 * len(spec_names(exp))


def corners(circuit: m.Circuit, index: int) -> list[tuple[str, np.ndarray]]:
    """(field name, corner) of each spec'd field's min then max, fields in
    ``analyse.spec_names`` order (``corner_count`` of them): where ``extremes.search`` ends
    from the box alone, without Monte Carlo points."""
    if not corner_count(circuit, index):
        return []
    names, _, fn, _, low, high, _, grads = basis(circuit, circuit.expectations[index])
    found, _ = search(fn, low, high, grads)
    return [(name, extreme.corner) for name, pair in zip(names, found) for extreme in pair]


def corner_value(circuit: m.Circuit, index: int, name: str, corner: np.ndarray):
    """(name, the corner's bytes, value): the numerical engine's value of field ``name`` of
    expectation ``index`` at ``corner`` (``verify.numeric_at``, the call the analysis makes)."""
    exp = circuit.expectations[index]
    value = numeric_at(circuit, exp, (name,), varied(circuit, exp), corner)[0]
    return name, corner.tobytes(), value


def evaluated(pieces: list[sampling.Accumulator] | None, values) -> Evaluated:
    """What the analysis of one expectation is handed (``analyse.Evaluated``): the pieces'
    summaries merged in order (None: none, the analysis runs its Monte Carlo) and the
    ``corner_value`` results (None entries skipped)."""
    return Evaluated(samples=merged(list(pieces)) if pieces else None,
                     numeric={(name, key): value for name, key, value in
                              (v for v in values if v is not None)})
