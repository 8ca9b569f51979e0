"""Hypothesis strategies shared by the test suite.

``live_event_graphs`` draws :class:`~cyclecheck.algebra.eventgraph.EventGraph` instances that
pass :func:`~cyclecheck.algebra.eventgraph.check_live`: every transition has an input place and
no circuit is free of tokens. The graphs have parallel places, self-loops, markings 0..3 and
durations/holds that are small integers (exact float arithmetic) or general floats.

Liveness by construction: a random permutation ``order`` of the transitions is drawn, and a place
without tokens always goes from an earlier to a strictly later transition of ``order``. The
token-free subgraph is then acyclic, so no token-free circuit exists. Labels are shuffled by the
permutation, so no algorithm can rely on transitions being numbered in topological order.

Import with ``from tests.strategies import live_event_graphs`` (run pytest as
``python -m pytest`` from the checkout root, which puts the root on ``sys.path``).
"""

from __future__ import annotations

from typing import Literal

import numpy as np
from cyclecheck.algebra.eventgraph import EventGraph
from hypothesis import strategies as st

__all__ = ["live_event_graphs", "values"]

ValueKind = Literal["int", "float", "mixed"]


def values(kind: Literal["int", "float"]) -> st.SearchStrategy[float]:
    """Non-negative durations or holds: integers 0..5 (as floats) or floats in [0, 10]."""
    if kind == "int":
        return st.integers(0, 5).map(float)
    return st.floats(0.0, 10.0, allow_nan=False, allow_infinity=False, allow_subnormal=False)


@st.composite
def live_event_graphs(
    draw: st.DrawFn,
    max_transitions: int = 8,
    max_places: int = 20,
    strongly_connected: bool | None = None,
    min_transitions: int = 1,
    value_kind: ValueKind = "mixed",
    max_tokens: int = 3,
) -> EventGraph:
    """Draw a live timed event graph.

    Parameters
    ----------
    max_transitions, min_transitions : int
        Bounds on the number of transitions ``n``.
    max_places : int
        Upper bound on the number of places (at least ``n`` places are always drawn, one input
        place per transition; ``n`` is capped at ``max_places``).
    strongly_connected : bool or None
        ``True``: the graph is strongly connected (a circuit through all transitions is
        included). ``False``: it is not (needs ``n >= 2``; the first block of ``order`` receives
        no place from the rest). ``None``: either, at random.
    value_kind : {"int", "float", "mixed"}
        Durations and holds from small integers, from floats, or either (chosen per graph).
    max_tokens : int
        Largest initial marking of a place (default 3).
    """
    lo = max(min_transitions, 2 if strongly_connected is False else 1)
    hi = min(max_transitions, max_places)
    if lo > hi:
        raise ValueError("no graph fits the bounds on transitions and places")
    n = draw(st.integers(lo, hi), label="n")
    order = draw(st.permutations(range(n)), label="order")
    pos = np.empty(n, dtype=np.int64)
    pos[np.asarray(order, dtype=np.int64)] = np.arange(n)
    kind = value_kind if value_kind != "mixed" else draw(st.sampled_from(["int", "float"]))
    value = values(kind)

    # split: positions < split receive no place from positions >= split (not strongly connected)
    split = n
    if strongly_connected is False:
        split = draw(st.integers(1, n - 1), label="split")

    def allowed_sources(t: int) -> list[int]:
        return list(order[:split]) if pos[t] < split else list(range(n))

    def marking(u: int, t: int) -> int:
        m = draw(st.integers(0, max_tokens))
        if m == 0 and pos[u] >= pos[t]:
            m = draw(st.integers(1, max(max_tokens, 1)))
        return m

    places: list[tuple[int, int, int, float]] = []
    if strongly_connected:
        # A circuit through all transitions in ``order``; the closing place carries tokens.
        for i in range(n):
            u, t = order[i], order[(i + 1) % n]
            places.append((u, t, marking(u, t), draw(value)))
    else:
        for t in range(n):
            u = draw(st.sampled_from(allowed_sources(t)))
            places.append((u, t, marking(u, t), draw(value)))
    extra = draw(st.integers(0, max_places - len(places)), label="extra places")
    for _ in range(extra):
        t = draw(st.integers(0, n - 1))
        if draw(st.integers(0, 4)) == 0 and places:
            # a parallel place: same arc as an existing one, other marking and hold
            u, t, _, _ = places[draw(st.integers(0, len(places) - 1))]
        else:
            u = draw(st.sampled_from(allowed_sources(t)))
        places.append((u, t, marking(u, t), draw(value)))
    order_places = draw(st.permutations(range(len(places))), label="place order")
    places = [places[i] for i in order_places]
    duration = [draw(value) for _ in range(n)]
    return EventGraph(
        duration=duration,
        source=[p[0] for p in places],
        target=[p[1] for p in places],
        tokens=[p[2] for p in places],
        hold=[p[3] for p in places],
    )
