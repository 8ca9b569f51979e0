r"""Compiled kernels of the algebra's per-pass work on large graphs (numba).

Howard's policy iteration (:func:`cyclecheck.algebra.spectral.howard`) runs here, whole, as
one compiled loop: the value determination of a policy, the policy improvement and the
spreading of the largest ratio. The certificate (:func:`cyclecheck.algebra.critical.certify`)
sums along the policy's paths with :func:`path_sums`, the same walk. The numpy
implementation in :mod:`~cyclecheck.algebra.spectral` stays callable (``howard(graph,
kernel="numpy")``) and is the twin of this one in the tests; Karp, brute force over circuits
and the HiGHS linear program are the independent twins of both.

Where the numpy version works with arrays of ``log2 n`` pointer-doubling rounds, a compiled loop
simply walks: a policy (one input place per transition) is a functional graph, so its circuits
are found by following predecessors once, and every bias is its predecessor's bias plus one
link, computed in an order where the predecessor comes first. A Howard iteration is then
``O(n + m)`` with small constants.

Results agree with the numpy twin within the documented tolerance, not bit for bit: a bias is a
sum along a policy path and the two versions add its terms in another order (pointer doubling
adds them pairwise). The decisions of the iteration (improve or not, which place, where to
spread) are the same comparisons on the same formulas, so in practice both visit the same
policies; the tests hold them to the same cycle times and certificates.

Loading
-------
This module imports numba, which costs a few tenths of a second: it is imported only when a
graph is large enough for the kernels to pay (see ``spectral.KERNEL_MIN_PLACES``), never by
``cyclecheck --help``. The kernels are compiled on first use and kept in numba's on-disk cache
(``cache=True``: ``__pycache__`` beside this file, else the user's cache directory, or
``NUMBA_CACHE_DIR``). Where no cache location can be written, they are compiled in memory on
every run instead: slower to start, same results.

References
----------
.. [1] J. Cochet-Terrasson, G. Cohen, S. Gaubert, M. Mc Gettrick, J.-P. Quadrat, "Numerical
   computation of spectral elements in max-plus algebra", IFAC Conference on System Structure
   and Control, 1998 (multichain policy iteration).
.. [2] S. K. Lam, A. Pitrou, S. Seibert, "Numba: a LLVM-based Python JIT compiler", Proceedings
   of the Second Workshop on the LLVM Compiler Infrastructure in HPC, 2015.
   doi:10.1145/2833157.2833162
"""

from __future__ import annotations

import numba
import numpy as np
from numba.core.caching import NullCache

__all__ = ["CACHED", "STATUS_NOT_CONVERGED", "STATUS_OK", "STATUS_OVERFLOW",
           "STATUS_TOKEN_FREE", "cache_available", "disable_cache", "howard_iterate", "path_sums",
           "policy_circuits"]

_BIG = float(np.finfo(np.float64).max)  # the scales of the tolerances saturate here

#: Exit states of :func:`howard_iterate` (numba raises no rich exceptions: the caller does).
STATUS_OK, STATUS_NOT_CONVERGED, STATUS_TOKEN_FREE, STATUS_OVERFLOW = 0, 1, 2, 3


def cache_available() -> bool:
    """True when numba finds a writable place for its on-disk cache of the modules of this
    folder (the compiled recursion asks too)."""
    try:
        numba.njit(cache=True)(_probe)
    except RuntimeError:  # "cannot cache function ...: no locator available"
        return False
    return True


def _probe() -> int:
    return 0


#: Whether the kernels are cached on disk (False: compiled in memory on every run).
CACHED = cache_available()


def _jit(fn):  # type: ignore[no-untyped-def]
    # fastmath stays off: the kernels must round exactly as IEEE arithmetic does.
    return numba.njit(cache=CACHED, nogil=True)(fn)


@_jit
def _exceeds(new: float, old: float, scale: float, rtol: float) -> bool:
    """``new > old`` by more than rounding (the same formula as ``spectral._exceeds``)."""
    return new - old > rtol * (abs(new) + abs(old) + scale)


@_jit
def _evaluate(source, weight, tokens, policy, eta, bias, scale, is_root, lw, lm, link,
              stack):  # type: ignore[no-untyped-def]
    """Value determination of a policy: ``eta``, ``bias`` and ``scale`` of every transition,
    and ``is_root``, one node per policy circuit (its smallest index). Returns a status.

    One walk along predecessors from every transition not yet done: it ends on a transition
    done before, or closes a new circuit (then the circuit is evaluated first); the walk is
    then unwound, each transition after its predecessor. ``bias`` is summed link by link as
    ``w - eta m`` (never ``sum w - eta sum m``, whose sums can overflow where the bias does
    not); ``scale`` sums ``w + |eta| m``, the size its rounding error scales with (saturated at
    the largest double: it only sizes tolerances).
    """
    n = policy.size
    for t in range(n):  # the link of each transition to its predecessor (policy[t] is near
        q = policy[t]   # the places of t: one pass in memory order)
        lw[t] = weight[q]
        lm[t] = tokens[q]
        link[t, 0] = source[q]
        link[t, 1] = -1  # -1: not seen; s: on the walk from s; n: done
        is_root[t] = False
    for s in range(n):
        if link[s, 1] >= 0:
            continue
        top = 0
        u = s
        while link[u, 1] < 0:  # predecessor and mark side by side: one cache line per step
            link[u, 1] = s
            stack[top] = u
            top += 1
            u = link[u, 0]
        rest = top  # stack[:rest] is unwound below, after the circuit if one was closed
        if link[u, 1] == s:  # a new circuit: stack[j:top], each entry's predecessor after it
            j, jr = _closed_circuit(stack, top, u)
            rest = j
            size = top - j
            r = stack[jr]
            is_root[r] = True
            # The ratio: the root's own link, then the others from the root's predecessor on
            # (the order of the numpy twin).
            w = lw[r]
            m = lm[r]
            i = jr
            for _ in range(size - 1):
                i = i + 1 if i + 1 < top else j
                w += lw[stack[i]]
                m += lm[stack[i]]
            if not m > 0:
                return STATUS_TOKEN_FREE
            ratio = w / m
            if not np.isfinite(ratio):
                return STATUS_OVERFLOW
            eta[r] = ratio
            bias[r] = 0.0
            scale[r] = 0.0
            link[r, 1] = n
            # The others in successor order from the root, each after its predecessor, whose
            # values are carried along (no gather).
            e = ratio
            b = 0.0
            c = 0.0
            i = jr
            for _ in range(size - 1):
                i = i - 1 if i > j else top - 1
                b, c = _settle(stack[i], e, b, c, lw, lm, eta, bias, scale, link)
            if not np.isfinite(b):  # inf or nan stays so once reached
                return STATUS_OVERFLOW
        if rest == 0:
            continue
        # stack[i]'s predecessor is stack[i + 1]; the last one's is u, done by now.
        e = eta[u]
        b = bias[u]
        c = scale[u]  # saturated at _BIG, where it stays: inf - inf is never formed
        for i in range(rest - 1, -1, -1):
            b, c = _settle(stack[i], e, b, c, lw, lm, eta, bias, scale, link)
        if not np.isfinite(b):
            return STATUS_OVERFLOW
    return STATUS_OK


@_jit
def _closed_circuit(stack, top, u):  # type: ignore[no-untyped-def]
    """A walk ``stack[:top]`` that reached ``u`` again closed the circuit ``stack[j:top]``:
    ``j`` and the position ``jr`` of its smallest node (the circuit's root)."""
    j = top - 1
    while stack[j] != u:
        j -= 1
    jr = j
    for i in range(j + 1, top):
        if stack[i] < stack[jr]:
            jr = i
    return j, jr


@_jit
def _settle(t, e, b, c, lw, lm, eta, bias, scale, link):  # type: ignore[no-untyped-def]
    """Give ``t`` the values of its predecessor (``eta`` e, bias b, scale c) plus its own link,
    mark it done; its bias and scale, for its successor."""
    b = (lw[t] - e * lm[t]) + b
    c = (lw[t] + abs(e) * lm[t]) + c
    eta[t] = e
    bias[t] = b
    scale[t] = min(c, _BIG)
    link[t, 1] = link.shape[0]
    return b, c


@_jit
def _spread_largest(out_starts, out_places, target, eta, policy, rtol,
                    queue, pred_place, seen):  # type: ignore[no-untyped-def]
    """Point every transition downstream of a circuit of the largest ratio at it, through the
    place by which a breadth-first search from all of them reached it (as
    ``spectral._SortedPlaces.spread_largest``: the same search order, hence the same tree)."""
    n = policy.size
    top_eta = eta.max()
    head = 0
    tail = 0
    all_top = True
    for t in range(n):
        seen[t] = False
        pred_place[t] = -1
    for t in range(n):  # the super-source's neighbours, in index order
        if not _exceeds(top_eta, eta[t], 0.0, rtol):
            seen[t] = True
            queue[tail] = t
            tail += 1
        else:
            all_top = False
    if all_top:
        return
    while head < tail:
        u = queue[head]
        head += 1
        for i in range(out_starts[u], out_starts[u + 1]):  # by target, first place of a pair
            p = out_places[i]
            t = target[p]
            if not seen[t]:
                seen[t] = True
                pred_place[t] = p
                queue[tail] = t
                tail += 1
    for t in range(n):
        if pred_place[t] >= 0:
            policy[t] = pred_place[t]


@_jit
def howard_iterate(source, target, weight, tokens, starts, max_weight, out_starts, out_places,
                   policy, rtol, spread_after, limit):  # type: ignore[no-untyped-def]
    """Howard's policy iteration on places sorted by target (the layout of
    ``spectral._SortedPlaces``), from the initial ``policy`` (sorted positions), updated in
    place.

    ``out_starts``/``out_places`` list, per source transition, the first place (sorted
    position) to each distinct target, targets increasing: the adjacency the spreading step
    searches. Returns ``(status, iterations, eta, bias, scale, is_root)``.
    """
    n = policy.size
    eta = np.empty(n)
    bias = np.empty(n)
    scale = np.empty(n)
    is_root = np.zeros(n, dtype=np.bool_)
    lw = np.empty(n)
    lm = np.empty(n)
    pred = np.empty(n, dtype=policy.dtype)
    link = np.empty((n, 2), dtype=policy.dtype)
    work = np.empty(n, dtype=policy.dtype)
    seen = np.zeros(n, dtype=np.bool_)
    iterations = 0
    eta_steps = 0
    while True:
        status = _evaluate(source, weight, tokens, policy, eta, bias, scale, is_root, lw, lm,
                           link, work)
        if status != STATUS_OK:
            return status, iterations, eta, bias, scale, is_root
        # When every transition has the same eta (bit for bit), as soon happens in a strongly
        # connected graph, no place can improve it and no place is cut off below: the same
        # decisions as the full comparisons, without gathering eta over the places.
        uniform = eta.min() == eta.max()
        changed = False
        if not uniform:
            changed = _improve_eta(source, starts, eta, policy, rtol)
        if changed:
            eta_steps += 1
            if eta_steps % spread_after == 0:
                _spread_largest(out_starts, out_places, target, eta, policy, rtol, work, pred,
                                seen)
        else:
            eta_steps = 0
            if not _improve_value(source, weight, tokens, starts, max_weight, eta, bias, policy,
                                  uniform, rtol):
                return STATUS_OK, iterations, eta, bias, scale, is_root
        iterations += 1
        if iterations > limit:
            return STATUS_NOT_CONVERGED, iterations, eta, bias, scale, is_root


@_jit
def _improve_eta(source, starts, eta, policy, rtol):  # type: ignore[no-untyped-def]
    """The eta step: each transition takes the first input place whose source has the largest
    eta, if that beats its own place by more than rounding. True if a place changed."""
    changed = False
    for t in range(policy.size):
        lo = starts[t]
        best = eta[source[lo]]
        arg = lo
        for p in range(lo + 1, starts[t + 1]):
            v = eta[source[p]]
            if v > best:
                best = v
                arg = p
        q = policy[t]
        if _exceeds(best, eta[source[q]], 0.0, rtol) and arg != q:
            policy[t] = arg
            changed = True
    return changed


@_jit
def _improve_value(source, weight, tokens, starts, max_weight, eta, bias, policy, uniform,
                   rtol):  # type: ignore[no-untyped-def]
    """The value step: each transition takes the first input place of largest
    ``w - eta m + v_source`` among those whose source has its eta (all of them when
    ``uniform``), if that beats its own place by more than rounding. True if a place changed.
    One pass over the places, no array of values."""
    changed = False
    for t in range(policy.size):
        e = eta[t]
        q = policy[t]
        best = -np.inf
        arg = -1
        current = -np.inf
        for p in range(starts[t], starts[t + 1]):
            u = source[p]
            if not uniform and _exceeds(e, eta[u], 0.0, rtol):
                v = -np.inf
            else:
                v = weight[p] - e * tokens[p] + bias[u]
            if arg < 0 or v > best:
                best = v
                arg = p
            if p == q:
                current = v
        if _exceeds(best, current, max_weight[t], rtol) and arg != q:
            policy[t] = arg
            changed = True
    return changed


@_jit
def policy_circuits(pred, is_root):  # type: ignore[no-untyped-def]
    """The circuit through each root of a functional graph, in forward order from the root.

    Returns ``(nodes, offsets)``: circuit ``i`` is ``nodes[offsets[i]:offsets[i + 1]]``, roots
    in increasing index order.
    """
    n = pred.size
    count = 0
    total = 0
    for r in range(n):
        if is_root[r]:
            count += 1
            v = pred[r]
            total += 1
            while v != r:
                total += 1
                v = pred[v]
    nodes = np.empty(total, dtype=np.int64)
    offsets = np.zeros(count + 1, dtype=np.int64)
    k = 0
    c = 0
    for r in range(n):
        if not is_root[r]:
            continue
        length = 1
        v = pred[r]
        while v != r:
            length += 1
            v = pred[v]
        # Walking predecessors gives the circuit backwards: fill it from the end.
        nodes[k] = r
        j = k + length - 1
        v = pred[r]
        while v != r:
            nodes[j] = v
            j -= 1
            v = pred[v]
        k += length
        c += 1
        offsets[c] = k
    return nodes, offsets


@_jit
def path_sums(pred, link):  # type: ignore[no-untyped-def]
    """Sums along the paths of a functional graph: ``(is_root, total)``.

    ``is_root`` marks one node per circuit of ``pred`` (its smallest index); ``total[t]`` is
    ``link[t] + total[pred[t]]``, 0 at roots, so that a circuit node sums the links around the
    circuit back to its root (``spectral.chain_sums`` with roots as their own parents, the
    numpy twin, which adds in another order). One walk, as in Howard's value determination.
    """
    n = pred.size
    total = np.zeros(n)
    is_root = np.zeros(n, dtype=np.bool_)
    mark = np.full(n, -1, dtype=np.int64)
    stack = np.empty(n, dtype=np.int64)
    for s in range(n):
        if mark[s] >= 0:
            continue
        top = 0
        u = s
        while mark[u] < 0:
            mark[u] = s
            stack[top] = u
            top += 1
            u = pred[u]
        rest = top
        if mark[u] == s:  # a new circuit, stack[j:top]
            j, jr = _closed_circuit(stack, top, u)
            rest = j
            r = stack[jr]
            is_root[r] = True
            mark[r] = n
            acc = 0.0
            i = jr
            for _ in range(top - j - 1):  # successor order from the root
                i = i - 1 if i > j else top - 1
                t = stack[i]
                acc = link[t] + acc
                total[t] = acc
                mark[t] = n
        acc = total[u]
        for i in range(rest - 1, -1, -1):
            t = stack[i]
            acc = link[t] + acc
            total[t] = acc
            mark[t] = n
    return is_root, total


def disable_cache() -> None:
    """Compile in memory from now on (the cache location turned out not to be writable)."""
    global CACHED
    CACHED = False
    for fn in (_exceeds, _evaluate, _closed_circuit, _settle, _improve_eta, _improve_value,
               _spread_largest, howard_iterate, policy_circuits, path_sums):
        fn._cache = NullCache()
