"""Where a network is fragile: algebraic connectivity, bridges, articulation nodes, bottlenecks.

Steps of :func:`robustness`:

1. *Cut structure* (:mod:`._cuts`). One iterative depth-first search with low links (Hopcroft
   and Tarjan [2]_, Tarjan [3]_), compiled, finds every bridge (a link whose
   failure splits its component) and every articulation node (a node whose
   failure does). The same pass counts the nodes and sums the node sizes of
   every search subtree; a subtree is a contiguous range of the preorder, so
   what each bridge or node cuts off follows for all of them at once, with no
   search per bridge.
2. *Algebraic connectivity.* The second smallest eigenvalue of :math:`L = D - A`
   (Fiedler [1]_) and of the normalized Laplacian :math:`N` (the one in
   Cheeger's inequality) on every connected component, and on every zone's
   induced sub-network when zones are given; the Fiedler vectors of ``L``
   give a second bottleneck measure.
3. *Effective resistance* (:mod:`._resistance`). For every link, :math:`R_{ij} = (e_i - e_j)^T L^+
   (e_i - e_j)` and its leverage :math:`w_{ij} R_{ij}` (Spielman and
   Srivastava [4]_): 1 for a bridge, near 0 for a link with many parallel
   routes. Current between the ends of a link never crosses a bridge, so each
   2-edge-connected piece (a component of the network without its bridges) is
   solved on its own: exactly (dense inverse) up to
   :data:`EXACT_RESISTANCE_LIMIT` nodes, by the Johnson-Lindenstrauss sketch
   of [4]_ beyond.

References
----------
.. [1] M. Fiedler, "Algebraic connectivity of graphs", Czechoslovak Math. J.
   23(98):298-305, 1973. :doi:`10.21136/CMJ.1973.101168`
.. [2] J. Hopcroft and R. Tarjan, "Algorithm 447: efficient algorithms for
   graph manipulation", Commun. ACM 16(6):372-378, 1973.
   :doi:`10.1145/362248.362272`
.. [3] R. E. Tarjan, "A note on finding the bridges of a graph", Inform.
   Process. Lett. 2(6):160-161, 1974. :doi:`10.1016/0020-0190(74)90003-9`
.. [4] D. A. Spielman and N. Srivastava, "Graph sparsification by effective
   resistances", SIAM J. Comput. 40(6):1913-1926, 2011.
   :doi:`10.1137/080734029`
"""

from __future__ import annotations

import logging
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from .._labels import code_labels
from .._validation import (
    check_choice,
    check_int,
    check_rng,
    check_tol,
    parameter_error,
)
from ..eigen import DEFAULT_TOL, METHODS, smallest_eigenpairs
from ..network import Network
from ..operators import laplacian
from ._cuts import CutStructure, cut_structure
from ._groups import STACKED_LIMIT, _Groups, _stacked_laplacians
from ._linkcols import carried_link_columns
from ._resistance import RESISTANCE_METHODS, SKETCH_ROWS, LinkResistances, _resistances
from ._spectral import cheeger_bounds

__all__ = ["DEFAULT_TOP", "Robustness", "robustness"]

logger = logging.getLogger(__name__)

#: Bottleneck links listed in :attr:`Robustness.links` unless ``top`` says otherwise.
DEFAULT_TOP = 100


# -------------------------------------------------------- algebraic connectivity
@dataclass(frozen=True, eq=False)
class _Spectra:
    values: np.ndarray  # second smallest eigenvalue per group (NaN for one node)
    vector: np.ndarray  # Fiedler vector, unit norm on each group (0 on single nodes)
    methods: set[str]
    max_residual: float


def _group_spectra(
    network: Network,
    adjacency: sp.csr_array,
    groups: _Groups,
    kind: str,
    tol: float,
    rng: np.random.Generator,
    method: str = "auto",
) -> _Spectra:
    """Second smallest eigenpair of ``kind``'s Laplacian on each connected group of nodes.

    Groups of up to :data:`STACKED_LIMIT` nodes are solved as stacked dense
    matrices (what :func:`smallest_eigenpairs` does for any small component,
    one LAPACK call per size instead of one per group); larger groups by
    :func:`smallest_eigenpairs` on the group's sub-network.
    """
    values = np.full(groups.counts.size, np.nan)
    vector = np.zeros(adjacency.shape[0])
    methods: set[str] = set()
    worst = 0.0
    for size in range(2, min(STACKED_LIMIT, int(groups.counts.max(initial=0))) + 1):
        ids, blocks = groups.stacked(adjacency, size)
        if ids.size == 0:
            continue
        vals, vecs = np.linalg.eigh(_stacked_laplacians(blocks, kind))
        values[ids] = vals[:, 1]
        rows = groups.order[groups.starts[ids][:, None] + np.arange(size)]
        vector[rows] = vecs[:, :, 1]
        methods.add("dense")
    for group in np.flatnonzero(groups.counts > STACKED_LIMIT):
        rows = groups.members(int(group))
        if rows.size == network.n_nodes and adjacency is network.adjacency:
            sub = network
        else:
            sub = Network(adjacency[rows][:, rows], network.node_ids[rows])
        operator = laplacian(sub, kind=kind)  # type: ignore[arg-type]
        result = smallest_eigenpairs(operator, 2, method=method, tol=tol, rng=rng)
        values[group] = result.values[1]
        vector[rows] = result.vectors[:, 1]
        methods.add(result.method)
        worst = max(worst, result.max_residual)
    return _Spectra(values, vector, methods, worst)


# ------------------------------------------------------------------------ report
@dataclass(frozen=True, eq=False, repr=False)
class Robustness:
    """Where a network is fragile, from :func:`robustness`.

    Attributes
    ----------
    algebraic_connectivity : float
        Second smallest eigenvalue of :math:`L = D - A` for the whole network:
        0 when it is disconnected (Fiedler [1]_), NaN for a single node.
    normalized_connectivity : float
        The same for the normalized Laplacian; Cheeger's inequality bounds the
        least conductance of any cut between half of it and
        :math:`\\sqrt{2 \\lambda_2}`.
    components : pandas.DataFrame
        One row per connected component: ``component``, ``nodes``, ``size``,
        ``links``, ``algebraic_connectivity``, ``normalized_connectivity``,
        ``cheeger_low``, ``cheeger_high`` (bounds on the component's least
        conductance), ``bridges``, ``articulation_nodes``. Eigenvalues are
        NaN for a single-node component.
    zones : pandas.DataFrame or None
        With ``labels``: one row per zone ``0..k-1`` (per name, in sorted
        text order, for text labels): ``zone``, ``nodes``,
        ``size``, ``pieces`` (connected pieces of the zone's induced
        sub-network), ``connected``, ``algebraic_connectivity``,
        ``normalized_connectivity``, ``cheeger_low``, ``cheeger_high``; 0 for
        a disconnected zone, NaN for a zone of one node or none.
    bridges : pandas.DataFrame
        Every bridge, most harmful first: ``source``, ``target``, ``weight``,
        ``cut_nodes``, ``cut_size`` (what its failure cuts off, see
        :class:`CutStructure`), ``cut_end`` (the end on the cut-off side),
        ``component``, then the columns carried from the input link table
        (a pipe or line id; see :func:`carried_link_columns`).
    nodes : pandas.DataFrame
        Every articulation node, most harmful first: ``node``, ``pieces``,
        ``cut_nodes``, ``cut_size`` (all pieces but the largest),
        ``component``.
    links : pandas.DataFrame
        The ``top`` bottleneck links: ``source``, ``target``, ``weight``,
        ``leverage`` (:math:`w R`), ``resistance``, ``bridge``, ``cut_nodes``,
        ``cut_size`` (0 for non-bridges), ``fiedler_difference``
        (:math:`|u_2(i) - u_2(j)|` for the unit Fiedler vector of ``L`` on
        the component; arbitrary within the eigenspace when
        :math:`\\lambda_2` is repeated), ``estimated`` (leverage from the
        sketch), then the columns carried from the input link table. Ranked
        bridges first by what they cut off, then by leverage.
    record : dict
        Counts, methods and residuals, for the run record.
    """

    algebraic_connectivity: float
    normalized_connectivity: float
    components: pd.DataFrame
    zones: pd.DataFrame | None
    bridges: pd.DataFrame
    nodes: pd.DataFrame
    links: pd.DataFrame
    record: dict[str, Any]
    structure: CutStructure
    node_ids: np.ndarray

    def __repr__(self) -> str:
        return (
            f"Robustness(algebraic_connectivity={self.algebraic_connectivity:.6g}, "
            f"bridges={len(self.bridges)}, articulation_nodes={len(self.nodes)})"
        )

    def cut_off(self, source: str, target: str | None = None) -> np.ndarray:
        """Ids of the nodes cut off by the failure of a link (two ids) or a node (one id).

        Empty when the link is not a bridge or the node not an articulation node.

        Raises
        ------
        ParameterError
            When an id is not a node, or the two ids are not linked.
        """
        index = {node: i for i, node in enumerate(self.node_ids.tolist())}
        ends = {"source": source} if target is None else {"source": source, "target": target}
        for name, end in ends.items():
            if str(end) not in index:
                raise parameter_error(name, "one of the network's node ids", end)
        rows = sorted(index[str(e)] for e in ends.values())
        cuts = self.structure
        if target is None:
            return self.node_ids[cuts.node_cut_off(rows[0])]
        n = self.node_ids.size
        keys = cuts.link_source * n + cuts.link_target
        where = int(np.searchsorted(keys, rows[0] * n + rows[1]))
        if where >= keys.size or keys[where] != rows[0] * n + rows[1]:
            raise parameter_error(
                "source and target",
                "the ends of a link",
                (source, target),
                shown=f"{source!r} and {target!r}",
            )
        return self.node_ids[cuts.link_cut_off(where)]


def robustness(
    network: Network,
    *,
    labels: np.ndarray | None = None,
    top: int = DEFAULT_TOP,
    rng: Any = None,
    tol: float = DEFAULT_TOL,
    resistance: str = "auto",
    sketch_rows: int = SKETCH_ROWS,
    eigen_method: str = "auto",
) -> Robustness:
    """Algebraic connectivity, bridges, articulation nodes and bottleneck links of a network.

    Parameters
    ----------
    network : Network
    labels : array-like of int or str, shape (n_nodes,), optional
        Zone of each node: numbers from 0, or text labels such as district
        names (kept as given in :attr:`Robustness.zones`, in sorted text
        order); adds per-zone algebraic connectivity.
    top : int, default=DEFAULT_TOP
        Bottleneck links to list, ``>= 0``.
    rng : None, int or numpy.random.Generator
        Seeds the eigen-solves and the resistance sketch.

    Returns
    -------
    Robustness

    Other Parameters
    ----------------
    tol : float, default=DEFAULT_TOL
        Scaled residual every eigen-solve must meet (see
        :func:`~specgraph.smallest_eigenpairs`).
    resistance : {'auto', 'exact', 'sketch'}, default='auto'
        How resistances are computed (see :func:`effective_resistances`).
    sketch_rows : int, default=SKETCH_ROWS
        Rows of the resistance sketch.
    eigen_method : {'auto', 'dense', 'lanczos', 'lanczos_flip', 'multilevel'}, default='auto'
        Solver of the eigen-solves on groups of more than ``STACKED_LIMIT``
        nodes (the ``method`` of :func:`~specgraph.smallest_eigenpairs`;
        smaller groups are solved densely, stacked).

    Raises
    ------
    ConvergenceError
        When an eigen-solve or a sketch solve misses its tolerance.
    ParameterError
        For an option outside its domain or labels that do not fit.

    Notes
    -----
    Links are ranked bridges first (leverage exactly 1; a bridge's failure
    disconnects the network), most cut off first, then by leverage
    :math:`w_{ij} R_{ij}`, the share of the link in the network's spanning
    trees (Spielman and Srivastava [4]_): near 1 for a link with no good
    alternative route, near 0 for one with many. Leverages sum to
    :math:`n - c` over a network of ``c`` components (Foster's theorem).

    Examples
    --------
    >>> from specgraph import gallery
    >>> report = robustness(gallery.barbell(5), rng=0)
    >>> first = report.links.iloc[0]
    >>> first["source"], first["target"], bool(first["bridge"]), int(first["cut_nodes"])
    ('4', '5', True, 5)
    >>> round(report.algebraic_connectivity, 4)
    0.2984
    """
    top = check_int(top, "top", minimum=0)
    tol = check_tol(tol)
    check_choice(resistance, "resistance", RESISTANCE_METHODS)
    check_choice(eigen_method, "eigen_method", METHODS)
    sketch_rows = check_int(sketch_rows, "sketch_rows", minimum=1)
    generator = check_rng(rng)
    zone_labels, zone_names = (None, None) if labels is None else _zone_codes(network, labels)

    cuts = cut_structure(network)
    groups = _Groups.of(network.component_labels, network.n_components)
    combinatorial = _group_spectra(
        network, network.adjacency, groups, "combinatorial", tol, generator, eigen_method
    )
    normalized = _group_spectra(
        network, network.adjacency, groups, "normalized", tol, generator, eigen_method
    )
    resistances = _resistances(network, cuts, resistance, sketch_rows, generator)
    zones = None
    zone_spectra: list[_Spectra] = []
    if zone_labels is not None:
        zones, zone_spectra = _zone_table(network, zone_labels, tol, generator, eigen_method)
        if zone_names is not None:
            zones["zone"] = zone_names[zones["zone"].to_numpy()]

    ids = network.node_ids
    bridges = _bridge_table(network, cuts)
    links = _link_table(network, cuts, resistances, combinatorial.vector, top)
    carried, renamed = carried_link_columns(
        network, (bridges, links), taken=(*bridges.columns, *links.columns)
    )
    bridges, links = carried
    record = {
        "bridges": cuts.n_bridges,
        "articulation_nodes": int(cuts.articulation.size),
        "components": network.n_components,
        "resistance_method": resistances.method,
        "sketch_rows": resistances.sketch_rows,
        "sketch_max_residual": resistances.max_residual,
        "eigen_methods": sorted(
            set().union(*(s.methods for s in (combinatorial, normalized, *zone_spectra)))
        ),
        "eigen_max_residual": max(
            s.max_residual for s in (combinatorial, normalized, *zone_spectra)
        ),
        "tol": tol,
        "resistance_unavailable": resistances.unavailable,
        "warnings": [resistances.warning] if resistances.warning else [],
    }
    if zone_labels is not None:
        record["unassigned_nodes"] = int(np.count_nonzero(zone_labels < 0))
    if renamed:
        record["renamed_link_columns"] = renamed
    # The combinatorial eigenvalues scale with the weights: in the units given.
    comb_values = network.user_units(combinatorial.values)
    return Robustness(
        algebraic_connectivity=_whole(network, comb_values),
        normalized_connectivity=_whole(network, normalized.values),
        components=_component_table(network, cuts, comb_values, normalized.values),
        zones=zones,
        bridges=bridges,
        nodes=_node_table(network, cuts),
        links=links,
        record=record,
        structure=cuts,
        node_ids=ids,
    )


def _zone_codes(network: Network, labels: Any) -> tuple[np.ndarray, np.ndarray | None]:
    """Zones ``0..k-1`` of each node, and the user's name of each (None for zone numbers).

    Zone numbers are checked as before (numbered from 0; a number with no node
    gets a row of NaN); text labels are coded in sorted text order
    (:func:`specgraph._labels.code_labels`). A node in no zone (``-1``, or
    ``None`` among text labels) is left out of every zone's figures.
    """
    codes, names = code_labels(labels, n_nodes=network.n_nodes, unassigned=True)
    return codes, names


def _whole(network: Network, values: np.ndarray) -> float:
    if network.n_nodes < 2:
        return float("nan")
    return float(values[0]) if network.n_components == 1 else 0.0


def _cheeger_columns(values: np.ndarray) -> dict[str, np.ndarray]:
    bounds = [cheeger_bounds(v) if np.isfinite(v) else (np.nan, np.nan) for v in values]
    pairs = np.array(bounds, dtype=float).reshape(-1, 2)
    return {"cheeger_low": pairs[:, 0], "cheeger_high": pairs[:, 1]}


def _component_table(
    network: Network, cuts: CutStructure, comb: np.ndarray, norm: np.ndarray
) -> pd.DataFrame:
    c = network.n_components
    labels = network.component_labels
    return pd.DataFrame(
        {
            "component": np.arange(c),
            "nodes": np.bincount(labels, minlength=c),
            "size": np.bincount(labels, weights=network.node_weights, minlength=c),
            "links": np.bincount(labels[cuts.link_source], minlength=c),
            "algebraic_connectivity": comb,
            "normalized_connectivity": norm,
            **_cheeger_columns(norm),
            "bridges": np.bincount(labels[cuts.link_source[cuts.is_bridge]], minlength=c),
            "articulation_nodes": np.bincount(labels[cuts.articulation], minlength=c),
        }
    )


def _zone_table(
    network: Network,
    labels: np.ndarray,
    tol: float,
    rng: np.random.Generator,
    method: str = "auto",
) -> tuple[pd.DataFrame, list[_Spectra]]:
    """Per zone: connected pieces of its induced sub-network and their algebraic connectivity."""
    k = int(labels.max()) + 1 if labels.size else 0
    coo = network.adjacency.tocoo()
    inside = (labels[coo.row] == labels[coo.col]) & (labels[coo.row] >= 0)
    shape = network.adjacency.shape
    inner = sp.csr_array((coo.data[inside], (coo.row[inside], coo.col[inside])), shape=shape)
    count, piece = connected_components(inner, directed=False)
    groups = _Groups.of(piece.astype(np.int64), count)
    spectra = [
        _group_spectra(network, inner, groups, kind, tol, rng, method)
        for kind in ("combinatorial", "normalized")
    ]
    zone_of_piece = np.zeros(count, dtype=np.int64)
    zone_of_piece[piece] = labels  # -1: a node in no zone, a piece of its own
    zoned = np.flatnonzero(zone_of_piece >= 0)
    assigned = labels >= 0
    pieces = np.bincount(zone_of_piece[zoned], minlength=k)
    nodes = np.bincount(labels[assigned], minlength=k)
    columns = {}
    for name, spec in zip(
        ("algebraic_connectivity", "normalized_connectivity"), spectra, strict=True
    ):
        value = np.full(k, np.nan)
        single = np.flatnonzero(pieces == 1)
        first_piece = np.full(k, -1, dtype=np.int64)
        first_piece[zone_of_piece[zoned]] = zoned
        # The combinatorial eigenvalues scale with the weights: in the units given.
        scaled = name == "algebraic_connectivity"
        values = network.user_units(spec.values) if scaled else spec.values
        value[single] = values[first_piece[single]]
        value[pieces > 1] = 0.0  # a disconnected zone (Fiedler 1973)
        columns[name] = value
    table = pd.DataFrame(
        {
            "zone": np.arange(k),
            "nodes": nodes,
            "size": np.bincount(
                labels[assigned], weights=network.node_weights[assigned], minlength=k
            ),
            "pieces": pieces,
            "connected": pieces == 1,
            **columns,
            **_cheeger_columns(columns["normalized_connectivity"]),
        }
    )
    return table, spectra


def _bridge_table(network: Network, cuts: CutStructure) -> pd.DataFrame:
    bridges = np.flatnonzero(cuts.is_bridge)
    order = np.lexsort((bridges, -cuts.cut_nodes[bridges], -cuts.cut_size[bridges]))
    rows = bridges[order]
    ids = network.node_ids
    return pd.DataFrame(
        {
            "source": ids[cuts.link_source[rows]],
            "target": ids[cuts.link_target[rows]],
            "weight": network.user_units(cuts.link_weight[rows]),
            "cut_nodes": cuts.cut_nodes[rows],
            "cut_size": cuts.cut_size[rows],
            "cut_end": ids[cuts.cut_end[rows]],
            "component": network.component_labels[cuts.link_source[rows]],
        }
    )


def _node_table(network: Network, cuts: CutStructure) -> pd.DataFrame:
    order = np.lexsort((cuts.articulation, -cuts.pieces, -cuts.node_cut_nodes, -cuts.node_cut_size))
    nodes = cuts.articulation[order]
    return pd.DataFrame(
        {
            "node": network.node_ids[nodes],
            "pieces": cuts.pieces[order],
            "cut_nodes": cuts.node_cut_nodes[order],
            "cut_size": cuts.node_cut_size[order],
            "component": network.component_labels[nodes],
        }
    )


def _link_table(
    network: Network,
    cuts: CutStructure,
    res: LinkResistances,
    fiedler: np.ndarray,
    top: int,
) -> pd.DataFrame:
    """The links ranked; weights and resistances in the units given (leverage has none)."""
    ids = network.node_ids
    leverage = res.leverage
    index = np.arange(leverage.size)
    order = np.lexsort(
        (index, -leverage, -cuts.cut_nodes, -cuts.cut_size, -cuts.is_bridge.astype(np.int8))
    )
    rows = order[:top]
    src, dst = cuts.link_source[rows], cuts.link_target[rows]
    return pd.DataFrame(
        {
            "source": ids[src],
            "target": ids[dst],
            "weight": network.user_units(cuts.link_weight[rows]),
            "leverage": leverage[rows],
            "resistance": res.resistance[rows],  # in the units given
            "bridge": cuts.is_bridge[rows],
            "cut_nodes": cuts.cut_nodes[rows],
            "cut_size": cuts.cut_size[rows],
            "fiedler_difference": np.abs(fiedler[src] - fiedler[dst]),
            "estimated": res.estimated[rows],
        }
    )
