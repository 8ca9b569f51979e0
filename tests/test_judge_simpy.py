"""The judge on logs of an independent SimPy model (tests/simpy_lines.py: Resource-based, not
the project's engine) of models/closed_line_exponential.toml.

Sources: the closed cyclic line of exponential FIFO single servers is the timed event graph of
the model file (Baccelli et al. 1992, ch. 2) and its throughput is Gordon & Newell's (1967),
the model's Lyapunov exponent 2.6311 min (Buzen 1973, worked in the model file). The
false-alarm and power bounds are binomial (100 independent seeded logs); the power the README
states for this model comes from the judge's own formula (Montgomery, Design and Analysis of
Experiments, ch. 2; see simulate/gof.py), 1,500 firings per station giving a detectable change
of 9.7 % at the level of Holm's first step.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from cyclecheck.simulate.judge import judge_log
from cyclecheck.simulate.logcycle import model_cycle_time
from cyclecheck.simulate.modelfile import load_model
from scipy import stats

from tests.simpy_lines import CLOSED_LINE_MEANS, closed_line_log

MODEL = Path(__file__).resolve().parents[1] / "models" / "closed_line_exponential.toml"
README_FIRINGS = 1500
"""The log length the README states for catching a 10 % slower station of this model."""
LOGS = 100


@pytest.fixture(scope="module")
def closed_line():
    model = load_model(MODEL)
    # computed once for every judgement below; Gordon-Newell's 2.6311 lies in its interval
    return model, model_cycle_time(model, precision=0.003, seed=11)


def _slower(station: int, factor: float) -> tuple[float, ...]:
    means = list(CLOSED_LINE_MEANS)
    means[station] *= factor
    return tuple(means)


def test_model_estimate_matches_gordon_newell(closed_line):
    _model, estimate = closed_line
    lo = estimate.estimate[0] - 3 * estimate.se[0]
    hi = estimate.estimate[0] + 3 * estimate.se[0]
    assert lo <= 2.6311 <= hi


def test_one_consistent_log_agrees_and_a_much_slower_station_is_caught(closed_line):
    model, estimate = closed_line
    doc = judge_log(model, closed_line_log(1, README_FIRINGS), model_estimate=estimate)
    assert doc["verdict"] == "agrees", doc["reasons"]
    row = next(r for r in doc["transitions"] if r["id"] == "s2")
    assert row["detectable_change"] == pytest.approx(0.0971, abs=0.0005)
    doc = judge_log(model, closed_line_log(2, README_FIRINGS, _slower(1, 1.3)),
                    model_estimate=estimate)
    assert doc["verdict"] == "disagrees"
    assert doc["reasons"][0].startswith('transition "s2": the duration mean test')


@pytest.mark.slow
def test_false_alarms_stay_within_alpha(closed_line):
    """100 consistent logs at alpha = 0.05: the family-wise error is at most 0.05 (Holm), so
    the number of "disagrees" is Binomial(100, <= 0.05): more than 10 has probability 1.2 %."""
    model, estimate = closed_line
    alarms = sum(judge_log(model, closed_line_log(1000 + s, README_FIRINGS),
                           model_estimate=estimate)["verdict"] == "disagrees"
                 for s in range(LOGS))
    assert stats.binom.sf(10, LOGS, 0.05) < 0.012
    print(f"false alarms: {alarms} of {LOGS}")
    assert alarms <= 10


@pytest.mark.slow
def test_a_ten_percent_slower_station_is_caught_at_the_readme_length(closed_line):
    """One station (s2) 10 % slower and logs of the README's length: caught at least 80
    times in 100 (the power of 0.8 the README promises)."""
    model, estimate = closed_line
    caught = sum(judge_log(model, closed_line_log(2000 + s, README_FIRINGS, _slower(1, 1.1)),
                           model_estimate=estimate)["verdict"] == "disagrees"
                 for s in range(LOGS))
    print(f"caught: {caught} of {LOGS}")
    assert caught >= 80


@pytest.mark.slow
def test_a_ten_percent_slower_station_is_caught_in_rounded_logs(closed_line):
    """The same logs with their times rounded to 0.01, as a simulator may write them: the
    rounding is found and allowed for (conservatively), and s2 10 % slower is still caught at
    least 80 times in 100 at the README's length (measured 91, as unrounded: the mean test,
    unmoved by rounding, carries the power)."""
    model, estimate = closed_line
    caught = 0
    for s in range(LOGS):
        log = closed_line_log(2000 + s, README_FIRINGS, _slower(1, 1.1))
        log[["start", "time"]] = log[["start", "time"]].round(2)
        doc = judge_log(model, log, model_estimate=estimate)
        assert doc["time_resolution"] == pytest.approx(0.01) and doc["violations"] == 0
        caught += doc["verdict"] == "disagrees"
    print(f"caught in rounded logs: {caught} of {LOGS}")
    assert caught >= 80


@pytest.mark.slow
def test_every_station_slower_without_start_is_caught_by_the_cycle_time(closed_line):
    """Every station 15 % slower, no start column: the cycle time of the log is 15 % above
    the model's, and the cycle-time test rejects it in (at least 19 of) 20 logs."""
    model, estimate = closed_line
    means = tuple(m * 1.15 for m in CLOSED_LINE_MEANS)
    hits = 0
    for s in range(20):
        doc = judge_log(model, closed_line_log(3000 + s, README_FIRINGS, means, start=False),
                        model_estimate=estimate)
        cycle = [t for t in doc["tests"] if t["kind"] == "cycle time"]
        assert len(cycle) == 1
        hits += cycle[0]["rejected"]
    print(f"cycle-time test rejects: {hits} of 20")
    assert hits >= 19
