"""The first run after installing: entry kernels run as plain Python while numba's cache is cold.

The reference for the plain path is numba's compiled kernel of the same source
(numba documentation, "Just-in-Time compilation": ``py_func`` is the Python
function the dispatcher compiles): the zones found either way must be equal
arrays. The background compile (:mod:`specgraph._warm`) is checked against
numba's own cache index: after it, numba's cache holds the signature.
"""

from __future__ import annotations

import pickle
from typing import Any

import numpy as np
import pytest

from specgraph import _jit, _warm, gallery
from specgraph.zones import _coarsen, _refine, _trees, find_zones

KERNELS = [
    _refine._zone_cuts,
    _refine._refine_pass,
    _trees._peel,
    _trees._roots,
    _coarsen._match,
    _coarsen._pair_leftovers,
    _coarsen._contract,
]


def _force(monkeypatch: pytest.MonkeyPatch, *, cold: bool) -> list[tuple[Any, ...]]:
    """Every entry kernel cold (plain path) or compiled; returns the requests made."""
    requests: list[tuple[Any, ...]] = []
    monkeypatch.setattr(_jit, "_request", lambda *a: requests.append(a))
    monkeypatch.delenv(_jit.BACKGROUND_ENV, raising=False)
    if cold:
        monkeypatch.setattr(_jit, "_cached_signatures", lambda dispatcher: frozenset())
    for kernel in KERNELS:
        monkeypatch.setattr(kernel, "_compiled", not cold)
        monkeypatch.setattr(kernel, "_cached", None)
    return requests


def test_plain_path_finds_the_zones_the_compiled_kernels_find(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    """600 nodes, 8 zones: tree split, coarsening (with leftover pairing) and refinement
    all run; plain Python and numba's compiled kernels give equal label arrays."""
    network = gallery.road_like(600, rng=3)
    requests = _force(monkeypatch, cold=True)
    plain = find_zones(network, 8, rng=0).labels
    ran_plain = {qualname for _, qualname, _ in requests}
    assert ran_plain == {k.__qualname__ for k in KERNELS}  # every entry kernel ran plain
    _force(monkeypatch, cold=False)
    compiled = find_zones(network, 8, rng=0).labels
    np.testing.assert_array_equal(plain, compiled)


def test_each_kernel_plain_twin_equals_the_compiled_kernel() -> None:
    """Kernel by kernel on a 300-node network: equal outputs (arrays bit for bit)."""
    net = gallery.road_like(300, rng=5)
    a = net.adjacency.tocsr()
    ptr, idx, w = a.indptr.astype(np.int64), a.indices.astype(np.int64), a.data
    labels = np.arange(net.n_nodes, dtype=np.int64) % 4
    for kernel, args in [
        (_refine._zone_cuts, (ptr, idx, w, labels, 4)),
        (_refine._zone_cuts, (ptr, idx, w, labels, 6)),  # two zones without nodes
        (_trees._peel, (ptr, idx, net.n_nodes)),
    ]:
        compiled = kernel.dispatcher(*_jit._readonly(args, kernel.readonly))
        # the plain path (numpy for _zone_cuts) and the kernel's own source, uncompiled
        for plain in (kernel.plain()(*args), _jit.plain_twin(kernel)(*args)):
            for c, p in zip(
                compiled if isinstance(compiled, tuple) else (compiled,),
                plain if isinstance(plain, tuple) else (plain,),
                strict=True,
            ):
                assert c.dtype == p.dtype
                np.testing.assert_array_equal(c, p)


def test_one_signature_for_writeable_and_read_only_arrays() -> None:
    """numba types a read-only array apart from a writeable one (numba documentation,
    "Types and signatures": ``Array(..., readonly=True)``); the wrapper passes
    read-only views, so both callers get one signature."""
    kernel = _refine._zone_cuts
    ptr = np.array([0, 1, 2], dtype=np.int64)
    idx = np.array([1, 0], dtype=np.int64)
    w = np.ones(2)
    frozen = [x.copy() for x in (ptr, idx, w)]
    for x in frozen:
        x.flags.writeable = False
    labels = np.array([0, 1], dtype=np.int64)
    sig_writeable = kernel.signature_of(_jit._readonly((ptr, idx, w, labels, 2), kernel.readonly))
    sig_frozen = kernel.signature_of(_jit._readonly((*frozen, labels, 2), kernel.readonly))
    assert sig_writeable == sig_frozen
    assert ptr.flags.writeable  # the caller's array is untouched


def test_large_inputs_and_the_switch_compile_in_process(monkeypatch: pytest.MonkeyPatch) -> None:
    kernel = _refine._zone_cuts
    args = (np.array([0, 1, 2]), np.array([1, 0]), np.ones(2), np.array([0, 1]), 2)
    requests = _force(monkeypatch, cold=True)
    monkeypatch.setattr(_jit, "PLAIN_MAX_ENTRIES", 1)
    np.testing.assert_array_equal(kernel(*args), [1.0, 1.0])
    assert kernel._compiled
    assert not requests
    requests = _force(monkeypatch, cold=True)
    monkeypatch.setenv(_jit.BACKGROUND_ENV, "0")
    kernel(*args)
    assert kernel._compiled
    assert not requests
    requests = _force(monkeypatch, cold=True)
    monkeypatch.setattr(_jit, "PLAIN_MAX_ENTRIES", 3)  # the largest argument has 3 entries
    kernel(*args)
    assert not kernel._compiled
    assert len(requests) == 1


def test_background_compile_fills_numbas_cache(
    tmp_path: Any, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The warm-up on a tiny input: a request file for one signature is compiled
    (or found in numba's cache), numba's cache index then holds it, and the
    request file is gone."""
    kernel = _refine._zone_cuts
    args = _jit._readonly(
        (np.array([0, 1, 2]), np.array([1, 0]), np.ones(2), np.array([0, 1]), 2), kernel.readonly
    )
    signature = kernel.signature_of(args)
    request = tmp_path / "one.req"
    request.write_bytes(pickle.dumps([(kernel.__module__, kernel.__qualname__, signature)]))
    assert _warm.main([str(request)], nice=False) == 0
    assert not request.exists()
    assert signature in _jit._cached_signatures(kernel.dispatcher)
    monkeypatch.setattr(_warm, "spool_dir", lambda: tmp_path)
    assert _warm.wait_for_background(timeout=1.0)
    (tmp_path / "stuck.req").write_bytes(b"")
    assert not _warm.wait_for_background(timeout=0.3)


def test_background_process_starts_detached_and_finishes(
    tmp_path: Any, monkeypatch: pytest.MonkeyPatch
) -> None:
    kernel = _trees._roots
    n = 3
    args = (np.full(n, -1), np.full(n, -1), np.arange(n), n)
    monkeypatch.setattr(_jit, "spool_dir", lambda: tmp_path)
    monkeypatch.setattr(_warm, "spool_dir", lambda: tmp_path)
    monkeypatch.setattr(_jit, "_PENDING", {})
    assert _jit.start_background_compile() is None  # nothing ran plain: nothing to start
    _jit._PENDING[kernel.__module__, kernel.__qualname__, kernel.signature_of(args)] = None
    process = _jit.start_background_compile()
    assert process is not None
    assert process.wait(timeout=120) == 0
    assert _warm.wait_for_background(timeout=1.0)
    assert not any(tmp_path.glob("*.req"))


def test_numbas_debugging_switch_runs_the_plain_kernels(tmp_path) -> None:
    """NUMBA_DISABLE_JIT=1 (numba's documented debugging switch): zones found as with the cache.

    Reference: the compiled kernels of this process (same seed, same network).
    """
    import os
    import subprocess
    import sys

    from specgraph import gallery
    from specgraph.zones import find_zones

    net = gallery.road_like(600, rng=4)
    expected = np.asarray(find_zones(net, 4, rng=0).labels)
    code = (
        "import sys, numpy as np\n"
        "from specgraph import gallery\n"
        "from specgraph.zones import find_zones\n"
        "net = gallery.road_like(600, rng=4)\n"
        "np.save(sys.argv[1], np.asarray(find_zones(net, 4, rng=0).labels))\n"
    )
    out = tmp_path / "labels.npy"
    env = {**os.environ, "NUMBA_DISABLE_JIT": "1", "SPECGRAPH_BACKGROUND_COMPILE": "0"}
    subprocess.run([sys.executable, "-c", code, str(out)], check=True, env=env, timeout=300)
    np.testing.assert_array_equal(np.load(out), expected)
