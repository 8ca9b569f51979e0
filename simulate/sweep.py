r"""Running a sweep: every point of a grid, as pure tasks, on common random numbers, resumable.

What each point gets
--------------------
- **Fixed durations**: the exact cycle time and the critical circuits (Howard policy
  iteration on the point's event graph); no replications.
- **Random durations**: the Lyapunov exponent estimated by replications of the max-plus
  recursion (replication/deletion, as ``analyze`` does it), its 95 % interval, the bounds (the
  cycle time of the mean durations below, the subadditive ``E Z(K)/K`` above), the critical
  circuit of the mean durations and the busiest server: the transition with a self-loop
  whose servers are busy the largest share of the time (in a closed line of single servers,
  utilization ``X·D_i`` is largest at the largest demand ``D_i``, the bottleneck of
  asymptotic bound analysis).
- **Not live** (a circuit emptied of tokens by the sweep): reported in its row, with the
  circuit; the other points go on.

Common random numbers
---------------------
Replication ``r`` of every point draws from ``SeedSequence(seed, spawn_key=(r, kind, element,
block))``: the same seed and replication index give every point the same stream for every
element. Where a law's parameter changes, the ``k``-th draw keeps its index and is the same
standard draw transformed: numpy draws the exponential, gamma, Erlang and Weibull laws as a
scale times a standard draw, the log-normal as ``exp(μ + σ z)`` of one normal ``z``, the
uniform and triangular from one uniform, so changing a ``mean`` (or ``low``/``high``) moves
every draw monotonically (a scale change multiplies them all), and the ``cv`` of a log-normal
or the ``shape`` of a Weibull transform the same ``z`` or exponential draw. The ``cv`` of a
gamma and the ``k`` of an Erlang change the shape of numpy's rejection sampler, which then
consumes other uniforms: those draws are common in distribution only (the other elements
keep theirs).

The difference between neighbouring points is estimated *paired*: replication ``r`` of one
point against replication ``r`` of the other, a Student-t interval over the differences. With
positively correlated points its variance is ``Var X + Var Y − 2 Cov(X, Y)``, far below the sum
that independent runs would give (Law & Kelton, *Simulation Modeling and Analysis*, ch. 11,
common random numbers).

Stopping rule
-------------
All random points run their first round (``--replications``, default 10) together. Then each
point, in point order, is judged by the rule of ``analyze``: stop when the relative half-width
is at most ``--precision`` (default 0.01) or :data:`~cyclecheck.simulate.experiment.
MAX_REPLICATIONS` are used; else ask for ``n·(r/p)² − n`` more (at least 1, at most ``n``
more: a round at most doubles the work). The next round runs the points that asked, together.
The decision depends only on the numbers of the replications, which depend only on (seed,
point, replication): never on the executor, the worker count or the order in which tasks end.
The warm-up of a point is chosen once, by MSER-5 on its first round.

Resume
------
With a state file (``--resume STATE``) every finished task is saved there (atomically, at most
every :data:`SAVE_EVERY` seconds and on the way out, Ctrl-C included). A run given the same
state file and the same sweep (model, targets, values, seed, precision, replications, firings)
skips what is saved and gives the same document, bit for bit. A state file of another sweep is
refused (or, with ``--force``, started again).
"""

from __future__ import annotations

import hashlib
import json
import math
import time
from collections.abc import Callable, Hashable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from ..algebra.eventgraph import self_loop_servers
from .errors import ModelError
from .estimate import Interval, replication_interval
from .experiment import (
    DEFAULT_PRECISION,
    MAX_REPLICATIONS,
    _aligned,
    _Components,
    default_firings,
    prepare_kernel,
)
from .files import STATE_DOCUMENT
from .grid import Grid, point_model
from .modelfile import Model
from .settings import RunSettings
from .tasks import Task, TaskRunner

__all__ = ["PointOutcome", "run_sweep", "state_key"]

STATE_VERSION = 1
#: Seconds between two saves of the state file while tasks finish.
SAVE_EVERY = 2.0
#: Critical circuits kept per point.
MAX_CIRCUITS = 5


# --------------------------------------------------------------------------- the tasks


def analyze_point(model: Model) -> dict[str, Any]:
    """Task: the exact analysis of a point's graph of (mean) durations, or why it is not live."""
    from ..algebra.critical import cyclicity
    from ..algebra.eventgraph import check_live
    from ..algebra.exceptions import NotLive
    from ..algebra.spectral import howard

    graph = model.graph()
    try:
        check_live(graph)
    except NotLive as exc:
        return {"live": False, "deadlock": [int(t) for t in exc.circuit]}
    hw = howard(graph)
    return {"live": True, "cycle_time": hw.max_cycle_time,
            "by_transition": [float(v) for v in hw.cycle_time],
            "circuits": [[int(t) for t in c.transitions] for c in hw.circuits[:MAX_CIRCUITS]],
            "period": int(cyclicity(graph, hw))}


def replicate_point(model: Model, seed: int, first: int, count: int, firings: int,
                    block: int) -> dict[str, Any]:
    """Task: replications ``first .. first + count - 1`` of a point, digested.

    Returns the checkpoints and, per replication, the firing times at the checkpoints averaged
    over each strongly connected component (``series``, shape (J + 1, components)), ``Z(K)``
    (``clearing``) and the mean number of busy servers of each transition (``busy``).
    """
    from .experiment import run_replications

    batch = run_replications(model, "recursion", seed, range(first, first + count), firings,
                             block=block, lineage=False)  # a sweep reports no derivatives
    means = _Components(model).means(batch.x)  # (J + 1, R, C)
    # busy servers over the span their busy time lies in, as analyze measures them
    with np.errstate(divide="ignore", invalid="ignore"):
        busy = np.where(batch.horizon > 0, batch.busy / batch.horizon, 0.0)  # (R, n)
    return {
        "checkpoints": batch.checkpoints.tolist(),
        "series": [means[:, i, :] for i in range(count)],
        "clearing": None if batch.clearing is None else batch.clearing.tolist(),
        "busy": [busy[i] for i in range(count)],
    }


# --------------------------------------------------------------------------- one point


@dataclass
class PointOutcome:
    """What a sweep found at one point (shaped into the document by
    :func:`cyclecheck.simulate.result.sweep_document`)."""

    index: int
    values: tuple[int | float, ...]
    model: Model
    status: str  # "exact", "estimated" or "not live"
    cycle_time: float | None = None
    interval: Interval | None = None
    by_transition: list[float] | None = None
    circuits: list[list[int]] = field(default_factory=list)
    deadlock: list[int] | None = None
    lower: float | None = None
    upper: float | None = None
    per_replication: np.ndarray | None = None
    replications: int = 0
    firings: int = 0
    warmup: int = 0
    target_met: bool | None = None
    utilization: np.ndarray | None = None  # per transition with servers, NaN elsewhere
    differences: dict[str, dict[str, Any]] = field(default_factory=dict)


def _warmup(checkpoints: np.ndarray, pilot: list[np.ndarray]) -> int:
    """MSER-5 on the mean block rates of the pilot replications' slowest component (the rule
    of :func:`cyclecheck.simulate.experiment.estimate_cycle_time`)."""
    from .warmup import mser

    rates = np.diff(np.stack(pilot, axis=1), axis=0) / np.diff(checkpoints)[:, None, None]
    series = rates.max(axis=2).mean(axis=1)
    if series.size < 10:
        return 0
    return int(checkpoints[min(mser(series, 5).deleted, checkpoints.size - 2)])


def _growth(checkpoints: np.ndarray, series: np.ndarray, warmup: int) -> float:
    j = int(np.searchsorted(checkpoints, warmup))
    span = checkpoints[-1] - checkpoints[j]
    return float(((series[-1] - series[j]) / span).max())


def _more(values: np.ndarray, precision: float, limit: int) -> int:
    """Replications to add to a point after a round (0: it is done); Law & Kelton's
    relative-precision rule as :func:`~cyclecheck.simulate.estimate.sequential_precision`
    applies it, one point at a time."""
    n = values.size
    r = replication_interval(values).relative_half_width
    if r <= precision or n >= limit:
        return 0
    wanted = math.ceil(n * (r / precision) ** 2) - n if math.isfinite(r) else limit
    return int(min(max(wanted, 1), n, limit - n))


# --------------------------------------------------------------------------- the state


def _digest(model: Model) -> str:
    """A digest of everything of a model that the numbers depend on."""
    h = hashlib.sha256()
    for table in (model.durations, model.holds):
        h.update(table.values.tobytes())
        h.update(table.codes.tobytes())
        h.update(repr(table.laws).encode())
    for array in (model.source, model.target, model.tokens):
        h.update(np.ascontiguousarray(array, dtype=np.int64).tobytes())
    return h.hexdigest()


class _State:
    """Finished tasks, by point and replication; saved to a state file when one is given."""

    def __init__(self, path: Path | None, key: dict[str, Any], force: bool) -> None:
        self.path, self.key, self.force = path, key, force
        self.exact: dict[int, dict[str, Any]] = {}
        self.runs: dict[tuple[int, int], dict[str, Any]] = {}
        self.checkpoints: dict[int, list[int]] = {}
        self.saved = time.monotonic()
        self.dirty = False
        self.resumed = 0
        if path is not None and path.exists():
            self._load(path)

    def _load(self, path: Path) -> None:
        from .files import read_input

        _, text = read_input(path, "sweep state file")
        try:
            data = json.loads(text)
        except json.JSONDecodeError as err:
            raise ModelError(f"is not a sweep state file (not JSON: {err.msg})", file=path,
                             item="--resume") from None
        if not isinstance(data, dict) or data.get("document") != STATE_DOCUMENT:
            raise ModelError("is not a cyclecheck sweep state file", file=path, item="--resume")
        if data.get("key") != self.key:
            if self.force:
                return
            theirs = data.get("key") or {}
            what = [k for k in self.key if theirs.get(k) != self.key[k]] or ["version"]
            raise ModelError(f"holds the state of another sweep (its {', '.join(what)} "
                             "differ); give another file, or --force to start this sweep "
                             "there afresh", file=path, item="--resume")
        self.exact = {int(k): v for k, v in data["exact"].items()}
        self.checkpoints = {int(k): v for k, v in data["checkpoints"].items()}
        for key, run in data["runs"].items():
            point, r = (int(x) for x in key.split(":"))
            self.runs[point, r] = {
                "series": np.array(run["series"], dtype=np.float64),
                "clearing": run["clearing"],
                "busy": np.array(run["busy"], dtype=np.float64)}
        self.resumed = len(self.exact) + len(self.runs)

    def text(self) -> str:
        runs = {f"{p}:{r}": {"series": v["series"].tolist(), "clearing": v["clearing"],
                             "busy": v["busy"].tolist()}
                for (p, r), v in sorted(self.runs.items())}
        return json.dumps({"document": STATE_DOCUMENT, "key": self.key,
                           "exact": {str(k): v for k, v in sorted(self.exact.items())},
                           "checkpoints": {str(k): v for k, v in
                                           sorted(self.checkpoints.items())},
                           "runs": runs}, allow_nan=False) + "\n"

    def save(self, now: bool = False) -> None:
        if self.path is None or not self.dirty:
            return
        if not now and time.monotonic() - self.saved < SAVE_EVERY:
            return
        from .files import Output, write_outputs

        write_outputs([Output(self.path, "state", self.text(), "--resume")], force=True)
        self.saved, self.dirty = time.monotonic(), False


# --------------------------------------------------------------------------- the run


class _Sweep:
    def __init__(self, model: Model, grid: Grid, settings: RunSettings, runner: TaskRunner,
                 state: _State, progress: Callable[[str], None] | None) -> None:
        self.model, self.grid, self.settings = model, grid, settings
        self.runner, self.state, self.progress = runner, state, progress
        self.models = [point_model(model, grid, values) for values in grid.points()]
        self.tasks_done = self.tasks_total = 0
        self.stage = "exact analysis"
        self.precision = settings.precision or DEFAULT_PRECISION
        self.first_round = settings.replications or 10

    def _tick(self, finished_points: int) -> None:
        if self.progress is not None:
            self.progress(f"sweep, {self.stage}: {self.tasks_done} of {self.tasks_total} "
                          f"tasks so far; {finished_points} of {len(self.models)} points "
                          "finished")

    def run(self) -> list[PointOutcome]:
        todo = [Task(i, analyze_point, (m,)) for i, m in enumerate(self.models)
                if i not in self.state.exact]
        self.tasks_total += len(todo)

        def exact_done(key: Hashable, result: dict[str, Any]) -> None:
            self.state.exact[int(key)] = result  # type: ignore[call-overload]
            self.state.dirty = True
            self.tasks_done += 1
            self._tick(0)
            self.state.save()

        self.runner.run(todo, exact_done)
        random = [i for i, m in enumerate(self.models)
                  if m.is_random and self.state.exact[i]["live"]]
        plans = {i: self._plan(i) for i in random}
        have = dict.fromkeys(random, 0)
        need = dict.fromkeys(random, self.first_round)
        warmups: dict[int, int] = {}
        finished = len(self.models) - len(random)
        rounds = 0
        while need:
            rounds += 1
            self.stage = f"round {rounds} of replications"
            self._round(need, have, plans, finished)
            nxt = {}
            for i in sorted(need):
                have[i] += need[i]
                if i not in warmups:
                    warmups[i] = _warmup(self._checkpoints(i), [
                        self.state.runs[i, r]["series"] for r in range(self.first_round)])
                more = _more(self._values(i, have[i], warmups[i]), self.precision,
                             max(MAX_REPLICATIONS, self.first_round))
                if more:
                    nxt[i] = more
                else:
                    finished += 1
            need = nxt
        self.state.save(now=True)
        return [self._outcome(i, have.get(i, 0), plans.get(i), warmups.get(i, 0))
                for i in range(len(self.models))]

    def _plan(self, i: int) -> tuple[int, int]:
        """Firings per replication and checkpoint spacing of random point ``i``."""
        model = self.models[i]
        firings = self.settings.firings or default_firings(model, "recursion")
        return _aligned(model, firings, self.state.exact[i]["period"])

    def _checkpoints(self, i: int) -> np.ndarray:
        return np.asarray(self.state.checkpoints[i], dtype=np.int64)

    def _values(self, i: int, count: int, warmup: int) -> np.ndarray:
        points = self._checkpoints(i)
        return np.array([_growth(points, self.state.runs[i, r]["series"], warmup)
                         for r in range(count)])

    def _round(self, need: dict[int, int], have: dict[int, int],
               plans: dict[int, tuple[int, int]], finished: int) -> None:
        """Run the replications every point of ``need`` asked for, as tasks."""
        tasks = []
        # The recursion runs a task's replications together, vectorized: a firing of 10
        # replications costs little more than one of 1. So a point's round is one task,
        # split only while there are fewer tasks than workers.
        per_point = max(1, math.ceil(self.runner.slots / max(len(need), 1)))
        for i, count in need.items():
            missing = [r for r in range(have[i], have[i] + count)
                       if (i, r) not in self.state.runs]
            if not missing:
                continue
            size = max(1, math.ceil(len(missing) / per_point))
            for start in range(0, len(missing), size):
                chunk = missing[start : start + size]
                # contiguous pieces only: a task is a range of replications
                for first, last in _ranges(chunk):
                    firings, block = plans[i]
                    tasks.append(Task((i, first), replicate_point,
                                      (self.models[i], self.settings.seed, first,
                                       last - first + 1, firings, block)))
        self.tasks_total += len(tasks)

        def done(key: Hashable, result: dict[str, Any]) -> None:
            i, first = key  # type: ignore[misc]
            self.state.checkpoints[i] = result["checkpoints"]
            for k, series in enumerate(result["series"]):
                self.state.runs[i, first + k] = {
                    "series": np.asarray(series, dtype=np.float64),
                    "clearing": None if result["clearing"] is None
                    else float(result["clearing"][k]),
                    "busy": np.asarray(result["busy"][k], dtype=np.float64)}
            self.state.dirty = True
            self.tasks_done += 1
            self._tick(finished)
            self.state.save()

        self.runner.run(tasks, done)

    def differences(self, outcomes: list[PointOutcome]) -> None:
        """The paired difference of the cycle time to the previous value of each target.

        Both points are measured over the same span, after the larger of their two warm-ups:
        with the same replications and the same firings the draws cancel as far as they can
        (each point's own estimate keeps its own warm-up).
        """
        for out in outcomes:
            for axis, target in enumerate(self.grid.targets):
                j = self.grid.neighbour(out.index, axis)
                prev = None if j is None else outcomes[j]
                if prev is None or out.cycle_time is None or prev.cycle_time is None:
                    continue
                warmup = max(out.warmup, prev.warmup)
                a, b = (None if p.per_replication is None
                        else self._values(p.index, p.replications, warmup) for p in (out, prev))
                entry = {"from_point": j, **_difference(a, b, out.cycle_time, prev.cycle_time)}
                if not entry["exact"]:
                    entry["warmup_firings"] = warmup
                out.differences[target.text] = entry

    def _outcome(self, i: int, count: int, plan: tuple[int, int] | None,
                 warmup: int) -> PointOutcome:
        model = self.models[i]
        values = self.grid.points()[i]
        exact = self.state.exact[i]
        if not exact["live"]:
            return PointOutcome(i, values, model, "not live", deadlock=exact["deadlock"])
        out = PointOutcome(i, values, model, "exact", cycle_time=exact["cycle_time"],
                           by_transition=exact["by_transition"], circuits=exact["circuits"],
                           lower=exact["cycle_time"])
        if plan is None:
            return out
        runs = [self.state.runs[i, r] for r in range(count)]
        per_rep = self._values(i, count, warmup)
        iv = replication_interval(per_rep)
        out.status, out.interval, out.cycle_time = "estimated", iv, iv.estimate
        out.by_transition = None
        out.per_replication, out.replications, out.warmup = per_rep, count, warmup
        out.firings = int(self._checkpoints(i)[-1])
        out.target_met = iv.relative_half_width <= self.precision
        if all(run["clearing"] is not None for run in runs):
            clearing = np.array([run["clearing"] for run in runs]) / out.firings
            out.upper = max(out.lower or 0.0, replication_interval(clearing).high)
        out.utilization = _per_server(model, np.array([run["busy"] for run in runs]))
        return out


def _per_server(model: Model, busy_servers: np.ndarray) -> np.ndarray:
    """Busy servers / servers of every replication (shape (R, n)), at most 1, averaged over
    the replications: analyze's utilization. NaN for a transition without a self-loop (no
    server limit)."""
    servers = self_loop_servers(model.graph()).astype(np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        per_server = np.minimum(busy_servers / servers, 1.0).mean(axis=0)
    return np.where(servers > 0, per_server, np.nan)


def _ranges(items: list[int]) -> list[tuple[int, int]]:
    """Contiguous runs ``(first, last)`` of a sorted list of integers."""
    out: list[tuple[int, int]] = []
    for x in items:
        if out and out[-1][1] == x - 1:
            out[-1] = (out[-1][0], x)
        else:
            out.append((x, x))
    return out


def _difference(a: np.ndarray | None, b: np.ndarray | None, exact_a: float,
                exact_b: float) -> dict[str, Any]:
    """The paired difference ``a - b`` of per-replication values (None: an exact point)."""
    if a is None and b is None:
        d = exact_a - exact_b
        return {"cycle_time_difference": d, "ci": [d, d], "replications": 0, "exact": True}
    n = min(x.size for x in (a, b) if x is not None)
    xs = a[:n] if a is not None else np.full(n, exact_a)
    ys = b[:n] if b is not None else np.full(n, exact_b)
    iv = replication_interval(xs - ys)
    return {"cycle_time_difference": iv.estimate, "ci": [iv.low, iv.high], "replications": n,
            "exact": False}


def state_key(model: Model, grid: Grid, settings: RunSettings) -> dict[str, Any]:
    """What a state file must match to be resumed: everything the numbers depend on."""
    return {"version": STATE_VERSION, "model": _digest(model),
            "targets": [[t["target"], t["values"]] for t in grid.describe()],
            "seed": settings.seed, "precision": settings.precision or DEFAULT_PRECISION,
            "replications": settings.replications, "firings": settings.firings}


def run_sweep(model: Model, grid: Grid, settings: RunSettings, *,
              state_path: Path | None = None, force: bool = False,
              progress: Callable[[str], None] | None = None,
              note: Callable[[str], None] | None = None) -> tuple[list[PointOutcome], int]:
    """Run every point of ``grid`` (see the module docstring).

    Returns
    -------
    outcomes : list of PointOutcome
        In point order, with the paired differences to the neighbouring points.
    resumed : int
        Tasks taken from the state file instead of being run.
    """
    state = _State(state_path, state_key(model, grid, settings), force)
    if model.is_random and not settings.scheduler:
        # Loaded here, the compiled recursion is inherited by the local workers forked from
        # this process, instead of being loaded by each of them.
        prepare_kernel(model, settings.firings or default_firings(model, "recursion"),
                       settings.replications or 10)
    with TaskRunner(settings.workers, settings.scheduler, note=note) as runner:
        sweep = _Sweep(model, grid, settings, runner, state, progress)
        try:
            outcomes = sweep.run()
        except KeyboardInterrupt:
            state.save(now=True)  # what finished is kept; nothing else is written
            raise
    sweep.differences(outcomes)
    return outcomes, state.resumed
