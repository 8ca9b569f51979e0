"""Sample result documents for the renderer tests, built by hand from invented scenarios.

``fixed_document()``: a bakery tray loop with fixed durations (6 transitions, 13 places).
Three trays circulate: mix → proof → bake → cool → wrap and back to mix, with a quality check
beside the cooling rack. Worked by hand with the semantics of DESIGN.md:

* circuits: the tray loop has durations 4 + 9 + 12 + 6 + 3 = 34 and holds 0 + 1 + 0.5 + 0 + 5
  = 6.5 on 3 tokens, so λ = 40.5 / 3 = 13.5 min; the loop through the check gives
  (4 + 9 + 12 + 2.5 + 3 + 1 + 5) / 3 = 12.17; the single oven 12 / 1; the two proofing
  cabinets 9 / 2 = 4.5. The tray loop is critical, throughput 1 / 13.5 = 0.07407 per min.
* eigenvector (completion times, mix = 0): proof 9, bake 22, check 24.5, cool 28.5, wrap 31.5.
  Periodic start = eigenvector − duration, shifted so that the first start is 0.
* slack of a place: how much its hold may grow before λ changes (check → wrap: 4, the oven's
  self-loop: 13.5 − 12 = 1.5); slack of a transition likewise for its duration.

``random_document()``: a shuttle loop of four stops with two vehicles and random dwell and
travel times. The lower bound is the cycle time of the mean durations: (3 + 1 + 2 + 2 + 4 +
2.5 + 3 + 2) / 2 = 9.75 min. The estimates, intervals and replication values are invented
(plausible, not computed): the renderer only shows them. As in a real `check`, the recursion
ran 10 replications and SimPy 5 of its own, and the sample paths were compared on SimPy's 5.

The transients are computed with a small recursion below (the semantics of DESIGN.md), so
that the figure shows a realistic curve; the renderer tests do not depend on its values.
"""

from __future__ import annotations

import copy
from itertools import pairwise
from typing import Any

__all__ = ["fixed_document", "line_document", "loop_document", "press_document",
           "random_document", "transient", "unstable_document", "wide_document"]


def transient(
    transitions: list[str],
    duration: dict[str, float],
    places: list[dict[str, Any]],
    cycle_time: float,
    firings: int,
) -> dict[str, list[float]]:
    """x_t(k) − kλ for k = 1..firings, from x_t(k) = d_t + max_p [x_u(k − m_p) + h_p]."""
    x: dict[str, list[float]] = {t: [] for t in transitions}
    for k in range(1, firings + 1):
        # Token-free places need their source's firing k first: iterate to a fixed point
        # (the token-free graph is acyclic, so len(transitions) passes are enough).
        current: dict[str, float] = {}
        for _ in range(len(transitions)):
            for t in transitions:
                terms = [0.0]
                for p in places:
                    if p["to"] != t:
                        continue
                    if k <= p["tokens"]:
                        terms.append(0.0)
                    elif p["tokens"] == 0:
                        terms.append(current.get(p["from"], 0.0) + p["mean_hold"])
                    else:
                        terms.append(x[p["from"]][k - p["tokens"] - 1] + p["mean_hold"])
                current[t] = duration[t] + max(terms)
        for t in transitions:
            x[t].append(current[t])
    return {t: [round(v - (k + 1) * cycle_time, 6) for k, v in enumerate(x[t])]
            for t in transitions}


def _place(index: int, source: str, target: str, tokens: int, hold: float | str,
           mean_hold: float, label: str = "") -> dict[str, Any]:
    return {"index": index, "from": source, "to": target, "tokens": tokens,
            "hold": str(hold), "mean_hold": mean_hold, "label": label}


def _sensitive(element: str, key: str | int, derivative: float,
               ci: tuple[float, float] | None = None) -> dict[str, Any]:
    """One entry of ``sensitivity``; a fixed model's interval is [d, d]."""
    entry: dict[str, Any] = {"element": element, "derivative": derivative,
                             "ci": list(ci) if ci else [derivative, derivative]}
    entry["id" if element == "transition" else "index"] = key
    return entry


_VERSIONS = {"cyclecheck": "0.1.0", "python": "3.11.7", "numpy": "1.26.4", "scipy": "1.11.4",
             "simpy": "4.1.1", "matplotlib": "3.8.2"}


def fixed_document() -> dict[str, Any]:
    """A `check` result for the bakery tray loop (fixed durations)."""
    durations = {"mix": 4.0, "proof": 9.0, "bake": 12.0, "check": 2.5, "cool": 6.0, "wrap": 3.0}
    labels = {"mix": "Dough mixer", "proof": "Proofing cabinets", "bake": "Tunnel oven",
              "check": "Quality check", "cool": "Cooling rack", "wrap": "Wrapping"}
    places = [
        _place(0, "mix", "proof", 0, 0, 0.0, "dough to cabinet"),
        _place(1, "proof", "bake", 0, 1, 1.0, "transfer"),
        _place(2, "bake", "cool", 0, 0.5, 0.5, "rack"),
        _place(3, "bake", "check", 0, 0, 0.0, "sample"),
        _place(4, "cool", "wrap", 0, 0, 0.0),
        _place(5, "check", "wrap", 0, 0, 0.0, "release"),
        _place(6, "wrap", "mix", 3, 5, 5.0, "tray return"),
        _place(7, "mix", "mix", 1, 0, 0.0, "one mixer"),
        _place(8, "proof", "proof", 2, 0, 0.0, "two cabinets"),
        _place(9, "bake", "bake", 1, 0, 0.0, "one oven"),
        _place(10, "check", "check", 1, 0, 0.0),
        _place(11, "cool", "cool", 1, 0, 0.0),
        _place(12, "wrap", "wrap", 1, 0, 0.0),
    ]
    names = list(durations)
    eigen = {"mix": 0.0, "proof": 9.0, "bake": 22.0, "check": 24.5, "cool": 28.5, "wrap": 31.5}
    start = {t: eigen[t] - durations[t] + 4.0 for t in names}
    lam = 13.5
    curve = transient(names, durations, places, lam, 18)
    # dλ/d(value): the tray loop is the only critical circuit (3 tokens), so each of its
    # elements adds 1/3 of its growth to λ and every other element 0 (the derivative of the
    # largest circuit ratio; Baccelli et al., Synchronization and Linearity, 1992, §2.5).
    on_loop_t = {"mix", "proof", "bake", "cool", "wrap"}
    on_loop_p = {0, 1, 2, 4, 6}
    sensitivity = (
        [_sensitive("transition", t, 1 / 3 if t in on_loop_t else 0.0) for t in names]
        + [_sensitive("place", p["index"], 1 / 3 if p["index"] in on_loop_p else 0.0)
           for p in places])
    return {
        "document": "cyclecheck-result",
        "schema_version": 1,
        "command": "check",
        "command_line": "cyclecheck check models/bakery.toml --seed 7 --report bakery.html",
        "created": "2026-12-01T23:00:00Z",
        "versions": dict(_VERSIONS),
        "model": {
            "name": "Bakery tray loop",
            "time_unit": "min",
            "description": "Three trays circulate through mixing, proofing, baking, cooling "
                           "and wrapping; a quality check samples every batch.",
            "path": "models/bakery.toml",
            "sha256": "3f1c9a0e7b2d4c6f8a1e3b5d7c9f0a2b4d6e8f0a1c3e5b7d9f1a3c5e7b9d1f3a",
            "n_transitions": 6,
            "n_places": 13,
            "is_random": False,
            "transitions": [{"id": t, "label": labels[t], "duration": f"{durations[t]:g}",
                             "mean_duration": durations[t]} for t in names],
            "places": places,
        },
        "settings": {"seed": 7, "precision": 0.01, "replications": 1,
                     "firings_per_replication": 2000, "warmup": 0},
        "analysis": {
            "cycle_time": lam,
            "cycle_time_ci": [lam, lam],
            "throughput": 1 / lam,
            "cycle_time_by_transition": dict.fromkeys(names, lam),
            "critical_circuits": [["mix", "proof", "bake", "cool", "wrap"]],
            "cyclicity": 3,
            "bounds": None,
            "firings_simulated": 0,  # the eigenvalue needs no firings
            "exact": True,
            "strongly_connected": True,
            "eigenvector": eigen,
            "slack": {
                "transitions": {"mix": 0.0, "proof": 0.0, "bake": 0.0, "check": 4.0,
                                "cool": 0.0, "wrap": 0.0},
                "places": [0.0, 0.0, 0.0, 4.0, 0.0, 4.0, 0.0, 9.5, 18.0, 1.5, 11.0, 7.5, 10.5],
            },
            "certificate": {"checked": True, "circuit_ratio": lam, "eigen_residual": 0.0,
                            "max_reduced_weight": 0.0,
                            "text": "The tray loop has ratio 40.5/3 = 13.5 and the eigenvector "
                                    "satisfies A ⊗ v = 13.5 ⊗ v with residual 0."},
            "charpoly": {"corners": [[13.5, 3], [12.0, 1], [7.5, 1], [4.5, 2], [3.0, 1]],
                         "terms": [[8, 0.0], [5, 40.5], [4, 52.5], [3, 60.0], [1, 69.0],
                                   [0, 72.0]]},
            "transient_firings": 3,
            "criticality": None,
            "utilization": {"mix": 0.2963, "proof": 0.3333, "bake": 0.8889, "check": 0.1852,
                            "cool": 0.4444, "wrap": 0.2222},
            "servers": {"mix": 1, "proof": 2, "bake": 1, "check": 1, "cool": 1, "wrap": 1},
            "sensitivity": sensitivity,
            "bottleneck": {**copy.deepcopy(sensitivity[2]),
                           "cycle_time_if_10_percent_faster": 39.3 / 3},
            "unbounded_places": [],
        },
        "simulation": {
            "cycle_time": lam, "cycle_time_ci": [lam, lam], "throughput": 1 / lam,
            "firings_simulated": 12000,
            "utilization": {"mix": 0.2963, "proof": 0.3333, "bake": 0.8889, "check": 0.1852,
                            "cool": 0.4444, "wrap": 0.2222},
            "criticality": None,
        },
        "comparison": {
            "verdict": "agrees",
            "reasons": ["SimPy cycle time 13.5 equals the max-plus eigenvalue 13.5.",
                        "All 12,000 firing times are identical in both engines."],
            "sample_path": {"identical": True, "max_relative_difference": 0.0,
                            "firings_compared": 12000, "replications_compared": 1},
        },
        "figures": {
            "transient": {"k": list(range(1, 19)), "recursion": curve,
                          "simulation": copy.deepcopy(curve)},
            "schedule": {"cycle_time": lam, "start": start, "duration": dict(durations)},
            "running_estimate": None,
            "replication_estimates": None,
        },
    }


def random_document() -> dict[str, Any]:
    """A `check` result for a shuttle loop with random dwell and travel times."""
    transitions = [
        {"id": "dock", "label": "Loading dock", "duration": "gamma(mean=3, cv=0.5)",
         "mean_duration": 3.0},
        {"id": "gate", "label": "Gate", "duration": "1", "mean_duration": 1.0},
        {"id": "yard", "label": "Yard stop", "duration": "exponential(mean=2)",
         "mean_duration": 2.0},
        {"id": "depot", "label": "Depot", "duration": "uniform(low=1, high=3)",
         "mean_duration": 2.0},
    ]
    places = [
        _place(0, "dock", "gate", 1, "lognormal(mean=4, cv=0.3)", 4.0, "outbound link"),
        _place(1, "gate", "yard", 0, 2.5, 2.5, "yard road"),
        _place(2, "yard", "depot", 0, "gamma(mean=3, cv=0.4)", 3.0, "depot road"),
        _place(3, "depot", "dock", 1, 2, 2.0, "return link"),
        _place(4, "dock", "dock", 1, 0, 0.0, "one berth"),
    ]
    names = [t["id"] for t in transitions]
    mean = {t["id"]: t["mean_duration"] for t in transitions}
    lam = 10.62
    curve = transient(names, mean, places, 9.75, 24)
    replications = [10.48, 10.71, 10.55, 10.93, 10.37, 10.66, 10.81, 10.52, 10.74, 10.44]
    sim_replications = [10.39, 10.82, 10.47, 10.70, 10.52]
    sim_lam = 10.58
    work = [2000 * i for i in range(1, 11)]
    estimate = [10.91, 10.74, 10.69, 10.65, 10.61, 10.64, 10.63, 10.61, 10.62, 10.62]
    half = [0.62, 0.44, 0.36, 0.31, 0.28, 0.26, 0.24, 0.22, 0.21, 0.21]
    return {
        "document": "cyclecheck-result",
        "schema_version": 1,
        "command": "check",
        "command_line": "cyclecheck check models/shuttle.toml --seed 42 --precision 0.02",
        "created": "2026-12-02T09:30:00Z",
        "versions": dict(_VERSIONS),
        "model": {
            "name": "Shuttle loop",
            "time_unit": "min",
            "description": "Two shuttles serve a loading dock, a gate, a yard stop and a depot.",
            "path": "models/shuttle.toml",
            "sha256": "9b2e4d6f8a0c1e3f5a7b9d1c3e5f7a9b0d2f4a6c8e0b2d4f6a8c0e2b4d6f8a0c",
            "n_transitions": 4,
            "n_places": 5,
            "is_random": True,
            "transitions": transitions,
            "places": places,
        },
        "settings": {"seed": 42, "precision": 0.02, "replications": 10,
                     "firings_per_replication": 2000, "warmup": 200},
        "analysis": {
            "cycle_time": lam,
            "cycle_time_ci": [10.41, 10.83],
            "throughput": 1 / lam,
            "cycle_time_by_transition": dict.fromkeys(names, lam),
            "critical_circuits": [["dock", "gate", "yard", "depot"]],
            "cyclicity": None,
            "bounds": {"lower": 9.75, "upper": 12.64},
            "firings_simulated": 80000,
            "exact": False,
            "strongly_connected": True,
            "eigenvector": None,
            "slack": {"transitions": dict.fromkeys(names, 0.0),
                      "places": [0.0, 0.0, 0.0, 0.0, 16.5]},
            "certificate": {"checked": False, "circuit_ratio": 9.75, "eigen_residual": 0.0,
                            "max_reduced_weight": 0.0,
                            "text": "Bounds only: the lower bound is the cycle time of the "
                                    "mean durations."},
            "charpoly": {"skipped": "durations are random"},
            # A random model has no periodic regime: no transient_firings, only the transient
            # of the mean durations under its own name (not the model's).
            "mean_value_transient_firings": 5,
            "criticality": {"transitions": {"dock": 0.91, "gate": 0.88, "yard": 0.86,
                                            "depot": 0.87},
                            "places": [0.88, 0.86, 0.87, 0.84, 0.07],
                            "definition": "place: share of its target's firings whose start "
                                          "it set; transition: the largest share among its "
                                          "output places"},
            "utilization": {"dock": 0.2825, "gate": 0.0942, "yard": 0.1883, "depot": 0.1883},
            "servers": {"dock": 1, "gate": None, "yard": None, "depot": None},
            # Invented (plausible, not computed): the loop is critical and the dock's
            # variable loading weighs most; the berth's self-loop hardly matters.
            "sensitivity": [
                _sensitive("transition", "dock", 0.61, (0.55, 0.67)),
                _sensitive("transition", "gate", 0.50, (0.46, 0.54)),
                _sensitive("transition", "yard", 0.57, (0.50, 0.64)),
                _sensitive("transition", "depot", 0.52, (0.47, 0.57)),
                _sensitive("place", 0, 0.55, (0.49, 0.61)),
                _sensitive("place", 1, 0.50, (0.46, 0.54)),
                _sensitive("place", 2, 0.54, (0.48, 0.60)),
                _sensitive("place", 3, 0.50, (0.46, 0.54)),
                _sensitive("place", 4, 0.02, (0.0, 0.05)),
            ],
            "bottleneck": {**_sensitive("transition", "dock", 0.61, (0.55, 0.67)),
                           "cycle_time_if_10_percent_faster": 10.44,
                           "cycle_time_if_10_percent_faster_ci": [10.23, 10.65]},
            "unbounded_places": [],
        },
        # SimPy runs 5 replications of its own (fewer than the recursion's 10).
        "simulation": {
            "cycle_time": sim_lam, "cycle_time_ci": [10.27, 10.95], "throughput": 1 / sim_lam,
            "firings_simulated": 40000, "exact": False,
            "utilization": {"dock": 0.2831, "gate": 0.0945, "yard": 0.1887, "depot": 0.1881},
            "criticality": None,
        },
        "comparison": {
            "verdict": "agrees",
            "reasons": ["The SimPy firing times equal the recursion's on the same random draws.",
                        "The intervals of both engines overlap; the estimate lies between "
                        "the bounds 9.75 and 12.64."],
            "sample_path": {"identical": True, "max_relative_difference": 0.0,
                            "firings_compared": 40000, "replications_compared": 5},
        },
        "figures": {
            "transient": {"k": list(range(1, 25)), "recursion": curve,
                          "simulation": copy.deepcopy(curve)},
            "schedule": None,
            "running_estimate": {"work": work, "estimate": estimate,
                                 "low": [e - h for e, h in zip(estimate, half, strict=True)],
                                 "high": [e + h for e, h in zip(estimate, half, strict=True)]},
            "replication_estimates": {"recursion": replications,
                                      "simulation": sim_replications},
        },
    }


def wide_document() -> dict[str, Any]:
    """The shuttle loop with every optional column of the transitions table at once.

    Long labels and long duration texts, the utilization of both engines, slack,
    criticality, periodic start times (a schedule, as a fixed model with equal cycle times
    has) and the cycle time of each transition (the graph is flagged not strongly connected):
    the widest tables the page draws. Only the layout is tested with it.
    """
    document = random_document()
    labels = ["Loading dock with two berths and a ramp", "Security gate and weighbridge",
              "Yard stop beside the container stacks", "Depot, maintenance and charging"]
    for transition, label in zip(document["model"]["transitions"], labels, strict=True):
        transition["label"] = label
    document["model"]["transitions"][1]["duration"] = "triangular(low=0.5, mode=1, high=1.5)"
    document["model"]["transitions"][3]["duration"] = "empirical(values=[1.5, 2, 2.5])"
    names = [t["id"] for t in document["model"]["transitions"]]
    analysis = document["analysis"]
    analysis["strongly_connected"] = False
    analysis["cycle_time_by_transition"] = {"dock": 10.62, "gate": 10.62, "yard": 10.6234,
                                            "depot": 10.6234}
    start = {"dock": 0.0, "gate": 7.0, "yard": 10.5, "depot": 15.5}
    document["figures"]["schedule"] = {"cycle_time": 9.75, "start": start,
                                       "duration": {t["id"]: t["mean_duration"]
                                                    for t in document["model"]["transitions"]}}
    assert set(start) == set(names)
    return document


def _frame(command: str, name: str, unit: str, random: bool, transitions: list[dict[str, Any]],
           places: list[dict[str, Any]], results: dict[str, Any]) -> dict[str, Any]:
    """A document of ``analyze`` with its results at the top level, as ``analyze --json``
    prints them (the page maps them into the ``analysis`` section)."""
    return {
        "document": "cyclecheck-result", "schema_version": 1, "command": command,
        "command_line": f"cyclecheck {command} models/example.toml",
        "created": "2026-12-03T08:00:00Z", "versions": dict(_VERSIONS),
        "model": {"name": name, "time_unit": unit, "n_transitions": len(transitions),
                  "n_places": len(places), "is_random": random, "transitions": transitions,
                  "places": places},
        "settings": {"seed": 3, "precision": 0.01 if random else None},
        **results,
    }


def press_document() -> dict[str, Any]:
    """`analyze` of two presses in series with a buffer of two parts, random press B.

    Mean durations worked by hand: press A's self-loop 10 / 1, press B's 9.5 / 1, the buffer
    loop (10 + 9.5) / 2 = 9.75, so the mean durations put the bottleneck at press A (critical
    circuit [A], λ 10 s). Under variability, B's exponential times and the small buffer make B
    the element the cycle time depends on most. The estimate, intervals and sensitivities are
    invented (plausible, not computed); utilization = mean duration / cycle time for a single
    server (the utilization law U = X·D, Denning & Buzen, "The operational analysis of queueing
    network models", Computing Surveys 10(3), 1978): 10 / 12.9 = 0.7752, 9.5 / 12.9 = 0.7364.
    """
    transitions = [{"id": "A", "label": "Press A", "duration": "10", "mean_duration": 10.0},
                   {"id": "B", "label": "Press B", "duration": "exponential(mean=9.5)",
                    "mean_duration": 9.5}]
    places = [_place(0, "A", "A", 1, 0, 0.0, "press A free"),
              _place(1, "B", "B", 1, 0, 0.0, "press B free"),
              _place(2, "A", "B", 0, 0, 0.0, "buffer"),
              _place(3, "B", "A", 2, 0, 0.0, "free slots")]
    lam = 12.9
    sensitivity = [_sensitive("transition", "A", 0.32, (0.26, 0.38)),
                   _sensitive("transition", "B", 0.81, (0.74, 0.88)),
                   _sensitive("place", 0, 0.31, (0.25, 0.37)),
                   _sensitive("place", 1, 0.78, (0.71, 0.85)),
                   _sensitive("place", 2, 0.05, (0.01, 0.09)),
                   _sensitive("place", 3, 0.04, (0.0, 0.08))]
    return _frame("analyze", "Two presses", "s", True, transitions, places, {
        "cycle_time": lam, "cycle_time_ci": [12.7, 13.1], "throughput": 1 / lam,
        "cycle_time_by_transition": {"A": lam, "B": lam}, "critical_circuits": [["A"]],
        "critical_places": [0], "bounds": {"lower": 10.0, "upper": 14.2},
        "firings_simulated": 200000, "exact": False, "strongly_connected": True,
        "slack": {"transitions": {"A": 0.0, "B": 0.25}, "places": [0.0, 0.5, 0.5, 0.5]},
        "utilization": {"A": 0.7752, "B": 0.7364}, "servers": {"A": 1, "B": 1},
        "sensitivity": sensitivity,
        "bottleneck": {**copy.deepcopy(sensitivity[1]), "cycle_time_if_10_percent_faster": 12.0,
                       "cycle_time_if_10_percent_faster_ci": [11.8, 12.2]},
        "unbounded_places": []})


def unstable_document() -> dict[str, Any]:
    """`analyze` of an open station fed faster than it serves (fixed durations).

    Worked by hand: parts arrive every 12 s (a source with a self-loop), the station serves one
    in 15 s, so the buffer between them gains 1/12 − 1/15 = 1/60 part per second, 60 per hour.
    The station's cycle time is 15 s, the source's 12 s; shortening the service by 10 % gives
    13.5 s; dλ/d(service) = 1 (the station's self-loop holds one token)."""
    transitions = [{"id": "arrive", "label": "Arrivals", "duration": "12",
                    "mean_duration": 12.0},
                   {"id": "serve", "label": "Station", "duration": "15", "mean_duration": 15.0}]
    places = [_place(0, "arrive", "arrive", 1, 0, 0.0), _place(1, "serve", "serve", 1, 0, 0.0),
              _place(2, "arrive", "serve", 0, 0, 0.0, "queue")]
    sensitivity = [_sensitive("transition", "arrive", 0.0), _sensitive("transition", "serve", 1.0),
                   _sensitive("place", 0, 0.0), _sensitive("place", 1, 1.0),
                   _sensitive("place", 2, 0.0)]
    return _frame("analyze", "Open station", "s", False, transitions, places, {
        "cycle_time": 15.0, "cycle_time_ci": [15.0, 15.0], "throughput": 1 / 15,
        "cycle_time_by_transition": {"arrive": 12.0, "serve": 15.0},
        "critical_circuits": [["serve"]], "cyclicity": 1, "firings_simulated": 0,
        "exact": True, "strongly_connected": False,
        "utilization": {"arrive": 1.0, "serve": 1.0}, "servers": {"arrive": 1, "serve": 1},
        "sensitivity": sensitivity,
        "bottleneck": {**copy.deepcopy(sensitivity[1]),
                       "cycle_time_if_10_percent_faster": 13.5},
        "unbounded_places": [{"index": 2, "from": "arrive", "to": "serve",
                              "growth_rate": 1 / 12 - 1 / 15}]})


def line_document(n: int) -> dict[str, Any]:
    """`analyze` of a line of ``n`` single-server stations with buffers of two parts.

    Station s17 takes 3 min, the others 1 to 1.75 min: its self-loop (3 / 1 token) is the
    only critical circuit, since a buffer loop takes at most (3 + 1.75) / 2 = 2.375 per token
    (Baccelli et al. 1992, §2.5: λ is the largest circuit ratio), so λ = 3 min, dλ/d(s17) = 1
    and 0 for every other element. The slacks are invented (they label the drawing only).
    """
    ids = [f"s{i}" for i in range(1, n + 1)]
    duration = {t: 3.0 if t == "s17" else 1.0 + 0.25 * (i % 4) for i, t in enumerate(ids)}
    places: list[dict[str, Any]] = []
    for t in ids:
        places.append(_place(len(places), t, t, 1, 0, 0.0))
    for a, b in pairwise(ids):
        places.append(_place(len(places), a, b, 0, 0, 0.0))
        places.append(_place(len(places), b, a, 2, 0, 0.0))
    slack = [0.0 if p["from"] == p["to"] == "s17" else round(((i * 37) % 23) / 4, 2)
             for i, p in enumerate(places)]
    critical_place = ids.index("s17") if "s17" in ids else None
    sensitivity = ([_sensitive("transition", t, 1.0 if t == "s17" else 0.0) for t in ids]
                   + [_sensitive("place", p["index"], 1.0 if p["index"] == critical_place
                                 else 0.0) for p in places])
    transitions = [{"id": t, "duration": f"{duration[t]:g}", "mean_duration": duration[t]}
                   for t in ids]
    results: dict[str, Any] = {
        "cycle_time": 3.0, "cycle_time_ci": [3.0, 3.0], "throughput": 1 / 3,
        "cycle_time_by_transition": dict.fromkeys(ids, 3.0),
        "critical_circuits": [["s17"]] if "s17" in ids else [],
        "firings_simulated": 0, "exact": True, "strongly_connected": True,
        "slack": {"transitions": {t: 0.0 if t == "s17" else 1.0 for t in ids},
                  "places": slack},
        "sensitivity": sensitivity, "unbounded_places": [],
    }
    if "s17" in ids:
        results["critical_places"] = [critical_place]
        results["bottleneck"] = {**copy.deepcopy(sensitivity[ids.index("s17")]),
                                 "cycle_time_if_10_percent_faster": 2.7}
    return _frame("analyze", f"Line of {n} stations", "min", False, transitions, places,
                  results)


def loop_document() -> dict[str, Any]:
    """`check`-like `analyze` of the closed loop of models/closed_line_exponential.toml: five
    exponential single-server stations, three pallets.

    From the model's header (Buzen's convolution): throughput 0.38006 per min, cycle time
    2.6311 min; lower bound the ring of the mean durations (1 + 1.25 + 0.8 + 1 + 1.5) / 3 =
    1.85 min. Utilization = X·D (the utilization law, Denning & Buzen 1978): 0.3801, 0.4751,
    0.3040, 0.3801, 0.5701. Interval, criticalities and sensitivities are invented.
    """
    means = {"s1": 1.0, "s2": 1.25, "s3": 0.8, "s4": 1.0, "s5": 1.5}
    ids = list(means)
    transitions = [{"id": t, "duration": f"exponential(mean={m:g})", "mean_duration": m}
                   for t, m in means.items()]
    places = [_place(i, t, t, 1, 0, 0.0) for i, t in enumerate(ids)]
    for i, t in enumerate(ids):
        nxt = ids[(i + 1) % 5]
        places.append(_place(len(places), t, nxt, 3 if t == "s5" else 0, 0, 0.0,
                             "pallets waiting at s1" if t == "s5" else ""))
    lam = 2.6311
    sensitivity = [_sensitive("transition", t, v, (v - 0.03, v + 0.03)) for t, v in
                   zip(ids, (0.24, 0.31, 0.18, 0.24, 0.39), strict=True)]
    return _frame("analyze", "Closed inspection loop", "min", True, transitions, places, {
        "cycle_time": lam, "cycle_time_ci": [2.60, 2.66], "throughput": 1 / lam,
        "critical_circuits": [ids], "bounds": {"lower": 1.85, "upper": 3.1},
        "firings_simulated": 500000, "exact": False, "strongly_connected": True,
        "criticality": {"places": [0.41, 0.48, 0.33, 0.41, 0.57, 0.52, 0.45, 0.60, 0.52, 0.38],
                        "transitions": {"s1": 0.52, "s2": 0.48, "s3": 0.60, "s4": 0.52,
                                        "s5": 0.57}},
        "utilization": {"s1": 0.3801, "s2": 0.4751, "s3": 0.3040, "s4": 0.3801, "s5": 0.5701},
        "servers": dict.fromkeys(ids, 1), "sensitivity": sensitivity,
        "bottleneck": {**copy.deepcopy(sensitivity[4]),
                       "cycle_time_if_10_percent_faster": 2.57},
        "unbounded_places": []})
