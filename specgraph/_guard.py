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
* **Memory.** :func:`estimate_memory` estimates the peak resident memory of
  each stage of a run (reading the table, building the network, operator,
  eigen-solve, zoning, constraints and refinement, writing) from measured
  per-node, per-link and per-node-per-zone costs (:data:`STAGE_COSTS`,
  docs/memory.md); :func:`check_memory` refuses a run whose estimate does not
  fit in what this process may still take (:func:`memory_budget`: the
  machine's available memory, control-group limits, ``ulimit`` limits),
  naming the stage and what to change, before the operating system kills the
  process halfway through. :func:`check_table_memory` does the same before a
  file is read, from its size; :func:`out_of_memory` turns a ``MemoryError``
  raised anyway into the same kind of refusal, naming the stage that ran.

References
----------
.. [1] OWASP Foundation, "CSV Injection",
   https://owasp.org/www-community/attacks/CSV_Injection
.. [2] The Linux kernel documentation: Documentation/filesystems/proc.rst
   (``MemAvailable``, ``VmRSS``, ``VmHWM``) and
   Documentation/admin-guide/cgroup-v2.rst (``memory.max``,
   ``memory.current``), https://docs.kernel.org/
"""

from __future__ import annotations

import math
import os
import re
import sys
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from ._validation import check_bool, check_choice, check_int
from .exceptions import ResourceError

__all__ = [
    "FORMULA_ESCAPE",
    "FORMULA_TRIGGERS",
    "MEMORY_BASE_BYTES",
    "MEMORY_FRACTION",
    "NETWORK_HELD",
    "STAGE_COSTS",
    "TASK_STAGES",
    "MemoryBudget",
    "MemoryEstimate",
    "MemoryLimit",
    "StageCost",
    "check_memory",
    "check_table_memory",
    "estimate_memory",
    "memory_budget",
    "neutralize_frame",
    "neutralize_text",
    "note_stage",
    "out_of_memory",
    "requested_bytes",
    "restore_text",
    "running_stage",
    "table_rows",
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
#
# The model: each stage of a run has a peak resident memory that is the
# interpreter's (BASE) plus a cost per node, per link and, where zones matter,
# per node per zone; the run's peak is the largest stage. The coefficients are
# measured and fitted by benchmarks/probe_memory_model.py (docs/memory.md has
# the table and the command); refit them there and paste the printed rows here.

#: Linux files the guard reads; module constants so tests can point them at
#: stand-ins. ``/proc/meminfo`` and ``/proc/self/status`` are described in the
#: kernel's Documentation/filesystems/proc.rst and proc(5).
PROC_MEMINFO = "/proc/meminfo"
PROC_SELF_STATUS = "/proc/self/status"
#: This process's control groups (cgroups(7): ``hierarchy-ID:controllers:path``).
PROC_SELF_CGROUP = "/proc/self/cgroup"
#: Mount point of the cgroup v2 unified hierarchy (kernel
#: Documentation/admin-guide/cgroup-v2.rst: ``memory.max``, ``memory.current``).
CGROUP_V2_ROOT = "/sys/fs/cgroup"
#: Mount point of the cgroup v1 memory controller (kernel
#: Documentation/admin-guide/cgroup-v1/memory.rst: ``memory.limit_in_bytes``,
#: ``memory.usage_in_bytes``).
CGROUP_V1_MEMORY_ROOT = "/sys/fs/cgroup/memory"
#: A cgroup v1 limit at or above this many bytes means "no limit": the kernel
#: writes its page-counter maximum, 9223372036854771712 on 4 KiB pages, for an
#: unlimited group (cgroup-v1/memory.rst; the figure read on this machine).
CGROUP_V1_UNLIMITED = 2**62


@dataclass(frozen=True)
class StageCost:
    """Peak resident memory of one stage above :data:`MEMORY_BASE_BYTES`, in bytes.

    ``fixed + per_node * n + per_link * m + per_node_zone * n * k`` for ``n``
    nodes, ``m`` links and ``k`` zones; ``measured`` says where the figures
    come from.
    """

    name: str
    per_node: float
    per_link: float
    per_node_zone: float = 0.0
    fixed: float = 0.0
    measured: str = ""

    def bytes_for(self, n_nodes: float, n_links: float, zones: float) -> float:
        """The stage's cost, above the base, for these counts."""
        return self.fixed + n_nodes * self.per_node_for(n_links / n_nodes if n_nodes else 0, zones)

    def per_node_for(self, links_per_node: float, zones: float) -> float:
        """The stage's cost per node at this link density and zone count (``fixed`` aside)."""
        return self.per_node + self.per_link * links_per_node + self.per_node_zone * zones


_PROBE = (
    "benchmarks/probe_memory_model.py on gallery.road_like networks 250000:3, 250000:5, "
    "500000:4 and 1000000:4 (nodes:mean degree, ids R<i>), 16 zones; VmHWM per stage"
)

#: Resident memory of the interpreter with specgraph, numpy, scipy and pandas
#: imported and a small zoning run once (kernels loaded), in bytes: the
#: median of the runs of :data:`_PROBE`, rounded up.
MEMORY_BASE_BYTES = 331 * 2**20

#: The stages of a zoning run, in order, with their measured costs (one row
#: per stage; refit with :data:`_PROBE` and paste the printed rows). Each
#: figure is the stage's peak with everything the process holds then (the
#: table while the network is built, the network during every later stage),
#: so the run's peak is the largest row, not a sum. Fitted to the peaks
#: (``VmHWM``) of four runs, 250,000 nodes at mean degree 3 and 5, 500,000
#: and 1,000,000 at 4, 16 zones, plus the eigen-solve at 64 zones, minimizing
#: the largest relative error; the whole-run estimate is 0.85, 1.11, 1.11 and
#: 1.13 times the measured peak (1,130, 865, 1,304 and 2,128 MiB). The
#: sparser network needs more than the denser one of the same size (its
#: eigen-solve is harder), which no cost per link can follow: that run sets
#: the error. Measured with specgraph 0.1.0, numpy 2.4, pandas 3.1, Python
#: 3.11 on a shared 2-core machine; docs/memory.md has the tables.
STAGE_COSTS: tuple[StageCost, ...] = (
    StageCost("reading the table", 137, 0, 0, 57 * 2**20, _PROBE),
    StageCost("building the network", 410, 32, 0, 89 * 2**20, _PROBE),
    StageCost("operator", 423, 59, 0, 96 * 2**20, _PROBE),
    StageCost("eigen-solve", 841, 0, 55, 167 * 2**20, _PROBE),
    StageCost("zoning", 1153, 0, 55, 147 * 2**20, _PROBE),
    StageCost("constraints and refinement", 1133, 0, 0, 212 * 2**20, _PROBE),
    StageCost("writing", 1116, 0, 0, 185 * 2**20, _PROBE),
)

#: What a loaded network (read, built, its table released) holds, above the
#: base: the resident memory after reading in the runs of :data:`_PROBE`,
#: fitted from below (the process is credited with no more than it held).
NETWORK_HELD = StageCost("network held", 0, 101, 0, 141 * 2**20, _PROBE)

#: Peak of reading the same table from Parquet instead of CSV (the advice to
#: convert is given only while this row is below the CSV row).
PARQUET_READING = StageCost("reading the table (Parquet)", 40, 40, 0, 44 * 2**20, _PROBE)

#: Stages each task runs: a zoning all of them, ``specgraph spectrum`` up to
#: the eigen-solve, the commands that only read and measure (score, compare)
#: the reading and writing.
TASK_STAGES: dict[str, tuple[str, ...]] = {
    "zoning": tuple(stage.name for stage in STAGE_COSTS),
    "spectrum": ("reading the table", "building the network", "operator", "eigen-solve"),
    "reading": ("reading the table", "building the network", "writing"),
}
#: The stages that read; those left once a network is loaded are the others.
READING_STAGES = ("reading the table", "building the network")

#: From this many zones a zoning's zone count costs nothing per node in the
#: model: ``assign="auto"`` takes the multilevel path alone there, which
#: computes no eigenvector of the whole network
#: (``specgraph.zones.MULTILEVEL_MIN_ZONES``; a test checks that they agree).
#: Below it every zone counts (one eigenvector each, several times over in
#: the solver's block).
ZONING_ZONES_CAP = 48

#: Share of the memory still available that a run may plan to use; the rest
#: is left for the page cache the reading streams through, the estimate's
#: error (within 25 % of the measured peaks, docs/memory.md) and other
#: processes (common practice).
MEMORY_FRACTION = 0.9

#: Largest mean degree (links per node, times two) the check before reading
#: assumes, to bound the nodes of a table from its rows. Road, water, power
#: and telecom networks have mean degrees of about 2 to 6 (from memory; the
#: road-like gallery networks of the probe have 3 to 5), so 20 leaves a wide
#: margin; a denser network is only checked after reading.
PLAUSIBLE_MEAN_DEGREE = 20

#: Bytes of each sample of a file read, at its start, middle
#: and end, to estimate the rows of a CSV file before reading it.
SAMPLE_BYTES = 64 * 2**10

_GIB = 2**30
_COSTS = {stage.name: stage for stage in STAGE_COSTS}


def _gib(n_bytes: float) -> str:
    """Bytes in GiB; in MiB below 0.1 GiB, in TiB, PiB or EiB from 1024 of the unit below."""
    value, unit = n_bytes / _GIB, "GiB"
    if abs(value) < 0.1:
        return f"{n_bytes / 2**20:.1f} MiB"
    for larger in ("TiB", "PiB", "EiB"):
        if abs(value) < 1024:
            break
        value, unit = value / 1024, larger
    return f"{value:.1f} {unit}"


@dataclass(frozen=True)
class MemoryEstimate:
    """Estimated peak resident memory of a run, stage by stage.

    Attributes
    ----------
    n_nodes, n_links, zones : int
        The counts estimated for.
    task : str
        The stages counted (a key of :data:`TASK_STAGES`).
    stages : tuple of (str, int)
        Each stage's name and the process's estimated peak during it, in
        bytes (base included), in the order the run meets them.
    peak : int
        The largest of them: the run's estimated peak.
    largest : str
        The stage of that peak.
    """

    n_nodes: int
    n_links: int
    zones: int
    task: str
    stages: tuple[tuple[str, int], ...]
    peak: int
    largest: str

    def stage(self, name: str) -> int:
        """The estimated peak of stage ``name``, in bytes."""
        return dict(self.stages)[name]


def estimate_memory(
    n_nodes: int, n_links: int, *, zones: int = 16, task: str = "zoning"
) -> MemoryEstimate:
    """Estimate the peak resident memory of a run, stage by stage.

    Parameters
    ----------
    n_nodes, n_links : int
        Nodes and undirected links of the network (rows of an edge table may
        stand in for links: duplicates only make the estimate safer).
    zones : int, default=16
        Zone count (or eigenpairs, for ``task='spectrum'``); the eigenvectors
        cost about 8 bytes per node per zone, several times over in the
        solver's block.
    task : {'zoning', 'spectrum', 'reading'}, default='zoning'
        Which stages run (:data:`TASK_STAGES`).

    Returns
    -------
    MemoryEstimate
        Each stage's estimated peak and the largest.

    Notes
    -----
    Each stage's peak is :data:`MEMORY_BASE_BYTES` plus its row of
    :data:`STAGE_COSTS`, linear fits of peaks measured on road-like networks
    (docs/memory.md). Long ids, many carried columns and very unequal shapes
    (hubs) cost more than the fit; the guard keeps
    ``1 - MEMORY_FRACTION`` of the memory for that.

    Examples
    --------
    >>> small = estimate_memory(1_000, 2_000)
    >>> small.peak == max(bytes for _, bytes in small.stages)
    True
    """
    n_nodes = check_int(n_nodes, "n_nodes", minimum=0)
    n_links = check_int(n_links, "n_links", minimum=0)
    zones = check_int(zones, "zones", minimum=1)
    task = check_choice(task, "task", TASK_STAGES)
    counted = _counted_zones(zones, task)
    stages = tuple(
        (name, math.ceil(MEMORY_BASE_BYTES + _COSTS[name].bytes_for(n_nodes, n_links, counted)))
        for name in TASK_STAGES[task]
    )
    largest, peak = max(stages, key=lambda pair: pair[1])
    return MemoryEstimate(n_nodes, n_links, zones, task, stages, peak, largest)


def _counted_zones(zones: int, task: str) -> int:
    """Zones the per-node-per-zone costs count (see :data:`ZONING_ZONES_CAP`)."""
    return 0 if task == "zoning" and zones >= ZONING_ZONES_CAP else zones


# ------------------------------------------------------------ what is free
@dataclass(frozen=True)
class MemoryLimit:
    """One bound on the memory this process may still take.

    Attributes
    ----------
    source : str
        Where it comes from (``"MemAvailable"``, ``"cgroup v2 memory.max"``...).
    limit : int or None
        The limit itself, in bytes (None for the machine's available memory).
    headroom : int
        Bytes this process may still add under it.
    """

    source: str
    limit: int | None
    headroom: int


@dataclass(frozen=True)
class MemoryBudget:
    """What this process holds and the bounds on what it may still take.

    Attributes
    ----------
    resident : int or None
        This process's resident memory now (``VmRSS``), in bytes.
    limits : tuple of MemoryLimit
        Every bound found: the machine's available memory, control-group
        limits, address-space and data-segment limits.
    """

    resident: int | None
    limits: tuple[MemoryLimit, ...]

    @property
    def headroom(self) -> int | None:
        """Bytes the process may still add: the tightest bound (None: none known)."""
        tightest = self.tightest
        return None if tightest is None else max(0, tightest.headroom)

    @property
    def tightest(self) -> MemoryLimit | None:
        """The bound that leaves the least, or None when none is known."""
        return min(self.limits, key=lambda bound: bound.headroom, default=None)

    def describe(self) -> str:
        """The tightest bound in words, e.g. ``1.2 GiB more (cgroup v1 memory.limit...)``."""
        tightest = self.tightest
        if tightest is None:
            return "an unknown amount"
        said = f"{_gib(max(0, tightest.headroom))} more ({tightest.source}"
        if tightest.limit is not None:
            said += f" {_gib(tightest.limit)}"
        return said + ")"


def _read_text(path: str | os.PathLike[str]) -> str | None:
    try:
        with open(path, encoding="ascii", errors="replace") as handle:
            return handle.read()
    except OSError:
        return None


def _kib_field(text: str | None, field: str) -> int | None:
    """``field:  123 kB`` of a /proc file, in bytes."""
    if text is None:
        return None
    match = re.search(rf"(?m)^{re.escape(field)}:\s+(\d+)\s+kB", text)
    return None if match is None else int(match[1]) * 1024


def _int_file(path: Path) -> int | None:
    text = _read_text(path)
    if text is None:
        return None
    try:
        return int(text.strip())
    except ValueError:  # "max" in cgroup v2: no limit
        return None


def _cgroup_paths() -> tuple[str | None, str | None]:
    """This process's cgroup v2 path and cgroup v1 memory-controller path."""
    v2 = v1 = None
    for line in (_read_text(PROC_SELF_CGROUP) or "").splitlines():
        parts = line.split(":", 2)
        if len(parts) != 3:
            continue
        if parts[0] == "0" and parts[1] == "":
            v2 = parts[2]
        elif "memory" in parts[1].split(","):
            v1 = parts[2]
    return v2, v1


def _group_dirs(root: str, path: str | None) -> list[Path]:
    """The group's folder and each ancestor up to the mount (a container often
    sees only the mount, its own group, whatever /proc/self/cgroup says)."""
    base = Path(root)
    folders = [base]
    if path:
        current = base
        for part in Path(path.lstrip("/")).parts:
            current = current / part
            folders.append(current)
    return [folder for folder in folders if folder.is_dir()]


def _cgroup_limits() -> list[MemoryLimit]:
    """Control-group memory limits minus usage, v2 then v1 (the tightest ancestor)."""
    v2_path, v1_path = _cgroup_paths()
    found: list[MemoryLimit] = []
    for folder in _group_dirs(CGROUP_V2_ROOT, v2_path):
        limit = _int_file(folder / "memory.max")
        used = _int_file(folder / "memory.current")
        if limit is not None and used is not None:
            found.append(MemoryLimit("cgroup v2 memory.max", limit, limit - used))
    if not found:
        for folder in _group_dirs(CGROUP_V1_MEMORY_ROOT, v1_path):
            limit = _int_file(folder / "memory.limit_in_bytes")
            used = _int_file(folder / "memory.usage_in_bytes")
            if limit is not None and used is not None and limit < CGROUP_V1_UNLIMITED:
                found.append(MemoryLimit("cgroup v1 memory.limit_in_bytes", limit, limit - used))
    return sorted(found, key=lambda bound: bound.headroom)[:1]  # the tightest group


def _rlimits(status: str | None) -> list[MemoryLimit]:
    """``RLIMIT_AS`` minus the virtual size, ``RLIMIT_DATA`` minus the data size
    (getrlimit(2); since Linux 4.7 RLIMIT_DATA counts private writable mappings,
    which ``VmData`` reports)."""
    try:
        import resource
    except ImportError:  # not on this platform (Windows)
        return []
    found = []
    for name, field, flag in (
        ("RLIMIT_AS", "VmSize", "ulimit -v"),
        ("RLIMIT_DATA", "VmData", "ulimit -d"),
    ):
        soft, _ = resource.getrlimit(getattr(resource, name))
        used = _kib_field(status, field)
        if soft != resource.RLIM_INFINITY and soft >= 0 and used is not None:
            found.append(MemoryLimit(f"{name} ({flag})", soft, soft - used))
    return found


def memory_budget() -> MemoryBudget:
    """What this process holds and how much more it may take, from every bound found.

    The bounds (each as headroom: what the process may still add):

    * the machine's ``MemAvailable`` (/proc/meminfo; the kernel's estimate of
      memory that can be given without swapping, Documentation/filesystems/
      proc.rst), or on other systems the free pages of :func:`os.sysconf`;
    * a control group's limit minus its usage: cgroup v2 ``memory.max`` minus
      ``memory.current`` (Documentation/admin-guide/cgroup-v2.rst), or cgroup
      v1 ``memory.limit_in_bytes`` minus ``memory.usage_in_bytes``;
    * the address-space limit (``ulimit -v``, RLIMIT_AS) minus the process's
      virtual size, and the data limit (RLIMIT_DATA) minus its data size.

    Memory the process already holds is in none of the headrooms, so it is
    counted as the process's own, never as unavailable.

    Returns
    -------
    MemoryBudget

    Examples
    --------
    >>> budget = memory_budget()
    >>> budget.headroom is None or budget.headroom >= 0
    True
    """
    status = _read_text(PROC_SELF_STATUS)
    limits: list[MemoryLimit] = []
    available = _kib_field(_read_text(PROC_MEMINFO), "MemAvailable")
    if available is None and not sys.platform.startswith("linux"):
        try:
            available = int(os.sysconf("SC_AVPHYS_PAGES")) * int(os.sysconf("SC_PAGE_SIZE"))
        except (AttributeError, ValueError, OSError):
            available = None
    if available is not None and available > 0:
        limits.append(MemoryLimit("the machine's available memory", None, available))
    limits += _cgroup_limits()
    limits += _rlimits(status)
    return MemoryBudget(_kib_field(status, "VmRSS"), tuple(limits))


# ------------------------------------------------------------------ refusing
def _advice(estimate: MemoryEstimate, allowed: float) -> list[str]:
    """What the user can change, for the refusal message (each figure fits ``allowed``)."""
    n, m = estimate.n_nodes, estimate.n_links
    costs = [_COSTS[name] for name, _ in estimate.stages]
    room = allowed - MEMORY_BASE_BYTES
    advice = []
    zoned = [cost for cost in costs if cost.per_node_zone]
    if zoned and n and all(cost.bytes_for(n, m, 0) <= room for cost in costs):
        fit = min(
            math.floor((room - cost.bytes_for(n, m, 0)) / (cost.per_node_zone * n))
            for cost in zoned
        )
        if 2 <= fit < _counted_zones(estimate.zones, estimate.task):
            advice.append(f"fewer zones (at most about {fit:,} fit)")
    reading = _COSTS["reading the table"]
    if estimate.largest == reading.name and PARQUET_READING.bytes_for(n, m, 0) < (
        reading.bytes_for(n, m, 0)
    ):
        advice.append("the edge table as Parquet instead of CSV (it reads with less memory)")
    zones = _counted_zones(estimate.zones, estimate.task)
    parts = min(
        math.floor((room - cost.fixed) / cost.per_node_for(m / max(n, 1), zones)) for cost in costs
    )
    if 0 < parts < n:
        advice.append(f"the network split by region into parts of at most about {parts:,} nodes")
    return advice


def check_memory(
    n_nodes: int,
    n_links: int,
    *,
    zones: int = 16,
    task: str = "zoning",
    loaded: bool = False,
    what: str = "this run",
    budget: MemoryBudget | None = None,
) -> MemoryEstimate:
    """Refuse a run that would not fit in the memory this process may still take.

    Parameters
    ----------
    n_nodes, n_links : int
        Counts of the network (edge-table rows may stand in for links).
    zones : int, default=16
        Zone count, or eigenpairs for ``task='spectrum'``.
    task : {'zoning', 'spectrum', 'reading'}, default='zoning'
        Which stages will run (:data:`TASK_STAGES`).
    loaded : bool, default=False
        Whether this process already holds the network: then the reading
        stages are over and the memory holding it is counted as the
        process's own (up to :data:`NETWORK_HELD`), not as needed again.
    what : str, default='this run'
        What is about to run, for the message (e.g. ``"zones edges.csv"``).
    budget : MemoryBudget, optional
        By default :func:`memory_budget`; nothing is checked when no bound
        is known.

    Returns
    -------
    MemoryEstimate
        The estimate of the stages still to run.

    Raises
    ------
    ResourceError
        When the estimated peak, less what the process already holds,
        exceeds :data:`MEMORY_FRACTION` of the headroom; the message names
        the stage that needs the most, the estimate, the tightest bound and
        what the user can change.

    Examples
    --------
    >>> plenty = MemoryBudget(2**28, (MemoryLimit("test", None, 64 * 2**30),))
    >>> check_memory(1_000, 2_000, budget=plenty).largest in TASK_STAGES["zoning"]
    True
    """
    estimate = estimate_memory(n_nodes, n_links, zones=zones, task=task)
    if check_bool(loaded, "loaded"):
        remaining = tuple(pair for pair in estimate.stages if pair[0] not in READING_STAGES)
        largest, peak = max(remaining, key=lambda pair: pair[1])
        estimate = replace(estimate, stages=remaining, peak=peak, largest=largest)
    if budget is None:
        budget = memory_budget()
    headroom = budget.headroom
    if headroom is None:
        return estimate
    owned: float = MEMORY_BASE_BYTES
    if loaded:
        owned += NETWORK_HELD.bytes_for(estimate.n_nodes, estimate.n_links, 0)
    held = min(budget.resident, owned) if budget.resident is not None else 0
    needed = max(0, estimate.peak - held)
    if needed <= MEMORY_FRACTION * headroom:
        return estimate
    allowed = held + MEMORY_FRACTION * headroom
    advice = _advice(estimate, allowed)
    advice.append(
        f"a machine or container with at least {_gib(needed / MEMORY_FRACTION)} more available"
    )
    raise ResourceError(
        f"{what}: a network of {estimate.n_nodes:,} nodes and {estimate.n_links:,} links "
        f"needs about {_gib(estimate.peak)} of memory at peak (estimate), the most in the "
        f"stage '{estimate.largest}'; this process holds {_gib(held)} of it and may take "
        f"{budget.describe()}, of which {MEMORY_FRACTION:.0%} may be planned; what would "
        f"fit: {'; or '.join(advice)}"
    )


# ------------------------------------------------------------- before reading
def _sampled_rows(path: Path, size: int) -> int | None:
    """Rows of a text table estimated from samples of its start, middle and end.

    The widest sample (most bytes per row) is used, so later rows with longer
    ids make the count smaller, never larger: the estimate errs low.
    """
    widest = 0.0
    header = 0
    with open(path, "rb") as handle:
        for offset in sorted(
            {0, max(0, size // 2 - SAMPLE_BYTES // 2), max(0, size - SAMPLE_BYTES)}
        ):
            handle.seek(offset)
            chunk = handle.read(SAMPLE_BYTES)
            if b"\0" in chunk or chunk[:2] == b"\x1f\x8b":  # binary or gzip: no estimate
                return None
            if offset:
                chunk = chunk[chunk.find(b"\n") + 1 :]
            else:
                header = chunk.find(b"\n") + 1
                chunk = chunk[header:]
            whole = chunk[: chunk.rfind(b"\n") + 1]
            lines = whole.count(b"\n")
            if lines:
                widest = max(widest, len(whole) / lines)
    if not widest:
        return 1 if size > header else 0
    return math.floor((size - header) / widest)


def table_rows(path: str | os.PathLike[str]) -> int | None:
    """Rows of an edge table, estimated without reading it; None when unknown.

    Parquet: the count in the file's metadata (needs pyarrow). CSV and other
    text: the file size over the widest bytes-per-row of three samples. Other
    formats (GraphML, GeoJSON, compressed files): None.
    """
    file = Path(path)
    try:
        if not file.is_file():
            return None
        size = file.stat().st_size
        if file.suffix.lower() in {".parquet", ".pq"}:
            try:
                import pyarrow.parquet as pq
            except ImportError:
                return None
            return int(pq.ParquetFile(file).metadata.num_rows)
        if file.suffix.lower() in {".graphml", ".xml", ".geojson", ".json", ".gz", ".zip"}:
            return None
        return _sampled_rows(file, size)
    except (OSError, ValueError):  # the reader will say what is wrong with the file
        return None


def check_table_memory(
    path: str | os.PathLike[str],
    *,
    zones: int = 16,
    task: str = "zoning",
    what: str = "this run",
    budget: MemoryBudget | None = None,
) -> MemoryEstimate | None:
    """Before reading ``path``: refuse when even the smallest plausible network won't fit.

    The links are the estimated rows (:func:`table_rows`); the nodes the
    fewest that many links can plausibly join: a mean degree of at most
    :data:`PLAUSIBLE_MEAN_DEGREE`, and never fewer than a complete graph
    needs (``n (n - 1) / 2 >= m``). So only a file that cannot fit as any
    such network is refused, before the time and memory of reading it.
    Returns None when the rows cannot be estimated.
    """
    rows = table_rows(path)
    if not rows:
        return None
    complete = math.ceil((1 + math.sqrt(1 + 8 * rows)) / 2)
    fewest = max(complete, math.ceil(2 * rows / PLAUSIBLE_MEAN_DEGREE))
    said = (
        f"{what} (before reading: about {rows:,} rows, so at least {fewest:,} nodes at a mean "
        f"degree of at most {PLAUSIBLE_MEAN_DEGREE})"
    )
    return check_memory(fewest, rows, zones=zones, task=task, what=said, budget=budget)


# ------------------------------------------------------------- out of memory
#: The stage a command is running, for the message when memory runs out
#: anyway (set by the command line's progress steps).
_RUNNING = ["starting"]

_NUMPY_ALLOCATION = re.compile(r"Unable to allocate ([\d.]+) ?(bytes|[KMGTPE]iB)")
_UNITS = {"bytes": 1, **{f"{p}iB": 2 ** (10 * (i + 1)) for i, p in enumerate("KMGTPE")}}


def note_stage(stage: str) -> None:
    """Record the stage now running (named in the message if memory runs out)."""
    _RUNNING[0] = stage


def running_stage() -> str:
    """The stage last recorded by :func:`note_stage`."""
    return _RUNNING[0]


def requested_bytes(error: BaseException) -> int | None:
    """Bytes a failed allocation asked for, from numpy's ``Unable to allocate 74.5 GiB``."""
    match = _NUMPY_ALLOCATION.search(str(error))
    if match is None:
        return None
    return round(float(match[1]) * _UNITS[match[2]])


def out_of_memory(error: MemoryError, *, budget: MemoryBudget | None = None) -> ResourceError:
    """A :class:`ResourceError` that names the stage that ran out of memory and the need.

    For a ``MemoryError`` the guard did not foresee (a shape the model does
    not cover, another process taking memory meanwhile): the stage last
    noted by :func:`note_stage`, the bytes the failed allocation asked for
    when numpy said (:func:`requested_bytes`), what the process held and
    could still take (:func:`memory_budget`), and what the user can change.

    Examples
    --------
    >>> error = out_of_memory(
    ...     MemoryError("Unable to allocate 2.00 GiB for an array"), budget=MemoryBudget(None, ())
    ... )
    >>> "an allocation of 2.0 GiB failed" in str(error)
    True
    """
    if budget is None:
        budget = memory_budget()
    asked = requested_bytes(error)
    need = f"an allocation of {_gib(asked)} failed" if asked is not None else "an allocation failed"
    held = f"this process held {_gib(budget.resident)} and" if budget.resident else "it"
    parquet = "give the edge table as Parquet, " if running_stage() == "reading" else ""
    return ResourceError(
        f"ran out of memory in the stage '{running_stage()}': {need}; {held} could take "
        f"{budget.describe()}; to fit, ask for fewer zones, {parquet}split the "
        "network by region, or run on a machine or container with more memory"
    )
