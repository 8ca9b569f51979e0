r"""Strongly connected components, breadth-first search and shortest paths on arc lists.

The analyses walk directed graphs given as arrays of arcs (``source[i] -> target[i]`` on nodes
``0 .. n - 1``): the transitions of an event graph and its places, or a subgraph. Large graphs
go to ``scipy.sparse.csgraph`` (compiled). Importing ``scipy.sparse`` costs about 0.3 s, more
than the whole analysis of a model of a few thousand places: up to :data:`PYTHON_MAX_WORK`
nodes and arcs (or arc visits, for shortest paths from several nodes) the same algorithms run
here in plain Python, on the same adjacency order, so that they give scipy's answers exactly:
the same component labels, the same search order and predecessors, the same distances. The
tests hold each function to scipy's on random graphs.

Adjacency order is scipy's for a ``csr_matrix`` built from the arcs: per node, the distinct
targets in increasing order (parallel arcs are one edge).

References
----------
.. [1] R. Tarjan, "Depth-first search and linear graph algorithms", *SIAM J. Comput.* 1 (1972),
   146–160.
.. [2] D. J. Pearce, "A space-efficient algorithm for finding strongly connected components",
   *Information Processing Letters* 116 (2016), 47–52 (the method of scipy's
   ``connected_components(connection="strong")``, which numbers components in the order the
   depth-first search completes them).
.. [3] E. W. Dijkstra, "A note on two problems in connexion with graphs", *Numerische
   Mathematik* 1 (1959), 269–271.
"""

from __future__ import annotations

import heapq
import math

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["NO_PREDECESSOR", "PYTHON_MAX_WORK", "breadth_first", "shortest_distances",
           "strong_components"]

PYTHON_MAX_WORK: int = 20_000
"""Most nodes and arcs (arc visits for :func:`shortest_distances`) handled in plain Python; scipy's
compiled routines beyond. At this size one pass takes about 0.02 s here; an analysis makes a
handful (the whole graph, its token-free and critical parts), well below the 0.3 s of importing
``scipy.sparse``, which larger graphs pay once for passes a hundred times faster."""

NO_PREDECESSOR: int = -9999
"""Predecessor of the start and of unreached nodes in :func:`breadth_first` (scipy's value)."""


def _arcs(n: int, source: ArrayLike, target: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    src = np.asarray(source, dtype=np.int64).ravel()
    dst = np.asarray(target, dtype=np.int64).ravel()
    if src.shape != dst.shape:
        raise ValueError(f"source and target differ in length: {src.size} and {dst.size}")
    if src.size and (min(src.min(), dst.min()) < 0 or max(src.max(), dst.max()) >= n):
        raise ValueError(f"arc ends must be nodes 0 .. {n - 1}")
    return src, dst


def _adjacency(n: int, src: np.ndarray, dst: np.ndarray) -> tuple[list[int], list[int]]:
    """``(starts, targets)``: the distinct targets of node ``v``, increasing, are
    ``targets[starts[v]:starts[v + 1]]``."""
    key = np.unique(src * n + dst)
    starts = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(np.bincount(key // n, minlength=n), out=starts[1:])
    return starts.tolist(), (key % n).tolist()


def _csr(n: int, src: np.ndarray, dst: np.ndarray, data: np.ndarray | None = None):  # type: ignore[no-untyped-def]
    from scipy.sparse import csr_matrix

    if data is None:
        data = np.ones(src.size, dtype=np.int8)
    return csr_matrix((data, (src, dst)), shape=(n, n))


def strong_components(n: int, source: ArrayLike, target: ArrayLike) -> tuple[int, np.ndarray]:
    """Strongly connected components of the graph of ``n`` nodes and the given arcs.

    Returns
    -------
    count : int
    labels : ndarray of int32, shape (n,)
        Component of each node, numbered as scipy's ``connected_components(directed=True,
        connection="strong")`` numbers them.

    Examples
    --------
    >>> count, labels = strong_components(4, [0, 1, 1, 2], [1, 0, 2, 3])
    >>> count, labels.tolist()
    (3, [2, 2, 1, 0])
    """
    src, dst = _arcs(n, source, target)
    if n + src.size > PYTHON_MAX_WORK:
        from scipy.sparse.csgraph import connected_components

        count, labels = connected_components(_csr(n, src, dst), directed=True,
                                             connection="strong")
        return int(count), labels.astype(np.int32, copy=False)
    return _tarjan(n, src, dst)


def _tarjan(n: int, src: np.ndarray, dst: np.ndarray) -> tuple[int, np.ndarray]:
    """Tarjan's algorithm without recursion. Each node's arcs are followed from its largest
    target down (as scipy's search takes them), so that components complete, and are numbered,
    in scipy's order."""
    starts, nbr = _adjacency(n, src, dst)
    index = [-1] * n
    low = [0] * n
    on_stack = [False] * n
    label = [0] * n
    stack: list[int] = []
    counter = 0
    count = 0
    for root in range(n):
        if index[root] >= 0:
            continue
        index[root] = low[root] = counter
        counter += 1
        stack.append(root)
        on_stack[root] = True
        work = [[root, starts[root + 1]]]  # node, position of its next arc (counting down)
        while work:
            frame = work[-1]
            v, i = frame
            first = starts[v]
            descended = False
            while i > first:
                i -= 1
                w = nbr[i]
                if index[w] < 0:
                    frame[1] = i
                    index[w] = low[w] = counter
                    counter += 1
                    stack.append(w)
                    on_stack[w] = True
                    work.append([w, starts[w + 1]])
                    descended = True
                    break
                if on_stack[w] and index[w] < low[v]:
                    low[v] = index[w]
            if descended:
                continue
            work.pop()
            if low[v] == index[v]:
                while True:
                    w = stack.pop()
                    on_stack[w] = False
                    label[w] = count
                    if w == v:
                        break
                count += 1
            if work:
                u = work[-1][0]
                if low[v] < low[u]:
                    low[u] = low[v]
    return count, np.array(label, dtype=np.int32)


def breadth_first(n: int, source: ArrayLike, target: ArrayLike,
                  start: int) -> tuple[np.ndarray, np.ndarray]:
    """Breadth-first search from ``start``: the nodes reached in the order found, and the
    predecessor of each node on the search tree (:data:`NO_PREDECESSOR` for the start and the
    nodes not reached), as scipy's ``breadth_first_order(..., directed=True,
    return_predecessors=True)``.

    Examples
    --------
    >>> order, pred = breadth_first(4, [0, 0, 2], [2, 1, 3], 0)
    >>> order.tolist(), pred.tolist()
    ([0, 1, 2, 3], [-9999, 0, 0, 2])
    """
    src, dst = _arcs(n, source, target)
    if n + src.size > PYTHON_MAX_WORK:
        from scipy.sparse.csgraph import breadth_first_order

        order, pred = breadth_first_order(_csr(n, src, dst), start, directed=True,
                                          return_predecessors=True)
        return order.astype(np.int32, copy=False), pred.astype(np.int32, copy=False)
    starts, nbr = _adjacency(n, src, dst)
    pred = [NO_PREDECESSOR] * n
    seen = [False] * n
    seen[start] = True
    order = [start]
    head = 0
    while head < len(order):
        v = order[head]
        head += 1
        for i in range(starts[v], starts[v + 1]):
            w = nbr[i]
            if not seen[w]:
                seen[w] = True
                pred[w] = v
                order.append(w)
    return np.array(order, dtype=np.int32), np.array(pred, dtype=np.int32)


def shortest_distances(n: int, source: ArrayLike, target: ArrayLike, length: ArrayLike,
                       origins: ArrayLike) -> np.ndarray:
    """Lengths of the shortest paths from each node of ``origins`` to every node (Dijkstra).

    Parameters
    ----------
    n : int
    source, target : array_like of int
        The arcs; at most one per ordered pair of nodes (keep the shortest of parallel arcs).
    length : array_like of float
        Non-negative finite length of each arc; zero-length arcs are arcs.
    origins : array_like of int

    Returns
    -------
    ndarray, shape (len(origins), n)
        ``inf`` where a node cannot be reached; as scipy's ``dijkstra(..., directed=True,
        indices=origins)``.

    Examples
    --------
    >>> shortest_distances(3, [0, 1, 0], [1, 2, 2], [1.0, 0.0, 5.0], [0]).tolist()
    [[0.0, 1.0, 1.0]]
    """
    src, dst = _arcs(n, source, target)
    ln = np.asarray(length, dtype=np.float64).ravel()
    starts_at = np.asarray(origins, dtype=np.int64).ravel()
    if n + starts_at.size * src.size > PYTHON_MAX_WORK:
        from scipy.sparse.csgraph import dijkstra

        # explicit zeros stay edges of a csr matrix built this way
        return dijkstra(_csr(n, src, dst, ln), directed=True, indices=starts_at)
    order = np.lexsort((dst, src))
    first = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(np.bincount(src, minlength=n), out=first[1:])
    first_l, nbr, arc_len = first.tolist(), dst[order].tolist(), ln[order].tolist()
    out = np.full((starts_at.size, n), np.inf)
    for row, origin in enumerate(starts_at.tolist()):
        dist = [math.inf] * n
        dist[origin] = 0.0
        done = [False] * n
        heap = [(0.0, origin)]
        while heap:
            d, v = heapq.heappop(heap)
            if done[v]:
                continue
            done[v] = True
            for i in range(first_l[v], first_l[v + 1]):
                w = nbr[i]
                nd = d + arc_len[i]
                if nd < dist[w]:
                    dist[w] = nd
                    heapq.heappush(heap, (nd, w))
        out[row] = dist
    return out
