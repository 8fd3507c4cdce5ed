"""Effective resistance of every link: exact on small pieces, sketched on large ones.

For every link, :math:`R_{ij} = (e_i - e_j)^T L^+ (e_i - e_j)` and its
leverage :math:`w_{ij} R_{ij}` (Spielman and Srivastava [4]_): 1 for a
bridge, near 0 for a link with many parallel routes. Current between the ends
of a link never crosses a bridge, so each 2-edge-connected piece (a component
of the network without its bridges) is solved on its own: exactly (dense
inverse) up to :data:`EXACT_RESISTANCE_LIMIT` nodes, by the
Johnson-Lindenstrauss sketch of [4]_ beyond.

References
----------
.. [4] D. A. Spielman and N. Srivastava, "Graph sparsification by effective
   resistances", SIAM J. Comput. 40(6):1913-1926, 2011.
   :doi:`10.1137/080734029`
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.sparse as sp
from numba import njit
from scipy.sparse.csgraph import connected_components, reverse_cuthill_mckee

from .._validation import check_choice, check_int, check_rng
from ..eigen import build_hierarchy
from ..exceptions import ConvergenceError
from ..network import Network
from ._cuts import CutStructure, cut_structure
from ._groups import STACKED_LIMIT, _Groups, _stacked_laplacians

__all__ = [
    "EXACT_RESISTANCE_LIMIT",
    "RESISTANCE_METHODS",
    "SKETCH_ROWS",
    "LinkResistances",
    "effective_resistances",
]

#: 2-edge-connected pieces of at most this many nodes get exact resistances
#: from a dense inverse of :math:`L + J/m` (8 m^2 bytes, under a second on one
#: core at 2000 nodes); larger pieces are sketched.
EXACT_RESISTANCE_LIMIT = 2000

#: Rows ``q`` of the random sign matrix of the resistance sketch. Each
#: estimate is then about :math:`R \chi^2_q / q`, relative standard deviation
#: :math:`\sqrt{2/q}` = 0.29 (Spielman and Srivastava [4]_ take
#: :math:`q = 24 \ln n / \varepsilon^2` for a :math:`1 \pm \varepsilon`
#: guarantee on every link at once, far more than a ranking needs). Measured
#: against exact values on a 4,000-node road-like network: median relative
#: error 0.16, root mean square 0.24, and 0.08 on the 100 links of highest
#: leverage (0.14, 0.21 and 0.08 at q = 32; 0.11, 0.17, 0.07 at q = 48). Time
#: grows linearly in q.
SKETCH_ROWS = 24

#: Relative residual :math:`\|L x - y\| / \|y\|` each sketch solve must reach.
#: Measured on the million-node road-like network against solves to 1e-6: it
#: moves the estimates by a median 0.8 % (99th percentile 6 %), far below the
#: sketch's own spread; 1e-3 costs twice the cycles for 0.05 % (0.4 %).
SOLVE_RTOL = 1e-2

#: Flexible CG steps (each preconditioned by one K-cycle) between two checks
#: of the true residual in double precision.
SOLVE_ROUND_STEPS = 4

#: Checks of the true residual before a sketch solve is declared failed.
SOLVE_MAX_ROUNDS = 50

#: Right-hand sides solved together: the block kernels walk the matrix once
#: per block; a block of 12 keeps the single-precision workspaces of a
#: million-node piece near 400 MB.
SOLVE_BLOCK = 12

#: Pieces with more nodes than this are reordered by reverse Cuthill-McKee
#: before the sketch solves: a randomly numbered million-node network runs
#: its sparse products about 15 times slower than a banded one (measured).
REORDER_MIN = 2000

RESISTANCE_METHODS = ("auto", "exact", "sketch")


# ---------------------------------------------------------------- kernels
@njit(cache=True)
def _signed_incidence(a, b, scale, bits, out):  # pragma: no cover - compiled
    """``out = B^T diag(scale) S``: link ``e`` adds ``+-scale[e]`` at ``a[e]``, minus at ``b[e]``.

    ``bits[e, c]`` (0 or 1) picks the sign of link ``e`` in column ``c``.
    """
    out[:] = 0.0
    for e in range(a.size):
        for c in range(out.shape[1]):
            v = scale[e] if bits[e, c] else -scale[e]
            out[a[e], c] += v
            out[b[e], c] -= v


@njit(cache=True)
def _squared_differences(x, a, b, out):  # pragma: no cover - compiled
    """``out[e] = ||x[a[e]] - x[b[e]]||^2`` over the rows of a block."""
    for e in range(a.size):
        acc = 0.0
        for c in range(x.shape[1]):
            d = x[a[e], c] - x[b[e], c]
            acc += d * d
        out[e] = acc


# ------------------------------------------------------------ effective resistance
@dataclass(frozen=True, eq=False)
class LinkResistances:
    """Effective resistance of every distinct link.

    Attributes
    ----------
    source, target : ndarray of int, shape (m,)
        Link ends (rows, ``source < target``), row-major order as in
        :class:`CutStructure`.
    weight : ndarray of float
    resistance : ndarray of float
        :math:`R_{ij}`; exact (to rounding) for bridges (:math:`1/w_{ij}`) and
        for links in pieces solved exactly, estimated for sketched pieces.
    estimated : ndarray of bool
        Links whose resistance comes from the sketch.
    method : str
        ``'exact'``, ``'sketch'``, ``'exact+sketch'`` or ``'none'`` (no link
        outside bridges).
    sketch_rows : int
        Rows of the sign matrix used (0 when nothing was sketched).
    max_residual : float
        Largest relative residual of the sketch solves (0 when none).
    unavailable : int, default=0
        Links whose resistance could not be computed (NaN): the weights of
        their piece span more than a float64 inverse can resolve.
    warning : str, default=''
        Why, when ``unavailable`` is not 0.

    ``weight`` and ``resistance`` are in the units of the affinities as given
    (the network may hold them scaled, :attr:`Network.weight_exponent`).
    """

    source: np.ndarray
    target: np.ndarray
    weight: np.ndarray
    resistance: np.ndarray
    estimated: np.ndarray
    method: str
    sketch_rows: int
    max_residual: float
    unavailable: int = 0
    warning: str = ""

    @property
    def leverage(self) -> np.ndarray:
        """:math:`w_{ij} R_{ij}`: 1 for a bridge; these sum to ``n - c`` (Foster)."""
        return self.weight * self.resistance


def effective_resistances(
    network: Network,
    *,
    method: str = "auto",
    sketch_rows: int = SKETCH_ROWS,
    rng: Any = None,
) -> LinkResistances:
    """Effective resistance :math:`R_{ij} = (e_i - e_j)^T L^+ (e_i - e_j)` of every link.

    Parameters
    ----------
    network : Network
    method : {'auto', 'exact', 'sketch'}, default='auto'
        ``'exact'`` inverts every 2-edge-connected piece densely (memory
        :math:`8 m^2` bytes for a piece of ``m`` nodes); ``'sketch'`` estimates
        every piece; ``'auto'`` is exact up to :data:`EXACT_RESISTANCE_LIMIT`
        nodes per piece and sketched beyond.
    sketch_rows : int, default=SKETCH_ROWS
        Rows ``q`` of the random sign matrix.
    rng : None, int or numpy.random.Generator
        Seeds the sign matrix.

    Returns
    -------
    LinkResistances

    Notes
    -----
    A bridge carries no current between the ends of any other link (the
    current would have to cross it both ways), so each 2-edge-connected piece
    is solved alone, and a bridge's resistance is :math:`1/w`.

    *Exact:* :math:`L^+ = (L + J/m)^{-1} - J/m` on a connected piece of ``m``
    nodes (:math:`J` all ones), a standard identity (common practice).

    *Sketch* (Spielman and Srivastava [4]_): with :math:`B` the link-node
    incidence matrix, :math:`W` the weights and :math:`Q` a :math:`q \\times m`
    matrix of independent :math:`\\pm 1/\\sqrt q`,

    .. math::

        R_{ij} = \\|W^{1/2} B L^+ (e_i - e_j)\\|^2
        \\approx \\|Q W^{1/2} B L^+ (e_i - e_j)\\|^2 = \\|X_i - X_j\\|^2,
        \\qquad L X = B^T W^{1/2} Q^T ,

    so ``q`` Laplacian solves give every link's estimate at once. Each
    estimate has relative standard deviation about :math:`\\sqrt{2/q}`
    (0.29 at the default; see :data:`SKETCH_ROWS` for measured errors). The
    solves are flexible conjugate gradients preconditioned by the aggregation
    K-cycle of the multilevel eigen-solver (pyamg aggregation), on the piece
    reordered by reverse Cuthill-McKee, with the constant vector deflated, to
    a relative residual of :data:`SOLVE_RTOL`. (pyamg's smoothed aggregation
    under scipy's ``cg``, one right-hand side at a time, was measured at 25 s
    of setup and 20 s per solve on the million-node road-like network; the
    block K-cycle solves :data:`SOLVE_BLOCK` right-hand sides together.)

    Raises
    ------
    ConvergenceError
        When a sketch solve misses :data:`SOLVE_RTOL` after
        :data:`SOLVE_MAX_ROUNDS` rounds (``err.partial`` is None).

    Examples
    --------
    >>> from specgraph import gallery
    >>> res = effective_resistances(gallery.ring(4))
    >>> res.resistance.round(6).tolist()  # (n - 1) / n on a ring of n
    [0.75, 0.75, 0.75, 0.75]
    """
    check_choice(method, "method", RESISTANCE_METHODS)
    sketch_rows = check_int(sketch_rows, "sketch_rows", minimum=1)
    return _resistances(network, cut_structure(network), method, sketch_rows, check_rng(rng))


def _resistances(
    network: Network, cuts: CutStructure, method: str, q: int, rng: np.random.Generator
) -> LinkResistances:
    n = network.n_nodes
    source, target, weight = cuts.link_source, cuts.link_target, cuts.link_weight
    resistance = np.zeros(source.size)
    resistance[cuts.is_bridge] = 1.0 / weight[cuts.is_bridge]
    estimated = np.zeros(source.size, dtype=bool)
    inner = np.flatnonzero(~cuts.is_bridge)
    upper = sp.coo_array((weight[inner], (source[inner], target[inner])), shape=(n, n))
    pieces_adj = (upper + upper.T).tocsr()
    count, piece = connected_components(pieces_adj, directed=False)
    groups = _Groups.of(piece.astype(np.int64), count)
    position = np.empty(n, dtype=np.int64)
    position[groups.order] = np.arange(n) - groups.starts[groups.labels[groups.order]]
    link_piece = piece[source[inner]]
    link_sort = np.argsort(link_piece, kind="stable")
    link_starts = np.searchsorted(link_piece[link_sort], np.arange(count + 1))
    used: set[str] = set()
    worst = 0.0
    limit = {"exact": n, "sketch": 1, "auto": EXACT_RESISTANCE_LIMIT}[method]
    for size in range(3, min(STACKED_LIMIT, limit) + 1):
        ids, blocks = groups.stacked(pieces_adj, size)
        if ids.size == 0:
            continue
        shifted = _stacked_laplacians(blocks, "combinatorial") + 1.0 / size
        pinv = _stacked_inverse(shifted) - 1.0 / size
        slot = np.full(count, -1, dtype=np.int64)
        slot[ids] = np.arange(ids.size)
        links = inner[slot[link_piece] >= 0]
        k, a, b = slot[piece[source[links]]], position[source[links]], position[target[links]]
        resistance[links] = pinv[k, a, a] + pinv[k, b, b] - 2.0 * pinv[k, a, b]
        used.add("exact")
    for group in np.flatnonzero(groups.counts > min(STACKED_LIMIT, limit)):
        rows = groups.members(int(group))
        links = inner[link_sort[link_starts[group] : link_starts[group + 1]]]
        a, b = position[source[links]], position[target[links]]
        block = pieces_adj[rows][:, rows]
        if rows.size <= limit:
            resistance[links] = _exact_piece(block, a, b)
            used.add("exact")
        else:
            resistance[links], residual = _sketch_piece(block, a, b, weight[links], q, rng)
            estimated[links] = True
            worst = max(worst, residual)
            used.add("sketch")
    # A resistance is positive; NaN, infinite or not positive is an inverse that
    # float64 could not resolve (weights 2^53 and more apart in one piece).
    lost = ~(resistance > 0) | ~np.isfinite(resistance)
    resistance[lost] = np.nan
    unavailable = int(np.count_nonzero(lost))
    return LinkResistances(
        source=source,
        target=target,
        weight=network.user_units(weight),
        # R scales as 1/w: at the network's scale it is 2**weight_exponent times too big.
        resistance=np.ldexp(resistance, -network.weight_exponent),
        estimated=estimated,
        method="+".join(sorted(used)) or "none",
        sketch_rows=q if "sketch" in used else 0,
        max_residual=worst,
        unavailable=unavailable,
        warning=_unavailable_warning(unavailable),
    )


def _unavailable_warning(unavailable: int) -> str:
    """The warning for resistances left empty ('' when none)."""
    if not unavailable:
        return ""
    links = "1 link" if unavailable == 1 else f"{unavailable:,} links"
    return (
        f"the effective resistance (and leverage) of {links} could not be computed and is "
        "left empty: the link weights around them span more than a float64 inverse can "
        "resolve (weights 2^53 or more apart in one piece); their bridges and cut figures "
        "are exact"
    )


def _stacked_inverse(stack: np.ndarray) -> np.ndarray:
    """Inverses of a stack of matrices; NaN for a matrix float64 finds singular."""
    try:
        return np.linalg.inv(stack)
    except np.linalg.LinAlgError:
        out = np.full_like(stack, np.nan)
        for i, matrix in enumerate(stack):
            try:
                out[i] = np.linalg.inv(matrix)
            except np.linalg.LinAlgError:
                continue
        return out


def _exact_piece(block: sp.csr_array, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Exact resistances on one connected piece, from :math:`(L + J/m)^{-1} - J/m`."""
    m = block.shape[0]
    dense = -block.toarray()
    dense[np.diag_indices(m)] += block.sum(axis=1)
    pinv = _stacked_inverse((dense + 1.0 / m)[None])[0] - 1.0 / m
    return pinv[a, a] + pinv[b, b] - 2.0 * pinv[a, b]


def _sketch_piece(
    block: sp.csr_array,
    a: np.ndarray,
    b: np.ndarray,
    weight: np.ndarray,
    q: int,
    rng: np.random.Generator,
) -> tuple[np.ndarray, float]:
    """Johnson-Lindenstrauss estimates of the resistances of one connected piece."""
    m = block.shape[0]
    if m > REORDER_MIN:
        perm = reverse_cuthill_mckee(sp.csr_matrix(block), symmetric_mode=True)
        block = block[perm][:, perm]
        inverse = np.empty(m, dtype=np.int64)
        inverse[perm] = np.arange(m)
        a, b = inverse[a], inverse[b]
    lap = (sp.diags_array(np.asarray(block.sum(axis=1)).ravel()) - block).tocsr()
    lap.sort_indices()
    hierarchy = build_hierarchy(lap, np.full(m, 1.0 / np.sqrt(m)))
    root_w = np.sqrt(weight) / np.sqrt(q)
    total = np.zeros(a.size)
    part = np.empty(a.size)
    worst = 0.0
    for start in range(0, q, SOLVE_BLOCK):
        width = min(SOLVE_BLOCK, q - start)
        rhs = np.empty((m, width))
        bits = rng.integers(0, 2, size=(a.size, width), dtype=np.uint8)
        _signed_incidence(a, b, root_w, bits, rhs)
        x, residual = _solve_block(lap, hierarchy, rhs)
        _squared_differences(x, a, b, part)
        total += part
        worst = max(worst, residual)
    return total, worst


def _solve_block(lap: sp.csr_array, hierarchy: Any, rhs: np.ndarray) -> tuple[np.ndarray, float]:
    """Solve ``L X = rhs`` (columns summing to zero) by refinement around the K-cycle FCG."""
    norms = np.linalg.norm(rhs, axis=0)
    norms[norms == 0] = 1.0
    x = np.zeros_like(rhs)
    residual = rhs.copy()
    relative = np.ones(rhs.shape[1])
    for _ in range(SOLVE_MAX_ROUNDS):
        step = hierarchy.solve(0, np.ascontiguousarray(residual), SOLVE_ROUND_STEPS)
        step = np.asarray(step, dtype=np.float64)
        x += step - step.mean(axis=0)  # deflate the constant vector
        residual = rhs - lap @ x
        relative = np.linalg.norm(residual, axis=0) / norms
        if relative.max() <= SOLVE_RTOL:
            return np.ascontiguousarray(x), float(relative.max())
    raise ConvergenceError(
        f"a resistance sketch solve reached relative residual {relative.max():.3g} after "
        f"{SOLVE_MAX_ROUNDS} rounds against {SOLVE_RTOL:.3g}; use resistance='exact' on "
        "small networks or report the network",
        partial=None,
    )
