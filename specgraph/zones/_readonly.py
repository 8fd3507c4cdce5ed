"""Read-only containers for the records of a :class:`~specgraph.zones.Zoning`.

A frozen dataclass only stops its attributes from being rebound; the arrays
and dicts it holds stay writable unless they are made read-only themselves.
Arrays become read-only views; dicts and lists become subclasses that refuse
changes, so that they still read, compare and serialize (``json.dumps``,
``isinstance(value, dict)``) like plain ones, which
:class:`types.MappingProxyType` would not.
"""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["read_only"]


class _ReadOnlyDict(dict[str, Any]):
    """A ``dict`` that refuses changes: reads, compares and serializes (``json``) as one.

    A subclass rather than :class:`types.MappingProxyType`, so that
    ``json.dumps`` and ``isinstance(value, dict)`` keep working on the
    records of a :class:`Zoning`.
    """

    __slots__ = ()

    def _refuse(self, *args: Any, **kwargs: Any) -> None:
        raise TypeError("Zoning records are read-only; change a copy: dict(record)")

    __setitem__ = __delitem__ = __ior__ = _refuse  # type: ignore[assignment]
    clear = pop = popitem = setdefault = update = _refuse  # type: ignore[assignment]

    def __reduce__(self) -> tuple[Any, ...]:
        # Pickling a dict subclass would refill it item by item (refused): rebuild whole.
        return (type(self), (dict(self),))

    def __copy__(self) -> _ReadOnlyDict:
        return self

    def __deepcopy__(self, memo: dict[int, Any]) -> _ReadOnlyDict:
        return self


class _ReadOnlyList(list[Any]):
    """A ``list`` that refuses changes (nested in the records of a :class:`Zoning`)."""

    __slots__ = ()

    def _refuse(self, *args: Any, **kwargs: Any) -> None:
        raise TypeError("Zoning records are read-only; change a copy: list(record)")

    __setitem__ = __delitem__ = __iadd__ = __imul__ = _refuse  # type: ignore[assignment]
    append = extend = insert = pop = remove = clear = sort = reverse = _refuse

    def __reduce__(self) -> tuple[Any, ...]:
        return (type(self), (list(self),))

    def __copy__(self) -> _ReadOnlyList:
        return self

    def __deepcopy__(self, memo: dict[int, Any]) -> _ReadOnlyList:
        return self


def read_only(value: Any) -> Any:
    """``value`` with dicts, lists and arrays made read-only, recursively.

    Arrays become read-only *views* (no copy, and the caller's own array keeps
    its flags); dicts and lists become :class:`_ReadOnlyDict` and
    :class:`_ReadOnlyList`.
    """
    if isinstance(value, np.ndarray):
        view = value.view()
        view.flags.writeable = False
        return view
    if isinstance(value, dict):
        return _ReadOnlyDict({key: read_only(item) for key, item in value.items()})
    if isinstance(value, list):
        return _ReadOnlyList(read_only(item) for item in value)
    return value
