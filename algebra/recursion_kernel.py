r"""Compiled kernels of the random recursion and of its lineage sweep (numba).

The random recursion of :class:`~cyclecheck.algebra.recursion.RandomRecursion` and the
backward sweep of :class:`~cyclecheck.algebra.lineage.LineageSweep` run here as compiled loops
over the same arrays, in the same internal layout, as their numpy versions, which stay callable
(``RandomRecursion(..., kernel="numpy")``) and are their twins in the tests.

Bit for bit
-----------
Both versions perform the same floating-point operations in the same order, so their results
are equal bit for bit, not merely close:

* a firing's term is ``x_u(k − m_p) + h_p(k)`` (no addition when the holds are all zero; 0
  while ``k <= m_p``), its start the largest term (a maximum rounds nothing), its completion
  ``start + d_t(k)``; the input place that set it is the first, by place index, whose term
  equals the start (ties to the smallest index);
* in the lineage sweep, the mass of a node is the sum of what the nodes it set pass to it, in
  the order the numpy version adds them (firings from the newest; within a firing, the
  token-free levels from the highest, transitions in internal order within a level, then the
  places with tokens in internal transition order), and every path sum adds its terms one at
  a time, firings from the newest (the numpy version adds them in that order explicitly,
  never by a pairwise reduction). Nodes without mass add nothing (``x + 0.0 = x`` for the
  non-negative sums here), so the kernel skips them.

``fastmath`` stays off: the kernels round exactly as IEEE arithmetic does.

Loading
-------
Importing this module imports numba (a few tenths of a second): the recursion imports it only
when a run is large enough for the kernels to pay (``recursion.KERNEL_MIN_WORK``), never for
``cyclecheck --help``. :func:`prepare` compiles the kernels for the one signature they are
called with, or loads them from numba's on-disk cache (``cache=True``: ``__pycache__`` beside
this file, else the user's cache directory, or ``NUMBA_CACHE_DIR``); :func:`compiled_on_disk`
tells beforehand whether that will compile (the first run after an install). Where no cache
location can be written, the kernels are compiled in memory on every run instead: slower to
start, same results.

References
----------
.. [1] S. K. Lam, A. Pitrou, S. Seibert, "Numba: a LLVM-based Python JIT compiler", Proceedings
   of the Second Workshop on the LLVM Compiler Infrastructure in HPC, 2015.
   doi:10.1145/2833157.2833162
.. [2] F. Baccelli, G. Cohen, G. J. Olsder, J.-P. Quadrat, *Synchronization and Linearity*,
   Wiley, 1992, §2.5 (the recursion of a timed event graph).
"""

from __future__ import annotations

import numba
import numpy as np
from numba.core.caching import NullCache

from .kernels import cache_available

__all__ = ["CACHED", "PREPARED", "advance", "compiled_on_disk", "disable_cache", "gather",
           "prepare", "sweep_chunk"]


#: Whether the kernels are cached on disk (False: compiled in memory on every run).
CACHED = cache_available()


def _jit(fn):  # type: ignore[no-untyped-def]
    return numba.njit(cache=CACHED, nogil=True)(fn)


@_jit
def advance(H, n, S, k0, starts, slots, tokens, sources, place, dur, hold, has_hold, times,
            want_times, record, want_record, counts, want_counts, marks,
            xs):  # type: ignore[no-untyped-def]
    """Firings ``k0 + 1 .. k0 + c`` of every transition in every replication.

    ``H`` (S·n, R) is the ring buffer of firing times (firing ``k`` in rows ``(k mod S)·n``
    on); ``starts``/``slots`` list, per internal transition in its (topological) order, its
    slot positions by increasing place index; ``tokens``, ``sources`` and ``place`` give each
    slot position's marking, internal source transition and place. ``dur`` (c, n, R), ``hold``
    (c, P, R) in slot order (read only when ``has_hold``). Outputs, written when wanted:
    ``times`` (c, n, R), ``record`` (c, n, R) the slot that set each firing, ``counts`` (m, R)
    += the firings each place set, ``xs[j]`` = x(k0 + 1 + marks[j]) (n, R).
    """
    c = dur.shape[0]
    R = H.shape[1]
    nm = 0
    # Fresh work arrays: the compiler knows they alias nothing and vectorizes over R.
    best = np.empty(R)
    arg = np.empty(R, dtype=np.int64)
    for i in range(c):
        k = k0 + i + 1
        base = (k % S) * n
        for t in range(n):
            lo = starts[t]
            hi = starts[t + 1]
            # The first input place (smallest index) gives the start so far ...
            s = slots[lo]
            m = tokens[s]
            if m >= k:  # an initial token: available at time 0
                for r in range(R):
                    best[r] = 0.0
                    arg[r] = s
            else:
                row = ((k - m) % S) * n + sources[s]
                if has_hold:
                    for r in range(R):
                        best[r] = H[row, r] + hold[i, s, r]
                        arg[r] = s
                else:
                    for r in range(R):
                        best[r] = H[row, r]
                        arg[r] = s
            # ... and a later one replaces it only with a larger term: ties to the first. (An
            # initial token's 0 never does: every term is >= 0, the draws are checked.)
            for j in range(lo + 1, hi):
                s = slots[j]
                m = tokens[s]
                if m >= k:
                    continue
                row = ((k - m) % S) * n + sources[s]
                if has_hold:
                    for r in range(R):
                        v = H[row, r] + hold[i, s, r]
                        if v > best[r]:
                            best[r] = v
                            arg[r] = s
                else:
                    for r in range(R):
                        v = H[row, r]
                        if v > best[r]:
                            best[r] = v
                            arg[r] = s
            out = base + t
            for r in range(R):
                H[out, r] = best[r] + dur[i, t, r]
            if want_times:
                for r in range(R):
                    times[i, t, r] = H[out, r]
            if want_record:
                for r in range(R):
                    record[i, t, r] = arg[r]
            if want_counts:
                for r in range(R):
                    counts[place[arg[r]], r] += 1
        if nm < marks.size and marks[nm] == i:
            for t in range(n):
                for r in range(R):
                    xs[nm, t, r] = H[base + t, r]
            nm += 1


@_jit
def sweep_chunk(mass, record, dur, hold, has_hold, first, lo, hi, settle, segments, n, S,
                tokens, sources, levels, dur_w, dur_m, hold_w, hold_m):  # type: ignore[no-untyped-def]
    """Pass the mass of firings ``hi`` down to ``lo`` to the nodes that set them, and add the
    firings up to ``settle`` to the path sums of their segments.

    ``mass`` (S·n + 1, R, F) holds the mass of the nodes of the last S firings (rows as in the
    ring buffer; the last row is unused here: the numpy version's sink for paths that end).
    ``record``, ``dur`` (c, n, R) and ``hold`` (c, P, R) are a chunk of the recursion's
    outputs from firing ``first``; ``levels`` (L, 2) the internal ranges of the token-free
    levels above the first, ascending; ``segments`` the firing numbers splitting the sums.
    The sums ``dur_w``, ``dur_m`` (J, n, R, F) and ``hold_w``, ``hold_m`` (J, P, R, F), by slot
    position, are added to.
    """
    R = mass.shape[1]
    F = mass.shape[2]
    J = segments.size - 1
    j = J - 1
    for k in range(hi, lo - 1, -1):
        i = k - first
        base = (k % S) * n
        # token-free places: to the same firing, the highest level first
        for lev in range(levels.shape[0] - 1, -1, -1):
            for t in range(levels[lev, 0], levels[lev, 1]):
                for r in range(R):
                    s = -1
                    for f in range(F):
                        w = mass[base + t, r, f]
                        if w == 0.0:
                            continue
                        if s < 0:
                            s = record[i, t, r]
                            if tokens[s] != 0:
                                break
                        mass[base + sources[s], r, f] += w
        # then every node of the firing, in internal order: places with tokens pass the mass
        # to firing k - m_p (the path ends at an initial token), and the node is summed
        summed = k <= settle and segments[0] < k <= segments[J]
        if summed:
            while segments[j] >= k:
                j -= 1
        for t in range(n):
            for r in range(R):
                for f in range(F):
                    w = mass[base + t, r, f]
                    if w == 0.0:
                        continue
                    mass[base + t, r, f] = 0.0
                    s = record[i, t, r]
                    m = tokens[s]
                    if 1 <= m < k:
                        mass[((k - m) % S) * n + sources[s], r, f] += w
                    if summed:
                        dur_w[j, t, r, f] += w * dur[i, t, r]
                        dur_m[j, t, r, f] += w
                        if m < k:
                            hold_m[j, s, r, f] += w
                            if has_hold:
                                hold_w[j, s, r, f] += w * hold[i, s, r]


@_jit
def gather(raw, columns, out, busy, want_busy):  # type: ignore[no-untyped-def]
    """Copy draws ``raw`` (c, R, w) to ``out`` (c, len(columns), R) in the
    recursion's order (``out[i, j, r] = raw[i, r, columns[j]]``); with ``want_busy`` add them,
    firing after firing, to ``busy`` (len(columns), R). Returns 1 when a value is negative,
    NaN or infinite (nothing is added then), else 2 when some value is not 0, else 0."""
    c, R, _ = raw.shape
    nonzero = False
    for i in range(c):
        for j in range(columns.size):
            col = columns[j]
            for r in range(R):
                v = raw[i, r, col]
                if not (v >= 0.0 and v < np.inf):
                    return 1
                if v != 0.0:
                    nonzero = True
                out[i, j, r] = v
    if want_busy:
        for i in range(c):
            for j in range(columns.size):
                for r in range(R):
                    busy[j, r] += out[i, j, r]
    return 2 if nonzero else 0


_I8, _F8, _B = numba.int64, numba.float64, numba.boolean
_SIGNATURES = {
    advance: (numba.void(
        _F8[:, ::1], _I8, _I8, _I8, _I8[::1], _I8[::1], _I8[::1], _I8[::1], _I8[::1],
        _F8[:, :, ::1], _F8[:, :, ::1], _B, _F8[:, :, ::1], _B, numba.int32[:, :, ::1], _B,
        _I8[:, ::1], _B, _I8[::1], _F8[:, :, ::1]),),
    sweep_chunk: (numba.void(
        _F8[:, :, ::1], numba.int32[:, :, ::1], _F8[:, :, ::1], _F8[:, :, ::1], _B, _I8, _I8,
        _I8, _I8, _I8[::1], _I8, _I8, _I8[::1], _I8[::1], _I8[:, ::1], _F8[:, :, :, ::1],
        _F8[:, :, :, ::1], _F8[:, :, :, ::1], _F8[:, :, :, ::1]),),
    gather: (numba.int64(_F8[:, :, ::1], _I8[::1], _F8[:, :, ::1], _F8[:, ::1], _B),),
}


def compiled_on_disk() -> bool:
    """Whether numba's cache holds the kernels for this source (else :func:`prepare`
    compiles them, which takes seconds)."""
    if not CACHED:
        return False
    try:
        return all(bool(fn._cache._cache_file._load_index())  # numba's own index reader
                   for fn in _SIGNATURES)
    except (AttributeError, OSError, EOFError, ValueError):  # another numba: do not guess
        return False


#: Whether :func:`prepare` has run in this process (a forked child inherits the kernels).
PREPARED = False


def prepare() -> None:
    """Compile the kernels for their signature, or load them from the cache."""
    global PREPARED
    for fn, signatures in _SIGNATURES.items():
        for sig in signatures:
            try:
                fn.compile(sig)
            except OSError:  # the cache location accepted the kernels but cannot store them
                disable_cache()
                fn.compile(sig)
    PREPARED = True


def disable_cache() -> None:
    """Compile in memory from now on (the cache location turned out not to be writable)."""
    global CACHED
    CACHED = False
    for fn in _SIGNATURES:
        fn._cache = NullCache()
