"""Zone assignments: pivoted-QR labels, recursive bisection, the ``auto`` rule and comparison.

Truths come from networkx generators (planted partition and stochastic block
model carry their blocks); partitions are compared up to relabelling with
scikit-learn's ``adjusted_rand_score``; conductances with networkx's
``conductance``; minimum conductances by brute force over all node subsets;
normalized cuts by the k-way formula of Shi and Malik (2000), checked against
networkx's ``normalized_cut_size`` for two zones and a closed form for rings of
cliques; anchors are scikit-learn's ``SpectralClustering`` (precomputed
affinity, both ``assign_labels``).
"""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest
from scipy.sparse.csgraph import connected_components
from scipy.stats import ortho_group
from sklearn.metrics import adjusted_rand_score

from specgraph import (
    Network,
    ParameterError,
    find_zones,
    gallery,
    laplacian,
    smallest_eigenpairs,
)
from specgraph.zones import ZoneConstraints
from specgraph.zones._assign import (
    CONCENTRATION_QR,
    MESH_EIGENVALUE,
    bisection_labels,
    choose_assignment,
    kmeans_labels,
    qr_concentration,
    qr_labels,
    recursive_bisection,
)


def planted(q: int, size: int, seed: int) -> tuple[Network, list[int]]:
    """A planted partition far above the detectability limit, and its truth."""
    p_in, p_out = 0.35, 0.01
    graph = nx.planted_partition_graph(q, size, p_in, p_out, seed=seed)
    # Decelle et al., PRE 84, 066106 (2011): detectable iff |c_in - c_out| > q sqrt(c);
    # require twice that margin ("clear structure").
    n = q * size
    c = (p_in * n + (q - 1) * p_out * n) / q
    assert abs(p_in - p_out) * n > 2 * q * np.sqrt(c)
    return Network.from_networkx(graph, weight=None), [graph.nodes[v]["block"] for v in graph]


def eigenvectors(net: Network, k: int) -> tuple[np.ndarray, np.ndarray]:
    result = smallest_eigenpairs(laplacian(net), k + 1, method="dense")
    return result.values, result.vectors


def block_embedding(sizes: list[int], seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Rows along k orthogonal directions: random lengths and signs, rotated, shuffled."""
    rng = np.random.default_rng(seed)
    k = len(sizes)
    truth = np.repeat(np.arange(k), sizes)
    rows = np.zeros((truth.size, k))
    rows[np.arange(truth.size), truth] = rng.uniform(0.1, 2.0, truth.size)
    rows *= rng.choice([-1.0, 1.0], size=(truth.size, 1))
    order = rng.permutation(truth.size)
    rotation = ortho_group.rvs(k, random_state=seed) if k > 1 else np.eye(1)
    return rows[order] @ rotation, truth[order]


# --------------------------------------------------------------- QR labels
@pytest.mark.parametrize("sizes", [[30, 30], [10, 40, 25, 5, 60], [8] * 12], ids=len)
def test_qr_recovers_exact_blocks(sizes: list[int]) -> None:
    # Damle, Minden and Ying (Inf. Inference 2019): on an embedding whose rows lie
    # exactly along k orthogonal directions the QR assignment recovers the groups.
    vectors, truth = block_embedding(sizes, seed=len(sizes))
    labels = qr_labels(vectors, len(sizes))
    assert adjusted_rand_score(truth, labels) == 1.0
    assert qr_concentration(vectors, len(sizes)) == pytest.approx(1.0, abs=1e-12)


@pytest.mark.parametrize(("q", "size"), [(2, 50), (4, 40), (6, 30)])
def test_qr_recovers_planted_partition(q: int, size: int) -> None:
    net, truth = planted(q, size, seed=q)
    _, vectors = eigenvectors(net, q)
    labels = qr_labels(vectors, q)
    assert adjusted_rand_score(truth, labels) == 1.0  # scikit-learn as the reference
    # The randomized variant of the same paper pivots among sampled rows only.
    sampled = qr_labels(vectors, q, sample=True, rng=1)
    assert adjusted_rand_score(truth, sampled) == 1.0


def test_qr_is_deterministic_and_ignores_a_rotation_of_the_subspace() -> None:
    # The method depends on the subspace only (algebra: V Q has the same pivoted
    # column norms as V for orthogonal Q, and the polar factor absorbs Q).
    net, _ = planted(5, 30, seed=3)
    _, vectors = eigenvectors(net, 5)
    first = qr_labels(vectors, 5)
    assert np.array_equal(first, qr_labels(vectors.copy(), 5))
    rotated = vectors[:, :5] @ ortho_group.rvs(5, random_state=0)
    assert adjusted_rand_score(first, qr_labels(rotated, 5)) == 1.0


def test_qr_concentration_of_rows_spread_round_a_circle() -> None:
    # Rows at evenly spaced angles: mean of max(cos^2, sin^2) over a full turn is
    # 1/2 + 1/pi in closed form (E|cos 2t| = 2/pi), whatever rotation QR picks.
    angles = 2 * np.pi * np.arange(20_000) / 20_000
    rows = np.column_stack([np.cos(angles), np.sin(angles)])
    assert qr_concentration(rows, 2) == pytest.approx(0.5 + 1 / np.pi, abs=1e-3)


@pytest.mark.parametrize(
    ("vectors", "k", "name"),
    [
        (np.ones((5, 2)), 3, "k"),
        (np.ones((2, 4)), 3, "k"),
        (np.ones(5), 1, "vectors"),
        (np.full((4, 2), np.nan), 2, "vectors"),
    ],
    ids=["k-above-columns", "k-above-rows", "1d", "nan"],
)
def test_qr_rejects_bad_input_by_name(vectors: np.ndarray, k: int, name: str) -> None:
    with pytest.raises(ParameterError, match=name):
        qr_labels(vectors, k)


# ------------------------------------------------------------- bisection
@pytest.mark.parametrize(("q", "size"), [(2, 50), (4, 40)])
def test_bisection_recovers_planted_partition(q: int, size: int) -> None:
    net, truth = planted(q, size, seed=10 + q)
    labels = bisection_labels(net, q, eigen_method="dense", rng=0)
    assert adjusted_rand_score(truth, labels) == 1.0


@pytest.mark.parametrize(
    ("name", "k"),
    [("road_like300", 7), ("grid12x15", 5), ("planted4x40", 6)],
)
def test_every_cut_meets_cheeger(name: str, k: int) -> None:
    net = {
        "road_like300": lambda: gallery.road_like(300, rng=2),
        "grid12x15": lambda: gallery.grid(12, 15),
        "planted4x40": lambda: planted(4, 40, seed=1)[0],
    }[name]()
    result = recursive_bisection(net, k, eigen_method="dense", rng=0)
    assert len(result.cuts) == k - 1
    assert np.unique(result.labels).size == k
    assert result.guarantee_held
    graph = nx.from_scipy_sparse_array(net.adjacency)
    members = {0: np.arange(net.n_nodes)}
    for cut in result.cuts:
        # Replay the split: zone `step` and the zones later split off it came
        # out of zone `zone`.
        parent = members[cut.zone]
        inside = parent[_descendants(result, cut.step)[parent]]
        assert cut.nodes == parent.size
        assert 0 < inside.size < parent.size
        sub = graph.subgraph(parent.tolist())
        # networkx as the reference for the cut's conductance inside its zone.
        reference = nx.conductance(sub, set(inside.tolist()), weight="weight")
        assert cut.conductance == pytest.approx(reference, rel=1e-10)
        # Cheeger (Chung 1997, Thm 2.2, from memory): lambda_2/2 <= phi <= sqrt(2 lambda_2).
        assert cut.lambda2 / 2 <= cut.conductance * (1 + 1e-12)
        assert cut.conductance <= np.sqrt(2 * cut.lambda2) * (1 + 1e-9)
        members[cut.zone] = np.setdiff1d(parent, inside)
        members[cut.step] = inside


def _descendants(result, zone: int) -> np.ndarray:
    """Nodes now in ``zone`` or in any zone later split off from it."""
    family = {zone}
    for cut in result.cuts:
        if cut.zone in family:
            family.add(cut.step)
    return np.isin(result.labels, list(family))


def brute_force_min_conductance(graph: nx.Graph) -> float:
    """Least conductance over every non-trivial node subset (2^(n-1) - 1 of them)."""
    nodes = list(graph)
    best = np.inf
    for r in range(1, len(nodes)):
        for subset in itertools.combinations(nodes[1:], r):
            best = min(best, nx.conductance(graph, set(subset)))
    return best


@pytest.mark.parametrize("n", [8, 11, 12])
def test_path_cut_in_the_middle_is_the_minimum(n: int) -> None:
    result = recursive_bisection(gallery.path(n), 2, eigen_method="dense")
    cut = result.cuts[0]
    # Closed form: cutting P_n at its middle link leaves volumes 2 floor(n/2) - 1 and
    # 2 ceil(n/2) - 1, so phi = 1 / (2 floor(n/2) - 1); P_12 gives 1/11 (CHECKS.md).
    assert cut.conductance == pytest.approx(1 / (2 * (n // 2) - 1), rel=1e-12)
    assert cut.conductance == pytest.approx(brute_force_min_conductance(nx.path_graph(n)))
    sides = sorted(np.bincount(result.labels).tolist())
    assert sides == [n // 2, n - n // 2]
    # The two sides are the two halves of the path.
    assert np.count_nonzero(np.diff(result.labels)) == 1


def test_cycle_sweep_meets_brute_force_minimum() -> None:
    # Brute force over all subsets of C_12: 1/6 (CHECKS.md, "checked here").
    result = recursive_bisection(gallery.ring(12), 2, eigen_method="dense")
    assert result.cuts[0].conductance == pytest.approx(1 / 6, rel=1e-12)
    assert brute_force_min_conductance(nx.cycle_graph(12)) == pytest.approx(1 / 6)


def test_disconnected_zone_is_split_between_components_first() -> None:
    # Components of 8, 6 and 9 nodes: greedy balancing puts 9 | 8 + 6 first; the
    # 14-node zone is then the largest, and disconnected, so split by components.
    graph = nx.disjoint_union_all([nx.path_graph(8), nx.complete_graph(6), nx.cycle_graph(9)])
    net = Network.from_networkx(graph, weight=None)
    result = recursive_bisection(net, 3, eigen_method="dense")
    assert [cut.nodes for cut in result.cuts] == [23, 14]
    _, components = connected_components(net.adjacency, directed=False)
    assert adjusted_rand_score(components, result.labels) == 1.0  # scipy as reference
    assert all(cut.by_components and cut.conductance == 0 for cut in result.cuts)
    assert result.to_frame()["holds"].all()


def test_zone_with_the_largest_size_is_split_next() -> None:
    # Two components: a path of 20 nodes of size 1, a path of 6 nodes of size 10.
    graph = nx.disjoint_union(nx.path_graph(20), nx.path_graph(6))
    net = Network.from_networkx(graph, weight=None)
    sizes = np.where(np.arange(26) < 20, 1.0, 10.0)
    result = recursive_bisection(net, 3, sizes=sizes, eigen_method="dense")
    first, second = result.cuts
    assert first.by_components
    assert first.size == 80.0
    assert second.nodes == 6
    assert second.size == 60.0
    assert not second.by_components
    # Without sizes the 20-node path is the larger zone.
    plain = recursive_bisection(net, 3, eigen_method="dense")
    assert plain.cuts[1].nodes == 20


@pytest.mark.parametrize(
    ("kwargs", "name"),
    [({"k": 9}, "k"), ({"k": 0}, "k"), ({"k": 2, "sizes": -np.ones(8)}, "sizes")],
    ids=["k-too-big", "k-zero", "negative-sizes"],
)
def test_bisection_rejects_bad_options_by_name(kwargs: dict, name: str) -> None:
    with pytest.raises(ParameterError, match=name):
        recursive_bisection(gallery.path(8), **kwargs)


# --------------------------------------------------------------- auto rule
def test_auto_takes_bisection_for_two_zones() -> None:
    net, _ = planted(2, 50, seed=2)
    values, vectors = eigenvectors(net, 2)
    choice = choose_assignment(values, vectors, 2)
    assert choice.method == "bisection"
    assert "sqrt(2 lambda_2)" in choice.reason


def test_auto_takes_qr_on_a_concentrated_embedding() -> None:
    net, truth = planted(5, 30, seed=5)
    values, vectors = eigenvectors(net, 5)
    choice = choose_assignment(values, vectors, 5)
    assert choice.concentration >= CONCENTRATION_QR
    assert choice.method == "qr"
    assert adjusted_rand_score(truth, qr_labels(vectors, 5)) == 1.0


def test_auto_takes_bisection_on_a_ring() -> None:
    # Normalized Laplacian of C_n: 1 - cos(2 pi j / n) (CHECKS.md), so lambda_6 of
    # C_400 is 1 - cos(6 pi / 400), far below the mesh threshold.
    net = gallery.ring(400)
    values, vectors = eigenvectors(net, 5)
    assert values[5] == pytest.approx(1 - np.cos(6 * np.pi / 400), rel=1e-6)
    assert values[5] < MESH_EIGENVALUE
    choice = choose_assignment(values, vectors, 5)
    assert choice.concentration < CONCENTRATION_QR
    assert choice.method == "bisection"


def test_auto_takes_kmeans_on_a_loose_embedding_with_structure() -> None:
    # Stochastic block model close to the detectability limit (Decelle et al. 2011):
    # group structure in the spectrum, but embedding rows spread out.
    sizes, p_in, p_out = [80] * 4, 0.10, 0.03
    probs = [[p_in if i == j else p_out for j in range(4)] for i in range(4)]
    graph = nx.stochastic_block_model(sizes, probs, seed=2)
    net = Network.from_networkx(graph, weight=None)
    values, vectors = eigenvectors(net, 4)
    choice = choose_assignment(values, vectors, 4)
    assert values[4] >= MESH_EIGENVALUE
    assert choice.concentration < CONCENTRATION_QR
    assert choice.method == "kmeans"


def test_auto_needs_the_eigenvalue_after_k() -> None:
    with pytest.raises(ParameterError, match="values"):
        choose_assignment(np.array([0.0, 0.1, 0.2]), np.ones((10, 3)), 3)


# ------------------------------------------------- auto: compare and keep the best
def ncut(adjacency: object, labels: np.ndarray) -> float:
    """k-way normalized cut sum_z cut(z) / vol(z) (Shi and Malik 2000), dense, from scratch."""
    a = np.asarray(adjacency.toarray() if hasattr(adjacency, "toarray") else adjacency)  # type: ignore[union-attr]
    degree = a.sum(axis=1)
    total = 0.0
    for z in np.unique(labels):
        inside = labels == z
        total += a[inside][:, ~inside].sum() / degree[inside].sum()
    return float(total)


def ring_of_cliques(m: int, s: int) -> Network:
    """networkx ``ring_of_cliques``: m cliques of s nodes, neighbours joined by one link."""
    return Network.from_networkx(nx.ring_of_cliques(m, s), weight=None)


def weighted_grid(rows: int, cols: int, seed: int) -> Network:
    graph = nx.grid_2d_graph(rows, cols)
    rng = np.random.default_rng(seed)
    for u, v in graph.edges:
        graph.edges[u, v]["weight"] = float(rng.uniform(0.2, 5.0))
    return Network.from_networkx(nx.convert_node_labels_to_integers(graph))


def test_auto_keeps_the_lowest_cut_of_the_alternatives() -> None:
    net, _ = planted(4, 30, seed=5)
    zoning = find_zones(net, 4, rng=0)
    record = zoning.decisions["assign"]
    figures = {alt["method"]: alt for alt in record["alternatives"]}
    assert set(figures) == {"kmeans", "qr", "bisection", "kmeans_rw"}
    achieved = ncut(net.adjacency, zoning.labels)
    # The recorded figure of the winner is the normalized cut of the labels delivered.
    assert figures[record["choice"]]["ncut"] == pytest.approx(achieved, rel=1e-9)
    for alt in figures.values():
        assert achieved <= alt["ncut"] * (1 + 1e-9)
        assert alt["connected_zones"] == alt["zones"] == 4
        assert "seconds" not in alt  # run.json must not change between runs of one seed
    assert record["rule_choice"] in figures


def test_auto_two_zone_cut_matches_networkx() -> None:
    # For two zones the k-way normalized cut is networkx's normalized_cut_size.
    net = gallery.two_zone(40, seed=3)
    zoning = find_zones(net, 2, rng=0)
    graph = nx.from_scipy_sparse_array(net.adjacency)
    side = set(np.flatnonzero(zoning.labels == 0).tolist())
    expected = nx.normalized_cut_size(graph, side, weight="weight")
    assert ncut(net.adjacency, zoning.labels) == pytest.approx(expected, rel=1e-12)
    best = min(alt["ncut"] for alt in zoning.decisions["assign"]["alternatives"])
    assert expected == pytest.approx(best, rel=1e-9)


@pytest.mark.parametrize(("m", "s"), [(6, 5), (8, 6)])
def test_auto_finds_the_cliques_of_a_ring_of_cliques(m: int, s: int) -> None:
    # One zone per clique: each clique has 2 cut links and volume s(s-1) + 2, so the
    # normalized cut is m * 2 / (s (s - 1) + 2) (closed form of the clique partition).
    net = ring_of_cliques(m, s)
    zoning = find_zones(net, m, rng=0)
    assert ncut(net.adjacency, zoning.labels) == pytest.approx(m * 2 / (s * (s - 1) + 2))
    cliques = np.repeat(np.arange(m), s)  # networkx numbers the cliques' nodes in a row
    assert adjusted_rand_score(cliques, zoning.labels) == 1.0


def sklearn_ncut(net: Network, k: int, assign_labels: str) -> float:
    from sklearn.cluster import SpectralClustering

    model = SpectralClustering(
        n_clusters=k, affinity="precomputed", assign_labels=assign_labels, random_state=0
    )
    return ncut(net.adjacency, model.fit_predict(net.adjacency.toarray()))


@pytest.mark.parametrize(
    ("name", "k"),
    [("planted", 4), ("planted", 6), ("grid", 4), ("grid", 6)],
)
def test_auto_is_never_worse_than_scikit_learn(name: str, k: int) -> None:
    if name == "planted":
        graph = nx.planted_partition_graph(k, 25, 0.3, 0.02, seed=11)
        assert nx.is_connected(graph)
        net = Network.from_networkx(graph, weight=None)
    else:
        net = weighted_grid(12, 14, seed=k)
    zoning = find_zones(net, k, rng=0)
    ours = ncut(net.adjacency, zoning.labels)
    theirs = min(sklearn_ncut(net, k, "kmeans"), sklearn_ncut(net, k, "cluster_qr"))
    assert ours <= theirs * (1 + 1e-9)
    # Every zone connected (scipy connected_components of each zone's links).
    for z in range(zoning.n_zones):
        rows = np.flatnonzero(zoning.labels == z)
        pieces, _ = connected_components(net.adjacency[rows][:, rows], directed=False)
        assert pieces == 1


def test_auto_is_deterministic_for_a_seed() -> None:
    net = weighted_grid(10, 11, seed=2)
    first = find_zones(net, 5, rng=42)
    second = find_zones(net, 5, rng=np.random.default_rng(42))
    assert np.array_equal(first.labels, second.labels)
    assert first.decisions["assign"]["choice"] == second.decisions["assign"]["choice"]


def test_named_assignment_is_not_compared() -> None:
    zoning = find_zones(weighted_grid(8, 9, seed=1), 3, assign="qr", rng=0)
    assert dict(zoning.decisions["assign"]) == {"choice": "qr", "reason": "asked"}


def test_auto_falls_back_to_the_rule_above_the_limit(monkeypatch: pytest.MonkeyPatch) -> None:
    import specgraph.zones._compare as compare

    net = weighted_grid(8, 9, seed=1)
    monkeypatch.setattr(compare, "COMPARE_MAX_WORK", 8 * 9 * 3 - 1)
    zoning = find_zones(net, 3, rng=0)
    # The one-level path's record (kept under "one_level" when the multilevel path won).
    record = zoning.decisions["assign"].get("one_level", zoning.decisions["assign"])
    assert "alternatives" not in record
    assert "not compared" in record["reason"]
    values, vectors = eigenvectors(net, 3)
    assert record["choice"] == choose_assignment(values, vectors, 3).method


def test_warns_of_a_zone_under_one_percent() -> None:
    # Two cliques of 120 nodes and a separate pair: zoned as any component
    # (fragments="zone"; by default such a pair is a stray fragment, set aside),
    # the pair is its own zone, 2 of 242 nodes (0.8 %, under SMALL_ZONE_SHARE).
    graph = nx.disjoint_union(nx.barbell_graph(120, 0), nx.path_graph(2))
    zoning = find_zones(Network.from_networkx(graph, weight=None), 3, rng=0, fragments="zone")
    assert zoning.n_zones == 3
    assert sum(1 for w in zoning.warnings if "under 1%" in w) == 1
    # No warning when every zone is large (the barbell alone).
    alone = find_zones(Network.from_networkx(nx.barbell_graph(120, 0), weight=None), 2, rng=0)
    assert not any("under 1%" in w for w in alone.warnings)


def test_warns_when_size_bounds_change_the_count() -> None:
    net = gallery.grid(10, 12)  # 120 nodes: at most 6 zones of 20
    zoning = find_zones(net, 12, rng=0, constraints=ZoneConstraints(min_size=20))
    assert zoning.n_zones <= 6
    said = [w for w in zoning.warnings if "were asked" in w]
    assert len(said) == 1
    assert f"{zoning.n_zones} zones delivered where 12 were asked" in said[0]
    assert "min_size" in said[0]
    exact = find_zones(net, 4, rng=0)
    assert not any("were asked" in w for w in exact.warnings)


def test_kmeans_rw_clusters_the_generalized_eigenvectors(monkeypatch: pytest.MonkeyPatch) -> None:
    # assign="kmeans_rw" clusters D^{-1/2} V: solutions of L u = lambda D u (Shi and
    # Malik 2000), checked with scipy's generalized symmetric solver (scipy.linalg.eigh(L, D)).
    import scipy.linalg as sla

    from specgraph.zones import _stages

    net = weighted_grid(6, 7, seed=3)
    k = 3
    seen: dict[str, np.ndarray] = {}

    def spy(points: np.ndarray, count: int, rng: np.random.Generator) -> np.ndarray:
        seen["points"] = np.array(points)
        return kmeans_labels(points, count, rng)

    monkeypatch.setattr(_stages, "kmeans_labels", spy)
    find_zones(net, k, assign="kmeans_rw", refine=False, rng=0)
    a = net.adjacency.toarray()
    d = np.diag(a.sum(axis=1))
    values, vectors = sla.eigh(d - a, d)
    angles = sla.subspace_angles(seen["points"], vectors[:, :k])
    assert np.max(angles) < 1e-5
    # Each column is itself a generalized eigenvector (residual of L u - lambda D u).
    for j in range(k):
        u = seen["points"][:, j]
        lam = u @ (d - a) @ u / (u @ d @ u)
        assert lam == pytest.approx(values[j], abs=1e-8)
        assert np.linalg.norm((d - a) @ u - lam * d @ u) < 1e-5 * np.linalg.norm(d @ u)


def test_kmeans_rw_matches_scikit_learn_on_planted_blocks() -> None:
    # scikit-learn's SpectralClustering(assign_labels="kmeans") clusters the same
    # coordinates (its spectral_embedding divides by sqrt(degree)); on a clear planted
    # partition both give the blocks.
    from sklearn.cluster import SpectralClustering

    net, truth = planted(4, 30, seed=7)
    ours = find_zones(net, 4, assign="kmeans_rw", refine=False, rng=0).labels
    theirs = SpectralClustering(
        n_clusters=4, affinity="precomputed", assign_labels="kmeans", random_state=0
    ).fit_predict(net.adjacency.toarray())
    assert adjusted_rand_score(theirs, ours) == 1.0
    assert adjusted_rand_score(truth, ours) == 1.0


def test_bisection_reuses_the_whole_networks_fiedler_vector(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    # The first cut of recursive bisection sweeps the whole network's Fiedler vector:
    # given the pairs find_zones already has, it makes one eigen-solve fewer and the
    # same zones (compared up to relabelling with scikit-learn's adjusted_rand_score).
    import specgraph.zones._assign as assign_module
    from specgraph import laplacian, smallest_eigenpairs

    net = weighted_grid(9, 10, seed=4)
    first = smallest_eigenpairs(laplacian(net, kind="normalized"), 5, rng=0)
    calls = []
    real = assign_module.smallest_eigenpairs

    def counted(*args: object, **kwargs: object) -> object:
        calls.append(1)
        return real(*args, **kwargs)

    monkeypatch.setattr(assign_module, "smallest_eigenpairs", counted)
    alone = recursive_bisection(net, 4, rng=0)
    solves_alone = len(calls)
    calls.clear()
    reused = recursive_bisection(net, 4, rng=0, first=first)
    assert solves_alone == 3
    assert len(calls) == 2
    assert adjusted_rand_score(alone.labels, reused.labels) == 1.0
    assert reused.cuts[0].lambda2 == pytest.approx(first.values[1])
