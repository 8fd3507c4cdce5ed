"""The memory guard: the per-stage model, the bounds it reads, its refusals.

Outside sources named beside the checks: the Linux kernel documentation
(Documentation/filesystems/proc.rst for ``/proc/meminfo`` ``MemAvailable`` and
``/proc/self/status`` ``VmSize``/``VmRSS``; Documentation/admin-guide/
cgroup-v2.rst for ``memory.max`` and ``memory.current``, the literal ``max``
meaning no limit; Documentation/admin-guide/cgroup-v1/memory.rst for
``memory.limit_in_bytes`` and ``memory.usage_in_bytes``), cgroups(7) for the
``hierarchy-ID:controllers:path`` lines of ``/proc/self/cgroup``,
getrlimit(2) for RLIMIT_AS, and numpy's own ``MemoryError`` text. The fitted
coefficients themselves are checked against measured peaks by
``benchmarks/probe_memory_model.py``, not here (no timed or sized runs in the
unit suite).
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import specgraph
from specgraph import _commands, _guard
from specgraph._guard import (
    MEMORY_BASE_BYTES,
    MEMORY_FRACTION,
    READING_STAGES,
    STAGE_COSTS,
    TASK_STAGES,
    MemoryBudget,
    MemoryLimit,
    check_memory,
    check_table_memory,
    estimate_memory,
    memory_budget,
    requested_bytes,
    table_rows,
)
from specgraph.cli import main
from specgraph.exceptions import ParameterError, ResourceError, SpecgraphError

GIB = 2**30


def _budget(headroom: int, *, resident: int = 0) -> MemoryBudget:
    return MemoryBudget(resident, (MemoryLimit("a test bound", 4 * headroom, headroom),))


# ------------------------------------------------------------------ the model
def test_the_public_api_exports_the_guard() -> None:
    assert specgraph.check_memory is check_memory
    assert specgraph.estimate_memory is estimate_memory
    assert specgraph.memory_budget is memory_budget
    assert issubclass(specgraph.ResourceError, MemoryError)


def test_every_stage_cost_is_non_negative_so_the_estimate_grows() -> None:
    # A negative coefficient would let a larger network be estimated smaller.
    for stage in STAGE_COSTS:
        assert min(stage.per_node, stage.per_link, stage.per_node_zone) >= 0, stage


@pytest.mark.parametrize("task", sorted(TASK_STAGES))
def test_the_estimate_is_monotone_in_nodes_links_and_zones(task: str) -> None:
    sizes = [(1_000, 2_000, 2), (1_000, 3_000, 2), (2_000, 3_000, 2), (2_000, 3_000, 40)]
    sizes += [(10**6, 2 * 10**6, 40), (2 * 10**6, 2 * 10**6, 40)]
    peaks = [estimate_memory(n, m, zones=k, task=task).peak for n, m, k in sizes]
    assert peaks == sorted(peaks)
    assert peaks[-1] > peaks[0]


def test_the_peak_is_the_largest_stage_of_the_task() -> None:
    estimate = estimate_memory(10**6, 2 * 10**6, zones=16)
    assert [name for name, _ in estimate.stages] == list(TASK_STAGES["zoning"])
    assert estimate.peak == max(value for _, value in estimate.stages)
    assert estimate.stage(estimate.largest) == estimate.peak
    assert all(value >= MEMORY_BASE_BYTES for _, value in estimate.stages)
    spectrum = estimate_memory(10**6, 2 * 10**6, zones=16, task="spectrum")
    assert spectrum.peak <= estimate.peak  # a subset of the stages
    fixed = max(stage.fixed for stage in STAGE_COSTS)
    assert estimate_memory(0, 0).peak == MEMORY_BASE_BYTES + fixed


def test_zones_beyond_the_multilevel_threshold_cost_no_more_in_a_zoning() -> None:
    # From MULTILEVEL_MIN_ZONES zones assign="auto" computes no eigenvector of the
    # whole network, so the zoning's per-zone cost vanishes there; a spectrum's does not.
    from specgraph.zones import MULTILEVEL_MIN_ZONES

    assert _guard.ZONING_ZONES_CAP == MULTILEVEL_MIN_ZONES
    n, m = 10**6, 2 * 10**6
    at_cap = estimate_memory(n, m, zones=MULTILEVEL_MIN_ZONES).peak
    assert estimate_memory(n, m, zones=1_000).peak == at_cap
    assert at_cap < estimate_memory(n, m, zones=MULTILEVEL_MIN_ZONES - 1).peak
    spectrum = estimate_memory(n, m, zones=MULTILEVEL_MIN_ZONES, task="spectrum").peak
    assert estimate_memory(n, m, zones=1_000, task="spectrum").peak > spectrum


def test_the_estimate_refuses_bad_arguments() -> None:
    with pytest.raises(ParameterError, match="n_links"):
        estimate_memory(10, -1)
    with pytest.raises(ParameterError, match="task"):
        estimate_memory(10, 10, task="everything")


# ------------------------------------------------------------------ refusing
def test_check_memory_passes_with_room_and_refuses_without() -> None:
    estimate = estimate_memory(10**6, 2 * 10**6, zones=16)
    room = int((estimate.peak - MEMORY_BASE_BYTES) / MEMORY_FRACTION) + 1
    assert check_memory(10**6, 2 * 10**6, budget=_budget(room, resident=MEMORY_BASE_BYTES))
    with pytest.raises(ResourceError) as info:
        check_memory(
            10**6,
            2 * 10**6,
            what="zones edges.csv",
            budget=_budget(room // 4, resident=MEMORY_BASE_BYTES),
        )
    message = str(info.value)
    assert isinstance(info.value, SpecgraphError)
    assert message.startswith("zones edges.csv: a network of 1,000,000 nodes and 2,000,000 links")
    assert f"the most in the stage '{estimate.largest}'" in message
    assert f"{estimate.peak / GIB:.1f} GiB of memory at peak" in message
    assert "a test bound" in message
    assert "a machine or container with at least" in message


def test_the_advertised_part_size_fits() -> None:
    # The refusal names the largest part (same link density) that would fit:
    # that part must pass the same check, a part twice as large must not.
    budget = _budget(2 * GIB, resident=MEMORY_BASE_BYTES)
    with pytest.raises(ResourceError) as info:
        check_memory(50_000_000, 100_000_000, budget=budget)
    match = re.search(r"parts of at most about ([\d,]+) nodes", str(info.value))
    assert match is not None, str(info.value)
    part = int(match[1].replace(",", ""))
    check_memory(part, 2 * part, budget=budget)
    with pytest.raises(ResourceError):
        check_memory(2 * part, 4 * part, budget=budget)


def test_fewer_zones_are_advised_when_zones_are_what_does_not_fit() -> None:
    n, m = 10**6, 2 * 10**6
    # 40 zones, below MULTILEVEL_MIN_ZONES: every zone an eigenvector of the whole network
    many = estimate_memory(n, m, zones=40)
    few = estimate_memory(n, m, zones=16)
    assert few.peak < many.peak
    budget = _budget(int((few.peak + many.peak) / 2 - MEMORY_BASE_BYTES), resident=0)
    with pytest.raises(ResourceError) as info:
        check_memory(n, m, zones=40, budget=budget)
    match = re.search(r"fewer zones \(at most about ([\d,]+) fit\)", str(info.value))
    assert match is not None, str(info.value)
    check_memory(n, m, zones=int(match[1].replace(",", "")), budget=budget)


def test_a_loaded_network_counts_as_the_process_own_memory() -> None:
    n, m = 10**6, 2 * 10**6
    after = check_memory(n, m, loaded=True, budget=_budget(64 * GIB))
    assert all(name not in READING_STAGES for name, _ in after.stages)
    held = MEMORY_BASE_BYTES + int(_guard.NETWORK_HELD.bytes_for(n, m, 0))
    # Room for the peak less what the process holds: passes only when the
    # held network is counted as the process's own, not as needed again.
    room = int((after.peak - held) / MEMORY_FRACTION) + 2**20
    check_memory(n, m, loaded=True, budget=_budget(room, resident=held))
    if after.peak - MEMORY_BASE_BYTES > MEMORY_FRACTION * room:
        with pytest.raises(ResourceError):
            check_memory(n, m, loaded=False, budget=_budget(room, resident=held))
    # A process holding nothing of it yet gets no such credit.
    with pytest.raises(ResourceError):
        check_memory(n, m, loaded=True, budget=_budget(room, resident=0))


def test_no_known_bound_means_no_check() -> None:
    estimate = check_memory(10**9, 10**9, budget=MemoryBudget(None, ()))
    assert estimate.peak == estimate_memory(10**9, 10**9).peak


# ------------------------------------------------------- the bounds it reads
def _point(monkeypatch: pytest.MonkeyPatch, tmp_path: Path, **files: str) -> None:
    """Point the guard's /proc and /sys paths at stand-ins under tmp_path."""
    names = {
        "meminfo": "PROC_MEMINFO",
        "status": "PROC_SELF_STATUS",
        "cgroup": "PROC_SELF_CGROUP",
    }
    for key, constant in names.items():
        path = tmp_path / key
        if key in files:
            path.write_text(files[key])
        monkeypatch.setattr(_guard, constant, str(path))
    monkeypatch.setattr(_guard, "CGROUP_V2_ROOT", str(tmp_path / "v2"))
    monkeypatch.setattr(_guard, "CGROUP_V1_MEMORY_ROOT", str(tmp_path / "v1"))


def _write(folder: Path, **values: str) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    for name, value in values.items():
        (folder / name.replace("_", ".", 1)).write_text(value + "\n")


STATUS = "Name:\tpython\nVmSize:\t 4000000 kB\nVmRSS:\t  500000 kB\nVmData:\t 3000000 kB\n"


def test_meminfo_available_is_read_in_kib(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    # proc.rst: "MemAvailable: An estimate of how much memory is available for
    # starting new applications, without swapping", in kB (units of 1024 bytes).
    meminfo = "MemTotal:       24000000 kB\nMemFree:  100 kB\nMemAvailable:   12345678 kB\n"
    _point(monkeypatch, tmp_path, meminfo=meminfo, status=STATUS, cgroup="")
    budget = memory_budget()
    assert budget.resident == 500000 * 1024
    machine = [b for b in budget.limits if b.limit is None]
    assert [b.headroom for b in machine] == [12345678 * 1024]


def test_cgroup_v2_limit_minus_usage_tightest_ancestor(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path
) -> None:
    # cgroup-v2.rst: memory.max is the hard limit ("max" for none), memory.current
    # the usage of the group and its descendants; a parent's limit binds too.
    _point(
        monkeypatch,
        tmp_path,
        meminfo="MemAvailable: 100000000 kB\n",
        status=STATUS,
        cgroup="0::/batch/job7\n",
    )
    v2 = tmp_path / "v2"
    _write(v2, memory_max="max", memory_current=str(9 * GIB))
    _write(v2 / "batch", memory_max=str(6 * GIB), memory_current=str(5 * GIB))
    _write(v2 / "batch" / "job7", memory_max=str(4 * GIB), memory_current=str(1 * GIB))
    budget = memory_budget()
    tightest = budget.tightest
    assert tightest is not None
    assert tightest.source == "cgroup v2 memory.max"
    assert (tightest.limit, budget.headroom) == (6 * GIB, 1 * GIB)
    assert "cgroup v2 memory.max 6.0 GiB" in budget.describe()


def test_cgroup_v1_limit_and_its_unlimited_value(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path
) -> None:
    # cgroup-v1/memory.rst: memory.limit_in_bytes and memory.usage_in_bytes;
    # an unlimited group reads as the page counter's maximum (the figure
    # 9223372036854771712 is the one read on a 4 KiB-page machine).
    cgroup = "12:memory:/docker/abc\n11:pids:/docker/abc\n0::/\n"
    _point(monkeypatch, tmp_path, meminfo="MemAvailable: 100000000 kB\n", status=STATUS,
           cgroup=cgroup)  # fmt: skip
    v1 = tmp_path / "v1"
    _write(v1, memory_limit_in_bytes="9223372036854771712", memory_usage_in_bytes="10")
    _write(v1 / "docker" / "abc", memory_limit_in_bytes=str(3 * GIB),
           memory_usage_in_bytes=str(2 * GIB))  # fmt: skip
    budget = memory_budget()
    assert budget.tightest is not None
    assert budget.tightest.source == "cgroup v1 memory.limit_in_bytes"
    assert budget.headroom == 1 * GIB
    # Unlimited everywhere: only the machine's figure is left.
    _write(v1 / "docker" / "abc", memory_limit_in_bytes="9223372036854771712")
    assert [b.source for b in memory_budget().limits] == ["the machine's available memory"]


_RLIMIT_CHILD = """
import json, resource
from specgraph import _guard
def size():
    return _guard._kib_field(_guard._read_text("/proc/self/status"), "VmSize")
hard = resource.getrlimit(resource.RLIMIT_AS)[1]
limit = size() + 3 * 2**30
resource.setrlimit(resource.RLIMIT_AS, (limit, hard))
before = size()
found = [b for b in _guard.memory_budget().limits if b.source.startswith("RLIMIT_AS")]
after = size()
print(json.dumps({"limit": limit, "before": before, "after": after,
                  "found": [[b.limit, b.headroom] for b in found]}))
"""


def test_address_space_limit_minus_virtual_size() -> None:
    # getrlimit(2): RLIMIT_AS caps the virtual size (VmSize of /proc/self/status);
    # lowering one's own soft limit is always allowed, so a child process does it.
    if not Path("/proc/self/status").exists():
        pytest.skip("no /proc on this system")
    done = subprocess.run(
        [sys.executable, "-c", _RLIMIT_CHILD], capture_output=True, text=True, check=True
    )
    seen = json.loads(done.stdout)
    assert len(seen["found"]) == 1
    limit, headroom = seen["found"][0]
    assert limit == seen["limit"]
    assert limit - seen["after"] <= headroom <= limit - seen["before"]


def test_this_machine_has_a_bound() -> None:
    if not Path("/proc/meminfo").exists():
        pytest.skip("no /proc/meminfo on this system")
    budget = memory_budget()
    assert budget.headroom is not None
    assert budget.headroom > 0
    assert budget.resident is not None
    assert budget.resident > 0


# ------------------------------------------------------------ before reading
def test_table_rows_from_samples_of_the_file(tmp_path: Path) -> None:
    n = 40_000
    # Ids grow longer down the file (N1 ... N40000): the widest sample is
    # used, so the estimate may err low, never high.
    ids = [f"N{i}" for i in range(n + 1)]
    frame = pd.DataFrame({"source": ids[:-1], "target": ids[1:]})
    path = tmp_path / "edges.csv"
    frame.to_csv(path, index=False)
    rows = table_rows(path)
    assert rows is not None
    assert 0.8 * n <= rows <= n
    assert table_rows(tmp_path / "missing.csv") is None
    try:
        frame.to_parquet(tmp_path / "edges.parquet", index=False)
    except ImportError:
        return
    assert table_rows(tmp_path / "edges.parquet") == n  # the file's own metadata


def test_refusal_before_reading_a_real_file(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    ids = [f"J{i}" for i in range(2_001)]
    edges = tmp_path / "edges.csv"
    pd.DataFrame({"source": ids[:-1], "target": ids[1:]}).to_csv(edges, index=False)
    tiny = _budget(2**20, resident=MEMORY_BASE_BYTES)
    monkeypatch.setattr(_guard, "memory_budget", lambda: tiny)

    def must_not_read(*_args: object, **_kwargs: object) -> None:
        raise AssertionError("the file was read before the memory check")

    monkeypatch.setattr(_commands, "read_edges", must_not_read)
    out = tmp_path / "out"
    assert main(["zones", str(edges), "--zones", "4", "--out", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert f"zones {edges}" in err
    assert "needs about" in err
    assert "the most in the stage" in err
    assert "Traceback" not in err
    assert not out.exists()


def test_check_table_memory_assumes_the_fewest_plausible_nodes(tmp_path: Path) -> None:
    def fewest(rows: int) -> int:
        edges = tmp_path / f"edges{rows}.csv"
        edges.write_text("source,target\n" + "".join(f"A{i},B{i}\n" for i in range(rows)))
        estimate = check_table_memory(edges, budget=_budget(64 * GIB))
        assert estimate is not None
        assert 0.8 * rows <= estimate.n_links <= rows
        return estimate.n_nodes

    # Few rows: the fewest nodes m links can join at all, n (n - 1) / 2 >= m (a
    # complete graph; 10 links need 5 nodes).
    assert fewest(10) == 5
    # Many rows: the mean degree 2 m / n of a plausible network bounds n from below.
    links = 100_000
    assert fewest(links) >= 2 * 0.8 * links / _guard.PLAUSIBLE_MEAN_DEGREE


# ------------------------------------------------------------- out of memory
def _numpy_memory_error() -> MemoryError:
    try:
        np.empty(2**62, dtype=np.uint8)  # more than any address space: refused at once
    except MemoryError as exc:
        return exc
    raise AssertionError("numpy allocated 4 EiB")


def test_requested_bytes_reads_numpy_message() -> None:
    error = _numpy_memory_error()
    # numpy's text: "Unable to allocate 4.00 EiB for an array with shape ..."
    assert requested_bytes(error) == 2**62
    assert requested_bytes(MemoryError()) is None
    assert requested_bytes(MemoryError("Unable to allocate 512. bytes")) == 512


def test_memory_error_in_a_stage_is_a_refusal_naming_it(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    ids = [f"J{i}" for i in range(41)]
    edges = tmp_path / "edges.csv"
    pd.DataFrame({"source": ids[:-1], "target": ids[1:]}).to_csv(edges, index=False)

    def solve_too_big(network: object, zones: object, **options: object) -> None:
        options["progress"]("solving")  # type: ignore[operator]
        raise _numpy_memory_error()

    monkeypatch.setattr(_commands, "find_zones", solve_too_big)
    out = tmp_path / "out"
    argv = ["zones", str(edges), "--zones", "2", "--out", str(out), "--quiet", "--json"]
    assert main(argv) == 2
    captured = capsys.readouterr()
    assert "internal error" not in captured.err
    assert "ran out of memory in the stage 'solving'" in captured.err
    assert "4.0 EiB" in captured.err
    error = json.loads(captured.out)["error"]
    assert (error["type"], error["exit_code"]) == ("ResourceError", 2)
    assert not out.exists()
