"""A zero eigengap at the zone count is said: the split is one of several of equal standing.

The tied spectra come from outside the project: the normalized Laplacian of the
complete graph :math:`K_n` has eigenvalues 0 and :math:`n/(n-1)` (multiplicity
:math:`n-1`) [Chung 1997, "Spectral Graph Theory", example 1.1]; a ring of identical
cliques and a square grid are symmetric under a rotation or a transposition that
swaps two eigenvectors, so :math:`\\lambda_2 = \\lambda_3` -- checked here with
numpy's dense ``eigvalsh`` of networkx's ``normalized_laplacian_matrix``. Graphs
whose gap is open (a 20 x 21 grid, networkx's barbell) draw no warning.
"""

from __future__ import annotations

import json
from pathlib import Path

import networkx as nx
import numpy as np
import pytest

from specgraph import Network, find_zones
from specgraph.cli import main
from specgraph.zones._compare import TIED_RELATIVE_GAP

TIED = "eigengap after"


def dense_gap(graph: nx.Graph, k: int) -> float:
    """Relative gap after ``k`` by numpy on networkx's normalized Laplacian."""
    values = np.linalg.eigvalsh(nx.normalized_laplacian_matrix(graph).toarray())
    return float((values[k] - values[k - 1]) / values[k])


TIED_CASES = {
    "complete 30, 3 zones": (nx.complete_graph(30), 3),
    "ring of 6 cliques of 10, 2 zones": (nx.ring_of_cliques(6, 10), 2),
    "ring of 150 cliques of 8, 2 zones": (nx.ring_of_cliques(150, 8), 2),
    "grid 20 x 20, 2 zones": (nx.grid_2d_graph(20, 20), 2),
}
OPEN_CASES = {
    "ring of 6 cliques of 10, 6 zones": (nx.ring_of_cliques(6, 10), 6),
    "grid 20 x 20, 4 zones": (nx.grid_2d_graph(20, 20), 4),
    "grid 20 x 21, 2 zones": (nx.grid_2d_graph(20, 21), 2),
    "barbell 10 + 10, 2 zones": (nx.barbell_graph(10, 0), 2),
}


@pytest.mark.parametrize("case", list(TIED_CASES))
@pytest.mark.parametrize("method", ["auto", "multilevel"])
def test_tied_gap_is_warned(case: str, method: str) -> None:
    graph, k = TIED_CASES[case]
    # The outside check: the dense spectrum has no gap after k.
    assert dense_gap(graph, k) < 1e-9
    zoning = find_zones(Network.from_networkx(graph), zones=k, rng=0, eigen_method=method)
    tied = [w for w in zoning.warnings if TIED in w]
    assert len(tied) == 1, zoning.warnings
    assert f"after {k} zones is zero" in tied[0]


@pytest.mark.parametrize("case", list(OPEN_CASES))
def test_open_gap_is_not_warned(case: str) -> None:
    graph, k = OPEN_CASES[case]
    # The outside check: numpy finds a gap far above the tie threshold.
    assert dense_gap(graph, k) > 1000 * TIED_RELATIVE_GAP
    zoning = find_zones(Network.from_networkx(graph), zones=k, rng=0)
    assert not [w for w in zoning.warnings if TIED in w], zoning.warnings


def test_complete_graph_closed_form_and_command_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    n = 24
    edges = tmp_path / "k24.csv"
    rows = [f"Q{i},Q{j}" for i in range(n) for j in range(i + 1, n)]
    edges.write_text("source,target\n" + "\n".join(rows) + "\n", encoding="utf-8")
    out = tmp_path / "out"
    code = main(["zones", str(edges), "--zones", "4", "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 0, err
    assert "eigengap after 4 zones is zero" in err
    record = json.loads((out / "run.json").read_text(encoding="utf-8"))
    assert any(TIED in w for w in record["warnings"])
    # Closed form (Chung 1997): every nonzero eigenvalue of K_n is n/(n-1).
    spectrum = np.loadtxt(out / "spectrum.csv", delimiter=",", skiprows=1, usecols=1)
    np.testing.assert_allclose(spectrum[1:], n / (n - 1), rtol=1e-10)
