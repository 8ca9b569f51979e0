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


def _ring_with_servers(n: int) -> tuple[EventGraph, float]:
    """n single servers (durations 1, 3, ..., 13, 2, ..., 12 in turn) in a ring whose places
    hold 0.5, two tokens on the closing place, and a return place with 3 tokens every tenth
    transition (a kanban loop). The whole ring is critical: ratio (sum d + 0.5 n) / 2."""
    duration = (2 * np.arange(n) % 13 + 1).astype(float)
    ring = np.arange(n)
    back = np.arange(0, n, 10)
    source = np.concatenate([ring, ring, back])
    target = np.concatenate([ring, (ring + 1) % n, (back - 10) % n])
    tokens = np.concatenate([np.ones(n, int), np.zeros(n, int), np.full(back.size, 3)])
    tokens[2 * n - 1] = 2  # the closing place n-1 -> 0
    hold = np.concatenate([np.zeros(n), np.full(n, 0.5), np.zeros(back.size)])
    exact = (duration.sum() + 0.5 * n) / 2
    return EventGraph(duration, source, target, tokens, hold), exact


@pytest.mark.parametrize("kernel", ["numpy", "numba"])
@pytest.mark.parametrize("n", [20, 1000, 100_000])
def test_long_ring_converges_in_few_iterations(n: int, kernel: str) -> None:
    """The ring's ratio reaches every transition in one step, not one transition per step
    (without spreading the largest ratio: 2387 iterations and 25 s for 10^5 transitions), in
    both implementations."""
    graph, exact = _ring_with_servers(n)
    result = howard(graph, kernel=kernel)
    assert result.cycle_time == pytest.approx(exact, rel=1e-12)
    assert certify(graph, result).holds
    assert result.iterations <= 60


def test_spreading_keeps_components_apart() -> None:
    """A fast component upstream of nothing and a slow one: each keeps its own cycle time."""
    fast, fast_exact = _ring_with_servers(5)
    slow, exact = _ring_with_servers(40)
    n1 = fast.n_transitions
    graph = EventGraph(np.concatenate([fast.duration, slow.duration]),
                       np.concatenate([fast.source, slow.source + n1]),
                       np.concatenate([fast.target, slow.target + n1]),
                       np.concatenate([fast.tokens, slow.tokens]),
                       np.concatenate([fast.hold, slow.hold]))
    eta = howard(graph).cycle_time
    assert eta[n1:] == pytest.approx(exact)
    assert eta[:n1] == pytest.approx(fast_exact)
