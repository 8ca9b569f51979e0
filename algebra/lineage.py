r"""Derivatives of the cycle time along the critical paths of the recursion.

Paths
-----
In the recursion of :mod:`cyclecheck.algebra.recursion`, firing ``k`` of ``t`` completes at
``x_t(k) = d_t(k) + term_p(k)`` where ``p = (u -> t)`` is the input place that set it (the
*argmax record*); its term is ``x_u(k - m_p) + h_p(k)``, or 0 while ``k <= m_p`` (an initial
token). Unrolled, ``x_t(k)`` is the sum of the durations and holds along one path of *nodes*
(transition, firing) — the **critical path** or lineage of ``(t, k)``:
``(t, k) -> (u, k - m_p) -> …``, ending at a firing set by an initial token.

Derivatives (infinitesimal perturbation analysis)
-------------------------------------------------
Scale the law of element ``e`` (a transition's duration or a place's hold) by its mean
``θ_e``: every draw ``X = θ_e ξ`` becomes ``(θ_e + δ) ξ``. While no maximum changes its
argument (for continuous laws, with probability one for small enough ``δ``), the path stays
and

.. math::

    \frac{\partial x_t(k)}{\partial \theta_e} = \sum_{\text{nodes of } e
    \text{ on the path}} \frac{X_e}{\theta_e},

the derivative carried along the path that set the firing (Glasserman 1991, ch. 2–3;
Heidergott 2006, ch. 4–5). An element of mean 0 (a fixed 0) is perturbed by adding a
constant instead, and each of its nodes on the path counts 1. Per replication, the derivative
of the cycle time is estimated by the path sums of the firings ``s < k <= K`` divided by
``K - s``; the same sums of 1 instead of ``X/θ`` give the **path criticality** of the
element: the share of its firings (for a place, of its target's firings that it set) that lie
on the critical path.

Which path: the derivative is that of the cycle time of a *frontier*, a set of transitions
(the sink components of the graph, whose cycle time is the largest of everything upstream):
the paths start at the frontier's last firing, weight ``1/|F|`` on each of its transitions,
which is the derivative of their mean firing time.

Computation: reverse accumulation in bounded memory
----------------------------------------------------
Computing derivatives forward would carry one derivative per element for every node kept by
the recursion, ``O(n·(n + m))`` numbers. Instead, the argmax record and the draws are kept
while the firings are computed, and a unit of *mass* is then swept backward from the frontier:
each node passes its mass to the node that set it (masses add where paths merge), and each node
adds ``mass × draw`` to its element. Per firing this costs ``O(n + m)`` numpy work (a few
calls per token-free level of the graph), about what the recursion itself costs.

Memory is bounded by keeping only a **window**: when the kept firings exceed their budget
(:data:`LINEAGE_MEMORY` per replication), the mass is swept from the newest firing ``b`` and
only the firings ``<= b − L`` are summed and dropped; the last ``L`` (the *look-ahead*) are
summed by a later sweep from a later frontier. This relies on the paths from the far future and
from ``b`` having merged, or at least forgotten where they started, within ``L`` firings
(critical paths coalesce backward: every path that reaches a node continues identically). When
the whole run fits — the usual case for models of up to a few hundred elements — there is a
single sweep from the last firing and the sums are exactly the path sums. Each firing is swept
``(window + L) / window`` times, 1.33 by default.

References
----------
.. [1] P. Glasserman, *Gradient Estimation via Perturbation Analysis*, Kluwer, 1991
   (infinitesimal perturbation analysis, its unbiasedness for event graphs).
.. [2] B. Heidergott, *Max-Plus Linear Stochastic Systems and Perturbation Analysis*,
   Springer, 2006 (derivatives of the Lyapunov exponent of random max-plus products).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from .exceptions import InvalidArray

__all__ = ["LINEAGE_MEMORY", "MIN_LOOKAHEAD", "LineageSweep", "PathSums", "path_estimates"]

#: Bytes the kept argmax record and draws of one replication may take before the oldest
#: firings are summed.
LINEAGE_MEMORY = 256 * 2**20
#: Fewest firings of look-ahead; a window that cannot hold four times as many is not swept.
MIN_LOOKAHEAD = 64


@dataclass(frozen=True)
class PathSums:
    """Sums along the critical paths, per replication, frontier and segment of firings.

    Elements are the ``n`` transitions (their durations) followed by the ``m`` places (their
    holds), in model order.

    Attributes
    ----------
    segments : ndarray of int, shape (J + 1,)
        Firing numbers ``s_0 < … < s_J``: segment ``j`` holds the firings ``s_j < k <= s_{j+1}``.
    weighted : ndarray, shape (R, F, J, n + m)
        Sum over the path's nodes of mass × draw.
    mass : ndarray, shape (R, F, J, n + m)
        Sum over the path's nodes of mass (the number of nodes on the path).
    lookahead : int or None
        Look-ahead of the windows in firings; None when the whole run was swept from its last
        firing (exact path sums).
    skipped : str or None
        Why nothing was summed (the window would not fit in memory); the sums then have no
        element (last axis of length 0).
    """

    segments: np.ndarray
    weighted: np.ndarray
    mass: np.ndarray
    lookahead: int | None
    skipped: str | None = None

    @staticmethod
    def concatenate(parts: Sequence[PathSums]) -> PathSums:
        """Join sums over replications.

        Raises
        ------
        InvalidArray
            Unless every part has the same segments, look-ahead and frontiers (sums of
            windows of another size are other estimates: joining them would make the result
            depend on how the replications were split).
        """
        first = parts[0]
        for p in parts[1:]:
            if (not np.array_equal(p.segments, first.segments) or p.lookahead != first.lookahead
                    or p.skipped != first.skipped
                    or p.weighted.shape[1:] != first.weighted.shape[1:]):
                raise InvalidArray("path sums of other segments, windows or frontiers cannot "
                                   "be joined")
        return PathSums(first.segments, np.concatenate([p.weighted for p in parts]),
                        np.concatenate([p.mass for p in parts]), first.lookahead, first.skipped)

    def after(self, start: int) -> PathSums:
        """The sums from the first segment boundary at or after ``start`` on, as one segment:
        what :func:`path_estimates` reads for that ``start`` (the same numbers), in a fraction
        of the memory."""
        seg = self.segments
        j = min(int(np.searchsorted(seg, start, side="left")), seg.size - 2)
        return PathSums(seg[[j, -1]], self.weighted[:, :, j:].sum(axis=2, keepdims=True),
                        self.mass[:, :, j:].sum(axis=2, keepdims=True), self.lookahead,
                        self.skipped)


def path_estimates(sums: PathSums, means: np.ndarray, start: int,
                   frontier: np.ndarray) -> tuple[np.ndarray, np.ndarray, int]:
    """Per-replication derivatives and path criticality from path sums.

    Parameters
    ----------
    sums : PathSums
    means : ndarray, shape (n + m,)
        The mean ``θ_e`` of each element (durations, then holds).
    start : int
        Firings up to ``start`` are the warm-up; the sums start at the first segment boundary
        at or after it.
    frontier : ndarray of int, shape (R,)
        The frontier whose cycle time each replication's derivative is of.

    Returns
    -------
    derivative, criticality : ndarray, shape (R, n + m)
        ``dλ/dθ_e`` (for ``θ_e = 0``: for adding a constant) and the share of the element's
        firings on the critical path.
    first : int
        The firing after which the sums were taken.
    """
    seg = sums.segments
    j = min(int(np.searchsorted(seg, start, side="left")), seg.size - 2)
    span = float(seg[-1] - seg[j])
    reps = np.arange(sums.weighted.shape[0])
    weighted = sums.weighted[reps, frontier, j:].sum(axis=1)
    mass = sums.mass[reps, frontier, j:].sum(axis=1)
    theta = np.asarray(means, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        scaled = np.where(theta > 0, weighted / np.where(theta > 0, theta, 1.0), mass)
    return scaled / span, mass / span, int(seg[j])


class LineageSweep:
    """Backward sweeps of mass along the argmax record of a running recursion.

    Built by :meth:`~cyclecheck.algebra.recursion.RandomRecursion.track_lineage`, fed every
    chunk of the record by the recursion, closed by :meth:`finish`. ``layout`` is the
    recursion's internal engine: transitions in its internal order (``perm``, ``inv``), input
    places in *slot positions* (``pslot``: slot to place; ``tok_all``, ``src_all``: tokens
    and internal source transition of each slot), ``levels`` the internal ranges of the
    token-free levels, ``S`` slots in its ring.

    Parameters
    ----------
    layout : the recursion's engine
    frontiers : sequence of sequences of int
        Each a non-empty set of transitions (model indices).
    segments : sequence of int
        Firing numbers ``s_0 < … < s_J`` splitting the sums; firings outside
        ``(s_0, s_J]`` are not summed.
    memory : int, optional
        Byte budget of the kept record and draws of each replication (default
        :data:`LINEAGE_MEMORY`; a batch of ``R`` replications keeps up to ``R`` times as
        much: callers bound ``R``).
    lookahead : int, optional
        Look-ahead in firings when the run does not fit (default: a quarter of what fits,
        at least :data:`MIN_LOOKAHEAD`).
    """

    def __init__(self, layout: Any, frontiers: Sequence[Sequence[int] | np.ndarray],
                 segments: Sequence[int] | np.ndarray, *, memory: int | None = None,
                 lookahead: int | None = None) -> None:
        eng = layout
        self.n, self.m, self.R, self.S, self.P = eng.n, eng.m, eng.R, eng.S, eng.P
        self.perm, self.inv, self.pslot = eng.perm, eng.inv, eng.pslot
        self.tok_all = np.asarray(eng.tok_all, dtype=np.int64)
        self.src_all = np.asarray(eng.src_all, dtype=np.int64)
        self.upper_levels = eng.levels[1:]  # levels >= 1: those with token-free input places
        self.kernel = getattr(eng, "kernel", None)  # the compiled sweep, when the engine has it
        self.level_array = np.array(self.upper_levels, dtype=np.int64).reshape(-1, 2)
        fronts = []
        for f in frontiers:
            arr = np.unique(np.asarray(f, dtype=np.int64))
            if arr.size == 0 or arr.min() < 0 or arr.max() >= self.n:
                raise InvalidArray(f"a frontier must list transitions in 0..{self.n - 1}")
            fronts.append(self.inv[arr])
        if not fronts:
            raise InvalidArray("at least one frontier is needed")
        self.fronts = fronts
        seg = np.asarray(segments, dtype=np.int64)
        if seg.ndim != 1 or seg.size < 2 or seg[0] < 0 or np.any(np.diff(seg) <= 0):
            raise InvalidArray("segments must be increasing firing numbers, at least two")
        self.segments = seg
        F, J = len(fronts), seg.size - 1
        # The windows are fixed per replication (a budget per replication, not per batch):
        # sums over windows of another size are other numbers, and a result must not depend
        # on how many replications share a batch.
        per_firing = self.bytes_per_firing(self.n, self.m)
        capacity = self.capacity(self.n, self.m, memory)
        span = int(seg[-1])
        self.skipped: str | None = None
        self.lookahead: int | None = None
        self.capacity = capacity
        if capacity < span:
            look = int(lookahead) if lookahead else max(MIN_LOOKAHEAD, capacity // 4)
            if capacity < 4 * max(look, MIN_LOOKAHEAD) and lookahead is None:
                self.skipped = (f"the critical paths need {4 * MIN_LOOKAHEAD} firings of "
                                f"{per_firing / 2**20:.1f} MiB each in memory and "
                                f"{(memory or LINEAGE_MEMORY) / 2**20:.0f} MiB are allowed")
            self.lookahead = max(1, min(look, capacity - 1))
        # the sums: nothing is allocated for a sweep that will not run
        size = 0 if self.skipped else 1
        shape_t, shape_p = (J, self.n * size, self.R, F), (J, self.P * size, self.R, F)
        self.dur_w, self.dur_m = np.zeros(shape_t), np.zeros(shape_t)
        self.hold_w, self.hold_m = np.zeros(shape_p), np.zeros(shape_p)
        self.chunks: list[tuple[int, np.ndarray, np.ndarray, np.ndarray | None]] = []
        self.top = 0  # the last firing fed
        self.settled = 0  # firings up to here are summed

    @staticmethod
    def bytes_per_firing(n: int, m: int) -> int:
        """Bytes counted per firing and replication against the budget: the record (int32)
        and the durations of the ``n`` transitions, the holds of the ``m`` places. (The
        holds are kept per input slot, up to about twice as many as places; counting places
        keeps the windows a function of the model alone.)"""
        return n * (4 + 8) + m * 8

    @staticmethod
    def capacity(n: int, m: int, memory: int | None = None) -> int:
        """Firings of one replication that the budget ``memory`` (default
        :data:`LINEAGE_MEMORY`) keeps: a run of more is summed over windows."""
        return max(1, int(memory or LINEAGE_MEMORY) // LineageSweep.bytes_per_firing(n, m))

    def feed(self, first: int, record: np.ndarray, dur: np.ndarray,
             hold: np.ndarray | None) -> None:
        """Keep a chunk: record (c, n, R) slot positions, durations (c, n, R), holds (c, P, R)
        in slot order or None (all zero), for firings ``first .. first + c − 1``."""
        if self.skipped is not None:
            return
        if first != self.top + 1:
            raise InvalidArray(f"chunks must come in order: got firing {first} after "
                               f"{self.top}")
        self.chunks.append((first, record, dur, hold))
        self.top = first + record.shape[0] - 1
        if self.lookahead is not None and self.top - self.settled >= self.capacity:
            self._sweep(self.top, self.top - self.lookahead)

    def finish(self) -> PathSums:
        """Sum what is left, from the last firing fed, and return all the sums."""
        if self.skipped is None and self.top > self.settled:
            self._sweep(self.top, self.top)
        F = len(self.fronts)
        J = self.segments.size - 1
        if self.skipped is not None:
            empty = np.zeros((self.R, F, J, 0))  # no element: nothing was summed
            return PathSums(self.segments, empty, empty, self.lookahead, self.skipped)
        weighted = np.zeros((self.R, F, J, self.n + self.m))
        mass = np.zeros_like(weighted)
        # internal transition order -> model order; slot positions -> places (padded slots
        # repeat a place and never carry mass)
        weighted[..., : self.n] = self.dur_w[:, self.inv].transpose(2, 3, 0, 1)
        mass[..., : self.n] = self.dur_m[:, self.inv].transpose(2, 3, 0, 1)
        for total, part in ((weighted, self.hold_w), (mass, self.hold_m)):
            places = np.zeros((self.m, J, self.R, F))
            np.add.at(places, self.pslot, part.transpose(1, 0, 2, 3))
            total[..., self.n :] = places.transpose(2, 3, 1, 0)
        self.chunks.clear()
        return PathSums(self.segments, weighted, mass, self.lookahead, self.skipped)

    def _sweep(self, top: int, settle: int) -> None:
        """Sweep mass from the frontiers at firing ``top`` down to the last settled firing;
        sum the firings up to ``settle``, then drop the chunks no later sweep needs."""
        n, S, R, F = self.n, self.S, self.R, len(self.fronts)
        low = max(self.settled, int(self.segments[0]))
        # one spare row at the end absorbs the mass of paths that end (initial tokens) or that
        # a step does not move
        mass = np.zeros((S * n + 1, R, F))
        row = (top % S) * n
        for f, front in enumerate(self.fronts):
            mass[row + front, :, f] = 1.0 / front.size
        for first, record, dur, hold in reversed(self.chunks):
            last = first + record.shape[0] - 1
            hi = min(last, top)
            lo = max(first, low + 1)
            if hi >= lo and self.kernel is not None:
                self.kernel.sweep_chunk(
                    mass, record, dur, _NO_HOLD if hold is None else hold, hold is not None,
                    first, lo, hi, settle, self.segments, n, S, self.tok_all, self.src_all,
                    self.level_array, self.dur_w, self.dur_m, self.hold_w, self.hold_m)
            elif hi >= lo:
                snap = self._sweep_chunk(mass, first, record[lo - first : hi - first + 1], lo)
                self._sum_chunk(snap, lo, min(hi, settle), record, dur, hold, first)
            if first <= low + 1:
                break
        self.settled = max(self.settled, settle)
        self.chunks = [c for c in self.chunks if c[0] + c[1].shape[0] - 1 > self.settled]

    def _sweep_chunk(self, mass: np.ndarray, first: int, record: np.ndarray,
                     lo: int) -> np.ndarray:
        """Pass the mass of firings ``lo + c − 1`` down to ``lo`` (``record`` their rows) to
        the nodes that set them; return the mass each node had, shape (c, n, R, F)."""
        n, S, R = self.n, self.S, self.R
        c = record.shape[0]
        spare = S * n
        k = lo + np.arange(c)[:, None, None]
        tok = self.tok_all[record]  # (c, n, R)
        src = self.src_all[record]
        # target rows: same firing for token-free places, k - m_p for the others, the spare
        # row where the path ends (k <= m_p: an initial token)
        same = np.where(tok == 0, (k % S) * n + src, spare)
        earlier = np.where((tok >= 1) & (tok < k), ((k - tok) % S) * n + src, spare)
        reps = np.broadcast_to(np.arange(R), (n, R))
        snap = np.empty((c, n, R, mass.shape[2]))
        add_at = np.add.at
        levels = self.upper_levels
        for i in range(c - 1, -1, -1):
            base = ((lo + i) % S) * n
            here = mass[base : base + n]
            # highest level first: a level has all its mass before it passes it on. Mass moves
            # only down, so the levels above the highest one holding mass are skipped, and so
            # is any level without mass (most of them: paths are thin).
            held = np.flatnonzero(here.any(axis=(1, 2)))
            if held.size and levels and held[-1] >= levels[0][0]:
                for a, b in reversed(levels):
                    if a > held[-1] or not here[a:b].any():
                        continue
                    add_at(mass, (same[i, a:b], reps[a:b]), here[a:b])
            add_at(mass, (earlier[i], reps), here)
            snap[i] = here
            here[:] = 0.0
            mass[spare] = 0.0
        return snap

    def _sum_chunk(self, snap: np.ndarray, lo: int, hi: int, record: np.ndarray,
                   dur: np.ndarray, hold: np.ndarray | None, first: int) -> None:
        """Add the node masses ``snap`` of firings ``lo .. hi`` (rows from ``lo``) to the sums
        of their segments, one firing at a time from the newest (:func:`_add_in_turn`)."""
        P = self.P
        seg = self.segments
        k = max(lo, int(seg[0]) + 1)
        while k <= min(hi, int(seg[-1])):
            j = int(np.searchsorted(seg, k, side="left")) - 1
            end = min(hi, int(seg[j + 1]))
            a, b = k - lo, end - lo + 1  # rows of snap
            w = snap[a:b]
            rows = slice(k - first, end - first + 1)
            # from the newest firing, as the sweep visits them
            _add_in_turn(self.dur_w[j], (w * dur[rows][..., None])[::-1])
            _add_in_turn(self.dur_m[j], w[::-1])
            slots = record[rows]
            through = self.tok_all[slots] < (k + np.arange(b - a))[:, None, None]
            wt = w * through[..., None]
            _add_in_turn(self.hold_m[j], _by_slot(wt, slots, P)[::-1])
            if hold is not None:
                chosen = np.take_along_axis(hold[rows], slots, axis=1)[..., None]
                _add_in_turn(self.hold_w[j], _by_slot(wt * chosen, slots, P)[::-1])
            k = end + 1


#: Stand-in for the holds when they are all zero (the kernel takes an array of fixed type).
_NO_HOLD = np.empty((0, 0, 0))


def _add_in_turn(total: np.ndarray, parts: np.ndarray) -> None:
    """``total += parts[0]``, then ``parts[1]``, …: one addition at a time, in the order of
    the compiled kernels (a sum over the axis may add pairwise, which rounds differently)."""
    stack = np.empty((parts.shape[0] + 1, *total.shape))
    stack[0] = total
    stack[1:] = parts
    total[...] = np.add.accumulate(stack, axis=0)[-1]


def _by_slot(values: np.ndarray, slots: np.ndarray, P: int) -> np.ndarray:
    """Values (c, n, R, F) of each transition moved to the slot that set it: (c, P, R, F),
    zeros elsewhere (slots belong to one transition each, so none is written twice)."""
    c, _, R, F = values.shape
    out = np.zeros((c, P, R, F))
    out[np.arange(c)[:, None, None], slots, np.arange(R)] = values
    return out
