"""The one exception hierarchy of specgraph.

Every error that specgraph raises on purpose derives from :class:`SpecgraphError`,
so a pipeline can catch them all at once, and also from the built-in class that
matches its meaning (``ValueError`` for bad input, ``RuntimeError`` for a solve
that did not converge), so generic handlers keep working.

Messages follow one shape: what was wrong (the parameter, file, line and column),
what was expected, what was received, and what to do.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

__all__ = [
    "ConstraintError",
    "ConvergenceError",
    "InputError",
    "OutputError",
    "ParameterError",
    "ResourceError",
    "SpecgraphError",
]


class SpecgraphError(Exception):
    """Base class of every error raised on purpose by specgraph."""


class ParameterError(SpecgraphError, ValueError):
    """A function or command-line parameter has a value outside its domain.

    Parameters
    ----------
    message : str
        The whole sentence: ``<parameter> must be <expected>; got <received>.``
    parameter : str, optional
        The library's name of the parameter (the command line maps it to its
        option name).
    expected : str, optional
        What the parameter accepts, in words.
    received : object, optional
        The value that was refused.
    """

    def __init__(
        self,
        message: str,
        *,
        parameter: str | None = None,
        expected: str | None = None,
        received: Any = None,
    ) -> None:
        super().__init__(message)
        self.parameter = parameter
        self.expected = expected
        self.received = received


class ConstraintError(SpecgraphError, ValueError):
    """A zone constraint cannot be met; the message names the constraint and why.

    Raised, for example, when one node is bigger than ``max_size``, when a
    connected component holds no source although every zone must hold one, or
    when nodes fixed to one zone cannot be joined without crossing another.
    The command line maps it to exit code 2 (bad input).
    """


class InputError(SpecgraphError, ValueError):
    """A data file or in-memory table cannot be turned into a network.

    Parameters
    ----------
    message : str
        What is wrong and what to do about it.
    path : str or Path, optional
        The file that holds the problem.
    line : int, optional
        1-based physical line in the file (the header is line 1).
    column : str, optional
        The column name.
    column_number : int, optional
        1-based position of the column in the header.
    """

    def __init__(
        self,
        message: str,
        *,
        path: str | Path | None = None,
        line: int | None = None,
        column: str | None = None,
        column_number: int | None = None,
    ) -> None:
        self.path = None if path is None else str(path)
        self.line = line
        self.column = column
        self.column_number = column_number
        self.reason = message
        super().__init__(self._format())

    def _format(self) -> str:
        where = []
        if self.path is not None:
            where.append(self.path)
        if self.line is not None:
            where.append(f"line {self.line}")
        if self.column is not None:
            position = f" (column {self.column_number})" if self.column_number else ""
            where.append(f"column '{self.column}'{position}")
        prefix = ", ".join(where)
        return f"{prefix}: {self.reason}" if prefix else self.reason


class OutputError(SpecgraphError, OSError):
    """Results cannot be written where they were asked to go."""


class ConvergenceError(SpecgraphError, RuntimeError):
    """An eigen-solve stopped before every requested pair met its tolerance.

    The pairs computed so far are kept in :attr:`partial` (an
    :class:`~specgraph.eigen.EigenResult` with ``converged=False``), as scipy's
    ARPACK wrapper keeps them in ``ArpackNoConvergence``. Each partial pair is a
    valid Ritz pair whose residual is reported; none is presented as converged.

    Parameters
    ----------
    message : str
        What failed, with the worst residual and the tolerance.
    partial : EigenResult
        The pairs computed when the solver stopped.
    """

    def __init__(self, message: str, *, partial: Any) -> None:
        super().__init__(message)
        self.partial = partial


class ResourceError(SpecgraphError, MemoryError):
    """A run would need more memory than the machine has; refused before it starts.

    The message gives the estimate, what is available and what would fit
    (a smaller part of the network, or a machine with more memory).
    """
