r"""Cycle time of a timed event graph by Howard policy iteration.

The cycle time of transition ``t`` is the largest cycle ratio

.. math::

    \lambda_t = \max_{c} \frac{\sum_{p \in c} (h_p + d_{\mathrm{target}(p)})}{\sum_{p \in c} m_p}

over the circuits ``c`` upstream of ``t`` (from which ``t`` can be reached). In a strongly
connected graph it is the same for every transition: the max-plus eigenvalue.

Howard's algorithm works on *policies*: every transition picks one of its input places. The
chosen places form a graph in which every transition has exactly one predecessor, so following
predecessors from any transition ends on a circuit of the policy. Evaluating a policy gives each
transition the ratio ``eta`` of the policy circuit it drains from and a bias ``v`` (the weight of
the path to that circuit, reweighted by ``eta``); improving it switches a transition to an input
place whose source has a larger ``eta`` or, failing that, a larger ``w - eta * m + v``. At the
fixed point, ``(eta, v)`` is a generalised eigenmode of the multichain max-plus system

.. math::

    \eta_t = \max_{p = (u \to t)} \eta_u, \qquad
    v_t = \max_{p = (u \to t),\ \eta_u = \eta_t} \bigl( w_p - \eta_t m_p + v_u \bigr),

which certifies the result (see :mod:`cyclecheck.algebra.critical`).

Two implementations share these formulas. Here every step is vectorized over transitions and
places with numpy: a policy is evaluated by pointer doubling (``O(m + n log n)`` array
operations) rather than by walking it transition by transition. On large graphs the whole
iteration runs as one compiled loop instead (:mod:`cyclecheck.algebra.kernels`, numba), which
walks each policy once; ``howard(graph, kernel=...)`` chooses, and each is the other's twin in
the tests. Iterations are not capped at ``n``: Hansen and Zwick build graphs where Howard needs
more.

Numbers near the float limit: a bias is summed link by link as ``w - eta m``, so it stays finite
whenever it is representable; a circuit whose weight (or a bias) exceeds the largest double
raises :class:`~cyclecheck.algebra.exceptions.OutOfRange`.

References
----------
.. [1] J. Cochet-Terrasson, G. Cohen, S. Gaubert, M. Mc Gettrick, J.-P. Quadrat, "Numerical
   computation of spectral elements in max-plus algebra", IFAC Conference on System Structure
   and Control, 1998.
.. [2] A. Dasdan, "Experimental analysis of the fastest optimum cycle ratio and mean
   algorithms", ACM TODAES 9(4), 385–418, 2004. doi:10.1145/1027084.1027085
.. [3] R. M. Karp, "A characterization of the minimum cycle mean in a digraph", Discrete
   Mathematics 23(3), 309–311, 1978. doi:10.1016/0012-365X(78)90011-0
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .digraph import breadth_first
from .eventgraph import EventGraph, check_live
from .exceptions import MaxPlusError, OutOfRange

__all__ = ["KERNELS", "KERNEL_MIN_PLACES", "Circuit", "HowardResult", "chain_sums", "howard"]

#: The implementations of :func:`howard`: ``"numba"`` (compiled, for large graphs) and
#: ``"numpy"`` (vectorized, its twin); ``"auto"`` picks by size.
KERNELS = ("auto", "numba", "numpy")
#: ``kernel="auto"`` compiles from this many places on. Below it the numpy version is done
#: before numba would be ready: importing numba and loading the cached kernels costs about a
#: second of CPU, the compiled loop is 3-4 times faster per iteration than numpy (about 20
#: Howard iterations at 10^5 places take 0.5 s in numpy, 1.3 s with numba's start-up; 50 at
#: 3·10^5 take 3.4 s and 1.7 s: CPU seconds on the 2-core benchmark machine, under load).
KERNEL_MIN_PLACES = 200_000


@dataclass(frozen=True)
class Circuit:
    """A circuit of the event graph.

    Attributes
    ----------
    transitions : tuple of int
        Transitions in circuit order: place ``places[i]`` goes from ``transitions[i]`` to
        ``transitions[(i + 1) % len]``.
    places : tuple of int
        The places of the circuit, in the same order.
    weight : float
        Sum of the holds and durations along the circuit (exact summation).
    tokens : int
        Tokens on the circuit.
    """

    transitions: tuple[int, ...]
    places: tuple[int, ...]
    weight: float
    tokens: int

    @property
    def ratio(self) -> float:
        """Cycle ratio weight / tokens: the cycle time this circuit imposes."""
        return self.weight / self.tokens


@dataclass(frozen=True)
class HowardResult:
    """Outcome of Howard policy iteration.

    Attributes
    ----------
    cycle_time : ndarray of float, shape (n,)
        ``eta``: the cycle time of each transition.
    bias : ndarray of float, shape (n,)
        ``v``: with ``eta`` a generalised eigenvector (see the module docstring).
    policy : ndarray of int, shape (n,)
        The input place chosen by each transition.
    circuits : list of Circuit
        The circuits of the final policy, by decreasing ratio. Each sets the cycle time of the
        transitions that drain from it; all of them are critical.
    iterations : int
        Number of policy improvements.
    bias_scale : ndarray of float, shape (n,), optional
        Sum of the absolute terms that make up each bias (weights and ``eta`` times tokens
        along the policy path): the size its rounding error scales with. ``None``: use
        ``abs(bias)``.
    """

    cycle_time: np.ndarray
    bias: np.ndarray
    policy: np.ndarray
    circuits: list[Circuit]
    iterations: int
    bias_scale: np.ndarray | None = None

    @property
    def max_cycle_time(self) -> float:
        """The largest cycle time of any transition (the eigenvalue when strongly connected)."""
        return float(self.cycle_time.max())


def chain_sums(parent: np.ndarray, *values: np.ndarray) -> tuple[np.ndarray, list[np.ndarray]]:
    r"""Sums of ``values`` along parent chains of a forest, by pointer doubling.

    Parameters
    ----------
    parent : ndarray of int, shape (n,)
        Parent of each node; a root is its own parent. Every chain must end in a root.
    *values : ndarray of float, shape (n,)
        Quantities carried by each node's link to its parent (ignored at roots).

    Returns
    -------
    root : ndarray of int, shape (n,)
        The root each node's chain ends in.
    sums : list of ndarray, shape (n,)
        For each of ``values``, the sum over the links of each node's chain.

    Notes
    -----
    ``ceil(log2 n)`` rounds of ``P <- P[P]``, ``S <- S + S[P]``: after round ``j`` every node
    has summed the first ``2**j`` links of its chain (roots add zero). One-dimensional gathers
    only: gathering along the second axis of a 2-d array is an order of magnitude slower.

    Examples
    --------
    >>> root, (s,) = chain_sums(np.array([0, 0, 1]), np.array([9.0, 1.0, 2.0]))
    >>> root.tolist(), s.tolist()
    ([0, 0, 0], [0.0, 1.0, 3.0])
    """
    n = parent.shape[0]
    jump = parent.copy()
    is_root = jump == np.arange(n)
    sums = [np.where(is_root, 0.0, np.asarray(v, dtype=np.float64)) for v in values]
    for _ in range(max(1, math.ceil(math.log2(max(n, 2))))):
        nxt = jump[jump]
        if np.array_equal(nxt, jump):
            break
        for s in sums:
            s += s[jump]
        jump = nxt
    return jump, sums


def _policy_cycles(pred: np.ndarray) -> np.ndarray:
    """Mask of one node per circuit of a functional graph: the circuit's smallest index."""
    n = pred.shape[0]
    smallest = np.arange(n)
    jump = pred.copy()
    for _ in range(max(1, math.ceil(math.log2(max(n, 2))))):
        smallest = np.minimum(smallest, smallest[jump])
        jump = jump[jump]
    # jump = pred^(2^rounds) with 2^rounds >= n lands every node on a circuit and is onto each
    # one; there the window of 2^rounds steps covers the whole circuit, so ``smallest`` is the
    # circuit's least node.
    on_cycle = np.zeros(n, dtype=bool)
    on_cycle[jump] = True
    return on_cycle & (smallest == np.arange(n))


@dataclass(frozen=True)
class _SortedPlaces:
    """Places in the order of their target (CSR), so per-transition maxima need no gather."""

    source: np.ndarray
    target: np.ndarray
    weight: np.ndarray
    tokens: np.ndarray
    starts: np.ndarray
    order: np.ndarray  # sorted position -> original place index
    max_weight: np.ndarray  # per transition, the largest weight of its input places

    @classmethod
    def of(cls, graph: EventGraph) -> _SortedPlaces:
        order, starts = graph.by_target
        weight = graph.weight[order]
        return cls(graph.source[order], graph.target[order], weight,
                   graph.tokens[order].astype(np.float64), starts, order,
                   np.maximum.reduceat(weight, starts[:-1]))

    def spread_largest(self, eta: np.ndarray, policy: np.ndarray) -> np.ndarray:
        """Point every transition downstream of a circuit of the largest ratio at it.

        Improving one place per transition moves a larger ratio one place further per
        iteration: along a ring of ``n`` transitions that is ``n`` iterations. Here the
        transitions reachable from those of the largest ``eta`` take the place through which a
        breadth-first search reached them, all at once. The search tree ends on transitions
        whose policy is kept, so it closes no new circuit, and every transition it moves now
        drains from a circuit of the largest ratio: a strict improvement in Howard's sense
        (Cochet-Terrasson et al. 1998, the ``eta`` step).
        """
        n = policy.shape[0]
        top = ~_exceeds(eta.max(), eta)
        if top.all():
            return policy
        # Super-source n, linked to every top transition; the graph's places after it.
        rows = np.concatenate([np.full(int(top.sum()), n), self.source])
        cols = np.concatenate([np.flatnonzero(top), self.target])
        _, pred = breadth_first(n + 1, rows, cols, n)
        moved = np.flatnonzero((pred[:n] >= 0) & ~top)
        if moved.size == 0:
            return policy
        # The place from pred[t] to t: places are sorted by target, so search within each
        # target's segment by source.
        key = self.target.astype(np.int64) * (n + 1) + self.source
        order = np.argsort(key, kind="stable")
        wanted = moved.astype(np.int64) * (n + 1) + pred[moved]
        found = order[np.searchsorted(key[order], wanted)]
        policy = policy.copy()
        policy[moved] = found
        return policy

    def out_adjacency(self) -> tuple[np.ndarray, np.ndarray]:
        """Per source transition, the first place (sorted position) to each distinct target,
        targets increasing, as CSR ``(starts, places)``: the order in which the breadth-first
        search of :meth:`spread_largest` meets them."""
        n = self.starts.size - 1
        key = self.source.astype(np.int64) * (n + 1) + self.target
        order = np.argsort(key, kind="stable")
        first = order[np.r_[True, key[order][1:] != key[order][:-1]]] if order.size else order
        starts = np.zeros(n + 1, dtype=np.int64)
        np.cumsum(np.bincount(self.source[first], minlength=n), out=starts[1:])
        return starts, first.astype(np.int64)

    def segment_argmax(self, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Per transition, the max of ``values`` (one per sorted place) and the first place
        attaining it."""
        heads = self.starts[:-1]
        seg_max = np.maximum.reduceat(values, heads)
        position = np.where(values >= seg_max[self.target], np.arange(values.size), values.size)
        return seg_max, np.minimum.reduceat(position, heads)


@dataclass(frozen=True)
class _Evaluation:
    eta: np.ndarray
    bias: np.ndarray
    bias_scale: np.ndarray  # sum of the absolute terms of each bias
    roots: np.ndarray  # one transition per policy circuit (its smallest index)


def _evaluate(places: _SortedPlaces, policy: np.ndarray) -> _Evaluation:
    n = policy.shape[0]
    pred = places.source[policy]
    link_weight = places.weight[policy]
    link_tokens = places.tokens[policy]
    is_root = _policy_cycles(pred)
    roots = np.flatnonzero(is_root)
    parent = np.where(is_root, np.arange(n), pred)
    with np.errstate(over="ignore", invalid="ignore"):
        root_of, (sum_w, sum_m) = chain_sums(parent, link_weight, link_tokens)
        # Circuit of root r: its own link plus the chain from pred[r] back to r.
        circ_w = link_weight[roots] + sum_w[pred[roots]]
        circ_m = link_tokens[roots] + sum_m[pred[roots]]
        if np.any(circ_m <= 0):
            raise MaxPlusError("a policy circuit holds no token: the graph is not live")
        ratio = np.zeros(n)
        ratio[roots] = circ_w / circ_m
        if not np.all(np.isfinite(ratio[roots])):
            raise _overflow()
        eta = ratio[root_of]
        # The bias link by link (a long path's sum of weights can overflow where its bias,
        # a sum of w - eta m, does not), and the size its rounding scales with.
        _, (bias, bias_scale) = chain_sums(parent, link_weight - eta * link_tokens,
                                           link_weight + np.abs(eta) * link_tokens)
    if not np.all(np.isfinite(bias)):
        raise _overflow()
    # The scale only sizes tolerances: beyond the largest double it saturates there.
    np.minimum(bias_scale, _BIG, out=bias_scale)
    return _Evaluation(eta, bias, bias_scale, roots)


_BIG = float(np.finfo(np.float64).max)


def _overflow(what: str = "a circuit weight or a bias") -> OutOfRange:
    return OutOfRange(f"{what} exceeds the range of floating point (about 1.8e308): "
                      "rescale the durations and holds (a larger time unit)")


#: Relative precision of the comparisons in policy improvement. Differences are judged against
#: the magnitude of the numbers compared, never against a scale of the whole graph, so that a
#: component with weights 1e6 does not hide ratio differences of 1e-6 in another one.
RTOL = 1e-10


#: Consecutive eta improvements after which the largest ratio is spread at once (see
#: ``_SortedPlaces.spread_largest``). Spreading rewires every transition downstream, which
#: costs value improvements afterwards, so it is kept for when the plain step is creeping.
SPREAD_AFTER = 8


def _exceeds(new: np.ndarray, old: np.ndarray, scale: np.ndarray | float = 0.0) -> np.ndarray:
    """``new > old`` by more than rounding: ``RTOL`` times the size of the terms compared."""
    with np.errstate(invalid="ignore", over="ignore"):
        return new - old > RTOL * (np.abs(new) + np.abs(old) + scale)


def howard(graph: EventGraph, *, max_iterations: int | None = None,
           kernel: str = "auto") -> HowardResult:
    """Cycle time of every transition of a live event graph by Howard policy iteration.

    Parameters
    ----------
    graph : EventGraph
        A live event graph: every transition has an input place and every circuit a token.
    max_iterations : int, optional
        Safety limit on policy improvements. The default, ``10 * (n + m) + 100``, is far above
        what any known instance needs; it is deliberately not ``n``.
    kernel : {"auto", "numba", "numpy"}
        ``"numba"``: the compiled loop of :mod:`cyclecheck.algebra.kernels`; ``"numpy"``: the
        vectorized version of this module; ``"auto"`` (default): numba from
        :data:`KERNEL_MIN_PLACES` places on (numpy when numba cannot be imported). Both give
        the same cycle times and circuits; biases agree to rounding.

    Returns
    -------
    HowardResult

    Raises
    ------
    NotLive, Unfed
        If the graph is not live.
    OutOfRange
        If a circuit weight or a bias exceeds the range of floating point.
    MaxPlusError
        If the iteration limit is reached.

    References
    ----------
    Cochet-Terrasson et al. (1998), multichain policy iteration; Dasdan (2004) for its
    behaviour in practice. See the module docstring.

    Examples
    --------
    A single server (self-loop with one token) feeding a second one, duration 3 then 2:

    >>> g = EventGraph(duration=[3.0, 2.0], source=[0, 0, 1], target=[0, 1, 1],
    ...                tokens=[1, 0, 1], hold=[0.0, 0.0, 0.0])
    >>> howard(g).cycle_time.tolist()
    [3.0, 3.0]
    """
    if kernel not in KERNELS:
        raise ValueError(f"kernel must be one of {KERNELS}, got {kernel!r}")
    check_live(graph)
    if not np.all(np.isfinite(graph.weight)):
        p = int(np.flatnonzero(~np.isfinite(graph.weight))[0])
        raise _overflow(f"the hold of place {p} plus the duration of its target")
    n, m = graph.n_transitions, graph.n_places
    limit = max_iterations if max_iterations is not None else 10 * (n + m) + 100
    places = _SortedPlaces.of(graph)
    # Start from the heaviest input place of each transition, per token.
    _, policy = places.segment_argmax(places.weight / np.maximum(places.tokens, 1.0))
    compiled = _kernels() if kernel == "numba" or (kernel == "auto"
                                                    and m >= KERNEL_MIN_PLACES) else None
    if kernel == "numba" and compiled is None:
        raise ImportError("kernel='numba' needs numba: pip install numba")
    if compiled is not None:
        return _howard_compiled(compiled, graph, places, policy, limit)
    iterations = 0
    eta_steps = 0  # consecutive improvements of eta
    while True:
        ev = _evaluate(places, policy)
        eta_src = ev.eta[places.source]
        best_eta, arg_eta = places.segment_argmax(eta_src)
        # Compare with the value of the place in force, computed the same way, so that rounding
        # cancels; a switch must change the policy (else a tie could loop forever).
        improve = _exceeds(best_eta, eta_src[policy]) & (arg_eta != policy)
        if improve.any():
            policy = np.where(improve, arg_eta, policy)
            eta_steps += 1
            if eta_steps % SPREAD_AFTER == 0:
                # The largest ratio is creeping along a long chain one place per iteration.
                policy = places.spread_largest(ev.eta, policy)
        else:
            eta_steps = 0
            eta_tgt = ev.eta[places.target]
            value = places.weight - eta_tgt * places.tokens + ev.bias[places.source]
            value[_exceeds(eta_tgt, eta_src)] = -np.inf
            best_val, arg_val = places.segment_argmax(value)
            # The bias is a sum along a chain: its rounding scales with the weights summed.
            improve = _exceeds(best_val, value[policy], places.max_weight) & (arg_val != policy)
            if not improve.any():
                break
            policy = np.where(improve, arg_val, policy)
        iterations += 1
        if iterations > limit:
            raise _not_converged(limit)

    policy = places.order[policy]
    circuits = [_circuit(graph, policy, _walk_circuit(graph, policy, int(r))) for r in ev.roots]
    circuits.sort(key=lambda c: (-c.ratio, c.transitions))
    return HowardResult(ev.eta, ev.bias, policy, circuits, iterations, ev.bias_scale)


def _not_converged(limit: int) -> MaxPlusError:
    return MaxPlusError(f"Howard policy iteration did not converge in {limit} improvements")


def _kernels():  # type: ignore[no-untyped-def]
    """The compiled kernels, or None when numba cannot be imported."""
    try:
        from . import kernels
    except ImportError:
        return None
    return kernels


def _howard_compiled(kernels, graph: EventGraph, places: _SortedPlaces,  # type: ignore[no-untyped-def]
                     policy: np.ndarray, limit: int) -> HowardResult:
    """Howard's iteration as one compiled loop (:func:`kernels.howard_iterate`)."""
    out_starts, out_places = places.out_adjacency()
    # 32-bit indices where they fit: half the memory traffic of the passes over the places.
    index = np.int32 if graph.n_places < 2**31 - 1 else np.int64

    def idx(a: np.ndarray) -> np.ndarray:
        return np.ascontiguousarray(a, dtype=index)

    args = (idx(places.source), idx(places.target), places.weight, places.tokens,
            idx(places.starts), places.max_weight, idx(out_starts), idx(out_places),
            idx(policy), RTOL, SPREAD_AFTER, limit)
    try:
        status, iterations, eta, bias, scale, is_root = kernels.howard_iterate(*args)
    except OSError:  # the cache location accepted the kernels but cannot store them
        kernels.disable_cache()
        status, iterations, eta, bias, scale, is_root = kernels.howard_iterate(*args)
    policy = args[8].astype(np.int64)
    if status == kernels.STATUS_TOKEN_FREE:
        raise MaxPlusError("a policy circuit holds no token: the graph is not live")
    if status == kernels.STATUS_OVERFLOW:
        raise _overflow()
    if status == kernels.STATUS_NOT_CONVERGED:
        raise _not_converged(limit)
    policy = places.order[policy]
    nodes, offsets = kernels.policy_circuits(graph.source[policy], is_root)
    circuits = [_circuit(graph, policy, nodes[offsets[i]:offsets[i + 1]])
                for i in range(offsets.size - 1)]
    circuits.sort(key=lambda c: (-c.ratio, c.transitions))
    return HowardResult(eta, bias, policy, circuits, int(iterations), scale)


def _walk_circuit(graph: EventGraph, policy: np.ndarray, root: int) -> list[int]:
    """The transitions of the policy circuit through ``root``, in circuit order from it."""
    back = [root]
    node = int(graph.source[policy[root]])
    while node != root:
        back.append(node)
        node = int(graph.source[policy[node]])
    # Walking predecessors gives the circuit backwards; place policy[x] enters x.
    return [root, *reversed(back[1:])]


def _circuit(graph: EventGraph, policy: np.ndarray, nodes) -> Circuit:  # type: ignore[no-untyped-def]
    """The circuit through ``nodes`` (circuit order): place ``i`` enters ``nodes[i + 1]``."""
    nodes = np.asarray(nodes, dtype=np.int64)
    places = policy[np.roll(nodes, -1)]
    try:
        weight = math.fsum(graph.weight[places].tolist())
    except OverflowError:
        raise _overflow("the weight of a critical circuit") from None
    if not math.isfinite(weight):
        raise _overflow("the weight of a critical circuit")
    tokens = int(graph.tokens[places].sum())
    return Circuit(tuple(nodes.tolist()), tuple(places.tolist()), weight, tokens)
