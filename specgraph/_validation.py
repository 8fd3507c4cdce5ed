"""Parameter checks shared by the whole package.

One message shape everywhere: ``<parameter> must be <expected>; got <received>.``
"""

from __future__ import annotations

import numbers
from collections.abc import Collection
from typing import Any

import numpy as np

from .exceptions import ParameterError

__all__ = ["check_choice", "check_int", "check_positive_float", "check_rng"]


def _fail(name: str, expected: str, value: Any) -> ParameterError:
    return ParameterError(f"{name} must be {expected}; got {value!r}.")


def check_int(
    value: Any, name: str, *, minimum: int | None = None, maximum: int | None = None
) -> int:
    """Return ``value`` as an int, or raise a :class:`ParameterError` naming ``name``."""
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise _fail(name, "an integer", value)
    value = int(value)
    if minimum is not None and value < minimum:
        raise _fail(name, f"an integer >= {minimum}", value)
    if maximum is not None and value > maximum:
        raise _fail(name, f"an integer <= {maximum}", value)
    return value


def check_positive_float(value: Any, name: str, *, allow_zero: bool = False) -> float:
    """Return ``value`` as a finite float > 0 (or >= 0), else raise naming ``name``."""
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise _fail(name, "a real number", value)
    value = float(value)
    ok = np.isfinite(value) and (value >= 0 if allow_zero else value > 0)
    if not ok:
        raise _fail(name, "a finite number >= 0" if allow_zero else "a finite number > 0", value)
    return value


def check_choice(value: Any, name: str, choices: Collection[str]) -> str:
    """Return ``value`` if it is one of ``choices``, else raise naming ``name``."""
    if value not in choices:
        options = ", ".join(repr(c) for c in sorted(choices))
        raise _fail(name, f"one of {options}", value)
    return str(value)


def check_rng(rng: Any) -> np.random.Generator:
    """Turn ``rng`` into a :class:`numpy.random.Generator` (SPEC 7).

    Accepts ``None`` (fresh entropy), an int seed, a ``SeedSequence`` or a
    ``Generator``; anything else is refused by name.
    """
    try:
        return np.random.default_rng(rng)
    except (TypeError, ValueError) as exc:
        raise _fail("rng", "None, an int seed or a numpy.random.Generator", rng) from exc
