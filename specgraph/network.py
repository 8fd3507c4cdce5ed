"""The :class:`Network`: an immutable weighted graph ready for spectral work.

Every reader ends here and every later stage starts here. A network holds a
symmetric CSR adjacency (float64 affinities, no self-loops, no stored zeros), the
node ids as strings in row order, optional node coordinates and node sizes, a
per-input-link table so that results can be joined back to the user's own rows,
and, for a network read with directions, its arcs (``adjacency`` is then their
symmetrized sum, so every undirected stage works on it unchanged).

Input policies (documented in ``docs/input-policy.md`` and counted in
:attr:`Network.notes`, so that nothing is dropped silently):

* a self-loop (a link from a node to itself) carries no information about zones;
  it is left out of the adjacency and counted;
* repeated links between the same two nodes, in either direction, are parallel
  links: their affinities are **summed** (parallel pipes or lines conduct in sum)
  and counted;
* a link of affinity zero joins nothing; it is left out of the adjacency, its two
  ends stay in the network, and it is counted;
* a link whose affinity is negligible beside the largest (below float64's
  smallest normal number times it, see :mod:`specgraph._scale`) is left out like
  a zero-weight link and counted (``negligible_weight_links_dropped``).

Affinities whose largest lies outside the band of :mod:`specgraph._scale`
(beyond about 3.4e38 or below about 2.9e-39) are held divided by a power of two,
:attr:`Network.weight_exponent`, so that no later sum or product overflows or
vanishes; the network's total volume must be a finite float64 in the units
given, or the network is refused.

A network read as directed (``directed=True``) also keeps :attr:`Network.arcs`:
the directed affinities, row = from-node, column = to-node, with the same
policies (self-loops dropped, repeated arcs in the *same* direction summed, zero
arcs dropped; ``a -> b`` and ``b -> a`` are two arcs, not a repeat). Its
:attr:`Network.adjacency` is then the symmetrized ``arcs + arcs.T``, so every
undirected stage works on it unchanged; only the stages that ask for direction
(random walks, the directed Laplacian) read :attr:`Network.arcs`.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from types import MappingProxyType
from typing import TYPE_CHECKING, Any, Protocol

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from ._graph import MISSING_WEIGHT_DEFAULT, read_graph
from ._links import LinkEnds, encode_links
from ._scale import (
    in_band,
    negligible_mask,
    overflow_threshold,
    scale_sentence,
    top_exponent,
    user_units,
)
from ._validation import check_bool
from ._wording import count
from .exceptions import InputError

if TYPE_CHECKING:
    import networkx as nx
    import pandas as pd

__all__ = ["Network", "affinity_from_distance", "negligible_warning", "weight_notes"]

#: Largest relative asymmetry ``max|A - A^T| / max|A|`` accepted as round-off
#: when a matrix is handed in as symmetric (a few ulps of float64 summation).
SYMMETRY_RTOL = 1e-12


def affinity_from_distance(distance: np.ndarray) -> tuple[np.ndarray, dict[str, Any]]:
    """Turn a length-like weight (length, impedance, latency) into an affinity.

    The affinity is ``median(d) / d``: inversely proportional to the distance,
    as for conductances of pipes or lines in series, and scaled by the median so
    that the result does not depend on the unit (metres or kilometres give the
    same network) and a typical link has affinity 1.

    Parameters
    ----------
    distance : ndarray of float
        Finite, strictly positive distances.

    Returns
    -------
    affinity : ndarray of float
        ``median(distance) / distance``.
    record : dict
        The rule and the median, for the run record.

    Examples
    --------
    >>> import numpy as np
    >>> w, record = affinity_from_distance(np.array([10.0, 20.0, 40.0]))
    >>> w.tolist()
    [2.0, 1.0, 0.5]
    >>> record["reference_distance"]
    20.0
    """
    distance = np.asarray(distance, dtype=np.float64)
    if distance.size and not (np.all(np.isfinite(distance)) and np.all(distance > 0)):
        raise InputError("distances must be finite and > 0 to be converted to affinities")
    reference = float(np.median(distance)) if distance.size else 1.0
    record = {
        "rule": "affinity = reference_distance / distance",
        "reference_distance": reference,
    }
    return reference / distance, record


def _readonly(array: np.ndarray) -> np.ndarray:
    array.flags.writeable = False
    return array


def _at_safe_scale(
    adjacency: sp.csr_array, arcs: Any, exponent: int
) -> tuple[sp.csr_array, Any, int]:
    """``adjacency`` and ``arcs`` divided by a power of two when their largest is out of band.

    The constructor's own guard (readers scale in :func:`network_from_ends`,
    naming the file and line of a fault): a matrix handed in whose largest
    affinity lies outside the band of :mod:`specgraph._scale` is divided by
    ``2**(top - 1)`` (exact), which brings the largest into ``[1, 2)``; a matrix
    holding an affinity that would then fall below float64's smallest normal
    number, or whose total volume is not a finite float64 in the units given,
    is refused. ``adjacency`` is a private copy and is scaled in place.
    """
    data = adjacency.data
    top = top_exponent(data)
    if data.size and not in_band(top):
        negligible = int(np.count_nonzero(negligible_mask(data, top))) // 2
        if negligible:
            raise InputError(
                f"adjacency holds {count(negligible, 'link')} below 2^-1022 times its largest "
                "affinity "
                f"({float(data.max()):.3g}), too small to be held beside it in float64; give "
                "them affinity 0, or read the links with a reader (which leaves such links "
                "out and counts them)"
            )
        data *= math.ldexp(1.0, 1 - top)
        if arcs is not None:
            arcs = sp.csr_array(arcs, dtype=np.float64, copy=True)
            arcs.data *= math.ldexp(1.0, 1 - top)
        exponent += top - 1
    if data.size and float(data.sum()) >= overflow_threshold(exponent):
        raise InputError(
            "the total volume of the network (the sum of its affinities over both ends of "
            "every link) is larger than the largest float64 number in the units given; "
            "divide every affinity by the same power of ten"
        )
    return adjacency, arcs, exponent


class _InducedIds(np.ndarray):
    """Node ids that :meth:`Network.subnetwork` took from distinct rows of a network
    whose adjacency is exactly symmetric: unique strings over an exactly symmetric
    block, which the constructor need not check again (it keeps a plain array)."""


def _distinct_rows(nodes: np.ndarray, n: int) -> bool:
    """Whether ``nodes`` are distinct row indices in ``0..n-1`` (no negative index)."""
    if not nodes.size:
        return True
    if nodes.min() < 0 or nodes.max() >= n:
        return False
    seen = np.zeros(n, dtype=bool)
    seen[nodes] = True
    return int(np.count_nonzero(seen)) == nodes.size


@dataclass(frozen=True, eq=False, repr=False)
class Network:
    """An undirected weighted network, frozen once built.

    Build one with a reader (:func:`specgraph.read_edges`) or one of the
    ``from_*`` constructors rather than by hand; the constructor checks the
    invariants but does not repair input.

    Parameters
    ----------
    adjacency : sparse array of shape (n, n)
        Symmetric, non-negative affinities, zero diagonal.
    node_ids : sequence of str
        One unique id per row, in row order.
    coordinates : ndarray of shape (n, 2), optional
        Planar node coordinates (x, y), for maps and GIS export.
    sizes : ndarray of shape (n,), optional
        Non-negative node sizes (for example connections served); zone sizes
        and size bounds count in this unit when given, in nodes otherwise.
    links : pandas.DataFrame, optional
        One row per input link, with columns ``source``, ``target`` (node ids),
        ``weight`` (affinity) and any columns passed through from the input.
        Boundary tables are cut from it so users can join them to their own
        rows. Built from the upper triangle of ``adjacency`` when not given.
    notes : mapping, optional
        What was done to the input on the way in (counts of self-loops,
        merged duplicates, zero-weight links, weight conversion).
    arcs : sparse array of shape (n, n), optional
        Directed affinities (row = from-node, column = to-node), non-negative,
        zero diagonal, with ``adjacency == arcs + arcs.T`` (checked to
        :data:`SYMMETRY_RTOL`). None for an undirected network.
    weight_exponent : int, default=0
        The affinities as given are the stored ones times
        ``2**weight_exponent`` (exact: a power of two). 0 unless the largest
        affinity lies outside the band of :mod:`specgraph._scale`; the
        constructor then divides ``adjacency`` and ``arcs`` by such a power
        so that the largest is in ``[1, 2)`` and adds it here.

    Attributes
    ----------
    n_nodes, n_links : int
        Number of nodes and of distinct undirected links in the adjacency.
    directed : bool
        Whether the network keeps its arcs.
    n_arcs : int
        Number of distinct arcs (0 for an undirected network).
    degrees : ndarray
        Weighted degree of each node (stored units: times
        ``2**weight_exponent`` in the units given, see :meth:`user_units`).
    component_labels : ndarray of int
        Connected component of each node, numbered from 0 by first node.
    n_components : int
        Number of connected components (isolated nodes count as one each).
    """

    adjacency: sp.csr_array
    node_ids: np.ndarray
    coordinates: np.ndarray | None = None
    sizes: np.ndarray | None = None
    links: pd.DataFrame | None = None
    notes: Mapping[str, Any] = field(default_factory=dict)
    arcs: sp.csr_array | None = None
    weight_exponent: int = 0

    def __post_init__(self) -> None:
        # A private copy: the canonicalization below works in place, and neither
        # the caller's matrix nor another network's read-only arrays may change.
        adjacency = sp.csr_array(self.adjacency, dtype=np.float64, copy=True)
        adjacency.sum_duplicates()
        adjacency.eliminate_zeros()
        adjacency.sort_indices()
        n = adjacency.shape[0]
        if adjacency.shape != (n, n):
            raise InputError(f"adjacency must be square; got shape {adjacency.shape}")
        data = adjacency.data
        if data.size and not (np.all(np.isfinite(data)) and data.min() > 0):
            raise InputError("adjacency must hold finite, non-negative affinities")
        if adjacency.diagonal().any():
            raise InputError("adjacency must have a zero diagonal (no self-loops)")
        adjacency, arcs, exponent = _at_safe_scale(adjacency, self.arcs, self.weight_exponent)
        object.__setattr__(self, "weight_exponent", exponent)
        object.__setattr__(self, "arcs", arcs)
        induced = isinstance(self.node_ids, _InducedIds)
        exact = induced  # a principal submatrix of an exactly symmetric matrix is so too
        if not induced:
            asym = abs(adjacency - adjacency.T)
            exact = asym.nnz == 0
            if asym.nnz and asym.max() > SYMMETRY_RTOL * (data.max() if data.size else 1.0):
                raise InputError("adjacency must be symmetric (an undirected network)")
        if induced:
            ids = np.asarray(self.node_ids).view(np.ndarray)
        else:
            ids = np.asarray([str(i) for i in self.node_ids], dtype=object)
        if ids.shape != (n,):
            raise InputError(f"node_ids must hold {n} ids, one per row; got {ids.size}")
        if not induced and len(set(ids.tolist())) != n:
            raise InputError("node_ids must be unique")
        # Not a field: whether sub-networks may skip the symmetry check (see subnetwork).
        object.__setattr__(self, "_exactly_symmetric", exact)
        for part in (adjacency.data, adjacency.indices, adjacency.indptr):
            _readonly(part)
        object.__setattr__(self, "adjacency", adjacency)
        object.__setattr__(self, "node_ids", _readonly(ids))
        object.__setattr__(self, "coordinates", self._checked_coordinates(n))
        object.__setattr__(self, "sizes", self._checked_sizes(n))
        object.__setattr__(self, "notes", MappingProxyType(dict(self.notes)))
        object.__setattr__(self, "arcs", self._checked_arcs(adjacency))

    def _checked_arcs(self, adjacency: sp.csr_array) -> sp.csr_array | None:
        if self.arcs is None:
            return None
        arcs = sp.csr_array(self.arcs, dtype=np.float64, copy=True)
        arcs.sum_duplicates()
        arcs.eliminate_zeros()
        arcs.sort_indices()
        if arcs.shape != adjacency.shape:
            raise InputError(f"arcs must have shape {adjacency.shape}; got {arcs.shape}")
        data = arcs.data
        if data.size and not (np.all(np.isfinite(data)) and data.min() > 0):
            raise InputError("arcs must hold finite, non-negative affinities")
        if arcs.diagonal().any():
            raise InputError("arcs must have a zero diagonal (no self-loops)")
        gap = abs(adjacency - (arcs + arcs.T))
        scale = adjacency.data.max() if adjacency.nnz else 1.0
        if gap.nnz and gap.max() > SYMMETRY_RTOL * scale:
            raise InputError("adjacency must equal arcs + arcs.T for a directed network")
        for part in (arcs.data, arcs.indices, arcs.indptr):
            _readonly(part)
        return arcs

    def _checked_coordinates(self, n: int) -> np.ndarray | None:
        if self.coordinates is None:
            return None
        xy = np.array(self.coordinates, dtype=np.float64)
        if xy.shape != (n, 2) or not np.all(np.isfinite(xy)):
            raise InputError(f"coordinates must be finite, of shape ({n}, 2); got {xy.shape}")
        return _readonly(xy)

    def _checked_sizes(self, n: int) -> np.ndarray | None:
        if self.sizes is None:
            return None
        sizes = np.array(self.sizes, dtype=np.float64)
        if sizes.shape != (n,) or not np.all(np.isfinite(sizes)) or np.any(sizes < 0):
            raise InputError(f"sizes must be {n} finite numbers >= 0")
        return _readonly(sizes)

    # ------------------------------------------------------------------ shape
    @property
    def n_nodes(self) -> int:
        return int(self.adjacency.shape[0])

    @property
    def n_links(self) -> int:
        return int(self.adjacency.nnz // 2)

    @property
    def directed(self) -> bool:
        return self.arcs is not None

    @property
    def n_arcs(self) -> int:
        return 0 if self.arcs is None else int(self.arcs.nnz)

    @cached_property
    def degrees(self) -> np.ndarray:
        return _readonly(np.asarray(self.adjacency.sum(axis=1)).ravel())

    def user_units(self, values: Any) -> Any:
        """Sums of stored affinities (volumes, cuts) in the units given (``* 2**weight_exponent``).

        Exact (a power of two); ``values`` as they are when the exponent is 0.

        Examples
        --------
        >>> net = Network.from_links(["a", "b"], ["b", "c"], [1e300, 1e300])
        >>> net.weight_exponent, bool(1 <= net.adjacency.max() < 2)
        (996, True)
        >>> float(net.user_units(net.degrees.sum()))
        4e+300
        """
        return user_units(values, self.weight_exponent)

    @property
    def weight_scale_note(self) -> str:
        """The run record's sentence on the scale of the affinities ('' when it is 1)."""
        return scale_sentence(self.weight_exponent)

    @cached_property
    def node_weights(self) -> np.ndarray:
        """Node sizes when given, otherwise one per node."""
        return self.sizes if self.sizes is not None else _readonly(np.ones(self.n_nodes))

    @cached_property
    def _components(self) -> tuple[int, np.ndarray]:
        count, labels = connected_components(self.adjacency, directed=False)
        return int(count), _readonly(labels.astype(np.int64))

    @property
    def n_components(self) -> int:
        return self._components[0]

    @property
    def component_labels(self) -> np.ndarray:
        return self._components[1]

    @property
    def graph_nodes(self) -> tuple[Any, ...] | None:
        """The graph's own node objects in row order, for a network read from networkx
        (:meth:`from_networkx`); None otherwise (sub-networks do not keep them)."""
        return getattr(self, "_graph_nodes", None)

    @cached_property
    def index_of(self) -> Mapping[str, int]:
        """Mapping from node id to row index."""
        return MappingProxyType(dict(zip(self.node_ids.tolist(), range(self.n_nodes), strict=True)))

    @cached_property
    def link_table(self) -> pd.DataFrame:
        """Per-input-link table (``links`` if given, else the adjacency's upper triangle)."""
        if self.links is not None:
            return self.links
        import pandas as pd

        upper = sp.triu(self.adjacency, k=1, format="coo")
        return pd.DataFrame(
            {
                "source": self.node_ids[upper.row],
                "target": self.node_ids[upper.col],
                "weight": self.user_units(upper.data),
            }
        )

    @cached_property
    def link_ends(self) -> tuple[np.ndarray, np.ndarray]:
        """Row indices of the two ends of each row of :attr:`link_table`."""
        import pandas as pd

        index = pd.Index(self.node_ids)
        table = self.link_table
        src = index.get_indexer(table["source"].to_numpy(dtype=object))
        dst = index.get_indexer(table["target"].to_numpy(dtype=object))
        return _readonly(src.astype(np.int64)), _readonly(dst.astype(np.int64))

    def __reduce__(self) -> tuple[Any, tuple[Any, ...], dict[str, Any] | None]:
        """Pickle by the constructor's arguments (for joblib, Dask and multiprocessing).

        ``notes`` is held read-only (a mapping proxy, which pickle refuses);
        it travels as a plain dict and the constructor checks everything again;
        the graph's node objects (:attr:`graph_nodes`) travel as state.
        """
        state = {"_graph_nodes": self.graph_nodes} if self.graph_nodes is not None else None
        return (
            _rebuild_network,
            (
                self.adjacency,
                self.node_ids,
                self.coordinates,
                self.sizes,
                self.links,
                dict(self.notes),
                self.arcs,
                self.weight_exponent,
            ),
            state,
        )

    def __repr__(self) -> str:
        return (
            f"Network(n_nodes={self.n_nodes}, n_links={self.n_links}, "
            f"n_components={self.n_components})"
        )

    # ----------------------------------------------------------- sub-networks
    def subnetwork(self, nodes: np.ndarray) -> Network:
        """The network induced on ``nodes`` (row indices), in that order.

        The link table is not carried over: the sub-network lists its links
        from the adjacency. The arcs of a directed network are carried over.
        """
        nodes = np.asarray(nodes, dtype=np.int64)
        sub = self.adjacency[nodes][:, nodes]
        ids = self.node_ids[nodes]
        if getattr(self, "_exactly_symmetric", False) and _distinct_rows(nodes, self.n_nodes):
            # Unique ids and an exactly symmetric block by construction: the
            # constructor skips checking them again (0.2 s and 0.3 s at 10^6 nodes).
            ids = ids.view(_InducedIds)
        return Network(
            sub,
            ids,
            coordinates=None if self.coordinates is None else self.coordinates[nodes],
            sizes=None if self.sizes is None else self.sizes[nodes],
            arcs=None if self.arcs is None else self.arcs[nodes][:, nodes],
            weight_exponent=self.weight_exponent,
        )

    # ---------------------------------------------------------- constructors
    @classmethod
    def from_links(
        cls,
        source: Sequence[Any] | np.ndarray,
        target: Sequence[Any] | np.ndarray,
        weight: Sequence[float] | np.ndarray | None = None,
        *,
        node_ids: Sequence[Any] | None = None,
        coordinates: np.ndarray | None = None,
        sizes: np.ndarray | None = None,
        extra: pd.DataFrame | None = None,
        notes: Mapping[str, Any] | None = None,
        directed: bool = False,
    ) -> Network:
        """Build a network from parallel arrays of link ends and affinities.

        Applies the input policies of this module (self-loops left out,
        repeated links summed, zero-affinity links left out, each counted in
        ``notes``). Ids are compared as strings.

        Parameters
        ----------
        source, target : array-like
            Node ids at the two ends of each link.
        weight : array-like of float, optional
            Affinity of each link (finite, >= 0). Default 1 for every link.
        node_ids : sequence, optional
            All node ids in row order; must contain every link end. Nodes
            listed here but on no link become isolated nodes. Default: ids in
            order of first appearance in ``source``/``target`` (interleaved).
        coordinates, sizes : ndarray, optional
            Per node, aligned with ``node_ids``.
        extra : pandas.DataFrame, optional
            Further per-link columns to carry into :attr:`link_table`.
        notes : mapping, optional
            Notes to keep beside the policy counts.
        directed : bool, default=False
            Keep the direction ``source -> target`` in :attr:`arcs`; the
            adjacency is then ``arcs + arcs.T``. Only arcs repeated in the
            same direction count as duplicates.

        Returns
        -------
        Network

        Examples
        --------
        >>> net = Network.from_links(["a", "b", "b"], ["b", "c", "a"], [1.0, 2.0, 0.5])
        >>> net.n_nodes, net.n_links, net.notes["duplicate_links_merged"]
        (3, 2, 1)
        >>> net = Network.from_links(["a", "b", "b"], ["b", "c", "a"], [1.0, 2.0, 0.5],
        ...                          directed=True)
        >>> net.n_links, net.n_arcs, net.notes["duplicate_links_merged"]
        (2, 3, 0)
        >>> net.arcs.toarray().tolist()
        [[0.0, 1.0, 0.0], [0.5, 0.0, 2.0], [0.0, 0.0, 0.0]]
        """
        return network_from_ends(
            encode_links(source, target, node_ids),
            weight,
            coordinates=coordinates,
            sizes=sizes,
            extra=extra,
            notes=notes,
            directed=directed,
            factory=cls,
        )

    @classmethod
    def from_scipy(
        cls,
        matrix: Any,
        *,
        node_ids: Sequence[Any] | None = None,
        symmetrize: bool = False,
        directed: bool = False,
    ) -> Network:
        """Build a network from a square sparse or dense adjacency matrix.

        Parameters
        ----------
        matrix : sparse or dense array of shape (n, n)
            Non-negative affinities. The diagonal (self-loops) is left out and
            counted.
        node_ids : sequence, optional
            Ids in row order; default ``"0"`` .. ``"n-1"``.
        symmetrize : bool, default=False
            When True, a directed matrix is made undirected as ``A + A^T``;
            when False, an asymmetric matrix is refused.
        directed : bool, default=False
            Keep the matrix as the arcs (row = from-node) of a directed
            network whose adjacency is ``A + A^T``; ``symmetrize`` is then
            implied.

        Returns
        -------
        Network
        """
        adjacency = sp.csr_array(matrix, dtype=np.float64)
        n = adjacency.shape[0]
        loops = int(np.count_nonzero(adjacency.diagonal()))
        adjacency = adjacency - sp.diags_array(adjacency.diagonal())
        arcs = adjacency if directed else None
        if symmetrize or directed:
            adjacency = adjacency + adjacency.T
        ids = np.arange(n).astype(str) if node_ids is None else node_ids
        return cls(
            adjacency,
            np.asarray(ids, dtype=object),
            notes={"self_loops_dropped": loops},
            arcs=arcs,
        )

    @classmethod
    def from_networkx(
        cls,
        graph: nx.Graph,
        *,
        weight: str | None = "weight",
        distance: bool = False,
        size: str | None = None,
        pos: str | Mapping[Any, Any] | None = None,
        missing_weight: float | None = MISSING_WEIGHT_DEFAULT,
    ) -> Network:
        """Build a network from a networkx graph (directed graphs are made undirected).

        Every edge attribute other than the weight becomes a column of
        :attr:`link_table` (so boundary tables carry pipe or line ids); an
        attribute named like one of the table's own columns (a ``weight``
        that is not the chosen weight, say) is carried as ``edge_<name>``
        and listed in ``notes["renamed_attributes"]``.

        Parameters
        ----------
        graph : networkx.Graph
            Any networkx graph; node labels become string ids (the graph's
            own node objects are kept in :attr:`graph_nodes`, so zonings
            give them back). Multigraphs' parallel edges are summed (the
            input policy of this class).
        weight : str or None, default="weight"
            Edge attribute holding the weight (finite, >= 0). ``None`` gives
            every link weight 1.
        distance : bool, default=False
            Read ``weight`` as a length (finite, > 0) and convert it with
            :func:`affinity_from_distance`.
        size : str, optional
            Node attribute holding node sizes (finite, >= 0).
        pos : str or mapping, optional
            Node attribute holding ``(x, y)`` coordinates, or a mapping from
            every node to its ``(x, y)``, such as ``nx.spring_layout(graph)``.
        missing_weight : float or None, default=1.0
            Weight of an edge without the ``weight`` attribute (networkx's
            own convention is 1); ``None`` refuses such an edge, naming it
            (what :func:`specgraph.interop.network_from_graph` does).

        Returns
        -------
        Network
            Nodes in the graph's node order, isolated nodes included.

        Raises
        ------
        InputError
            A weight, size or position is missing (where refused) or not a
            finite number in range; the message names the edge or node.
        ParameterError
            ``graph`` is not a networkx graph, or ``pos`` neither a name nor a mapping.

        Examples
        --------
        >>> import networkx as nx
        >>> g = nx.Graph()
        >>> g.add_edge("QM-J1", "QM-J2", weight=2.0, pipe="QM-P1")
        >>> g.add_edge("QM-J2", "QM-J3")
        >>> net = Network.from_networkx(g)
        >>> net.link_table[["source", "weight", "pipe"]].to_numpy().tolist()
        [['QM-J1', 2.0, 'QM-P1'], ['QM-J2', 1.0, nan]]
        """
        links = read_graph(
            graph,
            weight=weight,
            distance=distance,
            size=size,
            pos=pos,
            missing_weight=missing_weight,
        )
        notes: dict[str, Any] = {"weight_column": weight}
        notes["weight_read_as"] = (
            None if weight is None else ("distance" if distance else "affinity")
        )
        values = links.values
        if distance and weight is not None:
            values, notes["weight_conversion"] = affinity_from_distance(values)
        if links.renamed:
            notes["renamed_attributes"] = dict(links.renamed)
        network = cls.from_links(
            links.source,
            links.target,
            values,
            node_ids=links.node_ids,
            sizes=links.sizes,
            coordinates=links.coordinates,
            extra=links.extra,
            notes=notes,
        )
        object.__setattr__(network, "_graph_nodes", tuple(links.node_ids))
        return network


def negligible_warning(network: Network) -> str:
    """The warning for links left out as negligible beside the largest ('' when none).

    Examples
    --------
    >>> net = Network.from_links(["a", "b", "c"], ["b", "c", "a"], [1e300, 1e300, 1e-300])
    >>> negligible_warning(net)[:58]
    '1 link was left out as negligible: its weight is below 2^-'
    """
    dropped = int(network.notes.get("negligible_weight_links_dropped", 0) or 0)
    if not dropped:
        return ""
    links = "1 link was" if dropped == 1 else f"{dropped:,} links were"
    its = "its weight is" if dropped == 1 else "their weights are"
    return (
        f"{links} left out as negligible: {its} below 2^-1022 times the largest weight, "
        "too small to be held beside it in float64 numbers (they count as weight 0, their "
        "ends stay in the network, and boundary.csv still lists them when they join two "
        "zones); raise them, or give them 0 to silence this"
    )


def weight_notes(network: Network) -> list[str]:
    """The run record's sentences on the network's weights: the scale, negligible links.

    Empty for a network held as given with no negligible link.
    """
    return [text for text in (network.weight_scale_note, negligible_warning(network)) if text]


class LinkOrigin(Protocol):
    """Where a link table came from (a reader's origin), so refusals name the file and line.

    ``locate(row)`` gives the 1-based file line of a 0-based link row (or
    None); ``error(message, row=row)`` makes the :class:`InputError` at that row.
    """

    @property
    def locate(self) -> Callable[[int], int | None] | None: ...

    def error(self, message: str, *, row: int | None = None) -> InputError: ...


def network_from_ends(
    ends: LinkEnds,
    weight: Sequence[float] | np.ndarray | None = None,
    *,
    coordinates: np.ndarray | None = None,
    sizes: np.ndarray | None = None,
    extra: pd.DataFrame | None = None,
    notes: Mapping[str, Any] | None = None,
    directed: bool = False,
    factory: type[Network] | None = None,
    origin: LinkOrigin | None = None,
) -> Network:
    """:meth:`Network.from_links` on ends already encoded by :func:`specgraph._links.encode_links`.

    Readers that check the ends against their own tables first (naming the
    file and line of a fault) encode the ids once and build from them here.
    ``factory`` is the class built (default :class:`Network`). The network's
    :attr:`~Network.link_ends` are the encoded rows, so they are never looked
    up again. ``origin`` (a reader's :class:`LinkOrigin`) lets a refusal of
    the weights name the file and line; without it the link's 1-based row.

    The affinities are summed at a safe scale (:mod:`specgraph._scale`): the
    largest is brought into ``[1, 2)`` by an exact power of two first, so
    parallel links summed past the largest float, or a total volume past it,
    are found and refused without overflowing; negligible links are left out
    and counted (``negligible_weight_links_dropped``).
    """
    n_links = len(ends.source)
    w = np.ones(n_links) if weight is None else np.asarray(weight, dtype=np.float64)
    if w.shape != (n_links,):
        raise InputError("weight must have one value per link")
    if w.size and not (np.all(np.isfinite(w)) and w.min() >= 0):
        raise InputError("weights must be finite and >= 0")
    directed = check_bool(directed, "directed")
    i, j = _checked_rows(ends)
    top = top_exponent(w)
    negligible = negligible_mask(w, top)
    shift = top - 1  # the largest affinity / 2**shift is in [1, 2)
    scaled = np.ldexp(w, -shift) if shift else w
    adjacency, counts = _adjacency_from_links(
        i, j, scaled, ends.node_ids.size, directed=directed, negligible=negligible
    )
    arcs = None
    if directed:
        arcs, adjacency = adjacency, (adjacency + adjacency.T).tocsr()
    _refuse_overflow(adjacency, i, j, w, shift, ends, origin)
    exponent = _final_exponent(adjacency, shift)
    if exponent != shift:
        factor = math.ldexp(1.0, shift - exponent)
        adjacency.data *= factor
        if arcs is not None:
            arcs.data *= factor
    import pandas as pd

    table = pd.DataFrame({"source": ends.source, "target": ends.target, "weight": w})
    if extra is not None:
        table = pd.concat([table, extra.reset_index(drop=True)], axis=1)
    scale: dict[str, Any] = {}
    if exponent:  # said in the run record's input policy, whatever the command
        scale = {"weight_scale_exponent": exponent, "weight_scale_note": scale_sentence(exponent)}
    network = (factory or Network)(
        adjacency,
        ends.node_ids,
        coordinates=coordinates,
        sizes=sizes,
        links=table,
        notes={**counts, **scale, **(notes or {})},
        arcs=arcs,
        weight_exponent=exponent,
    )
    # The table's ends are these rows: set the cached property now (it would
    # otherwise look every id up again the first time it is read).
    object.__setattr__(network, "link_ends", (_readonly(i), _readonly(j)))
    return network


def _final_exponent(adjacency: sp.csr_array, shift: int) -> int:
    """The :attr:`~Network.weight_exponent` of an adjacency stored divided by ``2**shift``.

    0 (the affinities as given) when the largest summed affinity lies in the
    band of :mod:`specgraph._scale`, else the exponent that brings it into
    ``[1, 2)``.
    """
    if not adjacency.nnz:
        return 0
    final = shift + top_exponent(adjacency.data)
    return 0 if in_band(final) else final - 1


def _where(rows: Sequence[int], origin: LinkOrigin | None) -> str:
    """``lines 3 and 4`` (from the origin's file) or ``rows 2 and 3`` (1-based)."""
    locate = None if origin is None else origin.locate
    lines = [None if locate is None else locate(r) for r in rows]
    if all(line is not None for line in lines):
        numbers, word = [str(line) for line in lines], "line"
    else:
        numbers, word = [str(r + 1) for r in rows], "row"
    if len(numbers) == 1:
        return f"{word} {numbers[0]}"
    listed = ", ".join(numbers[:-1]) + " and " + numbers[-1]
    return f"{word}s {listed}"


def _refusal(message: str, row: int, origin: LinkOrigin | None) -> InputError:
    """The refusal at link ``row``: the origin's file and line in front, when known."""
    return InputError(message) if origin is None else origin.error(message, row=row)


#: Parallel links listed by line in the refusal of a sum that overflows.
_ROWS_SHOWN = 5


def _refuse_overflow(
    adjacency: sp.csr_array,
    i: np.ndarray,
    j: np.ndarray,
    w: np.ndarray,
    shift: int,
    ends: LinkEnds,
    origin: LinkOrigin | None,
) -> None:
    """Refuse summed affinities, or a total volume, past the largest float64 in the units given.

    ``adjacency`` holds the affinities divided by ``2**shift`` (so its sums are
    finite); a value at or above :func:`~specgraph._scale.overflow_threshold`
    would be infinite in the units given.
    """
    limit = overflow_threshold(shift)
    if not adjacency.nnz or math.isinf(limit):
        return
    data = adjacency.data
    if float(data.max()) >= limit:  # parallel links whose sum alone overflows
        k = int(np.argmax(data))
        a = int(np.searchsorted(adjacency.indptr, k, side="right") - 1)
        b = int(adjacency.indices[k])
        rows = np.flatnonzero(((i == a) & (j == b)) | ((i == b) & (j == a))).tolist()
        shown = _where(rows[:_ROWS_SHOWN], origin)
        more = f" and {len(rows) - _ROWS_SHOWN} more" if len(rows) > _ROWS_SHOWN else ""
        raise _refusal(
            f"the links on {shown}{more} join the same two nodes ({ends.end_id(rows[0], 0)!r} "
            f"and {ends.end_id(rows[0], 1)!r}), and parallel links are summed: their weights "
            f"sum past the largest float64 number ({np.finfo(np.float64).max:.3g}); divide "
            "the weight column by a power of ten (zones do not change when every weight is "
            "divided by the same number)",
            rows[0],
            origin,
        )
    total = float(data.sum())
    if total >= limit:
        k = int(np.argmax(w))
        decades = math.log10(total) + shift * math.log10(2.0)
        power = max(1, math.ceil(decades - 300))
        shown = f"{10.0 ** (decades - math.floor(decades)):.2g}e+{math.floor(decades)}"
        raise _refusal(
            f"the largest weight, {w[k]:.3g} on {_where([k], origin)}, makes the network's "
            f"total volume (twice the sum of the weights, about {shown}) larger than "
            f"the largest float64 number ({np.finfo(np.float64).max:.3g}), so zone volumes "
            f"cannot be written in these units; divide the weight column by 1e{power} (zones "
            "do not change when every weight is divided by the same number)",
            k,
            origin,
        )


def _checked_rows(ends: LinkEnds) -> tuple[np.ndarray, np.ndarray]:
    """The encoded rows, or the refusal of repeated node ids or of an unknown end."""
    if not ends.unique or ends.rows is None:
        raise InputError("node ids must be unique")
    i, j = ends.rows
    missing = np.flatnonzero((i < 0) | (j < 0))
    if missing.size:
        k = int(missing[0])
        bad = ends.end_id(k, 0 if i[k] < 0 else 1)
        raise InputError(f"link {k} names node {bad!r}, which is not among the node ids")
    return i, j


def _adjacency_from_links(
    i: np.ndarray,
    j: np.ndarray,
    w: np.ndarray,
    n: int,
    *,
    directed: bool = False,
    negligible: np.ndarray | None = None,
) -> tuple[sp.csr_array, dict[str, int]]:
    """Symmetric adjacency (or, directed, the arcs) with the input policies, and their counts.

    ``negligible`` marks links left out as negligible beside the largest
    (:func:`~specgraph._scale.negligible_mask`); they are counted apart.
    """
    loops = i == j
    small = np.zeros(w.shape, dtype=bool) if negligible is None else negligible & ~loops
    zero = (w == 0) & ~loops & ~small  # a negligible link may be 0 at the safe scale
    keep = ~loops & ~zero & ~small
    if directed:
        lo, hi = i[keep], j[keep]
    else:
        lo = np.minimum(i[keep], j[keep])
        hi = np.maximum(i[keep], j[keep])
    # Converting to CSR sums repeated entries, so what is stored is one entry per
    # distinct pair (kept affinities are > 0: no sum is zero). Counting them there
    # spares a sort of the pairs (numpy.unique: 1.4 s at 2*10^6 links).
    upper = sp.coo_array((w[keep], (lo, hi)), shape=(n, n)).tocsr()
    upper.sum_duplicates()
    counts = {
        "input_links": int(i.size),
        "self_loops_dropped": int(loops.sum()),
        "zero_weight_links_dropped": int(zero.sum()),
        "duplicate_links_merged": int(keep.sum() - upper.nnz),
    }
    if small.any():
        counts["negligible_weight_links_dropped"] = int(small.sum())
    if directed:
        return upper, counts
    return (upper + upper.T).tocsr(), counts


def _rebuild_network(
    adjacency: Any,
    node_ids: Any,
    coordinates: Any,
    sizes: Any,
    links: Any,
    notes: dict[str, Any],
    arcs: Any,
    weight_exponent: int = 0,
) -> Network:
    """Unpickle a :class:`Network` (see :meth:`Network.__reduce__`)."""
    return Network(
        adjacency,
        node_ids,
        coordinates=coordinates,
        sizes=sizes,
        links=links,
        notes=notes,
        arcs=arcs,
        weight_exponent=weight_exponent,
    )
