"""Reference tests of what follows from the cycle time: certificate, slack, critical places,
cyclicity and the periodic schedule (:mod:`cyclecheck.algebra.critical`).

The references are brute force over simple circuits (networkx), perturbation of the graph with
Howard recomputed, and a plain-Python run of the firing-time recursion written in this file.
"""

from __future__ import annotations

import dataclasses
import math
from functools import reduce

import networkx as nx
import numpy as np
import pytest
from cyclecheck.algebra.critical import (
    certify,
    critical_places,
    cyclicity,
    periodic_schedule,
    slack,
)
from cyclecheck.algebra.eventgraph import EventGraph, strongly_connected_components
from cyclecheck.algebra.spectral import howard
from hypothesis import assume, given
from hypothesis import strategies as st

from tests.strategies import live_event_graphs
from tests.test_spectral_reference import (
    REFERENCE,
    brute_force_cycle_times,
    circuit_ratio,
    circuit_tokens,
    circuit_weight,
    graphs_with_relabelling,
    matrix_graph,
    permuted,
    scale_of,
    simple_circuits,
)

#: Two cycle ratios closer than this (relative) count as a tie in the brute-force references.
TIE = 1e-9


def is_tie(a: float, b: float) -> bool:
    """Equal up to rounding, relative to the numbers themselves (a ratio 1e-9 is not 0)."""
    return abs(a - b) <= TIE * (abs(a) + abs(b))


# --------------------------------------------------------------------------------------------
# Brute-force twins
# --------------------------------------------------------------------------------------------


def brute_force_critical(graph: EventGraph) -> tuple[np.ndarray, list]:
    """Critical places and critical circuits: simple circuits whose ratio is the cycle time.

    Baccelli et al. (1992), Synchronization and Linearity, §3.7; Heidergott, Olsder & van der Woude
    (2006), Max Plus at Work, ch. 3 (the critical graph is the union of the circuits of maximal
    ratio). In a graph that is not strongly connected, "maximal" is relative to the cycle time of
    the circuit's own transitions (raising such a circuit raises them).
    """
    ct = brute_force_cycle_times(graph)
    critical = [
        (nodes, places)
        for nodes, places in simple_circuits(graph)
        if is_tie(circuit_ratio(graph, places), ct[nodes[0]])
    ]
    mask = np.zeros(graph.n_places, dtype=bool)
    for _, places in critical:
        mask[list(places)] = True
    return mask, critical


def brute_force_cyclicity(graph: EventGraph) -> int:
    """lcm over the strong components of the critical graph of the gcd of their circuits' tokens.

    Baccelli et al. (1992), §3.7 (cyclicity of the critical graph); Heidergott et al. (2006), ch. 3.
    A circuit counts ``tokens`` steps of the one-step (state-augmented) system, hence tokens
    rather than arcs.
    """
    mask, critical = brute_force_critical(graph)
    g = nx.MultiDiGraph()
    for p in np.flatnonzero(mask):
        g.add_edge(int(graph.source[p]), int(graph.target[p]), key=int(p))
    component = {}
    for i, comp in enumerate(nx.strongly_connected_components(g)):
        for node in comp:
            component[node] = i
    gcds: dict[int, int] = {}
    for nodes, places in critical:
        c = component[nodes[0]]
        gcds[c] = math.gcd(gcds.get(c, 0), circuit_tokens(graph, places))
    return reduce(math.lcm, gcds.values(), 1)


def brute_force_slack(graph: EventGraph) -> tuple[np.ndarray, np.ndarray]:
    """Slack of each place and transition: the least ``λ m(c) − w(c)`` over circuits through it.

    Derived from the definition of the cycle time as maximum cycle ratio (Baccelli et al. 1992,
    ch. 2): adding ``s`` to a hold raises the weight of exactly the circuits through that place,
    and circuit ``c`` keeps ratio ``<= λ`` as long as ``s <= λ m(c) − w(c)``. Raising a duration
    raises every circuit through the transition once. ``inf`` when no circuit goes through.
    """
    ct = brute_force_cycle_times(graph)
    sp = np.full(graph.n_places, np.inf)
    st_ = np.full(graph.n_transitions, np.inf)
    for nodes, places in simple_circuits(graph):
        room = ct[nodes[0]] * circuit_tokens(graph, places) - circuit_weight(graph, places)
        for p in places:
            sp[p] = min(sp[p], room)
        for t in nodes:
            st_[t] = min(st_[t], room)
    return sp, st_


def firing_times(graph: EventGraph, count: int) -> np.ndarray:
    r"""Earliest firing times by the recursion, plain Python, rows ``k = 1 .. count``.

    ``x_t(k) = d_t + max_{p=(u→t)} term_p(k)``, ``term_p(k) = 0`` if ``k <= m_p`` else
    ``x_u(k − m_p) + h_p`` (the project's semantics; Baccelli et al. 1992, ch. 2). Places without
    tokens are evaluated in a topological order of the token-free subgraph (networkx).
    """
    n = graph.n_transitions
    inputs: list[list[tuple[int, int, float]]] = [[] for _ in range(n)]
    for p in range(graph.n_places):
        inputs[int(graph.target[p])].append(
            (int(graph.source[p]), int(graph.tokens[p]), float(graph.hold[p]))
        )
    dag = nx.DiGraph()
    dag.add_nodes_from(range(n))
    dag.add_edges_from(
        (int(graph.source[p]), int(graph.target[p]))
        for p in range(graph.n_places)
        if graph.tokens[p] == 0
    )
    order = list(nx.topological_sort(dag))
    d = [float(v) for v in graph.duration]
    rows: list[list[float]] = [[]]  # rows[k] = x(k); rows[0] unused
    for k in range(1, count + 1):
        row = [0.0] * n
        for t in order:
            best = -math.inf
            for u, m, h in inputs[t]:
                if k <= m:
                    term = 0.0
                elif m == 0:
                    term = row[u] + h
                else:
                    term = rows[k - m][u] + h
                best = max(best, term)
            row[t] = d[t] + best
        rows.append(row)
    return np.array(rows[1:])


def periodic_from(x: np.ndarray, first: int, max_period: int) -> tuple[int, np.ndarray] | None:
    """Smallest ``c <= max_period`` with ``x(k + c) − x(k)`` constant for all rows ``k >= first``.

    Returns ``(c, x(k + c) − x(k))`` or None. Rows are 0-based here.
    """
    tol = 1e-9 * max(1.0, float(np.abs(x).max()))
    for c in range(1, max_period + 1):
        diff = x[first + c :] - x[first : x.shape[0] - c]
        if diff.shape[0] and np.all(np.abs(diff - diff[-1]) <= tol):
            return c, diff[-1]
    return None


def measured_period(graph: EventGraph, max_period: int = 256) -> tuple[int, np.ndarray]:
    """Period and growth per period of the recursion's regime, found by running it.

    The run is extended (x2) until rows ``K/2 .. K`` are periodic with some ``c``; that regime
    must then persist up to ``8 K`` (guards against a long stretch driven by a sub-critical
    circuit, which also looks periodic before the critical one takes over).
    """
    count = 4 * max_period
    while count <= 64 * 1024:
        x = firing_times(graph, 8 * count)
        found = periodic_from(x[:count], count // 2, max_period)
        if found is not None:
            c, growth = found
            again = periodic_from(x, count // 2, c)
            if again is not None and again[0] == c:
                return c, growth
        count *= 2
    raise AssertionError("the recursion did not become periodic within the run")


@REFERENCE
@given(live_event_graphs(max_transitions=6, max_places=14))
def test_twin_recursion_grows_at_the_brute_force_cycle_time(graph):
    """The test's recursion grows by ``k λ_t`` (sanity check of the twin itself).

    Source: Baccelli et al. (1992), ch. 3: x_t(k)/k → λ_t, the largest ratio upstream of t.
    Compared on the last steps of a long run, against the brute-force ratios.
    """
    x = firing_times(graph, 3000)
    rate = (x[-1] - x[-1001]) / 1000
    expected = brute_force_cycle_times(graph)
    # the regime may still be transient: allow a bounded offset spread over 1000 steps
    np.testing.assert_allclose(rate, expected, atol=0.05 * scale_of(graph))


# --------------------------------------------------------------------------------------------
# 4. Certificate
# --------------------------------------------------------------------------------------------


@REFERENCE
@given(live_event_graphs())
def test_certificate_holds_on_every_graph(graph):
    """``certify(graph, howard(graph)).holds`` on every live graph, also at magnitudes 1e−6, 1e6.

    Source: the optimality conditions of the multichain max-plus eigenproblem, Cochet-Terrasson
    et al. (1998), Numerical computation of spectral elements in max-plus algebra, IFAC SSC.
    """
    assert certify(graph, howard(graph)).holds
    for factor in (1e-6, 1e6):
        big = graph.with_values(graph.duration * factor, graph.hold * factor)
        assert certify(big, howard(big)).holds


@REFERENCE
@given(live_event_graphs(), st.data())
def test_certificate_rejects_wrong_cycle_times(graph, data):
    """A result whose cycle times are off (all, or one transition, up or down) is rejected.

    Source: Cochet-Terrasson et al. (1998): the eigenmode equations hold only for the true
    cycle times; the circuits attain them. Perturbations are 0.1 % of the graph's scale; with
    the circuit list emptied the equations alone must still reject a uniform shift.
    """
    result = howard(graph)
    eta = result.cycle_time
    delta = 1e-3 * (np.abs(eta) + scale_of(graph))
    t = data.draw(st.integers(0, graph.n_transitions - 1), label="transition")
    sign = data.draw(st.sampled_from([-1.0, 1.0]), label="sign")
    one = eta.copy()
    one[t] += sign * delta[t]
    wrong = [
        dataclasses.replace(result, cycle_time=eta + sign * delta),
        dataclasses.replace(result, cycle_time=one),
        dataclasses.replace(result, cycle_time=eta + sign * delta, circuits=[]),
    ]
    for bad in wrong:
        assert not certify(graph, bad).holds, bad.cycle_time


@REFERENCE
@given(live_event_graphs(), st.data())
def test_certificate_rejects_a_wrong_bias(graph, data):
    """Lowering the bias of a transition fed by another of equal cycle time is rejected.

    Source: Cochet-Terrasson et al. (1998): v_t = max over same-class inputs of
    (w − λ m + v_u). Lowering v_t far below makes that input's term exceed it. (Raising a bias,
    or moving that of a transition fed only by itself, can leave a valid eigenvector.)
    """
    result = howard(graph)
    eta = result.cycle_time
    fed = [
        int(graph.target[p])
        for p in range(graph.n_places)
        if graph.source[p] != graph.target[p]
        and is_tie(eta[graph.source[p]], eta[graph.target[p]])
    ]
    assume(fed)
    t = data.draw(st.sampled_from(sorted(set(fed))), label="transition")
    size = 1.0 + float(graph.weight.sum()) + float(np.abs(result.bias).max()) + float(
        np.abs(eta).max() * graph.tokens.sum()
    )
    bias = result.bias.copy()
    bias[t] -= 10.0 * size
    assert not certify(graph, dataclasses.replace(result, bias=bias)).holds


# --------------------------------------------------------------------------------------------
# 5. Slack and critical places
# --------------------------------------------------------------------------------------------


def tokens_in_component(graph: EventGraph) -> np.ndarray:
    """Per transition, the tokens on places inside its strong component (bounds any circuit)."""
    count, labels = strongly_connected_components(graph)
    inside = labels[graph.source] == labels[graph.target]
    per = np.bincount(labels[graph.source[inside]], weights=graph.tokens[inside], minlength=count)
    return per[labels]


@REFERENCE
@given(live_event_graphs())
def test_slack_by_perturbation(graph):
    """Adding its slack to a hold or duration leaves every cycle time unchanged; slack + δ
    raises it.

    Source: definition of slack from the cycle time as maximum cycle ratio (Baccelli et al. 1992,
    ch. 2), recomputed with Howard on ``graph.with_values``. Infinite slack: adding a large
    amount changes nothing. For finite slack the ratio of the tightest circuit rises by δ/m(c),
    at least δ / (tokens in the component).
    """
    r = howard(graph)
    eta = r.cycle_time
    s = slack(graph, r)
    assert s.exact
    scale = scale_of(graph)
    delta = 1e-2 * scale
    large = 1e3 * scale * (1 + graph.tokens.sum())
    tokens = tokens_in_component(graph)

    def cycle_times(duration, hold):
        return howard(graph.with_values(duration, hold)).cycle_time

    def check(amount, make, t):
        if math.isinf(amount):
            after = cycle_times(*make(large))
            np.testing.assert_allclose(after, eta, rtol=1e-9, atol=1e-9 * scale)
            return
        assert amount >= -1e-9 * scale
        after = cycle_times(*make(amount))
        np.testing.assert_allclose(after, eta, rtol=1e-9, atol=1e-8 * scale)
        after = cycle_times(*make(amount + delta))
        assert after[t] >= eta[t] + delta / tokens[t] * (1 - 1e-6)

    for p in range(graph.n_places):
        def on_place(x, p=p):
            hold = graph.hold.copy()
            hold[p] += x
            return graph.duration, hold

        check(float(s.places[p]), on_place, int(graph.target[p]))
    for t in range(graph.n_transitions):
        def on_transition(x, t=t):
            duration = graph.duration.copy()
            duration[t] += x
            return duration, graph.hold

        check(float(s.transitions[t]), on_transition, t)


@REFERENCE
@given(live_event_graphs())
def test_slack_matches_brute_force_circuits(graph):
    """Slack = least ``λ m(c) − w(c)`` over the simple circuits through the place or transition.

    Source: derived from the maximum-cycle-ratio characterisation (Baccelli et al. 1992, ch. 2),
    circuits enumerated by networkx.simple_cycles.
    """
    r = howard(graph)
    s = slack(graph, r)
    sp, st_ = brute_force_slack(graph)
    tol = 1e-9 * scale_of(graph) * (1 + graph.tokens.sum())
    np.testing.assert_array_equal(np.isinf(s.places), np.isinf(sp))
    np.testing.assert_array_equal(np.isinf(s.transitions), np.isinf(st_))
    np.testing.assert_allclose(s.places, sp, rtol=1e-9, atol=tol)
    np.testing.assert_allclose(s.transitions, st_, rtol=1e-9, atol=tol)


@REFERENCE
@given(live_event_graphs())
def test_critical_places_match_brute_force(graph):
    """Critical places = places on a simple circuit of maximal ratio; they have slack 0.

    Source: Baccelli et al. (1992), §3.7; Heidergott et al. (2006), ch. 3 (critical graph).
    Brute force by networkx.simple_cycles.
    """
    r = howard(graph)
    mask = critical_places(graph, r)
    expected, _ = brute_force_critical(graph)
    np.testing.assert_array_equal(mask, expected)
    s = slack(graph, r)
    assert np.all(np.abs(s.places[mask]) <= 1e-9 * scale_of(graph))
    for c in r.circuits:
        assert mask[list(c.places)].all(), "reported circuits are critical"


# --------------------------------------------------------------------------------------------
# 6. Cyclicity
# --------------------------------------------------------------------------------------------


@REFERENCE
@given(live_event_graphs())
def test_cyclicity_matches_brute_force(graph):
    """cyclicity = lcm over critical components of gcd of their circuits' tokens (brute force).

    Source: Baccelli et al. (1992), §3.7; Heidergott et al. (2006), ch. 3 (cyclicity of the
    critical graph). Brute force over simple circuits with networkx.
    """
    assert cyclicity(graph, howard(graph)) == brute_force_cyclicity(graph)


@REFERENCE
@given(
    live_event_graphs(
        max_transitions=6, max_places=12, strongly_connected=True, value_kind="int"
    )
)
def test_measured_period_divides_cyclicity(graph):
    """The period of the recursion's regime divides the cyclicity; it grows by c·λ per period.

    Source: Baccelli et al. (1992), §3.7 and Heidergott et al. (2006), ch. 3 (cyclicity
    theorem): for an irreducible system A^(k+σ) = λ^σ A^k for large k, σ the cyclicity of the
    critical graph, so every orbit is eventually periodic with a period dividing σ (the smallest
    period of one orbit may be smaller: e.g. an eigenvector as start has period 1). Integer
    values make the recursion exact.
    """
    r = howard(graph)
    sigma = cyclicity(graph, r)
    c, growth = measured_period(graph)
    assert sigma % c == 0, (c, sigma)
    np.testing.assert_allclose(growth / c, r.cycle_time, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("seed", range(8))
def test_measured_period_equals_cyclicity_on_rings(seed):
    """On a ring with c tokens and generic weights the regime has period exactly c = cyclicity.

    Source: Baccelli et al. (1992), §3.7 (cyclicity of one circuit = its length in the
    one-step system, here its tokens). Why equality holds: x_t(k) is the weight of the backward
    walk from firing k of t around the ring into the initial tokens, so x_t(k + c') − x_t(k) for
    0 < c' < c is a sum of ring arcs that is not the fraction c'/c of the ring's weight unless
    the weights satisfy a linear relation, which random real weights do not.
    """
    rng = np.random.default_rng(np.random.SeedSequence([seed, 6]))
    n = int(rng.integers(1, 7))
    tokens = rng.integers(0, 3, n)
    tokens[int(rng.integers(n))] += 1
    order = rng.permutation(n)
    g = EventGraph(rng.uniform(0.5, 5, n), order, np.roll(order, -1), tokens, rng.uniform(0, 5, n))
    r = howard(g)
    c, growth = measured_period(g)
    assert c == cyclicity(g, r) == int(tokens.sum())
    np.testing.assert_allclose(growth / c, r.cycle_time, rtol=1e-9)


# --------------------------------------------------------------------------------------------
# 7. Periodic schedule
# --------------------------------------------------------------------------------------------


@REFERENCE
@given(live_event_graphs(strongly_connected=True))
def test_periodic_schedule_solves_the_recursion(graph):
    """x_t(k) = completion_t + (k − 1) λ solves the recursion for k > max m and is admissible.

    Source: Baccelli et al. (1992), ch. 3 (eigenvector ⇒ periodic regime); Heidergott et al.
    (2006), ch. 3. Checked in plain Python: v_t = max_p (w_p − λ m_p + v_u); the recursion with
    this schedule on the right-hand side reproduces it for k beyond the initial tokens; before
    that it never asks a firing to complete earlier than the schedule (starts >= 0). Hence,
    by monotonicity of the recursion, the earliest firing times never exceed the schedule.
    """
    r = howard(graph)
    lam = float(r.cycle_time[0])
    completion, start = periodic_schedule(graph, r)
    scale = scale_of(graph) * (1 + graph.tokens.sum()) + float(np.abs(completion).max())
    tol = 1e-9 * scale
    np.testing.assert_allclose(start, completion - graph.duration, atol=tol)
    assert start.min() == pytest.approx(0.0, abs=tol)
    for t in range(graph.n_transitions):
        best = max(
            float(graph.weight[p]) - lam * int(graph.tokens[p]) + float(completion[graph.source[p]])
            for p in range(graph.n_places)
            if graph.target[p] == t
        )
        assert best == pytest.approx(float(completion[t]), abs=tol)

    top = int(graph.tokens.max())

    def sched(t, k):
        return float(completion[t]) + (k - 1) * lam

    for k in range(1, top + 6):
        for t in range(graph.n_transitions):
            terms = [
                0.0
                if k <= graph.tokens[p]
                else sched(int(graph.source[p]), k - int(graph.tokens[p])) + float(graph.hold[p])
                for p in range(graph.n_places)
                if graph.target[p] == t
            ]
            rhs = float(graph.duration[t]) + max(terms)
            if k > top:
                assert rhs == pytest.approx(sched(t, k), abs=tol * k)
            else:
                assert rhs <= sched(t, k) + tol * k
    earliest = firing_times(graph, 50)
    periodic = completion[None, :] + np.arange(50)[:, None] * lam
    assert np.all(earliest <= periodic + tol * 50)


# --------------------------------------------------------------------------------------------
# 8. Worked examples
# --------------------------------------------------------------------------------------------


def test_heidergott_3_7_2_4_cyclicity_and_orbit():
    """A = [[3, 7], [2, 4]]: cyclicity 2, orbit from 0 periodic with period 2 after one step.

    Source: Heidergott, Olsder & van der Woude (2006), Max Plus at Work, ch. 3, from memory. In
    the project's numbering x(1) = 0 is the book's x(0). The critical circuit is 1 → 0 → 1
    (weights 7 and 2); slacks of the self-loops 2·4.5/2 − 3 = 1.5 and 0.5 are derived by hand.
    """
    g = matrix_graph([[3, 7], [2, 4]])
    r = howard(g)
    assert cyclicity(g, r) == 2
    x = firing_times(g, 12)
    np.testing.assert_array_equal(x[:4], [[0, 0], [7, 4], [11, 9], [16, 13]])
    assert np.all(x[3:] - x[1:-2] == 9.0)  # from the book's x(1) on: x(k+2) = x(k) + 2·4.5
    assert not np.all(x[2] - x[0] == 9.0)  # but not from x(0): one step of transient
    assert measured_period(g) == (2, pytest.approx([9.0, 9.0]))
    crit = critical_places(g, r)
    assert sorted(g.hold[crit].tolist()) == [2.0, 7.0]
    s = slack(g, r)
    assert sorted(s.places[~crit].tolist()) == pytest.approx([0.5, 1.5])


def test_heidergott_2_5_3_3_cyclicity():
    """A = [[2, 5], [3, 3]]: λ = 4 on the circuit 0 → 1 → 0 (5 + 3 over 2 tokens), cyclicity 2.

    Source: Heidergott, Olsder & van der Woude (2006), Max Plus at Work, ch. 3, from memory for λ
    and the eigenvector; derived by hand from λ = 4: cyclicity 2, slacks of the self-loops
    4 − 2 = 2 and 4 − 3 = 1, orbit x(1) = 0, (5, 3), (8, 8), (13, 11), (16, 16), ... of period 2.
    """
    g = matrix_graph([[2, 5], [3, 3]])
    r = howard(g)
    assert cyclicity(g, r) == 2
    crit = critical_places(g, r)
    assert sorted(g.hold[crit].tolist()) == [3.0, 5.0]
    assert sorted(slack(g, r).places[~crit].tolist()) == pytest.approx([1.0, 2.0])
    np.testing.assert_array_equal(firing_times(g, 5), [[0, 0], [5, 3], [8, 8], [13, 11], [16, 16]])
    assert measured_period(g) == (2, pytest.approx([8.0, 8.0]))


# --------------------------------------------------------------------------------------------
# 9. Edge cases
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize("tokens", [1, 3])
def test_single_self_loop(tokens):
    """One transition with a self-loop of m tokens: critical, slack 0, cyclicity m = period.

    Source: Baccelli et al. (1992), §3.7 (one circuit, m steps of the augmented system).
    """
    g = EventGraph([2.0], [0], [0], [tokens], [1.0])
    r = howard(g)
    assert certify(g, r).holds
    assert critical_places(g, r).tolist() == [True]
    assert slack(g, r).places.tolist() == [0.0]
    assert cyclicity(g, r) == tokens
    assert measured_period(g)[0] == tokens


@REFERENCE
@given(live_event_graphs())
def test_zero_values_everything_critical(graph):
    """All durations and holds 0: λ = 0, every circuit critical, slack 0 inside components.

    Source: Baccelli et al. (1992), §3.7 (every circuit of weight 0 attains λ = 0); cyclicity
    against the brute-force gcd/lcm.
    """
    zero = graph.with_values(np.zeros(graph.n_transitions), np.zeros(graph.n_places))
    r = howard(zero)
    assert certify(zero, r).holds
    _, labels = strongly_connected_components(zero)
    inside = labels[zero.source] == labels[zero.target]
    np.testing.assert_array_equal(critical_places(zero, r), inside)
    s = slack(zero, r)
    assert np.all(s.places[inside] == 0.0) and np.all(np.isinf(s.places[~inside]))
    assert cyclicity(zero, r) == brute_force_cyclicity(zero)


@REFERENCE
@given(graphs_with_relabelling())
def test_critical_results_permute_with_labels(case):
    """Relabelling transitions and reordering places permutes critical places and slack;
    cyclicity and the certificate are unchanged.

    Common practice from the NetworkX test suite (shuffled labels), no published source.
    """
    graph, sigma, pi = case
    other = permuted(graph, sigma, pi)
    r, q = howard(graph), howard(other)
    assert certify(other, q).holds
    np.testing.assert_array_equal(critical_places(other, q), critical_places(graph, r)[pi])
    s, so = slack(graph, r), slack(other, q)
    tol = 1e-9 * scale_of(graph) * (1 + graph.tokens.sum())
    np.testing.assert_allclose(so.places, s.places[pi], rtol=1e-9, atol=tol)
    np.testing.assert_allclose(so.transitions[sigma], s.transitions, rtol=1e-9, atol=tol)
    assert cyclicity(other, q) == cyclicity(graph, r)


def test_ring_of_100000_transitions_critical():
    """A ring of 10^5 transitions: every place critical, cyclicity = Σ m, certificate holds;
    slack falls back to the reduced-weight bound (exact False), which is 0 on a critical ring.

    Source: Baccelli et al. (1992), §3.7 (a single circuit is the critical graph).
    """
    rng = np.random.default_rng(np.random.SeedSequence(100_001))
    n = 100_000
    tokens = rng.integers(0, 3, n)
    tokens[0] = 1
    order = rng.permutation(n)
    g = EventGraph(rng.uniform(0, 10, n), order, np.roll(order, -1), tokens, rng.uniform(0, 10, n))
    r = howard(g)
    assert certify(g, r).holds
    assert critical_places(g, r).all()
    assert cyclicity(g, r) == int(tokens.sum())
    s = slack(g, r)
    assert not s.exact
    assert np.all(s.places == 0.0)


@pytest.mark.parametrize("tokens", [1, 2])
def test_ring_with_a_tiny_hold_is_critical(tokens):
    """The only circuit of a graph is critical whatever its weights: here a hold of 1e−9 after a
    duration of 1. Expected: both places critical, slack 0, cyclicity = tokens, certificate holds.

    Source: Baccelli et al. (1992), §3.7 (the critical graph of a single circuit is the circuit;
    its cyclicity is its length in the one-step system, i.e. its tokens).
    """
    g = EventGraph([0.0, 1.0], [1, 0], [0, 1], [0, tokens], [1e-9, 0.0])
    r = howard(g)
    np.testing.assert_allclose(r.cycle_time, (1 + 1e-9) / tokens, rtol=1e-12)
    assert certify(g, r).holds
    assert critical_places(g, r).tolist() == [True, True]
    assert slack(g, r).places.tolist() == [0.0, 0.0]
    assert cyclicity(g, r) == tokens


@pytest.mark.parametrize("factor", [1.0, 1e-6, 1e6])
def test_certificate_holds_on_scaled_graph(factor):
    """The certificate of a correct result holds in any time unit (scale invariance).

    Homogeneity of the cycle ratio (Baccelli et al. 1992, ch. 2): scaling every duration and hold
    scales λ and the eigenvector. Circuit 0 -> 2 -> 3 -> 0 has weight 6 and 3 tokens: λ = 2.
    """
    g = EventGraph(
        np.array([0, 0, 0, 5.0, 0, 0]) * factor, [3, 2, 0, 2, 2, 2], [0, 1, 2, 3, 4, 5],
        [0, 0, 1, 2, 0, 0], np.array([0, 0, 0, 1.0, 0, 0]) * factor,
    )
    r = howard(g)
    np.testing.assert_allclose(r.cycle_time, 2.0 * factor, rtol=1e-12)
    assert certify(g, r).holds


@pytest.mark.parametrize("scale", [1e12, math.inf])
def test_certificate_does_not_trust_the_results_own_scale(scale):
    """A wrong cycle time is rejected whatever rounding scale the result claims for its biases.

    The certificate checks a result "independently of how it was found": here λ is claimed 50 %
    too large (6.75 for 4.5, the ratio of circuit 0 -> 1 -> 2 -> 0: (2 + 0.5 + 1 + 1) / 1; the
    self-loop at 1 has ratio 2), the circuit list is dropped and ``bias_scale`` inflated. Source:
    Cochet-Terrasson et al. (1998): the eigenmode equations hold only for the true λ.
    """
    g = EventGraph([1.0, 2.0, 0.5], [0, 1, 2, 1], [1, 2, 0, 1], [0, 0, 1, 1], [0.0, 0.0, 1.0, 0.0])
    r = howard(g)
    np.testing.assert_allclose(r.cycle_time, 4.5)
    bad = dataclasses.replace(r, cycle_time=r.cycle_time * 1.5, circuits=[])
    assert not certify(g, bad).holds
    fields = {f.name for f in dataclasses.fields(r)}
    if "bias_scale" in fields:
        bad = dataclasses.replace(bad, bias_scale=np.full(3, scale))
        assert not certify(g, bad).holds
