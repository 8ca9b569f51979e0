r"""The linear assignment problem on small dense matrices, without scipy.optimize.

The characteristic maxpolynomial (:mod:`cyclecheck.algebra.charpoly`) evaluates
:math:`\chi_A(z)` by solving assignment problems on ``n × n`` matrices. scipy's
``linear_sum_assignment`` is the reference solver, but importing ``scipy.optimize`` costs about
0.35 s, more than the whole exact analysis of a model of a few dozen transitions: below
:data:`NUMPY_MAX_SIZE` rows the problem is solved here instead, by the shortest augmenting path
method with row and column potentials (the Hungarian method in the form of Jonker and
Volgenant), one augmentation per row, each a Dijkstra search whose steps are numpy operations
on a row. ``O(n^3)`` arithmetic in ``O(n^2)`` numpy calls: fast for small ``n``, while the
compiled solver wins beyond a hundred rows or so.

Any optimal assignment answers the callers' questions (the permanent, and a line of
:math:`\chi_A` tight at a point), so ties may be broken differently from scipy's; the optimal
value is the same up to rounding, which the tests check against scipy and against enumeration
of every permutation.

References
----------
.. [1] R. Jonker, A. Volgenant, "A shortest augmenting path algorithm for dense and sparse
   linear assignment problems", *Computing* 38 (1987), 325–340.
.. [2] D. F. Crouse, "On implementing 2D rectangular assignment algorithms", *IEEE Transactions
   on Aerospace and Electronic Systems* 52 (2016), 1679–1696 (the method of scipy's solver).
.. [3] R. E. Burkard, M. Dell'Amico, S. Martello, *Assignment Problems*, SIAM, 2009, ch. 4.
"""

from __future__ import annotations

import numpy as np

__all__ = ["NUMPY_MAX_SIZE", "best_assignment", "shortest_augmenting_path"]

NUMPY_MAX_SIZE: int = 32
"""Largest ``n`` solved by :func:`shortest_augmenting_path` in :func:`best_assignment`; larger
problems go to ``scipy.optimize.linear_sum_assignment``. At 32 rows one solve takes about 10 ms
here, and the up to ``2n + 1`` solves of a characteristic maxpolynomial cost at most twice the
import of the compiled solver; typical matrices need a handful."""


def shortest_augmenting_path(cost: np.ndarray) -> np.ndarray:
    """Columns of a minimum-cost assignment of a square matrix of finite costs.

    Parameters
    ----------
    cost : ndarray, shape (n, n)
        Finite costs.

    Returns
    -------
    ndarray of int64, shape (n,)
        ``cols[i]``, the column assigned to row ``i``: ``cost[i, cols[i]]`` sums to the least
        total over all permutations (up to rounding).

    Notes
    -----
    Rows are added one at a time. For each, a Dijkstra search on reduced costs
    ``cost[i, j] - u[i] - v[j]`` (non-negative for the assigned pairs and every pair the
    potentials have seen) finds the shortest path from the new row to a free column through
    assigned pairs; the potentials are updated so that reduced costs stay non-negative and the
    path is flipped. Jonker & Volgenant (1987); Burkard, Dell'Amico & Martello (2009), §4.4.

    Examples
    --------
    >>> shortest_augmenting_path(np.array([[4.0, 1.0], [2.0, 3.0]])).tolist()
    [1, 0]
    """
    n = cost.shape[0]
    u = np.zeros(n + 1)            # potentials of rows 1..n (index 0 unused)
    v = np.zeros(n + 1)            # potentials of columns 1..n; column 0 is the search's root
    row_of = np.zeros(n + 1, dtype=np.int64)  # row assigned to column j (1-based), 0: free
    way = np.zeros(n + 1, dtype=np.int64)     # previous column on the shortest path to j
    for i in range(1, n + 1):
        row_of[0] = i
        j0 = 0
        dist = np.full(n + 1, np.inf)
        done = np.zeros(n + 1, dtype=bool)
        while True:
            done[j0] = True
            i0 = row_of[j0]
            reduced = cost[i0 - 1] - u[i0] - v[1:]
            closer = ~done[1:] & (reduced < dist[1:])
            dist[1:][closer] = reduced[closer]
            way[1:][closer] = j0
            open_dist = np.where(done[1:], np.inf, dist[1:])
            j1 = int(np.argmin(open_dist)) + 1
            delta = open_dist[j1 - 1]
            u[row_of[done]] += delta
            v[done] -= delta
            dist[~done] -= delta
            j0 = j1
            if row_of[j0] == 0:
                break
        while j0:  # flip the path back to the root
            j1 = way[j0]
            row_of[j0] = row_of[j1]
            j0 = j1
    cols = np.empty(n, dtype=np.int64)
    cols[row_of[1:] - 1] = np.arange(n)
    return cols


def best_assignment(weight: np.ndarray) -> np.ndarray:
    """Columns of a maximum-weight assignment of a square matrix of finite weights.

    Small matrices (at most :data:`NUMPY_MAX_SIZE` rows) are solved by
    :func:`shortest_augmenting_path`; larger ones by ``scipy.optimize.linear_sum_assignment``.

    Parameters
    ----------
    weight : ndarray, shape (n, n)
        Finite weights.

    Returns
    -------
    ndarray of int64, shape (n,)
        ``cols[i]``, the column assigned to row ``i``.

    Examples
    --------
    >>> best_assignment(np.array([[3.0, 7.0], [2.0, 4.0]])).tolist()  # 7 + 2 > 3 + 4
    [1, 0]
    """
    if weight.shape[0] <= NUMPY_MAX_SIZE:
        # Costs relative to the largest weight: the same problem, with sums of smaller numbers.
        return shortest_augmenting_path(weight.max(initial=0.0) - weight)
    # Imported here: scipy.optimize costs ~0.35 s at start-up.
    from scipy.optimize import linear_sum_assignment

    _, cols = linear_sum_assignment(weight, maximize=True)
    return cols.astype(np.int64)
