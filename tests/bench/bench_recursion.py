"""Benchmark: the vectorized max-plus recursion against a minimal hand-written SimPy model.

The system is the closed line of tests/bench/bench_simpy.py: 20 exponential single-server
stations (rate 1), 10 customers, one in front of every second station at the start, as a timed
event graph (a self-loop place with one token per station, a place ``i -> i+1`` holding the
customers waiting at station ``i+1``). Its cycle time is known exactly: a closed cyclic line of K
equal exponential stations with N customers has throughput X = μN / (N + K − 1) (Gordon & Newell,
Operations Research 15(2), 1967; Buzen, CACM 16(9), 1973), here 10/29, cycle time 2.9.

Rows, each a whole run in CPU seconds of this process (building, drawing, computing):

* ``minimal SimPy``: ``minimal_model`` of bench_simpy.py, one replication.
* ``recursion, pre-generated``: :class:`RandomRecursion` over R replications, with all
  exponential draws made before the clock starts (numpy Generator, one per replication); the
  source hands out slices. This is the recursion alone (and its checks of each block).
* ``recursion, Generator``: the same, drawing each block during the run from one numpy
  Generator per replication (the cost of drawing exponentials).
* ``recursion, Sampler``: the same with the project's Sampler, ``model.sampler(seed, r)
  .duration_block(first, count)`` (and ``hold_block``) stacked over replications, as the
  ``analyze`` command's experiment does (block-indexed streams, one SeedSequence per element
  and block).

Every recursion row counts the places that set each firing (``criticality=True``, as analyze
does) and keeps checkpoints every ``K/200`` firings. Firings per second count every firing of
every transition in every replication. Before timing, the recursion with one replication on the
draws of bench_simpy.py is checked to give the minimal SimPy model's completion times. Runs
alternate their order; the table gives the median and the maximum rate over ``--repeat`` runs;
the ratio is of medians in the same run. Target (our own): recursion at least 100x the
minimal SimPy model (aim 300x).

Last, the whole process ``cyclecheck analyze LINE --json --precision 0.001`` on the line written
as a TOML model in a temporary folder (wall and CPU, median of ``--repeat-cli``; target < 10 s).

Run with ``python tests/bench/bench_recursion.py [--repeat R] [--replications 10,100]``.
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _graphs import CYCLECHECK, median_min, run_measured
from bench_simpy import (
    BLOCK,
    CUSTOMERS,
    SEED,
    STATIONS,
    block_draws,
    initial_customers,
    line_graph,
    minimal_model,
)
from cyclecheck.algebra.recursion import RandomRecursion

TARGET_RATIO = 100.0
AIM_RATIO = 300.0
TARGET_CLI_SECONDS = 10.0
GORDON_NEWELL_CYCLE_TIME = (CUSTOMERS + STATIONS - 1) / CUSTOMERS  # 1/X, rate 1


def _recursion(source: Callable[[int, int], np.ndarray], replications: int, firings: int,
               holds: Callable[[int, int], np.ndarray] | None = None) -> None:
    graph = line_graph()
    zero = np.zeros((1, 1, graph.n_places))
    rec = RandomRecursion(graph, source, holds or (lambda first, count: zero), replications,
                          criticality=True)
    rec.run(firings, block=max(1, firings // 200))


def pregenerated(replications: int, firings: int, seed: int) -> Callable[[], None]:
    """A run on draws made beforehand; the returned callable is what gets timed."""
    streams = np.random.SeedSequence(seed).spawn(replications)
    draws = np.stack([np.random.default_rng(s).exponential(1.0, (firings, STATIONS))
                      for s in streams], axis=1)  # (K, R, n)
    return lambda: _recursion(lambda first, count: draws[first - 1 : first - 1 + count],
                              replications, firings)


def generator(replications: int, firings: int, seed: int) -> Callable[[], None]:
    def run() -> None:
        rngs = [np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(replications)]

        def source(first: int, count: int) -> np.ndarray:
            return np.stack([g.exponential(1.0, (count, STATIONS)) for g in rngs], axis=1)

        _recursion(source, replications, firings)

    return run


def project_sampler(replications: int, firings: int, seed: int) -> Callable[[], None]:
    from cyclecheck.simulate.durations import Sampler

    specs = [{"dist": "exponential", "mean": 1.0}] * STATIONS
    hold_specs = [0.0] * (2 * STATIONS)

    def run() -> None:
        samplers = [Sampler(specs, hold_specs, seed, r) for r in range(replications)]

        def source(first: int, count: int) -> np.ndarray:
            return np.stack([s.duration_block(first, count) for s in samplers], axis=1)

        def holds(first: int, count: int) -> np.ndarray:
            return np.stack([s.hold_block(first, count) for s in samplers], axis=1)

        _recursion(source, replications, firings, holds)

    return run


def check_same_path(firings: int = 2000) -> None:
    """The recursion on bench_simpy's draws gives the minimal model's completion times."""
    draws = np.concatenate([np.stack([block_draws(SEED, i, b) for i in range(STATIONS)], axis=1)
                            for b in range(-(-firings // BLOCK))])[:firings]
    rec = RandomRecursion(line_graph(), lambda f, c: draws[f - 1 : f - 1 + c, None, :],
                          lambda f, c: np.zeros((c, 1, 2 * STATIONS)), 1)
    times = rec.run(firings, record=True).times[:, 0, :]
    if not np.allclose(times, minimal_model(firings, SEED), rtol=1e-12, atol=0):
        raise SystemExit("recursion and minimal SimPy model disagree: the benchmark would "
                         "compare different things")


def line_toml(directory: Path) -> Path:
    """The line as a TOML model (stations ``station0`` .. ``station19``)."""
    c = initial_customers()
    lines = ["[model]", 'name = "Closed line, 20 exponential stations, 10 customers"', ""]
    for i in range(STATIONS):
        lines += ["[[transitions]]", f'id = "station{i}"',
                  'duration = { dist = "exponential", mean = 1.0 }', ""]
    for i in range(STATIONS):
        j = (i + 1) % STATIONS
        lines += ["[[places]]", f'from = "station{i}"', f'to = "station{i}"', "tokens = 1", ""]
        lines += ["[[places]]", f'from = "station{i}"', f'to = "station{j}"',
                  f"tokens = {c[j]}", ""]
    path = directory / "closed_line.toml"
    path.write_text("\n".join(lines), encoding="utf-8")
    return path


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5, help="runs of each row")
    parser.add_argument("--replications", default="10,100",
                        help="comma list of R for the recursion rows")
    parser.add_argument("--work", type=int, default=4_000_000,
                        help="firings per recursion run (all transitions and replications)")
    parser.add_argument("--simpy-firings", type=int, default=10_000,
                        help="firings per station of the minimal SimPy run")
    parser.add_argument("--repeat-cli", type=int, default=3, help="runs of cyclecheck analyze")
    args = parser.parse_args()

    check_same_path()
    from cyclecheck.simulate.experiment import run_replications
    from cyclecheck.simulate.modelfile import load_model

    model_dir = tempfile.TemporaryDirectory(prefix="bench_recursion_model_")
    model = load_model(line_toml(Path(model_dir.name)))

    def product(R: int, K: int, seed: int) -> Callable[[], None]:
        """What `analyze` runs: experiment.run_replications on the model file (sampler,
        aligned draws, checkpoints, criticality, the clearing time of the upper bound)."""
        return lambda: run_replications(model, "recursion", seed, range(R), K)

    rows: dict[str, tuple[int, Callable[[int], Callable[[], None]]]] = {
        "minimal SimPy": (args.simpy_firings * STATIONS,
                          lambda r: lambda: minimal_model(args.simpy_firings, SEED + r)),
    }
    for R in [int(x) for x in args.replications.split(",")]:
        K = max(200, args.work // (R * STATIONS))
        for label, make in (("pre-generated", pregenerated), ("Generator", generator),
                            ("Sampler", project_sampler), ("product path", product)):
            rows[f"recursion R={R}, {label}"] = (
                K * R * STATIONS, lambda r, make=make, R=R, K=K: make(R, K, SEED + r))
    rates: dict[str, list[float]] = {name: [] for name in rows}
    names = list(rows)
    for r in range(args.repeat):
        for name in names if r % 2 == 0 else names[::-1]:
            total, make = rows[name]
            fn = make(r)  # pre-generated draws are made here, before the clock starts
            t0 = time.process_time()
            fn()
            rates[name].append(total / (time.process_time() - t0))

    base = statistics.median(rates["minimal SimPy"])
    print(f"closed line: {STATIONS} stations, {CUSTOMERS} customers; CPU time of this process, "
          f"{args.repeat} runs per row (alternating); recursion checked equal to SimPy")
    print(f"{'row':<34} {'firings/run':>11} {'median firings/s':>17} {'max':>12} "
          f"{'x SimPy':>8}")
    for name in names:
        med = statistics.median(rates[name])
        print(f"{name:<34} {rows[name][0]:>11,} {med:>17,.0f} {max(rates[name]):>12,.0f} "
              f"{med / base:>7.0f}x")
    print(f"target: recursion >= {TARGET_RATIO:.0f}x minimal SimPy (aim {AIM_RATIO:.0f}x)")

    with tempfile.TemporaryDirectory(prefix="bench_recursion_") as tmp:
        toml = line_toml(Path(tmp))
        cmd = [CYCLECHECK, "analyze", str(toml), "--json", "--precision", "0.001"]
        doc = json.loads(subprocess.run(cmd, capture_output=True, check=True).stdout)
        runs = [run_measured(cmd) for _ in range(args.repeat_cli)]
    wall = median_min([x.wall for x in runs])
    cpu = median_min([x.cpu for x in runs])
    print(f"\ncyclecheck analyze LINE --json --precision 0.001 (whole process, "
          f"{args.repeat_cli} runs): wall median {wall[0]:.2f} s (min {wall[1]:.2f}), CPU "
          f"median {cpu[0]:.2f} s (min {cpu[1]:.2f}); target < {TARGET_CLI_SECONDS:.0f} s")
    low, high = doc["cycle_time_ci"]
    print(f"  cycle time {doc['cycle_time']:.5f} [{low:.5f}, {high:.5f}], relative half-width "
          f"{doc['relative_half_width']:.2e}, {doc['replications']} replications x "
          f"{doc['firings_per_replication']} firings ({doc['firings_simulated']:,} firings); "
          f"Gordon-Newell: {GORDON_NEWELL_CYCLE_TIME:.5f}")


if __name__ == "__main__":
    main()
