"""Link ends as node rows: the ids of a link table encoded once, with pyarrow where it can.

Every reader and :meth:`~specgraph.Network.from_links` turn the two end
columns of a link table into row numbers of the node list (that list is the
given one, or the ids in order of first appearance along the links, source and
target interleaved). :func:`encode_links` does it in one of two ways that give
the same answers:

* **Arrow.** When both end columns, and the node list when one is given, are
  held as Arrow text without missing values (pandas' default string dtype from
  pandas 3 with pyarrow installed, which is what the readers give there), one
  hash table of the node ids (``pyarrow.compute.index_in``) maps every end,
  and no Python object is made per link: at 10^6 nodes and 2*10^6 links this
  took 0.5 s where the Python path below took 6 s.
* **Python.** Otherwise every id is made a Python ``str`` (``str(v)``) and
  pandas' hash index maps them: the path specgraph always had, and the
  reference the Arrow path is tested against.

This is a shared low-level module: it imports numpy, and pandas and (optionally)
pyarrow where first used, and from specgraph only the exceptions, so the network
and every reader may use it.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from functools import cache
from typing import TYPE_CHECKING, Any

import numpy as np

from .exceptions import InputError

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["LinkEnds", "arrow_text", "encode_links", "first_repeated", "missing_or_empty"]

#: Row number given to a link end that is not among the node ids.
NOT_A_NODE = -1


@dataclass(frozen=True, eq=False)
class LinkEnds:
    """Link ends as node rows (see :func:`encode_links`).

    Attributes
    ----------
    node_ids : ndarray of object
        Every node id as a Python ``str``, in row order.
    source, target : array-like
        The end ids as columns for the network's link table: an object array
        of ``str`` (Python path), or pandas' string array over the same Arrow
        text (Arrow path), as pandas would hold such a column.
    rows : tuple of two int64 ndarrays, or None
        Row of each source and target in ``node_ids``, :data:`NOT_A_NODE`
        where an end is not a node id; None when ``unique`` is False.
    unique : bool
        Whether the node ids are unique (always, when found from the links).
    """

    node_ids: np.ndarray
    source: Any
    target: Any
    rows: tuple[np.ndarray, np.ndarray] | None
    unique: bool

    def end_id(self, link: int, side: int) -> str:
        """The id at end ``side`` (0: source, 1: target) of link ``link``, as text."""
        return str((self.source, self.target)[side][link])


# ------------------------------------------------------------------- Arrow
def arrow_text(values: Any) -> Any:
    """``values`` as a chunked pyarrow large-string array when held as Arrow text, else None.

    Accepted without a copy of the text: a pyarrow string array (plain or
    chunked), or a pandas Series or array whose values are stored in Arrow
    (``pd.StringDtype('pyarrow')``, pandas 3's default ``str``, or
    ``pd.ArrowDtype(pa.string())``). Anything else (an object array, a list, a
    Series of numbers), or pyarrow not installed, gives None: such ids take the
    Python path.
    """
    try:
        import pyarrow as pa
    except ImportError:
        return None
    import pandas as pd

    if not isinstance(values, pa.Array | pa.ChunkedArray):
        array = values.array if isinstance(values, pd.Series) else values
        dtype = getattr(array, "dtype", None)
        held_in_arrow = (
            isinstance(dtype, pd.StringDtype) and dtype.storage == "pyarrow"
        ) or isinstance(dtype, pd.ArrowDtype)
        if not held_in_arrow:
            return None
        values = pa.array(array)
    if isinstance(values, pa.Array):
        values = pa.chunked_array([values])
    if not (pa.types.is_string(values.type) or pa.types.is_large_string(values.type)):
        return None
    return values.cast(pa.large_string())


@cache
def _text_dtype() -> Any:
    """The dtype pandas gives a column of Python ``str`` (``str`` from pandas 3, else object)."""
    import pandas as pd

    return pd.Series(np.array(["id"], dtype=object)).dtype


def _table_column(values: Any, text: Any) -> Any:
    """Ids as the column pandas would hold for them given as ``str``.

    ``values`` as given when pandas already holds them so (a column of a
    frame the readers made: nothing is copied), else the Arrow ``text`` of them
    converted.
    """
    import pandas as pd

    dtype = _text_dtype()
    array = values.array if isinstance(values, pd.Series) else values
    held = isinstance(array, pd.api.extensions.ExtensionArray) and array.dtype == dtype
    if held:
        return array
    if isinstance(dtype, pd.StringDtype) and dtype.storage == "pyarrow":
        # pandas' extension-array protocol for Arrow data; pandas-stubs leave it out.
        return dtype.__from_arrow__(text)  # type: ignore[attr-defined]
    return text.to_numpy(zero_copy_only=False)


def _interleaved(source: Any, target: Any) -> Any:
    """``source[0], target[0], source[1], target[1], ...`` as one Arrow array."""
    import pyarrow as pa

    m = len(source)
    if m == 0:
        return pa.array([], type=pa.large_string())
    both = pa.concat_arrays([*source.chunks, *target.chunks])
    order = np.column_stack([np.arange(m), np.arange(m) + m]).ravel()
    return both.take(pa.array(order))


def _first_appearance_order(i: np.ndarray, j: np.ndarray) -> bool:
    """Whether rows ``i``, ``j`` number the ids by first appearance along the interleaved ends.

    pyarrow's ``unique`` keeps that order (its hash table hands out numbers as
    values arrive); checked in O(links) rather than relied on: in that order,
    each end's row is at most one more than every row before it.
    """
    rows = np.column_stack([i, j]).ravel()
    if not rows.size:
        return True
    before = np.maximum.accumulate(np.concatenate([[-1], rows[:-1]]))
    return bool(np.all(rows <= before + 1))


def _arrow_ends(source: Any, target: Any, node_ids: Any) -> LinkEnds | None:
    texts = [arrow_text(source), arrow_text(target)]
    ids = None if node_ids is None else arrow_text(node_ids)
    if texts[0] is None or texts[1] is None or (node_ids is not None and ids is None):
        return None  # not Arrow text, or pyarrow (optional) not installed
    import pyarrow as pa
    import pyarrow.compute as pc

    if any(text.null_count for text in [*texts, *([] if ids is None else [ids])]):
        return None  # missing ids: the Python path words them as pandas does
    if len(texts[0]) != len(texts[1]):
        raise InputError("source and target must have the same length")
    if ids is None:
        ids = pa.chunked_array([pc.unique(_interleaved(*texts))])
        listed: list[Any] = []
    else:
        listed = ids.chunks
    # One hash table of the node ids for the ends and the ids themselves: an id
    # is found at its first listing, so the ids are unique when each is found
    # at its own row.
    chunks = [*listed, *texts[0].chunks, *texts[1].chunks]
    found = pc.index_in(pa.chunked_array(chunks, type=pa.large_string()), value_set=ids)
    rows = found.fill_null(NOT_A_NODE).to_numpy().astype(np.int64)
    n_listed, n_links = len(rows) - 2 * len(texts[0]), len(texts[0])
    unique = bool(np.array_equal(rows[:n_listed], np.arange(n_listed)))
    ends = rows[n_listed:]
    if node_ids is None and not _first_appearance_order(ends[:n_links], ends[n_links:]):
        return None
    return LinkEnds(
        node_ids=np.asarray(ids.to_numpy(zero_copy_only=False), dtype=object),
        source=_table_column(source, texts[0]),
        target=_table_column(target, texts[1]),
        rows=(ends[:n_links], ends[n_links:]) if unique else None,
        unique=unique,
    )


# ------------------------------------------------------------------ Python
def _python_ends(source: Any, target: Any, node_ids: Iterable[Any] | None) -> LinkEnds:
    import pandas as pd

    src = np.asarray([str(s) for s in source], dtype=object)
    dst = np.asarray([str(t) for t in target], dtype=object)
    if src.shape != dst.shape:
        raise InputError("source and target must have the same length")
    if node_ids is None:
        interleaved = np.column_stack([src, dst]).ravel()
        ids = np.asarray(pd.unique(interleaved), dtype=object)
    else:
        ids = np.asarray([str(v) for v in node_ids], dtype=object)
    index = pd.Index(ids)
    rows = None
    if index.is_unique:
        rows = (
            index.get_indexer(src).astype(np.int64),
            index.get_indexer(dst).astype(np.int64),
        )
    return LinkEnds(node_ids=ids, source=src, target=dst, rows=rows, unique=index.is_unique)


# ------------------------------------------------------------------ public
def encode_links(source: Any, target: Any, node_ids: Any = None) -> LinkEnds:
    """Row of every link end among the node ids, and the ids as text.

    Parameters
    ----------
    source, target : array-like
        Node ids at the two ends of each link, compared as text (``str(v)``).
    node_ids : array-like, optional
        All node ids in row order. Default: the ids in order of first
        appearance in ``source`` and ``target``, interleaved.

    Returns
    -------
    LinkEnds
        Ends that are not node ids get row :data:`NOT_A_NODE`; repeated node
        ids are reported by ``unique`` (the caller words the refusal).

    Raises
    ------
    InputError
        ``source`` and ``target`` differ in length.

    Examples
    --------
    >>> ends = encode_links(["a", "b"], ["b", "c"])
    >>> ends.node_ids.tolist(), [r.tolist() for r in ends.rows]
    (['a', 'b', 'c'], [[0, 1], [1, 2]])
    """
    fast = _arrow_ends(source, target, node_ids)
    return fast if fast is not None else _python_ends(source, target, node_ids)


def missing_or_empty(values: pd.Series) -> np.ndarray:
    """Mask of the cells of ``values`` that hold no id: missing, or empty text."""
    text = arrow_text(values)
    if text is not None:
        import pyarrow.compute as pc

        empty = pc.or_kleene(pc.is_null(text), pc.equal(pc.utf8_length(text), 0))
        return np.asarray(empty.to_numpy(zero_copy_only=False), dtype=bool)
    missing = np.asarray(values.isna(), dtype=bool)
    ids = np.array(
        [v if type(v) is str else str(v) for v in values.to_numpy(dtype=object)], dtype=object
    )
    return missing | (ids == "")


def first_repeated(values: pd.Series) -> tuple[int, int] | None:
    """Position of the first id of ``values`` (as text) seen before, and of its first sighting.

    None when every id is unique. Used to word a refusal (:func:`encode_links`
    says whether there is a repeat).
    """
    import pandas as pd

    ids = np.array(
        [v if type(v) is str else str(v) for v in values.to_numpy(dtype=object)], dtype=object
    )
    repeated = np.flatnonzero(pd.Index(ids).duplicated())
    if not repeated.size:
        return None
    row = int(repeated[0])
    return row, int(np.flatnonzero(ids == ids[row])[0])
