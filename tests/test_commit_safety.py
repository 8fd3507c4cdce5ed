"""Commits that cannot leave an output folder mixed.

A commit of several files (``specgraph.export.write_outputs``) renames each
previous file to a hidden backup, then each new file into place, and puts the
backups back on any failure; a lock on the folder makes concurrent writers
commit one after the other. Outside sources of the behaviour checked here:

- POSIX ``rename()`` (IEEE Std 1003.1, and the Python docs of ``os.replace``):
  replacing a name is atomic within one file system, so each file is the old or
  the new one, never a mix; a set of files needs the journal and backups.
- ``flock(2)`` (Linux man-pages): locks belong to an open file description, so
  two threads that each open the folder exclude each other like two processes,
  and the kernel drops the lock of a process that exits or is killed.

The folder is "consistent" when every visible file comes from one run: each
writer here records in its ``run.json`` the SHA-256 of every other file it
writes, and the test compares them with the files found (common practice for
result manifests).
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import subprocess
import sys
import textwrap
import threading
from collections.abc import Callable, Iterator
from pathlib import Path

import pytest

from specgraph import export, gallery
from specgraph.cli import main
from specgraph.exceptions import OutputError, SpecgraphError
from specgraph.export import NOT_CONVERGED_FILE, recover_outputs, write_outputs

POSIX_ONLY = pytest.mark.skipif(
    not hasattr(os, "fork"), reason="needs os.fork, flock and SIGKILL (POSIX)"
)


# ------------------------------------------------------------------ helpers
def snapshot(folder: Path) -> dict[str, str]:
    """Every file under ``folder`` (hidden ones too), by relative path, with its SHA-256."""
    return {
        str(path.relative_to(folder)): hashlib.sha256(path.read_bytes()).hexdigest()
        for path in sorted(folder.rglob("*"))
        if path.is_file()
    }


def barbell_edges(folder: Path) -> Path:
    """Two 6-cliques joined by a path: a small network that zones in well under a second."""
    net = gallery.barbell(6)
    upper = net.adjacency.tocoo()
    ids = net.node_ids
    rows = [
        f"{ids[i]},{ids[j]},{w:g}\n"
        for i, j, w in zip(upper.row, upper.col, upper.data, strict=True)
        if i < j
    ]
    path = folder / "edges.csv"
    path.write_text("source,target,weight\n" + "".join(rows), encoding="utf-8")
    return path


def zones_cli(edges: Path, out: Path, zones: int, *extra: str) -> int:
    return main(["zones", str(edges), "--zones", str(zones), "--seed", "1", "--out", str(out),
                 "--quiet", *extra])  # fmt: skip


#: The tables of a zoning, and four more.
TABLES = ("zones.csv", "boundary.csv", "zone_summary.csv", "spectrum.csv")


def run_files(tag: str) -> dict[str, bytes | dict]:
    """The files of one writer's run: tables whose bytes carry ``tag``, and a run.json
    recording the SHA-256 of each of them."""
    tables = {
        name: "".join(f"n{i},{tag}\n" for i in range(50)).encode()
        for name in (*TABLES, "a.csv", "b.csv", "c.csv", "d.csv")
    }
    record = {"tag": tag, "files": {k: hashlib.sha256(v).hexdigest() for k, v in tables.items()}}
    return {**tables, "run.json": record}


def consistent(folder: Path) -> bool:
    """Every visible file is the one its folder's run.json records (one run, whole)."""
    record = json.loads((folder / "run.json").read_text(encoding="utf-8"))
    found = {
        p.name: hashlib.sha256(p.read_bytes()).hexdigest()
        for p in folder.iterdir()
        if p.is_file() and not p.name.startswith(".") and p.name != "run.json"
    }
    return found == record["files"]


@contextlib.contextmanager
def failing_replace(
    monkeypatch: pytest.MonkeyPatch, fail: Callable[[str, str, int], bool]
) -> Iterator[list[tuple[str, str]]]:
    """``os.replace`` that raises PermissionError when ``fail(src, dst, call)`` holds
    (``call`` counts from 1); yields the renames done."""
    real = os.replace
    done: list[tuple[str, str]] = []

    def replace(src: str | os.PathLike[str], dst: str | os.PathLike[str]) -> None:
        source, target = os.fspath(src), os.fspath(dst)
        if fail(source, target, len(done) + 1):
            raise PermissionError(13, "Permission denied (injected)", target)
        real(src, dst)
        done.append((source, target))

    monkeypatch.setattr(os, "replace", replace)
    try:
        yield done
    finally:
        monkeypatch.setattr(os, "replace", real)


def is_result(path: str) -> bool:
    """A rename onto a visible result name (a move of the commit, not a backup)."""
    return not Path(path).name.startswith(".")


# ------------------------------------------------------ a folder in the way
def test_folder_at_a_result_name_exits_2_and_changes_nothing(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    edges, out = barbell_edges(tmp_path), tmp_path / "out"
    assert zones_cli(edges, out, 2) == 0
    (out / "zone_summary.csv").unlink()
    (out / "zone_summary.csv").mkdir()  # the measured failure of issue 20
    before = snapshot(out)
    capsys.readouterr()
    code = zones_cli(edges, out, 3, "--json")
    captured = capsys.readouterr()
    assert code == 2, captured.err
    assert "Traceback" not in captured.err
    error = json.loads(captured.out)["error"]
    assert error["type"] == "OutputError"
    assert error["exit_code"] == 2
    assert str(out / "zone_summary.csv") in error["message"]
    assert "Move or rename that folder" in error["message"]
    assert snapshot(out) == before  # byte-identical, no hidden leftover
    assert (out / "zone_summary.csv").is_dir()


def test_a_folder_with_a_removed_name_is_kept(tmp_path: Path) -> None:
    # Names a commit removes (a table of an earlier run) are deleted only as files.
    (tmp_path / "unassigned.csv").mkdir()
    write_outputs(tmp_path, {"zones.csv": b"node,zone\n"}, remove=["unassigned.csv"])
    assert (tmp_path / "unassigned.csv").is_dir()


# ------------------------------------------------- a failure mid-commit
@pytest.mark.parametrize("nth", [1, 2, 3, 5])
def test_a_failed_move_rolls_back_to_the_previous_files(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, nth: int
) -> None:
    write_outputs(tmp_path, run_files("old"), remove=["unassigned.csv"])
    (tmp_path / "unassigned.csv").write_text("an optional table of the old run\n")
    (tmp_path / "mine.txt").write_text("a file of the user's\n")
    before = snapshot(tmp_path)
    moves = 0

    def fail(source: str, target: str, call: int) -> bool:
        nonlocal moves
        moves += is_result(target)
        return is_result(target) and moves == nth

    with failing_replace(monkeypatch, fail) as done, pytest.raises(OutputError) as caught:
        write_outputs(tmp_path, run_files("new"), remove=["unassigned.csv"])
    assert sum(is_result(t) for _, t in done) >= nth - 1  # the earlier moves did happen
    message = str(caught.value)
    assert "Permission denied (injected)" in message
    assert "holds its previous files, unchanged" in message
    assert "run again" in message
    assert isinstance(caught.value, SpecgraphError)
    assert snapshot(tmp_path) == before


def test_a_failed_backup_rolls_back(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    write_outputs(tmp_path, run_files("old"))
    before = snapshot(tmp_path)
    third_backup = lambda s, t, call: t.endswith(".backup") and call == 3  # noqa: E731
    with failing_replace(monkeypatch, third_backup), pytest.raises(OutputError):
        write_outputs(tmp_path, run_files("new"))
    assert snapshot(tmp_path) == before


def test_an_interrupt_mid_commit_rolls_back_and_is_raised(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    write_outputs(tmp_path, run_files("old"))
    before = snapshot(tmp_path)
    real = os.replace
    calls = 0

    def replace(src: str, dst: str) -> None:
        nonlocal calls
        calls += is_result(dst)
        if calls == 3:  # once: the undo's own renames go through
            calls += 1
            raise KeyboardInterrupt
        real(src, dst)

    monkeypatch.setattr(os, "replace", replace)
    with pytest.raises(KeyboardInterrupt):
        write_outputs(tmp_path, run_files("new"))
    monkeypatch.setattr(os, "replace", real)
    assert snapshot(tmp_path) == before


def test_the_cli_maps_a_mid_commit_failure_to_exit_2(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    edges, out = barbell_edges(tmp_path), tmp_path / "out"
    assert zones_cli(edges, out, 2) == 0
    before = snapshot(out)
    moves = 0

    def fail(source: str, target: str, call: int) -> bool:
        nonlocal moves
        moves += is_result(target)
        return is_result(target) and moves == 3

    capsys.readouterr()
    with failing_replace(monkeypatch, fail):
        code = zones_cli(edges, out, 3)
    err = capsys.readouterr().err
    assert code == 2, err
    assert "internal error" not in err
    assert str(out) in err
    assert snapshot(out) == before


def test_figures_commit_with_the_tables(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # A failure on a figure undoes the tables too: one commit, not two.
    write_outputs(tmp_path, run_files("old"), figures={"zone_map.svg": b"<svg>old</svg>"})
    before = snapshot(tmp_path)
    figures = {"zone_map.png": b"png", "zone_map.svg": b"<svg/>"}
    on_png = lambda s, t, call: t.endswith("zone_map.png")  # noqa: E731
    with failing_replace(monkeypatch, on_png), pytest.raises(OutputError):
        write_outputs(tmp_path, run_files("new"), figures=figures)
    assert snapshot(tmp_path) == before
    written = write_outputs(tmp_path, run_files("new"), figures={"zone_map.png": b"png"})
    assert tmp_path / "figures" / "zone_map.png" in written
    assert not (tmp_path / "figures" / "zone_map.svg").exists()  # the old run's figure


def test_an_undo_that_fails_leaves_a_journal_the_next_run_resolves(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    write_outputs(tmp_path, run_files("old"))
    old = snapshot(tmp_path)
    moves = 0

    def fail(source: str, target: str, call: int) -> bool:
        nonlocal moves
        moves += is_result(target)
        return moves >= 2  # the second move fails, and so does every rename of the undo

    with failing_replace(monkeypatch, fail), pytest.raises(OutputError, match="journal"):
        write_outputs(tmp_path, run_files("new"))
    assert any(p.name.startswith(".specgraph-commit.") for p in tmp_path.iterdir())
    recover_outputs(tmp_path)  # what the next run does first, in this process too
    found = snapshot(tmp_path)
    assert all(not name.startswith(".") for name in found), found
    # The moves had started, so the new result (complete when the journal was
    # written) is finished: one run, whole.
    assert consistent(tmp_path)
    assert found != old


# ------------------------------------------------------ concurrent writers
def test_concurrent_threads_leave_one_run_whole(tmp_path: Path) -> None:
    rounds, writers = 30, 3
    start, done = threading.Barrier(writers + 1), threading.Barrier(writers + 1)
    errors: list[BaseException] = []

    def writer(me: int) -> None:
        for r in range(rounds):
            start.wait()
            try:
                write_outputs(tmp_path, run_files(f"{me}-{r}"))
            except BaseException as exc:  # reported by the test
                errors.append(exc)
            done.wait()

    threads = [threading.Thread(target=writer, args=(i,)) for i in range(writers)]
    for thread in threads:
        thread.start()
    mixed = 0
    for _ in range(rounds):
        start.wait()
        done.wait()
        mixed += not consistent(tmp_path)
    for thread in threads:
        thread.join()
    assert errors == []  # they queue: every call succeeds
    assert mixed == 0
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []


#: Two processes (multiprocessing, fork) write one folder at the same moment,
#: round after round; the parent checks the folder after each round. Run in a
#: fresh interpreter, so the fork happens in a process with one thread. The two
#: writers list their files in opposite orders and pause 2 ms after each rename,
#: so that unlocked commits would cross (measured without the lock: 39 and 40 of 40
#: rounds mixed; with it, none).
PROCESSES = textwrap.dedent(
    """
    import json, multiprocessing as mp, os, sys, time
    sys.path.insert(0, sys.argv[2])
    from pathlib import Path
    from test_commit_safety import consistent, run_files
    from specgraph.export import write_outputs

    def writer(folder, me, start, done, rounds, errors):
        real = os.replace
        def slow_replace(src, dst):  # widens the window in which commits could interleave
            real(src, dst)
            time.sleep(0.002)
        os.replace = slow_replace
        for r in range(rounds):
            start.wait()
            files = run_files(f"{me}-{r}")
            if me == "B":  # the other order: unlocked commits would cross
                files = dict(reversed(files.items()))
            try:
                write_outputs(folder, files)
            except Exception as exc:
                errors.put(repr(exc))
            done.wait()

    folder, rounds = Path(sys.argv[1]), int(sys.argv[3])
    ctx = mp.get_context("fork")
    start, done, errors = ctx.Barrier(3), ctx.Barrier(3), ctx.Queue()
    procs = [ctx.Process(target=writer, args=(folder, me, start, done, rounds, errors))
             for me in "AB"]
    for p in procs:
        p.start()
    mixed = 0
    for _ in range(rounds):
        start.wait(timeout=60)
        done.wait(timeout=60)
        mixed += not consistent(folder)
    for p in procs:
        p.join(timeout=60)
    found = []
    while not errors.empty():
        found.append(errors.get())
    print(json.dumps({"mixed": mixed, "errors": found,
                      "codes": [p.exitcode for p in procs]}))
    """
)


@POSIX_ONLY
def test_concurrent_processes_leave_one_run_whole(tmp_path: Path) -> None:
    folder = tmp_path / "out"
    folder.mkdir()
    done = subprocess.run(
        [sys.executable, "-c", PROCESSES, str(folder), str(Path(__file__).parent), "40"],
        capture_output=True, text=True, timeout=300, check=False,
        env={**os.environ, "PYTHONWARNINGS": "ignore"},
    )  # fmt: skip
    assert done.returncode == 0, done.stderr[-3000:]
    result = json.loads(done.stdout)
    assert result == {"mixed": 0, "errors": [], "codes": [0, 0]}


@POSIX_ONLY
def test_a_writer_waits_for_the_lock_then_refuses(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    import fcntl

    write_outputs(tmp_path, run_files("old"))
    before = snapshot(tmp_path)
    monkeypatch.setattr(export, "LOCK_TIMEOUT", 0.3)
    holder = os.open(tmp_path, os.O_RDONLY)  # another writer, as flock(2) sees it
    try:
        fcntl.flock(holder, fcntl.LOCK_EX)
        with pytest.raises(OutputError, match="another writer has held the output folder"):
            write_outputs(tmp_path, run_files("new"))
        assert snapshot(tmp_path) == before  # its staged files are gone too
        fcntl.flock(holder, fcntl.LOCK_UN)
        write_outputs(tmp_path, run_files("new"))  # free again
    finally:
        os.close(holder)
    assert consistent(tmp_path)
    assert json.loads((tmp_path / "run.json").read_text())["tag"] == "new"


@POSIX_ONLY
def test_a_killed_holder_does_not_block_the_folder(tmp_path: Path) -> None:
    # flock(2): the lock goes with the last descriptor of its holder, so a
    # SIGKILLed writer never leaves the folder locked.
    holder = subprocess.Popen(
        [sys.executable, "-c", "import fcntl, os, sys, time\n"
         "fd = os.open(sys.argv[1], os.O_RDONLY); fcntl.flock(fd, fcntl.LOCK_EX)\n"
         "print('held', flush=True); time.sleep(60)", str(tmp_path)],
        stdout=subprocess.PIPE, text=True,
    )  # fmt: skip
    assert holder.stdout is not None
    with holder.stdout:
        assert holder.stdout.readline().strip() == "held"
    holder.kill()
    holder.wait()
    write_outputs(tmp_path, run_files("after"))
    assert consistent(tmp_path)


def test_the_lock_file_is_used_where_a_folder_cannot_be_locked(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # NFS emulates flock with record locks, which refuse a folder opened read-only
    # (flock(2), NOTES): then the hidden lock file is locked instead.
    fcntl = pytest.importorskip("fcntl")
    real = fcntl.flock

    def flock(fd: int, operation: int) -> None:
        if os.path.isdir(f"/proc/self/fd/{fd}") or _is_dir_fd(fd):
            raise OSError(9, "Bad file descriptor (injected)")
        real(fd, operation)

    monkeypatch.setattr(fcntl, "flock", flock)
    write_outputs(tmp_path, run_files("one"))
    assert (tmp_path / export.LOCK_FILE).exists()
    write_outputs(tmp_path, run_files("two"))
    assert consistent(tmp_path)


def _is_dir_fd(fd: int) -> bool:
    import stat

    return stat.S_ISDIR(os.fstat(fd).st_mode)


# ------------------------------------------------ records of earlier runs
@contextlib.contextmanager
def missed_tolerance(monkeypatch: pytest.MonkeyPatch) -> Iterator[None]:
    """Every residual the solver reports raised by 1: no tolerance is met (a
    tolerance below float64's reach is refused before any solve)."""
    import specgraph.eigen._api as eigen_api

    real = eigen_api._scaled_residuals
    with monkeypatch.context() as patch:
        patch.setattr(eigen_api, "_scaled_residuals", lambda *a: real(*a) + 1.0)
        yield


def test_a_result_removes_a_stale_not_converged_record(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    edges, out = barbell_edges(tmp_path), tmp_path / "out"
    with missed_tolerance(monkeypatch):
        assert zones_cli(edges, out, 2) == 3
    assert [p.name for p in out.iterdir()] == [NOT_CONVERGED_FILE]
    assert zones_cli(edges, out, 2) == 0
    names = sorted(p.name for p in out.iterdir())
    assert NOT_CONVERGED_FILE not in names
    assert {"zones.csv", "run.json"} <= set(names)


def test_a_run_that_did_not_converge_leaves_the_earlier_result_and_says_so(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    # Decision: a failed run, like every failure, leaves the previous result whole;
    # its record says the other files are an earlier run's.
    edges, out = barbell_edges(tmp_path), tmp_path / "out"
    assert zones_cli(edges, out, 2) == 0
    before = snapshot(out)
    with missed_tolerance(monkeypatch):
        assert zones_cli(edges, out, 3) == 3
    after = snapshot(out)
    assert {k: v for k, v in after.items() if k != NOT_CONVERGED_FILE} == before
    record = json.loads((out / NOT_CONVERGED_FILE).read_text(encoding="utf-8"))
    assert record["converged"] is False
    assert "earlier run" in record["other_files"]


# ------------------------------------------------------ killed mid-commit
#: For each position ``kill_at``, a child process commits the new run into a
#: folder holding the old one and SIGKILLs itself just before its ``kill_at``-th
#: rename; the parent then lists the hidden files and recovers the folder. (The
#: random-moment kills of the whole command are in tests/test_output_safety.py.)
KILLED = textwrap.dedent(
    """
    import json, os, signal, sys
    sys.path.insert(0, sys.argv[2])
    from pathlib import Path
    from test_commit_safety import consistent, run_files
    from specgraph.export import recover_outputs, write_outputs

    def killed_at(folder, kill_at):
        write_outputs(folder, run_files("old"))
        pid = os.fork()
        if pid == 0:
            real, calls = os.replace, [0]
            def replace(src, dst):
                calls[0] += 1
                if calls[0] == kill_at:
                    os.kill(os.getpid(), signal.SIGKILL)
                real(src, dst)
            os.replace = replace
            write_outputs(folder, run_files("new"))
            os._exit(0)
        _, status = os.waitpid(pid, 0)
        hidden = sorted(p.name for p in folder.iterdir() if p.name.startswith("."))
        recover_outputs(folder)
        return {"killed": os.WIFSIGNALED(status), "hidden": hidden,
                "tag": json.loads((folder / "run.json").read_text())["tag"],
                "consistent": consistent(folder),
                "left": sorted(p.name for p in folder.iterdir() if p.name.startswith("."))}

    base = Path(sys.argv[1])
    print(json.dumps({k: killed_at(base / k, int(k)) for k in sys.argv[3:]}))
    """
)

#: Renames (os.replace calls) of a commit of 9 files over 9 previous ones: 1 the
#: journal, 2-11 the backups (the 10th tries a not-converged.json, absent), 12-20
#: the moves. Killed before any move: undone (old); after the first move:
#: finished (new). 21: past the last rename, the child ends normally.
KILL_POSITIONS = {1: "old", 2: "old", 7: "old", 11: "old", 12: "old", 13: "new", 16: "new",
                  20: "new", 21: "new"}  # fmt: skip


@POSIX_ONLY
def test_sigkill_at_each_step_of_the_commit_recovers_one_run_whole(tmp_path: Path) -> None:
    positions = [str(k) for k in KILL_POSITIONS]
    done = subprocess.run(
        [sys.executable, "-c", KILLED, str(tmp_path), str(Path(__file__).parent), *positions],
        capture_output=True, text=True, timeout=300, check=False,
        env={**os.environ, "PYTHONWARNINGS": "ignore"},
    )  # fmt: skip
    assert done.returncode == 0, done.stderr[-3000:]
    results = json.loads(done.stdout)
    for kill_at, expected in KILL_POSITIONS.items():
        result = results[str(kill_at)]
        assert result["killed"] is (kill_at < 21), result
        if 1 < kill_at < 21:  # killed with the journal in place
            assert any(name.startswith(".specgraph-commit.") for name in result["hidden"])
        assert result["tag"] == expected, (kill_at, result)
        assert result["consistent"], (kill_at, result)
        assert result["left"] == [], (kill_at, result)  # journal, backups, temporaries gone
