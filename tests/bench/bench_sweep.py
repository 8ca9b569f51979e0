"""Benchmark: a sweep on 1 and 2 local worker processes, and on a loopback Dask cluster.

Method: the sweep is ``cyclecheck sweep models/closed_line_exponential.toml --vary
s5.mean=0.8:2.0:6`` with one round of ``--replications 400`` per point (``--precision 0.2`` is
met by the first round, so every run does the same work: six points of 400 replications of
20,001 firings, about three seconds of one core each with the compiled recursion). ``--repeat``
rounds (default 3); in each, in rotating order, the whole command runs as a child process with
``--workers 1``, ``--workers 2`` and ``--scheduler`` of a ``distributed.LocalCluster`` on
127.0.0.1 (2 worker processes, 1 thread each, started once by this script before the rounds and
not timed). Wall time from spawn to exit; the table gives medians and minima, and the speed-ups
are medians of ``--workers 1`` against each, in the same run. Every run's points are compared
with the first one's: the numbers must be identical whatever the executor.

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
    with tempfile.TemporaryDirectory() as folder, distributed.LocalCluster(
            host="127.0.0.1", n_workers=2, threads_per_worker=1, processes=True,
            dashboard_address=None) as cluster:
        variants = {"--workers 1": ["--workers", "1"], "--workers 2": ["--workers", "2"],
                    "loopback cluster (2 workers)": ["--scheduler", cluster.scheduler_address]}
        names = list(variants)
        walls: dict[str, list[float]] = {name: [] for name in names}
        reference = None
        for r in range(args.repeat):
            for name in names[r % len(names):] + names[: r % len(names)]:
                out = Path(folder) / "doc.json"
                run = run_measured([*SWEEP, *variants[name], "--save", str(out), "--force"],
                                   stdout=subprocess.DEVNULL)
                points = json.loads(out.read_text(encoding="utf-8"))["points"]
                if reference is None:
                    reference = points
                    work = sum(p["firings_simulated"] for p in points)
                elif points != reference:
                    raise SystemExit(f"{name}: the points differ from the first run's")
                walls[name].append(run.wall)
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
