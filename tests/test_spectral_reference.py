"""Reference tests of the cycle time computed by Howard policy iteration.

Every check compares :func:`cyclecheck.algebra.spectral.howard` with an independent answer:

* brute force over all simple circuits (networkx.simple_cycles), every choice of parallel places,
  the cycle time of a transition being the largest ratio of the circuits upstream of it;
* Karp's (1978) maximum cycle mean of the state-augmented max-plus matrix;
* worked examples from Heidergott, Olsder & van der Woude (2006), from memory;
* closed forms of rings and self-loops.

The brute-force helpers here are imported by the other reference test files.
"""

from __future__ import annotations

import itertools
import math
from collections import defaultdict

import networkx as nx
import numpy as np
import pytest
from cyclecheck.algebra.eventgraph import EventGraph
from cyclecheck.algebra.spectral import HowardResult, howard
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.strategies import live_event_graphs

#: Deterministic hypothesis runs: the same examples on every machine, no deadline (shared CPUs).
REFERENCE = settings(
    max_examples=150,
    derandomize=True,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow],
)

NEG = -math.inf


# --------------------------------------------------------------------------------------------
# Slow independent twins (also used by test_critical_reference.py and test_lp_reference.py)
# --------------------------------------------------------------------------------------------


def transition_multigraph(graph: EventGraph) -> nx.MultiDiGraph:
    """The transitions as nodes, one edge per place (key = place index)."""
    g = nx.MultiDiGraph()
    g.add_nodes_from(range(graph.n_transitions))
    for p in range(graph.n_places):
        g.add_edge(int(graph.source[p]), int(graph.target[p]), key=p)
    return g


def simple_circuits(graph: EventGraph) -> list[tuple[tuple[int, ...], tuple[int, ...]]]:
    """Every simple circuit as ``(transitions, places)``, one per choice of parallel places.

    ``places[i]`` goes from ``transitions[i]`` to ``transitions[(i + 1) % len]``. Node cycles
    come from ``networkx.simple_cycles`` (NetworkX, Johnson's algorithm); parallel places are
    enumerated with ``itertools.product``.
    """
    arcs: dict[tuple[int, int], list[int]] = defaultdict(list)
    for p in range(graph.n_places):
        arcs[(int(graph.source[p]), int(graph.target[p]))].append(p)
    seen: set[tuple[int, ...]] = set()
    out = []
    for cycle in nx.simple_cycles(transition_multigraph(graph)):
        nodes = tuple(int(x) for x in cycle)
        k = nodes.index(min(nodes))
        canon = nodes[k:] + nodes[:k]
        if canon in seen:
            continue
        seen.add(canon)
        choices = [arcs[(canon[i], canon[(i + 1) % len(canon)])] for i in range(len(canon))]
        for places in itertools.product(*choices):
            out.append((canon, tuple(places)))
    return out


def circuit_weight(graph: EventGraph, places) -> float:
    """Sum of holds and target durations along a circuit, exact summation."""
    return math.fsum(float(graph.hold[p]) + float(graph.duration[graph.target[p]]) for p in places)


def circuit_tokens(graph: EventGraph, places) -> int:
    return int(sum(int(graph.tokens[p]) for p in places))


def circuit_ratio(graph: EventGraph, places) -> float:
    return circuit_weight(graph, places) / circuit_tokens(graph, places)


def brute_force_cycle_times(graph: EventGraph) -> np.ndarray:
    """Cycle time of each transition: the largest ratio over the circuits upstream of it.

    Baccelli, Cohen, Olsder & Quadrat (1992), *Synchronization and Linearity*, ch. 2–3: the cycle
    time of a live event graph is the maximum cycle ratio, and in a graph that is not strongly
    connected each transition follows the largest ratio among the components upstream of it.
    """
    g = transition_multigraph(graph)
    ct = np.full(graph.n_transitions, NEG)
    for nodes, places in simple_circuits(graph):
        ratio = circuit_ratio(graph, places)
        reach = nx.descendants(g, nodes[0]) | {nodes[0]}
        for t in reach:
            ct[t] = max(ct[t], ratio)
    assert np.all(np.isfinite(ct)), "every transition of a live graph has a circuit upstream"
    return ct


def scale_of(graph: EventGraph) -> float:
    return max(1.0, float(graph.weight.max(initial=0.0)))


def permuted(graph: EventGraph, sigma: np.ndarray, pi: np.ndarray) -> EventGraph:
    """Relabel transition ``t`` as ``sigma[t]``; new place ``j`` is old place ``pi[j]``."""
    duration = np.empty(graph.n_transitions)
    duration[sigma] = graph.duration
    return EventGraph(
        duration=duration,
        source=sigma[graph.source[pi]],
        target=sigma[graph.target[pi]],
        tokens=graph.tokens[pi],
        hold=graph.hold[pi],
    )


def scaled(graph: EventGraph, factor: float) -> EventGraph:
    return graph.with_values(graph.duration * factor, graph.hold * factor)


@st.composite
def graphs_with_relabelling(draw, **kwargs):
    """A live graph and two permutations: of the transitions and of the place order."""
    graph = draw(live_event_graphs(**kwargs))
    sigma = np.array(draw(st.permutations(range(graph.n_transitions))), dtype=np.int64)
    pi = np.array(draw(st.permutations(range(graph.n_places))), dtype=np.int64)
    return graph, sigma, pi


# --------------------------------------------------------------------------------------------
# 1. Howard against brute force over simple circuits
# --------------------------------------------------------------------------------------------


@REFERENCE
@given(live_event_graphs())
def test_howard_matches_brute_force_circuits(graph):
    """Cycle time of every transition = largest ratio of the simple circuits upstream of it.

    Source: Baccelli et al. (1992), Synchronization and Linearity, ch. 2–3 (cycle time of a timed
    event graph as maximum cycle ratio; per component in the reducible case). Reference library:
    networkx.simple_cycles and networkx.descendants. Graphs from ``live_event_graphs``: strongly
    connected or not, parallel places, self-loops. Both implementations of Howard (numpy and
    the compiled kernel) are held to it.
    """
    expected = brute_force_cycle_times(graph)
    for kernel in ("numpy", "numba"):  # the vectorized version and the compiled one
        got = howard(graph, kernel=kernel).cycle_time
        np.testing.assert_allclose(got, expected, rtol=1e-9, atol=1e-9 * scale_of(graph))


@REFERENCE
@given(live_event_graphs(strongly_connected=False, min_transitions=2))
def test_howard_matches_brute_force_not_strongly_connected(graph):
    """Same as above, restricted to graphs that are not strongly connected (several cycle times).

    Source: Baccelli et al. (1992), ch. 3 (reducible case: each transition follows the largest
    cycle time among the components upstream of it); networkx.descendants for reachability.
    """
    expected = brute_force_cycle_times(graph)
    for kernel in ("numpy", "numba"):
        np.testing.assert_allclose(howard(graph, kernel=kernel).cycle_time, expected,
                                   rtol=1e-9, atol=1e-9 * scale_of(graph))


@REFERENCE
@given(live_event_graphs())
def test_reported_circuits_are_circuits_of_the_graph(graph):
    """Each reported circuit is a real circuit whose ratio is the cycle time of its transitions.

    Source: Baccelli et al. (1992), ch. 3 (the critical circuit attains the maximum ratio).
    The circuit is re-walked place by place here, its ratio recomputed with math.fsum.
    """
    result = howard(graph)
    assert result.circuits
    expected = brute_force_cycle_times(graph)
    for c in result.circuits:
        k = len(c.transitions)
        assert len(c.places) == k
        for i, p in enumerate(c.places):
            assert graph.source[p] == c.transitions[i]
            assert graph.target[p] == c.transitions[(i + 1) % k]
        assert len(set(c.transitions)) == k, "a policy circuit is simple"
        assert c.tokens == circuit_tokens(graph, c.places) > 0
        ratio = circuit_ratio(graph, c.places)
        assert c.ratio == pytest.approx(ratio, rel=1e-12, abs=1e-12)
        np.testing.assert_allclose(
            expected[list(c.transitions)], ratio, rtol=1e-9, atol=1e-9 * scale_of(graph)
        )


@REFERENCE
@given(graphs_with_relabelling())
def test_howard_is_invariant_under_relabelling(case):
    """Permuting transition indices and place order permutes the cycle times accordingly.

    Common practice from the NetworkX test suite (labels shuffled "to rule out accidentally-correct
    behaviour"), no published source. Brute force on the relabelled graph as the reference too.
    """
    graph, sigma, pi = case
    other = permuted(graph, sigma, pi)
    a = howard(graph).cycle_time
    b = howard(other).cycle_time
    tol = 1e-9 * scale_of(graph)
    np.testing.assert_allclose(b[sigma], a, rtol=1e-9, atol=tol)
    np.testing.assert_allclose(b, brute_force_cycle_times(other), rtol=1e-9, atol=tol)


# --------------------------------------------------------------------------------------------
# 2. Howard against Karp (1978) on the state-augmented max-plus matrix
# --------------------------------------------------------------------------------------------


def twin_augmented_matrix(graph: EventGraph) -> np.ndarray:
    r"""State-augmented one-step matrix ``A = A0* ⊗ A1`` of the event graph (ε = −∞).

    Source: Baccelli et al. (1992), ch. 2.5 (a place with ``m`` tokens is a chain of ``m`` unit
    delays; the implicit part ``x = A0 x ⊕ b`` is solved by the Kleene star ``A0*``, finite because
    the token-free subgraph of a live graph is acyclic). Node ``t < n`` is transition ``t``; a
    place with ``m >= 2`` tokens adds ``m - 1`` delay nodes. Entry ``a_ij`` is the arc ``j -> i``.
    """
    n = graph.n_transitions
    extra = int(np.maximum(graph.tokens - 1, 0).sum())
    size = n + extra
    a0 = np.full((size, size), NEG)
    a1 = np.full((size, size), NEG)
    nxt = n
    for p in range(graph.n_places):
        u, t = int(graph.source[p]), int(graph.target[p])
        m, w = int(graph.tokens[p]), float(graph.weight[p])
        if m == 0:
            a0[t, u] = max(a0[t, u], w)
            continue
        prev = u
        for _ in range(m - 1):
            a1[nxt, prev] = 0.0
            prev = nxt
            nxt += 1
        a1[t, prev] = max(a1[t, prev], w)
    star = np.full((size, size), NEG)
    np.fill_diagonal(star, 0.0)
    power = star
    for _ in range(size):  # A0 is nilpotent: A0* = I ⊕ A0 ⊕ ... ⊕ A0^(size-1)
        power = twin_otimes(a0, power)
        if np.all(power == NEG):
            break
        star = np.maximum(star, power)
    return twin_otimes(star, a1)


def twin_otimes(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Max-plus matrix product ``(a ⊗ b)_ij = max_k a_ik + b_kj``."""
    return np.max(a[:, :, None] + b[None, :, :], axis=1)


def twin_karp(a: np.ndarray) -> float:
    r"""Maximum cycle mean by Karp's formula, ``-inf`` when the graph of ``a`` is acyclic.

    Source: Karp, R. M. (1978), A characterization of the minimum cycle mean in a digraph,
    Discrete Mathematics 23(3), 309–311 (stated for the minimum; the maximum is symmetric).
    ``D_k(v)`` is the heaviest walk of exactly ``k`` arcs ending at ``v`` from any start
    (``D_0 = 0``, equivalent to a super-source), and
    ``λ = max_v min_{0<=k<n} (D_n(v) - D_k(v)) / (n - k)`` over ``v`` with ``D_n(v)`` finite.
    """
    n = a.shape[0]
    d = np.full((n + 1, n), NEG)
    d[0] = 0.0
    for k in range(1, n + 1):
        d[k] = np.max(a + d[k - 1][None, :], axis=1)
    best = NEG
    for v in range(n):
        if d[n, v] == NEG:
            continue
        worst = math.inf
        for k in range(n):
            if d[k, v] > NEG:
                worst = min(worst, (d[n, v] - d[k, v]) / (n - k))
        best = max(best, worst)
    return best


def karp_cycle_times(graph: EventGraph, augment, karp) -> np.ndarray:
    """Per transition: Karp on the augmented matrix restricted to the nodes upstream of it."""
    a = np.asarray(augment(graph), dtype=np.float64)
    size = a.shape[0]
    g = nx.DiGraph()
    g.add_nodes_from(range(size))
    rows, cols = np.nonzero(a > NEG)
    g.add_edges_from(zip(cols.tolist(), rows.tolist(), strict=True))  # a_ij: arc j -> i
    out = np.empty(graph.n_transitions)
    for t in range(graph.n_transitions):
        up = sorted(nx.ancestors(g, t) | {t})
        out[t] = karp(a[np.ix_(up, up)])
    return out


def semiring_functions():
    """``(augmented_matrix, max_cycle_mean_karp)`` from algebra/semiring.py, or None if absent."""
    try:
        from cyclecheck.algebra import semiring
    except ImportError:
        return None
    aug = getattr(semiring, "augmented_matrix", None)
    karp = getattr(semiring, "max_cycle_mean_karp", None)
    if aug is None or karp is None:
        return None
    return aug, karp


def test_twin_karp_on_a_textbook_matrix():
    """The test's own Karp gives λ = 4.5 for A = [[3, 7], [2, 4]].

    Source: Heidergott, Olsder & van der Woude (2006), Max Plus at Work, ch. 2–3, from memory.
    """
    assert twin_karp(np.array([[3.0, 7.0], [2.0, 4.0]])) == pytest.approx(4.5)
    assert twin_karp(np.array([[2.0, 5.0], [3.0, 3.0]])) == pytest.approx(4.0)
    assert twin_karp(np.array([[NEG, 1.0], [NEG, NEG]])) == NEG


@REFERENCE
@given(live_event_graphs(max_transitions=6, max_places=14))
def test_howard_matches_twin_karp_on_augmented_matrix(graph):
    """Howard = Karp on the test's own state-augmented matrix, for every transition.

    Sources: Karp (1978), Discrete Math. 23(3), 309–311; state augmentation and Kleene star from
    Baccelli et al. (1992), §2.5. Both written here, independently of algebra/.
    """
    expected = karp_cycle_times(graph, twin_augmented_matrix, twin_karp)
    np.testing.assert_allclose(
        howard(graph).cycle_time, expected, rtol=1e-9, atol=1e-9 * scale_of(graph)
    )


@REFERENCE
@given(live_event_graphs(max_transitions=6, max_places=14))
def test_howard_matches_semiring_karp(graph):
    """Howard = ``semiring.max_cycle_mean_karp`` on ``semiring.augmented_matrix``, per transition.

    Source: Karp (1978), Discrete Math. 23(3), 309–311; companion-form augmentation of
    Baccelli et al. (1992), §2.5. Also runs the test's own Karp on the project's matrix.
    Skipped while algebra/semiring.py does not provide both functions.
    """
    funcs = semiring_functions()
    if funcs is None:
        pytest.skip("algebra/semiring.py has no augmented_matrix / max_cycle_mean_karp yet")
    augment, karp = funcs
    a, n = augment(graph)
    assert n == graph.n_transitions
    got = np.asarray(karp(a))[:n]
    tol = 1e-9 * scale_of(graph)
    np.testing.assert_allclose(got, howard(graph).cycle_time, rtol=1e-9, atol=tol)
    # and the project's augmentation agrees with the test's own Karp (two twins, one answer)
    np.testing.assert_allclose(
        karp_cycle_times(graph, lambda g: augment(g)[0], twin_karp), got, rtol=1e-9, atol=tol
    )


# --------------------------------------------------------------------------------------------
# 8. Worked examples
# --------------------------------------------------------------------------------------------


def matrix_graph(a: list[list[float]]) -> EventGraph:
    """x(k) = A ⊗ x(k − 1) as an event graph: arc j -> i of weight a_ij, one token, durations 0."""
    n = len(a)
    arcs = [(j, i, float(a[i][j])) for i in range(n) for j in range(n) if a[i][j] > NEG]
    return EventGraph(
        duration=np.zeros(n),
        source=[s for s, _, _ in arcs],
        target=[t for _, t, _ in arcs],
        tokens=[1] * len(arcs),
        hold=[w for _, _, w in arcs],
    )


def eigen_direction(result: HowardResult, anchor: int) -> np.ndarray:
    return result.bias - result.bias[anchor]


def test_heidergott_3_7_2_4():
    """A = [[3, 7], [2, 4]]: λ = 4.5, eigenvector ∝ (0, −2.5).

    Source: Heidergott, Olsder & van der Woude (2006), Max Plus at Work, ch. 2–3, from memory
    (convention x(k+1) = A ⊗ x(k), a_ij the weight of arc j -> i).
    """
    r = howard(matrix_graph([[3, 7], [2, 4]]))
    np.testing.assert_allclose(r.cycle_time, [4.5, 4.5])
    np.testing.assert_allclose(eigen_direction(r, 0), [0.0, -2.5], atol=1e-12)


def test_heidergott_2_5_3_3():
    """A = [[2, 5], [3, 3]]: λ = 4, eigenvector ∝ (1, 0).

    Source: Heidergott, Olsder & van der Woude (2006), Max Plus at Work, ch. 2–3, from memory.
    """
    r = howard(matrix_graph([[2, 5], [3, 3]]))
    np.testing.assert_allclose(r.cycle_time, [4.0, 4.0])
    np.testing.assert_allclose(eigen_direction(r, 1), [1.0, 0.0], atol=1e-12)


# --------------------------------------------------------------------------------------------
# 9. Edge cases with closed forms
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize("tokens", [1, 2, 5])
def test_single_transition_self_loop(tokens):
    """One transition, one self-loop: λ = (d + h) / m.

    Source: Baccelli et al. (1992), ch. 2 (cycle ratio of a single circuit); with m tokens the
    transition may start firing k once firing k − m is done (the project's n-server semantics).
    """
    g = EventGraph([2.5], [0], [0], [tokens], [0.75])
    r = howard(g)
    assert r.cycle_time.tolist() == pytest.approx([3.25 / tokens])
    assert r.circuits[0].transitions == (0,)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_ring_with_several_tokens(seed):
    """A ring holding several tokens on one or more places: λ = total weight / total tokens.

    Source: Baccelli et al. (1992), ch. 2 (one circuit: its ratio is the cycle time).
    """
    rng = np.random.default_rng(np.random.SeedSequence([seed, 9]))
    n = int(rng.integers(2, 9))
    tokens = rng.integers(0, 4, n)
    tokens[int(rng.integers(n))] += 2
    d, h = rng.uniform(0, 10, n), rng.uniform(0, 10, n)
    g = EventGraph(d, np.arange(n), (np.arange(n) + 1) % n, tokens, h)
    expected = (math.fsum(d) + math.fsum(h)) / int(tokens.sum())
    np.testing.assert_allclose(howard(g).cycle_time, expected, rtol=1e-12)


@REFERENCE
@given(live_event_graphs())
def test_zero_durations_give_zero_cycle_time(graph):
    """All durations and holds 0: every circuit has weight 0, so λ = 0 for every transition.

    Source: Baccelli et al. (1992), ch. 2 (cycle time = maximum cycle ratio).
    """
    zero = graph.with_values(np.zeros(graph.n_transitions), np.zeros(graph.n_places))
    assert howard(zero).cycle_time.tolist() == [0.0] * graph.n_transitions


@REFERENCE
@given(live_event_graphs(value_kind="float"), st.sampled_from([1e-6, 1e6]))
def test_very_small_and_very_large_magnitudes(graph, factor):
    """Scaling every duration and hold by 1e−6 or 1e6 scales every cycle time by the same factor.

    Source: homogeneity of the maximum cycle ratio (Baccelli et al. 1992, ch. 2), brute force on
    the scaled graph as the reference.
    """
    big = scaled(graph, factor)
    expected = brute_force_cycle_times(big)
    got = howard(big).cycle_time
    np.testing.assert_allclose(got, expected, rtol=1e-9, atol=1e-9 * factor * scale_of(graph))


def test_mixed_magnitudes_separate_components():
    """A component with weights 1e6 must not blur the cycle times of another with weights 1e−6.

    Transition 0: isolated self-loop of ratio 1e6. Transition 1: self-loop of ratio 1e−6, feeding
    transition 2 (place without token, hold 5), whose own self-loop has ratio 3e−6. Expected by
    brute force and by hand: (1e6, 1e−6, 3e−6). Source: Baccelli et al. (1992), ch. 3 (each
    transition follows the largest ratio upstream of it).
    """
    hold = [1e6, 1e-6, 3e-6, 5.0]
    g = EventGraph([0.0, 0.0, 0.0], [0, 1, 2, 1], [0, 1, 2, 2], [1, 1, 1, 0], hold)
    expected = brute_force_cycle_times(g)
    np.testing.assert_allclose(expected, [1e6, 1e-6, 3e-6], rtol=1e-12)
    np.testing.assert_allclose(howard(g).cycle_time, expected, rtol=1e-9)


def test_ring_of_100000_transitions():
    """A ring of 10^5 transitions: λ = (Σ d + Σ h) / Σ m, one circuit.

    Source: Baccelli et al. (1992), ch. 2 (ratio of the only circuit). Shows that Howard needs no
    per-transition Python loop on large graphs (it would still pass, only slower).
    """
    rng = np.random.default_rng(np.random.SeedSequence(100_000))
    n = 100_000
    tokens = rng.integers(0, 2, n)
    tokens[-1] = 1
    d, h = rng.uniform(0, 10, n), rng.uniform(0, 10, n)
    order = rng.permutation(n)  # ring visits transitions in a shuffled order
    src, dst = order, np.roll(order, -1)
    g = EventGraph(d, src, dst, tokens, h)
    expected = (math.fsum(d) + math.fsum(h)) / int(tokens.sum())
    r = howard(g)
    np.testing.assert_allclose(r.cycle_time, expected, rtol=1e-9)
    assert len(r.circuits) == 1 and len(r.circuits[0].transitions) == n


@pytest.mark.parametrize(
    ("duration", "hold"),
    [
        ([0.0, 1.0, 0.0], [0.0, 0.0, 1e-17]),
        ([0.0, 1.0, 1e-30], [0.0, 0.0, 0.0]),
    ],
)
def test_forced_policy_with_a_tiny_weight_converges(duration, hold):
    """A ring where each transition has one input place has one policy: Howard must stop at once.

    Ring 0 -> 1 -> 2 -> 0, one token, weight 1 then a tiny weight (1e-17 is what 0.1 + 0.2 - 0.3
    gives). Expected λ = (1 + tiny) / 1 for every transition. Source: Baccelli et al. (1992),
    ch. 2 (ratio of the only circuit); Cochet-Terrasson et al. (1998): policy iteration stops
    when no improvement changes the policy.
    """
    g = EventGraph(duration, [0, 1, 2], [1, 2, 0], [1, 0, 0], hold)
    expected = (math.fsum(duration) + math.fsum(hold)) / 1
    r = howard(g)
    np.testing.assert_allclose(r.cycle_time, expected, rtol=1e-12)
    assert r.iterations == 0


def test_scaled_graph_converges():
    """The same graph in time units 10^6 times smaller: λ scales, Howard still converges.

    Homogeneity of the cycle ratio (Baccelli et al. 1992, ch. 2): λ(s·G) = s·λ(G). At s = 1 the
    graph gives λ = 1.5 (circuit 2 -> 3 -> 2: (5 + 1) / (1 + 3)) with no improvement.
    """
    for s in (1.0, 1e-6):
        g = EventGraph(
            np.array([0, 0, 0, 5.0, 0, 0]) * s, [2, 2, 3, 2, 2, 2], [0, 1, 2, 3, 4, 5],
            [0, 0, 1, 3, 0, 0], np.array([0, 0, 0, 1.0, 0, 0]) * s,
        )
        np.testing.assert_allclose(howard(g).cycle_time, 1.5 * s, rtol=1e-12)


@pytest.mark.parametrize(
    ("duration", "tokens"),
    [
        ([0.0, 1.0], [1, 2]),
        ([0.0, 0.0, 1.0], [0, 1, 2]),
        ([0.0, 0.0, 0.0, 0.0, 1.0], [0, 0, 0, 1, 2]),
    ],
)
def test_ring_with_a_third_converges(duration, tokens):
    """A ring of weight 1 holding 3 tokens: λ = 1/3 (inexact in binary), one policy, no improvement.

    Source: Baccelli et al. (1992), ch. 2 (the ratio of the only circuit is the cycle time).
    """
    n = len(duration)
    g = EventGraph(duration, np.arange(n), (np.arange(n) + 1) % n, tokens, np.zeros(n))
    r = howard(g)
    np.testing.assert_allclose(r.cycle_time, 1 / 3, rtol=1e-12)
    assert r.iterations == 0
