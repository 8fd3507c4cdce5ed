"""Writing results: CSV tables and the JSON run record, atomically and spreadsheet-safe.

Every file is first written in full to a hidden temporary file in the output
folder (``.<name>.<pid>.<random>.partial``), flushed and synced to disk; only
when all of them are complete are they moved into place with
:func:`os.replace` (atomic on POSIX within one file system). A failure before
that point removes the temporary files and leaves whatever the folder held
before untouched.

A set of several files cannot be swapped in one system call, so the moment of
commit is itself a file: before the first move, a hidden journal
(``.specgraph-commit.<pid>.json``) listing the moves (and the files of an
earlier result to delete, ``remove=``) is put in place atomically; it is
removed after the last. A process killed outright (SIGKILL,
power cut) therefore leaves either the previous result untouched (killed
before the journal: at most stale hidden ``.partial`` files remain) or a
committed new result whose journal says which moves are still due.
:func:`recover_outputs`, which every :func:`write_outputs` call runs first on
its folder, completes such moves and deletes the stale temporary files and
journals of processes that no longer run. Files of a process that is still
running are never touched, so only concurrent writers into the same folder
can meet each other's files, and each keeps its own.

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
import tempfile
from collections.abc import Iterable, Mapping, Sequence
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

__all__ = [
    "CAUTION",
    "FORMULA_ESCAPE",
    "FORMULA_TRIGGERS",
    "FRAGMENTS_FILE",
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

#: Name of the commit journal of process ``pid`` in an output folder.
_JOURNAL = ".specgraph-commit.{pid}.json"
_JOURNAL_PATTERN = re.compile(r"^\.specgraph-commit\.(?P<pid>\d+)\.json$")
#: Temporary files of process ``pid``: ``.<name>.<pid>.<random>.partial``
#: (the journal's own temporary file included).
_PARTIAL_PATTERN = re.compile(r"^\..+\.(?P<pid>\d+)\.[^.]+\.partial$")

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

    Written as ``not-converged.json`` next to (never in place of) earlier results.
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


def _stage_journal(folder: Path, staged: list[tuple[Path, Path]], stale: list[str]) -> Path:
    """Put the commit journal of ``staged`` in place atomically; return its path."""
    journal = folder / _JOURNAL.format(pid=os.getpid())
    plan = {
        "specgraph_commit": 1,
        "moves": [[temp.name, final.name] for temp, final in staged],
        "remove": stale,
    }
    os.replace(_write_temp(folder, journal.name, plan), journal)
    _sync_folder(folder)
    return journal


def _commit(folder: Path, staged: list[tuple[Path, Path]], stale: list[str], journal: Path) -> None:
    """Move the staged files into place, remove ``stale``, then drop the journal."""
    mode = _default_file_mode()
    for temp, final in staged:
        # mkstemp creates files readable by the owner only; give the result the
        # permissions an ordinary open() would have under the user's umask.
        os.chmod(temp, mode)
        os.replace(temp, final)
    for name in stale:
        (folder / name).unlink(missing_ok=True)
    _sync_folder(folder)
    journal.unlink()


def recover_outputs(folder: str | Path) -> list[Path]:
    """Finish or clean up what killed writers left in ``folder``.

    For the commit journal of each process that no longer runs, the moves it
    lists whose temporary file is still there are done (the new result was
    complete when the journal was written), the files it lists for removal
    are deleted, and the journal is removed. Then
    the stale hidden ``.partial`` files of processes that no longer run are
    deleted. Files of running processes (including this one) are left alone.
    :func:`write_outputs` calls this first; call it before reading a folder
    that a killed run may have written.

    Parameters
    ----------
    folder : str or Path
        An output folder; a missing folder is left missing.

    Returns
    -------
    list of Path
        The result files put in place by completing journals.
    """
    folder = Path(folder)
    if not folder.is_dir():
        return []
    finished: list[Path] = []
    names = sorted(entry.name for entry in os.scandir(folder))
    for name in names:
        match = _JOURNAL_PATTERN.match(name)
        if match is None or not _process_gone(int(match["pid"])):
            continue
        journal = folder / name
        try:
            plan = json.loads(journal.read_text(encoding="utf-8"))
            moves = [(str(temp), str(final)) for temp, final in plan["moves"]]
            stale = [str(name) for name in plan.get("remove", [])]
        except (OSError, ValueError, KeyError, TypeError, AttributeError):
            continue  # not ours after all, or unreadable: leave it for a person to look at
        mode = _default_file_mode()
        for temp, final in moves:
            source = folder / Path(temp).name
            if source.exists():
                with contextlib.suppress(FileNotFoundError):  # a concurrent recovery won
                    os.chmod(source, mode)
                    os.replace(source, folder / Path(final).name)
                    finished.append(folder / Path(final).name)
        for name in stale:
            (folder / Path(name).name).unlink(missing_ok=True)
        _sync_folder(folder)
        journal.unlink(missing_ok=True)
    for name in names:
        match = _PARTIAL_PATTERN.match(name)
        if match is not None and _process_gone(int(match["pid"])):
            with contextlib.suppress(FileNotFoundError):
                (folder / name).unlink()
    return finished


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
) -> list[Path]:
    """Write tables (CSV), mappings (JSON), text and bytes into ``folder``, all or nothing.

    Text cells of the tables are neutralized against spreadsheet formulas
    (see the module notes); numeric cells are written unchanged. Leftovers of
    writers that were killed are handled first by :func:`recover_outputs`.

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
        are ignored here.

    Returns
    -------
    list of Path
        The files written, in the order given.

    Raises
    ------
    OutputError
        For an empty folder name or a root folder (:func:`checked_folder`),
        or when a file cannot be written (nothing of the new result is left).
    """
    folder = checked_folder(folder)
    stale = sorted({Path(name).name for name in remove} - set(files))
    staged: list[tuple[Path, Path]] = []
    try:
        folder.mkdir(parents=True, exist_ok=True)
        recover_outputs(folder)
        for name, content in files.items():
            staged.append((_write_temp(folder, name, content), folder / name))
        journal = _stage_journal(folder, staged, stale)
    except BaseException as exc:
        for temp, _ in staged:
            with contextlib.suppress(OSError):
                temp.unlink()
        if isinstance(exc, OSError):
            raise OutputError(
                f"cannot write results into folder '{folder}': {exc.strerror or exc}; "
                "choose another output folder"
            ) from exc
        raise
    _commit(folder, staged, stale, journal)
    return [final for _, final in staged]


def write_figures(folder: str | Path, files: Mapping[str, bytes]) -> list[Path]:
    """Write figure files into ``folder/figures/``, all or nothing; drop the other figures.

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
    target = Path(folder) / FIGURES_FOLDER
    stale = [name for name in figure_names() if name not in files]
    if not files and not target.is_dir():
        return []
    return write_outputs(target, dict(files), remove=stale)
