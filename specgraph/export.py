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
from collections.abc import Iterable, Mapping
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import Any, Literal, cast

import numpy as np
import pandas as pd

from ._guard import FORMULA_ESCAPE, FORMULA_TRIGGERS, neutralize_frame
from .exceptions import OutputError
from .zones import Zoning

__all__ = [
    "CAUTION",
    "FORMULA_ESCAPE",
    "FORMULA_TRIGGERS",
    "file_checksum",
    "jsonable",
    "library_versions",
    "recover_outputs",
    "run_record",
    "write_outputs",
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

_LIBRARIES = ("specgraph", "numpy", "scipy", "pandas", "scikit-learn", "networkx")


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


def zoning_tables(zoning: Zoning) -> dict[str, pd.DataFrame]:
    """The contract's CSV tables of a zoning, by file name.

    ``zones.csv`` (``node,zone``), ``boundary.csv``
    (``source,target,weight,zone_a,zone_b`` then carried input columns),
    ``zone_summary.csv`` (``zone,nodes,size,internal_weight,boundary_weight,
    conductance,connected`` then more) and ``spectrum.csv``
    (``index,eigenvalue,residual`` then more).
    """
    return {
        "zones.csv": zoning.to_frame(),
        "boundary.csv": zoning.boundary,
        "zone_summary.csv": zoning.zones,
        "spectrum.csv": zoning.spectrum(),
    }


def jsonable(value: Any) -> Any:
    """``value`` with numpy scalars and arrays as Python values and non-finite floats as None."""
    if isinstance(value, Mapping):
        return {str(k): jsonable(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [jsonable(v) for v in value]
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return [jsonable(v) for v in value.tolist()]
    if isinstance(value, float) and not np.isfinite(value):
        return None
    return value


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
    records = []
    for solve in zoning.solves:
        eig = solve.eigen
        values = eig.values
        k = solve.zones
        gap = float(values[k] - values[k - 1]) if values.size > k else None
        records.append(
            {
                "component": solve.component,
                "nodes": int(solve.nodes.size),
                "zones": k,
                "method": eig.method,
                "pairs": eig.k,
                "iterations": eig.iterations,
                "matvecs": eig.matvecs,
                "max_residual": eig.max_residual,
                "tol": eig.tol,
                "converged": eig.converged,
                "eigengap_after_zones": gap,
                "relative_eigengap": None if gap is None else gap / float(values[k]),
            }
        )
    return records


def run_record(
    zoning: Zoning,
    *,
    inputs: Iterable[Mapping[str, Any]] = (),
    command: list[str] | None = None,
) -> dict[str, Any]:
    """The JSON run record of a zoning: what went in, how it was solved, what came out.

    No timestamps and no absolute paths are recorded, so the same input,
    options and seed give the same bytes wherever and whenever they run.
    """
    net = zoning.network
    return jsonable(
        {
            "specgraph_run": 1,
            "command": command,
            "inputs": list(inputs),
            "parameters": zoning.parameters,
            "network": {
                "nodes": net.n_nodes,
                "links": net.n_links,
                "components": net.n_components,
                "has_coordinates": net.coordinates is not None,
                "has_sizes": net.sizes is not None,
                "input_policy": _portable_notes(net.notes),
            },
            "decisions": zoning.decisions,
            "eigen_solves": _solve_records(zoning),
            "scores": zoning.scores,
            "warnings": list(zoning.warnings),
            "versions": library_versions(),
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
        try:
            if isinstance(content, bytes | str):
                handle.write(content)
            elif isinstance(content, pd.DataFrame):
                table = neutralize_frame(content)
                table.to_csv(handle, index=False, lineterminator="\n", quoting=_quoting(table))
            else:
                json.dump(content, handle, indent=2, allow_nan=False)
                handle.write("\n")
            handle.flush()
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
    """
    folder = Path(folder)
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


# ------------------------------------------------------------------ GeoJSON
# Zonings as RFC 7946 FeatureCollections (plain dicts, so that write_outputs
# writes them as JSON under a ``.geojson`` name). Positions are the network's
# node coordinates as they are: RFC 7946 expects longitude/latitude (WGS 84),
# so a network read in projected coordinates gives a file in those units,
# which GIS software then needs to be told. Links are drawn as straight
# segments between their two end nodes; the true geometry stays in the user's
# own layer, joined through the carried columns (a pipe or line id).


def _geojson_value(value: Any) -> Any:
    """A table cell as a JSON value: numpy scalars as Python, missing and non-finite as null."""
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float):
        return value if np.isfinite(value) else None
    if isinstance(value, bool | int | str):
        return value
    if isinstance(value, Mapping | list | tuple | np.ndarray):
        return jsonable(value)
    return str(value)


def _properties(table: pd.DataFrame) -> list[dict[str, Any]]:
    """One JSON-ready property object per row of ``table``."""
    columns = [str(c) for c in table.columns]
    return [
        {name: _geojson_value(cell) for name, cell in zip(columns, row, strict=True)}
        for row in table.itertuples(index=False, name=None)
    ]


def _coordinates_of(zoning: Zoning) -> np.ndarray:
    xy = zoning.network.coordinates
    if xy is None:
        from .exceptions import ParameterError

        raise ParameterError(
            "zoning must come from a network with node coordinates for GeoJSON output; "
            "got a network without them (give a node table with x and y columns, or read "
            "a GeoJSON line network)."
        )
    return xy


def _collection(features: list[dict[str, Any]]) -> dict[str, Any]:
    return {"type": "FeatureCollection", "features": features}


def nodes_geojson(zoning: Zoning) -> dict[str, Any]:
    """One ``Point`` feature per node, with properties ``node`` and ``zone`` (and ``size``).

    Parameters
    ----------
    zoning : Zoning
        Of a network with node coordinates.

    Returns
    -------
    dict
        A GeoJSON FeatureCollection, in network row order; each feature's
        ``id`` is the node id.

    Raises
    ------
    ParameterError
        The network has no node coordinates.
    """
    xy = _coordinates_of(zoning)
    net = zoning.network
    table = pd.DataFrame({"node": net.node_ids, "zone": zoning.labels})
    if net.sizes is not None:
        table["size"] = net.sizes
    features = [
        {
            "type": "Feature",
            "id": props["node"],
            "geometry": {"type": "Point", "coordinates": [float(x), float(y)]},
            "properties": props,
        }
        for (x, y), props in zip(xy.tolist(), _properties(table), strict=True)
    ]
    return _collection(features)


def zones_geojson(zoning: Zoning) -> dict[str, Any]:
    """One ``MultiPoint`` feature per zone (its nodes), carrying the zone summary row.

    Parameters
    ----------
    zoning : Zoning
        Of a network with node coordinates.

    Returns
    -------
    dict
        A GeoJSON FeatureCollection, zones in number order; properties are
        the columns of ``zoning.zones`` (``zone``, ``nodes``, ``size``,
        ``conductance``...).
    """
    xy = _coordinates_of(zoning)
    order = np.argsort(zoning.labels, kind="stable")
    bounds = np.searchsorted(zoning.labels[order], np.arange(zoning.n_zones + 1))
    features = []
    for z, props in enumerate(_properties(zoning.zones)):
        points = xy[order[bounds[z] : bounds[z + 1]]].tolist()
        features.append(
            {
                "type": "Feature",
                "id": z,
                "geometry": {"type": "MultiPoint", "coordinates": points},
                "properties": props,
            }
        )
    return _collection(features)


def boundary_geojson(zoning: Zoning) -> dict[str, Any]:
    """One ``LineString`` feature per boundary link, carrying both zone ids and its columns.

    Parameters
    ----------
    zoning : Zoning
        Of a network with node coordinates.

    Returns
    -------
    dict
        A GeoJSON FeatureCollection, one feature per row of
        ``zoning.boundary`` (``source``, ``target``, ``weight``, ``zone_a``,
        ``zone_b``, then the columns carried from the input links), each a
        straight segment from the source node to the target node.
    """
    xy = _coordinates_of(zoning)
    table = zoning.boundary
    index = pd.Index(zoning.network.node_ids)
    src = index.get_indexer(table["source"].to_numpy(dtype=object))
    dst = index.get_indexer(table["target"].to_numpy(dtype=object))
    features = [
        {
            "type": "Feature",
            "geometry": {"type": "LineString", "coordinates": [a, b]},
            "properties": props,
        }
        for a, b, props in zip(xy[src].tolist(), xy[dst].tolist(), _properties(table), strict=True)
    ]
    return _collection(features)


def zoning_geojson(zoning: Zoning) -> dict[str, dict[str, Any]]:
    """The GeoJSON files of a zoning, by file name, for :func:`write_outputs`.

    ``zones.geojson`` (:func:`nodes_geojson`), ``zone_summary.geojson``
    (:func:`zones_geojson`) and ``boundary.geojson`` (:func:`boundary_geojson`).
    """
    return {
        "zones.geojson": nodes_geojson(zoning),
        "zone_summary.geojson": zones_geojson(zoning),
        "boundary.geojson": boundary_geojson(zoning),
    }


# ------------------------------------------------------------------ Parquet
def parquet_available() -> bool:
    """True when pyarrow, which Parquet output needs, can be imported."""
    try:
        import pyarrow.parquet  # noqa: F401
    except ImportError:
        return False
    return True


def _parquet_ready(frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` with text column names, and object columns of mixed types as text.

    Parquet columns have one type; a carried input column holding, say, ints
    and strings is written as text (missing cells stay missing).
    """
    table = frame.copy()
    table.columns = [str(c) for c in table.columns]
    for name in table.columns:
        column = table[name]
        if column.dtype != object:
            continue
        kinds = {type(v) for v in column.dropna().tolist()}
        if len(kinds) > 1 or (kinds and not kinds <= {str, bool, int, float}):
            table[name] = column.map(lambda v: v if v is None or pd.isna(v) else str(v))
    return table


def parquet_bytes(frame: pd.DataFrame) -> bytes:
    """A table as the bytes of one Parquet file (pyarrow, no index).

    Parameters
    ----------
    frame : pandas.DataFrame

    Returns
    -------
    bytes
        A complete Parquet file; the same frame gives the same bytes with the
        same library versions.

    Raises
    ------
    OutputError
        pyarrow is not installed.
    """
    try:
        import pyarrow as pa
        import pyarrow.parquet as pq
    except ImportError as exc:
        raise OutputError(
            "Parquet output needs the optional package pyarrow; install it with "
            "pip install 'specgraph[parquet]', or write CSV instead"
        ) from exc
    table = pa.Table.from_pandas(_parquet_ready(frame), preserve_index=False)
    sink = pa.BufferOutputStream()
    pq.write_table(table, sink)
    return bytes(sink.getvalue().to_pybytes())


def zoning_parquet(zoning: Zoning) -> dict[str, bytes]:
    """The tables of :func:`zoning_tables` as Parquet files: ``zones.parquet`` and so on.

    File name to bytes, ready for :func:`write_outputs`.
    """
    return {
        name.removesuffix(".csv") + ".parquet": parquet_bytes(table)
        for name, table in zoning_tables(zoning).items()
    }


__all__ += [
    "boundary_geojson",
    "nodes_geojson",
    "parquet_available",
    "parquet_bytes",
    "zones_geojson",
    "zoning_geojson",
    "zoning_parquet",
]
