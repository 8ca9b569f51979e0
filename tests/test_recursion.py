"""Tests of the firing-time recursion, deterministic and random.

The vectorized recursion is checked against a slow twin written here with dicts and plain
Python (the formula of DEVELOPERS.md, nothing shared with the module), against the maximum
cycle mean of the augmented matrix (Karp), and against the exact throughput of closed cyclic
exponential lines (Gordon & Newell 1967, Buzen 1973).
"""

from __future__ import annotations

import doctest
import math

import numpy as np
import pytest
from cyclecheck.algebra import recursion
from cyclecheck.algebra.eventgraph import EventGraph
from cyclecheck.algebra.exceptions import InvalidArray, NotLive, Unfed
from cyclecheck.algebra.recursion import RandomRecursion, firing_times, transient
from cyclecheck.algebra.semiring import augmented_matrix, max_cycle_mean_karp
from hypothesis import given, settings
from hypothesis import strategies as st

from tests.strategies import live_event_graphs

# ---------------------------------------------------------------- the slow twin


def slow_recursion(
    g: EventGraph, K: int, dur: np.ndarray | None = None, hold: np.ndarray | None = None,
    record: dict[tuple[int, int], int] | None = None,
) -> tuple[np.ndarray, list[int]]:
    """x_t(k) = d_t(k) + max_p term_p(k), term_p(k) = 0 if k <= m_p else x_u(k − m_p) + h_p(k).

    ``dur[k − 1, t]`` and ``hold[k − 1, p]`` (the consuming firing), or the graph's values.
    Also counts, for every place, the firings it set (first place by index among ties), and
    writes into ``record`` the place that set each firing ``(t, k)``.
    """
    n, m = g.n_transitions, g.n_places
    inputs = {t: [p for p in range(m) if int(g.target[p]) == t] for t in range(n)}

    def d(t: int, k: int) -> float:
        return float(g.duration[t]) if dur is None else float(dur[k - 1, t])

    def h(p: int, k: int) -> float:
        return float(g.hold[p]) if hold is None else float(hold[k - 1, p])

    x: dict[tuple[int, int], float] = {}
    setter = [0] * m

    def fire(t: int, k: int) -> float:
        if (t, k) in x:
            return x[t, k]
        best, arg = -math.inf, -1
        for p in inputs[t]:
            mp, u = int(g.tokens[p]), int(g.source[p])
            if k <= mp:
                term = 0.0
            elif mp == 0:
                term = fire(u, k) + h(p, k)  # same firing: the implicit part
            else:
                term = x[u, k - mp] + h(p, k)
            if term > best:
                best, arg = term, p
        setter[arg] += 1
        if record is not None:
            record[t, k] = arg
        x[t, k] = d(t, k) + best
        return x[t, k]

    for k in range(1, K + 1):
        for t in range(n):
            fire(t, k)
    times = np.array([[x[t, k] for t in range(n)] for k in range(1, K + 1)]).reshape(K, n)
    return times, setter


def block_source(draws: np.ndarray, calls: list[tuple[int, int]] | None = None):
    """A source over pre-drawn ``draws[k − 1]`` (shape (K, R, width))."""

    def source(first: int, count: int) -> np.ndarray:
        if calls is not None:
            calls.append((first, count))
        return draws[first - 1 : first - 1 + count]

    return source


# ---------------------------------------------------------------- deterministic


@settings(max_examples=150, deadline=None)
@given(live_event_graphs(), st.integers(1, 14))
def test_firing_times_match_slow_twin(g, K):
    """Vectorized levels and ring buffer give the formula's firing times on live graphs with
    parallel places, self-loops, markings 0..3, several components, integer or float values."""
    expected, _ = slow_recursion(g, K)
    np.testing.assert_allclose(firing_times(g, K), expected, rtol=1e-12, atol=0)


def test_firing_times_small_example():
    """Two machines in a loop with one part (durations 2 and 3, hold 1 on the return): each
    firing waits for the other; k = 1 uses the initial token at time 0."""
    g = EventGraph([2.0, 3.0], [0, 1], [1, 0], [0, 1], [0.0, 1.0])
    np.testing.assert_array_equal(firing_times(g, 3), [[2, 5], [8, 11], [14, 17]])
    assert firing_times(g, 0).shape == (0, 2)


def test_docstring_examples():
    """The examples in the module's docstrings run and print what they show."""
    result = doctest.testmod(recursion, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.attempted > 0
    assert result.failed == 0


def periodic_slope(series: np.ndarray, max_period: int = 240, tail: int = 600) -> float | None:
    """Slope (x(K) − x(K − c))/c for the smallest c whose increments are constant over the tail."""
    for c in range(1, max_period + 1):
        inc = series[c:] - series[:-c]
        if np.all(inc[-tail:] == inc[-1]):
            return float(inc[-1]) / c
    return None


@settings(max_examples=60, deadline=None)
@given(live_event_graphs(value_kind="int"))
def test_growth_is_karp_cycle_time(g):
    """x_t(k)/k tends to the maximum cycle mean upstream of t of the augmented matrix
    (Baccelli et al. 1992, §2.5 and §3.7). With integer data x_t is ultimately periodic,
    x_t(k + c) = x_t(k) + c·λ_t, so the late slope equals λ_t exactly."""
    K = 4000
    X = firing_times(g, K)
    A, n = augmented_matrix(g)
    lam = max_cycle_mean_karp(A)[:n]
    for t in range(n):
        slope = periodic_slope(X[:, t])
        if slope is None:  # transient longer than the window: fall back to the mean slope
            slope = (X[-1, t] - X[K // 2, t]) / (K - 1 - K // 2)
            assert slope == pytest.approx(lam[t], abs=0.05)
        else:
            assert slope == pytest.approx(lam[t], rel=1e-12)


def test_transient_textbook_examples():
    """Heidergott, Olsder & van der Woude (2006), Max Plus at Work (from memory):
    A = [[3,7],[2,4]], λ = 4.5, the orbit from 0 is periodic with period 2 after one step;
    A = [[2,5],[3,3]], λ = 4. As event graphs: one place per entry with one token and hold
    a_tu, so x(1) = 0 and x(k + 1) = A ⊗ x(k)."""
    g = EventGraph([0.0, 0.0], [0, 1, 0, 1], [0, 0, 1, 1], [1, 1, 1, 1], [3.0, 7.0, 2.0, 4.0])
    X = firing_times(g, 4)
    np.testing.assert_array_equal(X, [[0, 0], [7, 4], [11, 9], [16, 13]])
    assert transient(g, 4.5, 2, 40) == 2
    assert transient(g, 4.5, 1, 40) is None  # not periodic with period 1
    assert transient(g, 4.0, 2, 40) is None  # wrong cycle time
    assert transient(g, 4.5, 2, 2) is None  # horizon too short to tell
    g2 = EventGraph([0.0, 0.0], [0, 1, 0, 1], [0, 0, 1, 1], [1, 1, 1, 1], [2.0, 5.0, 3.0, 3.0])
    assert transient(g2, 4.0, 2, 40) == 1
    assert transient(g2, 4.0, 1, 40) is None


@settings(max_examples=60, deadline=None)
@given(live_event_graphs(value_kind="int", strongly_connected=True), st.integers(1, 6))
def test_transient_matches_definition(g, c):
    """transient returns the smallest k0 with x(k + c) = x(k) + c·λ for all k0 <= k <= K − c,
    checked by a plain loop, with λ from Karp."""
    K = 300
    A, n = augmented_matrix(g)
    lam = float(max_cycle_mean_karp(A)[0])
    X = firing_times(g, K)

    def holds(k: int) -> bool:
        return all(
            abs(X[k + c - 1, t] - X[k - 1, t] - c * lam) <= 1e-9 * max(1.0, abs(X[k + c - 1, t]))
            for t in range(n)
        )

    expected = None
    if K > c and holds(K - c):
        expected = K - c
        while expected > 1 and holds(expected - 1):
            expected -= 1
    assert transient(g, lam, c, K) == expected


# ---------------------------------------------------------------- random


@st.composite
def random_setups(draw, max_transitions: int = 6, max_places: int = 12):
    g = draw(live_event_graphs(max_transitions=max_transitions, max_places=max_places))
    R = draw(st.integers(1, 4))
    K = draw(st.integers(1, 16))
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(np.random.SeedSequence(seed))
    dur = rng.exponential(2.0, size=(K, R, g.n_transitions))
    if draw(st.booleans()):
        hold = rng.integers(0, 3, size=(K, R, g.n_places)).astype(float)  # ties happen
    else:
        hold = np.zeros((K, 1, g.n_places))  # broadcast over replications, zero path
    return g, R, K, dur, hold


@settings(max_examples=120, deadline=None)
@given(random_setups(), st.integers(1, 6))
def test_random_recursion_equals_separate_runs(setup, block):
    """R replications at once give, for each r, the slow twin run on draws [:, r, :]: firing
    times, checkpoints, critical-place counts and busy times."""
    g, R, K, dur, hold = setup
    calls: list[tuple[int, int]] = []
    rec = RandomRecursion(g, block_source(dur, calls), block_source(hold), R)
    out = rec.run(K, block=block, record=True)
    assert rec.firings == K
    # the sources were asked for firings 1..K exactly once, in order
    asked = [k for first, count in calls for k in range(first, first + count)]
    assert asked == list(range(1, K + 1))
    ends = [*range(block, K, block), K]
    np.testing.assert_array_equal(out.checkpoints, [0, *ends])
    hold_full = np.broadcast_to(hold, (K, R, g.n_places))
    for r in range(R):
        times, setter = slow_recursion(g, K, dur[:, r, :], hold_full[:, r, :])
        np.testing.assert_allclose(out.times[:, r, :], times, rtol=1e-12)
        np.testing.assert_allclose(out.x[1:, r, :], times[np.array(ends) - 1], rtol=1e-12)
        np.testing.assert_array_equal(out.x[0, r, :], 0.0)
        np.testing.assert_array_equal(out.critical[r], setter)
        np.testing.assert_allclose(out.busy[r], dur[:, r, :].sum(axis=0), rtol=1e-12)
    np.testing.assert_allclose(rec.state(), out.times[-1], rtol=0)


@settings(max_examples=60, deadline=None)
@given(random_setups(), st.integers(1, 15))
def test_streaming_and_chunking_do_not_change_results(setup, split):
    """Running K firings in two calls, in chunks of one firing, or with read positions computed
    on the fly gives the same numbers as one call."""
    g, R, K, dur, hold = setup
    split = min(split, K)
    whole = RandomRecursion(g, block_source(dur), block_source(hold), R).run(K, record=True)
    parts = RandomRecursion(g, block_source(dur), block_source(hold), R)
    first = parts.run(split, record=True)
    second = parts.run(K - split, block=3, record=True)
    np.testing.assert_array_equal(np.concatenate([first.times, second.times]), whole.times)
    np.testing.assert_array_equal(first.critical + second.critical, whole.critical)
    np.testing.assert_allclose(first.busy + second.busy, whole.busy, rtol=1e-12)
    assert second.checkpoints[0] == split
    np.testing.assert_array_equal(second.x[0], whole.times[split - 1] if split else 0.0)
    old = (recursion._CHUNK_ELEMENTS, recursion._INDEX_TABLE_ELEMENTS)
    try:
        recursion._CHUNK_ELEMENTS, recursion._INDEX_TABLE_ELEMENTS = 1, 0
        small = RandomRecursion(g, block_source(dur), block_source(hold), R).run(K, record=True)
    finally:
        recursion._CHUNK_ELEMENTS, recursion._INDEX_TABLE_ELEMENTS = old
    np.testing.assert_array_equal(small.times, whole.times)
    np.testing.assert_array_equal(small.critical, whole.critical)


def test_run_summaries_for_estimation():
    """growth, increments and block_rates are the per-replication quantities an estimator needs:
    (x(K) − x(K0))/(K − K0) and batch increments x(k) − x(k − b), here checked on recorded
    times; observe keeps chosen columns only."""
    g = EventGraph([1.0, 2.0], [0, 1, 0, 1], [1, 0, 0, 1], [0, 2, 1, 1], [0.0] * 4)
    rng = np.random.default_rng(np.random.SeedSequence(11))
    dur = rng.exponential(1.0, size=(50, 3, 2))
    rec = RandomRecursion(g, block_source(dur), lambda f, c: np.zeros((c, 1, 4)), 3)
    out = rec.run(50, block=20, record=True, observe=[1])
    np.testing.assert_array_equal(out.checkpoints, [0, 20, 40, 50])
    assert out.x.shape == (4, 3, 1) and out.n_firings == 50
    x = out.times[:, :, 1]
    np.testing.assert_allclose(out.growth(1)[:, 0], (x[49] - x[19]) / 30)
    np.testing.assert_allclose(out.increments()[:, :, 0], [x[19], x[39] - x[19], x[49] - x[39]])
    np.testing.assert_allclose(out.block_rates()[2, :, 0], (x[49] - x[39]) / 10)


def test_criticality_ties_go_to_first_place():
    """Two parallel places with equal hold into transition 1: the one with the smaller index
    is counted. The only input place of transition 0 sets all its firings, k = 1 included
    (where its term is the initial token's 0)."""
    g = EventGraph([1.0, 0.0], [0, 0, 0, 1], [0, 1, 1, 1], [1, 0, 0, 1], [0.0, 2.0, 2.0, 0.0])
    rec = RandomRecursion(
        g,
        lambda f, c: np.ones((c, 1, 2)) * [1.0, 0.0],
        lambda f, c: np.full((c, 1, 4), [0, 2, 2, 0]),
        2,
    )
    out = rec.run(5)
    np.testing.assert_array_equal(out.critical, [[5, 5, 0, 0], [5, 5, 0, 0]])


def buzen_cycle_time(rates: list[float], customers: int) -> float:
    """1/X for a closed cyclic network of exponential single servers: X = G(N−1)/G(N) with
    Buzen's convolution G(n, k) = G(n, k−1) + G(n−1, k)/μ_k (Buzen 1973; Gordon & Newell 1967)."""
    G = [1.0] + [0.0] * customers
    for mu in rates:
        for n in range(1, customers + 1):
            G[n] = G[n] + G[n - 1] / mu
    return G[customers] / G[customers - 1]


@pytest.mark.parametrize(("rates", "customers"), [([1.0, 1.0, 1.0, 1.0], 2), ([1.0, 0.8, 1.25], 3)])
def test_closed_exponential_line_matches_gordon_newell(rates, customers):
    """A closed cyclic line of exponential FIFO single servers is a timed event graph; its
    cycle time is 1/X from Gordon & Newell (1967) / Buzen (1973) — equal rates μ, K stations,
    N customers: X = μN/(N+K−1). The mean growth rate over replications must be within 4
    standard errors."""
    K = len(rates)
    if len(set(rates)) == 1:
        assert buzen_cycle_time(rates, customers) == pytest.approx(
            (customers + K - 1) / (rates[0] * customers)
        )
    # station i -> i+1 carries the customers (all start queued at station 0); self-loops: one server
    source = [*range(K), *range(K)]
    target = [*((i + 1) % K for i in range(K)), *range(K)]
    tokens = [0] * (K - 1) + [customers] + [1] * K
    g = EventGraph([1.0] * K, source, target, tokens, [0.0] * (2 * K))
    R, n_firings, warm = 64, 4000, 400
    rng = np.random.default_rng(np.random.SeedSequence(20240611))
    dur = rng.exponential(1.0 / np.array(rates), size=(n_firings, R, K))
    rec = RandomRecursion(g, block_source(dur), lambda f, c: np.zeros((c, 1, 2 * K)), R)
    out = rec.run(n_firings, block=warm)
    growth = out.growth(start=1)  # drop the first block as warm-up
    per_rep = growth.mean(axis=1)
    se = per_rep.std(ddof=1) / math.sqrt(R)
    assert abs(per_rep.mean() - buzen_cycle_time(rates, customers)) < 4 * se
    np.testing.assert_allclose(
        growth, np.broadcast_to(per_rep[:, None], growth.shape), rtol=0.02
    )  # one rate per line


# ---------------------------------------------------------------- bad input


def test_not_live_graphs_are_rejected():
    """A token-free circuit (NotLive) or a transition without input place (Unfed) is refused."""
    dead = EventGraph([1.0, 1.0], [0, 1], [1, 0], [0, 0], [0.0, 0.0])
    with pytest.raises(NotLive, match="holds no token"):
        firing_times(dead, 3)
    unfed = EventGraph([1.0, 1.0], [0], [1], [1], [0.0])
    with pytest.raises(Unfed) as err:
        RandomRecursion(
            unfed, block_source(np.ones((1, 1, 2))), block_source(np.ones((1, 1, 1))), 1
        )
    assert str(err.value) == "transitions [0] have no input place: their firing rate is unbounded"


def test_bad_sources_are_reported():
    """A source returning the wrong shape or impossible values raises InvalidArray naming the
    source, the firings and the expected shape."""
    g = EventGraph([1.0], [0], [0], [1], [0.0])
    good_hold = block_source(np.zeros((10, 1, 1)))
    rec = RandomRecursion(g, lambda f, c: np.ones((c, 3, 1)), good_hold, 2)
    with pytest.raises(InvalidArray) as err:
        rec.run(4)
    assert str(err.value) == (
        "duration source returned shape (4, 3, 1) for firings 1..4, expected (4, 2, 1)"
    )
    rec = RandomRecursion(g, lambda f, c: -np.ones((c, 2, 1)), good_hold, 2)
    with pytest.raises(InvalidArray, match=r"negative, NaN or infinite values for firings 1\.\.4"):
        rec.run(4)
    rec = RandomRecursion(g, lambda f, c: np.ones((c, 2, 1)), good_hold, 2)
    with pytest.raises(InvalidArray, match=r"observe must list transition indices in 0..0"):
        rec.run(4, observe=[1])
    with pytest.raises(InvalidArray, match="replications must be an integer >= 1, got 0"):
        RandomRecursion(g, good_hold, good_hold, 0)
