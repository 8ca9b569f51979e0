"""Tests of the event-log judge (simulate/tracecheck.py).

The judge checks each logged firing against the firing-time equations of a timed event graph,

    x_t(k) = d_t(k) + max over places p = (u -> t) of term_p(k),
    term_p(k) = 0 if k <= m_p else x_u(k - m_p) + h_p(k),

(Baccelli, Cohen, Olsder, Quadrat, *Synchronization and Linearity*, Wiley 1992, ch. 2), using
the logged times of the other firings. Logs come from the project's SimPy engine; the exact
cycle time of the example models is recomputed here by brute force over the circuits of the
graph (networkx.simple_cycles), as the maximum over circuits of weight / tokens (same source,
ch. 2). The slow independent twin of the vectorized judge is :func:`twin_judge` below: a plain
dict-and-loop evaluation of the same equations, compared on hypothesis-generated logs.
"""

from __future__ import annotations

import itertools
import json
import math
import tempfile
from collections import defaultdict
from pathlib import Path
from unittest import mock

import networkx as nx
import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from cyclecheck.simulate import eventlog, tracecheck
from cyclecheck.simulate.cli import main
from cyclecheck.simulate.durations import parse_spec
from cyclecheck.simulate.engine import simulate_event_graph
from cyclecheck.simulate.errors import ModelError
from cyclecheck.simulate.eventlog import EventLog, read_log
from cyclecheck.simulate.judge import judge_events, judge_log
from cyclecheck.simulate.modelfile import load_model, write_csv_model
from cyclecheck.simulate.tracecheck import support_bounds
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.judge_models import late
from tests.strategies import live_event_graphs

MODELS = sorted((Path(__file__).resolve().parent.parent / "models").glob("*.toml"))
PACKAGING = next(p for p in MODELS if p.name == "packaging_cell.toml")

# An invented line with random durations and holds: exponential feeder, gamma press, a
# parallel inspection (no self-loop: firings may overtake each other) with a uniform duration,
# and a fixed packer; its input holds are fixed, so it is judged exactly.
RANDOM_MODEL = """
[model]
name = "Inspection line"
time_unit = "min"

[[transitions]]
id = "feed"
duration = { dist = "exponential", mean = 2.0 }

[[transitions]]
id = "press"
duration = { dist = "gamma", mean = 3.0, cv = 0.5 }

[[transitions]]
id = "inspect"
duration = { dist = "uniform", low = 2.0, high = 9.0 }

[[transitions]]
id = "pack"
duration = 1.0

[[places]]
from = "feed"
to = "feed"
tokens = 1

[[places]]
from = "press"
to = "press"
tokens = 1

[[places]]
from = "pack"
to = "pack"
tokens = 1

[[places]]
from = "feed"
to = "press"
hold = { dist = "exponential", mean = 0.5 }

[[places]]
from = "press"
to = "feed"
tokens = 2

[[places]]
from = "press"
to = "inspect"
hold = 1.0

[[places]]
from = "inspect"
to = "pack"

[[places]]
from = "pack"
to = "inspect"
tokens = 3
"""


# ---------------------------------------------------------------------------------------------
# helpers


def engine_log(model, n_firings=None, *, seed=None, until=None) -> pd.DataFrame:
    """The SimPy engine's event log (with its start column) for a model."""
    sampler = model.sampler(seed) if seed is not None else None
    return simulate_event_graph(model.graph(), sampler, n_firings=n_firings,
                                until=until).event_log()


def judge_frame(model, frame, tmp_path, name="log.csv", **kw):
    path = tmp_path / name
    frame.to_csv(path, index=False)
    return judge_log(model, path, **kw)


def row_of(frame, transition, firing):
    hit = frame.index[(frame["transition"] == transition) & (frame["firing"] == firing)]
    assert len(hit) == 1
    return hit[0]


@pytest.fixture
def random_model(tmp_path):
    path = tmp_path / "inspection.toml"
    path.write_text(RANDOM_MODEL, encoding="utf-8")
    return load_model(path)


def brute_force_cycle_time(model) -> float:
    """max over circuits c of (sum of holds + durations) / tokens, by enumeration.

    Baccelli et al. 1992, ch. 2: the cycle time of a strongly connected timed event graph is its
    maximum circuit ratio; with several components the largest ratio of any circuit is the
    largest cycle time. Parallel places are enumerated explicitly (networkx lists node cycles).
    """
    graph = model.graph()
    arcs = defaultdict(list)
    for p in range(graph.n_places):
        arcs[(int(graph.source[p]), int(graph.target[p]))].append(p)
    g = nx.DiGraph(list(arcs))
    best = -math.inf
    for cycle in nx.simple_cycles(g):
        steps = list(zip(cycle, cycle[1:] + cycle[:1], strict=True))
        for choice in itertools.product(*(arcs[a] for a in steps)):
            weight = sum(graph.hold[p] + graph.duration[graph.target[p]] for p in choice)
            tokens = sum(int(graph.tokens[p]) for p in choice)
            best = max(best, weight / tokens)
    return best


# ---------------------------------------------------------------------------------------------
# logs of the engine agree


FIXED_MODELS = [p for p in MODELS if not load_model(p).is_random]
RANDOM_MODELS = [p for p in MODELS if load_model(p).is_random]


@pytest.mark.parametrize("model_path", FIXED_MODELS, ids=lambda p: p.stem)
@pytest.mark.parametrize("with_start", [True, False])
def test_engine_logs_of_example_models_agree(model_path, with_start, tmp_path):
    """A log of the SimPy engine obeys the equations exactly; its growth rate is the cycle time."""
    model = load_model(model_path)
    frame = engine_log(model, 400).sample(frac=1.0, random_state=3)  # order must not matter
    if not with_start:
        frame = frame.drop(columns="start")
    doc = judge_frame(model, frame, tmp_path)
    assert doc["verdict"] == "agrees", doc["reasons"]
    assert doc["violations"] == 0 and doc["first_violations"] == []
    assert doc["firings_checked"] == doc["firings_logged"] == 400 * model.n_transitions
    assert doc["firings_unjudged"] == 0 and doc["complete"]
    assert doc["checks"] == "exact" and doc["cycle_time_basis"] == "exact"
    lam = brute_force_cycle_time(model)
    assert doc["cycle_time"] == pytest.approx(lam, rel=1e-9)
    # (x(K) - x(K/2)) / (K/2) approaches λ like O(1/K) once periodic (Baccelli et al. ch. 3)
    assert doc["cycle_time_from_log"] == pytest.approx(lam, rel=1e-2)
    assert doc["time_unit"] == model.time_unit
    assert doc["notes"] == []  # nothing unjudged, missing or unsettled


@pytest.mark.parametrize("model_path", RANDOM_MODELS, ids=lambda p: p.stem)
def test_engine_logs_of_random_example_models_agree(model_path, tmp_path):
    """With the model's sampler the engine's log lies within every bound of the draws."""
    model = load_model(model_path)
    doc = judge_frame(model, engine_log(model, 300, seed=7), tmp_path)
    assert doc["verdict"] == "agrees", doc["reasons"]
    assert doc["checks"] == "bounds" and doc["complete"]
    assert doc["cycle_time_basis"].startswith("lower bound")
    assert doc["cycle_time"] == pytest.approx(brute_force_cycle_time(model), rel=1e-9)


def test_time_cut_and_start_cut_logs_agree(tmp_path):
    """A log cut at a time, or without its first firings, is not a violation."""
    model = load_model(PACKAGING)
    cut = engine_log(model, until=1000.0)
    doc = judge_frame(model, cut, tmp_path)
    assert doc["verdict"] == "agrees" and doc["complete"] and doc["firings_missing"] == 0
    late = engine_log(model, 100)
    late = late[late["firing"] > 20]
    doc = judge_frame(model, late, tmp_path)
    assert doc["verdict"] == "agrees"
    assert not doc["complete"]
    assert doc["firings_unjudged"] > 0
    assert doc["firings_checked"] + doc["firings_unjudged"] == len(late)
    assert any("not judged" in n for n in doc["notes"])


@pytest.mark.parametrize("n_firings", [12, 15, 40])
def test_cycle_time_from_log_is_the_growth_rate_over_the_second_half(n_firings, tmp_path):
    """max over t of (x_t(K) - x_t(K // 2)) / (K - K // 2), recomputed here with pandas; a note
    when it is more than 1 % from the model's cycle time (common practice, no source)."""
    model = load_model(PACKAGING)
    frame = engine_log(model, n_firings)
    wide = frame.pivot(index="firing", columns="transition", values="time")
    half = n_firings // 2
    rate = ((wide.loc[n_firings] - wide.loc[half]) / (n_firings - half)).max()
    doc = judge_frame(model, frame, tmp_path)
    assert doc["cycle_time_from_log"] == pytest.approx(rate, rel=1e-12)
    off = abs(rate / doc["cycle_time"] - 1) > tracecheck.RATE_NOTE_TOLERANCE
    assert any("growth rate of the log has not settled" in n for n in doc["notes"]) == off
    assert doc["verdict"] == "agrees"


def test_too_few_firings_give_no_cycle_time_from_log(tmp_path):
    model = load_model(PACKAGING)
    doc = judge_frame(model, engine_log(model, tracecheck.MIN_RATE_FIRINGS - 1), tmp_path)
    assert doc["verdict"] == "agrees" and doc["cycle_time_from_log"] is None
    doc = judge_frame(model, engine_log(model, tracecheck.MIN_RATE_FIRINGS), tmp_path)
    assert doc["cycle_time_from_log"] is not None


# ---------------------------------------------------------------------------------------------
# logs that disagree


@pytest.mark.parametrize("shift", [2.5, -2.5])
def test_shifted_completion_disagrees_and_names_the_firing(shift, tmp_path):
    """One completion moved: that firing is the first violation, with the time it should have."""
    model = load_model(PACKAGING)
    frame = engine_log(model, 60).drop(columns="start")
    i = row_of(frame, "cap", 12)
    true_time = float(frame.loc[i, "time"])
    frame.loc[i, "time"] += shift
    doc = judge_frame(model, frame, tmp_path)
    assert doc["verdict"] == "disagrees"
    first = doc["first_violations"][0]
    assert (first["transition"], first["firing"], first["rule"]) == ("cap", 12, "completion")
    assert first["time"] == true_time + shift
    assert first["expected"] == true_time
    assert doc["reasons"][0].startswith(f'firing 12 of "cap" completed at {true_time + shift:g} '
                                        f"but the model gives {true_time:g}")
    assert "duration is 9" in doc["reasons"][0]
    assert doc["violations"] == len(doc["first_violations"]) >= 1


def test_shifted_completion_with_start_is_a_duration_violation(tmp_path):
    model = load_model(PACKAGING)
    frame = engine_log(model, 60)
    i = row_of(frame, "label", 30)
    frame.loc[i, "time"] += 0.75
    doc = judge_frame(model, frame, tmp_path)
    first = doc["first_violations"][0]
    assert (first["transition"], first["firing"], first["rule"]) == ("label", 30, "duration")
    assert first["expected"] == frame.loc[i, "start"] + 10.0
    assert "took 10.75" in first["message"] and "its duration is 10" in first["message"]


@pytest.mark.parametrize("clock", [0.0, 1e7])
def test_tolerance_is_relative_to_the_duration_not_the_clock(clock, tmp_path):
    """A completion is compared with start + duration within tolerance · max(1, duration):
    the packer's 14 s completes 0.5 tolerance late (equal) or 2 tolerances late (not), at
    time 10^3 as at time 10^7 (its last firing: no logged firing waits for it)."""
    model = load_model(PACKAGING)
    frame = engine_log(model, 60)
    if clock:
        frame = late(frame, 600_000, clock)
    i = row_of(frame, "pack", frame.loc[frame["transition"] == "pack", "firing"].max())
    x = float(frame.loc[i, "time"])
    for factor, verdict in ((0.5, "agrees"), (2.0, "disagrees")):
        shifted = frame.copy()
        shifted.loc[i, "time"] = x + factor * 1e-6 * 14.0
        assert judge_frame(model, shifted, tmp_path)["verdict"] == verdict
    assert judge_frame(model, shifted, tmp_path, tolerance=1e-5)["verdict"] == "agrees"


def test_a_slip_is_caught_late_in_a_long_run(tmp_path):
    """A filler of 15 s in a log of the 12 s cell, 1000 firings each near time 10^7 (the last
    firings of a run of 6·10^5): every judged fill is a duration violation, as early in a run.
    Its control, the 12 s cell's own log at the same clock, agrees."""
    model = load_model(PACKAGING)
    text = PACKAGING.read_text(encoding="utf-8")
    assert text.count("duration = 12.0") == 1
    (tmp_path / "slow.toml").write_text(text.replace("duration = 12.0", "duration = 15.0"),
                                        encoding="utf-8")
    slow = load_model(tmp_path / "slow.toml")
    for source, verdict in ((model, "agrees"), (slow, "disagrees")):
        frame = late(engine_log(source, 1000), 600_000, 1e7 - 1e4)
        doc = judge_frame(model, frame, tmp_path)
        assert doc["verdict"] == verdict, doc["reasons"][:2]
        if verdict == "disagrees":
            rules = {(v["transition"], v["rule"]) for v in doc["first_violations"]}
            assert rules == {("fill", "duration")}
            assert doc["violations"] >= 990
            assert "took 15" in doc["reasons"][0] and "its duration is 12" in doc["reasons"][0]


def test_missing_firing_is_a_violation(tmp_path):
    model = load_model(PACKAGING)
    frame = engine_log(model, 40)
    frame = frame.drop(index=row_of(frame, "cap", 7))
    doc = judge_frame(model, frame, tmp_path)
    assert doc["verdict"] == "disagrees" and not doc["complete"]
    assert doc["firings_missing"] == 1
    missing = [v for v in doc["first_violations"] if v["rule"] == "missing"]
    assert [(v["transition"], v["firing"]) for v in missing] == [("cap", 7)]
    assert any(r.startswith('firing 7 of "cap" is missing while firing 8 is logged [log line ')
               for r in doc["reasons"])
    # cap 8 (single server), label 7 and fill 9 (2 buffer slots) wait for it: not judged
    assert doc["firings_unjudged"] == 3
    assert doc["violations"] == 1


def test_many_violations_are_counted_and_capped(tmp_path):
    model = load_model(PACKAGING)
    frame = engine_log(model, 100).drop(columns="start")
    frame.loc[frame["transition"] == "pack", "time"] *= 1.01
    doc = judge_frame(model, frame, tmp_path)
    assert doc["violations"] > tracecheck.MAX_LISTED
    assert len(doc["first_violations"]) == tracecheck.MAX_LISTED
    assert doc["reasons"][-1] == (f"... and {doc['violations'] - tracecheck.MAX_LISTED} more "
                                  "violations")
    times = [min(v["time"], v["expected"]) for v in doc["first_violations"]]
    assert times == sorted(times)  # listed by the earlier of logged and expected time


# ---------------------------------------------------------------------------------------------
# random durations


def test_support_bounds():
    """Supports of the laws (Johnson, Kotz, Balakrishnan, Continuous Univariate Distributions,
    1994-95: exponential, gamma, log-normal, Weibull on [0, inf); uniform and triangular on
    [low, high]); a resampled list on [min, max]; a law that is not random is one point."""
    cases = [
        ({"dist": "exponential", "mean": 2.0}, (0.0, math.inf)),
        ({"dist": "gamma", "mean": 2.0, "cv": 0.3}, (0.0, math.inf)),
        ({"dist": "erlang", "mean": 2.0, "k": 3}, (0.0, math.inf)),
        ({"dist": "lognormal", "mean": 2.0, "cv": 0.3}, (0.0, math.inf)),
        ({"dist": "weibull", "mean": 2.0, "shape": 1.5}, (0.0, math.inf)),
        ({"dist": "normal", "mean": 5.0, "sd": 1.0, "truncate": True}, (0.0, math.inf)),
        ({"dist": "uniform", "low": 1.5, "high": 4.0}, (1.5, 4.0)),
        ({"dist": "triangular", "low": 1.0, "mode": 2.0, "high": 7.0}, (1.0, 7.0)),
        ({"dist": "empirical", "values": [3.0, 1.0, 8.0]}, (1.0, 8.0)),
        ({"dist": "empirical", "values": [3.0]}, (3.0, 3.0)),
        ({"dist": "uniform", "low": 2.0, "high": 2.0}, (2.0, 2.0)),
        (4.5, (4.5, 4.5)),
    ]
    for spec, bounds in cases:
        assert support_bounds(parse_spec(spec)) == bounds, spec
    # every draw lies in the support
    rng = np.random.default_rng(np.random.SeedSequence(11))
    for spec, (lo, hi) in cases:
        draws = parse_spec(spec).sample(rng, 2000)
        assert draws.min() >= lo and draws.max() <= hi, spec


@pytest.mark.parametrize("with_start", [True, False])
def test_engine_log_of_random_model_agrees(random_model, with_start, tmp_path):
    frame = engine_log(random_model, 400, seed=3)
    if not with_start:
        frame = frame.drop(columns="start")
    doc = judge_frame(random_model, frame, tmp_path)
    assert doc["verdict"] == "agrees", doc["reasons"]
    assert doc["checks"] == "bounds" and doc["complete"]
    assert doc["cycle_time_basis"].startswith("lower bound")
    # the lower bound of the mean durations (Baccelli et al. 1992, ch. 8) holds on this path
    assert doc["cycle_time"] == pytest.approx(brute_force_cycle_time(random_model), rel=1e-9)
    assert doc["cycle_time_from_log"] >= doc["cycle_time"] * (1 - tracecheck.RATE_NOTE_TOLERANCE)


def test_random_log_faster_than_the_model_disagrees(tmp_path):
    """A ring of exponential stations with no holds: every bound is [0, inf), so a log with all
    times scaled by 0.4 still obeys them, but grows faster than the lower bound λ(E[d])
    (Baccelli et al. 1992, ch. 8). No firing breaks a bound; the statistics reject it: the
    durations (known without a start column, as every hold is fixed) are 60 % too short and the
    cycle time is far below the model's. (Before the statistics this log was judged "agrees".)"""
    ring = ["[model]", 'name = "Ring"']
    for i, mean in enumerate([1.0, 2.0, 1.5]):
        ring += ["[[transitions]]", f'id = "s{i}"', f'duration = {{ dist = "exponential", '
                 f"mean = {mean} }}"]
    for i in range(3):
        ring += ["[[places]]", f'from = "s{i}"', f'to = "s{i}"', "tokens = 1",
                 "[[places]]", f'from = "s{i}"', f'to = "s{(i + 1) % 3}"',
                 f"tokens = {1 if i == 2 else 0}"]
    path = tmp_path / "ring.toml"
    path.write_text("\n".join(ring) + "\n", encoding="utf-8")
    model = load_model(path)
    frame = engine_log(model, 300, seed=5)
    frame[["start", "time"]] *= 0.4
    doc = judge_frame(model, frame.drop(columns="start"), tmp_path, precision=0.02)
    assert doc["verdict"] == "disagrees" and doc["violations"] == 0
    assert doc["cycle_time"] == pytest.approx(4.5)  # one pallet: 1 + 2 + 1.5
    assert doc["cycle_time_from_log"] < doc["cycle_time"] * 0.6
    rejected = {(t["kind"], t["id"]) for t in doc["tests"] if t["rejected"]}
    assert ("cycle time", "s0, s1, s2") in rejected
    assert {("duration mean", f"s{i}") for i in range(3)} <= rejected
    assert any(r.startswith('component "s0, s1, s2": the cycle time test') for r in doc["reasons"])


def test_time_cut_random_log_with_overtaking_agrees(random_model, tmp_path):
    """Inspections overtake each other: a firing still running at the cut is not a violation."""
    frame = engine_log(random_model, seed=3, until=151.0)
    doc = judge_frame(random_model, frame, tmp_path)
    assert doc["verdict"] == "agrees"
    assert doc["firings_missing"] >= 1 and not doc["complete"]
    assert any("still have been in progress" in n for n in doc["notes"])


def test_random_firing_missing_while_needed_is_a_violation(random_model, tmp_path):
    frame = engine_log(random_model, 50, seed=3)
    frame = frame.drop(index=row_of(frame, "inspect", 20))
    doc = judge_frame(random_model, frame, tmp_path)
    assert doc["verdict"] == "disagrees"
    (v,) = doc["first_violations"]
    assert (v["transition"], v["firing"], v["rule"]) == ("inspect", 20, "missing")
    assert 'firing 20 of "pack", logged, needed it' in v["message"]


def test_random_firing_starting_before_its_tokens_disagrees(random_model, tmp_path):
    frame = engine_log(random_model, 50, seed=3)
    k = 30
    # press k waits for feed k (hold at least 0: exponential) and press k - 1 (self-loop)
    earliest = max(frame.loc[row_of(frame, "feed", k), "time"],
                   frame.loc[row_of(frame, "press", k - 1), "time"])
    i = row_of(frame, "press", k)
    frame.loc[i, "start"] = earliest - 0.5
    doc = judge_frame(random_model, frame, tmp_path)
    assert doc["verdict"] == "disagrees"
    first = doc["first_violations"][0]
    assert (first["transition"], first["firing"], first["rule"]) == ("press", k, "start")
    assert first["expected"] == earliest
    assert "before its tokens were available" in first["message"]
    assert doc["violations"] == 1


def test_random_firing_starting_later_than_its_fixed_holds_allow(random_model, tmp_path):
    """The holds into "inspect" are fixed, so its start is exact even if its duration is not."""
    frame = engine_log(random_model, 50, seed=3)
    i = row_of(frame, "inspect", 25)
    exact_start = float(frame.loc[i, "start"])
    frame.loc[i, ["start", "time"]] += 0.5  # same duration, started later
    doc = judge_frame(random_model, frame, tmp_path)
    first = doc["first_violations"][0]
    assert (first["transition"], first["firing"], first["rule"]) == ("inspect", 25, "start")
    assert first["expected"] == exact_start
    assert "later than its tokens allowed" in first["message"]


@pytest.mark.parametrize("duration, words", [(1.0, "less than the shortest duration 2"),
                                             (9.5, "more than the longest duration 9")])
def test_random_duration_outside_its_support(random_model, duration, words, tmp_path):
    frame = engine_log(random_model, 50, seed=3)
    i = row_of(frame, "inspect", 10)
    frame.loc[i, "time"] = frame.loc[i, "start"] + duration
    doc = judge_frame(random_model, frame, tmp_path)
    first = doc["first_violations"][0]
    assert (first["transition"], first["firing"], first["rule"]) == ("inspect", 10, "duration")
    assert words in first["message"] and "uniform" in first["message"]


def test_random_log_without_start_too_early(random_model, tmp_path):
    frame = engine_log(random_model, 50, seed=3).drop(columns="start")
    i = row_of(frame, "pack", 20)
    frame.loc[i, "time"] = frame.loc[row_of(frame, "inspect", 20), "time"] + 0.5  # d = 1
    doc = judge_frame(random_model, frame, tmp_path)
    first = doc["first_violations"][0]
    assert (first["transition"], first["firing"], first["rule"]) == ("pack", 20, "completion")


# ---------------------------------------------------------------------------------------------
# bad logs are input errors


HEADER = "transition,firing,time\n"
BAD_LOGS = [
    ("unknown", HEADER + "fill,1,12\ncapp,1,22.5\n", "line 3",
     'unknown transition "capp"; did you mean "cap"?'),
    ("column", "transition,firing,tme\nfill,1,12\n", "line 1",
     'missing column "time"; did you mean "tme"?'),
    ("twice", "transition,firing,time,time\nfill,1,12,12\n", "line 1",
     'column "time" appears twice'),
    ("empty", "", None, "the event log is empty"),
    ("blank", "\n  \n", None, "the event log is empty"),
    ("header only", HEADER, "line 1", "the event log is empty: it has a header but no firing"),
    ("fraction", HEADER + "fill,1,12\nfill,1.5,24\n", "line 3",
     'firing must be an integer >= 1 (firings count from 1), got "1.5"'),
    ("zero", HEADER + "fill,0,12\n", "line 2", 'firing must be an integer >= 1'),
    ("word", HEADER + "fill,one,12\n", "line 2", 'firing must be a number, got "one"'),
    ("duplicate", HEADER + "fill,1,12\ncap,1,22.5\nfill,1,12\n", "line 4",
     'firing 1 of "fill" is logged twice (first at line 2)'),
    ("time text", HEADER + "fill,1,soon\n", "line 2", 'time must be a number, got "soon"'),
    ("time nan", HEADER + "fill,1,12\nfill,2,nan\n", "line 3",
     "time must be a finite number >= 0, got nan"),
    ("negative", HEADER + "fill,1,-12\n", "line 2", "time must be a finite number >= 0"),
    ("empty cell", HEADER + "fill,1,\n", "line 2", "time is empty"),
    ("empty id", HEADER + ",1,3\n", "line 2", "transition is empty"),
    ("start late", "transition,firing,start,time\nfill,1,13,12\n", "line 2",
     "start 13 is after the completion time 12"),
    ("ragged", HEADER + "fill,1,12\nfill,2,24,7\n", "line 3", "cannot read the event log"),
    ("blank lines count", HEADER + "\nfill,1,12\n\ncapp,1,3\n", "line 5", 'unknown transition'),
    ("many", HEADER + "fill,-1,12\nfill,-2,24\n", "line 2", "(1 more rows like this)"),
]


@pytest.mark.parametrize("name, text, item, rule", BAD_LOGS, ids=[b[0] for b in BAD_LOGS])
def test_bad_logs_raise_model_error(name, text, item, rule, tmp_path):
    model = load_model(PACKAGING)
    path = tmp_path / "bad.csv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ModelError) as info:
        judge_log(model, path)
    err = info.value
    assert err.file == path and err.item == item
    assert rule in err.rule
    assert str(err) == ": ".join(str(p) for p in (path, item, err.rule) if p is not None)


@pytest.mark.parametrize("data, rule, item", [
    (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "is a binary file", None),
    (HEADER.encode() + b"fill,1,12\ncap,1,\xff\n", "is not UTF-8 text (byte 0xff)", "line 3"),
])
def test_binary_and_non_utf8_logs(data, rule, item, tmp_path):
    path = tmp_path / "log.csv"
    path.write_bytes(data)
    with pytest.raises(ModelError) as info:
        read_log(load_model(PACKAGING), path)
    assert info.value.file == path and info.value.item == item and rule in info.value.rule
    assert str(info.value).startswith(f"{path}: ")


def test_missing_file_directory_and_bad_tolerance(tmp_path):
    model = load_model(PACKAGING)
    for path, rule in ((tmp_path / "nope.csv", "no such file"), (tmp_path, "is a directory")):
        with pytest.raises(ModelError, match=rule) as info:
            judge_log(model, path)
        assert info.value.file == path
    path = tmp_path / "log.csv"
    engine_log(model, 20).to_csv(path, index=False)
    for bad in (-1e-6, math.nan, math.inf, "1e-6"):
        with pytest.raises(ModelError) as info:
            judge_log(model, path, tolerance=bad)
        assert str(info.value).startswith("tolerance: must be a finite number >= 0")


def test_log_of_which_nothing_can_be_judged(tmp_path):
    model = load_model(PACKAGING)
    path = tmp_path / "log.csv"
    path.write_text(HEADER + "cap,1,10.5\n", encoding="utf-8")  # cap 1 waits for fill 1
    with pytest.raises(ModelError, match="no firing of the event log can be judged") as info:
        judge_log(model, path)
    assert info.value.file == path


def test_table_in_memory_and_extra_columns(tmp_path):
    model = load_model(PACKAGING)
    frame = engine_log(model, 30)
    frame["machine_state"] = "ok"  # extra columns are ignored
    doc = judge_frame(model, frame[["machine_state", "time", "firing", "transition"]], tmp_path)
    assert doc["verdict"] == "agrees"
    log = EventLog.from_frame(model, frame)
    assert judge_events(model, log)["verdict"] == "agrees"
    frame.loc[3, "transition"] = "packer"
    with pytest.raises(ModelError) as info:
        EventLog.from_frame(model, frame)
    assert info.value.item == "row 4" and 'did you mean "pack"?' in info.value.rule


# ---------------------------------------------------------------------------------------------
# the command line


def test_cli_exit_codes(tmp_path):
    model = load_model(PACKAGING)
    good, bad, broken = tmp_path / "good.csv", tmp_path / "bad.csv", tmp_path / "broken.csv"
    frame = engine_log(model, 40)
    frame.to_csv(good, index=False)
    frame.loc[row_of(frame, "fill", 5), "time"] += 1.0
    frame.to_csv(bad, index=False)
    broken.write_text(HEADER + "fil,1,12\n", encoding="utf-8")
    runner = CliRunner()

    result = runner.invoke(main, ["trace", str(PACKAGING), str(good)])
    assert result.exit_code == 0, result.output
    assert "AGREES" in result.stdout
    result = runner.invoke(main, ["trace", str(PACKAGING), str(good), "--json"])
    assert result.exit_code == 0 and json.loads(result.stdout)["verdict"] == "agrees"

    result = runner.invoke(main, ["trace", str(PACKAGING), str(bad)])
    assert result.exit_code == 1
    assert "DISAGREES" in result.stdout and 'firing 5 of "fill"' in result.stdout

    result = runner.invoke(main, ["trace", str(PACKAGING), str(broken)])
    assert result.exit_code == 2
    assert f"{broken}: line 2: unknown transition" in result.stderr
    assert "Traceback" not in result.stderr + result.stdout
    result = runner.invoke(main, ["trace", str(PACKAGING), str(good), "--tolerance", "-1"])
    assert result.exit_code == 2 and "tolerance" in result.stderr


# ---------------------------------------------------------------------------------------------
# the slow twin


ULPS = 16 * 2.0**-52  # tracecheck.FLOAT_ULPS units in the last place


def close(a, b, ref, tol):
    """The rule of the module doc: a and b are reached from the logged time ref; equal when
    |a - b| <= tol * max(1, |a - ref|, |b - ref|) + 16 ulps of the larger time."""
    return abs(a - b) <= tol * max(1.0, abs(a - ref), abs(b - ref)) + ULPS * max(abs(a), abs(b))


def twin_judge(graph, rows, with_start, tol):
    """Plain-Python judge of a log of a model with fixed numbers.

    ``rows`` are ``(t, k, time, start)``. Returns the violating firings ``{(t, k, rule)}``, the
    firings not judged and the firings missing inside the logged range of a transition.
    """
    logged = {(t, k): (x, s) for t, k, x, s in rows}
    inputs = defaultdict(list)
    for p in range(graph.n_places):
        inputs[int(graph.target[p])].append(p)
    violations, unjudged = set(), set()
    for (t, k), (x, s) in logged.items():
        terms = []  # (availability of the token, the completion it came from)
        for p in inputs[t]:
            u, m = int(graph.source[p]), int(graph.tokens[p])
            if k <= m:
                terms.append((0.0, 0.0))
            elif (u, k - m) in logged:
                done = logged[(u, k - m)][0]
                terms.append((done + float(graph.hold[p]), done))
            else:
                terms = None
                break
        if terms is None:
            unjudged.add((t, k))
            continue
        ready, d = max(a for a, _ in terms), float(graph.duration[t])
        ref = max(r for a, r in terms if a == ready)  # the binding token's origin
        if with_start:
            if not close(s, ready, ref, tol):
                violations.add((t, k, "start"))
            elif not close(x, s + d, s, tol):
                violations.add((t, k, "duration"))
        elif not close(x, ready + d, ref, tol):
            violations.add((t, k, "completion"))
    missing = set()
    for t in range(graph.n_transitions):
        numbers = sorted(k for (u, k) in logged if u == t)
        for a, b in itertools.pairwise(numbers):
            missing.update((t, j) for j in range(a + 1, b))
    return violations, unjudged, missing


@st.composite
def perturbed_logs(draw):
    graph = draw(live_event_graphs(max_transitions=5, max_places=10))
    n_firings = draw(st.integers(1, 8))
    run = simulate_event_graph(graph, n_firings=n_firings)
    rows = [(t, k + 1, float(run.time[k, t]), float(run.start[k, t]))
            for k in range(n_firings) for t in range(graph.n_transitions)]
    keep = draw(st.lists(st.booleans(), min_size=len(rows), max_size=len(rows)))
    if not any(keep):
        keep[0] = True
    deltas = st.sampled_from([0.0, 0.0, 0.0, 1e-9, 0.5, -0.5, 3.0, -100.0])
    out = []
    for (t, k, x, s), kept in zip(rows, keep, strict=True):
        if kept:
            x2 = max(0.0, x + draw(deltas))
            s2 = min(max(0.0, s + draw(deltas)), x2)
            out.append((t, k, x2, s2))
    return graph, out, draw(st.booleans()), draw(st.sampled_from(["dense", "ranked", "lexsort"]))


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(perturbed_logs())
def test_vectorized_judge_matches_plain_twin(case):
    graph, rows, with_start, path = case
    tol = 1e-6
    with tempfile.TemporaryDirectory() as tmp:
        model = load_model(write_csv_model(tmp, "twin", graph.duration, graph.source,
                                           graph.target, graph.tokens, graph.hold))
    ids = model.transition_ids
    frame = pd.DataFrame({"transition": [ids[t] for t, *_ in rows],
                          "firing": [k for _, k, *_ in rows],
                          "time": [x for *_, x, _ in rows]})
    if with_start:
        frame["start"] = [s for *_, s in rows]
    violations, unjudged, missing = twin_judge(graph, rows, with_start, tol)
    patches = {"dense": {"DENSE_FACTOR": tracecheck.DENSE_FACTOR}, "ranked": {"DENSE_FACTOR": 0},
               "lexsort": {"DENSE_FACTOR": 0}}[path]
    key_limit = 0 if path == "lexsort" else eventlog.KEY_LIMIT  # the sort key lives in eventlog
    with mock.patch.multiple(tracecheck, **patches), mock.patch.object(eventlog, "KEY_LIMIT",
                                                                       key_limit):
        log = EventLog.from_frame(model, frame)
        if len(unjudged) == len(rows) and not missing:
            with pytest.raises(ModelError, match="can be judged"):
                judge_events(model, log, tolerance=tol)
            return
        doc = judge_events(model, log, tolerance=tol, max_listed=10**6, partial=True)
        absent = set(range(graph.n_transitions)) - {t for t, *_ in rows}
        whole = judge_events(model, log, tolerance=tol, partial=False)
        assert whole["verdict"] == ("agrees" if doc["verdict"] == "agrees" and not absent
                                    else "disagrees")
        assert {ids.index(a) for a in whole["absent_transitions"]} == absent
    got = {(ids.index(v["transition"]), v["firing"], v["rule"])
           for v in doc["first_violations"] if v["rule"] != "missing"}
    got_missing = {(ids.index(v["transition"]), j) for v in doc["first_violations"]
                   if v["rule"] == "missing" for j in range(v["firing"], v["next_logged"])}
    assert got == violations
    assert got_missing == missing
    assert doc["violations"] == len(violations) + len(missing)
    assert doc["firings_unjudged"] == len(unjudged)
    assert doc["firings_checked"] == len(rows) - len(unjudged)
    assert doc["firings_missing"] == len(missing)
    assert doc["verdict"] == ("agrees" if not violations and not missing else "disagrees")
