"""Guards against hostile text in exported tables and against oversize networks.

Two small, dependency-free guards that several stages share:

* **Spreadsheet formulas.** A CSV cell that starts with ``=``, ``+``, ``-``,
  ``@``, a tab or a carriage return is run as a formula by common spreadsheet
  programs when the file is opened there, so a node id written by somebody
  else could execute a formula on the machine of whoever opens the result.
  Following the OWASP guidance on CSV injection [1]_, :func:`neutralize_text`
  puts a single quote before such text cells; spreadsheets show the quote (or
  treat the cell as text), and nothing is evaluated. :func:`restore_text` is
  its exact inverse, for readers that match ids of a file specgraph wrote
  against the ids of a network.
* **Memory.** :func:`check_memory` estimates the peak memory of a zoning from
  the node and link counts and refuses, with the sizes that would fit, before
  the operating system kills the process halfway through.

References
----------
.. [1] OWASP Foundation, "CSV Injection",
   https://owasp.org/www-community/attacks/CSV_Injection
"""

from __future__ import annotations

import math
import os
import re
import sys
from typing import Any

import numpy as np
import pandas as pd

from ._validation import check_int
from .exceptions import ResourceError

__all__ = [
    "BASE_BYTES",
    "BYTES_PER_LINK",
    "BYTES_PER_NODE",
    "FORMULA_ESCAPE",
    "FORMULA_TRIGGERS",
    "MEMORY_FRACTION",
    "available_memory",
    "check_memory",
    "estimate_peak_memory",
    "neutralize_frame",
    "neutralize_text",
    "restore_text",
]

# --------------------------------------------------------------------------
# Spreadsheet formulas
# --------------------------------------------------------------------------

#: First characters that make a spreadsheet read a cell as a formula: the
#: list of the OWASP guidance on CSV injection (equals, plus, minus, at,
#: tab, carriage return).
FORMULA_TRIGGERS: tuple[str, ...] = ("=", "+", "-", "@", "\t", "\r")

#: Prefix put before a text cell that would start a formula (OWASP: "prepend
#: each cell field with a single quote").
FORMULA_ESCAPE = "'"

# A cell that is dangerous (trigger first) or that already looks escaped (one
# or more quotes, then a trigger) gets one more quote. Escaping the second kind
# too makes the rule reversible: a cell of this pattern after escaping always
# lost exactly one quote before, so restore_text can take exactly one off.
_TRIGGER_CLASS = "[" + re.escape("".join(FORMULA_TRIGGERS)) + "]"
_ESCAPED = re.compile(f"^{re.escape(FORMULA_ESCAPE)}+{_TRIGGER_CLASS}")


def _is_text(series: pd.Series) -> bool:
    return pd.api.types.is_object_dtype(series.dtype) or pd.api.types.is_string_dtype(series.dtype)


def _needs_escape(values: pd.Series) -> np.ndarray:
    """Mask of the cells :func:`neutralize_text` changes (non-text cells: False)."""
    mask = np.array(values.str.startswith(FORMULA_TRIGGERS, na=False), dtype=bool)
    quoted = values.str.startswith(FORMULA_ESCAPE, na=False).to_numpy(dtype=bool)
    if quoted.any():
        # Rare: only cells that already start with the escape are matched by regex.
        mask[quoted] |= values[quoted].str.match(_ESCAPED, na=False).to_numpy(dtype=bool)
    return mask


def neutralize_text(values: pd.Series) -> pd.Series:
    """Put :data:`FORMULA_ESCAPE` before text cells a spreadsheet would run as formulas.

    Parameters
    ----------
    values : pandas.Series
        Any dtype. Only object, string and categorical-of-text series are
        looked at; numbers, booleans and non-text cells of an object series
        are returned unchanged (a negative number stays ``-1.5``).

    Returns
    -------
    pandas.Series
        A new series when something changed, else ``values`` itself. A text
        cell starting with one of :data:`FORMULA_TRIGGERS`, or with one or
        more quotes followed by one of them, gains one leading quote.

    Notes
    -----
    The second case keeps the rule reversible (see :func:`restore_text`):
    ``'=A1`` written by a user becomes ``''=A1``, so it cannot be mistaken for
    the escaped form of ``=A1``. The check is vectorized with pandas string
    methods; only the rare cells that start with a quote go through a regular
    expression.

    References
    ----------
    .. [1] OWASP Foundation, "CSV Injection",
       https://owasp.org/www-community/attacks/CSV_Injection

    Examples
    --------
    >>> import pandas as pd
    >>> neutralize_text(pd.Series(["=SUM(A1)", "-2", "pump 4", "'+x"])).tolist()
    ["'=SUM(A1)", "'-2", 'pump 4', "''+x"]
    >>> neutralize_text(pd.Series([-1.5, 2.0])).tolist()
    [-1.5, 2.0]
    """
    if isinstance(values.dtype, pd.CategoricalDtype):
        categories = values.cat.categories
        if not _is_text(categories.to_series()):
            return values
        renamed = neutralize_text(pd.Series(categories.to_numpy(), dtype=categories.dtype))
        return values.cat.rename_categories(renamed.to_list())
    if not _is_text(values):
        return values
    mask = _needs_escape(values)
    if not mask.any():
        return values
    out = values.copy()
    out[mask] = FORMULA_ESCAPE + values[mask]
    return out


def restore_text(values: pd.Series) -> pd.Series:
    """Undo :func:`neutralize_text`: take one leading quote off escaped cells.

    A cell is restored when it is one or more :data:`FORMULA_ESCAPE` quotes
    followed by one of :data:`FORMULA_TRIGGERS`; every other cell is returned
    unchanged, so ``restore_text(neutralize_text(s))`` equals ``s`` for every
    series of text.

    Examples
    --------
    >>> import pandas as pd
    >>> restore_text(pd.Series(["'=SUM(A1)", "''+x", "'plain", "7"])).tolist()
    ['=SUM(A1)', "'+x", "'plain", '7']
    """
    if not _is_text(values):
        return values
    quoted = values.str.startswith(FORMULA_ESCAPE, na=False).to_numpy(dtype=bool)
    if not quoted.any():
        return values
    mask = np.zeros(len(values), dtype=bool)
    mask[quoted] = values[quoted].str.match(_ESCAPED, na=False).to_numpy(dtype=bool)
    if not mask.any():
        return values
    out = values.copy()
    out[mask] = values[mask].str.slice(len(FORMULA_ESCAPE))
    return out


def neutralize_frame(frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` with every text column and text header passed through :func:`neutralize_text`.

    Numeric and boolean columns are untouched; the frame itself is not
    modified (a shallow copy is returned when something changes).

    Examples
    --------
    >>> import pandas as pd
    >>> t = pd.DataFrame({"node": ["@A", "B"], "zone": [0, -1]})
    >>> neutralize_frame(t).to_csv(index=False, lineterminator="\\n")
    "node,zone\\n'@A,0\\nB,-1\\n"
    """
    changed: dict[Any, pd.Series] = {}
    for position in range(frame.shape[1]):
        column = frame.iloc[:, position]
        safe = neutralize_text(column)
        if safe is not column:
            changed[position] = safe
    headers = pd.Series(list(frame.columns), dtype=object)
    safe_headers = neutralize_text(headers)
    if not changed and safe_headers is headers:
        return frame
    out = frame.copy(deep=False)
    for position, safe in changed.items():
        out.isetitem(position, safe.array)
    out.columns = pd.Index(safe_headers.to_list(), dtype=object)
    return out


# --------------------------------------------------------------------------
# Memory
# --------------------------------------------------------------------------

#: Peak resident memory of ``specgraph zones`` that grows with each node, in
#: bytes (ids as text in pandas and the network, coordinates, eigenvectors and
#: solver work vectors, labels and output tables). Least-squares fit, rounded
#: up, of the peak RSS (``/usr/bin/time -f %M``) of ``specgraph zones EDGES
#: --zones 8 --seed 1`` on ``gallery.road_like`` networks written as CSV:
#: 10^4 nodes / 2*10^4 links: 348 MiB; 10^5 nodes with 1.25, 2 and 2.75 *10^5
#: links: 509, 558 and 591 MiB; 5*10^5 nodes / 10^6 links: 1478 MiB. The fit
#: (323 MiB + 1268 B/node + 577 B/link) is within 1 % of every point; a run on
#: 10^6 nodes / 2*10^6 links had reached 2625 MiB when stopped after 150 s
#: (fit: 2632 MiB). Measured with specgraph 0.1.0, numpy 2.4, pandas 3.1, Python 3.11.
BYTES_PER_NODE = 1_300

#: Peak resident memory that grows with each undirected link, in bytes (the
#: parsed edge table as text, the symmetric CSR adjacency and Laplacian, the
#: multilevel hierarchy, the boundary table). Fitted with :data:`BYTES_PER_NODE`.
BYTES_PER_LINK = 600

#: Resident memory that does not grow with the network, in bytes: the
#: interpreter with specgraph, numpy, scipy and pandas imported (255 MiB
#: measured the same way) plus modules and compiled kernels loaded on first
#: use. Fitted with :data:`BYTES_PER_NODE`, rounded up.
BASE_BYTES = 330 * 2**20

#: Share of the available memory a run may plan to use; the rest is left for
#: the estimate's error, the page cache and other processes (common practice).
MEMORY_FRACTION = 0.8

_GIB = 2**30


def estimate_peak_memory(n_nodes: int, n_links: int) -> int:
    """Estimated peak resident memory, in bytes, of zoning a network of these counts.

    Parameters
    ----------
    n_nodes, n_links : int
        Nodes and undirected links (rows of the edge table are an upper bound).

    Returns
    -------
    int
        ``BASE_BYTES + BYTES_PER_NODE * n_nodes + BYTES_PER_LINK * n_links``.

    Notes
    -----
    The costs are linear fits of measured peaks for 8 zones, not bounds: a
    run with many more zones (one eigenvector of 8 bytes per node per zone,
    several times over in the solver's block), long ids or many carried
    columns needs more. :data:`MEMORY_FRACTION` leaves room for that error.

    Examples
    --------
    >>> estimate_peak_memory(0, 0) == BASE_BYTES
    True
    """
    n_nodes = check_int(n_nodes, "n_nodes", minimum=0)
    n_links = check_int(n_links, "n_links", minimum=0)
    return BASE_BYTES + BYTES_PER_NODE * n_nodes + BYTES_PER_LINK * n_links


def available_memory() -> int | None:
    """Memory the system can give a new process now, in bytes; None when unknown.

    On Linux, ``MemAvailable`` of ``/proc/meminfo`` (the kernel's own estimate,
    counting reclaimable cache); elsewhere the free physical pages from
    :func:`os.sysconf` where the platform has them; otherwise None.
    """
    if sys.platform.startswith("linux"):
        try:
            with open("/proc/meminfo", encoding="ascii") as handle:
                for line in handle:
                    if line.startswith("MemAvailable:"):
                        return int(line.split()[1]) * 1024  # the file counts kB
        except (OSError, ValueError, IndexError):
            pass
    try:
        pages = os.sysconf("SC_AVPHYS_PAGES")
        page_size = os.sysconf("SC_PAGE_SIZE")
    except (AttributeError, ValueError, OSError):
        return None
    if pages <= 0 or page_size <= 0:
        return None
    return int(pages) * int(page_size)


def _gib(n_bytes: float) -> str:
    return f"{n_bytes / _GIB:.1f} GiB"


def check_memory(n_nodes: int, n_links: int, *, what: str, available: int | None = None) -> int:
    """Refuse a network too large for the memory at hand, before building it.

    Parameters
    ----------
    n_nodes, n_links : int
        Counts of the network about to be built (edge-table rows may stand in
        for links: duplicates only make the estimate safer).
    what : str
        What is about to run, for the message (e.g. ``"zoning edges.csv"``).
    available : int, optional
        Bytes available. By default :func:`available_memory`; when that is
        unknown too, nothing is checked.

    Returns
    -------
    int
        The estimate of :func:`estimate_peak_memory`, in bytes.

    Raises
    ------
    ResourceError
        When the estimate exceeds :data:`MEMORY_FRACTION` of ``available``;
        the message gives the estimate, what is available, the largest
        network of the same link density that would fit and the memory this
        one needs.

    Examples
    --------
    >>> check_memory(1_000, 2_000, what="zoning", available=8 * 2**30) > 0
    True
    """
    estimate = estimate_peak_memory(n_nodes, n_links)
    if available is None:
        available = available_memory()
    if available is None:
        return estimate
    available = check_int(available, "available", minimum=0)
    budget = MEMORY_FRACTION * available
    if estimate <= budget:
        return estimate
    links_per_node = n_links / n_nodes if n_nodes else 0.0
    per_node = BYTES_PER_NODE + BYTES_PER_LINK * links_per_node
    fits = max(0, math.floor((budget - BASE_BYTES) / per_node))
    needed = estimate / MEMORY_FRACTION
    raise ResourceError(
        f"{what}: a network of {n_nodes:,} nodes and {n_links:,} links needs about "
        f"{_gib(estimate)} of memory at peak (estimate), but only {_gib(available)} is "
        f"available ({MEMORY_FRACTION:.0%} of it may be planned); split the network by region "
        f"into parts of at most about {fits:,} nodes, or run on a machine with at least "
        f"{_gib(needed)} available"
    )
