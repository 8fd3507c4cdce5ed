"""Robustness diagnostics checked against sources outside the project.

References used below:
- networkx ``bridges``, ``articulation_points``, ``connected_components``,
  ``laplacian_matrix``, ``normalized_laplacian_matrix``, ``algebraic_connectivity``
  (reference implementations);
- brute force: remove a link or node and count what is left (networkx);
- numpy.linalg.pinv for R_ij = (e_i - e_j)^T L^+ (e_i - e_j) (reference implementation);
- closed forms of effective resistance: resistors in series add; ring of n unit
  links, neighbours (n-1)/n; complete graph K_n, 2/n (Doyle and Snell, *Random Walks
  and Electric Networks*, MAA 1984; Klein and Randic, J. Math. Chem. 12, 1993; from
  memory);
- Foster's theorem: sum over links of w_ij R_ij = n - 1 on a connected graph
  (R. M. Foster, 1949, from memory);
- Laplacian spectra of paths and rings (Brouwer and Haemers, *Spectra of Graphs*, 2012,
  ch. 1; see ../shared/CHECKS.md), via tests/closed_forms.py.
"""

from __future__ import annotations

from collections.abc import Callable
from functools import partial

import networkx as nx
import numpy as np
import pytest
import scipy.linalg as la
from closed_forms import cycle_l, path_l, path_n

from specgraph import Network, ParameterError, gallery
from specgraph.diagnostics import (
    SKETCH_ROWS,
    cut_structure,
    effective_resistances,
    robustness,
)


# ----------------------------------------------------------------- graphs (networkx)
def _trees_on_a_core(seed: int, *, n_core: int = 25, n_tree: int = 20) -> nx.Graph:
    """A random core (gnm) with random trees hung on it and a few chords: many bridges."""
    rng = np.random.default_rng(seed)
    graph = nx.gnm_random_graph(n_core, 2 * n_core, seed=seed)
    for v in range(n_core, n_core + n_tree):
        graph.add_edge(v, int(rng.integers(v)))  # attach to an earlier node: a tree link
    for _ in range(3):  # chords turn some tree links into non-bridges
        a, b = rng.choice(n_core + n_tree, 2, replace=False)
        graph.add_edge(int(a), int(b))
    for u, v in graph.edges:
        graph[u][v]["weight"] = float(rng.uniform(0.5, 2.0))
    return graph


def _disconnected(seed: int) -> nx.Graph:
    """Several components of assorted sizes (stacked and per-component paths) and isolated nodes."""
    graph = nx.disjoint_union_all(
        [
            _trees_on_a_core(seed, n_core=12, n_tree=10),
            nx.path_graph(3),
            nx.cycle_graph(5),
            nx.barbell_graph(4, 2),
            nx.empty_graph(3),  # isolated nodes
        ]
    )
    for u, v in graph.edges:
        graph[u][v].setdefault("weight", 1.0)
    return graph


def _net(graph: nx.Graph, sizes: np.ndarray | None = None) -> Network:
    """Nodes 0..n-1 in row order (networkx labels are integers here)."""
    graph = nx.convert_node_labels_to_integers(graph, ordering="sorted")
    if sizes is not None:
        nx.set_node_attributes(graph, dict(enumerate(sizes.tolist())), "size")
        return Network.from_networkx(graph, size="size")
    return Network.from_networkx(graph)


GRAPHS: dict[str, Callable[[], nx.Graph]] = {
    **{f"trees-{s}": partial(_trees_on_a_core, s) for s in range(4)},
    **{f"disconnected-{s}": partial(_disconnected, s) for s in range(2)},
    "isolated-only": partial(nx.empty_graph, 4),
    "tree": partial(nx.random_labeled_tree, 30, seed=3),
}


def _pairs(cuts, mask) -> set[tuple[int, int]]:
    return {
        (int(a), int(b))
        for a, b in zip(cuts.link_source[mask], cuts.link_target[mask], strict=True)
    }


# --------------------------------------------------------------- bridges / articulation
@pytest.mark.parametrize("name", GRAPHS)
def test_bridges_and_articulation_nodes_match_networkx(name):
    graph = nx.convert_node_labels_to_integers(GRAPHS[name](), ordering="sorted")
    cuts = cut_structure(_net(graph))
    # Reference: networkx bridges / articulation_points.
    expected = {tuple(sorted(e)) for e in nx.bridges(graph)}
    assert _pairs(cuts, cuts.is_bridge) == expected
    assert set(cuts.articulation.tolist()) == set(nx.articulation_points(graph))


def _brute_link(graph: nx.Graph, u: int, v: int, sizes: np.ndarray) -> tuple[int, float]:
    """Remove the link, then the side of smaller size (then fewer nodes) is cut off."""
    h = graph.copy()
    h.remove_edge(u, v)
    sides = [nx.node_connected_component(h, u), nx.node_connected_component(h, v)]
    figures = sorted((float(sizes[list(s)].sum()), len(s)) for s in sides)
    return figures[0][1], figures[0][0]


def _brute_node(graph: nx.Graph, v: int, sizes: np.ndarray) -> tuple[int, int, float]:
    """Remove the node; everything of its component but the largest piece is cut off."""
    h = graph.subgraph(nx.node_connected_component(graph, v) - {v})
    pieces = [(float(sizes[list(p)].sum()), len(p)) for p in nx.connected_components(h)]
    largest = max(pieces)
    total_size, total_nodes = sum(p[0] for p in pieces), sum(p[1] for p in pieces)
    return len(pieces), total_nodes - largest[1], total_size - largest[0]


@pytest.mark.parametrize("seed", range(3))
@pytest.mark.parametrize("weighted", [False, True], ids=["unit-sizes", "node-sizes"])
def test_cut_off_figures_match_brute_force_removal(seed, weighted):
    graph = nx.convert_node_labels_to_integers(_disconnected(seed), ordering="sorted")
    n = graph.number_of_nodes()
    rng = np.random.default_rng(seed)
    sizes = rng.integers(0, 5, n).astype(float) if weighted else np.ones(n)
    cuts = cut_structure(_net(graph, sizes if weighted else None))
    for link in np.flatnonzero(cuts.is_bridge):
        u, v = int(cuts.link_source[link]), int(cuts.link_target[link])
        nodes, size = _brute_link(graph, u, v, sizes)
        assert (cuts.cut_nodes[link], cuts.cut_size[link]) == (nodes, pytest.approx(size))
        # The node set handed out has exactly those figures.
        cut = cuts.link_cut_off(int(link))
        assert cut.size == nodes
        assert sizes[cut].sum() == pytest.approx(size)
        h = graph.copy()
        h.remove_edge(u, v)
        assert set(cut.tolist()) in (
            nx.node_connected_component(h, u),
            nx.node_connected_component(h, v),
        )
    assert np.all(cuts.cut_nodes[~cuts.is_bridge] == 0)
    for k, v in enumerate(cuts.articulation.tolist()):
        pieces, nodes, size = _brute_node(graph, v, sizes)
        assert cuts.pieces[k] == pieces
        assert cuts.node_cut_nodes[k] == nodes
        assert cuts.node_cut_size[k] == pytest.approx(size)
        assert cuts.node_cut_off(v).size == nodes


def test_barbell_bridge_is_ranked_first_with_the_clique_cut_off():
    # Reference: a barbell of two m-cliques has one bridge, cutting off one clique
    # (networkx barbell_graph; closed form).
    m = 6
    report = robustness(gallery.barbell(m), rng=0)
    first = report.links.iloc[0]
    assert (first["source"], first["target"]) == (str(m - 1), str(m))
    assert bool(first["bridge"])
    assert first["leverage"] == pytest.approx(1.0)
    assert (first["cut_nodes"], first["cut_size"]) == (m, m)
    assert not report.links["bridge"].iloc[1:].any()
    assert len(report.bridges) == 1
    assert sorted(report.nodes["node"]) == [str(m - 1), str(m)]
    assert report.nodes["cut_nodes"].tolist() == [m - 1, m - 1]
    cut = {int(v) for v in report.cut_off(str(m - 1), str(m))}
    assert cut in (set(range(m)), set(range(m, 2 * m)))


def test_lollipop_with_node_sizes_cuts_off_the_lighter_side():
    # Reference: networkx lollipop_graph(5, 4): clique 0..4, tail 5..8 hung on node 4.
    graph = nx.lollipop_graph(5, 4)
    sizes = np.array([1.0] * 5 + [10.0] * 4)  # the tail outweighs the clique
    report = robustness(_net(graph, sizes), rng=0)
    bridges = report.bridges
    assert len(bridges) == 4  # every tail link
    # The link from the clique to the tail: the clique (5 nodes, size 5) is the
    # lighter side, although it has more nodes than the tail (4 nodes, size 40).
    hinge = bridges[(bridges["source"] == "4") & (bridges["target"] == "5")].iloc[0]
    assert (hinge["cut_nodes"], hinge["cut_size"], hinge["cut_end"]) == (5, 5.0, "4")
    # Ranked by size cut off: link 6-7 cuts off nodes 7, 8 (size 20), the most.
    assert (bridges.iloc[0]["source"], bridges.iloc[0]["target"]) == ("6", "7")
    assert bridges["cut_size"].tolist() == [20.0, 15.0, 10.0, 5.0]
    # Brute force on every bridge.
    for row in bridges.itertuples():
        assert (row.cut_nodes, row.cut_size) == _brute_link(
            graph, int(row.source), int(row.target), sizes
        )
    assert report.links["bridge"].iloc[:4].all()


# ------------------------------------------------------------------ resistances
def _pinv_resistances(net: Network, cuts) -> np.ndarray:
    lap = np.diag(net.degrees) - net.adjacency.toarray()
    plus = np.linalg.pinv(lap)  # reference: Moore-Penrose pseudo-inverse
    a, b = cuts.link_source, cuts.link_target
    return plus[a, a] + plus[b, b] - 2 * plus[a, b]


@pytest.mark.parametrize("name", [k for k in GRAPHS if k != "isolated-only"])
def test_exact_resistances_match_the_pseudo_inverse(name):
    net = _net(GRAPHS[name]())
    res = effective_resistances(net)
    assert res.method in ("exact", "none")
    np.testing.assert_allclose(
        res.resistance, _pinv_resistances(net, cut_structure(net)), rtol=1e-8
    )
    # Leverage is exactly 1 on bridges (Spielman and Srivastava 2011) and below 1 elsewhere.
    cuts = cut_structure(net)
    np.testing.assert_allclose(res.leverage[cuts.is_bridge], 1.0)
    assert np.all(res.leverage[~cuts.is_bridge] < 1.0 - 1e-9)
    # Foster's theorem per component: sum of leverages = n - c.
    assert res.leverage.sum() == pytest.approx(net.n_nodes - net.n_components, rel=1e-9)


def test_resistance_closed_forms():
    # Series: a path's links are all bridges, R = 1/w (resistors in series add).
    w = np.array([1.0, 2.0, 4.0, 0.5])
    path = Network.from_links(["0", "1", "2", "3"], ["1", "2", "3", "4"], w)
    np.testing.assert_allclose(effective_resistances(path).resistance, 1.0 / w)
    # Between the ends of the path (add the chord of tiny weight: its R is the path's).
    chord = Network.from_links(["0", "1", "2", "3", "0"], ["1", "2", "3", "4", "4"], [*w, 1e-9])
    res = effective_resistances(chord)
    end_to_end = res.resistance[(res.source == 0) & (res.target == 4)][0]
    parallel = 1.0 / (1.0 / np.sum(1.0 / w) + 1e-9)
    assert end_to_end == pytest.approx(parallel, rel=1e-6)
    # Ring of n unit links: neighbours (n - 1) / n (Doyle and Snell 1984, from memory).
    for n in (3, 7, 40):
        np.testing.assert_allclose(effective_resistances(gallery.ring(n)).resistance, (n - 1) / n)
    # Complete graph K_n: 2 / n (Klein and Randic 1993, from memory).
    for n in (4, 9, 20):
        np.testing.assert_allclose(effective_resistances(gallery.complete(n)).resistance, 2.0 / n)


def test_sketch_estimate_on_a_mid_size_grid():
    # Reference: exact resistances (dense) on a 30 x 40 grid, one 2-edge-connected piece.
    net = gallery.grid(30, 40)
    exact = effective_resistances(net, method="exact")
    est = effective_resistances(net, method="sketch", rng=7)
    assert (est.method, est.sketch_rows) == ("sketch", SKETCH_ROWS)
    assert est.estimated.all()
    rel = est.resistance / exact.resistance - 1
    # A sum of q squared +-1 projections: relative standard deviation about
    # sqrt(2/q) (0.29 at q = 24; Achlioptas-type Johnson-Lindenstrauss bound).
    assert np.sqrt(np.mean(rel**2)) < 1.2 * np.sqrt(2 / SKETCH_ROWS)
    assert abs(np.median(rel)) < 0.1
    # Foster's theorem holds for the estimates on average: the errors are independent
    # across links to first order, so the sum concentrates.
    assert est.leverage.sum() == pytest.approx(net.n_nodes - 1, rel=0.03)
    # More rows, smaller error (same seed).
    finer = effective_resistances(net, method="sketch", sketch_rows=96, rng=7)
    assert np.sqrt(np.mean((finer.resistance / exact.resistance - 1) ** 2)) < np.sqrt(
        np.mean(rel**2)
    )


def test_sketch_on_a_network_with_bridges_keeps_bridges_exact():
    net = _net(_disconnected(1))
    exact = effective_resistances(net, method="exact")
    est = effective_resistances(net, method="sketch", rng=0)
    cuts = cut_structure(net)
    np.testing.assert_allclose(est.resistance[cuts.is_bridge], exact.resistance[cuts.is_bridge])
    assert not est.estimated[cuts.is_bridge].any()
    # Same seed, same answer.
    again = effective_resistances(net, method="sketch", rng=0)
    np.testing.assert_array_equal(est.resistance, again.resistance)


# ------------------------------------------------------------- algebraic connectivity
@pytest.mark.parametrize("n", [5, 16, 17, 60])
def test_algebraic_connectivity_closed_forms(n):
    # Spans both the stacked dense path (n <= 16) and smallest_eigenpairs.
    path = robustness(gallery.path(n), rng=0)
    assert path.algebraic_connectivity == pytest.approx(np.sort(path_l(n))[1], rel=1e-8)
    assert path.normalized_connectivity == pytest.approx(np.sort(path_n(n))[1], rel=1e-6)
    ring = robustness(gallery.ring(n), rng=0)
    assert ring.algebraic_connectivity == pytest.approx(np.sort(cycle_l(n))[1], rel=1e-8)
    # Fiedler vector of the path: u_i proportional to cos(pi (2i + 1) / 2n)
    # (Brouwer and Haemers 2012, ch. 1, from memory); every link is a bridge, so
    # every link is listed.
    u = np.cos(np.pi * (2 * np.arange(n) + 1) / (2 * n))
    u /= np.linalg.norm(u)
    links = path.links
    src, dst = links["source"].astype(int), links["target"].astype(int)
    np.testing.assert_allclose(links["fiedler_difference"], np.abs(u[src] - u[dst]), atol=1e-6)


def test_component_connectivity_matches_networkx():
    graph = nx.convert_node_labels_to_integers(_disconnected(2), ordering="sorted")
    report = robustness(_net(graph), rng=0)
    assert report.algebraic_connectivity == 0.0  # disconnected (Fiedler 1973)
    table = report.components
    labels = _net(graph).component_labels
    for row in table.itertuples():
        nodes = np.flatnonzero(labels == row.component).tolist()
        sub = graph.subgraph(nodes)
        if len(nodes) == 1:
            assert np.isnan(row.algebraic_connectivity)
            continue
        # Reference: dense spectra of networkx's Laplacian matrices.
        lap = nx.laplacian_matrix(sub, weight="weight").toarray()
        norm = nx.normalized_laplacian_matrix(sub, weight="weight").toarray()
        assert row.algebraic_connectivity == pytest.approx(la.eigvalsh(lap)[1], rel=1e-7, abs=1e-10)
        assert row.normalized_connectivity == pytest.approx(
            la.eigvalsh(norm)[1], rel=1e-6, abs=1e-10
        )
        assert row.cheeger_low == pytest.approx(row.normalized_connectivity / 2)
        assert row.bridges == sum(1 for _ in nx.bridges(sub))
        assert row.articulation_nodes == sum(1 for _ in nx.articulation_points(sub))


def test_connectivity_of_a_connected_graph_matches_networkx_algebraic_connectivity():
    graph = nx.convert_node_labels_to_integers(_trees_on_a_core(5, n_core=40), ordering="sorted")
    report = robustness(_net(graph), rng=0)
    for normalized, value in (
        (False, report.algebraic_connectivity),
        (True, report.normalized_connectivity),
    ):
        expected = nx.algebraic_connectivity(
            graph, weight="weight", normalized=normalized, tol=1e-10, method="lanczos", seed=0
        )
        assert value == pytest.approx(expected, rel=1e-6)


def test_zone_connectivity_on_induced_subnetworks():
    # Two rings joined by one link; zone 2 is split in two pieces (disconnected -> 0).
    graph = nx.disjoint_union(nx.cycle_graph(8), nx.path_graph(20))
    graph.add_edge(0, 8)
    labels = np.array([0] * 8 + [1] * 10 + [2] * 5 + [1] * 5)
    net = _net(graph)
    report = robustness(net, labels=labels, rng=0)
    zones = report.zones
    assert zones["connected"].tolist() == [True, False, True]
    assert zones["pieces"].tolist() == [1, 2, 1]
    assert zones.loc[1, "algebraic_connectivity"] == 0.0
    assert zones.loc[0, "algebraic_connectivity"] == pytest.approx(np.sort(cycle_l(8))[1])
    assert zones.loc[2, "algebraic_connectivity"] == pytest.approx(np.sort(path_l(5))[1])
    # Reference: networkx on the induced subgraph.
    sub = graph.subgraph(range(8))
    expected = nx.algebraic_connectivity(sub, normalized=True, method="lanczos", tol=1e-10, seed=0)
    assert zones.loc[0, "normalized_connectivity"] == pytest.approx(expected, rel=1e-6)


def test_links_table_ranking_and_columns():
    net = _net(_trees_on_a_core(2, n_core=30, n_tree=15))
    report = robustness(net, top=20, rng=0)
    links = report.links
    assert len(links) == 20
    bridges = links["bridge"].to_numpy()
    # Bridges first, by what they cut off; then by leverage.
    assert not np.any(np.diff(bridges.astype(int)) > 0)
    assert np.all(np.diff(links.loc[bridges, "cut_size"].to_numpy()) <= 0)
    assert np.all(np.diff(links.loc[~bridges, "leverage"].to_numpy()) <= 0)
    assert np.all(links.loc[~bridges, "cut_nodes"] == 0)
    np.testing.assert_allclose(links["leverage"], links["weight"] * links["resistance"])
    # Articulation nodes ranked by what they cut off.
    assert np.all(np.diff(report.nodes["cut_size"].to_numpy()) <= 0)


@pytest.mark.parametrize(
    ("options", "name"),
    [
        ({"top": -1}, "top"),
        ({"resistance": "guess"}, "resistance"),
        ({"sketch_rows": 0}, "sketch_rows"),
        ({"tol": 0.0}, "tol"),
    ],
)
def test_bad_options_name_the_parameter(options, name):
    with pytest.raises(ParameterError, match=name):
        robustness(gallery.path(4), **options)


def test_cut_off_refuses_unknown_ids_and_non_links():
    report = robustness(gallery.barbell(3), rng=0)
    with pytest.raises(ParameterError, match="node ids"):
        report.cut_off("nope")
    with pytest.raises(ParameterError, match="ends of a link"):
        report.cut_off("0", "5")
    assert report.cut_off("0", "1").size == 0  # not a bridge
    assert report.cut_off("0").size == 0  # not an articulation node
