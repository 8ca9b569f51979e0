"""End-to-end statistical references for random durations: both engines against queueing theory.

Each check runs the public API (model file -> :func:`load_model` -> estimate or command) on
small models written into ``tmp_path`` and compares with a result from outside the project:

* closed cyclic lines of exponential single-server stations: exact throughput by Buzen's
  convolution and by mean-value analysis (Gordon & Newell 1967; Buzen 1973; Reiser &
  Lavenberg 1980), closed form ``X = μN/(N+K−1)`` for equal rates;
* the open M/M/1 line: mean wait in queue ``ρ/(μ−λ)`` (Kleinrock 1975, §3.2) from the firing
  and start times of both engines, and its cycle time ``1/λ``;
* the lower bound ``λ(E[A]) <= γ`` (Baccelli, Cohen, Olsder & Quadrat 1992, ch. 8) on random
  graphs with random laws;
* zero variability: the exact eigenvalue (Baccelli et al. 1992, ch. 2–3);
* coverage and sequential relative precision of the replication interval (Law & Kelton,
  *Simulation Modeling and Analysis*, ch. 9);
* ``check``: the sample-path identity must hold, and must fail when one SimPy firing time is
  perturbed.

Thresholds come from the intervals themselves. Every run is seeded, so the outcome is the same
on every machine; but about 25 intervals are judged here (and 20 random graphs), so at the
95 % level a correct engine would fail one of them with probability about 0.7 after any change
of the random draws (a new BLOCK, new sampling code). Each reported 95 % interval is therefore
widened to 99.9 % by its own t quantiles before it is asked to contain the exact value
(Bonferroni over the checks: a correct engine then fails the file with probability below 4 %;
common practice, no source). The 95 % level itself is checked by the coverage test, which
counts how often the unwidened interval covers the exact value.
"""

from __future__ import annotations

import itertools
import json
import math
import tempfile
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import networkx as nx
import numpy as np
import pytest
from cyclecheck.algebra.analysis import analyze_graph
from cyclecheck.simulate import analyze, check, experiment, simulate
from cyclecheck.simulate import compare as compare_module
from cyclecheck.simulate import engine as engine_module
from cyclecheck.simulate.engine import SimulationRun, simulate_event_graph
from cyclecheck.simulate.estimate import Interval, replication_interval
from cyclecheck.simulate.experiment import estimate_cycle_time, run_replications
from cyclecheck.simulate.modelfile import Model, load_model, write_csv_model
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import stats

from tests.queueing import gordon_newell_throughput, mm1_mean_sojourn, mm1_mean_wait, mva_throughput
from tests.strategies import live_event_graphs

MODELS = Path(__file__).resolve().parents[1] / "models"

Spec = float | dict[str, Any]


# ---------------------------------------------------------------------------------------------
# model files written by the tests


def _toml_value(value: Any) -> str:
    """A TOML value: numbers, strings, lists and inline tables."""
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {_toml_value(v)}" for k, v in value.items()) + " }"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, bool):
        return "true" if value else "false"
    return repr(value)


def write_model(directory: Path, name: str, transitions: Sequence[tuple[str, Spec]],
                places: Sequence[tuple[str, str, int, Spec]]) -> Model:
    """Write ``[[transitions]]`` (id, duration) and ``[[places]]`` (from, to, tokens, hold) as
    a TOML model file in ``directory`` and load it."""
    lines = ["[model]", f"name = {json.dumps(name)}", ""]
    for tid, duration in transitions:
        lines += ["[[transitions]]", f"id = {json.dumps(tid)}",
                  f"duration = {_toml_value(duration)}", ""]
    for src, dst, tokens, hold in places:
        lines += ["[[places]]", f"from = {json.dumps(src)}", f"to = {json.dumps(dst)}",
                  f"tokens = {tokens}", f"hold = {_toml_value(hold)}", ""]
    path = directory / f"{name}.toml"
    path.write_text("\n".join(lines), encoding="utf-8")
    return load_model(path)


def closed_line(directory: Path, means: Sequence[float], customers: Sequence[int]) -> Model:
    """A closed cyclic line: station ``i`` is a transition with exponential durations of mean
    ``means[i]`` and a one-token self-loop (a single FIFO server); place ``i -> i+1`` holds the
    ``customers[i+1]`` customers initially in front of station ``i+1``."""
    k = len(means)
    ids = [f"s{i}" for i in range(k)]
    transitions = [(ids[i], {"dist": "exponential", "mean": float(means[i])}) for i in range(k)]
    places = [(t, t, 1, 0.0) for t in ids]
    places += [(ids[i], ids[(i + 1) % k], int(customers[(i + 1) % k]), 0.0) for i in range(k)]
    return write_model(directory, "closed_line", transitions, places)


def mm1_line(directory: Path, arrival_rate: float, service_rate: float) -> Model:
    """An open line: ``arrive`` (one-token self-loop, exponential interarrival times of mean
    1/λ) feeds ``serve`` (one-token self-loop, exponential service of mean 1/μ) through a place
    without tokens."""
    transitions = [("arrive", {"dist": "exponential", "mean": 1.0 / arrival_rate}),
                   ("serve", {"dist": "exponential", "mean": 1.0 / service_rate})]
    places = [("arrive", "arrive", 1, 0.0), ("serve", "serve", 1, 0.0),
              ("arrive", "serve", 0, 0.0)]
    return write_model(directory, "mm1", transitions, places)


def widened(iv: Interval, level: float = 0.999) -> tuple[float, float]:
    """The interval of the same values at a higher confidence level: the same Student-t
    statistic with the wider quantile (Law & Kelton ch. 9)."""
    dof = iv.n - 1
    scale = stats.t.ppf(0.5 + level / 2, dof) / stats.t.ppf(0.5 + iv.level / 2, dof)
    return iv.estimate - scale * iv.half_width, iv.estimate + scale * iv.half_width


def covers(iv: Interval, value: float) -> bool:
    """True when the 95 % interval, widened to 99.9 % (see the module docstring), contains
    ``value``."""
    low, high = widened(iv)
    return low <= value <= high


def doc_interval(section: dict[str, Any]) -> Interval:
    """The 95 % interval of a result document's section (``cycle_time``, ``cycle_time_ci``,
    ``replications``)."""
    low, high = section["cycle_time_ci"]
    return Interval(section["cycle_time"], low, high, (high - low) / 2, 0.0,
                    section["replications"], 0.95, "from a result document")


# ---------------------------------------------------------------------------------------------
# 1. closed cyclic lines of exponential stations


#: (service means, customers initially in front of each station). Gordon & Newell's throughput
#: does not depend on where the customers start (the network is ergodic).
CLOSED_LINES = {
    "equal-3x2": ([1.0, 1.0, 1.0], [2, 0, 0]),
    "equal-4x3": ([0.5, 0.5, 0.5, 0.5], [1, 1, 1, 0]),
    "unequal-3x2": ([1.0, 0.5, 0.8], [2, 0, 0]),
    "unequal-4x4": ([0.6, 1.0, 0.9, 0.3], [2, 0, 1, 1]),
}


def exact_cycle_time(means: Sequence[float], customers: Sequence[int]) -> float:
    """1/X with X from Buzen's algorithm, checked against MVA (two independent methods)."""
    rates = 1.0 / np.asarray(means)
    x = gordon_newell_throughput(rates, int(sum(customers)))
    assert mva_throughput(rates, int(sum(customers))) == pytest.approx(x, rel=1e-12)
    return 1.0 / x


@pytest.mark.parametrize("mu, stations, customers", [(1.0, 3, 2), (2.0, 4, 3), (0.7, 5, 1),
                                                     (1.3, 2, 7)])
def test_buzen_matches_the_closed_form_for_equal_rates(mu: float, stations: int,
                                                       customers: int) -> None:
    """Equal rates: X = μN/(N+K−1) (Gordon & Newell 1967), by Buzen and by MVA."""
    expected = mu * customers / (customers + stations - 1)
    assert gordon_newell_throughput([mu] * stations, customers) == pytest.approx(expected,
                                                                                rel=1e-12)
    assert mva_throughput([mu] * stations, customers) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("case", sorted(CLOSED_LINES))
def test_closed_line_lyapunov_estimate_contains_buzen(tmp_path: Path, case: str) -> None:
    """The recursion's 95 % interval contains 1/X (Buzen 1973), and excludes the cycle time of
    the mean durations, which is strictly smaller here: the check can tell them apart."""
    means, customers = CLOSED_LINES[case]
    model = closed_line(tmp_path, means, customers)
    exact = exact_cycle_time(means, customers)
    est = estimate_cycle_time(model, "recursion", seed=11, firings=20_000, replications=10)
    assert covers(est.interval, exact), (est.interval, exact)
    if len(set(means)) == 1:  # equal rates: X = μN/(N+K−1) (Gordon & Newell 1967)
        k, n = len(means), sum(customers)
        assert exact == pytest.approx((n + k - 1) * means[0] / n, rel=1e-12)
    mean_value = analyze_graph(model.graph()).cycle_time
    assert mean_value < exact
    assert not covers(est.interval, mean_value)
    # every station of a strongly connected line has the same cycle time
    assert est.by_transition == pytest.approx(np.full(len(means), exact), rel=0.02)


@pytest.mark.parametrize("case", sorted(CLOSED_LINES))
def test_closed_line_simpy_estimate_contains_buzen(tmp_path: Path, case: str) -> None:
    """The SimPy engine's 95 % interval (fewer, shorter replications) contains 1/X."""
    means, customers = CLOSED_LINES[case]
    model = closed_line(tmp_path, means, customers)
    exact = exact_cycle_time(means, customers)
    est = estimate_cycle_time(model, "simpy", seed=12, firings=3000, replications=5)
    assert est.engine == "simpy"
    assert covers(est.interval, exact), (est.interval, exact)


def test_analyze_model_on_a_closed_line_reports_buzen(tmp_path: Path) -> None:
    """``analyze`` on a random model: the Lyapunov estimate's interval contains 1/X and the
    throughput is X (Buzen 1973); the bounds bracket it."""
    means, customers = CLOSED_LINES["unequal-3x2"]
    model = closed_line(tmp_path, means, customers)
    exact = exact_cycle_time(means, customers)
    doc = analyze(model, seed=5, firings=20_000, replications=10)
    iv = doc_interval(doc)
    assert covers(iv, exact), (iv, exact)
    assert doc["throughput"] == pytest.approx(1.0 / iv.estimate, rel=1e-12)
    assert doc["bounds"]["lower"] <= exact <= doc["bounds"]["upper"]
    assert doc["precision_met"] is True and doc["relative_half_width"] <= 0.01


# ---------------------------------------------------------------------------------------------
# 2. the open M/M/1 line


MM1_CASES = [(0.5, 1.0), (1.4, 2.0)]  # ρ = 0.5 and 0.7


def _waits(model: Model, seed: int, times: np.ndarray, replications: Sequence[int],
           warmup: int) -> tuple[np.ndarray, np.ndarray]:
    """Per replication: mean wait in queue and mean time in system after ``warmup`` customers.

    Customer k arrives at x_arrive(k), starts service at x_serve(k) − d_serve(k) (the duration
    drawn for firing k) and leaves at x_serve(k). ``times`` has shape (K, R, 2).
    """
    a, s = model.transition_index("arrive"), model.transition_index("serve")
    k = times.shape[0]
    wait, sojourn = [], []
    for i, r in enumerate(replications):
        service = model.sampler(seed, int(r)).duration(s, 1, k)
        start = times[:, i, s] - service
        wait.append(float(np.mean((start - times[:, i, a])[warmup:])))
        sojourn.append(float(np.mean((times[:, i, s] - times[:, i, a])[warmup:])))
    return np.array(wait), np.array(sojourn)


@pytest.mark.parametrize("lam, mu", MM1_CASES)
def test_mm1_mean_wait_from_the_recursion(tmp_path: Path, lam: float, mu: float) -> None:
    """Mean wait in queue ρ/(μ−λ) and time in system 1/(μ−λ) (Kleinrock 1975, §3.2) inside the
    95 % intervals of 10 replications of 40 000 customers, the first 4 000 deleted (the line
    starts empty)."""
    model = mm1_line(tmp_path, lam, mu)
    seed, firings, warmup, reps = 21, 40_000, 4_000, list(range(10))
    batch = run_replications(model, "recursion", seed, reps, firings, record=True)
    wait, sojourn = _waits(model, seed, batch.times, reps, warmup)
    iv_wait, iv_sojourn = replication_interval(wait), replication_interval(sojourn)
    assert covers(iv_wait, mm1_mean_wait(lam, mu)), iv_wait
    assert covers(iv_sojourn, mm1_mean_sojourn(lam, mu)), iv_sojourn
    # the wait is told apart from the time in system (they differ by the mean service 1/μ)
    assert not covers(iv_wait, mm1_mean_sojourn(lam, mu))


@pytest.mark.parametrize("lam, mu", MM1_CASES)
def test_mm1_mean_wait_from_simpy_start_times(tmp_path: Path, lam: float, mu: float) -> None:
    """The SimPy engine's own start times (``SimulationRun.start``) give the waits: equal to
    the recursion's x_serve − d_serve firing by firing, and their mean over 5 replications of
    20 000 customers (2 000 deleted) has a 95 % interval containing ρ/(μ−λ) (Kleinrock 1975,
    §3.2)."""
    model = mm1_line(tmp_path, lam, mu)
    seed, firings, warmup, reps = 22, 20_000, 2_000, list(range(5))
    a, s = model.transition_index("arrive"), model.transition_index("serve")
    rec = run_replications(model, "recursion", seed, reps, firings, record=True)
    waits = []
    for r in reps:
        run = simulate_event_graph(model.graph(), model.sampler(seed, r), n_firings=firings)
        service = model.sampler(seed, r).duration(s, 1, firings)
        np.testing.assert_allclose(run.start[:, s], rec.times[:, r, s] - service, rtol=1e-9)
        waits.append(float(np.mean((run.start[:, s] - run.time[:, a])[warmup:])))
    iv = replication_interval(waits)
    assert covers(iv, mm1_mean_wait(lam, mu)), iv


@pytest.mark.parametrize("lam, mu", MM1_CASES)
def test_mm1_cycle_time_is_the_mean_interarrival_time(tmp_path: Path, lam: float,
                                                      mu: float) -> None:
    """A stable open line runs at the arrival rate: cycle time 1/λ for both transitions
    (Kleinrock 1975, §3.2: the departure rate of a stable M/M/1 queue is λ)."""
    model = mm1_line(tmp_path, lam, mu)
    est = estimate_cycle_time(model, "recursion", seed=23, firings=40_000, replications=10)
    assert covers(est.interval, 1.0 / lam), est.interval
    assert not covers(est.interval, 1.0 / mu)
    assert est.by_transition == pytest.approx([1.0 / lam, 1.0 / lam], rel=0.01)
    sim = estimate_cycle_time(model, "simpy", seed=23, firings=10_000, replications=5)
    assert covers(sim.interval, 1.0 / lam), sim.interval


# ---------------------------------------------------------------------------------------------
# 3. the lower bound λ(E[A]) <= γ on random graphs with random laws


def _law(kind: str, mean: float, shape: float) -> dict[str, Any]:
    """A random law of the given mean; ``shape`` in (0, 1] sets its spread."""
    if kind == "exponential":
        return {"dist": "exponential", "mean": mean}
    if kind == "gamma":
        return {"dist": "gamma", "mean": mean, "cv": 0.1 + 1.9 * shape}
    if kind == "lognormal":
        return {"dist": "lognormal", "mean": mean, "cv": 0.1 + 1.4 * shape}
    if kind == "erlang":
        return {"dist": "erlang", "mean": mean, "k": 1 + int(4 * shape)}
    if kind == "uniform":
        return {"dist": "uniform", "low": mean * (1 - shape), "high": mean * (1 + shape)}
    if kind == "triangular":
        return {"dist": "triangular", "low": 0.0, "mode": mean, "high": 2 * mean}
    return {"dist": "empirical", "values": [mean * (1 - shape), mean * (1 + shape)]}


LAWS = ["exponential", "gamma", "lognormal", "erlang", "uniform", "triangular", "empirical"]


@st.composite
def random_models(draw: st.DrawFn) -> tuple[Any, list[dict[str, Any]], list[dict[str, Any]]]:
    """A small live event graph and a random law (positive variance) for every duration and
    hold, with the graph's values (plus 0.25, so no mean is 0) as means."""
    graph = draw(live_event_graphs(max_transitions=5, max_places=10, value_kind="float"))

    def laws(values: np.ndarray) -> list[dict[str, Any]]:
        return [_law(draw(st.sampled_from(LAWS)), float(v) + 0.25,
                     draw(st.floats(0.05, 1.0))) for v in values]

    return graph, laws(graph.duration), laws(graph.hold)


def brute_force_cycle_time(graph: Any) -> float:
    """Largest ratio weight / tokens over every simple circuit and every choice of parallel
    places (Baccelli et al. 1992, ch. 2), with networkx: the slow twin of Howard."""
    multi: dict[tuple[int, int], list[int]] = {}
    for p in range(graph.n_places):
        multi.setdefault((int(graph.source[p]), int(graph.target[p])), []).append(p)
    best = -math.inf
    for cycle in nx.simple_cycles(nx.DiGraph(list(multi))):
        arcs = list(zip(cycle, cycle[1:] + cycle[:1], strict=True))
        for choice in itertools.product(*(multi[a] for a in arcs)):
            weight = sum(float(graph.hold[p] + graph.duration[graph.target[p]]) for p in choice)
            best = max(best, weight / sum(int(graph.tokens[p]) for p in choice))
    return best


@settings(max_examples=20, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(random_models())
def test_estimate_respects_the_bounds_on_random_graphs(case: Any) -> None:
    """λ(E[A]) <= γ (Baccelli et al. 1992, ch. 8): the interval's upper end is never below
    ``bounds.lower``, the cycle time of the mean durations (itself checked against brute force
    over circuits); and ``bounds.upper`` is never below the interval's lower end. Intervals
    widened to 99.9 % (twenty cases judged at once; see the module docstring)."""
    graph, durations, holds = case
    with tempfile.TemporaryDirectory() as tmp:
        path = write_csv_model(tmp, "random", durations, graph.source, graph.target,
                               graph.tokens, holds)
        model = load_model(path)
        assert model.is_random
        doc = analyze(model, seed=31, precision=0.05, replications=10, firings=1000)
    lower, upper = doc["bounds"]["lower"], doc["bounds"]["upper"]
    assert lower == pytest.approx(brute_force_cycle_time(model.graph()), rel=1e-9)
    wide_low, wide_high = widened(doc_interval(doc))
    assert wide_high >= lower, (doc["cycle_time_ci"], lower)
    assert upper >= wide_low, (doc["cycle_time_ci"], upper)


# ---------------------------------------------------------------------------------------------
# 4. zero variability


def _two_transition_model(directory: Path, name: str, dur_a: Spec, dur_b: Spec,
                          holds: Sequence[Spec]) -> Model:
    """Transitions a, b; places a->a, b->a, a->b, b->b with one token each and the given holds:
    the max-plus matrix [[h_aa + d_a, h_ba + d_a], [h_ab + d_b, h_bb + d_b]]."""
    return write_model(directory, name, [("a", dur_a), ("b", dur_b)],
                       [("a", "a", 1, holds[0]), ("b", "a", 1, holds[1]),
                        ("a", "b", 1, holds[2]), ("b", "b", 1, holds[3])])


def _fixed(value: float) -> dict[str, Any]:
    return {"dist": "fixed", "value": value}


def _fixed_line(directory: Path, spec: Any) -> Model:
    """A closed line of three stations with a bottleneck (cyclicity 1): durations 2, 3.5, 1,
    two customers, a transport hold of 0.25 before station 1 (the ring's ratio 6.75/2 stays
    below the bottleneck's 3.5, so the critical circuit is unique). ``spec(value)`` writes each
    number (fixed table, plain number, degenerate uniform or near-degenerate gamma)."""
    durations = [2.0, 3.5, 1.0]
    ids = ["s0", "s1", "s2"]
    transitions = [(t, spec(d)) for t, d in zip(ids, durations, strict=True)]
    places = [(t, t, 1, spec(0.0)) for t in ids]
    places += [("s0", "s1", 0, spec(0.25)), ("s1", "s2", 0, 0.0), ("s2", "s0", 2, 0.0)]
    return write_model(directory, "fixed_line", transitions, places)


@pytest.mark.parametrize("firings", [999, 1000, 1001])
def test_fixed_line_estimate_equals_exact_cycle_time(tmp_path: Path, firings: int) -> None:
    """All laws ``{dist = "fixed"}``: the model is not random and the estimate of the recursion
    is the exact eigenvalue of :func:`analyze_graph` (Baccelli et al. 1992, ch. 3), here the
    bottleneck's 3.5, to 1e-9 relative, with a zero-width interval."""
    model = _fixed_line(tmp_path, _fixed)
    assert not model.is_random
    exact = analyze_graph(model.graph())
    assert exact.cyclicity == 1 and exact.cycle_time == pytest.approx(3.5, rel=1e-12)
    est = estimate_cycle_time(model, "recursion", seed=1, firings=firings, replications=3)
    assert est.interval.estimate == pytest.approx(exact.cycle_time, rel=1e-9)
    assert est.interval.half_width == pytest.approx(0.0, abs=1e-9 * exact.cycle_time)


def test_degenerate_uniform_is_a_fixed_value(tmp_path: Path) -> None:
    """``uniform`` with low = high has no spread: the model is not random, and the estimate is
    the exact eigenvalue (Baccelli et al. 1992, ch. 3)."""
    model = _fixed_line(tmp_path, lambda v: {"dist": "uniform", "low": v, "high": v})
    assert not model.is_random
    est = estimate_cycle_time(model, "recursion", seed=1, firings=1000, replications=3)
    assert est.interval.estimate == pytest.approx(analyze_graph(model.graph()).cycle_time,
                                                  rel=1e-9)


def test_near_degenerate_gamma_gives_the_exact_cycle_time(tmp_path: Path) -> None:
    """Gamma laws with cv = 1e-6 are random, but the estimate is the eigenvalue of the mean
    durations to 1e-4 relative (continuity of the Lyapunov exponent; Baccelli et al. 1992,
    ch. 8: γ >= λ(E[A]), with equality in the limit of no variability)."""
    model = _fixed_line(tmp_path, lambda v: {"dist": "gamma", "mean": v, "cv": 1e-6}
                        if v > 0 else 0.0)
    assert model.is_random
    exact = analyze_graph(model.graph()).cycle_time
    est = estimate_cycle_time(model, "recursion", seed=1, firings=1000, replications=5)
    assert est.interval.estimate == pytest.approx(exact, rel=1e-4)


def test_fixed_model_estimate_equals_exact_cycle_time(tmp_path: Path) -> None:
    """Cyclicity 2: A = [[3, 7], [2, 4]] has λ = 4.5 and period 2 (Heidergott, Olsder & van der
    Woude 2006, from memory; the value is rechecked here by :func:`analyze_graph` and by brute
    force over circuits). The estimate of this deterministic run must be 4.5 to 1e-9 relative
    whatever the number of firings."""
    model = _two_transition_model(tmp_path, "period2", _fixed(0.0), _fixed(0.0),
                                  [_fixed(3.0), _fixed(7.0), _fixed(2.0), _fixed(4.0)])
    exact = analyze_graph(model.graph())
    assert exact.cycle_time == pytest.approx(4.5, rel=1e-12)
    assert brute_force_cycle_time(model.graph()) == pytest.approx(4.5, rel=1e-12)
    assert exact.cyclicity == 2
    got = {f: estimate_cycle_time(model, "recursion", seed=1, firings=f,
                                  replications=5).interval.estimate for f in (1000, 1001)}
    assert got == pytest.approx({1000: 4.5, 1001: 4.5}, rel=1e-9)


def test_check_agrees_when_only_a_noncritical_element_is_random(tmp_path: Path) -> None:
    """A correct model must not be judged "disagrees": models/packaging_cell.toml (fixed,
    λ = 17.375, cyclicity 4) plus an isolated random station far from critical. γ = λ exactly
    here (the critical circuit is deterministic; Baccelli et al. 1992, ch. 8), so the
    estimate's interval must not lie below the lower bound."""
    text = (MODELS / "packaging_cell.toml").read_text(encoding="utf-8") + "\n".join([
        "", "[[transitions]]", 'id = "aux"',
        'duration = { dist = "uniform", low = 1.0, high = 2.0 }', "",
        "[[places]]", 'from = "aux"', 'to = "aux"', "tokens = 1", ""])
    path = tmp_path / "cell_with_aux.toml"
    path.write_text(text, encoding="utf-8")
    model = load_model(path)
    assert model.is_random
    doc = check(model, seed=1, firings=1000, replications=5)
    assert doc["comparison"]["sample_path"]["identical"] is True
    assert doc["comparison"]["verdict"] == "agrees", doc["comparison"]["reasons"]


# ---------------------------------------------------------------------------------------------
# 5. coverage of the replication interval


@pytest.mark.slow
def test_interval_coverage_on_a_closed_line(tmp_path: Path) -> None:
    """Over 100 independent seeds, the 95 % interval of 10 replications of 1000 firings covers
    1/X = 2 (three exponential stations, μ = 1, two customers: X = μN/(N+K−1) = 1/2, Gordon &
    Newell 1967) in 90 to 99 cases: Binomial(100, 0.95) lies there with probability 0.98
    (Law & Kelton ch. 9 on checking coverage; the range is common practice, no source)."""
    model = closed_line(tmp_path, [1.0, 1.0, 1.0], [2, 0, 0])
    exact = exact_cycle_time([1.0, 1.0, 1.0], [2, 0, 0])
    assert exact == pytest.approx(2.0, rel=1e-12)
    seeds = np.random.SeedSequence(20_240_607).generate_state(100)
    covered = sum(
        estimate_cycle_time(model, "recursion", seed=int(s), firings=1000,
                            replications=10).interval.covers(exact)
        for s in seeds
    )
    assert 90 <= covered <= 99, covered


# ---------------------------------------------------------------------------------------------
# 6. sequential relative precision


class _CountingRuns:
    """Wraps :func:`run_replications` and counts the firings it computes, independently of
    :attr:`Estimate.firings_simulated`."""

    def __init__(self) -> None:
        self.firings = 0
        self.replications = 0

    def __call__(self, model: Model, engine: str, seed: int, replications: Sequence[int],
                 firings: int, **kwargs: Any) -> Any:
        batch = run_replications(model, engine, seed, replications, firings, **kwargs)
        reps = len(list(replications))
        self.replications += reps
        self.firings += reps * firings * model.n_transitions
        return batch


def test_sequential_precision_reaches_the_target(tmp_path: Path,
                                                 monkeypatch: pytest.MonkeyPatch) -> None:
    """precision = 0.005: the relative half-width is at most 0.005 and the interval covers the
    exact cycle time (one exponential server of mean 2: x(k) is a sum of k durations, so its
    cycle time is the mean; Law & Kelton ch. 9, sequential procedure). firings_simulated counts
    every firing of every round."""
    model = write_model(tmp_path, "server", [("m", {"dist": "exponential", "mean": 2.0})],
                        [("m", "m", 1, 0.0)])
    counter = _CountingRuns()
    monkeypatch.setattr(experiment, "run_replications", counter)
    est = estimate_cycle_time(model, "recursion", seed=41, firings=1000, replications=10,
                              precision=0.005)
    assert est.target_met is True
    assert est.interval.relative_half_width <= 0.005
    assert covers(est.interval, 2.0), est.interval
    assert len(est.history) >= 2  # 10 replications cannot reach 0.5 %: rounds were added
    assert est.replications == counter.replications == est.history[-1][0]
    assert est.firings_simulated == counter.firings == est.replications * 1000


def test_sequential_precision_stops_at_the_replication_limit(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """With max_replications = 20 the target 0.005 is out of reach: target_met is False,
    exactly 20 replications were run, and firings_simulated counts them all."""
    model = closed_line(tmp_path, [1.0, 0.5], [1, 1])
    counter = _CountingRuns()
    monkeypatch.setattr(experiment, "run_replications", counter)
    est = estimate_cycle_time(model, "recursion", seed=42, firings=500, replications=10,
                              precision=0.005, max_replications=20)
    assert est.target_met is False
    assert est.interval.relative_half_width > 0.005
    assert est.replications == counter.replications == 20
    assert est.firings_simulated == counter.firings == 20 * 500 * 2


def test_simulate_document_counts_all_firings(tmp_path: Path,
                                              monkeypatch: pytest.MonkeyPatch) -> None:
    """``simulate --precision``: the document's firings_simulated equals the firings computed,
    and its relative half-width meets the precision or the document says it did not."""
    model = closed_line(tmp_path, [1.0, 0.5], [1, 1])
    counter = _CountingRuns()
    monkeypatch.setattr(experiment, "run_replications", counter)
    doc = simulate(model, seed=43, precision=0.02, replications=4, firings=1000)
    assert doc["firings_simulated"] == counter.firings
    assert doc["replications"] == counter.replications
    assert doc["relative_half_width"] <= 0.02 or doc["precision_met"] is False


# ---------------------------------------------------------------------------------------------
# 7. check: the verdict, and that it can fail


def _perturbed(real: Any, firing: int = 10, relative: float = 1e-6) -> Any:
    """``simulate_event_graph`` with one completion time moved (firing ``firing`` of
    transition 0): a simulation model that is wrong in one event."""

    def broken(graph: Any, *args: Any, **kwargs: Any) -> SimulationRun:
        run = real(graph, *args, **kwargs)
        time = run.time.copy()
        time[firing - 1, 0] *= 1.0 + relative
        return SimulationRun(run.graph, run.start, time, run.horizon)

    return broken


CHECK_SETTINGS = {"seed": 3, "precision": 0.02, "replications": 10, "firings": 4000}


def test_check_agrees_on_the_closed_line_example() -> None:
    """models/closed_line_exponential.toml with the default settings: identical sample paths,
    intervals that contain 1/X (Buzen 1973), verdict "agrees"; the lower bound is the largest
    circuit ratio of the mean durations (brute force; Baccelli et al. 1992, ch. 2 and 8)."""
    model = load_model(MODELS / "closed_line_exponential.toml")
    doc = check(model, seed=1)
    comparison = doc["comparison"]
    assert comparison["verdict"] == "agrees", comparison["reasons"]
    assert comparison["sample_path"]["identical"] is True
    assert comparison["sample_path"]["max_relative_difference"] <= 1e-9
    exact = exact_cycle_time([1.0, 1.25, 0.8, 1.0, 1.5], [3, 0, 0, 0, 0])
    assert exact == pytest.approx(2.6311, abs=5e-5)  # the value worked in the model file
    for section in (doc["analysis"], doc["simulation"]):
        assert covers(doc_interval(section), exact), (section["engine"],
                                                      section["cycle_time_ci"])
    # the ring of five stations with three pallets, 5.55 / 3 = 1.85, not the slowest station
    lower = brute_force_cycle_time(model.graph())
    assert lower == pytest.approx(5.55 / 3, rel=1e-12)
    assert doc["analysis"]["bounds"]["lower"] == pytest.approx(lower, rel=1e-12)


def test_check_detects_a_broken_simpy_side(monkeypatch: pytest.MonkeyPatch) -> None:
    """One SimPy firing time moved by 1e-6 relative: the estimates still agree statistically,
    but the sample-path identity fails and the verdict is "disagrees"."""
    model = load_model(MODELS / "closed_line_exponential.toml")
    real = engine_module.simulate_event_graph
    monkeypatch.setattr(engine_module, "simulate_event_graph", _perturbed(real))
    monkeypatch.setattr(compare_module, "simulate_event_graph", _perturbed(real))
    doc = check(model, **CHECK_SETTINGS)
    comparison = doc["comparison"]
    assert comparison["sample_path"]["identical"] is False
    assert comparison["sample_path"]["max_relative_difference"] > 1e-9
    assert comparison["verdict"] == "disagrees"
    assert any("sample paths differ" in r for r in comparison["reasons"])
    # the statistics alone would not have caught it: the two intervals still overlap
    rec, sim = doc["analysis"]["cycle_time_ci"], doc["simulation"]["cycle_time_ci"]
    assert rec[0] <= sim[1] and sim[0] <= rec[1]


@pytest.mark.parametrize("broken", [False, True])
def test_check_on_a_fixed_model_and_its_broken_twin(monkeypatch: pytest.MonkeyPatch,
                                                    broken: bool) -> None:
    """Fixed durations (models/packaging_cell.toml, λ = 17.375 worked in the file): "agrees";
    with one SimPy completion time moved, "disagrees"."""
    model = load_model(MODELS / "packaging_cell.toml")
    if broken:
        real = engine_module.simulate_event_graph
        monkeypatch.setattr(engine_module, "simulate_event_graph", _perturbed(real))
        monkeypatch.setattr(compare_module, "simulate_event_graph", _perturbed(real))
    doc = check(model, seed=1)
    comparison = doc["comparison"]
    assert comparison["sample_path"]["identical"] is (not broken)
    assert comparison["verdict"] == ("disagrees" if broken else "agrees")
