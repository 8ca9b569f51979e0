r"""Closed-form and exact queueing results, for tests that check the engines against theory.

Not a test file: other tests import these helpers (``from tests.queueing import ...``, with
pytest run as ``python -m pytest`` from the checkout root). Their own checks live in
``tests/test_queueing_formulas.py``.

A closed cyclic line of ``K`` exponential single-server FIFO stations with ``N`` customers is a
timed event graph (one transition per station with a one-token self-loop, ``N`` tokens around
the line), so its exact throughput is a reference for the simulation of random event graphs.
Station ``i`` serves at rate ``μ_i``; every customer visits every station once per cycle, so
the visit ratios are all 1 and the service demands are ``D_i = 1/μ_i``.

References
----------
.. [1] W. J. Gordon, G. F. Newell, "Closed queuing systems with exponential servers",
   *Operations Research* 15(2), 254–265, 1967 (product form).
.. [2] J. P. Buzen, "Computational algorithms for closed queueing networks with exponential
   servers", *Communications of the ACM* 16(9), 527–531, 1973 (convolution algorithm).
.. [3] M. Reiser, S. S. Lavenberg, "Mean-value analysis of closed multichain queuing
   networks", *Journal of the ACM* 27(2), 313–322, 1980 (MVA).
.. [4] L. Kleinrock, *Queueing Systems, Volume 1: Theory*, Wiley, 1975, §3.2 (M/M/1).
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "gordon_newell_throughput",
    "mm1_mean_sojourn",
    "mm1_mean_wait",
    "mva_throughput",
]


def _rates(service_rates: ArrayLike) -> NDArray[np.float64]:
    mu = np.asarray(service_rates, dtype=np.float64)
    if mu.ndim != 1 or mu.size < 1:
        raise ValueError(f"service_rates must be a non-empty 1-D sequence, got shape {mu.shape}")
    if not np.all(np.isfinite(mu)) or np.any(mu <= 0.0):
        raise ValueError("service_rates must be finite numbers > 0")
    return mu


def _customers(n_customers: int) -> int:
    if isinstance(n_customers, bool) or not isinstance(n_customers, int | np.integer):
        raise ValueError(f"n_customers must be an integer >= 1, got {n_customers!r}")
    if n_customers < 1:
        raise ValueError(f"n_customers must be an integer >= 1, got {n_customers!r}")
    return int(n_customers)


def gordon_newell_throughput(service_rates: ArrayLike, n_customers: int) -> float:
    r"""Throughput of a closed cyclic line by Buzen's convolution algorithm [2]_.

    By the product form of Gordon & Newell [1]_, the stationary probability of ``n_i``
    customers at station ``i`` is :math:`\prod_i D_i^{n_i} / G(N)` with

    .. math::

        G(n) = \sum_{n_1 + \dots + n_K = n} \prod_i D_i^{n_i},

    computed by the convolution :math:`g_k(n) = g_{k-1}(n) + D_k\, g_k(n-1)`. The throughput
    (customers passing any one station per unit time) is :math:`X(N) = G(N-1)/G(N)`.

    Parameters
    ----------
    service_rates : array_like of float, shape (K,)
        Service rate μ_i > 0 of each station.
    n_customers : int
        Number N >= 1 of customers circulating.

    Returns
    -------
    float
        X(N), customers per unit time.
    """
    mu = _rates(service_rates)
    n = _customers(n_customers)
    # demands scaled by the largest one keep G(n) within floating range for large N
    scale = float(np.max(1.0 / mu))
    demand = (1.0 / mu) / scale
    g = np.zeros(n + 1)
    g[0] = 1.0
    for d in demand:
        for j in range(1, n + 1):
            g[j] += d * g[j - 1]
    return float(g[n - 1] / g[n]) / scale


def mva_throughput(service_rates: ArrayLike, n_customers: int) -> float:
    r"""Throughput of a closed cyclic line by exact Mean Value Analysis [3]_.

    For ``n = 1, ..., N``: residence times :math:`R_i(n) = D_i\,(1 + Q_i(n-1))` (arrival
    theorem), throughput :math:`X(n) = n / \sum_i R_i(n)`, queue lengths
    :math:`Q_i(n) = X(n)\,R_i(n)` (Little's law), from :math:`Q_i(0) = 0`. An independent twin
    of :func:`gordon_newell_throughput`.

    Parameters
    ----------
    service_rates : array_like of float, shape (K,)
        Service rate μ_i > 0 of each station.
    n_customers : int
        Number N >= 1 of customers circulating.

    Returns
    -------
    float
        X(N), customers per unit time.
    """
    mu = _rates(service_rates)
    n = _customers(n_customers)
    demand = 1.0 / mu
    q = np.zeros_like(demand)
    x = 0.0
    for customers in range(1, n + 1):
        r = demand * (1.0 + q)
        x = customers / float(r.sum())
        q = x * r
    return x


def _mm1(arrival_rate: float, service_rate: float) -> tuple[float, float]:
    lam, mu = float(arrival_rate), float(service_rate)
    if not (math.isfinite(lam) and math.isfinite(mu) and lam > 0.0 and mu > 0.0):
        raise ValueError(
            f"arrival_rate and service_rate must be finite and > 0, got {arrival_rate!r}, "
            f"{service_rate!r}"
        )
    if lam >= mu:
        raise ValueError(
            f"arrival_rate must be below service_rate for a stable queue (rho < 1), got "
            f"rho = {lam / mu:g}"
        )
    return lam, mu


def mm1_mean_wait(arrival_rate: float, service_rate: float) -> float:
    r"""Mean wait in queue of M/M/1, :math:`W_q = \rho / (\mu - \lambda)` with ρ = λ/μ.

    Kleinrock [4]_ §3.2. Raises ValueError unless 0 < λ < μ (finite).
    """
    lam, mu = _mm1(arrival_rate, service_rate)
    return (lam / mu) / (mu - lam)


def mm1_mean_sojourn(arrival_rate: float, service_rate: float) -> float:
    r"""Mean time in system of M/M/1, :math:`W = 1 / (\mu - \lambda)`.

    Kleinrock [4]_ §3.2. Raises ValueError unless 0 < λ < μ (finite).
    """
    lam, mu = _mm1(arrival_rate, service_rate)
    return 1.0 / (mu - lam)
