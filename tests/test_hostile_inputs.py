"""Inputs that hung, were misread or were quietly ambiguous, through the command line.

* Named pipes and standard input (``-``) are read once; a pipe used to hang on its
  second open, and ``/dev/stdin`` from a pipe read as empty. Every run that could
  hang runs in a thread joined with a timeout, so a hang fails the test instead of
  blocking the suite.
* Node ids that differ only by Unicode normal form (Unicode Standard Annex #15,
  computed with Python's :mod:`unicodedata`) or by invisible characters (Unicode
  general categories ``Cf`` and ``Zs``, as :mod:`unicodedata` classes them), and
  blank ids, are kept apart but warned about.
* GraphML keys declared twice for one table are refused (GraphML specification:
  keys are identified by their ``id``; ``attr.name`` names the data for readers).
* Parquet id columns that hold lists, structs, maps or non-UTF-8 bytes are refused
  (Apache Arrow's type system: these are nested or binary types, and Arrow's cast
  to string refuses them).

Expected ids, lines and counts are worked out by hand from the small invented files.
"""

from __future__ import annotations

import io
import json
import os
import random
import sys
import threading
import unicodedata
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pandas as pd
import pytest

from specgraph.cli import main
from specgraph.exceptions import InputError
from specgraph.io import read_edges
from specgraph.io._ids import invisible_class, suspect_ids

EXIT_OK, EXIT_INPUT = 0, 2
#: Seconds a run may take before it counts as hung (a run of these files takes < 5 s).
HANG_TIMEOUT = 60.0
# A ring of 12 junctions with three chords: connected, zoned into two.
RING = "source,target\n" + "".join(
    [f"J{i},J{(i + 1) % 12}\n" for i in range(12)] + ["J0,J6\n", "J2,J8\n", "J4,J10\n"]
)


# ------------------------------------------------------------------ helpers
def _in_thread(call: Callable[[], Any], timeout: float = HANG_TIMEOUT) -> Any:
    """``call()`` in a daemon thread; fail (rather than block) if it does not end in time."""
    result: dict[str, Any] = {}

    def target() -> None:
        try:
            result["value"] = call()
        except BaseException as exc:  # handed to the test below
            result["error"] = exc

    thread = threading.Thread(target=target, daemon=True)
    thread.start()
    thread.join(timeout)
    assert not thread.is_alive(), f"the call did not end within {timeout} s (it hangs)"
    if "error" in result:
        raise result["error"]
    return result["value"]


def _zones(out: Path, *args: str | Path) -> int:
    return int(main(["zones", *map(str, args), "--zones", "2", "--out", str(out), "--quiet"]))


def _stdin(monkeypatch: pytest.MonkeyPatch, data: bytes, *, tty: bool = False) -> None:
    class _Terminal(io.TextIOWrapper):
        def isatty(self) -> bool:
            return tty

    monkeypatch.setattr(sys, "stdin", _Terminal(io.BytesIO(data), encoding="utf-8"))


def _record(out: Path) -> dict[str, Any]:
    return dict(json.loads((out / "run.json").read_text(encoding="utf-8")))


def _policy(out: Path) -> dict[str, Any]:
    return dict(_record(out)["network"]["input_policy"])


def _refused(capsys: pytest.CaptureFixture[str], out: Path, code: int, *names: str) -> str:
    err = capsys.readouterr().err
    assert code == EXIT_INPUT, err
    assert "Traceback" not in err
    for name in names:
        assert name in err, (name, err)
    assert not out.exists(), "an output folder appeared although the run was refused"
    return err


@pytest.fixture
def reference(tmp_path: Path) -> Path:
    """The ring zoned from a regular file: what every other way of reading it must give."""
    path = tmp_path / "ring.csv"
    path.write_text(RING, encoding="utf-8")
    out = tmp_path / "reference"
    assert _zones(out, path) == EXIT_OK
    return out


# ------------------------------------------------------- pipes and stdin
@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="named pipes need a POSIX system")
def test_named_pipe_read_once(tmp_path: Path, reference: Path) -> None:
    pipe = tmp_path / "ring-pipe.csv"
    os.mkfifo(pipe)

    def write() -> None:
        with open(pipe, "wb") as handle:  # blocks until the reader opens the pipe
            handle.write(RING.encode("utf-8"))

    writer = threading.Thread(target=write, daemon=True)
    writer.start()
    out = tmp_path / "out"
    assert _in_thread(lambda: _zones(out, pipe)) == EXIT_OK
    writer.join(HANG_TIMEOUT)
    assert (out / "zones.csv").read_bytes() == (reference / "zones.csv").read_bytes()
    assert _record(out)["inputs"][0]["path"] == str(pipe)


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="named pipes need a POSIX system")
def test_named_pipe_refused_at_once_by_python_reader(tmp_path: Path) -> None:
    pipe = tmp_path / "edges.csv"
    os.mkfifo(pipe)
    with pytest.raises(InputError, match="pipe") as caught:
        _in_thread(lambda: read_edges(pipe), timeout=10.0)
    assert caught.value.path == str(pipe)


def test_stdin_dash_reads_csv_like_the_file(
    tmp_path: Path, reference: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    _stdin(monkeypatch, RING.encode("utf-8"))
    out = tmp_path / "out"
    assert _in_thread(lambda: _zones(out, "-")) == EXIT_OK
    assert (out / "zones.csv").read_bytes() == (reference / "zones.csv").read_bytes()
    assert _record(out)["inputs"][0]["path"] == "<stdin>"


def test_stdin_dash_sniffs_parquet(
    tmp_path: Path, reference: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Parquet files start with the magic bytes "PAR1" (Apache Parquet format specification).
    pytest.importorskip("pyarrow")
    table = tmp_path / "ring.parquet"
    pd.read_csv(io.StringIO(RING), dtype=str).to_parquet(table)
    assert table.read_bytes()[:4] == b"PAR1"
    _stdin(monkeypatch, table.read_bytes())
    out = tmp_path / "out"
    assert _in_thread(lambda: _zones(out, "-")) == EXIT_OK
    assert (out / "zones.csv").read_bytes() == (reference / "zones.csv").read_bytes()


def test_stdin_dash_as_zone_file(
    tmp_path: Path, reference: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # score EDGES - : the zone file from standard input scores as the same file does.
    edges = tmp_path / "ring.csv"  # written by the reference fixture
    from_file, from_stdin = tmp_path / "file", tmp_path / "stdin"
    zones = reference / "zones.csv"
    assert main(["score", str(edges), str(zones), "--out", str(from_file), "--quiet"]) == 0
    _stdin(monkeypatch, zones.read_bytes())
    code = _in_thread(lambda: main(["score", str(edges), "-", "--out", str(from_stdin), "--quiet"]))
    assert code == EXIT_OK
    names = sorted(p.name for p in from_file.glob("*.csv"))
    assert names
    for name in names:
        assert (from_stdin / name).read_bytes() == (from_file / name).read_bytes(), name


def test_stdin_empty_refused_naming_stdin(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    _stdin(monkeypatch, b"")
    out = tmp_path / "out"
    code = _in_thread(lambda: _zones(out, "-"))
    _refused(capsys, out, code, "<stdin>, line 1", "empty")


def test_stdin_error_names_stdin_and_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    # Line 4 holds a link with an empty target: the message names <stdin> and that line,
    # never the temporary copy.
    _stdin(monkeypatch, b"source,target\nJ1,J2\nJ2,J3\nJ3,\n")
    out = tmp_path / "out"
    code = _in_thread(lambda: _zones(out, "-"))
    err = _refused(capsys, out, code, "<stdin>, line 4", "column 'target'")
    assert "specgraph-input-" not in err


def test_stdin_named_twice_refused(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    _stdin(monkeypatch, RING.encode("utf-8"))
    out = tmp_path / "out"
    code = _in_thread(lambda: _zones(out, "-", "--nodes", "-"))
    _refused(capsys, out, code, "EDGES and --nodes", "only once")


def test_stdin_terminal_refused_at_once(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    _stdin(monkeypatch, b"", tty=True)
    out = tmp_path / "out"
    code = _in_thread(lambda: _zones(out, "-"), timeout=10.0)
    _refused(capsys, out, code, "<stdin>", "terminal")


# ----------------------------------------------------------------- ids
def _ring_with(tmp_path: Path, first: str, second: str) -> Path:
    """The ring with two extra links J0-``first`` and J6-``second``."""
    path = tmp_path / "ids.csv"
    path.write_text(RING + f"J0,{first}\nJ6,{second}\n", encoding="utf-8")
    return path


def _warned_run(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], path: Path
) -> tuple[dict[str, Any], str, pd.DataFrame]:
    out = tmp_path / "out"
    code = _zones(out, path)
    err = capsys.readouterr().err
    assert code == EXIT_OK, err
    zones = pd.read_csv(out / "zones.csv", dtype={"node": str}, keep_default_na=False)
    return _policy(out), err, zones


def test_ids_in_two_normal_forms_kept_apart_and_warned(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    composed, decomposed = "Caf\u00e9", "Cafe\u0301"
    # Unicode Standard Annex #15: the two are canonically equivalent (same NFC).
    assert composed != decomposed
    assert unicodedata.normalize("NFC", decomposed) == composed
    policy, err, zones = _warned_run(tmp_path, capsys, _ring_with(tmp_path, composed, decomposed))
    assert {composed, decomposed} <= set(zones["node"])  # compared exactly: two nodes
    assert err.count("warning") == 1
    assert "'Cafe\\u0301' and 'Caf\\xe9'" in err
    assert "ids.csv" in err
    assert policy["suspect_ids"]["similar_ids"] == 2
    assert policy["suspect_ids"]["similar_groups"] == 1
    assert policy["suspect_ids"]["blank_ids"] == 0


@pytest.mark.parametrize(
    ("odd", "shown"),
    [
        ("J1\u200b", "'J1\\u200b'"),  # zero-width space
        ("J1\u00a0", "'J1\\xa0'"),  # non-breaking space (compared with 'J1 ')
        ("J\ufeff1", "'J\\ufeff1'"),  # byte-order mark inside an id
    ],
    ids=["zero-width-space", "non-breaking-space", "bom-inside"],
)
def test_ids_differing_by_invisible_characters_warned(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], odd: str, shown: str
) -> None:
    plain = "J1 " if "\u00a0" in odd else "J1"
    # Unicode general categories (unicodedata): format (Cf) or space separator (Zs).
    assert {unicodedata.category(c) for c in odd if not c.isalnum()} <= {"Cf", "Zs"}
    path = tmp_path / "ids.csv"
    path.write_text(RING + f'J3,"{plain}"\nJ9,"{odd}"\n', encoding="utf-8")
    policy, err, zones = _warned_run(tmp_path, capsys, path)
    assert {plain, odd} <= set(zones["node"])
    assert shown in err
    assert policy["suspect_ids"]["similar_ids"] == 2


def test_blank_ids_warned(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "ids.csv"
    path.write_text(RING + 'J3," "\nJ9,"\u00a0\u200b"\n', encoding="utf-8")
    policy, err, _ = _warned_run(tmp_path, capsys, path)
    assert policy["suspect_ids"]["blank_ids"] == 2
    assert "' '" in err
    assert "'\\xa0\\u200b'" in err


def test_ordinary_ids_not_warned(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # Spaces inside ids, accented letters written one way only, other scripts: nothing to say.
    policy, err, _ = _warned_run(tmp_path, capsys, _ring_with(tmp_path, "Pump 1", "Zürich-Ж"))
    assert "suspect_ids" not in policy
    assert "warning" not in err


def _naive_groups(ids: list[str]) -> tuple[int, int]:
    """Reference: every id reduced one at a time with unicodedata and re, grouped in a dict."""
    import re

    hidden, spaces = invisible_class()
    groups: dict[str, set[str]] = {}
    blank = 0
    for text in ids:
        key = re.sub(spaces, " ", re.sub(hidden, "", unicodedata.normalize("NFC", text)))
        if not key.strip():
            blank += 1
            continue
        groups.setdefault(key, set()).add(text)
    return sum(len(g) for g in groups.values() if len(g) > 1), blank


def test_suspect_ids_agree_with_naive_reduction() -> None:
    # Random ids over an alphabet of look-alikes; the vectorised search must find exactly
    # what reducing every id one at a time finds.
    alphabet = ["a", "e", "\u00e9", "e\u0301", " ", "\u00a0", "\u200b", "\ufeff", "\t", "1"]
    rng = random.Random(20)
    ids = sorted({"".join(rng.choices(alphabet, k=rng.randint(1, 4))) for _ in range(3000)})
    found = suspect_ids(ids)
    similar, blank = _naive_groups(ids)
    assert found is not None
    assert (found.similar, found.blank) == (similar, blank)


# ------------------------------------------------------------- GraphML
GRAPHML_TWO_WEIGHTS = """<?xml version="1.0" encoding="UTF-8"?>
<graphml xmlns="http://graphml.graphdrawing.org/xmlns">
  <key id="w1" for="edge" attr.name="weight" attr.type="double"/>
  <key id="w2" for="{domain}" attr.name="weight" attr.type="double"/>
  <graph edgedefault="undirected">
    <node id="a"/><node id="b"/><node id="c"/>
    <edge source="a" target="b"><data key="w1">1</data></edge>
    <edge source="b" target="c"><data key="w1">1</data></edge>
    <edge source="c" target="a"><data key="w1">1</data></edge>
  </graph>
</graphml>
"""


@pytest.mark.parametrize("domain", ["edge", "all"])
def test_graphml_two_keys_named_alike_refused(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], domain: str
) -> None:
    path = tmp_path / "two-weights.graphml"
    path.write_text(GRAPHML_TWO_WEIGHTS.format(domain=domain), encoding="utf-8")
    out = tmp_path / "out"
    code = _zones(out, path)
    _refused(
        capsys,
        out,
        code,
        "two-weights.graphml, line 4",
        "'w2'",
        "<key id='w1'> on line 3",
        "'weight'",
    )


def test_graphml_key_id_declared_twice_refused(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    text = GRAPHML_TWO_WEIGHTS.format(domain="edge").replace(
        '<key id="w2" for="edge" attr.name="weight"', '<key id="w1" for="edge" attr.name="length"'
    )
    path = tmp_path / "twice.graphml"
    path.write_text(text, encoding="utf-8")
    out = tmp_path / "out"
    code = _zones(out, path)
    _refused(capsys, out, code, "twice.graphml, line 4", "declared again", "line 3")


def test_graphml_node_and_edge_keys_may_share_a_name(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    # One name for a node attribute and an edge attribute fills two different tables.
    path = tmp_path / "shared.graphml"
    path.write_text(GRAPHML_TWO_WEIGHTS.format(domain="node"), encoding="utf-8")
    assert _zones(tmp_path / "out", path) == EXIT_OK, capsys.readouterr().err


# ------------------------------------------------------------- Parquet
def _parquet_ring(path: Path, source: Any, target: Any) -> Path:
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    pq.write_table(pa.table({"source": source, "target": target}), path)
    return path


def _ring_ends() -> tuple[list[str], list[str]]:
    rows = [line.split(",") for line in RING.splitlines()[1:]]
    return [r[0] for r in rows], [r[1] for r in rows]


@pytest.mark.parametrize("kind", ["list", "struct", "map", "binary-not-utf8"])
def test_parquet_non_scalar_id_column_refused(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], kind: str
) -> None:
    # Apache Arrow types: list, struct and map are nested types; binary holds raw bytes.
    pa = pytest.importorskip("pyarrow")
    source, target = _ring_ends()
    n = len(source)
    column = {
        "list": pa.array([[1, 2]] * n),
        "struct": pa.array([{"a": 1}] * n),
        "map": pa.array([[("a", 1)]] * n, type=pa.map_(pa.string(), pa.int64())),
        "binary-not-utf8": pa.array([s.encode() for s in source[:-1]] + [b"\xff"], pa.binary()),
    }[kind]
    assert pa.types.is_nested(column.type) or pa.types.is_binary(column.type)
    path = _parquet_ring(tmp_path / "ring.parquet", column, target)
    out = tmp_path / "out"
    code = _zones(out, path)
    _refused(capsys, out, code, "ring.parquet", "column 'source'", str(column.type).split("<")[0])


@pytest.mark.parametrize("kind", ["dictionary", "binary-utf8", "large-string"])
def test_parquet_scalar_id_columns_read_byte_identically(
    tmp_path: Path, reference: Path, kind: str
) -> None:
    pa = pytest.importorskip("pyarrow")
    source, target = _ring_ends()
    make = {
        "dictionary": lambda v: pa.array(v).dictionary_encode(),
        "binary-utf8": lambda v: pa.array([s.encode() for s in v], pa.binary()),
        "large-string": lambda v: pa.array(v, pa.large_string()),
    }[kind]
    path = _parquet_ring(tmp_path / "ring.parquet", make(source), make(target))
    out = tmp_path / "out"
    assert _zones(out, path) == EXIT_OK
    assert (out / "zones.csv").read_bytes() == (reference / "zones.csv").read_bytes()


def test_parquet_integer_ids_read_as_their_digits(tmp_path: Path) -> None:
    pa = pytest.importorskip("pyarrow")
    source, target = _ring_ends()
    digits = [[int(s[1:]) for s in side] for side in (source, target)]
    path = _parquet_ring(tmp_path / "ring.parquet", pa.array(digits[0]), pa.array(digits[1]))
    text = tmp_path / "ring.csv"
    text.write_text(RING.replace("J", ""), encoding="utf-8")
    assert _zones(tmp_path / "a", path) == EXIT_OK
    assert _zones(tmp_path / "b", text) == EXIT_OK
    assert (tmp_path / "a" / "zones.csv").read_bytes() == (
        tmp_path / "b" / "zones.csv"
    ).read_bytes()


def test_parquet_list_ids_refused_in_a_rule_list(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], reference: Path
) -> None:
    # The supply list's node column holds lists (an Arrow nested type): refused by name.
    pa = pytest.importorskip("pyarrow")
    pq = pytest.importorskip("pyarrow.parquet")
    supply = tmp_path / "supply.parquet"
    pq.write_table(pa.table({"node": pa.array([["J0"], ["J6"]])}), supply)
    out = tmp_path / "out"
    code = _zones(out, tmp_path / "ring.csv", "--supply-list", supply)
    _refused(capsys, out, code, "supply.parquet", "column 'node'", "list")
