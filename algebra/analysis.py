"""The whole deterministic analysis of an event graph, in one call.

:func:`analyze_graph` runs Howard, checks the certificate, and derives everything a review needs
from the eigenmode: critical places, cyclicity, slack, the periodic schedule, the characteristic
maxpolynomial (small graphs) and the measured transient of the recursion. It is the one entry
point the application layer uses for fixed durations.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .charpoly import MAX_DENSE_SIZE, CharPoly, essential_terms
from .critical import (
    Certificate,
    Slack,
    certify,
    critical_places,
    cyclicity,
    periodic_schedule,
    slack,
)
from .eventgraph import EventGraph, strongly_connected_components
from .exceptions import MaxPlusError, OutOfRange
from .recursion import transient as measure_transient
from .semiring import augmented_matrix
from .spectral import HowardResult, howard

__all__ = ["TRANSIENT_MAX_HORIZON", "TRANSIENT_MAX_PLACES", "TRANSIENT_WORK_LIMIT", "GraphAnalysis",
           "analyze_graph"]

#: Largest ``firings * places`` spent on measuring the transient of the recursion.
TRANSIENT_WORK_LIMIT = 20_000_000
#: Above this many places the transient is not measured: setting up the recursion alone costs
#: seconds there, more than the rest of the analysis.
TRANSIENT_MAX_PLACES = 50_000
#: Longest horizon (firings) the transient is looked for in: a regime of period c needs 2c + 2
#: firings to be seen, and a period of 10^12 firings (a circuit of 10^12 tokens) cannot be run.
TRANSIENT_MAX_HORIZON = 1_000_000


@dataclass(frozen=True)
class GraphAnalysis:
    """Everything the max-plus theory says about an event graph with fixed durations.

    Attributes
    ----------
    graph : EventGraph
    howard : HowardResult
        Cycle time and bias of every transition, critical circuits.
    certificate : Certificate
        Independent check of ``howard``; :attr:`Certificate.holds` must be true.
    critical : ndarray of bool, shape (m,)
        Places of the critical graph.
    slack : Slack
    cyclicity : int
        Period of the regime in firings.
    completion, start : ndarray of float, shape (n,)
        Periodic schedule of the first firing (later firings: add ``(k - 1) * eta_t``).
    charpoly : CharPoly or None
        Characteristic maxpolynomial of the one-step matrix; None when skipped.
    charpoly_note : str or None
        Why it was skipped.
    transient : int or None
        First firing from which ``x(k + c) = x(k) + c * eta`` holds, measured on the
        recursion; None if not reached within ``transient_horizon`` firings.
    transient_horizon : int
        Number of firings the transient was looked for in (0: not measured).
    n_components : int
        Number of strongly connected components.
    """

    graph: EventGraph
    howard: HowardResult
    certificate: Certificate
    critical: np.ndarray
    slack: Slack
    cyclicity: int
    completion: np.ndarray
    start: np.ndarray
    charpoly: CharPoly | None
    charpoly_note: str | None
    transient: int | None
    transient_horizon: int
    n_components: int

    @property
    def cycle_time(self) -> float:
        """The largest cycle time (the eigenvalue of a strongly connected graph)."""
        return self.howard.max_cycle_time

    @property
    def strongly_connected(self) -> bool:
        """True when every transition can reach every other."""
        return self.n_components == 1


def analyze_graph(
    graph: EventGraph, *, charpoly: bool = True, transient_firings: int | None = None
) -> GraphAnalysis:
    """Cycle times, certificate, critical graph, cyclicity, slack, schedule, χ and transient.

    Parameters
    ----------
    graph : EventGraph
        A live event graph.
    charpoly : bool
        Compute the characteristic maxpolynomial when the one-step matrix has at most
        :data:`~cyclecheck.algebra.charpoly.MAX_DENSE_SIZE` states.
    transient_firings : int, optional
        Horizon for measuring the transient; by default as many firings as
        :data:`TRANSIENT_WORK_LIMIT` allows, between 20 and 2000, and none at all (not
        measured) above :data:`TRANSIENT_MAX_PLACES` places.

    Raises
    ------
    NotLive, Unfed
        If the graph is not live.
    MaxPlusError
        If the certificate fails (a bug, never an input error).
    """
    with np.errstate(over="ignore"):  # near the float limit: OutOfRange, or saturated scales
        return _analyze(graph, charpoly, transient_firings)


def _analyze(graph: EventGraph, charpoly: bool, transient_firings: int | None) -> GraphAnalysis:
    result = howard(graph)
    cert = certify(graph, result)
    if not cert.holds:
        raise MaxPlusError(f"certificate failed: {cert}")
    critical = critical_places(graph, result)
    period = cyclicity(graph, result, critical)
    completion, start = periodic_schedule(graph, result)
    poly, note = _charpoly(graph) if charpoly else (None, "not requested")
    explicit = transient_firings is not None
    if transient_firings is None:
        transient_firings = int(np.clip(TRANSIENT_WORK_LIMIT // max(graph.n_places, 1), 20, 2000))
    horizon = max(transient_firings, 2 * period + 2)
    # Firing times grow by at most the total weight per firing: beyond the largest double
    # over the horizon, the recursion cannot be run (numbers near the float limit).
    with np.errstate(over="ignore"):
        reach = (horizon + 2) * (float(graph.weight.sum()) + result.max_cycle_time)
    if (graph.n_places > TRANSIENT_MAX_PLACES and not explicit) or not np.isfinite(reach) or (
            horizon > TRANSIENT_MAX_HORIZON):
        k0, horizon = None, 0
    else:
        k0 = measure_transient(graph, result.cycle_time, period, horizon)
    count, _ = strongly_connected_components(graph)
    return GraphAnalysis(
        graph=graph,
        howard=result,
        certificate=cert,
        critical=critical,
        slack=slack(graph, result),
        cyclicity=period,
        completion=completion,
        start=start,
        charpoly=poly,
        charpoly_note=note,
        transient=k0,
        transient_horizon=horizon,
        n_components=count,
    )


def _charpoly(graph: EventGraph) -> tuple[CharPoly | None, str | None]:
    depth = int(graph.tokens.max(initial=0))
    size = graph.n_transitions * max(depth, 1)
    if size > MAX_DENSE_SIZE:
        return None, (
            f"the one-step matrix has {size} states, more than {MAX_DENSE_SIZE} for the "
            "O(n^3) evaluation"
        )
    try:
        with np.errstate(over="ignore", invalid="ignore"):
            matrix, _ = augmented_matrix(graph)
        return essential_terms(matrix), None
    except OutOfRange as exc:  # the cycle time was fine; χ needs sums beyond the double range
        return None, f"not computed: {exc}"
