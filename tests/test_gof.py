"""Tests of the judge's statistics (simulate/gof.py) against scipy and hand-worked examples."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from cyclecheck.simulate.durations import parse_spec
from cyclecheck.simulate.gof import (
    chi_square,
    detectable_change_mean,
    detectable_change_t,
    holm,
    ks_grouped,
    ks_p_value,
    welch_t,
    window_mass,
    z_mean,
)
from scipy import stats

LAWS = [
    ({"dist": "exponential", "mean": 2.0}, lambda: stats.expon(scale=2.0)),
    ({"dist": "gamma", "mean": 3.0, "cv": 0.5}, lambda: stats.gamma(4.0, scale=0.75)),
    ({"dist": "erlang", "mean": 3.0, "k": 3}, lambda: stats.gamma(3.0, scale=1.0)),
    ({"dist": "lognormal", "mean": 3.0, "cv": 0.5},
     lambda: stats.lognorm(math.sqrt(math.log(1.25)), scale=3.0 / math.sqrt(1.25))),
    ({"dist": "weibull", "scale": 2.0, "shape": 1.5}, lambda: stats.weibull_min(1.5, scale=2.0)),
    ({"dist": "normal", "mean": 2.0, "sd": 1.5, "truncate": True},
     lambda: stats.truncnorm(-2.0 / 1.5, np.inf, loc=2.0, scale=1.5)),
    ({"dist": "uniform", "low": 1.0, "high": 4.0}, lambda: stats.uniform(1.0, 3.0)),
    ({"dist": "triangular", "low": 1.0, "mode": 2.0, "high": 7.0},
     lambda: stats.triang(1.0 / 6.0, loc=1.0, scale=6.0)),
    ({"dist": "triangular", "low": 1.0, "mode": 1.0, "high": 7.0},
     lambda: stats.triang(0.0, loc=1.0, scale=6.0)),
    ({"dist": "triangular", "low": 1.0, "mode": 7.0, "high": 7.0},
     lambda: stats.triang(1.0, loc=1.0, scale=6.0)),
]


@pytest.mark.parametrize("spec, reference", LAWS, ids=[f"{s['dist']}{i}" for i, (s, _)
                                                        in enumerate(LAWS)])
def test_cdf_and_quantiles_match_scipy(spec, reference):
    """The laws' distribution and quantile functions equal scipy.stats' (reference library),
    parametrised as in Johnson, Kotz & Balakrishnan, Continuous Univariate Distributions
    (1994-95): gamma with shape 1/cv², log-normal with σ² = ln(1 + cv²), truncated normal."""
    law, ref = parse_spec(spec), reference()
    x = np.linspace(-1.0, 15.0, 400)
    q = np.linspace(0.0005, 0.9995, 101)
    assert np.allclose(law.cdf(x), ref.cdf(x), rtol=1e-12, atol=1e-13)
    assert np.allclose(law.ppf(q), ref.ppf(q), rtol=1e-10, atol=1e-12)
    assert law.mean == pytest.approx(ref.mean(), rel=1e-12)


def test_resampled_law_is_a_step_function():
    law = parse_spec({"dist": "empirical", "values": [3.0, 1.0, 3.0, 8.0]})
    assert not law.is_continuous
    assert law.cdf([0.0, 1.0, 2.9, 3.0, 7.9, 8.0, 9.0]).tolist() == [0, .25, .25, .75, .75, 1, 1]
    assert law.ppf([0.1, 0.25, 0.26, 0.75, 0.76, 1.0]).tolist() == [1, 1, 3, 3, 8, 8]


@pytest.mark.parametrize("n", [1, 7, 40, 500, 12_000])
def test_kolmogorov_smirnov_matches_scipy(n):
    """D_n and its exact two-sided p-value (Massey 1951; Marsaglia, Tsang & Wang 2003 as
    implemented by scipy.stats.kstwo) equal scipy.stats.kstest on the same samples, one group
    at a time, whatever the grouping (groups shuffled among each other)."""
    rng = np.random.default_rng(np.random.SeedSequence(n))
    law = parse_spec({"dist": "gamma", "mean": 2.0, "cv": 0.7})
    groups = 3
    x = [law.sample(rng, n) * s for s in (1.0, 1.1, 0.7)]  # the last two are off the model
    g = np.concatenate([np.full(n, i) for i in range(groups)])
    perm = rng.permutation(g.size)
    res = ks_grouped(law.cdf(np.concatenate(x))[perm], g[perm], groups + 1)
    for i in range(groups):
        ref = stats.kstest(x[i], stats.gamma(1 / 0.49, scale=2.0 * 0.49).cdf,
                           method="exact" if n <= 10_000 else "auto")
        assert res.statistic[i] == pytest.approx(ref.statistic, rel=1e-12, abs=1e-15)
        assert res.p_value[i] == pytest.approx(ref.pvalue, rel=1e-6, abs=1e-300)
        assert res.n[i] == n
    assert np.isnan(res.statistic[groups]) and res.n[groups] == 0


def test_chi_square_matches_scipy_with_large_counts():
    """Pearson's X² and its χ² tail equal scipy.stats.chisquare."""
    observed = np.array([30, 52, 18, 0 + 25])
    prob = np.array([0.25, 0.4, 0.15, 0.2])
    stat, p, method = chi_square(observed, prob)
    ref = stats.chisquare(observed, observed.sum() * prob)
    assert (stat, p) == (pytest.approx(ref.statistic), pytest.approx(ref.pvalue))
    assert method == "chi-square"


def test_monte_carlo_chi_square_matches_the_exact_multinomial_test():
    """With small counts the p-value is by Monte Carlo; its twin here is the exact test:
    enumerate every outcome of the multinomial, add the probabilities of those whose X² is at
    least the observed one (the exact multinomial goodness-of-fit test)."""
    prob = np.array([0.5, 0.3, 0.2])
    n = 8
    observed = np.array([1, 5, 2])
    expected = n * prob
    x2 = ((observed - expected) ** 2 / expected).sum()
    exact = 0.0
    for a, b in itertools.product(range(n + 1), repeat=2):
        if a + b > n:
            continue
        cells = np.array([a, b, n - a - b])
        if ((cells - expected) ** 2 / expected).sum() >= x2 - 1e-12:
            exact += stats.multinomial.pmf(cells, n, prob)
    stat, p, method = chi_square(observed, prob, seed=5, draws=20_000)
    assert stat == pytest.approx(x2) and "Monte Carlo" in method
    assert abs(p - exact) < 4 * math.sqrt(exact * (1 - exact) / 20_000) + 1e-4


def test_holm_on_a_hand_worked_example():
    """Holm (1979): sort the p-values, compare the i-th smallest with alpha / (m - i + 1), stop
    at the first that fails. Hand-worked, m = 5, alpha = 0.05:

    sorted p      0.004   0.011   0.012   0.030   0.400
    alpha/(m-i+1) 0.010   0.0125  0.01667 0.025   0.05
    reject?       yes     yes     yes     no (0.030 > 0.025, stop)   no
    adjusted      0.020   0.044   0.044   0.060   0.400
    (adjusted: running maximum of (m - i + 1) p: 5·0.004, 4·0.011, max(3·0.012, 0.044),
    max(2·0.030, 0.044), max(0.400, 0.06)); the inputs are given out of order."""
    p = [0.030, 0.004, 0.400, 0.012, 0.011]
    adjusted, rejected = holm(p, 0.05)
    assert adjusted.tolist() == pytest.approx([0.060, 0.020, 0.400, 0.044, 0.044])
    assert rejected.tolist() == [False, True, False, True, True]
    # Bonferroni would reject only 0.004 (< 0.01): Holm is uniformly more powerful
    assert holm([], 0.05)[0].size == 0


def test_holm_controls_the_family_wise_error_under_the_null():
    """Under the null (uniform p-values) the family rejects something at most alpha of the
    time (Holm 1979, theorem); 4000 families of 10 independent tests."""
    rng = np.random.default_rng(np.random.SeedSequence(17))
    any_rejected = sum(holm(rng.random(10), 0.05)[1].any() for _ in range(4000))
    assert any_rejected / 4000 <= 0.05 + 3 * math.sqrt(0.05 * 0.95 / 4000)


def test_z_and_welch_match_scipy():
    z, p = z_mean(10.4, 100, 10.0, 2.0)
    assert float(z) == pytest.approx(2.0) and float(p) == pytest.approx(2 * stats.norm.sf(2.0))
    t, df, p = welch_t(5.2, 0.1, 9, 5.0, 0.05, 29)
    ref = stats.ttest_ind_from_stats(5.2, 0.1 * math.sqrt(10), 10, 5.0, 0.05 * math.sqrt(30),
                                     30, equal_var=False)
    assert t == pytest.approx(ref.statistic) and p == pytest.approx(ref.pvalue)
    assert df == pytest.approx((0.01 + 0.0025) ** 2 / (0.0001 / 9 + 0.05**4 / 29))


def test_detectable_change_has_the_power_it_claims():
    """At the detectable slow-down of the formula, a z test of the mean of scaled exponential
    draws rejects with probability 0.8 (checked by simulation, 4000 samples; Montgomery, Design
    and Analysis of Experiments, ch. 2: the power of a two-sided z test is
    Φ((δ√n/cv − z_(1−a/2)) / (1 + δ)) for a scale change, the far tail ignored)."""
    n, level = 400, 0.01
    delta = float(detectable_change_mean(1.0, n, level))
    za, zb = stats.norm.ppf(1 - level / 2), stats.norm.ppf(0.8)
    assert stats.norm.cdf((delta * math.sqrt(n) - za) / (1 + delta)) == pytest.approx(0.8)
    rng = np.random.default_rng(np.random.SeedSequence(3))
    means = rng.exponential(1.0 + delta, size=(4000, n)).mean(axis=1)
    rate = float((z_mean(means, n, 1.0, 1.0)[1] <= level).mean())
    assert rate == pytest.approx(0.8, abs=3 * math.sqrt(0.8 * 0.2 / 4000) + 0.005)
    assert np.isnan(detectable_change_mean(1.0, 0.5, level))  # too few to detect anything
    assert zb == pytest.approx(0.8416, abs=1e-4)
    t_change = detectable_change_t(0.1, 20, 5.0, 0.05)
    q = stats.t.ppf(0.975, 20) + stats.t.ppf(0.8, 20)
    assert t_change == pytest.approx(q * 0.1 / 5.0)


# Laws with an unbounded density at 0 besides those above (gamma cv > 1, Weibull shape < 1).
SPIKED = [
    ({"dist": "gamma", "mean": 1.0, "cv": 2.0}, lambda: stats.gamma(0.25, scale=4.0)),
    ({"dist": "weibull", "scale": 1.0, "shape": 0.7}, lambda: stats.weibull_min(0.7)),
]


def _widest(ref, width, lo, hi):
    """Brute-force twin: the largest F(x + w) - F(x) over a grid of step w / 50 (scipy's
    CDF), which finds it to 2 % of the window's mass."""
    x = np.linspace(lo, hi, int(min(200_000, 50 * (hi - lo) / width)) + 2)
    return float(np.max(ref.cdf(x + width) - ref.cdf(x)))


@pytest.mark.parametrize("spec, reference", LAWS + SPIKED,
                         ids=[f"{s['dist']}{i}" for i, (s, _) in enumerate(LAWS + SPIKED)])
@pytest.mark.parametrize("width", [0.01, 0.3])
def test_window_mass_bounds_the_widest_window(spec, reference, width):
    """omega bounds sup_x F(x + w) - F(x) (a dense-grid search with scipy's CDF as the twin)
    and is tight (at most the widest window of 1.05 w); beyond ``decreasing_from`` the
    window at a point is the widest of those after it (unimodal laws, derived in
    gof.py)."""
    law, ref = parse_spec(spec), reference()
    lo, hi = float(ref.ppf(0.0)) - width, float(ref.ppf(0.999))
    mass = window_mass(law.cdf, law.ppf, width)
    assert _widest(ref, width, lo, hi) <= mass.omega + 1e-12
    assert mass.omega <= _widest(ref, 1.05 * width, lo, hi) + 1e-9
    for a in (mass.decreasing_from, mass.decreasing_from + 0.5, float(ref.ppf(0.9))):
        if a >= mass.decreasing_from:
            after = _widest(ref, width, a, max(hi, a + 1.0))
            assert after <= float(mass.beyond(a)) + 1e-12
    assert float(mass.beyond(-math.inf)) == mass.omega


@pytest.mark.parametrize("spec, reference", [LAWS[0], LAWS[6], SPIKED[0]],
                         ids=["exponential", "uniform", "gamma-spiked"])
def test_rounding_moves_the_ks_distance_by_at_most_the_window(spec, reference):
    """Values known to within ±w (here rounded to a grid of w, or shifted by up to w): the
    KS distance (scipy.stats.kstest, the reference) exceeds the true values' by at most
    omega(w), so the p-value with that allowance is at least the true values' p-value: a
    conservative test (derived in gof.py from the monotonicity of the empirical CDF)."""
    law, ref = parse_spec(spec), reference()
    rng = np.random.default_rng(np.random.SeedSequence(5))
    for w in (0.01, 0.2):
        omega = window_mass(law.cdf, law.ppf, w).omega
        for _ in range(20):
            x = ref.rvs(size=2000, random_state=rng)
            true = stats.kstest(x, ref.cdf).statistic
            for blurred in (np.round(x / w) * w, x + rng.uniform(-w, w, x.size),
                            x + w * np.sign(np.median(x) - x)):  # pushed towards the middle
                d = stats.kstest(blurred, ref.cdf).statistic
                assert d <= true + omega + 1e-12
                assert ks_p_value(d, x.size, omega) >= ks_p_value(true, x.size) - 1e-12
