"""Zone assignment: embedding, assignment, constraints, refinement, and the :class:`Zoning` result.

The stages, one module each: :mod:`._trees` (dangling trees), :mod:`._count`
(zone count), :mod:`._dominant` (the spread of the affinities and the
links that dwarf the rest), :mod:`._embedding` and :mod:`._assign` (from eigenvectors to
zones), :mod:`._constraints` (the user's rules), :mod:`._refine` (boundary
moves), and :mod:`._zoning`, which runs them in order (:func:`find_zones`);
:mod:`._coarsen` and :mod:`._levels` are the multilevel path (coarsen, zone the
coarsest network, refine at every level), which :mod:`._rezone` also runs as
V-cycles on a given zoning (:func:`refine_zoning`);
:mod:`._trunk` runs them beside trunk links (feeding mains outside every zone);
:mod:`._fragments` sets aside stray components too small to be zones.
"""

from ._allocate import allocate_zones
from ._assign import (
    ASSIGN_METHODS,
    KMEANS_RESTARTS,
    AssignmentChoice,
    Bisection,
    BisectionCut,
    bisection_labels,
    choose_assignment,
    kmeans_labels,
    qr_concentration,
    qr_labels,
    recursive_bisection,
)
from ._audit import constraint_violations
from ._balance import BALANCE_ROUNDS, Balance, balance_sizes
from ._constraints import enforce_constraints
from ._contract import Contraction, contract_links
from ._count import ZoneCount, choose_zone_count, default_candidates, parse_zone_spec
from ._dominant import (
    DOMINANT_GAP,
    DOMINANT_TREATMENTS,
    WEIGHT_RANGE_WARN,
    DominantLinks,
    coupler_trouble,
    find_dominant_links,
    weight_range,
)
from ._embedding import normalized_rows
from ._fragments import FRAGMENT_TREATMENTS, ROLE_FRAGMENTS, fragment_limit, fragment_table
from ._levels import (
    COARSEST_PER_ZONE,
    CYCLE_RTOL,
    MAX_CYCLES,
    MULTILEVEL_MIN_ZONES,
)
from ._local import (
    DEFAULT_LOCAL_ALPHA,
    LocalZone,
    PushResult,
    acl_sweep_bound,
    local_zone,
    personalized_push,
)
from ._operator import OperatorChoice, choose_operator
from ._refine import Refinement, normalized_cut, refine_boundary
from ._rezone import refine_zoning
from ._rules import ResolvedConstraints, ZoneConstraints
from ._sweep import SweepCut, sweep_cut
from ._trees import TreeSplit, attach_trees, core_and_trees, trees_worth_stripping
from ._work import Enforcement
from ._zoning import (
    ASSIGNMENTS,
    NORMALIZED_LIKE,
    OPERATOR_KINDS,
    TREE_TREATMENTS,
    ZONING_CONSTRAINTS,
    ComponentSolve,
    Zoning,
    find_zones,
    number_by_size,
)

__all__ = [
    "ASSIGNMENTS",
    "ASSIGN_METHODS",
    "BALANCE_ROUNDS",
    "COARSEST_PER_ZONE",
    "CYCLE_RTOL",
    "DEFAULT_LOCAL_ALPHA",
    "DOMINANT_GAP",
    "DOMINANT_TREATMENTS",
    "FRAGMENT_TREATMENTS",
    "KMEANS_RESTARTS",
    "MAX_CYCLES",
    "MULTILEVEL_MIN_ZONES",
    "NORMALIZED_LIKE",
    "OPERATOR_KINDS",
    "ROLE_FRAGMENTS",
    "TREE_TREATMENTS",
    "WEIGHT_RANGE_WARN",
    "ZONING_CONSTRAINTS",
    "AssignmentChoice",
    "Balance",
    "Bisection",
    "BisectionCut",
    "ComponentSolve",
    "Contraction",
    "DominantLinks",
    "Enforcement",
    "LocalZone",
    "OperatorChoice",
    "PushResult",
    "Refinement",
    "ResolvedConstraints",
    "SweepCut",
    "TreeSplit",
    "ZoneConstraints",
    "ZoneCount",
    "Zoning",
    "acl_sweep_bound",
    "allocate_zones",
    "attach_trees",
    "balance_sizes",
    "bisection_labels",
    "choose_assignment",
    "choose_operator",
    "choose_zone_count",
    "constraint_violations",
    "contract_links",
    "core_and_trees",
    "coupler_trouble",
    "default_candidates",
    "enforce_constraints",
    "find_dominant_links",
    "find_zones",
    "fragment_limit",
    "fragment_table",
    "kmeans_labels",
    "local_zone",
    "normalized_cut",
    "normalized_rows",
    "number_by_size",
    "parse_zone_spec",
    "personalized_push",
    "qr_concentration",
    "qr_labels",
    "recursive_bisection",
    "refine_boundary",
    "refine_zoning",
    "sweep_cut",
    "trees_worth_stripping",
    "weight_range",
]
