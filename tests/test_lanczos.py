"""solve_lanczos (thick-restart Lanczos) against closed forms and scipy.linalg.eigh.

Sources of the expected values:

* closed-form Laplacian spectra: A. E. Brouwer and W. H. Haemers, *Spectra of
  Graphs*, Springer 2012, ch. 1 (from memory for section numbers); F. Chung,
  *Spectral Graph Theory*, AMS 1997, ch. 1 (from memory); listed in
  /work/shared/CHECKS.md;
* dense reference: ``scipy.linalg.eigh`` (LAPACK);
* ARPACK comparisons at about 2000 eps: scipy's own tests in
  sparse/linalg/_eigen/arpack/tests (from memory per CHECKS.md);
* residual bounds for Rayleigh-Ritz values and the Davis-Kahan sin-theta bound
  for subspaces: B. N. Parlett, *The Symmetric Eigenvalue Problem*, SIAM 1998,
  ch. 11 (from memory); C. Davis and W. M. Kahan, SIAM J. Numer. Anal. 7, 1970
  (from memory).

The solver is called directly on one connected component's ``Problem``, as the
dispatcher in ``specgraph.eigen._api`` calls it.
"""

from __future__ import annotations

import logging
from collections.abc import Callable

import networkx as nx
import numpy as np
import pytest
import scipy.linalg as la
from closed_forms import cycle_l, cycle_n, grid_l, hypercube_l, path_l, path_n, torus_l
from hypothesis import given, settings
from hypothesis import strategies as st

from specgraph import Network, gallery, laplacian
from specgraph.eigen import smallest_eigenpairs as solve
from specgraph.eigen._lanczos import TRANSFORMS, solve_lanczos, solve_lanczos_flip
from specgraph.eigen._problem import Problem, Solution
from specgraph.exceptions import ParameterError
from specgraph.operators import GraphOperator

EPS = np.finfo(np.float64).eps
#: Target scaled residual of the accuracy tests: far below the default 1e-6 so
#: that eigenvalues (error ~ residual^2 / gap) meet the closed forms to 1e-8.
TOL = 1e-8
#: Eigenvalue agreement with a closed form, relative to the norm bound (as in
#: test_eigen.py: far above rounding, far below any gap of the spectra used).
CLOSED_FORM_RTOL = 1e-8
#: scipy's ARPACK tests accept eigenvalues within about 2000 eps of eigh's.
ARPACK_EPS_FACTOR = 2000.0
#: ||I - V^T V|| allowed, in units of eps times the number of pairs: LAPACK's
#: test threshold THRESH (30 to 60 in sep.in, Reference-LAPACK TESTING/EIG),
#: at its upper end: hypothesis found a random 30-node graph on which the
#: flipped operator's 19 vectors reach 32 (||I - V^T V|| = 1.4e-13).
THRESH = 60.0


#: id -> (network, Laplacian kind, pairs wanted, closed-form spectrum).
#: Q_8 with 9 pairs holds eigenvalue 2/8 of multiplicity C(8,1) = 8 and cuts the
#: next (multiplicity 28) at the edge; tori have multiplicities 2 and 4; the
#: 400-ring makes the first flip run miss copies, so locking must find them.
CLOSED_FORM: dict[str, tuple[Callable[[], Network], str, int, Callable[[], np.ndarray]]] = {
    "path40-L": (lambda: gallery.path(40), "combinatorial", 6, lambda: path_l(40)),
    "path40-N": (lambda: gallery.path(40), "normalized", 6, lambda: path_n(40)),
    "ring30-L": (lambda: gallery.ring(30), "combinatorial", 7, lambda: cycle_l(30)),
    "ring400-N": (lambda: gallery.ring(400), "normalized", 6, lambda: cycle_n(400)),
    "grid12x15-L": (lambda: gallery.grid(12, 15), "combinatorial", 8, lambda: grid_l(12, 15)),
    "torus8x8-L": (
        lambda: gallery.grid(8, 8, periodic=True),
        "combinatorial",
        9,
        lambda: torus_l(8, 8),
    ),
    "torus10x12-N": (
        lambda: gallery.grid(10, 12, periodic=True),
        "normalized",
        9,
        lambda: torus_l(10, 12) / 4,
    ),
    "hypercube8-N": (lambda: gallery.hypercube(8), "normalized", 9, lambda: hypercube_l(8) / 8),
    "hypercube8-L": (lambda: gallery.hypercube(8), "combinatorial", 9, lambda: hypercube_l(8)),
}


# ----------------------------------------------------------------- helpers
def make_problem(
    op: GraphOperator, count: int, *, tol: float = TOL, maxiter: int | None = None, seed: int = 0
) -> Problem:
    """The Problem the dispatcher builds for a connected operator."""
    assert op.null_basis.shape[1] == 1, "a connected network is expected"
    return Problem(
        matrix=op.matrix,
        null_vector=op.null_basis[:, 0],
        norm_bound=op.norm_bound,
        count=count,
        tol=tol,
        maxiter=maxiter,
        rng=np.random.default_rng(seed),
    )


def run(op: GraphOperator, count: int, transform: str = "shift_invert", **options) -> Solution:
    return solve_lanczos(make_problem(op, count, **options), transform=transform)


def scaled_residuals(op: GraphOperator, sol: Solution) -> np.ndarray:
    """||M v - lambda v|| / norm_bound, the dispatcher's rule (CHECKS.md: scale by ||L||)."""
    return np.linalg.norm(op.matrix @ sol.vectors - sol.vectors * sol.values, axis=0) / (
        op.norm_bound
    )


def assert_valid_block(op: GraphOperator, sol: Solution, count: int) -> None:
    """Shape, ascending values, orthonormal vectors orthogonal to the null vector."""
    n = op.shape[0]
    assert sol.values.shape == (count,)
    assert sol.vectors.shape == (n, count)
    assert np.all(np.isfinite(sol.values))
    assert np.all(np.isfinite(sol.vectors))
    assert np.all(np.diff(sol.values) >= 0)
    # LAPACK-style orthogonality ratio ||I - V^T V|| / (m eps) <= THRESH.
    gram = sol.vectors.T @ sol.vectors
    assert la.norm(np.eye(count) - gram, 2) / (count * EPS) <= THRESH
    # Deflation of the trivial eigenvector: no component along the null vector.
    assert np.abs(op.null_basis[:, 0] @ sol.vectors).max() <= THRESH * EPS
    assert sol.matvecs > 0
    assert sol.iterations >= 1


def distinct_clusters(values: np.ndarray, tol: float) -> list[tuple[int, int]]:
    """Index ranges [lo, hi) of runs of sorted values equal within ``tol``."""
    edges = np.flatnonzero(np.diff(values) > tol) + 1
    bounds = np.r_[0, edges, values.size]
    return list(zip(bounds[:-1].tolist(), bounds[1:].tolist(), strict=True))


def assert_subspaces_match(op: GraphOperator, sol: Solution, spectrum: np.ndarray) -> None:
    """Each cluster of found vectors lies in eigh's eigenspace of that cluster.

    Compared as subspaces with scipy.linalg.subspace_angles (CHECKS.md: single
    vectors of a repeated eigenvalue are arbitrary). The allowed sine is the
    Davis-Kahan bound (||R_found|| + ||R_eigh||) / (gap / 2) (from memory); a
    cluster cut at the edge must lie inside the full eigenspace.
    """
    matrix = op.matrix.toarray()
    full = np.sort(spectrum)[1:]  # nontrivial part, as the solver returns
    clusters = distinct_clusters(full, CLOSED_FORM_RTOL * op.norm_bound)
    count = sol.values.size
    needed = max(hi for lo, hi in clusters if lo < count)
    ref_values, ref_vectors = la.eigh(matrix, subset_by_index=[1, needed])
    for lo, hi in clusters:
        if lo >= count:
            break
        others = np.r_[full[:lo], full[hi:], 0.0]
        gap = np.abs(others - full[lo]).min()
        mine = sol.vectors[:, lo : min(hi, count)]
        ref = ref_vectors[:, lo:hi]
        r_mine = la.norm(matrix @ mine - mine * sol.values[lo : min(hi, count)], 2)
        r_ref = la.norm(matrix @ ref - ref * ref_values[lo:hi], 2)
        angles = la.subspace_angles(mine, ref)
        assert np.sin(angles).max() <= (r_mine + r_ref) / (0.5 * gap), (lo, hi, angles.max())


def assert_values_match_eigh(op: GraphOperator, sol: Solution) -> None:
    """Ordered Rayleigh-Ritz values within ||M V - V Theta|| of eigh's (Kahan, from memory)."""
    matrix = op.matrix.toarray()
    count = sol.values.size
    reference = la.eigvalsh(matrix, subset_by_index=[1, count])
    block = la.norm(matrix @ sol.vectors - sol.vectors * sol.values, 2)
    allowed = block + ARPACK_EPS_FACTOR * EPS * op.norm_bound
    np.testing.assert_allclose(sol.values, reference, rtol=0, atol=allowed)


# ----------------------------------------------------- 1. closed-form spectra
@pytest.mark.parametrize("transform", TRANSFORMS)
@pytest.mark.parametrize("case", list(CLOSED_FORM))
def test_closed_form_spectrum_and_subspaces(case: str, transform: str) -> None:
    build, kind, count, spectrum_of = CLOSED_FORM[case]
    net, spectrum = build(), spectrum_of()
    assert spectrum.size == net.n_nodes
    op = laplacian(net, kind=kind)
    sol = run(op, count, transform)
    assert_valid_block(op, sol, count)
    assert scaled_residuals(op, sol).max() <= TOL
    # Closed forms (Brouwer and Haemers 2012, ch. 1 (from memory); CHECKS.md).
    expected = np.sort(spectrum)[1 : count + 1]
    np.testing.assert_allclose(sol.values, expected, rtol=0, atol=CLOSED_FORM_RTOL * op.norm_bound)
    assert_subspaces_match(op, sol, spectrum)


def test_hypercube_multiplicity_eight_is_found_in_full() -> None:
    # Q_8: eigenvalue 2k/8 of N with multiplicity C(8, k) (CHECKS.md); the 8
    # smallest nontrivial pairs span the whole eigenspace of 1/4, which is
    # compared with eigh's (scipy.linalg.eigh) through principal angles.
    op = laplacian(gallery.hypercube(8), kind="normalized")
    sol = run(op, 8)
    np.testing.assert_allclose(sol.values, np.full(8, 0.25), rtol=0, atol=1e-12)
    _, ref = la.eigh(op.matrix.toarray(), subset_by_index=[1, 8])
    assert la.subspace_angles(sol.vectors, ref).max() <= 1e-7


def test_locking_recovers_copies_missed_by_the_first_run(caplog) -> None:
    # C_400 (L): every nontrivial eigenvalue 2 - 2cos(2 pi k / n) is double
    # (CHECKS.md). With the flip transform the first run converges to one copy
    # of each; the deflated verification runs must find the other copies.
    op = laplacian(gallery.ring(400), kind="combinatorial")
    with caplog.at_level(logging.INFO, logger="specgraph.eigen._lanczos"):
        sol = run(op, 5, "flip")
    assert any("below the edge" in r.getMessage() for r in caplog.records)
    expected = np.sort(cycle_l(400))[1:6]
    np.testing.assert_allclose(sol.values, expected, rtol=0, atol=CLOSED_FORM_RTOL * op.norm_bound)
    assert_subspaces_match(op, sol, cycle_l(400))


# ------------------------------------------------------ 2. graphs vs eigh
@pytest.mark.parametrize("transform", TRANSFORMS)
@pytest.mark.parametrize("kind", ["combinatorial", "normalized"])
@pytest.mark.parametrize(
    "build",
    [
        pytest.param(lambda: gallery.road_like(400, rng=0), id="road400"),
        pytest.param(lambda: gallery.barbell(12, bridge_weight=0.5), id="barbell12"),
    ],
)
def test_matches_eigh(build, kind: str, transform: str) -> None:
    op = laplacian(build(), kind=kind)
    count = 7
    sol = run(op, count, transform)
    assert_valid_block(op, sol, count)
    assert scaled_residuals(op, sol).max() <= TOL
    assert_values_match_eigh(op, sol)  # scipy.linalg.eigh reference
    assert_subspaces_match(op, sol, la.eigvalsh(op.matrix.toarray()))


@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("graph", ["gnm", "geometric"])
def test_weighted_graphs_at_default_tolerance(weighted_graph, graph: str, seed: int) -> None:
    # Random weighted graphs built by networkx (conftest); reference eigh.
    net = Network.from_networkx(weighted_graph(graph, 300, seed, low=0.1, high=10.0))
    op = laplacian(net, kind="normalized")
    tol = 1e-6
    sol = run(op, 8, tol=tol, seed=seed)
    assert_valid_block(op, sol, 8)
    assert scaled_residuals(op, sol).max() <= tol
    assert_values_match_eigh(op, sol)


@settings(max_examples=25, deadline=None)
@given(
    n=st.integers(min_value=4, max_value=40),
    extra_links=st.integers(min_value=0, max_value=60),
    seed=st.integers(min_value=0, max_value=2**16),
    fraction=st.floats(min_value=0.0, max_value=1.0),
    transform=st.sampled_from(TRANSFORMS),
)
def test_small_random_graphs_any_count(
    n: int, extra_links: int, seed: int, fraction: float, transform: str
) -> None:
    # A random spanning tree (networkx) plus random links: connected, small,
    # every count from 1 to n - 1, including the whole nontrivial spectrum.
    graph = nx.random_labeled_tree(n, seed=seed)
    rng = np.random.default_rng(seed)
    for u, v in rng.integers(0, n, size=(extra_links, 2)).tolist():
        if u != v:
            graph.add_edge(u, v)
    for u, v in graph.edges:
        graph[u][v]["weight"] = float(rng.uniform(0.5, 2.0))
    op = laplacian(Network.from_networkx(graph), kind="normalized")
    count = 1 + round(fraction * (n - 2))
    sol = run(op, count, transform, seed=seed)
    assert_valid_block(op, sol, count)
    assert scaled_residuals(op, sol).max() <= TOL
    assert_values_match_eigh(op, sol)


# ----------------------------------------------------------- 3. edge cases
@pytest.mark.parametrize("transform", TRANSFORMS)
@pytest.mark.parametrize("offset", [2, 1], ids=["count=n-2", "count=n-1"])
def test_count_close_to_n(offset: int, transform: str) -> None:
    # P_12 (N): 1 - cos(pi k / 11) (CHECKS.md); the basis spans the whole
    # deflated space, so the pairs are exact to rounding.
    n = 12
    op = laplacian(gallery.path(n), kind="normalized")
    count = n - offset
    sol = run(op, count, transform)
    assert_valid_block(op, sol, count)
    np.testing.assert_allclose(sol.values, path_n(n)[1 : count + 1], rtol=0, atol=1e-13)
    assert scaled_residuals(op, sol).max() <= ARPACK_EPS_FACTOR * EPS


def test_flip_agrees_with_shift_invert() -> None:
    # Two transforms of the same operator must give the same pairs: values
    # within the residual bound, spans within the Davis-Kahan angle of eigh's.
    op = laplacian(gallery.road_like(300, rng=4), kind="normalized")
    inverse, flip = run(op, 6, "shift_invert"), run(op, 6, "flip")
    bound = (scaled_residuals(op, inverse).max() + scaled_residuals(op, flip).max()) * 2.0
    np.testing.assert_allclose(flip.values, inverse.values, rtol=0, atol=bound + 1e-13)
    assert la.subspace_angles(flip.vectors, inverse.vectors).max() <= 1e-5
    assert solve_lanczos_flip(make_problem(op, 6)).values.tobytes() == flip.values.tobytes()


@pytest.mark.parametrize("transform", TRANSFORMS)
def test_cycle_cap_returns_best_pairs_without_judging(transform: str) -> None:
    # One restart cycle and a tolerance float64 cannot reach: the solver
    # returns its pairs (the dispatcher judges them). Rayleigh-Ritz values on a
    # subspace orthogonal to the null vector are upper bounds of the ordered
    # nontrivial eigenvalues (Courant-Fischer; Parlett 1998, ch. 10-11, from
    # memory); grid spectrum in closed form (CHECKS.md).
    op = laplacian(gallery.grid(30, 40), kind="combinatorial")
    count = 6
    sol = run(op, count, transform, tol=1e-300, maxiter=1)
    assert_valid_block(op, sol, count)
    assert sol.iterations == 1  # no verification runs after an unconverged one
    assert scaled_residuals(op, sol).max() > 1e-300
    exact = np.sort(grid_l(30, 40))[1 : count + 1]
    assert np.all(sol.values >= exact - ARPACK_EPS_FACTOR * EPS * op.norm_bound)
    if transform == "flip":  # a 26-vector Krylov space cannot resolve a 1200-node grid
        assert scaled_residuals(op, sol).max() > 1e-6


@pytest.mark.parametrize("transform", TRANSFORMS)
def test_same_seed_gives_identical_bits(transform: str) -> None:
    # SPEC 7 (scientific-python.org, from memory): one seed, one answer.
    op = laplacian(gallery.road_like(500, rng=1), kind="normalized")
    first, second = run(op, 5, transform, seed=42), run(op, 5, transform, seed=42)
    assert first.values.tobytes() == second.values.tobytes()
    assert first.vectors.tobytes() == second.vectors.tobytes()
    assert (first.matvecs, first.iterations) == (second.matvecs, second.iterations)


def test_matvec_and_cycle_accounting() -> None:
    # The counting rule of solve_lanczos's docstring, on P_6 (L) with 4 pairs:
    # the first run's basis spans the 5-dimensional deflated space (5 solves,
    # one cycle), Rayleigh-Ritz multiplies M by 4 vectors, and the verification
    # run has a 1-dimensional space left (1 solve, one cycle) holding the
    # largest eigenvalue, which lowers nothing.
    op = laplacian(gallery.path(6), kind="combinatorial")
    sol = run(op, 4)
    assert (sol.matvecs, sol.iterations) == (5 + 4 + 1, 2)
    np.testing.assert_allclose(sol.values, path_l(6)[1:5], rtol=0, atol=1e-13)


def test_unknown_transform_is_refused() -> None:
    op = laplacian(gallery.path(10))
    with pytest.raises(ParameterError, match="transform"):
        run(op, 2, "chebyshev")


def test_through_the_dispatcher() -> None:
    # Through the dispatcher, the solver must satisfy its residual rule on a
    # network of two components; reference scipy.linalg.eigh.
    graph = nx.disjoint_union(nx.grid_2d_graph(15, 20), nx.cycle_graph(250))
    op = laplacian(Network.from_networkx(nx.convert_node_labels_to_integers(graph)))
    result = solve(op, 8, method="lanczos", rng=0)
    assert result.converged
    assert result.method == "lanczos"
    reference = la.eigvalsh(op.matrix.toarray(), subset_by_index=[0, 7])
    np.testing.assert_allclose(result.values, reference, rtol=0, atol=1e-9)


@pytest.mark.parametrize("method", ["lanczos", "lanczos_flip"])
@pytest.mark.parametrize("n", [3, 4, 5, 7])
def test_tiny_problems_exhaust_the_krylov_space(method: str, n: int) -> None:
    # Below about 20 nodes the Lanczos basis spans the whole space: there is
    # no new direction after a breakdown, and the pairs must still be exact
    # (reference: scipy.linalg.eigh on the dense matrix).
    for net in (gallery.path(n), gallery.ring(n), gallery.star(n - 1)):
        op = laplacian(net)
        result = solve(op, n, method=method, rng=0)
        reference = la.eigh(op.matrix.toarray(), eigvals_only=True)
        np.testing.assert_allclose(result.values, reference, atol=1e-9)
        assert result.converged
