"""Benchmark: the random recursion, numpy and compiled, against a minimal hand-written SimPy model.

The system is the closed line of tests/bench/bench_simpy.py: 20 exponential single-server
stations (rate 1), 10 customers, one in front of every second station at the start, as a timed
event graph (a self-loop place with one token per station, a place ``i -> i+1`` holding the
customers waiting at station ``i+1``). Its cycle time is known exactly: a closed cyclic line of K
equal exponential stations with N customers has throughput X = μN / (N + K − 1) (Gordon & Newell,
Operations Research 15(2), 1967; Buzen, CACM 16(9), 1973), here 10/29, cycle time 2.9.

Part 1, in this process (CPU seconds, ``--repeat`` runs per row in alternating order, median
and maximum rate; the kernels are loaded before the clock starts):

* ``minimal SimPy``: ``minimal_model`` of bench_simpy.py, one replication; ``SimPy engine``: the
  project's engine on the same line and draws (``engine_model``).
* ``recursion R, pre-generated, numpy|compiled``: :class:`RandomRecursion` over R replications
  on exponential draws made before the clock starts (the recursion alone, with its checks of
  each block and the criticality counts, checkpoints every K/200 firings).
* ``product path R, numpy|compiled``: what ``analyze`` runs per round,
  ``experiment.run_replications`` on the model file: the Sampler's block-indexed draws, aligned
  fetches, checkpoints, criticality, the upper bound and the lineage sweep of the derivatives.
* ``Sampler alone R``: only the draws of the product path (``duration_block`` of every
  replication over the run): the share of drawing.

Before timing, both recursions on the draws of bench_simpy.py are checked to give the minimal
SimPy model's completion times. Firings per second count every firing of every transition in
every replication; ratios are of medians in the same run.

Part 2, the threshold of ``kernel="auto"`` (``recursion.KERNEL_MIN_WORK``): the CPU time of
importing numba and loading the kernels from a warm cache in a fresh interpreter, and, on small
models, the CPU time per unit of work (firings × replications × (transitions + places)) of the
product path on each engine (R = 10, as analyze's first round). Compiling pays from ``load /
(numpy − compiled)`` units of work on: that break-even is printed per model.

Part 3, whole processes: ``cyclecheck analyze LINE --json --precision 0.0005`` (the default
workers: every core) against the minimal SimPy model run as a program of its own (interpreter,
simpy and numpy imports, the run of ``--cli-simpy-firings`` firings per station), each timed
from spawn to exit (wall, and CPU of the process and its workers). Every child gets a fresh
numba cache (``NUMBA_CACHE_DIR`` in a temporary folder): the first ``analyze`` compiles the
kernels (*cold*, shown apart, as the first run after an install); the next ones load them
(*warm*). ``--workers 1`` runs give the figure per core. Rates are firings per wall second;
the ratio is analyze's rate over SimPy's (medians, alternating runs). Targets (issue 8): at
least 300x the minimal SimPy model (aim 1000x); the SimPy engine at least 0.8x.

Run with ``python tests/bench/bench_recursion.py [--repeat R] [--replications 10,100]
[--repeat-cli N] [--skip-cli] [--skip-threshold]``.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _graphs import CYCLECHECK, PYTHON, median_min, random_live_graph, run_measured
from bench_simpy import (
    BLOCK,
    CUSTOMERS,
    SEED,
    STATIONS,
    block_draws,
    engine_model,
    initial_customers,
    line_graph,
    minimal_model,
)
from cyclecheck.algebra import recursion
from cyclecheck.algebra.recursion import RandomRecursion

BENCH = Path(__file__).resolve().parent
TARGET_RATIO = 300.0
AIM_RATIO = 1000.0
TARGET_ENGINE_RATIO = 0.8
GORDON_NEWELL_CYCLE_TIME = (CUSTOMERS + STATIONS - 1) / CUSTOMERS  # 1/X, rate 1
KERNELS = ("numpy", "numba")


def _recursion(source: Callable[[int, int], np.ndarray], replications: int, firings: int,
               kernel: str) -> None:
    graph = line_graph()
    zero = np.zeros((1, 1, graph.n_places))
    rec = RandomRecursion(graph, source, lambda first, count: zero, replications,
                          criticality=True, kernel=kernel)
    rec.run(firings, block=max(1, firings // 200))


def pregenerated(replications: int, firings: int, seed: int, kernel: str) -> Callable[[], None]:
    """A run on draws made beforehand; the returned callable is what gets timed."""
    streams = np.random.SeedSequence(seed).spawn(replications)
    draws = np.stack([np.random.default_rng(s).exponential(1.0, (firings, STATIONS))
                      for s in streams], axis=1)  # (K, R, n)
    return lambda: _recursion(lambda first, count: draws[first - 1 : first - 1 + count],
                              replications, firings, kernel)


def check_same_path(firings: int = 2000) -> None:
    """Both recursions on bench_simpy's draws give the minimal model's completion times."""
    draws = np.concatenate([np.stack([block_draws(SEED, i, b) for i in range(STATIONS)], axis=1)
                            for b in range(-(-firings // BLOCK))])[:firings]
    expected = minimal_model(firings, SEED)
    for kernel in KERNELS:
        rec = RandomRecursion(line_graph(), lambda f, c: draws[f - 1 : f - 1 + c, None, :],
                              lambda f, c: np.zeros((c, 1, 2 * STATIONS)), 1, kernel=kernel)
        times = rec.run(firings, record=True).times[:, 0, :]
        if not np.array_equal(times, expected):
            raise SystemExit(f"the {kernel} recursion and the minimal SimPy model disagree: "
                             "the benchmark would compare different things")


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


def random_toml(directory: Path, n: int, m: int, seed: int) -> Path:
    """A random live graph of tests/bench/_graphs.py with exponential durations (its durations
    as means) and its fixed holds, as a TOML model."""
    g = random_live_graph(n, m, seed)
    lines = ["[model]", f'name = "Random graph {n} x {m}"', ""]
    for t in range(n):
        lines += ["[[transitions]]", f'id = "t{t}"',
                  f'duration = {{ dist = "exponential", mean = {g["duration"][t]} }}', ""]
    for p in range(m):
        lines += ["[[places]]", f'from = "t{g["source"][p]}"', f'to = "t{g["target"][p]}"',
                  f"tokens = {g['tokens'][p]}", f"hold = {g['hold'][p]}", ""]
    path = directory / f"random_{n}_{m}.toml"
    path.write_text("\n".join(lines), encoding="utf-8")
    return path


def cpu_seconds(fn: Callable[[], object], repeat: int = 3) -> float:
    """Least CPU time of this process over ``repeat`` calls."""
    best = float("inf")
    for _ in range(repeat):
        t0 = time.process_time()
        fn()
        best = min(best, time.process_time() - t0)
    return best


def in_process(args: argparse.Namespace, model_path: Path) -> None:
    from cyclecheck.simulate.experiment import run_replications
    from cyclecheck.simulate.modelfile import load_model

    model = load_model(model_path)

    def product(R: int, K: int, seed: int, kernel: str) -> Callable[[], None]:
        return lambda: run_replications(model, "recursion", seed, range(R), K, kernel=kernel)

    def sampler_alone(R: int, K: int, seed: int) -> Callable[[], None]:
        def run() -> None:
            for r in range(R):
                s = model.sampler(seed, r)
                for first in range(1, K + 1, 8192):
                    s.duration_block(first, min(8192, K + 1 - first))
        return run

    rows: dict[str, tuple[int, Callable[[int], Callable[[], None]]]] = {
        "minimal SimPy": (args.simpy_firings * STATIONS,
                          lambda r: lambda: minimal_model(args.simpy_firings, SEED + r)),
        "SimPy engine": (args.simpy_firings * STATIONS,
                         lambda r: lambda: engine_model(args.simpy_firings, SEED + r)),
    }
    for R in [int(x) for x in args.replications.split(",")]:
        K = max(200, args.work // (R * STATIONS))
        for kernel in KERNELS:
            label = "compiled" if kernel == "numba" else kernel
            rows[f"recursion R={R}, pre-generated, {label}"] = (
                K * R * STATIONS, lambda r, R=R, K=K, k=kernel: pregenerated(R, K, SEED + r, k))
            rows[f"product path R={R}, {label}"] = (
                K * R * STATIONS, lambda r, R=R, K=K, k=kernel: product(R, K, SEED + r, k))
        rows[f"Sampler alone R={R}"] = (K * R * STATIONS,
                                        lambda r, R=R, K=K: sampler_alone(R, K, SEED + r))
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
    print(f"Part 1, in process: closed line, {STATIONS} stations, {CUSTOMERS} customers; CPU "
          f"time, {args.repeat} runs per row (alternating); both recursions checked equal to "
          "SimPy")
    print(f"{'row':<40} {'firings/run':>11} {'median firings/s':>17} {'max':>12} "
          f"{'x SimPy':>8}")
    for name in names:
        med = statistics.median(rates[name])
        print(f"{name:<40} {rows[name][0]:>11,} {med:>17,.0f} {max(rates[name]):>12,.0f} "
              f"{med / base:>7.2f}x")
    ratio = statistics.median(rates["SimPy engine"]) / base
    print(f"SimPy engine / minimal SimPy: {ratio:.2f} (target >= {TARGET_ENGINE_RATIO})")


def kernel_load_seconds(repeat: int) -> tuple[float, float]:
    """(median CPU, median wall) seconds of importing numba and loading the kernels from the
    (warm) cache in a fresh interpreter, interpreter start excluded."""
    code = ("import time; c, w = time.process_time(), time.perf_counter(); "
            "from cyclecheck.algebra.recursion import load_kernel; "
            "assert load_kernel() is not None; "
            "print(time.process_time() - c, time.perf_counter() - w)")
    runs = [subprocess.run([PYTHON, "-c", code], capture_output=True, text=True, check=True)
            for _ in range(repeat + 1)][1:]  # the first one may compile
    cpu = [float(r.stdout.split()[0]) for r in runs]
    wall = [float(r.stdout.split()[1]) for r in runs]
    return statistics.median(cpu), statistics.median(wall)


def threshold(args: argparse.Namespace, folder: Path, line_path: Path) -> None:
    from cyclecheck.simulate.experiment import run_replications
    from cyclecheck.simulate.modelfile import load_model

    load_cpu, load_wall = kernel_load_seconds(args.repeat)
    models = {
        "closed loop, 5 stations": Path(__file__).resolve().parents[2] / "models"
        / "closed_line_exponential.toml",
        "probe line": Path(__file__).resolve().parents[2] / "models" / "probe_line.toml",
        "closed line, 20 stations": line_path,
        "random graph 100 x 300": random_toml(folder, 100, 300, 7),
    }
    R, work = 10, args.threshold_work
    print(f"\nPart 2, threshold of kernel='auto': importing numba and loading the kernels from "
          f"a warm cache takes {load_cpu:.2f} s CPU ({load_wall:.2f} s wall; median of "
          f"{args.repeat} fresh interpreters). Product path, R = {R}, about {work:,} units of "
          "work per run (firings x replications x (transitions + places)), least CPU of 3:")
    print(f"{'model':<28} {'numpy ns/unit':>14} {'compiled ns/unit':>17} {'break-even work':>16}")
    evens = []
    for name, path in models.items():
        model = load_model(path)
        size = model.n_transitions + model.n_places
        K = max(200, work // (R * size))
        units = K * R * size
        per = {k: cpu_seconds(lambda k=k, model=model, K=K: run_replications(
            model, "recursion", 1, range(R), K, kernel=k)) / units for k in KERNELS}
        gain = per["numpy"] - per["numba"]
        even = load_cpu / gain if gain > 0 else float("inf")
        evens.append(even)
        print(f"{name:<28} {per['numpy'] * 1e9:>14.1f} {per['numba'] * 1e9:>17.1f} "
              f"{even:>16,.0f}")
    print(f"median break-even: {statistics.median(evens):,.0f} units; KERNEL_MIN_WORK = "
          f"{recursion.KERNEL_MIN_WORK:,}")


def whole_process(args: argparse.Namespace, folder: Path, line_path: Path) -> None:
    cache = folder / "numba-cache"
    cache.mkdir()
    os.environ["NUMBA_CACHE_DIR"] = str(cache)  # every child: a fresh cache, cold first
    analyze = [CYCLECHECK, "analyze", str(line_path), "--json", "--precision",
               str(args.precision)]
    simpy_cmd = [PYTHON, "-c", f"import sys; sys.path.insert(0, {str(BENCH)!r}); "
                 f"from bench_simpy import minimal_model; "
                 f"minimal_model({args.cli_simpy_firings}, {SEED})"]
    cold = run_measured(analyze)
    doc = json.loads(subprocess.run(analyze, capture_output=True, check=True).stdout)
    firings = doc["firings_simulated"]
    runs: dict[str, list] = {"simpy": [], "warm": [], "one core": []}
    cmds = {"simpy": simpy_cmd, "warm": analyze, "one core": [*analyze, "--workers", "1"]}
    for r in range(args.repeat_cli):
        for name in list(cmds) if r % 2 == 0 else list(cmds)[::-1]:
            runs[name].append(run_measured(cmds[name]))
    simpy_firings = args.cli_simpy_firings * STATIONS
    simpy_wall = median_min([x.wall for x in runs["simpy"]])[0]
    simpy_cpu = median_min([x.cpu for x in runs["simpy"]])[0]
    simpy_rate = simpy_firings / simpy_wall
    print(f"\nPart 3, whole processes ({args.repeat_cli} runs each, alternating; wall and CPU "
          "medians, min in brackets):")
    print(f"{'process':<44} {'firings':>11} {'wall s':>15} {'CPU s':>15} {'firings/s':>12} "
          f"{'x SimPy':>8}")
    print(f"{'minimal SimPy (own program)':<44} {simpy_firings:>11,} {simpy_wall:>8.2f}"
          f" [{min(x.wall for x in runs['simpy']):.2f}] {simpy_cpu:>8.2f}"
          f" [{min(x.cpu for x in runs['simpy']):.2f}] {simpy_rate:>12,.0f} {1:>7.0f}x")
    for name, label in (("cold", "analyze, cold cache (compiles)"),
                        ("warm", "analyze, warm cache, every core"),
                        ("one core", "analyze, warm cache, --workers 1")):
        ms = [cold] if name == "cold" else runs[name]
        wall, cpu = median_min([x.wall for x in ms]), median_min([x.cpu for x in ms])
        rate = firings / wall[0]
        print(f"{label:<44} {firings:>11,} {wall[0]:>8.2f} [{wall[1]:.2f}] {cpu[0]:>8.2f} "
              f"[{cpu[1]:.2f}] {rate:>12,.0f} {rate / simpy_rate:>7.0f}x")
    warm_cpu = median_min([x.cpu for x in runs["warm"]])[0]
    simpy_per_cpu = simpy_firings / simpy_cpu
    print(f"per CPU second: analyze {firings / warm_cpu:,.0f} firings, SimPy "
          f"{simpy_per_cpu:,.0f}: {firings / warm_cpu / simpy_per_cpu:.0f}x")
    print(f"target: analyze >= {TARGET_RATIO:.0f}x minimal SimPy (aim {AIM_RATIO:.0f}x), whole "
          "process, warm")
    low, high = doc["cycle_time_ci"]
    print(f"  cycle time {doc['cycle_time']:.5f} [{low:.5f}, {high:.5f}], relative half-width "
          f"{doc['relative_half_width']:.2e}, {doc['replications']} replications x "
          f"{doc['firings_per_replication']} firings; Gordon-Newell: "
          f"{GORDON_NEWELL_CYCLE_TIME:.5f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5, help="runs of each in-process row")
    parser.add_argument("--replications", default="10,100",
                        help="comma list of R for the recursion rows")
    parser.add_argument("--work", type=int, default=4_000_000,
                        help="firings per recursion run (all transitions and replications)")
    parser.add_argument("--simpy-firings", type=int, default=10_000,
                        help="firings per station of the in-process SimPy runs")
    parser.add_argument("--threshold-work", type=int, default=3_000_000,
                        help="units of work per run in part 2")
    parser.add_argument("--repeat-cli", type=int, default=3, help="whole-process runs each")
    parser.add_argument("--precision", type=float, default=0.0005,
                        help="--precision of the whole-process analyze")
    parser.add_argument("--cli-simpy-firings", type=int, default=20_000,
                        help="firings per station of the whole-process SimPy run")
    parser.add_argument("--skip-cli", action="store_true", help="no part 3")
    parser.add_argument("--skip-threshold", action="store_true", help="no part 2")
    args = parser.parse_args()

    with tempfile.TemporaryDirectory(prefix="bench_recursion_") as tmp:
        folder = Path(tmp)
        line_path = line_toml(folder)
        if recursion.load_kernel() is None:
            raise SystemExit("numba cannot be imported")
        check_same_path()
        in_process(args, line_path)
        if not args.skip_threshold:
            threshold(args, folder, line_path)
        if not args.skip_cli:
            whole_process(args, folder, line_path)


if __name__ == "__main__":
    main()
