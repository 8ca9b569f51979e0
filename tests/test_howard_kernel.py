"""The compiled Howard kernel (algebra/kernels.py, numba) against its numpy twin and the outside
references, and both near the float limit.

Twins: ``howard(graph, kernel="numba")`` and ``howard(graph, kernel="numpy")`` make the same
comparisons on the same formulas, so they must visit the same policies and report the same
circuits; their biases are sums added in another order and agree to rounding. The cycle times
of both are checked against brute force over simple circuits (networkx.simple_cycles; Baccelli,
Cohen, Olsder & Quadrat, *Synchronization and Linearity*, 1992, ch. 2-3: the cycle time of a
timed event graph is its maximum cycle ratio) in tests/test_spectral_reference.py; here the
kernel is also run on large random graphs, where only the twin and the certificate can judge.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from cyclecheck.algebra.analysis import analyze_graph
from cyclecheck.algebra.critical import certify, critical_places, cyclicity, slack
from cyclecheck.algebra.eventgraph import EventGraph
from cyclecheck.algebra.exceptions import OutOfRange
from cyclecheck.algebra.spectral import KERNEL_MIN_PLACES, howard
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.strategies import live_event_graphs

TWIN = settings(max_examples=200, derandomize=True, deadline=None,
                suppress_health_check=[HealthCheck.too_slow])


def _assert_twins(graph: EventGraph) -> None:
    a = howard(graph, kernel="numba")
    b = howard(graph, kernel="numpy")
    assert a.iterations == b.iterations
    assert np.array_equal(a.policy, b.policy)
    np.testing.assert_allclose(a.cycle_time, b.cycle_time, rtol=1e-13, atol=0)
    # Biases: the same sums in another order; rounding is relative to the terms summed.
    assert np.all(np.abs(a.bias - b.bias) <= 1e-12 * np.maximum(b.bias_scale, 1.0))
    np.testing.assert_allclose(a.bias_scale, b.bias_scale, rtol=1e-12, atol=1e-300)
    assert [c.transitions for c in a.circuits] == [c.transitions for c in b.circuits]
    assert [c.places for c in a.circuits] == [c.places for c in b.circuits]
    assert [(c.weight, c.tokens) for c in a.circuits] == [(c.weight, c.tokens) for c in b.circuits]
    assert certify(graph, a).holds and certify(graph, b).holds
    crit = critical_places(graph, a)
    assert np.array_equal(crit, critical_places(graph, b))
    assert cyclicity(graph, a, crit) == cyclicity(graph, b, crit)
    sa, sb = slack(graph, a), slack(graph, b)
    scale = max(1.0, float(graph.weight.max(initial=0.0)))
    np.testing.assert_allclose(sa.places, sb.places, rtol=1e-9, atol=1e-9 * scale)


@TWIN
@given(live_event_graphs())
def test_kernel_twins_on_small_graphs(graph):
    """Same policies, iterations, circuits and cycle times; the same critical graph, cyclicity
    and slack from either result; both certificates hold."""
    _assert_twins(graph)


@TWIN
@given(live_event_graphs(strongly_connected=False, min_transitions=2, max_transitions=12,
                         max_places=30))
def test_kernel_twins_on_graphs_with_several_cycle_times(graph):
    """Graphs that are not strongly connected: several cycle times, spreading between them."""
    _assert_twins(graph)


def _random_graph(n: int, m: int, seed: int) -> EventGraph:
    """A ring through all transitions in random order (each place one token with probability
    1/2, at least one) and random chords with 1-3 tokens: live and strongly connected (the
    generator of tests/bench/_graphs.py)."""
    rng = np.random.default_rng(seed)
    order = rng.permutation(n)
    ring_tok = (rng.random(n) < 0.5).astype(np.int64)
    ring_tok[rng.integers(n)] = 1
    c = m - n
    source = np.concatenate([order, rng.integers(0, n, c)])
    target = np.concatenate([np.roll(order, -1), rng.integers(0, n, c)])
    tokens = np.concatenate([ring_tok, rng.integers(1, 4, c)])
    return EventGraph(np.round(rng.uniform(0.5, 5.0, n), 3), source, target, tokens,
                      np.round(rng.uniform(0.0, 2.0, m), 3))


@pytest.mark.parametrize(("n", "m", "seed"), [(300, 1000, 1), (3000, 10_000, 2),
                                              (20_000, 60_000, 3)])
def test_kernel_twins_on_random_graphs(n, m, seed):
    """Random live graphs of the benchmarks, beyond what brute force can check."""
    _assert_twins(_random_graph(n, m, seed))


def test_kernel_twins_when_the_ratio_spreads():
    """Two components, one upstream of a long chain: the largest ratio is spread downstream
    (the step that runs after eight eta improvements in a row)."""
    n = 400
    ring = np.arange(n)
    # a slow self-loop feeding a long token-holding chain that closes on itself
    source = np.concatenate([[0], ring[:-1], [n - 1]])
    target = np.concatenate([[0], ring[1:], [1]])
    tokens = np.concatenate([[1], np.ones(n - 1, int), [1]])
    duration = np.r_[50.0, np.full(n - 1, 1.0)]
    graph = EventGraph(duration, source, target, tokens, np.zeros(source.size))
    _assert_twins(graph)
    assert howard(graph, kernel="numba").cycle_time.tolist() == [50.0] * n


def test_auto_picks_by_size():
    """``kernel="auto"`` gives the numpy result on small graphs and the compiled one on large
    ones; both equal the explicit choices."""
    small = _random_graph(100, 300, 4)
    assert np.array_equal(howard(small).bias, howard(small, kernel="numpy").bias)
    n = KERNEL_MIN_PLACES // 3 + 1
    large = _random_graph(n, 3 * n, 5)
    result = howard(large)
    assert np.array_equal(result.bias, howard(large, kernel="numba").bias)
    assert certify(large, result).holds  # its path sums by the compiled walk too
    with pytest.raises(ValueError, match="kernel must be one of"):
        howard(small, kernel="fortran")


# ----------------------------------------------------------------------------- float limit


@pytest.mark.parametrize("kernel", ["numba", "numpy"])
def test_circuit_weight_beyond_the_float_range(kernel):
    """Two transitions of duration 1e308 in a loop with one token: the circuit weight 2e308 is
    not a double, so the cycle time cannot be given: OutOfRange, not a traceback."""
    loop = EventGraph([1e308, 1e308], [0, 1], [1, 0], [0, 1], [0.0, 0.0])
    with pytest.raises(OutOfRange, match="range of floating point"):
        howard(loop, kernel=kernel)
    with pytest.raises(OutOfRange):
        analyze_graph(loop)
    # a place whose hold plus its target's duration is already beyond it
    with pytest.raises(OutOfRange, match="hold of place 0"):
        howard(EventGraph([1e308], [0], [0], [1], [1e308]), kernel=kernel)


@pytest.mark.parametrize("kernel", ["numba", "numpy"])
def test_bias_is_summed_without_overflow(kernel):
    """A self-loop of weight 1e308 (one token) feeding a chain of places with one token and
    weight 1e308 each: every cycle time is 1e308 and every bias 0 (each link adds
    w - eta m = 0), although the weights along the chain add up far beyond 1.8e308."""
    n = 4
    graph = EventGraph(np.full(n, 1e308), np.r_[0, np.arange(n - 1)], np.r_[0, np.arange(1, n)],
                       np.ones(n, int), np.zeros(n))
    result = howard(graph, kernel=kernel)
    assert result.cycle_time.tolist() == [1e308] * n
    assert result.bias.tolist() == [0.0] * n
    assert np.all(np.isfinite(result.bias_scale))


def test_analysis_near_the_float_limit():
    """A duration of 1.5e308 on a single server: the cycle time is exact, the certificate
    holds; the characteristic maxpolynomial (sums of several entries) and the transient (firing
    times beyond the range) are skipped with a note instead of crashing."""
    graph = EventGraph([1.5e308, 1.0], [0, 0, 1], [0, 1, 1], [1, 0, 1], [0.0] * 3)
    result = analyze_graph(graph)
    assert result.cycle_time == 1.5e308 and result.certificate.holds
    assert result.charpoly is None and "range of floating point" in result.charpoly_note
    assert result.transient is None and result.transient_horizon == 0


# ----------------------------------------------------------------------------- the cache


_RING = """
import numpy as np
from numba.core import caching
from cyclecheck.algebra.eventgraph import EventGraph
from cyclecheck.algebra.spectral import howard
if {only_cache_dir}:
    # numba looks beside the sources and in the user's cache folder too; keep it to
    # NUMBA_CACHE_DIR alone, so that no location is writable at all
    # (numba 0.68 names them CacheImpl, UserProvidedCacheLocator; other versions with a _)
    impl = getattr(caching, "CacheImpl", None) or getattr(caching, "_CacheImpl")
    user = (getattr(caching, "UserProvidedCacheLocator", None)
            or getattr(caching, "_UserProvidedCacheLocator"))
    impl._locator_classes = [user]
from cyclecheck.algebra import kernels
n = 50
g = EventGraph(np.arange(1.0, n + 1), np.arange(n), (np.arange(n) + 1) % n,
               np.r_[np.zeros(n - 1, int), 2], np.zeros(n))
print(kernels.CACHED, repr(howard(g, kernel="numba").max_cycle_time))
"""


@pytest.mark.skipif(not Path("/proc/self").exists(), reason="needs /proc, never writable")
@pytest.mark.parametrize("only_cache_dir", [False, True])
def test_kernels_run_where_the_cache_cannot_be_written(only_cache_dir):
    """NUMBA_CACHE_DIR in /proc (no one, root included, can create a folder there): the
    kernels still run and give the ring's cycle time, (sum of durations 1..50) / 2 tokens.
    With numba's other cache locations taken away too, nothing can be cached: the kernels are
    compiled in memory (``kernels.CACHED`` is False), same answer."""
    env = {**os.environ, "NUMBA_CACHE_DIR": "/proc/cyclecheck-numba-cache"}
    out = subprocess.run([sys.executable, "-c", _RING.format(only_cache_dir=only_cache_dir)],
                         env=env, cwd=str(Path(__file__).resolve().parents[1]),
                         capture_output=True, text=True, timeout=600)
    assert out.returncode == 0, out.stderr
    cached, value = out.stdout.split()
    if only_cache_dir:
        assert cached == "False"
    assert float(value) == 50 * 51 / 2 / 2


@settings(max_examples=100, derandomize=True, deadline=None)
@given(st.lists(st.integers(0, 30), min_size=1, max_size=31).flatmap(
    lambda p: st.tuples(st.just([x % len(p) for x in p]),
                        st.lists(st.floats(0, 100), min_size=len(p), max_size=len(p)))))
def test_path_sums_twins(case):
    """The compiled walk over a functional graph finds the circuits numpy's pointer doubling
    finds (one root per circuit, its smallest node) and the same sums along the paths."""
    from cyclecheck.algebra import kernels
    from cyclecheck.algebra.spectral import _policy_cycles, chain_sums

    pred, link = np.array(case[0], dtype=np.int64), np.array(case[1])
    is_root, total = kernels.path_sums(pred, link)
    expected_roots = _policy_cycles(pred)
    _, (expected,) = chain_sums(np.where(expected_roots, np.arange(pred.size), pred), link)
    assert np.array_equal(is_root, expected_roots)
    np.testing.assert_allclose(total, expected, rtol=1e-12, atol=1e-12)
    # and by the definition: total[t] = link[t] + total[pred[t]] off the roots, 0 on them
    off = ~is_root
    np.testing.assert_allclose(total[off], link[off] + total[pred[off]], rtol=1e-12, atol=1e-12)
    assert np.all(total[is_root] == 0)


_IMPORTS = """
import sys
from cyclecheck.simulate.cli import main
sys.argv = {argv!r}
try:
    main()
except SystemExit:
    pass
print("numba" in sys.modules, "pyarrow" in sys.modules, "scipy" in sys.modules,
      file=sys.stderr)
"""


@pytest.mark.parametrize(("argv", "expected"), [
    (["cyclecheck", "--help"], "False False False"),
    (["cyclecheck", "analyze", "models/packaging_cell.toml", "--json"], "False False False"),
])
def test_small_runs_do_not_load_numba(argv, expected):
    """``cyclecheck --help`` and the analysis of a small model import neither numba (about 0.5 s
    of start-up, and a compilation on a first run) nor pyarrow (the CSV reader) nor scipy
    (0.3 s for scipy.sparse: small graphs are walked in Python, algebra/digraph.py)."""
    out = subprocess.run([sys.executable, "-c", _IMPORTS.format(argv=argv)],
                         cwd=str(Path(__file__).resolve().parents[1]), capture_output=True,
                         text=True, timeout=600)
    assert out.stderr.strip().splitlines()[-1] == expected, out.stderr
