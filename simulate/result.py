"""The result documents: what a run found, as JSON-ready dictionaries. The one builder.

Every command's document is shaped here, and nowhere else: ``analyze`` and ``simulate`` print
the keys of DESIGN.md (``cycle_time``, ``cycle_time_ci``, ``throughput``,
``cycle_time_by_transition``, ``critical_circuits``, ``bounds``, ``firings_simulated``,
``cyclicity``) and more; ``check`` wraps both sides, the comparison and the figures' data;
``trace`` holds the judgement of an event log. Each is a versioned document (``document``,
``schema_version``, defined once in :mod:`cyclecheck.reports.schema`, whose
:func:`~cyclecheck.reports.schema.check_document` accepts every one of them) with the model, the
settings of the run and its provenance, so that ``cyclecheck report`` renders it again without
recomputing. Numbers that JSON cannot hold (infinite slack, the throughput of a zero cycle time)
become ``null``.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
import platform
import sys
from collections.abc import Mapping, Sequence
from importlib import metadata
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from ..algebra.analysis import GraphAnalysis
from ..algebra.critical import critical_places
from ..algebra.spectral import HowardResult
from ..reports.schema import DOCUMENT_KIND, SCHEMA_VERSION
from .estimate import replication_interval
from .jsontext import CompactEncoder, json_floats
from .modelfile import Model
from .sensitivity import (
    SensitivityEstimate,
    distinguishable,
    element_entries,
    element_entry,
    fixed_model_sensitivity,
    ranked_candidates,
)
from .settings import RunSettings
from .stability import fixed_unbounded, random_unbounded

if TYPE_CHECKING:  # the runners' own types: the documents import no engine and no runner
    from .compare import Comparison, FixedRun
    from .experiment import Estimate
    from .grid import Grid
    from .sweep import PointOutcome

__all__ = [
    "DOCUMENT_KIND",
    "SCHEMA_VERSION",
    "analysis_document",
    "analysis_section",
    "comparison_document",
    "dumps",
    "estimate_section",
    "finite_or_none",
    "model_section",
    "provenance",
    "random_analysis_section",
    "sensitivity_section",
    "settings_section",
    "simulation_document",
    "stability_section",
    "sweep_document",
    "sweep_rows",
    "trace_document",
    "utilization_section",
]

#: Longest lists written element by element in a document; larger models keep the first ones and
#: say how many were left out (a review page cannot show 10^5 rows anyway).
MAX_LISTED = 5000


def finite_or_none(x: float | None) -> float | None:
    """``x`` as a float, or None where JSON has no number for it (inf, NaN)."""
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def _by_id(ids: Sequence[str], values: Any, finite: bool = False) -> dict[str, float | None]:
    """``{id: value}`` in model order, as :func:`~.jsontext.json_floats` writes the values."""
    return dict(zip(ids, json_floats(values, finite), strict=True))


def _throughput(cycle_time: float) -> float | None:
    return 1.0 / cycle_time if cycle_time > 0 else None


def model_section(model: Model) -> dict[str, Any]:
    """Name, units, size, file hash and the elements of the model."""
    graph = model.graph()
    n, m = graph.n_transitions, graph.n_places
    ids, labels = model.transition_ids, model.transition_labels
    k = min(n, MAX_LISTED)  # the columns taken at once, not element by element
    transitions = [
        {"id": ids[t], "label": labels[t] or "", "duration": text, "mean_duration": mean}
        for t, text, mean in zip(range(k), model.durations.describe(k),
                                 graph.duration[:k].tolist(), strict=True)
    ]
    k = min(m, MAX_LISTED)
    places = [
        {"index": p, "from": ids[u], "to": ids[t], "tokens": tokens, "hold": text,
         "mean_hold": mean, "label": model.place_labels[p] or ""}
        for p, u, t, tokens, text, mean in zip(
            range(k), graph.source[:k].tolist(), graph.target[:k].tolist(),
            graph.tokens[:k].tolist(), model.holds.describe(k), graph.hold[:k].tolist(),
            strict=True)
    ]
    return {
        "name": model.name,
        "time_unit": model.time_unit,
        "description": model.description,
        "path": str(model.path) if model.path else None,
        "sha256": model.sha256,
        "n_transitions": n,
        "n_places": m,
        "is_random": model.is_random,
        "transitions": transitions,
        "places": places,
        "elements_listed": {"transitions": len(transitions), "places": len(places)},
    }


def analysis_section(model: Model, analysis: GraphAnalysis) -> dict[str, Any]:
    """The exact max-plus results for fixed durations, with the keys of DESIGN.md first."""
    ids = model.transition_ids
    graph = analysis.graph
    hw = analysis.howard
    lam = analysis.cycle_time
    cert = analysis.certificate
    by_transition = _by_id(ids, hw.cycle_time)
    circuits = [[ids[t] for t in c.transitions] for c in hw.circuits]
    circuit_places = [list(c.places) for c in hw.circuits]
    slack_t = _by_id(ids, analysis.slack.transitions, finite=True)
    slack_p = json_floats(analysis.slack.places[:MAX_LISTED], finite=True)
    doc: dict[str, Any] = {
        "cycle_time": lam,
        "cycle_time_ci": [lam, lam],
        "throughput": _throughput(lam),
        "cycle_time_by_transition": by_transition,
        "critical_circuits": circuits,
        "bounds": None,
        "firings_simulated": 0,
        "cyclicity": analysis.cyclicity,
        "exact": True,
        "method": "Howard policy iteration, certified",
        "time_unit": model.time_unit,
        "strongly_connected": analysis.strongly_connected,
        "components": analysis.n_components,
        "critical_circuit_places": circuit_places,
        "critical_circuit_ratios": [c.ratio for c in hw.circuits],
        "critical_places": np.flatnonzero(analysis.critical).tolist()[:MAX_LISTED],
        "eigenvector": _by_id(ids, hw.bias),
        "slack": {"transitions": slack_t, "places": slack_p, "exact": analysis.slack.exact},
        "certificate": {
            "checked": cert.holds,
            "circuit_gap": cert.circuit_gap,
            "policy_gap": finite_or_none(cert.policy_gap),
            "monotone_gap": cert.monotone_gap,
            "max_reduced_weight": cert.max_reduced_weight,
            "eigen_residual": cert.eigen_residual,
            "tolerance": cert.tolerance,
            "text": _certificate_text(analysis),
            "charpoly_largest_corner_matches": _corner_matches(analysis),
        },
        "charpoly": (
            {
                "corners": [
                    [finite_or_none(c), k]
                    for c, k in zip(analysis.charpoly.corners, analysis.charpoly.multiplicities,
                                    strict=True)
                ],
                "terms": [
                    [k, finite_or_none(d)]
                    for k, d in zip(analysis.charpoly.degrees, analysis.charpoly.coefficients,
                                    strict=True)
                ],
                "size": analysis.charpoly.n,
            }
            if analysis.charpoly is not None
            else {"skipped": analysis.charpoly_note}
        ),
        "transient_firings": analysis.transient,
        "transient_horizon": analysis.transient_horizon,
        "howard_iterations": hw.iterations,
    }
    critical_ids = {ids[t] for c in hw.circuits for t in c.transitions}
    doc.update(sensitivity_section(
        model, fixed_model_sensitivity(graph, hw, analysis.critical), critical_ids,
        set(np.flatnonzero(analysis.critical).tolist()), lam))
    doc.update(stability_section(fixed_unbounded(model, hw.cycle_time)))
    return doc


def estimate_section(model: Model, est: Estimate, mean_value: HowardResult) -> dict[str, Any]:
    """Keys of DESIGN.md for an estimate from replications; ``mean_value``, Howard's result on
    the mean durations (the lower bound, the critical circuits the derivatives are set
    against), as the caller has it already."""
    lower = mean_value.max_cycle_time
    ids = model.transition_ids
    iv = est.interval
    crit_p = est.criticality_places
    section: dict[str, Any] = {
        "cycle_time": iv.estimate,
        "cycle_time_ci": [iv.low, iv.high],
        "throughput": 1.0 / iv.estimate if iv.estimate > 0 else None,
        "cycle_time_by_transition": _by_id(ids, est.by_transition),
        "critical_circuits": [],
        "bounds": {
            "lower": lower,
            "upper": None if est.upper is None else max(lower, est.upper.high),
            "lower_method": "cycle time of the mean durations (Baccelli et al. 1992, ch. 8)",
            "upper_method": (f"subadditive bound E Z(K)/K at K = {est.firings} firings, upper end "
                             "of its 95 % interval (Kingman 1973)" if est.upper is not None else
                             "not computed: a place holds so many tokens that the hold draws "
                             "the subadditive bound needs would not fit in memory"),
        },
        "firings_simulated": est.firings_simulated,
        "cyclicity": None,
        "exact": False,
        "method": f"{est.engine}: {est.replications} replications of {est.firings} firings, "
                  f"warm-up {est.warmup_firings} firings deleted (MSER-5), Student t interval",
        "time_unit": model.time_unit,
        "engine": est.engine,
        "replications": est.replications,
        "firings_per_replication": est.firings,
        "warmup_firings": est.warmup_firings,
        "relative_half_width": finite_or_none(iv.relative_half_width),
        "batch_means": _batch_means(est),
        "precision_met": est.target_met,
        **utilization_section(model, est.utilization, est.busy_servers),
        "per_replication": [float(v) for v in est.per_replication],
        "running_estimate": _running_estimate(est, model.n_transitions),
        "sequential_rounds": [
            {"replications": h[0], "estimate": h[1], "low": h[2], "high": h[3]}
            for h in est.history
        ],
    }
    marking = int(model.tokens.max(initial=0))
    section["notes"] = ([f"a place holds {marking:,} tokens, more than the {est.firings:,} "
                         "firings of a replication: until they are used a run shows a "
                         "transient, so this estimate need not be the cycle time"]
                        if marking > est.firings else [])
    if crit_p is not None:
        # The local share alone does not find the bottleneck (a station downstream of it sets
        # every firing of the next one): kept under its own name, never as "criticality".
        section["setter_share"] = {
            "places": [float(c) for c in crit_p[:MAX_LISTED]],
            "definition": ("share of its target's firings whose start the place set (its token "
                           "arrived last); a local measure, not the bottleneck: see sensitivity"),
        }
    if est.sensitivity is not None:
        critical = critical_places(model.graph(), mean_value)
        section.update(sensitivity_section(
            model, est.sensitivity, {ids[t] for c in mean_value.circuits for t in c.transitions},
            set(np.flatnonzero(critical).tolist()), iv.estimate))
    if est.seed is not None:
        if model.is_random:
            unbounded = random_unbounded(model, est.seed, est.batch.replications.tolist(),
                                         est.firings, est.warmup_firings, est.by_transition)
        else:
            unbounded = fixed_unbounded(model, mean_value.cycle_time)
        section.update(stability_section(unbounded))
    return section


def utilization_section(model: Model, per_server: np.ndarray,
                        busy: np.ndarray | None) -> dict[str, Any]:
    """``utilization`` per server (null without a self-loop), ``busy_servers``, ``servers``."""
    from ..algebra.eventgraph import self_loop_servers

    ids = model.transition_ids
    servers = self_loop_servers(model.graph())
    out: dict[str, Any] = {
        "utilization": _by_id(ids, per_server, finite=True),
        "servers": dict(zip(ids, np.where(servers > 0, servers, None).tolist(), strict=True)),
        "utilization_definition": (
            "share of the time each of the transition's servers is busy firing: mean busy "
            "servers / servers, the servers being the tokens of its self-loop (n servers take "
            "jobs in turn); null for a transition without a self-loop, whose firings overlap "
            "as tokens allow (busy_servers gives their mean number in progress)"),
    }
    if busy is not None:
        out["busy_servers"] = _by_id(ids, busy)
    return out


def sensitivity_section(model: Model, sens: SensitivityEstimate, critical_ids: set[str],
                        critical_places_: set[int], cycle_time: float) -> dict[str, Any]:
    """``sensitivity`` (largest derivative first), ``bottleneck``, ``sensitivity_method`` and,
    for random durations, the path ``criticality`` of every element."""
    graph = model.graph()
    n = graph.n_transitions
    means = np.r_[graph.duration, graph.hold]
    if sens.skipped:
        return {"sensitivity": [], "bottleneck": None, "sensitivity_method": sens.method}
    d = np.where(np.isfinite(sens.derivative), sens.derivative, -np.inf)
    order = np.lexsort((np.arange(d.size), -d))
    entries = element_entries(model, order[:MAX_LISTED], sens)
    out: dict[str, Any] = {"sensitivity": entries, "sensitivity_method": sens.method,
                           "sensitivity_exact": sens.exact,
                           "sensitivity_omitted": max(0, d.size - MAX_LISTED)}
    ranked = ranked_candidates(sens, means)
    best = int(ranked[0]) if ranked.size else None
    bottleneck = None
    if best is not None:
        bottleneck = element_entry(model, best, sens)
        if ranked.size > 1:
            # a bottleneck by a point estimate alone may be noise in a balanced line: the
            # next element and whether the two are told apart come with it
            second = int(ranked[1])
            bottleneck["runner_up"] = element_entry(model, second, sens)
            bottleneck["runner_up"]["name"] = (model.transition_ids[second] if second < n
                                               else model.place_name(second - n))
            bottleneck["distinguishable"] = distinguishable(sens, best, second)
        else:
            bottleneck["distinguishable"] = True
        theta = float(means[best])
        # a decrease is governed by the decrease derivative (the low end for fixed durations)
        slope = float(sens.low[best]) if sens.exact else float(sens.derivative[best])
        on = (model.transition_ids[best] in critical_ids if best < n
              else (best - n) in critical_places_)
        bottleneck.update({
            "name": model.transition_ids[best] if best < n else model.place_name(best - n),
            "mean": theta,
            "faster_10_percent": {"mean": 0.9 * theta,
                                  "cycle_time": cycle_time - 0.1 * theta * slope,
                                  "change": -0.1 * theta * slope},
            "on_mean_critical_circuit": bool(on),
        })
    out["bottleneck"] = bottleneck
    if sens.criticality is not None:
        crit = sens.criticality
        out["criticality"] = {
            "places": json_floats(crit[n : n + MAX_LISTED], finite=True),
            "transitions": _by_id(model.transition_ids, crit[:n], finite=True),
            "definition": ("share of the element's firings on the critical path of the cycle "
                           "time (for a place: of its target's firings that it set on that "
                           "path)"),
        }
    return out


def stability_section(entries: list[dict[str, Any]]) -> dict[str, Any]:
    """``unbounded_places``: the places that gain tokens without bound ([] when none)."""
    return {"unbounded_places": entries}


def _running_estimate(est: Estimate, n_transitions: int) -> dict[str, list[float]]:
    """The estimate and its 95 % interval after each replication, against firings computed."""
    values = est.per_replication
    work, mean, low, high = [], [], [], []
    for r in range(2, values.size + 1):
        iv = replication_interval(values[:r])
        work.append(float(r * est.firings * n_transitions))
        mean.append(iv.estimate)
        low.append(iv.low)
        high.append(iv.high)
    return {"work": work, "estimate": mean, "low": low, "high": high}


def _batch_means(est: Estimate) -> dict[str, Any] | None:
    iv = est.batch_means_interval()
    if iv is None:
        return None
    return {"cycle_time": iv.estimate, "cycle_time_ci": [iv.low, iv.high],
            "batches": iv.n, "batch_blocks": iv.batch_size, "lag1": finite_or_none(iv.lag1),
            "batches_correlated": iv.batches_correlated,
            "method": "batch means inside replication 0 after its warm-up (Law & Kelton 9.5.3)"}


def random_analysis_section(model: Model, exact: GraphAnalysis, est: Estimate) -> dict[str, Any]:
    """The Lyapunov estimate, over the exact analysis of the mean durations.

    Keys that only the exact analysis has (eigenvector, slack, certificate, charpoly, critical
    circuits) describe the graph of the mean durations; ``mean_value_cycle_time`` is its cycle
    time, the lower bound.
    """
    section = analysis_section(model, exact)
    section["mean_value_cycle_time"] = section["cycle_time"]
    # A random graph has no periodic regime: the transient belongs to the mean durations.
    section["mean_value_transient_firings"] = section.pop("transient_firings")
    section.update(estimate_section(model, est, exact.howard))
    section["critical_circuits"] = [[model.transition_ids[t] for t in c.transitions]
                                    for c in exact.howard.circuits]
    section["critical_circuits_basis"] = "mean durations"
    return section


def settings_section(settings: RunSettings, precision: float | None = None,
                     replications: int | None = None, firings: int | None = None
                     ) -> dict[str, Any]:
    """The settings of a run, for reproducibility: the seed and options as resolved, and the
    precision aimed at, the replications and the firings per replication actually used."""
    section = settings.to_dict()
    section.update({"precision": precision, "replications": replications,
                    "firings_per_replication": firings})
    return section


def _base(model: Model, command: str) -> dict[str, Any]:
    doc = provenance()
    doc["command"] = command
    doc["model"] = model_section(model)
    return doc


def analysis_document(model: Model, exact: GraphAnalysis, est: Estimate | None,
                      settings: RunSettings) -> dict[str, Any]:
    """The document of ``analyze``: exact for fixed durations; for random ones the Lyapunov
    estimate ``est`` over the exact analysis of the mean durations."""
    doc = _base(model, "analyze")
    if est is None:
        doc.update(analysis_section(model, exact))
        doc["settings"] = settings_section(settings)
    else:
        doc.update(random_analysis_section(model, exact, est))
        doc["settings"] = settings_section(settings, settings.precision, est.replications,
                                           est.firings)
    return doc


def simulation_document(model: Model, est: Estimate, mean_value: HowardResult, period: int,
                        settings: RunSettings) -> dict[str, Any]:
    """The document of ``simulate``: the SimPy engine's estimate; for fixed durations also the
    structure the theory knows (cyclicity, critical circuits)."""
    doc = _base(model, "simulate")
    doc.update(estimate_section(model, est, mean_value))
    if not model.is_random:
        # Fixed durations: the simulation is exact up to the transient; the structure is known.
        doc["bounds"] = None
        doc["cyclicity"] = period
        doc["critical_circuits"] = [[model.transition_ids[t] for t in c.transitions]
                                    for c in mean_value.circuits]
    doc["settings"] = settings_section(settings, settings.precision, est.replications,
                                       est.firings)
    return doc


#: Transitions drawn in the transient figure.
FIGURE_TRANSITIONS = 8
#: Firings drawn in the transient figure.
FIGURE_FIRINGS = 200
#: Quantiles of x(k) − kλ over the compared replications, for the band of a random model.
FIGURE_QUANTILES = (0.1, 0.5, 0.9)


def _transient_figure(model: Model, eta: np.ndarray, sim: np.ndarray,
                      rec: np.ndarray) -> dict[str, Any]:
    """``x_t(k) − k·eta_t`` for the first firings of a few transitions: replication 0 of both
    engines, and for several replications the quantiles over them (a band, not a tangle)."""
    k_max = min(FIGURE_FIRINGS, sim.shape[0])
    k = np.arange(1, k_max + 1)
    shown = np.argsort(-eta, kind="stable")[:FIGURE_TRANSITIONS]
    ids = model.transition_ids
    figure: dict[str, Any] = {
        "k": k.tolist(),
        "cycle_time": {ids[t]: float(eta[t]) for t in shown},
        "simulation": {ids[t]: (sim[:k_max, 0, t] - k * eta[t]).tolist() for t in shown},
        "recursion": {ids[t]: (rec[:k_max, 0, t] - k * eta[t]).tolist() for t in shown},
    }
    if sim.shape[1] > 1:
        levels = np.quantile(sim[:k_max, :, shown] - k[:, None, None] * eta[shown],
                             FIGURE_QUANTILES, axis=1)  # (levels, k, shown)
        figure["quantiles"] = {
            "levels": list(FIGURE_QUANTILES), "replications": int(sim.shape[1]),
            "simulation": {ids[t]: levels[:, :, i].tolist() for i, t in enumerate(shown)},
        }
    return figure


def _schedule_figure(model: Model, exact: GraphAnalysis) -> dict[str, Any]:
    ids = model.transition_ids
    g = exact.graph
    return {
        "cycle_time": exact.cycle_time,
        "start": _by_id(ids, exact.start),
        "duration": _by_id(ids, g.duration),
        "cycle_time_by_transition": _by_id(ids, exact.howard.cycle_time),
    }


def _fixed_simulation_section(model: Model, run: FixedRun) -> dict[str, Any]:
    """The SimPy side of a check with fixed durations: exact after the transient."""
    ids = model.transition_ids
    lam = float(run.cycle_time.max())
    return {
        "cycle_time": lam, "cycle_time_ci": [lam, lam], "throughput": _throughput(lam),
        "cycle_time_by_transition": _by_id(ids, run.cycle_time),
        "critical_circuits": [], "bounds": None,
        "firings_simulated": int(run.firings * model.n_transitions),
        "cyclicity": run.span, "exact": True, "time_unit": model.time_unit, "engine": "simpy",
        "method": (f"SimPy, {run.firings} firings, cycle time (x(K) - x(K - {run.span})) / "
                   f"{run.span}"),
        **utilization_section(model, run.utilization, run.busy),
    }


def comparison_document(model: Model, comparison: Comparison,
                        settings: RunSettings) -> dict[str, Any]:
    """The document of ``check``: both sides, the comparison, the figures and the settings.

    An unstable model never passes silently: each place that gains tokens without bound adds
    a reason (the verdict itself is about the simulation against the theory).
    """
    doc = _base(model, "check")
    exact, rec, sim = comparison.exact, comparison.recursion, comparison.simulation
    if rec is None:  # fixed durations: the SimPy side is a FixedRun
        analysis = analysis_section(model, exact)
        simulation = _fixed_simulation_section(model, sim)  # type: ignore[arg-type]
        uniform = bool(np.all(comparison.eta == comparison.eta[0]))
        figures = {"running_estimate": None, "replication_estimates": None,
                   # a joint periodic schedule exists only when one cycle time rules them all
                   "schedule": _schedule_figure(model, exact) if uniform else None}
        settings_part = settings_section(settings, None, 1, sim.firings)  # type: ignore[union-attr]
    else:
        analysis = random_analysis_section(model, exact, rec)
        simulation = estimate_section(model, sim, exact.howard)  # type: ignore[arg-type]
        figures = {"running_estimate": analysis["running_estimate"],
                   "replication_estimates": {"recursion": analysis["per_replication"],
                                             "simulation": simulation["per_replication"]},
                   "schedule": None}  # random durations have no periodic regime
        settings_part = settings_section(settings, comparison.precision, rec.replications,
                                         rec.firings)
    figures["transient"] = _transient_figure(model, comparison.eta, comparison.simulated_paths,
                                             comparison.recursion_paths)
    reasons = comparison.reasons + [u["text"] for u in analysis.get("unbounded_places") or []]
    verdict: dict[str, Any] = {"verdict": comparison.verdict, "reasons": reasons,
                               "sample_path": comparison.sample_path}
    if comparison.cycle_times_compared is not None:
        verdict["cycle_times_compared"] = comparison.cycle_times_compared
    doc.update({"analysis": analysis, "simulation": simulation, "comparison": verdict,
                "figures": figures, "settings": settings_part})
    return doc


def trace_document(model: Model, judgement: Mapping[str, Any],
                   settings: RunSettings) -> dict[str, Any]:
    """The document of ``trace``: the judgement of an event log against the model (built by
    :mod:`cyclecheck.simulate.judge`), with the settings of the model's estimate."""
    doc = _base(model, "trace")
    doc.update(judgement)
    doc["settings"] = settings_section(settings, settings.precision)
    return doc


#: How a sweep's points share their random draws, and how their differences are estimated.
CRN_TEXT = ("common random numbers: replication r of every point draws from the same streams "
            "(SeedSequence(seed, spawn_key=(r, kind, element, block))); a difference between "
            "neighbouring points is a paired Student-t interval over the replications they "
            "share")


def _sweep_point(out: PointOutcome, grid: Grid) -> dict[str, Any]:
    """One row of a sweep: the point's values, its cycle time and what sets it."""
    model = out.model
    ids = model.transition_ids
    point: dict[str, Any] = {
        "point": out.index,
        "values": {t.text: v for t, v in zip(grid.targets, out.values, strict=True)},
        "status": out.status,
        "exact": out.status == "exact",
    }
    if out.status == "not live":
        point.update(cycle_time=None, cycle_time_ci=None, throughput=0.0, throughput_ci=None,
                     bounds=None, critical_circuits=[], critical_circuit=[],
                     deadlock=[ids[t] for t in out.deadlock or []],
                     reason="a circuit holds no token: deadlock, the line never fires",
                     differences={})
        return point
    lam = float(out.cycle_time)  # type: ignore[arg-type]
    iv = out.interval
    low, high = (lam, lam) if iv is None else (iv.low, iv.high)
    circuits = [[ids[t] for t in c] for c in out.circuits]
    point.update(
        cycle_time=lam, cycle_time_ci=[low, high], throughput=_throughput(lam),
        throughput_ci=[_throughput(high), _throughput(low) if low > 0 else None],
        critical_circuits=circuits, critical_circuit=circuits[0] if circuits else [],
        critical_circuits_basis="mean durations" if iv is not None else "point",
        deadlock=None,
    )
    if iv is None:
        if model.n_transitions <= MAX_LISTED and out.by_transition is not None:
            point["cycle_time_by_transition"] = dict(zip(ids, out.by_transition, strict=True))
        point.update(bounds=None, firings_simulated=0, replications=0)
    else:
        util = out.utilization
        top = None if util is None or np.all(np.isnan(util)) else int(np.nanargmax(util))
        point.update(
            bounds={"lower": out.lower, "upper": out.upper},
            relative_half_width=finite_or_none(iv.relative_half_width),
            precision_met=out.target_met, replications=out.replications,
            firings_per_replication=out.firings, warmup_firings=out.warmup,
            firings_simulated=out.firings * out.replications * model.n_transitions,
            busiest=None if top is None else
            {"transition": ids[top], "utilization": float(util[top])},  # type: ignore[index]
            per_replication=[float(v) for v in out.per_replication],  # type: ignore[union-attr]
        )
    point["differences"] = out.differences
    return point


def sweep_document(model: Model, grid: Grid, outcomes: list[PointOutcome],
                   settings: RunSettings, notes: list[str] | None = None) -> dict[str, Any]:
    """The document of ``sweep``: the grid and one row per point (``points``), in point order
    (the last target varying fastest)."""
    doc = _base(model, "sweep")
    points = [_sweep_point(out, grid) for out in outcomes]
    live = [p for p in points if p["cycle_time"] is not None]
    random = any(p["status"] == "estimated" for p in points)
    doc.update(
        time_unit=model.time_unit,
        vary=grid.describe(),
        shape=list(grid.shape),
        points=points,
        best_point=min(live, key=lambda p: (p["cycle_time"], p["point"]))["point"]
        if live else None,
        firings_simulated=sum(p.get("firings_simulated") or 0 for p in points),
        common_random_numbers=CRN_TEXT if random else None,
        notes=list(notes or []),
    )
    firings = max((p.get("firings_per_replication") or 0 for p in points), default=0)
    doc["settings"] = settings_section(settings, settings.precision if random else None,
                                       settings.replications if random else None,
                                       firings or None)
    return doc


def sweep_rows(document: Mapping[str, Any]) -> tuple[list[str], list[list[Any]]]:
    """The points of a sweep document as a table: the columns of ``sweep --csv`` (``point``
    first) and one row per point."""
    targets = [v["target"] for v in document["vary"]]
    columns = ["point", *targets, "status", "cycle_time", "cycle_time_low", "cycle_time_high",
               "throughput", "throughput_low", "throughput_high", "relative_half_width",
               "replications", "lower_bound", "upper_bound", "critical_circuit",
               "busiest", "busiest_utilization"]
    for t in targets:
        columns += [f"difference_{t}", f"difference_{t}_low", f"difference_{t}_high"]
    rows = []
    for p in document["points"]:
        ci = p.get("cycle_time_ci") or [None, None]
        tci = p.get("throughput_ci") or [None, None]
        bounds = p.get("bounds") or {}
        top = p.get("busiest") or {}
        row = [p["point"], *(p["values"][t] for t in targets), p["status"], p["cycle_time"],
               ci[0], ci[1], p["throughput"], tci[0], tci[1], p.get("relative_half_width"),
               p.get("replications"), bounds.get("lower"), bounds.get("upper"),
               _closed(p.get("critical_circuit") or p.get("deadlock") or []),
               top.get("transition"), top.get("utilization")]
        for t in targets:
            diff = (p.get("differences") or {}).get(t) or {}
            low, high = diff.get("ci") or [None, None]
            row += [diff.get("cycle_time_difference"), low, high]
        rows.append(row)
    return columns, rows


def _corner_matches(analysis: GraphAnalysis) -> bool | None:
    """The largest corner of the characteristic maxpolynomial is the eigenvalue (Akian, Bapat &
    Gaubert 2014): one more, independent certificate where χ was computed."""
    if analysis.charpoly is None:
        return None
    corner, lam = analysis.charpoly.largest_corner, analysis.cycle_time
    return bool(abs(corner - lam) <= 1e-9 * max(1.0, abs(lam)))


def _certificate_text(analysis: GraphAnalysis) -> str:
    cert = analysis.certificate
    state = "holds" if cert.holds else "FAILS"
    return (
        f"Certificate {state}: the critical circuits attain the cycle times (gap "
        f"{cert.circuit_gap:.1e}), no circuit exceeds them (largest reduced weight "
        f"{cert.max_reduced_weight:.1e}), and the eigenvector solves the recursion (residual "
        f"{cert.eigen_residual:.1e}); tolerance {cert.tolerance:.1e}."
    )


def _closed(circuit: list[str]) -> str:
    """A circuit as the terminal writes it, closed on its first transition: ``a -> b -> a``."""
    return " -> ".join([*circuit, circuit[0]]) if circuit else ""


def provenance(command_line: list[str] | None = None) -> dict[str, Any]:
    """Versions, time and command line, for the reproducibility section."""
    versions = {"python": platform.python_version()}
    for dist in ("cyclecheck", "numpy", "scipy", "simpy", "pandas", "matplotlib"):
        try:
            versions[dist] = metadata.version(dist)
        except metadata.PackageNotFoundError:  # pragma: no cover - partial installs
            versions[dist] = None
    argv = command_line if command_line is not None else sys.argv
    return {
        "document": DOCUMENT_KIND,
        "schema_version": SCHEMA_VERSION,
        "created": _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "command_line": _command_line(argv),
        "versions": versions,
    }


def _command_line(argv: list[str]) -> str:
    """The command as typed, when the process is the command line; else what called the
    Python interface (a script's numbers depend on that script, not only on a command)."""
    if argv and Path(argv[0]).name == "cyclecheck":
        return " ".join(["cyclecheck", *argv[1:]])
    script = " ".join(argv) if argv and argv[0] not in ("", "-c") else "an interactive session"
    return f"the Python interface (cyclecheck.simulate), called from {script}"


#: Documents whose compact text is longer than this are written one top-level key per line.
PRETTY_LIMIT = 1_000_000


def dumps(document: Mapping[str, Any]) -> str:
    """JSON text of a document: ``allow_nan=False`` proves no inf or NaN slipped through.

    Indented (two spaces) for people to read; a large document (the analysis of 10^5
    transitions, tens of MB) puts each top-level key on its own line with a compact value:
    Python's encoder is compiled only for unindented text, which is 5-10 times faster there,
    and the large maps by transition are written from arrays (:mod:`.jsontext`, the same text).
    """
    options: dict[str, Any] = {"allow_nan": False, "default": _json_default}
    encoder = CompactEncoder(_json_default)
    lines = [f"  {json.dumps(str(key))}: {encoder.encode(value)}"
             for key, value in document.items()]
    if sum(map(len, lines)) <= PRETTY_LIMIT:
        return json.dumps(document, indent=2, **options)
    return "{\n" + ",\n".join(lines) + "\n}"


def _json_default(value: object) -> object:
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        return finite_or_none(float(value))
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, Path):
        return str(value)
    raise TypeError(f"not JSON serialisable: {type(value).__name__}")

