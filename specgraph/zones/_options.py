"""The options of :func:`~specgraph.zones.find_zones`: what each accepts, checked once (step 1)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .._validation import (
    OPEN_UNIT,
    TOLERANCE,
    Boolean,
    Constraint,
    InstanceOf,
    Interval,
    IsCallable,
    NoneOk,
    Options,
    check_int,
    check_params,
    check_rng,
    parameter_error,
)
from ..eigen import METHODS
from ..network import Network
from ._count import parse_zone_spec
from ._dominant import DOMINANT_TREATMENTS
from ._fragments import FRAGMENT_TREATMENTS
from ._operator import OPERATOR_KINDS
from ._rules import ZoneConstraints
from ._stages import _ASSIGNERS

__all__ = [
    "ASSIGNMENTS",
    "TREE_TREATMENTS",
    "ZONING_CONSTRAINTS",
    "ZoningOptions",
    "check_spec",
    "checked_options",
]

#: Assignment methods (besides ``"auto"``): the dispatch table's, in its
#: order, then the multilevel path (:mod:`._levels`).
ASSIGNMENTS = (*_ASSIGNERS, "multilevel")
#: Treatments of dangling trees (besides ``"auto"``).
TREE_TREATMENTS = ("attach", "keep")

#: What each keyword option of :func:`find_zones` accepts, as a table (the
#: declarative checks of :mod:`specgraph._validation`); studies that re-run
#: zoning check their options against the same table.
ZONING_CONSTRAINTS: dict[str, list[Constraint]] = {
    "operator": [Options(("auto", *OPERATOR_KINDS))],
    "assign": [Options(("auto", *ASSIGNMENTS))],
    "trees": [Options(("auto", *TREE_TREATMENTS))],
    "dominant": [Options(DOMINANT_TREATMENTS)],
    "fragments": [Options(FRAGMENT_TREATMENTS)],
    "constraints": [InstanceOf((ZoneConstraints,), "a ZoneConstraints"), NoneOk()],
    "refine": [Boolean()],
    "eigen_method": [Options(METHODS)],
    "tol": [TOLERANCE],
    "maxiter": [Interval(int, 1, None), NoneOk()],
    "damping": [OPEN_UNIT],
    "progress": [IsCallable(), NoneOk()],
}


def check_spec(zones: Any, n: int) -> int | str | range:
    """The zone count, ``'auto'`` or a range of counts (capped at ``n``), checked."""
    if isinstance(zones, str):
        spec = parse_zone_spec(zones)
    elif isinstance(zones, range):
        spec = zones
        if len(spec) == 0 or spec.step != 1 or spec.start < 2:
            raise parameter_error("zones", "a range of consecutive counts from 2 up", zones)
    else:
        spec = check_int(zones, "zones", minimum=1, maximum=max(n, 1))
    if isinstance(spec, range) and spec.start > n:
        raise parameter_error("zones", f"a range starting at most at n_nodes={n}", zones)
    if isinstance(spec, range):
        spec = range(spec.start, min(spec.stop, n + 1))
    return spec


@dataclass(frozen=True)
class ZoningOptions:
    """The options of one :func:`find_zones` call, checked (step 1)."""

    spec: int | str | range
    operator: str
    assign: str
    trees: str
    dominant: str
    fragments: str
    refine: bool
    eigen_method: str
    tol: float
    maxiter: int | None
    damping: float
    rng: np.random.Generator

    def record(self, constraints: dict[str, Any], kind: str) -> dict[str, Any]:
        """The :attr:`Zoning.parameters` record: the options as given, the rules as read."""
        spec = self.spec
        return {
            "zones": spec if not isinstance(spec, range) else f"{spec.start}:{spec.stop - 1}",
            "operator": self.operator,
            "assign": self.assign,
            "trees": self.trees,
            "dominant": self.dominant,
            "fragments": self.fragments,
            "refine": self.refine,
            "constraints": constraints,
            "eigen_method": self.eigen_method,
            "tol": self.tol,
            "maxiter": self.maxiter,
            **({"damping": self.damping} if kind == "directed" else {}),
        }


def checked_options(network: Network, zones: Any, *, rng: Any, **given: Any) -> ZoningOptions:
    """Step 1 of :func:`find_zones`: every option checked against :data:`ZONING_CONSTRAINTS`."""
    if network.n_nodes == 0:
        raise parameter_error("network", "a network of at least one node", network)
    if network.n_nodes > 1 and network.n_links == 0:  # self-loops are dropped on reading
        raise parameter_error(
            "network",
            "a network with at least one link between distinct nodes (with none, no two "
            "nodes share a link and there is nothing to zone)",
            network,
            shown=f"{network.n_nodes:,} nodes and no such link",
        )
    spec = check_spec(zones, network.n_nodes)
    checked = check_params(given, ZONING_CONSTRAINTS)
    if checked["operator"] == "directed" and not network.directed:
        raise parameter_error(
            "network",
            "a directed network for operator='directed' (one read with directed=True, which "
            "keeps its arcs)",
            network,
            shown="an undirected network",
        )
    return ZoningOptions(
        spec,
        checked["operator"],
        checked["assign"],
        checked["trees"],
        checked["dominant"],
        checked["fragments"],
        checked["refine"],
        checked["eigen_method"],
        checked["tol"],
        checked["maxiter"],
        checked["damping"],
        check_rng(rng),
    )
