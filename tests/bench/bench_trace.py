"""Benchmark: reading and judging an event log of 10^7 rows, ``cyclecheck trace``.

Method: the log is the closed inspection loop of models/closed_line_exponential.toml (five
exponential stations, three pallets), computed by the project's recursion on the model's own
draws and written as CSV with pyarrow: 100 replications of 20,000 firings of every station
(10^7 rows, column ``replication``), and one run of 200,000 firings (10^6 rows, batch means).
Each round runs, in alternating order, two child processes timed from spawn to exit:

* the baseline, ``python -c "import pandas; pandas.read_csv(LOG)"``: parsing the file alone;
* ``cyclecheck trace MODEL LOG --json --quiet --precision 0.01``: reading, checking every
  firing, the tests of durations and cycle time, the model's own estimate (to 1 %, a fixed
  cost independent of the log) and the JSON document.

The table gives medians and minima of wall and CPU time and the peak memory of the child; the
ratio is trace against the baseline in the same round. After all the child processes, one run
in this process splits trace into its stages (reading, the judgement with a precomputed model
estimate, the model estimate): last, because a child forked from a large parent inherits its
peak memory figure. The verdict of every run is checked to be "agrees" (the log follows the
model).

Run with ``python tests/bench/bench_trace.py [--repeat R] [--keep DIR] [--sizes 1e7,1e6]``:
about 5 minutes, of which half a minute writes the logs (kept in DIR with ``--keep``).
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _graphs import CYCLECHECK, PYTHON, median_min, run_measured

ROOT = Path(__file__).resolve().parents[2]
MODEL = ROOT / "models" / "closed_line_exponential.toml"
SIZES = {"1e7": ("1e7 rows, 100 replications", 100, 20_000),
         "1e6": ("1e6 rows, one run", 1, 200_000)}


def write_log(path: Path, replications: int, firings: int, seed: int = 7) -> int:
    """The recursion's firings of every replication, written as CSV in time order per
    replication (as simulators write them); returns the number of rows."""
    import pyarrow as pa
    import pyarrow.csv as pcsv
    from cyclecheck.simulate.experiment import run_replications
    from cyclecheck.simulate.modelfile import load_model

    model = load_model(MODEL)
    n = model.n_transitions
    batch = run_replications(model, "recursion", seed, range(replications), firings,
                             record=True)
    ids = np.array(model.transition_ids)
    parts = []
    for r in range(replications):
        x = batch.times[:, r, :]
        d = model.sampler(seed, r).duration_block(1, firings)
        order = np.argsort(x.ravel(), kind="stable")
        cols = {"transition": ids[np.tile(np.arange(n), firings)][order],
                "firing": np.repeat(np.arange(1, firings + 1), n)[order],
                "start": (x - d).ravel()[order], "time": x.ravel()[order]}
        if replications > 1:
            cols["replication"] = np.full(order.size, r + 1)
        parts.append(pa.table(cols))
    table = pa.concat_tables(parts)
    pcsv.write_csv(table, path)
    return table.num_rows


def stages(log: Path) -> dict[str, float]:
    """CPU seconds of the stages of one in-process judgement."""
    from cyclecheck.simulate.eventlog import read_log
    from cyclecheck.simulate.judge import judge_events
    from cyclecheck.simulate.logcycle import model_cycle_time
    from cyclecheck.simulate.modelfile import load_model

    model = load_model(MODEL)
    t0 = time.process_time()
    events = read_log(model, log)
    t1 = time.process_time()
    estimate = model_cycle_time(model, precision=0.01)
    t2 = time.process_time()
    doc = judge_events(model, events, model_estimate=estimate)
    t3 = time.process_time()
    assert doc["verdict"] == "agrees", doc["reasons"]
    return {"read and check rows": t1 - t0, "judge (estimate given)": t3 - t2,
            "model estimate (1 %)": t2 - t1}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3, help="rounds")
    parser.add_argument("--keep", type=Path, default=None, help="folder to keep the logs in")
    parser.add_argument("--sizes", default="1e7,1e6", help="which logs: 1e7, 1e6 or both")
    args = parser.parse_args()
    folder = args.keep or Path(tempfile.mkdtemp(prefix="bench_trace_"))
    folder.mkdir(parents=True, exist_ok=True)
    logs = []
    for label, reps, firings in (SIZES[s] for s in args.sizes.split(",")):
        log = folder / f"log_{reps}x{firings}.csv"
        if not log.exists():
            t0 = time.perf_counter()
            rows = write_log(log, reps, firings)
            print(f"{label}: wrote {rows:,} rows ({log.stat().st_size / 2**20:.0f} MiB) in "
                  f"{time.perf_counter() - t0:.0f} s", flush=True)
        baseline = [PYTHON, "-c", f"import pandas; pandas.read_csv({str(log)!r})"]
        trace = [CYCLECHECK, "trace", str(MODEL), str(log), "--json", "--quiet",
                 "--precision", "0.01"]
        out = subprocess.run(trace, capture_output=True, text=True, check=False)
        doc = json.loads(out.stdout)
        assert doc["verdict"] == "agrees", doc["reasons"]
        runs: dict[str, list] = {"pandas.read_csv": [], "cyclecheck trace": []}
        for i in range(args.repeat):
            pair = [("pandas.read_csv", baseline), ("cyclecheck trace", trace)]
            for name, cmd in (pair if i % 2 == 0 else pair[::-1]):
                runs[name].append(run_measured(cmd))
        print(f"\n{label} ({args.repeat} rounds)")
        print(f"{'':18} {'wall median':>12} {'wall min':>9} {'CPU median':>11} {'peak MiB':>9}")
        for name, ms in runs.items():
            wall, wall_min = median_min([m.wall for m in ms])
            cpu, _ = median_min([m.cpu for m in ms])
            peak = max(m.maxrss for m in ms) / 2**20
            print(f"{name:18} {wall:12.2f} {wall_min:9.2f} {cpu:11.2f} {peak:9.0f}")
        ratio = [t.wall / b.wall for t, b in zip(runs["cyclecheck trace"],
                                                  runs["pandas.read_csv"], strict=True)]
        cpu_ratio = [t.cpu / b.cpu for t, b in zip(runs["cyclecheck trace"],
                                                    runs["pandas.read_csv"], strict=True)]
        print(f"trace / read_csv: wall {median_min(ratio)[0]:.2f}x, CPU "
              f"{median_min(cpu_ratio)[0]:.2f}x (medians of the per-round ratios)", flush=True)
        logs.append((label, log))
    for label, log in logs:
        print(f"{label}, stages in this process (CPU s): " + ", ".join(
            f"{k} {v:.2f}" for k, v in stages(log).items()), flush=True)
    if args.keep is None:
        for p in folder.iterdir():
            p.unlink()
        folder.rmdir()


if __name__ == "__main__":
    main()
