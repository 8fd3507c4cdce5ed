"""smallest_eigenpairs against closed-form spectra and scipy.linalg.eigh.

Sources of the expected values:

* closed-form Laplacian spectra: A. E. Brouwer and W. H. Haemers, *Spectra of
  Graphs*, Springer 2012, ch. 1 (from memory for section numbers); F. Chung,
  *Spectral Graph Theory*, AMS 1997, ch. 1 (from memory); listed in
  /work/shared/CHECKS.md;
* dense reference: ``scipy.linalg.eigh`` (LAPACK);
* error ratios: Reference-LAPACK TESTING/EIG, dsyt22/dstt22 and the THRESH of
  the sep.in/dtest.in inputs (30 to 60) (from memory per CHECKS.md);
* ARPACK comparisons at about 2000 eps: scipy's own tests in
  sparse/linalg/_eigen/arpack/tests (from memory per CHECKS.md).
"""

from __future__ import annotations

from collections.abc import Callable

import networkx as nx
import numpy as np
import pytest
import scipy.linalg as la
import scipy.sparse as sp
from closed_forms import (
    bipartite_l,
    bipartite_n,
    complete_l,
    complete_n,
    cycle_l,
    cycle_n,
    grid_l,
    hypercube_l,
    path_l,
    path_n,
    star_l,
    star_n,
    torus_l,
)
from scipy.sparse.csgraph import connected_components, reverse_cuthill_mckee
from scipy.sparse.linalg import eigsh, splu

from specgraph import ConvergenceError, EigenResult, Network, gallery, laplacian
from specgraph import smallest_eigenpairs as solve
from specgraph.eigen import DENSE_LIMIT, _cost
from specgraph.eigen._api import SIGN_TIE_ULPS, _fix_signs
from specgraph.eigen._lanczos import factorize
from specgraph.exceptions import ParameterError

EPS = np.finfo(np.float64).eps
#: LAPACK test threshold on the scaled ratios (sep.in uses 30 to 60; we take
#: the strict end).
THRESH = 30.0
#: scipy's ARPACK tests accept eigenvalues within about 2000 eps of eigh's.
ARPACK_EPS_FACTOR = 2000.0
#: Eigenvalue agreement with a closed form, relative to the norm bound (the brief's
#: ~1e-8; far above rounding, far below any gap of the spectra used here).
CLOSED_FORM_RTOL = 1e-8
METHODS = ["dense", "lanczos", "multilevel"]


def bipartite_network() -> Network:
    return Network.from_networkx(nx.complete_bipartite_graph(40, 60))


#: name -> (network builder, {kind: closed-form spectrum}); sizes big enough for
#: the sparse path to be exercised (a few hundred to ~1200 nodes).
CLOSED_FORM: dict[str, tuple[Callable[[], Network], dict[str, Callable[[], np.ndarray]]]] = {
    "path300": (
        lambda: gallery.path(300),
        {"combinatorial": lambda: path_l(300), "normalized": lambda: path_n(300)},
    ),
    "cycle400": (
        lambda: gallery.ring(400),
        {"combinatorial": lambda: cycle_l(400), "normalized": lambda: cycle_n(400)},
    ),
    "complete300": (
        lambda: gallery.complete(300),
        {"combinatorial": lambda: complete_l(300), "normalized": lambda: complete_n(300)},
    ),
    "bipartite40x60": (
        bipartite_network,
        {"combinatorial": lambda: bipartite_l(40, 60), "normalized": lambda: bipartite_n(40, 60)},
    ),
    "star300": (
        lambda: gallery.star(300),
        {"combinatorial": lambda: star_l(300), "normalized": lambda: star_n(300)},
    ),
    "hypercube8": (
        lambda: gallery.hypercube(8),
        {"combinatorial": lambda: hypercube_l(8), "normalized": lambda: hypercube_l(8) / 8},
    ),
    "grid30x40": (
        lambda: gallery.grid(30, 40),
        {"combinatorial": lambda: grid_l(30, 40)},  # N has no closed form (irregular degrees)
    ),
    "torus20x25": (
        lambda: gallery.grid(20, 25, periodic=True),
        {"combinatorial": lambda: torus_l(20, 25), "normalized": lambda: torus_l(20, 25) / 4},
    ),
}
CLOSED_FORM_CASES = [
    pytest.param(name, kind, method, id=f"{name}-{kind}-{method}")
    for name, (_, spectra) in CLOSED_FORM.items()
    for kind in spectra
    for method in METHODS
]
#: Pairs asked of every closed-form case: reaches into repeated eigenvalues
#: (cycles, torus, K_n, K_{m,n}, star, Q_8) and cuts some multiplets at the edge.
K_CLOSED = 10


# ----------------------------------------------------------------- helpers
def residual_ratio(matrix: np.ndarray, result: EigenResult) -> float:
    """LAPACK dsyt22-style ||M V - V Lambda|| / (||M|| m eps)."""
    v, lam = result.vectors, result.values
    return la.norm(matrix @ v - v * lam, 2) / (la.norm(matrix, 2) * v.shape[1] * EPS)


def orthogonality_ratio(vectors: np.ndarray) -> float:
    """LAPACK dsyt22-style ||I - V^T V|| / (m eps)."""
    m = vectors.shape[1]
    return la.norm(np.eye(m) - vectors.T @ vectors, 2) / (m * EPS)


def distinct_clusters(values: np.ndarray, tol: float) -> list[tuple[int, int]]:
    """Index ranges [lo, hi) of runs of sorted values equal within ``tol``."""
    edges = np.flatnonzero(np.diff(values) > tol) + 1
    bounds = np.r_[0, edges, values.size]
    return list(zip(bounds[:-1].tolist(), bounds[1:].tolist(), strict=True))


def assert_eigenspaces_match(
    matrix: np.ndarray, result: EigenResult, spectrum: np.ndarray, norm: float
) -> None:
    """Computed vectors of each eigenvalue lie in eigh's eigenspace of that eigenvalue.

    Compared as subspaces with scipy.linalg.subspace_angles, since single
    vectors of a repeated eigenvalue are arbitrary (CHECKS.md). The allowed
    angle is the Davis-Kahan sin-theta bound ||R|| / gap (Davis and Kahan,
    SIAM J. Numer. Anal. 7, 1970 (from memory)) for the computed block and for
    the reference block, with the gap halved to cover the perturbed Ritz values.
    """
    full = np.sort(spectrum)
    tol = CLOSED_FORM_RTOL * norm
    clusters = distinct_clusters(full, tol)
    k = result.values.size
    hi_needed = max(hi for lo, hi in clusters if lo < k)
    ref_values, ref_vectors = la.eigh(matrix, subset_by_index=[0, hi_needed - 1])
    for lo, hi in clusters:
        if lo >= k:
            break
        value = full[lo]
        mine = np.flatnonzero(np.abs(result.values - value) <= tol)
        assert mine.size == min(hi, k) - lo
        others = np.r_[full[:lo], full[hi:]]
        gap = np.abs(others - value).min() if others.size else norm
        block, ref_block = result.vectors[:, mine], ref_vectors[:, lo:hi]
        r_mine = la.norm(matrix @ block - block * result.values[mine], 2)
        r_ref = la.norm(matrix @ ref_block - ref_block * ref_values[lo:hi], 2)
        bound = (r_mine + r_ref) / (0.5 * gap)
        angles = la.subspace_angles(block, ref_block)
        assert np.sin(angles).max() <= bound, (value, angles.max(), bound)


def random_walk_matrix(adjacency: np.ndarray) -> np.ndarray:
    """I - D^-1 A built directly from the adjacency (Shi and Malik 2000)."""
    return np.eye(adjacency.shape[0]) - adjacency / adjacency.sum(axis=1)[:, None]


# ----------------------------------------------------- 1. closed-form spectra
@pytest.mark.parametrize(("name", "kind", "method"), CLOSED_FORM_CASES)
def test_closed_form_spectrum(name: str, kind: str, method: str) -> None:
    build, spectra = CLOSED_FORM[name]
    net = build()
    spectrum = spectra[kind]()
    assert spectrum.size == net.n_nodes  # guards the star_graph(n) = n+1 nodes pitfall
    op = laplacian(net, kind=kind)
    result = solve(op, K_CLOSED, method=method, rng=0)
    assert result.converged
    expected = np.sort(spectrum)[:K_CLOSED]
    np.testing.assert_allclose(
        result.values, expected, rtol=0, atol=CLOSED_FORM_RTOL * op.norm_bound
    )
    assert_eigenspaces_match(op.matrix.toarray(), result, spectrum, op.norm_bound)


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize(
    ("build", "spectrum"),
    [
        pytest.param(lambda: gallery.path(300), lambda: path_n(300), id="path300"),
        pytest.param(bipartite_network, lambda: bipartite_n(40, 60), id="bipartite40x60"),
        pytest.param(lambda: gallery.star(300), lambda: star_n(300), id="star300"),
    ],
)
def test_random_walk_spectrum_and_vectors(build, spectrum, method: str) -> None:
    net = build()
    op = laplacian(net, kind="random_walk")
    tol = 1e-10
    result = solve(op, K_CLOSED, method=method, tol=tol, rng=1)
    # P = I - D^-1 A is similar to N: same eigenvalues (Chung 1997, ch. 1 (from memory)).
    np.testing.assert_allclose(
        result.values, np.sort(spectrum())[:K_CLOSED], rtol=0, atol=CLOSED_FORM_RTOL * 2
    )
    adjacency = net.adjacency.toarray()
    walk = random_walk_matrix(adjacency)
    v = result.vectors
    np.testing.assert_allclose(np.linalg.norm(v, axis=0), 1.0, rtol=1e-13)
    # v = D^-1/2 u / ||D^-1/2 u|| turns a residual r of N into one of at most
    # sqrt(d_max / d_min) ||r|| for P; ||r|| <= tol * norm_bound.
    d = adjacency.sum(axis=1)
    bound = np.sqrt(d.max() / d.min()) * tol * op.norm_bound
    assert np.linalg.norm(walk @ v - v * result.values, axis=0).max() <= bound


def test_fiedler_value_of_path10() -> None:
    # Algebraic connectivity of P_10 = 2 - 2 cos(pi/10) = 0.0978870 (Fiedler 1973,
    # from memory), also networkx.algebraic_connectivity.
    result = solve(laplacian(gallery.path(10), kind="combinatorial"), 2, method="dense")
    assert result.values[1] == pytest.approx(0.0978870, abs=5e-8)
    reference = nx.algebraic_connectivity(nx.path_graph(10), method="tracemin_lu", tol=1e-12)
    assert result.values[1] == pytest.approx(reference, rel=1e-9)


# --------------------------------------- 2. random weighted graphs vs eigh
WIDE_CASES = [
    pytest.param(graph, seed, kind, id=f"{graph}-seed{seed}-{kind}")
    for graph in ["gnm", "geometric"]
    for seed in (0, 1, 2)
    for kind in ["combinatorial", "normalized"]
]


def wide_weight_operator(weighted_graph, graph: str, seed: int, kind: str):
    # Weights log-uniform over 1e-8 .. 1e8: sixteen orders of magnitude.
    g = weighted_graph(graph, 150, seed, low=1e-8, high=1e8, log_uniform=True)
    op = laplacian(Network.from_networkx(g), kind=kind)
    return op, op.matrix.toarray()


@pytest.mark.parametrize(("graph", "seed", "kind"), WIDE_CASES)
def test_dense_meets_lapack_test_ratios(weighted_graph, graph: str, seed: int, kind: str) -> None:
    op, matrix = wide_weight_operator(weighted_graph, graph, seed, kind)
    k = 8
    result = solve(op, k, method="dense")
    assert residual_ratio(matrix, result) <= THRESH
    assert orthogonality_ratio(result.vectors) <= THRESH
    reference = la.eigvalsh(matrix, subset_by_index=[0, k - 1])
    # Both solves are backward stable, so by Weyl's theorem they agree to a few
    # eps ||M|| however small the eigenvalue (common practice).
    scaled = np.abs(result.values - reference) / (la.norm(matrix, 2) * k * EPS)
    assert scaled.max() <= THRESH


@pytest.mark.parametrize(("graph", "seed", "kind"), WIDE_CASES)
def test_lanczos_matches_eigh(weighted_graph, graph: str, seed: int, kind: str) -> None:
    op, matrix = wide_weight_operator(weighted_graph, graph, seed, kind)
    k = 8
    tol = 1e-6
    result = solve(op, k, method="lanczos", tol=tol, rng=seed)
    v, lam = result.vectors, result.values
    raw = np.linalg.norm(matrix @ v - v * lam, axis=0)
    recomputed = raw / op.norm_bound
    assert recomputed.max() <= tol
    np.testing.assert_allclose(result.residuals, recomputed, rtol=0, atol=4 * EPS)
    ref_values = la.eigvalsh(matrix)
    norm = la.norm(matrix, 2)
    # Tolerance honest for weights over 16 orders of magnitude: measured
    # against ||M||, never against lambda. Tiny eigenvalues (~1e-8 of ||M||)
    # cannot be resolved relatively by any backward-stable solver; absolutely
    # each Ritz value lies within ||r|| of an eigenvalue, and within ||r||^2/gap
    # when isolated (Kato-Temple; Parlett, The Symmetric Eigenvalue Problem,
    # ch. 10-11 (from memory)), on top of eigh's own ~eps ||M||.
    for i in range(k):
        others = np.delete(ref_values, i)
        gap = np.abs(others - ref_values[i]).min()
        allowed = ARPACK_EPS_FACTOR * EPS * norm + min(raw[i], raw[i] ** 2 / max(gap, 1e-300))
        assert abs(lam[i] - ref_values[i]) <= allowed, (i, lam[i], ref_values[i])
    # Orthonormality: ARPACK's Ritz vectors are orthonormal to rounding; after
    # deflating the null vector the loss is of the order of the residual over
    # the gap, which ``tol`` bounds (Davis-Kahan).
    assert la.norm(np.eye(k) - v.T @ v, 2) <= tol


# ----------------------------------------------------- 3. disconnected graphs
def disconnected_network() -> tuple[Network, list[np.ndarray]]:
    """Path P_7, cycle C_9, an isolated node, K_4, another isolated node (block diagonal)."""
    blocks = [
        nx.to_scipy_sparse_array(nx.path_graph(7)),
        nx.to_scipy_sparse_array(nx.cycle_graph(9)),
        sp.csr_array((1, 1)),
        nx.to_scipy_sparse_array(nx.complete_graph(4)),
        sp.csr_array((1, 1)),
    ]
    adjacency = sp.block_diag(blocks, format="csr")
    return Network.from_scipy(adjacency), [b.toarray() for b in blocks]


def expected_null_vectors(adjacency: np.ndarray, kind: str) -> np.ndarray:
    """One column per component: normalized indicator (L) or D^1/2 1 on it (N)."""
    count, labels = connected_components(sp.csr_array(adjacency), directed=False)
    d = adjacency.sum(axis=1)
    columns = []
    for c in range(count):
        inside = labels == c
        if kind == "normalized" and d[inside].sum() > 0:
            w = np.where(inside, np.sqrt(d), 0.0)
        else:
            w = inside.astype(float)  # L: indicator; isolated node: unit vector
        columns.append(w / np.linalg.norm(w))
    return np.column_stack(columns)


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("kind", ["combinatorial", "normalized"])
def test_zero_multiplicity_and_null_vectors(kind: str, method: str) -> None:
    net, _ = disconnected_network()
    adjacency = net.adjacency.toarray()
    expected = expected_null_vectors(adjacency, kind)
    c = expected.shape[1]
    assert c == 5
    op = laplacian(net, kind=kind)
    result = solve(op, c + 3, method=method, rng=0)
    # Eigenvalue 0 has multiplicity exactly c (Chung 1997, Lemma 1.7 (from memory)).
    scipy_values = la.eigvalsh(op.matrix.toarray())
    assert np.sum(np.abs(scipy_values) <= 1e-12) == c
    assert np.all(result.values[:c] == 0.0)  # exact: from the null basis
    assert np.all(result.values[c:] > 1e-3)
    np.testing.assert_allclose(result.values, scipy_values[: c + 3], rtol=0, atol=1e-12)
    # Each expected null vector is one of the first c columns (up to order).
    overlap = np.abs(expected.T @ result.vectors[:, :c])
    np.testing.assert_allclose(np.sort(overlap.max(axis=1)), np.ones(c), rtol=0, atol=1e-14)
    np.testing.assert_allclose(
        result.vectors[:, :c] @ result.vectors[:, :c].T, expected @ expected.T, rtol=0, atol=1e-14
    )


@pytest.mark.parametrize("method", METHODS)
def test_random_walk_null_vectors_have_unit_norm(method: str) -> None:
    # smallest_eigenpairs: random_walk vectors are "eigenvectors of I - D^-1 A
    # (unit norm)"; an isolated node is a component "like any other"
    # (specgraph.operators module docstring), whose null vector is the unit vector.
    net, _ = disconnected_network()
    adjacency = net.adjacency.toarray()
    result = solve(laplacian(net, kind="random_walk"), 5, method=method, rng=0)
    np.testing.assert_allclose(np.linalg.norm(result.vectors, axis=0), 1.0, rtol=1e-14)
    indicators = expected_null_vectors(adjacency, "combinatorial")  # P 1_C = 0
    np.testing.assert_allclose(
        result.vectors @ result.vectors.T, indicators @ indicators.T, rtol=0, atol=1e-14
    )


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("kind", ["combinatorial", "normalized"])
@pytest.mark.parametrize("offset", [0, 1], ids=["k=n", "k=n-1"])
@pytest.mark.parametrize("connected", [True, False], ids=["connected", "disconnected"])
def test_k_close_to_n(connected: bool, offset: int, kind: str, method: str) -> None:
    net = gallery.two_zone(9, seed=3) if connected else disconnected_network()[0]
    op = laplacian(net, kind=kind)
    matrix = op.matrix.toarray()
    k = net.n_nodes - offset
    result = solve(op, k, method=method, rng=0)
    reference = la.eigvalsh(matrix)[:k]
    scaled = np.abs(result.values - reference) / (la.norm(matrix, 2) * k * EPS)
    assert scaled.max() <= THRESH
    assert residual_ratio(matrix, result) <= THRESH
    assert orthogonality_ratio(result.vectors) <= THRESH


# --------------------------------------------------- non-convergence contract
def test_convergence_error_carries_valid_ritz_pairs() -> None:
    # 40 x 50 grid (2000 nodes) through ARPACK with one restart and a tolerance
    # far below what float64 arithmetic can reach (residuals are ~1e-16 at
    # best), so the convergence check must fail whatever ARPACK does.
    net = gallery.grid(40, 50)
    op = laplacian(net, kind="combinatorial")
    k = 6
    with pytest.raises(ConvergenceError) as info:
        solve(op, k, method="lanczos", tol=1e-300, maxiter=1, rng=0)
    assert isinstance(info.value, RuntimeError)
    partial = info.value.partial
    assert isinstance(partial, EigenResult)
    assert not partial.converged
    assert 1 <= partial.values.size <= k
    assert partial.vectors.shape == (net.n_nodes, partial.values.size)
    v, lam = partial.vectors, partial.values
    # Reported residuals are what they claim (scaled by the norm bound).
    raw = np.linalg.norm(op.matrix @ v - v * lam, axis=0)
    np.testing.assert_allclose(partial.residuals, raw / op.norm_bound, rtol=0, atol=4 * EPS)
    # A Ritz pair (theta, v) with unit v has an eigenvalue within ||r|| of theta
    # (Parlett, The Symmetric Eigenvalue Problem, Thm 4.5.1 (from memory));
    # eigenvalues of the grid in closed form (Cartesian product of paths).
    np.testing.assert_allclose(np.linalg.norm(v, axis=0), 1.0, rtol=1e-12)
    spectrum = grid_l(40, 50)
    for theta, r in zip(lam, raw, strict=True):
        assert np.abs(spectrum - theta).min() <= r + 1e-12 * op.norm_bound
    assert np.all(np.diff(lam) >= 0)


# ------------------------------------------------- determinism and sign rule
@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("kind", ["combinatorial", "normalized", "random_walk"])
def test_same_seed_gives_identical_bits(weighted_graph, kind: str, method: str) -> None:
    # SPEC 7 (scientific-python.org, from memory): one seed, one answer.
    net = Network.from_networkx(weighted_graph("geometric", 400, seed=8))
    op = laplacian(net, kind=kind)
    first = solve(op, 6, method=method, rng=123)
    second = solve(op, 6, method=method, rng=np.random.default_rng(123))
    assert first.values.tobytes() == second.values.tobytes()
    assert first.vectors.tobytes() == second.vectors.tobytes()


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("kind", ["combinatorial", "normalized", "random_walk"])
def test_sign_rule_largest_entry_positive(weighted_graph, kind: str, method: str) -> None:
    # EigenResult docstring: each column's entry of largest magnitude is
    # positive, entries within the tie band counting as tied (first node wins);
    # this removes the +-v ambiguity (common practice; scikit-learn's
    # _deterministic_vector_sign_flip uses the plain arg-max).
    net = Network.from_networkx(weighted_graph("gnm", 300, seed=9, low=0.1, high=10.0))
    result = solve(laplacian(net, kind=kind), 8, method=method, rng=0)
    eps = np.finfo(float).eps
    for j in range(result.vectors.shape[1]):
        column = result.vectors[:, j]
        band = max(SIGN_TIE_ULPS * eps, result.residuals[j]) * np.linalg.norm(column)
        tied = np.flatnonzero(np.abs(column) >= np.abs(column).max() - band)
        assert column[tied[0]] > 0


def test_sign_tie_goes_to_first_node_not_to_rounding() -> None:
    # Two entries equal in exact arithmetic, the later one larger by one ulp (as
    # LAPACK gave for the two bells of a barbell on one build): the first node
    # decides. The exact arg-max rule would pick the later entry and flip.
    x = 0.5
    column = np.array([[x], [-np.nextafter(x, 1.0)], [0.25], [-0.25]])
    fixed = _fix_signs(column.copy(), np.zeros(1))
    assert fixed[0, 0] == x
    assert fixed[1, 0] == -np.nextafter(x, 1.0)


def test_sign_clear_maximum_still_decides() -> None:
    # A maximum larger than the tie band decides even when it comes later.
    column = np.array([[0.3], [-0.9], [0.1]])
    fixed = _fix_signs(column.copy(), np.zeros(1))
    assert fixed[:, 0].tolist() == [-0.3, 0.9, -0.1]


def test_sign_of_symmetric_network_follows_node_order() -> None:
    # A barbell's two bells are swapped by an automorphism and lambda_2 is
    # simple, so the Fiedler vector is antisymmetric: |v| is equal at mirrored
    # nodes in exact arithmetic (symmetry argument; closed form in Brouwer and
    # Haemers 2012, ch. 1, from memory). The first node's entry is positive in
    # either node order.
    graph = nx.barbell_graph(3, 0)
    for order in (list(graph.nodes), list(reversed(list(graph.nodes)))):
        relabelled = nx.relabel_nodes(graph, {node: i for i, node in enumerate(order)})
        ordered = nx.Graph()
        ordered.add_nodes_from(range(len(order)))
        ordered.add_edges_from(relabelled.edges)
        result = solve(laplacian(Network.from_networkx(ordered)), 2, method="dense")
        fiedler = result.vectors[:, 1]
        np.testing.assert_allclose(np.abs(fiedler), np.abs(fiedler[::-1]), atol=1e-12)
        assert fiedler[0] > 0


# ----------------------------------------------------------------- validation
@pytest.mark.parametrize(
    "options",
    [{"k": 0}, {"k": 11}, {"k": 2, "method": "nonexistent"}, {"k": 2, "tol": 0.0}],
    ids=["k=0", "k>n", "unknown-method", "zero-tol"],
)
def test_bad_options_are_refused(options: dict) -> None:
    op = laplacian(gallery.path(10))
    k = options.pop("k")
    with pytest.raises(ParameterError):
        solve(op, k, **options)


# ------------------------------------------- the auto rule: predicted cost
# Sources: the envelope and its fill bound, A. George and J. W. H. Liu,
# Computer Solution of Large Sparse Positive Definite Systems, Prentice-Hall
# 1981, ch. 4 (the bound is their Theorem 4.1.1, from memory for the number);
# scipy's reverse_cuthill_mckee and splu (SuperLU) as reference libraries.
def envelope_by_definition(matrix: np.ndarray) -> tuple[int, float]:
    """sum(w_i) and sum(w_i^2), w_i = i - (column of row i's first nonzero), from a dense matrix."""
    first = np.array([np.flatnonzero(row)[0] if row.any() else i for i, row in enumerate(matrix)])
    widths = np.maximum(np.arange(matrix.shape[0]) - first, 0)
    return int(widths.sum()), float((widths.astype(float) ** 2).sum())


def random_tree(n: int, seed: int) -> Network:
    """A random recursive tree: node i joins a uniformly drawn earlier node."""
    rng = np.random.default_rng(seed)
    parents = [int(rng.integers(i)) for i in range(1, n)]
    return Network.from_links([f"t{p}" for p in parents], [f"t{i}" for i in range(1, n)])


def planted_partition(groups: int, size: int, p_in: float, p_out: float, seed: int) -> Network:
    """networkx's planted partition graph, largest component."""
    graph = nx.planted_partition_graph(groups, size, p_in, p_out, seed=seed)
    largest = graph.subgraph(max(nx.connected_components(graph), key=len)).copy()
    return Network.from_networkx(largest)


ENVELOPE_GRAPHS: dict[str, Callable[[], Network]] = {
    "path300": lambda: gallery.path(300),
    "star200": lambda: gallery.star(200),
    "complete60": lambda: gallery.complete(60),
    "grid25x30": lambda: gallery.grid(25, 30),
    "tree500": lambda: random_tree(500, 3),
    "road1500": lambda: gallery.road_like(1500, rng=4),
    "blocks4x150": lambda: planted_partition(4, 150, 0.08, 0.004, 5),
}


@pytest.mark.parametrize("name", list(ENVELOPE_GRAPHS))
def test_envelope_follows_its_definition_in_scipy_order(name: str) -> None:
    matrix = laplacian(ENVELOPE_GRAPHS[name]()).matrix
    env = _cost.envelope(matrix)
    reference = reverse_cuthill_mckee(sp.csr_matrix(matrix), symmetric_mode=True)
    assert np.array_equal(env.order, reference)
    permuted = matrix.toarray()[np.ix_(env.order, env.order)]
    size, work = envelope_by_definition(permuted)
    assert (env.rows, env.entries, env.size, env.work) == (matrix.shape[0], matrix.nnz, size, work)


@pytest.mark.parametrize("name", list(ENVELOPE_GRAPHS))
def test_factor_fill_stays_within_the_envelope_bound(name: str) -> None:
    op = laplacian(ENVELOPE_GRAPHS[name]())
    n, shift = op.shape[0], 1e-7 * op.norm_bound
    env = _cost.envelope(op.matrix)
    bound = 2 * (env.size + n)  # each factor: the envelope and the diagonal
    # George and Liu: an LU without pivoting in the envelope's own order fills
    # only inside the envelope (theorem).
    shifted = sp.csc_array((op.matrix + shift * sp.eye_array(n))[env.order][:, env.order])
    natural = splu(
        shifted, permc_spec="NATURAL", diag_pivot_thresh=0.0, options={"SymmetricMode": True}
    )
    assert natural.L.nnz + natural.U.nnz <= bound
    # The order the shift-invert solver factors in (SuperLU's minimum degree):
    # not covered by the theorem; its fill stayed under the bound on every
    # network measured for the cost model (docs/methods.md), and here.
    factor = factorize(op.matrix, shift)
    assert factor.L.nnz + factor.U.nnz <= bound
    if name == "complete60":  # a full matrix fills the whole envelope in any order
        assert factor.L.nnz + factor.U.nnz == bound == n * n + n


def test_worst_envelope_is_the_full_matrix_envelope() -> None:
    n = 40
    size, work = envelope_by_definition(np.ones((n, n)))
    worst = _cost.worst_envelope(n)
    assert (worst.size, worst.work) == (size, work)
    full = _cost.envelope(laplacian(gallery.complete(n)).matrix)
    assert (full.size, full.work) == (size, work)


@pytest.mark.parametrize(
    ("name", "build"),
    [
        ("path5000", lambda: gallery.path(5000)),
        ("grid60x60", lambda: gallery.grid(60, 60)),
        ("tree4000", lambda: random_tree(4000, 7)),
    ],
)
def test_auto_takes_shift_invert_where_nothing_fills(name: str, build) -> None:
    # Near-planar and tree networks above the dense limit: the envelope is a
    # thin band, the factorization cheap. Reference: scipy's ARPACK in
    # shift-invert mode (its own LU), as CHECKS.md allows for large graphs.
    op = laplacian(build())
    k = 9
    result = solve(op, k, rng=0)
    assert op.shape[0] > DENSE_LIMIT
    assert result.method == "lanczos"
    assert result.reason.startswith(f"component of {op.shape[0]:,} nodes: auto: lanczos")
    assert "predicted s: dense" in result.reason
    assert "multilevel" in result.reason
    reference = np.sort(eigsh(op.matrix, k, sigma=-1e-6, return_eigenvectors=False))
    # A Ritz value with scaled residual r lies within r ||M|| of an eigenvalue
    # (Parlett, The Symmetric Eigenvalue Problem, Thm 4.5.1 (from memory)).
    np.testing.assert_allclose(result.values, reference, rtol=0, atol=2e-6 * op.norm_bound)


def test_auto_keeps_shift_invert_off_a_block_model() -> None:
    # Community structure: 8 groups of 400, mean degree about 21 (networkx's
    # planted partition). The envelope of any order spans a large share of
    # the matrix, so the factorization is forecast to cost far more than the
    # multilevel route. Reference: scipy's ARPACK on the flipped operator
    # 2I - N (products only; fast here, since the wanted values stand apart).
    op = laplacian(planted_partition(8, 400, 0.04, 0.002, 11))
    k = 8
    result = solve(op, k, rng=0)
    assert op.shape[0] > DENSE_LIMIT
    assert "lanczos" not in result.method.split("+")
    assert result.reason.startswith(f"component of {op.shape[0]:,} nodes: auto: multilevel")
    flipped = 2.0 * sp.eye_array(op.shape[0]) - op.matrix
    reference = np.sort(2.0 - eigsh(flipped, k, which="LA", return_eigenvectors=False))
    np.testing.assert_allclose(result.values, reference, rtol=0, atol=2e-6 * op.norm_bound)


def test_a_factor_over_the_memory_budget_is_never_chosen(monkeypatch) -> None:
    # Even when its predicted time is the least (all its constants zeroed),
    # shift-invert is excluded once the envelope bound exceeds the budget.
    for constant in ("FACTOR_SECONDS_PER_WIDTH2", "SOLVE_SECONDS_PER_ENTRY"):
        monkeypatch.setattr(_cost, constant, 0.0)
    monkeypatch.setattr(_cost, "ORTH_SECONDS_PER_ENTRY", 0.0)
    everything = ("dense", "lanczos", "lanczos_flip", "multilevel")
    worst = _cost.worst_envelope(20_000, nnz=200_000)  # bound 4.8 GB
    assert worst.factor_bytes > _cost.FACTOR_MEMORY_BUDGET
    chosen = _cost.forecast(worst, 8, everything)
    assert chosen.method == "multilevel"
    assert "lanczos" in chosen.excluded
    monkeypatch.setattr(_cost, "FACTOR_MEMORY_BUDGET", worst.factor_bytes)
    assert _cost.forecast(worst, 8, everything).method == "lanczos"


def test_the_cheapest_prediction_wins(monkeypatch) -> None:
    env = _cost.envelope(laplacian(gallery.grid(50, 50)).matrix)
    everything = ("dense", "lanczos", "lanczos_flip", "multilevel")
    fc = _cost.forecast(env, 6, everything)
    assert fc.method == min(fc.seconds, key=lambda m: np.inf if m in fc.excluded else fc.seconds[m])
    # Make the multilevel prediction the least: it is chosen; the products-only
    # method replaces it where the operator cannot take it (rank-one term).
    monkeypatch.setattr(_cost, "MULTILEVEL_SECONDS_PER_PRODUCT", 0.0)
    monkeypatch.setattr(_cost, "MULTILEVEL_SECONDS_PER_PASS", 0.0)
    assert _cost.forecast(env, 6, everything).method == "multilevel"
    assert _cost.forecast(env, 6, ("dense", "lanczos_flip")).method == "lanczos_flip"


@pytest.mark.parametrize("method", ["auto", "dense", "lanczos", "lanczos_flip", "multilevel"])
def test_every_method_matches_eigh_on_a_weighted_network(weighted_graph, method: str) -> None:
    # Reference: scipy.linalg.eigh (LAPACK). Eigenvalues within the residual
    # bound r ||M|| (Parlett, Thm 4.5.1 (from memory)).
    op = laplacian(Network.from_networkx(weighted_graph("geometric", 700, 3)), kind="normalized")
    k = 8
    result = solve(op, k, method=method, rng=0)
    reference = la.eigvalsh(op.matrix.toarray(), subset_by_index=[0, k - 1])
    np.testing.assert_allclose(
        result.values, reference, rtol=0, atol=result.max_residual * op.norm_bound + 1e-12
    )
    assert result.reason.startswith("component of")
    assert result.reason.endswith(f"{method} asked") or method == "auto"


def test_auto_hands_an_unfinished_multilevel_solve_to_flipped_lanczos(monkeypatch) -> None:
    # A multilevel solve that misses the tolerance (stood in for by one that
    # returns wrong pairs) must not end auto's solve: products-only Lanczos
    # takes over. Reference: scipy's ARPACK on the flipped operator 2I - N.
    import specgraph.eigen._api as api
    from specgraph.eigen._problem import Solution

    def unfinished(problem, switch=False):
        n = problem.matrix.shape[0]
        vectors = np.linalg.qr(np.random.default_rng(0).standard_normal((n, problem.count)))[0]
        return Solution(np.zeros(problem.count), vectors, matvecs=5, iterations=1)

    monkeypatch.setattr(api, "solve_multilevel", unfinished)
    op = laplacian(planted_partition(8, 400, 0.04, 0.002, 11))
    k = 8
    result = solve(op, k, rng=0)
    assert result.method == "lanczos_flip"
    assert result.reason.endswith("multilevel missed the tolerance, lanczos_flip took over")
    flipped = 2.0 * sp.eye_array(op.shape[0]) - op.matrix
    reference = np.sort(2.0 - eigsh(flipped, k, which="LA", return_eigenvectors=False))
    np.testing.assert_allclose(result.values, reference, rtol=0, atol=2e-6 * op.norm_bound)
