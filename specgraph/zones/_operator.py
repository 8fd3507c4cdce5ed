"""The operators zones can be embedded with, and the ``'auto'`` rule that picks one."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from .._validation import check_choice

__all__ = ["NORMALIZED_LIKE", "OPERATOR_KINDS", "OperatorChoice", "choose_operator"]

#: Operators ``find_zones`` can embed with (besides ``"auto"``).
OPERATOR_KINDS = (
    "normalized",
    "random_walk",
    "combinatorial",
    "regularized",
    "bethe_hessian",
    "directed",
)
#: Operators whose eigenvectors embed like the normalized Laplacian's (the
#: directed Laplacian is the normalized Laplacian of the symmetrized
#: stationary flow, :func:`specgraph.laplacian`).
NORMALIZED_LIKE = ("normalized", "random_walk", "directed")


@dataclass(frozen=True)
class OperatorChoice:
    """The operator that ``'auto'`` (or the user) picked, and why.

    Attributes
    ----------
    kind : str
        One of :data:`OPERATOR_KINDS`.
    reason : str
        One sentence, as recorded in ``Zoning.decisions["operator"]``.
    """

    kind: str
    reason: str

    def as_decision(self) -> dict[str, Any]:
        """The ``{"choice": ..., "reason": ...}`` entry of a run's decisions."""
        return {"choice": self.kind, "reason": self.reason}


def choose_operator(
    operator: str, *, directed: bool, trees_attached: bool | None = None
) -> OperatorChoice:
    """Resolve ``operator='auto'``: the rule of :func:`find_zones` (and ``specgraph spectrum``).

    Parameters
    ----------
    operator : {'auto', 'normalized', 'random_walk', 'combinatorial', \
'regularized', 'bethe_hessian', 'directed'}
        The operator asked for; anything but ``'auto'`` is kept as asked.
    directed : bool
        Whether the network was read with link directions
        (:attr:`Network.directed`): ``'auto'`` is then ``'directed'``.
    trees_attached : bool, optional
        Whether dangling trees were attached before the solve (the reason
        then says why the normalized Laplacian does not localize on
        branches); None when trees play no part (a bare spectrum).

    Returns
    -------
    OperatorChoice

    Raises
    ------
    ParameterError
        ``operator`` is not one of the choices.

    Examples
    --------
    >>> choose_operator("auto", directed=False).kind
    'normalized'
    >>> choose_operator("auto", directed=True).kind
    'directed'
    """
    check_choice(operator, "operator", ("auto", *OPERATOR_KINDS))
    if operator != "auto":
        return OperatorChoice(operator, "asked")
    if directed:
        reason = (
            "the directed Laplacian (Chung 2005): the network was read with link directions, "
            "so zones are judged by the stationary flow of a random walk that follows them"
        )
        return OperatorChoice("directed", reason)
    reason = (
        "the normalized Laplacian: its small eigenvalues bound the conductance of the best "
        "zones (Cheeger)"
    )
    if trees_attached is not None:
        reason += "; " + (
            "with dangling trees attached it no longer localizes on branches"
            if trees_attached
            else "the network has few dangling trees, so it does not localize on branches"
        )
    return OperatorChoice("normalized", reason)
