r"""The max-plus semiring on dense numpy arrays, and the matrices of a timed event graph.

Representation
--------------
A max-plus scalar is a float that is finite or ``-inf``:

* ``EPS`` = ε = −∞ is the max-plus zero, the neutral element of ⊕ = max and absorbing for
  ⊗ = +. In a matrix it means **no arc**.
* ``E`` = e = 0 is the max-plus unit, the neutral element of ⊗. It is a real arc of weight 0,
  not a missing one: never use 0 for "no arc".
* ``NaN`` and ``+inf`` are not max-plus scalars; the functions here reject them
  (:class:`~cyclecheck.algebra.exceptions.InvalidArray`) because ``-inf + inf`` is NaN.

Matrices are dense ``(n, n)`` float arrays with ``a[i, j]`` = the weight of the arc
**j → i**, so that a linear max-plus system reads

.. math::

    x(k+1) = A \otimes x(k), \qquad x_i(k+1) = \max_j \bigl( a_{ij} + x_j(k) \bigr).

Node ``i`` is influenced by node ``j`` when ``a[i, j] > ε``; "upstream of ``i``" means every node
from which ``i`` can be reached along such arcs.

For a timed event graph (see :mod:`cyclecheck.algebra.eventgraph`) the firing times obey
``x(k) = A_0 ⊗ x(k) ⊕ A_1 ⊗ x(k−1) ⊕ … ⊕ A_M ⊗ x(k−M)`` where ``A_j`` collects the places with
``j`` initial tokens (:func:`event_graph_matrices`). The implicit part is solved by the Kleene
star, ``x(k) = A_0^* ⊗ (A_1 ⊗ x(k−1) ⊕ …)``, and stacking ``M`` consecutive firings gives the
one-step system ``X(k) = A ⊗ X(k−1)`` of :func:`augmented_matrix`, whose maximum cycle mean is
the cycle time.

References
----------
.. [1] F. Baccelli, G. Cohen, G. J. Olsder, J.-P. Quadrat, *Synchronization and Linearity*,
   Wiley, 1992: ch. 2 (event graphs, §2.5 from the multi-step recursion to the standard form
   x(k) = A x(k−1)), ch. 3 (the Kleene star and the least solution of x = A x ⊕ b, maximum
   cycle mean and eigenvalue).
.. [2] R. M. Karp, "A characterization of the minimum cycle mean in a digraph", *Discrete
   Mathematics* 23(3), 309–311, 1978. :doi:`10.1016/0012-365X(78)90011-0`
"""

from __future__ import annotations

import numpy as np

from .digraph import strong_components
from .eventgraph import EventGraph, find_token_free_circuit
from .exceptions import InvalidArray, NotLive, OutOfRange, PositiveCircuit

__all__ = [
    "EPS",
    "E",
    "augmented_matrix",
    "event_graph_matrices",
    "identity",
    "kleene_star",
    "matrix_power",
    "max_cycle_mean_karp",
    "oplus",
    "otimes",
    "solve_implicit",
    "sparse_otimes",
]

EPS: float = -np.inf
"""ε = −∞: the max-plus zero, "no arc"."""

E: float = 0.0
"""e = 0: the max-plus unit."""

#: Largest intermediate array (elements) built by :func:`otimes` before it works in chunks.
MAX_ELEMENTS = 1 << 22


def _as_maxplus(a: object, name: str, ndim: tuple[int, ...] = (1, 2)) -> np.ndarray:
    """The one validation of max-plus arrays: float, finite or ``-inf``, of the allowed rank."""
    arr = np.asarray(a, dtype=np.float64)
    if arr.ndim not in ndim:
        raise InvalidArray(
            f"{name} must have {' or '.join(map(str, ndim))} dimensions, got shape {arr.shape}"
        )
    if arr.size and (np.isnan(arr).any() or np.isposinf(arr).any()):
        raise InvalidArray(
            f"{name} holds NaN or +inf: only finite numbers and ε = -inf are max-plus scalars"
        )
    return arr


def _as_square(a: object, name: str = "A") -> np.ndarray:
    arr = _as_maxplus(a, name, ndim=(2,))
    if arr.shape[0] != arr.shape[1]:
        raise InvalidArray(f"{name} must be square, got shape {arr.shape}")
    return arr


def identity(n: int) -> np.ndarray:
    """The max-plus identity matrix E: 0 on the diagonal, ε elsewhere.

    Examples
    --------
    >>> identity(2)
    array([[  0., -inf],
           [-inf,   0.]])
    """
    out = np.full((n, n), EPS)
    np.fill_diagonal(out, E)
    return out


def oplus(a: object, b: object) -> np.ndarray:
    """Max-plus sum ``a ⊕ b`` = elementwise maximum (ε is neutral).

    Examples
    --------
    >>> oplus([1.0, -np.inf], [0.0, 2.0])
    array([1., 2.])
    """
    return np.maximum(_as_maxplus(a, "a", (0, 1, 2)), _as_maxplus(b, "b", (0, 1, 2)))


def otimes(a: object, b: object, *, max_elements: int = MAX_ELEMENTS) -> np.ndarray:
    r"""Max-plus product ``A ⊗ B`` (matrix–matrix) or ``A ⊗ x`` (matrix–vector).

    .. math:: (A \otimes B)_{ij} = \max_k \bigl( a_{ik} + b_{kj} \bigr)

    Parameters
    ----------
    a : array_like, shape (n, p)
    b : array_like, shape (p, q) or (p,)
    max_elements : int
        The product is evaluated on blocks of rows of ``a`` so that no intermediate array has
        more than this many elements (the naive broadcast needs ``n·p·q``).

    Returns
    -------
    ndarray, shape (n, q) or (n,)
        ε where no ``k`` links ``i`` and ``j`` (including when ``p == 0``).

    Examples
    --------
    >>> A = np.array([[3.0, 7.0], [2.0, 4.0]])
    >>> otimes(A, np.zeros(2))
    array([7., 4.])
    >>> otimes(A, A)
    array([[ 9., 11.],
           [ 6.,  9.]])
    """
    A = _as_maxplus(a, "A", (2,))
    B = _as_maxplus(b, "B", (1, 2))
    if A.shape[1] != B.shape[0]:
        raise InvalidArray(f"cannot multiply shapes {A.shape} and {B.shape}")
    vector = B.ndim == 1
    B2 = B[:, None] if vector else B
    n, p = A.shape
    q = B2.shape[1]
    out = np.full((n, q), EPS)
    if p == 0 or n == 0 or q == 0:
        return out[:, 0] if vector else out
    rows = max(1, max_elements // max(1, p * q))
    for lo in range(0, n, rows):
        hi = min(n, lo + rows)
        # (rows, p, 1) + (1, p, q) -> max over k; ε + finite stays ε, ε + ε stays ε
        np.max(A[lo:hi, :, None] + B2[None, :, :], axis=1, out=out[lo:hi])
    return out[:, 0] if vector else out


def sparse_otimes(rows: object, cols: object, weights: object, x: object, n: int) -> np.ndarray:
    r"""Max-plus product of a sparse matrix given as an edge list with a vector (or batch).

    .. math:: y_i = \max_{(i, j, w) \in \text{edges}} \bigl( w + x_j \bigr)

    Parameters
    ----------
    rows, cols : array_like of int, shape (e,)
        Row ``i`` (arc head) and column ``j`` (arc tail) of each entry. Repeated pairs (parallel
        arcs) are allowed: the maximum is taken. Rows need not be sorted (they are sorted
        stably; pass them sorted to skip that work).
    weights : array_like of float, shape (e,)
        Finite weights.
    x : array_like, shape (p,) or (p, r)
        The vector, or ``r`` vectors as columns.
    n : int
        Number of rows of the result.

    Returns
    -------
    ndarray, shape (n,) or (n, r)
        ε for rows without entries.

    Notes
    -----
    One ``np.maximum.reduceat`` over the rows (the CSR layout), so the cost is O(e·r).

    Examples
    --------
    >>> sparse_otimes([0, 0, 1], [0, 1, 0], [3.0, 7.0, 2.0], np.zeros(2), 3)
    array([  7.,   2., -inf])
    """
    r = np.asarray(rows, dtype=np.int64)
    c = np.asarray(cols, dtype=np.int64)
    w = np.asarray(weights, dtype=np.float64)
    xv = _as_maxplus(x, "x", (1, 2))
    if not (r.ndim == c.ndim == w.ndim == 1 and r.shape == c.shape == w.shape):
        raise InvalidArray("rows, cols and weights must be one-dimensional of equal length")
    if w.size and not np.isfinite(w).all():
        raise InvalidArray("weights must be finite (leave missing arcs out of the edge list)")
    if r.size and (r.min() < 0 or r.max() >= n):
        raise InvalidArray(f"rows must lie in 0..{n - 1}")
    if c.size and (c.min() < 0 or c.max() >= xv.shape[0]):
        raise InvalidArray(f"cols must lie in 0..{xv.shape[0] - 1}")
    out = np.full((n, *xv.shape[1:]), EPS)
    if r.size == 0:
        return out
    if np.any(r[1:] < r[:-1]):
        order = np.argsort(r, kind="stable")
        r, c, w = r[order], c[order], w[order]
    vals = xv[c] + (w if xv.ndim == 1 else w[:, None])
    heads = np.flatnonzero(np.r_[True, r[1:] != r[:-1]])
    out[r[heads]] = np.maximum.reduceat(vals, heads, axis=0)
    return out


def matrix_power(a: object, k: int) -> np.ndarray:
    """``A^{⊗k}`` by repeated squaring; ``A^0 = E`` (:func:`identity`).

    Examples
    --------
    >>> matrix_power([[3.0, 7.0], [2.0, 4.0]], 2)
    array([[ 9., 11.],
           [ 6.,  9.]])
    """
    A = _as_square(a)
    if int(k) != k or k < 0:
        raise InvalidArray(f"the exponent must be an integer >= 0, got {k}")
    k = int(k)
    result = identity(A.shape[0])
    base = A
    while k:
        if k & 1:
            result = otimes(result, base)
        k >>= 1
        if k:
            base = otimes(base, base)
    return result


def kleene_star(a: object, *, atol: float | None = None) -> np.ndarray:
    r"""Kleene star ``A* = E ⊕ A ⊕ A² ⊕ …`` (maximum path weights), by Floyd–Warshall.

    ``A*[i, j]`` is the largest weight of a path from ``j`` to ``i`` (0 for the empty path
    on the diagonal, ε if ``i`` is not reachable from ``j``). The series converges iff no
    circuit has positive weight; then ``A* = E ⊕ A ⊕ … ⊕ A^{n−1}``.

    Parameters
    ----------
    a : array_like, shape (n, n)
    atol : float, optional
        A circuit counts as positive when its weight exceeds ``atol`` (default
        ``1e-9 · max(1, max |finite a_ij|)``, so that circuits of weight 0 computed in floating
        point are accepted).

    Returns
    -------
    ndarray, shape (n, n)

    Raises
    ------
    PositiveCircuit
        If a circuit has positive weight; ``nodes`` lists the nodes on such circuits.

    Notes
    -----
    O(n³): ``n`` vectorized rank-one updates ``D ← D ⊕ D[:, k] ⊗ D[k, :]``. A positive circuit
    shows as a positive diagonal entry at the end.

    References
    ----------
    .. [1] Baccelli et al., *Synchronization and Linearity*, 1992, §3.2 (A* and paths).

    Examples
    --------
    >>> kleene_star([[-np.inf, -np.inf], [2.0, -np.inf]])
    array([[  0., -inf],
           [  2.,   0.]])
    """
    A = _as_square(a)
    n = A.shape[0]
    finite = A[np.isfinite(A)]
    if atol is None:
        atol = 1e-9 * max(1.0, float(np.abs(finite).max()) if finite.size else 1.0)
    D = A.copy()
    for k in range(n):
        np.maximum(D, D[:, k, None] + D[None, k, :], out=D)
    diag = np.diag(D)
    bad = np.flatnonzero(diag > atol)
    if bad.size:
        raise PositiveCircuit(bad.tolist())
    np.fill_diagonal(D, np.maximum(diag, E))
    return D


def solve_implicit(a0: object, b: object) -> np.ndarray:
    r"""Least solution of ``x = A_0 ⊗ x ⊕ b``: ``x = A_0^* ⊗ b``.

    Parameters
    ----------
    a0 : array_like, shape (n, n)
        Must have no circuit of positive weight (otherwise no finite solution exists where b
        is finite upstream).
    b : array_like, shape (n,) or (n, q)

    Raises
    ------
    PositiveCircuit
        If ``A_0`` has a circuit of positive weight.

    References
    ----------
    .. [1] Baccelli et al., *Synchronization and Linearity*, 1992, §3.2 (the implicit
       equation x = A x ⊕ b; A* b is its least solution).

    Examples
    --------
    >>> solve_implicit([[-np.inf, -np.inf], [2.0, -np.inf]], [1.0, 0.0])
    array([1., 3.])
    """
    return otimes(kleene_star(a0), _as_maxplus(b, "b", (1, 2)))


def _karp_strong(W: np.ndarray) -> float:
    """Karp's maximum cycle mean of a strongly connected matrix with at least one arc."""
    c = W.shape[0]
    D = np.full((c + 1, c), EPS)
    D[0, 0] = 0.0  # walks from node 0; every node is reachable in a strong component
    for k in range(c):
        D[k + 1] = np.max(W + D[k][None, :], axis=1)
    Dn = D[c]
    with np.errstate(invalid="ignore"):
        ratios = (Dn[None, :] - D[:c]) / (c - np.arange(c))[:, None]
    ratios[~np.isfinite(D[:c])] = np.inf  # D_k(v) = ε: no walk of length k, no constraint
    per_node = ratios.min(axis=0)
    return float(per_node[np.isfinite(Dn)].max())


def max_cycle_mean_karp(a: object) -> np.ndarray:
    r"""Maximum cycle mean upstream of each node, by Karp's formula per strong component.

    For each strongly connected component ``C`` with a circuit, Karp (1978):

    .. math::

        \lambda(C) = \max_{v \in C} \min_{0 \le k < |C|}
                     \frac{D_{|C|}(v) - D_k(v)}{|C| - k},

    where ``D_k(v)`` is the largest weight of a walk of ``k`` arcs from a fixed node of ``C`` to
    ``v`` inside ``C``. Then ``λ_i`` is the largest ``λ(C)`` over the components upstream of
    ``i`` (those from which ``i`` can be reached, ``i``'s own included): with
    ``x(k+1) = A ⊗ x(k)`` and finite ``x(0)``, ``x_i(k)/k → λ_i``.

    Parameters
    ----------
    a : array_like, shape (n, n)
        ``a[i, j]`` is the weight of arc ``j → i``; ε for no arc.

    Returns
    -------
    ndarray of float, shape (n,)
        ``λ_i``; ε = −inf for a node with no circuit upstream.

    Notes
    -----
    O(|C|³) per component with dense products; meant as the slow, independent twin of a
    policy-iteration solver, not for large graphs.

    References
    ----------
    .. [1] R. M. Karp, "A characterization of the minimum cycle mean in a digraph", *Discrete
       Mathematics* 23(3), 309–311, 1978 (stated for the minimum; the maximum is the same
       formula with max and min exchanged).
    .. [2] Baccelli et al., *Synchronization and Linearity*, 1992, §3.7 (reducible matrices:
       each node grows at the largest cycle mean upstream of it).

    Examples
    --------
    Heidergott, Olsder & van der Woude (2006), *Max Plus at Work* (from memory):

    >>> max_cycle_mean_karp([[3.0, 7.0], [2.0, 4.0]])
    array([4.5, 4.5])
    >>> max_cycle_mean_karp([[1.0, -np.inf], [0.0, -np.inf]])
    array([1., 1.])
    """
    A = _as_square(a)
    n = A.shape[0]
    lam = np.full(n, EPS)
    if n == 0:
        return lam
    finite = np.isfinite(A)
    heads, tails = np.nonzero(finite)
    count, labels = strong_components(n, tails, heads)
    for comp in range(count):
        nodes = np.flatnonzero(labels == comp)
        W = A[np.ix_(nodes, nodes)]
        if nodes.size == 1 and not np.isfinite(W[0, 0]):
            continue  # a single node without a self-loop holds no circuit
        lam[nodes] = _karp_strong(W)
    # Propagate downstream: λ_i ← max(λ_i, λ_j) over arcs j → i, until nothing changes.
    while True:
        upstream = np.where(finite, lam[None, :], EPS).max(axis=1)
        new = np.maximum(lam, upstream)
        if np.array_equal(new, lam):
            return lam
        lam = new


def event_graph_matrices(graph: EventGraph) -> list[np.ndarray]:
    r"""The matrices ``A_0, …, A_M`` of ``x(k) = ⊕_j A_j ⊗ x(k−j)`` for an event graph.

    ``A_j[t, u] = max`` over places ``p = (u → t)`` with ``j`` initial tokens of
    ``hold_p + duration_t``; ε where there is no such place. ``M`` is the largest marking.

    References
    ----------
    .. [1] Baccelli et al., *Synchronization and Linearity*, 1992, §2.5 (the matrices of an
       event graph grouped by the number of initial tokens of its places).

    Examples
    --------
    >>> from cyclecheck.algebra.eventgraph import EventGraph
    >>> g = EventGraph(duration=[2.0, 3.0], source=[0, 1], target=[1, 0], tokens=[0, 1],
    ...                hold=[0.0, 1.0])
    >>> A0, A1 = event_graph_matrices(g)
    >>> A0
    array([[-inf, -inf],
           [  3., -inf]])
    >>> A1
    array([[-inf,   3.],
           [-inf, -inf]])
    """
    n = graph.n_transitions
    M = int(graph.tokens.max()) if graph.n_places else 0
    mats = []
    for j in range(M + 1):
        sel = graph.tokens == j
        Aj = np.full((n, n), EPS)
        np.maximum.at(Aj, (graph.target[sel], graph.source[sel]), graph.weight[sel])
        mats.append(Aj)
    return mats


def augmented_matrix(graph: EventGraph) -> tuple[np.ndarray, int]:
    r"""One-step matrix of the event graph on the stacked state of ``M`` consecutive firings.

    With ``B_j = A_0^* ⊗ A_j`` and ``X(k) = [x(k); x(k−1); …; x(k−M+1)]``:

    .. math::

        X(k) = \begin{pmatrix}
            B_1 & B_2 & \cdots & B_{M-1} & B_M \\
            E   & ε   & \cdots & ε       & ε \\
                & \ddots &     &         & \vdots \\
            ε   & \cdots &     & E       & ε
        \end{pmatrix} \otimes X(k-1).

    Its maximum cycle mean upstream of node ``t`` (``t < n``, the block ``x(k)``) is the
    cycle time of transition ``t``.

    Parameters
    ----------
    graph : EventGraph

    Returns
    -------
    A : ndarray, shape (n·M, n·M)
    n : int
        Number of transitions: rows ``0 .. n−1`` of ``A`` give ``x(k)``.

    Raises
    ------
    NotLive
        If a circuit holds no token (then ``A_0^*`` does not exist or the graph deadlocks).

    References
    ----------
    .. [1] Baccelli et al., *Synchronization and Linearity*, 1992, §2.5 (reduction of an event
       graph with several tokens per place to the standard form x(k) = A x(k−1)).

    Examples
    --------
    >>> from cyclecheck.algebra.eventgraph import EventGraph
    >>> g = EventGraph(duration=[2.0, 3.0], source=[0, 1, 0], target=[1, 0, 0],
    ...                tokens=[0, 2, 1], hold=[0.0, 1.0, 0.0])
    >>> A, n = augmented_matrix(g)
    >>> A.shape, n
    ((4, 4), 2)
    >>> max_cycle_mean_karp(A)[:n]
    array([3., 3.])
    """
    circuit = find_token_free_circuit(graph)
    if circuit is not None:
        raise NotLive(circuit)
    mats = event_graph_matrices(graph)
    n = graph.n_transitions
    M = len(mats) - 1
    if M == 0:
        # No token anywhere (and no circuit): x(k) = A_0* ⊗ ε, nothing is recurrent.
        return np.full((n, n), EPS), n
    star = kleene_star(mats[0])
    A = np.full((n * M, n * M), EPS)
    for j in range(1, M + 1):
        A[:n, (j - 1) * n : j * n] = otimes(star, mats[j])
    for j in range(1, M):
        A[j * n : (j + 1) * n, (j - 1) * n : j * n] = identity(n)
    if np.isposinf(A).any():  # path weights added up beyond the largest double
        raise OutOfRange("the one-step matrix has path weights beyond the range of floating "
                         "point (about 1.8e308)")
    return A, n
