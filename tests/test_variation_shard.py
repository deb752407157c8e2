"""The Monte Carlo stream does not depend on how a run is split: each chunk of samples has its own
generator (numpy's SeedSequence.spawn), and a file's samples evaluated in pieces, joined in
order, are the values one process computes, bit for bit (what a cluster run relies on)."""

import numpy as np
import pytest

from harness.circuitfile import parse_circuit
from harness.variation import analyse, shard, stats
from harness.variation.quantities import edges, varied
from tests.test_variation import RC

#: a second storage part: the circuit leaves the batched route for the exact engine per sample
SECOND_ORDER = """
R2 = { kind = "resistor", nodes = ["b", "c"], value = "2k2", spread = "1%" }
C2 = { kind = "capacitor", nodes = ["c", "gnd"], value = "100n", spread = "10%" }
"""


def _circuit(n: int, dist: str = "uniform", extra: str = ""):
    """test_variation's RC (R1 ±5 %, C1 ±10 %; spec'd τ and crossing) with ``extra`` parts."""
    text = RC.format(a="5%", b="10%", n=n, dist=dist, cmax="1 s")
    return parse_circuit(text.replace("[[expect]]", extra + "[[expect]]"))


def _box(circuit):
    exp = circuit.expectations[0]
    return edges(varied(circuit, exp))


@pytest.mark.parametrize("k", [0, 1, 7, 300])
def test_a_chunk_is_drawn_by_the_seed_sequence_child_of_its_index(k):
    # numpy documentation, "Parallel random number generation": SeedSequence(seed).spawn(n)
    # gives n independent child sequences; chunk k uses child k
    child = np.random.SeedSequence(5).spawn(k + 1)[k]
    expected = np.random.default_rng(child).uniform(size=4)
    assert np.array_equal(stats.chunk_generator(5, k).uniform(size=4), expected)


@pytest.mark.parametrize("dist", ["uniform", "normal"])
def test_any_slice_of_the_stream_is_the_same_rows_of_the_whole(dist):
    circuit = _circuit(3000, dist)
    low, high = _box(circuit)
    whole = stats.stream(low, high, circuit.variation, 0, 3000)
    assert whole.shape == (3000, 2)
    for start, stop in ((0, 1), (1000, 1030), (1023, 1025), (2047, 3000), (2999, 3000)):
        part = stats.stream(low, high, circuit.variation, start, stop)
        assert np.array_equal(part, whole[start:stop])


def test_uniform_deviations_stay_inside_the_spreads_and_fill_them():
    # 3000 uniform points on each spread come within 1 % of its width of each edge
    # (the chance of missing one is 0.99^3000, about 1e-13)
    circuit = _circuit(3000)
    low, high = _box(circuit)
    whole = stats.stream(low, high, circuit.variation, 0, 3000)
    assert (whole >= low).all() and (whole <= high).all()
    span = high - low
    assert (whole.min(axis=0) < low + 0.01 * span).all()
    assert (whole.max(axis=0) > high - 0.01 * span).all()


def _joined(circuit) -> np.ndarray:
    plan = shard.plan(circuit)
    assert list(plan) == [0] and len(plan[0]) > 1, plan
    return np.concatenate([shard.values(circuit, 0, a, b) for a, b in plan[0]])


def _whole(circuit) -> np.ndarray:
    exp = circuit.expectations[0]
    names = analyse.field_names(exp)
    quantities = varied(circuit, exp)
    fn, route = analyse.evaluator(circuit, exp, names, quantities)
    low, high = edges(quantities)
    values, kept = analyse.monte_carlo(fn, low, high, circuit.variation, len(names))
    return values, route


def test_pieces_of_the_batched_route_join_to_the_values_of_one_process(monkeypatch):
    monkeypatch.setattr(shard, "BATCHED_CHUNKS", 1)     # pieces of one chunk: 1024, 1024, 952
    circuit = _circuit(3000)
    whole, route = _whole(circuit)
    assert route.startswith("batched")
    assert _joined(circuit).tobytes() == whole.tobytes()             # bit for bit


def test_pieces_of_the_exact_route_join_to_the_values_of_one_process(monkeypatch):
    monkeypatch.setattr(stats, "CHUNK", 8)              # small chunks: 20 exact solves
    circuit = _circuit(20, extra=SECOND_ORDER)
    whole, route = _whole(circuit)
    assert route == "exact engine per sample"
    assert shard.plan(circuit) == {0: [(0, 8), (8, 16), (16, 20)]}
    joined = _joined(circuit)
    assert np.isfinite(whole[:, 1]).all()               # crossing times (no first-order τ)
    assert joined.tobytes() == whole.tobytes()


def test_given_values_stand_in_for_the_evaluation():
    circuit = _circuit(3000)
    whole, _ = _whole(circuit)
    spreads = analyse.analyse_circuit(circuit, numeric=False)
    given = analyse.analyse_circuit(circuit, numeric=False, given={0: whole.copy()})
    assert [s.to_json() for s in spreads] == [s.to_json() for s in given]
    marked = whole.copy()
    marked[:, 0] = 5.0                                  # every τ sample above its 2 ms limit
    failing = analyse.analyse_circuit(circuit, numeric=False, given={0: marked})
    tau = [s for s in failing if s.name == "tau"][0]
    assert tau.monte_carlo["passed"] == 0 and tau.verdict == "mismatch"


def test_a_small_monte_carlo_is_not_split():
    assert shard.plan(_circuit(3000)) == {}
