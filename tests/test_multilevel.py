"""The multilevel eigen-solver and its parts, against scipy and numpy references."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
import scipy.linalg as la
import scipy.sparse as sp

from specgraph import gallery, laplacian, smallest_eigenpairs
from specgraph.eigen import _kernels as kern
from specgraph.eigen._hierarchy import build_hierarchy
from specgraph.eigen._lobpcg import CsrBlocks, ProductBlocks, lobpcg
from specgraph.eigen._multilevel import solve_multilevel
from specgraph.eigen._problem import Problem


@pytest.fixture
def road():
    return gallery.road_like(2500, rng=3)


@pytest.fixture(params=["serial", "parallel"])
def compilation(request):
    """Run the kernels of a test in their serial, then their parallel compilation."""
    kern.threads_for(0 if request.param == "serial" else kern.PARALLEL_MIN_ROWS)
    yield request.param
    kern.threads_for(0)


def _block(n: int, b: int, seed: int, dtype=np.float64) -> np.ndarray:
    return np.random.default_rng(seed).standard_normal((n, b)).astype(dtype)


# ------------------------------------------------------------------ kernels
@pytest.mark.parametrize("dtype", [np.float64, np.float32], ids=["f64", "f32"])
def test_csr_kernels_match_scipy(road, dtype, compilation) -> None:
    # Reference: scipy's CSR product (csr_matvecs).
    m = sp.csr_array(laplacian(road).matrix, dtype=dtype)
    x, rhs = _block(m.shape[0], 5, 0, dtype), _block(m.shape[0], 5, 1, dtype)
    out = np.empty_like(x)
    kern.csr_matmat(m.indptr, m.indices, m.data, x, out)
    rtol = 1e-12 if dtype == np.float64 else 1e-5
    np.testing.assert_allclose(out, m @ x, rtol=rtol, atol=rtol)
    kern.residual_block(m.indptr, m.indices, m.data, rhs, x, out)
    np.testing.assert_allclose(out, rhs - m @ x, rtol=rtol, atol=rtol)
    scale = np.random.default_rng(2).uniform(0.1, 1.0, m.shape[0]).astype(dtype)
    kern.jacobi_sweep(m.indptr, m.indices, m.data, scale, rhs, x, out)
    np.testing.assert_allclose(out, x + scale[:, None] * (rhs - m @ x), rtol=rtol, atol=rtol)


def test_chebyshev_step_matches_scipy(road, compilation) -> None:
    # Reference: scipy's CSR product and numpy arithmetic.
    m = sp.csr_array(laplacian(road).matrix)
    y, x = _block(m.shape[0], 5, 3), _block(m.shape[0], 5, 4)
    expected = 0.7 * (m @ y) - 0.2 * y + 0.3 * x
    kern.chebyshev_step(m.indptr, m.indices, m.data, y, x, 0.7, -0.2, 0.3, x)  # in place
    np.testing.assert_allclose(x, expected, rtol=1e-12, atol=1e-12)


def test_start_filter_is_the_scaled_chebyshev_polynomial() -> None:
    # Reference: the filter is p(A) with p(t) = T_d((t - c)/e) / T_d((0 - c)/e)
    # (Zhou and Saad 2006, eq. 3.4), evaluated by numpy's chebval on the
    # eigenvalues from scipy's dense eigh: each eigenvector is scaled by p(mu).
    from numpy.polynomial import chebyshev

    from specgraph.eigen._multilevel import START_FILTER_CUT, _filtered

    op = laplacian(gallery.road_like(400, rng=2))
    values, vectors = la.eigh(op.matrix.toarray())
    upper, degree = op.norm_bound, 7
    low = START_FILTER_CUT * upper
    half, centre = (upper - low) / 2, (upper + low) / 2
    coefficients = np.zeros(degree + 1)
    coefficients[degree] = 1.0
    p = chebyshev.chebval((values - centre) / half, coefficients) / chebyshev.chebval(
        -centre / half, coefficients
    )
    block = np.ascontiguousarray(vectors[:, [0, 5, 60, 399]])
    out = _filtered(sp.csr_array(op.matrix), block.copy(), upper, degree)
    np.testing.assert_allclose(out, block * p[[0, 5, 60, 399]], atol=1e-12)
    # The docstring's guarantee: damped by 1 / T_d((upper + cut) / (upper - cut)) above the cut.
    bound = 1.0 / chebyshev.chebval((upper + low) / (upper - low), coefficients)
    assert np.all(np.abs(p[values >= low]) <= bound * (1 + 1e-12))
    assert p[5] > 0.5 > 5 * bound  # the low end is kept


def test_dense_kernels_match_numpy(compilation) -> None:
    # Reference: numpy's own matmul and elementwise arithmetic.
    rng = np.random.default_rng(5)
    x, w, p = (rng.standard_normal((300, k)) for k in (4, 3, 2))
    kx, kw, kp = (rng.standard_normal((k, 4)) for k in (4, 3, 2))
    out = np.empty((300, 4))
    kern.combine(x, kx, w, kw, p, kp, out)
    np.testing.assert_allclose(out, x @ kx + w @ kw + p @ kp, rtol=1e-12, atol=1e-12)
    kern.combine(x, kx, w[:, :0], kw[:0], p[:, :0], kp[:0], x)  # in place, empty blocks
    np.testing.assert_allclose(x, out - w @ kw - p @ kp, rtol=1e-12, atol=1e-12)
    a, b = rng.standard_normal((1001, 3)), rng.standard_normal((1001, 3))
    np.testing.assert_allclose(kern.column_dots(a, b, 64), np.einsum("ij,ij->j", a, b))


def test_shortcut_combinations_match_numpy_and_the_general_kernel(compilation) -> None:
    # Reference: numpy matmul; and the general ``combine`` with an identity
    # block in the same place, which sums in the same order (so to the bit).
    rng = np.random.default_rng(6)
    base, x, w = (rng.standard_normal((300, k)) for k in (4, 1, 4))
    kx, kw = rng.standard_normal((1, 4)), rng.standard_normal((4, 4))
    identity, none = np.eye(4), np.zeros((0, 4))
    out = np.empty((300, 4))
    kern.add_combine(base, x, kx, w, kw, out)
    np.testing.assert_allclose(out, base + x @ kx + w @ kw, rtol=1e-12, atol=1e-12)
    general = np.empty_like(out)
    kern.combine(base, identity, x, kx, w, kw, general)
    np.testing.assert_array_equal(out, general)
    kern.combine_add(w, kw, base, out)
    np.testing.assert_allclose(out, w @ kw + base, rtol=1e-12, atol=1e-12)
    kern.combine(w, kw, base, identity, base[:, :0], none, general)
    np.testing.assert_array_equal(out, general)
    expected = base + x @ kx + w @ kw
    kern.add_combine(base, x, kx, w, kw, base)  # in place
    np.testing.assert_allclose(base, expected, rtol=1e-12, atol=1e-12)


def test_fused_projection_kernels_match_numpy(road, compilation) -> None:
    # Reference: scipy's CSR product followed by numpy matmul; the fused
    # kernels never store A v, so they must agree with the stored product.
    m = laplacian(road).matrix
    n = m.shape[0]
    v, x, w, p = (_block(n, b, seed) for b, seed in ((4, 11), (4, 12), (3, 13), (2, 14)))
    av = m @ v
    for got, want in zip(
        kern.csr_projections(m.indptr, m.indices, m.data, v, x, w, p, 64),
        (x.T @ av, w.T @ av, p.T @ av),
        strict=True,
    ):
        np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12)
    values = np.random.default_rng(15).uniform(0.0, 2.0, 4)
    out = np.empty_like(x)
    xax, pax, squares = kern.residual_projections(
        m.indptr, m.indices, m.data, x, values, p, out, 64
    )
    ax = m @ x
    np.testing.assert_allclose(out, ax - x * values, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(xax, x.T @ ax, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(pax, p.T @ ax, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(squares, np.sum(out * out, axis=0), rtol=1e-12)
    empty = x[:, :0]  # a basis with no columns gives an empty projection
    assert kern.csr_projections(m.indptr, m.indices, m.data, v, x, empty, empty, 64)[1].shape == (
        0,
        4,
    )


def test_serial_and_parallel_compilations_agree_to_the_bit(road) -> None:
    # Both compilations sum each output row, and each fixed chunk, in the same order.
    m = sp.csr_array(laplacian(road).matrix)
    x, v, w = _block(m.shape[0], 9, 0), _block(m.shape[0], 9, 1), _block(m.shape[0], 4, 2)
    results = []
    for rows in (0, kern.PARALLEL_MIN_ROWS):
        kern.threads_for(rows)
        out = np.empty_like(x)
        kern.csr_matmat(m.indptr, m.indices, m.data, x, out)
        projections = kern.csr_projections(m.indptr, m.indices, m.data, v, x, w, w, 64)
        results.append((out, *projections, kern.column_dots(x, v, 64)))
    kern.threads_for(0)
    for serial, parallel in zip(*results, strict=True):
        assert np.array_equal(serial, parallel)


def test_transfers_are_adjoint(road, compilation) -> None:
    # <P y, x> = <y, P^T x>: restriction is the transpose of prolongation.
    op = laplacian(road)
    hierarchy = build_hierarchy(op.matrix, op.null_basis[:, 0])
    lv = hierarchy.levels[0]
    m = hierarchy.levels[1].size
    y, x = _block(m, 3, 7), _block(lv.size, 3, 8)
    py = hierarchy.prolong(0, y)
    ptx = np.empty((m, 3))
    kern.restrict_sum(lv.members_ptr, lv.members, lv.weights, x, ptx)
    np.testing.assert_allclose(np.sum(py * x, axis=0), np.sum(y * ptx, axis=0), rtol=1e-10)


def test_coarse_operator_is_galerkin_and_keeps_the_null_vector(road) -> None:
    # The coarse operator is P^T M P (definition), the prolongator has
    # orthonormal columns, and P reproduces the null vector: M P z_c = 0.
    op = laplacian(road)
    hierarchy = build_hierarchy(op.matrix, op.null_basis[:, 0])
    lv, coarse = hierarchy.levels[0], hierarchy.levels[1]
    assert lv.weights is not None  # a fine level has transfers
    assert lv.aggregate is not None
    n, m = lv.size, coarse.size
    p = sp.csr_array((lv.weights, (np.arange(n), lv.aggregate)), shape=(n, m))
    np.testing.assert_allclose((p.T @ p).toarray(), np.eye(m), atol=1e-12)
    galerkin = (p.T @ op.matrix @ p).toarray()
    np.testing.assert_allclose(coarse.matrix.toarray(), galerkin, atol=1e-12)
    z_fine = hierarchy.prolong(
        0, np.sqrt(np.bincount(lv.aggregate, lv.weights**0 * 0 + 1))[:, None]
    )
    assert z_fine.shape == (n, 1)
    null_c = np.linalg.svd(coarse.matrix.toarray())[2][-1]
    assert np.linalg.norm(op.matrix @ hierarchy.prolong(0, null_c[:, None])) < 1e-10


def test_cycle_reduces_the_error(road) -> None:
    # A preconditioner worth its cost: one flexible-CG solve removes most of
    # the error of a smooth right-hand side (common practice: a multigrid
    # cycle should cut the error by a constant factor well below 1).
    op = laplacian(road)
    hierarchy = build_hierarchy(op.matrix, op.null_basis[:, 0])
    z = op.null_basis
    exact = _block(op.shape[0], 2, 9)
    exact -= z @ (z.T @ exact)
    rhs = op.matrix @ exact
    approx = np.empty_like(rhs)
    hierarchy.precondition(0, rhs, 3, approx)
    approx -= z @ (z.T @ approx)

    def energy(e):
        return np.sqrt(np.sum(e * (op.matrix @ e), axis=0))

    assert np.all(energy(approx - exact) < 0.5 * energy(exact))


# -------------------------------------------------------------------- LOBPCG
def test_lobpcg_alone_matches_eigh() -> None:
    # Reference: scipy.linalg.eigh on a path graph's Laplacian, no preconditioner.
    op = laplacian(gallery.path(60), kind="combinatorial")
    dense = op.matrix.toarray()
    z = op.null_basis
    outcome = lobpcg(
        ProductBlocks(lambda x, out: np.copyto(out, dense @ x)),
        lambda r, out: np.copyto(out, r),
        _block(60, 6, 0),
        z,
        count=4,
        tol=1e-9,
        maxiter=500,
    )
    expected = la.eigvalsh(dense)[1:5]
    np.testing.assert_allclose(outcome.values[:4], expected, rtol=0, atol=1e-9)
    assert np.all(outcome.residuals[:4] <= 1e-9)
    np.testing.assert_allclose(outcome.vectors.T @ outcome.vectors, np.eye(6), atol=1e-10)
    assert np.abs(z.T @ outcome.vectors).max() < 1e-12


def test_lobpcg_on_a_sparse_matrix_matches_eigh(road) -> None:
    # The fused sparse path (P^T A P carried as a small matrix, A X and A W
    # never stored) against scipy.linalg.eigh, with the multigrid preconditioner.
    op = laplacian(road)
    hierarchy = build_hierarchy(op.matrix, op.null_basis[:, 0])
    outcome = lobpcg(
        CsrBlocks(sp.csr_array(op.matrix)),
        lambda r, out: hierarchy.precondition(0, r, 3, out),
        _block(op.shape[0], 7, 1),
        op.null_basis,
        count=5,
        tol=1e-8,
        maxiter=300,
    )
    expected = la.eigvalsh(op.matrix.toarray(), subset_by_index=[1, 5])
    np.testing.assert_allclose(outcome.values[:5], expected, rtol=0, atol=1e-8)
    x = outcome.vectors
    true = np.linalg.norm(op.matrix @ x - x * outcome.values, axis=0)
    np.testing.assert_allclose(outcome.residuals, true, rtol=1e-6, atol=1e-12)
    np.testing.assert_allclose(x.T @ x, np.eye(7), atol=1e-10)


# --------------------------------------------------------------- the solver
@pytest.mark.parametrize("kind", ["normalized", "combinatorial"])
def test_multilevel_matches_eigh_on_a_road_network(road, kind) -> None:
    # Reference: scipy.linalg.eigh (dense LAPACK) on a 2,500-node road-like network.
    op = laplacian(road, kind=kind)
    result = smallest_eigenpairs(op, 8, method="multilevel", rng=0)
    reference = la.eigvalsh(op.matrix.toarray(), subset_by_index=[0, 7])
    assert result.converged
    assert result.method == "multilevel"
    assert result.max_residual <= 1e-6
    # A Ritz value with residual r lies within r of an eigenvalue (Parlett,
    # The Symmetric Eigenvalue Problem, Thm 4.5.1 (from memory)); the gaps here
    # are larger than that, so it is the matching one.
    np.testing.assert_allclose(result.values, reference, rtol=0, atol=2e-6 * op.norm_bound)


def test_multilevel_is_deterministic(road) -> None:
    op = laplacian(road)
    first = smallest_eigenpairs(op, 6, method="multilevel", rng=4)
    second = smallest_eigenpairs(op, 6, method="multilevel", rng=4)
    assert np.array_equal(first.vectors, second.vectors)
    assert np.array_equal(first.values, second.values)


def test_multilevel_reports_its_work(road) -> None:
    op = laplacian(road)
    problem = Problem(
        op.matrix, op.null_basis[:, 0], op.norm_bound, 5, 1e-6, None, np.random.default_rng(0)
    )
    solution = solve_multilevel(problem)
    assert solution.matvecs > 0
    assert solution.iterations > 0
    assert solution.vectors.shape == (op.shape[0], 5)


def test_iteration_cap_gives_honest_partial_pairs(road) -> None:
    # With one iteration allowed and a tolerance no float64 run can reach, the
    # dispatcher must refuse the result but keep it, with true residuals.
    from specgraph import ConvergenceError

    op = laplacian(road)
    with pytest.raises(ConvergenceError) as info:
        smallest_eigenpairs(op, 6, method="multilevel", tol=1e-300, maxiter=1, rng=0)
    partial = info.value.partial
    raw = np.linalg.norm(op.matrix @ partial.vectors - partial.vectors * partial.values, axis=0)
    np.testing.assert_allclose(partial.residuals, raw / op.norm_bound, rtol=1e-10, atol=1e-15)


def test_many_vectors_keep_enough_coarse_nodes() -> None:
    # 80 pairs carry a block of 120 vectors: every level must keep more nodes than
    # that, or the coarsest dense solve cannot give the pairs (it once crashed when
    # a zoning into 161 zones reached a 56-node coarsest level). Reference: eigh.
    net = gallery.two_zone(600, p_in=0.02, links_between=40, seed=3)
    op = laplacian(net)
    result = smallest_eigenpairs(op, 80, method="multilevel", rng=0)
    reference = la.eigh(op.matrix.toarray(), eigvals_only=True, subset_by_index=[0, 79])
    np.testing.assert_allclose(result.values, reference, atol=1e-6)
    assert result.converged


def test_multilevel_memory_stays_within_its_budget() -> None:
    # Not a timing test: tracemalloc counts the bytes numpy allocates. The
    # budget, in sizes of the CSR matrix (8 nonzeros/row x 12 bytes): the
    # iteration keeps three double blocks of 9 columns (about 3 CSR sizes),
    # the finest preconditioner five single-precision ones (about 1.9), the
    # reordered matrix (1) and its single-precision values (0.3), the coarse
    # levels, their workspaces and the result. The earlier design, with six
    # double blocks of 11 columns and eight single-precision ones, took 20.
    import tracemalloc

    op = laplacian(gallery.road_like(20_000, rng=5))
    m = op.matrix
    csr = m.data.nbytes + m.indices.nbytes + m.indptr.nbytes
    problem = Problem(
        m, op.null_basis[:, 0], op.norm_bound, 7, 1e-6, None, np.random.default_rng(0)
    )
    # Load (or compile) both the serial and the parallel kernels untraced:
    # the finest level has more rows than PARALLEL_MIN_ROWS, the coarse ones fewer.
    solve_multilevel(problem)
    tracemalloc.start()
    try:
        solution = solve_multilevel(problem)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert solution.vectors.shape == (op.shape[0], 7)
    assert peak <= 12 * csr, f"peak {peak / csr:.1f} CSR sizes"


# ------------------------------------------------------- auto: structure decides
@pytest.fixture(scope="module")
def communities():
    """A planted partition (networkx's generator): 8 groups of 300, far apart in the spectrum."""
    import networkx as nx

    from specgraph import Network

    graph = nx.planted_partition_graph(8, 300, 0.05, 0.0004, seed=4)
    largest = graph.subgraph(max(nx.connected_components(graph), key=len)).copy()
    return Network.from_networkx(largest)


def test_auto_hands_a_wide_gap_to_flipped_lanczos(communities) -> None:
    # Reference: scipy's dense eigh. Seven community eigenvalues lie far below
    # the bulk, so the start block's gap ratio passes FLIP_GAP_RATIO.
    op = laplacian(communities)
    assert op.shape[0] > 2000  # above the dense limit: auto runs the multilevel solver
    result = smallest_eigenpairs(op, 8, rng=0)
    assert result.method == "lanczos_flip"
    assert result.converged
    assert result.max_residual <= 1e-6
    reference = la.eigh(op.matrix.toarray(), eigvals_only=True, subset_by_index=[0, 7])
    np.testing.assert_allclose(result.values, reference, atol=2e-6)


def test_named_multilevel_never_switches(communities) -> None:
    result = smallest_eigenpairs(laplacian(communities), 8, method="multilevel", rng=0)
    assert result.method == "multilevel"
    assert result.converged


def _problem(op, count: int) -> Problem:
    """A component problem as the dispatcher builds it, with a fresh generator."""
    return Problem(
        op.matrix, op.null_basis[:, 0], op.norm_bound, count, 1e-6, None, np.random.default_rng(0)
    )


def test_the_switch_keeps_multilevel_on_a_road_network() -> None:
    # What auto runs when its forecast picks the multilevel method: the gap
    # check on a near-planar network finds no wide gap, so the multilevel
    # iteration goes on, and its Rayleigh-Ritz step is LOBPCG's first, not an
    # extra one.
    op = laplacian(gallery.road_like(3000, rng=2))
    switched = solve_multilevel(_problem(op, 7), switch=True)
    named = solve_multilevel(_problem(op, 7))
    assert switched.method is None  # not handed over
    assert switched.matvecs == named.matvecs
    np.testing.assert_allclose(switched.values, named.values, atol=1e-12)


def test_a_failed_flip_trial_falls_back_and_is_counted(monkeypatch) -> None:
    # Force the trial on a road network and starve it: one restart cycle cannot
    # converge there, so the multilevel iteration must finish, with the trial's
    # products added to the count.
    import specgraph.eigen._multilevel as multilevel

    op = laplacian(gallery.road_like(3000, rng=2))
    plain = solve_multilevel(_problem(op, 7), switch=True)
    monkeypatch.setattr(multilevel, "FLIP_GAP_RATIO", 0.0)
    monkeypatch.setattr(multilevel, "FLIP_TRIAL_CYCLES", 1)
    fallback = solve_multilevel(_problem(op, 7), switch=True)
    assert fallback.method is None
    assert fallback.matvecs > plain.matvecs
    np.testing.assert_allclose(fallback.values, plain.values, atol=2e-6)
    residual = op.matrix @ fallback.vectors - fallback.vectors * fallback.values
    assert np.linalg.norm(residual, axis=0).max() <= 1e-6 * op.norm_bound


def test_an_ordering_handed_over_gives_the_same_pairs(road) -> None:
    # The auto forecast computes the reverse Cuthill-McKee order (scipy's
    # reverse_cuthill_mckee) and hands it to the solver, which would compute
    # the same order itself: the result must be the same to the bit.
    from scipy.sparse.csgraph import reverse_cuthill_mckee

    op = laplacian(road)
    order = reverse_cuthill_mckee(sp.csr_matrix(op.matrix), symmetric_mode=True)
    own = solve_multilevel(_problem(op, 5))
    handed = solve_multilevel(replace(_problem(op, 5), ordering=order.astype(np.int64)))
    assert np.array_equal(own.vectors, handed.vectors)
    assert np.array_equal(own.values, handed.values)
