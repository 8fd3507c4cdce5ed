"""Refusals that arithmetic decides: before any eigen-solve, naming the root cause.

Oracles: networkx for the node count of the component a refusal names
(``connected_components`` on the graph of the file's rows, every node of the file, with no
link merged), ``math.dist`` for the distance between two sources, and the arithmetic of
the rule itself (``k`` zones of at least ``m`` need ``k * m``) written out beside each check.
The networks are invented (Quillmere ids): a 10 m grid of junctions with supply points at
its edges.
"""

from __future__ import annotations

import math
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

import specgraph.eigen
import specgraph.zones._assign
import specgraph.zones._sizes
import specgraph.zones._stages
from specgraph import ConstraintError, Network, find_zones
from specgraph.cli import main
from specgraph.zones import ZoneConstraints

SPACING = 10.0  # metres between grid junctions


def _junction(i: int, j: int) -> str:
    return f"QM-J{i}-{j}"


def grid_rows(side: int) -> tuple[list[tuple[str, str]], dict[str, tuple[float, float]]]:
    """The links and coordinates of a ``side`` x ``side`` grid of junctions, 10 m apart."""
    graph = nx.grid_2d_graph(side, side)
    links = [(_junction(*a), _junction(*b)) for a, b in graph.edges]
    xy = {_junction(i, j): (SPACING * i, SPACING * j) for i, j in graph.nodes}
    return links, xy


def network_of(links: list[tuple[str, str]], xy: dict[str, tuple[float, float]]) -> Network:
    ids = list(xy)
    return Network.from_links(
        [a for a, _ in links],
        [b for _, b in links],
        node_ids=ids,
        coordinates=np.array([xy[i] for i in ids]),
    )


def twin_network() -> tuple[Network, list[tuple[str, str]], dict[str, tuple[float, float]]]:
    """An 8 x 8 grid; tank QM-T1 beside corner QM-J0-0, reservoir QM-R2 0.2 m from the tank
    and joined to the network only through it, tank QM-T3 at the far corner."""
    links, xy = grid_rows(8)
    links += [("QM-T1", "QM-J0-0"), ("QM-R2", "QM-T1"), ("QM-T3", "QM-J7-7")]
    xy |= {"QM-T1": (-10.0, 0.0), "QM-R2": (-10.2, 0.0), "QM-T3": (80.0, 70.0)}
    return network_of(links, xy), links, xy


@pytest.fixture
def no_solve(monkeypatch: pytest.MonkeyPatch) -> list[str]:
    """Every eigen-solver entry zoning can reach raises: a refusal must come before them."""
    called: list[str] = []

    def forbidden(*args: object, **kwargs: object) -> None:
        called.append("solve")
        raise AssertionError("an eigen-solve ran before the refusal")

    for module in (specgraph.eigen, specgraph.zones._stages, specgraph.zones._assign):
        monkeypatch.setattr(module, "smallest_eigenpairs", forbidden, raising=False)
    monkeypatch.setattr(specgraph.zones._sizes, "smallest_eigenpairs", forbidden, raising=False)
    monkeypatch.setattr(specgraph.zones._stages, "laplacian", forbidden, raising=False)
    return called


def test_too_many_sources_for_min_size_refused_before_any_eigen_solve(no_solve) -> None:
    links, xy = grid_rows(10)  # 100 junctions
    net = network_of(links, xy)
    sources = tuple(_junction(i, 0) for i in range(10)) + tuple(_junction(i, 9) for i in (0, 9))
    # 12 zones of at least 10 need 12 * 10 = 120 > 100 junctions: arithmetic decides.
    rules = ZoneConstraints(sources=sources, min_size=10)
    with pytest.raises(ConstraintError) as info:
        find_zones(net, constraints=rules, rng=0)
    message = str(info.value)
    assert message.startswith("size bounds: ")
    assert "12 zones of at least 10 need 120" in message
    assert "'QM-J0-0'" in message  # the component is named by its sources
    assert "e.g. node" not in message
    assert no_solve == []


def test_counts_in_the_file_terms_after_kept_links_and_trees(no_solve) -> None:
    links, xy = grid_rows(6)
    # A dangling branch of five junctions (merged when trees are attached) and a chain of
    # kept links (merged for the enforcement): neither may shrink the count reported.
    branch = [f"QM-B{i}" for i in range(5)]
    links += list(zip(["QM-J5-5", *branch[:-1]], branch, strict=True))
    xy |= {b: (60.0 + SPACING * i, 50.0) for i, b in enumerate(branch)}
    keep = ((_junction(0, 0), _junction(0, 1)), (_junction(0, 1), _junction(0, 2)))
    net = network_of(links, xy)
    graph = nx.Graph(links)
    (component,) = list(nx.connected_components(graph))  # networkx: one component
    rules = ZoneConstraints(min_size=len(component) + 1, keep_links=keep)
    with pytest.raises(ConstraintError) as info:
        find_zones(net, 2, trees="attach", constraints=rules, rng=0)
    assert f"({len(component)} nodes," in str(info.value)
    assert no_solve == []


def test_twin_sources_walled_in_are_named_with_their_distance(no_solve) -> None:
    net, _, xy = twin_network()
    rules = ZoneConstraints(sources=("QM-T1", "QM-R2", "QM-T3"), min_size=10)
    with pytest.raises(ConstraintError) as info:
        find_zones(net, constraints=rules, rng=0)
    message = str(info.value)
    apart = math.dist(xy["QM-T1"], xy["QM-R2"])  # 0.2 m
    assert message.startswith("sources: ")
    assert "'QM-R2'" in message
    assert "'QM-T1'" in message
    assert "twin sources" in message
    assert f"({apart:.3g} apart)" in message
    assert "< min_size 10" in message
    assert no_solve == []


def test_walled_in_source_far_from_the_other_is_not_called_a_twin(no_solve) -> None:
    links, xy = grid_rows(8)
    # A reservoir at the end of a 40 m spur whose only way in is through tank QM-T1.
    links += [("QM-T1", "QM-J0-0"), ("QM-R2", "QM-T1")]
    xy |= {"QM-T1": (-10.0, 0.0), "QM-R2": (-50.0, 0.0)}
    net = network_of(links, xy)
    with pytest.raises(ConstraintError) as info:
        find_zones(net, constraints=ZoneConstraints(sources=("QM-T1", "QM-R2"), min_size=5))
    message = str(info.value)
    assert "every path from source 'QM-R2'" in message
    assert "'QM-T1'" in message
    assert "twin" not in message
    assert no_solve == []


def test_twin_sources_tied_by_kept_links_named_with_their_distance(no_solve) -> None:
    net, _, xy = twin_network()
    rules = ZoneConstraints(sources=("QM-T1", "QM-R2", "QM-T3"), keep_links=(("QM-R2", "QM-T1"),))
    with pytest.raises(ConstraintError) as info:
        find_zones(net, constraints=rules, rng=0)
    message = str(info.value)
    assert message.startswith("sources: ")
    assert f"({math.dist(xy['QM-T1'], xy['QM-R2']):.3g} apart)" in message
    assert "QM-T1 - QM-R2" in message
    assert no_solve == []


def test_sourceless_component_and_supply_component_named_apart(no_solve) -> None:
    links, xy = grid_rows(4)
    links += [("QM-X1", "QM-X2")]  # a second, sourceless component
    xy |= {"QM-X1": (100.0, 100.0), "QM-X2": (110.0, 100.0)}
    net = network_of(links, xy)
    with pytest.raises(ConstraintError) as info:
        find_zones(net, constraints=ZoneConstraints(sources=("QM-J0-0",)), rng=0)
    message = str(info.value)
    assert message.startswith("sources: connected component 1 (2 nodes, e.g. node 'QM-X1')")
    assert no_solve == []


def test_twin_refusal_through_the_command_line(
    tmp_path: Path, capsys: pytest.CaptureFixture
) -> None:
    _, links, xy = twin_network()
    edges, nodes, supply = tmp_path / "pipes.csv", tmp_path / "junctions.csv", tmp_path / "s.csv"
    edges.write_text("source,target\n" + "".join(f"{a},{b}\n" for a, b in links))
    nodes.write_text("node,x,y\n" + "".join(f"{n},{x},{y}\n" for n, (x, y) in xy.items()))
    supply.write_text("node\nQM-T1\nQM-R2\nQM-T3\n")
    out = tmp_path / "out"
    args = ["zones", str(edges), "--nodes", str(nodes), "--x-col", "x", "--y-col", "y"]
    code = main([*args, "--supply-list", str(supply), "--min-size", "10", "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 2
    assert "'QM-R2'" in err
    assert "'QM-T1'" in err
    assert "twin sources" in err
    assert f"({math.dist(xy['QM-T1'], xy['QM-R2']):.3g} apart)" in err
    assert not out.exists()
