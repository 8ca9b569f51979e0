r"""What follows from the cycle time: critical graph, cyclicity, slack, schedule, certificate.

All of it is read off a generalised eigenmode ``(eta, v)`` of the event graph (see
:mod:`cyclecheck.algebra.spectral`). With the *reduced weight* of place ``p = (u -> t)``

.. math::

    r_p = w_p - \eta_t m_p + v_u - v_t, \qquad w_p = h_p + d_t,

every place between transitions of equal cycle time has ``r_p <= 0``, and the places with
``r_p = 0`` form the *critical graph*: the circuits made of them are exactly the circuits of
largest ratio. Around any circuit the potentials ``v`` cancel, so the slack of a circuit, how much
weight it can take before its ratio exceeds ``eta``, is ``-sum(r_p)``, a sum of non-negative
numbers; the slack of a place is the least slack of the circuits through it, a shortest-path
problem with lengths ``-r >= 0``.

References
----------
.. [1] F. Baccelli, G. Cohen, G. J. Olsder, J.-P. Quadrat, *Synchronization and Linearity*,
   Wiley, 1992, §3.7 (cyclicity of the critical graph and the periodic regime).
.. [2] B. Heidergott, G. J. Olsder, J. van der Woude, *Max Plus at Work*, Princeton University
   Press, 2006, ch. 3–4 (eigenvectors, critical graph, cyclicity, transient).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .digraph import breadth_first, shortest_distances, strong_components
from .eventgraph import EventGraph, strongly_connected_components
from .spectral import KERNEL_MIN_PLACES, HowardResult, _kernels, _policy_cycles, chain_sums

__all__ = [
    "SLACK_EXACT_LIMIT",
    "Certificate",
    "Slack",
    "certify",
    "critical_places",
    "cyclicity",
    "periodic_schedule",
    "reduced_weights",
    "slack",
]

#: Largest ``n_transitions * n_places`` for which slack is computed exactly (one Dijkstra per
#: transition); above it the reduced weight, a lower bound, is reported instead.
SLACK_EXACT_LIMIT = 2_000_000


def reduced_weights(graph: EventGraph, result: HowardResult) -> np.ndarray:
    r"""Reduced weight ``r_p = w_p - eta_t m_p + v_u - v_t`` of every place."""
    eta_t = result.cycle_time[graph.target]
    v = result.bias
    return graph.weight - eta_t * graph.tokens + v[graph.source] - v[graph.target]


#: Relative precision of the equalities read off the eigenmode: a reduced weight counts as zero,
#: two cycle times as equal, when they differ by less than this times the size of their terms.
RTOL = 1e-9


def _term_scale(graph: EventGraph, result: HowardResult) -> np.ndarray:
    """Per place, the size of the terms of its reduced weight (what its rounding scales with)."""
    eta = result.cycle_time
    # A bias is a sum along a path: its rounding scales with the terms summed, not with its
    # value (1 - 1.000000001 is tiny, its error is not).
    v = result.bias_scale if result.bias_scale is not None else np.abs(result.bias)
    return (graph.weight + np.abs(eta[graph.target]) * graph.tokens + v[graph.source]
            + v[graph.target])


def _same_cycle_time(graph: EventGraph, result: HowardResult) -> np.ndarray:
    eta_u, eta_t = result.cycle_time[graph.source], result.cycle_time[graph.target]
    return np.abs(eta_u - eta_t) <= RTOL * (np.abs(eta_u) + np.abs(eta_t))


def critical_places(graph: EventGraph, result: HowardResult) -> np.ndarray:
    """Boolean mask of the places on circuits of largest ratio (the critical graph's arcs).

    A place is critical when its reduced weight is zero and it lies on a circuit of such places:
    raising its hold by any amount raises the cycle time.
    """
    tight = _same_cycle_time(graph, result) & (
        reduced_weights(graph, result) >= -RTOL * _term_scale(graph, result)
    )
    n = graph.n_transitions
    src, dst = graph.source[tight], graph.target[tight]
    count, labels = strong_components(n, src, dst)
    sizes = np.bincount(labels, minlength=count)
    in_circuit = (labels[src] == labels[dst]) & ((sizes[labels[src]] > 1) | (src == dst))
    mask = np.zeros(graph.n_places, dtype=bool)
    mask[np.flatnonzero(tight)[in_circuit]] = True
    return mask


def cyclicity(graph: EventGraph, result: HowardResult, critical: np.ndarray | None = None) -> int:
    r"""Cyclicity of the critical graph, counted in firings.

    For each strongly connected component of the critical graph, the gcd of the token counts of
    its circuits; the cyclicity is the lcm of these over the components. The firing times then
    become periodic: ``x_t(k + c) = x_t(k) + c * eta_t`` for all large ``k``.

    Notes
    -----
    The gcd of circuit lengths of a strongly connected component is the gcd of
    ``level_u + m_p - level_t`` over its arcs, for any levels given by a spanning tree.

    Examples
    --------
    Two transitions exchanging tokens, one token in all, critical circuit of two places:

    >>> from cyclecheck.algebra.spectral import howard
    >>> g = EventGraph([1.0, 1.0], [0, 1], [1, 0], [1, 1], [0.0, 0.0])
    >>> cyclicity(g, howard(g))
    2
    """
    if critical is None:
        critical = critical_places(graph, result)
    n = graph.n_transitions
    src, dst = graph.source[critical], graph.target[critical]
    tok = graph.tokens[critical]
    _, labels = strong_components(n, src, dst)
    inside = labels[src] == labels[dst]
    src, dst, tok = src[inside], dst[inside], tok[inside]
    if src.size == 0:
        return 1
    # Spanning forest of each critical component by breadth-first search from one of its nodes.
    parent = np.arange(n)
    link_tokens = np.zeros(n)
    first_place: dict[tuple[int, int], int] = {}
    for s, t, m in zip(src.tolist(), dst.tolist(), tok.tolist(), strict=True):
        first_place.setdefault((s, t), m)
    comps = np.unique(labels[src])
    for comp in comps.tolist():
        start = int(src[labels[src] == comp][0])
        nodes, preds = breadth_first(n, src, dst, start)
        for node in nodes[1:].tolist():
            parent[node] = preds[node]
            link_tokens[node] = first_place[(int(preds[node]), node)]
    _, (level,) = chain_sums(parent, link_tokens)
    gaps = np.abs(level[src] + tok - level[dst]).astype(np.int64)
    period = 1
    for comp in comps.tolist():
        g = int(np.gcd.reduce(gaps[labels[src] == comp]))
        period = math.lcm(period, max(g, 1))
    return period


@dataclass(frozen=True)
class Slack:
    """How much each hold and duration may grow before the cycle time changes.

    Attributes
    ----------
    places, transitions : ndarray of float
        Slack of each place's hold and of each transition's duration; ``inf`` where no circuit
        goes through the element inside its strongly connected component (it never limits).
    exact : bool
        True when computed by shortest paths; False when the reduced weight (a lower bound)
        was used because the graph exceeds :data:`SLACK_EXACT_LIMIT`.
    """

    places: np.ndarray
    transitions: np.ndarray
    exact: bool


def slack(graph: EventGraph, result: HowardResult) -> Slack:
    r"""Slack of every place and transition.

    The slack of place ``p = (u -> t)`` inside a strongly connected component is

    .. math::  s_p = -r_p + \operatorname{dist}_{-r}(t, u),

    the smallest ``-sum(r)`` over circuits through ``p``; the slack of transition ``t`` is the
    least slack of its input places inside its component (raising ``d_t`` raises all of them,
    and each circuit through ``t`` uses exactly one).

    Examples
    --------
    A single server of duration 3 (self-loop) feeding one of duration 2: the second may grow by 1.

    >>> from cyclecheck.algebra.spectral import howard
    >>> g = EventGraph([3.0, 2.0], [0, 0, 1], [0, 1, 1], [1, 0, 1], [0.0, 0.0, 0.0])
    >>> slack(g, howard(g)).transitions.tolist()
    [0.0, 1.0]
    """
    _, labels = strongly_connected_components(graph)
    inside = labels[graph.source] == labels[graph.target]
    length = np.maximum(-reduced_weights(graph, result), 0.0)
    length[length <= RTOL * _term_scale(graph, result)] = 0.0
    place_slack = np.full(graph.n_places, np.inf)
    n = graph.n_transitions
    exact = n * graph.n_places <= SLACK_EXACT_LIMIT
    idx = np.flatnonzero(inside)
    if exact and idx.size:
        # Shortest intra-component distances; parallel places keep their shortest length.
        src, dst, ln = graph.source[idx], graph.target[idx], length[idx]
        key = src * n + dst
        order = np.lexsort((ln, key))
        keep = order[np.r_[True, key[order][1:] != key[order][:-1]]]
        targets = np.unique(dst)
        dist = shortest_distances(n, src[keep], dst[keep], ln[keep], targets)
        row = np.searchsorted(targets, dst)
        place_slack[idx] = ln + dist[row, src]
    else:
        place_slack[idx] = length[idx]
    trans_slack = np.full(n, np.inf)
    np.minimum.at(trans_slack, graph.target[idx], place_slack[idx])
    return Slack(place_slack, trans_slack, exact)


def periodic_schedule(graph: EventGraph, result: HowardResult) -> tuple[np.ndarray, np.ndarray]:
    """A periodic schedule from the eigenvector: completion and start of the first firing.

    Firing ``k`` of ``t`` completes at ``completion[t] + (k - 1) * eta_t`` and starts
    ``duration[t]`` earlier. Times are shifted so that the earliest start is 0.
    """
    completion = result.bias.copy()
    start = completion - graph.duration
    shift = start.min() if start.size else 0.0
    return completion - shift, start - shift


@dataclass(frozen=True)
class Certificate:
    """Evidence, checked on every result, that the cycle times are right.

    Each check is a relative error: the violation divided by the size of the terms involved, so
    that components of very different magnitudes are judged alike. Nothing is taken on trust
    from the result but the numbers it claims (cycle times, bias, policy, circuits).

    Attributes
    ----------
    circuit_gap : float
        Largest ``|ratio(c) - eta_t| / |ratio(c)|`` over the reported circuits ``c`` and their
        transitions, ratios recomputed from the graph by exact summation.
    policy_gap : float
        Largest relative ``|eta_u - eta_t|`` along the policy (each transition's chosen input
        place ``u -> t``); ``inf`` if the policy is not made of input places or one of its
        circuits is not reported. With ``circuit_gap`` it proves every cycle time is attained
        by a circuit upstream.
    monotone_gap : float
        Largest relative ``eta_u - eta_t`` over places ``u -> t``: cycle times never drop
        downstream.
    max_reduced_weight : float
        Largest relative reduced weight over places between transitions of equal cycle time:
        no circuit has a larger ratio (the sum of ``r`` around any circuit is ``<= 0``).
    eigen_residual : float
        Largest relative ``|v_t - max_p (w_p - eta_t m_p + v_u)|`` over transitions: ``v`` is a
        generalised eigenvector, the periodic regime ``x_t(k) = k eta_t + v_t`` solves the
        recursion.
    tolerance : float
        The bound all of them are held to.
    """

    circuit_gap: float
    policy_gap: float
    monotone_gap: float
    max_reduced_weight: float
    eigen_residual: float
    tolerance: float

    @property
    def holds(self) -> bool:
        """True when every check is within tolerance."""
        return max(self.circuit_gap, self.policy_gap, self.monotone_gap,
                   self.max_reduced_weight, self.eigen_residual) <= self.tolerance


def _relative(violation: np.ndarray, scale: np.ndarray) -> float:
    """Largest ``violation / scale`` (0 where both vanish), at least 0."""
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(violation > 0, violation / scale, 0.0)
    return float(np.max(ratio, initial=0.0))


def _valid_policy(graph: EventGraph, result: HowardResult) -> np.ndarray | None:
    """The claimed policy if it picks one input place of every transition, else None."""
    n = graph.n_transitions
    policy = np.asarray(result.policy)
    if policy.shape != (n,) or policy.min(initial=0) < 0 or policy.max(initial=0) >= graph.n_places:
        return None
    if not np.array_equal(graph.target[policy], np.arange(n)):
        return None
    return policy


def _path_scale(graph: EventGraph, result: HowardResult,
                policy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """One transition per circuit of the policy (a mask), and the sum of ``w + |eta| m`` along
    each transition's policy path, recomputed here: what the rounding of its bias scales with
    (the claimed ``bias_scale`` is not trusted). On large graphs the compiled walk of
    :func:`cyclecheck.algebra.kernels.path_sums` sums them, else pointer doubling."""
    n = graph.n_transitions
    pred = graph.source[policy]
    link = graph.weight[policy] + np.abs(result.cycle_time) * graph.tokens[policy]
    kernels = _kernels() if graph.n_places >= KERNEL_MIN_PLACES else None
    if kernels is not None:
        is_root, total = kernels.path_sums(pred, link)
    else:
        is_root = _policy_cycles(pred)
        _, (total,) = chain_sums(np.where(is_root, np.arange(n), pred), link)
    return is_root, total + link  # a root's bias closes its circuit: count its own link


def _policy_gap(graph: EventGraph, result: HowardResult, policy: np.ndarray | None,
                is_root: np.ndarray | None) -> float:
    """Relative ``|eta_u - eta_t|`` along the (validated) policy, or inf if the policy does not
    hold up."""
    if policy is None or is_root is None:
        return math.inf
    reported: set[int] = set()
    for c in result.circuits:
        k = len(c.transitions)
        for i, p in enumerate(c.places):
            if policy[c.transitions[(i + 1) % k]] != p:
                return math.inf
        reported.update(c.transitions)
    roots = np.flatnonzero(is_root)
    if not set(roots.tolist()) <= reported:
        return math.inf
    eta = result.cycle_time
    eta_u = eta[graph.source[policy]]
    return _relative(np.abs(eta_u - eta), np.abs(eta_u) + np.abs(eta))


def certify(graph: EventGraph, result: HowardResult, tolerance: float = RTOL) -> Certificate:
    """Check a Howard result independently of how it was found.

    The rounding allowance comes from the graph and the claimed numbers only: the size of each
    place's terms and of the sums along the claimed policy paths that make up the biases.

    Examples
    --------
    >>> from cyclecheck.algebra.spectral import howard
    >>> g = EventGraph([2.0, 3.0], [0, 1], [1, 0], [0, 1], [0.0, 0.0])
    >>> certify(g, howard(g)).holds
    True
    """
    eta, v = result.cycle_time, result.bias
    gap = 0.0 if result.circuits else math.inf
    for c in result.circuits:
        ratio = math.fsum(float(graph.weight[p]) for p in c.places) / sum(
            int(graph.tokens[p]) for p in c.places
        )
        gap = max(gap, _relative(np.abs(eta[list(c.transitions)] - ratio), np.array(abs(ratio))))
    eta_u, eta_t = eta[graph.source], eta[graph.target]
    monotone = _relative(eta_u - eta_t, np.abs(eta_u) + np.abs(eta_t))
    same = _same_cycle_time(graph, result)
    policy = _valid_policy(graph, result)
    is_root, paths = (_path_scale(graph, result, policy) if policy is not None
                      else (None, np.zeros(graph.n_transitions)))
    scale = (graph.weight + np.abs(eta_t) * graph.tokens + np.abs(v[graph.source])
             + np.abs(v[graph.target]) + paths[graph.source] + paths[graph.target])
    max_red = _relative(np.where(same, reduced_weights(graph, result), 0.0), scale)
    order, starts = graph.by_target
    value = np.where(same, graph.weight - eta_t * graph.tokens + v[graph.source], -np.inf)
    best = np.maximum.reduceat(value[order], starts[:-1])
    # The residual of transition t is judged against the largest term scale of its inputs.
    t_scale = np.maximum.reduceat(scale[order], starts[:-1])
    residual = _relative(np.abs(best - v), t_scale)
    return Certificate(gap, _policy_gap(graph, result, policy, is_root), monotone, max_red,
                       residual, tolerance)
