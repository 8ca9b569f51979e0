r"""The SimPy engine: a discrete-event simulation of a timed event graph.

The model is written in plain SimPy, one object per element of the graph:

* a :class:`Place` ``p = (u -> t)`` carries each token from the firing of ``u`` that produced it
  to the firing of ``t`` that consumes it. The token of firing ``j`` of ``u`` is consumed by
  firing ``k = j + m_p`` of ``t`` and becomes available after the hold ``h_p(k)``: the place
  schedules a :class:`simpy.Timeout` of that hold whose value is ``k``;
* a :class:`Transition` counts, for each of its firing numbers ``k``, the tokens still missing
  (initial tokens are there at time 0). When the last one arrives it starts firing ``k``: a
  timeout of the duration ``d_t(k)`` whose value is ``k``. When SimPy processes that timeout,
  the transition records the completion and hands one token to each output place.

A firing is thus a chain of timeouts and callbacks rather than a generator process: a process
per firing costs two more events (its initialisation and its end) and a generator, about a third
of the run time on a line of single-server stations. To give firings more behaviour (a shared
resource, a breakdown), subclass :class:`Transition`, override :meth:`Transition.launch` to start
a process of your own, and set :attr:`EventGraphModel.transition_class`.

Tokens are matched to firings by number, not by order of arrival: with random holds, the token
for firing ``k`` may arrive before the token for firing ``k - 1``, and firing ``k`` then starts
first. Firings of one transition may overlap; a self-loop place with ``n`` tokens lets at most
``n`` of them run at once (firing ``k`` waits for the end of firing ``k - n``). The simulation
therefore follows, firing by firing, the recursion

.. math::

    x_t(k) = d_t(k) + \max_{p = (u \to t)} \operatorname{term}_p(k), \qquad
    \operatorname{term}_p(k) = \begin{cases} 0 & k \le m_p \\
    x_u(k - m_p) + h_p(k) & k > m_p \end{cases}

of :mod:`cyclecheck.algebra.eventgraph` with the same floating-point operations (SimPy adds each
delay to the current time; a start is the latest arrival), so the two agree to the last bit.

Firings are started lazily, when their last token arrives: the event queue holds only the
firings in progress and the tokens in transit, never the whole horizon.

Examples
--------
Two machines in a loop with one part circulating take 2 + 3 time units per cycle:

>>> from cyclecheck.algebra.eventgraph import EventGraph
>>> g = EventGraph(duration=[2.0, 3.0], source=[0, 1], target=[1, 0], tokens=[0, 1],
...                hold=[0.0, 0.0], names=["cut", "weld"])
>>> run = simulate_event_graph(g, n_firings=3)
>>> run.time[:, 0].tolist(), run.time[:, 1].tolist()
([2.0, 7.0, 12.0], [5.0, 10.0, 15.0])
"""

from __future__ import annotations

import math
from bisect import bisect_left
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Protocol

import numpy as np
import simpy

from ..algebra.eventgraph import EventGraph, check_live
from .errors import ArgumentError

if TYPE_CHECKING:  # pandas is imported inside event_log(): the CLI starts without it
    import pandas as pd

__all__ = [
    "BLOCK",
    "EventGraphModel",
    "Place",
    "SamplerLike",
    "SimulationRun",
    "Transition",
    "simulate_event_graph",
]

#: Number of firings fetched from the sampler at once for one element.
BLOCK = 1024


class SamplerLike(Protocol):
    """What the engine asks of a sampler (see :class:`cyclecheck.simulate.durations.Sampler`).

    ``duration(t, first, count)`` returns ``d_t(first), ..., d_t(first + count - 1)`` and
    ``hold(p, first, count)`` returns ``h_p(first), ..., h_p(first + count - 1)``, firing numbers
    counted from 1, in any order of calls, the same numbers for the same arguments.
    """

    def duration(self, t: int, first: int, count: int) -> np.ndarray: ...

    def hold(self, p: int, first: int, count: int) -> np.ndarray: ...


class _Draws:
    """Values of one element (a transition's durations or a place's holds) by firing number.

    Fetched from the sampler ``BLOCK`` firings at a time. Each firing number is asked for at most
    once, so a block is dropped when all its values have been handed out: the memory stays
    bounded by the firings in progress, not by the horizon.
    """

    __slots__ = ("_blocks", "_element", "_fetch", "_kind")

    def __init__(self, fetch: Callable[[int, int, int], np.ndarray], element: int, kind: str):
        self._fetch = fetch
        self._element = element
        self._kind = kind
        # block number -> [its values, how many of them are still to be handed out]
        self._blocks: dict[int, list[Any]] = {}

    def get(self, k: int) -> float:
        """The value for firing number ``k`` (from 1)."""
        b, i = divmod(k - 1, BLOCK)
        entry = self._blocks.get(b)
        if entry is None:
            entry = self._blocks[b] = [self._load(b), BLOCK]
        entry[1] -= 1
        if not entry[1]:
            del self._blocks[b]
        return entry[0][i]

    def _load(self, b: int) -> list[float]:
        raw = np.asarray(self._fetch(self._element, b * BLOCK + 1, BLOCK), dtype=np.float64)
        if raw.shape != (BLOCK,):
            raise ArgumentError(
                f"sampler {self._kind}({self._element}, {b * BLOCK + 1}, {BLOCK}) returned shape "
                f"{raw.shape}: it must return {BLOCK} values"
            )
        if not np.all(np.isfinite(raw)) or raw.min() < 0:
            raise ArgumentError(
                f"sampler {self._kind}({self._element}, ...) returned a negative or non-finite "
                "value: durations and holds must be finite and >= 0"
            )
        return raw.tolist()


class _Fixed:
    """A fixed value, whatever the firing number (``sampler=None``)."""

    __slots__ = ("_value",)

    def __init__(self, value: float):
        self._value = value

    def get(self, k: int) -> float:
        """The value for firing number ``k`` (always the same)."""
        return self._value


class Place:
    """Place ``p = (u -> t)``: carries each token of ``u`` to the firing of ``t`` that uses it.

    Parameters
    ----------
    model : EventGraphModel
        The model the place belongs to.
    index : int
        Index ``p`` of the place in the graph.
    target : Transition
        The consuming transition ``t``.
    tokens : int
        Initial marking ``m_p``.
    hold : callable
        ``hold(k)`` is ``h_p(k)``, the hold of the token consumed by firing ``k`` of ``t``.
    """

    def __init__(
        self,
        model: EventGraphModel,
        index: int,
        target: Transition,
        tokens: int,
        hold: Callable[[int], float],
    ) -> None:
        self.model = model
        self.env = model.env
        self.last_firing = model.last_firing
        self.index = index
        self.target = target
        self.tokens = tokens
        self.hold = hold

    def put(self, j: int) -> None:
        """Firing ``j`` of the source has just completed: send its token on its way.

        The token is for firing ``k = j + m_p`` of the target. It arrives after the hold
        ``h_p(k)``: a timeout whose value is ``k``, with the target's
        :meth:`Transition.token_arrived` as callback. No token is sent to a firing beyond the
        model's last one.
        """
        k = j + self.tokens
        if k > self.last_firing:
            return
        arrival = self.env.timeout(self.hold(k), value=k)
        arrival.callbacks.append(self.target.token_arrived)


class Transition:
    """Transition ``t``: starts firing ``k`` when all of its tokens are there.

    Parameters
    ----------
    model : EventGraphModel
        The model the transition belongs to.
    index : int
        Index ``t`` of the transition in the graph.
    input_tokens : sequence of int
        Initial markings ``m_p`` of the input places.
    duration : callable
        ``duration(k)`` is ``d_t(k)``.

    Attributes
    ----------
    outputs : list of Place
        The places fed by ``t`` (filled in by the model).
    start, time : list of float
        ``start[k - 1]`` and ``time[k - 1]``: start and completion time of firing ``k`` (NaN
        until it happens).
    """

    def __init__(
        self,
        model: EventGraphModel,
        index: int,
        input_tokens: list[int],
        duration: Callable[[int], float],
    ) -> None:
        self.model = model
        self.env = model.env
        self.last_firing = model.last_firing
        self.index = index
        self.duration = duration
        self.outputs: list[Place] = []
        rows = 0 if math.isinf(model.last_firing) else int(model.last_firing)
        self.start: list[float] = [math.nan] * rows
        self.time: list[float] = [math.nan] * rows
        # Firing k needs a token from each input place with m_p < k: bisect in the sorted
        # markings counts them (all input places once k > max m_p).
        self._markings = sorted(input_tokens)
        # firing number -> tokens still missing, for the firings that have received some
        self._missing: dict[int, int] = {}

    @property
    def ready_at_start(self) -> int:
        """Number of firings whose tokens are all initial ones (``min m_p``): they start at 0."""
        return self._markings[0]

    def token_arrived(self, event: simpy.Event) -> None:
        """Callback of a token's arrival; the event's value is the consuming firing number."""
        k = event.value
        missing = self._missing.pop(k, None)
        if missing is None:
            missing = bisect_left(self._markings, k)
        missing -= 1
        if missing:
            self._missing[k] = missing
        else:
            self.launch(k)

    def launch(self, k: int) -> None:
        """Start firing ``k`` now (its tokens are all there).

        The firing is a timeout of its duration ``d_t(k)``, with value ``k``; when SimPy
        processes it, :meth:`complete` ends the firing.
        """
        if k > self.last_firing:
            return
        if k > len(self.start):  # only when the last firing is not known in advance
            self._grow(k)
        self.start[k - 1] = self.env.now
        end = self.env.timeout(self.duration(k), value=k)
        end.callbacks.append(self.complete)

    def complete(self, event: simpy.Event) -> None:
        """Callback of the end of a firing (the event's value): record it, put the tokens out."""
        k = event.value
        self.time[k - 1] = self.env.now
        for place in self.outputs:
            place.put(k)

    def _grow(self, k: int) -> None:
        extra = [math.nan] * max(k - len(self.start), len(self.start), 64)
        self.start.extend(extra)
        self.time.extend(extra)


class EventGraphModel:
    """The SimPy model of an event graph, built inside an environment.

    Build it, add processes of your own to ``env`` if you wish, then run ``env``;
    :meth:`result` collects what happened. :func:`simulate_event_graph` does all of this.

    Parameters
    ----------
    env : simpy.Environment
        The environment to build the model in, its clock at 0 (initial tokens are there then).
    graph : EventGraph
        The structure, and the fixed durations and holds used when ``sampler`` is None.
    sampler : SamplerLike, optional
        Random durations and holds by firing number.
    n_firings : int, optional
        Last firing number of every transition; unbounded when None.

    Attributes
    ----------
    transitions : list of Transition
        One per transition of the graph, by index.
    places : list of Place
        One per place of the graph, by index.
    transition_class, place_class : type
        Classes used to build them: set in a subclass to extend the model.

    Raises
    ------
    ArgumentError
        If the clock of ``env`` is not at 0 or ``n_firings`` is not an integer >= 1.
    NotLive, Unfed
        If the graph is not live (:func:`~cyclecheck.algebra.eventgraph.check_live`).
    """

    transition_class: type[Transition] = Transition
    place_class: type[Place] = Place

    def __init__(
        self,
        env: simpy.Environment,
        graph: EventGraph,
        sampler: SamplerLike | None = None,
        n_firings: int | None = None,
    ) -> None:
        if env.now != 0:
            raise ArgumentError(f"the environment's clock must be at 0, it is at {env.now}")
        if n_firings is not None:
            if isinstance(n_firings, bool) or not isinstance(n_firings, int | np.integer):
                raise ArgumentError(f"n_firings must be an integer >= 1, got {n_firings!r}")
            if n_firings < 1:
                raise ArgumentError(f"n_firings must be an integer >= 1, got {n_firings!r}")
            n_firings = int(n_firings)
        check_live(graph)
        self.env = env
        self.graph = graph
        self.n_firings = n_firings
        self.last_firing: float = math.inf if n_firings is None else n_firings
        source = graph.source.tolist()
        target = graph.target.tolist()
        tokens = graph.tokens.tolist()
        inputs: list[list[int]] = [[] for _ in range(graph.n_transitions)]
        for p, t in enumerate(target):
            inputs[t].append(tokens[p])
        self.transitions = [
            self.transition_class(
                self, t, inputs[t], self._draws(sampler, "duration", t, graph.duration)
            )
            for t in range(graph.n_transitions)
        ]
        self.places = [
            self.place_class(
                self,
                p,
                self.transitions[target[p]],
                tokens[p],
                self._draws(sampler, "hold", p, graph.hold),
            )
            for p in range(graph.n_places)
        ]
        for p, u in enumerate(source):
            self.transitions[u].outputs.append(self.places[p])
        for tr in self.transitions:
            for k in range(1, tr.ready_at_start + 1):
                if k > self.last_firing:
                    break
                tr.launch(k)

    @staticmethod
    def _draws(
        sampler: SamplerLike | None, kind: str, element: int, fixed: np.ndarray
    ) -> Callable[[int], float]:
        if sampler is None:
            return _Fixed(float(fixed[element])).get
        return _Draws(getattr(sampler, kind), element, kind).get

    def result(self) -> SimulationRun:
        """What happened up to the environment's current time."""
        starts = [np.array(tr.start, dtype=np.float64) for tr in self.transitions]
        times = [np.array(tr.time, dtype=np.float64) for tr in self.transitions]
        rows = self.n_firings
        if rows is None:  # the largest firing number started
            rows = max(
                (
                    int(np.flatnonzero(~np.isnan(s))[-1]) + 1
                    for s in starts
                    if not np.all(np.isnan(s))
                ),
                default=0,
            )
        n = self.graph.n_transitions
        start = np.full((rows, n), np.nan)
        time = np.full((rows, n), np.nan)
        for t in range(n):
            s, c = starts[t][:rows], times[t][:rows]
            start[: s.size, t] = s
            time[: c.size, t] = c
        return SimulationRun(self.graph, start, time, float(self.env.now))


@dataclass(frozen=True, eq=False)
class SimulationRun:
    """The firings of one simulation run.

    Attributes
    ----------
    graph : EventGraph
        The simulated graph.
    start, time : ndarray of float, shape (K, n)
        ``start[k - 1, t]`` and ``time[k - 1, t]``: start and completion time of firing ``k`` of
        transition ``t``; NaN where the firing had not started / completed when the run stopped.
        ``K`` is ``n_firings`` when given, else the largest firing number started.
    horizon : float
        Simulated time at the end of the run: ``until`` when it was given (even if every firing
        had ended before), else the last completion.
    completed : ndarray of int, shape (n,)
        Number of completed firings of each transition. With ``until`` they need not be firings
        ``1 .. completed``: a firing may end before an earlier one of the same transition.
    busy_time : ndarray of float, shape (n,)
        Time spent firing, per transition, up to the horizon (firings in progress count up to
        it); overlapping firings add up.
    """

    graph: EventGraph
    start: np.ndarray
    time: np.ndarray
    horizon: float
    completed: np.ndarray = field(init=False)
    busy_time: np.ndarray = field(init=False)

    def __post_init__(self) -> None:
        set_ = object.__setattr__
        set_(self, "completed", np.count_nonzero(~np.isnan(self.time), axis=0))
        # time spent firing up to the horizon, firings in progress included
        end = np.where(np.isnan(self.time), self.horizon, self.time)
        set_(self, "busy_time", np.nansum(end - self.start, axis=0))

    @property
    def total_firings(self) -> int:
        """Number of completed firings, all transitions together."""
        return int(self.completed.sum())

    def utilization(self) -> np.ndarray:
        """Busy time per transition divided by the horizon.

        For a single server (a self-loop place with one token) this is the fraction of time it is
        busy; when firings overlap it is the mean number of firings in progress.
        """
        if self.horizon <= 0:
            return np.zeros(self.graph.n_transitions)
        return self.busy_time / self.horizon

    def event_log(self) -> pd.DataFrame:
        """Completed firings as a table sorted by completion time.

        Columns ``transition`` (the transition's name), ``firing`` (from 1), ``start`` and
        ``time`` (completion). Ties in time are ordered by transition index, then firing.
        """
        import pandas as pd

        k_idx, t_idx = np.nonzero(~np.isnan(self.time))
        order = np.lexsort((k_idx, t_idx, self.time[k_idx, t_idx]))
        k_idx, t_idx = k_idx[order], t_idx[order]
        names = np.array([self.graph.name(t) for t in range(self.graph.n_transitions)], object)
        return pd.DataFrame(
            {
                "transition": names[t_idx],
                "firing": k_idx + 1,
                "start": self.start[k_idx, t_idx],
                "time": self.time[k_idx, t_idx],
            }
        )


def simulate_event_graph(
    graph: EventGraph,
    sampler: SamplerLike | None = None,
    n_firings: int | None = None,
    until: float | None = None,
) -> SimulationRun:
    """Simulate a timed event graph with SimPy.

    Parameters
    ----------
    graph : EventGraph
        The structure, and the fixed durations and holds used when ``sampler`` is None.
    sampler : SamplerLike, optional
        Random durations ``d_t(k)`` and holds ``h_p(k)`` by firing number.
    n_firings : int, optional
        Stop after firing ``n_firings`` of every transition.
    until : float, optional
        Stop at this simulated time. As in :meth:`simpy.Environment.run`, events at exactly
        ``until`` are not processed: a firing completing at ``until`` is not counted.

    At least one of ``n_firings`` and ``until`` must be given; with both, the run stops at
    whichever comes first.

    Returns
    -------
    SimulationRun

    Raises
    ------
    ArgumentError
        If neither stop is given, ``n_firings`` is not an integer >= 1 or ``until`` not a
        finite number > 0.
    NotLive, Unfed
        If the graph is not live.
    """
    if n_firings is None and until is None:
        raise ArgumentError("give n_firings, until or both: the run must stop")
    if until is not None and not (
        isinstance(until, int | float | np.number) and 0 < until < math.inf
    ):
        raise ArgumentError(f"until must be a finite number > 0, got {until!r}")
    env = simpy.Environment()
    model = EventGraphModel(env, graph, sampler, n_firings)
    env.run(until=until)
    return model.result()
