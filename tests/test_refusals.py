"""Refusals of find_zones, score, stability, build_report and laplacian: one shape, by name.

Every refusal is ``<parameter> must be <expected>; got <received>.`` and carries
``parameter``, ``expected`` and ``received`` (specgraph._validation), so the
command line can put its option names in front of the same words.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from typing import Any

import numpy as np
import pytest

from specgraph import Network, find_zones, gallery
from specgraph.diagnostics import score
from specgraph.exceptions import ParameterError
from specgraph.operators import laplacian
from specgraph.report import build_report
from specgraph.studies import stability

SHAPE = re.compile(r"^(?P<name>\w+) must be (?P<expected>.+); got (?P<received>.+)\.$", re.S)


def _two_way_directed() -> Network:
    return Network.from_links(["a", "b", "c", "c"], ["b", "c", "a", "d"], directed=True)


CASES: dict[str, tuple[Callable[[], Any], str, Any]] = {
    "empty network": (
        lambda: find_zones(Network.from_links([], []), 2),
        "network",
        None,
    ),
    "zones range from 1": (lambda: find_zones(gallery.ring(8), range(1, 4)), "zones", range(1, 4)),
    "zones range with step": (
        lambda: find_zones(gallery.ring(8), range(2, 6, 2)),
        "zones",
        range(2, 6, 2),
    ),
    "zones range past n": (
        lambda: find_zones(gallery.ring(8), range(9, 12)),
        "zones",
        range(9, 12),
    ),
    "refine not a bool": (lambda: find_zones(gallery.ring(8), 2, refine=0), "refine", 0),
    "directed operator, undirected network": (
        lambda: find_zones(gallery.ring(8), 2, operator="directed"),
        "network",
        None,
    ),
    "constraints not a ZoneConstraints": (
        lambda: find_zones(gallery.ring(8), 2, constraints={"min_size": 2}),
        "constraints",
        {"min_size": 2},
    ),
    "progress not callable": (lambda: find_zones(gallery.ring(8), 2, progress=3), "progress", 3),
    "sources as one string": (
        lambda: score(gallery.path(4), [0, 0, 1, 1], sources="0", eigengap=False),
        "sources",
        "0",
    ),
    "sources repeated": (
        lambda: score(gallery.path(4), [0, 0, 1, 1], sources=["0", "0"], eigengap=False),
        "sources",
        ["0", "0"],
    ),
    "reference not a zoning": (
        lambda: stability(gallery.ring(6), 2, reference="zones.csv"),
        "reference",
        "zones.csv",
    ),
    "command not a string": (
        lambda: build_report(find_zones(gallery.barbell(3), 2, rng=0), command=["a", "b"]),
        "command",
        ["a", "b"],
    ),
}


@pytest.mark.parametrize("case", list(CASES), ids=list(CASES))
def test_refusal_names_its_parameter_in_one_shape(case: str) -> None:
    call, name, received = CASES[case]
    with pytest.raises(ParameterError) as info:
        call()
    error = info.value
    match = SHAPE.match(str(error))
    assert match is not None, str(error)
    assert match["name"] == error.parameter == name
    assert match["expected"] == error.expected
    if received is not None:
        assert error.received == received
        assert match["received"] == repr(received)


def test_undirected_network_is_shown_in_words_and_kept_as_received() -> None:
    ring = gallery.ring(8)
    with pytest.raises(ParameterError, match=r"; got an undirected network\.$") as info:
        find_zones(ring, 2, operator="directed")
    assert info.value.received is ring


def test_reference_of_another_network_is_refused_by_name() -> None:
    other = find_zones(gallery.ring(6), 2, rng=0)
    with pytest.raises(ParameterError, match=r"^reference must be a zoning of this network") as e:
        stability(gallery.ring(7), 2, reference=other)
    assert e.value.parameter == "reference"
    assert e.value.received is other.network


def test_refine_takes_numpy_booleans_as_the_shared_check_does() -> None:
    net = gallery.barbell(5)
    plain = find_zones(net, 2, refine=True, rng=0)
    numpy_bool = find_zones(net, 2, refine=np.bool_(True), rng=0)
    np.testing.assert_array_equal(numpy_bool.labels, plain.labels)
    assert numpy_bool.parameters["refine"] is True
    assert "refinement" in numpy_bool.decisions


@pytest.mark.parametrize(
    ("kind", "parameter", "value"),
    [("regularized", "tau", 0.5), ("bethe_hessian", "r", 1.5), ("directed", "damping", 0.7)],
)
def test_each_kind_receives_its_own_parameter(kind: str, parameter: str, value: float) -> None:
    net = _two_way_directed() if kind == "directed" else gallery.grid(4, 4)
    op = laplacian(net, kind=kind, **{parameter: value})  # type: ignore[arg-type]
    assert op.kind == kind
    assert op.parameters[parameter] == value
    # Bethe Hessian H(r) = (r^2 - 1) I - r A + D on the link pattern (Saade, Krzakala
    # and Zdeborova, NeurIPS 2014): its diagonal shows the r it was built with.
    if kind == "bethe_hessian":
        degrees = np.diff(net.adjacency.indptr)
        np.testing.assert_allclose(op.matrix.diagonal(), value**2 - 1 + degrees)


@pytest.mark.parametrize("parameter", ["tau", "r", "damping"])
def test_a_parameter_of_another_kind_is_refused(parameter: str) -> None:
    with pytest.raises(ParameterError) as info:
        laplacian(gallery.grid(3, 3), kind="normalized", **{parameter: 0.5})  # type: ignore[arg-type]
    assert info.value.parameter == parameter
    assert SHAPE.match(str(info.value))
