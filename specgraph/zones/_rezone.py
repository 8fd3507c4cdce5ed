"""``refine_zoning``: V-cycles on a zoning someone already has.

A utility's current districts, a zoning from another tool or an earlier run
of :func:`find_zones` are improved in place: the rules are enforced first (the
zoning given may break them; what changed is recorded), then V-cycles
(:func:`~specgraph.zones._levels.refine_by_cycles`) coarsen the network
inside its zones and refine the boundary on the way back up, at every level
by the exact drop of the normalized cut, keeping every rule. The zones keep
their identity: every input zone is still one zone, which
``decisions["refinement"]["input_zones"]`` names.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

import numpy as np
from scipy.optimize import linear_sum_assignment
from scipy.sparse.csgraph import connected_components

from .._figures import boundary_links, normalized_cut, overall_scores
from .._labels import code_labels
from .._validation import Array, Interval, NoneOk, check_param, check_rng, parameter_error
from .._wording import change_phrase, count
from ..network import Network
from ._constraints import refuse_infeasible
from ._fragments import whole_zone_table
from ._levels import in_id_order, refine_by_cycles, within_bounds
from ._result import Zoning
from ._rules import NAMES_SHOWN, ZoneConstraints
from ._stages import Merged, enforce_rules, merge_together
from ._zoning import constraint_record, number_by_size, zoning_of

__all__ = ["refine_zoning"]

_UNASSIGNED_OR_ZONE = Array(
    "int", (None,), low=-1, description="zone numbers >= 0 (-1: a node in no zone)"
)


def refine_zoning(
    network: Network,
    labels: Any,
    *,
    constraints: ZoneConstraints | None = None,
    max_cycles: int | None = None,
    rng: Any = None,
) -> Zoning:
    """Improve a given zoning by multilevel V-cycles, keeping its zones and the rules.

    Parameters
    ----------
    network : Network
    labels : array of int or str, shape (n_nodes,)
        Zone of each node, any integers ``>= 0`` (for example a utility's
        district numbers) or text labels (its district names); every node
        needs one.
    constraints : ZoneConstraints, optional
        Rules the result must keep (sizes, sources, links that must not be cut,
        fixed nodes, connected zones: the default). Trunk links are not
        supported here.
    max_cycles : int, optional
        Most V-cycles; by default :data:`~specgraph.zones.MAX_CYCLES`, fewer on
        networks above a million nodes (``CYCLE_NODE_BUDGET / n``). They stop
        earlier when two in a row each lower the normalized cut by less than
        :data:`~specgraph.zones.CYCLE_RTOL`.
    rng : None, int or numpy.random.Generator
        Draws the orders of the matchings and the ties of the refinement.

    Returns
    -------
    Zoning
        Zones numbered by descending size, as every zoning;
        ``decisions["refinement"]`` holds the normalized cut before and after,
        the cut after each cycle and ``input_zones``: the input zone (number
        or name, as given) of each output zone (matched by largest overlap).
        ``decisions["constraints"]`` says what the rules
        changed in the zoning given. No eigen-solve is run (``solves`` is empty).

    Raises
    ------
    ParameterError
        For labels of the wrong length, neither integers ``>= 0`` nor
        non-empty text, or trunk links.
    ConstraintError
        When the rules cannot hold (the message says which and why).

    References
    ----------
    .. [1] G. Karypis and V. Kumar, "Multilevel k-way partitioning scheme for
       irregular graphs", J. Parallel Distrib. Comput. 48(1), 1998,
       :doi:`10.1006/jpdc.1997.1404`.

    Examples
    --------
    A barbell of two 5-cliques zoned with the boundary one node off the bridge:

    >>> from specgraph import gallery
    >>> net = gallery.barbell(5)
    >>> zoning = refine_zoning(net, [0, 0, 0, 0, 1, 1, 1, 1, 1, 1], rng=0)
    >>> zoning.labels.tolist()
    [0, 0, 0, 0, 0, 1, 1, 1, 1, 1]
    >>> zoning.decisions["refinement"]["input_zones"]
    [0, 1]
    >>> named = refine_zoning(net, ["West"] * 4 + ["East"] * 6, rng=0)
    >>> named.decisions["refinement"]["input_zones"]
    ['West', 'East']
    """
    given, names = _given_labels(network, labels)
    max_cycles = check_param(max_cycles, "max_cycles", [Interval(int, 0, None), NoneOk()])
    generator = check_rng(rng)
    if np.any(given < 0):
        return _beside_unzoned(network, given, names, constraints, max_cycles, generator)
    return _refined(network, given, names, constraints, max_cycles, generator)


def _refined(
    network: Network,
    given: np.ndarray,
    names: np.ndarray | None,
    constraints: ZoneConstraints | None,
    max_cycles: int | None,
    generator: np.random.Generator,
) -> Zoning:
    """:func:`refine_zoning` of a zoning with every node in a zone."""
    rules = (constraints if constraints is not None else ZoneConstraints()).resolve(network)
    if rules.trunk_pairs.size:
        raise parameter_error(
            "constraints",
            "rules without trunk links (zone beside the trunk with find_zones)",
            constraints,
        )
    refuse_infeasible(network.adjacency, rules)
    inputs, compact = np.unique(given, return_inverse=True)
    if names is not None:
        inputs = names[inputs]  # the user's names, in sorted text order
    merged = merge_together(network, rules, rules.keep_pairs)
    ordered, ordered_rules, order = in_id_order(merged.network, merged.rules)
    first = np.full(merged.network.n_nodes, network.n_nodes, dtype=np.int64)
    np.minimum.at(first, merged.groups, np.arange(network.n_nodes))
    start = compact[first][order]  # each super-node takes its first node's zone
    inner = Merged(ordered, np.arange(ordered.n_nodes), ordered_rules, ordered_rules.sizes)
    kept = within_bounds(ordered, start, ordered_rules)
    kept, decided = enforce_rules(ordered, kept, inner, generator)
    refined, record = refine_by_cycles(
        ordered, kept, ordered_rules, rng=generator, max_cycles=max_cycles
    )
    by_row = np.empty_like(refined)
    by_row[order] = refined
    final = number_by_size(by_row[merged.groups], network.node_weights)
    before = normalized_cut(network.adjacency, compact.astype(np.int64))
    after = normalized_cut(network.adjacency, final)
    decisions = {
        "constraints": decided,
        "refinement": _record(before, after, record, inputs, compact, final),
    }
    parameters = {"constraints": constraint_record(rules), "max_cycles": max_cycles}
    return zoning_of(network, final, [], parameters, decisions, [])


def _beside_unzoned(
    network: Network,
    given: np.ndarray,
    names: np.ndarray | None,
    constraints: ZoneConstraints | None,
    max_cycles: int | None,
    generator: np.random.Generator,
) -> Zoning:
    """Nodes in no zone that form components of their own (stray pieces, isolated nodes of
    a node table) are left as they are, as the fragments group of :func:`find_zones`
    (:mod:`._fragments`): one more zone, numbered last, with role ``"fragments"``."""
    none = given < 0
    n_comp, component = connected_components(network.adjacency, directed=False)
    unzoned = np.bincount(component[none], minlength=n_comp) > 0
    mixed = unzoned & (np.bincount(component[~none], minlength=n_comp) > 0)
    if mixed.any():
        linked = np.flatnonzero(none & mixed[component])
        raise parameter_error(
            "labels",
            "a zone for every node linked to a zoned node (nodes in no zone may only "
            "form components of their own, such as stray pieces)",
            None,
            verb="give",
            shown=f"{count(linked.size, 'node')} in no zone linked to zoned nodes, such as "
            + ", ".join(repr(str(i)) for i in network.node_ids[linked[:NAMES_SHOWN]]),
        )
    rows = np.flatnonzero(~none)
    inner = _refined(
        network.subnetwork(rows), given[rows], names, constraints, max_cycles, generator
    )
    k = int(inner.labels.max()) + 1
    labels = np.full(network.n_nodes, k, dtype=np.int64)
    labels[rows] = inner.labels
    table = whole_zone_table(network, labels, inner)
    pieces = int(np.count_nonzero(unzoned))
    warning = (
        f"{count(int(none.sum()), 'node')} in no zone of the zoning given, in "
        f"{count(pieces, 'component')} of their own (stray pieces or isolated nodes), were "
        f"left as they are: they form zone {k}, the unzoned fragments group (role "
        f"'fragments'); for example "
        + ", ".join(repr(str(i)) for i in network.node_ids[np.flatnonzero(none)[:NAMES_SHOWN]])
    )
    decision = {
        "choice": "set_aside",
        "fragments": pieces,
        "nodes": int(none.sum()),
        "zone": k,
        "reason": warning,
        "warning": warning,
    }
    scores = {
        **inner.scores,
        **overall_scores(table.iloc[:k]),  # the zones; the group adds no cut
        "zones": k + 1,
        "all_connected": bool(inner.scores["all_connected"]),
        "districts": k,
        "fragments": pieces,
        "fragment_nodes": int(none.sum()),
    }
    return replace(
        inner,
        network=network,
        labels=labels,
        zones=table,
        boundary=boundary_links(network, labels),
        scores=scores,
        decisions={**inner.decisions, "fragments": decision},
        warnings=(warning, *inner.warnings),
    )


def _given_labels(network: Network, labels: Any) -> tuple[np.ndarray, np.ndarray | None]:
    """Codes of the zoning given and the user's names of them (None for zone numbers);
    ``-1`` (or ``None`` among names) for a node in no zone."""
    array = np.asarray(labels)
    if array.dtype.kind in "OUS" and array.size:
        return code_labels(array, n_nodes=network.n_nodes, unassigned=True)
    given = check_param(labels, "labels", [_UNASSIGNED_OR_ZONE])
    if given.size != network.n_nodes:
        raise parameter_error("labels", f"one zone per node ({network.n_nodes})", labels)
    return given, None


def _record(
    before: float,
    after: float,
    cycles: dict[str, Any],
    inputs: np.ndarray,
    compact: np.ndarray,
    final: np.ndarray,
) -> dict[str, Any]:
    """``decisions["refinement"]``: the cut before and after, per cycle, and the zones' origin."""
    k = int(final.max()) + 1 if final.size else 0
    # Each output zone's input zone: matched one to one by the largest total
    # overlap (Hungarian method, scipy's linear_sum_assignment); an output
    # zone left unmatched (the rules split a zone) takes the input zone
    # holding most of its nodes.
    overlap = np.zeros((k, inputs.size), dtype=np.int64)
    np.add.at(overlap, (final, compact), 1)
    match = overlap.argmax(axis=1)
    rows, cols = linear_sum_assignment(overlap, maximize=True)
    match[rows] = cols
    origin = inputs[match].tolist()
    moved = int(np.count_nonzero(inputs[compact] != np.asarray(origin)[final]))
    return {
        "reason": (
            f"{count(len(cycles['cycles']), 'V-cycle')}: "
            + change_phrase("the normalized cut", before, after, moved, "node move")
            + f"; {cycles['cycles_stop']}"
        ),
        "ncut_before": before,
        "ncut_after": after,
        "cycles": cycles["cycles"],
        "moved_nodes": moved,
        "input_zones": origin,
    }
