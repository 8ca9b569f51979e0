r"""Warm-up deletion: the MSER truncation rule for one run, Welch's moving average for several.

Like :mod:`cyclecheck.simulate.estimate`, which re-exports these names, everything here works on
plain numbers and knows nothing of event graphs. Choose the warm-up ``K0`` from the increments of
one run, ``mser5(numpy.diff(x))``, or read it off a Welch plot (:func:`welch_average`) of several
runs. Bad arguments raise :class:`~cyclecheck.simulate.errors.ArgumentError` (a ValueError)
whose message names the argument and the rule it breaks.

References
----------
.. [1] A. M. Law, W. D. Kelton, *Simulation Modeling and Analysis*, 3rd ed., McGraw-Hill, 2000,
   ch. 9: Welch's procedure (§9.5.1).
.. [2] K. P. White, Jr., "An effective truncation heuristic for bias reduction in simulation
   output", *Simulation* 69(6), 323–334, 1997 (MSER-5).
.. [3] P. D. Welch, "The statistical analysis of simulation results", in S. S. Lavenberg (ed.),
   *Computer Performance Modeling Handbook*, Academic Press, 1983, 268–328 (warm-up plot).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import ArgumentError

__all__ = ["Truncation", "mser", "mser5", "welch_average"]


# ---------------------------------------------------------------------------------------------
# validation: every public function here and in estimate.py checks its arguments with these
# (they live here because estimate.py imports this module), the rest trusts them


def _series(values: ArrayLike, name: str, min_len: int) -> NDArray[np.float64]:
    arr = np.asarray(values, dtype=np.float64)
    if arr.ndim != 1:
        raise ArgumentError(f"{name} must be one-dimensional, got shape {arr.shape}")
    if arr.size < min_len:
        raise ArgumentError(f"{name} must hold at least {min_len} values, got {arr.size}")
    if not np.all(np.isfinite(arr)):
        raise ArgumentError(f"{name} must be finite numbers (no NaN or infinity)")
    return arr


def _count(value: int, name: str, least: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int | np.integer) or value < least:
        raise ArgumentError(f"{name} must be an integer >= {least}, got {value!r}")
    return int(value)


# ---------------------------------------------------------------------------------------------
# warm-up


@dataclass(frozen=True)
class Truncation:
    """Outcome of :func:`mser`.

    Attributes
    ----------
    deleted, batch_size : int
        Raw observations to delete from the start (a multiple of ``batch_size``, 5 for MSER-5).
    statistic : numpy.ndarray
        MSER statistic for deleting ``0, 1, ..., m // 2`` batches (the searched first half).
    at_limit : bool
        The minimum lies on the last batch searched: the transient may run past half the
        series; run longer before trusting the truncation point.
    """

    deleted: int
    batch_size: int
    statistic: NDArray[np.float64]
    at_limit: bool


def mser(series: ArrayLike, batch_size: int = 5) -> Truncation:
    r"""MSER truncation point of one run (White [2]_): the warm-up to delete.

    The series is averaged in consecutive batches of ``batch_size`` (a trailing remainder is
    dropped), giving :math:`Z_1, \dots, Z_m`. For each number ``d`` of batches deleted,

    .. math::

        \mathrm{MSER}(d) = \frac{1}{(m-d)^2} \sum_{j=d+1}^{m} \bigl(Z_j - \bar Z_{m,d}\bigr)^2,

    the squared half-width (up to a constant) of the mean of what remains. Deleting biased
    early values shrinks the sum faster than the count, so the minimiser ``d*`` balances bias
    against the loss of data. The search is over ``d <= m // 2`` only: near the end of the run
    the statistic is computed from a handful of values and is meaningless (White, Cobb & Spratt,
    2000, from memory). Returns ``batch_size · d*`` raw observations.

    Limits: MSER sees one run, so a slow transient hidden by noise can be missed (a Welch plot
    of several runs, :func:`welch_average`, shows it); a minimum at the search limit
    (``at_limit``) means the run is too short; a series with a trend that never settles has no
    meaningful truncation point. Ties go to the smallest ``d``.

    Parameters
    ----------
    series : array_like of float
        One run's observations in time order, at least ``2 · batch_size`` values.
    batch_size : int
        Batch size (5 gives MSER-5).
    """
    size = _count(batch_size, "batch_size", 1)
    y = _series(series, "series", 2 * size)
    m = y.size // size
    z = y[: m * size].reshape(m, size).mean(axis=1)
    z = z - z.mean()  # shift-invariant statistic: centring limits cancellation in the sums
    half = m // 2
    # tail sums over j >= d for d = 0 .. half, from reversed cumulative sums
    s = np.cumsum(z[::-1])[::-1][: half + 1]
    q = np.cumsum((z * z)[::-1])[::-1][: half + 1]
    c = (m - np.arange(half + 1)).astype(np.float64)
    ss = np.maximum(q - s * s / c, 0.0)
    stat = ss / (c * c)
    d = int(np.argmin(stat))
    return Truncation(d * size, size, stat, at_limit=(d == half and half > 0))


def mser5(series: ArrayLike) -> int:
    """MSER-5 truncation point (White [2]_): raw observations to delete from the start.

    Shorthand for ``mser(series, 5).deleted``; see :func:`mser` for the rule and its limits.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(np.random.SeedSequence(7))
    >>> y = 10.0 * np.exp(-np.arange(1000) / 20.0) + rng.normal(size=1000)
    >>> 30 <= mser5(y) <= 150
    True
    """
    return mser(series, 5).deleted


def welch_average(replications: ArrayLike, window: int) -> NDArray[np.float64]:
    r"""Welch's moving average across replications, for a warm-up plot (Welch [3]_).

    The observations are first averaged across replications, :math:`\bar Y_i`, then smoothed
    by a centred moving average (Law & Kelton [1]_ §9.5.1):

    .. math::

        \bar Y_i(w) = \begin{cases}
            \frac{1}{2i-1} \sum_{s=-(i-1)}^{i-1} \bar Y_{i+s} & i = 1, \dots, w \\
            \frac{1}{2w+1} \sum_{s=-w}^{w} \bar Y_{i+s} & i = w+1, \dots, m-w.
        \end{cases}

    The warm-up is read off the plot as the index past which the curve is flat. Law & Kelton
    advise ``w <= m / 4`` (from memory).

    Parameters
    ----------
    replications : array_like of float, shape (n_replications, m) or (m,)
        Observation ``i`` of each replication (a 1-D array is a single replication).
    window : int
        Half-width ``w`` of the moving window, ``1 <= w <= (m - 1) // 2``.

    Returns
    -------
    numpy.ndarray, shape (m - w,)
    """
    arr = np.asarray(replications, dtype=np.float64)
    if arr.ndim == 1:
        arr = arr[np.newaxis, :]
    if arr.ndim != 2 or arr.shape[0] < 1:
        raise ArgumentError(
            f"replications must be a 2-D array (replication, index), got {arr.shape}")
    if not np.all(np.isfinite(arr)):
        raise ArgumentError("replications must be finite numbers (no NaN or infinity)")
    m = arr.shape[1]
    w = _count(window, "window", 1)
    if w > (m - 1) // 2:
        raise ArgumentError(f"window must be at most (m - 1) // 2 = {(m - 1) // 2}, got {w}")
    ybar = arr.mean(axis=0)
    cs = np.concatenate(([0.0], np.cumsum(ybar)))
    out = np.empty(m - w)
    i = np.arange(1, w + 1)  # growing windows 1 .. w (1-based index i covers 1 .. 2i-1)
    out[:w] = cs[2 * i - 1] / (2 * i - 1)
    j = np.arange(w + 1, m - w + 1)
    out[w:] = (cs[j + w] - cs[j - w - 1]) / (2 * w + 1)
    return out
