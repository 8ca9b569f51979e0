"""The plain-Python graph routines of small graphs against scipy.sparse.csgraph and networkx.

References: ``scipy.sparse.csgraph.connected_components(connection="strong")``,
``breadth_first_order`` and ``dijkstra`` (the compiled routines used for large graphs; the
Python ones must give their answers exactly, labels and search order included);
``networkx.strongly_connected_components`` (Tarjan 1972, independent of both) for the
partition into components.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from cyclecheck.algebra import digraph
from cyclecheck.algebra.digraph import breadth_first, shortest_distances, strong_components
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import breadth_first_order, connected_components, dijkstra


@st.composite
def arc_lists(draw, max_n: int = 25, max_arcs: int = 70):  # type: ignore[no-untyped-def]
    n = draw(st.integers(1, max_n))
    k = draw(st.integers(0, max_arcs))
    src = np.array(draw(st.lists(st.integers(0, n - 1), min_size=k, max_size=k)), dtype=np.int64)
    dst = np.array(draw(st.lists(st.integers(0, n - 1), min_size=k, max_size=k)), dtype=np.int64)
    return n, src, dst


def scipy_graph(n, src, dst, data=None):  # type: ignore[no-untyped-def]
    data = np.ones(src.size, dtype=np.int8) if data is None else data
    return csr_matrix((data, (src, dst)), shape=(n, n))


@settings(max_examples=400, deadline=None)
@given(arc_lists())
def test_components_equal_scipy_labels_and_networkx_partition(arcs):
    n, src, dst = arcs
    count, labels = strong_components(n, src, dst)
    ref_count, ref_labels = connected_components(scipy_graph(n, src, dst), directed=True,
                                                 connection="strong")
    assert count == ref_count
    assert labels.tolist() == ref_labels.tolist()
    g = nx.DiGraph()
    g.add_nodes_from(range(n))
    g.add_edges_from(zip(src.tolist(), dst.tolist(), strict=True))
    parts = {frozenset(c) for c in nx.strongly_connected_components(g)}
    assert parts == {frozenset(np.flatnonzero(labels == c).tolist()) for c in range(count)}


@settings(max_examples=300, deadline=None)
@given(arc_lists(), st.data())
def test_breadth_first_equals_scipy(arcs, data):
    n, src, dst = arcs
    start = data.draw(st.integers(0, n - 1))
    order, pred = breadth_first(n, src, dst, start)
    ref_order, ref_pred = breadth_first_order(scipy_graph(n, src, dst), start, directed=True,
                                              return_predecessors=True)
    assert order.tolist() == ref_order.tolist()
    assert pred.tolist() == ref_pred.tolist()


@settings(max_examples=300, deadline=None)
@given(arc_lists(max_n=15, max_arcs=50), st.data())
def test_shortest_distances_equal_scipy(arcs, data):
    n, src, dst = arcs
    key = np.unique(src * n + dst)  # one arc per ordered pair, as the callers make them
    src, dst = key // n, key % n
    length = np.array(data.draw(st.lists(
        st.one_of(st.just(0.0), st.floats(0.0, 100.0)), min_size=src.size,
        max_size=src.size)), dtype=np.float64)
    origins = np.array(data.draw(st.lists(st.integers(0, n - 1), min_size=1, max_size=n,
                                          unique=True)))
    got = shortest_distances(n, src, dst, length, origins)
    ref = dijkstra(scipy_graph(n, src, dst, length), directed=True, indices=origins)
    np.testing.assert_array_equal(got, ref)


@pytest.mark.parametrize("seed", [1, 2])
def test_large_graphs_go_to_scipy_with_the_same_answers(seed, monkeypatch):
    """Beyond PYTHON_MAX_WORK the compiled routines answer: the same numbers as the Python ones
    (checked by lowering the limit to zero on a graph of a few thousand arcs)."""
    rng = np.random.default_rng(seed)
    n, k = 2000, 5000
    src, dst = rng.integers(0, n, k), rng.integers(0, n, k)
    key = np.unique(src * n + dst)
    usrc, udst = key // n, key % n
    length = rng.uniform(0, 3, usrc.size).round(1)
    python = (strong_components(n, src, dst), breadth_first(n, src, dst, 7),
              shortest_distances(n, usrc, udst, length, [0, 5, 9]))
    monkeypatch.setattr(digraph, "PYTHON_MAX_WORK", 0)
    compiled = (strong_components(n, src, dst), breadth_first(n, src, dst, 7),
                shortest_distances(n, usrc, udst, length, [0, 5, 9]))
    assert python[0][0] == compiled[0][0]
    np.testing.assert_array_equal(python[0][1], compiled[0][1])
    for a, b in zip(python[1], compiled[1], strict=True):
        np.testing.assert_array_equal(a, b)
    np.testing.assert_array_equal(python[2], compiled[2])


def test_bad_arcs_are_refused():
    with pytest.raises(ValueError, match=r"nodes 0 \.\. 2"):
        strong_components(3, [0, 3], [1, 1])
    with pytest.raises(ValueError, match="differ in length"):
        breadth_first(3, [0, 1], [1], 0)
