"""Howard's policy iteration on shapes that used to need one iteration per transition.

Sources: the cycle time of a ring is its total weight over its tokens (Baccelli et al. 1992,
ch. 2: maximum cycle ratio); Hansen & Zwick (2010) for why iterations are never capped at n
(REFERENCES.md) — here they must not grow like n either on a plain ring.
"""

from __future__ import annotations

import numpy as np
import pytest
from cyclecheck.algebra.critical import certify
from cyclecheck.algebra.eventgraph import EventGraph
from cyclecheck.algebra.spectral import howard


def _ring_with_servers(n: int, seed: int) -> tuple[EventGraph, float]:
    """n single servers in a ring with one token on the ring: the whole ring is critical."""
    rng = np.random.default_rng(np.random.SeedSequence(seed))
    duration = rng.integers(1, 4, n).astype(float)
    ring = np.arange(n)
    source = np.concatenate([ring, ring])
    target = np.concatenate([ring, (ring + 1) % n])
    tokens = np.concatenate([np.ones(n, int), np.zeros(n, int)])
    tokens[-1] = 1  # the ring's only token, on the place n-1 -> 0
    hold = np.concatenate([np.zeros(n), np.full(n, 0.5)])
    exact = duration.sum() + 0.5 * n  # closed form: weight of the ring over its one token
    return EventGraph(duration, source, target, tokens, hold), exact


@pytest.mark.parametrize("n", [10, 1000, 100_000])
def test_long_ring_converges_in_few_iterations(n: int) -> None:
    """The ring's ratio reaches every transition in one step, not one transition per step
    (before: 2387 iterations for 10^5 transitions)."""
    graph, exact = _ring_with_servers(n, seed=n)
    result = howard(graph)
    assert result.cycle_time == pytest.approx(exact, rel=1e-12)
    assert certify(graph, result).holds
    assert result.iterations <= 20


def test_spreading_keeps_components_apart() -> None:
    """A fast component upstream of nothing and a slow one: each keeps its own cycle time."""
    fast, _ = _ring_with_servers(5, seed=1)
    slow, exact = _ring_with_servers(7, seed=2)
    n1 = fast.n_transitions
    graph = EventGraph(np.concatenate([fast.duration, slow.duration]),
                       np.concatenate([fast.source, slow.source + n1]),
                       np.concatenate([fast.target, slow.target + n1]),
                       np.concatenate([fast.tokens, slow.tokens]),
                       np.concatenate([fast.hold, slow.hold]))
    eta = howard(graph).cycle_time
    assert eta[n1:] == pytest.approx(exact)
    assert eta[:n1] == pytest.approx(fast.duration.sum() + 2.5)
