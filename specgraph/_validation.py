"""Parameter checks shared by the whole package, declared as data.

Each checked argument is given a list of *constraints*; a value is accepted
when one of them accepts it, and refused otherwise with one message shape::

    <parameter> must be <expected>; got <received>.

The refusal is a :class:`~specgraph.exceptions.ParameterError` that carries
``parameter``, ``expected`` and ``received`` as attributes, so that the command
line can put its own option names in front of the same words (the library never
speaks in option names). The design follows scikit-learn's
``utils/_param_validation`` (``_parameter_constraints``, ``validate_params``),
lighter: constraints are small frozen objects, :func:`check_param` checks and
converts one value, and :func:`validate_params` checks a whole call from a
table written beside the function.

Examples
--------
>>> check_param(3, "k", [Interval(int, 1, None)])
3
>>> check_param("zero", "k", [Interval(int, 1, None), Options({"auto"})])
Traceback (most recent call last):
...
specgraph.exceptions.ParameterError: k must be an integer >= 1 or 'auto'; got 'zero'.
"""

from __future__ import annotations

import functools
import inspect
import math
import numbers
from collections.abc import Callable, Collection, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, Literal, TypeVar

import numpy as np

from .exceptions import ParameterError

__all__ = [
    "Boolean",
    "Constraint",
    "InstanceOf",
    "Interval",
    "NoneOk",
    "Options",
    "RandomState",
    "check_bool",
    "check_choice",
    "check_int",
    "check_param",
    "check_positive_float",
    "check_rng",
    "parameter_error",
    "validate_params",
]

F = TypeVar("F", bound=Callable[..., Any])


def parameter_error(name: str, expected: str, received: Any) -> ParameterError:
    """The one refusal: ``<name> must be <expected>; got <received!r>.``"""
    return ParameterError(
        f"{name} must be {expected}; got {received!r}.",
        parameter=name,
        expected=expected,
        received=received,
    )


class Constraint:
    """What one argument may be: :meth:`accepts`, :meth:`convert`, :attr:`description`."""

    description: str = ""

    def accepts(self, value: Any) -> bool:  # pragma: no cover - abstract
        raise NotImplementedError

    def convert(self, value: Any) -> Any:
        return value


def _is_real(value: Any) -> bool:
    return isinstance(value, numbers.Real) and not isinstance(value, bool | np.bool_)


@dataclass(frozen=True)
class Interval(Constraint):
    """An integer or a finite real number within bounds (``None``: unbounded).

    ``closed`` says which ends belong: ``'both'`` (default), ``'left'``,
    ``'right'`` or ``'neither'``. Booleans are never numbers here.
    """

    kind: type
    low: float | None
    high: float | None
    closed: Literal["both", "left", "right", "neither"] = "both"

    def accepts(self, value: Any) -> bool:
        if self.kind is int:
            if isinstance(value, bool | np.bool_) or not isinstance(value, numbers.Integral):
                return False
        elif not _is_real(value) or not math.isfinite(float(value)):
            return False
        low_ok = self.low is None or (
            value >= self.low if self.closed in ("both", "left") else value > self.low
        )
        high_ok = self.high is None or (
            value <= self.high if self.closed in ("both", "right") else value < self.high
        )
        return bool(low_ok and high_ok)

    def convert(self, value: Any) -> Any:
        return int(value) if self.kind is int else float(value)

    @property
    def description(self) -> str:  # type: ignore[override]
        noun = "an integer" if self.kind is int else "a finite number"
        low_sign = ">=" if self.closed in ("both", "left") else ">"
        high_sign = "<=" if self.closed in ("both", "right") else "<"
        if self.low is not None and self.high is not None:
            if self.closed == "both":
                return f"{noun} in [{self.low:g}, {self.high:g}]"
            left = "[" if self.closed == "left" else "("
            right = "]" if self.closed == "right" else ")"
            return f"{noun} in {left}{self.low:g}, {self.high:g}{right}"
        if self.low is not None:
            return f"{noun} {low_sign} {self.low:g}"
        if self.high is not None:
            return f"{noun} {high_sign} {self.high:g}"
        return noun


@dataclass(frozen=True)
class Options(Constraint):
    """One of a set of strings."""

    values: Collection[str]

    def accepts(self, value: Any) -> bool:
        return isinstance(value, str) and value in self.values

    @property
    def description(self) -> str:  # type: ignore[override]
        names = sorted(self.values)
        return "one of " + ", ".join(repr(v) for v in names) if len(names) > 1 else repr(names[0])


@dataclass(frozen=True)
class Boolean(Constraint):
    """``True`` or ``False`` (numpy booleans too); never 0, 1 or a string."""

    description: str = "True or False"

    def accepts(self, value: Any) -> bool:
        return isinstance(value, bool | np.bool_)

    def convert(self, value: Any) -> bool:
        return bool(value)


@dataclass(frozen=True)
class NoneOk(Constraint):
    """``None`` (an option left unset)."""

    description: str = "None"

    def accepts(self, value: Any) -> bool:
        return value is None


@dataclass(frozen=True)
class InstanceOf(Constraint):
    """An instance of one of ``types``, described as ``description``."""

    types: tuple[type, ...]
    description: str = "an object of the right type"

    def accepts(self, value: Any) -> bool:
        return isinstance(value, self.types) and not (
            bool not in self.types and isinstance(value, bool)
        )


@dataclass(frozen=True)
class RandomState(Constraint):
    """A seed for :func:`numpy.random.default_rng` (SPEC 7), converted to a Generator."""

    description: str = "None, an int seed or a numpy.random.Generator"

    def accepts(self, value: Any) -> bool:
        if isinstance(value, bool | np.bool_):
            return False
        try:
            np.random.default_rng(value)
        except (TypeError, ValueError):
            return False
        return True

    def convert(self, value: Any) -> np.random.Generator:
        return np.random.default_rng(value)


def _describe(constraints: Sequence[Constraint]) -> str:
    words = [c.description for c in constraints]
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " or " + words[-1]


def check_param(value: Any, name: str, constraints: Sequence[Constraint]) -> Any:
    """Return ``value`` converted by the first constraint that accepts it.

    Raises
    ------
    ParameterError
        When no constraint accepts ``value``; the message names ``name``, what
        the constraints accept and what was received.
    """
    for constraint in constraints:
        if constraint.accepts(value):
            return constraint.convert(value)
    raise parameter_error(name, _describe(constraints), value)


def validate_params(
    constraints: Mapping[str, Sequence[Constraint]],
) -> Callable[[F], F]:
    """Check a function's arguments against a table before it runs.

    Parameters
    ----------
    constraints : mapping of str to list of Constraint
        For each checked parameter, what it may be. Every key must be a
        parameter of the decorated function (checked once, at decoration).

    Notes
    -----
    The table is data beside the function, as in scikit-learn's
    ``validate_params``: the checks are not repeated in the body, and every
    refusal has the same shape. Conversion (an int from a numpy integer, a
    Generator from a seed) is left to :func:`check_param` in the body where the
    converted value is needed.
    """

    def decorate(function: F) -> F:
        signature = inspect.signature(function)
        unknown = set(constraints) - set(signature.parameters)
        if unknown:  # a programming error in the table, not a user's
            raise TypeError(f"{function.__qualname__} has no parameters {sorted(unknown)}")

        @functools.wraps(function)
        def checked(*args: Any, **kwargs: Any) -> Any:
            bound = signature.bind_partial(*args, **kwargs)
            for name, value in bound.arguments.items():
                if name in constraints:
                    check_param(value, name, constraints[name])
            return function(*args, **kwargs)

        return checked  # type: ignore[return-value]

    return decorate


# ------------------------------------------------- the common cases, by name
def check_int(
    value: Any, name: str, *, minimum: int | None = None, maximum: int | None = None
) -> int:
    """Return ``value`` as an int, or raise a :class:`ParameterError` naming ``name``."""
    if not Interval(int, None, None).accepts(value):
        raise parameter_error(name, "an integer", value)
    value = int(value)
    if minimum is not None and value < minimum:
        raise parameter_error(name, f"an integer >= {minimum}", value)
    if maximum is not None and value > maximum:
        raise parameter_error(name, f"an integer <= {maximum}", value)
    return value


def check_positive_float(value: Any, name: str, *, allow_zero: bool = False) -> float:
    """Return ``value`` as a finite float > 0 (or >= 0), else raise naming ``name``."""
    if not _is_real(value):
        raise parameter_error(name, "a real number", value)
    bound = Interval(float, 0.0, None, closed="both" if allow_zero else "neither")
    if not bound.accepts(value):
        expected = "a finite number >= 0" if allow_zero else "a finite number > 0"
        raise parameter_error(name, expected, float(value))
    return float(value)


def check_choice(value: Any, name: str, choices: Collection[str]) -> str:
    """Return ``value`` if it is one of ``choices``, else raise naming ``name``."""
    if value not in choices:
        options = ", ".join(repr(c) for c in sorted(choices))
        raise parameter_error(name, f"one of {options}", value)
    return str(value)


def check_bool(value: Any, name: str) -> bool:
    """Return ``value`` as a bool if it is ``True`` or ``False``, else raise naming ``name``."""
    return bool(check_param(value, name, [Boolean()]))


def check_rng(rng: Any) -> np.random.Generator:
    """Turn ``rng`` into a :class:`numpy.random.Generator` (SPEC 7).

    Accepts ``None`` (fresh entropy), an int seed, a ``SeedSequence`` or a
    ``Generator``; anything else is refused by name.
    """
    try:
        return np.random.default_rng(rng)
    except (TypeError, ValueError) as exc:
        raise parameter_error("rng", RandomState().description, rng) from exc
