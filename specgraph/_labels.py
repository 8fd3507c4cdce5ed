"""Zone labels of any text: the user's names coded ``0..k-1`` for the engines, and back.

A utility's districts have names ("North Heights", "DMA-07"); every engine of
specgraph counts zones ``0..k-1``. :func:`code_labels` is the one place that
turns the labels a user gives (whole numbers, or text) into codes and keeps
the names, so that every table that names a zone can write the user's label
back unchanged (``names[code]``).

* **Whole numbers** (an integer array) are the user's zone numbers, kept as
  they are: the functions that took them before take them exactly as before
  (``names`` is None), so their outputs do not change.
* **Text** (an array of ``str``, ``None`` for a node in no zone) is compared
  exactly as written: ``"7"`` and ``"07"`` are two zones, ``"North"`` and
  ``"north"`` too. Zones are coded in sorted text order, so tables list them
  in that order.

This is a shared low-level module (numpy, pandas and the validation module
only), so zoning and diagnostics may both use it.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from ._figures import UNASSIGNED, check_labels
from ._validation import parameter_error

__all__ = ["code_labels", "named"]


def code_labels(
    labels: Any, *, n_nodes: int | None = None, name: str = "labels", unassigned: bool = False
) -> tuple[np.ndarray, np.ndarray | None]:
    """Codes of a node's zone labels, and the label of each code when they are text.

    Parameters
    ----------
    labels : array-like, shape (n,)
        Zone of each node: whole numbers (``>= 0``; :data:`UNASSIGNED` ``-1``
        for a node in no zone when ``unassigned``), or text (``None`` or NaN
        for a node in no zone when ``unassigned``).
    n_nodes : int, optional
        Expected length.
    name : str, default='labels'
        Argument name used in the messages.
    unassigned : bool, default=False
        Accept nodes in no zone.

    Returns
    -------
    codes : ndarray of int64, shape (n,)
        For whole numbers, the numbers themselves; for text, ``0..k-1`` in
        sorted text order. ``-1`` for a node in no zone.
    names : ndarray of object or None
        For text, the label of each code (``names[codes]`` gives the labels
        back); None for whole numbers (the codes are the labels).

    Raises
    ------
    ParameterError
        Labels of the wrong shape, a mix of numbers and text, an empty text
        label, or a node in no zone where every node needs one.

    Examples
    --------
    >>> codes, names = code_labels(["North", "07", "7", "North"])
    >>> codes.tolist(), names.tolist()
    ([2, 0, 1, 2], ['07', '7', 'North'])
    >>> code_labels([4, 4, 9])[1] is None
    True
    """
    array = np.asarray(labels)
    if array.dtype.kind not in "OUS" or array.size == 0:
        return check_labels(array, n_nodes=n_nodes, name=name, unassigned=unassigned), None
    if n_nodes is not None and array.shape != (n_nodes,):
        expected = f"one zone per node ({n_nodes})"
        raise parameter_error(name, expected, labels, shown=f"shape {array.shape}", verb="hold")
    if n_nodes is None and array.ndim != 1:
        raise parameter_error(name, "one-dimensional", labels, shown=f"shape {array.shape}")
    values = array.astype(object)
    missing = pd.isna(pd.Series(values, dtype=object)).to_numpy(dtype=bool)
    kinds = {type(v) for v in values[~missing].tolist()}
    if kinds and all(issubclass(k, int | np.integer) and k is not bool for k in kinds):
        if missing.any():
            values = np.where(missing, UNASSIGNED, values)
        whole = values.astype(np.int64)
        return check_labels(whole, n_nodes=n_nodes, name=name, unassigned=unassigned), None
    if not all(issubclass(k, str) for k in kinds):
        shown = ", ".join(sorted(k.__name__ for k in kinds))
        raise parameter_error(
            name,
            "zone labels that are all text or all whole numbers",
            labels,
            shown=f"values of type {shown}",
            verb="hold",
        )
    if missing.any() and not unassigned:
        row = int(np.flatnonzero(missing)[0])
        raise parameter_error(
            name, "a zone for every node", labels, shown=f"none for node row {row}", verb="hold"
        )
    empty = np.flatnonzero(~missing & (values == ""))
    if empty.size:
        raise parameter_error(
            name,
            "non-empty zone labels (None for a node in no zone)",
            labels,
            shown=f"an empty label at row {int(empty[0])}",
            verb="hold",
        )
    codes, names = pd.factorize(pd.Series(values, dtype=object), sort=True, use_na_sentinel=True)
    return codes.astype(np.int64), np.asarray(names, dtype=object)


def named(codes: np.ndarray, names: np.ndarray | None) -> np.ndarray:
    """The user's label of each code (``None`` for ``-1`` with text labels).

    Examples
    --------
    >>> named(np.array([1, -1, 0]), np.array(["a", "b"], dtype=object)).tolist()
    ['b', None, 'a']
    >>> named(np.array([3, -1]), None).tolist()
    [3, -1]
    """
    if names is None:
        return codes
    out = np.empty(codes.size, dtype=object)
    known = codes >= 0
    out[known] = names[codes[known]]
    out[~known] = None
    return out
