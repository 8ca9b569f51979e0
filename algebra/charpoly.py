r"""The tropical permanent and the characteristic maxpolynomial of a dense max-plus matrix.

Representation
--------------
A dense max-plus matrix is a square float array ``A`` of shape ``(n, n)``. Entry ``a_ij`` is the
weight of the arc ``j -> i`` (the convention of ``x(k) = A ⊗ x(k-1)``), and ε = ``-inf``
(:data:`EPS`) means "no arc". ``+inf`` and NaN are not elements of the semiring and are rejected;
every other float, negative ones included, is a weight.

Characteristic maxpolynomial
----------------------------
With :math:`z \cdot I` the matrix with ``z`` on the diagonal and ε elsewhere,

.. math::

    \chi_A(z) = \operatorname{per}(A \oplus z I)
              = \max_{\sigma} \sum_i (A \oplus z I)_{i \sigma(i)}
              = \max_{k = 0}^{n} \bigl( k z + \delta_k \bigr),

where :math:`\delta_k`, the coefficient of :math:`z^k`, is the best weight of a set of disjoint
circuits (a *poly-cycle*) covering exactly ``n - k`` nodes: the largest permanent of a principal
``(n-k) × (n-k)`` submatrix, with :math:`\delta_n = 0` and :math:`\delta_0 = \operatorname{per}(A)`.
(Burkard & Butkovič index the same numbers by the size ``n - k`` of the submatrix.)

:math:`\chi_A` is a convex piecewise-linear function of ``z`` with integer slopes ``0 .. n``. A
term :math:`\delta_k z^k` is *essential* when it alone attains the maximum for some ``z``: the
essential terms are the vertices of the upper concave hull of the points :math:`(k, \delta_k)`.
The *corners* (roots) are the breakpoints of :math:`\chi_A`; the multiplicity of a corner is the
change of slope there, and :math:`\chi_A(z) = \sum_r \mathrm{mult}(r) \max(z, r)` (the tropical
factorisation). When :math:`\operatorname{per}(A) = ε` the lowest essential degree ``k0 > 0``
makes ε a root of multiplicity ``k0``; it is listed last among the corners, so that the
multiplicities always add up to ``n``. The largest corner is the maximum cycle mean of ``A``
(the max-plus eigenvalue when ``A`` is irreducible).

Only the essential terms can be found quickly (one assignment problem per evaluation of
:math:`\chi_A`); the inessential coefficients need enumeration, which
:func:`poly_cycle_coefficients` does for small ``n``.

References
----------
.. [1] R. A. Cuninghame-Green, "The characteristic maxpolynomial of a matrix", *J. Math. Anal.
   Appl.* 95 (1983), 110–116.
.. [2] R. E. Burkard, P. Butkovič, "Max algebra and the linear assignment problem", *Math.
   Programming B* 98 (2003), 415–429.
.. [3] R. E. Burkard, P. Butkovič, "Finding all essential terms of a characteristic
   maxpolynomial", *Discrete Appl. Math.* 130 (2003), 367–380.
.. [4] M. Akian, R. Bapat, S. Gaubert, "Max-plus algebra", in L. Hogben (ed.), *Handbook of
   Linear Algebra*, 2nd ed., CRC Press, 2014, ch. 35.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from itertools import combinations, permutations
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from .assignment import best_assignment
from .exceptions import InvalidArray, MaxPlusError, OutOfRange

__all__ = [
    "EPS",
    "MAX_DENSE_SIZE",
    "MAX_ENUMERATION_SIZE",
    "CharPoly",
    "characteristic_value",
    "charpoly_or_none",
    "essential_terms",
    "poly_cycle_coefficients",
    "tropical_permanent",
]

EPS: float = -np.inf
"""ε, the zero of the max-plus semiring: "no arc" in a dense matrix."""

MAX_DENSE_SIZE: int = 400
"""Largest ``n`` for which :func:`charpoly_or_none` computes the characteristic maxpolynomial
(up to ``2n`` dense ``n × n`` assignment problems, ``O(n^4)`` in the worst case)."""

MAX_ENUMERATION_SIZE: int = 8
"""Largest ``n`` accepted by :func:`poly_cycle_coefficients` (about ``e · n!`` permutations)."""

# Relative tolerance of the parametric search, times n and the largest magnitude of the entries:
# a new line must rise above the crossing of its neighbours by more than that to count as a
# vertex, and corners closer than that are merged. Well above the rounding of sums of n entries
# (about n·2^-52 of the scale); integer data well inside float range is exact.
_RTOL = 1e-12


def _as_matrix(A: ArrayLike, name: str = "A") -> np.ndarray:
    """Validate a dense max-plus matrix; everything downstream trusts the result."""
    try:
        M = np.array(A, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise InvalidArray(f"{name} must be a square array of numbers: {exc}") from None
    if M.ndim != 2 or M.shape[0] != M.shape[1]:
        raise InvalidArray(f"{name} must be a square 2-D array, got shape {M.shape}")
    bad = np.isnan(M) | (M == np.inf)
    if bad.any():
        i, j = (int(v) for v in np.argwhere(bad)[0])
        raise InvalidArray(
            f"{name}[{i}, {j}] is {M[i, j]}: entries must be finite numbers or -inf (ε, no arc)"
        )
    # The assignment problems work with sums of n entries and margins of about 2n times the
    # largest one: all of them must be finite doubles.
    vals = np.abs(M[np.isfinite(M)])
    if vals.size and (2 * M.shape[0] + 2) * float(vals.max()) > np.finfo(np.float64).max:
        raise OutOfRange(f"{name} has entries up to {float(vals.max()):.3g}: sums of "
                         f"{2 * M.shape[0] + 2} of them exceed the range of floating point "
                         "(about 1.8e308)")
    return M


def _scale(M: np.ndarray) -> tuple[float, float, float]:
    """``(lo, hi, scale)`` of the finite entries; ``scale >= 1`` sizes tolerances and margins."""
    vals = M[np.isfinite(M)]
    if vals.size == 0:
        return 0.0, 0.0, 1.0
    lo, hi = float(vals.min()), float(vals.max())
    return lo, hi, max(1.0, abs(lo), abs(hi))


def _best_permutation(W: np.ndarray) -> np.ndarray | None:
    """Columns ``σ(i)`` of a best permutation of ``W``, or ``None`` if every one meets ε."""
    n = W.shape[0]
    if n == 0:
        return np.empty(0, dtype=np.int64)
    finite = np.isfinite(W)
    if not (finite.any(axis=0).all() and finite.any(axis=1).all()):
        return None
    lo, hi, scale = _scale(W)
    # A permutation through a `big` entry is worth at most big + (n-1)·hi < n·lo, less than any
    # finite permutation: the solver prefers finite ones, and meets `big` only when forced.
    # No larger than needed, so that the solver's sums keep the digits of the real entries.
    big = lo - n * (hi - lo) - scale
    cols = best_assignment(np.where(finite, W, big))
    if not finite[np.arange(n), cols].all():
        return None
    return cols


def tropical_permanent(A: ArrayLike) -> float:
    r"""The max-plus permanent :math:`\max_\sigma \sum_i a_{i \sigma(i)}`.

    The best weight of a set of disjoint circuits covering every node (an optimal assignment).

    Parameters
    ----------
    A : array_like, shape (n, n)
        Dense max-plus matrix, ε = ``-inf`` for "no arc".

    Returns
    -------
    float
        The permanent; ``-inf`` (ε) when every permutation meets an ε entry; ``0.0`` for
        ``n = 0`` (the empty product is the unit).

    Raises
    ------
    InvalidArray
        If ``A`` is not square or holds NaN or ``+inf``.
    OutOfRange
        If sums of its entries would exceed the range of floating point.

    Notes
    -----
    One assignment problem (:func:`~cyclecheck.algebra.assignment.best_assignment`),
    ``O(n^3)``. ε entries are replaced by a finite number low enough that no optimal permutation
    uses one unless all permutations must; the answer is then summed from the original entries.

    References
    ----------
    .. [1] R. E. Burkard, P. Butkovič, "Max algebra and the linear assignment problem", *Math.
       Programming B* 98 (2003), 415–429.
    .. [2] R. A. Cuninghame-Green, "The characteristic maxpolynomial of a matrix", *J. Math.
       Anal. Appl.* 95 (1983), 110–116.

    Examples
    --------
    >>> tropical_permanent([[3.0, 7.0], [2.0, 4.0]])  # max(3 + 4, 7 + 2)
    9.0
    >>> tropical_permanent([[1.0, 5.0], [-np.inf, -np.inf]])
    -inf
    """
    M = _as_matrix(A)
    cols = _best_permutation(M)
    if cols is None:
        return EPS
    return math.fsum(M[np.arange(M.shape[0]), cols].tolist())


def _line_at(M: np.ndarray, z: float) -> tuple[int, float]:
    """A line ``(k, c)`` of ``χ`` that is tight at finite ``z``: ``χ(z) = k z + c``.

    ``k`` counts the diagonal places where the optimal assignment takes ``z``, ``c`` sums the
    other entries (from ``M`` itself, so no ``k z`` is subtracted back and no digit is lost).
    Any optimal assignment gives a line below ``χ`` everywhere and equal to it at ``z``.
    """
    n = M.shape[0]
    idx = np.arange(n)
    diag = M[idx, idx]
    takes_z = z >= diag
    W = M.copy()
    W[idx, idx] = np.where(takes_z, z, diag)
    cols = _best_permutation(W)
    assert cols is not None  # the identity is finite for finite z
    use_z = (cols == idx) & takes_z
    return int(use_z.sum()), math.fsum(M[idx[~use_z], cols[~use_z]].tolist())


def characteristic_value(A: ArrayLike, z: float) -> float:
    r"""The characteristic maxpolynomial at one point: :math:`\operatorname{per}(A \oplus z I)`.

    Parameters
    ----------
    A : array_like, shape (n, n)
        Dense max-plus matrix, ε = ``-inf`` for "no arc".
    z : float
        The point; ``-inf`` gives :math:`\operatorname{per}(A)`, ``+inf`` gives ``+inf``
        (for ``n > 0``).

    Returns
    -------
    float
        :math:`\chi_A(z)`; finite for every finite ``z`` (the identity permutation is finite).

    Raises
    ------
    InvalidArray
        If ``A`` is not a valid matrix or ``z`` is NaN.

    Notes
    -----
    One assignment problem, ``O(n^3)``: the diagonal holds :math:`\max(a_{ii}, z)`.

    References
    ----------
    .. [1] R. A. Cuninghame-Green, "The characteristic maxpolynomial of a matrix", *J. Math.
       Anal. Appl.* 95 (1983), 110–116.
    .. [2] M. Akian, R. Bapat, S. Gaubert, "Max-plus algebra", *Handbook of Linear Algebra*,
       2nd ed., 2014, ch. 35.

    Examples
    --------
    For ``[[a, b], [c, d]]``, :math:`\chi(z) = \max(2z, \max(a, d) + z, \max(a + d, b + c))`:

    >>> A = [[3.0, 7.0], [2.0, 4.0]]
    >>> characteristic_value(A, 5.0)  # max(10, 9, 9)
    10.0
    >>> characteristic_value(A, 0.0)  # max(0, 4, 9)
    9.0
    """
    M = _as_matrix(A)
    z = float(z)
    if math.isnan(z):
        raise InvalidArray("z must be a number or ±inf, got nan")
    if M.shape[0] == 0:
        return 0.0
    if z == -math.inf:
        return tropical_permanent(M)
    if z == math.inf:
        return math.inf
    k, c = _line_at(M, z)
    return k * z + c


@dataclass(frozen=True)
class CharPoly:
    r"""The essential terms and the corners of a characteristic maxpolynomial.

    Attributes
    ----------
    n : int
        Size of the matrix (the degree of :math:`\chi`).
    degrees : tuple of int
        Degrees ``k`` of the essential terms, ascending; always ends with ``n``.
    coefficients : tuple of float
        :math:`\delta_k` for each essential degree (all finite); the last is ``0.0``.
    corners : tuple of float
        The roots, descending; ``-inf`` (ε) comes last when ``degrees[0] > 0``.
    multiplicities : tuple of int
        Change of slope at each corner (for ε: ``degrees[0]``); they add up to ``n``.
    assignments : int
        Number of assignment problems the parametric search solved (its cost; not compared by
        ``==``, since ties may change the path of the search but not its result).
    """

    n: int
    degrees: tuple[int, ...]
    coefficients: tuple[float, ...]
    corners: tuple[float, ...]
    multiplicities: tuple[int, ...]
    assignments: int = field(default=0, compare=False)

    def __call__(self, z: ArrayLike) -> Any:
        r"""Evaluate :math:`\max_k (k z + \delta_k)` over the essential terms (float or array)."""
        zz = np.asarray(z, dtype=np.float64)
        k = np.asarray(self.degrees, dtype=np.float64).reshape((-1,) + (1,) * zz.ndim)
        d = np.asarray(self.coefficients, dtype=np.float64).reshape(k.shape)
        with np.errstate(invalid="ignore"):  # 0 · ±inf: the constant term stays δ_0
            terms = np.where(k == 0, d, k * zz + d)
        out = terms.max(axis=0)
        return float(out) if out.ndim == 0 else out

    @property
    def permanent(self) -> float:
        """:math:`\\delta_0 = \\operatorname{per}(A)`, ε when ``0`` is not an essential degree."""
        return self.coefficients[0] if self.degrees[0] == 0 else EPS

    @property
    def largest_corner(self) -> float:
        """The largest root: the maximum cycle mean of the matrix (ε if it has no circuit)."""
        return self.corners[0] if self.corners else EPS

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form: ε becomes ``None``."""
        return {
            "n": self.n,
            "degrees": list(self.degrees),
            "coefficients": list(self.coefficients),
            "corners": [None if r == EPS else r for r in self.corners],
            "multiplicities": list(self.multiplicities),
        }


def essential_terms(A: ArrayLike) -> CharPoly:
    r"""The essential terms and the corners of :math:`\chi_A(z) = \operatorname{per}(A \oplus zI)`.

    Parameters
    ----------
    A : array_like, shape (n, n)
        Dense max-plus matrix, ε = ``-inf`` for "no arc".

    Returns
    -------
    CharPoly
        Essential degrees and coefficients, corners (descending) with multiplicities.

    Raises
    ------
    InvalidArray
        If ``A`` is not square or holds NaN or ``+inf``.
    OutOfRange
        If sums of its entries would exceed the range of floating point.

    Notes
    -----
    Parametric evaluation of the convex function :math:`\chi_A`. At a finite ``z`` one
    assignment problem on :math:`A \oplus zI` gives :math:`\chi_A(z)` and a line ``k z + δ_k``
    tight there (``k`` = the diagonal places where the optimal assignment takes ``z``). The
    search starts from the line of slope ``n`` (:math:`\delta_n = 0`) and the line of lowest
    slope, found at a point below every corner (all corners lie in
    ``[lo - n·(hi - lo), hi]`` for finite entries in ``[lo, hi]``). For two known lines it
    evaluates :math:`\chi_A` where they cross: either that point is a corner (nothing rises
    above it; multiplicity = difference of slopes), or the new line is another essential term
    and both halves are searched. Each call finds a new term or a corner, so at most
    ``2(n - k0) + 1 <= 2n + 1`` assignment problems of ``O(n^3)`` are solved: ``O(n^4)``.
    Burkard & Butkovič [2]_ give a polynomial method of the same kind.

    A term that rises above its neighbours by less than about :math:`10^{-12} n` times the
    largest magnitude of the entries is treated as inessential, and corners closer than that
    are merged: the answer is then exact to that level. Integer matrices are exact.

    References
    ----------
    .. [1] R. A. Cuninghame-Green, "The characteristic maxpolynomial of a matrix", *J. Math.
       Anal. Appl.* 95 (1983), 110–116.
    .. [2] R. E. Burkard, P. Butkovič, "Finding all essential terms of a characteristic
       maxpolynomial", *Discrete Appl. Math.* 130 (2003), 367–380.
    .. [3] M. Akian, R. Bapat, S. Gaubert, "Max-plus algebra", *Handbook of Linear Algebra*,
       2nd ed., 2014, ch. 35 (the greatest corner is the maximum cycle mean).

    Examples
    --------
    :math:`\chi(z) = \max(2z, z + 4, 9)`: the term ``z + 4`` is inessential, and the double
    corner 4.5 is the mean of the circuit ``0 -> 1 -> 0``:

    >>> cp = essential_terms([[3.0, 7.0], [2.0, 4.0]])
    >>> cp.degrees, cp.coefficients
    ((0, 2), (9.0, 0.0))
    >>> cp.corners, cp.multiplicities
    ((4.5,), (2,))
    >>> cp(5.0)
    10.0

    Without a finite permanent ε is a root:

    >>> cp = essential_terms([[2.0, -np.inf], [0.0, -np.inf]])
    >>> cp.degrees, cp.corners, cp.multiplicities
    ((1, 2), (2.0, -inf), (1, 1))
    """
    M = _as_matrix(A)
    n = M.shape[0]
    lo, hi, scale = _scale(M)
    if n == 0:
        return CharPoly(0, (0,), (0.0,), (), (), 0)
    assignments = 0
    if not np.isfinite(M).any():
        k0, c0 = n, 0.0
    else:
        k0, c0 = _line_at(M, lo - n * (hi - lo) - scale)
        assignments += 1
    # Known lines k -> δ_k, and corners as (z, k_left, k_right) of adjacent essential lines.
    lines = {k0: c0, n: 0.0}
    found: list[tuple[float, int, int]] = []
    stack = [(k0, n)] if k0 < n else []
    tol = _RTOL * n * scale
    while stack:
        k1, k2 = stack.pop()
        c1, c2 = lines[k1], lines[k2]
        z = (c1 - c2) / (k2 - k1)
        k3, c3 = _line_at(M, z)
        assignments += 1
        # (k2 - k1) · (line3(z) - line1(z)), without rounding z.
        gain = (k3 - k1) * (c1 - c2) + (c3 - c1) * (k2 - k1)
        if k1 < k3 < k2 and gain > tol * (k2 - k1):
            lines[k3] = c3
            stack += [(k1, k3), (k3, k2)]
        else:
            found.append((z, k1, k2))
    found.sort(key=lambda t: t[1])  # chain order: the slopes rise from k0 to n
    merged: list[list[Any]] = []
    for z, k1, k2 in found:
        if merged and z - merged[-1][0] <= tol:
            merged[-1][2] = k2  # same corner: the line between is not essential
        else:
            merged.append([z, k1, k2])
    degrees = [k0] + [k2 for _, _, k2 in merged]
    corners = [float(z) for z, _, _ in reversed(merged)]
    mults = [k2 - k1 for _, k1, k2 in reversed(merged)]
    if k0 > 0:
        corners.append(EPS)
        mults.append(k0)
    return CharPoly(
        n=n,
        degrees=tuple(degrees),
        coefficients=tuple(float(lines[k]) for k in degrees),
        corners=tuple(corners),
        multiplicities=tuple(mults),
        assignments=assignments,
    )


def charpoly_or_none(
    A: ArrayLike, max_size: int = MAX_DENSE_SIZE
) -> tuple[CharPoly | None, str | None]:
    """:func:`essential_terms` if the matrix is small enough, else ``None`` and the reason.

    Parameters
    ----------
    A : array_like, shape (n, n)
        Dense max-plus matrix, ε = ``-inf`` for "no arc".
    max_size : int
        Largest ``n`` computed (default :data:`MAX_DENSE_SIZE`).

    Returns
    -------
    (CharPoly, None) or (None, str)
        The result, or ``None`` with a sentence saying why it was skipped.

    Raises
    ------
    InvalidArray
        If ``A`` is not a valid matrix (a bad matrix is an error, not a reason to skip).

    References
    ----------
    .. [1] R. E. Burkard, P. Butkovič, "Finding all essential terms of a characteristic
       maxpolynomial", *Discrete Appl. Math.* 130 (2003), 367–380.

    Examples
    --------
    >>> charpoly_or_none(np.zeros((3, 3)), max_size=2)
    (None, 'matrix of size 3 exceeds the limit 2 for the dense characteristic polynomial')
    """
    M = _as_matrix(A)
    n = M.shape[0]
    if n > max_size:
        return None, (
            f"matrix of size {n} exceeds the limit {max_size} for the dense characteristic "
            "polynomial"
        )
    return essential_terms(M), None


def poly_cycle_coefficients(A: ArrayLike) -> np.ndarray:
    r"""Every coefficient :math:`\delta_k`, essential or not, by enumeration (small ``n`` only).

    :math:`\delta_k` is the best weight of a set of disjoint circuits covering ``n - k`` nodes:
    the largest permanent of a principal ``(n-k) × (n-k)`` submatrix, each permanent summed
    over all permutations. The slow twin of :func:`essential_terms`, and the only way here to
    see the inessential terms.

    Parameters
    ----------
    A : array_like, shape (n, n)
        Dense max-plus matrix with ``n <= MAX_ENUMERATION_SIZE``.

    Returns
    -------
    ndarray of float, shape (n + 1,)
        ``delta[k]`` for ``k = 0 .. n``; ε (``-inf``) where no poly-cycle covers ``n - k``
        nodes; ``delta[n] = 0``.

    Raises
    ------
    InvalidArray
        If ``A`` is not a valid matrix.
    MaxPlusError
        If ``n > MAX_ENUMERATION_SIZE``.

    References
    ----------
    .. [1] R. E. Burkard, P. Butkovič, "Finding all essential terms of a characteristic
       maxpolynomial", *Discrete Appl. Math.* 130 (2003), 367–380.
    .. [2] R. A. Cuninghame-Green, "The characteristic maxpolynomial of a matrix", *J. Math.
       Anal. Appl.* 95 (1983), 110–116.

    Examples
    --------
    >>> poly_cycle_coefficients([[3.0, 7.0], [2.0, 4.0]])  # 9, max(3, 4), 0
    array([9., 4., 0.])
    """
    M = _as_matrix(A)
    n = M.shape[0]
    if n > MAX_ENUMERATION_SIZE:
        raise MaxPlusError(
            f"poly_cycle_coefficients enumerates permutations and accepts n <= "
            f"{MAX_ENUMERATION_SIZE}, got n = {n}"
        )
    rows = M.tolist()
    delta = np.full(n + 1, EPS)
    delta[n] = 0.0
    for size in range(1, n + 1):
        best = EPS
        for nodes in combinations(range(n), size):
            for image in permutations(nodes):
                best = max(best, math.fsum(rows[i][j] for i, j in zip(nodes, image, strict=True)))
        delta[n - size] = best
    return delta
