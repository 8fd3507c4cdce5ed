"""The one validation module: constraint objects, one message shape, one error.

The design follows scikit-learn's ``utils/_param_validation`` (constraints as
data, one refusal shape naming the parameter, the expectation and the value
received); these tests check that contract, not numbers of the job.
"""

from __future__ import annotations

import numpy as np
import pytest

from specgraph._validation import (
    Boolean,
    InstanceOf,
    Interval,
    NoneOk,
    Options,
    RandomState,
    check_bool,
    check_int,
    check_param,
    check_positive_float,
    check_rng,
    validate_params,
)
from specgraph.exceptions import ParameterError


@pytest.mark.parametrize(
    ("value", "constraints", "expected"),
    [
        (3, [Interval(int, 1, None)], 3),
        (np.int64(3), [Interval(int, 1, None)], 3),
        (0.5, [Interval(float, 0, 1, closed="neither")], 0.5),
        ("auto", [Interval(int, 1, None), Options({"auto"})], "auto"),
        (None, [NoneOk(), Interval(int, 1, None)], None),
        (np.bool_(True), [Boolean()], True),
    ],
    ids=["int", "numpy-int", "open-interval", "option", "none", "numpy-bool"],
)
def test_accepted_values_are_converted(value, constraints, expected) -> None:
    out = check_param(value, "x", constraints)
    assert out == expected
    assert type(out) is type(expected)


@pytest.mark.parametrize(
    ("value", "constraints", "message"),
    [
        (0, [Interval(int, 1, None)], "k must be an integer >= 1; got 0."),
        (True, [Interval(int, 1, None)], "k must be an integer >= 1; got True."),
        (
            1.0,
            [Interval(float, 0, 1, closed="left")],
            "k must be a finite number in [0, 1); got 1.0.",
        ),
        (float("nan"), [Interval(float, None, None)], "k must be a finite number; got nan."),
        (
            "x",
            [Interval(int, 1, None), Options({"auto"})],
            "k must be an integer >= 1 or 'auto'; got 'x'.",
        ),
        (1, [Boolean()], "k must be True or False; got 1."),
        ("a", [Options({"b", "c"})], "k must be one of 'b', 'c'; got 'a'."),
    ],
    ids=["below", "bool-is-not-int", "open-end", "nan", "either", "int-is-not-bool", "options"],
)
def test_refusals_share_one_shape(value, constraints, message) -> None:
    with pytest.raises(ParameterError) as info:
        check_param(value, "k", constraints)
    assert str(info.value) == message
    assert info.value.parameter == "k"
    assert info.value.received is value or info.value.received == value or np.isnan(value)


def test_validate_params_checks_named_arguments_only() -> None:
    @validate_params({"k": [Interval(int, 2, None)], "flag": [Boolean()]})
    def work(network: object, k: int, *, flag: bool = False) -> int:
        return k

    assert work(None, 3, flag=True) == 3
    with pytest.raises(ParameterError, match=r"^k must be an integer >= 2; got 1\.$"):
        work(None, 1)
    with pytest.raises(ParameterError, match=r"^flag must be True or False; got 'yes'\.$"):
        work(None, 2, flag="yes")


def test_validate_params_refuses_a_table_with_unknown_names() -> None:
    with pytest.raises(TypeError, match="no parameters"):

        @validate_params({"missing": [Boolean()]})
        def work(k: int) -> int:  # pragma: no cover - never defined
            return k


def test_named_checks_keep_their_messages() -> None:
    assert check_int(np.int32(4), "k", minimum=1) == 4
    with pytest.raises(ParameterError, match=r"^k must be an integer <= 3; got 4\.$"):
        check_int(np.int64(4), "k", maximum=3)
    with pytest.raises(ParameterError, match=r"^tol must be a finite number > 0; got 0\.0\.$"):
        check_positive_float(0, "tol")
    assert check_positive_float(0, "tol", allow_zero=True) == 0.0
    assert check_bool(np.bool_(False), "refine") is False
    with pytest.raises(ParameterError, match=r"^refine must be True or False; got 0\.$"):
        check_bool(0, "refine")


def test_rng_follows_spec7() -> None:
    # SPEC 7 (scientific-python.org, from memory): None, a seed or a Generator.
    generator = np.random.default_rng(5)
    assert check_rng(generator) is generator
    assert check_rng(5).integers(1000) == np.random.default_rng(5).integers(1000)
    assert isinstance(check_param(None, "rng", [RandomState()]), np.random.Generator)
    with pytest.raises(ParameterError, match=r"^rng must be None, an int seed"):
        check_rng("seed")
    with pytest.raises(ParameterError):
        check_param(True, "rng", [RandomState()])


def test_instance_of_describes_itself() -> None:
    constraint = InstanceOf((dict,), "a mapping of node to zone")
    assert check_param({}, "labels", [constraint]) == {}
    with pytest.raises(ParameterError, match="labels must be a mapping of node to zone; got 3"):
        check_param(3, "labels", [constraint])
