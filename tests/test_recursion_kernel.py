"""The compiled recursion and lineage sweep (algebra/recursion_kernel.py, numba) against their
numpy twins, bit for bit, and the SimPy engine against both.

Twins: ``RandomRecursion(..., kernel="numba")`` and ``kernel="numpy"`` perform the same
floating-point operations in the same order (a start is the largest term, a completion start +
duration, a term the producing completion + hold; path sums added one firing at a time from the
newest), so every number they return must be equal to the last bit: firing times, checkpoints,
the argmax record, the criticality counts, busy times and the sums along the critical paths.
Both are checked against the formula itself (a plain-Python recursion, the slow twin of
tests/test_recursion.py, which follows Baccelli, Cohen, Olsder & Quadrat, *Synchronization and
Linearity*, 1992, §2.5) in tests/test_recursion.py and tests/test_lineage.py; the SimPy engine
(another implementation of the same semantics, event by event) is held here to the compiled
one bit for bit.

The compiled kernels are shared by all the tests of this process (numba compiles them once, or
loads them from its cache); the cache tests run in subprocesses of their own.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest
from cyclecheck.algebra import recursion
from cyclecheck.algebra.eventgraph import EventGraph
from cyclecheck.algebra.recursion import RandomRecursion, choose_kernel, within
from cyclecheck.simulate.engine import simulate_event_graph
from cyclecheck.simulate.experiment import run_replications
from cyclecheck.simulate.modelfile import load_model
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.strategies import live_event_graphs

pytest.importorskip("numba")

ROOT = Path(__file__).resolve().parents[1]
MODELS = sorted((ROOT / "models").glob("*.toml"))
TWIN = settings(max_examples=150, derandomize=True, deadline=None,
                suppress_health_check=[HealthCheck.too_slow])


def same_bits(a: np.ndarray | None, b: np.ndarray | None) -> bool:
    """Equal shapes, types and bytes (``array_equal`` would let -0.0 pass for 0.0)."""
    if a is None or b is None:
        return a is None and b is None
    a, b = np.ascontiguousarray(a), np.ascontiguousarray(b)
    return a.dtype == b.dtype and a.shape == b.shape and a.tobytes() == b.tobytes()


def source(draws: np.ndarray):
    return lambda first, count: draws[first - 1 : first - 1 + count]


@st.composite
def setups(draw):
    """A live graph, replications, firings, draws (ties from integer values included; zero
    holds take the path without additions), frontiers, segments, checkpoint spacing and where
    the run is split into two calls."""
    g = draw(live_event_graphs(max_transitions=7, max_places=16))
    R = draw(st.integers(1, 4))
    K = draw(st.integers(1, 40))
    rng = np.random.default_rng(np.random.SeedSequence(draw(st.integers(0, 2**32 - 1))))
    kind = draw(st.sampled_from(["exponential", "integer"]))
    if kind == "exponential":
        dur = rng.exponential(2.0, size=(K, R, g.n_transitions))
    else:
        dur = rng.integers(0, 3, size=(K, R, g.n_transitions)).astype(float)
    holds = draw(st.sampled_from(["zero", "integer", "exponential"]))
    if holds == "zero":
        hold = np.zeros((K, 1, g.n_places))
    elif holds == "integer":
        hold = rng.integers(0, 3, size=(K, R, g.n_places)).astype(float)
    else:
        hold = rng.exponential(1.0, size=(K, R, g.n_places))
    n = g.n_transitions
    fronts = draw(st.lists(st.sets(st.integers(0, n - 1), min_size=1), min_size=1, max_size=2))
    cuts = draw(st.sets(st.integers(0, K), min_size=2, max_size=5))
    return (g, R, K, dur, hold, [sorted(f) for f in fronts], sorted(cuts),
            draw(st.integers(1, 9)), draw(st.integers(0, K)))


def run_engine(setup, kernel: str, **lineage):
    """Everything the recursion returns for a setup on one engine, streamed in two calls."""
    g, R, K, dur, hold, fronts, segments, block, split = setup
    rec = RandomRecursion(g, source(dur), source(hold), R, kernel=kernel)
    assert rec.kernel == kernel
    sweep = rec.track_lineage(fronts, segments, **lineage)
    outs = [rec.run(split, block, record=True, setters=True),
            rec.run(K - split, block, record=True, setters=True)]
    return outs, sweep.finish(), rec.state()


def assert_twins(a, b) -> None:
    (outs_a, sums_a, state_a), (outs_b, sums_b, state_b) = a, b
    for oa, ob in zip(outs_a, outs_b, strict=True):
        for field in ("checkpoints", "x", "observe", "busy", "critical", "times", "setters"):
            assert same_bits(getattr(oa, field), getattr(ob, field)), field
    assert same_bits(state_a, state_b)
    assert same_bits(sums_a.segments, sums_b.segments)
    assert same_bits(sums_a.weighted, sums_b.weighted)
    assert same_bits(sums_a.mass, sums_b.mass)
    assert (sums_a.lookahead, sums_a.skipped) == (sums_b.lookahead, sums_b.skipped)


@TWIN
@given(setups())
def test_compiled_recursion_equals_numpy_bit_for_bit(setup):
    """Firing times, checkpoints, the argmax record (ties to the smallest place index, the
    initial tokens' 0 competing), criticality counts, busy times and the path sums of every
    frontier and segment: the same bits from both engines, across two streamed calls."""
    assert_twins(run_engine(setup, "numba"), run_engine(setup, "numpy"))


@settings(max_examples=60, derandomize=True, deadline=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(setups(), st.integers(1, 12), st.integers(1, 6))
def test_compiled_windows_equal_numpy_windows(setup, capacity, lookahead):
    """When the record does not fit its memory budget, the sweeps over windows with a
    look-ahead give the same (approximate) sums on both engines: the same windows, the same
    additions."""
    g, R = setup[0], setup[1]
    eng = RandomRecursion(g, source(setup[3]), source(setup[4]), R, kernel="numpy")._engine
    per_firing = eng.n * 12 + eng.m * 8  # bytes per firing and replication
    lineage = {"memory": capacity * per_firing, "lookahead": min(lookahead, capacity)}
    assert_twins(run_engine(setup, "numba", **lineage), run_engine(setup, "numpy", **lineage))


def test_chunks_change_nothing(monkeypatch):
    """Chunks of one firing (the sums then add firing by firing across chunks) give the same
    bits as one chunk, on both engines: the order of every addition is fixed by the firings,
    not by the chunking."""
    g = EventGraph([1.0, 0.5, 2.0], [0, 1, 2, 0, 1, 2, 2], [1, 2, 0, 0, 1, 2, 1],
                   [0, 0, 2, 1, 1, 1, 1], [0.0, 0.5, 0.0, 0.0, 0.0, 0.0, 1.0])
    rng = np.random.default_rng(np.random.SeedSequence(41))
    K, R = 300, 3
    dur = rng.exponential(g.duration, size=(K, R, 3))
    hold = rng.exponential(1.0, size=(K, R, 7)) * g.hold
    setup = (g, R, K, dur, hold, [[0, 1, 2], [1]], [0, 50, 170, 300], 7, 120)
    whole = run_engine(setup, "numpy")
    assert_twins(run_engine(setup, "numba"), whole)
    monkeypatch.setattr(recursion, "_CHUNK_ELEMENTS", 1)
    assert_twins(run_engine(setup, "numba"), whole)
    assert_twins(run_engine(setup, "numpy"), whole)


@pytest.mark.parametrize("path", MODELS, ids=[p.stem for p in MODELS])
def test_bundled_models_on_both_engines(path):
    """Every bundled model (fixed ones full of ties, random ones through the Sampler) gives
    the same batch on both engines: checkpoints, busy times, criticality, the upper bound,
    the kept firing times and the path sums of the derivatives."""
    model = load_model(path)
    batches = [run_replications(model, "recursion", 7, range(3), 600, block=50, record=True,
                                kernel=kernel) for kernel in ("numba", "numpy")]
    a, b = batches
    for field in ("checkpoints", "x", "busy", "critical", "clearing", "times", "horizon"):
        assert same_bits(getattr(a, field), getattr(b, field)), field
    assert same_bits(a.paths.weighted, b.paths.weighted)
    assert same_bits(a.paths.mass, b.paths.mass)


@pytest.mark.parametrize("path", [p for p in MODELS if load_model(p).is_random],
                         ids=lambda p: p.stem)
def test_simpy_engine_equals_the_compiled_recursion(path):
    """The SimPy engine, fed the same Sampler, completes every firing at the very time the
    compiled recursion computes (bit for bit), across several blocks of draws."""
    model = load_model(path)
    graph = model.graph()
    sampler = model.sampler(3, 0)
    K = 2500
    run = simulate_event_graph(graph, sampler, n_firings=K)
    rec = RandomRecursion(graph, lambda f, c: sampler.duration_block(f, c)[:, None, :],
                          lambda f, c: sampler.hold_block(f, c)[:, None, :], 1, kernel="numba")
    assert same_bits(run.time, rec.run(K, record=True).times[:, 0, :])


@settings(max_examples=25, derandomize=True, deadline=None)
@given(live_event_graphs(max_transitions=6, max_places=14), st.integers(0, 2**32 - 1))
def test_simpy_engine_equals_the_compiled_recursion_on_random_graphs(g, seed):
    """The same on random live graphs, exponential durations and holds of the graph's means."""
    from cyclecheck.simulate.durations import Sampler

    sampler = Sampler([{"dist": "exponential", "mean": v} if v > 0 else 0.0
                       for v in g.duration.tolist()],
                      [{"dist": "exponential", "mean": v} if v > 0 else 0.0
                       for v in g.hold.tolist()], seed=seed)
    run = simulate_event_graph(g, sampler, n_firings=40)
    rec = RandomRecursion(g, lambda f, c: sampler.duration_block(f, c)[:, None, :],
                          lambda f, c: sampler.hold_block(f, c)[:, None, :], 1, kernel="numba")
    assert same_bits(run.time, rec.run(40, record=True).times[:, 0, :])


def test_markings_above_the_run_are_lowered_as_within_does():
    """A place holding 10^12 tokens: the run of K firings sees the graph of ``within`` (the
    same firing times as a marking of K + 5), on both engines alike."""
    g = EventGraph([1.0, 2.0], [0, 1, 1, 0], [1, 0, 1, 0], [0, 10**12, 1, 1], [0.0, 0.5, 0, 0])
    K, R = 30, 2
    rng = np.random.default_rng(np.random.SeedSequence(8))
    dur = rng.exponential(1.0, size=(K, R, 2))
    hold = rng.exponential(1.0, size=(K, R, 4))
    runs = {}
    for marking in (10**12, K + 5):
        graph = EventGraph(g.duration, g.source, g.target, [0, marking, 1, 1], g.hold)
        for kernel in ("numba", "numpy"):
            rec = RandomRecursion(within(graph, K), source(dur), source(hold), R, kernel=kernel)
            runs[marking, kernel] = rec.run(K, record=True, setters=True)
    first = runs[10**12, "numba"]
    for other in runs.values():
        assert same_bits(first.times, other.times)
        assert same_bits(first.setters, other.setters)
        assert same_bits(first.critical, other.critical)
    # The huge place delivers no firing within K; its initial tokens' 0 sets firing 1 only,
    # where it ties with the self-loop's 0 and has the smaller index.
    assert first.critical[:, 1].tolist() == [1, 1]


@TWIN
@given(live_event_graphs(max_transitions=7, max_places=16), st.integers(1, 60))
def test_compiled_firing_times_equal_numpy(g, K):
    """The deterministic recursion (fixed durations and holds, repeated over chunks of
    firings for the compiled loop) gives the same bits on both engines."""
    assert same_bits(recursion.firing_times(g, K, kernel="numba"),
                     recursion.firing_times(g, K, kernel="numpy"))


def test_deep_token_free_paths_compile_and_chunks_change_nothing(monkeypatch):
    """A ring of 400 stations and one pallet is 400 levels deep, which numpy computes level
    after level: ``kernel="auto"`` compiles from DETERMINISTIC_MIN_STEPS (firing, level)
    steps on, and chunks of a few firings give the same bits as one."""
    n = 400
    rng = np.random.default_rng(np.random.SeedSequence(12))
    tokens = np.zeros(n, dtype=np.int64)
    tokens[-1] = 1
    g = EventGraph(rng.uniform(1.0, 2.0, n), np.arange(n), (np.arange(n) + 1) % n, tokens,
                   rng.uniform(0.0, 1.0, n))
    steps = -(-recursion.DETERMINISTIC_MIN_STEPS // n)  # firings that reach the threshold
    chosen = []
    monkeypatch.setattr(recursion, "load_kernel",
                        lambda *a, real=recursion.load_kernel: chosen.append(1) or real(*a))
    monkeypatch.setattr(recursion, "kernel_loaded", lambda: False)
    recursion.firing_times(g, steps - 1)
    assert chosen == []
    compiled = recursion.firing_times(g, steps)
    assert chosen == [1]
    numpy = recursion.firing_times(g, steps, kernel="numpy")
    assert same_bits(compiled, numpy)
    # The ring's one circuit holds one token: from the first round on the pallet comes
    # round every (sum of durations and holds), λ = weight / tokens (Baccelli et al. 1992,
    # §2.5 and Thm 3.23).
    period = float(np.sum(g.duration) + np.sum(g.hold))
    assert np.allclose(np.diff(compiled[-10:, 0]), period, rtol=1e-12)
    monkeypatch.setattr(recursion, "_CHUNK_ELEMENTS", 3 * (2 * n))
    assert same_bits(recursion.firing_times(g, steps, kernel="numba"), numpy)


def test_each_kernel_is_compiled_for_one_signature():
    """After all the calls above, each kernel has exactly the signature it was prepared for:
    no array of another type or layout slipped through (which would compile again)."""
    from cyclecheck.algebra import recursion_kernel

    g = EventGraph([1.0], [0], [0], [1], [0.0])
    rec = RandomRecursion(g, lambda f, c: np.ones((c, 2, 1)), lambda f, c: np.ones((c, 2, 1)),
                          2, kernel="numba")  # fresh, writable blocks: the compiled gather
    rec.track_lineage([[0]], [0, 5])
    rec.run(5, setters=True)
    assert recursion_kernel.PREPARED
    for kernel in (recursion_kernel.advance, recursion_kernel.sweep_chunk,
                   recursion_kernel.gather):
        assert len(kernel.signatures) == 1, kernel


def test_auto_compiles_only_when_it_pays(monkeypatch):
    """``kernel="auto"``: numpy for small runs and when the run's size is unknown, numba from
    KERNEL_MIN_WORK on or once the kernels are loaded; explicit choices are kept."""
    g = EventGraph([1.0, 1.0], [0, 1], [1, 0], [0, 1], [0.0, 0.0])
    per_firing = 4 * (g.n_transitions + g.n_places)
    big = -(-recursion.KERNEL_MIN_WORK // per_firing)
    monkeypatch.setattr(recursion, "kernel_loaded", lambda: False)
    assert choose_kernel(g, 4, None) == "numpy"
    assert choose_kernel(g, 4, big - 1) == "numpy"
    assert choose_kernel(g, 4, big) == "numba"
    assert choose_kernel(g, 4, big, "numpy") == "numpy"
    assert choose_kernel(g, 4, 1, "numba") == "numba"
    monkeypatch.setattr(recursion, "kernel_loaded", lambda: True)
    assert choose_kernel(g, 4, None) == "numba"
    with pytest.raises(ValueError, match="kernel must be one of"):
        choose_kernel(g, 4, 10, "fortran")


# ------------------------------------------------------------------ start-up and the cache

#: A short run of a random model, told to compile whatever its size.
SCRIPT = textwrap.dedent("""
    import io, json, sys
    from cyclecheck.algebra import recursion, recursion_kernel
    recursion.KERNEL_MIN_WORK = 0
    from cyclecheck.simulate.experiment import estimate_with_executor
    from cyclecheck.simulate.modelfile import load_model
    from cyclecheck.simulate.progress import ProgressLine
    from cyclecheck.simulate.settings import RunSettings

    model = load_model(sys.argv[1])
    stream = io.StringIO()
    settings = RunSettings.resolve(seed=5, replications=4, firings=int(sys.argv[2]),
                                   workers=1)
    est = estimate_with_executor(model, "recursion", settings, precision=None,
                                 progress=ProgressLine(stream=stream))
    print(json.dumps({"cached": recursion_kernel.CACHED, "loaded": recursion.kernel_loaded(),
                      "progress": stream.getvalue(),
                      "estimate": est.interval.estimate,
                      "derivative": est.sensitivity.derivative.tolist()}))
""")


def _run_script(env: dict[str, str], firings: int) -> dict:
    out = subprocess.run([sys.executable, "-c", SCRIPT, str(LOOP), str(firings)],
                         capture_output=True, text=True, env={**os.environ, **env}, check=True)
    return json.loads(out.stdout)


#: A random model: five exponential stations in a closed loop.
LOOP = ROOT / "models" / "closed_line_exponential.toml"


def _firings_that_compile() -> int:
    """Firings per replication for which 4 replications of LOOP reach KERNEL_MIN_WORK."""
    model = load_model(LOOP)
    return recursion.KERNEL_MIN_WORK // (4 * (model.n_transitions + model.n_places)) + 1000


@pytest.fixture
def numpy_only(monkeypatch):
    """Every recursion of the test on the numpy twin, whatever this process has loaded."""
    monkeypatch.setattr(recursion, "choose_kernel", lambda *args, **kwargs: "numpy")


def test_cold_cache_says_compiling_then_loads(tmp_path, numpy_only):
    """With an empty cache, the first process says "compiling" on the progress line and
    stores the kernels; the next one loads them silently; both give the numpy twin's
    numbers."""
    from cyclecheck.simulate.experiment import estimate_with_executor
    from cyclecheck.simulate.settings import RunSettings

    firings = 3000
    env = {"NUMBA_CACHE_DIR": str(tmp_path / "cache")}
    cold = _run_script(env, firings)
    assert cold["cached"] and cold["loaded"]
    assert "compiling" in cold["progress"] and "first run only" in cold["progress"]
    assert list((tmp_path / "cache").rglob("*.nbi")), "nothing was written to the cache"
    warm = _run_script(env, firings)
    assert warm["loaded"] and "compiling" not in warm["progress"]
    settings = RunSettings.resolve(seed=5, replications=4, firings=firings, workers=1)
    est = estimate_with_executor(load_model(LOOP), "recursion", settings, precision=None)
    for doc in (cold, warm):
        assert doc["estimate"] == est.interval.estimate
        assert doc["derivative"] == est.sensitivity.derivative.tolist()


def test_unwritable_cache_still_runs(tmp_path, numpy_only):
    """``cyclecheck analyze`` with NUMBA_CACHE_DIR on a folder that cannot be written, and no
    other cache location allowed: the kernels are compiled in memory and the document has the
    numpy twin's numbers."""
    from cyclecheck.simulate.api import analyze

    folder = tmp_path / "read-only"
    folder.mkdir()
    folder.chmod(0o555)
    if os.access(folder, os.W_OK):  # root ignores permission bits: a path under a file
        (tmp_path / "file").write_text("not a folder")
        folder = tmp_path / "file" / "cache"
    env = {"NUMBA_CACHE_DIR": str(folder),
           "NUMBA_CACHE_LOCATOR_CLASSES": "UserProvidedCacheLocator"}
    check = subprocess.run([sys.executable, "-c", "from cyclecheck.algebra import "
                            "recursion_kernel as k; print(k.CACHED)"],
                           capture_output=True, text=True, env={**os.environ, **env}, check=True)
    assert check.stdout.strip() == "False"
    # one round (a loose precision), long enough for "auto" to compile
    options = {"seed": 5, "replications": 4, "firings": _firings_that_compile(),
               "precision": 0.5}
    cli = subprocess.run(
        [str(Path(sys.executable).parent / "cyclecheck"), "analyze", str(LOOP), "--json",
         "--workers", "1", *[f"--{k}={v}" for k, v in options.items()]],
        capture_output=True, text=True, env={**os.environ, **env})
    assert cli.returncode == 0, cli.stderr
    doc = json.loads(cli.stdout)
    reference = analyze(LOOP, workers=1, quiet=True, **options)
    for key in ("cycle_time", "cycle_time_ci", "sensitivity", "firings_simulated"):
        assert doc[key] == reference[key], key


def test_help_and_the_numpy_path_do_not_import_numba():
    """``cyclecheck --help``, the recursion's module and a small run on the numpy twin leave
    numba unimported (about 0.6 s that small models must not pay)."""
    code = textwrap.dedent("""
        import sys
        import numpy as np
        import cyclecheck.simulate.cli
        from cyclecheck.algebra.eventgraph import EventGraph
        from cyclecheck.algebra.recursion import RandomRecursion
        g = EventGraph([1.0], [0], [0], [1], [0.0])
        rec = RandomRecursion(g, lambda f, c: np.ones((c, 1, 1)),
                              lambda f, c: np.zeros((c, 1, 1)), 1, firings=10)
        rec.run(10)
        print(rec.kernel, "numba" in sys.modules)
    """)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.split() == ["numpy", "False"]
