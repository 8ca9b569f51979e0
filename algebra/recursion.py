r"""The firing-time recursion of a timed event graph, deterministic and random.

Semantics
---------
Firings are numbered from 1. For transition ``t`` and firing ``k``:

.. math::

    x_t(k) = d_t(k) + \max_{p = (u \to t)} \mathrm{term}_p(k), \qquad
    \mathrm{term}_p(k) = \begin{cases} 0 & k \le m_p \\
                         x_u(k - m_p) + h_p(k) & k > m_p \end{cases}

where ``m_p`` is the initial marking of place ``p``. Random draws are indexed by the
**consuming** firing: ``h_p(k)`` is the hold used by firing ``k`` of the target of ``p``
(draws for ``k <= m_p`` exist but are unused) and ``d_t(k)`` the duration of firing ``k`` of
``t``. The recursion is the max-plus system ``x(k) = ⊕_j A_j(k) ⊗ x(k−j)`` of
:func:`~cyclecheck.algebra.semiring.event_graph_matrices`, evaluated without building matrices.

How it is computed
------------------
Places with tokens read firings already computed; they come from a ring buffer that keeps the
last ``B = max_p m_p`` firings of every transition (``B + 1`` slots, memory ``(B + 1)·n·R``
floats, independent of the number of firings). Places without tokens make the implicit part
``x = A_0 ⊗ x ⊕ b``: in a live graph the token-free subgraph is acyclic, so the transitions are
processed in its topological levels. Within a level, transitions of similar in-degree form a
group whose input places are gathered in one ``take`` into a padded ``(D·T, R)`` block; the
maximum over inputs is ``D − 1`` elementwise maxima of contiguous ``(T, R)`` slices. All
replications are processed by the same calls, so the Python work per firing is a handful of
numpy calls per group, whatever ``R``.

The argmax record
-----------------
Which input place set each firing is computed afterwards, for a whole chunk of firings at once,
from the stored terms: for firing ``k`` of ``t`` in replication ``r``, the input place whose term
reaches the maximum, ties going to the smallest place index, a place's term being 0 while
``k <= m_p`` (it competes with that value). This *argmax record* is the one currency shared
by every engine of the recursion (this one and any compiled twin): the criticality counts are
its histogram, and the derivatives of :mod:`cyclecheck.algebra.lineage` are sums along the
paths it defines.

References
----------
.. [1] F. Baccelli, G. Cohen, G. J. Olsder, J.-P. Quadrat, *Synchronization and Linearity*,
   Wiley, 1992: §2.5 (the recursion of a timed event graph, its implicit part and its
   reduction to x(k) = A x(k−1)), ch. 3 (x = A0 x ⊕ b and its least solution A0* b),
   ch. 7–8 (stochastic event graphs and the growth rate of x(k)).
"""

from __future__ import annotations

import importlib.util
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from itertools import pairwise
from typing import Any

import numpy as np

from .eventgraph import EventGraph, check_live
from .exceptions import InvalidArray
from .lineage import LineageSweep, _add_in_turn

__all__ = [
    "DETERMINISTIC_MIN_STEPS",
    "KERNELS",
    "KERNEL_MIN_WORK",
    "BlockSource",
    "RandomRecursion",
    "RecursionRun",
    "choose_kernel",
    "firing_times",
    "kernel_loaded",
    "load_kernel",
    "transient",
    "within",
]

#: ``source(first, count)`` gives the draws for firings ``first .. first+count−1``, shape
#: ``(count, R, n)`` for durations or ``(count, R, m)`` for holds (or anything that
#: broadcasts to that shape).
BlockSource = Callable[[int, int], np.ndarray]

#: The implementations of :class:`RandomRecursion`: ``"numba"`` (compiled), ``"numpy"``
#: (vectorized, its twin) and ``"auto"`` (:func:`choose_kernel`).
KERNELS = ("auto", "numba", "numpy")
#: ``kernel="auto"`` compiles from this much work on (firings × replications × (transitions +
#: places)): below it the numpy version is done before numba is imported and its kernels
#: loaded from the cache (measured: see tests/bench/README.md).
KERNEL_MIN_WORK = 5_000_000
#: :func:`firing_times` compiles from this many (firing, level) steps on: numpy takes 3-5 µs a
#: step, so about a second on the 2-core machine, what loading numba and the kernels costs.
DETERMINISTIC_MIN_STEPS = 300_000
#: Memory budget (float elements) of one chunk of draws and outputs in :meth:`RandomRecursion.run`.
_CHUNK_ELEMENTS = 1 << 21
#: Largest history (ring buffer) of firing times the recursion keeps, in float elements (8 GiB).
_HISTORY_ELEMENTS = 1 << 30
#: Stand-ins for the kernel's outputs that are not wanted (it takes arrays of fixed types).
_NO_F3 = np.empty((0, 0, 0))
_NO_I3 = np.empty((0, 0, 0), dtype=np.int32)
_NO_I2 = np.empty((0, 0), dtype=np.int64)
_NO_F2 = np.empty((0, 0))
#: Largest precomputed table of ring-buffer read positions (elements).
_INDEX_TABLE_ELEMENTS = 1 << 22
_INDEX_TABLE_ARRAYS = 1 << 16


def _zero_token_levels(graph: EventGraph) -> np.ndarray:
    """Topological level of every transition in the subgraph of token-free places.

    Level 0: no token-free input place; level ``L``: the longest token-free path into the
    transition has ``L`` places. The caller has checked liveness, so the subgraph is acyclic.
    """
    n = graph.n_transitions
    zero = graph.tokens == 0
    src, dst = graph.source[zero], graph.target[zero]
    order = np.argsort(src, kind="stable")
    dst_by_src = dst[order]
    starts = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(np.bincount(src, minlength=n), out=starts[1:])
    remaining = np.bincount(dst, minlength=n)
    level = np.zeros(n, dtype=np.int64)
    frontier = np.flatnonzero(remaining == 0)
    depth = 0
    while frontier.size:
        level[frontier] = depth
        lo, hi = starts[frontier], starts[frontier + 1]
        sizes = hi - lo
        if sizes.sum() == 0:
            break
        # positions lo[i] .. hi[i]-1 for every frontier transition, concatenated
        offsets = np.repeat(lo - np.cumsum(sizes) + sizes, sizes) + np.arange(sizes.sum())
        heads = dst_by_src[offsets]
        np.subtract.at(remaining, heads, 1)
        cand = np.unique(heads)
        frontier = cand[remaining[cand] == 0]
        depth += 1
    return level


class _Engine:
    """The vectorized recursion over ``R`` replications, in an internal element order.

    Transitions are renumbered by (level, degree class, original index), ``perm[i]`` being the
    original index of internal transition ``i``. Each (level, degree class) is a *group* of
    ``T`` consecutive transitions with in-degree in ``(D/2, D]``; their input places are padded
    to ``D`` slots by repeating the transition's last place (the maximum is unchanged) and laid
    out slot-major, slot ``j`` of the group's ``i``-th transition at position ``ga + j·T + i``.
    The maximum over input places is then ``D − 1`` elementwise maxima of contiguous
    ``(T, R)`` blocks (``np.maximum.reduceat`` on 2-D arrays is an order of magnitude slower).
    Slots list a transition's places by increasing original index, so "the first place reaching
    the maximum" is the one with the smallest index.

    The ring buffer ``H`` has ``S = B + 1`` slots of ``n`` rows: firing ``k`` is written to slot
    ``k mod S`` while places with ``1 <= m_p <= B`` tokens read slot ``(k − m_p) mod S``, never
    the one being written; places without tokens read the current slot, already written by the
    lower levels.
    """

    def __init__(self, graph: EventGraph, replications: int) -> None:
        check_live(graph)
        if int(replications) != replications or replications < 1:
            raise InvalidArray(f"replications must be an integer >= 1, got {replications}")
        R = int(replications)
        n, m = graph.n_transitions, graph.n_places
        if n == 0:
            raise InvalidArray("the event graph has no transition")
        level = _zero_token_levels(graph)
        indeg = graph.in_degree
        dclass = np.ceil(np.log2(indeg)).astype(np.int64)  # in-degree >= 1 (checked live)
        perm = np.lexsort((np.arange(n), dclass, level))
        inv = np.empty(n, dtype=np.int64)
        inv[perm] = np.arange(n)
        key = (level * (dclass.max() + 1) + dclass)[perm]
        bounds = np.flatnonzero(np.r_[True, key[1:] != key[:-1], True])
        order, starts = graph.by_target  # places of each target by increasing index

        groups: list[tuple[int, int, int, int, int]] = []
        slots: list[np.ndarray] = []
        ga = 0
        for a, b in pairwise(bounds.tolist()):
            ts = perm[a:b]
            D = int(indeg[ts].max())
            j = np.minimum(np.arange(D)[:, None], indeg[ts][None, :] - 1)
            slots.append(order[starts[ts][None, :] + j].ravel())
            groups.append((a, b, D, ga, ga + D * (b - a)))
            ga += D * (b - a)
        pslot = np.concatenate(slots)
        tok = graph.tokens[pslot]
        src = inv[graph.source[pslot]]
        B = int(graph.tokens.max())
        S = B + 1
        if S * n * R > _HISTORY_ELEMENTS:
            raise InvalidArray(
                f"a place holds {B:,} tokens: the recursion would keep the last {B:,} firings of "
                f"{n:,} transitions in {R:,} replications ({8 * S * n * R / 2**30:,.1f} GiB); "
                "lower the markings to the firings run first (recursion.within)")

        self.n, self.m, self.R, self.B, self.S = n, m, R, B, S
        self.perm, self.inv, self.pslot, self.groups = perm, inv, pslot, groups
        self.P = int(pslot.size)
        self.k = 0
        self.H = np.full((S * n, R), np.nan)
        self.terms = np.empty((self.P, R))
        self.mx = np.empty((n, R))
        self.d_const = graph.duration[perm][:, None]
        self.h_const = graph.hold[pslot][:, None] if graph.hold.any() else None
        self.tok = [tok[g[3] : g[4]] for g in groups]
        self.src = [src[g[3] : g[4]] for g in groups]
        # per slot position: tokens and (internal) source transition, for the lineage sweep
        self.tok_all, self.src_all = tok, src
        lv = level[perm]
        cuts = np.flatnonzero(np.r_[True, lv[1:] != lv[:-1], True])
        #: internal ranges [a, b) of the transitions of each token-free level, ascending
        self.levels = [(int(a), int(b)) for a, b in pairwise(cuts.tolist())]
        self.idx: list[list[np.ndarray]] | None = None
        # one array per (slot, group): bounded in elements and in Python objects
        if S * self.P <= _INDEX_TABLE_ELEMENTS and S * len(groups) <= _INDEX_TABLE_ARRAYS:
            self.idx = [
                [((s - t) % S) * n + u for t, u in zip(self.tok, self.src, strict=True)]
                for s in range(S)
            ]
        self.slot = [self.H[s * n : (s + 1) * n] for s in range(S)]
        # For the compiled kernel: the real slots (no padding) of each transition, by
        # increasing place index, transitions in internal order (CSR). Slot j of the group's
        # i-th transition is at ga + j·T + i.
        pos, owner = [], []
        for a, b, D, ga, _ in groups:
            T = b - a
            flat = np.flatnonzero(np.arange(D)[:, None] < indeg[perm[a:b]][None, :])
            pos.append(ga + flat)
            owner.append(a + flat % T)
        by_owner = np.argsort(np.concatenate(owner), kind="stable")
        self.k_slots = np.concatenate(pos)[by_owner].astype(np.int64)
        self.k_starts = np.zeros(n + 1, dtype=np.int64)
        np.cumsum(indeg[perm], out=self.k_starts[1:])
        self.kernel: Any = None  # the compiled kernels module, when this engine uses them
        self.chunk_terms = np.empty((0, self.P, R))  # the terms of a chunk (numpy)
        self.tok_all = np.ascontiguousarray(tok, dtype=np.int64)
        self.src_all = np.ascontiguousarray(src, dtype=np.int64)
        self.pslot = np.ascontiguousarray(pslot, dtype=np.int64)

    def current(self) -> np.ndarray:
        """x(k) of the last firing, shape (n, R), internal order (zeros before the first)."""
        if self.k == 0:
            return np.zeros((self.n, self.R))
        return self.slot[self.k % self.S]

    def advance(
        self,
        count: int,
        dur: np.ndarray,
        hold: np.ndarray | None,
        rec: np.ndarray | None,
        terms: np.ndarray | None,
        marks: np.ndarray | None = None,
        xs: np.ndarray | None = None,
    ) -> None:
        """Compute ``count`` firings with numpy.

        ``dur``: (count, n, R) per firing or (n, 1) fixed, internal order. ``hold``: (count,
        P, R) per firing or (P, 1) fixed, in slot order; ``None`` for zero holds. ``rec``
        (count, n, R) receives x(k); ``terms`` (count, P, R) receives the terms of every slot
        (for the argmax record); ``xs[j]`` (n, R) receives x(k) of the ``marks[j]``-th firing
        of the call (``marks`` increasing).
        """
        add, maximum = np.add, np.maximum
        H, n, S = self.H, self.n, self.S
        groups, idx_table, tok, mx = self.groups, self.idx, self.tok, self.mx
        fixed_d = dur.ndim == 2
        fixed_h = hold is not None and hold.ndim == 2
        k = self.k
        next_mark = 0
        n_marks = 0 if marks is None else len(marks)
        for i in range(count):
            k += 1
            s = k % S
            d = dur if fixed_d else dur[i]
            h = hold if fixed_h or hold is None else hold[i]
            tv_all = self.terms if terms is None else terms[i]
            idx_s = idx_table[s] if idx_table is not None else None
            out_s = self.slot[s]
            early = k <= self.B
            for g, (a, b, D, ga, gb) in enumerate(groups):
                tv = tv_all[ga:gb]
                if idx_s is not None:
                    H.take(idx_s[g], axis=0, out=tv, mode="clip")
                else:
                    H.take(((s - self.tok[g]) % S) * n + self.src[g], axis=0, out=tv, mode="clip")
                if h is not None:
                    add(tv, h[ga:gb], out=tv)
                if early:
                    tv[tok[g] >= k] = 0.0  # the initial tokens, available at time 0
                if D == 1:
                    add(tv, d[a:b], out=out_s[a:b])
                    continue
                T = b - a
                mv = mx[a:b]
                maximum(tv[:T], tv[T : 2 * T], out=mv)
                for j in range(2, D):
                    maximum(mv, tv[j * T : (j + 1) * T], out=mv)
                add(mv, d[a:b], out=out_s[a:b])
            if rec is not None:
                rec[i] = self.slot[s]
            if next_mark < n_marks and marks[next_mark] == i:  # type: ignore[index]
                xs[next_mark] = self.slot[s]  # type: ignore[index]
                next_mark += 1
        self.k = k

    def step(self, count: int, dur: np.ndarray, hold: np.ndarray | None,
             times: np.ndarray | None, record: np.ndarray | None, counts: np.ndarray | None,
             marks: np.ndarray, xs: np.ndarray) -> None:
        """Compute ``count`` firings on this engine's implementation (numpy or compiled: the
        same numbers bit for bit).

        ``dur`` (count, n, R) and ``hold`` (count, P, R) or None, as for :meth:`advance`.
        Written when not None: ``times`` (count, n, R) the firing times, ``record`` (count, n,
        R) int32 the argmax record in slot positions; ``counts`` (m, R) += the firings each
        place set. ``xs[j]`` (n, R) = x(k) of the ``marks[j]``-th firing of the call.
        """
        if self.kernel is not None:
            self.kernel.advance(
                self.H, self.n, self.S, self.k, self.k_starts, self.k_slots, self.tok_all,
                self.src_all, self.pslot, dur, _NO_F3 if hold is None else hold,
                hold is not None, _NO_F3 if times is None else times, times is not None,
                _NO_I3 if record is None else record, record is not None,
                _NO_I2 if counts is None else counts, counts is not None, marks, xs)
            self.k += count
            return
        if record is None and counts is None:
            self.advance(count, dur, hold, times, None, marks, xs)
            return
        if self.chunk_terms.shape[0] < count:
            self.chunk_terms = np.empty((count, self.P, self.R))
        terms = self.chunk_terms[:count]
        self.advance(count, dur, hold, times, terms, marks, xs)
        rec = record if record is not None else np.empty((count, self.n, self.R), np.int32)
        self.setters(terms, rec)
        if counts is not None:
            self.count_critical(rec, counts)

    def setters(self, terms: np.ndarray, out: np.ndarray) -> None:
        """Write to ``out`` (c, n, R) the argmax record of ``terms`` (c, P, R).

        Entry ``[i, t, r]`` is the slot position (index into :attr:`pslot`) of the input place
        of internal transition ``t`` that set the firing: the first slot reaching the maximum,
        slots listing places by increasing index, so ties go to the smallest place index; a
        padded slot repeats an earlier one and is never chosen.
        """
        c = terms.shape[0]
        for a, b, D, ga, gb in self.groups:
            T = b - a
            own = (ga + np.arange(T))[None, :, None]
            if D == 1:
                out[:, a:b] = own  # the only input place sets every firing
                continue
            v = terms[:, ga:gb].reshape(c, D, T, -1)
            top = np.maximum(v[:, 0], v[:, 1])
            for j in range(2, D):
                np.maximum(top, v[:, j], out=top)
            first = (v == top[:, None]).argmax(axis=1)  # (c, T, R): first slot at the top
            out[:, a:b] = own + first * T

    def count_critical(self, record: np.ndarray, counts: np.ndarray) -> None:
        """Add to ``counts`` (m, R) the firings each place set, from a record (c, n, R)."""
        R = self.R
        places = self.pslot[record] * R + np.arange(R)
        counts += np.bincount(places.ravel(), minlength=self.m * R).reshape(self.m, R)


def kernel_loaded() -> bool:
    """Whether the compiled kernels are loaded in this process (nothing is imported)."""
    mod = sys.modules.get(f"{__package__}.recursion_kernel")
    return mod is not None and bool(getattr(mod, "PREPARED", False))


def load_kernel(announce: Callable[[str], None] | None = None) -> Any:
    """The compiled kernels (:mod:`~cyclecheck.algebra.recursion_kernel`), compiled or loaded
    from numba's cache; None when numba cannot be imported.

    ``announce(text)`` is called first when they must be compiled (a cold cache: the first
    run after an install), which takes seconds.
    """
    try:
        from . import recursion_kernel
    except ImportError:
        return None
    if not recursion_kernel.PREPARED:
        if announce is not None and not recursion_kernel.compiled_on_disk():
            announce("compiling the recursion kernels (first run only)")
        recursion_kernel.prepare()
    return recursion_kernel


def choose_kernel(graph: EventGraph, replications: int, firings: int | None = None,
                  kernel: str = "auto") -> str:
    """The implementation of the random recursion for a run: ``"numba"`` or ``"numpy"``.

    ``kernel="auto"`` picks the compiled loop when numba can be imported and either the
    kernels are loaded in this process already or the run's work, ``firings × replications ×
    (transitions + places)``, is at least :data:`KERNEL_MIN_WORK`; else numpy, which is done
    before numba would be ready. Other values are returned as they are.
    """
    if kernel not in KERNELS:
        raise ValueError(f"kernel must be one of {KERNELS}, got {kernel!r}")
    if kernel != "auto":
        return kernel
    if kernel_loaded():
        return "numba"
    if firings is None or importlib.util.find_spec("numba") is None:
        return "numpy"
    work = int(firings) * int(replications) * (graph.n_transitions + graph.n_places)
    return "numba" if work >= KERNEL_MIN_WORK else "numpy"


def firing_times(graph: EventGraph, n_firings: int, *, kernel: str = "auto") -> np.ndarray:
    r"""Firing times ``x_t(k)`` of the deterministic recursion, ``k = 1 .. n_firings``.

    Parameters
    ----------
    graph : EventGraph
        A live event graph; its fixed durations and holds are used.
    n_firings : int
        Number ``K`` of firings of every transition.
    kernel : {"auto", "numba", "numpy"}
        The compiled loop or the vectorized one (the same numbers bit for bit). ``"auto"``
        compiles as :func:`choose_kernel` does, and also from
        :data:`DETERMINISTIC_MIN_STEPS` (firing, level) steps on, a level being one of the
        token-free subgraph's (:func:`_zero_token_levels`), which numpy computes in turn.

    Returns
    -------
    ndarray, shape (K, n)
        Row ``k − 1`` holds ``x(k)``.

    Raises
    ------
    NotLive, Unfed
        If the graph is not live (:func:`~cyclecheck.algebra.eventgraph.check_live`).

    References
    ----------
    .. [1] Baccelli et al., *Synchronization and Linearity*, 1992, §2.5.

    Examples
    --------
    Two machines in a loop with one part, the first needing 2 time units, the second 3:

    >>> from cyclecheck.algebra.eventgraph import EventGraph
    >>> g = EventGraph(duration=[2.0, 3.0], source=[0, 1], target=[1, 0], tokens=[0, 1],
    ...                hold=[0.0, 0.0])
    >>> firing_times(g, 3)
    array([[ 2.,  5.],
           [ 7., 10.],
           [12., 15.]])
    """
    K = _count(n_firings, "n_firings")
    eng = _Engine(within(graph, K), 1)
    rec = np.empty((K, eng.n, 1))
    # numpy spends a few calls per level of the token-free subgraph and firing: a ring of 1000
    # stations and one pallet is 1000 levels deep (2000 firings: 11 s with holds, compiled 0.2 s)
    name = choose_kernel(graph, 1, K, kernel)
    if kernel == "auto" and K * len(eng.groups) >= DETERMINISTIC_MIN_STEPS and (
            importlib.util.find_spec("numba") is not None):
        name = "numba"
    if name == "numba":
        eng.kernel = load_kernel()
        if eng.kernel is None and kernel == "numba":
            raise ImportError("kernel='numba' needs numba: pip install numba")
    if eng.kernel is not None:
        # The compiled loop reads one row of durations and holds per firing: the fixed ones
        # repeated over a chunk of firings, reused for every chunk.
        chunk = max(1, min(K, _CHUNK_ELEMENTS // (eng.n + eng.P)))
        dur = np.repeat(eng.d_const[None], chunk, axis=0)
        hold = None if eng.h_const is None else np.repeat(eng.h_const[None], chunk, axis=0)
        no_marks = np.empty(0, dtype=np.int64)
        for first in range(0, K, chunk):
            count = min(chunk, K - first)
            eng.step(count, dur[:count], None if hold is None else hold[:count],
                     rec[first : first + count], None, None, no_marks,
                     np.empty((0, eng.n, 1)))
    else:
        eng.advance(K, eng.d_const, eng.h_const, rec, None)
    return rec[:, eng.inv, 0]


def within(graph: EventGraph, n_firings: int) -> EventGraph:
    """The graph with every marking above ``n_firings`` lowered to ``n_firings``.

    A place with ``m_p >= K`` tokens delivers no token to the first ``K`` firings of its
    target (their term is 0), so both graphs have the same firing times ``x(1) .. x(K)``; the
    recursion then keeps ``min(max m_p, K)`` firings of history instead of ``max m_p`` (a place
    may hold 10^12 tokens).
    """
    cap = max(int(n_firings), 1)
    if graph.n_places == 0 or int(graph.tokens.max()) <= cap:
        return graph
    return EventGraph(graph.duration, graph.source, graph.target,
                      np.minimum(graph.tokens, cap), graph.hold, graph.names)


def transient(
    graph: EventGraph, cycle_time: float | np.ndarray, cyclicity: int, n_firings: int
) -> int | None:
    r"""Measured transient of the deterministic recursion.

    The smallest ``k0 >= 1`` with ``x(k + c) = x(k) + c·λ`` for all ``k0 <= k <= K − c``
    (relative tolerance ``1e-9``), where ``x`` is :func:`firing_times` over ``K`` firings.

    Parameters
    ----------
    graph : EventGraph
    cycle_time : float or array_like of shape (n,)
        λ, or one cycle time per transition for a graph that is not strongly connected.
    cyclicity : int
        The period ``c >= 1``, in firings.
    n_firings : int
        ``K``, the horizon of the check.

    Returns
    -------
    int or None
        ``k0``; ``None`` if the regime does not hold at ``k = K − c`` (not reached within
        ``K``, or λ and ``c`` are not those of the graph).

    References
    ----------
    .. [1] Baccelli et al., *Synchronization and Linearity*, 1992, §3.7 (cyclicity and the
       periodic regime of x(k+1) = A x(k)).

    Examples
    --------
    Heidergott, Olsder & van der Woude (2006), *Max Plus at Work*, from memory: ``A =
    [[3, 7], [2, 4]]`` has λ = 4.5 and the orbit from 0 is periodic with period 2 after one
    step. One place per entry, with one token and hold ``a_tu``:

    >>> from cyclecheck.algebra.eventgraph import EventGraph
    >>> g = EventGraph(duration=[0.0, 0.0], source=[0, 1, 0, 1], target=[0, 0, 1, 1],
    ...                tokens=[1, 1, 1, 1], hold=[3.0, 7.0, 2.0, 4.0])
    >>> transient(g, 4.5, 2, 50)
    2
    >>> transient(g, 4.5, 1, 50) is None
    True
    """
    K = _count(n_firings, "n_firings")
    c = _count(cyclicity, "cyclicity")
    if c < 1:
        raise InvalidArray("cyclicity must be >= 1")
    lam = np.broadcast_to(np.asarray(cycle_time, dtype=np.float64), (graph.n_transitions,))
    if K <= c:
        return None
    X = firing_times(graph, K)
    later, earlier = X[c:], X[:-c]
    scale = np.maximum(np.abs(later), np.abs(earlier) + c * np.abs(lam))
    ok = np.all(np.abs(later - earlier - c * lam) <= 1e-9 * scale, axis=1)
    if not ok[-1]:
        return None
    bad = np.flatnonzero(~ok)
    return 1 if bad.size == 0 else int(bad[-1]) + 2


def _count(value: int, name: str) -> int:
    if int(value) != value or value < 0:
        raise InvalidArray(f"{name} must be an integer >= 0, got {value}")
    return int(value)


@dataclass(frozen=True)
class RecursionRun:
    """What :meth:`RandomRecursion.run` returns for the firings it computed.

    Attributes
    ----------
    checkpoints : ndarray of int, shape (J + 1,)
        Firing numbers ``k_0 < k_1 < … < k_J``: ``k_0`` is the last firing before the run (0
        at the start), then the end of every block.
    x : ndarray, shape (J + 1, R, n_obs)
        ``x_t(k_j)`` at the checkpoints for the observed transitions (``x(0) = 0``).
    observe : ndarray of int, shape (n_obs,)
        Original indices of the observed transitions (columns of ``x``).
    busy : ndarray, shape (R, n)
        Sum of the durations ``d_t(k)`` over the run's firings: busy time of each transition,
        for utilization ``busy / (x(k_J) − x(k_0))`` or ``busy / horizon``.
    critical : ndarray of int, shape (R, m), or None
        For each place, the number of the run's firings of its target that it set: it was the
        input place reaching the maximum (ties go to the place with the smallest index; while
        ``k <= m_p`` the place's term is 0 and it competes with that value). ``None`` when the
        recursion was built with ``criticality=False``.
    times : ndarray, shape (K, R, n), or None
        All firing times of the run (``record=True``), row ``i`` = firing ``k_0 + 1 + i``.
    setters : ndarray of int, shape (K, R, n), or None
        The argmax record (``setters=True``): entry ``[i, r, t]`` is the index of the input
        place of ``t`` that set firing ``k_0 + 1 + i`` in replication ``r``, by the rule of
        ``critical``.
    """

    checkpoints: np.ndarray
    x: np.ndarray
    observe: np.ndarray
    busy: np.ndarray
    critical: np.ndarray | None
    times: np.ndarray | None
    setters: np.ndarray | None = None

    @property
    def n_firings(self) -> int:
        """Number of firings computed in the run."""
        return int(self.checkpoints[-1] - self.checkpoints[0])

    def increments(self) -> np.ndarray:
        """``x(k_j) − x(k_{j−1})`` for every block, shape (J, R, n_obs): batch increments."""
        return np.diff(self.x, axis=0)

    def block_rates(self) -> np.ndarray:
        """Increments divided by the block lengths, shape (J, R, n_obs): batch means of the
        cycle time per block."""
        return self.increments() / np.diff(self.checkpoints)[:, None, None]

    def growth(self, start: int = 0) -> np.ndarray:
        """Growth rate ``(x(k_J) − x(k_start)) / (k_J − k_start)`` per replication and observed
        transition, shape (R, n_obs): a per-replication estimate of the cycle time."""
        span = self.checkpoints[-1] - self.checkpoints[start]
        if span <= 0:
            raise InvalidArray(f"no firing after checkpoint {start}")
        return (self.x[-1] - self.x[start]) / span


class RandomRecursion:
    r"""The recursion with random durations and holds, over ``R`` replications at once.

    Streaming: each :meth:`run` continues from the last firing computed, and memory does not
    grow with the number of firings (only with what is asked back: checkpoints, or all times
    with ``record=True``).

    Parameters
    ----------
    graph : EventGraph
        A live event graph (its own durations and holds are not used).
    duration_source : callable ``(first, count) -> array``
        ``d_t(k)`` for ``k = first .. first+count−1``: shape ``(count, R, n)`` (or
        broadcastable to it), finite and ``>= 0``.
    hold_source : callable ``(first, count) -> array``
        ``h_p(k)``, indexed by the consuming firing ``k``: shape ``(count, R, m)``.
    replications : int
        ``R``.
    criticality : bool
        Count, for every place, the firings it set (a few numpy calls more per firing).
    kernel : {"auto", "numba", "numpy"}
        The implementation: ``"numba"`` the compiled loop of
        :mod:`~cyclecheck.algebra.recursion_kernel`, ``"numpy"`` the vectorized one of this
        module, ``"auto"`` (default) as :func:`choose_kernel` decides. Both give the same
        numbers bit for bit (firing times, argmax record, counts, path sums).
    firings : int, optional
        How many firings the caller means to run, for ``"auto"``: the compiled loop pays from
        :data:`KERNEL_MIN_WORK` on.

    Attributes
    ----------
    lineage : LineageSweep, optional
        Receives every chunk of the argmax record with its draws
        (:class:`~cyclecheck.algebra.lineage.LineageSweep`, built by :meth:`track_lineage`).

    Raises
    ------
    NotLive, Unfed
        If the graph is not live.

    Notes
    -----
    Each replication ``r`` sees the draws ``[:, r, :]`` of the sources: the same numbers as a
    separate run of replication ``r`` alone.

    References
    ----------
    .. [1] Baccelli et al., *Synchronization and Linearity*, 1992, ch. 7–8 (stochastic event
       graphs: ``x(k)/k`` converges to the cycle time, the Lyapunov exponent).

    Examples
    --------
    >>> from cyclecheck.algebra.eventgraph import EventGraph
    >>> g = EventGraph(duration=[1.0, 1.0], source=[0, 1, 0, 1], target=[1, 0, 0, 1],
    ...                tokens=[0, 2, 1, 1], hold=[0.0, 0.0, 0.0, 0.0])
    >>> rng = np.random.default_rng(np.random.SeedSequence(7))
    >>> d = rng.exponential(1.0, size=(1000, 4, 2))
    >>> rec = RandomRecursion(g, lambda first, count: d[first - 1 : first - 1 + count],
    ...                       lambda first, count: np.zeros((count, 1, 4)), replications=4)
    >>> out = rec.run(1000, block=100)
    >>> out.x.shape, out.critical.shape, rec.firings
    ((11, 4, 2), (4, 4), 1000)
    """

    def __init__(
        self,
        graph: EventGraph,
        duration_source: BlockSource,
        hold_source: BlockSource,
        replications: int,
        *,
        criticality: bool = True,
        kernel: str = "auto",
        firings: int | None = None,
    ) -> None:
        self._engine = _Engine(graph, replications)
        name = choose_kernel(graph, replications, firings, kernel)
        if name == "numba":
            self._engine.kernel = load_kernel()
            if self._engine.kernel is None and kernel == "numba":
                raise ImportError("kernel='numba' needs numba: pip install numba")
        self.graph = graph
        self.duration_source = duration_source
        self.hold_source = hold_source
        self.criticality = bool(criticality)
        self.lineage: LineageSweep | None = None

    def track_lineage(
        self,
        frontiers: Sequence[Sequence[int] | np.ndarray],
        segments: Sequence[int] | np.ndarray,
        *,
        memory: int | None = None,
        lookahead: int | None = None,
    ) -> LineageSweep:
        """Sum the draws along the critical paths of the coming firings (the derivatives of the
        cycle time, :mod:`cyclecheck.algebra.lineage`); call before the first :meth:`run`.

        ``frontiers`` lists sets of transitions whose last firing the paths start from,
        ``segments`` the firing numbers ``0 = s_0 < … < s_J = K`` that split the sums. Call
        :meth:`LineageSweep.finish` after the last run (at firing ``s_J``).
        """
        if self._engine.k:
            raise InvalidArray("track_lineage must be called before the first run")
        self.lineage = LineageSweep(self._engine, frontiers, segments, memory=memory,
                                    lookahead=lookahead)
        return self.lineage

    @property
    def kernel(self) -> str:
        """The implementation in use: ``"numba"`` or ``"numpy"``."""
        return "numpy" if self._engine.kernel is None else "numba"

    @property
    def replications(self) -> int:
        """Number of replications ``R``."""
        return self._engine.R

    @property
    def firings(self) -> int:
        """Number of firings computed so far (the ``k`` of :meth:`state`)."""
        return self._engine.k

    def state(self) -> np.ndarray:
        """``x(k)`` of the last firing computed, shape (R, n); zeros before the first firing."""
        eng = self._engine
        return eng.current()[eng.inv].T.copy()

    def _draws(
        self,
        source: BlockSource,
        first: int,
        count: int,
        width: int,
        what: str,
        columns: np.ndarray,
        busy: np.ndarray | None = None,
    ) -> np.ndarray | None:
        """Call a source, check its block, return it as (count, len(columns), R) (a fresh
        array: the lineage keeps it); None for holds that are all 0. ``busy`` (len(columns),
        R), when given, gets the draws added firing after firing."""
        eng = self._engine
        R = eng.R
        raw = np.asarray(source(first, count), dtype=np.float64)
        try:
            block = np.broadcast_to(raw, (count, R, width))
        except ValueError:
            raise InvalidArray(
                f"{what} source returned shape {raw.shape} for firings {first}.."
                f"{first + count - 1}, expected ({count}, {R}, {width})"
            ) from None
        bad = InvalidArray(f"{what} source returned negative, NaN or infinite values for "
                           f"firings {first}..{first + count - 1}")
        if (eng.kernel is not None and raw.shape == block.shape and raw.flags.writeable
                and raw.flags.c_contiguous):
            # one compiled pass: the checks, the copy to the internal layout, the busy sums
            out = np.empty((count, columns.size, R))
            flags = eng.kernel.gather(raw, columns, out, _NO_F2 if busy is None else busy,
                                      busy is not None)
            if flags == 1:
                raise bad
            return None if what == "hold" and flags == 0 else out
        if raw.size and not (raw.min() >= 0 and raw.max() < np.inf):
            raise bad
        if what == "hold" and not raw.any():
            return None  # zero holds: skip the additions
        # internal layout: (firing, element in internal order, replication), contiguous (take
        # is faster than fancy indexing here)
        out = np.ascontiguousarray(np.take(block.transpose(0, 2, 1), columns, axis=1))
        if busy is not None:
            _add_in_turn(busy, out)
        return out

    def run(
        self,
        n_firings: int,
        block: int | None = None,
        *,
        record: bool = False,
        observe: Sequence[int] | np.ndarray | None = None,
        setters: bool = False,
    ) -> RecursionRun:
        """Compute the next ``n_firings`` firings of every transition in every replication.

        Parameters
        ----------
        n_firings : int
            ``K``, the number of firings to compute.
        block : int, optional
            Firings between checkpoints (default: one block, ``K``). The last block is shorter
            when ``block`` does not divide ``K``.
        record : bool
            Also return all firing times, shape (K, R, n).
        observe : sequence of int, optional
            Transitions whose firing times are kept at the checkpoints (default: all).
        setters : bool
            Also return the argmax record, shape (K, R, n).

        Returns
        -------
        RecursionRun
        """
        eng = self._engine
        K = _count(n_firings, "n_firings")
        b = K if block is None else _count(block, "block")
        if b < 1 and K > 0:
            raise InvalidArray("block must be >= 1")
        n, m, R = eng.n, eng.m, eng.R
        obs = np.arange(n) if observe is None else np.asarray(observe, dtype=np.int64)
        if obs.ndim != 1 or (obs.size and (obs.min() < 0 or obs.max() >= n)):
            raise InvalidArray(f"observe must list transition indices in 0..{n - 1}")
        rows = eng.inv[obs]
        k0 = eng.k
        ends = np.array([*range(k0 + b, k0 + K, b), k0 + K] if K else [], dtype=np.int64)
        checkpoints = np.r_[k0, ends].astype(np.int64)
        xs = np.empty((len(checkpoints), R, obs.size))
        xs[0] = eng.current()[rows].T
        times = np.empty((K, R, n)) if record else None
        busy = np.zeros((n, R))
        counts = np.zeros((m, R), dtype=np.int64) if self.criticality else None
        want_record = setters or self.lineage is not None
        setter_out = np.empty((K, R, n), dtype=np.int64) if setters else None
        P = eng.P
        # Chunks do not depend on the engine (nor on the checkpoints): the lineage sweep and
        # the busy sums see the same pieces whichever engine computes them.
        per_firing = R * (2 * n + P + (n if record else 0) + (P + n))
        chunk = max(1, _CHUNK_ELEMENTS // per_firing)
        rec = np.empty((min(chunk, K), n, R)) if record else None
        while eng.k < k0 + K:
            first = eng.k + 1
            count = min(chunk, k0 + K - eng.k)
            dur = self._draws(self.duration_source, first, count, n, "duration", eng.perm,
                              busy)
            hold = self._draws(self.hold_source, first, count, m, "hold", eng.pslot)
            assert dur is not None
            r = rec[:count] if rec is not None else None
            # a fresh array per chunk: the lineage keeps it until its paths are summed
            argmax = np.empty((count, n, R), dtype=np.int32) if want_record else None
            j0, j1 = np.searchsorted(ends, [first, first + count], side="left")
            marks = np.ascontiguousarray(ends[j0:j1] - first)
            at_marks = np.empty((j1 - j0, n, R))
            eng.step(count, dur, hold, r, argmax, counts, marks, at_marks)
            xs[1 + j0 : 1 + j1] = at_marks[:, rows, :].transpose(0, 2, 1)
            pos = first - 1 - k0
            if times is not None and r is not None:
                times[pos : pos + count] = r[:, eng.inv, :].transpose(0, 2, 1)
            if argmax is not None:
                if setter_out is not None:
                    setter_out[pos : pos + count] = (
                        eng.pslot[argmax][:, eng.inv, :].transpose(0, 2, 1))
                if self.lineage is not None:
                    self.lineage.feed(first, argmax, dur, hold)
        critical = counts.T.copy() if counts is not None else None
        return RecursionRun(
            checkpoints=checkpoints,
            x=xs,
            observe=obs,
            busy=busy[eng.inv].T.copy(),
            critical=critical,
            times=times,
            setters=setter_out,
        )
