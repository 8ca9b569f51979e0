"""Distribution specs and the indexed sampler (simulate/durations.py).

Reference for moments and laws: SciPy's ``scipy.stats`` distributions (Virtanen et al., "SciPy
1.0: fundamental algorithms for scientific computing in Python", Nature Methods 17, 2020),
which compute means, variances and CDFs from their own parametrizations, independently of ours.
Stream derivation: NumPy documentation, "Parallel random number generation" (SeedSequence with
a spawn key gives independent streams).
"""

from __future__ import annotations

import math
import pickle

import numpy as np
import pytest
from cyclecheck.simulate.durations import (
    BLOCK,
    DISTRIBUTIONS,
    Fixed,
    Sampler,
    SpecTable,
    parse_spec,
    pcg64_states,
)
from cyclecheck.simulate.errors import ModelError, did_you_mean
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats


def _lognormal(mean: float, cv: float):
    # Law & Kelton, Simulation Modeling and Analysis, 3rd ed. (2000), §6.2.2, lognormal:
    # mean = exp(μ + σ²/2), variance = exp(2μ + σ²)(exp(σ²) − 1); solved for μ, σ.
    s2 = math.log(1 + cv * cv)
    return stats.lognorm(s=math.sqrt(s2), scale=math.exp(math.log(mean) - s2 / 2))


# spec, the scipy.stats law it must be
CASES = [
    ({"dist": "exponential", "mean": 2.5}, stats.expon(scale=2.5)),
    ({"dist": "gamma", "mean": 3.0, "cv": 0.5}, stats.gamma(a=4.0, scale=0.75)),
    ({"dist": "gamma", "mean": 1.0, "cv": 2.0}, stats.gamma(a=0.25, scale=4.0)),
    ({"dist": "erlang", "mean": 6.0, "k": 3}, stats.erlang(a=3, scale=2.0)),
    ({"dist": "lognormal", "mean": 3.0, "cv": 0.5}, _lognormal(3.0, 0.5)),
    ({"dist": "weibull", "shape": 1.5, "scale": 2.0}, stats.weibull_min(c=1.5, scale=2.0)),
    ({"dist": "weibull", "shape": 0.7, "mean": 4.0},
     stats.weibull_min(c=0.7, scale=4.0 / math.gamma(1 + 1 / 0.7))),
    ({"dist": "normal", "mean": 10.0, "sd": 3.0, "truncate": True},
     stats.truncnorm(a=-10 / 3, b=np.inf, loc=10.0, scale=3.0)),
    ({"dist": "normal", "mean": 1.0, "sd": 2.0, "truncate": True},
     stats.truncnorm(a=-0.5, b=np.inf, loc=1.0, scale=2.0)),
    ({"dist": "normal", "mean": 0.0, "sd": 1.0, "truncate": True}, stats.halfnorm()),
    ({"dist": "uniform", "low": 1.0, "high": 4.0}, stats.uniform(loc=1.0, scale=3.0)),
    ({"dist": "triangular", "low": 1.0, "mode": 2.0, "high": 6.0},
     stats.triang(c=0.2, loc=1.0, scale=5.0)),
    ({"dist": "triangular", "low": 0.0, "mode": 0.0, "high": 2.0},
     stats.triang(c=0.0, loc=0.0, scale=2.0)),
]
EMPIRICAL = [1.0, 2.0, 2.5, 7.0]


@pytest.mark.parametrize(("spec", "ref"), CASES, ids=lambda x: str(x)[:40])
def test_moments_match_scipy(spec, ref):
    """.mean and .variance are the exact moments of the law scipy.stats describes."""
    law = parse_spec(spec)
    mean, var = (float(v) for v in ref.stats("mv"))
    assert law.mean == pytest.approx(mean, rel=1e-12)
    assert law.variance == pytest.approx(var, rel=1e-10)
    assert law.cv == pytest.approx(math.sqrt(var) / mean, rel=1e-10)
    assert law.is_random


@pytest.mark.parametrize(("spec", "ref"), CASES, ids=lambda x: str(x)[:40])
def test_draws_follow_the_law(spec, ref):
    """Draws from the sampler pass a Kolmogorov–Smirnov test against the scipy law, and their
    mean and cv are near the spec (fixed seed, so the test is repeatable)."""
    law = parse_spec(spec)
    n = 40_000
    x = Sampler([law], [], seed=20240611).duration(0, 1, n)
    assert x.min() >= 0
    assert stats.kstest(x, ref.cdf).pvalue > 1e-3
    assert abs(x.mean() - law.mean) < 5 * law.sd / math.sqrt(n)
    assert x.std() / x.mean() == pytest.approx(law.cv, rel=0.08)


def test_empirical_resamples_uniformly():
    """empirical(values) is the discrete uniform law on the values: moments equal those of
    scipy.stats.rv_discrete, and frequencies pass a chi-square test."""
    law = parse_spec({"dist": "empirical", "values": EMPIRICAL})
    ref = stats.rv_discrete(values=(EMPIRICAL, [0.25] * 4))
    mean, var = (float(v) for v in ref.stats(moments="mv"))
    assert law.mean == pytest.approx(mean) and law.variance == pytest.approx(var)
    x = Sampler([law], [], seed=5).duration(0, 1, 20_000)
    counts = np.array([(x == v).sum() for v in EMPIRICAL])
    assert counts.sum() == x.size
    assert stats.chisquare(counts).pvalue > 1e-3


@pytest.mark.parametrize(
    "spec",
    [3, 0, 2.5, {"dist": "fixed", "value": 4}, {"dist": "deterministic", "value": 1.5},
     {"dist": "uniform", "low": 2, "high": 2}, {"dist": "empirical", "values": [3, 3]},
     {"dist": "triangular", "low": 1, "mode": 1, "high": 1}, "7.5", "fixed(value=2)"],
)
def test_degenerate_laws_are_not_random(spec):
    """Fixed numbers are degenerate laws: no randomness, draws equal the mean, rng untouched."""
    law = parse_spec(spec)
    assert not law.is_random and law.variance == 0 and law.cv == 0
    assert law.sample(None, 5).tolist() == [law.mean] * 5  # type: ignore[arg-type]


ALL_SPECS = [spec for spec, _ in CASES] + [
    {"dist": "empirical", "values": EMPIRICAL},
    {"dist": "fixed", "value": 2.0},
    {"dist": "erlang", "mean": 1e-3, "k": 40},
]


@pytest.mark.parametrize("spec", ALL_SPECS, ids=lambda x: str(x)[:40])
def test_round_trip(spec):
    """to_dict() and to_text() parse back to an equal spec; describe() is short and names it."""
    law = parse_spec(spec)
    assert parse_spec(law.to_dict()) == law
    assert parse_spec(law.to_text()) == law
    assert parse_spec(law) is law
    assert len(law.describe()) < 60
    if not isinstance(law, Fixed):
        assert law.describe().startswith(law.name + "(")


def test_describe_examples():
    assert parse_spec({"dist": "gamma", "mean": 3, "cv": 0.5}).describe() == "gamma(mean=3, cv=0.5)"
    assert parse_spec(12.0).describe() == "12"
    assert parse_spec("empirical(values=[1, 2, 3])").describe() == "empirical(n=3, mean=2)"
    assert "truncated" in parse_spec("normal(mean=5, sd=1, truncate=true)").describe()


def test_cell_syntax_equals_table():
    """The cell text name(key=value, ...) reads like the TOML table."""
    assert parse_spec(" gamma( mean = 3, cv = 0.5 ) ") == parse_spec(
        {"dist": "gamma", "mean": 3, "cv": 0.5})
    assert parse_spec("empirical(values=[1, 2])") == parse_spec(
        {"dist": "empirical", "values": [1, 2]})
    assert parse_spec("GAMMA(mean=3, cv=0.5)").name == "gamma"


@settings(max_examples=60, deadline=None)
@given(mean=st.floats(1e-6, 1e6), cv=st.floats(1e-3, 10.0),
       name=st.sampled_from(["gamma", "lognormal"]))
def test_round_trip_property(mean, cv, name):
    law = parse_spec({"dist": name, "mean": mean, "cv": cv})
    assert law.mean == mean and law.cv == cv
    assert parse_spec(law.to_text()) == law == parse_spec(law.to_dict())


# ----------------------------------------------------------------------------- errors

BAD = [
    ({"dist": "gama", "mean": 3, "cv": 1}, 'unknown distribution "gama"; did you mean "gamma"?'),
    ({"dist": "expnential", "mean": 3}, 'did you mean "exponential"?'),
    ({"mean": 3}, 'needs dist = "..."'),
    ({"dist": 3}, "dist must be a string"),
    ({"dist": "gamma", "mean": 3}, "gamma needs mean, cv: missing cv"),
    ({"dist": "gamma", "mean": 3, "cv": 1, "cvv": 1}, 'no parameter "cvv"; did you mean "cv"?'),
    ({"dist": "gamma", "mean": 3, "cv": 0}, "gamma cv must be > 0, got 0"),
    ({"dist": "lognormal", "mean": 3, "cv": -1}, "lognormal cv must be > 0, got -1"),
    ({"dist": "gamma", "mean": -3, "cv": 1}, "gamma mean must be > 0, got -3"),
    ({"dist": "gamma", "mean": float("nan"), "cv": 1}, "gamma mean must be finite, got nan"),
    ({"dist": "exponential", "mean": float("inf")}, "exponential mean must be finite, got inf"),
    ({"dist": "exponential", "mean": "3"}, 'exponential mean must be a number, got "3"'),
    ({"dist": "exponential", "mean": True}, "exponential mean must be a number, got true"),
    ({"dist": "normal", "mean": 3, "sd": 1}, "normal can go negative"),
    ({"dist": "normal", "mean": 3, "sd": 1, "truncate": False}, "normal can go negative"),
    ({"dist": "normal", "mean": 3, "sd": 1, "truncate": "yes"},
     'normal truncate must be true or false (a boolean), got "yes"'),
    ({"dist": "normal", "mean": 3, "sd": 1, "truncate": 1},
     "normal truncate must be true or false (a boolean), got 1"),
    ('normal(mean=3, sd=1, truncate="yes")',
     'normal truncate must be true or false (a boolean), got "yes"'),
    ({"dist": "normal", "mean": 3, "sd": 0, "truncate": True}, "normal sd must be > 0, got 0"),
    ({"dist": "normal", "mean": -1, "sd": 1, "truncate": True}, "normal mean must be >= 0"),
    ({"dist": "uniform", "low": 5, "high": 3}, "uniform low must be <= high, got low=5, high=3"),
    ({"dist": "uniform", "low": -1, "high": 3}, "uniform low must be >= 0, got -1"),
    ({"dist": "triangular", "low": 1, "mode": 5, "high": 3},
     "triangular mode must lie in [low, high] = [1, 3], got 5"),
    ({"dist": "triangular", "low": 4, "mode": 5, "high": 3}, "low must be <= high"),
    ({"dist": "triangular", "low": -2, "mode": 0, "high": 3}, "triangular low must be >= 0"),
    ({"dist": "empirical", "values": []}, "empirical values must be a non-empty list"),
    ({"dist": "empirical", "values": 3}, "empirical values must be a non-empty list"),
    ({"dist": "empirical", "values": [1, -2]}, "got -2 at position 2"),
    ({"dist": "empirical", "values": [1, float("nan")]}, "got nan at position 2"),
    ({"dist": "erlang", "mean": 3, "k": 2.5}, "erlang k must be an integer >= 1, got 2.5"),
    ({"dist": "erlang", "mean": 3, "k": 0}, "erlang k must be an integer >= 1, got 0"),
    ({"dist": "weibull", "shape": 2}, "exactly one of mean or scale"),
    ({"dist": "weibull", "shape": 2, "mean": 1, "scale": 1}, "exactly one of mean or scale"),
    ({"dist": "weibull", "shape": 0.001, "mean": 1}, "weibull shape must be >= 0.05"),
    ({"dist": "fixed", "value": -1}, "fixed value must be >= 0, got -1"),
    (-1, "must be >= 0, got -1"),
    (float("nan"), "must be finite, got nan"),
    (float("-inf"), "must be finite, got -inf"),
    (True, "must be a number or a distribution, got true"),
    ([1, 2], "must be a number or a distribution table"),
    ("fast", 'such as gamma(mean=3, cv=0.5), got "fast"'),
    ("gamma(mean=3 cv=1)", 'cannot read "gamma(mean=3 cv=1)"'),
    ("gamma(mean=3, cv=0)", "gamma cv must be > 0"),
    ("gamma(dist=1)", "the name before"),
    ("nan", "must be finite, got nan"),
]


@pytest.mark.parametrize(("spec", "rule"), BAD, ids=lambda x: str(x)[:40])
def test_bad_specs(spec, rule):
    """Each broken rule raises ModelError whose str() names file, item, field and rule."""
    with pytest.raises(ModelError) as info:
        parse_spec(spec, item='transition "fill"', file="models/x.toml", key="duration")
    err = info.value
    assert rule in err.rule
    assert str(err) == f'models/x.toml: transition "fill": {err.rule}'
    assert err.rule.startswith("duration: ")
    assert str(err.file) == "models/x.toml" and err.item == 'transition "fill"'


def test_unknown_dist_lists_known_names():
    with pytest.raises(ModelError) as info:
        parse_spec({"dist": "zzz"})
    assert all(name in str(info.value) for name in DISTRIBUTIONS)
    assert str(info.value).startswith('unknown distribution "zzz" (known: ')


def test_model_error_str_and_pickle():
    err = ModelError("tokens must be an integer >= 0, got -1", file="models/x.toml",
                     item="place 3 (fill -> cap, index 2)")
    assert str(err) == (
        "models/x.toml: place 3 (fill -> cap, index 2): tokens must be an integer >= 0, got -1")
    back = pickle.loads(pickle.dumps(err))
    assert (str(back), back.file, back.item, back.rule) == (str(err), err.file, err.item, err.rule)
    assert str(ModelError("no such file", file="a.toml")) == "a.toml: no such file"
    assert str(ModelError("bad")) == "bad"
    moved = ModelError("bad", item="line 3").located(file="b.csv", item="ignored")
    assert str(moved) == "b.csv: line 3: bad"


@pytest.mark.parametrize(("word", "choices", "hint"), [
    ("M2", ["m1", "m2", "m3"], '; did you mean "m2"?'),
    ("FILL", ["cap", "fill"], '; did you mean "fill"?'),
    ("Toekns", ["from", "to", "tokens", "hold"], '; did you mean "tokens"?'),
    ("toekns", ["from", "to", "tokens", "hold"], '; did you mean "tokens"?'),
    ("zzz", ["from", "to"], ""),
    ("m2", ["m2"], ""),
    ("M2", [], ""),
])
def test_did_you_mean_ignores_case(word, choices, hint):
    """A choice equal but for case is suggested first; otherwise the closest by difflib's
    ratio >= 0.6 with case folded (Python Library Reference, difflib.get_close_matches).
    The word itself is never suggested."""
    assert did_you_mean(word, choices) == hint


# ----------------------------------------------------------------------------- the sampler

SPECS_T = [{"dist": "gamma", "mean": 3, "cv": 0.5}, 2.0, "exponential(mean=1)",
           "empirical(values=[1, 2, 4])"]
SPECS_P = [0.5, "uniform(low=1, high=2)", 0.0, "normal(mean=1, sd=1, truncate=true)"]


def _contract_draw(specs, seed, r, kind, e, k):
    """The k-th draw of element e straight from the contract in DEVELOPERS.md (the slow twin)."""
    law = parse_spec(specs[e])
    if not law.is_random:
        return law.mean
    b, off = divmod(k - 1, BLOCK)
    ss = np.random.SeedSequence(seed, spawn_key=(r, kind, e, b))
    return law.sample(np.random.Generator(np.random.PCG64(ss)), BLOCK)[off]


@settings(max_examples=40, deadline=None)
@given(seed=st.integers(0, 2**64), r=st.integers(0, 3),
       requests=st.lists(st.tuples(st.integers(0, 3), st.integers(1, 3 * BLOCK),
                                   st.integers(0, 40)), min_size=1, max_size=8))
def test_random_access_equals_contract(seed, r, requests):
    """Any request order gives the numbers of the spawn-key contract, across block edges."""
    s = Sampler(SPECS_T, SPECS_P, seed, r)
    for e, first, count in requests:
        for kind, get, specs in ((0, s.duration, SPECS_T), (1, s.hold, SPECS_P)):
            got = get(e, first, count)
            assert got.shape == (count,)
            ks = [first, first + count - 1] if count else []
            for k in ks:
                assert got[k - first] == _contract_draw(specs, seed, r, kind, e, k)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**64), reps=st.lists(st.integers(0, 2**33), min_size=1, max_size=12,
                                                  unique=True),
       first=st.integers(1, 3 * BLOCK), count=st.integers(1, 300))
def test_states_prepared_together_equal_the_contract(seed, reps, first, count):
    """Generator states derived for many replications at once (what a run of replications
    does) give the numbers of the spawn-key contract, as each sampler alone does; replication
    numbers beyond 32 bits leave the derivation to each sampler."""
    together = [Sampler(SPECS_T, SPECS_P, seed, r) for r in reps]
    for kind in (0, 1):
        Sampler.prepare_together(together, kind, first)
    for s in together:
        alone = Sampler(SPECS_T, SPECS_P, seed, s.replication)
        for name in ("duration_block", "hold_block"):
            got = getattr(s, name)(first, count)
            np.testing.assert_array_equal(got, getattr(alone, name)(first, count))
        k = first + count - 1
        assert s.duration_block(k, 1)[0, 2] == _contract_draw(SPECS_T, seed, s.replication,
                                                              0, 2, k)
        assert s.hold_block(k, 1)[0, 3] == _contract_draw(SPECS_P, seed, s.replication, 1, 3, k)


def test_sequential_equals_bulk_and_blocks():
    """One firing at a time (the SimPy engine), one long request, the all-element blocks and
    requests in reverse order give the same numbers, even with a cache that keeps nothing."""
    n = 2 * BLOCK + 37
    bulk = Sampler(SPECS_T, SPECS_P, 99)
    tiny = Sampler(SPECS_T, SPECS_P, 99, cache_bytes=0)
    for t in range(4):
        one = np.concatenate([tiny.duration(t, k) for k in range(1, n + 1)])
        assert np.array_equal(one, bulk.duration(t, 1, n))
    pieces = [(1, 10), (11, BLOCK), (11 + BLOCK, n - 10 - BLOCK)]
    table = np.vstack([bulk.duration_block(f, c) for f, c in pieces])
    assert table.shape == (n, 4)
    backwards = Sampler(SPECS_T, SPECS_P, 99)
    for f, c in reversed(pieces):
        for t in reversed(range(4)):
            assert np.array_equal(table[f - 1 : f - 1 + c, t], backwards.duration(t, f, c))
    holds = Sampler(SPECS_T, SPECS_P, 99).hold_block(5, 700)
    assert holds.shape == (700, 4)
    assert np.array_equal(holds[:, 3], bulk.hold(3, 5, 700))
    assert np.all(holds[:, 0] == 0.5) and np.all(holds[:, 2] == 0.0)


def test_same_seed_same_numbers_other_seed_or_replication_differs():
    a = Sampler(SPECS_T, SPECS_P, 1).duration(0, 1, 500)
    assert np.array_equal(a, Sampler(SPECS_T, SPECS_P, 1).duration(0, 1, 500))
    assert not np.array_equal(a, Sampler(SPECS_T, SPECS_P, 2).duration(0, 1, 500))
    rep = Sampler(SPECS_T, SPECS_P, 1, replication=1).duration(0, 1, 500)
    assert not np.array_equal(a, rep)
    assert np.array_equal(rep, Sampler(SPECS_T, SPECS_P, 1).for_replication(1).duration(0, 1, 500))
    # the same law on two elements, or as duration and as hold, gets its own stream
    same = Sampler([SPECS_T[0]] * 2, [SPECS_T[0]], 1)
    assert not np.array_equal(same.duration(0, 1, 50), same.duration(1, 1, 50))
    assert not np.array_equal(same.duration(0, 1, 50), same.hold(0, 1, 50))


def test_replications_are_uncorrelated():
    """Sample correlation of paired draws across replications stays within 4/√n of 0
    (common practice, no source: the standard error of r under independence is ~1/√n)."""
    n = 20_000
    x = Sampler(["exponential(mean=1)"], [], 7, 0).duration(0, 1, n)
    y = Sampler(["exponential(mean=1)"], [], 7, 1).duration(0, 1, n)
    assert abs(np.corrcoef(x, y)[0, 1]) < 4 / math.sqrt(n)


def test_global_random_state_untouched():
    """Sampling never reads or advances numpy's global random state."""
    before = np.random.get_state()  # noqa: NPY002 -- the legacy global state is the subject
    s = Sampler(SPECS_T, SPECS_P, None)
    s.duration_block(1, 100)
    s.hold(3, 1, 50)
    parse_spec("normal(mean=1, sd=1, truncate=true)").sample(np.random.default_rng(1), 10)
    after = np.random.get_state()  # noqa: NPY002 -- same
    assert before[0] == after[0] and np.array_equal(before[1], after[1])
    assert before[2:] == after[2:]


def test_seed_none_records_entropy():
    s = Sampler(SPECS_T, SPECS_P, None)
    assert isinstance(s.seed, int)
    again = Sampler(SPECS_T, SPECS_P, s.seed)
    assert np.array_equal(s.duration(0, 1, 20), again.duration(0, 1, 20))


def test_fixed_elements_need_no_generator(monkeypatch):
    """A model with fixed numbers only never builds a generator."""
    def boom(*args, **kwargs):
        raise AssertionError("a generator was built")

    monkeypatch.setattr(np.random, "PCG64", boom)
    s = Sampler([1.0, 2.0], [0.5], 3)
    assert not s.is_random
    assert s.duration_block(1, 4).tolist() == [[1.0, 2.0]] * 4
    assert s.hold(0, 10, 2).tolist() == [0.5, 0.5]


def test_sampler_pickles_without_its_cache():
    s = Sampler(SPECS_T, SPECS_P, 11)
    a = s.duration(0, 1, 30)
    back = pickle.loads(pickle.dumps(s))
    assert back._cache == {} and np.array_equal(back.duration(0, 1, 30), a)


@pytest.mark.parametrize(
    ("call", "error"),
    [(lambda s: s.duration(9, 1), IndexError), (lambda s: s.duration(0, 0), ValueError),
     (lambda s: s.hold(0, 1, -1), ValueError), (lambda s: s.duration_block(1.5, 1), ValueError)],
)
def test_sampler_rejects_bad_requests(call, error):
    with pytest.raises(error):
        call(Sampler(SPECS_T, SPECS_P, 1))


def test_sampler_rejects_bad_seed():
    with pytest.raises(ValueError, match="seed"):
        Sampler(SPECS_T, SPECS_P, -1)
    with pytest.raises(ValueError, match="replication"):
        Sampler(SPECS_T, SPECS_P, 1, replication=True)


# ----------------------------------------------------------------------------- spec tables

def test_spec_table():
    """Numbers are stored in one array, laws by code; indexing, means and equality agree."""
    table = SpecTable.from_specs([*SPECS_T, SPECS_T[0]])
    assert len(table) == 5 and len(table.laws) == 3
    assert [table[i] for i in range(5)] == [parse_spec(s) for s in [*SPECS_T, SPECS_T[0]]]
    assert table.means.tolist() == [parse_spec(s).mean for s in [*SPECS_T, SPECS_T[0]]]
    assert table.random_elements.tolist() == [0, 2, 3, 4]
    assert table.variances[1] == 0 and table.variances[0] == pytest.approx(2.25)
    both = SpecTable.concat([table, SpecTable.from_specs(SPECS_P)])
    assert list(both) == list(table) + [parse_spec(s) for s in SPECS_P]
    assert both == SpecTable.from_specs([*SPECS_T, SPECS_T[0], *SPECS_P])
    assert both != table and table != SpecTable.from_specs([1.0] * 5)
    assert not SpecTable(np.array([1.0, 2.0])).is_random
    fixed = SpecTable(np.array([1.0, 2.0]), [-1, -1])
    assert fixed.random_elements.tolist() == [] and fixed.random_elements.dtype == np.intp
    # one table: itself when its laws are distinct; a law given twice is merged
    assert SpecTable.concat([table]) is table
    twice = SpecTable(np.zeros(3), [0, 1, -1], (parse_spec(SPECS_T[0]), parse_spec(SPECS_T[0])))
    merged = SpecTable.concat([twice])
    assert merged.laws == (parse_spec(SPECS_T[0]),) and merged.codes.tolist() == [0, 0, -1]
    assert merged == twice and merged.random_elements.tolist() == [0, 1]
    # a fixed law given as a law is stored as a number
    laws = (parse_spec("fixed(value=2)"), parse_spec(SPECS_T[0]))
    coded = SpecTable(np.zeros(3), [0, 1, -1], laws)
    assert coded.laws == laws[1:] and coded.codes.tolist() == [-1, 0, -1]
    assert coded.values.tolist() == [2.0, 3.0, 0.0]
    assert coded == SpecTable.from_specs([2.0, SPECS_T[0], 0.0])
    with pytest.raises(ValueError):
        SpecTable(np.array([-1.0]))


def test_spec_table_describes_its_elements_as_they_describe_themselves():
    """``describe(stop)``: the text of each of the first elements, laws and numbers alike."""
    table = SpecTable.from_specs([*SPECS_T, 0.1234567, 1e-7, 2.0, SPECS_T[0], 123456789.0])
    texts = [table[i].describe() for i in range(len(table))]
    assert table.describe() == texts
    assert table.describe(3) == texts[:3] and table.describe(100) == texts
    assert SpecTable(np.zeros(0)).describe() == []


# ----------------------------------------------------------------------------- how draws are made


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**80), keys=st.lists(
    st.tuples(*[st.integers(0, 2**32 - 1)] * 4), min_size=1, max_size=20))
def test_pcg64_states_equal_numpy(seed, keys):
    """The vectorized derivation gives the state of ``PCG64(SeedSequence(seed, spawn_key))``
    exactly, as numpy computes it (NumPy documentation, "SeedSequence" and "PCG64": the
    reference implementation of the spawn-key contract)."""
    got = pcg64_states(seed, np.array(keys, dtype=np.uint64))
    for key, (state, inc) in zip(keys, got, strict=True):
        ref = np.random.PCG64(np.random.SeedSequence(seed, spawn_key=key)).state["state"]
        assert (state, inc) == (ref["state"], ref["inc"])


@pytest.mark.parametrize("spec", [c[0] for c in CASES] + [{"dist": "empirical",
                                                            "values": EMPIRICAL}],
                         ids=lambda x: str(x)[:40])
@pytest.mark.parametrize("cut", [1, 37, 1000])
def test_blocks_drawn_in_pieces_equal_blocks_drawn_at_once(spec, cut):
    """Every law draws its values one after the other from the stream: drawing ``cut`` values,
    saving the generator state, restoring it and drawing the rest gives the numbers of one call
    (what lets the sampler draw a block only as far as it is asked for)."""
    law = parse_spec(spec)
    whole = law.sample(np.random.Generator(np.random.PCG64(123)), 3000)
    bitgen = np.random.PCG64(123)
    head = law.sample(np.random.Generator(bitgen), cut)
    saved = bitgen.state
    other = np.random.PCG64(999)
    other.state = saved
    tail = law.sample(np.random.Generator(other), 3000 - cut)
    assert np.array_equal(np.concatenate([head, tail]), whole)


def test_no_seed_sequence_on_the_hot_path(monkeypatch):
    """Drawing the blocks of many elements builds no SeedSequence and no new PCG64 per block:
    the states are derived in one pass and set on one generator. The numbers are those of the
    contract (the slow twin above)."""
    specs = [{"dist": "exponential", "mean": 1.0 + e} for e in range(50)]
    expected = [_contract_draw(specs, 5, 2, 0, e, k) for e in (0, 49) for k in (1, 700, BLOCK + 3)]
    built = []
    real = np.random.SeedSequence

    def counting(*args, **kwargs):
        built.append(args)
        return real(*args, **kwargs)

    monkeypatch.setattr(np.random, "SeedSequence", counting)
    s = Sampler(specs, [], 5, 2)
    table = np.vstack([s.duration_block(1, 1000), s.duration_block(1001, BLOCK)])
    got = [table[k - 1, e] for e in (0, 49) for k in (1, 700, BLOCK + 3)]
    assert got == expected
    assert built == []
