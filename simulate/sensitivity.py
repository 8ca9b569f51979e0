"""How much the cycle time depends on each element: derivatives, intervals, the bottleneck.

For every transition (its mean duration) and place (its mean hold), the derivative of the
cycle time with respect to the element's mean, the element's law being scaled (every draw
multiplied by the same factor; an element of mean 0 is shifted instead).

* **Random durations**: perturbation analysis along the critical paths of the max-plus
  recursion (:mod:`cyclecheck.algebra.lineage`). Each replication gives one derivative per
  element, the path sums of its firings after the warm-up divided by their number; the
  interval is Student t over replications, as for the cycle time itself
  (:mod:`cyclecheck.simulate.experiment`). The derivative is that of the **headline** cycle
  time, the largest one: the paths start from the transitions of a sink component of the
  graph (nothing leaves it, so it runs at the cycle time of the slowest component upstream),
  and each replication uses the sink whose transitions grew fastest in it.
* **Fixed durations**: exact one-sided derivatives from the critical circuits
  (:mod:`cyclecheck.algebra.sensitivity`); ``derivative`` is the one for an increase, the
  "interval" ``[decrease, increase]`` (equal unless several critical circuits tie).

The **bottleneck** is the element of largest derivative among those whose mean is positive (an
element that takes no time cannot be made faster), ties going to the larger effect of a 10 %
change, ``0.1 × mean × derivative``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from ..algebra.critical import critical_places
from ..algebra.eventgraph import EventGraph
from ..algebra.lineage import PathSums, path_estimates
from ..algebra.sensitivity import fixed_sensitivity
from ..algebra.spectral import HowardResult, howard
from ..algebra.stability import Components
from .jsontext import json_floats

__all__ = [
    "MAX_FRONTIERS",
    "MAX_SEGMENTS",
    "SEGMENT_MEMORY",
    "SensitivityEstimate",
    "bottleneck_index",
    "distinguishable",
    "element_entries",
    "element_entry",
    "fixed_model_sensitivity",
    "from_paths",
    "frontiers",
    "ranked_candidates",
    "segment_bounds",
]

#: Sink components whose paths are followed (the ones of largest mean-duration cycle time).
MAX_FRONTIERS = 8
#: Most segments the path sums are split into (the warm-up is cut at a segment boundary).
MAX_SEGMENTS = 20


@dataclass
class SensitivityEstimate:
    """Derivatives of the cycle time with respect to every element's mean.

    Elements are the ``n`` transitions followed by the ``m`` places, in model order.

    Attributes
    ----------
    derivative, low, high : ndarray, shape (n + m,)
        The derivative and its 95 % interval (fixed durations: ``[decrease, increase]``).
    criticality : ndarray, shape (n + m,), or None
        Share of the element's firings on the critical path (random durations).
    exact : bool
        True for fixed durations.
    replications : int
    first_firing : int or None
        Firings after this one were summed (the warm-up rounded up to a segment boundary).
    lookahead : int or None
        Look-ahead of the windows of the sweep; None when the paths were exact.
    skipped : str or None
        Why there are no derivatives.
    """

    derivative: np.ndarray
    low: np.ndarray
    high: np.ndarray
    criticality: np.ndarray | None
    exact: bool
    replications: int
    first_firing: int | None = None
    lookahead: int | None = None
    skipped: str | None = None

    @property
    def method(self) -> str:
        """How the derivatives were obtained, in one sentence."""
        if self.skipped:
            return f"not estimated: {self.skipped}"
        if self.exact:
            return ("exact, from the critical circuits of the fixed durations: dλ/dθ = "
                    "1/(tokens of the circuit) on a critical circuit, 0 off it; interval "
                    "[decrease, increase], equal unless critical circuits tie")
        paths = ("exact path sums from the last firing" if self.lookahead is None else
                 f"windows with a look-ahead of {self.lookahead} firings")
        return (f"perturbation analysis along the critical paths of the recursion ({paths}), "
                f"firings after {self.first_firing}, Student t over {self.replications} "
                "replications")


def frontiers(graph: EventGraph, parts: Components) -> list[np.ndarray]:
    """The sink components whose critical paths are followed (at most :data:`MAX_FRONTIERS`,
    those of largest mean-duration cycle time)."""
    sinks = parts.sinks
    if len(sinks) <= MAX_FRONTIERS:
        return sinks
    eta = howard(graph).cycle_time
    ranked = sorted(range(len(sinks)), key=lambda i: -float(eta[sinks[i][0]]))
    return [sinks[i] for i in sorted(ranked[:MAX_FRONTIERS])]


#: Bytes the path sums of one replication may take while it runs (their segments are reduced
#: to fit; once the warm-up is known they are added into one, :meth:`PathSums.after`).
SEGMENT_MEMORY = 8 * 2**20


def segment_bounds(checkpoints: np.ndarray, elements: int = 1, columns: int = 1) -> np.ndarray:
    """At most :data:`MAX_SEGMENTS` + 1 of the checkpoints, the first and last included, fewer
    when the sums of ``elements`` for ``columns`` frontiers of one replication would exceed
    :data:`SEGMENT_MEMORY`: with a single segment the warm-up is not cut from the sums.

    Per replication, so that the segments, and the numbers summed in them, do not depend on
    how many replications share a batch."""
    fit = SEGMENT_MEMORY // max(1, 4 * 8 * elements * columns)  # two sums, kept twice
    count = int(np.clip(fit, 1, MAX_SEGMENTS))
    picks = np.unique(np.round(np.linspace(0, checkpoints.size - 1,
                                           count + 1)).astype(np.int64))
    return np.asarray(checkpoints)[picks]


def _t_half_width(values: np.ndarray) -> np.ndarray:
    from .estimate import student_quantile

    r = values.shape[0]
    if r < 2:
        return np.full(values.shape[1], np.nan)
    return student_quantile(0.975, r - 1) * values.std(axis=0, ddof=1) / math.sqrt(r)


def from_paths(graph: EventGraph, paths: PathSums, fronts: list[np.ndarray],
               growth: np.ndarray, warmup: int) -> SensitivityEstimate:
    """Derivatives with intervals from the path sums of a batch of replications.

    ``growth`` (R, n) are the replications' growth rates after the warm-up: each replication's
    frontier is the sink whose transitions grew fastest.
    """
    reps = paths.weighted.shape[0]
    size = graph.n_transitions + graph.n_places
    if paths.skipped:
        empty = np.full(size, np.nan)
        return SensitivityEstimate(empty, empty, empty, None, False, reps,
                                   skipped=paths.skipped)
    by_front = np.stack([growth[:, f].mean(axis=1) for f in fronts], axis=1)
    choice = np.argmax(by_front, axis=1)
    means = np.r_[graph.duration, graph.hold]
    per_rep, crit, first = path_estimates(paths, means, warmup, choice)
    mean = per_rep.mean(axis=0)
    half = _t_half_width(per_rep)
    return SensitivityEstimate(mean, mean - half, mean + half, crit.mean(axis=0), False, reps,
                               first, paths.lookahead)


def fixed_model_sensitivity(graph: EventGraph, result: HowardResult | None = None,
                            critical: np.ndarray | None = None) -> SensitivityEstimate:
    """Exact derivatives for fixed durations and holds."""
    result = result if result is not None else howard(graph)
    if critical is None:
        critical = critical_places(graph, result)
    s = fixed_sensitivity(graph, result, critical)
    inc = np.r_[s.transitions_increase, s.places_increase]
    dec = np.r_[s.transitions_decrease, s.places_decrease]
    return SensitivityEstimate(inc, dec, inc, None, True, 1)


def ranked_candidates(sens: SensitivityEstimate, means: np.ndarray) -> np.ndarray:
    """Elements of positive mean and positive derivative, largest derivative first (ties:
    the larger effect of a 10 % change, then the smaller index)."""
    d = np.where(np.isfinite(sens.derivative), sens.derivative, -np.inf)
    candidates = np.flatnonzero((np.asarray(means) > 0) & (d > 0))
    key = np.lexsort((-candidates, np.asarray(means)[candidates] * d[candidates],
                      d[candidates]))
    return candidates[key[::-1]]


def bottleneck_index(sens: SensitivityEstimate, means: np.ndarray) -> int | None:
    """The element of largest derivative among those of positive mean (None if none has a
    positive derivative)."""
    ranked = ranked_candidates(sens, means)
    return int(ranked[0]) if ranked.size else None


def distinguishable(sens: SensitivityEstimate, first: int, second: int) -> bool:
    """Whether element ``first``'s derivative is known to exceed ``second``'s: exactly, for
    fixed durations; for random ones, when their 95 % intervals do not overlap (a
    conservative rule: overlapping intervals may still differ)."""
    if sens.exact:
        return bool(sens.derivative[first] > sens.derivative[second])
    return bool(sens.low[first] > sens.high[second])


def element_entry(model: Any, e: int, sens: SensitivityEstimate) -> dict[str, Any]:
    """The JSON entry of element ``e`` (transition, or place ``e − n``)."""
    return element_entries(model, [e], sens)[0]


def element_entries(model: Any, elements: Any, sens: SensitivityEstimate
                    ) -> list[dict[str, Any]]:
    """The JSON entries of ``elements``, in their order (see :func:`element_entry`): the
    numbers of all of them taken at once, None where not finite."""
    n = model.n_transitions
    chosen = np.asarray(elements, dtype=np.int64)
    derivative, low, high = (json_floats(v[chosen], finite=True)
                             for v in (sens.derivative, sens.low, sens.high))
    criticality = (None if sens.criticality is None
                   else json_floats(sens.criticality[chosen], finite=True))
    entries = []
    for i, e in enumerate(chosen.tolist()):
        entry: dict[str, Any] = ({"element": "transition", "id": model.transition_ids[e]}
                                 if e < n else {"element": "place", "index": e - n})
        entry["derivative"] = derivative[i]
        entry["ci"] = [low[i], high[i]]
        if criticality is not None:
            entry["path_criticality"] = criticality[i]
        entries.append(entry)
    return entries
