r"""Reference tests of the cycle time against linear programming (scipy.optimize.linprog, HiGHS).

The maximum cycle ratio of a strongly connected graph is the optimum of

.. math::

    \min \lambda \quad \text{s.t.} \quad \pi_u - \pi_t + w_p - \lambda m_p \le 0
    \quad \text{for every place } p = (u \to t),

whose dual is a circulation carrying one unit of tokens, of largest weight: its support lies on
circuits of maximal ratio, i.e. on critical places (complementary slackness). Sources:
Baccelli, Cohen, Olsder & Quadrat (1992), Synchronization and Linearity, §2.4–2.5 and ch. 3
(cycle time as the smallest period of a feasible periodic schedule); Dasdan (2004), ACM TODAES
9(4), 385–418, §2 (optimum cycle ratio as a linear program); duality theorem of linear
programming (any LP text). Reference library: scipy.optimize.linprog(method="highs").
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pytest
from cyclecheck.algebra.critical import critical_places
from cyclecheck.algebra.eventgraph import EventGraph, check_live
from cyclecheck.algebra.spectral import howard
from hypothesis import given, settings
from scipy.optimize import linprog
from scipy.sparse import coo_matrix

from tests.strategies import live_event_graphs
from tests.test_spectral_reference import REFERENCE

HIGHS_OPTIONS = {"primal_feasibility_tolerance": 1e-10, "dual_feasibility_tolerance": 1e-10}


def lp_cycle_ratio(graph: EventGraph, places: np.ndarray | None = None):
    """Solve min λ s.t. π_u − π_t − λ m_p <= −w_p over ``places`` (default all) with HiGHS.

    Returns the scipy OptimizeResult; ``x[-1]`` is λ, ``-ineqlin.marginals`` the dual flow.
    One potential is pinned to 0 (the constraints only see differences of π).
    """
    if places is None:
        places = np.arange(graph.n_places)
    n, k = graph.n_transitions, places.size
    rows = np.repeat(np.arange(k), 3)
    cols = np.column_stack(
        [graph.source[places], graph.target[places], np.full(k, n)]
    ).ravel()
    vals = np.column_stack(
        [np.ones(k), -np.ones(k), -graph.tokens[places].astype(float)]
    ).ravel()
    # a self-loop has +1 and -1 on the same column: coo sums duplicates to 0, as it should
    a_ub = coo_matrix((vals, (rows, cols)), shape=(k, n + 1)).tocsr()
    b_ub = -graph.weight[places]
    c = np.zeros(n + 1)
    c[n] = 1.0
    pinned = int(graph.source[places[0]])
    bounds = [(None, None)] * (n + 1)
    bounds[pinned] = (0.0, 0.0)
    res = linprog(c, A_ub=a_ub, b_ub=b_ub, bounds=bounds, method="highs", options=HIGHS_OPTIONS)
    assert res.status == 0, res.message
    return res


def ring_with_chords(n: int, chords: int, seed: int) -> EventGraph:
    """A random strongly connected live graph: a ring through all transitions plus chords.

    The ring guarantees strong connectivity. Liveness: a place without tokens always goes
    forward along the ring (``u < v`` in ring order) and the closing arc holds a token, so the
    token-free subgraph is acyclic. Labels are shuffled so that ring order is not index order.
    """
    rng = np.random.default_rng(np.random.SeedSequence([n, chords, seed]))
    src = list(range(n))
    dst = [(i + 1) % n for i in range(n)]
    tok = rng.integers(0, 2, n).tolist()
    tok[-1] = max(1, tok[-1])
    u = rng.integers(0, n, chords)
    v = rng.integers(0, n, chords)
    ctok = np.where(u < v, rng.integers(0, 4, chords), rng.integers(1, 4, chords))
    src += u.tolist()
    dst += v.tolist()
    tok += ctok.tolist()
    relabel = rng.permutation(n)
    m = len(src)
    g = EventGraph(
        duration=rng.uniform(0.0, 10.0, n),
        source=relabel[np.array(src)],
        target=relabel[np.array(dst)],
        tokens=tok,
        hold=rng.uniform(0.0, 10.0, m),
    )
    check_live(g)
    return g


def check_against_lp(graph: EventGraph, kernel: str = "auto") -> None:
    """Howard's λ = LP optimum; the LP's dual flow lives on Howard's critical places."""
    r = howard(graph, kernel=kernel)
    res = lp_cycle_ratio(graph)
    lam = float(res.x[-1])
    assert np.ptp(r.cycle_time) <= 1e-9 * r.max_cycle_time  # strongly connected: one λ
    assert r.max_cycle_time == pytest.approx(lam, rel=1e-7, abs=1e-9)
    flow = -res.ineqlin.marginals
    assert flow.min() >= -1e-9
    assert float(flow @ graph.tokens) == pytest.approx(1.0, rel=1e-7)
    assert float(flow @ graph.weight) == pytest.approx(lam, rel=1e-7)
    support = flow > 1e-7
    assert support.any()
    crit = critical_places(graph, r)
    assert np.all(crit[support]), np.flatnonzero(support & ~crit)


@pytest.mark.parametrize("kernel", ["numpy", "numba"])
@pytest.mark.parametrize("seed", range(3))
@pytest.mark.parametrize(("n", "chords"), [(200, 400), (500, 1500), (800, 800)])
def test_howard_matches_lp_on_ring_with_chords(n, chords, seed, kernel):
    """Cycle time = LP optimum on random strongly connected graphs of hundreds of transitions,
    for both implementations of Howard (numpy and the compiled kernel).

    Sources: Baccelli et al. (1992), §2.4 and ch. 3; Dasdan (2004), §2 (cycle ratio as an LP);
    LP duality for the flow on critical places. Reference: scipy.optimize.linprog (HiGHS).
    """
    check_against_lp(ring_with_chords(n, chords, seed), kernel)


@pytest.mark.slow
@pytest.mark.parametrize(("n", "chords"), [(2000, 6000), (5000, 10000)])
def test_howard_matches_lp_on_large_ring_with_chords(n, chords):
    """Same as above on thousands of transitions (slow), compiled kernel. Sources as above."""
    check_against_lp(ring_with_chords(n, chords, 0), "numba")


@settings(REFERENCE, max_examples=80)
@given(live_event_graphs())
def test_lp_per_component_gives_cycle_time_of_every_transition(graph):
    """In any live graph: λ_t = max over components upstream of t of the LP of that component.

    Sources: Baccelli et al. (1992), ch. 3 (reducible case: each transition follows the largest
    cycle time upstream); LP as above on the places inside each strongly connected component;
    networkx.condensation and networkx.ancestors for the order of components.
    """
    g = nx.MultiDiGraph()
    g.add_nodes_from(range(graph.n_transitions))
    g.add_edges_from(zip(graph.source.tolist(), graph.target.tolist(), strict=True))
    cond = nx.condensation(g)
    comp = cond.graph["mapping"]
    own = {}
    for c in cond.nodes:
        pairs = zip(graph.source.tolist(), graph.target.tolist(), strict=True)
        inside = np.flatnonzero([comp[s] == c == comp[t] for s, t in pairs])
        own[c] = float(lp_cycle_ratio(graph, inside).x[-1]) if inside.size else -np.inf
    expected = np.array([
        max(own[a] for a in nx.ancestors(cond, comp[t]) | {comp[t]})
        for t in range(graph.n_transitions)
    ])
    scale = max(1.0, float(graph.weight.max(initial=0.0)))
    np.testing.assert_allclose(howard(graph).cycle_time, expected, rtol=1e-7, atol=1e-8 * scale)
