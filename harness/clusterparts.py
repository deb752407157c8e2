"""A heavy file's spread analysis spread over a Dask cluster (``harness.cluster``): the plan,
read on the client with the file's weight (the order files are handed out in), of the
expectations whose Monte Carlo spans more than one piece
(``plan``), and the tasks the workers run for them: a task per piece (``piece``: samples
[start, stop) of one expectation), and, when the numerical engine runs, a task searching its
extreme corners from the box alone (``corners``) and one per corner running the engine there
(``corner_value``); the file's own task waits for them and is handed the pieces' streamed
summaries and the corners' values (``joined``).  The samples do not depend on the split, a
local run merges the same pieces in the same order (``variation.sampling``), and a corner's
value is taken only where the file's own search ends on that corner (``variation.shard``):
the result is the bytes of a local run.  Nothing here imports Dask: the client is passed in.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

from .runner import Weight, native_output_silenced


@dataclass(frozen=True)
class Split:
    """How one expectation's spread analysis is spread: its Monte Carlo pieces' sample ranges
    and the number of extreme corners the numerical engine is run at apart."""

    ranges: list
    corners: int

    @property
    def tasks(self) -> int:
        """Its tasks: a piece each, and the corner search and a task per corner."""
        return len(self.ranges) + (1 + self.corners if self.corners else 0)


def plan(path: str, tolerance: float | None, numeric: bool) -> tuple[Weight, dict]:
    """(the file's ``runner.Weight``, expectation index -> ``Split``), the file read once, here
    on the client: the expectations whose Monte Carlo spans more than one piece
    (``variation.shard.plan``), with their corners (``shard.corner_count``) when the numerical
    engine runs; none for a file its weight does not mark as spec'd, or one that cannot be read
    here (its task says why)."""
    try:
        with open(path, "rb") as handle:
            data = handle.read()
    except OSError:
        return Weight(), {}
    weight = Weight.of(data)
    if not weight.spread:
        return weight, {}
    try:
        from .circuitfile import parse_circuit
        from .variation import shard
        circuit = parse_circuit(data.decode("utf-8"), path, tolerance)
        return weight, {index: Split(ranges, shard.corner_count(circuit, index) if numeric else 0)
                        for index, ranges in shard.plan(circuit).items()}
    except Exception:  # planning only spreads the work; the file's own task reports faults
        return weight, {}


def submit_parts(client, path: str, tolerance: float | None, plan: dict):
    """Submit the parts of a file's spread analysis: per expectation, the search of its
    corners from the box alone (first), its Monte Carlo pieces, then the numerical engine at
    each corner (``variation.shard``).  Returns (index -> the pieces' futures, index -> the
    corner values' futures, every part's future)."""
    given, values, parts = {}, {}, []
    for index, split in plan.items():
        found = client.submit(corners, path, tolerance, index, pure=False, priority=2) \
            if split.corners else None
        given[index] = [client.submit(piece, path, tolerance, index, a, b, pure=False,
                                      priority=1) for a, b in split.ranges]
        values[index] = [client.submit(corner_value, path, tolerance, index, found, k,
                                       pure=False, priority=1) for k in range(split.corners)]
        parts += ([found] if found is not None else []) + given[index] + values[index]
    return given, values, parts


def piece(path: str, tolerance: float | None, index: int, start: int, stop: int):
    """A worker's task: the streamed summary of samples [start, stop) of expectation ``index``
    of the file (``variation.shard.summary``, a ``sampling.Accumulator``)."""
    from .circuitfile import read_circuit
    from .variation import shard
    circuit = read_circuit(path, tolerance)
    with native_output_silenced():
        return shard.summary(circuit, index, start, stop)


def corners(path: str, tolerance: float | None, index: int) -> list:
    """A worker's task: where the extreme search of expectation ``index`` ends from the box
    alone (``variation.shard.corners``); none when that fails (the values are only taken
    where the file's own analysis ends on the same corners)."""
    from .circuitfile import read_circuit
    from .variation import shard
    try:
        with native_output_silenced():
            return shard.corners(read_circuit(path, tolerance), index)
    except Exception:
        return []


def corner_value(path: str, tolerance: float | None, index: int, found: list, k: int):
    """A worker's task: the numerical engine at corner ``k`` of ``found`` (``corners``'s
    result, put in place of its future by Dask): ``shard.corner_value``, or None."""
    from .circuitfile import read_circuit
    from .variation import shard
    if k >= len(found):
        return None
    try:
        with native_output_silenced():
            return shard.corner_value(read_circuit(path, tolerance), index, *found[k])
    except Exception:
        return None


def joined(work: Callable, path: str, numeric: bool, tolerance: float | None, given: dict,
            values: dict):
    """A worker's task: the file's analysis with its Monte Carlo taken from its pieces and the
    numerical engine's corner values from their tasks (``given`` / ``values``: expectation
    index -> the parts' results in order, Dask having put each result in place of its
    future)."""
    from .variation import shard
    samples = {index: shard.evaluated(given.get(index), values.get(index, ()))
               for index in given}
    return work(path, numeric, tolerance, samples=samples)
