"""Agreement of two zonings of the same nodes: indices, overlap, splits, merges, matching.

Everything is computed from one sparse contingency table (the nonzero cells
only: pairs of zones that share at least one node), found by a single sort of
the node pairs, so a million nodes and thousands of zones cost about a second.
A node absent from a zoning (label ``-1``, or missing from its file) is left
out of the comparison and counted; the indices describe the common nodes.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components, min_weight_full_bipartite_matching

from .._labels import code_labels
from .._validation import Array, check_param, parameter_error
from ..exceptions import InputError, ParameterError
from ._score import EXAMPLES_SHOWN

__all__ = [
    "MATCH_DENSE_CELLS",
    "SPLIT_SHARE",
    "Comparison",
    "compare",
    "compare_frames",
    "variation_of_information",
]

#: Least share of a zone that must fall in another zoning's zone for that zone
#: to count as one of its pieces in ``splits`` and ``merges``: 10% keeps
#: boundary nibbles (a few nodes that moved across a shifted boundary) out of
#: the list (common practice).
SPLIT_SHARE = 0.10

#: Largest group of overlapping zones (rows x columns of its block of the
#: contingency table) matched with the dense Hungarian solver
#: (:func:`scipy.optimize.linear_sum_assignment`, 8 bytes a cell); bigger
#: groups use the sparse solver :func:`scipy.sparse.csgraph.min_weight_full_bipartite_matching`.
MATCH_DENSE_CELLS = 4_000_000


@dataclass(frozen=True, eq=False)
class Comparison:
    """Agreement of zonings A and B (see :func:`compare`).

    Attributes
    ----------
    adjusted_rand : float
        Adjusted Rand index (1 for identical zonings, about 0 for independent ones).
    nmi : float
        Normalized mutual information, arithmetic-mean normalization.
    variation_of_information : float
        :math:`H(A|B) + H(B|A)` in nats (0 for identical zonings).
    normalized_vi : float
        ``variation_of_information / log(n)``, in ``[0, 1]`` (0 when ``n = 1``).
    nodes_compared : int
        Nodes in a zone in both zonings.
    only_in_a, only_in_b : int
        Nodes in a zone in one zoning only (left out).
    examples_only_in_a, examples_only_in_b : tuple of str
        The first few of them (node ids, or row numbers for label arrays).
    measure : {'nodes', 'size'}
        Unit of ``share_of_a``, ``share_of_b``, splits, merges and matching.
    overlap : pandas.DataFrame
        Every pair of zones sharing nodes: ``zone_a``, ``zone_b``, ``nodes``,
        ``size`` (when weights are given), ``share_of_a`` (the part of zone A
        lying in zone B), ``share_of_b``.
    splits : pandas.DataFrame
        Zones of A with at least :data:`SPLIT_SHARE` in each of several zones of
        B: ``zone_a``, ``pieces``, ``zones_b`` and ``shares`` (comma-separated,
        largest first).
    merges : pandas.DataFrame
        Zones of B gathering several zones of A likewise: ``zone_b``,
        ``pieces``, ``zones_a``, ``shares``.
    matched : pandas.DataFrame
        The one-to-one pairing of zones with the largest total overlap:
        ``zone_a``, ``zone_b``, ``nodes`` (and ``size``), ``share_of_a``,
        ``share_of_b``. Zones with no partner are absent.
    matched_share : float
        Part of the compared nodes (or size) inside matched pairs.
    """

    adjusted_rand: float
    nmi: float
    variation_of_information: float
    normalized_vi: float
    nodes_compared: int
    only_in_a: int
    only_in_b: int
    examples_only_in_a: tuple[str, ...]
    examples_only_in_b: tuple[str, ...]
    measure: str
    overlap: pd.DataFrame
    splits: pd.DataFrame
    merges: pd.DataFrame
    matched: pd.DataFrame
    matched_share: float

    def summary(self) -> dict[str, Any]:
        """The scalar figures, JSON-ready."""
        return {
            "adjusted_rand": self.adjusted_rand,
            "nmi": self.nmi,
            "variation_of_information": self.variation_of_information,
            "normalized_vi": self.normalized_vi,
            "nodes_compared": self.nodes_compared,
            "only_in_a": self.only_in_a,
            "only_in_b": self.only_in_b,
            "examples_only_in_a": list(self.examples_only_in_a),
            "examples_only_in_b": list(self.examples_only_in_b),
            "zones_a": int(self.overlap["zone_a"].nunique()),
            "zones_b": int(self.overlap["zone_b"].nunique()),
            "splits": len(self.splits),
            "merges": len(self.merges),
            "matched_pairs": len(self.matched),
            "matched_share": self.matched_share,
            "measure": self.measure,
        }


def variation_of_information(counts: np.ndarray) -> float:
    """Variation of information of a contingency table's nonzero cells, in nats.

    Parameters
    ----------
    counts : ndarray of shape (m, 3)
        One row per nonzero cell: row zone index, column zone index, count.

    Notes
    -----
    With :math:`p_{ij} = n_{ij}/n`, :math:`p_i = \\sum_j p_{ij}`,
    :math:`q_j = \\sum_i p_{ij}`, Meila [1]_ (eq. 15 and 20):

    .. math::

        VI = H(A|B) + H(B|A)
           = -\\sum_{ij} p_{ij}\\left[\\log\\frac{p_{ij}}{q_j}
             + \\log\\frac{p_{ij}}{p_i}\\right],

    a metric on zonings, with :math:`0 \\le VI \\le \\log n`.

    References
    ----------
    .. [1] M. Meila, "Comparing clusterings: an information based distance",
       J. Multivariate Anal. 98(5):873-895, 2007,
       :doi:`10.1016/j.jmva.2006.11.013`.

    Examples
    --------
    >>> cells = np.array([[0, 0, 2], [1, 1, 2]])  # the same two zones
    >>> variation_of_information(cells)
    0.0
    >>> cells = np.array([[0, 0, 1], [0, 1, 1]])  # one zone against two
    >>> print(round(variation_of_information(cells) / np.log(2), 12))
    1.0
    """
    counts = np.asarray(counts)
    if counts.size == 0:
        return 0.0
    rows, cols, n_ij = counts[:, 0], counts[:, 1], counts[:, 2].astype(np.float64)
    n = n_ij.sum()
    a = np.bincount(rows, weights=n_ij)[rows]
    b = np.bincount(cols, weights=n_ij)[cols]
    p = n_ij / n
    vi = -float(np.sum(p * (np.log(n_ij / b) + np.log(n_ij / a))))
    return vi if vi > 0 else 0.0  # rounding can leave -0.0 or -1e-17 for identical zonings


#: What weights of :func:`compare` hold, after their count.
_PER_NODE = "finite numbers >= 0, one per node"


def _check_labels(labels: Any, name: str) -> tuple[np.ndarray, np.ndarray | None]:
    return code_labels(labels, name=name, unassigned=True)


def compare(labels_a: Any, labels_b: Any, *, weights: Any = None) -> Comparison:
    """Compare two zonings of the same nodes.

    Parameters
    ----------
    labels_a, labels_b : array-like of int or str, shape (n,)
        Zone of each node in zonings A and B, kept as given: any integers
        ``>= 0`` (``-1`` for a node in no zone) or text labels such as
        district names (``None`` for a node in no zone); node ``i`` is the
        same node in both. Nodes unassigned in either are left out and
        counted.
    weights : array-like of float, shape (n,), optional
        Node sizes (for example connections served). When given, the overlap
        table gains a ``size`` column and shares, splits, merges and the
        matching are measured in size; the three indices always count nodes
        (scikit-learn's definitions).

    Returns
    -------
    Comparison

    Raises
    ------
    ParameterError
        For labels or weights of the wrong shape or type.
    InputError
        When no node is in a zone in both zonings.

    Notes
    -----
    The adjusted Rand index (Hubert and Arabie [1]_) and the normalized
    mutual information are scikit-learn's ``adjusted_rand_score`` and
    ``normalized_mutual_info_score`` with its default arithmetic-mean
    normalization :math:`I(A;B) / ((H(A)+H(B))/2)` (Strehl and Ghosh [2]_ use
    the geometric mean; the arithmetic one is the V-measure). The variation of
    information is :func:`variation_of_information` (Meila [3]_). The
    matching maximizes the total overlap of one-to-one pairs (the linear
    assignment problem, Kuhn [4]_): zones that share no node never help, so
    each group of zones joined by overlaps is solved on its own.

    References
    ----------
    .. [1] L. Hubert and P. Arabie, "Comparing partitions", J. Classification
       2:193-218, 1985, :doi:`10.1007/BF01908075`.
    .. [2] A. Strehl and J. Ghosh, "Cluster ensembles", JMLR 3:583-617, 2002.
    .. [3] M. Meila, J. Multivariate Anal. 98(5):873-895, 2007,
       :doi:`10.1016/j.jmva.2006.11.013`.
    .. [4] H. W. Kuhn, "The Hungarian method for the assignment problem",
       Naval Res. Logist. Q. 2:83-97, 1955, :doi:`10.1002/nav.3800020109`.

    Examples
    --------
    >>> result = compare([0, 0, 0, 1, 1, 1], [5, 5, 6, 6, 7, 7])
    >>> result.splits[["zone_a", "pieces", "zones_b"]].to_numpy().tolist()
    [[0, 2, '5, 6'], [1, 2, '7, 6']]
    >>> result.matched[["zone_a", "zone_b", "nodes"]].to_numpy().tolist()
    [[0, 5, 2], [1, 7, 2]]
    """
    a, names_a = _check_labels(labels_a, "labels_a")
    b, names_b = _check_labels(labels_b, "labels_b")
    if b.size != a.size:
        expected = f"the length of labels_a ({a.size})"
        raise parameter_error("labels_b", expected, labels_b, shown=str(b.size), verb="have")
    w = None
    if weights is not None:
        one_per_node = Array("float", (a.size,), low=0, description=f"{a.size} {_PER_NODE}")
        w = check_param(weights, "weights", [one_per_node], verb="hold")
    in_a, in_b = a >= 0, b >= 0
    return _compare_common(
        a[in_a & in_b],
        b[in_a & in_b],
        None if w is None else w[in_a & in_b],
        only_a=np.flatnonzero(in_a & ~in_b),
        only_b=np.flatnonzero(in_b & ~in_a),
        names=(names_a, names_b),
    )


def compare_frames(mapping_a: Mapping[str, int], mapping_b: Mapping[str, int]) -> Comparison:
    """Compare two node-to-zone mappings, for example two zone files.

    The comparison is on the nodes listed in both (in the order of A); nodes
    listed in one only are counted, with examples, in the result.

    Parameters
    ----------
    mapping_a, mapping_b : mapping of str to int or str
        Node id to zone: whole numbers (``>= 0``) or text labels (district
        names), as from :func:`specgraph.io.read_zone_file`; each mapping may
        use either, the two need not agree.

    Returns
    -------
    Comparison

    Raises
    ------
    InputError
        When the two mappings share no node, or a zone is neither an integer
        ``>= 0`` nor non-empty text.

    Examples
    --------
    >>> result = compare_frames({"p": 1, "q": 1, "r": 2}, {"q": 4, "r": 5, "s": 5})
    >>> result.nodes_compared, result.examples_only_in_a, result.examples_only_in_b
    (2, ('p',), ('s',))
    >>> named = compare_frames({"p": "North", "q": "South"}, {"p": 0, "q": 1})
    >>> named.matched[["zone_a", "zone_b"]].to_numpy().tolist()
    [['North', 0], ['South', 1]]
    """
    ids_a, zones_a, names_a = _mapping_arrays(mapping_a, "mapping_a")
    ids_b, zones_b, names_b = _mapping_arrays(mapping_b, "mapping_b")
    where_b = pd.Index(ids_b).get_indexer(ids_a)
    common = where_b >= 0
    in_a = np.zeros(ids_b.size, dtype=bool)
    in_a[where_b[common]] = True
    if not common.any():
        raise InputError(
            f"the two zonings share no node ({ids_a.size} and {ids_b.size} nodes); "
            "check that both files use the same node ids"
        )
    return _compare_common(
        zones_a[common],
        zones_b[where_b[common]],
        None,
        only_a=ids_a[~common],
        only_b=ids_b[~in_a],
        names=(names_a, names_b),
    )


def _mapping_arrays(
    mapping: Mapping[str, Any], name: str
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """Ids, zone codes and zone names (None for whole numbers) of a node-to-zone mapping."""
    ids = np.asarray([str(key) for key in mapping], dtype=object)
    try:
        codes, names = code_labels(np.asarray(list(mapping.values()), dtype=object), name=name)
    except ParameterError as error:
        why = str(error).rstrip(".")
        raise InputError(
            f"{name} must map node ids to zones: whole numbers >= 0 or non-empty text ({why})"
        ) from None
    return ids, codes, names


def _compare_common(
    a: np.ndarray,
    b: np.ndarray,
    w: np.ndarray | None,
    *,
    only_a: np.ndarray,
    only_b: np.ndarray,
    names: tuple[np.ndarray | None, np.ndarray | None] = (None, None),
) -> Comparison:
    """Every figure of :class:`Comparison` from the label codes of the common nodes
    (``names``: the text label of each code of A and of B, None for whole numbers)."""
    if a.size == 0:
        raise InputError("no node is in a zone in both zonings; nothing to compare")
    zones_a, ia = np.unique(a, return_inverse=True)
    zones_b, ib = np.unique(b, return_inverse=True)
    # Codes of text labels are in sorted text order, so the tables list names in that order.
    shown_a = zones_a if names[0] is None else names[0][zones_a]
    shown_b = zones_b if names[1] is None else names[1][zones_b]
    # One sort of the pair codes gives the nonzero cells of the contingency table.
    codes, cell_of = np.unique(ia * zones_b.size + ib, return_inverse=True)
    row, col = codes // zones_b.size, codes % zones_b.size
    nodes = np.bincount(cell_of, minlength=codes.size)
    amount = nodes.astype(np.float64) if w is None else np.bincount(cell_of, weights=w)
    with np.errstate(divide="ignore", invalid="ignore"):
        share_a = np.nan_to_num(amount / np.bincount(row, weights=amount)[row])
        share_b = np.nan_to_num(amount / np.bincount(col, weights=amount)[col])
    overlap = pd.DataFrame({"zone_a": shown_a[row], "zone_b": shown_b[col], "nodes": nodes})
    if w is not None:
        overlap["size"] = amount
    overlap["share_of_a"] = share_a
    overlap["share_of_b"] = share_b

    from sklearn.metrics import adjusted_rand_score, normalized_mutual_info_score

    vi = variation_of_information(np.column_stack([row, col, nodes]))
    n = int(a.size)
    pairs = _best_pairs(row, col, amount, zones_a.size, zones_b.size)
    total = float(amount.sum())
    return Comparison(
        adjusted_rand=float(adjusted_rand_score(ia, ib)),
        nmi=float(normalized_mutual_info_score(ia, ib)),
        variation_of_information=vi,
        normalized_vi=vi / np.log(n) if n > 1 else 0.0,
        nodes_compared=n,
        only_in_a=int(only_a.size),
        only_in_b=int(only_b.size),
        examples_only_in_a=tuple(str(x) for x in only_a[:EXAMPLES_SHOWN].tolist()),
        examples_only_in_b=tuple(str(x) for x in only_b[:EXAMPLES_SHOWN].tolist()),
        measure="nodes" if w is None else "size",
        overlap=overlap,
        splits=_pieces(overlap, "zone_a", "zone_b", "share_of_a"),
        merges=_pieces(overlap, "zone_b", "zone_a", "share_of_b"),
        matched=overlap.iloc[pairs].reset_index(drop=True),
        matched_share=float(amount[pairs].sum() / total) if total > 0 else 0.0,
    )


def _pieces(overlap: pd.DataFrame, whole: str, part: str, share: str) -> pd.DataFrame:
    """Zones (``whole``) with at least :data:`SPLIT_SHARE` in each of several ``part`` zones."""
    big = overlap.loc[overlap[share] >= SPLIT_SHARE, [whole, part, share]]
    big = big[big[whole].duplicated(keep=False)]
    big = big.sort_values([whole, share, part], ascending=[True, False, True], kind="stable")
    owners = big[whole].to_numpy()
    starts = np.flatnonzero(np.r_[True, owners[1:] != owners[:-1]][: owners.size])
    ends = np.r_[starts[1:], owners.size][: starts.size].astype(np.int64)
    parts, shares = big[part].tolist(), big[share].tolist()
    # Plain slicing per zone: a pandas string aggregation costs 100x more at thousands of zones.
    spans = list(zip(starts.tolist(), ends.tolist(), strict=True))
    return pd.DataFrame(
        {
            whole: owners[starts],
            "pieces": (ends - starts).astype(np.int64),
            f"zones_{part[-1]}": np.asarray(
                [", ".join(map(str, parts[i:j])) for i, j in spans], dtype=object
            ),
            "shares": np.asarray(
                [", ".join(f"{x:.3f}" for x in shares[i:j]) for i, j in spans], dtype=object
            ),
        }
    )


def _best_pairs(
    row: np.ndarray, col: np.ndarray, amount: np.ndarray, n_rows: int, n_cols: int
) -> np.ndarray:
    """Cells (indices into the nonzero cells) of a one-to-one pairing of largest total overlap.

    The bipartite graph of zones joined by nonzero cells splits into groups
    with no overlap between them, and an optimal pairing of the whole is the
    union of optimal pairings of the groups. A group with one zone on a side
    pairs it with its largest cell; the others are solved as assignment
    problems, densely up to :data:`MATCH_DENSE_CELLS` cells.
    """
    graph = sp.coo_array(
        (np.ones(row.size), (row, col + n_rows)), shape=(n_rows + n_cols, n_rows + n_cols)
    )
    _, group_of = connected_components(graph, directed=False)
    group = group_of[row]
    rows_in = np.bincount(group_of[:n_rows], minlength=group_of.max() + 1)[group]
    cols_in = np.bincount(group_of[n_rows:], minlength=group_of.max() + 1)[group]
    chosen = []
    # Groups with one zone on a side: the largest cell (first on ties, by row then column).
    star = np.flatnonzero((rows_in == 1) | (cols_in == 1))
    if star.size:
        order = star[np.lexsort((-amount[star], group[star]))]
        first = np.concatenate([[True], np.diff(group[order]) != 0])
        chosen.append(order[first])
    rest = np.flatnonzero((rows_in > 1) & (cols_in > 1))
    rest = rest[np.argsort(group[rest], kind="stable")]
    bounds = np.flatnonzero(np.diff(group[rest])) + 1
    for cells in np.split(rest, bounds) if rest.size else []:
        chosen.append(_assign(cells, row[cells], col[cells], amount[cells]))
    pairs = np.concatenate(chosen) if chosen else np.empty(0, dtype=np.int64)
    return np.sort(pairs)


def _assign(cells: np.ndarray, row: np.ndarray, col: np.ndarray, amount: np.ndarray) -> np.ndarray:
    """Cells of a maximum-overlap one-to-one pairing within one group of zones."""
    rows, r = np.unique(row, return_inverse=True)
    cols, c = np.unique(col, return_inverse=True)
    if rows.size * cols.size <= MATCH_DENSE_CELLS:
        from scipy.optimize import linear_sum_assignment

        dense = np.zeros((rows.size, cols.size))
        dense[r, c] = amount
        picked_r, picked_c = linear_sum_assignment(dense, maximize=True)
    else:
        # Sparse Jonker-Volgenant needs a matching of every row to exist: give
        # each row a private dummy column worth less, in total, than one unit
        # of overlap, so real overlap is maximized first (exact for node
        # counts, to that margin for sizes).
        # Cells of zero size are left out: the solver reads a stored zero as no link.
        p, edge = rows.size, amount > 0
        margin = 0.5 * (amount[edge].min() if edge.any() else 1.0) / p
        biadjacency = sp.csr_array(
            (
                np.concatenate([amount[edge], np.full(p, margin)]),
                (
                    np.concatenate([r[edge], np.arange(p)]),
                    np.concatenate([c[edge], cols.size + np.arange(p)]),
                ),
            ),
            shape=(p, cols.size + p),
        )
        picked_r, picked_c = min_weight_full_bipartite_matching(biadjacency, maximize=True)
        real = picked_c < cols.size
        picked_r, picked_c = picked_r[real], picked_c[real]
    lookup = pd.Series(np.arange(cells.size), index=r * cols.size + c)
    keep = lookup.reindex(picked_r * cols.size + picked_c).to_numpy()
    keep = keep[~np.isnan(keep)].astype(np.int64)
    return cells[keep[amount[keep] > 0]]
