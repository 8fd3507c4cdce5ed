"""Output safety: spreadsheet-formula neutralization, all-or-nothing writes under
SIGKILL, and the memory guard.

Sources: the list of formula-triggering first characters and the single-quote
prefix are the OWASP guidance on CSV injection
(https://owasp.org/www-community/attacks/CSV_Injection). Every CSV is read back
with Python's :mod:`csv` module (the reference reader of RFC 4180 text), never
with specgraph. Checksums are :mod:`hashlib` SHA-256. POSIX semantics of
``os.replace`` and SIGKILL (a signal that cannot be caught) are from the POSIX
standard; the kill tests need ``os.fork`` and run only on POSIX.
"""

from __future__ import annotations

import csv
import hashlib
import json
import os
import re
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from specgraph import _guard
from specgraph._guard import (
    FORMULA_ESCAPE,
    FORMULA_TRIGGERS,
    neutralize_text,
    restore_text,
)
from specgraph.cli import main
from specgraph.export import recover_outputs, write_outputs

#: The OWASP list, written out here independently of the module constant.
OWASP_FIRST_CHARACTERS = ["=", "+", "-", "@", "\t", "\r"]
#: Node ids a spreadsheet would run as formulas (OWASP examples and variants).
HOSTILE_IDS = ['=HYPERLINK("http://x.invalid","y")', "+1", "-2", "@SUM(A1)", "\tX", "\rY"]


def read_rows(path: Path) -> list[dict[str, str]]:
    """Rows of a CSV as text, by Python's csv module (no type guessing)."""
    with open(path, encoding="utf-8", newline="") as handle:
        return list(csv.DictReader(handle))


# --------------------------------------------------------- neutralization
def test_the_trigger_list_is_the_owasp_list() -> None:
    # OWASP CSV Injection: "=", "+", "-", "@", tab (0x09), carriage return (0x0D).
    assert sorted(FORMULA_TRIGGERS) == sorted(OWASP_FIRST_CHARACTERS)
    assert FORMULA_ESCAPE == "'"


@pytest.mark.parametrize("first", OWASP_FIRST_CHARACTERS, ids=repr)
def test_each_trigger_gets_one_quote(first: str) -> None:
    cells = pd.Series([f"{first}payload", "safe", f"x{first}"], dtype=object)
    assert neutralize_text(cells).tolist() == [f"'{first}payload", "safe", f"x{first}"]


def test_numbers_and_booleans_are_untouched() -> None:
    frame = pd.DataFrame({"w": [-1.5, 2.0], "z": [-3, 4], "b": [True, False]})
    out = _guard.neutralize_frame(frame)
    assert out is frame  # nothing to change, nothing copied
    # An object column mixing numbers and text: only the text cell changes.
    mixed = pd.Series([-1.5, "-1.5", None], dtype=object)
    assert neutralize_text(mixed).tolist() == [-1.5, "'-1.5", None]


def test_restore_inverts_neutralize_on_random_text() -> None:
    # Brute force over random strings drawn from an alphabet rich in quotes and
    # triggers: restore(neutralize(s)) == s, and no neutralized cell starts
    # with a trigger (the two properties the rule promises).
    rng = np.random.default_rng(11)
    alphabet = np.array(["'", "=", "+", "-", "@", "\t", "\r", "a", "1", " "])
    cells = ["".join(rng.choice(alphabet, size=rng.integers(0, 6))) for _ in range(4000)]
    series = pd.Series(cells, dtype=object)
    safe = neutralize_text(series)
    assert restore_text(safe).tolist() == cells
    assert not any(cell[:1] in OWASP_FIRST_CHARACTERS for cell in safe)


def test_write_outputs_neutralizes_cells_and_text_headers(tmp_path: Path) -> None:
    table = pd.DataFrame({"node": ["=1+1", "ok"], "-score": [-0.25, 1e-300], "zone": [-1, 2]})
    write_outputs(tmp_path, {"t.csv": table})
    text = (tmp_path / "t.csv").read_text(encoding="utf-8")
    # Numbers in Python's shortest round-trip form, unchanged; text quoted.
    assert text == "node,'-score,zone\n'=1+1,-0.25,-1\nok,1e-300,2\n"
    assert table["node"].tolist() == ["=1+1", "ok"]  # the caller's frame is not modified


def hostile_edges(folder: Path) -> Path:
    """Two triangles of hostile ids joined by one link, written with csv.QUOTE_ALL."""
    a, b, c, d, e, f = HOSTILE_IDS
    links = [(a, b, 2.0), (b, c, 2.0), (a, c, 2.0), (d, e, 2.0), (e, f, 2.0), (d, f, 2.0)]
    links.append((c, d, 0.5))
    path = folder / "edges.csv"
    with open(path, "w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, quoting=csv.QUOTE_ALL, lineterminator="\n")
        writer.writerow(["source", "target", "weight"])
        writer.writerows(links)
    return path


def test_zones_command_neutralizes_hostile_node_ids(tmp_path: Path) -> None:
    edges = hostile_edges(tmp_path)
    out = tmp_path / "out"
    code = main(["zones", str(edges), "--zones", "2", "--seed", "1", "--out", str(out), "--quiet"])
    assert code == 0
    zones = read_rows(out / "zones.csv")
    assert sorted(row["node"] for row in zones) == sorted("'" + i for i in HOSTILE_IDS)
    for row in zones:
        assert row["zone"] in {"0", "1"}  # numeric column as plain digits
    boundary = read_rows(out / "boundary.csv")
    assert len(boundary) == 1  # the one link between the triangles
    (link,) = boundary
    assert {link["source"], link["target"]} == {"'" + HOSTILE_IDS[2], "'" + HOSTILE_IDS[3]}
    assert float(link["weight"]) == 0.5
    assert link["weight"] == "0.5"
    assert {link["zone_a"], link["zone_b"]} == {"0", "1"}
    for name in ("zones.csv", "boundary.csv", "zone_summary.csv", "spectrum.csv"):
        for row in read_rows(out / name):
            for cell in row.values():
                assert cell[:1] not in OWASP_FIRST_CHARACTERS or _is_number(cell), (name, cell)


def _is_number(cell: str) -> bool:
    try:
        float(cell)
    except ValueError:
        return False
    return True


def test_score_reads_its_own_neutralized_zones_back(tmp_path: Path) -> None:
    edges = hostile_edges(tmp_path)
    out = tmp_path / "out"
    assert main(["zones", str(edges), "--zones", "2", "--seed", "1", "--out", str(out)]) == 0
    scored = tmp_path / "scored"
    code = main(["score", str(edges), str(out / "zones.csv"), "--out", str(scored), "--quiet"])
    assert code == 0
    assert "unassigned.csv" not in {p.name for p in scored.iterdir()}


# ------------------------------------------------------- atomic under SIGKILL
#: The kill driver: imports specgraph once, then forks one child per trial and
#: SIGKILLs it after a seeded random delay. Every pipeline run happens in a
#: child (numba's threads are never started in the process that forks).
DRIVER = textwrap.dedent(
    """
    import hashlib, json, os, shutil, signal, sys, time
    import numpy as np, pandas as pd
    from specgraph import cli
    from specgraph.export import recover_outputs, write_outputs

    cfg = json.loads(sys.argv[1])
    base = cfg["base"]
    rng = np.random.default_rng(cfg["seed"])

    def digest(path):
        with open(path, "rb") as handle:
            return hashlib.sha256(handle.read()).hexdigest()

    def snapshot(folder):
        return {n: digest(os.path.join(folder, n)) for n in sorted(os.listdir(folder))}

    def in_child(job, delay=None):
        start = time.perf_counter()
        pid = os.fork()
        if pid == 0:
            code = 99
            try:
                code = job()
            finally:
                os._exit(code)
        if delay is not None:
            time.sleep(delay)
            os.kill(pid, signal.SIGKILL)
        _, status = os.waitpid(pid, 0)
        return status, time.perf_counter() - start

    def cli_job(workdir, argv):
        def job():
            os.chdir(workdir)
            return cli.main(argv)
        return job

    def reset(folder, old):
        names = os.listdir(folder)
        if any(n.startswith(".specgraph-commit.") for n in names):
            recover_outputs(folder)  # what the next run would do first
        for name in os.listdir(folder):
            if not name.startswith("."):
                os.unlink(os.path.join(folder, name))
        for name in os.listdir(old):
            shutil.copy(os.path.join(old, name), os.path.join(folder, name))

    def trials(make_job, folder, old, low, high):
        report = []
        for delay in rng.uniform(low, high, size=cfg["kills"]):
            reset(folder, old)
            status, _ = in_child(make_job(), float(delay))
            raw = snapshot(folder)
            copy = folder + ".inspect"
            shutil.rmtree(copy, ignore_errors=True)
            shutil.copytree(folder, copy)
            recover_outputs(copy)
            report.append({"delay": float(delay), "killed": os.WIFSIGNALED(status),
                           "raw": raw, "recovered": snapshot(copy)})
        return report

    out = {}
    # 1. The command line: previous result (K zones), then the new one (K+1).
    argv = ["zones", cfg["edges"], "--seed", "3", "--out", "out", "--quiet", "--zones"]
    for name, k in (("old", cfg["zones"]), ("new", cfg["zones"] + 1)):
        os.makedirs(os.path.join(base, name))
        status, took = in_child(cli_job(os.path.join(base, name), argv + [str(k)]))
        assert status == 0, status
        out[name] = snapshot(os.path.join(base, name, "out"))
    work = os.path.join(base, "work")
    os.makedirs(os.path.join(work, "out"))
    out["cli"] = trials(lambda: cli_job(work, argv + [str(cfg["zones"] + 1)]),
                        os.path.join(work, "out"), os.path.join(base, "old", "out"),
                        0.5 * took, 1.5 * took)  # some kills land after the end
    status, _ = in_child(cli_job(work, argv + [str(cfg["zones"] + 1)]))
    out["cli_final"] = snapshot(os.path.join(work, "out"))

    # 2. The writer alone, with tables big enough that writing takes a while.
    rows = cfg["rows"]
    ids = pd.Series(np.char.add("n", np.arange(rows).astype(str)), dtype=object)
    def tables(version):
        frame = pd.DataFrame({"node": ids, "zone": np.arange(rows) % 7 + version,
                              "w": np.linspace(-1.0, 1.0, rows) * version})
        return {"a.csv": frame, "b.csv": frame.iloc[::-1], "c.csv": frame, "run.json":
                {"version": version}}
    for name, version in (("wold", 1), ("wnew", 2)):
        status, took = in_child(lambda: (write_outputs(os.path.join(base, name),
                                                       tables(version)), 0)[1])
        assert status == 0, status
        out[name] = snapshot(os.path.join(base, name))
    wfolder = os.path.join(base, "wwork")
    os.makedirs(wfolder)
    out["write"] = trials(lambda: (lambda: (write_outputs(wfolder, tables(2)), 0)[1]),
                          wfolder, os.path.join(base, "wold"), 0.0, 1.1 * took)
    out["write_leftovers"] = sorted(n for n in os.listdir(wfolder) if n.startswith("."))
    write_outputs(wfolder, tables(2))  # the next successful run, in this process
    out["write_final"] = snapshot(wfolder)
    print(json.dumps(out))
    """
)

#: The hidden files a writer may leave when killed: temporary files, backups of
#: previous files, the commit journal, and the folder's lock file (kept: no result).
HIDDEN = re.compile(
    r"^\.(.+\.\d+\.[^.]+\.(partial|backup)|specgraph-commit\.\d+(\.[0-9a-f]+)?\.json"
    r"|specgraph\.lock)$"
)


def road_edges(path: Path, n: int, seed: int) -> None:
    from specgraph.gallery import road_like

    net = road_like(n, rng=seed)
    upper = net.adjacency.tocoo()
    keep = upper.row < upper.col
    ids = np.asarray(net.node_ids)
    pd.DataFrame(
        {"source": ids[upper.row[keep]], "target": ids[upper.col[keep]], "w": upper.data[keep]}
    ).to_csv(path, index=False)


def shown(snapshot: dict) -> dict:
    """The files a user sees: the snapshot without hidden names."""
    return {k: v for k, v in snapshot.items() if not k.startswith(".")}


def check_trials(report: list[dict], old: dict, new: dict) -> None:
    """Each kill left the complete previous or complete new result (POSIX rename atomicity)."""
    old, new = shown(old), shown(new)
    for trial in report:
        raw, recovered = trial["raw"], shown(trial["recovered"])
        visible = shown(raw)
        hidden = [k for k in raw if k.startswith(".")]
        assert all(HIDDEN.match(name) for name in hidden), hidden
        committing = any(name.startswith(".specgraph-commit.") for name in hidden)
        if committing:
            # Killed between the journal and its deletion: every visible file is a
            # complete old or new one (others are set aside as backups), and recovery
            # undoes the commit (killed before the first move) or finishes it.
            assert all(visible[k] in (old[k], new[k]) for k in visible), trial
            assert recovered in (old, new), trial
        else:
            assert visible in (old, new), trial
            assert recovered == visible, trial


@pytest.mark.skipif(not hasattr(os, "fork"), reason="needs os.fork and SIGKILL (POSIX)")
@pytest.mark.parametrize(
    ("kills", "nodes", "rows"),
    [
        pytest.param(4, 1_500, 60_000, id="quick"),
        pytest.param(12, 5_000, 200_000, id="long", marks=pytest.mark.slow),
    ],
)
def test_sigkill_leaves_old_or_new_result(
    tmp_path: Path, kills: int, nodes: int, rows: int
) -> None:
    edges = tmp_path / "edges.csv"
    road_edges(edges, nodes, seed=5)
    cfg = {"base": str(tmp_path), "edges": str(edges), "zones": 4, "kills": kills,
           "rows": rows, "seed": 2024}  # fmt: skip
    env = {**os.environ, "PYTHONWARNINGS": "ignore"}
    done = subprocess.run(
        [sys.executable, "-c", DRIVER, json.dumps(cfg)],
        capture_output=True,
        text=True,
        env=env,
        check=False,
    )
    assert done.returncode == 0, done.stderr[-3000:]
    out = json.loads(done.stdout)
    assert out["old"] != out["new"]
    assert set(out["old"]) == set(out["new"])
    check_trials(out["cli"], out["old"], out["new"])
    assert out["cli_final"] == out["new"]  # the next run leaves no hidden file behind
    check_trials(out["write"], out["wold"], out["wnew"])
    # At least one kill landed while the files were being written: it left a
    # hidden temporary file, which the next successful write removed.
    assert any(k.startswith(".") for t in out["write"] for k in t["raw"]), out["write"]
    assert out["write_final"] == out["wnew"]


def test_recover_finishes_a_committed_set_and_drops_stale_temporaries(tmp_path: Path) -> None:
    # A folder as a run killed mid-commit leaves it: journal of a dead process,
    # one file moved, one still staged, plus a stale temporary of another run.
    dead = _dead_pid()
    (tmp_path / "a.csv").write_text("new a\n")
    (tmp_path / "b.csv").write_text("old b\n")
    staged = tmp_path / f".b.csv.{dead}.k3j9x1ab.partial"
    staged.write_text("new b\n")
    stale = tmp_path / f".zones.csv.{dead}.zz81kq0c.partial"
    stale.write_text("half")
    (tmp_path / "unassigned.csv").write_text("old optional table\n")
    journal = {"specgraph_commit": 1, "moves": [[f".a.csv.{dead}.aaaa.partial", "a.csv"],
                                                 [staged.name, "b.csv"]],
               "remove": ["unassigned.csv"]}  # fmt: skip
    (tmp_path / f".specgraph-commit.{dead}.json").write_text(json.dumps(journal))
    live = tmp_path / f".c.csv.{os.getpid()}.qqqq.partial"  # this process: left alone
    live.write_text("mine")
    assert recover_outputs(tmp_path) == [tmp_path / "b.csv"]
    assert (tmp_path / "b.csv").read_text() == "new b\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(["a.csv", "b.csv", live.name])


def test_an_old_journal_that_cannot_be_finished_is_reported_and_kept(tmp_path: Path) -> None:
    # A journal of the earlier format (no backups) whose move meets a folder: it can
    # be neither finished nor undone, so recovery names it and changes nothing.
    from specgraph.exceptions import OutputError

    dead = _dead_pid()
    (tmp_path / "a.csv").mkdir()
    staged = tmp_path / f".a.csv.{dead}.k3j9x1ab.partial"
    staged.write_text("new a\n")
    (tmp_path / "b.csv").write_text("new b\n")
    journal = tmp_path / f".specgraph-commit.{dead}.json"
    journal.write_text(json.dumps({"specgraph_commit": 1, "moves": [[staged.name, "a.csv"]]}))
    before = sorted(p.name for p in tmp_path.iterdir())
    with pytest.raises(OutputError, match="unfinished commit"):
        write_outputs(tmp_path, {"c.csv": pd.DataFrame({"x": [1]})})
    assert sorted(p.name for p in tmp_path.iterdir()) == before
    assert staged.read_text() == "new a\n"


def test_remove_drops_an_earlier_optional_table_in_the_same_commit(tmp_path: Path) -> None:
    table = pd.DataFrame({"node": ["a"], "zone": [0]})
    write_outputs(tmp_path, {"zones.csv": table, "unassigned.csv": table})
    write_outputs(tmp_path, {"zones.csv": table}, remove=["unassigned.csv", "zones.csv"])
    assert sorted(p.name for p in tmp_path.iterdir()) == ["zones.csv"]


def _dead_pid() -> int:
    """The pid of a child that has exited and been reaped (so no process has it, for now)."""
    child = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                           capture_output=True, text=True, check=True)  # fmt: skip
    return int(child.stdout)


# The memory guard's tests are in tests/test_guard.py.


def test_sha256_helper_matches_hashlib(tmp_path: Path) -> None:
    from specgraph.export import file_checksum

    path = tmp_path / "x.csv"
    path.write_bytes(b"node,zone\n'=A1,0\n")
    assert file_checksum(path) == "sha256:" + hashlib.sha256(path.read_bytes()).hexdigest()
