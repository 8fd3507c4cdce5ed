"""Link ends encoded once (specgraph._links): the Arrow path against pandas and networkx."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from specgraph import Network
from specgraph._links import (
    NOT_A_NODE,
    _first_appearance_order,
    arrow_text,
    encode_links,
    first_repeated,
)
from specgraph.exceptions import InputError

pa = pytest.importorskip("pyarrow")

#: Examples per property test.
PROPERTY_EXAMPLES = 80

ODD_IDS = ["J1", "007", "NA", "null", "", " ", " J2", "a,b", 'q"t', "x\ny", "ü", "=1", "-2"]
# No NUL character: pandas 2.1's unique() takes "a\x00" for "a" (the reference would
# be wrong; pandas 3.1 and pyarrow tell them apart).
ids = st.one_of(st.sampled_from(ODD_IDS), st.text(max_size=3).filter(lambda t: "\x00" not in t))
links = st.lists(st.tuples(ids, ids), min_size=1, max_size=12)


def arrow_series(values: list[str]) -> pd.Series:
    """Ids held as Arrow text, as pandas 3 holds a column read from a file."""
    return pd.Series(pd.array(values, dtype=pd.StringDtype("pyarrow")))


# ------------------------------------------------------------------ encoding
@settings(max_examples=PROPERTY_EXAMPLES, deadline=None)
@given(table=links)
def test_arrow_ends_found_from_links_match_pandas(table: list[tuple[str, str]]) -> None:
    source = [s for s, _ in table]
    target = [t for _, t in table]
    ends = encode_links(arrow_series(source), arrow_series(target))
    # Reference (pandas): ids in order of first appearance along the interleaved
    # ends (pandas.unique keeps that order), rows by a pandas hash index.
    ends_text = [np.array(source, dtype=object), np.array(target, dtype=object)]
    expected = pd.unique(np.column_stack(ends_text).ravel())
    assert ends.node_ids.tolist() == list(expected)
    assert all(type(v) is str for v in ends.node_ids)
    index = pd.Index(expected)
    assert ends.rows is not None
    np.testing.assert_array_equal(ends.rows[0], index.get_indexer(source))
    np.testing.assert_array_equal(ends.rows[1], index.get_indexer(target))
    assert ends.unique


@settings(max_examples=PROPERTY_EXAMPLES, deadline=None)
@given(table=links, listed=st.lists(ids, min_size=1, max_size=12))
def test_arrow_ends_against_a_node_list_match_pandas(
    table: list[tuple[str, str]], listed: list[str]
) -> None:
    source = [s for s, _ in table]
    target = [t for _, t in table]
    ends = encode_links(arrow_series(source), arrow_series(target), arrow_series(listed))
    index = pd.Index(listed)
    assert ends.unique == index.is_unique  # reference: pandas
    assert ends.node_ids.tolist() == listed
    if index.is_unique:
        assert ends.rows is not None
        np.testing.assert_array_equal(ends.rows[0], index.get_indexer(source))
        np.testing.assert_array_equal(ends.rows[1], index.get_indexer(target))
    else:
        assert ends.rows is None
    python = encode_links(source, target, listed)  # the Python path, same answers
    assert python.unique == ends.unique
    if python.rows is not None and ends.rows is not None:
        for mine, reference in zip(ends.rows, python.rows, strict=True):
            np.testing.assert_array_equal(mine, reference)


@settings(max_examples=PROPERTY_EXAMPLES, deadline=None)
@given(
    pairs=st.lists(st.tuples(st.integers(0, 6), st.integers(0, 6)), min_size=1, max_size=10),
    shuffle=st.randoms(use_true_random=False),
)
def test_first_appearance_check_matches_a_dictionary(pairs: list[tuple[int, int]], shuffle) -> None:
    # Rows numbered by first appearance along the interleaved ends (a Python dict
    # hands out numbers in arrival order), then relabelled by a random permutation:
    # the check holds exactly when the relabelling changed nothing that was seen.
    numbering: dict[int, int] = {}
    for v in (end for pair in pairs for end in pair):
        numbering.setdefault(v, len(numbering))
    order = list(range(len(numbering)))
    shuffle.shuffle(order)
    i = np.array([order[numbering[s]] for s, _ in pairs])
    j = np.array([order[numbering[t]] for _, t in pairs])
    assert _first_appearance_order(i, j) == (order == sorted(order))


def test_unknown_end_gets_the_not_a_node_row() -> None:
    source, target = arrow_series(["a", "zz"]), arrow_series(["b", "a"])
    ends = encode_links(source, target, arrow_series(["a", "b"]))
    assert ends.rows is not None
    assert ends.rows[0].tolist() == [0, NOT_A_NODE]
    assert ends.end_id(1, 0) == "zz"


def test_arrow_text_only_for_text_held_in_arrow() -> None:
    assert arrow_text(arrow_series(["a"])) is not None
    assert arrow_text(pd.Series(["a"], dtype=pd.ArrowDtype(pa.string()))) is not None
    assert arrow_text(pa.array(["a"])) is not None
    assert arrow_text(pd.Series(["a"], dtype=object)) is None
    assert arrow_text(["a"]) is None
    assert arrow_text(pd.Series([1, 2])) is None
    assert arrow_text(pa.array([1, 2])) is None


def test_missing_ids_take_the_python_path() -> None:
    # A missing cell is text 'nan'/'<NA>' by str(), as the Python path always read it.
    source = pd.Series(pd.array(["a", None], dtype=pd.StringDtype("pyarrow")))
    ends = encode_links(source, arrow_series(["b", "c"]))
    assert ends.node_ids.tolist() == encode_links(list(source), ["b", "c"]).node_ids.tolist()


def test_lengths_must_agree_on_both_paths() -> None:
    for make in (arrow_series, list):
        with pytest.raises(InputError, match="same length"):
            encode_links(make(["a", "b"]), make(["b"]))


def test_first_repeated_names_both_rows() -> None:
    assert first_repeated(pd.Series(["a", "b", "c"])) is None
    assert first_repeated(arrow_series(["a", "b", "a", "b"])) == (2, 0)


# ------------------------------------------------------------- the network
@settings(max_examples=PROPERTY_EXAMPLES, deadline=None)
@given(
    table=links,
    weights=st.lists(st.sampled_from([0.0, 0.5, 1.0, 2.25, 1e-300]), min_size=12, max_size=12),
)
def test_networks_from_arrow_and_python_ids_are_the_same(
    table: list[tuple[str, str]], weights: list[float]
) -> None:
    source = [s for s, _ in table]
    target = [t for _, t in table]
    w = weights[: len(table)]
    fast = Network.from_links(arrow_series(source), arrow_series(target), w)
    slow = Network.from_links(source, target, w)
    assert fast.node_ids.tolist() == slow.node_ids.tolist()
    for part in ("data", "indices", "indptr"):
        mine, reference = getattr(fast.adjacency, part), getattr(slow.adjacency, part)
        assert mine.dtype == reference.dtype
        np.testing.assert_array_equal(mine, reference)
    pd.testing.assert_frame_equal(fast.link_table, slow.link_table)
    assert dict(fast.notes) == dict(slow.notes)
    for mine, reference in zip(fast.link_ends, slow.link_ends, strict=True):
        np.testing.assert_array_equal(mine, reference)


@settings(max_examples=PROPERTY_EXAMPLES, deadline=None)
@given(table=st.lists(st.tuples(st.integers(0, 5), st.integers(0, 5)), min_size=1, max_size=30))
def test_merged_duplicates_counted_as_networkx_multigraph_sees_them(
    table: list[tuple[int, int]],
) -> None:
    net = Network.from_links([str(s) for s, _ in table], [str(t) for _, t in table])
    # Reference: networkx; a MultiGraph keeps every parallel link, a Graph one per pair.
    multi, simple = nx.MultiGraph(), nx.Graph()
    for graph in (multi, simple):
        graph.add_edges_from((s, t) for s, t in table if s != t)
    assert net.notes["duplicate_links_merged"] == multi.number_of_edges() - simple.number_of_edges()
    assert net.n_links == simple.number_of_edges()


def test_link_ends_given_at_construction_match_a_lookup() -> None:
    net = Network.from_links(arrow_series(["b", "c", "a"]), arrow_series(["a", "a", "c"]))
    # Reference: pandas' hash index over the node ids.
    index = pd.Index(net.node_ids)
    np.testing.assert_array_equal(net.link_ends[0], index.get_indexer(net.link_table["source"]))
    np.testing.assert_array_equal(net.link_ends[1], index.get_indexer(net.link_table["target"]))
    for ends in net.link_ends:
        assert not ends.flags.writeable


def test_reading_works_without_pyarrow(tmp_path, monkeypatch) -> None:
    """pyarrow is optional (the parquet extra): with it hidden, the Python path reads the
    same network (a fresh install without the extra failed in the demo)."""
    import builtins

    from specgraph import read_edges

    path = tmp_path / "e.csv"
    path.write_text("source,target,weight\na,b,1\nb,c,2\nc,a,3\n")
    with_arrow = read_edges(path, weight="weight")
    real_import = builtins.__import__

    def no_pyarrow(name, *args, **kwargs):
        if name == "pyarrow" or name.startswith("pyarrow."):
            raise ImportError(name)
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_pyarrow)
    without = read_edges(path, weight="weight")
    assert list(without.node_ids) == list(with_arrow.node_ids)
    assert (without.adjacency != with_arrow.adjacency).nnz == 0
