"""Derivatives of the cycle time, the bottleneck, unbounded places and utilization per server,
checked against results from outside the project.

Sources (REFERENCES.md of the project's shared notes):

* one transition waiting for a fixed hold ``c`` and a random hold ``X``: elementary calculus,
  worked in :func:`test_max_of_a_fixed_and_a_random_hold`;
* closed cyclic lines of exponential stations: Gordon & Newell (1967), Buzen (1973); the
  derivative of ``1/X`` with respect to each station's mean by central differences of
  Buzen's algorithm (``tests/queueing.py``, itself checked against MVA);
* fixed durations: the cycle time is the largest circuit ratio (Baccelli, Cohen, Olsder &
  Quadrat 1992, §2.5); its one-sided derivatives are recomputed by differences of Howard's
  eigenvalue, and compared with the slack of ``algebra/critical.py``;
* open lines: an M/M/1 queue is stable iff its arrival rate is below its service rate
  (Kleinrock 1975, §3.2);
* Euler's theorem for functions homogeneous of degree one: scaling every mean by ``a`` scales
  the cycle time by ``a``, so ``Σ θ_e ∂λ/∂θ_e = λ``.

Statistical checks widen the 95 % intervals to 99.9 % (see tests/test_random_reference.py).
"""

from __future__ import annotations

import itertools
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from cyclecheck.algebra.critical import critical_places, slack
from cyclecheck.algebra.eventgraph import EventGraph
from cyclecheck.algebra.sensitivity import fixed_sensitivity
from cyclecheck.algebra.spectral import howard
from cyclecheck.simulate import analyze, check, simulate
from cyclecheck.simulate.estimate import Interval
from cyclecheck.simulate.experiment import estimate_cycle_time
from cyclecheck.simulate.summary import analysis_text, simulation_text
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.queueing import gordon_newell_throughput
from tests.strategies import live_event_graphs
from tests.test_random_reference import closed_line, widened, write_model

MODELS = Path(__file__).resolve().parents[1] / "models"


def _covers(sens: Any, e: int, value: float) -> bool:
    """The element's 95 % interval, widened to 99.9 %, contains ``value``."""
    d, lo, hi = sens.derivative[e], sens.low[e], sens.high[e]
    iv = Interval(d, lo, hi, (hi - lo) / 2, 0.0, sens.replications, 0.95, "derivative")
    low, high = widened(iv)
    return low <= value <= high


def _exp(mean: float) -> dict[str, Any]:
    return {"dist": "exponential", "mean": mean}


# ---------------------------------------------------------------------------------------------
# closed forms


@pytest.mark.parametrize("law", ["exponential", "uniform"])
def test_max_of_a_fixed_and_a_random_hold(tmp_path: Path, law: str) -> None:
    r"""One transition of duration 0 with two self-loops of one token: hold ``c`` (fixed) and
    hold ``X`` (random). Then ``x(k) = x(k−1) + max(c, X_k)``, so the cycle time is exactly
    ``λ = E max(c, X)``. By hand, with ``X = θξ``:

    * ``d/dc E max(c, X) = P(X < c)`` (the maximum moves with ``c`` exactly when ``c`` wins);
    * ``d/dθ E max(c, θξ) = E[ξ 1{θξ > c}]``.

    Exponential, mean θ = 1, c = 1: ``λ = c + θ e^{−c/θ} = 1 + e^{−1}``,
    ``P(X < c) = 1 − e^{−1}``, ``E[ξ 1{ξ > a}] = ∫_a^∞ ξ e^{−ξ} dξ = (1 + a) e^{−a}`` with
    ``a = c/θ = 1``: ``2 e^{−1}``.
    Uniform on (0, 2μ), μ = 1, c = 1.5: ``P(X < c) = c/(2μ) = 0.75``,
    ``E[ξ 1{μξ > c}] = ∫_{c/μ}^{2} ξ/2 dξ = 1 − (c/2μ)² = 0.4375``,
    ``λ = c P(X < c) + E[X 1{X > c}] = 1.125 + (4 − 2.25)/4 = 1.5625``.
    The duration of mean 0 is shifted: every firing lies on the path, derivative 1.
    """
    if law == "exponential":
        c, spec = 1.0, _exp(1.0)
        lam, d_c, d_theta = 1 + np.exp(-1), 1 - np.exp(-1), 2 * np.exp(-1)
    else:
        c, spec = 1.5, {"dist": "uniform", "low": 0.0, "high": 2.0}
        lam, d_c, d_theta = 1.5625, 0.75, 0.4375
    model = write_model(tmp_path, "max", [("t", 0.0)], [("t", "t", 1, c), ("t", "t", 1, spec)])
    est = estimate_cycle_time(model, seed=7, firings=20_000, replications=10)
    low, high = widened(est.interval)
    assert low <= lam <= high, (est.interval, lam)
    s = est.sensitivity
    assert _covers(s, 1, d_c), (s.derivative[1], s.low[1], s.high[1], d_c)
    assert _covers(s, 2, d_theta), (s.derivative[2], s.low[2], s.high[2], d_theta)
    assert s.derivative[0] == pytest.approx(1.0, rel=1e-12)
    # the two derivatives are told apart, and neither is the other's value
    assert not _covers(s, 1, d_theta) and not _covers(s, 2, d_c)


def _buzen_derivatives(means: list[float], customers: int, h: float = 1e-6) -> np.ndarray:
    """d(1/X)/d(mean of station i) by central differences of Buzen's algorithm."""
    def cycle(m: list[float]) -> float:
        return 1.0 / gordon_newell_throughput(1.0 / np.asarray(m), customers)

    out = []
    for i in range(len(means)):
        up = [m + h if j == i else m for j, m in enumerate(means)]
        down = [m - h if j == i else m for j, m in enumerate(means)]
        out.append((cycle(up) - cycle(down)) / (2 * h))
    return np.array(out)


@pytest.mark.parametrize(("means", "customers"), [([1.0, 0.5, 0.8], [2, 0, 0]),
                                                  ([0.6, 1.0, 0.9, 0.3], [2, 0, 1, 1])])
def test_closed_line_derivatives_match_buzen(tmp_path: Path, means: list[float],
                                             customers: list[int]) -> None:
    """Each station's derivative contains d(1/X)/dμ⁻¹ from Buzen's algorithm (Gordon & Newell
    1967; Buzen 1973), and Σ θ dλ/dθ = λ (Euler: the cycle time is homogeneous of degree one
    in the means; the places of mean 0 do not enter the sum)."""
    model = closed_line(tmp_path, means, customers)
    exact = _buzen_derivatives(means, sum(customers))
    est = estimate_cycle_time(model, seed=3, firings=20_000, replications=10)
    s = est.sensitivity
    k = len(means)
    for i in range(k):
        assert _covers(s, i, exact[i]), (i, s.derivative[i], s.low[i], s.high[i], exact[i])
    assert float(np.dot(s.derivative[:k], means)) == pytest.approx(est.interval.estimate,
                                                                   rel=5e-3)
    # the derivatives differ from station to station as Buzen's do: the largest is the same
    assert int(np.argmax(s.derivative[:k])) == int(np.argmax(exact))


# ---------------------------------------------------------------------------------------------
# fixed durations


def _howard_one_sided(g: EventGraph, e: int, h: float) -> tuple[float, float]:
    """(λ(θ) − λ(θ − h))/h and (λ(θ + h) − λ(θ))/h for element ``e`` (transitions first)."""
    n = g.n_transitions

    def lam(delta: float) -> float:
        d, hold = g.duration.copy(), g.hold.copy()
        if e < n:
            d[e] += delta
        else:
            hold[e - n] += delta
        return howard(g.with_values(d, hold)).max_cycle_time

    base = lam(0.0)
    value = g.duration[e] if e < n else g.hold[e - n]
    down = (base - lam(-h)) / h if value >= h else np.nan
    return down, (lam(h) - base) / h


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.one_of(live_event_graphs(value_kind="float"), live_event_graphs(value_kind="int")))
def test_fixed_derivatives_match_howard_differences_and_slack(g: EventGraph) -> None:
    """One-sided derivatives equal differences of Howard's eigenvalue (λ is piecewise linear:
    exact away from a kink; integer data make many critical circuits tie); an element of
    positive slack (algebra/critical.py) has both 0;
    with a single critical circuit both are 1/(its tokens) on it (Baccelli et al. 1992, §2.5:
    λ is the largest circuit ratio)."""
    result = howard(g)
    s = fixed_sensitivity(g, result)
    n = g.n_transitions
    dec = np.r_[s.transitions_decrease, s.places_decrease]
    inc = np.r_[s.transitions_increase, s.places_increase]
    lam = result.max_cycle_time
    h = 1e-7 * max(1.0, lam)
    sl = slack(g, result)
    slacks = np.r_[sl.transitions, sl.places]
    top = np.abs(result.cycle_time - lam) <= 1e-9 * max(lam, 1e-12)
    for e in range(n + g.n_places):
        if 0 < slacks[e] < 1e3 * h:
            continue  # a kink within reach of the difference
        down, up = _howard_one_sided(g, e, h)
        assert up == pytest.approx(inc[e], abs=1e-5), (e, up, inc[e])
        if np.isfinite(down):
            assert down == pytest.approx(dec[e], abs=1e-5), (e, down, dec[e])
        on_top = top[e] if e < n else top[g.source[e - n]] and top[g.target[e - n]]
        if slacks[e] > 0 and on_top:
            assert inc[e] == 0 and dec[e] == 0
    critical = critical_places(g, result)
    tops = [c for c in result.circuits if abs(c.ratio - lam) <= 1e-9 * max(lam, 1e-12)]
    if len(tops) == 1 and critical.sum() == len(tops[0].places):
        c = tops[0]
        m_c = int(sum(g.tokens[p] for p in c.places))
        for p in c.places:
            assert inc[n + p] == pytest.approx(1 / m_c) and dec[n + p] == pytest.approx(1 / m_c)
        for t in c.transitions:
            assert inc[t] == pytest.approx(1 / m_c) and dec[t] == pytest.approx(1 / m_c)


def test_fixed_model_paths_give_the_exact_derivatives(tmp_path: Path) -> None:
    """The recursion's path derivatives of a fixed model equal the exact ones: a line of three
    stations whose bottleneck (3.5, one token on its self-loop) has derivative 1, everything
    else 0 (positive slack); and models/packaging_cell.toml, whose critical circuit is the
    carrier loop of four carriers (1/4 on it; λ = 17.375 worked in the file)."""
    ids = ["s0", "s1", "s2"]
    model = write_model(tmp_path, "line", list(zip(ids, [2.0, 3.5, 1.0], strict=True)),
                        [(t, t, 1, 0.0) for t in ids]
                        + [("s0", "s1", 0, 0.25), ("s1", "s2", 0, 0.0), ("s2", "s0", 2, 0.0)])
    from cyclecheck.simulate.modelfile import load_model

    for m in (model, load_model(MODELS / "packaging_cell.toml")):
        est = estimate_cycle_time(m, seed=1, firings=2000, replications=2)
        exact = fixed_sensitivity(m.graph(), howard(m.graph()))
        want = np.r_[exact.transitions_increase, exact.places_increase]
        np.testing.assert_allclose(est.sensitivity.derivative, want, atol=2e-3)
    assert want.max() == pytest.approx(0.25)
    assert np.count_nonzero(want) == 8  # four transitions and four places of the loop


def test_tied_critical_circuits_have_one_sided_derivatives() -> None:
    """Two circuits of ratio 2 through transition 0 (one token each): slowing any element
    raises λ at rate 1; making 1 or 2 faster does not help, making 0 faster does (it lies on
    both)."""
    g = EventGraph([1.0, 1.0, 1.0], [0, 1, 0, 2], [1, 0, 2, 0], [0, 1, 0, 1], [0.0] * 4)
    s = fixed_sensitivity(g, howard(g))
    assert s.transitions_increase.tolist() == [1.0, 1.0, 1.0]
    assert s.transitions_decrease.tolist() == [1.0, 0.0, 0.0]
    assert s.places_decrease.tolist() == [0.0] * 4 and not s.differentiable


# ---------------------------------------------------------------------------------------------
# the bottleneck under variability


def _line(tmp_path: Path, stations: int, slow: int) -> Any:
    """A line of single servers with buffers of three between neighbours (a kanban loop each),
    all fixed at 1 min except station ``slow``: exponential of mean 1.2 min."""
    ids = [f"s{i}" for i in range(stations)]
    transitions = [(t, _exp(1.2) if i == slow else 1.0) for i, t in enumerate(ids)]
    places = [(t, t, 1, 0.0) for t in ids]
    for a, b in itertools.pairwise(ids):
        places += [(a, b, 0, 0.0), (b, a, 3, 0.0)]
    return write_model(tmp_path, "line", transitions, places)


def test_the_bottleneck_is_the_slow_random_station(tmp_path: Path) -> None:
    """A line of 30 stations whose only random station is also the slowest: it is the
    bottleneck, its derivative interval lies above every other element's, and it is the
    critical circuit of the mean durations too; the document's old local share is kept under
    its own name, and criticality is the share on the critical path."""
    model = _line(tmp_path, 30, 12)
    doc = analyze(model, seed=2, firings=4000, replications=10, precision=0.05)
    b = doc["bottleneck"]
    assert b["element"] == "transition" and b["id"] == "s12"
    assert b["on_mean_critical_circuit"] is True
    others = [e for e in doc["sensitivity"] if e.get("id") != "s12"]
    assert b["ci"][0] > max(e["ci"][1] for e in others)
    assert b["faster_10_percent"]["cycle_time"] < doc["cycle_time"]
    crit = doc["criticality"]["transitions"]
    assert max(crit, key=crit.get) in {"s12", "s11"}  # on the path: the bottleneck or its feeder
    assert "setter_share" in doc and "local" in doc["setter_share"]["definition"]


def test_a_bottleneck_is_told_apart_only_when_it_is(tmp_path: Path) -> None:
    """Three equal exponential stations in a closed loop with two customers: by symmetry
    every station has the same derivative of the cycle time (Gordon & Newell 1967: the
    throughput is symmetric in the stations' means), so the bottleneck named by the largest
    point estimate is not told apart from the runner-up; make one station 60 % slower and it
    is (its interval above every other). Seeds fixed: the first claim holds for this seed as
    for most (95 % intervals of equal quantities overlap but for rare draws)."""
    (tmp_path / "b").mkdir(), (tmp_path / "s").mkdir()
    balanced = analyze(closed_line(tmp_path / "b", [1.0, 1.0, 1.0], [1, 1, 0]), seed=3,
                       firings=4000, replications=10, precision=0.05, quiet=True)
    b = balanced["bottleneck"]
    assert b["distinguishable"] is False and "runner_up" in b
    assert "not told apart from" in analysis_text(balanced)
    slow = analyze(closed_line(tmp_path / "s", [1.0, 1.6, 1.0], [1, 1, 0]), seed=3,
                   firings=4000, replications=10, precision=0.05, quiet=True)
    b = slow["bottleneck"]
    assert b["id"] == "s1" and b["distinguishable"] is True
    assert "not told apart" not in analysis_text(slow)


def test_variability_can_move_the_bottleneck(tmp_path: Path) -> None:
    """The graph of test_max_of_a_fixed_and_a_random_hold with c = 1 and X exponential of
    mean θ = 0.95: the mean durations make the fixed hold critical (1 > 0.95), but the
    derivatives are, by the formulas worked there, dλ/dc = 1 − e^{−c/θ} = 0.651 and
    dλ/dθ = (1 + c/θ) e^{−c/θ} = 0.716: the random hold is the bottleneck, off the critical
    circuit of the mean durations, and the terminal says so."""
    model = write_model(tmp_path, "max", [("t", 0.0)],
                        [("t", "t", 1, 1.0), ("t", "t", 1, _exp(0.95))])
    doc = analyze(model, seed=4, firings=20_000, replications=10, precision=0.05)
    b = doc["bottleneck"]
    assert (b["element"], b["index"]) == ("place", 1)
    assert b["on_mean_critical_circuit"] is False
    assert doc["critical_places"] == [0]
    assert b["ci"][0] <= 0.716 <= b["ci"][1] or abs(b["derivative"] - 0.716) < 0.01
    assert "variability moved the bottleneck" in analysis_text(doc)


# ---------------------------------------------------------------------------------------------
# unbounded places


def _open_line(tmp_path: Path, arrive: Any, serve: Any, name: str = "open") -> Any:
    model = write_model(tmp_path, name, [("arrive", arrive), ("serve", serve)],
                        [("arrive", "arrive", 1, 0.0), ("serve", "serve", 1, 0.0),
                         ("arrive", "serve", 0, 0.0)])
    return model


@pytest.mark.parametrize(("arrive", "serve", "growth"), [(4.0, 6.0, 1 / 12), (6.0, 6.0, None),
                                                         (6.0, 4.0, None)])
def test_fixed_open_line_buffers(tmp_path: Path, arrive: float, serve: float,
                                 growth: float | None) -> None:
    """By hand: arrivals every 4 min into a 6-min server leave 1/4 − 1/6 = 1/12 parts per min
    (5 per hour) in the buffer; equal or faster service keeps it bounded. ``check`` still
    agrees (the simulation is right) but says why the model is unstable."""
    model = _open_line(tmp_path, arrive, serve)
    doc = analyze(model)
    if growth is None:
        assert doc["unbounded_places"] == []
        return
    [u] = doc["unbounded_places"]
    assert (u["index"], u["from"], u["to"], u["status"]) == (2, "arrive", "serve", "unstable")
    assert u["growth_rate"] == pytest.approx(growth, rel=1e-12)
    assert "WARNING" in analysis_text(doc)
    checked = check(model)
    assert checked["comparison"]["verdict"] == "agrees"
    assert any(r.startswith("unstable: the buffer arrive → serve") for r in
               checked["comparison"]["reasons"])


@pytest.mark.parametrize(("arrival_mean", "service_mean", "status"),
                         [(4.0, 6.0, "unstable"), (6.0, 3.0, None), (3.0, 3.0, "critical load")])
def test_mm1_line_is_unstable_exactly_when_arrivals_outpace_service(
        tmp_path: Path, arrival_mean: float, service_mean: float, status: str | None) -> None:
    """Kleinrock (1975) §3.2: an M/M/1 queue is stable iff λ < μ. Arrival rate 1/4 above the
    service rate 1/6: unstable, growing at 1/4 − 1/6; rate 1/6 below 1/3: bounded; equal
    rates: the queue is null recurrent, listed as critical load."""
    model = _open_line(tmp_path, _exp(arrival_mean), _exp(service_mean))
    doc = analyze(model, seed=9, firings=5000, replications=10, precision=0.05)
    entries = doc["unbounded_places"]
    if status is None:
        assert entries == []
        return
    [u] = entries
    assert u["status"] == status
    if status == "unstable":
        assert u["growth_rate"] == pytest.approx(1 / arrival_mean - 1 / service_mean, rel=0.1)


# ---------------------------------------------------------------------------------------------
# utilization per server


def test_two_servers_in_turn_saturated_are_always_busy(tmp_path: Path) -> None:
    """A transition with a self-loop of two tokens and nothing else: both servers work all the
    time (by hand: firing k waits only for firing k − 2), utilization 1 and 2 busy servers for
    fixed durations; never above 1 on either engine. With random durations the two servers
    end their last jobs apart, by about sd(d)·sqrt(K) (3·sqrt(2000) ≈ 134 against a run of
    3000): the share counted up to the later end is 1 − O(1/sqrt(K))."""
    for spec, tolerance in ((3.0, 1e-12), (_exp(3.0), 0.05)):
        model = write_model(tmp_path, "pair", [("m", spec)], [("m", "m", 2, 0.0)])
        for engine in ("recursion", "simpy"):
            est = estimate_cycle_time(model, engine, seed=1, firings=2000, replications=3)
            assert est.utilization[0] <= 1.0
            assert est.utilization[0] == pytest.approx(1.0, abs=tolerance)
            assert est.busy_servers[0] == pytest.approx(2.0, abs=2 * tolerance)


def test_utilization_of_a_fed_pair_and_of_a_transition_without_self_loop(tmp_path: Path) -> None:
    """Arrivals every 4 into two servers in turn of duration 3: 0.75 busy servers, 0.375 per
    server (by hand); a transition without a self-loop has no utilization (null) and its mean
    number of firings in progress instead (0.5: duration 2 every 4)."""
    model = write_model(tmp_path, "fed", [("a", 4.0), ("m", 3.0), ("free", 2.0)],
                        [("a", "a", 1, 0.0), ("m", "m", 2, 0.0), ("a", "m", 0, 0.0),
                         ("a", "free", 0, 0.0)])
    doc = simulate(model, firings=4000, replications=2)
    assert doc["utilization"]["m"] == pytest.approx(0.375, rel=1e-3)
    assert doc["busy_servers"]["m"] == pytest.approx(0.75, rel=1e-3)
    assert doc["utilization"]["free"] is None and doc["servers"]["free"] is None
    assert doc["busy_servers"]["free"] == pytest.approx(0.5, rel=1e-3)
    text = simulation_text(doc)
    assert "37.5 %  (2 servers in turn)" in text and "no self-loop" in text


# ---------------------------------------------------------------------------------------------
# the terminal


def test_terminal_lists_say_how_many_rows_were_left_out(tmp_path: Path) -> None:
    """Every cut list ends with "and N more"; the bottleneck's numbers carry the unit."""
    model = _line(tmp_path, 8, 3)
    doc = analyze(model, seed=2, firings=2000, replications=5, precision=0.1)
    doc["time_unit"] = "min"
    text = analysis_text(doc)
    total = 8 + 8 + 2 * 7
    assert f"and {total - 5} more" in text
    assert "min), to first order" in text


def test_docstring_examples() -> None:
    """The examples of the new algebra modules run and print what they show."""
    import doctest

    from cyclecheck.algebra import eventgraph, sensitivity, stability

    for module in (eventgraph, sensitivity, stability):
        result = doctest.testmod(module)
        assert result.attempted > 0 and result.failed == 0, module.__name__
