"""Checks of the reference formulas in tests/queueing.py against independent sources."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tests.queueing import (
    gordon_newell_throughput,
    mm1_mean_sojourn,
    mm1_mean_wait,
    mva_throughput,
)

rates = st.lists(
    st.floats(0.05, 20.0, allow_nan=False, allow_subnormal=False), min_size=1, max_size=8
)


def ctmc_throughput(service_rates: list[float], n_customers: int) -> float:
    """Slow twin: solve the continuous-time Markov chain of the closed cyclic line directly.

    States are the placements (n_1, ..., n_K) of the customers; station i serves at rate μ_i
    when it holds a customer, who then moves to station i + 1 (mod K). The throughput is the
    long-run departure rate from station 0. No product form is assumed (standard CTMC
    balance equations, e.g. Kleinrock 1975, Queueing Systems Vol. 1, ch. 2; from memory).
    """
    k = len(service_rates)
    states = [
        s for s in itertools.product(range(n_customers + 1), repeat=k) if sum(s) == n_customers
    ]
    index = {s: i for i, s in enumerate(states)}
    q = np.zeros((len(states), len(states)))
    for s, i in index.items():
        for station, mu in enumerate(service_rates):
            if s[station] > 0:
                t = list(s)
                t[station] -= 1
                t[(station + 1) % k] += 1
                q[i, index[tuple(t)]] += mu
                q[i, i] -= mu
    # π Q = 0 with Σ π = 1: replace one balance equation by the normalisation
    a = q.T.copy()
    a[-1, :] = 1.0
    b = np.zeros(len(states))
    b[-1] = 1.0
    pi = np.linalg.solve(a, b)
    busy = np.array([s[0] > 0 for s in states])
    return float(service_rates[0] * pi[busy].sum())


@settings(max_examples=200, deadline=None)
@given(mu=rates, n=st.integers(1, 40))
def test_buzen_equals_mva(mu: list[float], n: int) -> None:
    """Buzen's convolution (Buzen 1973, CACM 16(9)) and exact MVA (Reiser & Lavenberg 1980,
    JACM 27(2)) give the same throughput of a closed cyclic line."""
    assert gordon_newell_throughput(mu, n) == pytest.approx(mva_throughput(mu, n), rel=1e-9)


@pytest.mark.parametrize("seed", range(12))
def test_buzen_equals_markov_chain(seed: int) -> None:
    """Buzen's algorithm matches the throughput of the CTMC solved without the product form of
    Gordon & Newell (1967), Operations Research 15(2), on small random lines."""
    rng = np.random.default_rng(np.random.SeedSequence([20, seed]))
    k = int(rng.integers(1, 5))
    n = int(rng.integers(1, 6))
    mu = list(rng.uniform(0.2, 5.0, k))
    assert gordon_newell_throughput(mu, n) == pytest.approx(ctmc_throughput(mu, n), rel=1e-9)


@pytest.mark.parametrize("fn", [gordon_newell_throughput, mva_throughput])
@pytest.mark.parametrize(("mu", "k", "n"), [(1.0, 1, 1), (2.0, 3, 1), (0.5, 4, 7), (3.0, 10, 25)])
def test_equal_rates_closed_form(fn, mu: float, k: int, n: int) -> None:
    """Equal rates μ, K stations, N customers: X = μN/(N+K−1) (Gordon & Newell 1967; formula as
    given in REFERENCES.md)."""
    assert fn([mu] * k, n) == pytest.approx(mu * n / (n + k - 1), rel=1e-12)


@pytest.mark.parametrize("fn", [gordon_newell_throughput, mva_throughput])
@given(mu=rates)
def test_single_customer(fn, mu: list[float]) -> None:
    """N = 1: the customer's cycle is the sum of the mean service times, X = 1/Σ(1/μ_i)
    (renewal-reward argument; Gordon & Newell 1967 with N = 1)."""
    assert fn(mu, 1) == pytest.approx(1.0 / sum(1.0 / m for m in mu), rel=1e-12)


@settings(max_examples=100, deadline=None)
@given(mu=rates, n=st.integers(1, 30))
def test_asymptotic_bounds(mu: list[float], n: int) -> None:
    """X(N) <= min(min μ_i, N / Σ 1/μ_i) and X is non-decreasing in N (asymptotic bound
    analysis, Denning & Buzen 1978, ACM Computing Surveys 10(3); from memory)."""
    x = gordon_newell_throughput(mu, n)
    bound = min(min(mu), n / sum(1.0 / m for m in mu))
    assert x <= bound * (1 + 1e-12)
    assert gordon_newell_throughput(mu, n + 1) >= x * (1 - 1e-12)


def test_large_population_stays_finite() -> None:
    """Scaling keeps the convolution in floating range; X tends to the bottleneck rate
    (asymptotic bound analysis, Denning & Buzen 1978; from memory)."""
    mu = [1.0, 2.0, 4.0, 8.0]
    x = gordon_newell_throughput(mu, 2000)
    assert math.isfinite(x)
    assert x == pytest.approx(1.0, rel=1e-6)
    assert x == pytest.approx(mva_throughput(mu, 2000), rel=1e-9)


def lindley_waits(rng: np.random.Generator, lam: float, mu: float, n: int) -> np.ndarray:
    """Waits in queue of n customers of an M/M/1 queue started empty, by Lindley's recursion
    W_{j+1} = max(0, W_j + S_j − A_{j+1}) (Lindley 1952, Proc. Camb. Phil. Soc. 48), in its
    closed form W_j = U_j − min_{i<=j} U_i with U the random walk of S − A."""
    steps = rng.exponential(1.0 / mu, n - 1) - rng.exponential(1.0 / lam, n - 1)
    u = np.concatenate(([0.0], np.cumsum(steps)))
    return u - np.minimum.accumulate(u)


@pytest.mark.parametrize(("lam", "mu"), [(0.5, 1.0), (1.0, 4.0)])
def test_mm1_against_lindley(lam: float, mu: float) -> None:
    """M/M/1 mean wait ρ/(μ−λ) and sojourn 1/(μ−λ) (Kleinrock 1975, Queueing Systems Vol. 1,
    §3.2) against a simulation by Lindley's recursion (Lindley 1952). 10^6 customers at ρ <= 0.5:
    the standard error of the mean wait is below 1 % of it (rough estimate, common practice,
    no source), so a 5 % tolerance cannot pass a wrong formula such as 1/(μ−λ) or ρ/μ."""
    rng = np.random.default_rng(np.random.SeedSequence([21, int(100 * lam)]))
    waits = lindley_waits(rng, lam, mu, 10**6)
    assert waits.mean() == pytest.approx(mm1_mean_wait(lam, mu), rel=0.05)
    assert waits.mean() + 1.0 / mu == pytest.approx(mm1_mean_sojourn(lam, mu), rel=0.05)


def test_mm1_sojourn_is_wait_plus_service() -> None:
    """W = W_q + 1/μ (Kleinrock 1975, §3.2)."""
    assert mm1_mean_sojourn(0.3, 0.7) == pytest.approx(mm1_mean_wait(0.3, 0.7) + 1 / 0.7)


@pytest.mark.parametrize(
    ("args", "rule"),
    [
        ((1.0, 1.0), "rho < 1"),
        ((2.0, 1.0), "rho < 1"),
        ((0.0, 1.0), "> 0"),
        ((-1.0, 1.0), "> 0"),
        ((float("nan"), 1.0), "finite"),
    ],
)
def test_mm1_rejects_bad_rates(args: tuple[float, float], rule: str) -> None:
    """Unstable or meaningless M/M/1 parameters are refused with the rule in the message."""
    for fn in (mm1_mean_wait, mm1_mean_sojourn):
        with pytest.raises(ValueError) as err:
            fn(*args)
        assert rule in str(err.value)


@pytest.mark.parametrize("fn", [gordon_newell_throughput, mva_throughput])
@pytest.mark.parametrize(
    ("mu", "n", "rule"),
    [
        ([], 1, "non-empty"),
        ([1.0, 0.0], 1, "> 0"),
        ([1.0, float("inf")], 1, "finite"),
        ([1.0], 0, "integer >= 1"),
        ([1.0], 1.5, "integer >= 1"),
    ],
)
def test_closed_line_rejects_bad_input(fn, mu: list[float], n, rule: str) -> None:
    """Bad rates or populations are refused with the rule in the message."""
    with pytest.raises(ValueError) as err:
        fn(mu, n)
    assert rule in str(err.value)
