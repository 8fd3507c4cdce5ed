"""Standard input and named pipes: read once into a temporary file, then read as a file.

The table readers open a file more than once (the CSV header is sniffed, then
the file is parsed; a line is looked up only when an error is reported; the
run record takes the file's checksum). A named pipe (``mkfifo``) or standard
input from a pipe can be read only once: the second open of a pipe waits for a
writer that never comes, and the second read of standard input finds it empty.
So the command line copies every such source, once, into a temporary file
before anything reads it (:func:`spooled_sources`), reads that file, names the
source as the user gave it in every message and record, and removes the copy
when the command ends. The Python readers refuse a source that is not a
regular file at once (:func:`refuse_unseekable`) instead of hanging.

``-`` names standard input. Its format cannot come from a file suffix, so it
is sniffed from the copied bytes (:func:`sniffed_suffix`): Parquet's magic
number ``PAR1`` (Apache Parquet file format specification), an XML document
(GraphML), a JSON object (GeoJSON, RFC 7946), else CSV. A named pipe keeps the
rule of every file: its name's suffix chooses the format (``mkfifo
edges.parquet`` is read as Parquet).
"""

from __future__ import annotations

import os
import shutil
import stat
import sys
import tempfile
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path
from typing import Any, BinaryIO

from ..exceptions import InputError

__all__ = [
    "STDIN",
    "STDIN_SHOWN",
    "refuse_unseekable",
    "shown_name",
    "sniffed_suffix",
    "spooled_sources",
]

#: The file name that means standard input (a common-practice convention of
#: command-line tools).
STDIN = "-"
#: How standard input is named in messages and run records.
STDIN_SHOWN = "<stdin>"
#: Leading bytes of a Parquet file (Apache Parquet format specification: the
#: file starts and ends with the 4-byte magic number "PAR1").
PARQUET_MAGIC = b"PAR1"
#: Bytes read from the start of a copy to sniff its format.
SNIFF_BYTES = 4096
#: Suffix given to the copy of standard input, by sniffed format.
_SUFFIXES = {"parquet": ".parquet", "graphml": ".graphml", "geojson": ".geojson", "csv": ".csv"}
#: Bytes copied at a time.
_CHUNK = 1 << 20

#: Temporary copy -> the name the user gave, while a command runs.
_SHOWN: dict[str, str] = {}


def shown_name(path: str | os.PathLike[str]) -> str:
    """The name the user gave for ``path`` (a temporary copy's source), else ``path``."""
    return _SHOWN.get(str(path), str(path))


def sniffed_suffix(head: bytes) -> str:
    """The suffix of the format the first bytes of a file show (see the module notes)."""
    if head.startswith(PARQUET_MAGIC):
        return _SUFFIXES["parquet"]
    text = head.removeprefix(b"\xef\xbb\xbf").lstrip()
    if text.startswith(b"<"):
        return _SUFFIXES["graphml"]
    if text.startswith(b"{"):
        return _SUFFIXES["geojson"]
    return _SUFFIXES["csv"]


def _kind(mode: int) -> str | None:
    """What a file that is not a regular one is, in words; None for a regular file."""
    if stat.S_ISREG(mode) or stat.S_ISDIR(mode):
        return None
    if stat.S_ISFIFO(mode):
        return "a pipe (it can be read only once)"
    if stat.S_ISCHR(mode):
        return "a device, not a regular file"
    if stat.S_ISSOCK(mode):
        return "a socket, not a regular file"
    return "not a regular file"


def refuse_unseekable(path: Path) -> None:
    """Refuse a pipe, device or socket: the readers open a file more than once.

    Raises
    ------
    InputError
        Naming the file and what to do (save it to a file, or give it to the
        command line, which copies it once).
    """
    try:
        kind = _kind(path.stat().st_mode)
    except OSError:
        return  # the reader says what is wrong with the path
    if kind is not None:
        raise InputError(
            f"this is {kind}; the readers open a file more than once, so save it to a file "
            "first (the command line copies a pipe or standard input once by itself)",
            path=path,
        )


def _stdin_stream() -> BinaryIO:
    stream: Any = sys.stdin
    if stream is None or getattr(stream, "closed", False):
        raise InputError(
            "standard input is closed; pipe the table in, or give its path", path=STDIN_SHOWN
        )
    isatty = getattr(stream, "isatty", None)
    if callable(isatty) and isatty():
        raise InputError(
            "standard input is a terminal, not a table; pipe or redirect the table in "
            "(specgraph zones - < edges.csv), or give the file's path",
            path=STDIN_SHOWN,
        )
    return getattr(stream, "buffer", stream)


def _copy(stream: Any, target: Path, shown: str) -> None:
    """Copy ``stream`` (bytes, or text encoded as UTF-8) into ``target``."""
    try:
        with open(target, "wb") as out:
            while chunk := stream.read(_CHUNK):
                out.write(chunk.encode("utf-8") if isinstance(chunk, str) else chunk)
    except OSError as exc:
        reason = exc.strerror or str(exc)
        raise InputError(
            f"could not copy it to a temporary file in {target.parent.parent} ({reason}); "
            "save the table to a file and give its path, or free space there (the TMPDIR "
            "environment variable chooses the folder)",
            path=shown,
        ) from None


def _spool_one(value: str, folder: Path, number: int) -> Path | None:
    """A temporary copy of ``value`` when it is ``-`` or a pipe or device, else None."""
    if value == STDIN:
        copy = folder / f"{number}-stdin"
        _copy(_stdin_stream(), copy, STDIN_SHOWN)
        with open(copy, "rb") as handle:
            head = handle.read(SNIFF_BYTES)
        sniffed = copy.with_name(copy.name + sniffed_suffix(head))
        copy.rename(sniffed)
        return sniffed
    try:
        kind = _kind(os.stat(value).st_mode)
    except OSError:
        return None  # missing or unreadable: the reader says so
    if kind is None:
        return None
    copy = folder / f"{number}-{Path(value).name}"
    try:
        with open(value, "rb") as stream:
            _copy(stream, copy, value)
    except OSError as exc:
        raise InputError(
            f"the file cannot be read ({exc.strerror or exc}); check its permissions", path=value
        ) from None
    return copy


def _check_stdin_once(sources: Mapping[str, str | None]) -> None:
    named = [label for label, value in sources.items() if value == STDIN]
    if len(named) > 1:
        raise InputError(
            f"standard input can be read only once, but {' and '.join(named)} both name it "
            "(-); save all but one of those tables to files",
            path=STDIN_SHOWN,
        )


def _renamed(exc: BaseException, copies: Mapping[str, str]) -> None:
    """Name the user's sources instead of their temporary copies in ``exc``'s message."""

    def plain(text: str) -> str:
        for copy, shown in copies.items():
            text = text.replace(copy, shown)
        return text

    if isinstance(exc, InputError):
        exc.path = None if exc.path is None else plain(exc.path)
        exc.reason = plain(exc.reason)
        exc.args = (exc._format(),)
    elif exc.args and isinstance(exc.args[0], str):
        exc.args = (plain(exc.args[0]), *exc.args[1:])


@contextmanager
def spooled_sources(sources: Mapping[str, str | None]) -> Iterator[dict[str, str]]:
    """Copy each source that is ``-`` or a pipe or device once; yield the paths to read.

    Parameters
    ----------
    sources : mapping of str to (str or None)
        A label of each input (how messages name it: an option of the command
        line) and its path as given; None for an input not given.

    Yields
    ------
    dict of str to str
        For each label whose source was copied, the path of its temporary
        copy (a regular file in a private temporary folder). Sources named
        twice are copied once. While the block runs, :func:`shown_name`
        gives back the source's own name for a copy, and errors raised in it
        name the source rather than the copy.

    Raises
    ------
    InputError
        ``-`` named by two inputs; standard input a terminal or closed; a
        copy that cannot be written.
    """
    _check_stdin_once(sources)
    folder = Path(tempfile.mkdtemp(prefix="specgraph-input-"))
    copies: dict[str, str] = {}  # copy -> shown name
    done: dict[str, Path | None] = {}  # source -> copy
    try:
        paths: dict[str, str] = {}
        for number, (label, value) in enumerate(sources.items()):
            if value is None:
                continue
            value = str(value)
            if value not in done:
                done[value] = _spool_one(value, folder, number)
            copy = done[value]
            if copy is not None:
                paths[label] = str(copy)
                copies[str(copy)] = STDIN_SHOWN if value == STDIN else value
        _SHOWN.update(copies)
        try:
            yield paths
        except Exception as exc:
            _renamed(exc, copies)
            raise
    finally:
        for name in copies:
            _SHOWN.pop(name, None)
        shutil.rmtree(folder, ignore_errors=True)
