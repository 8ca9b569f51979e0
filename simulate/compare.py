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

:func:`compare` returns a :class:`Comparison`: the verdict, its reasons and the runs behind them;
the check document is shaped from it by :func:`cyclecheck.simulate.result.comparison_document`.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

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
from .settings import RunSettings

__all__ = ["PATH_RTOL", "Comparison", "FixedRun", "compare"]

#: Relative tolerance of the sample-path identity.
PATH_RTOL = 1e-9
#: Firings of all transitions together that the fixed-duration check runs on each engine when
#: --firings is not given (about ten seconds of SimPy).
CHECK_FIRINGS = 2_000_000
#: SimPy replications of a random model's check when --replications is not given: enough
#: for the sample-path comparison and a rough interval; the precision target is the
#: recursion's.
SIMPY_REPLICATIONS = 5


@dataclass
class FixedRun:
    """The SimPy run of a model with fixed durations: ``K`` firings of every transition.

    ``cycle_time`` is each transition's ``(x(K) − x(K − span)) / span`` (``span`` the
    cyclicity, or less when the run is shorter); ``utilization`` per server and ``busy``
    servers as :func:`~cyclecheck.simulate.experiment.utilization_per_server` gives them.
    """

    firings: int
    span: int
    cycle_time: np.ndarray
    utilization: np.ndarray
    busy: np.ndarray


@dataclass
class Comparison:
    """What ``check`` found.

    Attributes
    ----------
    exact : GraphAnalysis
        The max-plus analysis of the (mean-duration) graph.
    verdict : str
        ``"agrees"`` or ``"disagrees"``.
    reasons : list of str
        Why, in plain sentences, the strongest evidence first.
    sample_path : dict
        ``identical``, ``max_relative_difference``, ``firings_compared``,
        ``replications_compared``, ``tolerance``.
    cycle_times_compared : bool or None
        Fixed durations: whether the periodic regime was reached and the cycle times compared.
    recursion, simulation : Estimate or None, Estimate or FixedRun
        The max-plus side (None for fixed durations: exact) and the SimPy side.
    eta : ndarray, shape (n,)
        The cycle time each transition's path is drawn against in the transient figure.
    simulated_paths, recursion_paths : ndarray, shape (K, R, n)
        Firing times of the compared replications, both engines.
    precision : float or None
        The relative half-width aimed at (random durations).
    """

    exact: GraphAnalysis
    verdict: str
    reasons: list[str]
    sample_path: dict[str, float | int | bool]
    cycle_times_compared: bool | None
    recursion: Estimate | None
    simulation: Estimate | FixedRun
    eta: np.ndarray
    simulated_paths: np.ndarray
    recursion_paths: np.ndarray
    precision: float | None = None


def _path_difference(a: np.ndarray, b: np.ndarray) -> float:
    """Largest relative difference of two arrays of firing times."""
    if a.shape != b.shape:
        return float("inf")
    scale = np.maximum(1.0, np.maximum(np.abs(a), np.abs(b)))
    return float(np.max(np.abs(a - b) / scale, initial=0.0))


def _firings(k: int) -> str:
    return f"{k} firing" if k == 1 else f"{k} firings"


def _fixed(model: Model, exact: GraphAnalysis, settings: RunSettings) -> Comparison:
    firings = settings.firings
    graph = model.graph()
    eta = exact.howard.cycle_time
    c = exact.cyclicity
    settle = exact.transient
    # The SimPy run costs about as much per firing as anything here: without --firings, the
    # runs stay within a budget of firings of all transitions (a graph of 10^5 transitions
    # gets tens of firings, enough for the sample paths, maybe not for the periodic regime).
    budget = max(CHECK_FIRINGS // graph.n_transitions, 20)
    horizon = max(firings or 0, min(2000, budget), 4 * c + 4)
    reachable = horizon <= TRANSIENT_MAX_HORIZON  # a period of 10^12 firings cannot be run
    if settle is None and reachable and (firings or horizon <= max(budget, 4 * c + 4)):
        # Not measured or not reached by the analysis; the check runs both engines anyway, so
        # it can afford a longer look.
        settle = transient(graph, eta, c, horizon)
    # Long enough to see the regime for c firings, and never shorter than c + 1 firings.
    needed = (settle if settle is not None else horizon) + c + 1
    K = (max(firings or min(max(200, needed + c + 10), max(budget, needed)), c + 1)
         if reachable else (firings or min(2000, budget)))
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
    per_server, busy = utilization_per_server(graph, run.busy_time[None, :],
                                              servers_horizon(graph, run.time[:, None, :]))
    return Comparison(
        exact=exact,
        verdict="agrees" if identical and (agrees_rate or not settled) else "disagrees",
        reasons=reasons,
        sample_path={"identical": identical, "max_relative_difference": diff,
                     "firings_compared": int(K * graph.n_transitions),
                     "replications_compared": 1, "tolerance": PATH_RTOL},
        cycle_times_compared=settled,
        recursion=None,
        simulation=FixedRun(K, span, sim_rate, per_server, busy),
        eta=eta, simulated_paths=run.time[:, None, :], recursion_paths=rec[:, None, :],
    )


def _why_unsettled(model: Model, firings: int, period: int) -> str:
    """Why a run of ``firings`` may not show the periodic regime, as the end of a reason."""
    marking = int(model.tokens.max(initial=0))
    if marking > firings:
        return (f" (a place holds {marking:,} tokens, more than the {firings:,} firings of a "
                "run: until they are used the run shows a transient, not the cycle time)")
    if 4 * period + 4 > TRANSIENT_MAX_HORIZON:
        return f" (the regime's period, {period:,} firings, is too long to be run)"
    if firings * model.n_transitions >= CHECK_FIRINGS // 2:
        return (f" (the run was kept to {firings:,} firings of each of the "
                f"{model.n_transitions:,} transitions; give more --firings to compare them "
                "too)")
    return " (give more --firings to compare them too)"


def _overlap(a: Estimate, b: Estimate) -> bool:
    return a.interval.low <= b.interval.high and b.interval.low <= a.interval.high


def _random(model: Model, exact: GraphAnalysis, settings: RunSettings,
            progress: Callable[[str, int, np.ndarray], None] | None) -> Comparison:
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
                                 sim_est.firings, record=True, lineage=False)  # paths only
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
    eta_est = rec_est.by_transition
    return Comparison(
        exact=exact,
        verdict="agrees" if identical and overlap and above_lower else "disagrees",
        reasons=reasons,
        sample_path={"identical": identical, "max_relative_difference": diff,
                     "firings_compared": int(R * K * n), "replications_compared": int(R),
                     "tolerance": PATH_RTOL},
        cycle_times_compared=None,
        recursion=rec_est,
        simulation=sim_est,
        eta=np.where(eta_est > 0, eta_est, exact.howard.cycle_time),
        simulated_paths=sim_times, recursion_paths=rec_batch.times,
        precision=precision,
    )


def compare(model: Model, settings: RunSettings,
            progress: Callable[[str, int, np.ndarray], None] | None = None) -> Comparison:
    """Run both engines on the model and judge whether the simulation agrees with the theory."""
    exact = analyze_graph(model.graph())
    if not model.is_random:
        return _fixed(model, exact, settings)
    return _random(model, exact, settings, progress)
