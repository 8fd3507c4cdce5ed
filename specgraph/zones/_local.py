r"""Local zones: a compact, weakly attached zone around one or more assets.

The zone comes from a personalized random walk that restarts at the assets,
computed only where it has mass, and a sweep cut over it (Andersen, Chung and
Lang [1]_). Nothing here looks at the whole network: the walk reads the rows
of the CSR adjacency it reaches, so the work is proportional to the part of
the network it touches, not to its size.

Definitions (undirected adjacency :math:`A`, degrees :math:`d`, lazy walk
:math:`W = (I + D^{-1} A)/2`): the personalized PageRank of a start
distribution :math:`s` with teleport probability :math:`\alpha` is the
solution of :math:`\mathrm{pr}(\alpha, s) = \alpha s + (1-\alpha)\,
\mathrm{pr}(\alpha, s) W` (row vectors). The *push* at a node :math:`u`
moves :math:`\alpha r(u)` of the residual :math:`r` into the approximation
:math:`p`, keeps :math:`(1-\alpha) r(u)/2` at :math:`u` and spreads
:math:`(1-\alpha) r(u)/2` over its neighbours in proportion to the link
affinities. Each push keeps the invariant
:math:`p + \mathrm{pr}(\alpha, r) = \mathrm{pr}(\alpha, s)`; pushing while some
node has :math:`r(u) \ge \varepsilon d(u)` ends with
:math:`\max_u r(u)/d(u) < \varepsilon` ([1]_, Theorem 1), after pushes whose
degrees add up to at most :math:`1/(\varepsilon\alpha)` (each moves at least
:math:`\alpha\varepsilon d(u)` of the unit mass into :math:`p`), on a support
of volume at most :math:`2/((1-\alpha)\varepsilon)` (a pushed node keeps at
least :math:`(1-\alpha)\varepsilon d(u)/2` of residual, and the residual sums
to at most 1).

References
----------
.. [1] R. Andersen, F. Chung and K. Lang, "Local graph partitioning using
   PageRank vectors", Proc. 47th IEEE FOCS, 475-486, 2006.
   :doi:`10.1109/FOCS.2006.44`
"""

from __future__ import annotations

import math
from collections import deque
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from .._validation import (
    OPEN_UNIT,
    POSITIVE,
    Constraint,
    NodeIds,
    NoneOk,
    check_param,
    parameter_error,
    validate_params,
)
from ..exceptions import InputError
from ..network import Network

__all__ = [
    "DEFAULT_LOCAL_ALPHA",
    "DEFAULT_LOCAL_EPSILON",
    "EPSILON_VOLUME_FACTOR",
    "LocalZone",
    "PushResult",
    "acl_sweep_bound",
    "local_zone",
    "personalized_push",
]

#: Default teleport probability of the walk. Smaller values let the walk
#: spread further: a set ``C`` keeps all but about ``(1 - alpha) phi(C) /
#: (2 alpha)`` of the walk's mass (module notes), so ``alpha`` should be at
#: least the conductance of the zones sought; 0.01 suits zones of a few
#: hundred to a few thousand nodes of a road- or pipe-like network, whose
#: conductance is a few hundredths.
DEFAULT_LOCAL_ALPHA = 0.01

#: Default push threshold ``epsilon`` without ``size_limit``: the support then
#: has volume at most ``2 / ((1 - alpha) epsilon)``, about 200,000 (some
#: 50,000 nodes of degree 4).
DEFAULT_LOCAL_EPSILON = 1e-5

#: With ``size_limit``, ``epsilon = 1 / (EPSILON_VOLUME_FACTOR * volume)``
#: with ``volume`` the limit times the mean degree: the walk then resolves
#: ``p/d`` down to a tenth of the mean value over a zone of that volume,
#: enough for the sweep to rank the zone's nodes (common practice; the
#: factor trades work for resolution).
EPSILON_VOLUME_FACTOR = 10.0


@dataclass(frozen=True, eq=False)
class LocalZone:
    """A local zone around assets, the sweep that chose it and the work done.

    Attributes
    ----------
    nodes : ndarray of str
        Node ids of the zone, in sweep order (highest ``p/d`` first).
    seeds : tuple of str
        The assets the walk started from (all in the zone).
    conductance : float
        ``boundary_weight / min(volume, total_volume - volume)``.
    volume : float
        Summed weighted degree of the zone.
    boundary_weight : float
        Summed affinity of links leaving the zone.
    size : float
        Zone size: summed node sizes when the network has them, else nodes.
    connected : bool
        Whether the zone induces a connected subgraph (assets far apart can
        give a zone in pieces: the sweep ranks nodes, it does not join them).
    profile : pandas.DataFrame
        The sweep, one row per prefix: ``node``, ``size``, ``volume``,
        ``boundary_weight``, ``conductance``, ``eligible`` (holds every seed
        and is within ``size_limit``).
    pushes : int
        Push operations done.
    touched : int
        Distinct nodes that received walk mass (the rows read are theirs).
    pushed_volume : float
        Summed degrees of the pushes (the work; at most ``work_bound``).
    alpha, epsilon : float
        Teleport probability and push threshold used.
    work_bound : float
        ``1 / (epsilon alpha)``: bound on ``pushed_volume`` ([1]_, Theorem 1).
    support_volume_bound : float
        ``2 / ((1 - alpha) epsilon)``: bound on the volume of the support.
    max_residual_ratio : float
        ``max r(u)/d(u)`` at the end (below ``epsilon``).
    sweep_bound : float
        Sweep guarantee: ``sqrt(18 alpha ln(m) / delta)`` with ``delta``
        the largest ``p(S) - vol(S)/vol(G)`` over the sweep sets, the bound of
        :func:`acl_sweep_bound` (``inf`` when ``delta`` is too small for it
        to apply).
    boundary : pandas.DataFrame
        Every input link with one end in the zone: ``source``, ``target``,
        ``weight``, ``inside`` (the end in the zone), then the columns
        carried from the input link table, in input order.
    network_nodes : int
        Nodes of the whole network (to set ``touched`` against).
    """

    nodes: np.ndarray
    seeds: tuple[str, ...]
    conductance: float
    volume: float
    boundary_weight: float
    size: float
    connected: bool
    profile: pd.DataFrame
    pushes: int
    touched: int
    pushed_volume: float
    alpha: float
    epsilon: float
    work_bound: float
    support_volume_bound: float
    max_residual_ratio: float
    sweep_bound: float
    boundary: pd.DataFrame
    network_nodes: int

    def to_frame(self) -> pd.DataFrame:
        """``node, sweep_rank`` table of the zone (rank 0: highest ``p/d``)."""
        return pd.DataFrame({"node": self.nodes, "sweep_rank": np.arange(len(self.nodes))})

    def figures(self) -> dict[str, Any]:
        """The zone's figures and the walk's work, JSON-ready, for a run record."""
        return {
            "around": list(self.seeds),
            "nodes": len(self.nodes),
            "size": self.size,
            "volume": self.volume,
            "boundary_weight": self.boundary_weight,
            "boundary_links": len(self.boundary),
            "conductance": self.conductance,
            "connected": self.connected,
            "alpha": self.alpha,
            "epsilon": self.epsilon,
            "pushes": self.pushes,
            "touched_nodes": self.touched,
            "network_nodes": self.network_nodes,
            "pushed_volume": self.pushed_volume,
            "work_bound": self.work_bound,
            "sweep_conductance_bound": self.sweep_bound,
        }


@dataclass(frozen=True, eq=False)
class PushResult:
    """The outcome of the push loop: dicts keyed by row index, over touched nodes only.

    Attributes
    ----------
    p : dict
        The approximate personalized PageRank (pushed nodes).
    r : dict
        The residual (every node that received mass).
    degree : dict
        Weighted degree of every node in ``r``.
    pushes : int
        Push operations done.
    pushed_volume : float
        Summed degrees of the pushes.
    """

    p: dict[int, float]
    r: dict[int, float]
    degree: dict[int, float]
    pushes: int
    pushed_volume: float


def _row(network: Network, u: int) -> tuple[np.ndarray, np.ndarray]:
    adjacency = network.adjacency
    a, b = adjacency.indptr[u], adjacency.indptr[u + 1]
    return adjacency.indices[a:b], adjacency.data[a:b]


@validate_params({"alpha": [OPEN_UNIT], "epsilon": [POSITIVE]})
def personalized_push(
    network: Network, seeds: Iterable[int], *, alpha: float, epsilon: float
) -> PushResult:
    """The approximate personalized PageRank of Andersen, Chung and Lang [1]_.

    Start :math:`s` uniform over ``seeds`` (row indices). Returns ``p`` and
    ``r`` as dicts over the touched nodes only, with
    :math:`p + \\mathrm{pr}(\\alpha, r) = \\mathrm{pr}(\\alpha, s)` and
    :math:`r(u) < \\varepsilon d(u)` everywhere. Nodes are pushed first in,
    first out; the rows read are the pushed nodes' rows.
    """
    start = list(dict.fromkeys(int(u) for u in seeds))
    p: dict[int, float] = {}
    r: dict[int, float] = {u: 1.0 / len(start) for u in start}
    degree: dict[int, float] = {}
    rows: dict[int, tuple[list[int], list[float]]] = {}

    def deg(u: int) -> float:
        if u not in degree:
            cols, weights = _row(network, u)
            degree[u] = float(weights.sum())
            rows[u] = (cols.tolist(), weights.tolist())
        return degree[u]

    queue = deque(u for u in start if r[u] >= epsilon * deg(u) and deg(u) > 0)
    queued = set(queue)
    pushes, pushed_volume = 0, 0.0
    while queue:
        u = queue.popleft()
        queued.discard(u)
        ru, du = r[u], degree[u]
        if ru < epsilon * du:
            continue
        pushes += 1
        pushed_volume += du
        p[u] = p.get(u, 0.0) + alpha * ru
        keep = (1.0 - alpha) * ru / 2.0
        r[u] = keep
        share = keep / du
        cols, weights = rows[u]
        for v, w in zip(cols, weights, strict=True):
            rv = r.get(v, 0.0) + share * w
            r[v] = rv
            if v not in queued and rv >= epsilon * deg(v):
                queue.append(v)
                queued.add(v)
        if keep >= epsilon * du and u not in queued:
            queue.append(u)
            queued.add(u)
    for v in r:
        deg(v)
    return PushResult(p, r, degree, pushes, pushed_volume)


def acl_sweep_bound(alpha: float, delta: float, n_links: int) -> float:
    r"""Andersen-Chung-Lang sweep guarantee, ``sqrt(18 alpha ln(m) / delta)``.

    If some set :math:`S` has :math:`p(S) - \mathrm{vol}(S)/\mathrm{vol}(G) >
    \delta` with :math:`\delta \ge 2/\sqrt{m}`, a sweep set of the
    approximate PageRank vector ``p`` has conductance below this value
    ([1]_, the sweep theorem for approximate PageRank vectors; the constant 18
    and the condition on ``delta`` are from memory). Returns ``inf`` when
    ``delta`` is below :math:`2/\sqrt{m}` or ``m < 2``.

    Examples
    --------
    >>> round(acl_sweep_bound(0.001, 0.9, 100), 4)
    0.3035
    """
    m = max(int(n_links), 0)
    if m < 2 or delta < 2.0 / math.sqrt(m):
        return math.inf
    return math.sqrt(18.0 * alpha * math.log(m) / delta)


def _seed_rows(network: Network, around: Any) -> list[int]:
    rows = []
    for node in check_param(around, "around", [_AROUND]):
        index = network.index_of.get(node)
        if index is None:
            raise InputError(
                f"around names node {str(node)!r}, which is not in the network; "
                "give ids exactly as in the edge table"
            )
        rows.append(index)
    return list(dict.fromkeys(rows))


def _epsilon(network: Network, size_limit: float | None, alpha: float) -> float:
    if size_limit is None:
        return DEFAULT_LOCAL_EPSILON
    # One vectorized reduction over the stored affinities (no per-node array).
    # Called once the seeds are known to have links, so the mean degree is > 0.
    mean_degree = float(network.adjacency.data.sum()) / network.n_nodes
    mean_size = 1.0 if network.sizes is None else float(network.sizes.mean())
    nodes = size_limit / mean_size if mean_size > 0 else size_limit
    return 1.0 / (EPSILON_VOLUME_FACTOR * max(nodes, 1.0) * mean_degree)


#: The assets a local zone grows around: one id, or several.
_AROUND = NodeIds(single=True, minimum=1)

#: What the arguments of :func:`local_zone` accept (whether the ids are nodes
#: with links depends on the network: checked in the body).
_LOCAL_OPTIONS: dict[str, list[Constraint]] = {
    "around": [_AROUND],
    "size_limit": [POSITIVE, NoneOk()],
    "alpha": [OPEN_UNIT],
    "epsilon": [POSITIVE, NoneOk()],
}


@validate_params(_LOCAL_OPTIONS)
def local_zone(
    network: Network,
    around: Any,
    *,
    size_limit: float | None = None,
    alpha: float = DEFAULT_LOCAL_ALPHA,
    epsilon: float | None = None,
) -> LocalZone:
    r"""A compact zone of low conductance around one or more assets.

    Parameters
    ----------
    network : Network
        Its undirected adjacency is walked (arcs are not used).
    around : str or sequence of str
        Id of the asset, or ids of several assets (the walk restarts at each
        with equal probability; the zone holds all of them).

    Returns
    -------
    LocalZone

    Raises
    ------
    InputError
        An id of ``around`` is not in the network (the message names it).
    ParameterError
        ``alpha`` outside (0, 1), ``epsilon`` or ``size_limit`` not > 0,
        a seed without links, or no sweep set holding every seed fits
        ``size_limit``.

    Other Parameters
    ----------------
    size_limit : float, optional
        Largest zone size (summed node sizes when the network has them,
        else nodes). Also sets the default ``epsilon``.
    alpha : float, default=0.01
        Teleport probability of the walk (:data:`DEFAULT_LOCAL_ALPHA`).
    epsilon : float, optional
        Push threshold on ``r(u)/d(u)``; smaller explores further. Default
        :data:`DEFAULT_LOCAL_EPSILON`, or from ``size_limit`` with
        :data:`EPSILON_VOLUME_FACTOR`.

    Notes
    -----
    Steps: (1) the push loop of :func:`personalized_push`; (2) the sweep:
    nodes with :math:`p(u) > 0` sorted by :math:`p(u)/d(u)` (ties by row),
    and for each prefix :math:`S_j` its conductance
    :math:`\partial(S_j) / \min(\mathrm{vol}\,S_j, \mathrm{vol}\,G -
    \mathrm{vol}\,S_j)`, updated in O(degree) per node; (3) the zone is the
    eligible prefix (every seed in, size within ``size_limit``) of least
    conductance, the smaller one on ties.

    *Guarantees*, checked in the tests:

    * push work and support are bounded as in the module notes
      (:attr:`LocalZone.work_bound`, :attr:`LocalZone.support_volume_bound`);
    * escape: for a set :math:`C` of :math:`\Phi'(C) = \partial C /
      \mathrm{vol}\,C`, a walk started at a node drawn from :math:`C` in
      proportion to degree leaves at most :math:`(1-\alpha)\Phi'(C)/(2\alpha)`
      of its PageRank mass outside :math:`C` (a lazy step from a distribution
      bounded by :math:`d/\mathrm{vol}\,C` sends at most :math:`\Phi'(C)/2`
      out, so after :math:`t` steps at most :math:`t\Phi'(C)/2` is out, and
      :math:`\alpha\sum_t (1-\alpha)^t t = (1-\alpha)/\alpha`); so for
      seeds in at least half of :math:`C`'s volume at most
      :math:`(1-\alpha)\Phi'(C)/\alpha` escapes (Markov) — [1]_'s lemma;
    * sweep: if some set :math:`S` holds :math:`\delta` more of :math:`p`
      than its share of volume, a sweep set has conductance below
      :func:`acl_sweep_bound` :math:`\sqrt{18\alpha\ln m/\delta}`; with the
      escape bound, a seed well inside a set of conductance :math:`\phi`
      and :math:`\alpha` of order :math:`\phi` gives a sweep set of
      conductance :math:`O(\sqrt{\phi \log m})` ([1]_). The restriction
      to eligible prefixes can only raise the conductance found above the
      unrestricted sweep's; :attr:`LocalZone.profile` shows both.

    A zone is decision support: validate it in a hydraulic, power-flow or
    traffic model before isolating anything.

    Examples
    --------
    >>> from specgraph import gallery
    >>> zone = local_zone(gallery.barbell(5), "1")
    >>> sorted(zone.nodes.tolist()), round(zone.conductance, 4)
    (['0', '1', '2', '3', '4'], 0.0476)
    """
    alpha = float(alpha)
    size_limit = None if size_limit is None else float(size_limit)
    epsilon = None if epsilon is None else float(epsilon)
    seeds = _seed_rows(network, around)
    for u in seeds:
        if network.adjacency.indptr[u + 1] == network.adjacency.indptr[u]:
            raise parameter_error(
                "around",
                "ids of nodes with links (no zone can grow around a node without any; "
                "choose a connected asset)",
                around,
                shown=f"node {network.node_ids[u]!r}, which has none",
            )
    eps = _epsilon(network, size_limit, alpha) if epsilon is None else epsilon
    push = personalized_push(network, seeds, alpha=alpha, epsilon=eps)
    total_volume = float(network.adjacency.data.sum())
    profile = _sweep(network, push, seeds, size_limit, total_volume)
    eligible = profile[profile["eligible"]]
    if eligible.empty:
        smallest = float(profile.loc[profile["seeded"], "size"].min())
        expected = (
            "at least the size of some zone holding every asset of around (the smallest "
            f"along the sweep has size {smallest:g})"
        )
        raise parameter_error("size_limit", expected, size_limit)
    best = int(eligible["conductance"].to_numpy().argmin())
    row = eligible.iloc[best]
    stop = int(eligible.index[best]) + 1
    delta = float(profile["excess"].max())
    members = [network.index_of[str(v)] for v in profile["node"].to_numpy()[:stop]]
    return LocalZone(
        nodes=profile["node"].to_numpy()[:stop].astype(object),
        seeds=tuple(str(network.node_ids[u]) for u in seeds),
        conductance=float(row["conductance"]),
        volume=float(row["volume"]),
        boundary_weight=float(row["boundary_weight"]),
        size=float(row["size"]),
        connected=_connected(network, members),
        profile=profile.drop(columns=["seeded", "excess"]),
        pushes=push.pushes,
        touched=len(push.r),
        pushed_volume=push.pushed_volume,
        alpha=alpha,
        epsilon=eps,
        work_bound=1.0 / (eps * alpha),
        support_volume_bound=2.0 / ((1.0 - alpha) * eps),
        max_residual_ratio=max(
            (push.r[u] / push.degree[u] for u in push.r if push.degree[u] > 0), default=0.0
        ),
        sweep_bound=acl_sweep_bound(alpha, delta, network.n_links),
        boundary=_leaving_links(network, members),
        network_nodes=network.n_nodes,
    )


def _leaving_links(network: Network, members: list[int]) -> pd.DataFrame:
    """Input links with exactly one end among ``members``, and which end that is.

    Built from the input link table (repeated input links appear once per
    input row, like :func:`specgraph.diagnostics.boundary_links`).
    """
    inside = np.zeros(network.n_nodes, dtype=bool)
    inside[np.asarray(members, dtype=np.int64)] = True
    table = network.link_table
    src, dst = network.link_ends
    crossing = inside[src] != inside[dst]
    out = table.loc[crossing, ["source", "target", "weight"]].copy()
    out["inside"] = np.where(
        inside[src[crossing]], out["source"].to_numpy(), out["target"].to_numpy()
    )
    rest = [c for c in table.columns if c not in ("source", "target", "weight")]
    return pd.concat([out, table.loc[crossing, rest]], axis=1).reset_index(drop=True)


def _connected(network: Network, members: list[int]) -> bool:
    """Whether ``members`` induce a connected subgraph (search over their rows only)."""
    inside = set(members)
    seen = {members[0]}
    stack = [members[0]]
    while stack:
        cols, _ = _row(network, stack.pop())
        for v in cols.tolist():
            if v in inside and v not in seen:
                seen.add(v)
                stack.append(v)
    return len(seen) == len(inside)


def _sweep(
    network: Network,
    push: PushResult,
    seeds: list[int],
    size_limit: float | None,
    total_volume: float,
) -> pd.DataFrame:
    """Prefix figures of the sweep over ``p/d`` (only the support is visited)."""
    support = [u for u, value in push.p.items() if value > 0]
    for u in seeds:  # a seed with too little mass to push still leads its zone
        if u not in push.p:
            support.append(u)
    order = sorted(support, key=lambda u: (-push.p.get(u, 0.0) / push.degree[u], u))
    inside: set[int] = set()
    missing = set(seeds)
    sizes = network.sizes
    volume = cut = size = mass = 0.0
    rows = []
    for u in order:
        cols, weights = _row(network, u)
        to_inside = sum(
            w for v, w in zip(cols.tolist(), weights.tolist(), strict=True) if v in inside
        )
        du = push.degree[u]
        cut += du - 2.0 * to_inside
        volume += du
        size += 1.0 if sizes is None else float(sizes[u])
        mass += push.p.get(u, 0.0)
        inside.add(u)
        missing.discard(u)
        small = min(volume, total_volume - volume)
        conductance = max(cut, 0.0) / small if small > 0 else math.inf
        ok = not missing and (size_limit is None or size <= size_limit)
        excess = mass - volume / total_volume
        rows.append(
            (network.node_ids[u], size, volume, max(cut, 0.0), conductance, ok, not missing, excess)
        )
    columns = [
        "node",
        "size",
        "volume",
        "boundary_weight",
        "conductance",
        "eligible",
        "seeded",
        "excess",
    ]
    frame = pd.DataFrame(rows, columns=columns)
    for column in ("volume", "boundary_weight"):  # in the units given (Network.weight_exponent)
        frame[column] = network.user_units(frame[column].to_numpy())
    return frame
