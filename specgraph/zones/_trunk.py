"""Districts beside trunk links: feeding mains kept outside every zone.

Transmission (trunk) mains feed districts; they are not part of one. Given
trunk links (:attr:`ZoneConstraints.trunk_links`), :func:`find_zones` runs
the steps below instead of zoning the whole network:

1. the *trunk nodes* are the ends of the trunk links; the rest of the network,
   without them, falls into connected *pieces*
   (:func:`scipy.sparse.csgraph.connected_components`);
2. a piece too small to be a district (below ``min_size`` when given, else
   below :data:`SMALL_PIECE_SHARE` of the network's size) stays with the
   trunk, unless it holds a source or a fixed node; what stays is counted and
   named in a warning and in ``decisions["trunk"]``;
3. the other pieces are zoned together as one network by the usual steps
   (count, solve, assign, rules, refinement), with the rules restricted to
   them; a zone count below the number of pieces is raised to it, with the
   usual warning, and ``"auto"`` reads the eigengaps of the pieces;
4. every node keeps a zone number, so every table and score works as for any
   zoning: districts ``0..k-1`` by descending size as usual, and the trunk
   nodes with the pieces left to them form one more zone, ``k``, which is
   not a district and need not be connected. The zone table gains ``role``
   (``"district"`` or ``"trunk"``) and ``inlets`` (links from the trunk zone
   into the district; on the trunk row, all of them); the boundary table
   gains ``inlet`` (true for those links).

Rules touching trunk nodes: a source or a fixed node on a trunk node, and a
link that must not be cut from a trunk node into the rest (it would be an
inlet, cut by definition), are refused; a link that must not be cut between
two trunk nodes already holds.
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any, Protocol

import numpy as np
import pandas as pd
from scipy.sparse.csgraph import connected_components

from .._figures import boundary_links, overall_scores, zone_table
from ..exceptions import ConstraintError
from ..network import Network
from ._compare import SMALL_ZONE_SHARE
from ._result import Zoning
from ._rules import NAMES_SHOWN, ResolvedConstraints

__all__ = [
    "INLET_COLUMN",
    "ROLE_DISTRICT",
    "ROLE_TRUNK",
    "SMALL_PIECE_SHARE",
    "TrunkSplit",
    "district_rules",
    "mark_inlets",
    "split_at_trunk",
    "zone_beside_trunk",
]

logger = logging.getLogger(__name__)

#: Share of the network's size (nodes, or node weight with ``size_by='weight'``)
#: under which a piece of the network beside the trunk stays with the trunk
#: when no ``min_size`` is given: the share under which a delivered zone draws
#: a warning (:data:`~specgraph.zones._compare.SMALL_ZONE_SHARE`, 1 %). On the
#: 3,356-node water network Net6 with mains of 24 inches and up as trunk, the
#: 68 pieces are 912, 397, 360, 320, 228, 177, 141, 76, 76, 51, 44 and 43
#: nodes, then 17, 16, 13 and 53 pieces of 1 to 10 nodes: 1 % (34 nodes) falls
#: in the gap between 43 and 17, leaving 56 pieces (221 nodes) with the trunk.
SMALL_PIECE_SHARE = SMALL_ZONE_SHARE

#: ``role`` of a district's row in the zone table.
ROLE_DISTRICT = "district"
#: ``role`` of the trunk zone's row.
ROLE_TRUNK = "trunk"
#: Column of the boundary table marking inlets (``trunk_inlet`` if the input
#: link table already carries a column of that name).
INLET_COLUMN = "inlet"


class ZoneRest(Protocol):
    """Zones a network under rules with a zone count: :func:`find_zones`' own steps."""

    def __call__(self, network: Network, rules: ResolvedConstraints, spec: Any) -> Zoning: ...


@dataclass(frozen=True, eq=False)
class TrunkSplit:
    """The network split at its trunk links (steps 1 and 2).

    Attributes
    ----------
    trunk : ndarray of bool, shape (n,)
        Ends of trunk links.
    piece : ndarray of int, shape (n,)
        Piece of every other node, ``-1`` on trunk nodes.
    piece_size : ndarray of float
        Size of each piece (in the rules' size units).
    left : ndarray of bool
        Pieces that stay with the trunk.
    threshold : float
        Size under which a piece stays with the trunk.
    """

    trunk: np.ndarray
    piece: np.ndarray
    piece_size: np.ndarray
    left: np.ndarray
    threshold: float

    @property
    def districts(self) -> np.ndarray:
        """Rows of the nodes that are zoned into districts, in row order."""
        zoned = np.append(~self.left, False)  # piece -1 (trunk nodes) reads the last entry
        return np.flatnonzero(zoned[self.piece])


def split_at_trunk(adjacency: Any, rules: ResolvedConstraints) -> TrunkSplit:
    """Trunk nodes, the pieces of the rest, and which pieces stay with the trunk.

    A piece stays with the trunk when its size is below ``rules.min_size``
    (when given, else below :data:`SMALL_PIECE_SHARE` of the total size) and
    it holds no source and no fixed node.

    Examples
    --------
    >>> from specgraph import gallery
    >>> rules = ResolvedConstraints(None, None, np.ones(6), trunk_pairs=np.array([[2, 3]]))
    >>> split = split_at_trunk(gallery.path(6).adjacency, rules)
    >>> split.piece.tolist(), split.districts.tolist()
    ([0, 0, -1, -1, 1, 1], [0, 1, 4, 5])
    """
    n = rules.n_nodes
    trunk = np.zeros(n, dtype=bool)
    trunk[rules.trunk_pairs.ravel()] = True
    rest = np.flatnonzero(~trunk)
    piece = np.full(n, -1, dtype=np.int64)
    count, inner = connected_components(adjacency[rest][:, rest], directed=False)
    piece[rest] = inner
    size = np.bincount(inner, weights=rules.sizes[rest], minlength=count)
    total = float(rules.sizes.sum())
    threshold = rules.min_size if rules.min_size is not None else SMALL_PIECE_SHARE * total
    assert rules.pinned is not None
    held = np.zeros(count, dtype=bool)
    for rows in (rules.sources, np.flatnonzero(rules.pinned >= 0)):
        held[piece[rows][piece[rows] >= 0]] = True
    return TrunkSplit(trunk, piece, size, (size < threshold) & ~held, float(threshold))


def refuse_trunk_conflicts(rules: ResolvedConstraints, trunk: np.ndarray) -> None:
    """Refuse sources, fixed nodes and kept links that contradict the trunk."""
    assert rules.pinned is not None
    for name, rows in (
        ("sources", rules.sources[trunk[rules.sources]]),
        ("fixed nodes", np.flatnonzero(trunk & (rules.pinned >= 0))),
    ):
        if rows.size:
            raise ConstraintError(
                f"{name} {rules.name(rows)} are ends of trunk links, which belong to no "
                "district: give them inside districts, or leave those links out of the trunk"
            )
    keep = rules.keep_pairs
    across = keep[trunk[keep[:, 0]] != trunk[keep[:, 1]]]
    if across.size:
        shown = ", ".join(f"{rules.name(a)}-{rules.name(b)}" for a, b in across[:NAMES_SHOWN])
        raise ConstraintError(
            f"{len(across)} links that must not be cut join a trunk node to a district "
            f"({shown}): such a link is an inlet, which lies on the district's boundary; "
            "leave it out of the links kept, or put it in the trunk"
        )


def district_rules(rules: ResolvedConstraints, rows: np.ndarray) -> ResolvedConstraints:
    """The rules restricted to ``rows`` (the districts' nodes), renumbered."""
    new = np.full(rules.n_nodes, -1, dtype=np.int64)
    new[rows] = np.arange(rows.size)
    keep = new[rules.keep_pairs]
    assert rules.pinned is not None
    return ResolvedConstraints(
        rules.min_size,
        rules.max_size,
        rules.sizes[rows],
        sources=new[rules.sources],
        keep_pairs=keep[(keep >= 0).all(axis=1)],
        pinned=rules.pinned[rows],
        connected=rules.connected,
        node_ids=None if rules.node_ids is None else rules.node_ids[rows],
        coordinates=None if rules.coordinates is None else rules.coordinates[rows],
    )


def zone_beside_trunk(
    network: Network,
    rules: ResolvedConstraints,
    spec: Any,
    zone_rest: ZoneRest,
    parameters: Callable[[dict[str, Any]], dict[str, Any]],
) -> Zoning:
    """Steps 1 to 4 of the module docstring: the zoning with a trunk zone.

    Parameters
    ----------
    network : Network
    rules : ResolvedConstraints
        With ``trunk_pairs``.
    spec : int, str or range
        The zone count asked for the districts.
    zone_rest : callable
        ``zone_rest(network, rules, spec)`` zones a network without trunk
        links (:func:`find_zones`' usual steps) and returns a Zoning.
    parameters : callable
        Gives the zoning's parameter record from the districts' run's.

    Returns
    -------
    Zoning
    """
    split = split_at_trunk(network.adjacency, rules)
    refuse_trunk_conflicts(rules, split.trunk)
    rows = split.districts
    if rows.size == 0:
        raise ConstraintError(_no_district(rules, split))
    sub = network.subnetwork(rows)
    if isinstance(spec, int):
        spec = min(spec, rows.size)
    inner = zone_rest(sub, district_rules(rules, rows), spec)
    k = int(inner.labels.max()) + 1
    labels = np.full(network.n_nodes, k, dtype=np.int64)
    labels[rows] = inner.labels
    table = zone_table(network, labels)
    boundary = boundary_links(network, labels)
    inlet = mark_inlets(boundary, k)
    inlets = _inlets_per_zone(boundary, inlet, k)
    table["role"] = np.where(np.arange(k + 1) == k, ROLE_TRUNK, ROLE_DISTRICT)
    table["inlets"] = inlets
    scores = overall_scores(table)
    # The trunk zone need not be connected: the figure speaks of districts.
    scores["all_connected"] = bool(table["connected"].to_numpy()[:k].all())
    scores["districts"] = k
    scores["inlets"] = int(inlets[k])
    decision = _decision(network, rules, split, inlets, k)
    notes = [f"beside the trunk: {note}" for note in inner.warnings]
    if split.left.any():
        notes.append(_left_note(rules, split))
    return replace(
        inner,
        network=network,
        labels=labels,
        zones=table,
        boundary=boundary,
        scores=scores,
        parameters=parameters(dict(inner.parameters)),
        decisions={**inner.decisions, "trunk": decision},
        warnings=tuple(notes),
    )


def mark_inlets(boundary: pd.DataFrame, k: int) -> np.ndarray:
    """Mark the links of ``boundary`` with an end in the trunk zone ``k`` (in place).

    The column is :data:`INLET_COLUMN`, or ``trunk_inlet`` when the input link
    table already carried a column of that name; returns the marks.
    """
    inlet = (boundary["zone_a"].to_numpy() == k) | (boundary["zone_b"].to_numpy() == k)
    name = INLET_COLUMN if INLET_COLUMN not in boundary.columns else f"trunk_{INLET_COLUMN}"
    boundary[name] = inlet
    return np.asarray(inlet, dtype=bool)


def _inlets_per_zone(boundary: pd.DataFrame, inlet: np.ndarray, k: int) -> np.ndarray:
    """Inlets of each district, and their total on the trunk zone's row ``k``."""
    a = boundary["zone_a"].to_numpy()[inlet]
    b = boundary["zone_b"].to_numpy()[inlet]
    district = np.where(a == k, b, a).astype(np.int64)
    counts = np.bincount(district, minlength=k + 1)
    counts[k] = int(inlet.sum())
    return counts


def _left_pieces(split: TrunkSplit) -> tuple[np.ndarray, np.ndarray]:
    """Pieces left with the trunk (by size, largest first) and their nodes."""
    pieces = np.flatnonzero(split.left)
    pieces = pieces[np.argsort(-split.piece_size[pieces], kind="stable")]
    nodes = np.flatnonzero(np.isin(split.piece, pieces) & (split.piece >= 0))
    return pieces, nodes


def _left_note(rules: ResolvedConstraints, split: TrunkSplit) -> str:
    pieces, nodes = _left_pieces(split)
    return (
        f"trunk: {pieces.size} pieces of the network beside the trunk ({nodes.size} nodes: "
        f"{rules.name(nodes)}) are below {split.threshold:g} in size, too small to be districts; "
        "they stay with the trunk zone (min_size sets the limit)"
    )


def _no_district(rules: ResolvedConstraints, split: TrunkSplit) -> str:
    if split.piece_size.size == 0:
        return "every node is an end of a trunk link: no node is left to form districts"
    return (
        f"no piece of the network beside the trunk links reaches {split.threshold:g} in "
        f"size (the largest is {split.piece_size.max():g}): no district can be formed; "
        "lower min_size, or mark fewer links as trunk"
    )


def _decision(
    network: Network,
    rules: ResolvedConstraints,
    split: TrunkSplit,
    inlets: np.ndarray,
    k: int,
) -> dict[str, Any]:
    """``decisions["trunk"]``: what was kept outside the districts, and why."""
    pieces, left_nodes = _left_pieces(split)
    trunk_nodes = int(split.trunk.sum())
    return {
        "choice": "districts beside the trunk",
        "trunk_links": len(rules.trunk_pairs),
        "trunk_nodes": trunk_nodes,
        "pieces": int(split.piece_size.size),
        "small_piece_limit": split.threshold,
        "pieces_left_with_trunk": int(pieces.size),
        "nodes_left_with_trunk": int(left_nodes.size),
        "left_examples": network.node_ids[left_nodes[:NAMES_SHOWN]].tolist(),
        "districts": k,
        "trunk_zone": k,
        "inlets": inlets[:k].tolist(),
        "reason": (
            f"{len(rules.trunk_pairs)} trunk links: their {trunk_nodes} end nodes feed the "
            f"districts and belong to none; the rest of the network falls into "
            f"{split.piece_size.size} pieces, of which {pieces.size} (under "
            f"{split.threshold:g} in size) stay with the trunk; {k} districts were formed "
            f"on the others, fed by {int(inlets[:k].sum())} inlets; the trunk is zone {k}"
        ),
    }
