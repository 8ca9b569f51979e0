r"""The timed event graph in max-plus form.

Representation
--------------
An event graph has ``n`` transitions, numbered ``0 .. n-1``, and ``m`` places. Place ``p`` is an
arc ``source[p] -> target[p]`` with an initial marking ``tokens[p]`` (an integer ``>= 0``) and a
holding time ``hold[p] >= 0``; transition ``t`` has a firing duration ``duration[t] >= 0``.
Parallel places and self-loops are allowed. The firing times obey

.. math::

    x_t(k) = d_t + \max_{p = (u \to t)} \bigl[ x_u(k - m_p) + h_p \bigr],

where the term of ``p`` is ``0`` when ``k <= m_p`` (initial tokens are available at time 0).

Every quantity of the algebra is a finite float here: a place is an arc, and an arc that is not
there is simply not in the arrays. ε = −∞ appears only in dense matrices built from the graph
(:mod:`cyclecheck.algebra.semiring`), never as a stored weight.

The weight of place ``p`` in the cycle-ratio problem is ``hold[p] + duration[target[p]]``: each
transition of a circuit is the target of exactly one place of that circuit, so the circuit's
weight is the sum of its durations and holds, and its ratio weight / tokens is its cycle time.

References
----------
.. [1] F. Baccelli, G. Cohen, G. J. Olsder, J.-P. Quadrat, *Synchronization and Linearity*,
   Wiley, 1992, ch. 2 (event graphs and their max-plus equations).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from .digraph import strong_components
from .exceptions import GraphStructureError, NotLive, Unfed

__all__ = [
    "MAX_TOKENS",
    "PEEL_ROUNDS",
    "EventGraph",
    "check_live",
    "find_token_free_circuit",
    "self_loop_servers",
    "strongly_connected_components",
    "token_free_acyclic",
]


MAX_TOKENS = 2**53
"""Largest initial marking of a place: integers up to 2^53 are exact in a float64 (a CSV column,
a ratio weight / tokens)."""


@dataclass(frozen=True, eq=False)
class EventGraph:
    """A timed event graph with fixed durations and holds.

    Parameters
    ----------
    duration : array_like of float, shape (n,)
        Firing duration of each transition.
    source, target : array_like of int, shape (m,)
        Input and output transition of each place.
    tokens : array_like of int, shape (m,)
        Initial marking of each place.
    hold : array_like of float, shape (m,)
        Holding time of each place.
    names : sequence of str, optional
        Transition names, used only in messages and results.

    Raises
    ------
    GraphStructureError
        If shapes disagree, an index is out of range, or a number is negative, NaN or infinite,
        or a marking above :data:`MAX_TOKENS`. (Finite numbers up to the float limit are
        accepted: the algebra raises :class:`~.exceptions.OutOfRange` where a sum would leave
        the range of doubles; model files are held to a lower limit by the application.)

    Examples
    --------
    Two machines in a loop with one part circulating:

    >>> g = EventGraph(duration=[2.0, 3.0], source=[0, 1], target=[1, 0], tokens=[0, 1],
    ...                hold=[0.0, 0.0])
    >>> g.n_transitions, g.n_places
    (2, 2)
    """

    duration: np.ndarray
    source: np.ndarray
    target: np.ndarray
    tokens: np.ndarray
    hold: np.ndarray
    names: tuple[str, ...] = field(default=())

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "duration", _float_array(self.duration, "duration"))
        set_(self, "hold", _float_array(self.hold, "hold"))
        n = self.duration.shape[0]
        m = self.hold.shape[0]
        for name in ("source", "target", "tokens"):
            raw = np.asarray(getattr(self, name))
            if raw.ndim != 1 or raw.shape[0] != m:
                raise GraphStructureError(f"{name} must have shape ({m},), got {raw.shape}")
            if (raw.size and raw.dtype.kind not in "iu"  # integer arrays need no test
                    and not np.all(np.equal(np.mod(raw, 1), 0))):
                raise GraphStructureError(f"{name} must hold integers")
            arr = _frozen(raw)
            if arr is None:
                arr = raw.astype(np.int64)
                arr.setflags(write=False)
            set_(self, name, arr)
        if m and (self.source.min() < 0 or self.source.max() >= n):
            raise GraphStructureError(f"source must lie in 0..{n - 1}")
        if m and (self.target.min() < 0 or self.target.max() >= n):
            raise GraphStructureError(f"target must lie in 0..{n - 1}")
        if m and self.tokens.min() < 0:
            raise GraphStructureError("tokens must be >= 0")
        if m and self.tokens.max() > MAX_TOKENS:
            raise GraphStructureError(f"tokens must be at most 2^53 = {MAX_TOKENS}")
        names = self.names
        # A tuple of str is kept as it is (testing the types is 3x faster than str() on each).
        if not (type(names) is tuple and set(map(type, names)) <= {str}):
            names = tuple(map(str, names)) if len(names) else ()
        if names and len(names) != n:
            raise GraphStructureError(f"names must have {n} entries, got {len(names)}")
        set_(self, "names", names)

    @property
    def n_transitions(self) -> int:
        """Number of transitions ``n``."""
        return int(self.duration.shape[0])

    @property
    def n_places(self) -> int:
        """Number of places ``m``."""
        return int(self.hold.shape[0])

    def name(self, t: int) -> str:
        """Name of transition ``t`` (its index when the graph carries no names)."""
        return self.names[t] if self.names else str(t)

    @cached_property
    def weight(self) -> np.ndarray:
        """Arc weight of each place in the cycle-ratio problem: ``hold + duration[target]``."""
        with np.errstate(over="ignore"):  # inf near the float limit: howard raises OutOfRange
            w = self.hold + self.duration[self.target]
        w.setflags(write=False)
        return w

    @cached_property
    def by_target(self) -> tuple[np.ndarray, np.ndarray]:
        """Places sorted by target transition, as ``(order, starts)``.

        ``order[starts[t]:starts[t + 1]]`` are the input places of ``t``: the CSR layout that
        lets a maximum over input places be one ``np.maximum.reduceat``.
        """
        order = np.argsort(self.target, kind="stable")
        counts = np.bincount(self.target, minlength=self.n_transitions)
        starts = np.zeros(self.n_transitions + 1, dtype=np.int64)
        np.cumsum(counts, out=starts[1:])
        order.setflags(write=False)
        starts.setflags(write=False)
        return order, starts

    @cached_property
    def components(self) -> tuple[int, np.ndarray]:
        """Strongly connected components, computed once (see
        :func:`strongly_connected_components`)."""
        count, labels = strong_components(self.n_transitions, self.source, self.target)
        labels.setflags(write=False)
        return int(count), labels

    @cached_property
    def token_free_circuit(self) -> tuple[int, ...] | None:
        """A circuit of places without tokens, computed once (see
        :func:`find_token_free_circuit`)."""
        circuit = _token_free_circuit(self)
        return None if circuit is None else tuple(circuit)

    @cached_property
    def in_degree(self) -> np.ndarray:
        """Number of input places of each transition."""
        return np.bincount(self.target, minlength=self.n_transitions)

    def with_values(self, duration: np.ndarray, hold: np.ndarray) -> EventGraph:
        """The same structure with other durations and holds (for example the mean values)."""
        return EventGraph(duration, self.source, self.target, self.tokens, hold, self.names)


def _frozen(values: object, dtype: type = np.int64) -> np.ndarray | None:
    """``values`` itself when it is a contiguous read-only array of ``dtype`` whose memory no
    array can write (every array it views is read-only too), else None (then a copy is made).

    Such arrays (a loaded model's) are shared instead of copied: nothing can change them.
    """
    if not (type(values) is np.ndarray and values.dtype == dtype
            and values.flags.c_contiguous):
        return None
    base: object = values
    while isinstance(base, np.ndarray):
        if base.flags.writeable:
            return None
        base = base.base
    return values if base is None else None


def _float_array(values: object, name: str) -> np.ndarray:
    arr = _frozen(values, np.float64)
    if arr is None:
        arr = np.array(values, dtype=np.float64)
    if arr.ndim != 1:
        raise GraphStructureError(f"{name} must be one-dimensional, got shape {arr.shape}")
    if not np.all(np.isfinite(arr)):
        raise GraphStructureError(f"{name} must be finite (no NaN or infinity)")
    if arr.size and arr.min() < 0:
        raise GraphStructureError(f"{name} must be >= 0")
    arr.setflags(write=False)
    return arr


def strongly_connected_components(graph: EventGraph) -> tuple[int, np.ndarray]:
    """Strongly connected components of the transition graph.

    Returns
    -------
    count : int
        Number of components.
    labels : ndarray of int, shape (n,)
        Component of each transition (read-only: computed once per graph).
    """
    return graph.components


def self_loop_servers(graph: EventGraph) -> np.ndarray:
    """Servers of each transition: the fewest tokens on its self-loops, 0 without one.

    A self-loop with ``s`` tokens makes firing ``k`` wait for firing ``k − s``: ``s`` servers
    taking jobs in turn. Several self-loops: the one with the fewest tokens binds.

    Examples
    --------
    >>> g = EventGraph([1.0, 1.0], [0, 0, 1], [0, 1, 1], [2, 0, 1], [0.0, 0.0, 0.0])
    >>> self_loop_servers(g).tolist()
    [2, 1]
    """
    servers = np.full(graph.n_transitions, np.iinfo(np.int64).max)
    loops = np.flatnonzero(graph.source == graph.target)
    np.minimum.at(servers, graph.source[loops], graph.tokens[loops])
    return np.where(servers == np.iinfo(np.int64).max, 0, servers)


def find_token_free_circuit(graph: EventGraph) -> list[int] | None:
    """One circuit made only of places without tokens, in circuit order, or ``None``.

    Such a circuit is a deadlock: none of its transitions can ever fire. Self-loops without a
    token count as circuits of length one.
    """
    circuit = graph.token_free_circuit
    return None if circuit is None else list(circuit)


def _token_free_circuit(graph: EventGraph) -> list[int] | None:
    empty = graph.tokens == 0
    src, dst = graph.source[empty], graph.target[empty]
    loops = src[src == dst]
    if loops.size:
        return [int(loops[0])]
    # Only the transitions these places join can lie on such a circuit: the components of
    # that smaller graph come in the order of the whole one's (a transition without such a
    # place is a component of its own, which changes no other's place in the order).
    nodes, ends = np.unique(np.concatenate([src, dst]), return_inverse=True)
    count, labels = strong_components(nodes.size, ends[: src.size], ends[src.size :])
    sizes = np.bincount(labels, minlength=count)
    cyclic = np.flatnonzero(sizes > 1)
    if cyclic.size == 0:
        return None
    # Walk inside one cyclic component until a transition repeats: that closes a circuit.
    comp = cyclic[0]
    inside = (labels[ends[: src.size]] == comp) & (labels[ends[src.size :]] == comp)
    succ = dict(zip(src[inside].tolist(), dst[inside].tolist(), strict=True))
    start = int(nodes[np.flatnonzero(labels == comp)[0]])
    seen: dict[int, int] = {}
    walk: list[int] = []
    node = start
    while node not in seen:
        seen[node] = len(walk)
        walk.append(node)
        node = succ[node]
    return walk[seen[node] :]


def check_live(graph: EventGraph) -> None:
    """Raise if the graph cannot run forever at a bounded rate.

    Raises
    ------
    NotLive
        If a circuit holds no token (deadlock).
    Unfed
        If a transition has no input place: nothing would bound its firing rate.
    """
    unfed = np.flatnonzero(graph.in_degree == 0)
    if unfed.size:
        raise Unfed(unfed.tolist())
    circuit = None if token_free_acyclic(graph) else find_token_free_circuit(graph)
    if circuit is not None:
        raise NotLive(circuit)


PEEL_ROUNDS = 32
"""Rounds of :func:`token_free_acyclic` before it leaves the question to the components."""


def token_free_acyclic(graph: EventGraph, rounds: int = PEEL_ROUNDS) -> bool:
    """True when the token-free places close no circuit, shown by peeling; False when
    peeling cannot tell (then :func:`find_token_free_circuit` decides).

    Each round removes the token-free places whose input transition no token-free place
    enters, or whose output transition none leaves: such a place lies on no circuit. When
    none is left, there is no circuit; when a round removes none, every place left lies on a
    walk that never ends, so there is one. A token-free path of ``2 r`` places takes ``r``
    rounds: live models have short ones (a long one, a line of buffers all empty, is left to
    the components after ``rounds`` rounds). Vectorized: it spares the components (and their
    imports) when the answer is "no circuit", the usual one.
    """
    empty = graph.tokens == 0
    src, dst = graph.source[empty], graph.target[empty]
    n = graph.n_transitions
    for _ in range(rounds):
        if not src.size:
            return True
        entered = np.zeros(n, dtype=bool)
        entered[dst] = True
        left = np.zeros(n, dtype=bool)
        left[src] = True
        keep = entered[src] & left[dst]
        if keep.all():
            return False
        src, dst = src[keep], dst[keep]
    return not src.size
