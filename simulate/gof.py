r"""Tests used to judge an event log: goodness of fit, means, multiple testing and power.

Everything here works on plain arrays and knows nothing of event graphs or logs; the judge
(:mod:`.logstats`, :mod:`.logcycle`, :mod:`.judge`) feeds it. Groups (one per transition or
place) are handled together, vectorized, so that a log of 10^7 rows is tested in one pass.

Goodness of fit
    The laws of a model are *fully specified* (nothing is estimated from the log), so the
    probability-integral transform :math:`U = F(X)` of a continuous law is uniform on (0, 1)
    and the one-sample Kolmogorov–Smirnov statistic
    :math:`D_n = \max_i \max(i/n - U_{(i)},\, U_{(i)} - (i-1)/n)` has an exact null law
    that does not depend on :math:`F` (Massey 1951), evaluated by ``scipy.stats.kstwo``.
    A resampled list of values (a discrete law) is judged by Pearson's chi-square over its
    distinct values, with the asymptotic :math:`\chi^2` law when every expected count is at
    least 5 (common practice, no source), else a seeded Monte Carlo p-value of the same
    statistic (an exact test up to the Monte Carlo error).
Means
    :math:`z = (\bar x - \mu) / (\sigma / \sqrt n)` with the model's own mean and standard
    deviation (under the model the variance is known), two-sided, normal by the central limit
    theorem.
Rounded values
    A value known only to within :math:`\pm w` (a duration between two times a simulator
    rounded) moves its empirical CDF by at most the largest probability of a window of width
    :math:`w`, :math:`\omega(w) = \sup_x F(x + w) - F(x)` (:func:`window_mass`): the KS
    distance of the true values is at least the observed one less that, so
    :math:`P(D_n \ge D_{\text{obs}} - \omega(w))` is a conservative p-value
    (:func:`ks_p_value`). ``F`` must be unimodal (every continuous law of a model file is):
    the widest window then holds the mode, which the narrowest of :data:`WINDOW_BINS`
    equal-probability bins brackets.
Family-wise error
    Holm's step-down procedure (Holm 1979) over every test of one judgement.
Power
    The smallest relative change :math:`\delta` of a mean that a two-sided test at level
    :math:`a` detects with probability :math:`1 - \beta`, normal approximation. For a duration
    scaled by :math:`1 + \delta` (a slower station: mean and standard deviation both grow)
    the z statistic is :math:`N(\delta \sqrt n / c,\ (1 + \delta)^2)` with :math:`c` the
    coefficient of variation, so :math:`\delta = (z_{1-a/2} + z_{1-\beta})\, c /
    (\sqrt n - z_{1-\beta} c)` (the far tail ignored); for a difference of two estimates
    with standard error :math:`s`, :math:`\delta = (t_{1-a/2} + t_{1-\beta})\, s / \lambda`
    (Montgomery, *Design and Analysis of Experiments*, ch. 2, sample size for a difference of
    means).

References
----------
.. [1] F. J. Massey, "The Kolmogorov–Smirnov test for goodness of fit", *JASA* 46, 68–78, 1951.
.. [2] S. Holm, "A simple sequentially rejective multiple test procedure", *Scand. J. Statist.*
   6, 65–70, 1979.
.. [3] D. C. Montgomery, *Design and Analysis of Experiments*, Wiley, ch. 2.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "MONTE_CARLO_DRAWS",
    "POWER",
    "WINDOW_BINS",
    "GroupedKS",
    "WindowMass",
    "chi_square",
    "detectable_change_mean",
    "detectable_change_t",
    "holm",
    "ks_grouped",
    "ks_p_value",
    "welch_t",
    "window_mass",
    "z_mean",
]

POWER = 0.8
"""Probability of detection the reported smallest detectable changes are computed for."""
MONTE_CARLO_DRAWS = 20_000
"""Draws of the Monte Carlo p-value of a chi-square test with small expected counts."""
WINDOW_BINS = 1000
"""Equal-probability bins whose narrowest brackets the mode of a law (:func:`window_mass`)."""
_WINDOW_POINTS = 100_000  # most points of the grid that bounds the widest window


@dataclass(frozen=True)
class GroupedKS:
    """Kolmogorov–Smirnov statistics of several groups: ``statistic``, ``n`` and ``p_value``
    per group (NaN where a group is empty)."""

    statistic: np.ndarray
    n: np.ndarray
    p_value: np.ndarray


def ks_grouped(u: ArrayLike, group: ArrayLike, n_groups: int) -> GroupedKS:
    """Two-sided one-sample KS test of ``u`` (already transformed by the law's CDF) against the
    uniform law, separately in each group ``0 .. n_groups - 1``.

    >>> res = ks_grouped([0.1, 0.5, 0.9, 0.2], [0, 0, 0, 1], 2)
    >>> [round(float(d), 4) for d in res.statistic]
    [0.2333, 0.8]
    """
    from scipy.stats import kstwo

    u = np.clip(np.asarray(u, dtype=np.float64), 0.0, 1.0)
    g = np.asarray(group, dtype=np.int64)
    if n_groups <= 2**20:  # one sort of 2g + u (u in [0, 1]) orders by group, then by u
        key = np.sort(2.0 * g + u)
        gs = np.floor(key / 2.0).astype(np.int64)
        us = key - 2.0 * gs
    else:
        order = np.lexsort((u, g))
        us, gs = u[order], g[order]
    n = np.bincount(gs, minlength=n_groups)
    stat = np.full(n_groups, np.nan)
    p = np.full(n_groups, np.nan)
    if us.size:
        starts = np.r_[0, np.cumsum(n)[:-1]]
        rank = np.arange(us.size) - np.repeat(starts, n)  # 0-based rank in the group
        size = np.repeat(n, n).astype(np.float64)
        gap = np.maximum((rank + 1) / size - us, us - rank / size)
        has = n > 0
        stat[has] = np.maximum.reduceat(gap, starts[has])
        p[has] = kstwo.sf(stat[has], n[has])
    return GroupedKS(stat, n, np.clip(p, 0.0, 1.0))


def ks_p_value(statistic: ArrayLike, n: ArrayLike, allowance: ArrayLike = 0.0) -> np.ndarray:
    r"""KS p-value :math:`P(D_n \ge D - a)` of a distance ``D`` that may exceed the true
    values' by at most the ``allowance`` ``a`` (rounded values, see the module doc): a
    conservative test, the exact one when ``a = 0``.

    >>> round(float(ks_p_value(0.05, 1000)), 4), round(float(ks_p_value(0.05, 1000, 0.02)), 4)
    (0.013, 0.3227)
    """
    from scipy.stats import kstwo

    d = np.maximum(np.asarray(statistic, dtype=np.float64) - allowance, 0.0)
    return np.clip(kstwo.sf(d, np.asarray(n)), 0.0, 1.0)


@dataclass(frozen=True)
class WindowMass:
    r"""The largest probability of a window of one width under a unimodal law: ``omega`` (an
    upper bound of :math:`\sup_x F(x + w) - F(x)`), and ``decreasing_from``, a point beyond
    which the density does not increase (beyond it the window at ``a`` is the largest of
    those starting at ``a`` or later: :meth:`beyond`)."""

    cdf: Callable[[np.ndarray], np.ndarray]
    width: float
    omega: float
    decreasing_from: float

    def beyond(self, a: ArrayLike) -> np.ndarray:
        r"""Upper bounds of :math:`\sup_{x \ge a} F(x + w) - F(x)`, for each ``a``."""
        a = np.asarray(a, dtype=np.float64)
        tail = np.where(np.isfinite(a), a, self.decreasing_from)
        local = self.cdf(tail + self.width) - self.cdf(tail)
        return np.where(a >= self.decreasing_from, np.minimum(local, self.omega), self.omega)


def window_mass(cdf: Callable[[np.ndarray], np.ndarray], ppf: Callable[[np.ndarray], np.ndarray],
                width: float) -> WindowMass:
    r"""The largest probability of a window of ``width`` under a unimodal continuous law given
    by its ``cdf`` and ``ppf`` (see the module doc).

    The narrowest of :data:`WINDOW_BINS` equal-probability bins lies next to or on the mode
    (the bins widen away from it), so the widest window, which holds the mode, starts in
    :math:`[q_{j-1} - w, q_{j+2}]`; on a grid :math:`x_i` of that range
    :math:`\sup_x F(x + w) - F(x) \le \max_i F(x_{i+1} + w) - F(x_i)`, a bound whatever the
    grid.

    >>> from scipy.stats import expon
    >>> bound = window_mass(expon.cdf, expon.ppf, 0.01).omega  # the window [0, 0.01]
    >>> bool(expon.cdf(0.01) <= bound <= expon.cdf(0.0101))
    True
    """
    with np.errstate(divide="ignore", over="ignore"):  # ppf(1) is inf for most laws
        q = np.asarray(ppf(np.linspace(0.0, 1.0, WINDOW_BINS + 1)), dtype=np.float64)
    widths = np.diff(q)
    j = int(np.argmin(np.where(np.isfinite(widths), widths, np.inf)))
    lo, hi = q[max(j - 1, 0)] - width, q[min(j + 2, WINDOW_BINS)]
    if not (width > 0 and np.isfinite(lo) and np.isfinite(hi)):
        return WindowMass(cdf, width, 0.0 if width <= 0 else 1.0, -math.inf)
    # a step of w / 100 at most (while it takes no more than _WINDOW_POINTS): the bound is
    # then at most the mass of a window of 1.01 w
    points = int(min(_WINDOW_POINTS, max(1000.0, 100.0 * (hi - lo) / width))) + 1
    x = np.linspace(lo, hi, points)
    omega = float(np.max(cdf(x[1:] + width) - cdf(x[:-1]))) if points > 1 else 1.0
    return WindowMass(cdf, width, min(max(omega, 0.0), 1.0), float(hi))


def chi_square(observed: ArrayLike, prob: ArrayLike, seed: int | np.random.SeedSequence = 0,
               draws: int = MONTE_CARLO_DRAWS) -> tuple[float, float, str]:
    r"""Pearson's chi-square of counts against cell probabilities: ``(statistic, p, method)``.

    :math:`X^2 = \sum_j (O_j - n p_j)^2 / (n p_j)`. With every expected count ``>= 5`` the
    p-value is the :math:`\chi^2_{J-1}` tail; otherwise the share of ``draws`` multinomial
    samples whose statistic is at least as large (with the usual +1 in numerator and
    denominator, so that the p-value is never 0).
    """
    from scipy.stats import chi2

    obs = np.asarray(observed, dtype=np.float64)
    prob = np.asarray(prob, dtype=np.float64)
    n = float(obs.sum())
    if obs.size < 2 or n == 0:
        return 0.0, 1.0, "none"
    expected = n * prob
    stat = float(((obs - expected) ** 2 / expected).sum())
    if expected.min() >= 5:
        return stat, float(chi2.sf(stat, obs.size - 1)), "chi-square"
    rng = np.random.default_rng(seed)
    sims = rng.multinomial(int(n), prob, size=draws)
    sim_stat = ((sims - expected) ** 2 / expected).sum(axis=1)
    p = (1.0 + np.count_nonzero(sim_stat >= stat * (1 - 1e-12))) / (draws + 1.0)
    return stat, float(p), f"chi-square, Monte Carlo p-value ({draws} draws)"


def z_mean(mean: ArrayLike, n: ArrayLike, mu: ArrayLike,
           sigma: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Two-sided z test of observed means against the model's ``mu`` and ``sigma``:
    ``(z, p)``."""
    from scipy.special import ndtr

    z = (np.asarray(mean, float) - mu) / (np.asarray(sigma, float) / np.sqrt(n))
    return z, 2.0 * ndtr(-np.abs(z))


def holm(p_values: ArrayLike, alpha: float) -> tuple[np.ndarray, np.ndarray]:
    r"""Holm's step-down procedure (Holm 1979): ``(adjusted p-values, rejected)``.

    Sort the ``m`` p-values, :math:`p_{(1)} \le \dots \le p_{(m)}`; reject :math:`H_{(i)}`
    while :math:`p_{(j)} \le \alpha / (m - j + 1)` for every :math:`j \le i`. The adjusted
    p-value is :math:`\max_{j \le i} \min(1, (m - j + 1)\, p_{(j)})`, rejected when
    :math:`\le \alpha`. The family-wise error rate is at most :math:`\alpha` whatever the
    dependence between the tests.

    >>> adj, rej = holm([0.01, 0.04, 0.03, 0.005], 0.05)
    >>> adj.tolist(), rej.tolist()
    ([0.03, 0.06, 0.06, 0.02], [True, False, False, True])
    """
    p = np.asarray(p_values, dtype=np.float64)
    m = p.size
    order = np.argsort(p, kind="stable")
    steps = np.minimum(1.0, (m - np.arange(m)) * p[order])
    adjusted = np.empty(m)
    adjusted[order] = np.maximum.accumulate(steps) if m else steps
    return adjusted, adjusted <= alpha


def _normal_quantile(q: float) -> float:
    from scipy.special import ndtri

    return float(ndtri(q))


def detectable_change_mean(cv: ArrayLike, n: ArrayLike, level: float,
                           power: float = POWER) -> np.ndarray:
    r"""Smallest relative slow-down :math:`\delta` of a law scaled by :math:`1 + \delta` that a
    two-sided z test of the mean at ``level`` detects with probability ``power`` (see the
    module doc); NaN where ``n`` observations cannot detect any (``√n <= z_power · cv``).

    >>> round(float(detectable_change_mean(1.0, 1000, 0.05)), 4)
    0.091
    """
    za, zb = _normal_quantile(1.0 - level / 2.0), _normal_quantile(power)
    cv = np.asarray(cv, dtype=np.float64)
    root = np.sqrt(np.asarray(n, dtype=np.float64))
    with np.errstate(divide="ignore", invalid="ignore"):
        out = (za + zb) * cv / (root - zb * cv)
    return np.where(root > zb * cv, out, np.nan)


def welch_t(a: float, se_a: float, df_a: float, b: float, se_b: float,
            df_b: float) -> tuple[float, float, float]:
    r"""Two-sided test of two independent estimates with standard errors and degrees of
    freedom: ``(t, df, p)``, Welch–Satterthwaite degrees of freedom
    :math:`(s_a^2 + s_b^2)^2 / (s_a^4 / \nu_a + s_b^4 / \nu_b)`."""
    from scipy.stats import t as student

    unit = max(abs(a), abs(b), se_a, se_b) or 1.0  # scale-free: no overflow of the squares
    a, b, se_a, se_b = a / unit, b / unit, se_a / unit, se_b / unit
    var = se_a**2 + se_b**2
    if var == 0:
        same = a == b
        return (0.0 if same else math.inf), math.inf, (1.0 if same else 0.0)
    df = var**2 / (se_a**4 / df_a + se_b**4 / df_b)
    stat = (a - b) / math.sqrt(var)
    return stat, df, float(2.0 * student.sf(abs(stat), df))


def detectable_change_t(se: float, df: float, reference: float, level: float,
                        power: float = POWER) -> float | None:
    r""":math:`(t_{1-a/2,\nu} + t_{\text{power},\nu})\, s / |\text{reference}|`: the smallest
    relative change of ``reference`` a two-sided t test with standard error ``se`` detects with
    probability ``power``; None when ``reference`` is 0."""
    from .estimate import student_quantile

    if reference == 0 or not math.isfinite(df):
        return None
    q = float(student_quantile(1.0 - level / 2.0, df) + student_quantile(power, df))
    return q * se / abs(reference)
