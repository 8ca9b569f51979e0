r"""Places that gain tokens without bound, and the components they join.

In a graph that is not strongly connected every strongly connected component ``C`` has an
*own* cycle time ``λ°(C)``, that of ``C`` run alone with its inputs always available (0 for a
single transition without a circuit: nothing bounds its rate), and each transition runs at the
largest own cycle time upstream of it, ``λ_t = max_{C ⪯ t} λ°(C)`` (Baccelli et al. 1992,
§2.5 and ch. 3). A place ``p = (u → t)`` receives ``1/λ_u`` tokens per time unit and gives
``1/λ_t``: when ``λ_t > λ_u`` it gains

.. math::  1/\lambda_u - 1/\lambda_t

tokens per time unit, without bound. ``λ_t > λ_u`` exactly when some component upstream of
``t`` but not of ``u`` is slower on its own than ``u``'s side: the buffer between a source of
smaller cycle time and a slower server is the open queue whose arrival rate exceeds its
service rate (Kleinrock 1975, §3.2). With fixed durations equal rates keep the buffer bounded;
with random ones they do not (a queue at load 1 is null recurrent).

References
----------
.. [1] F. Baccelli, G. Cohen, G. J. Olsder, J.-P. Quadrat, *Synchronization and Linearity*,
   Wiley, 1992, §2.5 and ch. 3 (graphs that are not strongly connected).
.. [2] L. Kleinrock, *Queueing Systems, Volume 1: Theory*, Wiley, 1975, §3.2 (an M/M/1
   queue is stable iff its arrival rate is below its service rate).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .critical import RTOL
from .eventgraph import EventGraph, strongly_connected_components

__all__ = [
    "ANCESTRY_LIMIT",
    "Components",
    "components",
    "growth_rates",
    "isolated_graph",
    "unbounded_places",
]

#: Most components whose ancestry is tabulated (one bit set per component, as Python ints).
ANCESTRY_LIMIT = 20_000


@dataclass(frozen=True)
class Components:
    """The strongly connected components of a graph and how they feed each other.

    Attributes
    ----------
    count : int
    labels : ndarray of int, shape (n,)
        Component of each transition.
    circuit : ndarray of bool, shape (count,)
        True for components that contain a circuit (more than one transition, or a
        self-loop); the others have an own cycle time of 0.
    crossing : ndarray of int
        Places whose ends lie in different components.
    order : list of int
        Components in an order where every component comes after those upstream of it.
    sinks : list of ndarray
        Transitions of each component with no place leaving it.
    """

    count: int
    labels: np.ndarray
    circuit: np.ndarray
    crossing: np.ndarray
    order: list[int]
    sinks: list[np.ndarray]

    def ancestry(self, graph: EventGraph) -> list[int] | None:
        """Bit ``j`` of entry ``i`` set when component ``j`` is upstream of ``i`` (or is
        ``i``); None above :data:`ANCESTRY_LIMIT` components."""
        if self.count > ANCESTRY_LIMIT:
            return None
        preds: list[set[int]] = [set() for _ in range(self.count)]
        a = self.labels[graph.source[self.crossing]]
        b = self.labels[graph.target[self.crossing]]
        for u, v in zip(a.tolist(), b.tolist(), strict=True):
            preds[v].add(u)
        bits = [0] * self.count
        for c in self.order:
            value = 1 << c
            for u in preds[c]:
                value |= bits[u]
            bits[c] = value
        return bits


def components(graph: EventGraph) -> Components:
    """The components of ``graph``, their circuits, crossing places, order and sinks."""
    count, labels = strongly_connected_components(graph)
    src, dst = labels[graph.source], labels[graph.target]
    cross = np.flatnonzero(src != dst)
    sizes = np.bincount(labels, minlength=count)
    loops = np.zeros(count, dtype=bool)
    loops[src[graph.source == graph.target]] = True
    circuit = (sizes > 1) | loops
    # Kahn's order on the condensation
    pairs = np.unique(np.stack([src[cross], dst[cross]], axis=1), axis=0) if cross.size else (
        np.zeros((0, 2), dtype=np.int64))
    indeg = np.bincount(pairs[:, 1], minlength=count) if pairs.size else np.zeros(count, int)
    out_deg = np.bincount(pairs[:, 0], minlength=count) if pairs.size else np.zeros(count, int)
    succ: list[list[int]] = [[] for _ in range(count)]
    for u, v in pairs.tolist():
        succ[u].append(v)
    ready = np.flatnonzero(indeg == 0).tolist()
    order: list[int] = []
    remaining = indeg.copy()
    while ready:
        c = ready.pop()
        order.append(c)
        for v in succ[c]:
            remaining[v] -= 1
            if remaining[v] == 0:
                ready.append(v)
    sinks = [np.flatnonzero(labels == c) for c in np.flatnonzero(out_deg == 0).tolist()]
    return Components(count, labels, circuit, cross, order, sinks)


def growth_rates(graph: EventGraph, cycle_time: np.ndarray) -> np.ndarray:
    """Tokens gained per time unit by every place, ``1/λ_u − 1/λ_t`` (0 where the two ends run
    at the same rate; ``inf`` when the source runs at cycle time 0 and the target does not)."""
    lam_u = np.asarray(cycle_time, dtype=np.float64)[graph.source]
    lam_t = np.asarray(cycle_time, dtype=np.float64)[graph.target]
    slower = lam_t - lam_u > RTOL * (np.abs(lam_u) + np.abs(lam_t))
    rate = np.zeros(graph.n_places)
    finite = slower & (lam_u > 0)  # then lam_t > lam_u > 0 too
    rate[finite] = 1.0 / lam_u[finite] - 1.0 / lam_t[finite]
    rate[slower & (lam_u <= 0)] = np.inf
    return rate


def unbounded_places(graph: EventGraph, cycle_time: np.ndarray) -> np.ndarray:
    """Places that gain tokens without bound for fixed durations, from the exact cycle time of
    every transition (:attr:`HowardResult.cycle_time`): those with ``λ_t > λ_u``.

    Examples
    --------
    Arrivals every 4 into a single server of duration 6: the buffer gains 1/4 − 1/6 = 1/12
    tokens per time unit.

    >>> g = EventGraph([4.0, 6.0], [0, 1, 0], [0, 1, 1], [1, 1, 0], [0.0, 0.0, 0.0])
    >>> unbounded_places(g, np.array([4.0, 6.0])).tolist()
    [2]
    >>> float(growth_rates(g, np.array([4.0, 6.0]))[2]) * 12
    1.0
    """
    return np.flatnonzero(growth_rates(graph, cycle_time) > 0)


def isolated_graph(graph: EventGraph,
                   parts: Components) -> tuple[EventGraph, np.ndarray, np.ndarray]:
    """The components with a circuit, each run alone: the places between components removed.

    Returns the graph, the model indices of its transitions and of its places (``kept_t``,
    ``kept_p``). Its growth rates are the components' own cycle times.
    """
    kept_t = np.flatnonzero(parts.circuit[parts.labels])
    inside = parts.labels[graph.source] == parts.labels[graph.target]
    kept_p = np.flatnonzero(inside & parts.circuit[parts.labels[graph.source]])
    new = np.full(graph.n_transitions, -1, dtype=np.int64)
    new[kept_t] = np.arange(kept_t.size)
    names = tuple(graph.names[t] for t in kept_t) if graph.names else ()
    sub = EventGraph(graph.duration[kept_t], new[graph.source[kept_p]],
                     new[graph.target[kept_p]], graph.tokens[kept_p], graph.hold[kept_p],
                     names)
    return sub, kept_t, kept_p
