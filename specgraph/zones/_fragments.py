"""Stray fragments: small connected components set aside, not zoned.

Every export of a real network (GIS layers, asset registers, node tables)
holds a few stray pieces: two to five nodes cut off by a digitizing slip, a
link table missing one record, nodes of the node table that no link reaches.
Zoned as they are, each piece needs a zone of its own (a zone never spans
two components), so a zone count below the number of pieces used to be
raised to it and the main network got one zone. With
``fragments="set_aside"`` (the default), :func:`find_zones` runs the steps
below instead:

1. the connected components (:func:`scipy.sparse.csgraph.connected_components`);
   a component is a *fragment* when its size (in the rules' unit: nodes, or
   node weight with ``size_by='weight'``) is below :func:`fragment_limit`,
   and it is not the largest component, holds no source, no fixed node and
   no end of a trunk link (isolated nodes of a node table are fragments of
   one node);
2. the other components are zoned together by the usual steps, with the
   rules restricted to them; the zone count asked is theirs alone (the
   fragments are not counted against it) and is shared among them in
   proportion to their sizes (:func:`allocate_zones`), so the main network
   always gets its zones;
3. every node keeps a zone number, so every table and score works as for any
   zoning: zones ``0..k-1`` as usual (and the trunk zone after them when
   trunk links are given), then the fragments together form one more zone,
   numbered last, which is not a zone of the network and need not be
   connected. The zone table gains ``role`` (``"district"``, ``"trunk"`` or
   ``"fragments"``, as for trunk links, :mod:`._trunk`).

The fragments are never set aside silently: a warning gives their count,
nodes and size, ``decisions["fragments"]`` records the same with the limit
and its reason, and :func:`fragment_table` lists them node by node (the
command line writes it as ``fragments.csv``). ``fragments="zone"`` zones
them as any component (each gets a zone; a count below the number of
components is raised to it, with a warning).

Scores: the fragments group has no link to any zone, so its cut is 0 and it
adds nothing to the normalized cut or the boundary; the overall scores
(normalized cut, conductances, ``all_connected``) are those of the zones
``0..k-1`` (and the trunk zone), which equal the same figures computed on the
network without its fragments, and ``scores["zones"]`` counts every row of
the zone table, the group included (``scores["districts"]`` does not).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import pandas as pd
from scipy.sparse.csgraph import connected_components

from .._figures import boundary_links, overall_scores, zone_table
from ..network import Network
from ._compare import SMALL_ZONE_OF_AVERAGE, SMALL_ZONE_SHARE
from ._count import default_candidates
from ._result import Zoning
from ._rules import NAMES_SHOWN, ResolvedConstraints
from ._trunk import ROLE_DISTRICT, district_rules, mark_inlets

__all__ = [
    "FRAGMENT_TREATMENTS",
    "ROLE_FRAGMENTS",
    "FragmentSplit",
    "fragment_limit",
    "fragment_table",
    "split_fragments",
    "whole_zone_table",
    "zone_beside_fragments",
]

#: What ``find_zones(fragments=...)`` accepts: ``'set_aside'`` (small
#: components form one unzoned group, numbered last) or ``'zone'`` (every
#: component is zoned, at least one zone each).
FRAGMENT_TREATMENTS = ("set_aside", "zone")

#: ``role`` of the fragments group's row in the zone table.
ROLE_FRAGMENTS = "fragments"

#: Columns of :func:`fragment_table` (``fragments.csv``).
FRAGMENT_COLUMNS = ("node", "fragment", "nodes", "size")


#: Zones a network under rules with a zone count: :func:`find_zones`' own steps.
ZoneRest = Callable[[Network, ResolvedConstraints, Any], Zoning]


def _largest_count(spec: Any, rules: ResolvedConstraints, n_nodes: int) -> int:
    """The largest zone count ``spec`` can give: the count, the range's top, or auto's."""
    if isinstance(spec, int):
        return spec
    if isinstance(spec, range):
        return max(spec)
    if rules.sources.size:
        return int(rules.sources.size)  # 'auto' with sources: one zone per source
    return max(default_candidates(n_nodes), default=1)  # a tiny network: one zone


def fragment_limit(total: float, spec: Any, rules: ResolvedConstraints) -> tuple[float, str]:
    """Size under which a connected component is a fragment, and why.

    A component smaller than the smallest zone the zoning would accept
    without the small-zone warning (:func:`~specgraph.zones._compare.
    zone_warnings`): under :data:`SMALL_ZONE_SHARE` (1 %) of the network, or,
    with many zones, under :data:`SMALL_ZONE_OF_AVERAGE` (a tenth) of an
    average zone, whichever is smaller. Zoned on its own it would be such a
    sliver zone and take a zone from the main network. The zone count is the
    one asked, the top of a range, or for ``'auto'`` the largest count it can
    choose (one per source with sources), so that the limit is never above
    what the chosen count allows. Below ``min_size`` (when given and larger),
    a component cannot be a zone at all.

    On ``road_like(100_000)`` with 41 stray pieces of 2 to 5 nodes and 456
    isolated nodes (tests/test_fragments.py builds the same shape): 20 zones
    give a limit of 0.5 % (about 510 nodes), 500 zones 0.02 % (about 20
    nodes); both set every piece aside and keep the main network.

    Examples
    --------
    >>> rules = ResolvedConstraints(None, None, np.ones(10_000))
    >>> fragment_limit(10_000.0, 20, rules)[0], fragment_limit(10_000.0, 2, rules)[0]
    (50.0, 100.0)
    """
    k = max(_largest_count(spec, rules, rules.n_nodes), 1)
    share = min(SMALL_ZONE_SHARE, SMALL_ZONE_OF_AVERAGE / k)
    limit = share * total
    basis = (
        f"{SMALL_ZONE_SHARE:.0%} of the network"
        if share >= SMALL_ZONE_SHARE
        else f"{SMALL_ZONE_OF_AVERAGE:.0%} of an average zone of {k}, {share:.2%} of the network"
    )
    if rules.min_size is not None and rules.min_size > limit:
        return float(rules.min_size), f"min_size={rules.min_size:g}"
    return float(limit), basis


@dataclass(frozen=True, eq=False)
class FragmentSplit:
    """The network's components and which are fragments (step 1).

    Attributes
    ----------
    component : ndarray of int, shape (n,)
        Component of every node (scipy's numbering).
    size : ndarray of float
        Size of each component, in the rules' unit.
    nodes : ndarray of int
        Node count of each component.
    fragment : ndarray of bool
        Components set aside.
    limit : float
        Size under which a component is a fragment.
    basis : str
        Where the limit comes from.
    """

    component: np.ndarray
    size: np.ndarray
    nodes: np.ndarray
    fragment: np.ndarray
    limit: float
    basis: str

    @property
    def kept(self) -> np.ndarray:
        """Rows of the nodes that are zoned, in row order."""
        return np.flatnonzero(~self.fragment[self.component])

    @property
    def set_aside(self) -> np.ndarray:
        """Rows of the fragments' nodes, in row order."""
        return np.flatnonzero(self.fragment[self.component])


def split_fragments(network: Network, rules: ResolvedConstraints, spec: Any) -> FragmentSplit:
    """Components and fragments of the network (step 1 of the module docstring).

    Examples
    --------
    >>> from specgraph import Network
    >>> net = Network.from_links(["a", "b", "c", "x"], ["b", "c", "d", "y"])
    >>> rules = ResolvedConstraints(None, None, np.ones(6))
    >>> split = split_fragments(net, rules, 2)
    >>> split.fragment.tolist(), net.node_ids[split.set_aside].tolist()
    ([False, False], [])
    >>> rules = ResolvedConstraints(3.0, None, np.ones(6))
    >>> net.node_ids[split_fragments(net, rules, 2).set_aside].tolist()
    ['x', 'y']
    """
    count, component = connected_components(network.adjacency, directed=False)
    component = component.astype(np.int64)
    size = np.bincount(component, weights=rules.sizes, minlength=count)
    nodes = np.bincount(component, minlength=count)
    limit, basis = fragment_limit(float(rules.sizes.sum()), spec, rules)
    held = np.zeros(count, dtype=bool)
    assert rules.pinned is not None
    for rows in (rules.sources, np.flatnonzero(rules.pinned >= 0), rules.trunk_pairs.ravel()):
        held[component[rows]] = True
    held[int(np.argmax(nodes if not size.any() else size))] = True  # the main network
    return FragmentSplit(component, size, nodes, (size < limit) & ~held, limit, basis)


def _restricted(rules: ResolvedConstraints, rows: np.ndarray) -> ResolvedConstraints:
    """The rules on ``rows``, renumbered; trunk links kept (no fragment holds one)."""
    new = np.full(rules.n_nodes, -1, dtype=np.int64)
    new[rows] = np.arange(rows.size)
    return replace(district_rules(rules, rows), trunk_pairs=new[rules.trunk_pairs])


def _inner_spec(spec: Any, n: int) -> Any:
    """The zone count asked, capped at the nodes left to zone."""
    if isinstance(spec, int):
        return min(spec, n)
    if isinstance(spec, range):
        stop = min(spec.stop, n + 1)
        return range(min(spec.start, stop - 1), stop)
    return spec


def zone_beside_fragments(
    network: Network,
    rules: ResolvedConstraints,
    spec: Any,
    zone_rest: ZoneRest,
    parameters: Callable[[dict[str, Any]], dict[str, Any]],
) -> Zoning:
    """Steps 1 to 3 of the module docstring: the zoning with its fragments group.

    Parameters
    ----------
    network : Network
    rules : ResolvedConstraints
    spec : int, str or range
        The zone count asked for the network without its fragments.
    zone_rest : callable
        ``zone_rest(network, rules, spec)`` zones a network (trunk links
        included) by :func:`find_zones`' usual steps and returns a Zoning.
    parameters : callable
        Gives the zoning's parameter record from the inner run's.

    Returns
    -------
    Zoning
    """
    split = split_fragments(network, rules, spec)
    if not split.fragment.any():
        zoning = zone_rest(network, rules, spec)
        if split.size.size < 2:
            return zoning
        decision = _none_decision(split)
        return replace(zoning, decisions={**zoning.decisions, "fragments": decision})
    rows = split.kept
    sub, sub_rules = network.subnetwork(rows), _restricted(rules, rows)
    inner = zone_rest(sub, sub_rules, _inner_spec(spec, rows.size))
    k = int(inner.labels.max()) + 1
    labels = np.full(network.n_nodes, k, dtype=np.int64)
    labels[rows] = inner.labels
    table = whole_zone_table(network, labels, inner)
    boundary = boundary_links(network, labels)
    if "trunk" in inner.decisions:
        mark_inlets(boundary, int(inner.decisions["trunk"]["trunk_zone"]))
    decision = _decision(network, split, k, spec)
    scores = {
        **inner.scores,
        **overall_scores(table.iloc[:k]),  # the zones; the group adds no cut
        "zones": k + 1,
        "all_connected": bool(inner.scores["all_connected"]),
        "districts": int(inner.scores.get("districts", k)),
        "fragments": decision["fragments"],
        "fragment_nodes": decision["nodes"],
    }
    return replace(
        inner,
        network=network,
        labels=labels,
        zones=table,
        boundary=boundary,
        scores=scores,
        parameters=parameters(dict(inner.parameters)),
        decisions={**inner.decisions, "fragments": decision},
        warnings=(decision["warning"], *inner.warnings),
    )


def whole_zone_table(network: Network, labels: np.ndarray, inner: Zoning) -> pd.DataFrame:
    """The zone table of the whole network, with the inner table's extra columns."""
    table = zone_table(network, labels)
    k = len(inner.zones)
    for column in inner.zones.columns:
        if column not in table.columns:
            values = inner.zones[column].to_numpy()
            last = ROLE_FRAGMENTS if column == "role" else np.zeros(1, dtype=values.dtype)[0]
            table[column] = np.append(values, np.asarray([last], dtype=values.dtype))
    if "role" not in inner.zones.columns:
        table["role"] = np.where(np.arange(k + 1) == k, ROLE_FRAGMENTS, ROLE_DISTRICT)
    return table


def _fragment_order(split: FragmentSplit) -> np.ndarray:
    """Fragments by descending size, ties by node count then component number."""
    pieces = np.flatnonzero(split.fragment)
    return pieces[np.lexsort((pieces, -split.nodes[pieces], -split.size[pieces]))]


def _plural(count: int, word: str) -> str:
    return f"{count:,} {word}" + ("" if count == 1 else "s")


def _decision(network: Network, split: FragmentSplit, k: int, spec: Any) -> dict[str, Any]:
    """``decisions["fragments"]``: what was set aside, why, and the warning."""
    pieces = _fragment_order(split)
    rows = split.set_aside
    isolated = int(np.count_nonzero(split.nodes[pieces] == 1))
    total = float(split.size.sum())
    size = float(split.size[pieces].sum())
    share = size / total if total > 0 else 0.0
    lone = f"; {_plural(isolated, 'isolated node')}, with no link" if isolated else ""
    asked = f"the {spec} zones asked" if isinstance(spec, int) else "the zone count"
    kept = int(split.size.size - pieces.size)
    warning = (
        f"{_plural(int(pieces.size), 'stray fragment')} set aside: connected components "
        f"under {split.limit:.4g} in size ({split.basis}) hold {_plural(int(rows.size), 'node')} "
        f"({share:.2%} of the network{lone}); they form zone {k}, the unzoned fragments group "
        f"(role 'fragments'), not counted in {asked}; for example "
        f"{_quoted(network.node_ids[rows[:NAMES_SHOWN]])}; fragments='zone' zones them instead"
    )
    return {
        "choice": "set_aside",
        "fragments": int(pieces.size),
        "nodes": int(rows.size),
        "size": size,
        "isolated_nodes": isolated,
        "largest": float(split.size[pieces].max()),
        "limit": split.limit,
        "limit_reason": split.basis,
        "components": int(split.size.size),
        "zone": k,
        "examples": network.node_ids[rows[:NAMES_SHOWN]].tolist(),
        "warning": warning,
        "reason": (
            f"{_plural(int(split.size.size), 'connected component')}: "
            f"{pieces.size:,} under {split.limit:.4g} in size ({split.basis}) are stray "
            f"fragments ({_plural(int(rows.size), 'node')}{lone}), set aside as zone {k}; "
            f"the zones were formed on the other {_plural(kept, 'component')}"
        ),
    }


def _none_decision(split: FragmentSplit) -> dict[str, Any]:
    """``decisions["fragments"]`` when the network has components but no fragment."""
    return {
        "choice": "set_aside",
        "fragments": 0,
        "limit": split.limit,
        "limit_reason": split.basis,
        "components": int(split.size.size),
        "reason": (
            f"{split.size.size:,} connected components, none under {split.limit:.4g} in size "
            f"({split.basis}) without a source, fixed node or trunk link: every one is zoned"
        ),
    }


def _quoted(ids: np.ndarray) -> str:
    return ", ".join(repr(str(i)) for i in ids.tolist())


def fragment_table(zoning: Zoning) -> pd.DataFrame | None:
    """The nodes of the fragments group: ``node, fragment, nodes, size``; None without one.

    ``fragment`` numbers the fragments from 0 by descending size (ties by
    node count, then first node); ``nodes`` and ``size`` are the fragment's
    node count and summed node size (the units of ``zone_summary.csv``'s
    ``nodes`` and ``size``). Rows by fragment, then in network order.

    Examples
    --------
    >>> from specgraph import Network, find_zones
    >>> from specgraph.zones import ZoneConstraints
    >>> net = Network.from_links(["a", "b", "c", "x"], ["b", "c", "d", "y"])
    >>> zoning = find_zones(net, 1, constraints=ZoneConstraints(min_size=3))
    >>> fragment_table(zoning).to_numpy().tolist()
    [['x', 0, 2, 2.0], ['y', 0, 2, 2.0]]
    """
    if "role" not in zoning.zones.columns:
        return None
    role = zoning.zones["role"].to_numpy()
    found = np.flatnonzero(role == ROLE_FRAGMENTS)
    if not found.size:
        return None
    zone = int(zoning.zones["zone"].to_numpy()[found[0]])
    rows = np.flatnonzero(zoning.labels == zone)
    network = zoning.network
    _, piece = connected_components(network.adjacency[rows][:, rows], directed=False)
    nodes = np.bincount(piece)
    size = np.bincount(piece, weights=np.asarray(network.node_weights, dtype=np.float64)[rows])
    first = np.full(nodes.size, rows.size, dtype=np.int64)
    np.minimum.at(first, piece, np.arange(rows.size))
    order = np.lexsort((first, -nodes, -size))
    number = np.empty_like(order)
    number[order] = np.arange(order.size)
    frame = pd.DataFrame(
        {
            "node": network.node_ids[rows],
            "fragment": number[piece].astype(np.int64),
            "nodes": nodes[piece].astype(np.int64),
            "size": size[piece],
        }
    )
    return frame.sort_values("fragment", kind="stable").reset_index(drop=True)
