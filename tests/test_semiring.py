"""Tests of the max-plus semiring: products, powers, Kleene star, Karp, event-graph matrices.

Every fast routine is checked against a slow, independently written twin (plain Python loops,
or networkx cycle enumeration) and against published worked examples.
"""

from __future__ import annotations

import doctest
import itertools
import math

import networkx as nx
import numpy as np
import pytest
from cyclecheck.algebra import semiring
from cyclecheck.algebra.eventgraph import EventGraph
from cyclecheck.algebra.exceptions import InvalidArray, MaxPlusError, NotLive, PositiveCircuit
from cyclecheck.algebra.semiring import (
    EPS,
    augmented_matrix,
    event_graph_matrices,
    identity,
    kleene_star,
    matrix_power,
    max_cycle_mean_karp,
    oplus,
    otimes,
    solve_implicit,
    sparse_otimes,
)
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from tests.strategies import live_event_graphs

INF = math.inf

entries = st.one_of(st.just(-INF), st.integers(-5, 9).map(float))
float_entries = st.one_of(st.just(-INF), st.floats(-10, 10, allow_nan=False, allow_subnormal=False))


def matrices(rows: int, cols: int, elements: st.SearchStrategy[float] = entries):
    return arrays(np.float64, (rows, cols), elements=elements)


@st.composite
def square(draw, max_n: int = 6, elements: st.SearchStrategy[float] = entries) -> np.ndarray:
    n = draw(st.integers(1, max_n))
    return draw(matrices(n, n, elements))


@st.composite
def no_positive_circuit(draw, max_n: int = 6) -> np.ndarray:
    """a_ij = w_ij + π_i − π_j with w_ij <= 0: every circuit weighs Σ w <= 0, entries may be > 0."""
    n = draw(st.integers(1, max_n))
    w = draw(matrices(n, n, st.one_of(st.just(-INF), st.integers(-6, 0).map(float))))
    pi = np.array(draw(st.lists(st.integers(-5, 5), min_size=n, max_size=n)), dtype=float)
    return w + pi[:, None] - pi[None, :]


# ---------------------------------------------------------------- slow twins (plain Python)


def slow_otimes(A: np.ndarray, B: np.ndarray) -> np.ndarray:
    n, p = A.shape
    q = B.shape[1]
    out = np.full((n, q), -INF)
    for i in range(n):
        for j in range(q):
            best = -INF
            for k in range(p):
                if A[i, k] > -INF and B[k, j] > -INF:
                    best = max(best, A[i, k] + B[k, j])
            out[i, j] = best
    return out


def slow_floyd_warshall_star(A: np.ndarray) -> list[list[float]]:
    """Longest paths with lists of lists, then E ⊕ A⁺ (written independently of kleene_star)."""
    n = A.shape[0]
    D = [[float(A[i, j]) for j in range(n)] for i in range(n)]
    for k in range(n):
        for i in range(n):
            for j in range(n):
                via = D[i][k] + D[k][j]
                if via > D[i][j]:
                    D[i][j] = via
    for i in range(n):
        D[i][i] = max(D[i][i], 0.0)
    return D


def circuits(A: np.ndarray) -> list[tuple[list[int], float]]:
    """All elementary circuits of the arc pattern (arc j → i when a_ij > ε), with weights."""
    n = A.shape[0]
    G = nx.DiGraph()
    G.add_nodes_from(range(n))
    for i, j in zip(*np.nonzero(np.isfinite(A)), strict=True):
        G.add_edge(int(j), int(i))
    out = []
    for cyc in nx.simple_cycles(G):
        w = sum(A[cyc[(s + 1) % len(cyc)], cyc[s]] for s in range(len(cyc)))
        out.append((cyc, float(w)))
    return out


def brute_upstream_cycle_mean(A: np.ndarray) -> np.ndarray:
    """λ_i = max mean of the circuits from which i is reachable (networkx enumeration)."""
    n = A.shape[0]
    G = nx.DiGraph()
    G.add_nodes_from(range(n))
    for i, j in zip(*np.nonzero(np.isfinite(A)), strict=True):
        G.add_edge(int(j), int(i))
    lam = np.full(n, -INF)
    for cyc, w in circuits(A):
        mean = w / len(cyc)
        reach = set(nx.descendants(G, cyc[0])) | set(cyc)
        for i in reach:
            lam[i] = max(lam[i], mean)
    return lam


# ---------------------------------------------------------------- products


def test_constants_and_identity():
    """ε = −inf is the zero of ⊕ and absorbing for ⊗; E is the unit of ⊗ (Baccelli et al.
    1992, §3.2)."""
    assert EPS == -INF
    A = np.array([[3.0, 7.0], [2.0, 4.0]])
    np.testing.assert_array_equal(otimes(identity(2), A), A)
    np.testing.assert_array_equal(otimes(A, identity(2)), A)
    np.testing.assert_array_equal(oplus(A, np.full((2, 2), EPS)), A)
    np.testing.assert_array_equal(otimes(A, np.full(2, EPS)), np.full(2, EPS))


@settings(max_examples=60, deadline=None)
@given(st.data(), st.integers(0, 4), st.integers(0, 4), st.integers(1, 4))
def test_otimes_matches_triple_loop(data, n, p, q):
    """Dense ⊗ (chunked or not, matrix or vector) equals the textbook triple loop."""
    A = data.draw(matrices(n, p, float_entries))
    B = data.draw(matrices(p, q, float_entries))
    expected = slow_otimes(A, B)
    np.testing.assert_array_equal(otimes(A, B), expected)
    np.testing.assert_array_equal(otimes(A, B, max_elements=1), expected)
    np.testing.assert_array_equal(otimes(A, B[:, 0]), expected[:, 0])


@settings(max_examples=60, deadline=None)
@given(st.data())
def test_sparse_otimes_matches_dense(data):
    """The edge-list product equals the dense product of the matrix of the edge list (parallel
    entries merged by max, unsorted rows, empty rows give ε)."""
    n = data.draw(st.integers(1, 6))
    p = data.draw(st.integers(1, 6))
    e = data.draw(st.integers(0, 15))
    rows = data.draw(st.lists(st.integers(0, n - 1), min_size=e, max_size=e))
    cols = data.draw(st.lists(st.integers(0, p - 1), min_size=e, max_size=e))
    w = data.draw(st.lists(st.floats(-10, 10, allow_subnormal=False), min_size=e, max_size=e))
    x = data.draw(arrays(np.float64, (p, 3), elements=float_entries))
    dense = np.full((n, p), -INF)
    for i, j, v in zip(rows, cols, w, strict=True):
        dense[i, j] = max(dense[i, j], v)
    np.testing.assert_array_equal(sparse_otimes(rows, cols, w, x, n), slow_otimes(dense, x))
    np.testing.assert_array_equal(sparse_otimes(rows, cols, w, x[:, 1], n), otimes(dense, x[:, 1]))


@settings(max_examples=40, deadline=None)
@given(square(max_n=5), st.integers(0, 7))
def test_matrix_power_is_repeated_product(A, k):
    """A^k by squaring equals k successive products, A^0 = E."""
    expected = identity(A.shape[0])
    for _ in range(k):
        expected = slow_otimes(expected, A)
    np.testing.assert_array_equal(matrix_power(A, k), expected)


# ---------------------------------------------------------------- Kleene star


@settings(max_examples=80, deadline=None)
@given(no_positive_circuit())
def test_kleene_star_twins(A):
    """A* by vectorized Floyd–Warshall equals a plain-Python Floyd–Warshall and the series
    E ⊕ A ⊕ … ⊕ A^(n−1) (Baccelli et al. 1992, §3.2: without positive circuits the series
    stops at n − 1)."""
    n = A.shape[0]
    star = kleene_star(A)
    np.testing.assert_array_equal(star, np.array(slow_floyd_warshall_star(A)))
    series = identity(n)
    for k in range(1, n):
        series = np.maximum(series, matrix_power(A, k))
    np.testing.assert_array_equal(star, series)
    # A* = E ⊕ A ⊗ A* (the star solves its own fixed-point equation)
    np.testing.assert_array_equal(star, np.maximum(identity(n), otimes(A, star)))


@settings(max_examples=80, deadline=None)
@given(square(max_n=5))
def test_kleene_star_raises_iff_positive_circuit(A):
    """The star diverges exactly when some circuit (networkx enumeration) weighs more than 0;
    the reported nodes lie on positive circuits."""
    positive = [cyc for cyc, w in circuits(A) if w > 0]
    if positive:
        with pytest.raises(PositiveCircuit) as err:
            kleene_star(A)
        # every reported node shares a strong component with a positive circuit
        G = nx.DiGraph(np.isfinite(A).T.astype(int))
        comp = {v: i for i, c in enumerate(nx.strongly_connected_components(G)) for v in c}
        hot = {comp[cyc[0]] for cyc in positive}
        assert err.value.nodes
        assert {comp[v] for v in err.value.nodes} <= hot
    else:
        kleene_star(A)


def test_positive_circuit_error_message():
    """The error names the nodes and the rule."""
    with pytest.raises(PositiveCircuit) as err:
        kleene_star([[-INF, 1.0], [0.0, -INF]])
    assert isinstance(err.value, MaxPlusError)
    assert str(err.value) == (
        "nodes [0, 1] lie on a circuit of positive weight: the Kleene star diverges"
    )


@settings(max_examples=60, deadline=None)
@given(no_positive_circuit(), st.data())
def test_solve_implicit_is_least_solution(A0, data):
    """x = A0* b solves x = A0 x ⊕ b and is the limit of x ← A0 x ⊕ b from b, the least
    solution (Baccelli et al. 1992, §3.2)."""
    n = A0.shape[0]
    b = data.draw(arrays(np.float64, (n,), elements=entries))
    x = solve_implicit(A0, b)
    np.testing.assert_array_equal(x, np.maximum(otimes(A0, x), b))
    it = b.copy()
    for _ in range(n + 1):
        it = np.maximum(otimes(A0, it), b)
    np.testing.assert_array_equal(x, it)
    np.testing.assert_array_equal(solve_implicit(A0, np.stack([b, b], axis=1))[:, 1], x)


# ---------------------------------------------------------------- Karp


def test_karp_textbook_examples():
    """Heidergott, Olsder & van der Woude (2006), Max Plus at Work, worked 2×2 examples (from
    memory): [[3,7],[2,4]] has λ = 4.5 and [[2,5],[3,3]] has λ = 4."""
    np.testing.assert_allclose(max_cycle_mean_karp([[3.0, 7.0], [2.0, 4.0]]), [4.5, 4.5])
    np.testing.assert_allclose(max_cycle_mean_karp([[2.0, 5.0], [3.0, 3.0]]), [4.0, 4.0])
    # and their eigenvectors (same source, from memory): A ⊗ v = λ ⊗ v
    np.testing.assert_array_equal(otimes([[3.0, 7.0], [2.0, 4.0]], [0.0, -2.5]), [4.5, 2.0])
    np.testing.assert_array_equal(otimes([[2.0, 5.0], [3.0, 3.0]], [1.0, 0.0]), [5.0, 4.0])


def test_docstring_examples():
    """The examples in the module's docstrings run and print what they show."""
    result = doctest.testmod(semiring, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.attempted > 0
    assert result.failed == 0


def test_karp_reducible_convention():
    """With x(k+1) = A x(k), a_ij is the arc j → i: node 1 fed by node 0 inherits node 0's
    circuit mean, node 0 does not see node 1's (Baccelli et al. 1992, §3.7)."""
    A = np.array([[5.0, -INF, -INF], [0.0, 1.0, -INF], [-INF, -INF, -INF]])
    np.testing.assert_array_equal(max_cycle_mean_karp(A), [5.0, 5.0, -INF])
    np.testing.assert_array_equal(max_cycle_mean_karp(A.T), [5.0, 1.0, -INF])


@settings(max_examples=100, deadline=None)
@given(square(max_n=6, elements=float_entries))
def test_karp_matches_cycle_enumeration(A):
    """Karp (1978) per component, propagated downstream, equals the best mean of the elementary
    circuits from which each node is reachable (networkx simple_cycles)."""
    np.testing.assert_allclose(
        max_cycle_mean_karp(A), brute_upstream_cycle_mean(A), rtol=1e-9, atol=1e-9
    )


@settings(max_examples=30, deadline=None)
@given(square(max_n=6))
def test_karp_growth_of_orbit(A):
    """x(k)/k of x(k+1) = A x(k) from x(0) = 0 tends to λ_i (Baccelli et al. 1992, §3.7):
    for integer matrices the orbit is ultimately periodic, so the slope over a late window of
    a multiple of every cyclicity is exactly λ_i after the transient."""
    n = A.shape[0]
    lam = max_cycle_mean_karp(A)
    period = math.lcm(*range(1, n + 1))
    x = np.zeros(n)
    for _ in range(6000):  # past the transient: gaps between means >= 1/30, offsets <= 6·14
        x = otimes(A, x)
    start = x.copy()
    for _ in range(period):
        x = otimes(A, x)
    finite = np.isfinite(lam)
    slope = (x[finite] - start[finite]) / period
    np.testing.assert_allclose(slope, lam[finite], atol=1e-6)


# ---------------------------------------------------------------- bad input


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: otimes([[np.nan]], [1.0]), "A holds NaN or +inf"),
        (lambda: otimes([[1.0]], [INF]), "B holds NaN or +inf"),
        (lambda: otimes([[1.0, 2.0]], [1.0]), "cannot multiply shapes (1, 2) and (1,)"),
        (lambda: kleene_star([[1.0, 2.0]]), "A must be square, got shape (1, 2)"),
        (lambda: matrix_power([[1.0]], -1), "the exponent must be an integer >= 0, got -1"),
        (lambda: sparse_otimes([0], [0], [INF], [0.0], 1), "weights must be finite"),
        (lambda: sparse_otimes([3], [0], [1.0], [0.0], 2), "rows must lie in 0..1"),
    ],
)
def test_bad_input_messages(call, message):
    """Malformed arrays raise InvalidArray (a MaxPlusError) whose text states the rule."""
    with pytest.raises(InvalidArray) as err:
        call()
    assert message in str(err.value)


# ---------------------------------------------------------------- event graphs


def slow_event_graph_matrices(g: EventGraph) -> dict[int, dict[tuple[int, int], float]]:
    out: dict[int, dict[tuple[int, int], float]] = {}
    for p in range(g.n_places):
        t, u, j = int(g.target[p]), int(g.source[p]), int(g.tokens[p])
        w = float(g.hold[p] + g.duration[t])
        out.setdefault(j, {})
        out[j][t, u] = max(out[j].get((t, u), -INF), w)
    return out


def brute_cycle_times(g: EventGraph) -> np.ndarray:
    """λ_t = max over circuits upstream of t of (Σ d + Σ h) / Σ m, by enumerating node cycles
    and every choice among parallel places (DESIGN semantics; Baccelli et al. 1992, §2.5)."""
    n = g.n_transitions
    G = nx.DiGraph()
    G.add_nodes_from(range(n))
    arcs: dict[tuple[int, int], list[int]] = {}
    for p in range(g.n_places):
        u, t = int(g.source[p]), int(g.target[p])
        G.add_edge(u, t)
        arcs.setdefault((u, t), []).append(p)
    lam = np.full(n, -INF)
    for cyc in nx.simple_cycles(G):
        hops = [(cyc[i], cyc[(i + 1) % len(cyc)]) for i in range(len(cyc))]
        best = -INF
        for choice in itertools.product(*(arcs[h] for h in hops)):
            tokens = sum(int(g.tokens[p]) for p in choice)
            weight = sum(float(g.hold[p] + g.duration[g.target[p]]) for p in choice)
            best = max(best, weight / tokens)
        for t in set(nx.descendants(G, cyc[0])) | set(cyc):
            lam[t] = max(lam[t], best)
    return lam


@settings(max_examples=60, deadline=None)
@given(live_event_graphs(max_transitions=6, max_places=12))
def test_event_graph_matrices_match_places(g):
    """A_j[t, u] is the best hold + duration over places u → t with j tokens, ε elsewhere."""
    mats = event_graph_matrices(g)
    assert len(mats) == int(g.tokens.max()) + 1
    expected = slow_event_graph_matrices(g)
    for j, Aj in enumerate(mats):
        want = np.full((g.n_transitions, g.n_transitions), -INF)
        for (t, u), w in expected.get(j, {}).items():
            want[t, u] = w
        np.testing.assert_array_equal(Aj, want)


@settings(max_examples=80, deadline=None)
@given(live_event_graphs(max_transitions=5, max_places=9))
def test_augmented_matrix_karp_is_cycle_time(g):
    """The maximum cycle mean of the augmented one-step matrix, upstream of each transition,
    is the largest circuit ratio (Σ d + Σ h)/Σ m upstream of it, for graphs with parallel
    places, self-loops, markings up to 3 and several components (Baccelli et al. 1992, §2.5)."""
    A, n = augmented_matrix(g)
    assert A.shape == (n * int(g.tokens.max()), n * int(g.tokens.max()))
    np.testing.assert_allclose(
        max_cycle_mean_karp(A)[:n], brute_cycle_times(g), rtol=1e-9, atol=1e-9
    )


def test_augmented_matrix_textbook():
    """Heidergott et al. (2006), from memory: [[3,7],[2,4]] has λ = 4.5; as an event graph
    with one token per place and hold a_tu; and with the self-loop of node 0 carrying 2 tokens
    the circuit 0→0 has ratio 3/2, still below 4.5."""
    g = EventGraph([0.0, 0.0], [0, 1, 0, 1], [0, 0, 1, 1], [1, 1, 1, 1], [3.0, 7.0, 2.0, 4.0])
    A, n = augmented_matrix(g)
    assert n == 2
    np.testing.assert_array_equal(A, [[3.0, 7.0], [2.0, 4.0]])
    g2 = EventGraph([0.0, 0.0], [0, 1, 0, 1], [0, 0, 1, 1], [2, 1, 1, 1], [3.0, 7.0, 2.0, 4.0])
    A2, n2 = augmented_matrix(g2)
    np.testing.assert_allclose(max_cycle_mean_karp(A2)[:n2], [4.5, 4.5])


def test_augmented_matrix_not_live():
    """A token-free circuit is a deadlock: NotLive names it."""
    g = EventGraph([1.0, 1.0], [0, 1], [1, 0], [0, 0], [0.0, 0.0])
    with pytest.raises(NotLive) as err:
        augmented_matrix(g)
    assert sorted(err.value.circuit) == [0, 1]
    assert "holds no token" in str(err.value)
