"""Benchmark: a sweep on 1 and 2 local worker processes, and on a loopback Dask cluster.

Method: the sweep is ``cyclecheck sweep models/closed_line_exponential.toml --vary
s5.mean=0.8:2.0:6`` with one round of ``--replications 400`` per point (``--precision 0.2`` is
met by the first round, so every run does the same work: six points of 400 replications of
20,001 firings, about three seconds of one core each with the compiled recursion). ``--repeat``
rounds (default 3) of the whole command as a child process with ``--workers 1`` and ``--workers
2``, in alternating order, on an otherwise idle machine; then ``--repeat`` runs with
``--scheduler`` of a ``distributed.LocalCluster`` on 127.0.0.1 (2 worker processes, 1 thread
each, started by this script after the local rounds and not timed: alive during the local
rounds, its idle processes took CPU from the local runs: 18.7 s and 11.2 s against 15.1 s and
8.7 s without it). Wall time from spawn to exit; the table gives medians and minima, and the
speed-ups are medians of ``--workers 1`` against each, in the same run. Every run's points are
compared with the first one's: the numbers must be identical whatever the executor.

Target (our own, from the issue): 2 local processes at least 1.7x faster than 1. The loopback
cluster's figure is stated, not targeted (its tasks travel through the scheduler).

Run with ``python tests/bench/bench_sweep.py [--repeat R]``; about 2 minutes on 2 quiet cores.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _graphs import CYCLECHECK, median_min, run_measured

ROOT = Path(__file__).resolve().parents[2]
MODEL = ROOT / "models" / "closed_line_exponential.toml"
#: Replications per point: about three seconds of one core per point with the compiled recursion.
REPLICATIONS = 400
SWEEP = [CYCLECHECK, "sweep", str(MODEL), "--vary", "s5.mean=0.8:2.0:6",
         "--replications", str(REPLICATIONS), "--precision", "0.2", "--seed", "1", "--quiet"]
TARGET = 1.7


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    import distributed

    print(f"load average before: {' '.join(f'{x:.2f}' for x in os.getloadavg())}; "
          f"{os.cpu_count()} cores")
    local = {"--workers 1": ["--workers", "1"], "--workers 2": ["--workers", "2"]}
    cluster_name = "loopback cluster (2 workers)"
    names = [*local, cluster_name]
    walls: dict[str, list[float]] = {name: [] for name in names}
    state: dict[str, Any] = {"reference": None, "work": 0}

    def measure(folder: str, name: str, options: list[str]) -> None:
        out = Path(folder) / "doc.json"
        run = run_measured([*SWEEP, *options, "--save", str(out), "--force"],
                           stdout=subprocess.DEVNULL)
        points = json.loads(out.read_text(encoding="utf-8"))["points"]
        if state["reference"] is None:
            state["reference"] = points
            state["work"] = sum(p["firings_simulated"] for p in points)
        elif points != state["reference"]:
            raise SystemExit(f"{name}: the points differ from the first run's")
        walls[name].append(run.wall)

    with tempfile.TemporaryDirectory() as folder:
        # The local runs first, with no cluster alive: its idle processes (scheduler, two
        # workers and their heartbeats) would take CPU from the two local workers.
        for r in range(args.repeat):
            order = list(local) if r % 2 == 0 else list(local)[::-1]
            for name in order:
                measure(folder, name, local[name])
        with distributed.LocalCluster(host="127.0.0.1", n_workers=2, threads_per_worker=1,
                                      processes=True, dashboard_address=None) as cluster:
            for _ in range(args.repeat):
                measure(folder, cluster_name, ["--scheduler", cluster.scheduler_address])
    work = state["work"]
    base, _ = median_min(walls["--workers 1"])
    print(f"\nsweep: 6 points x {REPLICATIONS} replications, {work:,} firings in all; "
          f"{args.repeat} rounds, wall seconds of the whole command")
    print(f"{'executor':32} {'median':>8} {'min':>8} {'speed-up':>9}")
    for name in names:
        median, least = median_min(walls[name])
        print(f"{name:32} {median:8.2f} {least:8.2f} {base / median:8.2f}x")
    per_point = base / 6
    print(f"\none point on one core: {per_point:.2f} s (median of --workers 1 / 6)")
    ratio = base / median_min(walls["--workers 2"])[0]
    print(f"2 processes vs 1: {ratio:.2f}x (target >= {TARGET}x): "
          f"{'met' if ratio >= TARGET else 'NOT met'}")
    print("identical points from every executor: yes")
    print(f"load average after: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")


if __name__ == "__main__":
    main()
