"""Stability over seeds and weight perturbations, checked against outside sources.

Sources: closed-form normalized-Laplacian spectra of the cycle and the torus
(CHECKS.md; Brouwer and Haemers, *Spectra of Graphs*, Springer 2012, ch. 1,
from memory for the section); networkx ``ring_of_cliques`` (planted truth),
``normalized_laplacian_matrix``; scipy ``csgraph.laplacian``; numpy's dense
2-norm; scikit-learn ``adjusted_rand_score``; brute force over all matchings on
tiny label vectors; exact fractions by hand.
"""

from __future__ import annotations

import ast
import inspect
import re
import subprocess
import sys
from dataclasses import FrozenInstanceError, replace
from fractions import Fraction
from itertools import permutations
from pathlib import Path
from typing import Any

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from scipy.sparse.csgraph import laplacian as csgraph_laplacian
from sklearn.metrics import adjusted_rand_score

import specgraph.diagnostics
import specgraph.studies
from specgraph import Network, find_zones, gallery
from specgraph.exceptions import ParameterError
from specgraph.studies import (
    CORE_CONFIDENCE,
    RESERVED_OPTIONS,
    ROTATION_WARNING,
    UNSTABLE_CORE_SHARE,
    ZoningOptions,
    match_zones,
    perturb_weights,
    perturbation_norm,
    stability,
)
from specgraph.studies._stability import _zone_figures

REPEATS = 3
#: Options for tests about the eigengap only (k-means restarts cost more than the rest).
QUICK = {"assign": "qr"}


def cliques(count: int, size: int) -> tuple[Network, np.ndarray]:
    """networkx ring_of_cliques and its planted truth (node i lies in clique i // size)."""
    graph = nx.ring_of_cliques(count, size)
    return Network.from_networkx(graph, weight=None), np.arange(count * size) // size


# ------------------------------------------------------------------ clear structure
@pytest.mark.parametrize(("count", "size"), [(4, 6), (3, 8)], ids=["4x6", "3x8"])
def test_planted_cliques_are_fully_stable(count: int, size: int) -> None:
    net, truth = cliques(count, size)
    result = stability(net, count, repeats=REPEATS, rng=0)
    # The planted partition is recovered exactly: ARI = 1 by scikit-learn.
    assert adjusted_rand_score(truth, result.reference.labels) == 1.0
    assert (result.nodes["confidence"] == 1.0).all()
    assert result.nodes["core"].all()
    assert not result.zones["unstable"].any()
    assert (result.runs["ari"] == 1.0).all()
    assert result.warnings == ()
    assert result.overall["zone_count_trustworthy"] is True
    # The gap the check reads is that of the dense spectrum (networkx matrix,
    # numpy eigvalsh), and it dwarfs 10% noise.
    dense = np.linalg.eigvalsh(
        nx.normalized_laplacian_matrix(nx.ring_of_cliques(count, size)).toarray()
    )
    row = result.bounds.iloc[0]
    assert row["eigenvalue"] == pytest.approx(dense[count - 1], abs=1e-6)
    assert row["next_eigenvalue"] == pytest.approx(dense[count], abs=1e-6)
    assert row["bound"] < ROTATION_WARNING


# ------------------------------------------------------------------ no structure
def ring_eigenvalue(n: int, j: int) -> float:
    """Normalized Laplacian of the cycle C_n: 1 - cos(2 pi j / n) (CHECKS.md)."""
    return 1.0 - np.cos(2.0 * np.pi * j / n)


# Sorted spectrum of C_n: 0, then each 1 - cos(2 pi j / n) twice (j = 1, 2, ...),
# so lambda_{2j} = lambda_{2j+1}: the gap after an even count is 0. On the
# torus C_m x C_m (spectrum: sums of two cycle spectra, divided by 4) the
# eigenvalue 1 - cos(2 pi / m) of the pairs (+-1, +-1) fills indices 5..8, so the
# gap after 7 zones is 0.
ZERO_GAP_CASES = [
    pytest.param(gallery.ring, (40,), 6, ring_eigenvalue(40, 3), id="ring40-k6"),
    pytest.param(gallery.grid, (8, 8), 7, ring_eigenvalue(8, 1), id="torus8x8-k7"),
]


@pytest.mark.parametrize(("build", "shape", "k", "closed"), ZERO_GAP_CASES)
def test_zero_gap_warns_with_closed_form_numbers(build, shape, k: int, closed: float) -> None:
    net = build(*shape, periodic=True) if build is gallery.grid else build(*shape)
    # The check reads the solve, not the assignment: the quick pivoted-QR one will do.
    result = stability(net, k, repeats=REPEATS, zone_options=QUICK, rng=1)
    found = [w for w in result.warnings if w.startswith("eigengap")]
    assert len(found) == 1
    pattern = rf"eigengap (\S+) after {k} zones \(lambda_{k} = (\S+), lambda_{k + 1} = (\S+)\)"
    match = re.match(pattern, found[0])
    assert match is not None, found[0]
    gap, lam, nxt = (float(x) for x in match.groups())
    assert gap == pytest.approx(0.0, abs=1e-6)  # closed form: 0
    assert lam == pytest.approx(closed, rel=1e-5)  # printed with 6 digits
    assert nxt == pytest.approx(closed, rel=1e-5)
    said = re.search(r"the perturbation (\S+) of 10% weight noise", found[0])
    assert said is not None, found[0]
    norm = float(said.group(1))
    assert norm == pytest.approx(result.bounds["perturbation_norm"].iloc[0], rel=1e-2)
    assert result.overall["zone_count_trustworthy"] is False
    assert result.overall["davis_kahan_bound"] == 1.0


def test_ring_odd_count_gap_is_closed_form() -> None:
    # After 7 zones on C_40 the gap is lambda(j=4) - lambda(j=3) (closed form).
    result = stability(gallery.ring(40), 7, repeats=REPEATS, zone_options=QUICK, rng=2)
    row = result.bounds.iloc[0]
    assert row["eigenvalue"] == pytest.approx(ring_eigenvalue(40, 3), abs=1e-7)
    assert row["next_eigenvalue"] == pytest.approx(ring_eigenvalue(40, 4), abs=1e-7)
    expected = ring_eigenvalue(40, 4) - ring_eigenvalue(40, 3)
    assert row["eigengap"] == pytest.approx(expected, abs=1e-7)
    assert row["bound"] == pytest.approx(row["perturbation_norm"] / expected, rel=1e-6)
    assert any(w.startswith("eigengap") for w in result.warnings) == (
        row["bound"] > ROTATION_WARNING
    )


# ------------------------------------------------------------------ perturbation
def test_perturb_weights_keeps_network_and_has_the_asked_spread() -> None:
    net = gallery.grid(30, 30)
    sized = Network(
        net.adjacency, net.node_ids, coordinates=net.coordinates, sizes=np.arange(900.0)
    )
    noisy = perturb_weights(sized, spread=0.2, rng=3)
    assert (noisy.adjacency != noisy.adjacency.T).nnz == 0
    assert np.array_equal(noisy.adjacency.indices, net.adjacency.indices)
    assert np.array_equal(noisy.node_ids, net.node_ids)
    assert noisy.sizes is not None
    assert sized.sizes is not None
    assert np.array_equal(noisy.sizes, sized.sizes)
    assert noisy.coordinates is not None
    assert net.coordinates is not None
    assert np.array_equal(noisy.coordinates, net.coordinates)
    logs = np.log(sp.triu(noisy.adjacency, k=1).data / sp.triu(net.adjacency, k=1).data)
    # log-factors are N(0, 0.2^2) by definition: with 1740 links the sample
    # standard deviation is within 2% (one sigma ~ 1/sqrt(2 n)), the mean within
    # 0.2 / sqrt(n) ~ 0.005; bounds at 5 to 6 sigma.
    assert logs.size == 1740
    assert np.std(logs) == pytest.approx(0.2, rel=0.1)
    assert abs(np.mean(logs)) < 0.025
    same = perturb_weights(net, spread=0.0, rng=3)
    assert np.array_equal(same.adjacency.data, net.adjacency.data)


def _regularized_dense(adjacency: np.ndarray) -> np.ndarray:
    """I - D_t^-1/2 (A + t/n 11^T) D_t^-1/2, t the mean degree (Qin and Rohe 2013)."""
    n = adjacency.shape[0]
    tau = adjacency.sum() / n
    a = adjacency + tau / n
    d = a.sum(axis=1)
    return np.eye(n) - a / np.sqrt(np.outer(d, d))


REFERENCE_OPERATORS = {
    # networkx normalized_laplacian_matrix
    "normalized": lambda a: nx.normalized_laplacian_matrix(nx.from_numpy_array(a)).toarray(),
    # scipy.sparse.csgraph.laplacian
    "combinatorial": lambda a: csgraph_laplacian(a),
    "regularized": _regularized_dense,
}


@pytest.mark.parametrize("kind", sorted(REFERENCE_OPERATORS))
def test_perturbation_norm_matches_dense_two_norm(kind: str, weighted_graph) -> None:
    net = Network.from_networkx(weighted_graph("gnm", 40, 5), weight="weight")
    noisy = perturb_weights(net, spread=0.2, rng=4)
    build = REFERENCE_OPERATORS[kind]
    dense = build(noisy.adjacency.toarray()) - build(net.adjacency.toarray())
    expected = np.linalg.norm(dense, 2)  # numpy's dense 2-norm (largest singular value)
    assert expected > 0
    assert perturbation_norm(net, noisy, kind=kind, rng=0) == pytest.approx(expected, rel=1e-3)


def test_perturbation_norm_restricted_to_a_component(weighted_graph) -> None:
    one = weighted_graph("gnm", 30, 6)
    two = weighted_graph("gnm", 25, 7)
    graph = nx.disjoint_union(one, two)  # nodes of `two` follow those of `one`
    net = Network.from_networkx(graph, weight="weight")
    noisy = perturb_weights(net, spread=0.3, rng=5)
    m = one.number_of_nodes()
    rows = np.arange(m, net.n_nodes)
    full = csgraph_laplacian(noisy.adjacency.toarray(), normed=True) - csgraph_laplacian(
        net.adjacency.toarray(), normed=True
    )
    expected = np.linalg.norm(full[np.ix_(rows, rows)], 2)
    got = perturbation_norm(net, noisy, nodes=rows, rng=0)
    assert got == pytest.approx(expected, rel=1e-3)


# ------------------------------------------------------------------ matching
def test_match_zones_exact_fractions_with_fewer_run_zones() -> None:
    reference = np.array([0, 0, 0, 0, 1, 1, 1, 2, 2])
    labels = np.array([1, 1, 1, 1, 0, 0, 0, 0, 0])  # zones 1 and 2 merged
    m = match_zones(reference, labels)
    # By hand: 0 -> 1 (overlap 4), 1 -> 0 (overlap 3), 2 unmatched.
    assert m.mapping.tolist() == [1, 0, -1]
    assert m.stayed.tolist() == [True] * 7 + [False] * 2
    assert [Fraction(x).limit_denominator(100) for x in m.jaccard] == [
        Fraction(1),
        Fraction(3, 5),  # |{4,5,6}| / |{4,...,8}|
        Fraction(0),
    ]


def test_match_zones_with_more_run_zones() -> None:
    reference = np.array([0, 0, 0, 0, 1, 1])
    labels = np.array([2, 2, 0, 0, 1, 1])  # zone 0 split in two
    m = match_zones(reference, labels)
    assert m.mapping[1] == 1
    assert m.overlap.tolist() == [2, 2]
    assert m.stayed.sum() == 4
    assert Fraction(m.jaccard[0]).limit_denominator(100) == Fraction(2, 4)


@pytest.mark.parametrize(("k_run", "seed"), [(2, 0), (3, 1), (4, 2), (4, 3)], ids=str)
def test_match_zones_total_overlap_is_brute_force_best(k_run: int, seed: int) -> None:
    rng = np.random.default_rng(seed)
    reference = rng.integers(0, 3, size=14)
    labels = rng.integers(0, k_run, size=14)
    table = np.zeros((3, k_run), dtype=int)
    np.add.at(table, (reference, labels), 1)
    # Brute force: every one-to-one matching of the smaller side into the larger.
    small, large = sorted((3, k_run))
    best = 0
    for image in permutations(range(large), small):
        pairs = zip(range(small), image, strict=True)
        total = sum(table[i, j] if small == 3 else table[j, i] for i, j in pairs)
        best = max(best, total)
    assert match_zones(reference, labels).stayed.sum() == best


def test_runs_with_other_zone_counts_than_the_reference() -> None:
    net, _ = cliques(4, 6)
    three = find_zones(net, 3, rng=0)
    # Closed reasoning: 3 zones on 4 equal cliques join two cliques (12 + 6 + 6).
    sizes = np.sort(np.bincount(three.labels))
    assert sizes.tolist() == [6, 6, 12]
    result = stability(net, 4, repeats=REPEATS, reference=three, rng=0)
    assert result.overall["zones"] == 3
    assert result.overall["zone_count_min"] == result.overall["zone_count_max"] == 4
    # Each run recovers the 4 cliques (ARI = 1 against the truth); the joined
    # zone keeps one clique, so 18 of 24 nodes stay in every run.
    assert (result.runs["stayed"] == 18 / 24).all()
    big = int(np.argmax(np.bincount(three.labels)))
    jaccard = result.zones.set_index("zone")["jaccard"]
    assert jaccard[big] == 0.5  # 6 / 12
    assert (jaccard.drop(big) == 1.0).all()


def test_unstable_zones_are_flagged() -> None:
    net, _ = cliques(4, 6)
    good = find_zones(net, 4, rng=0)
    # A reference that cuts across the cliques: zone = node mod 4. A clique of 6
    # consecutive nodes holds each residue at most twice, so whatever the
    # matching a reference zone keeps at most 2 of its 6 nodes: core share
    # <= 1/3 < UNSTABLE_CORE_SHARE for every zone.
    bad = replace(good, labels=np.arange(24) % 4)
    result = stability(net, 4, repeats=REPEATS, reference=bad, rng=0)
    assert (result.zones["core_share"] <= 1 / 3).all()
    assert result.zones["unstable"].all()
    assert result.overall["unstable_zones"] == [0, 1, 2, 3]
    assert result.warnings[0].startswith("4 of 4 zones are unstable")


def test_zone_figures_exact_fractions() -> None:
    reference = np.array([0, 0, 0, 0, 1, 1])
    confidence = np.array([1.0, 0.8, 0.5, 0.5, 0.7, 0.2])
    table = _zone_figures(reference, confidence, np.array([0.75, 0.25]))
    # By hand: zone 0 mean 2.8 / 4, core {1.0, 0.8} = 2 / 4 (>= CORE_CONFIDENCE);
    # zone 1 mean 0.9 / 2, core none.
    assert (CORE_CONFIDENCE, UNSTABLE_CORE_SHARE) == (0.8, 0.5)
    assert table["confidence"].tolist() == pytest.approx([0.7, 0.45])
    assert table["core_share"].tolist() == [0.5, 0.0]
    assert table["unstable"].tolist() == [False, True]
    assert table["nodes"].tolist() == [4, 2]


# ------------------------------------------------------------------ determinism, API
def test_same_rng_gives_the_same_result() -> None:
    net = gallery.grid(5, 6)
    first = stability(net, 3, repeats=2, rng=7)
    second = stability(net, 3, repeats=2, rng=np.random.default_rng(7))
    for name in ("nodes", "zones", "runs", "bounds"):
        pd.testing.assert_frame_equal(getattr(first, name), getattr(second, name))
    assert first.overall == second.overall
    assert first.warnings == second.warnings


def test_reference_is_find_zones_with_the_same_seed() -> None:
    net = gallery.grid(5, 6)
    options: dict[str, Any] = {"assign": "kmeans"}
    result = stability(net, 3, repeats=1, zone_options=options, rng=11)
    alone = find_zones(net, 3, rng=11, **options)
    assert np.array_equal(result.reference.labels, alone.labels)
    assert result.reference.decisions["assign"]["choice"] == "kmeans"
    assert result.runs["kind"].tolist() == ["seed", "perturbed"]


@pytest.mark.parametrize(
    ("options", "message"),
    [
        ({"repeats": 0}, "repeats must be an integer >= 1"),
        ({"spread": -0.1}, "spread must be a finite number >= 0"),
        ({"zone_options": {"rng": 1}}, "zone_options must not hold 'rng'"),
        ({"zone_options": {"colour": 1}}, "zone_options keys must be find_zones options"),
        ({"reference": "zones.csv"}, "reference must be a Zoning"),
        ({"reference": find_zones(gallery.ring(6), 2, rng=0)}, "reference must be a zoning of"),
    ],
    ids=["repeats", "spread", "rng-option", "unknown-option", "not-zoning", "other-network"],
)
def test_bad_parameters_are_named(options: dict, message: str) -> None:
    with pytest.raises(ParameterError, match=re.escape(message)):
        stability(gallery.ring(8), 2, **options)


# ------------------------------------------------------------------ options object
def test_zoning_options_defaults_are_find_zones_defaults() -> None:
    # Source: find_zones' own signature; every option but the network, count and rng.
    signature = inspect.signature(find_zones).parameters
    expected = {name: p.default for name, p in signature.items() if name not in RESERVED_OPTIONS}
    assert ZoningOptions().keywords() == expected


@pytest.mark.parametrize(
    ("name", "value"),
    [
        ("operator", "laplace"),
        ("assign", "spectral"),
        ("trees", "drop"),
        ("eigen_method", "arpack"),
        ("refine", "yes"),
        ("damping", 1.5),
        ("tol", -1.0),
        ("maxiter", 0),
    ],
)
def test_zoning_options_refuse_what_find_zones_refuses(name: str, value: object) -> None:
    # Oracle: find_zones' own message for the same value.
    with pytest.raises(ParameterError) as direct:
        find_zones(gallery.ring(8), 2, rng=0, **{name: value})
    with pytest.raises(ParameterError) as held:
        ZoningOptions(**{name: value})
    assert str(held.value) == str(direct.value)


def test_zoning_options_are_frozen_and_typed_checks_name_the_field() -> None:
    options = ZoningOptions(assign="qr")
    with pytest.raises(FrozenInstanceError):
        options.assign = "kmeans"  # type: ignore[misc]
    with pytest.raises(ParameterError, match="constraints must be a ZoneConstraints"):
        ZoningOptions(constraints={"min_size": 3})  # type: ignore[arg-type]
    with pytest.raises(ParameterError, match="progress must be callable"):
        ZoningOptions(progress="bar")  # type: ignore[arg-type]


def test_options_object_and_dict_give_the_same_study() -> None:
    net = gallery.grid(5, 6)
    as_dict = stability(net, 3, repeats=1, zone_options={"assign": "qr"}, rng=4)
    as_object = stability(net, 3, repeats=1, zone_options=ZoningOptions(assign="qr"), rng=4)
    for name in ("nodes", "zones", "runs", "bounds"):
        pd.testing.assert_frame_equal(getattr(as_dict, name), getattr(as_object, name))
    assert as_dict.reference.decisions["assign"]["choice"] == "qr"


# ------------------------------------------------------------------ layering
def _imported_modules(path: Path, package: str) -> set[str]:
    """Absolute names of every module imported anywhere in a file (functions included)."""
    names = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            base = package.split(".")
            base = base[: len(base) - node.level + 1] if node.level else []
            module = ".".join([*base, *([node.module] if node.module else [])])
            names.add(module)
            names.update(f"{module}.{alias.name}" for alias in node.names)
    return names


def test_diagnostics_never_imports_zones_or_studies() -> None:
    folder = Path(specgraph.diagnostics.__file__).parent
    for path in sorted(folder.glob("*.py")):
        above = {
            name
            for name in _imported_modules(path, "specgraph.diagnostics")
            if name.startswith(("specgraph.zones", "specgraph.studies"))
        }
        assert not above, f"{path.name} imports {sorted(above)}"
    # At run time too: load specgraph.diagnostics without the top package's
    # __init__ (which imports every stage) and look at sys.modules.
    code = (
        "import sys, types; "
        f"pkg = types.ModuleType('specgraph'); pkg.__path__ = [{str(folder.parent)!r}]; "
        "sys.modules['specgraph'] = pkg; "
        "import specgraph.diagnostics; "
        "print(sorted(m for m in sys.modules if m.startswith(('specgraph.zones', "
        "'specgraph.studies'))))"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert done.stdout.strip() == "[]", done.stdout + done.stderr


def test_studies_import_zoning_from_its_public_package() -> None:
    folder = Path(specgraph.studies.__file__).parent
    imported = set().union(
        *(_imported_modules(p, "specgraph.studies") for p in folder.glob("*.py"))
    )
    private = {n for n in imported if re.match(r"specgraph\.(zones|diagnostics|eigen)\._", n)}
    assert not private
    assert "specgraph.zones.find_zones" in imported
