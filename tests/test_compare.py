"""``compare`` and ``compare_frames`` against scikit-learn, direct formulas and brute force.

Sources: scikit-learn ``adjusted_rand_score`` and ``normalized_mutual_info_score``
(arithmetic-mean normalization, its default); variation of information and its
properties from M. Meila, "Comparing clusterings: an information based distance",
J. Multivariate Anal. 98:873-895, 2007 (VI(A, A) = 0, symmetry, triangle inequality,
VI <= log n with equality for one zone against all singletons).
"""

from __future__ import annotations

from collections import Counter
from itertools import permutations

import numpy as np
import pytest
from sklearn.metrics import adjusted_rand_score, normalized_mutual_info_score

from specgraph.diagnostics import _compare
from specgraph.diagnostics._compare import SPLIT_SHARE, compare, compare_frames
from specgraph.exceptions import InputError, ParameterError


def random_labels(n: int, k: int, seed: int, *, offset: int = 0) -> np.ndarray:
    """Random zones ``offset + 3 * (0..k-1)`` (non-consecutive numbers)."""
    return offset + 3 * np.random.default_rng(seed).integers(0, k, size=n)


def entropy(counts: list[int] | np.ndarray) -> float:
    p = np.asarray(counts, dtype=float)
    p = p[p > 0] / p.sum()
    return float(-(p * np.log(p)).sum())


def direct_vi(a: np.ndarray, b: np.ndarray) -> float:
    """VI = 2 H(A,B) - H(A) - H(B) (Meila 2007, eq. 20 with I = H(A) + H(B) - H(A,B))."""
    joint = Counter(zip(a.tolist(), b.tolist(), strict=True))
    return (
        2 * entropy(list(joint.values()))
        - entropy(list(Counter(a.tolist()).values()))
        - entropy(list(Counter(b.tolist()).values()))
    )


PAIRS = [
    pytest.param(n, ka, kb, seed, id=f"n{n}-ka{ka}-kb{kb}-seed{seed}")
    for n, ka, kb in ((12, 2, 3), (30, 4, 4), (50, 6, 3), (80, 1, 5))
    for seed in (0, 1)
]


@pytest.mark.parametrize(("n", "ka", "kb", "seed"), PAIRS)
def test_indices_match_sklearn_and_direct_vi(n: int, ka: int, kb: int, seed: int):
    a = random_labels(n, ka, seed, offset=7)
    b = random_labels(n, kb, seed + 100)
    result = compare(a, b)
    assert result.adjusted_rand == pytest.approx(adjusted_rand_score(a, b), abs=1e-12)
    assert result.nmi == pytest.approx(normalized_mutual_info_score(a, b), abs=1e-12)
    assert result.variation_of_information == pytest.approx(direct_vi(a, b), abs=1e-12)
    assert result.normalized_vi == pytest.approx(direct_vi(a, b) / np.log(n), abs=1e-12)
    assert result.nodes_compared == n
    assert result.only_in_a == result.only_in_b == 0


@pytest.mark.parametrize("seed", range(6))
def test_vi_is_a_metric_bounded_by_log_n(seed: int):
    rng = np.random.default_rng(seed)
    n = 40
    a, b, c = (rng.integers(0, rng.integers(1, 8), size=n) for _ in range(3))

    def vi(x: np.ndarray, y: np.ndarray) -> float:
        return compare(x, y).variation_of_information

    # Meila 2007: VI is a metric on zonings, and VI <= log n.
    assert vi(a, a) == 0.0
    assert vi(a, b) == pytest.approx(vi(b, a), abs=1e-12)
    assert vi(a, c) <= vi(a, b) + vi(b, c) + 1e-12
    assert vi(a, b) <= np.log(n) + 1e-12


def test_vi_reaches_log_n_for_one_zone_against_singletons():
    n = 17
    result = compare(np.zeros(n, dtype=int), np.arange(n))
    # Meila 2007: the bound log n is met by these two zonings.
    assert result.variation_of_information == pytest.approx(np.log(n), rel=1e-14)
    assert result.normalized_vi == pytest.approx(1.0, rel=1e-14)


def test_identical_zonings_up_to_renumbering():
    a = random_labels(60, 5, 3)
    result = compare(a, 100 - a)
    assert result.adjusted_rand == pytest.approx(1.0)
    assert result.nmi == pytest.approx(1.0)
    assert result.variation_of_information == 0.0
    assert result.splits.empty
    assert result.merges.empty
    assert result.matched_share == 1.0
    assert (result.matched["zone_a"] + result.matched["zone_b"] == 100).all()


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_overlap_table_counts_every_pair(seed: int):
    a = random_labels(70, 4, seed)
    b = random_labels(70, 5, seed + 10, offset=1)
    overlap = compare(a, b).overlap
    # Brute force: count each (zone of A, zone of B) pair of the nodes.
    joint = Counter(zip(a.tolist(), b.tolist(), strict=True))
    got = {(za, zb): n for za, zb, n in overlap[["zone_a", "zone_b", "nodes"]].to_numpy().tolist()}
    assert got == dict(joint)
    size_a, size_b = Counter(a.tolist()), Counter(b.tolist())
    for za, zb, n, share_a, share_b in overlap.to_numpy().tolist():
        assert share_a == pytest.approx(n / size_a[za])
        assert share_b == pytest.approx(n / size_b[zb])


def test_splits_and_merges_by_hand():
    # A zone 0 (20 nodes): 18 in B 5, 2 in B 6 -> 2/20 = SPLIT_SHARE exactly: a split.
    # A zone 1 (20 nodes): 19 in B 6, 1 in B 5 -> 1/20 is below SPLIT_SHARE: no split.
    # A zone 2 (10 nodes): all in B 6 -> B 6 gathers A 1 (19/31) and A 2 (10/31).
    assert SPLIT_SHARE == 0.10
    a = np.repeat([0, 1, 2], [20, 20, 10])
    b = np.concatenate([[5] * 18, [6] * 2, [6] * 19, [5], [6] * 10])
    result = compare(a, b)
    assert result.splits.to_dict("records") == [
        {"zone_a": 0, "pieces": 2, "zones_b": "5, 6", "shares": "0.900, 0.100"}
    ]
    assert result.merges.to_dict("records") == [
        {"zone_b": 6, "pieces": 2, "zones_a": "1, 2", "shares": "0.613, 0.323"}
    ]


def best_total_by_brute_force(a: np.ndarray, b: np.ndarray) -> int:
    """Largest total overlap of a one-to-one pairing, over every injection."""
    za, zb = np.unique(a), np.unique(b)
    table = np.array([[np.sum((a == x) & (b == y)) for y in zb] for x in za])
    if table.shape[0] > table.shape[1]:
        table = table.T
    rows = range(table.shape[0])
    return max(
        sum(table[r, c] for r, c in zip(rows, cols, strict=False))
        for cols in permutations(range(table.shape[1]), table.shape[0])
    )


@pytest.mark.parametrize("dense_limit", [_compare.MATCH_DENSE_CELLS, 0], ids=["dense", "sparse"])
@pytest.mark.parametrize("seed", range(5))
def test_matching_is_optimal(monkeypatch, seed: int, dense_limit: int):
    monkeypatch.setattr(_compare, "MATCH_DENSE_CELLS", dense_limit)
    rng = np.random.default_rng(seed)
    n = 60
    a = rng.integers(0, rng.integers(2, 6), size=n)
    b = rng.integers(0, rng.integers(2, 6), size=n)
    # Some overlap groups of their own: nodes 0..9 in a pair of private zones.
    a[:10], b[:10] = 50, 60
    a[10:14], b[10:14] = 51, np.array([61, 61, 62, 62])
    matched = compare(a, b).matched
    assert matched["zone_a"].is_unique
    assert matched["zone_b"].is_unique
    assert matched["nodes"].sum() == best_total_by_brute_force(a, b)
    pairs = set(zip(matched["zone_a"], matched["zone_b"], strict=True))
    assert (50, 60) in pairs
    assert len(pairs & {(51, 61), (51, 62)}) == 1


def test_unassigned_nodes_are_left_out_and_counted():
    a = np.array([0, 0, 1, 1, -1, 2, 2])
    b = np.array([4, -1, 4, 5, 5, 5, -1])
    result = compare(a, b)
    common = (a >= 0) & (b >= 0)
    assert result.nodes_compared == int(common.sum())
    assert (result.only_in_a, result.only_in_b) == (2, 1)
    assert result.examples_only_in_a == ("1", "6")
    assert result.examples_only_in_b == ("4",)
    assert result.adjusted_rand == pytest.approx(adjusted_rand_score(a[common], b[common]))


def test_weights_measure_shares_in_size():
    a = np.array([0, 0, 0, 1])
    b = np.array([0, 0, 1, 1])
    result = compare(a, b, weights=[1.0, 1.0, 8.0, 2.0])
    assert result.measure == "size"
    first = result.overlap.iloc[0]
    assert (first["nodes"], first["size"], first["share_of_a"]) == (2, 2.0, 0.2)
    # Zone 0 of A lies 80% in B 1 by size, so it is matched with B 1 and B 0 with nothing.
    assert result.matched[["zone_a", "zone_b", "size"]].to_numpy().tolist() == [[0, 1, 8.0]]
    assert result.matched_share == pytest.approx(8.0 / 12.0)


def test_compare_frames_uses_common_nodes():
    a = {f"n{i}": i % 3 for i in range(20)}
    b = {f"n{i}": i % 4 for i in range(5, 30)}
    result = compare_frames(a, b)
    common = [f"n{i}" for i in range(5, 20)]
    expected = compare([a[c] for c in common], [b[c] for c in common])
    assert result.nodes_compared == 15
    assert result.adjusted_rand == expected.adjusted_rand
    assert result.overlap.equals(expected.overlap)
    assert (result.only_in_a, result.only_in_b) == (5, 10)
    assert result.examples_only_in_a == ("n0", "n1", "n2", "n3", "n4")
    assert result.examples_only_in_b[:2] == ("n20", "n21")
    assert len(result.examples_only_in_b) == 5
    assert result.summary()["only_in_b"] == 10


def test_compare_frames_without_common_nodes():
    with pytest.raises(InputError, match="share no node"):
        compare_frames({"a": 1}, {"b": 1})


@pytest.mark.parametrize(
    ("a", "b", "kwargs", "pattern"),
    [
        ([0, 1], [0, 1, 1], {}, "labels_b must have the length"),
        ([0.5, 1.0], [0, 1], {}, "labels_a must hold integer"),
        ([0, 1], [0, -3], {}, "labels_b must hold zone numbers"),
        ([0, 1], [0, 1], {"weights": [1.0, -1.0]}, "weights must hold 2"),
    ],
    ids=["lengths", "float", "negative", "weights"],
)
def test_bad_parameters(a: list, b: list, kwargs: dict, pattern: str):
    with pytest.raises(ParameterError, match=pattern):
        compare(a, b, **kwargs)


def test_nothing_in_common():
    with pytest.raises(InputError, match="no node is in a zone in both"):
        compare([0, -1], [-1, 0])
