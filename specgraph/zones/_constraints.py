"""Zone constraints: size bounds, connected zones, one source per zone, links
that must not be cut, and nodes fixed to zones in advance.

A spectral assignment knows nothing of these rules; :func:`enforce_constraints`
turns its labels into labels that honour them, or raises
:class:`~specgraph.exceptions.ConstraintError` saying which rule cannot be met
and why. The steps, each a small function in :data:`_STEPS`:

0. links that must not be cut are contracted into super-nodes
   (:func:`contract_links`); every later step works on the contracted graph,
   where such a link cannot be cut, and the labels are expanded at the end;
   infeasible inputs (a node above ``max_size``, a component below
   ``min_size`` or without a source) are refused before any work;
1. fixed labels are matched to zones by maximum overlap (Hungarian method)
   and their nodes forced into the matched zones;
2. connectivity repair: each zone keeps the connected piece that holds its
   fixed nodes or sources (else its biggest piece); other pieces move to the
   adjacent zone they are most strongly linked to;
3. one source per zone: zones with several sources are split into
   shortest-path cells of their sources, zones without a source are merged
   into a neighbour;
4. size bounds: zones above ``max_size`` are bisected along the Fiedler vector
   with a sweep cut restricted to admissible sizes (not when sources are
   given: a part would lack one), zones below ``min_size`` are merged into a
   neighbour when the union fits ``max_size``;
5. balancing: zones still outside the bounds (sources present, or no merge
   fits) are brought within them by moving boundary nodes between adjacent
   zones, planned as a minimum-cost flow on the zone graph
   (:func:`~specgraph.zones._balance.balance_sizes`); only when that fails too
   is a size bound refused, with the transfers that were blocked and why;
6. a last repair and the final audit :func:`constraint_violations`, which must
   come back empty.

Everything runs on whole-graph arrays with scipy.sparse.csgraph (connected
components, multi-source Dijkstra), so a million-node network is processed in
seconds; per-zone Python loops run over zones, never over nodes.

Where each part lives: the rules in :mod:`._rules`, the contraction in
:mod:`._contract`, the audit in :mod:`._audit`, the shared state in
:mod:`._work`, and the steps in :mod:`._feasible` (0), :mod:`._repair` (1, 2),
:mod:`._sources` (3) and :mod:`._sizes` (4, 5); this module runs them in
order.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from .._validation import check_rng
from ..exceptions import ConstraintError
from ._arrays import (
    DIRECT_COUNT_FACTOR,
    MATCH_MAX_CELLS,
    as_csr,
    best_match,
    checked_labels,
    compact,
    first_of_groups,
    pair_totals,
)
from ._audit import constraint_violations
from ._balance import SIZE_RTOL
from ._contract import Contraction, contract_constraints, contract_links
from ._feasible import TWIN_SHARE, check_feasible, refuse_infeasible
from ._repair import force_pinned, repair
from ._rules import NAMES_SHOWN, ResolvedConstraints, ZoneConstraints, check_coverage
from ._sizes import (
    FIEDLER_LANCZOS_NODES,
    FIEDLER_TOL,
    bring_within_bounds,
    merge_undersize,
    split_oversize,
)
from ._sources import one_source_per_zone
from ._work import Enforcement, Work

# The rules, contraction and audit are re-exported: this module is the face of
# the constraint steps for the rest of the package.
__all__ = [
    "DIRECT_COUNT_FACTOR",
    "FIEDLER_LANCZOS_NODES",
    "FIEDLER_TOL",
    "MATCH_MAX_CELLS",
    "NAMES_SHOWN",
    "SIZE_RTOL",
    "TWIN_SHARE",
    "Contraction",
    "Enforcement",
    "ResolvedConstraints",
    "ZoneConstraints",
    "constraint_violations",
    "contract_constraints",
    "contract_links",
    "enforce_constraints",
    "refuse_infeasible",
]

_STEPS: tuple[Callable[[Work], None], ...] = (
    check_feasible,
    force_pinned,
    repair,
    one_source_per_zone,
    split_oversize,
    merge_undersize,
    bring_within_bounds,
    repair,
)


def enforce_constraints(
    adjacency: Any,
    labels: Any,
    constraints: ResolvedConstraints,
    *,
    rng: Any = None,
) -> Enforcement:
    """Change a zoning as little as the constraints require, or say why they cannot hold.

    Parameters
    ----------
    adjacency : sparse array of shape (n, n)
        Symmetric affinities, zero diagonal (a :class:`Network`'s adjacency).
    labels : ndarray of int, shape (n,)
        A zoning to start from (for example a spectral assignment).
    constraints : ResolvedConstraints
        On the same rows (:meth:`ZoneConstraints.resolve`).
    rng : None, int or numpy.random.Generator
        Seeds the eigen-solves of bisections.

    Returns
    -------
    Enforcement
        Labels numbered ``0..k-1``; the number of zones may differ from the
        input's (merges and splits), and the notes say by how much.

    Raises
    ------
    ConstraintError
        When a constraint cannot be met; the message names it, the zone,
        component or node concerned, its size and the bound.
    ParameterError
        For labels or constraints of the wrong shape.

    Notes
    -----
    The steps are listed in the module docstring. The fixed labels are
    matched to zones by the Hungarian method (H. W. Kuhn, Naval Res. Logist.
    Q. 2 (1955) 83-97, https://doi.org/10.1002/nav.3800020109, as
    ``scipy.optimize.linear_sum_assignment``); zones with several sources are
    split into the cells of a multi-source Dijkstra search (E. W. Dijkstra,
    Numer. Math. 1 (1959) 269-271, https://doi.org/10.1007/BF01386390).

    Examples
    --------
    >>> from specgraph import gallery
    >>> rules = ResolvedConstraints(None, None, np.ones(6), sources=np.array([0, 5]))
    >>> out = enforce_constraints(gallery.path(6).adjacency, np.zeros(6, dtype=int), rules)
    >>> out.labels.tolist()
    [0, 0, 0, 1, 1, 1]
    >>> out.notes[0]
    'sources: 1 zone holding 2 sources split into one zone per source'
    """
    matrix = as_csr(adjacency)
    n = matrix.shape[0]
    start = checked_labels(labels, n)
    check_coverage(constraints, n)
    if n == 0:
        return Enforcement(start, (), 0)
    contraction = contract_links(matrix, constraints.keep_pairs)
    inner = contract_constraints(contraction, constraints)
    members = np.bincount(contraction.groups, minlength=contraction.n_groups)
    work = Work(
        contraction.adjacency,
        inner,
        _labels_of_groups(contraction, start),
        members,
        check_rng(rng),
    )
    if constraints.keep_pairs.size:
        work.notes.append(
            f"keep_links: {len(constraints.keep_pairs)} links kept by merging "
            f"{n - contraction.n_groups} nodes into their neighbours for the duration"
        )
    for step in _STEPS:
        step(work)
    final = compact(contraction.expand(work.labels))
    broken = constraint_violations(matrix, final, constraints)
    if broken:
        raise ConstraintError("constraints could not all be met: " + "; ".join(broken) + ".")
    before, after = int(compact(start).max()) + 1, int(final.max()) + 1
    notes = list(work.notes)
    if before != after:
        notes.append(f"zones: {before} before constraints, {after} after")
    return Enforcement(final.astype(np.int64), tuple(notes), _moved(start, final))


def _moved(start: np.ndarray, final: np.ndarray) -> int:
    """Nodes outside the best one-to-one match (by overlap) of two zonings."""
    match = best_match(start, final, np.ones(start.size))
    image = np.full(int(start.max()) + 1, -1, dtype=np.int64)
    image[list(match)] = list(match.values())
    return start.size - int(np.sum(image[start] == final))


def _labels_of_groups(contraction: Contraction, labels: np.ndarray) -> np.ndarray:
    """Label of each super-node: the label of most of its members (by count)."""
    groups = contraction.groups
    if contraction.n_groups == groups.size:
        return labels
    pairs, counts = pair_totals(groups, labels)
    order = np.lexsort((-counts, pairs[0]))
    first = order[first_of_groups(pairs[0][order])]
    out = np.empty(contraction.n_groups, dtype=np.int64)
    out[pairs[0][first]] = pairs[1][first]
    return out
