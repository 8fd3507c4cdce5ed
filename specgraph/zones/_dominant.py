"""Links whose affinity dwarfs every link around them, and the spread of the link affinities.

Real grids weighted by admittance hold bus couplers and zero-impedance ties
whose affinities are thousands of times those of the lines. To the
normalized cut, the two ends of such a coupler are a zone of their own
(their cut is tiny against their volume), so a spectral zoning returns zones
of two or three buses. This module:

* measures the spread of the link affinities (:func:`weight_range`), which
  :func:`~specgraph.zones.find_zones` records in ``decisions["weights"]``
  and warns about above :data:`WEIGHT_RANGE_WARN`;
* finds the *dominant* links (:func:`find_dominant_links`): the links inside
  a group of nodes whose every inner link is at least :data:`DOMINANT_GAP`
  times every link leaving the group;
* chooses which of them to contract before the solve, like kept links
  (:func:`dominant_contraction`): never into a super-node holding two
  sources, nodes fixed to different zones, or more than ``max_size``.

The rule reads the single-linkage hierarchy of the links (Kruskal's maximum
spanning forest, merged from the strongest link down): a group formed at
affinity ``h`` (its weakest inner forest link) that joins the rest of its
component at affinity ``p`` (its strongest outer link) is dominated when
``h >= DOMINANT_GAP * p``. For a coupler between two buses this reads
"the coupler is ``DOMINANT_GAP`` times stronger than every line at either
end"; a chain of couplers forms one group.

Why contract: as a link's affinity ``w`` grows without bound, the eigenvalues
of the combinatorial Laplacian below the pair's own mode (about ``2w``) tend
to those of the graph with the link contracted, each super-node weighted by
its member count (Courant-Fischer with a penalty; checked in
tests/test_dominant.py). For the normalized Laplacian the coupler's affinity
also enters the degrees of its ends, so its two ends look like a zone of
tiny normalized cut; contracting drops it from the super-node's volume, which
then counts only the links leaving the bus, as for any other bus.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components, minimum_spanning_tree

from .._sparse import int32_indexed
from .._wording import count, plural
from ..network import Network, weight_notes
from ._arrays import as_csr
from ._contract import contract_links
from ._rules import ResolvedConstraints

__all__ = [
    "COMPILED_MIN_LINKS",
    "DOMINANT_GAP",
    "DOMINANT_SHOWN",
    "DOMINANT_TREATMENTS",
    "NODE_COUNTS_SHOWN",
    "WEIGHT_RANGE_WARN",
    "DominantLinks",
    "coupler_trouble",
    "dominant_contraction",
    "find_dominant_links",
    "survey_weights",
    "weight_range",
]

#: A group of nodes is held by dominant links when its every inner link is at
#: least this many times every link leaving it. Measured on 14 open networks
#: (``benchmarks/probe_weight_range.py``; docs/methods.md, "Dominant links and
#: weight range"): the largest such ratio is 9.9 to 250 on the water networks
#: (250: ky10's pressure-reducing valves, written with a 1,000 diameter between
#: 4-inch pipes), 33 to 39 on the telecom backbones, 218 to 715 on the rte,
#: pegase and sp grids and 3,920 on the GB grid, whose couplers make zones of
#: 2 buses. At 300 no water or telecom link is contracted and the GB grid's
#: smallest zone at 5/8/12 zones goes from 6/2/2 buses to 36/11/11; at 100
#: ky10's valves would be contracted, at 500 the GB grid keeps a 2-bus zone at
#: 12 zones, at 1,000 only 5 of its links are marked.
DOMINANT_GAP = 300.0

#: Above this ratio of the largest link affinity to the median one,
#: :func:`~specgraph.zones.find_zones` warns that the weights span a wide
#: range (and says what was contracted). Measured as :data:`DOMINANT_GAP`:
#: water networks reach 167, telecom backbones 870 (short links read as
#: distances), the rte, pegase and sp grids 113 to 784, the GB grid 8,040.
WEIGHT_RANGE_WARN = 1000.0

#: Dominant links listed by node ids in ``decisions["weights"]`` (the count
#: covers them all).
DOMINANT_SHOWN = 20

#: What ``find_zones(dominant=...)`` accepts: ``'auto'`` (zone with the
#: dominant links free and contract them, zoning again, only where that left a
#: zone inside one of their groups or cut one of them), contract them before
#: the solve, or leave them as they are.
DOMINANT_TREATMENTS = ("auto", "contract", "ignore")


@dataclass(frozen=True)
class DominantLinks:
    """Dominant links: rows of their two ends and their affinities, strongest first."""

    pairs: np.ndarray
    weights: np.ndarray


@dataclass(frozen=True, eq=False)
class WeightSurvey:
    """A network's affinity spread (:func:`weight_range`) and dominant links
    (:func:`find_dominant_links`), read once per zoning and shared by its passes."""

    figures: dict[str, Any]
    found: DominantLinks


def survey_weights(adjacency: Any) -> WeightSurvey:
    """:func:`weight_range` and :func:`find_dominant_links` (at :data:`DOMINANT_GAP`) at once.

    Examples
    --------
    >>> from specgraph import gallery
    >>> a = gallery.path(4).adjacency.tolil()
    >>> a[1, 2] = a[2, 1] = 1e6
    >>> survey = survey_weights(a)
    >>> survey.figures["links"], survey.found.pairs.tolist()
    (3, [[1, 2]])
    """
    links = _links(adjacency)
    return WeightSurvey(_range_of(links.data), _dominant_of(links, DOMINANT_GAP))


def _links(adjacency: Any) -> sp.coo_array:
    """Every link once (the upper triangle of the symmetric adjacency), zeros dropped."""
    upper = sp.triu(as_csr(adjacency), k=1).tocoo()
    keep = upper.data > 0
    return sp.coo_array((upper.data[keep], (upper.row[keep], upper.col[keep])), shape=upper.shape)


def weight_range(adjacency: Any) -> dict[str, Any]:
    """Spread of the link affinities: minimum, median, maximum and their ratios.

    Parameters
    ----------
    adjacency : sparse array of shape (n, n)
        Symmetric affinities (a :class:`~specgraph.Network`'s adjacency); each
        link is counted once, from the upper triangle.

    Returns
    -------
    dict
        ``links``, ``min``, ``median``, ``max``, ``max_over_median`` and
        ``max_over_min`` (the figures are ``None`` without links).

    Examples
    --------
    >>> import scipy.sparse as sp
    >>> a = sp.csr_array([[0, 1, 0], [1, 0, 100.0], [0, 100.0, 0]])
    >>> weight_range(a)["max_over_min"]
    100.0
    """
    return _range_of(_links(adjacency).data)


#: Figures of :func:`weight_range` in affinity units (the ratios have none).
_ABSOLUTE = ("min", "median", "max")


def _range_of(w: np.ndarray) -> dict[str, Any]:
    """:func:`weight_range` of the affinities ``w``, one per link."""
    if w.size == 0:
        return dict.fromkeys(("min", "median", "max", "max_over_median", "max_over_min")) | {
            "links": 0
        }
    low, mid, high = float(w.min()), float(np.median(w)), float(w.max())
    return {
        "links": int(w.size),
        "min": low,
        "median": mid,
        "max": high,
        "max_over_median": high / mid,
        "max_over_min": high / low,
    }


def find_dominant_links(adjacency: Any, *, gap: float = DOMINANT_GAP) -> DominantLinks:
    """Links inside groups whose every inner link dwarfs every link leaving them.

    Parameters
    ----------
    adjacency : sparse array of shape (n, n)
        Symmetric positive affinities.
    gap : float, default=DOMINANT_GAP
        A group is held by dominant links when its weakest inner link is at
        least ``gap`` times its strongest outer link.

    Returns
    -------
    DominantLinks
        The maximum-spanning-forest links inside every such group, strongest
        first: contracting them merges each group into one node.

    Notes
    -----
    The groups are the clusters of single linkage on the affinities: the
    maximum spanning forest (J. B. Kruskal, Proc. AMS 7 (1956) 48-50,
    https://doi.org/10.1090/S0002-9939-1956-0078686-7, as
    ``scipy.sparse.csgraph.minimum_spanning_tree`` on the affinity ranks),
    merged from its strongest link down. A cluster formed at affinity ``h``
    is next merged at ``p``, the strongest link leaving it; it is kept when
    ``h >= gap * p``. A whole component is never dominated (no link leaves
    it). Cost: the forest, then one union-find pass over its links.

    Examples
    --------
    >>> from specgraph import gallery
    >>> a = gallery.path(4).adjacency.tolil()
    >>> a[1, 2] = a[2, 1] = 1e6
    >>> find_dominant_links(a).pairs.tolist()
    [[1, 2]]
    """
    return _dominant_of(_links(adjacency), gap)


def _dominant_of(links: sp.coo_array, gap: float) -> DominantLinks:
    """:func:`find_dominant_links` of the links ``links`` (each once)."""
    none = DominantLinks(np.empty((0, 2), dtype=np.int64), np.empty(0))
    w = links.data
    if w.size < 2 or w.max() < gap * w.min():
        return none  # no link can be gap times another
    # Ranks (1 = strongest) keep the forest exact: 1 / w would round.
    order = np.argsort(-w, kind="stable")
    rank = np.empty(w.size)
    rank[order] = np.arange(1, w.size + 1)
    ranked = sp.coo_array((rank, (links.row, links.col)), shape=links.shape)
    forest = minimum_spanning_tree(int32_indexed(ranked.tocsr())).tocoo()
    by_strength = np.argsort(forest.data, kind="stable")
    rows = forest.row[by_strength].astype(np.int64)
    cols = forest.col[by_strength].astype(np.int64)
    weights = w[order][forest.data[by_strength].astype(np.int64) - 1]
    marked = _dominated_forest_links(rows, cols, weights, links.shape[0], gap)
    return DominantLinks(np.column_stack([rows[marked], cols[marked]]), weights[marked])


def _dominated_forest_links(
    rows: np.ndarray, cols: np.ndarray, weights: np.ndarray, n: int, gap: float
) -> np.ndarray:
    """Which forest links (given strongest first) lie inside a dominated cluster.

    The union-find pass runs as plain Python up to :data:`COMPILED_MIN_LINKS`
    forest links, compiled by numba (``cache=True``, as the eigen kernels)
    above: the same loop either way.
    """
    if weights.size < COMPILED_MIN_LINKS:
        return _mark_dominated(rows, cols, weights, n, gap)
    from numba import njit  # loaded only for large forests

    global _COMPILED
    if _COMPILED is None:
        _COMPILED = njit(cache=True)(_mark_dominated)
    return np.asarray(_COMPILED(rows, cols, weights, n, gap), dtype=bool)


#: Forest links from which the union-find pass of :func:`find_dominant_links`
#: runs compiled: plain Python takes about 5 s per million links here, the
#: compiled loop a few hundredths (plus about a second to compile, once).
COMPILED_MIN_LINKS = 100_000

_COMPILED: Any = None


def _mark_dominated(
    rows: np.ndarray, cols: np.ndarray, weights: np.ndarray, n: int, gap: float
) -> np.ndarray:
    """Kruskal's merges from the strongest forest link down, then the dominated subtrees.

    ``created[r]`` is the forest link whose merge formed the cluster of root
    ``r`` (-1 for a single node); ``parent[e]`` the link that next merges the
    cluster formed by ``e``. A cluster is dominated when its forming link is
    at least ``gap`` times its parent link; every link below it in the
    hierarchy is then marked (parents come after their children in the order).
    """
    m = weights.size
    root = np.arange(n)
    members = np.ones(n, dtype=np.int64)
    created = np.full(n, -1, dtype=np.int64)
    parent = np.full(m, -1, dtype=np.int64)
    marked = np.zeros(m, dtype=np.bool_)
    for e in range(m):
        ends = [rows[e], cols[e]]
        for k in range(2):
            v = ends[k]
            while root[v] != v:
                root[v] = root[root[v]]
                v = root[v]
            ends[k] = v
            c = created[v]
            if c >= 0:
                parent[c] = e
                marked[c] = weights[c] >= gap * weights[e]
        big, small = ends[0], ends[1]
        if members[big] < members[small]:
            big, small = small, big
        root[small] = big
        members[big] += members[small]
        created[big] = e
    for e in range(m - 1, -1, -1):
        if parent[e] >= 0 and marked[parent[e]]:
            marked[e] = True
    return marked


def dominant_contraction(
    network: Network,
    rules: ResolvedConstraints,
    treatment: str,
    merged_pairs: np.ndarray,
    survey: WeightSurvey,
) -> tuple[np.ndarray, dict[str, Any]]:
    """The dominant links to contract before the solve, and the ``"weights"`` decision.

    Parameters
    ----------
    network : Network
    rules : ResolvedConstraints
    treatment : {'auto', 'contract', 'ignore'}
        ``'auto'`` contracts nothing here (the first pass of
        :func:`~specgraph.zones.find_zones`, which zones again with
        ``'contract'`` when :func:`coupler_trouble` finds something).
    merged_pairs : ndarray of int, shape (m, 2)
        Pairs already merged (kept links, attached trees): the dominant links
        are contracted on top of them, so the checks see the whole super-node.
    survey : WeightSurvey
        The network's :func:`survey_weights`.

    Returns
    -------
    pairs : ndarray of int, shape (c, 2)
        Rows of the ends of the links to contract (empty for ``'ignore'``).
    decision : dict
        :func:`weight_range` figures, ``dominant_gap``, ``dominant`` (links
        found), ``contracted``, ``contracted_links`` (the first
        :data:`DOMINANT_SHOWN` contracted, as ``[id, id, affinity]``, strongest
        first), ``left_links`` (those not contracted, with why), ``warning``
        (empty unless the range exceeds :data:`WEIGHT_RANGE_WARN`) and ``reason``.
    """
    figures, found = survey.figures, survey.found
    none = np.empty((0, 2), dtype=np.int64)
    if treatment == "contract":
        keep, left = _allowed(found, rules, merged_pairs, network.n_nodes)
    else:
        keep, left = np.zeros(found.weights.size, dtype=bool), []
    ids = network.node_ids

    def shown(i: int) -> list[Any]:
        a, b = found.pairs[i]
        return [str(ids[a]), str(ids[b]), float(network.user_units(found.weights[i]))]

    # The spread in the units given (the network may hold its affinities scaled).
    figures = figures | {key: network.user_units(figures[key]) for key in _ABSOLUTE if figures[key]}
    decision: dict[str, Any] = {
        "choice": treatment,
        **figures,
        "weight_scale_exponent": network.weight_exponent,
        "dominant_gap": DOMINANT_GAP,
        "dominant": int(found.weights.size),
        "contracted": int(keep.sum()),
        "contracted_links": [shown(i) for i in np.flatnonzero(keep)[:DOMINANT_SHOWN].tolist()],
        "left_links": [[*shown(i), why] for i, why in left[:DOMINANT_SHOWN]],
    }
    decision["reason"] = "; ".join([_reason(decision), *weight_notes(network)])
    decision["warning"] = _warning(decision)
    pairs = found.pairs[keep] if keep.any() else none
    return pairs, decision


def coupler_trouble(found: DominantLinks, labels: np.ndarray) -> str:
    """What a zoning does wrong with the dominant links, in words, or ``''``.

    Two things, both the reason to contract: a zone whose every node lies in one
    group held by dominant links (such as a bus coupler's two ends), and a
    dominant link between two zones.

    Examples
    --------
    >>> a = sp.csr_array(np.array([[0, 1e6, 1, 0], [1e6, 0, 0, 1], [1, 0, 0, 1], [0, 1, 1, 0]]))
    >>> found = find_dominant_links(a)
    >>> coupler_trouble(found, np.array([0, 0, 1, 1]))
    '1 zone lies inside one group held by dominant links (2 nodes)'
    >>> coupler_trouble(found, np.array([0, 1, 0, 1]))
    '1 dominant link cut'
    """
    if not found.weights.size:
        return ""
    labels = np.asarray(labels, dtype=np.int64)
    n = labels.size
    ends = found.pairs
    held = sp.coo_array((np.ones(len(ends)), (ends[:, 0], ends[:, 1])), shape=(n, n))
    _, group = connected_components(held, directed=False)
    size = np.bincount(group)
    zones = int(labels.max()) + 1
    low = np.full(zones, n, dtype=np.int64)
    high = np.full(zones, -1, dtype=np.int64)
    np.minimum.at(low, labels, group)
    np.maximum.at(high, labels, group)
    inside = np.flatnonzero((low == high) & (size[np.clip(low, 0, n - 1)] >= 2))
    cut = int(np.count_nonzero(labels[ends[:, 0]] != labels[ends[:, 1]]))
    said = []
    if inside.size:
        members = np.bincount(labels, minlength=zones)[inside]
        sizes = ", ".join(str(int(m)) for m in np.sort(members)[:NODE_COUNTS_SHOWN])
        said.append(
            f"{count(inside.size, 'zone')} {plural(inside.size, 'lies', 'lie')} inside one "
            f"group held by dominant links ({sizes} {plural(int(members.max()), 'node')})"
        )
    if cut:
        said.append(f"{count(cut, 'dominant link')} cut")
    return "; ".join(said)


#: Sizes of zones quoted by :func:`coupler_trouble` before the rest are left out.
NODE_COUNTS_SHOWN = 5


def _allowed(
    found: DominantLinks, rules: ResolvedConstraints, merged_pairs: np.ndarray, n: int
) -> tuple[np.ndarray, list[tuple[int, str]]]:
    """Which dominant links may be contracted (strongest first), and why the others not."""
    groups = contract_links(sp.csr_array((n, n)), merged_pairs).groups
    g = int(groups.max()) + 1 if groups.size else 0
    sources = np.bincount(groups[rules.sources], minlength=g).tolist()
    assert rules.pinned is not None
    fixed = np.full(g, -1, dtype=np.int64)
    pinned = np.flatnonzero(rules.pinned >= 0)
    fixed[groups[pinned]] = rules.pinned[pinned]
    label = fixed.tolist()
    size = np.bincount(groups, weights=rules.sizes, minlength=g).tolist()
    parent = list(range(g))

    def find(v: int) -> int:
        while parent[v] != v:
            parent[v] = parent[parent[v]]
            v = parent[v]
        return v

    keep = np.zeros(found.weights.size, dtype=bool)
    left: list[tuple[int, str]] = []
    for i, (a, b) in enumerate(found.pairs.tolist()):
        ga, gb = find(groups[a]), find(groups[b])
        why = "" if ga == gb else _conflict(ga, gb, sources, label, size, rules.max_size)
        if why:
            left.append((i, why))
            continue
        keep[i] = True
        if ga != gb:
            parent[gb] = ga
            sources[ga] += sources[gb]
            label[ga] = max(label[ga], label[gb])
            size[ga] += size[gb]
    return keep, left


def _conflict(
    ga: int,
    gb: int,
    sources: list[int],
    label: list[int],
    size: list[float],
    max_size: float | None,
) -> str:
    """Why two super-nodes may not merge, or ``''``."""
    if sources[ga] and sources[gb]:
        return "both sides hold a source"
    if label[ga] >= 0 and label[gb] >= 0 and label[ga] != label[gb]:
        return "the sides are fixed to different zones"
    if max_size is not None and size[ga] + size[gb] > max_size:
        return f"the merged node would exceed max_size={max_size:g}"
    return ""


def _reason(decision: dict[str, Any]) -> str:
    """The decision's sentence: the spread, then what was found and done."""
    if decision["min"] is None:
        return "no links: nothing to measure"
    spread = (
        f"link affinities from {decision['min']:.3g} to {decision['max']:.3g} "
        f"(median {decision['median']:.3g}, max/median {decision['max_over_median']:.3g})"
    )
    found, done = decision["dominant"], decision["contracted"]
    if found == 0:
        return f"{spread}; no group of links {DOMINANT_GAP:g}x stronger than every link around it"
    what = (
        f"{found} dominant links (inside groups whose links are at least {DOMINANT_GAP:g}x "
        "every link leaving them, such as bus couplers)"
    )
    if decision["choice"] == "ignore":
        return f"{spread}; {what} left as they are (asked)"
    if decision["choice"] == "auto":
        return (
            f"{spread}; {what} left free: the zoning holds no zone inside one such group "
            "and cuts none of them (auto contracts them only then)"
        )
    kept = f"{done} contracted like kept links, so no zone is such a group alone"
    not_done = found - done
    if not_done:
        kept += f"; {not_done} left (a source or a fixed zone on both sides, or max_size)"
    return f"{spread}; {what}: {kept}"


def _warning(decision: dict[str, Any]) -> str:
    """The warning for a wide range of affinities, or ``''``."""
    ratio = decision["max_over_median"]
    if ratio is None or ratio <= WEIGHT_RANGE_WARN:
        return ""
    head = (
        f"the link affinities span a wide range: the largest is {ratio:.3g} times the median "
        f"(warned above {WEIGHT_RANGE_WARN:g}); "
    )
    found, done = decision["dominant"], decision["contracted"]
    if found == 0:
        return head + "no link dwarfs the links around it, so nothing was contracted"
    if decision["choice"] == "auto":
        return head + (
            f"{found} dominant links were left free, since no zone lies inside one of their "
            "groups and none is cut (auto)"
        )
    if decision["choice"] == "ignore":
        return head + (
            f"{found} dominant links were left as they are (dominant='ignore'): zones of the "
            "few nodes they join are likely"
        )
    return head + f"{done} of {found} dominant links were contracted before the solve"
