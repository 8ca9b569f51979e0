"""Tests of the SimPy engine (simulate/engine.py).

The engine must follow the firing-time recursion of the design, sample path by sample path:

    x_t(k) = d_t(k) + max over places p = (u -> t) of term_p(k),
    term_p(k) = 0 if k <= m_p else x_u(k - m_p) + h_p(k),

(Baccelli, Cohen, Olsder, Quadrat, *Synchronization and Linearity*, Wiley 1992, ch. 2, the
earliest-firing behaviour of a timed event graph; holds indexed by the consuming firing as in
DEVELOPERS.md). Its slow independent twin is :func:`reference_run` below: a dict-based, plain
Python evaluation of that formula, sharing no code with the engine.
"""

from __future__ import annotations

import math
from collections import defaultdict

import numpy as np
import pytest
import simpy
from cyclecheck.algebra.eventgraph import EventGraph
from cyclecheck.algebra.exceptions import NotLive, Unfed
from cyclecheck.simulate.engine import (
    BLOCK,
    EventGraphModel,
    SimulationRun,
    simulate_event_graph,
)
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.strategies import live_event_graphs

RTOL = 1e-9


# ---------------------------------------------------------------------------------------------
# the slow twin and a stand-in sampler


def reference_run(graph, n_firings, duration, hold):
    """Start and completion times ``(s, x)`` as dicts ``{(t, k): time}`` for k = 1..n_firings.

    ``duration(t, k)`` is d_t(k) and ``hold(p, k)`` is h_p(k). Plain recursion with memo: the
    firings of one number k depend on earlier numbers and on token-free places, which form no
    circuit in a live graph, so the recursion ends.
    """
    n, m = graph.n_transitions, graph.n_places
    inputs = defaultdict(list)
    for p in range(m):
        inputs[int(graph.target[p])].append(p)
    s: dict = {}
    x: dict = {}

    def fire(t, k):
        if (t, k) not in x:
            start = 0.0
            for p in inputs[t]:
                mp = int(graph.tokens[p])
                if k > mp:
                    start = max(start, fire(int(graph.source[p]), k - mp) + hold(p, k))
            s[(t, k)] = start
            x[(t, k)] = duration(t, k) + start
        return x[(t, k)]

    for k in range(1, n_firings + 1):
        for t in range(n):
            fire(t, k)
    return s, x


def as_arrays(graph, n_firings, s, x):
    shape = (n_firings, graph.n_transitions)
    start, time = np.empty(shape), np.empty(shape)
    for (t, k), v in s.items():
        start[k - 1, t] = v
        time[k - 1, t] = x[(t, k)]
    return start, time


class StandInSampler:
    """Random d_t(k) and h_p(k) from numpy Generators, block-indexed by firing number.

    Durations are ``graph.duration[t]`` times an Exp(1) draw, holds ``graph.hold[p]`` times a
    Uniform(0, 2) draw, so zero values stay zero (ties) and the rest are continuous. Any
    ``(first, count)`` gives the same numbers: block ``b`` (of ``block`` firings) of element
    ``e`` comes from ``SeedSequence(seed, spawn_key=(kind, e, b))``.
    """

    def __init__(self, graph, seed, block=50):
        self.graph, self.seed, self.block = graph, seed, block
        self.calls = []

    def _values(self, kind, e, first, count):
        b0, b1 = (first - 1) // self.block, (first + count - 2) // self.block
        parts = []
        for b in range(b0, b1 + 1):
            rng = np.random.Generator(
                np.random.PCG64(np.random.SeedSequence(self.seed, spawn_key=(kind, e, b)))
            )
            parts.append(
                rng.exponential(1.0, self.block) if kind == 0 else rng.uniform(0.0, 2.0, self.block)
            )
        values = np.concatenate(parts)
        offset = first - 1 - b0 * self.block
        return values[offset : offset + count]

    def duration(self, t, first, count):
        self.calls.append(("duration", t, first, count))
        return self.graph.duration[t] * self._values(0, t, first, count)

    def hold(self, p, first, count):
        self.calls.append(("hold", p, first, count))
        return self.graph.hold[p] * self._values(1, p, first, count)

    # element-wise access for the reference
    def d(self, t, k):
        return float(self.graph.duration[t] * self._values(0, t, k, 1)[0])

    def h(self, p, k):
        return float(self.graph.hold[p] * self._values(1, p, k, 1)[0])


def fixed(graph):
    return (lambda t, k: float(graph.duration[t])), (lambda p, k: float(graph.hold[p]))


def assert_same_path(graph, run, n_firings, duration, hold):
    s, x = reference_run(graph, n_firings, duration, hold)
    start, time = as_arrays(graph, n_firings, s, x)
    assert run.time.shape == (n_firings, graph.n_transitions)
    np.testing.assert_allclose(run.start, start, rtol=RTOL, atol=0)
    np.testing.assert_allclose(run.time, time, rtol=RTOL, atol=0)


def graph(duration, places, names=()):
    """EventGraph from ``places = [(source, target, tokens, hold), ...]``."""
    return EventGraph(
        duration=duration,
        source=[p[0] for p in places],
        target=[p[1] for p in places],
        tokens=[p[2] for p in places],
        hold=[p[3] for p in places],
        names=names,
    )


# ---------------------------------------------------------------------------------------------
# hand-made graphs

SINGLE_SERVER = graph([1.5], [(0, 0, 1, 0.0)], names=["machine"])
CLOSED_LINE_3 = graph(
    [2.0, 3.0, 1.0],
    [
        (0, 1, 0, 0.5),
        (1, 2, 1, 0.0),
        (2, 0, 1, 1.0),
        (0, 0, 1, 0.0),
        (1, 1, 1, 0.0),
        (2, 2, 1, 0.0),
    ],
)
# A single server feeds an infinite server through a place with long random holds: tokens
# overtake each other and firing k of "pack" may start before firing k - 1.
OUT_OF_ORDER = graph([0.5, 1.0], [(0, 0, 1, 0.0), (0, 1, 0, 10.0)], names=["cut", "pack"])
PARALLEL = graph([1.0, 2.0], [(0, 1, 0, 3.0), (0, 1, 2, 0.5), (1, 0, 1, 1.0), (0, 0, 1, 0.0)])
MANY_TOKENS = graph(
    [1.0, 4.0, 2.0],
    [(0, 1, 3, 1.0), (1, 2, 0, 2.0), (2, 0, 2, 0.5), (1, 1, 2, 0.0), (2, 2, 3, 1.0)],
)
# two components: {0, 1} upstream feeds {2, 3}; nothing flows back
NOT_STRONGLY_CONNECTED = graph(
    [1.0, 2.0, 3.0, 0.5],
    [
        (0, 1, 0, 1.0),
        (1, 0, 2, 0.0),
        (1, 2, 0, 2.0),
        (2, 3, 1, 0.0),
        (3, 2, 1, 1.0),
        (0, 0, 1, 0.0),
    ],
)
HAND_MADE = {
    "single server": SINGLE_SERVER,
    "closed line of 3": CLOSED_LINE_3,
    "out of order": OUT_OF_ORDER,
    "parallel places": PARALLEL,
    "tokens > 1": MANY_TOKENS,
    "not strongly connected": NOT_STRONGLY_CONNECTED,
}


@pytest.mark.parametrize("name", list(HAND_MADE))
def test_hand_made_fixed_values_follow_the_recursion(name):
    """With fixed numbers (sampler=None) every start and completion equals the recursion."""
    g = HAND_MADE[name]
    run = simulate_event_graph(g, n_firings=40)
    assert_same_path(g, run, 40, *fixed(g))


@pytest.mark.parametrize("name", list(HAND_MADE))
@pytest.mark.parametrize("seed", [1, 2])
def test_hand_made_random_values_follow_the_recursion(name, seed):
    """With random durations and holds, the same draws give the same sample path."""
    g = HAND_MADE[name]
    sampler = StandInSampler(g, seed)
    run = simulate_event_graph(g, sampler, n_firings=60)
    assert_same_path(g, run, 60, sampler.d, sampler.h)


def test_tokens_overtake_and_are_matched_by_number():
    """Out-of-order arrivals really happen here, and firings start out of order with them."""
    sampler = StandInSampler(OUT_OF_ORDER, seed=3)
    run = simulate_event_graph(OUT_OF_ORDER, sampler, n_firings=200)
    starts = run.start[:, 1]
    assert np.any(np.diff(starts) < 0), "the test graph must produce overtaking tokens"
    assert_same_path(OUT_OF_ORDER, run, 200, sampler.d, sampler.h)


def test_many_firings_cross_sampler_blocks():
    """Past several engine blocks of draws (and a block size of the sampler that differs)."""
    k = 2 * BLOCK + 300
    sampler = StandInSampler(MANY_TOKENS, seed=4, block=333)
    run = simulate_event_graph(MANY_TOKENS, sampler, n_firings=k)
    assert_same_path(MANY_TOKENS, run, k, sampler.d, sampler.h)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    g=live_event_graphs(max_transitions=6, max_places=14),
    seed=st.integers(0, 2**32 - 1),
    random=st.booleans(),
)
def test_live_graphs_follow_the_recursion(g, seed, random):
    """Property: on any live graph, fixed or random values, the engine equals the recursion."""
    if random:
        sampler = StandInSampler(g, seed)
        run = simulate_event_graph(g, sampler, n_firings=25)
        assert_same_path(g, run, 25, sampler.d, sampler.h)
    else:
        run = simulate_event_graph(g, n_firings=25)
        assert_same_path(g, run, 25, *fixed(g))


@settings(max_examples=40, deadline=None)
@given(
    g=live_event_graphs(max_transitions=5, max_places=12),
    seed=st.integers(0, 2**32 - 1),
    fraction=st.floats(0.05, 1.0),
)
def test_until_keeps_exactly_the_firings_before_it(g, seed, fraction):
    """Property: a firing is recorded iff it starts / completes strictly before ``until``."""
    sampler = StandInSampler(g, seed)
    s, x = reference_run(g, 20, sampler.d, sampler.h)
    start, time = as_arrays(g, 20, s, x)
    until = fraction * float(time.max()) + 1e-3
    run = simulate_event_graph(g, sampler, n_firings=20, until=until)
    np.testing.assert_array_equal(np.isnan(run.start), ~(start < until))
    np.testing.assert_array_equal(np.isnan(run.time), ~(time < until))
    keep = time < until
    np.testing.assert_allclose(run.time[keep], time[keep], rtol=RTOL, atol=0)
    assert run.horizon == until


# ---------------------------------------------------------------------------------------------
# against the project's max-plus recursion and sampler (another implementation of the formula)

LAWS = [
    lambda v: {"dist": "exponential", "mean": v},
    lambda v: {"dist": "uniform", "low": 0.0, "high": 2 * v},
    lambda v: {"dist": "gamma", "mean": v, "cv": 2.0},
]


def project_sampler(g, seed, law_index):
    """A Sampler of simulate/durations.py with random laws of the graph's values as means."""
    durations = pytest.importorskip("cyclecheck.simulate.durations")
    law = LAWS[law_index]
    return durations.Sampler(
        [law(v) if v > 0 else 0.0 for v in g.duration.tolist()],
        [LAWS[(law_index + 1) % 3](v) if v > 0 else 0.0 for v in g.hold.tolist()],
        seed=seed,
    )


@settings(max_examples=40, deadline=None)
@given(g=live_event_graphs(max_transitions=6, max_places=14))
def test_fixed_values_agree_with_algebra_firing_times(g):
    """sampler=None: the engine equals cyclecheck.algebra.recursion.firing_times."""
    recursion = pytest.importorskip("cyclecheck.algebra.recursion")
    run = simulate_event_graph(g, n_firings=30)
    np.testing.assert_allclose(run.time, recursion.firing_times(g, 30), rtol=RTOL, atol=0)


@settings(max_examples=40, deadline=None)
@given(
    g=live_event_graphs(max_transitions=6, max_places=14),
    seed=st.integers(0, 2**32 - 1),
    law=st.integers(0, 2),
)
def test_random_values_agree_with_random_recursion(g, seed, law):
    """Same Sampler, same draws: the engine equals RandomRecursion sample path by sample path."""
    recursion = pytest.importorskip("cyclecheck.algebra.recursion")
    sampler = project_sampler(g, seed, law)
    run = simulate_event_graph(g, sampler, n_firings=30)
    rec = recursion.RandomRecursion(
        g,
        lambda first, count: sampler.duration_block(first, count)[:, None, :],
        lambda first, count: sampler.hold_block(first, count)[:, None, :],
        replications=1,
    )
    out = rec.run(30, record=True)
    np.testing.assert_allclose(run.time, out.times[:, 0, :], rtol=RTOL, atol=0)


def test_long_random_run_agrees_with_random_recursion():
    """Several thousand firings with overtaking tokens, across sampler blocks."""
    recursion = pytest.importorskip("cyclecheck.algebra.recursion")
    for g in (OUT_OF_ORDER, MANY_TOKENS, NOT_STRONGLY_CONNECTED):
        sampler = project_sampler(g, 11, 0)
        run = simulate_event_graph(g, sampler, n_firings=3 * BLOCK)
        rec = recursion.RandomRecursion(
            g,
            lambda first, count, s=sampler: s.duration_block(first, count)[:, None, :],
            lambda first, count, s=sampler: s.hold_block(first, count)[:, None, :],
            replications=1,
        )
        out = rec.run(3 * BLOCK, record=True)
        np.testing.assert_allclose(run.time, out.times[:, 0, :], rtol=RTOL, atol=0)


# ---------------------------------------------------------------------------------------------
# closed forms


def test_single_exponential_server_is_the_cumulative_sum():
    """One server with a one-token self-loop fires back to back: x(k) = d(1) + ... + d(k)."""
    g = graph([1.0], [(0, 0, 1, 0.0)])
    sampler = StandInSampler(g, seed=5)
    run = simulate_event_graph(g, sampler, n_firings=3000)
    d = sampler.duration(0, 1, 3000)
    np.testing.assert_allclose(run.time[:, 0], np.cumsum(d), rtol=RTOL)
    np.testing.assert_allclose(run.start[1:, 0], run.time[:-1, 0], rtol=0, atol=0)


@pytest.mark.parametrize(("d1", "d2"), [(2.0, 3.0), (3.0, 2.0), (2.5, 2.5)])
def test_two_station_tandem_has_cycle_time_max_of_durations(d1, d2):
    """Saturated two-station tandem: x2(k) = max(d1 + k d2, k d1 + d2), cycle time max(d1, d2).

    Source: Baccelli, Cohen, Olsder, Quadrat (1992), *Synchronization and Linearity*, ch. 2
    (the cycle time of an event graph is its maximum circuit ratio; here the two self-loops,
    the upstream component feeding the downstream one).
    """
    g = graph([d1, d2], [(0, 0, 1, 0.0), (0, 1, 0, 0.0), (1, 1, 1, 0.0)])
    run = simulate_event_graph(g, n_firings=50)
    k = np.arange(1, 51)
    np.testing.assert_allclose(run.time[:, 0], k * d1, rtol=RTOL)
    np.testing.assert_allclose(run.time[:, 1], np.maximum(d1 + k * d2, k * d1 + d2), rtol=RTOL)
    np.testing.assert_allclose(np.diff(run.time[-10:, 1]), max(d1, d2), rtol=RTOL)


def test_closed_exponential_line_matches_gordon_newell_throughput():
    """Closed cyclic line, K = 4 stations of rate 1, N = 3 customers: X = N / (N + K - 1) = 1/2.

    Source: Gordon & Newell (1967), Closed queuing systems with exponential servers, Operations
    Research 15(2); equal-rate closed form X = μN/(N+K−1) (Buzen 1973). The long-run cycle time
    x(k)/k of every station estimates 1/X = 2; 20 000 firings give a standard error of about
    1 % (common practice, no source), so 5 % is a safe tolerance for this seed.
    """
    stations, customers = 4, 3
    places = [(i, i, 1, 0.0) for i in range(stations)]
    places += [
        (i, (i + 1) % stations, 1 if (i + 1) % stations < customers else 0, 0.0)
        for i in range(stations)
    ]
    g = graph([1.0] * stations, places)
    run = simulate_event_graph(g, StandInSampler(g, seed=6), n_firings=20_000)
    cycle = (run.time[-1] - run.time[999]) / (20_000 - 1000)
    np.testing.assert_allclose(cycle, (customers + stations - 1) / customers, rtol=0.05)


def test_closed_line_with_unequal_rates_matches_buzen():
    """Closed line, rates (1, 0.5, 2, 1), N = 3: throughput from Buzen's convolution algorithm.

    Source: Buzen (1973), Computational algorithms for closed queueing networks with exponential
    servers, CACM 16(9) (through tests/queueing.py, itself checked against MVA, Reiser &
    Lavenberg 1980). Tolerance 5 % for 20 000 firings (common practice, no source).
    """
    from tests.queueing import gordon_newell_throughput

    rates, customers = [1.0, 0.5, 2.0, 1.0], 3
    k = len(rates)
    places = [(i, i, 1, 0.0) for i in range(k)]
    places += [(i, (i + 1) % k, 1 if (i + 1) % k < customers else 0, 0.0) for i in range(k)]
    g = graph([1.0 / r for r in rates], places)
    run = simulate_event_graph(g, StandInSampler(g, seed=12), n_firings=20_000)
    cycle = (run.time[-1] - run.time[999]) / (20_000 - 1000)
    np.testing.assert_allclose(cycle, 1.0 / gordon_newell_throughput(rates, customers), rtol=0.05)


def test_firings_overlap_without_a_self_loop():
    """An infinite server fed at rate 1 runs firings in parallel: x_B(k) = k + 5."""
    g = graph([1.0, 5.0], [(0, 0, 1, 0.0), (0, 1, 0, 0.0)])
    run = simulate_event_graph(g, n_firings=10)
    k = np.arange(1, 11)
    np.testing.assert_allclose(run.time[:, 1], k + 5.0, rtol=RTOL)
    assert run.start[1, 1] < run.time[0, 1]  # firing 2 starts before firing 1 ends


def test_self_loop_with_two_tokens_allows_two_at_once():
    """Self-loop with 2 tokens: firing k waits for firing k - 2 (two servers, saturated)."""
    g = graph([4.0], [(0, 0, 2, 0.0)])
    run = simulate_event_graph(g, n_firings=6)
    np.testing.assert_allclose(run.time[:, 0], [4, 4, 8, 8, 12, 12], rtol=RTOL)


# ---------------------------------------------------------------------------------------------
# the run object


def test_busy_time_of_an_always_busy_server_is_the_horizon():
    """A saturated single server is busy all the time: utilization 1 up to ``until``."""
    g = graph([1.0], [(0, 0, 1, 0.0)])
    run = simulate_event_graph(g, StandInSampler(g, seed=7), until=250.0)
    assert run.horizon == 250.0
    np.testing.assert_allclose(run.busy_time, [250.0], rtol=1e-12)
    np.testing.assert_allclose(run.utilization(), [1.0], rtol=1e-12)


def test_busy_time_is_the_duration_of_the_firings():
    """Busy time = sum of the durations completed, plus the part of those in progress."""
    g = graph([2.0, 1.5], [(0, 0, 1, 0.0), (0, 1, 0, 0.0), (1, 1, 1, 0.0)])
    run = simulate_event_graph(g, until=101.0)
    # station 0 fires at 2, 4, ..., 100 (50 firings) and is in the middle of its 51st;
    # station 1 serves each part for 1.5 right after it, the 50th from 100 to 101.5
    assert run.completed.tolist() == [50, 49]
    np.testing.assert_allclose(run.busy_time, [101.0, 49 * 1.5 + 1.0], rtol=1e-12)
    np.testing.assert_allclose(run.utilization(), run.busy_time / 101.0, rtol=1e-12)


def test_until_alone_sizes_the_arrays_by_the_firings_started():
    """Without n_firings, K is the largest firing number started before ``until``."""
    run = simulate_event_graph(CLOSED_LINE_3, until=30.0)
    s, x = reference_run(CLOSED_LINE_3, 40, *fixed(CLOSED_LINE_3))
    start, time = as_arrays(CLOSED_LINE_3, 40, s, x)
    rows = int(np.max(np.nonzero((start < 30.0).any(axis=1))[0])) + 1
    assert run.time.shape == (rows, 3)
    keep = time[:rows] < 30.0
    np.testing.assert_array_equal(~np.isnan(run.time), keep)
    np.testing.assert_allclose(run.time[keep], time[:rows][keep], rtol=RTOL)
    assert run.total_firings == int(keep.sum())


def test_event_log_columns_and_order():
    """The log has transition, firing, start, time, sorted by time, one row per completion."""
    g = graph([1.0, 2.0], [(0, 1, 0, 0.0), (1, 0, 1, 0.0), (0, 0, 1, 0.0)], names=["cut", "pack"])
    run = simulate_event_graph(g, StandInSampler(g, seed=8), n_firings=30, until=40.0)
    log = run.event_log()
    assert list(log.columns) == ["transition", "firing", "start", "time"]
    assert len(log) == run.total_firings
    assert log["time"].is_monotonic_increasing
    assert set(log["transition"]) == {"cut", "pack"}
    for row in log.itertuples():
        t = g.names.index(row.transition)
        assert run.time[row.firing - 1, t] == row.time
        assert run.start[row.firing - 1, t] == row.start
    assert log["firing"].min() == 1


def test_event_log_breaks_ties_by_transition_then_firing_and_names_by_index():
    """Simultaneous completions come in transition order; unnamed transitions are "0", "1"."""
    g = graph([1.0, 1.0], [(0, 0, 1, 0.0), (1, 1, 1, 0.0)])
    log = simulate_event_graph(g, n_firings=2).event_log()
    assert log["transition"].tolist() == ["0", "1", "0", "1"]
    assert log["firing"].tolist() == [1, 1, 2, 2]
    assert log["time"].tolist() == [1.0, 1.0, 2.0, 2.0]


def test_result_is_a_simulation_run():
    run = simulate_event_graph(SINGLE_SERVER, n_firings=4)
    assert isinstance(run, SimulationRun)
    assert run.graph is SINGLE_SERVER
    assert run.completed.tolist() == [4]
    assert run.horizon == 6.0


# ---------------------------------------------------------------------------------------------
# how the engine uses SimPy and the sampler


def test_firings_start_lazily():
    """Only firings whose tokens are all initial are scheduled before the run starts."""
    g = graph([1.0, 1.0], [(0, 1, 3, 0.0), (1, 1, 5, 0.0), (1, 0, 1, 0.0)])
    env = simpy.Environment()
    EventGraphModel(env, g, n_firings=10_000)
    # transition 0 can start 1 firing at 0 (one initial token), transition 1 can start 3
    assert len(env._queue) == 4


def test_sampler_is_asked_in_blocks():
    """Draws are fetched BLOCK firings at a time, each block of each element once."""
    sampler = StandInSampler(SINGLE_SERVER, seed=9)
    simulate_event_graph(SINGLE_SERVER, sampler, n_firings=2 * BLOCK + 1)
    durations = [c for c in sampler.calls if c[0] == "duration"]
    assert durations == [("duration", 0, 1 + b * BLOCK, BLOCK) for b in range(3)]


def test_user_processes_run_beside_the_model():
    """The model lives in an ordinary environment: a user process can watch it."""
    env = simpy.Environment()
    model = EventGraphModel(env, SINGLE_SERVER, n_firings=10)
    seen = []

    def watcher():
        while True:
            yield env.timeout(3.2)
            seen.append(sum(not math.isnan(v) for v in model.transitions[0].time))

    env.process(watcher())
    env.run(until=10.0)
    assert seen == [2, 4, 6]  # completions at 1.5, 3, 4.5, ... counted at 3.2, 6.4, 9.6
    assert model.result().horizon == 10.0


# ---------------------------------------------------------------------------------------------
# errors


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({}, "give n_firings, until or both: the run must stop"),
        ({"n_firings": 0}, "n_firings must be an integer >= 1, got 0"),
        ({"n_firings": 2.5}, "n_firings must be an integer >= 1, got 2.5"),
        ({"n_firings": True}, "n_firings must be an integer >= 1, got True"),
        ({"n_firings": "5"}, "n_firings must be an integer >= 1, got '5'"),
        ({"until": -1.0}, "until must be a finite number > 0, got -1.0"),
        ({"until": float("nan")}, "until must be a finite number > 0, got nan"),
        ({"until": "10"}, "until must be a finite number > 0, got '10'"),
        ({"until": math.inf}, "until must be a finite number > 0, got inf"),
    ],
)
def test_bad_stop_arguments(kwargs, message):
    with pytest.raises(ValueError) as info:
        simulate_event_graph(SINGLE_SERVER, **kwargs)
    assert str(info.value) == message


def test_model_needs_a_fresh_clock():
    env = simpy.Environment(initial_time=5.0)
    with pytest.raises(ValueError) as info:
        EventGraphModel(env, SINGLE_SERVER, n_firings=3)
    assert str(info.value) == "the environment's clock must be at 0, it is at 5.0"


def test_horizon_is_until_even_when_the_firings_end_before():
    """Both stops: the firings end at 6, the run lasts to ``until`` = 10 (utilization 0.6)."""
    run = simulate_event_graph(SINGLE_SERVER, n_firings=4, until=10.0)
    assert run.horizon == 10.0
    assert run.completed.tolist() == [4]
    np.testing.assert_allclose(run.utilization(), [0.6], rtol=1e-12)


def test_not_live_graphs_are_refused():
    """A token-free circuit is a deadlock; a transition without input fires without bound."""
    dead = graph([1.0, 1.0], [(0, 1, 0, 0.0), (1, 0, 0, 0.0)])
    with pytest.raises(NotLive) as info:
        simulate_event_graph(dead, n_firings=5)
    assert "holds no token" in str(info.value)
    unfed = graph([1.0, 1.0], [(0, 1, 0, 0.0)])
    with pytest.raises(Unfed) as info2:
        simulate_event_graph(unfed, n_firings=5)
    assert str(info2.value) == (
        "transitions [0] have no input place: their firing rate is unbounded"
    )


class _BadSampler:
    def __init__(self, values):
        self.values = values

    def duration(self, t, first, count):
        return self.values

    def hold(self, p, first, count):
        return np.zeros(count)


def test_sampler_returning_the_wrong_shape_is_reported():
    with pytest.raises(ValueError) as info:
        simulate_event_graph(SINGLE_SERVER, _BadSampler(np.ones(3)), n_firings=5)
    assert str(info.value) == (
        f"sampler duration(0, 1, {BLOCK}) returned shape (3,): it must return {BLOCK} values"
    )


def test_sampler_returning_negative_values_is_reported():
    values = np.ones(BLOCK)
    values[7] = -1.0
    with pytest.raises(ValueError) as info:
        simulate_event_graph(SINGLE_SERVER, _BadSampler(values), n_firings=5)
    assert str(info.value) == (
        "sampler duration(0, ...) returned a negative or non-finite value: "
        "durations and holds must be finite and >= 0"
    )
