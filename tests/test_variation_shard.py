"""The Monte Carlo stream does not depend on how a run is split: each chunk of samples has its own
generator (numpy's SeedSequence child streams), and a file's samples summarised in pieces and
merged in order give what one process gives, bit for bit (what a cluster run relies on)."""

from dataclasses import replace

import numpy as np
import pytest

from harness.circuitfile import parse_circuit
from harness.variation import analyse, sampling, shard
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
    return edges(varied(circuit, circuit.expectations[0]))


@pytest.mark.parametrize("k", [0, 1, 7, 300])
def test_a_chunk_is_drawn_by_the_seed_sequence_child_of_its_index(k):
    # numpy documentation, "Parallel random number generation": SeedSequence(seed).spawn(n)
    # gives n independent child sequences; chunk k uses child k
    circuit = _circuit(3000)
    low, high = _box(circuit)
    child = np.random.SeedSequence(5).spawn(k + 1)[k]
    expected = np.random.default_rng(child).uniform(low, high, (sampling.CHUNK, len(low)))
    assert np.array_equal(sampling.chunk_deviations(low, high, circuit.variation, k), expected)


@pytest.mark.parametrize("dist", ["uniform", "normal"])
def test_any_slice_of_the_stream_is_the_same_rows_of_the_whole(dist):
    circuit = _circuit(9000, dist)
    low, high = _box(circuit)
    whole = sampling.deviations(low, high, circuit.variation, 0, 9000)
    assert whole.shape == (9000, 2)
    for start, stop in ((0, 1), (4000, 4100), (4095, 4097), (8191, 9000), (8999, 9000)):
        part = sampling.deviations(low, high, circuit.variation, start, stop)
        assert np.array_equal(part, whole[start:stop])


def test_uniform_deviations_stay_inside_the_spreads_and_fill_them():
    # 3000 uniform points on each spread come within 1 % of its width of each edge
    # (the chance of missing one is 0.99^3000, about 1e-13)
    circuit = _circuit(3000)
    low, high = _box(circuit)
    whole = sampling.deviations(low, high, circuit.variation, 0, 3000)
    assert (whole >= low).all() and (whole <= high).all()
    span = high - low
    assert (whole.min(axis=0) < low + 0.01 * span).all()
    assert (whole.max(axis=0) > high - 0.01 * span).all()


def _split(monkeypatch, chunks: int = 1):
    """Pieces of ``chunks`` chunks, in the one-process route and the plan alike."""
    monkeypatch.setattr(sampling, "PIECE", chunks * sampling.CHUNK)
    monkeypatch.setattr(analyse, "PIECE", chunks * sampling.CHUNK)


def _given(circuit):
    plan = shard.plan(circuit)
    assert list(plan) == [0] and len(plan[0]) > 1, plan
    return {0: shard.evaluated([shard.summary(circuit, 0, a, b) for a, b in plan[0]], ())}


def test_pieces_merged_in_order_give_the_one_process_result(monkeypatch):
    _split(monkeypatch)                                  # pieces of one chunk: 4096, 4096, 808
    circuit = _circuit(9000)
    assert shard.plan(circuit) == {0: [(0, 4096), (4096, 8192), (8192, 9000)]}
    alone = analyse.analyse_circuit(circuit, numeric=False)
    split = analyse.analyse_circuit(circuit, numeric=False, given=_given(circuit))
    assert [s.to_json() for s in split] == [s.to_json() for s in alone]      # bit for bit


def test_the_exact_route_is_capped_and_never_split(monkeypatch):
    _split(monkeypatch)
    circuit = _circuit(9000, extra=SECOND_ORDER)
    assert shard.plan(circuit) == {}                     # EXACT_MAX_SAMPLES < one chunk


def test_given_summaries_stand_in_for_the_evaluation(monkeypatch):
    _split(monkeypatch)
    circuit = _circuit(9000)
    given = _given(circuit)
    marked = given[0].samples
    marked.low[0], marked.high[0] = 5.0, 5.0             # every τ sample above its 2 ms limit
    marked.passed[0] = 0
    failing = analyse.analyse_circuit(circuit, numeric=False, given=given)
    tau = [s for s in failing if s.name == "tau"][0]
    assert tau.monte_carlo["passed"] == 0 and tau.verdict == "mismatch"


def test_a_small_monte_carlo_is_not_split():
    assert shard.plan(_circuit(3000)) == {}


def _corner_values(circuit):
    """The numerical engine at each corner ``shard.corners`` finds, as separate tasks would
    give them."""
    return [shard.corner_value(circuit, 0, name, corner)
            for name, corner in shard.corners(circuit, 0)]


def test_corners_found_apart_are_the_analysis_own(monkeypatch):
    """The monotonic RC: every extreme is a vertex of the box, whatever the Monte Carlo, so
    the corners searched without it are those the analysis reaches with it, and their engine
    values, handed in with the pieces, give the one-process result bit for bit."""
    _split(monkeypatch)
    circuit = _circuit(9000)
    assert shard.corner_count(circuit, 0) == 4                  # τ and crossing, min and max
    found = shard.corners(circuit, 0)
    assert [name for name, _ in found] == ["tau", "tau", "crossing", "crossing"]
    alone = analyse.analyse_circuit(circuit)
    pieces = [shard.summary(circuit, 0, a, b) for a, b in shard.plan(circuit)[0]]
    split = analyse.analyse_circuit(circuit, given={0: shard.evaluated(pieces,
                                                                       _corner_values(circuit))})
    assert [s.to_json() for s in split] == [s.to_json() for s in alone]
    for s in alone:                                              # the same corners, value for value
        corners = {(name, c.tobytes()) for name, c in found if name == s.name}
        assert {(s.name, np.array(list(s.low_corner.values())).tobytes()),
                (s.name, np.array(list(s.high_corner.values())).tobytes())} == corners


def test_a_corner_value_handed_in_is_taken_and_others_are_run_here(monkeypatch):
    """A value handed in for a corner the search reaches replaces the engine's run there; one
    for a corner it does not reach is ignored (the engine runs)."""
    _split(monkeypatch)
    circuit = _circuit(9000)
    alone = {s.name: s for s in analyse.analyse_circuit(circuit)}
    (name, corner), *_ = shard.corners(circuit, 0)              # τ's min corner
    elsewhere = np.full_like(corner, 0.5)                       # not a corner of the box
    known = {(name, corner.tobytes()): 123.0, (name, elsewhere.tobytes()): 7.0}
    got = {s.name: s for s in analyse.analyse_circuit(
        circuit, given={0: analyse.Evaluated(numeric=known)})}
    assert got["tau"].numeric_low == 123.0
    assert got["tau"].numeric_high == alone["tau"].numeric_high
    assert got["crossing"].to_json() == alone["crossing"].to_json()


def test_no_corners_without_the_extremes():
    circuit = _circuit(9000)
    bare = replace(circuit, variation=replace(circuit.variation, methods=("monte-carlo",)))
    assert shard.corner_count(bare, 0) == 0 and shard.corners(bare, 0) == []
