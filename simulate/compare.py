"""The verdict of ``cyclecheck check``: the SimPy model beside the max-plus theory.

Two comparisons, the strongest first:

1. **Sample-path identity.** The SimPy engine and the max-plus recursion run the same
   replications on the same random draws; every firing time must agree to ``PATH_RTOL``. This
   checks the simulation model itself, firing by firing, and needs no statistics.
2. **Cycle times.** Fixed durations: the simulated cycle time after the transient,
   ``(x(K) - x(K - c)) / c`` with ``c`` the cyclicity, must equal the exact eigenvalue of every
   transition. Random durations: the SimPy estimate and the recursion's Lyapunov estimate must
   agree within their 95 % intervals (the intervals overlap), and the estimate may not fall
   below the cycle time of the mean durations (Baccelli et al. 1992, ch. 8).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from ..algebra.analysis import TRANSIENT_MAX_HORIZON, GraphAnalysis, analyze_graph
from ..algebra.recursion import firing_times, transient
from .engine import simulate_event_graph
from .experiment import (
    DEFAULT_PRECISION,
    Estimate,
    default_firings,
    estimate_with_executor,
    run_replications,
    servers_horizon,
    utilization_per_server,
)
from .modelfile import Model
from .result import (
    analysis_section,
    estimate_section,
    random_analysis_section,
    settings_section,
    utilization_section,
)
from .settings import RunSettings

__all__ = ["PATH_RTOL", "compare"]

#: Relative tolerance of the sample-path identity.
PATH_RTOL = 1e-9
#: Transitions drawn in the transient figure.
FIGURE_TRANSITIONS = 8
#: Firings drawn in the transient figure.
FIGURE_FIRINGS = 200
#: SimPy replications of a random model's check when --replications is not given: enough
#: for the sample-path comparison and a rough interval; the precision target is the
#: recursion's.
SIMPY_REPLICATIONS = 5


def _path_difference(a: np.ndarray, b: np.ndarray) -> float:
    """Largest relative difference of two arrays of firing times."""
    if a.shape != b.shape:
        return float("inf")
    scale = np.maximum(1.0, np.maximum(np.abs(a), np.abs(b)))
    return float(np.max(np.abs(a - b) / scale, initial=0.0))


def _transient_figure(model: Model, eta: np.ndarray, sim: np.ndarray,
                      rec: np.ndarray) -> dict[str, Any]:
    """``x_t(k) - k * eta_t`` for the first firings of a few transitions, both engines."""
    k_max = min(FIGURE_FIRINGS, sim.shape[0])
    k = np.arange(1, k_max + 1)
    shown = np.argsort(-eta, kind="stable")[:FIGURE_TRANSITIONS]
    ids = model.transition_ids
    return {
        "k": k.tolist(),
        "cycle_time": {ids[t]: float(eta[t]) for t in shown},
        "simulation": {ids[t]: (sim[:k_max, t] - k * eta[t]).tolist() for t in shown},
        "recursion": {ids[t]: (rec[:k_max, t] - k * eta[t]).tolist() for t in shown},
    }


def _schedule_figure(model: Model, exact: GraphAnalysis) -> dict[str, Any]:
    ids = model.transition_ids
    g = exact.graph
    return {
        "cycle_time": exact.cycle_time,
        "start": {ids[t]: float(exact.start[t]) for t in range(g.n_transitions)},
        "duration": {ids[t]: float(g.duration[t]) for t in range(g.n_transitions)},
        "cycle_time_by_transition": {ids[t]: float(exact.howard.cycle_time[t])
                                     for t in range(g.n_transitions)},
    }


def _firings(k: int) -> str:
    return f"{k} firing" if k == 1 else f"{k} firings"


def _fixed(model: Model, exact: GraphAnalysis, settings: RunSettings) -> dict[str, Any]:
    firings = settings.firings
    graph = model.graph()
    eta = exact.howard.cycle_time
    c = exact.cyclicity
    settle = exact.transient
    horizon = max(firings or 0, 2000, 4 * c + 4)
    reachable = horizon <= TRANSIENT_MAX_HORIZON  # a period of 10^12 firings cannot be run
    if settle is None and reachable:
        # Not measured or not reached by the analysis; the check runs both engines anyway, so
        # it can afford a longer look.
        settle = transient(graph, eta, c, horizon)
    # Long enough to see the regime for c firings, and never shorter than c + 1 firings.
    needed = (settle if settle is not None else horizon) + c + 1
    K = max(firings or max(200, needed + c + 10), c + 1) if reachable else (firings or 2000)
    run = simulate_event_graph(graph, None, n_firings=K)
    rec = firing_times(graph, K)
    diff = _path_difference(run.time, rec)
    identical = diff <= PATH_RTOL
    span = min(c, K - 1)
    sim_rate = (run.time[-1] - run.time[-1 - span]) / span
    rate_gap = np.abs(sim_rate - eta) / np.maximum(1.0, np.abs(eta))
    settled = settle is not None and K >= settle + c
    agrees_rate = settled and bool(np.all(rate_gap <= PATH_RTOL))
    uniform = bool(np.all(eta == eta[0]))
    ids = model.transition_ids
    reasons = []
    if identical:
        reasons.append(f"the SimPy firing times equal the max-plus recursion's for all {K} "
                       f"firings of every transition (largest relative difference {diff:.1e})")
    else:
        bad = np.unravel_index(np.argmax(np.abs(run.time - rec)), rec.shape)
        reasons.append(f"sample paths differ: firing {bad[0] + 1} of {ids[bad[1]]!r} completes at "
                       f"{run.time[bad]:.9g} in SimPy and {rec[bad]:.9g} in the recursion")
    if agrees_rate:
        after = f"after the transient ({_firings(settle)})"
        if uniform:
            reasons.append(f"{after} the simulated cycle time of every transition equals the "
                           f"eigenvalue {exact.cycle_time:.9g}")
        else:
            values = ", ".join(f"{v:.6g}" for v in sorted(set(eta.tolist()), reverse=True))
            reasons.append(f"{after} the simulated cycle time of every transition equals its "
                           f"exact cycle time (the components run at {values})")
    elif not settled:
        # Not a disagreement: the paths are compared firing by firing all the same.
        reasons.append(f"the periodic regime was not reached within {K} firings, so cycle "
                       "times were not compared; the sample-path identity stands"
                       + _why_unsettled(model, K, c))
    else:
        t = int(np.argmax(rate_gap))
        reasons.append(f"simulated cycle time of {ids[t]!r} is {sim_rate[t]:.9g}, the theory "
                       f"gives {eta[t]:.9g}")
    lam_sim = float(sim_rate.max())
    per_server, busy = utilization_per_server(graph, run.busy_time[None, :],
                                              servers_horizon(graph, run.time[:, None, :]))
    analysis = analysis_section(model, exact)
    reasons += _unbounded_reasons(analysis)
    simulation = {
        "cycle_time": lam_sim, "cycle_time_ci": [lam_sim, lam_sim],
        "throughput": 1.0 / lam_sim if lam_sim > 0 else None,
        "cycle_time_by_transition": {ids[t]: float(v) for t, v in enumerate(sim_rate)},
        "critical_circuits": [], "bounds": None, "firings_simulated": int(K * graph.n_transitions),
        "cyclicity": c, "exact": True, "time_unit": model.time_unit, "engine": "simpy",
        "method": f"SimPy, {K} firings, cycle time (x(K) - x(K - {c})) / {c}",
        **utilization_section(model, per_server, busy),
    }
    return {
        "analysis": analysis,
        "simulation": simulation,
        "comparison": {
            "verdict": "agrees" if identical and (agrees_rate or not settled) else "disagrees",
            "reasons": reasons,
            "cycle_times_compared": settled,
            "sample_path": {"identical": identical, "max_relative_difference": diff,
                            "firings_compared": int(K * graph.n_transitions),
                            "replications_compared": 1, "tolerance": PATH_RTOL},
        },
        "figures": {"transient": _transient_figure(model, eta, run.time, rec),
                    # A joint periodic schedule exists only when one cycle time rules them all.
                    "schedule": _schedule_figure(model, exact) if uniform else None,
                    "running_estimate": None, "replication_estimates": None},
        "settings": settings_section(settings, None, 1, K),
    }


def _why_unsettled(model: Model, firings: int, period: int) -> str:
    """Why a run of ``firings`` may not show the periodic regime, as the end of a reason."""
    marking = int(model.tokens.max(initial=0))
    if marking > firings:
        return (f" (a place holds {marking:,} tokens, more than the {firings:,} firings of a "
                "run: until they are used the run shows a transient, not the cycle time)")
    if 4 * period + 4 > TRANSIENT_MAX_HORIZON:
        return f" (the regime's period, {period:,} firings, is too long to be run)"
    return " (give more --firings to compare them too)"


def _unbounded_reasons(analysis: dict[str, Any]) -> list[str]:
    """The places that gain tokens without bound, one reason each: the verdict is about the
    simulation against the theory, but an unstable model never passes silently."""
    return [u["text"] for u in analysis.get("unbounded_places") or []]


def _overlap(a: Estimate, b: Estimate) -> bool:
    return a.interval.low <= b.interval.high and b.interval.low <= a.interval.high


def _random(model: Model, exact: GraphAnalysis, settings: RunSettings,
            progress: Callable[[str, int, np.ndarray], None] | None) -> dict[str, Any]:
    precision = DEFAULT_PRECISION if settings.precision is None else settings.precision
    seed, replications = settings.seed, settings.replications
    rec_est = estimate_with_executor(model, "recursion", settings, precision=precision,
                                     cyclicity_of_mean=exact.cyclicity, progress=progress)
    sim_firings = min(rec_est.firings, settings.firings or default_firings(model, "simpy"))
    # SimPy runs replications of its own, after the recursion's: its estimate is independent,
    # so that the two intervals overlapping means something. The sample paths are compared
    # on those same replications, recomputed by the recursion.
    sim_est = estimate_with_executor(model, "simpy", settings, precision=None,
                                     replications=replications or SIMPY_REPLICATIONS,
                                     firings=sim_firings, record=True,
                                     first_replication=rec_est.replications,
                                     cyclicity_of_mean=exact.cyclicity, progress=progress)
    sim_times = sim_est.batch.times
    rec_batch = run_replications(model, "recursion", seed, sim_est.batch.replications.tolist(),
                                 sim_est.firings, record=True)
    diff = _path_difference(sim_times, rec_batch.times)
    identical = diff <= PATH_RTOL
    lower = exact.cycle_time
    # A place holding more tokens than a run fires never delivers within it: the runs see a
    # transient, not the cycle time, and only the sample paths can be compared.
    reachable = int(model.tokens.max(initial=0)) <= rec_est.firings
    overlap = _overlap(rec_est, sim_est) or not reachable
    above_lower = rec_est.interval.high >= lower * (1 - PATH_RTOL) or not reachable
    R, K = sim_times.shape[1], sim_times.shape[0]
    n = model.n_transitions
    reasons = []
    if identical:
        reasons.append(f"the SimPy firing times equal the max-plus recursion's on the same random "
                       f"draws: {R} replications x {K} firings x {n} transitions, largest "
                       f"relative difference {diff:.1e}")
    else:
        reasons.append(f"sample paths differ on the same random draws (largest relative "
                       f"difference {diff:.3g}): the simulation model does not implement the "
                       "event graph")
    iv_r, iv_s = rec_est.interval, sim_est.interval
    if not reachable:
        reasons.append("cycle times were not compared: " + _why_unsettled(model, rec_est.firings,
                                                                          1).lstrip(" (;")
                       .rstrip(")"))
    reasons.append(
        f"Lyapunov estimate {iv_r.estimate:.6g} [{iv_r.low:.6g}, {iv_r.high:.6g}] and SimPy "
        f"estimate {iv_s.estimate:.6g} [{iv_s.low:.6g}, {iv_s.high:.6g}] "
        + ("agree within their 95 % intervals" if overlap else "do NOT overlap"))
    if not above_lower:
        reasons.append(f"the estimate lies below the cycle time of the mean durations {lower:.6g}, "
                       "which bounds it from below")
    if rec_est.target_met is False:
        reasons.append(f"the precision {precision} was not reached within the replication limit")
    eta_mean = exact.howard.cycle_time
    eta_est = rec_est.by_transition
    analysis = random_analysis_section(model, exact, rec_est)
    simulation = estimate_section(model, sim_est, lower)
    reasons += _unbounded_reasons(analysis)
    return {
        "analysis": analysis,
        "simulation": simulation,
        "comparison": {
            "verdict": "agrees" if identical and overlap and above_lower else "disagrees",
            "reasons": reasons,
            "sample_path": {"identical": identical, "max_relative_difference": diff,
                            "firings_compared": int(R * K * n), "replications_compared": int(R),
                            "tolerance": PATH_RTOL},
        },
        "figures": {
            "transient": _transient_figure(model, np.where(eta_est > 0, eta_est, eta_mean),
                                           sim_times[:, 0, :], rec_batch.times[:, 0, :]),
            "schedule": None,  # random durations have no periodic regime
            "running_estimate": analysis["running_estimate"],
            "replication_estimates": {"recursion": analysis["per_replication"],
                                      "simulation": simulation["per_replication"]},
        },
        "settings": settings_section(settings, precision, rec_est.replications,
                                     rec_est.firings),
    }


def compare(model: Model, settings: RunSettings,
            progress: Callable[[str, int, np.ndarray], None] | None = None) -> dict[str, Any]:
    """Run both engines and judge: the ``analysis``, ``simulation``, ``comparison``,
    ``figures`` and ``settings`` sections of a check document."""
    exact = analyze_graph(model.graph())
    if not model.is_random:
        return _fixed(model, exact, settings)
    return _random(model, exact, settings, progress)
