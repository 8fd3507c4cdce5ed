"""The one validation module: constraint objects, one message shape, one error.

The design follows scikit-learn's ``utils/_param_validation`` (constraints as
data, one refusal shape naming the parameter, the expectation and the value
received); these tests check that contract, not numbers of the job.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp

import specgraph
from specgraph._option_names import KEYWORD_OPTIONS, for_command_line, option_names
from specgraph._validation import (
    NON_NEGATIVE,
    OPEN_UNIT,
    POSITIVE,
    UNIT,
    Array,
    Boolean,
    HasMethods,
    InstanceOf,
    Interval,
    IsCallable,
    NodeIds,
    NoneOk,
    Options,
    RandomState,
    SquareMatrix,
    Text,
    check_bool,
    check_int,
    check_param,
    check_params,
    check_positive_float,
    check_rng,
    parameter_error,
    validate_params,
)
from specgraph.cli import build_parser
from specgraph.exceptions import InputError, ParameterError


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


# ------------------------------------------------------ constraints for recurring checks
@pytest.mark.parametrize(
    ("value", "constraint", "message"),
    [
        (
            [1.0, 2.0],
            Array("float", (3,), low=0),
            "x must be 3 finite numbers >= 0; got shape (2,).",
        ),
        (
            [1.0, np.nan, 2.0],
            Array("float", (3,), low=0),
            "x must be 3 finite numbers >= 0; got NaN or infinity.",
        ),
        (
            [1.0, -2.0, 0.0],
            Array("float", (3,), low=0),
            "x must be 3 finite numbers >= 0; got minimum -2.0.",
        ),
        (np.array([0.0, 1.0]), Array("int", (2,)), "x must be 2 integers; got dtype float64."),
        (np.ones(2), Array("bool", (2,)), "x must be 2 booleans; got dtype float64."),
        (
            np.ones((2, 3)),
            Array("float", (None,)),
            "x must be a 1-d array of finite numbers; got shape (2, 3).",
        ),
        (
            ["a", "b"],
            Array("float"),
            "x must be an array of finite numbers; got no array of numbers.",
        ),
    ],
    ids=["length", "nan", "below", "float-is-not-int", "float-is-not-bool", "ndim", "text"],
)
def test_array_refusals_show_what_is_wrong(value, constraint, message) -> None:
    with pytest.raises(ParameterError) as info:
        check_param(value, "x", [constraint])
    assert str(info.value) == message
    assert info.value.received is value


def test_array_converts_to_its_kind() -> None:
    assert check_param([1, 2], "x", [Array("float", (2,))]).dtype == np.float64
    ints = check_param(np.array([3, 0], dtype=np.int32), "x", [Array("int", (2,), low=0)])
    assert ints.dtype == np.int64
    assert ints.tolist() == [3, 0]
    flags = np.array([True, False])
    assert check_param(flags, "x", [Array("bool", (2,))]) is flags  # already right: no copy
    assert check_param(np.zeros((4, 2)), "x", [Array("float", (None, 2))]).shape == (4, 2)
    assert Array("float", (None, 2)).description == "an array of shape (any, 2) of finite numbers"


@pytest.mark.parametrize(
    ("value", "constraint", "expected"),
    [
        (["a", 7], NodeIds(), ("a", "7")),
        (np.array([3, 4]), NodeIds(), ("3", "4")),
        ((str(i) for i in range(2)), NodeIds(), ("0", "1")),  # an iterator is read once
        ("QM-J1", NodeIds(single=True), ("QM-J1",)),
        (np.int64(5), NodeIds(single=True), ("5",)),
    ],
    ids=["mixed", "array", "generator", "one-id", "one-integer"],
)
def test_node_ids_become_text(value, constraint, expected) -> None:
    assert check_param(value, "ids", [constraint]) == expected


@pytest.mark.parametrize(
    ("value", "constraint", "message"),
    [
        ("abc", NodeIds(), "sources must be a sequence of node ids; got 'abc'."),
        (
            ["a", "b", "a", 1, "1"],
            NodeIds(distinct=True),
            "sources must be a sequence of distinct node ids; got repeated '1', 'a'.",
        ),
        (
            [],
            NodeIds(single=True, minimum=1),
            "sources must be a node id or a non-empty sequence of node ids; got an empty sequence.",
        ),
        (3.5, NodeIds(), "sources must be a sequence of node ids; got 3.5."),
    ],
    ids=["one-string", "repeated", "empty", "number"],
)
def test_node_ids_refusals(value, constraint, message) -> None:
    with pytest.raises(ParameterError) as info:
        check_param(value, "sources", [constraint])
    assert str(info.value) == message


def test_square_matrix() -> None:
    matrix = sp.coo_array(np.array([[0.0, 2.0], [2.0, 0.0]]))
    out = check_param(matrix, "adjacency", [SquareMatrix()])
    assert isinstance(out, sp.csr_array)
    assert out.dtype == np.float64
    assert out.toarray().tolist() == [[0.0, 2.0], [2.0, 0.0]]
    dense = np.eye(3)
    assert check_param(dense, "adjacency", [SquareMatrix(sparse_only=False)]).nnz == 3
    with pytest.raises(ParameterError) as info:
        check_param(dense, "adjacency", [SquareMatrix()])
    assert str(info.value) == (
        "adjacency must be a square scipy sparse matrix; got ndarray of shape (3, 3)."
    )
    with pytest.raises(ParameterError, match=r"square matrix; got csr_array of shape \(2, 3\)"):
        check_param(sp.csr_array((2, 3)), "adjacency", [SquareMatrix(sparse_only=False)])
    with pytest.raises(ParameterError, match="got ndarray of shape"):
        check_param(np.ones(3), "adjacency", [SquareMatrix(sparse_only=False)])


def test_small_constraints_describe_themselves() -> None:
    assert check_param(print, "progress", [IsCallable(), NoneOk()]) is print
    with pytest.raises(ParameterError, match=r"^progress must be callable or None; got 'bar'\.$"):
        check_param("bar", "progress", [IsCallable(), NoneOk()])
    with pytest.raises(ParameterError, match=r"^attribute must be a non-empty string; got ''\.$"):
        check_param("", "attribute", [Text()])
    graph_like = HasMethods(("edges", "nodes"), "a networkx graph")
    with pytest.raises(ParameterError, match=r"^graph must be a networkx graph; got list\.$"):
        check_param([], "graph", [graph_like])
    assert check_param(nx.path_graph(2), "graph", [graph_like]).number_of_nodes() == 2
    by_type = InstanceOf((dict,), "a dict", by_type=True)
    with pytest.raises(ParameterError, match=r"^m must be a dict; got list\.$"):
        check_param([1, 2], "m", [by_type])
    keys = Options(("assign", "tol"), "find_zones options")
    with pytest.raises(ParameterError, match=r"^k must be find_zones options \('assign', 'tol'\)"):
        check_param("colour", "k", [keys])


@pytest.mark.parametrize(
    ("constraint", "inside", "outside", "description"),
    [
        (OPEN_UNIT, [1e-12, 0.5, 1 - 1e-12], [0, 1, -0.1, 1.5], "a finite number in (0, 1)"),
        (UNIT, [0, 0.5, 1], [-1e-12, 1 + 1e-12, np.nan], "a finite number in [0, 1]"),
        (POSITIVE, [1e-300, 3], [0, -1, np.inf], "a finite number > 0"),
        (NON_NEGATIVE, [0, 3], [-1e-300, np.nan], "a finite number >= 0"),
    ],
    ids=["open-unit", "unit", "positive", "non-negative"],
)
def test_named_intervals(constraint, inside, outside, description) -> None:
    assert constraint.description == description
    assert all(constraint.accepts(v) for v in inside)
    assert not any(constraint.accepts(v) for v in outside)


def test_a_float_refusal_shows_the_float() -> None:
    # check_positive_float wrote the float it received; every float Interval does the same.
    with pytest.raises(
        ParameterError, match=r"^damping must be a finite number in \(0, 1\); got 1\.0\.$"
    ):
        check_param(1, "damping", [OPEN_UNIT])


def test_check_params_checks_a_table_and_converts() -> None:
    table = {"k": [Interval(int, 1, None)], "tol": [POSITIVE], "rng": [RandomState()]}
    out = check_params({"k": np.int64(2), "tol": 1, "rng": 0, "other": "ignored"}, table)
    assert out["k"] == 2
    assert type(out["k"]) is int
    assert out["tol"] == 1.0
    assert type(out["tol"]) is float
    assert isinstance(out["rng"], np.random.Generator)
    assert set(out) == {"k", "tol", "rng"}
    with pytest.raises(ParameterError, match=r"^tol must be a finite number > 0; got -1\.0\.$"):
        check_params({"k": 2, "tol": -1, "rng": 0}, table)


def test_parameter_error_shown_and_verb() -> None:
    refusal = parameter_error(
        "labels", "one zone per node (4)", [0], shown="shape (1,)", verb="hold"
    )
    assert str(refusal) == "labels must hold one zone per node (4); got shape (1,)."
    assert (refusal.parameter, refusal.expected, refusal.received) == (
        "labels",
        "one zone per node (4)",
        [0],
    )


# -------------------------------------------------- command-line words for the same refusal
def test_the_command_line_puts_option_names_in_front() -> None:
    names = option_names(build_parser(), "zones")
    # dest -> option, and the keywords set under another name (_commands.py: rng=args.seed).
    assert names["min_size"] == "--min-size"
    assert names["rng"] == "--seed"
    assert names["size"] == "--size-col"
    refusal = parameter_error("min_size", "<= max_size", 5.0, shown="5 > 3")
    assert (
        for_command_line(refusal, names) == "--min-size: min_size must be <= max_size; got 5 > 3."
    )
    unknown = parameter_error("k", "an integer", "x")
    assert for_command_line(unknown, names) == str(unknown)
    assert for_command_line(InputError("edges.csv: bad"), names) == "edges.csv: bad"


def test_every_keyword_table_entry_names_an_option() -> None:
    # A keyword whose option was renamed would silently stop being translated.
    parser = build_parser()
    offered = {
        option
        for command in ("zones", "spectrum", "score", "robustness", "stability", "local")
        for option in option_names(parser, command).values()
    }
    assert set(KEYWORD_OPTIONS.values()) <= offered


#: Modules that speak to the command line: the parser, the commands, the
#: option names, and io/, whose file-reading advice names both forms on purpose.
_COMMAND_LINE_MODULES = ("cli.py", "_commands.py", "_option_names.py", "io/")


def _message_strings(path: Path) -> list[tuple[int, str]]:
    """String constants of a module, docstrings left out."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    docstrings = {
        id(node.body[0].value)
        for node in ast.walk(tree)
        if isinstance(node, ast.Module | ast.ClassDef | ast.FunctionDef | ast.AsyncFunctionDef)
        and node.body
        and isinstance(node.body[0], ast.Expr)
        and isinstance(node.body[0].value, ast.Constant)
    }
    return [
        (node.lineno, node.value)
        for node in ast.walk(tree)
        if isinstance(node, ast.Constant)
        and isinstance(node.value, str)
        and id(node) not in docstrings
    ]


def test_the_library_never_speaks_in_option_names() -> None:
    parser = build_parser()
    commands = ("zones", "spectrum", "score", "compare", "robustness", "stability", "local", "demo")
    options = {o for c in commands for o in option_names(parser, c).values()}
    pattern = re.compile(r"(?<![\w-])(" + "|".join(map(re.escape, options)) + r")(?![\w-])")
    package = Path(specgraph.__file__).parent
    spoken = [
        f"{path.relative_to(package)}:{line}: {text[:60]!r}"
        for path in sorted(package.rglob("*.py"))
        if not path.relative_to(package).as_posix().startswith(_COMMAND_LINE_MODULES)
        for line, text in _message_strings(path)
        if pattern.search(text)
    ]
    assert spoken == []
