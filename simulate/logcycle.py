r"""The cycle time of an event log against the model's Lyapunov exponent, per component.

In a strongly connected component every transition has the same cycle time, the Lyapunov
exponent :math:`\lambda = \lim x_t(k)/k` of the random recursion (with fixed durations, the
max-plus eigenvalue); a component downstream of a slower one takes the slower one's. The log's
cycle time of a component is the growth rate of :math:`y(k)`, the mean over the component's
logged transitions of their completion times :math:`x_t(k)`:

* **one long run** (no ``replication`` column, or one replication): the warm-up is deleted by
  MSER-5 (White 1997) on the increments :math:`y(k) - y(k-1)`; the rest is cut into batches
  whose number is chosen from their own correlation and a Student-t interval is built over
  the batch means (Law & Kelton, ch. 9.5.3);
* **replications**: the warm-up is chosen by MSER-5 on the increments averaged over the
  replications; each replication gives :math:`(y(K) - y(k_0)) / (K - k_0)`, and the interval
  is Student's over the replications (Law & Kelton, ch. 9.4.1).

The model's value comes from independent replications of the recursion
(:func:`~.experiment.estimate_cycle_time`) to a relative precision several times tighter
than the log's interval. The two are compared by Welch's two-sided t test with both standard
errors (:func:`~.gof.welch_t`). Only components that have a circuit and whose cycle time is
random are tested: a deterministic one is judged exactly, firing by firing.

References
----------
.. [1] A. M. Law, W. D. Kelton, *Simulation Modeling and Analysis*, 3rd ed., 2000, ch. 9.
.. [2] K. P. White, Jr., "An effective truncation heuristic for bias reduction in simulation
   output", *Simulation* 69(6), 323–334, 1997.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from ..algebra.eventgraph import strongly_connected_components
from .estimate import batch_means, choose_batch_count, mser, student_quantile
from .eventlog import KEY_LIMIT, EventLog
from .modelfile import Model

__all__ = [
    "MAX_COMPONENTS",
    "MIN_BATCH_VALUES",
    "ComponentCycleTime",
    "LogCycleTime",
    "ModelCycleTime",
    "circuit_components",
    "log_cycle_times",
    "model_cycle_time",
    "model_precision",
]

MIN_BATCH_VALUES = 100
"""Fewest increments after the warm-up for batch means in one run (the correlation check of
:func:`~.estimate.choose_batch_count` needs 100 batches of size one)."""
MIN_REPLICATION_FIRINGS = 10
"""Fewest firings after the warm-up for a replication to give an estimate."""
MAX_COMPONENTS = 20
"""Most components whose cycle time is tested (those with the largest cycle times first)."""
PRECISION_FACTOR = 3.0
"""The model's interval is asked to be this many times narrower than the log's."""
PRECISION_RANGE = (0.001, 0.01)
"""Tightest and loosest relative precision asked of the model's estimate."""


@dataclass(frozen=True)
class ModelCycleTime:
    """The model's cycle time per strongly connected component, from the recursion.

    ``estimate``, ``se`` (standard error) and ``df`` per component (``labels`` maps each
    transition to its component); ``random[c]`` is False where every replication gave the same
    value (a deterministic component). Compute it once with :func:`model_cycle_time` and pass it
    to many judgements of logs of the same model.
    """

    labels: np.ndarray
    estimate: np.ndarray
    se: np.ndarray
    df: float
    random: np.ndarray
    replications: int
    firings: int
    precision: float
    seed: int

    def describe(self) -> dict[str, Any]:
        return {"method": (f"recursion: {self.replications} replications of {self.firings} "
                           f"firings, warm-up deleted (MSER-5), Student t; relative precision "
                           f"{self.precision:g} asked"), "replications": self.replications,
                "firings_per_replication": self.firings, "precision": self.precision,
                "seed": self.seed}


def model_cycle_time(model: Model, *, precision: float = 0.005, seed: int = 1, workers: int = 1,
                     scheduler: str | None = None,
                     progress: Callable[[str, int, np.ndarray], None] | None = None
                     ) -> ModelCycleTime:
    """The Lyapunov exponent of each component, by replications of the recursion run until the
    95 % interval of the slowest component has the relative half-width ``precision``."""
    from .experiment import (
        component_growth,
        default_firings,
        estimate_cycle_time,
        open_executor,
    )

    executor, close = open_executor(workers, scheduler)
    try:
        est = estimate_cycle_time(model, "recursion", seed=seed, precision=precision,
                                  firings=default_firings(model, "recursion"),
                                  executor=executor, chunks=max(workers, 1) if executor else 1,
                                  progress=progress, lineage=False)  # no derivatives needed
    finally:
        close()
    labels, growth = component_growth(model, est)  # (R, C)
    r = growth.shape[0]
    sd = growth.std(axis=0, ddof=1)
    spread = sd > 1e-12 * np.maximum(1.0, np.abs(growth.mean(axis=0)))
    return ModelCycleTime(labels, growth.mean(axis=0), sd / math.sqrt(r), float(r - 1),
                          spread, r, est.firings, precision, seed)


def circuit_components(model: Model) -> tuple[np.ndarray, np.ndarray]:
    """Component of each transition, and the components that have a circuit."""
    graph = model.graph()
    count, labels = strongly_connected_components(graph)
    size = np.bincount(labels, minlength=count)
    loop = np.zeros(count, dtype=bool)
    self_loops = graph.source == graph.target
    loop[labels[graph.source[self_loops]]] = True
    return labels, np.flatnonzero((size > 1) | loop)


@dataclass(frozen=True)
class ComponentCycleTime:
    """The log's cycle time of one component: an estimate, its standard error and d.o.f."""

    component: int
    estimate: float
    se: float
    df: float
    low: float
    high: float
    method: str
    warmup_firings: int
    firings: int
    note: str | None = None


@dataclass(frozen=True)
class LogCycleTime:
    """Per component: its estimate from the log, or why there is none."""

    estimates: dict[int, ComponentCycleTime]
    not_judged: dict[int, str]


def _series(log: EventLog, labels: np.ndarray, wanted: np.ndarray, present: np.ndarray,
            scale: float = 1.0) -> list[tuple[int, int, np.ndarray, np.ndarray]]:
    """``(replication, component, firing numbers, y)`` per series: the mean completion time over
    the component's logged transitions, where all of them have that firing logged, in units
    of ``scale``."""
    n_comp = int(labels.max()) + 1
    use = np.zeros(n_comp, dtype=bool)
    use[wanted] = True
    rows = np.flatnonzero(use[labels[log.transition]])
    if rows.size == 0:
        return []
    rep = np.zeros(rows.size, np.int64) if log.replication is None else log.replication[rows]
    series = rep * n_comp + labels[log.transition[rows]]
    members = np.zeros((log.n_replications, n_comp), dtype=np.int64)
    logged = present.reshape(log.n_replications, -1)
    for r in range(log.n_replications):
        members[r] = np.bincount(labels, weights=logged[r], minlength=n_comp)
    k = log.firing[rows]
    width = int(k.max()) + 1
    n_series = log.n_replications * n_comp
    if n_series * width < KEY_LIMIT:  # (series, firing) packed into one int64 key
        key = series * width + k
        series_of, firing_of = None, None
    else:  # huge firing numbers: pack their ranks (at most rows² < 2^62 keys) instead
        series_of, series = np.unique(series, return_inverse=True)
        firing_of, k_rank = np.unique(k, return_inverse=True)
        n_series, width = series_of.size, firing_of.size
        key = series * width + k_rank
    size = n_series * width
    if size <= 4 * rows.size + 1024:  # dense: two bincounts instead of a sort
        counts = np.bincount(key, minlength=size)
        cells = np.flatnonzero(counts)
        sums = np.bincount(key, weights=log.time[rows] / scale, minlength=size)[cells]
        counts = counts[cells]
    else:
        cells, inverse, counts = np.unique(key, return_inverse=True, return_counts=True)
        sums = np.bincount(inverse, weights=log.time[rows] / scale, minlength=cells.size)
    cell_series, cell_k = cells // width, cells % width
    if series_of is not None and firing_of is not None:
        cell_series, cell_k = series_of[cell_series], firing_of[cell_k]
    full = counts == members.ravel()[cell_series]
    out = []
    bounds = np.flatnonzero(np.r_[True, cell_series[1:] != cell_series[:-1], True])
    for a, b in itertools.pairwise(bounds.tolist()):
        ks, ys, ok = cell_k[a:b], sums[a:b] / counts[a:b], full[a:b]
        if not ok.any():
            continue
        first = int(np.argmax(ok))
        run = np.flatnonzero(~ok[first:] | (np.diff(ks[first:], prepend=ks[first] - 1) != 1))
        end = first + (int(run[0]) if run.size else ks.size - first)
        s = int(cell_series[a])
        out.append((s // n_comp, s % n_comp, ks[first:end], ys[first:end]))
    return out


def log_cycle_times(log: EventLog, labels: np.ndarray, wanted: np.ndarray,
                    present: np.ndarray) -> LogCycleTime:
    """The log's cycle time of each wanted component (see the module doc)."""
    # in units of the latest time: sums and squares cannot overflow, whatever the time unit
    scale = float(log.time.max()) or 1.0
    by_comp: dict[int, list[tuple[np.ndarray, np.ndarray]]] = {int(c): [] for c in wanted}
    for _, c, ks, ys in _series(log, labels, wanted, present, scale):
        by_comp[c].append((ks, ys))
    estimates: dict[int, ComponentCycleTime] = {}
    skipped: dict[int, str] = {}
    for c, runs in by_comp.items():
        runs = [(ks, ys) for ks, ys in runs if ks.size >= 2]
        if not runs:
            skipped[c] = "no firing of the component is logged for all its logged transitions"
            continue
        if len(runs) == 1:
            result = _one_run(c, *runs[0])
        else:
            result = _replications(c, runs)
        if isinstance(result, str):
            skipped[c] = result
        else:
            estimates[c] = replace(result, estimate=result.estimate * scale,
                                   se=result.se * scale, low=result.low * scale,
                                   high=result.high * scale)
    return LogCycleTime(estimates, skipped)


def _one_run(c: int, ks: np.ndarray, ys: np.ndarray) -> ComponentCycleTime | str:
    inc = np.diff(ys) / np.diff(ks)
    if inc.size < MIN_BATCH_VALUES + 10:
        return (f"one run of {ks.size} firings: batch means need at least "
                f"{MIN_BATCH_VALUES + 11} firings (or a replication column)")
    cut = mser(inc, 5)
    rest = inc[cut.deleted:]
    if rest.size < MIN_BATCH_VALUES:
        return (f"one run of {ks.size} firings, {cut.deleted} deleted as warm-up: fewer than "
                f"{MIN_BATCH_VALUES} left for batch means")
    choice = choose_batch_count(rest)
    iv = batch_means(rest, n_batches=choice.n_batches)
    se = iv.half_width / float(student_quantile(0.975, iv.n - 1))
    note = None
    if not choice.accepted or iv.batches_correlated:
        note = ("the batch means are still correlated: the log is short for its "
                "autocorrelation, and the interval may be too narrow")
    if cut.at_limit:
        note = "the warm-up may run past half the log (MSER-5 at its limit): log longer runs"
    return ComponentCycleTime(c, iv.estimate, se, float(iv.n - 1), iv.low, iv.high,
                              f"one run: MSER-5 warm-up, batch means ({iv.n} batches of "
                              f"{iv.batch_size} firings)", int(ks[cut.deleted] - ks[0]),
                              int(ks.size), note)


def _replications(c: int, runs: list[tuple[np.ndarray, np.ndarray]]) -> ComponentCycleTime | str:
    common = min(ks.size for ks, _ in runs)
    mean_inc = np.mean([np.diff(ys[:common]) / np.diff(ks[:common]) for ks, ys in runs], axis=0)
    deleted = mser(mean_inc, 5).deleted if mean_inc.size >= 10 else 0
    values = []
    for ks, ys in runs:
        if ks.size - 1 - deleted >= MIN_REPLICATION_FIRINGS:
            values.append((ys[-1] - ys[deleted]) / (ks[-1] - ks[deleted]))
    if len(values) < 2:
        return (f"fewer than 2 replications with {MIN_REPLICATION_FIRINGS} firings after the "
                f"warm-up of {deleted} firings")
    v = np.asarray(values)
    n = v.size
    se = float(v.std(ddof=1)) / math.sqrt(n)
    half = float(student_quantile(0.975, n - 1)) * se
    note = None if n == len(runs) else (f"{len(runs) - n} replications too short after the "
                                        "warm-up were left out")
    return ComponentCycleTime(c, float(v.mean()), se, float(n - 1), float(v.mean()) - half,
                              float(v.mean()) + half, f"{n} replications: MSER-5 warm-up on "
                              "their mean increments, Student t", int(deleted),
                              int(sum(ks.size for ks, _ in runs)), note)


def model_precision(log_side: LogCycleTime, given: float | None) -> float:
    """The relative precision to ask of the model: ``given``, else the log's tightest relative
    half-width divided by :data:`PRECISION_FACTOR`, within :data:`PRECISION_RANGE`."""
    if given is not None:
        return given
    rel = [(e.high - e.low) / 2 / abs(e.estimate) for e in log_side.estimates.values()
           if e.estimate]
    lo, hi = PRECISION_RANGE
    return float(np.clip(min(rel, default=hi * PRECISION_FACTOR) / PRECISION_FACTOR, lo, hi))
