"""Benchmark: the SimPy engine against a minimal hand-written SimPy model of the same line.

The system is a closed line of ``STATIONS`` exponential single-server stations (rate 1) with
``CUSTOMERS`` customers, one in front of every second station at the start.

* The minimal model is what a SimPy user writes by hand: a ``simpy.Store`` per station buffer and
  one process per station looping get -> timeout -> put.
* The engine simulates the same line as a timed event graph: station ``i`` is a transition with a
  self-loop place of one token (a single server) and a place ``i -> i+1`` whose tokens are the
  customers waiting at station ``i+1`` at the start.

Both draw the ``k``-th service time of station ``i`` from the same block-indexed streams, so they
produce the same sample path; the script checks that before timing. Each repetition times a whole
run (building the model, drawing, simulating, collecting the completion times) of each model, in
alternating order, in CPU time of this process (steadier than wall time on a shared machine).
The minimal model draws its service times in blocks, as the engine does, so that the ratio
compares the two SimPy models and not two ways of drawing. The target is a ratio engine /
minimal of at least 0.8 (our own target; speed is reported, never asserted in the test suite).
The row "engine+Sampler" uses the project's Sampler (simulate/durations.py) instead.

Run with ``python tests/bench/bench_simpy.py [--firings K] [--repeat R]``.
"""

from __future__ import annotations

import argparse
import statistics
import time
from typing import Any

import numpy as np
import simpy

STATIONS = 20
CUSTOMERS = 10
BLOCK = 1024
SEED = 20240611
TARGET_RATIO = 0.8


def block_draws(seed: int, station: int, b: int) -> np.ndarray:
    """Service times ``d_i(b*BLOCK + 1 .. (b+1)*BLOCK)`` of a station (rate 1)."""
    rng = np.random.Generator(np.random.PCG64(np.random.SeedSequence(seed, spawn_key=(station, b))))
    return rng.exponential(1.0, BLOCK)


def initial_customers() -> list[int]:
    """Customers waiting in front of each station at time 0: one at every second station."""
    c = [0] * STATIONS
    for i in range(0, STATIONS, STATIONS // CUSTOMERS):
        c[i] = 1
    return c


def minimal_model(n_firings: int, seed: int) -> np.ndarray:
    """Hand-written SimPy line; completion times, shape (n_firings, STATIONS)."""
    env = simpy.Environment()
    buffers = [simpy.Store(env) for _ in range(STATIONS)]
    for i, count in enumerate(initial_customers()):
        buffers[i].items.extend(["customer"] * count)
    done: list[list[float]] = [[] for _ in range(STATIONS)]

    def station(i: int):
        inbox, outbox, log = buffers[i], buffers[(i + 1) % STATIONS], done[i]
        draws: list[float] = []
        for k in range(n_firings):
            if k % BLOCK == 0:
                draws = block_draws(seed, i, k // BLOCK).tolist()
            customer = yield inbox.get()
            yield env.timeout(draws[k % BLOCK])
            log.append(env.now)
            yield outbox.put(customer)

    for i in range(STATIONS):
        env.process(station(i))
    env.run()
    return np.array(done).T


class BlockSampler:
    """Service times from the same streams as the minimal model; holds are 0."""

    def __init__(self, seed: int) -> None:
        self.seed = seed

    def duration(self, t: int, first: int, count: int) -> np.ndarray:
        b, offset = divmod(first - 1, BLOCK)
        assert offset == 0 and count == BLOCK, "the engine asks for whole aligned blocks"
        return block_draws(self.seed, t, b)

    def hold(self, p: int, first: int, count: int) -> np.ndarray:
        return np.zeros(count)


def line_graph() -> Any:
    """The line as an EventGraph (imported here: importing this module costs only simpy and
    numpy, so that a child process running :func:`minimal_model` is a minimal SimPy program)."""
    from cyclecheck.algebra.eventgraph import EventGraph

    c = initial_customers()
    loops = list(range(STATIONS))
    links = list(range(STATIONS))
    return EventGraph(
        duration=np.ones(STATIONS),
        source=loops + links,
        target=loops + [(i + 1) % STATIONS for i in links],
        tokens=[1] * STATIONS + [c[(i + 1) % STATIONS] for i in links],
        hold=np.zeros(2 * STATIONS),
        names=[f"station{i}" for i in range(STATIONS)],
    )


def engine_model(n_firings: int, seed: int) -> np.ndarray:
    """The same line through simulate_event_graph; completion times (n_firings, STATIONS)."""
    from cyclecheck.simulate.engine import simulate_event_graph

    return simulate_event_graph(line_graph(), BlockSampler(seed), n_firings=n_firings).time


def engine_project_sampler(n_firings: int, seed: int) -> np.ndarray:
    """The engine with the project's Sampler (other streams: same law, another sample path)."""
    from cyclecheck.simulate.durations import Sampler
    from cyclecheck.simulate.engine import simulate_event_graph

    sampler = Sampler(
        [{"dist": "exponential", "mean": 1.0}] * STATIONS, [0.0] * (2 * STATIONS), seed=seed
    )
    return simulate_event_graph(line_graph(), sampler, n_firings=n_firings).time


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--firings", type=int, default=10_000, help="firings per station")
    parser.add_argument("--repeat", type=int, default=5, help="repetitions of each model")
    args = parser.parse_args()

    check = 2_000
    a, b = minimal_model(check, SEED), engine_model(check, SEED)
    if not np.allclose(a, b, rtol=1e-12, atol=0):
        raise SystemExit("the two models disagree: the benchmark compares different things")

    total = args.firings * STATIONS
    rates: dict[str, list[float]] = {"minimal SimPy": [], "engine": []}
    runs = [("minimal SimPy", minimal_model), ("engine", engine_model)]
    try:  # simulate/durations.py: the sampler the CLI uses
        import cyclecheck.simulate.durations  # noqa: F401

        runs.append(("engine+Sampler", engine_project_sampler))
        rates["engine+Sampler"] = []
    except ImportError:
        pass
    for r in range(args.repeat):
        for name, fn in runs if r % 2 == 0 else runs[::-1]:
            t0 = time.process_time()
            fn(args.firings, SEED + r)
            rates[name].append(total / (time.process_time() - t0))

    print(
        f"closed line: {STATIONS} stations, {CUSTOMERS} customers, "
        f"{total} firings per run, {args.repeat} runs each (sample paths checked equal)"
    )
    print(f"{'model':<15} {'median firings/s (CPU)':>23} {'min':>10} {'max':>10}")
    for name, values in rates.items():
        print(
            f"{name:<15} {statistics.median(values):>17,.0f} {min(values):>10,.0f} "
            f"{max(values):>10,.0f}"
        )
    ratio = statistics.median(rates["engine"]) / statistics.median(rates["minimal SimPy"])
    print(f"ratio engine / minimal: {ratio:.2f} (target >= {TARGET_RATIO:.2f})")
    if "engine+Sampler" in rates:
        ratio = statistics.median(rates["engine+Sampler"]) / statistics.median(
            rates["minimal SimPy"]
        )
        print(f"ratio engine+Sampler / minimal: {ratio:.2f}")


if __name__ == "__main__":
    main()
