"""Writing results: CSV tables and the JSON run record, atomically and spreadsheet-safe.

Every file is first written in full to a hidden temporary file in the output
folder (``.<name>.<pid>.<random>.partial``), flushed and synced to disk; only
when all of them are complete are they moved into place with
:func:`os.replace`, which is atomic on POSIX within one file system (POSIX
``rename()``: a reader sees the old or the new file, never neither or a mix;
the Python docs of ``os.replace``). A failure before that point removes the
temporary files and leaves whatever the folder held before untouched.

A set of several files cannot be swapped in one system call, so the commit
is a small protocol, done while holding the folder's lock (``flock(2)`` on the
folder, see :func:`_folder_lock`): concurrent writers into one folder queue, and
each commit is whole.

1. A hidden journal (``.specgraph-commit.<pid>.<token>.json``) listing the
   moves, the backups and the subfolders to create is put in place atomically.
2. Each previous file of a name the commit writes or removes is renamed to a
   hidden backup (``.<name>.<pid>.<token>.backup``).
3. Each temporary file is renamed to its result name.
4. The backups, then the journal, are deleted.

Until step 3 ends the previous files all exist, under their own or their
backup names, so any failure (a name taken by a folder, a locked file, a full
directory) is rolled back: new files back to their temporary names, backups
to their names. The caller gets an :class:`~specgraph.exceptions.OutputError`
and the folder holds exactly its previous files. A process killed outright
(SIGKILL, power cut) leaves a journal; :func:`recover_outputs`, which every
:func:`write_outputs` call runs first, undoes a commit killed before its
first move and finishes one killed after it, and deletes the stale temporary
and backup files of processes that no longer run.

Text cells of every CSV are neutralized against spreadsheet formulas (a
leading ``=``, ``+``, ``-``, ``@``, tab or carriage return gets a leading
single quote, see :data:`FORMULA_TRIGGERS` and :func:`specgraph._guard.
neutralize_text`); numeric columns are written as they are. A node id such as
``-12`` is text and is written ``'-12``; :func:`specgraph._guard.restore_text`
gives the id back.

Floats are written with Python's shortest round-trip representation, so the
same numbers always give the same bytes.
"""

from __future__ import annotations

import contextlib
import csv
import hashlib
import json
import os
import platform
import re
import secrets
import sys
import tempfile
import time
from collections.abc import Iterable, Iterator, Mapping, Sequence
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import Any, Literal, cast

import numpy as np
import pandas as pd

from . import _figures
from ._figure_files import FIGURES_FOLDER, figure_names
from ._formats import (
    FRAGMENTS_FILE,
    boundary_geojson,
    jsonable,
    nodes_geojson,
    parquet_available,
    parquet_bytes,
    zones_geojson,
    zoning_geojson,
    zoning_parquet,
    zoning_tables,
)
from ._guard import FORMULA_ESCAPE, FORMULA_TRIGGERS, neutralize_frame
from ._tables import spectrum_frame
from ._validation import NoneOk, check_param, parameter_error
from .diagnostics import Scorecard
from .eigen import EigenResult
from .exceptions import ConvergenceError, OutputError
from .network import Network
from .zones import Zoning

if sys.platform == "win32":
    import msvcrt
else:
    import fcntl

__all__ = [
    "CAUTION",
    "FORMULA_ESCAPE",
    "FORMULA_TRIGGERS",
    "FRAGMENTS_FILE",
    "LOCK_FILE",
    "LOCK_TIMEOUT",
    "NOT_CONVERGED_FILE",
    "RUN_FILE",
    "RUN_RECORD_KEYS",
    "boundary_geojson",
    "checked_folder",
    "eigen_record",
    "eigen_table",
    "file_checksum",
    "input_record",
    "jsonable",
    "library_versions",
    "nodes_geojson",
    "not_converged_record",
    "parquet_available",
    "parquet_bytes",
    "recover_outputs",
    "run_record",
    "scorecard_tables",
    "write_figures",
    "write_outputs",
    "zones_geojson",
    "zoning_geojson",
    "zoning_parquet",
    "zoning_tables",
]

#: The caution every result carries (README, reports, CLI and run records).
CAUTION = (
    "Decision support only. Before a valve is closed, a breaker opened or a control "
    "perimeter set, validate these zones in a hydraulic, power-flow or traffic model, "
    "and defer to local codes and licensed engineers."
)

#: Bytes read at a time when hashing input files.
_HASH_CHUNK = 1 << 20

#: Name of a commit journal of process ``pid`` in an output folder (``token``:
#: random hex, so two commits of one process never share a name); the pattern
#: also matches the ``.specgraph-commit.<pid>.json`` of earlier versions.
_JOURNAL = ".specgraph-commit.{pid}.{token}.json"
_JOURNAL_PATTERN = re.compile(r"^\.specgraph-commit\.(?P<pid>\d+)(?:\.[0-9a-f]+)?\.json$")
#: Temporary files of process ``pid``: ``.<name>.<pid>.<random>.partial``
#: (the journal's own temporary file included).
_PARTIAL_PATTERN = re.compile(r"^\..+\.(?P<pid>\d+)\.[^.]+\.partial$")
#: A previous file set aside during a commit: ``.<name>.<pid>.<token>.backup``.
_BACKUP_PATTERN = re.compile(r"^\..+\.(?P<pid>\d+)\.[^.]+\.backup$")

#: The lock file of an output folder, used only where the folder itself cannot
#: be locked (a network file system, Windows): hidden, and kept between runs (it
#: holds no result; deleting it while no run writes is harmless). A writer holds
#: an exclusive lock on the folder (``flock(2)``), or on this file, while it
#: recovers and commits, so two writers into one folder commit one after the other.
LOCK_FILE = ".specgraph.lock"
#: Seconds a writer waits for another writer's commit in the same folder before
#: refusing (OutputError). A commit holds the lock only while it recovers and
#: renames (the files are written before): measured 3 ms for the files of a
#: 10,000-row result and 8-14 ms for a 1,000,000-row one with GeoJSON and
#: figures (8 files, about 90 MB) on a shared 2-core machine. A wait of a
#: minute is thus a writer that is stuck (stopped, or on a hung network file
#: system), not a busy one. Queueing rather than refusing, because concurrent
#: writers (threads of a batch script, two runs started together) are not
#: mistakes: both calls succeed and the folder holds the later commit whole; the
#: timeout keeps a stuck writer from hanging the next one for ever.
LOCK_TIMEOUT = 60.0
#: Seconds between two tries of a lock held by another writer (a commit takes
#: milliseconds, so a waiter starts within about this much of its end).
_LOCK_POLL = 0.005

#: The run record of every command's result.
RUN_FILE = "run.json"
#: The only file a run whose eigen-solve missed its tolerance writes: the
#: partial figures, next to (never in place of) the result of an earlier run.
NOT_CONVERGED_FILE = "not-converged.json"

#: Libraries whose versions every run record carries: specgraph, its dependencies
#: (pyproject.toml) and the optional pyarrow ("not installed" when absent).
_LIBRARIES = (
    "specgraph",
    "numpy",
    "scipy",
    "pandas",
    "scikit-learn",
    "networkx",
    "pyamg",
    "numba",
    "defusedxml",
    "tqdm",
    "matplotlib",
    "shapely",
    "pyarrow",
)

#: Top-level keys of every run record (:func:`run_record`), in order; a
#: command's own results come between ``decisions`` and ``warnings``.
RUN_RECORD_KEYS = (
    "specgraph_run",
    "command",
    "inputs",
    "parameters",
    "network",
    "decisions",
    "warnings",
    "versions",
    "caution",
)


def file_checksum(path: str | Path) -> str:
    """SHA-256 of a file, as ``"sha256:<hex>"``."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(_HASH_CHUNK), b""):
            digest.update(chunk)
    return f"sha256:{digest.hexdigest()}"


def library_versions() -> dict[str, str]:
    """Versions of Python and the libraries a result depends on."""
    found = {"python": platform.python_version()}
    for name in _LIBRARIES:
        try:
            found[name] = version(name)
        except PackageNotFoundError:
            found[name] = "not installed"
    return found


def _portable_notes(notes: Mapping[str, Any]) -> dict[str, Any]:
    """Input notes without file paths: the record's ``inputs`` name the files as given,
    and absolute paths would make records differ between working folders."""
    return {
        key: (
            {k: v for k, v in value.items() if k != "path"} if isinstance(value, Mapping) else value
        )
        for key, value in notes.items()
    }


def _solve_records(zoning: Zoning) -> list[dict[str, Any]]:
    """One record per component solve: the work done and the eigengap after its zones."""
    records = []
    for solve in zoning.solves:
        eig = solve.eigen
        gap, relative = _gap_after(eig.values, solve.zones)
        records.append(
            {
                "component": solve.component,
                "nodes": int(solve.nodes.size),
                "zones": solve.zones,
                "method": eig.method,
                "pairs": eig.k,
                "iterations": eig.iterations,
                "matvecs": eig.matvecs,
                "max_residual": eig.max_residual,
                "tol": eig.tol,
                "converged": eig.converged,
                "eigengap_after_zones": gap,
                "relative_eigengap": relative,
            }
        )
    return records


def _gap_after(values: np.ndarray, k: int) -> tuple[float | None, float | None]:
    """The eigengap after the ``k``-th smallest eigenvalue and the relative gap.

    Both come from the one engine, :func:`specgraph._figures.eigengaps` and
    :func:`specgraph._figures.relative_gap`; each is None where it is not
    defined (no ``(k+1)``-th eigenvalue was computed; the relative gap also
    when :math:`\\lambda_{k+1} \\le 0`, as with a Bethe Hessian).
    """
    if values.size <= k:
        return None, None
    gap = float(_figures.eigengaps(values)[k - 1])
    relative = float(_figures.relative_gap(values[k - 1], values[k]))
    return gap, relative if np.isfinite(relative) else None


def run_record(
    zoning: Zoning | None = None,
    *,
    command: Sequence[str] | None = None,
    inputs: Iterable[Mapping[str, Any]] = (),
    network: Network | None = None,
    parameters: Mapping[str, Any] | None = None,
    decisions: Mapping[str, Any] | None = None,
    warnings: Iterable[str] = (),
    results: Mapping[str, Any] | None = None,
) -> dict[str, Any]:
    """The JSON run record of any result: what went in, what was decided, what came out.

    Every command's ``run.json`` is built here, so every record has the keys
    of :data:`RUN_RECORD_KEYS`, in that order, with the command's own results
    (``results``) between ``decisions`` and ``warnings``. No timestamps and no
    absolute paths are recorded, so the same input, options and seed give the
    same bytes wherever and whenever they run.

    Parameters
    ----------
    zoning : Zoning, optional
        A zoning supplies the network, parameters, decisions and warnings,
        and the results ``eigen_solves`` and ``scores`` (given ``results``
        follow them, given ``warnings`` follow the zoning's).

    Returns
    -------
    dict
        JSON-ready (:func:`jsonable`): ``specgraph_run`` (format version 1),
        ``command``, ``inputs`` (role, path as given, checksum:
        :func:`input_record`), ``parameters`` (the options of the library
        call), ``network`` (size, components, what reading changed; None
        without a network), ``decisions`` (choices made on the user's behalf,
        each with its ``reason``), the results, ``warnings``, ``versions``
        (:func:`library_versions`) and ``caution``.

    Raises
    ------
    ParameterError
        ``network``, ``parameters`` or ``decisions`` given with a zoning,
        or a results key that is one of :data:`RUN_RECORD_KEYS`.

    Other Parameters
    ----------------
    command : sequence of str, optional
        The command line that produced the result.
    inputs : iterable of mapping, default=()
        The input files (:func:`input_record`).
    network : Network, optional
    parameters, decisions : mapping, optional
        Empty when not given.
    warnings : iterable of str, default=()
    results : mapping, optional
        The command's own figures, by key.

    Examples
    --------
    >>> from specgraph import find_zones, gallery
    >>> record = run_record(find_zones(gallery.barbell(5), 2, rng=0), command=["example"])
    >>> [key for key in record if key not in RUN_RECORD_KEYS]
    ['eigen_solves', 'scores']
    """
    found = dict(results or {})
    if zoning is not None:
        _check_left_to_zoning(network=network, parameters=parameters, decisions=decisions)
        network, parameters, decisions = zoning.network, zoning.parameters, zoning.decisions
        warnings = [*zoning.warnings, *warnings]
        found = {"eigen_solves": _solve_records(zoning), "scores": zoning.scores, **found}
    _check_result_keys(found)
    return jsonable(
        {
            "specgraph_run": 1,
            "command": None if command is None else list(command),
            "inputs": list(inputs),
            "parameters": dict(parameters or {}),
            "network": None if network is None else _network_record(network),
            "decisions": dict(decisions or {}),
            **found,
            "warnings": list(warnings),
            "versions": library_versions(),
            "caution": CAUTION,
        }
    )


#: What ``network``, ``parameters`` and ``decisions`` of :func:`run_record` may
#: be when a zoning is given: the zoning supplies all three.
_LEFT_TO_ZONING = [
    NoneOk(
        "None when a zoning is given (run_record takes the network, parameters and "
        "decisions from the zoning; give either a zoning or network=, parameters= and "
        "decisions=)"
    )
]


def _check_left_to_zoning(**given: Any) -> None:
    """Refuse a network, parameters or decisions given beside a zoning."""
    for name, value in given.items():
        check_param(value, name, _LEFT_TO_ZONING)


def _check_result_keys(found: Mapping[str, Any]) -> None:
    """Refuse results keyed like one of the record's own keys."""
    clash = sorted(set(found) & set(RUN_RECORD_KEYS))
    if clash:
        raise parameter_error(
            "results", f"keyed other than the record's own keys {RUN_RECORD_KEYS}", clash
        )


def input_record(role: str, path: str | Path, *, shown: str | None = None) -> dict[str, str]:
    """One entry of a record's ``inputs``: ``role``, ``path`` (as given) and ``checksum``.

    ``shown`` replaces the path in the record (the demo's bundled files are
    recorded as ``<demo>/NAME``, whatever the installation folder).
    """
    return {
        "role": role,
        "path": str(path) if shown is None else shown,
        "checksum": file_checksum(path),
    }


def _network_record(net: Network) -> dict[str, Any]:
    return {
        "nodes": net.n_nodes,
        "links": net.n_links,
        "components": net.n_components,
        "has_coordinates": net.coordinates is not None,
        "has_sizes": net.sizes is not None,
        "input_policy": _portable_notes(net.notes),
    }


def eigen_record(result: EigenResult) -> dict[str, Any]:
    """Figures of one eigen-solve for a run record: method, pairs, tolerance, work."""
    return {
        "method": result.method,
        "pairs": result.k,
        "tol": result.tol,
        "max_residual": result.max_residual,
        "matvecs": result.matvecs,
        "iterations": result.iterations,
        "converged": result.converged,
    }


def eigen_table(result: EigenResult, *, component: int | None = None) -> pd.DataFrame:
    """``spectrum.csv`` of one eigen-solve: the layout ``zones`` writes too.

    Columns ``index`` (from 1: eigenvalues are numbered from 1 everywhere),
    ``eigenvalue``, ``residual``, ``component`` (the connected component
    solved; empty for a solve of a whole network of several components) and
    ``gap_after`` (:func:`specgraph._tables.spectrum_frame`).
    """
    return spectrum_frame(result.values, result.residuals, component=component)


def scorecard_tables(
    network: Network, labels: np.ndarray, card: Scorecard
) -> dict[str, pd.DataFrame]:
    """The tables of a scored zoning, by file name.

    ``zone_scores.csv`` (:attr:`Scorecard.zones`), ``node_importance.csv``
    (``node, zone, importance``, when the card has node importance) and
    ``unassigned.csv`` (``node``: nodes in no zone, when there are any).
    """
    files = {"zone_scores.csv": card.zones}
    if card.node_importance is not None:
        files["node_importance.csv"] = pd.DataFrame(
            {"node": network.node_ids, "zone": labels, "importance": card.node_importance}
        )
    if len(card.unassigned):
        files["unassigned.csv"] = pd.DataFrame({"node": list(card.unassigned)})
    return files


def not_converged_record(error: ConvergenceError, *, command: Sequence[str]) -> dict[str, Any]:
    """The record of an eigen-solve that missed its tolerance: its partial figures only.

    Written as :data:`NOT_CONVERGED_FILE` next to (never in place of) the result
    of an earlier run, which its ``other_files`` sentence points to; the next run
    with a result removes it (:func:`write_outputs`).
    """
    partial = error.partial
    return jsonable(
        {
            "specgraph_run": 1,
            "command": list(command),
            "converged": False,
            "message": str(error),
            "eigen_solve": {
                "method": partial.method,
                "tol": partial.tol,
                "values": partial.values,
                "residuals": partial.residuals,
                "matvecs": partial.matvecs,
                "iterations": partial.iterations,
            },
            "other_files": (
                "this run wrote no zones, boundary or spectrum; other result files in "
                "this folder, if any, are those of an earlier run (their run.json says "
                "which)"
            ),
            "caution": CAUTION,
        }
    )


#: What :func:`write_outputs` can write: a table (CSV), a mapping (JSON), text
#: (written as it is, UTF-8: HTML reports) or bytes (written as they are: figures, Parquet).
Content = pd.DataFrame | Mapping[str, Any] | str | bytes


def _write_temp(folder: Path, name: str, content: Content) -> Path:
    """Write ``content`` to a hidden temporary file in ``folder``; remove it on failure."""
    binary = isinstance(content, bytes)
    with tempfile.NamedTemporaryFile(
        "wb" if binary else "w",
        dir=folder,
        prefix=f".{name}.{os.getpid()}.",
        suffix=".partial",
        delete=False,
        encoding=None if binary else "utf-8",
        newline=None if binary else "",
    ) as handle:
        temp = Path(handle.name)
        # The file object itself: writers that write row by row (pandas' CSV writer
        # calls write once per row) skip the temporary-file wrapper's forwarding
        # function (0.19 s of 0.75 s writing a 10^6-row zones.csv).
        stream = handle.file
        try:
            if isinstance(content, bytes | str):
                stream.write(content)
            elif isinstance(content, pd.DataFrame):
                table = neutralize_frame(content)
                table.to_csv(stream, index=False, lineterminator="\n", quoting=_quoting(table))
            elif name.endswith(".geojson"):  # compact: GeoJSON files hold every node
                json.dump(content, stream, separators=(",", ":"), allow_nan=False)
                stream.write("\n")
            else:
                json.dump(content, stream, indent=2, allow_nan=False)
                stream.write("\n")
            stream.flush()
            os.fsync(handle.fileno())
        except BaseException:
            handle.close()
            temp.unlink(missing_ok=True)
            raise
    return temp


def _quoting(table: pd.DataFrame) -> Literal[0, 2]:
    """Quote every text cell when one holds a carriage return, else only where needed.

    Python's csv writer quotes a field holding a line break only for the
    characters of its line terminator (``"\\n"`` here), so a bare ``"\\r"``
    in an id would be written unquoted and end the row early in every reader.
    Tables with such a cell (rare) are written with all text quoted instead.
    """
    texts = [table.columns.to_series()]
    for position in range(table.shape[1]):
        column = table.iloc[:, position]
        if isinstance(column.dtype, pd.CategoricalDtype):
            column = column.cat.categories.to_series()
        texts.append(column)
    for column in texts:
        is_text = pd.api.types.is_object_dtype(column.dtype) or pd.api.types.is_string_dtype(
            column.dtype
        )
        if is_text and column.str.contains("\r", regex=False, na=False).any():
            return cast(Literal[2], csv.QUOTE_NONNUMERIC)
    return cast(Literal[0], csv.QUOTE_MINIMAL)


def _default_file_mode() -> int:
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


def _sync_folder(folder: Path) -> None:
    """Make renames in ``folder`` durable (POSIX; a no-op where folders cannot be opened)."""
    if os.name != "posix":
        return
    with contextlib.suppress(OSError):
        descriptor = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(descriptor)
        finally:
            os.close(descriptor)


def _process_gone(pid: int) -> bool:
    """True when no process ``pid`` exists (POSIX); False when unsure (nothing live is touched)."""
    if os.name != "posix" or pid == os.getpid() or pid <= 0:
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return True
    except OSError:  # e.g. PermissionError: it exists, under another user
        return False
    return False


def _flat(name: str) -> str:
    """A relative output name as a hidden file stem (``figures/a.png``: ``figures_a.png``)."""
    return name.replace("/", "_")


def _inside(folder: Path, name: str) -> Path:
    """``folder / name`` for a journal's relative name; refuse one that leaves the folder."""
    relative = Path(name)
    if relative.is_absolute() or ".." in relative.parts or not relative.parts:
        raise ValueError(f"not a name inside the output folder: {name!r}")
    return folder / relative


@contextlib.contextmanager
def _folder_lock(folder: Path) -> Iterator[None]:
    """Hold the output folder's lock; queue up to :data:`LOCK_TIMEOUT` s for it.

    POSIX: ``flock(2)`` with ``LOCK_EX | LOCK_NB`` on the folder itself (as the
    util-linux ``flock(1)`` command locks a directory), retried every
    :data:`_LOCK_POLL` s, so no file is added to the folder. flock locks belong
    to an open file description, so two threads of one process that each open
    the folder exclude each other as two processes do (``fcntl``/``lockf``
    record locks would not: they belong to the process); the kernel releases
    the lock when its holder exits or is killed, so a dead writer never blocks
    the folder. Where a folder cannot be locked (NFS emulates flock with record
    locks, which need a file open for writing) the hidden :data:`LOCK_FILE` in
    the folder is locked instead, and so on Windows (no ``fcntl``), with
    ``msvcrt.locking`` of its first byte and the same retries.
    """
    descriptor, path, held = _lock_handle(folder)
    try:
        deadline = time.monotonic() + LOCK_TIMEOUT
        while not held and not _try_lock(descriptor, path):
            if time.monotonic() >= deadline:
                raise OutputError(
                    f"another writer has held the output folder '{folder}' for "
                    f"{LOCK_TIMEOUT:g} s (a lock on '{path}'); wait for the other run to "
                    "finish and run again, or choose another output folder"
                )
            time.sleep(_LOCK_POLL)
        try:
            yield
        finally:
            _unlock(descriptor)
    finally:
        os.close(descriptor)


def _lock_handle(folder: Path) -> tuple[int, Path, bool]:
    """What to lock: the folder (POSIX, locked at once when free) or :data:`LOCK_FILE`.

    Returns the open descriptor, its path and whether the lock is already held.
    """
    if sys.platform != "win32":
        with contextlib.suppress(OSError):
            descriptor = os.open(folder, os.O_RDONLY)
            try:
                fcntl.flock(descriptor, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                return descriptor, folder, False
            except OSError:  # this file system locks no folder: the lock file below
                os.close(descriptor)
            else:
                return descriptor, folder, True
    path = folder / LOCK_FILE
    try:
        return os.open(path, os.O_RDWR | os.O_CREAT, 0o666), path, False
    except OSError as exc:
        raise OutputError(
            f"cannot open the lock file '{path}' of the output folder: "
            f"{exc.strerror or exc}; choose another output folder"
        ) from exc


def _try_lock(descriptor: int, path: Path) -> bool:
    """Take the lock without waiting; False when another writer holds it."""
    try:
        if sys.platform == "win32":
            os.lseek(descriptor, 0, os.SEEK_SET)
            msvcrt.locking(descriptor, msvcrt.LK_NBLCK, 1)
        else:
            fcntl.flock(descriptor, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except BlockingIOError:
        return False
    except PermissionError:  # msvcrt: the byte is locked by another writer
        if sys.platform == "win32":
            return False
        raise
    except OSError as exc:  # ENOLCK: a network file system without a lock service
        raise OutputError(
            f"cannot lock the output folder (lock file '{path}'): {exc.strerror or exc}; "
            "write into a folder on a local disk"
        ) from exc
    return True


def _unlock(descriptor: int) -> None:
    """Release the lock (closing the file would release it too)."""
    with contextlib.suppress(OSError):
        if sys.platform == "win32":
            os.lseek(descriptor, 0, os.SEEK_SET)
            msvcrt.locking(descriptor, msvcrt.LK_UNLCK, 1)
        else:
            fcntl.flock(descriptor, fcntl.LOCK_UN)


class _Commit:
    """One commit of staged files into an output folder: backups first, then the moves.

    The plan is written as the journal (:data:`_JOURNAL`) before anything in the
    folder changes: ``moves`` (temporary file -> result name), ``backups`` (result
    name -> hidden backup name, for every name the commit replaces or removes) and
    ``folders`` (subfolders it creates). The commit renames each existing file of
    those names to its backup, then each temporary file to its result name, then
    deletes the backups and the journal. Until the last move the previous files
    exist (under their own or their backup names), so a failure puts them back
    (:meth:`roll_back`); after the last move only deletions remain.
    """

    def __init__(
        self, folder: Path, staged: list[tuple[Path, str]], stale: list[str], token: str
    ) -> None:
        self.folder = folder
        self.moves = [(temp.name, name) for temp, name in staged]
        pid = os.getpid()
        self.backups = [
            (name, f".{_flat(name)}.{pid}.{token}.backup")
            for name in dict.fromkeys([*(name for _, name in staged), *stale])
        ]
        self.subfolders = sorted({str(Path(name).parent) for _, name in staged} - {"."})
        self.journal = folder / _JOURNAL.format(pid=pid, token=token)

    def plan(self) -> dict[str, Any]:
        return {
            "specgraph_commit": 2,
            "moves": [list(move) for move in self.moves],
            "backups": [list(backup) for backup in self.backups],
            "folders": self.subfolders,
        }

    def run(self) -> None:
        """Check the names, write the journal, back up, move; roll back on any failure."""
        self._check_names()
        os.replace(_write_temp(self.folder, self.journal.name, self.plan()), self.journal)
        _sync_folder(self.folder)
        created: list[Path] = []
        try:
            for sub in self.subfolders:
                path = self.folder / sub
                if not path.is_dir():
                    path.mkdir()
                    created.append(path)
            mode = _default_file_mode()
            for name, backup in self.backups:
                _backup(self.folder / name, self.folder / backup)
            for temp, name in self.moves:
                # mkstemp creates files readable by the owner only; give the result the
                # permissions an ordinary open() would have under the user's umask.
                os.chmod(self.folder / temp, mode)
                os.replace(self.folder / temp, self.folder / name)
            self._sync()
        except BaseException as exc:
            self._undo(exc, created)
            if isinstance(exc, OSError):
                where = exc.filename or self.folder
                raise OutputError(
                    f"cannot put the results into folder '{self.folder}' ('{where}': "
                    f"{exc.strerror or exc}); the folder holds its previous files, "
                    "unchanged. Make the folder and its files writable (close them in "
                    "other programs) and run again, or choose another output folder"
                ) from exc
            raise
        for _, backup in self.backups:
            with contextlib.suppress(FileNotFoundError):
                os.unlink(self.folder / backup)
        self.journal.unlink()
        _sync_folder(self.folder)

    def _check_names(self) -> None:
        """Refuse before any change when a result name is a folder (nothing is touched)."""
        for _, name in self.moves:
            path = self.folder / name
            if path.is_dir() and not path.is_symlink():
                raise OutputError(
                    f"'{path}' is a folder, where this run writes a file of that name; "
                    f"nothing in '{self.folder}' was changed. Move or rename that folder, "
                    "or choose another output folder"
                )

    def _sync(self) -> None:
        _sync_folder(self.folder)
        for sub in self.subfolders:
            _sync_folder(self.folder / sub)

    def _undo(self, error: BaseException, created: list[Path]) -> None:
        """Put the previous files back after a failed commit, then drop the journal."""
        try:
            _roll_back(self.folder, self.moves, self.backups)
        except OSError as again:
            raise OutputError(
                f"cannot put the results into folder '{self.folder}' ({error}), and the "
                f"previous files could not all be put back ({again}); the journal "
                f"'{self.journal}' stays so that the next run into this folder finishes "
                "the restore: fix the cause and run again"
            ) from error
        for path in reversed(created):
            with contextlib.suppress(OSError):
                path.rmdir()
        self._sync()
        self.journal.unlink(missing_ok=True)


def _backup(path: Path, backup: Path) -> None:
    """Move a previous file out of the way (a folder of a removed name is not ours: kept)."""
    if path.is_dir() and not path.is_symlink():
        return
    with contextlib.suppress(FileNotFoundError):  # no previous file of that name
        os.replace(path, backup)


def _roll_back(
    folder: Path, moves: Sequence[tuple[str, str]], backups: Sequence[tuple[str, str]]
) -> None:
    """Undo a commit: new files back to their temporary names, backups to their names.

    A move is done when its temporary file is gone; its result is then the new
    file. Every backup that exists is a previous file. Temporary files are then
    deleted. Raises OSError when a rename fails (the journal then stays).
    """
    for temp, name in reversed(moves):
        source, target = folder / temp, _inside(folder, name)
        if not source.exists() and os.path.lexists(target):
            os.replace(target, source)
    for name, backup in reversed(backups):
        source = folder / backup
        if os.path.lexists(source):
            os.replace(source, _inside(folder, name))
    for temp, _ in moves:
        (folder / temp).unlink(missing_ok=True)


def _roll_forward(
    folder: Path, moves: Sequence[tuple[str, str]], backups: Sequence[tuple[str, str]]
) -> list[Path]:
    """Finish a commit: the remaining moves, then delete the backups. Returns the moved files."""
    finished = []
    mode = _default_file_mode()
    for temp, name in moves:
        source, target = folder / temp, _inside(folder, name)
        if source.exists():
            os.chmod(source, mode)
            os.replace(source, target)
            finished.append(target)
    for _, backup in backups:
        (folder / backup).unlink(missing_ok=True)
    return finished


def _recover_journal(folder: Path, journal: Path) -> list[Path]:
    """Finish or undo the commit of one journal; delete it. Returns the files put in place.

    A commit whose moves had not started is undone (its backups are put back);
    one whose moves had started is finished, or undone when a move fails.
    Journals of format 1 (moves and ``remove`` only, no backups) are finished.
    """
    try:
        plan = json.loads(journal.read_text(encoding="utf-8"))
        moves = [(Path(str(temp)).name, str(name)) for temp, name in plan["moves"]]
        backups = [(str(name), Path(str(b)).name) for name, b in plan.get("backups", [])]
        removed = [str(name) for name in plan.get("remove", [])]
        for _, name in [*moves, *backups]:
            _inside(folder, name)
    except (OSError, ValueError, KeyError, TypeError, AttributeError):
        return []  # not ours after all, or unreadable: leave it for a person to look at
    started = any(not (folder / temp).exists() for temp, _ in moves)
    finished: list[Path] = []
    try:
        if started or not backups:
            try:
                finished = _roll_forward(folder, moves, backups)
            except OSError:
                if not backups:  # format 1 kept no previous files: nothing to undo to
                    raise
                _roll_back(folder, moves, backups)
                finished = []
        else:
            _roll_back(folder, moves, backups)
        for name in removed:
            path = _inside(folder, name)
            if not (path.is_dir() and not path.is_symlink()):
                path.unlink(missing_ok=True)
    except OSError as exc:
        raise OutputError(
            f"folder '{folder}' holds an unfinished commit of an earlier run (journal "
            f"'{journal}') that cannot be finished or undone: {exc.strerror or exc} "
            f"('{exc.filename}'); fix the cause (a folder or unwritable file of that "
            "name) and run again"
        ) from exc
    _sync_folder(folder)
    for sub in {Path(name).parent for _, name in moves} - {Path(".")}:
        _sync_folder(folder / sub)
    journal.unlink(missing_ok=True)
    return finished


def _recover(folder: Path) -> list[Path]:
    """:func:`recover_outputs` with the folder's lock held by the caller."""
    finished: list[Path] = []
    names = sorted(entry.name for entry in os.scandir(folder))
    for name in names:
        match = _JOURNAL_PATTERN.match(name)
        if match is None:
            continue
        # Every writer holds the lock from its journal's creation to its
        # deletion, so under the lock every journal is one whose writer died
        # (its pid may even be in use again by another process) or whose undo
        # failed: each is resolved.
        finished += _recover_journal(folder, folder / name)
    # Temporary and backup files of a journal left in place (unreadable, or of a
    # live process) are that journal's to resolve: kept.
    held = {match["pid"] for match in map(_JOURNAL_PATTERN.match, os.listdir(folder)) if match}
    for name in names:
        match = _PARTIAL_PATTERN.match(name) or _BACKUP_PATTERN.match(name)
        if match is not None and match["pid"] not in held and _process_gone(int(match["pid"])):
            with contextlib.suppress(FileNotFoundError):
                (folder / name).unlink()
    return finished


def recover_outputs(folder: str | Path) -> list[Path]:
    """Finish or undo what killed writers left in ``folder``.

    With the folder's lock held (so no writer is committing), each commit
    journal is resolved: a commit killed before its first
    move is undone (the previous files, renamed to hidden backups, are put
    back); one killed after it is finished (the remaining moves are done, the
    backups and the files of earlier runs it removes are deleted; if a move
    fails, the commit is undone instead). Then the stale hidden ``.partial``
    and ``.backup`` files of processes that no longer run are deleted; the
    temporary files of running processes (writers still staging) are left
    alone. :func:`write_outputs` calls this
    first; call it before reading a folder that a killed run may have written.

    Parameters
    ----------
    folder : str or Path
        An output folder; a missing folder is left missing, and a folder
        without hidden leftovers is not locked.

    Returns
    -------
    list of Path
        The result files put in place by finishing journals.

    Raises
    ------
    OutputError
        A journal can be neither finished nor undone (the message names it
        and the cause), or the lock was not had within :data:`LOCK_TIMEOUT` s.
    """
    folder = Path(folder)
    if not folder.is_dir():
        return []
    leftovers = (
        _JOURNAL_PATTERN.match(name) or _PARTIAL_PATTERN.match(name) or _BACKUP_PATTERN.match(name)
        for name in os.listdir(folder)
    )
    if not any(leftovers):
        return []
    with _folder_lock(folder):
        return _recover(folder)


def checked_folder(folder: str | Path) -> Path:
    """``folder`` as a Path, or the refusal of an empty name or a root folder.

    An empty name would write into the current folder and a root folder
    (``/``, ``C:\\``) among the system's own files; neither is what a user
    naming an output folder means.

    Raises
    ------
    OutputError
        For an empty name or a root folder.

    Examples
    --------
    >>> checked_folder("quillmere-zones").name
    'quillmere-zones'
    """
    if not str(folder).strip():
        raise OutputError("the output folder is empty; name a folder, e.g. quillmere-zones")
    path = Path(folder)
    resolved = path.resolve()
    if resolved == Path(resolved.anchor):
        raise OutputError(
            f"the output folder {str(folder)!r} is the root of the file system; name a folder "
            "of its own, e.g. quillmere-zones"
        )
    return path


def write_outputs(
    folder: str | Path,
    files: Mapping[str, Content],
    *,
    remove: Iterable[str] = (),
    figures: Mapping[str, bytes] | None = None,
) -> list[Path]:
    """Write tables (CSV), mappings (JSON), text and bytes into ``folder``, all or nothing.

    Text cells of the tables are neutralized against spreadsheet formulas
    (see the module notes); numeric cells are written unchanged. Every file is
    staged as a hidden temporary file first; then, holding the folder's lock
    (waiting up to :data:`LOCK_TIMEOUT` s for another writer), leftovers of
    killed writers are handled (:func:`recover_outputs`) and the files are
    committed: the previous files of the same names are
    renamed to hidden backups, the new ones moved into place, the backups
    deleted. Any failure on the way puts the previous files back, so the
    folder holds either this call's files or exactly what it held before.

    Parameters
    ----------
    folder : str or Path
        Created if missing (with parents).
    files : mapping
        File name to a DataFrame (written as CSV, no index), a mapping
        (written as JSON), a str (written as it is, UTF-8: an HTML report) or
        bytes (written as they are: a figure, a Parquet file).
    remove : iterable of str, default=()
        File names in ``folder`` that belong to the same kind of result but
        not to this one (e.g. an optional table a previous run wrote); they
        are deleted in the same commit as the new files are put in place, so
        the folder never mixes them with the new result. Names in ``files``
        are ignored here; a folder of such a name is not ours and is kept.
        A result with a run record (:data:`RUN_FILE`) also removes the
        record of an earlier run that did not converge (:data:`NOT_CONVERGED_FILE`).
    figures : mapping of str to bytes, optional
        Figure files (``zone_map.svg``...) for the subfolder
        :data:`~specgraph._figure_files.FIGURES_FOLDER`, in the same commit;
        the figure files of an earlier run that are not among them are
        removed. None (the default) leaves the subfolder alone.

    Returns
    -------
    list of Path
        The files written, in the order given (figures last).

    Raises
    ------
    OutputError
        For an empty folder name or a root folder (:func:`checked_folder`);
        when a file cannot be written or put in place (the folder keeps its
        previous files), when a result name is taken by a folder, or when
        another writer held the folder's lock for :data:`LOCK_TIMEOUT` s.
    """
    folder = checked_folder(folder)
    named: dict[str, Content] = dict(files)
    stale = {Path(name).name for name in remove}
    if figures is not None:
        named.update({f"{FIGURES_FOLDER}/{name}": data for name, data in figures.items()})
        stale |= {f"{FIGURES_FOLDER}/{name}" for name in figure_names() if name not in figures}
    if RUN_FILE in named:
        stale.add(NOT_CONVERGED_FILE)
    removed = sorted(stale - set(named))
    staged: list[tuple[Path, str]] = []
    commit: _Commit | None = None
    try:
        folder.mkdir(parents=True, exist_ok=True)
        for name, content in named.items():
            staged.append((_write_temp(folder, _flat(name), content), name))
        with _folder_lock(folder):
            _recover(folder)
            commit = _Commit(folder, staged, removed, secrets.token_hex(4))
            commit.run()
    except BaseException as exc:
        if commit is None or not commit.journal.exists():  # else the journal needs them
            for temp, _ in staged:
                with contextlib.suppress(OSError):
                    temp.unlink(missing_ok=True)
        if isinstance(exc, OSError) and not isinstance(exc, OutputError):
            raise OutputError(
                f"cannot write results into folder '{folder}': {exc.strerror or exc}; "
                "choose another output folder"
            ) from exc
        raise
    return [folder / name for _, name in staged]


def write_figures(folder: str | Path, files: Mapping[str, bytes]) -> list[Path]:
    """Write figure files into ``folder/figures/``, all or nothing; drop the other figures.

    The same commit as :func:`write_outputs` with only ``figures=`` (commands
    write their figures in the commit of their other files).

    Parameters
    ----------
    folder : str or Path
        The run's output folder.
    files : mapping of str to bytes
        File name (``zone_map.svg``...) to its bytes, as
        :func:`specgraph.report.figure_files` gives them. Empty: only the
        figure files of an earlier run are removed (the subfolder itself is
        left, empty, and not created when missing).

    Returns
    -------
    list of Path
        The files written.

    Raises
    ------
    OutputError
        The folder cannot be written.
    """
    if not files and not (Path(folder) / FIGURES_FOLDER).is_dir():
        return []
    return write_outputs(folder, {}, figures=files)
