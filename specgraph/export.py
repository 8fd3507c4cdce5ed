"""Writing results: CSV tables and the JSON run record, atomically.

Every file is first written in full to a hidden temporary file in the output
folder, flushed and synced to disk; only when all of them are complete are
they moved into place with :func:`os.replace` (atomic on POSIX within one file
system). A failure before that point removes the temporary files and leaves
whatever the folder held before untouched.

Floats are written with Python's shortest round-trip representation, so the
same numbers always give the same bytes.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import platform
import tempfile
from collections.abc import Iterable, Mapping
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from .exceptions import OutputError
from .zones import Zoning

__all__ = [
    "CAUTION",
    "file_checksum",
    "jsonable",
    "library_versions",
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


def _write_temp(folder: Path, name: str, content: pd.DataFrame | Mapping[str, Any]) -> Path:
    """Write ``content`` to a hidden temporary file in ``folder``; remove it on failure."""
    with tempfile.NamedTemporaryFile(
        "w",
        dir=folder,
        prefix=f".{name}.",
        suffix=".partial",
        delete=False,
        encoding="utf-8",
        newline="",
    ) as handle:
        temp = Path(handle.name)
        try:
            if isinstance(content, pd.DataFrame):
                content.to_csv(handle, index=False, lineterminator="\n")
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


def _default_file_mode() -> int:
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


def write_outputs(
    folder: str | Path, files: Mapping[str, pd.DataFrame | Mapping[str, Any]]
) -> list[Path]:
    """Write tables (CSV) and mappings (JSON) into ``folder``, all or nothing.

    Parameters
    ----------
    folder : str or Path
        Created if missing (with parents).
    files : mapping
        File name to a DataFrame (written as CSV, no index) or a mapping
        (written as JSON).

    Returns
    -------
    list of Path
        The files written, in the order given.
    """
    folder = Path(folder)
    staged: list[tuple[Path, Path]] = []
    try:
        folder.mkdir(parents=True, exist_ok=True)
        for name, content in files.items():
            staged.append((_write_temp(folder, name, content), folder / name))
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
    mode = _default_file_mode()
    for temp, final in staged:
        # mkstemp creates files readable by the owner only; give the result the
        # permissions an ordinary open() would have under the user's umask.
        os.chmod(temp, mode)
        os.replace(temp, final)
    return [final for _, final in staged]
