"""The argmax record and the sums along critical paths, against slow twins written here.

* the record of :class:`RandomRecursion` (``setters=True``) equals a plain-Python recursion that
  keeps, for every firing, the first input place (by index) reaching the maximum;
* the path sums of :class:`LineageSweep` equal a plain-Python walk back from every frontier
  transition's last firing, and satisfy ``Σ_e draw-weighted sums = mean of x_t(K)`` (every
  firing time is the sum of the draws along its critical path);
* finite differences of the recursion with common random numbers (every draw of one element
  scaled by 1 ± ε, everything else the same) equal the derivative per replication: the
  firing times are piecewise linear in the scale, so the two agree to rounding unless a
  maximum changes its argument within ε (Glasserman 1991, ch. 3: infinitesimal perturbation
  analysis is the pathwise derivative);
* windows with a look-ahead give the exact sums on a closed line whose paths coalesce.
"""

from __future__ import annotations

import math

import numpy as np
from cyclecheck.algebra.eventgraph import EventGraph
from cyclecheck.algebra.exceptions import InvalidArray
from cyclecheck.algebra.lineage import PathSums, path_estimates
from cyclecheck.algebra.recursion import RandomRecursion
from hypothesis import given, settings
from hypothesis import strategies as st

from tests.strategies import live_event_graphs
from tests.test_recursion import slow_recursion


def slow_paths(g: EventGraph, dur: np.ndarray, hold: np.ndarray, frontier: list[int]):
    """Firing times and the argmax record of the plain-Python recursion of test_recursion.py,
    and, per element, the sums of draws and of visits along the critical paths from the
    frontier's last firings (weight 1/|frontier| each), walked back here."""
    n, m = g.n_transitions, g.n_places
    K = dur.shape[0]
    setter: dict[tuple[int, int], int] = {}
    times, _ = slow_recursion(g, K, dur, hold, record=setter)
    weighted = np.zeros(n + m)
    visits = np.zeros(n + m)
    for t0 in frontier:
        t, k = t0, K
        while True:
            weighted[t] += dur[k - 1, t] / len(frontier)
            visits[t] += 1 / len(frontier)
            p = setter[t, k]
            mp = int(g.tokens[p])
            if k <= mp:
                break
            weighted[n + p] += hold[k - 1, p] / len(frontier)
            visits[n + p] += 1 / len(frontier)
            t, k = int(g.source[p]), k - mp
    record = np.array([[setter[t, k] for t in range(n)] for k in range(1, K + 1)]).reshape(K, n)
    return times, record, weighted, visits


def source(draws: np.ndarray):
    return lambda first, count: draws[first - 1 : first - 1 + count]


@st.composite
def setups(draw):
    g = draw(live_event_graphs(max_transitions=5, max_places=10))
    R = draw(st.integers(1, 3))
    K = draw(st.integers(1, 12))
    rng = np.random.default_rng(np.random.SeedSequence(draw(st.integers(0, 2**32 - 1))))
    dur = rng.exponential(2.0, size=(K, R, g.n_transitions))
    if draw(st.booleans()):
        hold = rng.integers(0, 3, size=(K, R, g.n_places)).astype(float)  # ties happen
    else:
        hold = rng.exponential(1.0, size=(K, R, g.n_places))
    frontier = sorted(draw(st.sets(st.integers(0, g.n_transitions - 1), min_size=1)))
    return g, R, K, dur, hold, frontier


@settings(max_examples=100, deadline=None)
@given(setups(), st.integers(1, 5))
def test_record_and_path_sums_match_the_slow_twin(setup, block):
    """Per replication: the argmax record, the draw-weighted sums and the visit counts along
    the critical paths equal the plain-Python walk (ties of integer holds included)."""
    g, R, K, dur, hold, frontier = setup
    rec = RandomRecursion(g, source(dur), source(hold), R)
    sweep = rec.track_lineage([frontier], [0, K])
    out = rec.run(K, block=block, setters=True, record=True)
    sums = sweep.finish()
    assert sums.lookahead is None
    for r in range(R):
        times, record, weighted, visits = slow_paths(g, dur[:, r], hold[:, r], frontier)
        np.testing.assert_allclose(out.times[:, r], times, rtol=1e-12)
        np.testing.assert_array_equal(out.setters[:, r], record)
        np.testing.assert_allclose(sums.weighted[r, 0, 0], weighted, rtol=1e-12, atol=1e-12)
        np.testing.assert_allclose(sums.mass[r, 0, 0], visits, rtol=1e-12, atol=1e-12)
        # every firing time is the sum of the draws along its critical path
        x_last = np.array([rec.state()[r, t] for t in frontier]).mean()
        assert math.isclose(sums.weighted[r, 0, 0].sum(), x_last, rel_tol=1e-12)


def test_segments_split_the_sums():
    """Segments add up to the whole, and the warm-up cut starts at a segment boundary."""
    g = EventGraph([1.0, 1.0], [0, 1, 0, 1], [1, 0, 0, 1], [0, 2, 1, 1], [0.0] * 4)
    rng = np.random.default_rng(np.random.SeedSequence(3))
    dur = rng.exponential(1.0, size=(300, 2, 2))
    hold = np.zeros((300, 2, 4))
    whole = RandomRecursion(g, source(dur), source(hold), 2)
    w = whole.track_lineage([[0, 1]], [0, 300])
    whole.run(300)
    parts = RandomRecursion(g, source(dur), source(hold), 2)
    p = parts.track_lineage([[0, 1]], [0, 50, 120, 300])
    parts.run(100)
    parts.run(200)
    a, b = w.finish(), p.finish()
    np.testing.assert_allclose(b.weighted.sum(axis=2), a.weighted[:, :, 0], rtol=1e-12)
    d, _, first = path_estimates(b, np.array([1.0, 1.0, 0, 0, 0, 0]), 60, np.zeros(2, int))
    assert first == 120
    np.testing.assert_allclose(d[:, :2], b.weighted[:, 0, 2, :2] / 180)


def _closed_line(means, customers):
    k = len(means)
    src = [*range(k), *range(k)]
    dst = [*range(k), *((i + 1) % k for i in range(k))]
    tok = [1] * k + [0] * (k - 1) + [customers]
    return EventGraph(means, src, dst, tok, [0.0] * (2 * k))


def _derivatives(g, dur, hold, R, K, **kw) -> tuple[np.ndarray, PathSums]:
    rec = RandomRecursion(g, source(dur), source(hold), R)
    sweep = rec.track_lineage([list(range(g.n_transitions))], [0, K], **kw)
    rec.run(K)
    sums = sweep.finish()
    means = np.r_[g.duration, g.hold]
    d, _, _ = path_estimates(sums, means, 0, np.zeros(R, dtype=np.int64))
    return d, sums


def test_finite_differences_with_common_random_numbers():
    """Central differences of the mean last firing time, each element's draws scaled by
    1 ± 1e-7 on the same draws, equal the path derivative per replication (a closed line of
    exponential stations, and a place with an exponential hold)."""
    g = _closed_line([1.0, 0.5, 0.8], 2).with_values(np.array([1.0, 0.5, 0.8]),
                                                      np.array([0, 0, 0, 0.4, 0, 0.0]))
    R, K = 4, 400
    rng = np.random.default_rng(np.random.SeedSequence(17))
    dur = rng.exponential(g.duration, size=(K, R, 3))
    hold = rng.exponential(1.0, size=(K, R, 6)) * g.hold
    d, _ = _derivatives(g, dur, hold, R, K)
    eps = 1e-7
    for e in range(9):
        means = np.r_[g.duration, g.hold]
        plus, minus = dur.copy(), dur.copy()
        hp, hm = hold.copy(), hold.copy()
        if e < 3:
            plus[..., e] *= 1 + eps
            minus[..., e] *= 1 - eps
        elif means[e] > 0:
            hp[..., e - 3] *= 1 + eps
            hm[..., e - 3] *= 1 - eps
        else:  # an element of mean 0: a shift
            hp[..., e - 3] += eps
            hm[..., e - 3] = np.maximum(hm[..., e - 3] - eps, 0.0)
        step = 2 * eps * means[e] if means[e] > 0 else eps  # the shift down is cut at 0
        up = RandomRecursion(g, source(plus), source(hp), R)
        up.run(K)
        down = RandomRecursion(g, source(minus), source(hm), R)
        down.run(K)
        fd = (up.state().mean(axis=1) - down.state().mean(axis=1)) / (step * K)
        if means[e] == 0:
            # shift up only (holds cannot go below 0): one-sided
            base = RandomRecursion(g, source(dur), source(hold), R)
            base.run(K)
            fd = (up.state().mean(axis=1) - base.state().mean(axis=1)) / (eps * K)
        np.testing.assert_allclose(d[:, e], fd, rtol=1e-5, atol=1e-7, err_msg=f"element {e}")


def test_windows_agree_with_the_exact_sums_when_paths_coalesce():
    """A closed line of five exponential stations: windows of about 200 firings with a
    look-ahead of 50 give the exact path sums (the paths from the window's end and from the
    last firing have merged within the look-ahead)."""
    g = _closed_line([1.0, 1.25, 0.8, 1.0, 1.5], 3)
    R, K = 3, 3000
    rng = np.random.default_rng(np.random.SeedSequence(5))
    dur = rng.exponential(g.duration, size=(K, R, 5))
    hold = np.zeros((K, 1, 10))
    exact, sums = _derivatives(g, dur, hold, R, K)
    assert sums.lookahead is None
    per_firing = 5 * 12 + 10 * 8  # bytes per firing and replication
    windowed, wsums = _derivatives(g, dur, hold, R, K, memory=200 * per_firing, lookahead=50)
    assert wsums.lookahead == 50
    np.testing.assert_allclose(windowed, exact, rtol=1e-9, atol=1e-12)


def test_a_window_too_small_for_memory_says_so():
    """When not even four look-aheads fit in the memory budget, nothing is summed and the sums
    say why."""
    g = _closed_line([1.0, 1.0], 1)
    rng = np.random.default_rng(np.random.SeedSequence(6))
    dur = rng.exponential(1.0, size=(1000, 2, 2))
    rec = RandomRecursion(g, source(dur), source(np.zeros((1000, 1, 4))), 2)
    sweep = rec.track_lineage([[0, 1]], [0, 1000], memory=5_000)
    rec.run(1000)
    sums = sweep.finish()
    assert sums.skipped is not None and "MiB" in sums.skipped
    assert not sums.weighted.any()


def test_path_sums_of_other_windows_are_not_joined():
    """Sums over windows of another size are other numbers: joining them would make a result
    depend on how replications were split, so concatenate refuses; ``after`` keeps what
    path_estimates reads."""
    seg = np.array([0, 10, 20, 30])
    rng = np.random.default_rng(3)
    a = PathSums(seg, rng.random((2, 1, 3, 4)), rng.random((2, 1, 3, 4)), None)
    b = PathSums(seg, rng.random((1, 1, 3, 4)), rng.random((1, 1, 3, 4)), 50)
    try:
        PathSums.concatenate([a, b])
    except InvalidArray as exc:
        assert "cannot be joined" in str(exc)
    else:
        raise AssertionError("sums with another look-ahead were joined")
    joined = PathSums.concatenate([a, a])
    assert joined.weighted.shape == (4, 1, 3, 4)
    means = np.array([1.0, 2.0, 0.0, 0.5])
    for start in (0, 5, 10, 25, 40):
        full = path_estimates(a, means, start, np.array([0, 0]))
        short = path_estimates(a.after(start), means, start, np.array([0, 0]))
        np.testing.assert_allclose(short[0], full[0], rtol=1e-15)
        np.testing.assert_allclose(short[1], full[1], rtol=1e-15)
        assert short[2] == full[2]
