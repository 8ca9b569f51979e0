"""Output analysis (simulate/estimate.py) against published methods and closed forms."""

from __future__ import annotations

import doctest
import itertools
import math

import numpy as np
import pytest
from cyclecheck.simulate import estimate
from cyclecheck.simulate.estimate import (
    Interval,
    batch_means,
    choose_batch_count,
    lag1_autocorrelation,
    mean_increment,
    mser,
    mser5,
    replication_interval,
    sequential_precision,
    welch_average,
)
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy import stats
from scipy.signal import lfilter


def rng_for(*key: int) -> np.random.Generator:
    return np.random.default_rng(np.random.SeedSequence(list(key)))


# ---------------------------------------------------------------------------------------------
# slow twins and reference processes


def mser_brute(series: np.ndarray, batch_size: int = 5) -> int:
    """MSER by its definition (White 1997, Simulation 69(6)): for each d in the first half,
    the variance of the remaining batch means about their own mean, over (m − d)²; O(m²)."""
    m = len(series) // batch_size
    z = np.asarray(series[: m * batch_size]).reshape(m, batch_size).mean(axis=1)
    best, best_d = math.inf, 0
    for d in range(m // 2 + 1):
        rest = z[d:]
        value = float(np.sum((rest - rest.mean()) ** 2)) / (m - d) ** 2
        if value < best * (1 - 1e-12):  # strict improvement: ties go to the smallest d
            best, best_d = value, d
    return best_d * batch_size


def ar1(rng: np.random.Generator, n: int, phi: float, mean: float, sigma: float) -> np.ndarray:
    """Stationary AR(1): X_t − μ = φ (X_{t−1} − μ) + ε_t, ε_t ~ N(0, σ²), started from its
    stationary law N(μ, σ²/(1 − φ²)) (Box & Jenkins, Time Series Analysis, 1976, ch. 3; from
    memory)."""
    start = rng.normal(0.0, sigma / math.sqrt(1.0 - phi * phi))
    noise = rng.normal(0.0, sigma, n)
    y, _ = lfilter([1.0], [1.0, -phi], noise, zi=[phi * start])
    return mean + y


def ar1_batch_lag1(phi: float, b: int) -> float:
    """Lag-1 correlation of consecutive means of b AR(1) values, from the autocovariance
    γ(h) ∝ φ^|h| summed term by term (standard time-series algebra, derived here)."""
    t = np.arange(2 * b)
    gamma = phi ** np.abs(t[:, None] - t[None, :])
    return float(gamma[:b, b:].sum() / gamma[:b, :b].sum())


# ---------------------------------------------------------------------------------------------
# MSER-5


@pytest.mark.parametrize("seed", range(20))
def test_mser5_truncates_inside_known_transient(seed: int) -> None:
    """Bias 10·exp(−i/50) plus N(0, 1) noise: MSER-5 (White 1997) deletes the part where the
    bias exceeds the noise (bias(d) <= σ, i.e. d >= 50 ln 10 ≈ 115) and stops before the bias
    has fallen to 5 % of σ (d <= 50 ln 200 ≈ 265): inside the transient, not far past it.
    The 1 σ and 5 % marks are ours (common practice, no source)."""
    rng = rng_for(1, seed)
    i = np.arange(2000)
    y = 10.0 * np.exp(-i / 50.0) + rng.normal(size=i.size)
    d = mser5(y)
    assert 50 * math.log(10) <= d <= 50 * math.log(200)


def test_mser5_truncates_little_on_stationary_series() -> None:
    """On i.i.d. N(0, 1) data there is no transient: MSER-5 deletes little (White 1997). Over
    30 seeded series of 2000 the median deletion is at most 1 %, at least 27 delete at most 5 %
    and none more than 10 % (noise alone sometimes makes an early stretch look biased)."""
    deleted = np.array([mser5(rng_for(2, s).normal(size=2000)) for s in range(30)])
    assert np.median(deleted) <= 20
    assert np.sum(deleted <= 100) >= 27
    assert deleted.max() <= 200


def test_mser5_stationary_ar1_truncates_little() -> None:
    """A correlated but stationary AR(1) (φ = 0.7, started in its stationary law) has no
    transient either: median deletion at most 2 % of the run (White 1997)."""
    deleted = [mser5(ar1(rng_for(3, s), 5000, 0.7, 0.0, 1.0)) for s in range(20)]
    assert np.median(deleted) <= 100


@settings(max_examples=200, deadline=None)
@given(
    seed=st.integers(0, 2**32 - 1),
    n=st.integers(10, 400),
    size=st.integers(1, 7),
    drift=st.floats(0.0, 20.0),
)
def test_mser_matches_definition(seed: int, n: int, size: int, drift: float) -> None:
    """The vectorized tail sums give the truncation of the O(m²) definition (White 1997)."""
    rng = rng_for(4, seed)
    y = drift * np.exp(-np.arange(n) / 20.0) + rng.normal(size=n)
    assume(n >= 2 * size)
    assert mser(y, size).deleted == mser_brute(y, size)


@settings(max_examples=100, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), scale=st.floats(0.01, 100.0), shift=st.floats(-1e4, 1e4))
def test_mser5_is_affine_invariant(seed: int, scale: float, shift: float) -> None:
    """MSER(d) of a·Y + c is a²·MSER(d) of Y, so the truncation point does not move (White
    1997, from the definition)."""
    y = 5.0 * np.exp(-np.arange(300) / 15.0) + rng_for(5, seed).normal(size=300)
    assert mser5(scale * y + shift) == mser5(y)


def test_mser_flags_a_transient_longer_than_half_the_run() -> None:
    """A series that rises through its whole length has its minimum at the search limit: the
    run is too short (White, Cobb & Spratt 2000; from memory)."""
    y = np.linspace(0.0, 10.0, 500) + 0.01 * rng_for(6).normal(size=500)
    result = mser(y)
    assert result.at_limit
    assert result.deleted == 5 * (100 // 2)
    assert not mser(rng_for(7).normal(size=500)).at_limit


def test_welch_average_by_hand() -> None:
    """Welch's moving average (Law & Kelton, Simulation Modeling and Analysis, §9.5.1) by the
    textbook's two cases, computed with plain loops."""
    runs = rng_for(8).normal(size=(4, 40)).cumsum(axis=1)
    w = 5
    ybar = runs.mean(axis=0)
    expected = [ybar[: 2 * i - 1].mean() for i in range(1, w + 1)]
    expected += [ybar[i - 1 - w : i + w].mean() for i in range(w + 1, 40 - w + 1)]
    np.testing.assert_allclose(welch_average(runs, w), expected, rtol=1e-12)


def test_mean_increment_is_slope() -> None:
    """(x(K) − x(K0))/(K − K0) of x(k) = 3k + noise tends to 3; with x(0) = 0 when K0 = 0."""
    k = np.arange(1, 1001)
    x = np.vstack([3.0 * k, 3.0 * k + 7.0])
    np.testing.assert_allclose(mean_increment(x, 100), [3.0, 3.0])
    assert mean_increment(3.0 * k) == pytest.approx(3.0)
    assert mean_increment(x[1], 0) == pytest.approx(3.0 + 7.0 / 1000)


# ---------------------------------------------------------------------------------------------
# replication intervals


def test_replication_interval_coverage_normal() -> None:
    """200 seeded sets of 5 N(3, 2²) values: the 95 % t-interval (Law & Kelton §9.4.1) covers
    3 in 180–198 of 200 (binomial(200, 0.95) has mean 190, sd 3.1). With only 5 values a
    normal quantile instead of t would cover about 88 %, below the bound."""
    covered = 0
    for s in range(200):
        x = rng_for(10, s).normal(3.0, 2.0, 5)
        iv = replication_interval(x)
        low, high = stats.t.interval(0.95, df=4, loc=np.mean(x), scale=stats.sem(x))
        assert (iv.low, iv.high) == pytest.approx((low, high), rel=1e-12)
        covered += iv.covers(3.0)
    assert 180 <= covered <= 198


@settings(max_examples=100, deadline=None)
@given(
    values=st.lists(st.floats(-1e3, 1e3, allow_nan=False), min_size=2, max_size=50),
    level=st.floats(0.5, 0.999),
)
def test_replication_interval_matches_scipy(values: list[float], level: float) -> None:
    """Half-width equals scipy.stats.t.interval with the standard error scipy.stats.sem."""
    iv = replication_interval(values, level)
    sem = stats.sem(values)
    if sem == 0:
        assert iv.half_width == 0
        return
    low, high = stats.t.interval(level, df=len(values) - 1, loc=np.mean(values), scale=sem)
    assert iv.half_width == pytest.approx((high - low) / 2, rel=1e-9, abs=1e-9)
    assert iv.n == len(values) and iv.level == level
    assert iv.low == pytest.approx(iv.estimate - iv.half_width)
    if iv.estimate != 0:
        assert iv.relative_half_width == pytest.approx(iv.half_width / abs(iv.estimate))


def test_interval_to_dict_round_trips() -> None:
    """to_dict gives plain fields that rebuild the same Interval (JSON result documents)."""
    iv = batch_means(rng_for(11).normal(size=400), 10)
    assert Interval(**iv.to_dict()) == iv


# ---------------------------------------------------------------------------------------------
# batch means


@pytest.mark.parametrize("phi", [0.5, 0.9])
def test_batch_means_coverage_ar1(phi: float) -> None:
    """AR(1) with mean 5 and φ = 0.5 or 0.9: 20 batches of 1000 (Law & Kelton §9.5.3) cover the
    mean in 180–198 of 200 seeded runs. The batch variance, scaled by the batch size, estimates
    the asymptotic variance σ²/(1 − φ)² of the sample mean (standard time-series result) to
    within 10 % on average. An interval that ignored the correlation would be (1+φ)/(1−φ)
    times too narrow in variance and cover far less."""
    covered, scaled = 0, []
    for s in range(200):
        iv = batch_means(ar1(rng_for(12, s), 20_000, phi, 5.0, 1.0), n_batches=20)
        covered += iv.covers(5.0)
        t = stats.t.ppf(0.975, 19)
        scaled.append(iv.batch_size * iv.n * (iv.half_width / t) ** 2)
    assert 180 <= covered <= 198
    assert np.mean(scaled) == pytest.approx(1.0 / (1.0 - phi) ** 2, rel=0.10)


def test_batch_means_drops_oldest_remainder() -> None:
    """The batch count is exactly n_batches; the oldest leftover values go, those closest to the
    warm-up (our choice, no source)."""
    y = np.arange(103.0)
    iv = batch_means(y, 10)
    assert iv.batch_size == 10 and iv.n == 10
    assert iv.estimate == pytest.approx(y[3:].mean())
    # 29 values in 10 batches: batches of 2, exactly 10 of them (not 14), the 9 oldest dropped
    iv = batch_means(y[:29], 10)
    assert (iv.batch_size, iv.n) == (2, 10)
    assert iv.estimate == pytest.approx(y[9:29].mean())


def test_lag1_autocorrelation_of_ar1() -> None:
    """The lag-1 sample autocorrelation of a long AR(1) is close to φ (Box & Jenkins 1976,
    ch. 3, from memory: ρ_1 = φ); its standard error is about √((1 − φ²)/n) ≈ 0.002 here
    (Bartlett, from memory)."""
    x = ar1(rng_for(13), 200_000, 0.6, 0.0, 1.0)
    assert lag1_autocorrelation(x) == pytest.approx(0.6, abs=0.01)
    assert lag1_autocorrelation([2.0, 2.0, 2.0]) == 0.0


def test_batch_means_flags_correlated_batches() -> None:
    """Batches of 10 from an AR(1) with φ = 0.99 keep a lag-1 correlation near
    ar1_batch_lag1(0.99, 10) ≈ 0.9: flagged. Independent data are not flagged."""
    assert ar1_batch_lag1(0.99, 10) > 0.8
    iv = batch_means(ar1(rng_for(14), 400, 0.99, 0.0, 1.0), 40)
    assert iv.batches_correlated
    assert iv.lag1_limit == pytest.approx(1.6448536 / math.sqrt(40))
    assert not batch_means(rng_for(15).normal(size=400), 40).batches_correlated


def test_ar1_batch_lag1_twin() -> None:
    """The term-by-term batch correlation agrees with the closed form
    φ(1 − φ^b)² / (b(1 − φ²) − 2φ(1 − φ^b)) (derived from γ(h) = φ^h/(1 − φ²)), and with φ at
    b = 1."""
    for phi in (0.3, 0.9):
        assert ar1_batch_lag1(phi, 1) == pytest.approx(phi)
        for b in (2, 7, 50):
            closed = phi * (1 - phi**b) ** 2 / (b * (1 - phi**2) - 2 * phi * (1 - phi**b))
            assert ar1_batch_lag1(phi, b) == pytest.approx(closed, rel=1e-9)


@pytest.mark.parametrize("seed", range(5))
def test_choose_batch_count_on_ar1(seed: int) -> None:
    """φ = 0.9, 20 000 values: the doubling stops at a size whose true batch correlation is
    small (<= 0.3 against the 0.2 threshold, allowing the estimate's noise of about 0.1), and
    the final batches are at least 5 times larger, with true correlation below 0.1."""
    x = ar1(rng_for(16, seed), 20_000, 0.9, 0.0, 1.0)
    choice = choose_batch_count(x)
    assert choice.accepted
    assert ar1_batch_lag1(0.9, choice.check_size) <= 0.3
    assert ar1_batch_lag1(0.9, choice.check_size // 2) > 0.1  # it did not double needlessly
    assert 10 <= choice.n_batches <= 30
    assert choice.batch_size >= 5 * choice.check_size
    assert ar1_batch_lag1(0.9, choice.batch_size) < 0.1


def test_choose_batch_count_independent_and_too_short() -> None:
    """Independent data need no batching (check size 1, 30 batches); a run far shorter than
    its correlation time (φ = 0.999, 2000 values) is not accepted."""
    choice = choose_batch_count(rng_for(17).normal(size=3000))
    assert (choice.check_size, choice.n_batches, choice.accepted) == (1, 30, True)
    short = choose_batch_count(ar1(rng_for(18), 2000, 0.999, 0.0, 1.0))
    assert not short.accepted
    assert short.n_batches == 10


# ---------------------------------------------------------------------------------------------
# sequential relative precision


def rel_half(point: tuple[int, float, float, float]) -> float:
    _, est, low, high = point
    return (high - low) / 2.0 / abs(est)


def test_sequential_stops_when_target_met() -> None:
    """Law & Kelton §9.4.1: stop at the first check with relative half-width <= γ/(1+γ); every
    earlier check was above it; the final interval is the t-interval of all values."""
    rng = rng_for(20)
    asked: list[int] = []

    def step(n: int) -> np.ndarray:
        asked.append(n)
        return rng.normal(10.0, 3.0, n)

    res = sequential_precision(step, precision=0.02, max_work=10_000)
    target = 0.02 / 1.02
    assert res.target_met and res.target == pytest.approx(target)
    assert res.interval.relative_half_width <= target
    assert rel_half(res.history[-1]) <= target
    assert all(rel_half(p) > target for p in res.history[:-1])
    assert res.work == sum(asked) == len(res.values) == res.history[-1].work
    assert asked[0] == 10 and min(asked) >= 1
    works = [p.work for p in res.history]
    assert all(b <= 2 * a for a, b in itertools.pairwise(works))  # growth cap
    again = replication_interval(res.values)
    assert res.interval.half_width == pytest.approx(again.half_width)
    assert "sequential" in res.interval.method


def test_sequential_coverage_of_relative_error() -> None:
    """Law & Kelton §9.4.1: with the corrected target the estimate is within relative error γ
    of the true mean with probability about the level. N(10, 3²), γ = 0.05: at least 180 of
    200 seeded runs (the sequential stop may lower coverage a little below 95 %)."""
    hits = 0
    for s in range(200):
        rng = rng_for(21, s)
        res = sequential_precision(lambda n, rng=rng: rng.normal(10.0, 3.0, n), 0.05)
        assert res.target_met
        hits += abs(res.interval.estimate - 10.0) <= 0.05 * 10.0
    assert hits >= 180


def test_sequential_respects_budget() -> None:
    """An unreachable precision stops exactly at max_work, target not met."""
    rng = rng_for(22)
    res = sequential_precision(lambda n: rng.normal(1.0, 5.0, n), 0.001, initial=10, max_work=75)
    assert not res.target_met
    assert res.work == 75 and len(res.values) == 75
    assert res.interval.relative_half_width > res.target


def test_sequential_replace_mode_extends_runs() -> None:
    """Replace mode: 8 runs are lengthened and their running means replace the old values;
    the work counted is the length per run, the interval has n = 8."""
    rng = rng_for(23)
    sums, count = np.zeros(8), [0]

    def step(n: int) -> np.ndarray:
        sums[:] += rng.exponential(2.0, (n, 8)).sum(axis=0)
        count[0] += n
        return sums / count[0]

    res = sequential_precision(step, 0.02, initial=50, max_work=10**6, mode="replace")
    assert res.target_met
    assert res.work == count[0] == res.history[-1].work
    assert res.interval.n == 8
    assert res.interval.relative_half_width <= 0.02 / 1.02
    assert res.interval.covers(2.0)


@pytest.mark.parametrize(
    ("kwargs", "rule"),
    [
        ({"precision": 0.0}, "precision must be in (0, 1)"),
        ({"precision": 1.0}, "precision must be in (0, 1)"),
        ({"precision": -0.1}, "precision must be in (0, 1)"),
        ({"precision": float("nan")}, "precision must be in (0, 1)"),
        ({"precision": 0.05, "level": 1.0}, "level must be in (0, 1)"),
        ({"precision": 0.05, "level": 0.0}, "level must be in (0, 1)"),
        ({"precision": 0.05, "initial": 1}, "initial must be an integer >= 2"),
        ({"precision": 0.05, "initial": 20, "max_work": 10}, "max_work must be an integer >= 20"),
        ({"precision": 0.05, "growth": 1.0}, "growth must be a finite number > 1"),
        ({"precision": 0.05, "mode": "extend"}, 'mode must be "append" or "replace"'),
    ],
)
def test_sequential_refuses_bad_arguments(kwargs: dict, rule: str) -> None:
    """Bad arguments raise ValueError naming the argument and the rule; no work is done."""
    calls: list[int] = []
    with pytest.raises(ValueError) as err:
        sequential_precision(lambda n: calls.append(n) or np.ones(n), **kwargs)
    assert rule in str(err.value)
    assert calls == []


def test_sequential_refuses_bad_step_output() -> None:
    """A step returning the wrong count or a NaN is an error, not a silent estimate."""
    with pytest.raises(ValueError, match=r"step\(10\) must return 10 estimates, got 3"):
        sequential_precision(lambda n: np.ones(3), 0.05)
    with pytest.raises(ValueError, match="finite"):
        sequential_precision(lambda n: np.full(n, np.nan), 0.05)
    with pytest.raises(ValueError, match="one estimate per replication"):
        sequential_precision(lambda n: np.ones(1), 0.05, mode="replace")


# ---------------------------------------------------------------------------------------------
# input checking


@pytest.mark.parametrize(
    ("call", "rule"),
    [
        (lambda: replication_interval([1.0]), "values must hold at least 2 values, got 1"),
        (lambda: replication_interval([1.0, np.inf]), "values must be finite"),
        (lambda: replication_interval([[1.0, 2.0]]), "values must be one-dimensional"),
        (lambda: replication_interval([1.0, 2.0], level=95), "level must be in (0, 1)"),
        (lambda: batch_means(np.ones(10), 1), "n_batches must be an integer >= 2"),
        (lambda: batch_means(np.ones(10), 20), "series must hold at least 20 values"),
        (lambda: mser5(np.ones(9)), "series must hold at least 10 values"),
        (lambda: mser(np.ones(20), 0), "batch_size must be an integer >= 1"),
        (lambda: welch_average(np.ones((2, 10)), 5), "window must be at most (m - 1) // 2 = 4"),
        (lambda: mean_increment(np.ones(5), 5), "deleted must be smaller than the series length"),
        (lambda: choose_batch_count(np.ones(50)), "series must hold at least 100 values"),
        (lambda: choose_batch_count(np.ones(500), max_lag1=2), "max_lag1 must be in (0, 1)"),
    ],
)
def test_errors_name_the_rule(call, rule: str) -> None:
    """Each refusal is a ValueError whose text names the argument and the rule broken."""
    with pytest.raises(ValueError) as err:
        call()
    assert rule in str(err.value)


def test_docstring_examples() -> None:
    """The examples in the module's docstrings run and print what they show."""
    result = doctest.testmod(estimate, optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.attempted >= 3 and result.failed == 0
