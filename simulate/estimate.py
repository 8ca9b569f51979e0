r"""Output analysis of simulation runs: warm-up deletion, confidence intervals, stopping rules.

Everything here works on plain numbers (one series, or one estimate per replication) and knows
nothing of event graphs, so that any engine can use it. A typical cycle-time study:

1. choose the warm-up ``K0`` from the increments of one run, ``mser5(numpy.diff(x))``, or from a
   Welch plot (:func:`welch_average`) of several runs (both from
   :mod:`cyclecheck.simulate.warmup`, re-exported here);
2. estimate each replication by its mean increment after the warm-up,
   :func:`mean_increment` ``= (x(K) − x(K0)) / (K − K0)``;
3. build a Student-t interval over the replications (:func:`replication_interval`), or over
   batches of one long run (:func:`batch_means`), or let :func:`sequential_precision` add
   replications (or lengthen the runs) until a relative precision is reached.

Confidence intervals are :class:`Interval` objects. Bad arguments raise
:class:`~cyclecheck.simulate.errors.ArgumentError` (a ValueError) whose message names the
argument and the rule it breaks.

References
----------
.. [1] A. M. Law, W. D. Kelton, *Simulation Modeling and Analysis*, 3rd ed., McGraw-Hill, 2000,
   ch. 9: replication/deletion (§9.4.1), the relative-precision sequential procedure and the
   corrected target γ/(1+γ) (§9.4.1), Welch's procedure (§9.5.1), batch means (§9.5.3).
.. [2] A. M. Law, J. S. Carson, "A sequential procedure for determining the length of a
   steady-state simulation", *Operations Research* 27(5), 1011–1025, 1979 (checking the
   correlation of many small batches before using few large ones).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import asdict, dataclass, replace
from typing import Any, Literal, NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import ArgumentError
from .warmup import Truncation, _count, _series, mser, mser5, welch_average

__all__ = [
    "BatchChoice",
    "Checkpoint",
    "Interval",
    "SequentialResult",
    "Truncation",
    "batch_means",
    "choose_batch_count",
    "lag1_autocorrelation",
    "mean_increment",
    "mser",
    "mser5",
    "replication_interval",
    "sequential_precision",
    "student_quantile",
    "welch_average",
]

# doctest.testmod(estimate) runs the example of the re-exported mser5 as it did when it lived here
__test__ = {"mser5": mser5}

# One-sided 95 % normal quantile: the lag-1 sample autocorrelation of k independent values is
# approximately N(0, 1/k) (Bartlett's large-sample result, from memory).
_LAG1_Z = 1.6448536269514722


# ---------------------------------------------------------------------------------------------
# validation: every public function checks its arguments here, the rest trusts them
# (the series and count checks, shared with the warm-up functions, are imported from warmup.py)


def _open_unit(value: float, name: str, hint: str = "") -> float:
    if not isinstance(value, int | float | np.floating | np.integer) or not 0.0 < value < 1.0:
        raise ArgumentError(f"{name} must be in (0, 1){hint}, got {value!r}")
    return float(value)


# ---------------------------------------------------------------------------------------------
# intervals


@dataclass(frozen=True)
class Interval:
    """A point estimate with a two-sided Student-t confidence interval.

    Attributes
    ----------
    estimate, low, high, half_width : float
        The mean, ``estimate ∓ half_width``, and ``half_width = t_{n−1, (1+level)/2} · s/√n``.
    relative_half_width : float
        ``half_width / |estimate|`` (``inf`` for a zero estimate, 0 if the half-width is 0 too).
    n : int
        Independent values behind the interval (replications or batches): ``n − 1`` d.o.f.
    level : float
        Confidence level, e.g. 0.95.
    method : str
        How the interval was obtained, in words, for reports.
    batch_size, lag1, lag1_limit : int, float, float or None
        Batch means only: observations per batch, lag-1 autocorrelation of the batch means,
        and the one-sided 5 % limit ``1.645/√n`` above which that correlation is significant
        (the batches are too small and the interval is likely too narrow).
    """

    estimate: float
    low: float
    high: float
    half_width: float
    relative_half_width: float
    n: int
    level: float
    method: str
    batch_size: int | None = None
    lag1: float | None = None
    lag1_limit: float | None = None

    @property
    def batches_correlated(self) -> bool:
        """True when the batch means show significant positive lag-1 autocorrelation."""
        return self.lag1 is not None and self.lag1_limit is not None and self.lag1 > self.lag1_limit

    def covers(self, value: float) -> bool:
        """True when ``low <= value <= high``."""
        return self.low <= value <= self.high

    def to_dict(self) -> dict[str, Any]:
        """The fields as a plain dict of JSON-ready numbers and strings."""
        return asdict(self)


def student_quantile(p: float, df: ArrayLike) -> np.ndarray:
    """Quantile ``p`` of Student's t with ``df`` degrees of freedom: ``scipy.special.stdtrit``,
    which ``scipy.stats.t.ppf`` calls (the same numbers) without the 0.9 s that importing
    scipy.stats costs every run of ``analyze``, ``check`` and ``sweep``.

    >>> round(float(student_quantile(0.975, 9)), 4)
    2.2622
    """
    from scipy.special import stdtrit

    return stdtrit(df, p)


def _t_interval(values: NDArray[np.float64], level: float, method: str) -> Interval:
    n = values.size
    mean = float(values.mean())
    sd = float(values.std(ddof=1))
    half = float(student_quantile(0.5 + level / 2.0, n - 1)) * sd / math.sqrt(n)
    if mean != 0.0:
        rel = half / abs(mean)
    else:
        rel = 0.0 if half == 0.0 else math.inf
    return Interval(mean, mean - half, mean + half, half, rel, n, level, method)


def replication_interval(values: ArrayLike, level: float = 0.95) -> Interval:
    r"""Mean of independent replication estimates with its Student-t interval.

    .. math::

        \bar X(n) \pm t_{n-1,\,1-\alpha/2} \sqrt{S^2(n)/n}, \qquad \alpha = 1 - \text{level}.

    Parameters
    ----------
    values : array_like of float, shape (n,)
        One estimate per independent replication (``n >= 2``), e.g. each run's mean after
        warm-up deletion.
    level : float
        Confidence level in (0, 1).

    Returns
    -------
    Interval
        Exact for normal values, approximately right for means of long runs (central limit
        theorem). Law & Kelton [1]_ §9.4.1 (replication/deletion).

    Examples
    --------
    >>> iv = replication_interval([9.8, 10.1, 10.3, 9.9, 10.0])
    >>> round(iv.estimate, 2), round(iv.half_width, 3)
    (10.02, 0.239)
    """
    level = _open_unit(level, "level")
    arr = _series(values, "values", 2)
    return _t_interval(arr, level, "replication t-interval")


def lag1_autocorrelation(values: ArrayLike) -> float:
    r"""Lag-1 sample autocorrelation of a series (Law & Kelton [1]_ §4.3).

    :math:`\sum_i c_i c_{i+1} / \sum_i c_i^2` with :math:`c = Y - \bar Y`; 0.0 for a constant
    series (no evidence of correlation).
    """
    y = _series(values, "values", 2)
    c = y - y.mean()
    den = float(c @ c)
    return 0.0 if den == 0.0 else float(c[:-1] @ c[1:]) / den


def _batch(y: NDArray[np.float64], size: int, k: int | None = None) -> NDArray[np.float64]:
    """Means of the last ``k`` (default: as many as fit) batches of ``size``; older values go."""
    k = y.size // size if k is None else k
    return y[y.size - k * size :].reshape(k, size).mean(axis=1)


def batch_means(series: ArrayLike, n_batches: int = 20, level: float = 0.95) -> Interval:
    r"""Batch-means estimate of a steady-state mean from one long run.

    The series (warm-up already deleted) is cut into ``n_batches`` consecutive batches of
    ``b = len(series) // n_batches`` observations; the batch means are treated as independent
    and a Student-t interval with ``n_batches − 1`` degrees of freedom is built over them
    (Law & Kelton [1]_ §9.5.3). The ``len(series) − n_batches · b`` oldest observations, those
    closest to the warm-up, are dropped.

    Parameters
    ----------
    series : array_like of float, shape (n,)
        One run's observations after warm-up deletion, ``n >= n_batches``.
    n_batches : int
        Number of batches, at least 2; 10 to 30 is the usual advice (from memory).
    level : float
        Confidence level in (0, 1).

    Returns
    -------
    Interval
        With ``batch_size``, ``lag1`` (lag-1 autocorrelation of the batch means) and
        ``lag1_limit``. If ``lag1 > lag1_limit`` (see :attr:`Interval.batches_correlated`) the
        batches are too small for the run: use a longer run, or fewer, larger batches chosen by
        :func:`choose_batch_count`. With few batches the test has little power, which is why
        :func:`choose_batch_count` checks the correlation on many small batches instead.
    """
    level = _open_unit(level, "level")
    k = _count(n_batches, "n_batches", 2)
    y = _series(series, "series", k)
    size = y.size // k
    means = _batch(y, size, k)
    iv = _t_interval(means, level, f"batch means ({k} batches of {size})")
    return replace(
        iv,
        batch_size=size,
        lag1=lag1_autocorrelation(means),
        lag1_limit=_LAG1_Z / math.sqrt(k),
    )


@dataclass(frozen=True)
class BatchChoice:
    """Outcome of :func:`choose_batch_count`.

    Attributes
    ----------
    n_batches, batch_size : int
        The batch count to pass to :func:`batch_means`, and the batch size it gives.
    check_size, check_lag1 : int, float
        The first doubled batch size whose means passed the correlation check (or the last one
        tried), and the lag-1 autocorrelation of those batch means.
    accepted : bool
        False when no size up to ``len(series) // check_batches`` passed: the run is too short
        for batch means, and an interval from ``n_batches`` batches is likely too narrow.
    """

    n_batches: int
    batch_size: int
    check_size: int
    check_lag1: float
    accepted: bool


def choose_batch_count(
    series: ArrayLike,
    min_batches: int = 10,
    max_batches: int = 30,
    check_batches: int = 100,
    max_lag1: float = 0.2,
    size_factor: int = 5,
) -> BatchChoice:
    """Choose the number of batches for :func:`batch_means` from the run's own correlation.

    Rule (in the spirit of Law & Carson [2]_, thresholds ours: common practice, no source):
    double the batch size ``b = 1, 2, 4, ...`` while at least ``check_batches`` batches fit,
    until the lag-1 autocorrelation of the batch means is at most ``max_lag1`` in absolute
    value. Many small batches give a precise correlation estimate (standard error about
    ``1/√check_batches``). The final batches are then made at least ``size_factor`` times
    larger than the accepted size, which drives their correlation well below ``max_lag1``:
    ``n_batches = min(max_batches, len // (size_factor · b))``, accepted when that is at least
    ``min_batches``.

    Parameters
    ----------
    series : array_like of float
        One run after warm-up deletion, at least ``check_batches`` values.
    min_batches, max_batches, check_batches : int
        Range of the count returned (``2 <= min <= max``); least number of batches on which a
        correlation is judged (``>= min_batches``).
    max_lag1 : float
        Largest acceptable |lag-1 autocorrelation| of the checked batch means, in (0, 1).
    size_factor : int
        Final batches are at least this many times the accepted check size (``>= 1``).

    Returns
    -------
    BatchChoice
        When not accepted, ``n_batches = min_batches`` (the largest batches still allowed).
    """
    lo = _count(min_batches, "min_batches", 2)
    hi = _count(max_batches, "max_batches", lo)
    check = _count(check_batches, "check_batches", lo)
    factor = _count(size_factor, "size_factor", 1)
    limit = _open_unit(max_lag1, "max_lag1")
    y = _series(series, "series", check)
    b = 1
    rho = lag1_autocorrelation(_batch(y, b))
    while abs(rho) > limit and y.size // (2 * b) >= check:
        b *= 2
        rho = lag1_autocorrelation(_batch(y, b))
    k = min(hi, y.size // (factor * b))
    accepted = abs(rho) <= limit and k >= lo
    if not accepted:
        k = lo
    return BatchChoice(k, y.size // k, b, rho, accepted)


# ---------------------------------------------------------------------------------------------
# the estimate of one replication


def mean_increment(series: ArrayLike, deleted: int = 0) -> float | NDArray[np.float64]:
    r"""Mean increment after deleting a warm-up: :math:`(x(K) - x(K_0)) / (K - K_0)`.

    ``series`` holds :math:`x(1), \dots, x(K)` along its last axis (index ``k − 1``), and
    :math:`x(0) = 0`. For the completion times of successive firings this is the cycle-time
    estimate of one replication after deleting ``K_0 = deleted`` firings; a 2-D array gives one
    estimate per row (replication).

    Parameters
    ----------
    series : array_like of float, shape (..., K)
    deleted : int
        Warm-up ``K_0``, ``0 <= K_0 < K`` (e.g. ``mser5(numpy.diff(x))``).
    """
    x = np.asarray(series, dtype=np.float64)
    if x.ndim < 1 or x.shape[-1] < 1:
        raise ArgumentError("series must hold at least one value along its last axis")
    if not np.all(np.isfinite(x)):
        raise ArgumentError("series must be finite numbers (no NaN or infinity)")
    k = x.shape[-1]
    k0 = _count(deleted, "deleted", 0)
    if k0 >= k:
        raise ArgumentError(f"deleted must be smaller than the series length {k}, got {k0}")
    start = x[..., k0 - 1] if k0 > 0 else 0.0
    result = (x[..., -1] - start) / (k - k0)
    return float(result) if np.ndim(result) == 0 else result


# ---------------------------------------------------------------------------------------------
# sequential relative precision


class Checkpoint(NamedTuple):
    """One round of :func:`sequential_precision`: the work done so far and the interval then."""

    work: int
    estimate: float
    low: float
    high: float


@dataclass(frozen=True)
class SequentialResult:
    """Outcome of :func:`sequential_precision`.

    Attributes
    ----------
    interval : Interval
        The final interval, over ``values`` (the independent estimates at the end).
    history : tuple of Checkpoint
        One ``(work, estimate, low, high)`` per round, for a running-estimate figure.
    target_met : bool
        Whether ``interval.relative_half_width <= target`` at the end.
    precision, target : float
        The requested relative error γ, and the relative half-width aimed at, γ/(1+γ).
    work : int
        Total work done (replications in ``"append"`` mode, units per run in ``"replace"``).
    """

    interval: Interval
    history: tuple[Checkpoint, ...]
    target_met: bool
    precision: float
    target: float
    work: int
    values: NDArray[np.float64]


def sequential_precision(
    step: Callable[[int], ArrayLike],
    precision: float,
    level: float = 0.95,
    initial: int = 10,
    max_work: int = 1000,
    *,
    mode: Literal["append", "replace"] = "append",
    growth: float = 2.0,
    min_step: int = 1,
) -> SequentialResult:
    r"""Add simulation work until the mean is known to a relative precision (Law & Kelton [1]_).

    To estimate μ with relative error :math:`|\bar X - \mu| / |\mu| \le \gamma` at the given
    level, Law & Kelton's sequential procedure (§9.4.1) adds replications until

    .. math::

        t_{n-1,1-\alpha/2} \sqrt{S^2(n)/n} \,/\, |\bar X(n)| \le \gamma' = \gamma / (1+\gamma),

    the corrected target: the half-width is relative to the estimate, not to μ. The check is
    made after each round of work, not each replication, so a round can run in parallel. The
    next round assumes the half-width shrinks as :math:`1/\sqrt{w}` with the work ``w`` and adds
    ``w · (r/γ')² − w`` (``r``: current relative half-width), at least ``min_step``, at most
    ``(growth − 1) · w`` (a noisy early variance cannot commit a huge round), within ``max_work``.

    The caller owns the unit of work and the engine; two ways to plug one in:

    ``mode="append"`` (replication/deletion)
        ``step(n)`` runs ``n`` new independent replications of a fixed length and returns their
        ``n`` estimates, e.g. :func:`mean_increment` of each after warm-up deletion. Work counts
        replications; ``initial`` replications first (at least 2; Law & Kelton advise at least
        10, from memory).
    ``mode="replace"`` (longer runs)
        a fixed set of replications is extended: ``step(n)`` adds ``n`` units of work (e.g.
        firings) to every run and returns the current estimate of every run (the same number,
        at least 2, each time); they replace the previous values. Work counts units per run;
        the first call is ``step(initial)``.

    Parameters
    ----------
    step : callable ``int -> array_like of float``
        Does the work, as above, and returns the estimates.
    precision, level : float
        Relative error γ in (0, 1), e.g. 0.01; confidence level in (0, 1).
    initial, max_work : int
        Work of the first round; work budget (the procedure stops there, target not met).
    mode : {"append", "replace"}
    growth, min_step : float, int
        Largest factor of growth of the work in one round (``> 1``); least work per round.

    Returns
    -------
    SequentialResult
        An ArgumentError is raised for bad arguments and for a ``step`` returning the wrong number
        of estimates or non-finite ones. Stopping when a random half-width happens to be small
        lowers the coverage a little below the level, more so with a small ``initial`` (Law &
        Kelton §9.4.1).

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(np.random.SeedSequence(1))
    >>> res = sequential_precision(lambda n: rng.normal(10.0, 2.0, n), precision=0.02)
    >>> res.target_met, res.interval.relative_half_width <= 0.02 / 1.02
    (True, True)
    """
    gamma = _open_unit(precision, "precision", " (a relative error such as 0.05)")
    level = _open_unit(level, "level")
    if mode not in ("append", "replace"):
        raise ArgumentError(f'mode must be "append" or "replace", got {mode!r}')
    first = _count(initial, "initial", 2 if mode == "append" else 1)
    budget = _count(max_work, "max_work", first)
    least = _count(min_step, "min_step", 1)
    if not isinstance(growth, int | float) or not (growth > 1.0 and math.isfinite(growth)):
        raise ArgumentError(f"growth must be a finite number > 1, got {growth!r}")
    target = gamma / (1.0 + gamma)

    values = np.empty(0)
    history: list[Checkpoint] = []
    work, more = 0, first
    while True:
        new = np.asarray(step(more), dtype=np.float64)
        if new.ndim != 1 or not np.all(np.isfinite(new)):
            raise ArgumentError("step must return a 1-D array of finite estimates")
        if mode == "append":
            if new.size != more:
                raise ArgumentError(f"step({more}) must return {more} estimates, got {new.size}")
            values = np.concatenate((values, new))
        else:
            if new.size < 2 or (work > 0 and new.size != values.size):
                expected = values.size if work > 0 else "at least 2"
                raise ArgumentError(
                    f"step must return one estimate per replication ({expected}), got {new.size}"
                )
            values = new
        work += more
        iv = _t_interval(values, level, "replication t-interval")
        history.append(Checkpoint(work, iv.estimate, iv.low, iv.high))
        met = iv.relative_half_width <= target
        if met or work >= budget:
            break
        r = iv.relative_half_width
        wanted = math.ceil(work * (r / target) ** 2) - work if math.isfinite(r) else budget
        more = min(max(wanted, least), max(math.ceil((growth - 1.0) * work), least), budget - work)

    method = (
        f"sequential relative precision {gamma:g} "
        f"({'replications' if mode == 'append' else 'extended runs'}, t-interval)"
    )
    return SequentialResult(
        interval=replace(iv, method=method),
        history=tuple(history),
        target_met=met,
        precision=gamma,
        target=target,
        work=work,
        values=values,
    )
