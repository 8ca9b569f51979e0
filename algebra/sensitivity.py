r"""Exact derivatives of the cycle time for fixed durations and holds.

The largest cycle time is a maximum of circuit ratios,
:math:`\lambda(\theta) = \max_c (\sum_{e \in c} \theta_e) / m_c`, a convex, piecewise linear
function of every duration and hold ``θ_e``. Its one-sided derivatives (Danskin's theorem) run
over the circuits that attain the maximum, the *critical* circuits:

.. math::

    \partial^+_e \lambda = \max_{c \text{ critical}} \frac{[e \in c]}{m_c}, \qquad
    \partial^-_e \lambda = \min_{c \text{ critical}} \frac{[e \in c]}{m_c}.

With one critical circuit both are ``1/m_c`` on its elements and 0 elsewhere (every element of
positive slack lies on no critical circuit). With several, making one element faster helps
only if it lies on all of them (``∂⁻ > 0``), while making it slower hurts as soon as it lies on
one (``∂⁺ > 0``).

``∂⁺`` is a shortest path: the fewest tokens of a circuit of the critical graph through ``e``.
``∂⁻`` is 0 unless a single strongly connected part of the critical graph holds every critical
circuit and ``e`` lies on all of them (the part minus ``e`` has no circuit); then it is
``1/`` the most tokens of a circuit through ``e``, a longest path in that acyclic remainder.

References
----------
.. [1] F. Baccelli, G. Cohen, G. J. Olsder, J.-P. Quadrat, *Synchronization and Linearity*,
   Wiley, 1992, §2.5 and §3.7 (cycle time as the maximum circuit ratio; the critical graph).
.. [2] J. M. Danskin, *The Theory of Max-Min and its Application to Weapons Allocation
   Problems*, Springer, 1967 (directional derivatives of a maximum of smooth functions).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .critical import RTOL, critical_places
from .digraph import shortest_distances, strong_components
from .eventgraph import EventGraph
from .spectral import HowardResult

__all__ = ["ALL_CIRCUITS_LIMIT", "FixedSensitivity", "fixed_sensitivity"]

#: Largest critical part (in places) in which every element is tested for lying on all of its
#: circuits; above it the decrease derivatives of that part are reported as 0 (a lower bound).
ALL_CIRCUITS_LIMIT = 400


@dataclass(frozen=True)
class FixedSensitivity:
    """One-sided derivatives of the largest cycle time.

    Attributes
    ----------
    transitions_decrease, transitions_increase : ndarray, shape (n,)
        ``∂⁻`` and ``∂⁺`` with respect to each transition's duration.
    places_decrease, places_increase : ndarray, shape (m,)
        The same for each place's hold.
    exact : bool
        False when a critical part was too large to test (:data:`ALL_CIRCUITS_LIMIT`): its
        decrease derivatives are then lower bounds.
    """

    transitions_decrease: np.ndarray
    transitions_increase: np.ndarray
    places_decrease: np.ndarray
    places_increase: np.ndarray
    exact: bool

    @property
    def differentiable(self) -> bool:
        """True when both one-sided derivatives agree for every element."""
        return bool(np.array_equal(self.transitions_decrease, self.transitions_increase)
                    and np.array_equal(self.places_decrease, self.places_increase))


def fixed_sensitivity(graph: EventGraph, result: HowardResult,
                      critical: np.ndarray | None = None) -> FixedSensitivity:
    """Derivatives of the largest cycle time with respect to every duration and hold.

    Parameters
    ----------
    graph : EventGraph
    result : HowardResult
        Howard's result for ``graph``.
    critical : ndarray of bool, optional
        :func:`~cyclecheck.algebra.critical.critical_places`, when already computed.

    Examples
    --------
    A single server of duration 3 feeding one of duration 2: only the first sets the cycle
    time, one token on its circuit.

    >>> from cyclecheck.algebra.spectral import howard
    >>> g = EventGraph([3.0, 2.0], [0, 0, 1], [0, 1, 1], [1, 0, 1], [0.0, 0.0, 0.0])
    >>> s = fixed_sensitivity(g, howard(g))
    >>> s.transitions_increase.tolist(), s.places_increase.tolist()
    ([1.0, 0.0], [1.0, 0.0, 0.0])
    """
    n, m = graph.n_transitions, graph.n_places
    if critical is None:
        critical = critical_places(graph, result)
    lam = result.max_cycle_time
    eta = result.cycle_time
    top = np.abs(eta - lam) <= RTOL * max(abs(lam), 1e-300)
    mask = critical & top[graph.source] & top[graph.target]
    inc_p = np.zeros(m)
    dec_p = np.zeros(m)
    dec_t = np.zeros(n)
    idx = np.flatnonzero(mask)
    exact = True
    inside = np.zeros(0, dtype=np.int64)
    if idx.size:
        src, dst = graph.source[idx], graph.target[idx]
        _, labels = strong_components(n, src, dst)
        part = labels[src]  # every critical place lies on a circuit: both ends in one part
        arcs = np.bincount(part)
        nodes = np.bincount(labels[np.unique(dst)], minlength=arcs.size)
        tokens = np.bincount(part, weights=graph.tokens[idx], minlength=arcs.size)
        # a part with as many places as transitions is a single circuit: all its elements lie
        # on it, and on no other critical circuit
        simple = (arcs == nodes)[part]
        inc_p[idx[simple]] = 1.0 / tokens[part[simple]]
        for c in np.unique(part[~simple]).tolist():
            inc_p[idx[part == c]] = 1.0 / _fewest_tokens(graph, idx[part == c])
        used = np.unique(part)
        if used.size == 1:  # one part holds every critical circuit
            if simple.all():
                dec_p[idx] = inc_p[idx]
                dec_t[np.unique(dst)] = inc_p[idx[0]]
            elif idx.size > ALL_CIRCUITS_LIMIT:
                exact = False
            else:
                inside = idx
                dec_p[inside] = _decrease_on_all_circuits(graph, inside)
    inc_t = np.zeros(n)
    np.maximum.at(inc_t, graph.target[idx], inc_p[idx])
    for t in np.unique(graph.target[inside]).tolist():
        dec_t[t] = _decrease_for_transition(graph, inside, t)
    return FixedSensitivity(dec_t, inc_t, dec_p, inc_p, exact)


#: Most entries of one block of distances in :func:`_fewest_tokens`.
_DISTANCE_BLOCK = 2_000_000


def _fewest_tokens(graph: EventGraph, part: np.ndarray) -> np.ndarray:
    """For each place of a strongly connected critical part: the fewest tokens of a circuit of
    the part through it, ``m_p + dist(t → u)`` with token counts as lengths."""
    src, dst, tok = graph.source[part], graph.target[part], graph.tokens[part]
    nodes, inv = np.unique(np.r_[src, dst], return_inverse=True)
    s, d = inv[: part.size], inv[part.size :]
    k = nodes.size
    # parallel places: the one with the fewest tokens; token-free places are arcs too
    key = s * k + d
    order = np.lexsort((tok, key))
    keep = order[np.r_[True, key[order][1:] != key[order][:-1]]]
    out = np.empty(part.size)
    rows = max(1, _DISTANCE_BLOCK // k)
    targets = np.unique(d)
    for a in range(0, targets.size, rows):
        chunk = targets[a : a + rows]
        dist = shortest_distances(k, s[keep], d[keep], tok[keep].astype(np.float64), chunk)
        sel = np.flatnonzero(np.isin(d, chunk))
        out[sel] = tok[sel] + dist[np.searchsorted(chunk, d[sel]), s[sel]]
    return out


def _longest_tokens(arcs: list[tuple[int, int, int]], start: int, end: int) -> float | None:
    """Most tokens on a path ``start -> end`` of an acyclic set of arcs (source, target,
    tokens); None if the arcs contain a circuit or no such path exists."""
    succ: dict[int, list[tuple[int, int]]] = {}
    indeg: dict[int, int] = {}
    for u, v, w in arcs:
        succ.setdefault(u, []).append((v, w))
        indeg[v] = indeg.get(v, 0) + 1
        indeg.setdefault(u, 0)
    ready = [v for v, d in indeg.items() if d == 0]
    best = {start: 0.0}
    seen = 0
    while ready:
        u = ready.pop()
        seen += 1
        for v, w in succ.get(u, []):
            if u in best:
                best[v] = max(best.get(v, -np.inf), best[u] + w)
            indeg[v] -= 1
            if indeg[v] == 0:
                ready.append(v)
    if seen < len(indeg):
        return None  # a circuit is left
    return best.get(end)


def _decrease_on_all_circuits(graph: EventGraph, part: np.ndarray) -> np.ndarray:
    """For each place of a strongly connected critical part: 1/(most tokens of a circuit
    through it) if it lies on every circuit of the part, else 0."""
    out = np.zeros(part.size)
    arcs = [(int(graph.source[p]), int(graph.target[p]), int(graph.tokens[p])) for p in part]
    for i, (u, t, w) in enumerate(arcs):
        longest = _longest_tokens(arcs[:i] + arcs[i + 1 :], t, u)
        if longest is not None:
            out[i] = 1.0 / (w + longest)
    return out


def _decrease_for_transition(graph: EventGraph, part: np.ndarray, t: int) -> float:
    """1/(most tokens of a circuit through transition ``t``) if ``t`` lies on every circuit of
    the part's places, else 0: ``t`` is split into an exit (-1) and an entry (-2)."""
    arcs = []
    for p in part.tolist():
        u, v, w = int(graph.source[p]), int(graph.target[p]), int(graph.tokens[p])
        arcs.append((-1 if u == t else u, -2 if v == t else v, w))
    longest = _longest_tokens(arcs, -1, -2)
    return 0.0 if longest is None or longest <= 0 else 1.0 / longest
