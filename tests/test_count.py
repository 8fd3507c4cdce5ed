"""Zone count from the spectrum, and the ``--zones`` forms.

Networks with a known number of groups come from networkx (stochastic block
model, ring of cliques); their normalized-Laplacian eigenvalues from
``scipy.linalg.eigh`` on networkx's ``normalized_laplacian_matrix``, so the
spectrum does not depend on specgraph's own solvers.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
import scipy.linalg as sla

from specgraph import Network, ParameterError, find_zones
from specgraph.zones._count import (
    DEFAULT_MAX_ZONES,
    NCUT_CHECKED,
    choose_zone_count,
    count_decided,
    default_candidates,
    next_pair_count,
    parse_zone_spec,
)


def spectrum(graph: nx.Graph) -> np.ndarray:
    """Ascending normalized-Laplacian eigenvalues (networkx matrix, scipy eigh)."""
    return sla.eigh(nx.normalized_laplacian_matrix(graph).toarray(), eigvals_only=True)


def block_model(q: int, seed: int) -> nx.Graph:
    sizes = [40 + 5 * b for b in range(q)]
    p_in, p_out = 0.3, 0.01
    probs = [[p_in if i == j else p_out for j in range(q)] for i in range(q)]
    return nx.stochastic_block_model(sizes, probs, seed=seed)


@pytest.mark.parametrize("q", [3, 4, 5, 6])
def test_block_model_count_is_the_planted_one(q: int) -> None:
    graph = block_model(q, seed=q)
    assert nx.is_connected(graph)
    values = spectrum(graph)
    # A clear gap: by the higher-order Cheeger inequality (Lee, Oveis Gharan and
    # Trevisan, J. ACM 2014) q groups exist when lambda_q is small and no q + 1
    # when lambda_{q+1} is large; check the instance has that shape.
    assert values[q] > 2.5 * values[q - 1]
    count = choose_zone_count(values[: DEFAULT_MAX_ZONES + 1])
    assert count.zones == q
    assert count.confidence == "high"
    chosen = count.evidence.set_index("zones").loc[q]
    assert chosen["relative_gap"] == count.evidence["relative_gap"].max()
    assert chosen["eigenvalue"] == values[q - 1]
    assert chosen["next_eigenvalue"] == values[q]


@pytest.mark.parametrize(("cliques", "size"), [(4, 8), (6, 5), (10, 6)])
def test_ring_of_cliques_count_is_the_number_of_cliques(cliques: int, size: int) -> None:
    values = spectrum(nx.ring_of_cliques(cliques, size))
    count = choose_zone_count(values)
    assert count.zones == cliques
    assert f"lambda_{cliques + 1}" in count.reason


def test_explicit_range_is_inclusive_and_bounds_the_choice() -> None:
    values = spectrum(nx.ring_of_cliques(12, 5))
    count = choose_zone_count(values, candidates=parse_zone_spec("8:20"))
    assert count.zones == 12
    assert count.evidence["zones"].tolist() == list(range(8, 21))
    # A range that leaves out the clear count picks within the range.
    inside = choose_zone_count(values, candidates=range(2, 11))
    assert 2 <= inside.zones <= 10


def test_range_beyond_the_values_is_refused() -> None:
    with pytest.raises(ParameterError, match=r"at least 21 eigenvalues.*got 12"):
        choose_zone_count(np.linspace(0, 1, 12), candidates=range(8, 21))


def test_components_are_never_ranked_and_may_be_the_answer() -> None:
    # Three disjoint K_5: normalized spectrum 0 (x3) then 5/4 (x12) (CHECKS.md, K_n).
    graph = nx.disjoint_union_all([nx.complete_graph(5)] * 3)
    values = spectrum(graph)
    np.testing.assert_allclose(values[:3], 0, atol=1e-12)
    np.testing.assert_allclose(values[3:], 5 / 4)
    only_components = choose_zone_count(values, candidates=range(2, 4), n_components=3)
    assert only_components.zones == 3
    assert only_components.evidence.empty
    ranked = choose_zone_count(values, n_components=3)
    assert ranked.evidence["zones"].min() == 4
    # A flat spectrum after the zeros has no gap: nothing to be confident about.
    assert ranked.confidence == "low"


def test_ncut_curve_agrees_on_a_ring_of_cliques() -> None:
    graph = nx.ring_of_cliques(6, 5)
    net = Network.from_networkx(graph, weight=None)
    calls = []

    def curve(k: int) -> float:
        # Ncut = sum over zones of cut / volume, with networkx's cut_size and volume.
        calls.append(k)
        labels = find_zones(net, k, rng=0).labels
        zones = [{int(v) for v in net.node_ids[labels == z]} for z in range(k)]
        return sum(nx.cut_size(graph, z) / nx.volume(graph, z) for z in zones)

    count = choose_zone_count(spectrum(graph), ncut_curve=curve)
    assert count.zones == 6
    # Checked k and k + 1 for the best NCUT_CHECKED candidates, each at most once.
    assert len(calls) == len(set(calls)) <= 2 * NCUT_CHECKED
    assert count.evidence["ncut"].notna().sum() == NCUT_CHECKED
    # Six 5-cliques in a ring: each zone has 2 outgoing links and volume 22 (algebra).
    row = count.evidence.set_index("zones").loc[6]
    assert row["ncut_per_zone"] == pytest.approx(2 / 22)
    assert row["ncut_jump"] == count.evidence["ncut_jump"].max()


def test_ncut_curve_that_strongly_disagrees_overrules() -> None:
    # Relative gaps (by hand): k=2 0.33, k=3 0.85, k=4 0.05, k=5 0.70, k=6 0.03, k=7 0.03.
    values = np.array([0.0, 0.02, 0.03, 0.2, 0.21, 0.7, 0.72, 0.74])
    gap_only = choose_zone_count(values)
    assert gap_only.zones == 3
    assert gap_only.evidence["relative_gap"].round(2).tolist() == [
        0.33,
        0.85,
        0.05,
        0.7,
        0.03,
        0.03,
    ]
    # Checked: k = 3, 5, 2 (curve read at 2..6). Jumps of the cut per zone:
    # k=3: (0.8/4)/(0.6/3) = 1.0; k=5: (3.0/6)/(0.5/5) = 5.0; k=2: (0.6/3)/(0.4/2) = 1.0.
    elbow_at_5 = {2: 0.4, 3: 0.6, 4: 0.8, 5: 0.5, 6: 3.0}
    overruled = choose_zone_count(values, ncut_curve=elbow_at_5.__getitem__)
    assert overruled.zones == 5
    assert overruled.confidence == "low"
    assert "k = 5 is taken" in overruled.reason
    # Jump 3.0 after k = 3 (1.6/4 over 0.4/3), 4.0 after k = 5: not twice, the gap stands.
    elbow_at_3 = {2: 0.3, 3: 0.4, 4: 1.6, 5: 0.5, 6: 2.4}
    kept = choose_zone_count(values, ncut_curve=elbow_at_3.__getitem__)
    assert kept.zones == 3
    assert kept.confidence == gap_only.confidence


def test_parse_zone_spec_forms() -> None:
    assert parse_zone_spec("12") == 12
    assert parse_zone_spec("auto") == "auto"
    assert parse_zone_spec(" AUTO ") == "auto"
    assert parse_zone_spec("8:20") == range(8, 21)
    assert parse_zone_spec("5:5") == range(5, 6)


@pytest.mark.parametrize(
    "text", ["", "0", "-3", "3.5", "twelve", "8:", ":20", "20:8", "1:5", "8:20:2", "8-20", "٣"]
)
def test_parse_zone_spec_errors_name_the_argument(text: str) -> None:
    # The library names its own argument; the command line adds "--zones" (test_cli.py).
    with pytest.raises(ParameterError) as info:
        parse_zone_spec(text)
    message = str(info.value)
    assert message.startswith("zones must be")
    assert (info.value.parameter, info.value.received) == ("zones", text)
    assert "12" in message
    assert "'auto'" in message
    assert "8:20" in message
    assert message.endswith(f"got {text!r}.")


def test_default_candidates() -> None:
    assert default_candidates(10_000) == range(2, DEFAULT_MAX_ZONES + 1)
    assert default_candidates(30) == range(2, 16)
    assert default_candidates(30, n_components=4) == range(5, 16)
    with pytest.raises(ParameterError, match="n_components"):
        default_candidates(3, n_components=4)


# ------------------------------------------------ pairs the auto count asks for
#: Networks with a planted count: networkx's planted partition (Condon and Karp's
#: model) and ring of cliques; the count is read as before with fewer pairs.
PLANTED = [
    pytest.param(lambda: nx.planted_partition_graph(4, 250, 0.05, 0.002, seed=1), 4, id="pp4"),
    pytest.param(lambda: nx.planted_partition_graph(6, 150, 0.08, 0.002, seed=2), 6, id="pp6"),
    pytest.param(lambda: nx.ring_of_cliques(8, 10), 8, id="ring8"),
]


@pytest.mark.parametrize(("build", "planted"), PLANTED)
def test_auto_count_grows_pairs_only_while_undecided(
    build: object, planted: int, monkeypatch: pytest.MonkeyPatch
) -> None:
    from specgraph.zones import _stages

    network = Network.from_networkx(build())  # type: ignore[operator]
    grown = find_zones(network, "auto", rng=0).decisions["zone_count"]
    monkeypatch.setattr(_stages, "count_decided", lambda *args, **kwargs: False)
    full = find_zones(network, "auto", rng=0).decisions["zone_count"]
    assert grown["choice"] == full["choice"] == planted
    assert grown["eigenpairs"] < full["eigenpairs"]
    # At most the count plus 10 pairs, or the reason why more were needed.
    if grown["eigenpairs"] > grown["choice"] + 10:
        assert "no count above" in grown["eigenpairs_reason"]
    assert f"{grown['eigenpairs']} eigenpairs computed" in grown["eigenpairs_reason"]


def test_count_decided_follows_the_ceiling_of_the_spectrum() -> None:
    # Normalized-Laplacian eigenvalues are at most 2 (Chung, Spectral Graph Theory,
    # Lemma 1.7): a later ratio is at most 2 / lambda_m.
    values = np.array([0.0, 0.01, 0.012, 0.013, 0.9, 0.95, 1.0])
    assert count_decided(values, range(2, 30))  # 0.9 / 0.013 >= 2 / 1.0
    assert not count_decided(values, range(2, 30), checked=3)  # 0.012 / 0.01 < 2
    flat = np.array([0.0, 0.1, 0.12, 0.14, 0.16, 0.18])
    assert not count_decided(flat, range(2, 30))  # 0.1 / ... ratios near 1.2 < 2 / 0.18
    assert count_decided(flat, range(2, 5))  # every candidate computed
    assert next_pair_count(flat, 51, range(2, 51)) == 51  # 1.2 * 4 * 0.18 < 2: cannot decide
    assert next_pair_count(values, 51, range(2, 51)) == 14  # 0.9/0.013 may clear 2/(4*1.0)
    assert next_pair_count(values, 9, range(2, 9)) == 9  # 14 >= 0.75 * 9: the full solve at once


def test_a_mesh_spectrum_goes_straight_to_the_full_solve() -> None:
    # The path P_n's normalized-Laplacian spectrum 1 - cos(pi k/(n-1)) (closed form,
    # Chung 1997, ch. 1 (from memory)): gap ratios near 1 + 2/k, never decided early, and
    # doubling 12 pairs could not change that, so the next solve is the full one.
    n = 400
    values = 1 - np.cos(np.pi * np.arange(12) / (n - 1))
    assert not count_decided(values, range(2, 51))
    assert next_pair_count(values, 51, range(2, 51)) == 51


def test_auto_count_says_in_figures_why_it_needed_more_pairs() -> None:
    # The path P_n has no clear count; its normalized Laplacian has eigenvalues
    # 1 - cos(pi j / (n - 1)), j = 0..n-1 (closed form: F. Chung, Spectral Graph
    # Theory, AMS 1997, Example 1.4). The first 12 pairs give the largest ratio
    # lambda_3 / lambda_2 at 2 zones, below 2 / lambda_12, the most a later count
    # could reach: the search must solve further and say so with those figures.
    n = 200
    lam = 1.0 - np.cos(np.pi * np.arange(n) / (n - 1))
    record = find_zones(Network.from_networkx(nx.path_graph(n)), "auto", rng=0).decisions[
        "zone_count"
    ]
    assert record["eigenpairs"] > record["choice"] + 10
    reason = record["eigenpairs_reason"]
    assert "more pairs were needed because" in reason
    assert f"({lam[2] / lam[1]:.3g}, at 2 zones)" in reason
    assert f"below {2.0 / lam[11]:.3g} (2 over the 12th eigenvalue)" in reason
