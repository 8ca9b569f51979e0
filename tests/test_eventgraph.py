"""The EventGraph constructor (algebra/eventgraph.py): what it accepts and what it refuses;
and the peeling test for token-free circuits that spares the liveness check its components.

The constructor's input rules are the representation documented at the top of the module (the
project's own contract), checked for every kind of array a caller may pass: the constructor
tests integers only where the array can hold fractions, and keeps a tuple of str as it is.

Peeling is checked against networkx (Hagberg, Schult, Swart, "Exploring network structure,
dynamics, and function using NetworkX", SciPy 2008): a directed graph has no cycle exactly when
removing the arcs that start at a node without incoming arcs, or end at one without outgoing
arcs, empties it (Kahn, "Topological sorting of large networks", CACM 5(11), 1962, removes
sources the same way).
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from cyclecheck.algebra.eventgraph import (
    EventGraph,
    check_live,
    find_token_free_circuit,
    token_free_acyclic,
)
from cyclecheck.algebra.exceptions import GraphStructureError, NotLive
from hypothesis import given, settings
from hypothesis import strategies as st


def ring(tokens, names=()):
    return EventGraph([1.0, 2.0], [0, 1], [1, 0], tokens, [0.0, 0.5], names=names)


@pytest.mark.parametrize("tokens", [[0, 1], [0.0, 1.0], np.array([0, 1], dtype=np.int32),
                                    np.array([0, 1], dtype=np.uint8), np.array([False, True])])
def test_integer_markings_of_any_type(tokens):
    """Markings given as ints, integer-valued floats, other integer types or booleans become
    int64 arrays with the same values, read-only."""
    g = ring(tokens)
    assert g.tokens.dtype == np.int64 and g.tokens.tolist() == [0, 1]
    assert not g.tokens.flags.writeable
    assert g.source.dtype == np.int64 and g.target.dtype == np.int64


@pytest.mark.parametrize("tokens", [[0, 1.5], np.array([0.0, 0.25])])
def test_fractional_marking_refused(tokens):
    with pytest.raises(GraphStructureError, match="tokens must hold integers"):
        ring(tokens)


def test_fractional_source_refused():
    with pytest.raises(GraphStructureError, match="source must hold integers"):
        EventGraph([1.0, 2.0], [0, 0.5], [1, 0], [0, 1], [0.0, 0.0])


def test_names_become_str():
    """Names of any type become str; a tuple of str is kept as given."""
    names = ("cut", "pack")
    assert ring([0, 1], names).names is names
    for listed in (["cut", "pack"], np.array(["cut", "pack"])):
        got = ring([0, 1], listed).names
        assert got == names and all(type(x) is str for x in got)
    assert ring([0, 1], (1, 2)).names == ("1", "2")
    assert ring([0, 1], (np.str_("a"), "b")).names == ("a", "b")
    assert all(type(x) is str for x in ring([0, 1], (np.str_("a"), "b")).names)
    assert ring([0, 1]).names == ()
    with pytest.raises(GraphStructureError, match="names must have 2 entries"):
        ring([0, 1], ("only",))


def test_read_only_arrays_are_shared_writable_ones_copied():
    """An array nothing can write (read-only, viewing only read-only arrays) is kept without a
    copy; a writable one, or a read-only view of a writable one, is copied, so that a later
    write by the caller does not change the graph."""
    frozen = np.array([0, 1, 1, 0], dtype=np.int64)
    frozen.setflags(write=False)
    src, dst = frozen[:2], frozen[2:]
    hold = np.array([0.0, 0.5])
    hold.setflags(write=False)
    g = EventGraph([1.0, 2.0], src, dst, [0, 1], hold)
    assert g.source is src and g.target is dst and g.hold is hold
    mutable = np.array([0, 1], dtype=np.int64)
    view = mutable[:]
    view.setflags(write=False)
    durations = np.array([1.0, 2.0])
    g = EventGraph(durations, view, [1, 0], [0, 1], [0.0, 0.5])
    mutable[0], durations[0] = 1, 9.0
    assert g.source.tolist() == [0, 1] and g.duration.tolist() == [1.0, 2.0]
    assert not g.source.flags.writeable and not g.duration.flags.writeable


@st.composite
def graphs(draw):
    """Random event graphs with few tokens (token-free paths and circuits are common)."""
    n = draw(st.integers(1, 8))
    m = draw(st.integers(0, 16))
    ends = st.lists(st.integers(0, n - 1), min_size=m, max_size=m)
    src, dst = draw(ends), draw(ends)
    tokens = draw(st.lists(st.integers(0, 1), min_size=m, max_size=m))
    return EventGraph([1.0] * n, src, dst, tokens, [0.0] * m)


def _token_free_cycle(g):
    free = nx.MultiDiGraph()
    free.add_nodes_from(range(g.n_transitions))
    free.add_edges_from((s, d) for s, d, k in zip(g.source.tolist(), g.target.tolist(),
                                                   g.tokens.tolist(), strict=True) if k == 0)
    return any(True for _ in nx.simple_cycles(free))


@settings(max_examples=300, deadline=None)
@given(g=graphs())
def test_peeling_agrees_with_networkx(g):
    """Peeling says "no circuit" only when networkx finds no token-free cycle, and says it for
    every such graph given enough rounds (a path of n - 1 places needs fewer than n); the
    liveness check then agrees with the components' answer."""
    cycle = _token_free_cycle(g)
    assert token_free_acyclic(g, rounds=g.n_transitions) == (not cycle)
    if token_free_acyclic(g):
        assert not cycle and find_token_free_circuit(g) is None
    assert (find_token_free_circuit(g) is not None) == cycle


def test_long_token_free_path_left_to_the_components():
    """A ring of 200 transitions with one token: peeling stops undecided after its rounds (the
    token-free path has 199 places), the components find no circuit, the graph is live; with
    the token taken away the liveness check names the whole ring."""
    n = 200
    src, dst = np.arange(n), (np.arange(n) + 1) % n
    tokens = np.r_[np.zeros(n - 1, dtype=int), 1]
    g = EventGraph(np.ones(n), src, dst, tokens, np.zeros(n))
    assert not token_free_acyclic(g) and find_token_free_circuit(g) is None
    check_live(g)
    dead = EventGraph(np.ones(n), src, dst, np.zeros(n, dtype=int), np.zeros(n))
    with pytest.raises(NotLive) as info:
        check_live(dead)
    assert sorted(info.value.circuit) == list(range(n))
