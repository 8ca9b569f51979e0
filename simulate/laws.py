r"""Laws of random durations and holding times: moments, sampling and their written form.

A duration or a hold is a number (a fixed value) or a distribution table, as written in a model
file; :func:`cyclecheck.simulate.durations.parse_spec` turns either into one of the frozen
:class:`Distribution` laws of this module:

==============  ===============================  ==============================================
``dist``        parameters                       meaning
==============  ===============================  ==============================================
``fixed``       ``value``                        always ``value`` (alias ``deterministic``)
``exponential`` ``mean``                         exponential law
``gamma``       ``mean``, ``cv``                 gamma law, shape ``1/cv²``
``erlang``      ``mean``, ``k``                  sum of ``k`` exponentials, ``cv = 1/√k``
``lognormal``   ``mean``, ``cv``                 log-normal law with that mean and cv
``weibull``     ``shape`` and ``mean`` or        Weibull law, ``mean = scale·Γ(1 + 1/shape)``
                ``scale``
``normal``      ``mean``, ``sd``,                the normal law *conditioned on* ``>= 0``;
                ``truncate = true``              ``mean`` and ``sd`` are those of the normal
                                                 before truncation
``uniform``     ``low``, ``high``                uniform on ``[low, high]``
``triangular``  ``low``, ``mode``, ``high``      triangular law
``empirical``   ``values = [...]``               one of the values, each with equal chance
==============  ===============================  ==============================================

A normal law can go negative, so it must say ``truncate = true``: draws below 0 are redrawn
(inverse-CDF sampling of the normal conditioned on ``>= 0``, no mass at 0), and ``.mean`` is the
mean of the truncated law, which is larger than the ``mean`` parameter. Clipping at 0 was not
chosen: it puts an atom at 0 that a duration rarely has.

:meth:`Distribution.to_text` writes a law in the cell syntax that ``parse_spec`` reads back, and
:meth:`Distribution.to_dict` as the TOML table.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property
from typing import Any, ClassVar

import numpy as np
from numpy.typing import ArrayLike

from .errors import shown

__all__ = [
    "DISTRIBUTIONS",
    "Distribution",
    "Empirical",
    "Erlang",
    "Exponential",
    "Fixed",
    "Gamma",
    "Lognormal",
    "Normal",
    "Triangular",
    "Uniform",
    "Weibull",
]


def _short(x: float) -> str:
    return f"{x:.6g}"


def _toml_value(x: object) -> str:
    if isinstance(x, bool):
        return "true" if x else "false"
    if isinstance(x, int):
        return str(x)
    if isinstance(x, float):
        return repr(x)
    if isinstance(x, (list, tuple)):
        return "[" + ", ".join(_toml_value(v) for v in x) + "]"
    raise TypeError(f"cannot write {x!r}")


class Distribution:
    """A law of a duration or a hold (base class).

    Every subclass has ``mean`` (exact), :attr:`variance`, :attr:`cv`, :attr:`is_random`,
    :meth:`sample`, :meth:`describe`, :meth:`to_dict` and :meth:`to_text`. Instances are frozen
    and compare equal when their parameters are equal.
    """

    name: ClassVar[str]
    required: ClassVar[tuple[str, ...]]
    optional: ClassVar[tuple[str, ...]] = ()
    mean: float

    @property
    def variance(self) -> float:
        """Variance of the law."""
        raise NotImplementedError

    @property
    def sd(self) -> float:
        """Standard deviation of the law."""
        return math.sqrt(max(self.variance, 0.0))

    @property
    def cv(self) -> float:
        """Coefficient of variation sd / mean (0 for a law concentrated at 0)."""
        return self.sd / self.mean if self.mean > 0 else 0.0

    @property
    def is_random(self) -> bool:
        """False when the law is a single value (no draws needed)."""
        return self.variance > 0

    def sample(self, rng: np.random.Generator, size: int) -> np.ndarray:
        """Draw ``size`` values with ``rng`` (a fixed law does not touch ``rng``)."""
        if not self.is_random:
            return np.full(size, float(self.mean))
        return self._draw(rng, size)

    def _draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        raise NotImplementedError

    def params(self) -> dict[str, Any]:
        """The parameters as written in a model file."""
        raise NotImplementedError

    #: False for laws with atoms (a fixed value, a resampled list): their fit is judged by
    #: counts, not by a continuous distribution function.
    is_continuous: ClassVar[bool] = True

    def cdf(self, x: ArrayLike) -> np.ndarray:
        """Distribution function ``P(X <= x)``, elementwise (0 below the support)."""
        raise NotImplementedError

    def ppf(self, q: ArrayLike) -> np.ndarray:
        """Quantile function: the smallest ``x`` with ``cdf(x) >= q``, for ``q`` in [0, 1]."""
        raise NotImplementedError

    def to_dict(self) -> dict[str, Any]:
        """The TOML table of this law; ``parse_spec(d.to_dict()) == d``."""
        return {"dist": self.name, **self.params()}

    def to_text(self) -> str:
        """The exact cell syntax, e.g. ``gamma(mean=3.0, cv=0.5)``; parsed back by parse_spec."""
        inner = ", ".join(f"{k}={_toml_value(v)}" for k, v in self.params().items())
        return f"{self.name}({inner})"

    def describe(self) -> str:
        """Short text for people, e.g. ``gamma(mean=3, cv=0.5)``."""
        inner = ", ".join(f"{k}={shown(v) if isinstance(v, bool) else _short(v)}"
                          for k, v in self.params().items())
        return f"{self.name}({inner})"

    def __str__(self) -> str:
        return self.describe()


@dataclass(frozen=True)
class Fixed(Distribution):
    """Always ``value``."""

    value: float
    name: ClassVar[str] = "fixed"
    required: ClassVar[tuple[str, ...]] = ("value",)

    @property
    def mean(self) -> float:  # type: ignore[override]
        return self.value

    @property
    def variance(self) -> float:
        return 0.0

    is_continuous: ClassVar[bool] = False

    def params(self) -> dict[str, Any]:
        return {"value": self.value}

    def cdf(self, x: ArrayLike) -> np.ndarray:
        return (np.asarray(x, dtype=np.float64) >= self.value).astype(np.float64)

    def ppf(self, q: ArrayLike) -> np.ndarray:
        return np.full(np.shape(q), float(self.value))

    def to_text(self) -> str:
        return repr(float(self.value))

    def describe(self) -> str:
        return self.text(self.value)

    @staticmethod
    def text(value: float) -> str:
        """:meth:`describe` of ``Fixed(value)``, without making one (tables of 10^5 values)."""
        return _short(value)


@dataclass(frozen=True)
class Exponential(Distribution):
    """Exponential law with the given mean."""

    mean: float
    name: ClassVar[str] = "exponential"
    required: ClassVar[tuple[str, ...]] = ("mean",)

    @property
    def variance(self) -> float:
        return self.mean**2

    def _draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        return rng.exponential(self.mean, size)

    def cdf(self, x: ArrayLike) -> np.ndarray:
        return -np.expm1(-np.maximum(np.asarray(x, dtype=np.float64), 0.0) / self.mean)

    def ppf(self, q: ArrayLike) -> np.ndarray:
        return -self.mean * np.log1p(-np.asarray(q, dtype=np.float64))

    def params(self) -> dict[str, Any]:
        return {"mean": self.mean}


@dataclass(frozen=True)
class Gamma(Distribution):
    """Gamma law with shape ``1/cv²`` and scale ``mean·cv²``."""

    mean: float
    cv_: float
    name: ClassVar[str] = "gamma"
    required: ClassVar[tuple[str, ...]] = ("mean", "cv")

    @property
    def cv(self) -> float:
        return self.cv_

    @property
    def variance(self) -> float:
        return (self.mean * self.cv_) ** 2

    def _draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        return rng.gamma(1.0 / self.cv_**2, self.mean * self.cv_**2, size)

    def cdf(self, x: ArrayLike) -> np.ndarray:
        return _gamma_cdf(x, 1.0 / self.cv_**2, self.mean * self.cv_**2)

    def ppf(self, q: ArrayLike) -> np.ndarray:
        return _gamma_ppf(q, 1.0 / self.cv_**2, self.mean * self.cv_**2)

    def params(self) -> dict[str, Any]:
        return {"mean": self.mean, "cv": self.cv_}


@dataclass(frozen=True)
class Erlang(Distribution):
    """Sum of ``k`` independent exponentials, total mean ``mean``."""

    mean: float
    k: int
    name: ClassVar[str] = "erlang"
    required: ClassVar[tuple[str, ...]] = ("mean", "k")

    @property
    def variance(self) -> float:
        return self.mean**2 / self.k

    def _draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        return rng.gamma(float(self.k), self.mean / self.k, size)

    def cdf(self, x: ArrayLike) -> np.ndarray:
        return _gamma_cdf(x, float(self.k), self.mean / self.k)

    def ppf(self, q: ArrayLike) -> np.ndarray:
        return _gamma_ppf(q, float(self.k), self.mean / self.k)

    def params(self) -> dict[str, Any]:
        return {"mean": self.mean, "k": self.k}


@dataclass(frozen=True)
class Lognormal(Distribution):
    """Log-normal law with the given mean and cv: ``σ² = ln(1 + cv²)``, ``μ = ln mean − σ²/2``."""

    mean: float
    cv_: float
    name: ClassVar[str] = "lognormal"
    required: ClassVar[tuple[str, ...]] = ("mean", "cv")

    @property
    def cv(self) -> float:
        return self.cv_

    @property
    def variance(self) -> float:
        return (self.mean * self.cv_) ** 2

    def _draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        s2 = math.log1p(self.cv_**2)
        return rng.lognormal(math.log(self.mean) - s2 / 2, math.sqrt(s2), size)

    @property
    def _mu_sigma(self) -> tuple[float, float]:
        s2 = math.log1p(self.cv_**2)
        return math.log(self.mean) - s2 / 2, math.sqrt(s2)

    def cdf(self, x: ArrayLike) -> np.ndarray:
        from scipy.special import ndtr

        mu, sigma = self._mu_sigma
        x = np.asarray(x, dtype=np.float64)
        with np.errstate(divide="ignore"):
            return np.where(x > 0, ndtr((np.log(np.maximum(x, 0.0)) - mu) / sigma), 0.0)

    def ppf(self, q: ArrayLike) -> np.ndarray:
        from scipy.special import ndtri

        mu, sigma = self._mu_sigma
        return np.exp(mu + sigma * ndtri(np.asarray(q, dtype=np.float64)))

    def params(self) -> dict[str, Any]:
        return {"mean": self.mean, "cv": self.cv_}


@dataclass(frozen=True)
class Weibull(Distribution):
    """Weibull law; given by ``shape`` and either ``mean`` or ``scale`` (kept as given)."""

    shape: float
    scale: float
    mean: float
    by_mean: bool = True
    name: ClassVar[str] = "weibull"
    required: ClassVar[tuple[str, ...]] = ("shape",)
    optional: ClassVar[tuple[str, ...]] = ("mean", "scale")

    @property
    def variance(self) -> float:
        g1 = math.exp(math.lgamma(1 + 1 / self.shape))
        g2 = math.exp(math.lgamma(1 + 2 / self.shape))
        return self.scale**2 * max(g2 - g1 * g1, 0.0)

    def _draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        return self.scale * rng.weibull(self.shape, size)

    def cdf(self, x: ArrayLike) -> np.ndarray:
        z = np.maximum(np.asarray(x, dtype=np.float64), 0.0) / self.scale
        return -np.expm1(-(z**self.shape))

    def ppf(self, q: ArrayLike) -> np.ndarray:
        return self.scale * (-np.log1p(-np.asarray(q, dtype=np.float64))) ** (1.0 / self.shape)

    def params(self) -> dict[str, Any]:
        if self.by_mean:
            return {"mean": self.mean, "shape": self.shape}
        return {"scale": self.scale, "shape": self.shape}


@dataclass(frozen=True)
class Normal(Distribution):
    r"""Normal law ``N(loc, sd²)`` conditioned on ``>= 0``.

    With :math:`\alpha = -\mathrm{loc}/\mathrm{sd}` and :math:`\lambda = \varphi(\alpha) /
    (1 - \Phi(\alpha))`, the mean is :math:`\mathrm{loc} + \mathrm{sd}\,\lambda` and the variance
    :math:`\mathrm{sd}^2 (1 + \alpha\lambda - \lambda^2)` (Johnson, Kotz, Balakrishnan,
    *Continuous Univariate Distributions* vol. 1, 2nd ed., 1994, §13.10.1).
    """

    loc: float
    sd_: float
    name: ClassVar[str] = "normal"
    required: ClassVar[tuple[str, ...]] = ("mean", "sd", "truncate")

    @cached_property
    def _alpha_lambda(self) -> tuple[float, float]:
        alpha = -self.loc / self.sd_
        tail = 0.5 * math.erfc(alpha / math.sqrt(2.0))  # 1 − Φ(α) >= 1/2 since loc >= 0
        lam = math.exp(-alpha * alpha / 2) / math.sqrt(2 * math.pi) / tail
        return alpha, lam

    @property
    def mean(self) -> float:  # type: ignore[override]
        return self.loc + self.sd_ * self._alpha_lambda[1]

    @property
    def variance(self) -> float:
        alpha, lam = self._alpha_lambda
        return self.sd_**2 * (1 + alpha * lam - lam * lam)

    def _draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        from scipy.special import ndtr, ndtri

        tail = float(ndtr(self.loc / self.sd_))  # P(N(loc, sd²) >= 0)
        v = tail * (1.0 - rng.random(size))  # uniform on (0, tail]
        return np.maximum(self.loc - self.sd_ * ndtri(v), 0.0)

    def cdf(self, x: ArrayLike) -> np.ndarray:
        from scipy.special import ndtr

        below = float(ndtr(-self.loc / self.sd_))  # P(N(loc, sd²) < 0), cut away
        x = np.maximum(np.asarray(x, dtype=np.float64), 0.0)
        return np.clip((ndtr((x - self.loc) / self.sd_) - below) / (1.0 - below), 0.0, 1.0)

    def ppf(self, q: ArrayLike) -> np.ndarray:
        from scipy.special import ndtr, ndtri

        below = float(ndtr(-self.loc / self.sd_))
        q = np.asarray(q, dtype=np.float64)
        return np.maximum(self.loc + self.sd_ * ndtri(below + q * (1.0 - below)), 0.0)

    def params(self) -> dict[str, Any]:
        return {"mean": self.loc, "sd": self.sd_, "truncate": True}

    def describe(self) -> str:
        return f"normal(mean={_short(self.loc)}, sd={_short(self.sd_)}, truncated at 0)"


@dataclass(frozen=True)
class Uniform(Distribution):
    """Uniform law on ``[low, high]``."""

    low: float
    high: float
    name: ClassVar[str] = "uniform"
    required: ClassVar[tuple[str, ...]] = ("low", "high")

    @property
    def mean(self) -> float:  # type: ignore[override]
        return (self.low + self.high) / 2

    @property
    def variance(self) -> float:
        return (self.high - self.low) ** 2 / 12

    def _draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        return rng.uniform(self.low, self.high, size)

    def cdf(self, x: ArrayLike) -> np.ndarray:
        x = np.asarray(x, dtype=np.float64)
        if self.high == self.low:
            return (x >= self.low).astype(np.float64)
        return np.clip((x - self.low) / (self.high - self.low), 0.0, 1.0)

    def ppf(self, q: ArrayLike) -> np.ndarray:
        return self.low + np.asarray(q, dtype=np.float64) * (self.high - self.low)

    def params(self) -> dict[str, Any]:
        return {"low": self.low, "high": self.high}


@dataclass(frozen=True)
class Triangular(Distribution):
    """Triangular law on ``[low, high]`` with its peak at ``mode``."""

    low: float
    mode: float
    high: float
    name: ClassVar[str] = "triangular"
    required: ClassVar[tuple[str, ...]] = ("low", "mode", "high")

    @property
    def mean(self) -> float:  # type: ignore[override]
        return (self.low + self.mode + self.high) / 3

    @property
    def variance(self) -> float:
        a, c, b = self.low, self.mode, self.high
        return (a * a + b * b + c * c - a * b - a * c - b * c) / 18

    def _draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        return rng.triangular(self.low, self.mode, self.high, size)

    def cdf(self, x: ArrayLike) -> np.ndarray:
        a, c, b = self.low, self.mode, self.high
        x = np.clip(np.asarray(x, dtype=np.float64), a, b)
        out = np.ones_like(x)
        if b == a:
            return out
        left = x <= c
        out[left] = (x[left] - a) ** 2 / ((b - a) * (c - a)) if c > a else 0.0
        out[~left] = 1.0 - (b - x[~left]) ** 2 / ((b - a) * (b - c))  # x > c implies b > c
        return out

    def ppf(self, q: ArrayLike) -> np.ndarray:
        a, c, b = self.low, self.mode, self.high
        q = np.asarray(q, dtype=np.float64)
        split = (c - a) / (b - a) if b > a else 1.0
        return np.where(q <= split, a + np.sqrt(q * (b - a) * (c - a)),
                        b - np.sqrt(np.maximum(1.0 - q, 0.0) * (b - a) * (b - c)))

    def params(self) -> dict[str, Any]:
        return {"low": self.low, "mode": self.mode, "high": self.high}


@dataclass(frozen=True)
class Empirical(Distribution):
    """One of ``values``, each with probability ``1/len(values)`` (resampling)."""

    values: tuple[float, ...]
    name: ClassVar[str] = "empirical"
    required: ClassVar[tuple[str, ...]] = ("values",)

    @cached_property
    def _array(self) -> np.ndarray:
        return np.array(self.values, dtype=np.float64)

    @property
    def mean(self) -> float:  # type: ignore[override]
        return float(np.mean(self._array))

    @property
    def variance(self) -> float:
        return float(np.var(self._array)) if len(self.values) > 1 else 0.0

    def _draw(self, rng: np.random.Generator, size: int) -> np.ndarray:
        return self._array[rng.integers(0, len(self.values), size)]

    is_continuous: ClassVar[bool] = False

    @cached_property
    def support(self) -> tuple[np.ndarray, np.ndarray]:
        """The distinct values, sorted, and the probability of each."""
        values, counts = np.unique(self._array, return_counts=True)
        return values, counts / counts.sum()

    def cdf(self, x: ArrayLike) -> np.ndarray:
        values, prob = self.support
        cum = np.r_[0.0, np.cumsum(prob)]
        return np.minimum(cum[np.searchsorted(values, np.asarray(x, np.float64), "right")], 1.0)

    def ppf(self, q: ArrayLike) -> np.ndarray:
        values, prob = self.support
        cum = np.cumsum(prob)
        cum[-1] = 1.0
        pos = np.searchsorted(cum, np.asarray(q, dtype=np.float64) - 1e-12, "left")
        return values[np.minimum(pos, values.size - 1)]

    def params(self) -> dict[str, Any]:
        return {"values": list(self.values)}

    def describe(self) -> str:
        return f"empirical(n={len(self.values)}, mean={_short(self.mean)})"


def _gamma_cdf(x: ArrayLike, shape: float, scale: float) -> np.ndarray:
    from scipy.special import gammainc

    return gammainc(shape, np.maximum(np.asarray(x, dtype=np.float64), 0.0) / scale)


def _gamma_ppf(q: ArrayLike, shape: float, scale: float) -> np.ndarray:
    from scipy.special import gammaincinv

    return scale * gammaincinv(shape, np.asarray(q, dtype=np.float64))


DISTRIBUTIONS: dict[str, type[Distribution]] = {
    c.name: c
    for c in (Fixed, Exponential, Gamma, Erlang, Lognormal, Weibull, Normal, Uniform,
              Triangular, Empirical)
}
"""The distribution classes by their ``dist`` name."""
