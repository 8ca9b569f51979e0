"""Replications of a model on either engine, and the cycle time they estimate.

A *replication* ``r`` of a model is one run from the initial marking with the draws of
``model.sampler(seed, r)``: the SimPy engine and the max-plus recursion, given the same seed and
replication index, compute the same firing times. Replications are independent, so they are the
unit of work handed to executors (local processes or a Dask cluster) and the unit of the
sequential precision procedure.

Estimation (Law & Kelton, *Simulation Modeling and Analysis*, ch. 9, replication/deletion): each
run records ``x_t(k)`` every ``block`` firings; the warm-up is chosen once, by MSER-5 on the pilot
round's mean block rates; each replication's estimate of the cycle time is its growth rate
``(x_t(K) - x_t(k0)) / (K - k0)``, maximised over transitions (in a strongly connected graph they
differ by O(1/K); in one that is not, the slowest component sets the headline); the interval is
the Student-t interval over replications.

Upper bound: after ``K`` firings of every transition the marking is the initial one again; let
``Z(K)`` be the time when all its tokens are available. Restarting from there with all tokens
present can only delay later firings, so ``Z`` is subadditive, ``E Z(K + L) <= E Z(K) + E Z(L)``
for i.i.d. draws, and by Kingman's subadditive ergodic theorem the cycle time is
``inf_K E Z(K) / K``: every ``E Z(K) / K`` is an upper bound, estimated here with its interval.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Sequence
from concurrent.futures import Executor, ProcessPoolExecutor
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from ..algebra.critical import cyclicity
from ..algebra.eventgraph import self_loop_servers, strongly_connected_components
from ..algebra.lineage import LINEAGE_MEMORY, LineageSweep, PathSums
from ..algebra.recursion import RandomRecursion, choose_kernel, load_kernel, within
from ..algebra.spectral import howard
from ..algebra.stability import components as graph_components
from .durations import BLOCK, PLACE, TRANSITION, Sampler
from .errors import ArgumentError, ModelError
from .estimate import (
    Interval,
    batch_means,
    choose_batch_count,
    mser,
    replication_interval,
    sequential_precision,
)
from .modelfile import Model
from .sensitivity import (
    MAX_SEGMENTS,
    SEGMENT_MEMORY,
    SensitivityEstimate,
    from_paths,
    frontiers,
    segment_bounds,
)
from .settings import RunSettings

__all__ = [
    "Batch",
    "Estimate",
    "component_growth",
    "estimate_cycle_time",
    "estimate_with_executor",
    "open_executor",
    "prepare_kernel",
    "run_replications",
    "sensitivity_on_same_draws",
    "servers_horizon",
    "utilization_per_server",
]

ENGINES = ("recursion", "simpy")

#: Replication estimates added per round of the sequential procedure (at least).
DEFAULT_REPLICATIONS = 10
#: Most replications any estimate may use.
MAX_REPLICATIONS = 2000
#: Default target relative half-width for random models.
DEFAULT_PRECISION = 0.01
#: Bytes the path sums of the replications run together may take while they run.
GROUP_SUMS_MEMORY = 64 * 2**20
#: Longest cyclicity that runs are aligned to (they are made at least 10 periods long).
MAX_ALIGNED_PERIOD = 10_000


@dataclass
class Batch:
    """What a set of replications computed.

    Attributes
    ----------
    replications : ndarray of int, shape (R,)
    checkpoints : ndarray of int, shape (J + 1,)
        Firing numbers at which ``x`` was recorded (0 first).
    x : ndarray, shape (J + 1, R, n)
        Firing times of every transition at the checkpoints.
    busy : ndarray, shape (R, n)
        Sum of the durations of each transition's firings.
    critical : ndarray, shape (R, m), or None
        Firings of each place's target that the place set (recursion only).
    clearing : ndarray, shape (R,), or None
        ``Z(K)``: when every token of the marking after ``K`` firings is available; None when
        the holds it needs (those of the next ``largest marking`` firings) exceed
        :data:`CLEARING_DRAWS`.
    times : ndarray, shape (K, R, n), or None
        All firing times, when recorded.
    horizon : ndarray, shape (R, n)
        Latest completion among each transition's last ``servers`` firings (its last one when
        it has no self-loop): the span its servers' busy time lies in.
    paths : PathSums or None
        Sums along the critical paths, for the derivatives (recursion only).
    """

    replications: np.ndarray
    checkpoints: np.ndarray
    x: np.ndarray
    busy: np.ndarray
    critical: np.ndarray | None
    clearing: np.ndarray | None
    times: np.ndarray | None
    horizon: np.ndarray
    paths: PathSums | None = None

    @property
    def firings(self) -> int:
        """Firings of every transition in each replication."""
        return int(self.checkpoints[-1])

    @staticmethod
    def concatenate(batches: Sequence[Batch]) -> Batch:
        """Join batches over replications (same checkpoints)."""
        first = batches[0]
        crit = None if first.critical is None else np.concatenate([b.critical for b in batches])
        times = None if first.times is None else np.concatenate([b.times for b in batches], axis=1)
        paths = (None if any(b.paths is None for b in batches)
                 else PathSums.concatenate([b.paths for b in batches]))
        return Batch(
            np.concatenate([b.replications for b in batches]), first.checkpoints,
            np.concatenate([b.x for b in batches], axis=1),
            np.concatenate([b.busy for b in batches]), crit,
            None if first.clearing is None else np.concatenate([b.clearing for b in batches]),
            times, np.concatenate([b.horizon for b in batches]), paths,
        )


def _checkpoints(firings: int, block: int) -> np.ndarray:
    return np.unique(np.r_[np.arange(0, firings, block), firings])


#: Most hold draws fetched for the upper bound Z(K) of one batch (the holds of the next
#: ``largest marking`` firings of every place and replication).
CLEARING_DRAWS = 1 << 24


def _clearing_fits(graph: Any, marking: int, replications: int) -> bool:
    """Whether the holds that Z(K) needs fit the budget (a place may hold 10^12 tokens)."""
    return marking * max(graph.n_places, 1) * replications <= CLEARING_DRAWS


def _clearing_time(graph: Any, last: np.ndarray, future_holds: np.ndarray) -> np.ndarray:
    """``Z(K)`` per replication: the latest availability of the tokens in the places after ``K``
    firings of every transition.

    ``last`` holds the firing times of the last ``min(K, M)`` firings (shape (., R, n), ``M``
    the largest marking) and ``future_holds`` the holds ``h_p(K + 1 .. K + M)`` (shape
    (M, R, m)); tokens still there from the initial marking are available at 0.
    The ``i``-th newest token of place ``p`` (``i <= m_p``) was produced by firing
    ``j = K - i + 1`` of its source and is consumed by firing ``j + m_p``, whose hold it carries.
    """
    K_rows = last.shape[0]
    z = last[-1].max(axis=1)
    for i in range(1, K_rows + 1):
        places = np.flatnonzero(graph.tokens >= i)
        if places.size == 0:
            break
        produced = last[K_rows - i][:, graph.source[places]]  # (R, |places|)
        hold = future_holds[graph.tokens[places] - i, :, places].T  # h_p(K - i + 1 + m_p)
        z = np.maximum(z, (produced + hold).max(axis=1))
    return np.maximum(z, 0.0)


#: Most bytes of draws fetched from the samplers at a time by the recursion, per kind.
DRAW_BYTES = 16 * 2**20
#: Fewest firings fetched at a time (a divisor of the sampler's ``BLOCK``).
MIN_CHUNK = 64
assert BLOCK % MIN_CHUNK == 0, "a chunk must not straddle two blocks of draws"


def _chunk_firings(replications: int, width: int) -> int:
    """Firings per fetch: the largest power of two dividing the sampler's ``BLOCK`` whose
    draws of all replications fit :data:`DRAW_BYTES` (a call of the samplers has a fixed cost
    per replication and element, so few large fetches are cheapest), at least
    :data:`MIN_CHUNK`."""
    chunk = BLOCK
    while chunk > MIN_CHUNK and chunk * replications * max(width, 1) * 8 > DRAW_BYTES:
        chunk //= 2
    return chunk


class _AlignedDraws:
    """Serves a recursion's sequential requests for draws from chunks aligned on the sampler's
    blocks: one fetch per ``chunk`` firings, however finely the run is checkpointed. A fetch
    may reuse the memory of the previous one: what is handed out is valid until the next
    request."""

    def __init__(self, fetch: Callable[[int, int], np.ndarray], chunk: int) -> None:
        self.fetch = fetch
        self.chunk = chunk
        self.start = 0
        self.data: np.ndarray | None = None

    def __call__(self, first: int, count: int) -> np.ndarray:
        parts = []
        k, end = first, first + count
        chunk = self.chunk
        while k < end:
            start = (k - 1) // chunk * chunk + 1
            if self.data is None or self.start != start:
                parts = [p.copy() for p in parts]  # the fetch may overwrite them
                self.data, self.start = self.fetch(start, chunk), start
            take = min(end, start + chunk) - k
            parts.append(self.data[k - start : k - start + take])
            k += take
        return parts[0] if len(parts) == 1 else np.concatenate(parts)


def servers_horizon(graph: Any, last: np.ndarray) -> np.ndarray:
    """Per replication and transition, the latest of its last ``servers`` completions, from
    ``last`` (the last firings, shape (., R, n)): with ``n`` servers taking jobs in turn the
    last firing need not be the last to end."""
    servers = np.clip(self_loop_servers(graph), 1, last.shape[0])
    out = last[-1].copy()
    for j in range(2, int(servers.max(initial=1)) + 1):
        cols = np.flatnonzero(servers >= j)
        out[:, cols] = np.maximum(out[:, cols], last[-j][:, cols])
    return out


def _recursion_batch(model: Model, seed: int, replications: Sequence[int], firings: int,
                     block: int, record: bool, lineage: bool = True,
                     kernel: str = "auto") -> Batch:
    """The replications on the recursion; with ``lineage``, in groups small enough for the
    memory of the critical paths (each replication's numbers are its own whatever the group:
    the windows and segments of the sums are fixed per replication)."""
    reps = list(replications)
    fronts = None
    size = len(reps)
    if lineage and firings > 0:
        graph = model.graph()
        fronts = frontiers(graph, graph_components(graph))
        size = _lineage_group(model, firings, len(fronts))
    if len(reps) <= size:
        return _recursion_group(model, seed, reps, firings, block, record, fronts, kernel)
    return Batch.concatenate([
        _recursion_group(model, seed, reps[i : i + size], firings, block, record, fronts,
                         kernel)
        for i in range(0, len(reps), size)])


def _lineage_group(model: Model, firings: int, n_frontiers: int) -> int:
    """Replications run together while their critical paths are summed: as many as keep the
    record (:data:`~cyclecheck.algebra.lineage.LINEAGE_MEMORY`) and the path sums
    (:data:`~.sensitivity.SEGMENT_MEMORY`) of one replication each, at least one; exactly one
    when a replication's run does not fit and is summed over windows (the windows' sweeps are
    started by the chunks fed, whose length depends on the replications run together)."""
    n, m = model.n_transitions, model.n_places
    capacity = LineageSweep.capacity(n, m)
    if firings > capacity:
        return 1
    kept = firings * LineageSweep.bytes_per_firing(n, m)
    sums = max(1, min(SEGMENT_MEMORY, 4 * 8 * (2 * m + n) * n_frontiers * MAX_SEGMENTS))
    return max(1, min(LINEAGE_MEMORY // kept, GROUP_SUMS_MEMORY // sums))


def _recursion_group(model: Model, seed: int, replications: Sequence[int], firings: int,
                     block: int, record: bool, fronts: list[np.ndarray] | None = None,
                     kernel: str = "auto") -> Batch:
    """Replications run together on the recursion; with ``fronts`` (the frontiers), the sums
    along their critical paths too."""
    reps = np.asarray(replications, dtype=np.int64)
    samplers = [model.sampler(seed, int(r)) for r in reps]
    # Markings above the run's firings deliver nothing within it: the same firing times with
    # a history of at most `firings` firings (a place may hold 10^12 tokens).
    graph = model.graph()
    marking = max(1, int(model.tokens.max(initial=0)))

    def holds(first: int, count: int) -> np.ndarray:
        return np.stack([s.hold_block(first, count) for s in samplers], axis=1)

    def filled(kind: str, table: Any) -> Callable[[int, int], np.ndarray]:
        """The draws of one kind for the recursion. Fixed values are handed out as they are
        (they broadcast over firings and replications); random ones are fetched in aligned
        chunks into one reused buffer (fresh memory costs a page fault per 4 KiB on first
        touch)."""
        if not table.is_random:
            fixed = np.asarray(table.values, dtype=np.float64)[None, None, :]
            return lambda first, count: fixed
        chunk = _chunk_firings(len(reps), len(table))
        buffer = np.empty((chunk, len(reps), len(table)))

        def fetch(first: int, count: int) -> np.ndarray:
            out = buffer[:count]
            Sampler.prepare_together(samplers, TRANSITION if kind == "duration_block" else PLACE,
                                     first)
            for i, s in enumerate(samplers):
                out[:, i, :] = getattr(s, kind)(first, count)
            return out

        return _AlignedDraws(fetch, chunk)

    rec = RandomRecursion(within(graph, firings),
                          filled("duration_block", samplers[0].durations),
                          filled("hold_block", samplers[0].holds), len(reps),
                          criticality=True, kernel=kernel, firings=firings)
    depth = min(firings, max(1, int(graph.tokens.max(initial=0))))
    points = _checkpoints(firings, block)
    sweep = None
    if fronts is not None:
        sweep = rec.track_lineage(fronts, segment_bounds(
            points, 2 * graph.n_places + graph.n_transitions, len(fronts)))
    x = np.zeros((points.size, len(reps), graph.n_transitions))
    busy = np.zeros((len(reps), graph.n_transitions))
    critical = np.zeros((len(reps), graph.n_places), dtype=np.int64)
    recorded = []
    # Two runs at most, checkpointed every `block` firings: the last `depth` firings are
    # always recorded (Z(K) needs them), from the checkpoint before them on.
    cut = 0 if record else int(points[np.searchsorted(points, firings - depth, "right") - 1])
    for a, b in ((0, cut), (cut, firings)):
        if b <= a:
            continue
        out = rec.run(b - a, block, record=record or b > cut)
        busy += out.busy
        critical += out.critical
        if out.times is not None:
            recorded.append(out.times)
        i = int(np.searchsorted(points, a))
        x[i + 1 : i + out.checkpoints.size] = out.x[1:]
    kept = np.concatenate(recorded)
    clearing = (_clearing_time(graph, kept[-depth:], holds(firings + 1, marking))
                if _clearing_fits(graph, marking, len(reps)) else None)
    paths = sweep.finish() if sweep is not None else None
    return Batch(reps, points, x, busy, critical, clearing, kept if record else None,
                 servers_horizon(graph, kept[-depth:]), paths)


def _simpy_batch(model: Model, seed: int, replications: Sequence[int], firings: int,
                 block: int, record: bool) -> Batch:
    from .engine import simulate_event_graph

    reps = np.asarray(replications, dtype=np.int64)
    graph = model.graph()
    points = _checkpoints(firings, block)
    n = graph.n_transitions
    x = np.zeros((points.size, len(reps), n))
    busy = np.zeros((len(reps), n))
    marking = max(1, int(graph.tokens.max(initial=0)))
    clearing = np.zeros(len(reps)) if _clearing_fits(graph, marking, 1) else None
    horizon = np.zeros((len(reps), n))
    times = np.zeros((firings, len(reps), n)) if record else None
    depth = min(firings, marking)
    for i, r in enumerate(reps.tolist()):
        sampler = model.sampler(seed, r)
        run = simulate_event_graph(graph, sampler, n_firings=firings)
        x[1:, i] = run.time[points[1:] - 1]
        busy[i] = np.nansum(run.time - run.start, axis=0)
        if clearing is not None:
            future = sampler.hold_block(firings + 1, marking)[:, None, :]
            clearing[i] = _clearing_time(graph, run.time[-depth:, None, :], future)[0]
        horizon[i] = servers_horizon(graph, run.time[-depth:, None, :])[0]
        if times is not None:
            times[:, i] = run.time
    return Batch(reps, points, x, busy, None, clearing, times, horizon)


def _run_chunk(engine: str, model: Model, seed: int, replications: Sequence[int], firings: int,
               block: int, record: bool, lineage: bool = True, kernel: str = "auto") -> Batch:
    if engine == "recursion":
        return _recursion_batch(model, seed, replications, firings, block, record, lineage,
                                kernel)
    return _simpy_batch(model, seed, replications, firings, block, record)


def _ignore_interrupts() -> None:
    """In a worker process: leave Ctrl-C to the main process, which stops the workers."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)


def open_executor(workers: int = 1, scheduler: str | None = None, *,
                  ignore_interrupts: bool = False) -> tuple[Executor | None, Callable]:
    """An executor for replications and a function that closes it.

    ``scheduler`` is the address of a Dask scheduler (``tcp://host:port``); else ``workers > 1``
    gives a local process pool; else ``None`` (run in this process). ``ignore_interrupts``:
    local worker processes ignore Ctrl-C (the caller stops them; see
    :mod:`cyclecheck.simulate.tasks`).
    """
    if scheduler:
        try:
            from distributed import Client
        except ImportError as err:  # pragma: no cover - depends on the install
            raise ModelError("--scheduler needs dask distributed: pip install "
                             "'cyclecheck[cluster]'", item="--scheduler") from err
        try:
            client = Client(scheduler, timeout="10s")
        except (OSError, TimeoutError, ValueError, TypeError) as err:
            raise ModelError(f"cannot reach the Dask scheduler at {scheduler}: {err}",
                             item="--scheduler") from err
        return client.get_executor(pure=False), client.close
    if workers > 1:
        pool = ProcessPoolExecutor(max_workers=workers,
                                   initializer=_ignore_interrupts if ignore_interrupts else None)
        return pool, pool.shutdown
    return None, lambda: None


def run_replications(model: Model, engine: str, seed: int, replications: Sequence[int],
                     firings: int, *, block: int | None = None, record: bool = False,
                     executor: Executor | None = None, chunks: int = 1,
                     lineage: bool = True, kernel: str = "auto") -> Batch:
    """Run replications on one engine, split into ``chunks`` tasks on ``executor``;
    ``lineage``: sum along the critical paths too (recursion only), for the derivatives;
    ``kernel``: the recursion's implementation (``RandomRecursion``'s ``kernel``: the same
    numbers either way)."""
    if engine not in ENGINES:
        raise ArgumentError(f"engine must be one of {ENGINES}, got {engine!r}")
    _check_memory(model, len(replications), firings, record)
    block = block or max(1, firings // 200)
    reps = list(replications)
    if executor is None or chunks <= 1 or len(reps) < 2:
        return _run_chunk(engine, model, seed, reps, firings, block, record, lineage, kernel)
    parts = [p.tolist() for p in np.array_split(np.asarray(reps), min(chunks, len(reps)))]
    futures = [executor.submit(_run_chunk, engine, model, seed, p, firings, block, record,
                               lineage, kernel)
               for p in parts if p]
    return Batch.concatenate([f.result() for f in futures])


def _check_memory(model: Model, replications: int, firings: int, record: bool) -> None:
    per_value = 8 * model.n_transitions * replications
    # The recursion keeps the last (largest marking + 1) firings of every transition, markings
    # above the run's firings counting as that many (see algebra.recursion.within).
    depth = min(int(model.tokens.max(initial=0)), firings) + 1
    need = (per_value * ((firings if record else 400) + depth) + 160 * depth
            + 16 * model.n_places * replications)
    try:
        available = os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):  # pragma: no cover - non-POSIX
        return
    if need > 0.8 * available:
        raise ModelError(
            f"the run would need about {need / 2**30:.1f} GiB and this machine has "
            f"{available / 2**30:.1f} GiB free; ask for fewer firings or replications",
            item="--firings/--replications",
        )


@dataclass
class Estimate:
    """The cycle time estimated from replications of one engine."""

    engine: str
    interval: Interval
    by_transition: np.ndarray  # (n,) mean growth rate per transition
    per_replication: np.ndarray  # (R,) headline estimate of each replication
    warmup_firings: int
    firings: int
    replications: int
    upper: Interval | None
    utilization: np.ndarray  # (n,) per server; NaN for a transition without a self-loop
    criticality_places: np.ndarray | None  # share of the target's firings each place set
    history: list[tuple[int, float, float, float]]
    target_met: bool | None
    batch: Batch
    warmup_at_limit: bool = False
    busy_servers: np.ndarray | None = None  # (n,) mean number of firings in progress
    sensitivity: SensitivityEstimate | None = None
    seed: int | None = None

    @property
    def firings_simulated(self) -> int:
        """All firings of all transitions in all replications."""
        return self.firings * self.replications * self.batch.x.shape[2]

    def batch_means_interval(self) -> Interval | None:
        """Batch means inside the first replication, after its warm-up (Law & Kelton §9.5.3):
        a second interval from one long run, for comparison with the replication interval.
        None when the run has fewer than 100 blocks after the warm-up."""
        b = self.batch
        t = int(np.argmax(self.by_transition))
        j = int(np.searchsorted(b.checkpoints, self.warmup_firings))
        points = b.checkpoints[j:]
        sizes = np.diff(points)
        rates = np.diff(b.x[j:, 0, t]) / sizes
        rates = rates[sizes == sizes[0]] if sizes.size else rates  # a shorter last block out
        if rates.size < 100:  # too few blocks to choose batches by their correlation
            return None
        choice = choose_batch_count(rates)
        return batch_means(rates, n_batches=choice.n_batches)


class _Components:
    """Strongly connected components of a model's graph, to average growth rates over.

    In a strongly connected component every transition has the same cycle time and their
    growth rates differ by noise of order 1/K; the *mean* over the component is the estimate
    (the maximum over its transitions would be biased upwards, more so the more transitions).
    A graph that is not strongly connected is reported by its slowest component.
    """

    def __init__(self, model: Model) -> None:
        count, labels = strongly_connected_components(model.graph())
        self.labels = labels
        self.sizes = np.bincount(labels, minlength=count).astype(np.float64)

    def means(self, per_transition: np.ndarray) -> np.ndarray:
        """Mean over each component, for values of shape (..., n): shape (..., components)."""
        flat = per_transition.reshape(-1, per_transition.shape[-1])
        out = np.stack([np.bincount(self.labels, weights=row, minlength=self.sizes.size)
                        for row in flat]) / self.sizes
        return out.reshape(*per_transition.shape[:-1], self.sizes.size)

    def headline(self, per_transition: np.ndarray) -> np.ndarray:
        """The slowest component's mean, for values of shape (..., n)."""
        return self.means(per_transition).max(axis=-1)

    def spread(self, per_transition: np.ndarray) -> np.ndarray:
        """Each transition's value replaced by its component's mean."""
        return self.means(per_transition)[..., self.labels]


def _warmup(batch: Batch, components: _Components) -> tuple[int, bool]:
    """MSER-5 on the mean block rates of the pilot replications: firings to delete, and
    whether the truncation point fell on the search limit (the run is too short)."""
    rates = np.diff(batch.x, axis=0) / np.diff(batch.checkpoints)[:, None, None]
    series = components.headline(rates).mean(axis=1)
    if series.size < 10:
        return 0, False
    cut = mser(series, 5)
    deleted_blocks = cut.deleted
    return int(batch.checkpoints[min(deleted_blocks, batch.checkpoints.size - 2)]), cut.at_limit


def _aligned(model: Model, firings: int, period: int | None = None) -> tuple[int, int]:
    """Firings per replication and checkpoint spacing, both multiples of the cyclicity.

    When the bottleneck has fixed durations, firing times settle into a regime of period ``c``
    (the cyclicity of the mean-duration graph): a growth rate measured over a span that is not a
    multiple of ``c`` is off by up to ``amplitude / span``, the same in every replication, and
    its interval has zero width. Measuring over multiples of ``c`` makes it exact. ``period``
    is ``c`` when the caller has it already.
    """
    if period is None:
        graph = model.graph()
        period = cyclicity(graph, howard(graph))
    if period > MAX_ALIGNED_PERIOD:
        period = 1  # a period this long cannot be run through; the bias is O(1/firings)
    firings = max(firings, 10 * period)
    firings = -(-firings // period) * period
    block = period * max(1, firings // (200 * period))
    return firings, block


def _growth(batch: Batch, warmup: int) -> np.ndarray:
    j = int(np.searchsorted(batch.checkpoints, warmup))
    span = batch.checkpoints[-1] - batch.checkpoints[j]
    return (batch.x[-1] - batch.x[j]) / span  # (R, n)


def estimate_cycle_time(model: Model, engine: str = "recursion", *, seed: int = 1,
                        firings: int, replications: int = DEFAULT_REPLICATIONS,
                        precision: float | None = None, max_replications: int = MAX_REPLICATIONS,
                        executor: Executor | None = None, chunks: int = 1,
                        record: bool = False, first_replication: int = 0,
                        cyclicity_of_mean: int | None = None,
                        progress: Callable[[str, int, np.ndarray], None] | None = None,
                        lineage: bool = True) -> Estimate:
    """Estimate the cycle time of a model by independent replications.

    With ``precision`` the sequential procedure adds replications until the 95 % interval's
    relative half-width is at most ``precision`` (or ``max_replications`` are used).
    Replications are numbered from ``first_replication`` (another range gives independent
    draws). ``cyclicity_of_mean``, the cyclicity of the mean-duration graph, is computed when
    not given. ``lineage``: also sum along the critical paths, for the derivatives of the
    cycle time (about doubles the recursion's time: off where no derivative is reported).
    """
    firings, block = _aligned(model, firings, cyclicity_of_mean)
    components = _Components(model)
    batches: list[Batch] = []
    so_far: list[np.ndarray] = []
    state: dict[str, int] = {"next": first_replication, "warmup": -1, "at_limit": 0}

    def step(count: int) -> np.ndarray:
        reps = range(state["next"], state["next"] + count)
        state["next"] += count
        batch = run_replications(model, engine, seed, reps, firings, block=block,
                                 executor=executor, chunks=chunks, record=record,
                                 lineage=lineage)
        if state["warmup"] < 0:
            state["warmup"], at_limit = _warmup(batch, components)
            state["at_limit"] = int(at_limit)
        if batch.paths is not None:  # only the sums after the warm-up are read: keep those
            batch.paths = batch.paths.after(state["warmup"])
        batches.append(batch)
        values = components.headline(_growth(batch, state["warmup"]))
        so_far.append(values)
        if progress is not None:
            progress(engine, state["next"] - first_replication, np.concatenate(so_far))
        return values

    history: list[tuple[int, float, float, float]] = []
    target_met: bool | None = None
    if precision is None:
        values = step(replications)
        interval = replication_interval(values)
        history.append((len(values), interval.estimate, interval.low, interval.high))
    else:
        # Law & Kelton's rule stops at gamma / (1 + gamma) for a relative *error* gamma; the
        # contract here is the relative half-width itself, hence gamma = p / (1 - p).
        # (Capped below 1, which the procedure requires: a half-width target of 50 % or more
        # is then met a little more strictly than asked.)
        gamma = min(precision / (1.0 - precision), 0.999)
        # The limit never undercuts what the user asked for in the first round.
        seq = sequential_precision(step, gamma, initial=replications,
                                   max_work=max(max_replications, replications))
        interval, target_met = seq.interval, seq.target_met
        history = [(c.work, c.estimate, c.low, c.high) for c in seq.history]
    batch = Batch.concatenate(batches)
    growth = _growth(batch, state["warmup"])
    utilization, busy_servers = utilization_per_server(model.graph(), batch.busy, batch.horizon)
    sensitivity = None
    if batch.paths is not None:
        sensitivity = from_paths(model.graph(), batch.paths,
                                 frontiers(model.graph(), graph_components(model.graph())), growth,
                                 state["warmup"])
    with np.errstate(divide="ignore", invalid="ignore"):
        crit = None
        if batch.critical is not None:
            crit = batch.critical.sum(axis=0) / (batch.firings * len(batch.replications))
    upper = (None if batch.clearing is None
             else replication_interval(batch.clearing / batch.firings))
    return Estimate(engine, interval, components.spread(growth).mean(axis=0),
                    components.headline(growth), state["warmup"], batch.firings,
                    len(batch.replications), upper, utilization, crit, history, target_met,
                    batch, bool(state["at_limit"]), busy_servers, sensitivity, seed)


def utilization_per_server(graph: Any, busy: np.ndarray,
                           horizon: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Utilization per server and mean busy servers of every transition, over replications.

    ``busy`` (R, n) is each transition's total firing time, ``horizon`` (R, n) the span it
    lies in. A transition with a self-loop of ``s`` tokens has ``s`` servers taking jobs in
    turn: its utilization is mean busy servers / ``s``, at most 1. A transition without a
    self-loop has no server limit (firings overlap as tokens allow): NaN.
    """
    servers = self_loop_servers(graph).astype(np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        busy_servers = np.where(horizon > 0, busy / horizon, 0.0)
        per_server = np.minimum(busy_servers / servers, 1.0)  # rounding only
    per_server = np.where(servers > 0, per_server, np.nan).mean(axis=0)
    return per_server, busy_servers.mean(axis=0)


def component_growth(model: Model, est: Estimate) -> tuple[np.ndarray, np.ndarray]:
    """Each transition's strongly connected component, and each replication's growth rate
    after the warm-up averaged over each component: shape (replications, components)."""
    components = _Components(model)
    return components.labels, components.means(_growth(est.batch, est.warmup_firings))


def default_firings(model: Model, engine: str) -> int:
    """Firings per replication when the user gives none: enough for the warm-up to be a small
    part of the run, few enough that a round takes seconds on one core."""
    budget, least = (2_000_000, 2000) if engine == "recursion" else (60_000, 200)
    return int(np.clip(budget // max(model.n_transitions, 1), least, 20_000))


def estimate_with_executor(model: Model, engine: str, settings: RunSettings, *,
                           precision: float | Literal["settings"] | None = "settings",
                           replications: int | None = None, firings: int | None = None,
                           record: bool = False, first_replication: int = 0,
                           cyclicity_of_mean: int | None = None,
                           progress: Callable[[str, int, np.ndarray], None] | None = None
                           ) -> Estimate:
    """:func:`estimate_cycle_time` with the run's settings, on the executor they ask for.

    ``precision``, ``replications`` and ``firings`` override the settings' values for this
    estimate (``check`` runs the SimPy side to a fixed number of replications); the defaults
    that depend on the model are filled in here.
    """
    firings = firings or settings.firings or default_firings(model, engine)
    replications = replications or settings.replications or DEFAULT_REPLICATIONS
    if engine == "recursion" or model.is_random:  # the derivatives of SimPy run it too
        prepare_kernel(model, firings, replications, getattr(progress, "stage", None))
    executor, close = open_executor(settings.workers, settings.scheduler)
    try:
        return estimate_cycle_time(
            model, engine, seed=settings.seed,
            firings=firings,
            replications=replications,
            precision=settings.precision if precision == "settings" else precision,
            executor=executor,
            # A cluster gets one task per replication; a local pool one per worker.
            chunks=(MAX_REPLICATIONS if settings.scheduler else settings.workers)
            if executor else 1,
            record=record, first_replication=first_replication,
            cyclicity_of_mean=cyclicity_of_mean, progress=progress,
        )
    finally:
        close()


def prepare_kernel(model: Model, firings: int, replications: int,
                   announce: Callable[..., None] | None = None) -> bool:
    """Load the compiled recursion (or compile it, saying so through ``announce``, a progress
    line's ``stage``) when a round of ``replications`` × ``firings`` is large enough for it
    to pay, before local worker processes are started: forked from this process, they find it
    loaded. Returns whether it is loaded."""
    graph = model.graph()
    if choose_kernel(graph, replications, firings) != "numba":
        return False

    def say(text: str) -> None:
        if announce is not None:
            announce(text, now=True)

    return load_kernel(say) is not None


def sensitivity_on_same_draws(model: Model, est: Estimate) -> SensitivityEstimate:
    """The derivatives for an estimate of the SimPy engine: the recursion run on the same
    replications (the same draws, so the same firing times), with its warm-up. These firings
    are not the estimate's: ``firings_simulated`` does not count them."""
    batch = _recursion_batch(model, est.seed or 0, est.batch.replications.tolist(), est.firings,
                             int(est.batch.checkpoints[1] - est.batch.checkpoints[0]), False)
    graph = model.graph()
    assert batch.paths is not None
    return from_paths(graph, batch.paths, frontiers(graph, graph_components(graph)),
                      _growth(batch, est.warmup_firings), est.warmup_firings)
