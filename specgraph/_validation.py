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
converts one value, :func:`check_params` the values of a table (the fields of
an options object), and :func:`validate_params` checks a whole call from a
table written beside the function.

The constraints: numbers in an :class:`Interval` (:data:`POSITIVE`,
:data:`NON_NEGATIVE`, :data:`OPEN_UNIT` for a probability, :data:`UNIT` for a
share), :class:`Options` (one of some strings), :class:`Boolean`,
:class:`NoneOk`, :class:`InstanceOf`, :class:`HasMethods`, :class:`IsCallable`, :class:`Text` (a
non-empty name), :class:`RandomState` (a seed), :class:`NodeIds` (a collection
of node ids), :class:`Array` (an array of a kind, shape and lower bound) and
:class:`SquareMatrix`. A check that depends on the data (a zone count above the
node count, an id that is not a node) is written where the data is known, with
:func:`parameter_error`, so that its message has the same shape and
attributes.

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
from collections import Counter
from collections.abc import Callable, Collection, Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, Literal, TypeVar

import numpy as np
import scipy.sparse as sp

from .exceptions import ParameterError

__all__ = [
    "NON_NEGATIVE",
    "OPEN_UNIT",
    "POSITIVE",
    "REFUSED",
    "TOLERANCE",
    "TOL_FLOOR",
    "UNIT",
    "Array",
    "Boolean",
    "Constraint",
    "HasMethods",
    "InstanceOf",
    "Interval",
    "IsCallable",
    "NodeIds",
    "NoneOk",
    "Options",
    "RandomState",
    "SquareMatrix",
    "Text",
    "Tolerance",
    "check_bool",
    "check_choice",
    "check_int",
    "check_param",
    "check_params",
    "check_positive_float",
    "check_rng",
    "check_tol",
    "parameter_error",
    "validate_params",
]

F = TypeVar("F", bound=Callable[..., Any])


def parameter_error(
    name: str, expected: str, received: Any, *, shown: str | None = None, verb: str = "be"
) -> ParameterError:
    """The one refusal: ``<name> must be <expected>; got <shown>.``

    Parameters
    ----------
    name : str
        The library's name of the argument (never a command-line option: the
        command line puts its option names in front of the same words).
    expected : str
        What the argument accepts, in words.
    received : object
        The refused value, kept as :attr:`ParameterError.received`.
    shown : str, optional
        How the received value is written in the message; ``repr(received)``
        by default. Give it where the value itself would say little or too
        much: the shape of an array, the type of an object, a count of
        unknown ids.
    verb : str, default='be'
        The verb after "must", where "be" does not read: ``'hold'`` (an
        array's contents), ``'have'``, ``'not hold'``. The shape of the
        sentence stays the same.

    Examples
    --------
    >>> str(parameter_error("k", "an integer >= 1", 0))
    'k must be an integer >= 1; got 0.'
    >>> str(parameter_error("labels", "3 integers", [0, 1], shown="shape (2,)"))
    'labels must be 3 integers; got shape (2,).'
    """
    text = repr(received) if shown is None else shown
    return ParameterError(
        f"{name} must {verb} {expected}; got {text}.",
        parameter=name,
        expected=expected,
        received=received,
    )


class Constraint:
    """What one argument may be: :meth:`accepts`, :meth:`convert`, :attr:`description`.

    :meth:`shown` may say how a refused value is written in the message
    (``None``: its ``repr``).
    """

    description: str = ""

    def accepts(self, value: Any) -> bool:  # pragma: no cover - abstract
        raise NotImplementedError

    def convert(self, value: Any) -> Any:
        return value

    def parse(self, value: Any) -> Any:
        """``value`` converted, or :data:`REFUSED` (one look at the value)."""
        return self.convert(value) if self.accepts(value) else REFUSED

    def shown(self, value: Any) -> str | None:
        return None


#: What :meth:`Constraint.parse` returns for a value it refuses.
REFUSED: Any = object()


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

    def shown(self, value: Any) -> str | None:
        # A real number refused where a float is wanted is shown as that float.
        return repr(float(value)) if self.kind is float and _is_real(value) else None

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
    """One of a set of strings; ``noun`` names them as a group (``"find_zones options"``)."""

    values: Collection[str]
    noun: str = ""

    def accepts(self, value: Any) -> bool:
        return isinstance(value, str) and value in self.values

    @property
    def description(self) -> str:  # type: ignore[override]
        names = sorted(self.values)
        listed = ", ".join(repr(v) for v in names)
        if self.noun:
            return f"{self.noun} ({listed})"
        return "one of " + listed if len(names) > 1 else repr(names[0])


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
    by_type: bool = False  # write a refused value as its type's name, not its repr

    def accepts(self, value: Any) -> bool:
        return isinstance(value, self.types) and not (
            bool not in self.types and isinstance(value, bool)
        )

    def shown(self, value: Any) -> str | None:
        return type(value).__name__ if self.by_type else None


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


@dataclass(frozen=True)
class HasMethods(Constraint):
    """An object with the named methods (duck typing: a graph from networkx, say)."""

    methods: tuple[str, ...]
    description: str = "an object with the right methods"

    def accepts(self, value: Any) -> bool:
        return all(callable(getattr(value, name, None)) for name in self.methods)

    def shown(self, value: Any) -> str | None:
        return type(value).__name__


@dataclass(frozen=True)
class IsCallable(Constraint):
    """Anything callable (a progress callback, say)."""

    description: str = "callable"

    def accepts(self, value: Any) -> bool:
        return callable(value)


@dataclass(frozen=True)
class Text(Constraint):
    """A non-empty string: a name (an attribute, a column)."""

    description: str = "a non-empty string"

    def accepts(self, value: Any) -> bool:
        return isinstance(value, str) and value != ""


@dataclass(frozen=True)
class NodeIds(Constraint):
    """Node ids: a collection of ids (never one string), converted to a tuple of str.

    Ids are compared as text, as everywhere in specgraph. ``single`` also
    takes one id (a string or an integer) as a collection of one;
    ``minimum`` is the fewest ids; ``distinct`` refuses an id given twice.
    Whether the ids are nodes of a network depends on the network: that is
    checked where the network is known.
    """

    single: bool = False
    minimum: int = 0
    distinct: bool = False

    def parse(self, value: Any) -> Any:
        if isinstance(value, str | numbers.Integral) and not isinstance(value, bool | np.bool_):
            return (str(value),) if self.single else REFUSED
        if isinstance(value, bytes) or not isinstance(value, Iterable):
            return REFUSED
        ids = tuple(str(v) for v in value)
        if len(ids) < self.minimum or (self.distinct and len(set(ids)) < len(ids)):
            return REFUSED
        return ids

    def accepts(self, value: Any) -> bool:
        return self.parse(value) is not REFUSED

    @property
    def description(self) -> str:  # type: ignore[override]
        ids = "distinct node ids" if self.distinct else "node ids"
        if self.minimum > 1:
            many = f"a sequence of at least {self.minimum} {ids}"
        else:
            many = f"a {'non-empty ' if self.minimum else ''}sequence of {ids}"
        return f"a node id or {many}" if self.single else many

    def shown(self, value: Any) -> str | None:
        if isinstance(value, str | bytes) or not isinstance(value, Collection):
            return None
        ids = [str(v) for v in value]
        counts = Counter(ids) if self.distinct else Counter()
        twice = sorted(i for i, count in counts.items() if count > 1)
        if twice:
            return "repeated " + ", ".join(repr(i) for i in twice)
        if len(ids) < self.minimum:
            return "an empty sequence" if not ids else f"{len(ids)} ids"
        return None


def _shape_fits(shape: tuple[int, ...], wanted: tuple[int | None, ...]) -> bool:
    return len(shape) == len(wanted) and all(
        want is None or got == want for got, want in zip(shape, wanted, strict=True)
    )


#: The element kinds of :class:`Array`: numpy dtype of the converted array, and the noun.
_ARRAY_KINDS: dict[str, tuple[type, str]] = {
    "bool": (np.bool_, "booleans"),
    "int": (np.int64, "integers"),
    "float": (np.float64, "finite numbers"),
}


@dataclass(frozen=True)
class Array(Constraint):
    """An array of booleans, integers or finite numbers, of a given shape, bounded below.

    ``kind`` is ``'bool'`` (a boolean array), ``'int'`` (an integer array:
    floats are refused, not rounded) or ``'float'`` (anything numpy turns
    into float64, then finite). ``shape`` gives each axis's length, ``None``
    for any length (``shape=None``: any shape); ``low`` is the smallest
    value allowed. Converted to a bool, int64 or float64 array. A refused
    value is shown by what is wrong with it: its shape, dtype, a non-finite
    entry or its minimum, never its entries.
    """

    kind: Literal["bool", "int", "float"]
    shape: tuple[int | None, ...] | None = None
    low: float | None = None
    description: str = ""

    def __post_init__(self) -> None:
        if not self.description:
            object.__setattr__(self, "description", self._describe())

    def _describe(self) -> str:
        noun = _ARRAY_KINDS[self.kind][1]
        bound = "" if self.low is None else f" >= {self.low:g}"
        if self.shape is not None and len(self.shape) == 1 and self.shape[0] is not None:
            return f"{self.shape[0]} {noun}{bound}"
        if self.shape is None:
            return f"an array of {noun}{bound}"
        if all(length is None for length in self.shape):
            return f"a {len(self.shape)}-d array of {noun}{bound}"
        axes = ", ".join("any" if length is None else str(length) for length in self.shape)
        return f"an array of shape ({axes}) of {noun}{bound}"

    def _array(self, value: Any) -> np.ndarray | None:
        try:
            if self.kind == "float":
                return np.asarray(value, dtype=np.float64)
            return np.asarray(value)
        except (TypeError, ValueError):
            return None

    def _problem(self, array: np.ndarray | None) -> str | None:
        """What is wrong with ``array``, as the message shows it; None when nothing is."""
        if array is None:
            return "no array of numbers"
        if self.shape is not None and not _shape_fits(array.shape, self.shape):
            return f"shape {array.shape}"
        if (self.kind == "int" and array.dtype.kind not in "iu") or (
            self.kind == "bool" and array.dtype != np.bool_
        ):
            return f"dtype {array.dtype}"
        if self.kind == "float" and not np.all(np.isfinite(array)):
            return "NaN or infinity"
        if self.low is not None and array.size and array.min() < self.low:
            return f"minimum {array.min().item()!r}"
        return None

    def parse(self, value: Any) -> Any:
        array = self._array(value)
        if self._problem(array) is not None:
            return REFUSED
        assert array is not None
        return array.astype(_ARRAY_KINDS[self.kind][0], copy=False)

    def accepts(self, value: Any) -> bool:
        return self.parse(value) is not REFUSED

    def shown(self, value: Any) -> str | None:
        return self._problem(self._array(value))


@dataclass(frozen=True)
class SquareMatrix(Constraint):
    """A square matrix, converted to a float64 CSR array.

    ``sparse_only`` (default) takes scipy sparse matrices and arrays only;
    otherwise a dense two-dimensional array is taken too.
    """

    sparse_only: bool = True

    @property
    def description(self) -> str:  # type: ignore[override]
        return "a square scipy sparse matrix" if self.sparse_only else "a square matrix"

    def parse(self, value: Any) -> Any:
        if not sp.issparse(value) and (self.sparse_only or np.ndim(value) != 2):
            return REFUSED
        try:
            matrix = sp.csr_array(value, dtype=np.float64)
        except (TypeError, ValueError):
            return REFUSED
        return matrix if matrix.shape[0] == matrix.shape[1] else REFUSED

    def accepts(self, value: Any) -> bool:
        return self.parse(value) is not REFUSED

    def shown(self, value: Any) -> str | None:
        shape = getattr(value, "shape", None)
        return type(value).__name__ + ("" if shape is None else f" of shape {shape}")


#: A finite number above 0 (a tolerance, a size bound, a weight).
POSITIVE = Interval(float, 0.0, None, closed="neither")

#: A finite number of at least 0.
NON_NEGATIVE = Interval(float, 0.0, None)

#: Smallest eigen residual bound (``tol``) accepted: 4 machine epsilons of
#: float64, about 8.9e-16. A scaled residual :math:`\|Mx - \lambda x\| / \|M\|`
#: cannot be driven below the rounding of the product :math:`Mx` it is measured
#: from, which is itself of the order of machine epsilon times the norm (backward
#: stability of a matrix-vector product; Higham, *Accuracy and Stability of
#: Numerical Algorithms*, 2nd ed., SIAM 2002, section 3.5; from memory). Converged
#: solves of small networks measure 0.8e-16 to 8.5e-16 (a 21-node cycle reports
#: 8.5e-16), so a bound below about 4 epsilons asks for digits float64 does not
#: hold: such a ``tol`` (1e-20, say) was accepted and every solve then failed to
#: converge. Refusing it up front says so at once.
TOL_FLOOR = 4.0 * float(np.finfo(np.float64).eps)


@dataclass(frozen=True)
class Tolerance(Interval):
    """An eigen residual bound: a finite number of at least :data:`TOL_FLOOR`."""

    @property
    def description(self) -> str:  # type: ignore[override]
        return (
            f"a finite number >= {TOL_FLOOR:.2g} (4 machine epsilons: a residual cannot be "
            "measured below the rounding of float64 numbers)"
        )


#: An eigen residual bound (``tol``), see :data:`TOL_FLOOR`.
TOLERANCE = Tolerance(float, TOL_FLOOR, None)

#: A probability or damping factor strictly between 0 and 1.
OPEN_UNIT = Interval(float, 0.0, 1.0, closed="neither")

#: A share or fraction, 0 and 1 included.
UNIT = Interval(float, 0.0, 1.0)


def _describe(constraints: Sequence[Constraint]) -> str:
    words = [c.description for c in constraints]
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " or " + words[-1]


def check_param(
    value: Any, name: str, constraints: Sequence[Constraint], *, verb: str = "be"
) -> Any:
    """Return ``value`` converted by the first constraint that accepts it.

    ``verb`` follows "must" in the refusal (see :func:`parameter_error`).

    Raises
    ------
    ParameterError
        When no constraint accepts ``value``; the message names ``name``, what
        the constraints accept and what was received.
    """
    for constraint in constraints:
        parsed = constraint.parse(value)
        if parsed is not REFUSED:
            return parsed
    shown = next((s for c in constraints if (s := c.shown(value)) is not None), None)
    raise parameter_error(name, _describe(constraints), value, shown=shown, verb=verb)


def check_params(
    values: Mapping[str, Any], constraints: Mapping[str, Sequence[Constraint]]
) -> dict[str, Any]:
    """Check every value named in ``constraints``; return them converted, by name.

    The form of :func:`validate_params` for values that are not a call's
    arguments: the fields of a frozen options object, an estimator's
    parameters.

    Examples
    --------
    >>> check_params({"k": 3, "flag": True}, {"k": [Interval(int, 1, None)]})
    {'k': 3}
    """
    return {name: check_param(values[name], name, allowed) for name, allowed in constraints.items()}


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
    return float(check_param(value, name, [NON_NEGATIVE if allow_zero else POSITIVE]))


def check_tol(value: Any, name: str = "tol") -> float:
    """Return ``value`` as an eigen residual bound (:data:`TOLERANCE`), else raise naming ``name``.

    Examples
    --------
    >>> check_tol(1e-8)
    1e-08
    >>> check_tol(1e-20)
    Traceback (most recent call last):
    ...
    specgraph.exceptions.ParameterError: tol must be a finite number >= 8.9e-16 (4 machine ...
    """
    return float(check_param(value, name, [TOLERANCE]))


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
