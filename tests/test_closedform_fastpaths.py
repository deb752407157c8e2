"""The closed form's fast paths give what the slow ones (and outside references) give.

* The DC uniqueness check skips its SVD only where an LU condition estimate shows the matrix is
  regular: it must still refuse a DC circuit that leaves a storage value free, and the gate must
  never call a matrix regular that numpy's SVD finds singular.
* Thevenin resistances of all storage parts come from one LU of the interval's G~ (inductors by
  a bordered solve): they must equal the per-part route and, on RC networks, the textbook
  two-port value (e_a - e_b)^T Y^-1 (e_a - e_b) of the nodal admittance matrix built here.
* Least squares refined with the LU factors equals numpy's least-squares solution.
"""

from __future__ import annotations

import numpy as np
import pytest

from harness import closedform
from harness.closedform import initial, linalg, thevenin
from harness.errors import InitialStateError
from tests.closedform_circuits import C, E, I, L, R, S, V, circuit


# ------------------------------------------------------------------------ uniqueness gate
def _ladder(sections: int):
    """An RC ladder from node "in", so that the DC system is large enough for the gate."""
    parts, prev = [], "in"
    for k in range(sections):
        parts += [R(f"Rl{k}", prev, f"l{k}", 1e3), C(f"Cl{k}", f"l{k}", "gnd", 1e-9)]
        prev = f"l{k}"
    return parts


@pytest.mark.parametrize("sections", [0, 40])
def test_gated_uniqueness_check_still_refuses_parallel_inductors(sections):
    """Two ideal inductors in parallel across a DC source path: the circulating DC current is
    undetermined (textbook: a loop of ideal inductors has no DC equation for its loop current),
    so the state at 0- is refused, naming an inductor and its initial value; with 40 extra
    sections the DC matrix is past the gate's size and the gate must send it to the SVD."""
    circ = circuit(V("V1", "in", "gnd", 5.0), R("R1", "in", "a", 1.0),
                   L("L1", "a", "gnd", 1e-3), L("L2", "a", "gnd", 2e-3), *_ladder(sections))
    with pytest.raises(InitialStateError) as info:
        closedform.solve(circ)
    assert info.value.part in ("L1", "L2") and info.value.field == "initial"


@pytest.mark.parametrize("sections", [0, 40])
def test_gated_uniqueness_check_accepts_the_same_circuit_with_one_initial_current(sections):
    """With L1's initial current given, the split is fixed (KCL at node a: i_L2 = 5 A - i_L1,
    the DC current 5 V / 1 ohm); the gate lets it through and the state is the hand value."""
    circ = circuit(V("V1", "in", "gnd", 5.0), R("R1", "in", "a", 1.0),
                   L("L1", "a", "gnd", 1e-3, initial=2.0), L("L2", "a", "gnd", 2e-3),
                   *_ladder(sections))
    sol = closedform.solve(circ)
    i_l2 = sol.prestep.x_plus[sol.layout.branch("L2")] / sol.scale.r0
    assert i_l2 == pytest.approx(3.0, rel=1e-12)


@pytest.mark.parametrize("seed", range(12))
def test_regular_gate_never_passes_a_matrix_the_svd_finds_singular(seed):
    """For random matrices with singular values spread over 0 to 20 decades (and exactly
    rank-deficient ones), the gate's "regular" implies numpy's SVD ratio above the 1e-12 the
    null-space test uses; exactly rank-deficient matrices are never "regular"."""
    rng = np.random.default_rng(seed)
    n = int(rng.integers(initial._GATE_MIN_SIZE, 120))
    u, _ = np.linalg.qr(rng.standard_normal((n, n)))
    v, _ = np.linalg.qr(rng.standard_normal((n, n)))
    sv = np.logspace(0, -rng.uniform(0, 20), n)
    if seed % 3 == 0:
        sv[-int(rng.integers(1, 3)):] = 0.0             # exactly singular
    a = (u * sv) @ v.T
    ratio = np.linalg.svd(a, compute_uv=False)
    ratio = ratio.min() / ratio.max()
    if initial._regular(a):
        assert ratio > initial._NULL
    if seed % 3 == 0:
        assert not initial._regular(a)
    if ratio > 1e-6:                                    # a well-conditioned matrix passes
        assert initial._regular(a)


@pytest.mark.parametrize("grounded", [True, False])
@pytest.mark.parametrize("n", [70, 600])
def test_regular_gate_on_sparse_laplacians(n, grounded):
    """Sparse matrices (past linalg.SPARSE_LU_MIN: the sparse LU and its norm estimate;
    below: the dense LU and dgecon) are gated alike: a resistor chain's
    nodal matrix with one end grounded is regular (kappa ~ n^2, textbook), the same chain
    floating is exactly singular (its row sums vanish); numpy's SVD is the reference."""
    rng = np.random.default_rng(n)
    g = 10 ** rng.uniform(-1, 1, n)
    a = np.zeros((n, n))
    for k in range(n - 1):
        a[k, k] += g[k]
        a[k + 1, k + 1] += g[k]
        a[k, k + 1] -= g[k]
        a[k + 1, k] -= g[k]
    if grounded:
        a[0, 0] += g[-1]
    assert linalg._pattern(a) is not None
    sv = np.linalg.svd(a, compute_uv=False)
    assert initial._regular(a) == grounded
    assert (sv.min() / sv.max() > initial._NULL) == grounded


# ------------------------------------------------------------------------ least squares
@pytest.mark.parametrize("n", [5, 40, 120])
def test_least_squares_with_lu_refinement_matches_numpy(n):
    """x of a regular system equals numpy.linalg.lstsq's (reference) to rounding."""
    rng = np.random.default_rng(n)
    a = rng.standard_normal((n, n)) + n * np.eye(n)
    b = rng.standard_normal(n)
    x, _, consistent = linalg.least_squares(a, b)
    ref = np.linalg.lstsq(a, b, rcond=None)[0]
    assert consistent
    np.testing.assert_allclose(x, ref, rtol=1e-12, atol=1e-14 * np.abs(ref).max())


# ------------------------------------------------------------------------ Thevenin
def _random_rlc(rng: np.random.Generator, nodes: int, with_vcvs: bool):
    """A random connected network: a resistor tree, extra resistors, grounded and floating
    capacitors, a few inductors, optionally a vcvs, driven by a voltage source."""
    names = [f"n{k}" for k in range(nodes)]
    parts = [V("V1", "in", "gnd", 0.0, ((0.0, 1.0),)), R("Rs", "in", names[0], 50.0)]
    count = 0

    def name(prefix):
        nonlocal count
        count += 1
        return f"{prefix}{count}"

    for k in range(1, nodes):
        parts.append(R(name("R"), names[k], names[int(rng.integers(0, k))],
                       float(10 ** rng.uniform(2, 5))))
    for _ in range(nodes // 2):
        a, b = rng.choice(nodes, 2, replace=False)
        parts.append(R(name("R"), names[a], names[b], float(10 ** rng.uniform(2, 5))))
    parts.append(R(name("R"), names[-1], "gnd", float(10 ** rng.uniform(3, 5))))
    for k in range(nodes):
        if rng.random() < 0.6:
            parts.append(C(name("C"), names[k], "gnd", float(10 ** rng.uniform(-10, -7))))
    a, b = rng.choice(nodes, 2, replace=False)
    parts.append(C(name("C"), names[a], names[b], float(10 ** rng.uniform(-10, -8))))
    for _ in range(int(rng.integers(1, 3))):
        a, b = rng.choice(nodes, 2, replace=False)
        parts.append(L(name("L"), names[a], names[b], float(10 ** rng.uniform(-6, -3))))
    if with_vcvs:
        parts += [E("E1", "amp", "gnd", -float(rng.uniform(1, 20)), names[1], "gnd"),
                  R(name("R"), "amp", names[0], float(10 ** rng.uniform(3, 5)))]
    return circuit(*parts)


@pytest.mark.parametrize("seed", range(10))
def test_batched_thevenin_equals_the_per_part_route_on_random_circuits(seed):
    """One LU for every test injection (inductors by the bordered solve) gives the R_th of one
    least-squares solve and one SVD null test per part (the per-part route, the engine's
    method before batching), inf included."""
    rng = np.random.default_rng(100 + seed)
    circ = _random_rlc(rng, int(rng.integers(3, 40)), with_vcvs=seed % 2 == 1)
    sol = closedform.solve(circ)
    g = sol.intervals[0].g
    parts = thevenin._storage(circ)
    vrows, rhs = thevenin._injections(sol.layout, sol.scale, parts)
    slow = thevenin._per_part(sol.layout, g, parts, vrows, rhs)
    fast = thevenin.thevenin_resistances(circ, sol.layout, sol.scale, g)
    assert fast.keys() == slow.keys()
    for name, value in slow.items():
        if np.isinf(value):
            assert np.isinf(fast[name]), name
        else:
            assert fast[name] == pytest.approx(value, rel=1e-10), name


@pytest.mark.parametrize("seed", range(6))
def test_thevenin_of_random_rc_networks_matches_the_nodal_two_port_formula(seed):
    """R_th across a capacitor (a, b) = (e_a - e_b)^T Y^-1 (e_a - e_b), Y the nodal admittance
    matrix of the resistors with the source node grounded (textbook: the driving-point
    resistance of a resistive network), built here with numpy."""
    rng = np.random.default_rng(200 + seed)
    n = int(rng.integers(3, 50))
    circ = _random_rlc(rng, n, with_vcvs=False)
    circ = circuit(*[p for p in circ.parts if p.kind != "inductor"])
    index = {f"n{k}": k for k in range(n)}
    y = np.zeros((n, n))
    for p in circ.parts:
        if p.kind != "resistor":
            continue
        for u, w in ((p.p, p.n), (p.n, p.p)):
            if u in index:
                y[index[u], index[u]] += 1.0 / p.value
                if w in index:
                    y[index[u], index[w]] -= 1.0 / p.value
    sol = closedform.solve(circ)
    rth = sol.thevenin(0)
    for p in circ.parts:
        if p.kind != "capacitor":
            continue
        e = np.zeros(n)
        e[index[p.p]] += 1.0
        if p.n in index:
            e[index[p.n]] -= 1.0
        assert rth[p.name] == pytest.approx(float(e @ np.linalg.solve(y, e)), rel=1e-9)


def test_inductor_whose_opening_isolates_a_node_reads_infinite():
    """L1 is node b's only link to the resistors (C2 is open in the Thevenin network):
    opening L1 leaves b with no resistive path, so R_th(L1) = inf (definition; the per-part
    route), while C2 sees R1 || R2 through L1 shorted (textbook)."""
    circ = circuit(V("V1", "in", "gnd", 0.0, ((0.0, 1.0),)), R("R1", "in", "a", 100.0),
                   R("R2", "a", "gnd", 300.0), L("L1", "a", "b", 1e-3),
                   C("C2", "b", "gnd", 1e-9))
    rth = closedform.solve(circ).thevenin(0)
    assert rth["L1"] == float("inf")
    assert rth["C2"] == pytest.approx(100 * 300 / 400, rel=1e-12)



def _fresh_per_part(layout, g, parts, vrows, rhs) -> dict[str, float]:
    """The per-part route as it was before it shared one solver: a fresh least-squares solve
    (its own equilibration, pattern and factors) and an SVD null-space test for every part."""
    out = {}
    for k, part in enumerate(parts):
        gk = g
        if part.kind == "inductor":
            gk = g.copy()
            j = layout.branch(part.name)
            gk[j, :] = 0.0
            gk[j, j] = 1.0
        null = thevenin._null_space(gk)
        x, _, consistent = linalg.least_squares(gk, rhs[:, k])
        if not consistent or (null.shape[0] and np.max(np.abs(null @ vrows[:, k]))
                              > thevenin.NULL_COUPLING):
            out[part.name] = float("inf")
        else:
            out[part.name] = float(vrows[:, k] @ x)
    return out


@pytest.mark.parametrize("seed", range(6))
def test_per_part_thevenin_sharing_one_solver_equals_fresh_solves(seed):
    """The per-part route shares one least-squares solver (and one null-space test) among the
    capacitors and skips the SVD where the solver's LU condition estimate rules out a null
    space: the same R_th, bit for bit, as a fresh solve and SVD per part, inf included."""
    circ = _random_rlc(np.random.default_rng(300 + seed), 20 + 7 * seed, seed % 2 == 1)
    sol = closedform.solve(circ)
    args = (sol.layout, sol.intervals[0].g, thevenin._storage(circ))
    args += thevenin._injections(sol.layout, sol.scale, args[2])
    assert thevenin._per_part(*args) == _fresh_per_part(*args)


def test_per_part_thevenin_of_a_ladder_is_the_series_resistance():
    """On an RC ladder driven by a source, capacitor k sees the k series resistors back to the
    source (textbook: the other capacitors open, resistors in series add); 60 sections put
    G~ past the size at which the shared solver's LU gate decides the null-space test."""
    sections = 60
    circ = circuit(V("V1", "in", "gnd", 0.0, ((0.0, 1.0),)), *_ladder(sections))
    sol = closedform.solve(circ)
    parts = thevenin._storage(circ)
    vrows, rhs = thevenin._injections(sol.layout, sol.scale, parts)
    rth = thevenin._per_part(sol.layout, sol.intervals[0].g, parts, vrows, rhs)
    for k in range(sections):
        assert rth[f"Cl{k}"] == pytest.approx(1e3 * (k + 1), rel=1e-10)


def test_provably_regular_gate_refuses_a_singular_matrix():
    """An inductor that is a node's only resistive link, opened (its row i = 0), leaves that
    node free: the gate must not skip the null-space test, and R_th reads inf (definition)."""
    circ = circuit(V("V1", "in", "gnd", 0.0, ((0.0, 1.0),)), R("R1", "in", "a", 100.0),
                   L("L1", "a", "b", 1e-3), C("C2", "b", "gnd", 1e-9), *_ladder(40))
    sol = closedform.solve(circ)
    parts = [circ.part("L1")]
    vrows, rhs = thevenin._injections(sol.layout, sol.scale, parts)
    g = sol.intervals[0].g.copy()
    j = sol.layout.branch("L1")
    g[j, :], g[j, j] = 0.0, 1.0
    assert not thevenin._provably_regular(linalg.LeastSquares(g), g.shape[0])
    assert thevenin._per_part(sol.layout, sol.intervals[0].g, parts, vrows, rhs) == \
        {"L1": float("inf")}


# ------------------------------------------------------------------------ node voltages
def _node_voltages_one_by_one(sol) -> list[float]:
    """Every node's before, after and final at every event from ``features`` of its probe,
    one node at a time (the route ``node_voltages`` shortcuts)."""
    from harness.model import NODE, Probe
    circ, out = sol.circuit, []
    for node in (n for n in circ.nodes if n != circ.ground):
        for k in range(len(circ.events)):
            f = sol.features(Probe(NODE, (node,)), k)
            out += [v for v in (f.before, f.after, f.final) if v is not None]
    return sorted(out)


def _flat(instants) -> list[float]:
    """``node_voltages``' instants as one sorted list of values."""
    return sorted(v for values in instants for v in values)


@pytest.mark.parametrize("seed", range(6))
def test_all_node_voltages_at_once_equal_the_per_node_features(seed):
    """``node_voltages`` (every node per interval at once) gives the same floats as the
    features of each node's probe, on random RLC networks with switches between events."""
    rng = np.random.default_rng(400 + seed)
    circ = _random_rlc(rng, int(rng.integers(3, 30)), with_vcvs=seed % 2 == 1)
    parts = circ.parts + (S("S1", "n0", "gnd", False, ((1e-3, 1.0), (2e-3, 0.0)), on=10.0),)
    circ = circuit(*parts)
    sol = closedform.solve(circ)
    assert _flat(sol.node_voltages()) == _node_voltages_one_by_one(sol)


def test_node_voltages_of_a_growing_response_fall_back_per_node():
    """A current source charging a capacitor with no DC path grows without bound (its final
    value is None, textbook: v = I t / C): the shortcut does not apply and the per-node
    values stand, with no final for the growing nodes."""
    circ = circuit(I("I1", "gnd", "a", 0.0, ((0.0, 1e-3),)), C("C1", "a", "gnd", 1e-6, initial=0.0),
                   V("V1", "in", "gnd", 1.0), R("R1", "in", "b", 1e3), C("C2", "b", "gnd", 1e-6))
    sol = closedform.solve(circ)
    assert sol.intervals[0].augmented
    assert _flat(sol.node_voltages()) == _node_voltages_one_by_one(sol)


# ------------------------------------------------------------------------ vectorised helpers
def _ruiz(p: np.ndarray, sweeps: int = 8):
    """Ruiz's equilibration as the paper states it (D. Ruiz, RAL-TR-2001-034), dense, with the
    engine's rounding of the scalings to powers of 2: the reference for the sparse sweep."""
    a = np.abs(p)
    dr, dc = np.ones(a.shape[0]), np.ones(a.shape[1])
    for _ in range(sweeps):
        s = dr[:, None] * a * dc[None, :]
        r, c = s.max(axis=1), s.max(axis=0)
        r[r == 0], c[c == 0] = 1.0, 1.0
        dr, dc = dr / np.sqrt(r), dc / np.sqrt(c)
    return np.exp2(np.round(np.log2(dr))), np.exp2(np.round(np.log2(dc)))


@pytest.mark.parametrize("seed", range(4))
def test_sparse_equilibration_and_residual_match_the_dense_definitions(seed):
    """A sparse matrix past linalg.SPARSE_MIN_ENTRIES (a random ladder-like band with values
    over 12 decades and an empty row) is swept on its non-zeros: the scalings equal the dense
    reference, and the extended-precision residual equals b - a y in np.longdouble."""
    rng = np.random.default_rng(300 + seed)
    n = 150
    a = np.zeros((n, n))
    for k in range(n):
        for j in (k - 1, k, k + 1, int(rng.integers(0, n))):
            if 0 <= j < n:
                a[k, j] = rng.choice([-1, 1]) * 10 ** rng.uniform(-6, 6)
    a[7] = 0.0
    assert linalg._pattern(a) is not None                 # the sparse path is taken
    dr, dc = linalg.equilibrate(a)
    ref_r, ref_c = _ruiz(a)
    np.testing.assert_array_equal(dr, ref_r)
    np.testing.assert_array_equal(dc, ref_c)
    b, y = rng.standard_normal(n), rng.standard_normal(n)
    wide = np.longdouble
    ref = (b.astype(wide) - a.astype(wide) @ y.astype(wide)).astype(float)
    np.testing.assert_allclose(linalg._wide_residual(a, b)(y), ref, rtol=1e-15,
                               atol=1e-18 * np.abs(ref).max())


def _components_by_search(circ, connects):
    """Node groups off ground by breadth-first search over the connecting parts (textbook
    graph search, written here): the reference for mna.floating_groups."""
    from collections import deque
    adj = {n: set() for n in circ.nodes}
    for p in circ.parts:
        if connects(p):
            adj[p.p].add(p.n)
            adj[p.n].add(p.p)
    seen, queue = {circ.ground}, deque([circ.ground])
    while queue:
        for m in adj[queue.popleft()] - seen:
            seen.add(m)
            queue.append(m)
    groups, done = [], set(seen)
    for node in circ.nodes:
        if node in done:
            continue
        group, queue = [], deque([node])
        done.add(node)
        while queue:
            u = queue.popleft()
            group.append(u)
            for m in adj[u] - done:
                done.add(m)
                queue.append(m)
        groups.append(sorted(group, key=circ.nodes.index))
    return sorted(groups, key=lambda g: circ.nodes.index(g[0]))


@pytest.mark.parametrize("seed", range(6))
def test_floating_groups_match_a_graph_search_on_both_paths(seed):
    """Random circuits below and above mna.GRAPH_MIN_PARTS (union-find and csgraph paths),
    with a random half of the parts not connecting: the same groups as a breadth-first search,
    in node order."""
    from harness.closedform import mna
    rng = np.random.default_rng(400 + seed)
    nodes = int(rng.integers(4, 12)) if seed % 2 == 0 else int(rng.integers(40, 90))
    names = [f"n{k}" for k in range(nodes)] + ["gnd"]
    parts = [R(f"R{k}", *rng.choice(names, 2, replace=False), 1.0)
             for k in range(int(1.3 * nodes))]
    circ = circuit(*parts)
    assert (len(circ.parts) >= mna.GRAPH_MIN_PARTS) == (seed % 2 == 1)
    off = {p.name for p in circ.parts if rng.random() < 0.5}
    connects = (lambda p: p.name not in off)
    got = mna.floating_groups(circ, connects)
    assert got == _components_by_search(circ, connects)
    assert mna.floating_groups(circ, connects) == got     # the memoised answer is the same


@pytest.mark.parametrize("seed", range(6))
def test_separated_rates_give_the_clusters_of_the_general_grouping(seed, monkeypatch):
    """modes.diagonal_clusters' fast path for well-separated rates gives the clusters the
    general route gives for diag(rates) (modes.clusters_of with ordered Schur splits): same
    rates in the same order, same zero flags, and each unit selection picks the coordinate the
    general route's right vector lives on."""
    from harness.closedform import modes
    rng = np.random.default_rng(500 + seed)
    f = int(rng.integers(2, 30))
    rates = -np.exp(np.sort(rng.uniform(-8, 8, f)))
    rates = rates[np.r_[True, np.abs(np.diff(rates)) > 1e-3 * np.abs(rates[1:])]]
    if seed % 2:
        rates = np.concatenate([rates, [0.0, 0.0]])
    rng.shuffle(rates)
    fast = modes._separated(rates.astype(complex), 1e-10)
    assert fast is not None
    monkeypatch.setattr(modes, "EIG_MIN_ORDER", 10 ** 9)  # force the Schur splits
    slow = modes.clusters_of(np.diag(rates), 1e-10)
    assert len(fast) == len(slow)
    for a, b in zip(fast, slow):
        assert a.zero == b.zero and a.size == b.size
        assert complex(a.rate) == pytest.approx(complex(b.rate), rel=1e-12, abs=1e-300)
        picked = sorted(int(i) for i in np.flatnonzero(np.abs(b.right).max(axis=1) > 0.5))
        assert sorted(a.index) == picked


# ------------------------------------------------------------------------ small dense fast paths
def _wide_range(rng: np.random.Generator, m: int, n: int) -> np.ndarray:
    """A dense m x n matrix with entries 18 decades apart, one zero row and one zero column."""
    a = rng.standard_normal((m, n)) * 10.0 ** rng.uniform(-9, 9, (m, n))
    a[rng.integers(m)] = 0.0
    a[:, rng.integers(n)] = 0.0
    return a


@pytest.mark.parametrize("shape", [(1, 1), (3, 3), (6, 6), (9, 5), (5, 9), (12, 12)])
def test_dense_equilibration_equals_checked_sweeps(shape):
    """The dense Ruiz sweeps without per-sweep zero and fixed-point tests give the floats of
    the sweeps that test both (the slow path, reference), and the rounded scalings bring every
    non-zero row and column maximum of |dr a dc| within a factor 4 of 1 (Ruiz's iteration
    converges to maxima of 1; rounding to powers of 2 moves each scaling by at most sqrt 2)."""
    rng = np.random.default_rng(sum(shape))
    for _ in range(20):
        a = _wide_range(rng, *shape)
        fast = linalg._sweep_dense(np.abs(a), 8)
        slow = linalg._sweep_checked(np.abs(a), 8)
        assert np.array_equal(fast[0], slow[0]) and np.array_equal(fast[1], slow[1])
        dr, dc = linalg.equilibrate(a)
        scaled = np.abs(dr[:, None] * a * dc)
        for axis in (0, 1):
            big = scaled.max(axis=axis)
            big = big[big > 0]
            assert np.all((big > 0.25) & (big < 4.0))


def test_equilibration_of_non_finite_matrix_takes_checked_sweeps():
    """A matrix with an infinite entry gives the checked sweeps' result (reference)."""
    a = np.array([[1.0, np.inf], [2.0, 3.0]])
    with np.errstate(invalid="ignore"):
        got = linalg.equilibrate(a)
        dr, dc = linalg._sweep_checked(np.abs(a), 8)
        ref = np.exp2(np.round(np.log2(dr))), np.exp2(np.round(np.log2(dc)))
    np.testing.assert_array_equal(got[0], ref[0])
    np.testing.assert_array_equal(got[1], ref[1])


@pytest.mark.parametrize("shape", [(4, 4), (7, 7), (9, 5), (5, 9)])
def test_direct_gelsd_equals_scipy_lstsq(shape):
    """The direct dgelsd call gives scipy.linalg.lstsq's x (reference) bit for bit, also for a
    rank-deficient a, and a non-finite b raises as lstsq does."""
    import scipy.linalg as sla
    rng = np.random.default_rng(shape[0] * 10 + shape[1])
    a = rng.standard_normal(shape)
    a[:, -1] = a[:, 0] + a[:, 1]                       # rank deficient
    solve = linalg._svd_solver(a)
    for _ in range(5):
        b = rng.standard_normal(shape[0])
        assert np.array_equal(solve(b), sla.lstsq(a, b)[0])
    with pytest.raises(ValueError):
        solve(np.full(shape[0], np.nan))


@pytest.mark.parametrize("singular", [False, True])
def test_kept_least_squares_equals_fresh_solves(singular):
    """One ``LeastSquares`` reused for several b gives ``least_squares(a, b)`` of each (the
    slow path) bit for bit, and x agrees with numpy.linalg.lstsq's minimum-norm solution
    (reference) to rounding; a b outside the range of a singular a is reported inconsistent."""
    rng = np.random.default_rng(7 + singular)
    n = 6
    a = rng.standard_normal((n, n)) * 10.0 ** rng.uniform(-1, 1, n)   # numpy keeps its digits
    if singular:
        a[:, 0] = 0.0
        a[0] = 0.0                                  # a floating node: a zero row and column
    kept = linalg.LeastSquares(a)
    for _ in range(4):
        b = a @ rng.standard_normal(n)              # in the range of a: consistent
        x, r, consistent = kept.solve(b)
        x_ref, r_ref, c_ref = linalg.least_squares(a, b)
        assert np.array_equal(x, x_ref) and np.array_equal(r, r_ref) and consistent == c_ref
        assert consistent
        ref = np.linalg.lstsq(a, b, rcond=None)[0]
        np.testing.assert_allclose(x, ref, rtol=1e-9, atol=1e-12 * np.abs(ref).max())
    if singular:
        b = np.zeros(n)
        b[0] = 1.0                                  # charge into the floating node
        assert not kept.solve(b)[2]


# ------------------------------------------------------------------------ issue 6: solve at n = 100-300
def _driven_ladder(sections: int, before: float = 2.0, initial=None, switch: bool = False):
    """An RC ladder from a source at ``before`` volts before 0 (1 V after); optionally an
    initial voltage on the first capacitor, or a switch to ground that closes at 0."""
    parts = [V("V1", "in", "gnd", before, steps=((0.0, 1.0),)), *_ladder(sections)]
    if initial is not None:
        parts[2] = C("Cl0", "l0", "gnd", 1e-9, initial=initial)
    if switch:
        from tests.closedform_circuits import S
        parts.append(S("S1", f"l{sections // 2}", "gnd", False, steps=((0.0, 1.0),), on=50.0))
    return circuit(*parts)


def _prestep_pencil(circ):
    """(layout, scale, G~ solve, b~, pinned) of the pre-step configuration, as solve builds it."""
    from harness.closedform import mna, solution, stamps
    layout, scale = stamps.layout_of(circ), mna.scale_of(circ)
    closed, values, groups = solution._interval_setup(circ, layout, scale, 0.0, True)
    g, c, _ = stamps.stamp(circ, layout, closed, lambda p: 0.0)
    mna.pin(g, layout, groups, 1.0 / scale.r0)
    gs, _, _ = mna.scaled(g, c, np.zeros(layout.size), layout, scale)
    b = solution._b_scaled(circ, layout, scale, closed, values)
    return layout, scale, linalg.LeastSquares(gs), b, bool(groups)


@pytest.mark.parametrize("sections", [5, 40])
def test_dc_state_reusing_the_prestep_solve_equals_the_separate_dc_solve(sections):
    """Without initial values and floating groups the DC system is the pre-step pencil's G~:
    the reused solve gives the separate DC solve's state float for float, and that state is
    the textbook DC value (capacitors open, so no resistor current: every node at the
    source's 2 V before the step, every branch current 0)."""
    circ = _driven_ladder(sections)
    layout, scale, solver, b, pinned = _prestep_pencil(circ)
    assert not pinned
    fresh = initial.dc_state(circ, layout, scale)
    reused = initial.dc_state(circ, layout, scale, reuse=(solver, b))
    np.testing.assert_array_equal(reused, fresh)
    np.testing.assert_allclose(reused[:layout.n_nodes], 2.0, rtol=1e-13)
    np.testing.assert_allclose(reused[layout.n_nodes:], 0.0, atol=1e-13)


@pytest.mark.parametrize("sections", [5, 40])
def test_dc_state_with_an_initial_value_ignores_the_offered_solve(sections):
    """An initial value adds a held-voltage row, so the DC system is not G~: the offered solve
    must be ignored (same state as without it), and the held capacitor sits at its 0.5 V
    (textbook: it acts as a 0.5 V source at 0-; the source side stays at 2 V)."""
    circ = _driven_ladder(sections, initial=0.5)
    layout, scale, solver, b, _ = _prestep_pencil(circ)
    fresh = initial.dc_state(circ, layout, scale)
    reused = initial.dc_state(circ, layout, scale, reuse=(solver, b))
    np.testing.assert_array_equal(reused, fresh)
    assert reused[layout.node("l0")] == pytest.approx(0.5, rel=1e-12)
    assert reused[layout.node("in")] == pytest.approx(2.0, rel=1e-12)


def test_solve_with_a_switch_at_zero_keeps_both_pencils_and_the_textbook_state():
    """A switch closing at 0 makes the pre-step and interval-0 pencils differ; the state at
    0- must still be the DC value (every node at 2 V: the open switch carries nothing) and the
    final value after 0 the divider value of the closed switch (textbook: R_on = 50 ohm from
    the middle node to ground through the sections before it, 1 V source)."""
    sections = 40
    circ = _driven_ladder(sections, switch=True)
    sol = closedform.solve(circ)
    mid = f"l{sections // 2}"
    x0 = sol.prestep.x_plus
    assert x0[sol.layout.node(mid)] == pytest.approx(2.0, rel=1e-12)
    from tests.closedform_circuits import node
    upstream = 1e3 * (sections // 2 + 1)               # R from "in" to the middle node
    final = sol.features(node(mid), 0).final
    assert final == pytest.approx(50.0 / (50.0 + upstream), rel=1e-9)


@pytest.mark.parametrize("ill", [False, True])
def test_kept_factor_decides_regularity_as_a_fresh_gate_does(ill):
    """LeastSquares.regular (from the factor its solves use) answers what a fresh
    regular_factor on the equilibrated matrix answers at the DC gate's bound, for a well and
    an ill conditioned (singular values over 14 decades, textbook SVD construction) matrix."""
    rng = np.random.default_rng(77)
    n = 60
    u, _ = np.linalg.qr(rng.standard_normal((n, n)))
    v, _ = np.linalg.qr(rng.standard_normal((n, n)))
    sv = np.logspace(0, -14 if ill else -3, n)
    a = (u * sv) @ v.T
    solver = linalg.LeastSquares(a)
    bound = initial._GATE_RCOND * n
    known = solver.regular(bound, initial._GATE_MIN_SIZE)
    gate = linalg.regular_factor(solver.scaled()[2], bound, min_size=initial._GATE_MIN_SIZE)
    assert known in (None, gate is not None)
    if known is None:                                  # not decided: the factor was refused
        assert solver.factor is None and gate is None
    assert (known is True) == (not ill)


def test_least_squares_memo_returns_copies_of_the_same_answer():
    """The kept last answer: a repeated b gives the same floats as the first solve, and the
    arrays handed out are copies (changing one does not change the next answer)."""
    rng = np.random.default_rng(5)
    a = rng.standard_normal((40, 40)) + 40 * np.eye(40)
    b = rng.standard_normal(40)
    solver = linalg.LeastSquares(a)
    x1, r1, ok1 = solver.solve(b)
    keep = x1.copy()
    x1[:] = 0.0
    x2, r2, ok2 = solver.solve(b.copy())
    np.testing.assert_array_equal(x2, keep)
    assert ok1 and ok2
    np.testing.assert_allclose(a @ x2, b, rtol=1e-12)   # the definition of the solution


def _block_null(rng, n: int):
    """A null basis with disjoint supports: unit columns, a -1 column and normalised
    multi-row vectors, in random order (the shape mna.capacitor_null_basis produces)."""
    rows = rng.permutation(n)
    cols, at = [], 0
    for kind in rng.choice(["unit", "minus", "block"], 8):
        size = 1 if kind != "block" else int(rng.integers(2, 5))
        col = np.zeros(n)
        sup = rows[at:at + size]
        at += size
        col[sup] = 1.0 if kind == "unit" else (-1.0 if kind == "minus" else rng.uniform(0.5, 2, size))
        cols.append(col / np.linalg.norm(col))
    return np.column_stack(cols)


@pytest.mark.parametrize("seed", range(4))
def test_block_bases_products_equal_the_dense_products(seed):
    """symmetric._Blocks applies R and N0 as row picks and per-support blocks: every product
    equals the dense product of the explicit matrix (numpy matmul), R is orthonormal and
    orthogonal to N0 (R^T R = I, N0^T R = 0: the definition of the complement)."""
    from harness.closedform import symmetric
    rng = np.random.default_rng(900 + seed)
    n = 40
    null = _block_null(rng, n)
    n0, r = symmetric._bases(null, n)
    assert isinstance(r, symmetric._Blocks)
    eye = np.eye(n)
    r_dense, n0_dense = r.T @ eye, n0.T @ eye          # rows of R^T and N0^T
    np.testing.assert_allclose(r_dense @ r_dense.T, np.eye(r.shape[1]), atol=1e-14)
    np.testing.assert_allclose(n0_dense @ r_dense.T, 0.0, atol=1e-14)
    assert np.linalg.matrix_rank(np.column_stack([n0_dense.T, null])) == null.shape[1]
    m = rng.standard_normal((n, 7))
    np.testing.assert_allclose(r.T @ m, r_dense @ m, rtol=1e-14, atol=1e-14)
    w = rng.standard_normal((r.shape[1], 3))
    np.testing.assert_allclose(r @ w, r_dense.T @ w, rtol=1e-14, atol=1e-14)
    z = rng.standard_normal((n0.shape[1], 2))
    np.testing.assert_allclose(n0 @ z, n0_dense.T @ z, rtol=1e-14, atol=1e-14)
    p = rng.standard_normal((5, n))
    np.testing.assert_allclose(r.right(p), p @ r_dense.T, rtol=1e-14, atol=1e-14)
    np.testing.assert_allclose(n0.right(p), p @ n0_dense.T, rtol=1e-14, atol=1e-14)


@pytest.mark.parametrize("seed", range(3))
def test_block_reduction_equals_the_dense_product_reduction(seed):
    """symmetric._reduced with ``_Blocks`` bases gives the (S, C11, H, R^T C~) of the same
    reduction written with the explicit dense R and N0 (numpy products: the general branch),
    on a random symmetric pencil with a positive definite C11 (the Schur complement
    S = G11 - G12 G22^-1 G21, textbook block elimination)."""
    from harness.closedform import symmetric
    rng = np.random.default_rng(950 + seed)
    n = 36
    null = _block_null(rng, n)
    n0, r = symmetric._bases(null, n)
    eye = np.eye(n)
    r_dense, n0_dense = (r.T @ eye).T, (n0.T @ eye).T
    a = rng.standard_normal((n, n))
    g = a + a.T + 2 * n * np.eye(n)
    k = r_dense @ rng.standard_normal((r.shape[1], r.shape[1]))
    c = k @ k.T                                         # null space = span(N0)
    c = 0.5 * (c + c.T)
    fast = symmetric._reduced(g, c, n0, r)
    slow = symmetric._reduced(g, c, n0_dense, r_dense)
    for x, y in zip(fast, slow):
        np.testing.assert_allclose(x, y, rtol=1e-12, atol=1e-12 * np.abs(y).max())


@pytest.mark.parametrize("null_rows", [[4, 17, 22], [0, 29], [0, 1, 2]])
def test_selected_blocks_equal_the_selection_products(null_rows):
    """With unit-column bases the reduction picks submatrices (slices where the rows are
    consecutive): the same floats as the products with explicit 0/1 selection matrices
    (numpy matmul, exact for 0/1 entries)."""
    from harness.closedform import symmetric
    rng = np.random.default_rng(3)
    n = 30
    m = rng.standard_normal((n, n))
    g, c = m + m.T, (m @ m.T)
    c = 0.5 * (c + c.T)
    null_rows = np.array(null_rows)
    rows = np.setdiff1d(np.arange(n), null_rows)
    rsel, nsel = np.eye(n)[:, rows], np.eye(n)[:, null_rows]
    rtc, c11, g11, g21, g22 = symmetric._selected_blocks(g, c, null_rows, rows)
    np.testing.assert_array_equal(rtc, rsel.T @ c)
    np.testing.assert_array_equal(c11, rsel.T @ c @ rsel)
    np.testing.assert_array_equal(g11, rsel.T @ g @ rsel)
    np.testing.assert_array_equal(g21, nsel.T @ g @ rsel)
    np.testing.assert_array_equal(g22, nsel.T @ g @ nsel)


def test_symmetric_fast_path_returns_the_average():
    """_symmetric: an exactly symmetric matrix comes back as (m + m^T)/2 (itself), a nearly
    symmetric one as that average, an asymmetric one is refused (numpy reference)."""
    from harness.closedform import symmetric
    rng = np.random.default_rng(8)
    m = rng.standard_normal((20, 20))
    sym = m + m.T
    np.testing.assert_array_equal(symmetric._symmetric(sym), 0.5 * (sym + sym.T))
    near = sym.copy()
    near[2, 5] *= 1 + 1e-15
    np.testing.assert_array_equal(symmetric._symmetric(near), 0.5 * (near + near.T))
    assert symmetric._symmetric(m) is None


def test_single_mode_clusters_equal_the_dataclass_constructor():
    """modes._single builds the same frozen Cluster as its constructor (field by field)."""
    from dataclasses import FrozenInstanceError, fields
    from harness.closedform import modes
    block = np.array([[-2.5 + 0j]])
    fast = modes._single(-2.5 + 0j, block, 7)
    slow = modes.Cluster(-2.5 + 0j, block, None, None, False, (7,))
    for f in fields(modes.Cluster):
        a, b = getattr(fast, f.name), getattr(slow, f.name)
        assert (np.array_equal(a, b) if isinstance(a, np.ndarray) else a == b), f.name
    with pytest.raises(FrozenInstanceError):
        fast.rate = 0j


@pytest.mark.parametrize("seed", range(4))
def test_interval_groups_match_a_graph_search(seed):
    """mna.interval_groups (the mask from arrays) gives the groups of a breadth-first search
    over the parts that connect in the interval (all but current sources, open ideal
    switches), for random switch states, below and above GRAPH_MIN_PARTS."""
    from harness.closedform import mna
    from tests.closedform_circuits import I, S
    rng = np.random.default_rng(600 + seed)
    nodes = int(rng.integers(4, 10)) if seed % 2 == 0 else int(rng.integers(40, 70))
    names = [f"n{k}" for k in range(nodes)] + ["gnd"]
    parts = []
    for k in range(int(1.4 * nodes)):
        a, b = rng.choice(names, 2, replace=False)
        kind = rng.choice(["R", "S", "Sr", "I"])
        if kind == "R":
            parts.append(R(f"R{k}", a, b, 1.0))
        elif kind == "I":
            parts.append(I(f"I{k}", a, b, 1.0))
        else:
            parts.append(S(f"S{k}", a, b, False, off=1e6 if kind == "Sr" else None))
    circ = circuit(*parts)
    closed = {p.name: bool(rng.random() < 0.5) for p in circ.parts if p.kind == "switch"}
    connects = mna.connects_in_interval(closed)
    assert mna.interval_groups(circ, closed) == _components_by_search(circ, connects)


def test_jump_sums_equal_the_per_part_textbook_values():
    """jumps.stored_energy and _charges (array expressions) against the per-part textbook
    values written here: C v^2 / 2 and L i^2 / 2; C dv for a capacitor, the branch variable
    for a source, inductor or switch, phi / R for a resistor, g (phi_cp - phi_cn) for a vccs."""
    from harness.closedform import jumps, stamps
    from tests.closedform_circuits import G, S
    circ = circuit(V("V1", "in", "gnd", 1.0), R("R1", "in", "a", 10.0),
                   C("C1", "a", "gnd", 1e-6), L("L1", "a", "b", 1e-3),
                   S("S1", "b", "gnd", True), G("G1", "a", "gnd", 0.1, "in", "b"),
                   C("C2", "in", "b", 2e-6))
    layout = stamps.layout_of(circ)
    rng = np.random.default_rng(1)
    x, q, dx = (rng.standard_normal(layout.size) for _ in range(3))

    def volt(vec, p, n):
        return (vec[layout.node(p)] if layout.node(p) is not None else 0.0) - \
               (vec[layout.node(n)] if layout.node(n) is not None else 0.0)

    energy = jumps.stored_energy(circ, layout, x)
    assert list(energy) == ["C1", "L1", "C2"]
    assert energy["C1"] == pytest.approx(0.5 * 1e-6 * volt(x, "a", "gnd") ** 2, rel=1e-15)
    assert energy["C2"] == pytest.approx(0.5 * 2e-6 * volt(x, "in", "b") ** 2, rel=1e-15)
    assert energy["L1"] == pytest.approx(0.5 * 1e-3 * x[layout.branch("L1")] ** 2, rel=1e-15)
    charges = jumps._charges(circ, layout, q, dx)
    assert list(charges) == [p.name for p in circ.parts]
    assert charges["C1"] == pytest.approx(1e-6 * volt(dx, "a", "gnd"), rel=1e-15)
    assert charges["R1"] == pytest.approx(volt(q, "in", "a") / 10.0, rel=1e-15)
    for name in ("V1", "L1", "S1"):
        assert charges[name] == q[layout.branch(name)]
    assert charges["G1"] == pytest.approx(0.1 * volt(q, "in", "b"), rel=1e-14)


# ------------------------------------------------------------------------ large circuits
@pytest.fixture(scope="module")
def large_solutions():
    """A 600-section RC ladder and a 700-node random RC network (past the sparse thresholds)."""
    from tests.benchmarks.circuits import random_rc, rc_ladder
    return [closedform.solve(c) for c in (rc_ladder(600), random_rc(700, seed=1))]


def test_sparse_condition_number_equals_the_dense_svd(large_solutions):
    """Lanczos on the sparse LU gives numpy's SVD condition number of the same equilibrated
    pencil (numpy.linalg.cond as the reference) to well within the one digit reported."""
    from harness.closedform import conditioning
    for sol in large_solutions:
        resp = sol.intervals[0]
        p = resp.g + resp.dec.s0 * resp.c
        dr, dc = linalg.equilibrate(np.abs(resp.g) + abs(resp.dec.s0) * np.abs(resp.c))
        ref = np.linalg.cond(dr[:, None] * p * dc[None, :])
        got = conditioning.pencil_condition(resp.g, resp.c, resp.dec.s0)
        assert got == pytest.approx(ref, rel=1e-9)


def test_sparse_reach_solve_equals_the_dense_solve(large_solutions):
    """The reach test's sparse transposed solve gives scipy's dense solve's z (reference)."""
    from scipy.linalg import solve
    from harness.closedform import reach
    for sol in large_solutions:
        resp, n = sol.intervals[0], sol.layout.size
        p = resp.g[:n, :n] + reach.POINTS[0] * resp.c[:n, :n]
        rhs = np.random.default_rng(n).standard_normal(n) + 0j
        ref = solve(p.T, rhs)
        got = reach._transposed_solve(resp.g[:n, :n], resp.c[:n, :n], reach.POINTS[0], rhs)
        np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-12 * np.abs(ref).max())


def test_vectorised_exponential_sums_and_outputs_equal_the_term_loops(large_solutions,
                                                                      monkeypatch):
    """Many-term exponential sums (value, slope) and a probe's waveform projected onto the
    modes equal the term-by-term sums and the full state product to rounding."""
    from harness.closedform import response, signoff
    for sol in large_solutions:
        probe = sol.circuit.expectations[0].probe
        ex = sol.exponential_sum(probe, 0)
        end, _ = sol._held(0)
        u = np.linspace(0.0, end, 700)
        fast = (ex.value(u), ex.slope(u), sol.waveform(probe, 0, u))
        monkeypatch.setattr(signoff, "VECTOR_TERMS", 10 ** 9)
        monkeypatch.setattr(response, "PROJECT_ORDER", 10 ** 9)
        slow = (ex.value(u), ex.slope(u), sol.waveform(probe, 0, u))
        monkeypatch.undo()
        for a, b in zip(fast, slow):
            np.testing.assert_allclose(a, b, rtol=1e-9, atol=1e-12 * np.abs(b).max())


def test_guarded_node_voltages_withhold_what_the_guarded_features_withhold():
    """Equations 1e-13 from singular (a vcvs at a gain of 1 + 1e-13): the guard's node voltages
    are the per-node guarded features' values (after and final withheld), not the raw ones."""
    from harness.circuitfile import parse_circuit
    from harness.closedform.conditioning import assess
    from harness.compare.trust import Guarded, guard
    from tests.test_reliability_illposed import NEAR_SINGULAR
    sol = closedform.solve(parse_circuit(NEAR_SINGULAR))
    guarded = guard(sol, assess(sol))
    assert isinstance(guarded, Guarded)
    assert _flat(guarded.node_voltages()) == _node_voltages_one_by_one(guarded)
    assert max(map(abs, _flat(guarded.node_voltages()))) < \
        max(map(abs, _flat(sol.node_voltages())))


def test_diagonal_cluster_rows_equal_the_per_cluster_copies(large_solutions, monkeypatch):
    """On the symmetric route a probe's features and every node's voltages, taken from one
    product over the modes without per-cluster copies of Q1, equal those of the per-cluster
    route (``resp.clusters``) to rounding, and the same modes stay visible."""
    from dataclasses import replace
    from harness.closedform import features
    for sol in large_solutions:
        assert sol.intervals[0].dec.diagonal and sol.intervals[0].dec.block is None
        probe = sol.circuit.expectations[0].probe
        fast = replace(sol, _probe_cache={}), sol.node_voltages()
        fast = (fast[0].features(probe, 0), fast[1])
        assert "clusters" not in sol.intervals[0].__dict__
        monkeypatch.setattr(features, "_unit_clusters", lambda resp: False)
        slow = replace(sol, _probe_cache={})
        slow = (slow.features(probe, 0), slow.node_voltages())
        monkeypatch.undo()
        assert fast[0].order == slow[0].order and fast[0].modes == pytest.approx(slow[0].modes)
        for a, b in ((fast[0].before, slow[0].before), (fast[0].after, slow[0].after),
                     (fast[0].final, slow[0].final)):
            assert a == pytest.approx(b, rel=1e-12, abs=1e-12)
        np.testing.assert_allclose(_flat(fast[1]), _flat(slow[1]), rtol=1e-12, atol=1e-12)


def test_large_pencils_kept_sparse_give_the_dense_answers(large_solutions):
    """A large interval keeps G~ and C~ sparse (``response.Kept``): their dense forms are the
    matrices, and the jump test on the kept matrices, the conditioning estimate spending its
    own copies and the impulse solve of a forced change give the dense routes' answers."""
    from harness.closedform import conditioning, jumps
    for sol in large_solutions:
        resp = sol.intervals[0]
        assert resp.kept_g.sparse is not None and resp.kept_c.sparse is not None
        g, c = resp.g, resp.c
        np.testing.assert_array_equal(resp.kept_c.sparse.toarray(), c)
        x_minus = sol._x_minus(0)
        for x_plus in (resp.x_plus, resp.x_plus + 0.1 * (np.abs(c).sum(axis=1) > 0)):
            kept = jumps.impulse_weights(resp.kept_g, resp.kept_c, x_minus, x_plus)
            dense = jumps.impulse_weights(g, c, x_minus, x_plus)
            if dense is None:                  # an inconsistent change: both refuse it
                assert kept is None
                continue
            np.testing.assert_allclose(kept, dense, rtol=1e-9,
                                       atol=1e-12 * max(np.abs(dense).max(), 1.0))
        s0 = resp.dec.s0
        assert conditioning.pencil_condition(resp.g, resp.c, s0, own=True) == \
            conditioning.pencil_condition(g, c, s0)
