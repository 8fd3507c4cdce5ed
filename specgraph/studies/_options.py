"""The zoning options a study re-runs: one typed, frozen, validated object.

A study (:func:`~specgraph.studies.stability`, later batch drivers) calls
:func:`~specgraph.find_zones` many times with the same options and its own
seeds. :class:`ZoningOptions` holds those options once: every field is a
keyword option of :func:`~specgraph.find_zones` with its default, checked
when the object is made, so that a bad value is refused before the first
of many zonings starts. The network, the zone count and ``rng`` are not
options: the study sets them for each run.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, fields
from typing import Any

from .._validation import (
    InstanceOf,
    Options,
    check_param,
    check_params,
    parameter_error,
)
from ..eigen import DEFAULT_TOL
from ..walks import DEFAULT_DAMPING
from ..zones import ZONING_CONSTRAINTS, ZoneConstraints

__all__ = ["RESERVED_OPTIONS", "ZONING_CONSTRAINTS", "ZoningOptions"]

#: ``find_zones`` arguments a study sets itself for every run; a mapping of
#: options may not hold them.
RESERVED_OPTIONS = ("network", "zones", "rng")

#: What a study's options argument may be.
_MAPPING = InstanceOf((Mapping,), "a ZoningOptions or a dict of find_zones options")


@dataclass(frozen=True)
class ZoningOptions:
    """Keyword options of :func:`~specgraph.find_zones` shared by every run of a study.

    Each field has the meaning and the default of the :func:`~specgraph.find_zones`
    option of the same name; values are checked as :func:`~specgraph.find_zones`
    checks them (same messages), when the object is made. Checks that need
    the network (``operator='directed'`` on an undirected network, the
    constraints' node ids) are left to :func:`~specgraph.find_zones`.

    Attributes
    ----------
    operator : {'auto', 'normalized', 'random_walk', 'combinatorial', 'regularized', \
'bethe_hessian', 'directed'}, default='auto'
    assign : {'auto', 'kmeans', 'qr', 'bisection', 'kmeans_rw'}, default='auto'
    trees : {'auto', 'attach', 'keep'}, default='auto'
    dominant : {'auto', 'contract', 'ignore'}, default='auto'
    fragments : {'set_aside', 'zone'}, default='set_aside'
    constraints : ZoneConstraints, optional
    refine : bool, default=True
    eigen_method : {'auto', 'dense', 'lanczos', 'lanczos_flip', 'multilevel'}, default='auto'
    tol : float, default=1e-6
    maxiter : int, optional
    damping : float, default=0.85
    progress : callable, optional
        Called with the name of each stage of every run.

    Examples
    --------
    >>> options = ZoningOptions(assign="qr", refine=False)
    >>> options.keywords()["assign"], options.keywords()["refine"]
    ('qr', False)
    >>> ZoningOptions.from_mapping({"assign": "qr", "refine": False}) == options
    True
    """

    operator: str = "auto"
    assign: str = "auto"
    trees: str = "auto"
    dominant: str = "auto"
    fragments: str = "set_aside"
    constraints: ZoneConstraints | None = None
    refine: bool = True
    eigen_method: str = "auto"
    tol: float = DEFAULT_TOL
    maxiter: int | None = None
    damping: float = DEFAULT_DAMPING
    progress: Callable[[str], None] | None = None

    def __post_init__(self) -> None:
        # The values are checked, not converted: find_zones receives them as given.
        check_params({name: getattr(self, name) for name in self.names()}, ZONING_CONSTRAINTS)

    @classmethod
    def names(cls) -> tuple[str, ...]:
        """The option names, in field order."""
        return tuple(f.name for f in fields(cls))

    @classmethod
    def from_mapping(
        cls,
        options: ZoningOptions | Mapping[str, Any] | None,
        *,
        argument: str = "options",
        caller: str = "the study",
    ) -> ZoningOptions:
        """Options from ``None``, a :class:`ZoningOptions` or a mapping of option names.

        Parameters
        ----------
        options : ZoningOptions, mapping or None
            ``None`` gives the defaults.
        argument : str, default="options"
            Name of the caller's argument, for messages.
        caller : str, default="the study"
            Name of the calling study, for messages.

        Raises
        ------
        ParameterError
            For a mapping key that is reserved (:data:`RESERVED_OPTIONS`) or
            not an option, or a value outside its domain.
        """
        if options is None:
            return cls()
        if isinstance(options, ZoningOptions):
            return options
        check_param(options, argument, [_MAPPING])
        allowed = sorted(cls.names())
        for key in options:
            if key in RESERVED_OPTIONS:
                raise parameter_error(
                    argument,
                    f"{key!r} ({caller} sets it itself)",
                    options,
                    shown=f"{argument} with keys {sorted(options)}",
                    verb="not hold",
                )
            check_param(key, f"{argument} keys", [Options(allowed, "find_zones options")])
        return cls(**options)

    def keywords(self) -> dict[str, Any]:
        """The options as keyword arguments of :func:`~specgraph.find_zones`."""
        return {name: getattr(self, name) for name in self.names()}
