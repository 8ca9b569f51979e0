"""Benchmark: the whole ``cyclecheck analyze MODEL --json`` process on large random event graphs.

Models: random live strongly connected event graphs (tests/bench/_graphs.py: a ring through all
transitions, random chords with 1-3 tokens, random durations and holds) with 10^5 places and
3·10^4 transitions, and 10^6 places and 3·10^5 transitions, written as CSV models with
``write_csv_model`` into a temporary folder (the writing is not timed); with ``--sizes
small,large,huge`` also 10^7 places and 3·10^6 transitions (one timed run: time and memory).

Method: every run uses a fresh numba cache (``NUMBA_CACHE_DIR`` in the temporary folder). The
first run, of the large size, is the *cold* one: it compiles the kernels of
``cyclecheck.algebra.kernels``, as the first run after an install does; it is timed and shown
apart, and its output is checked (a result document with a cycle time; every other size is
checked by an untimed run too). Then each repetition runs ``cyclecheck analyze MODEL --json >
/dev/null`` once per size, in alternating order, *warm* (kernels loaded from the cache), as a
child process, and records its wall time (spawn to exit), its CPU time (user + system, from
the child's own rusage) and its peak resident memory. The table gives the median and the
minimum over the repetitions; the scaling is the ratio of the medians, 10^6 : 10^5, in the same
run. The machine is shared: wall time includes waiting for a core, CPU time does not, so both
are shown.

Targets (our own): ratio <= 12, at 10^6 places <= 3 s (aim 1 s) and <= 2 GB warm; 10^7 places
within 8 GB. Speed is reported, never asserted.

``--profile`` adds a breakdown of in-process runs per size, stage by stage in CPU seconds (the
stages that ``load_model``, ``analyze_graph`` and the CLI go through, minimum over
``--profile-runs``), and the top entries of cProfile for the larger size.

Run with ``python tests/bench/bench_analyze.py [--repeat R] [--profile] [--sizes small,large]``.
"""

from __future__ import annotations

import argparse
import cProfile
import io
import json
import os
import pstats
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _graphs import (
    CYCLECHECK,
    PYTHON,
    median_min,
    numba_cache,
    run_measured,
    write_random_model,
)

SIZES = {"small": (30_000, 100_000), "large": (300_000, 1_000_000),
         "huge": (3_000_000, 10_000_000)}
SEED = 20261201
TARGET_RATIO = 12.0
TARGET_SECONDS = 3.0
AIM_SECONDS = 1.0
TARGET_BYTES = 2 * 10**9
HUGE_BYTES = 8 * 10**9


def check_output(toml: Path, env: dict[str, str] | None = None) -> dict[str, Any]:
    """One run: the document must be JSON with a positive cycle time."""
    out = subprocess.run([CYCLECHECK, "analyze", str(toml), "--json"], capture_output=True,
                         check=True, env={**os.environ, **(env or {})})
    doc = json.loads(out.stdout)
    if not doc["cycle_time"] > 0:
        raise SystemExit(f"unexpected cycle time {doc['cycle_time']} for {toml}")
    return {"cycle_time": doc["cycle_time"], "howard_iterations": doc.get("howard_iterations"),
            "json_bytes": len(out.stdout)}


def _timed(stages: list[tuple[str, float]], name: str, fn: Callable[[], Any]) -> Any:
    t0 = time.process_time()
    value = fn()
    stages.append((name, time.process_time() - t0))
    return value


def stage_profile(toml: Path) -> list[tuple[str, float]]:
    """CPU seconds of each stage of ``analyze`` for a model with fixed durations, in process.

    The stages are those of ``load_model``, ``analyze_graph`` and the CLI's output, called in the
    same order with the same arguments; "imports" is a separate child process importing what
    the CLI imports for ``analyze``. ``analyze_graph`` is then called once more as a whole: on
    this virtual machine the first touch of fresh memory is expensive (system time), so a stage
    that allocates large arrays first costs more than the same work on reused memory; the
    stages, like the CLI, are the cold case.
    """
    imports = ("import cyclecheck.simulate.cli, cyclecheck.simulate.api, "
               "cyclecheck.simulate.modelfile, cyclecheck.simulate.summary, "
               "cyclecheck.simulate.result, pandas")
    stages = [("start-up and imports (child)", run_measured([PYTHON, "-c", imports]).cpu)]

    import numpy as np
    from cyclecheck.algebra import analysis as an
    from cyclecheck.algebra.critical import (
        certify,
        critical_places,
        cyclicity,
        periodic_schedule,
        slack,
    )
    from cyclecheck.algebra.eventgraph import check_live, strongly_connected_components
    from cyclecheck.algebra.recursion import transient
    from cyclecheck.algebra.spectral import howard
    from cyclecheck.simulate import result as res
    from cyclecheck.simulate.modelfile import load_model

    model = _timed(stages, "load_model (CSV, checks, liveness)", lambda: load_model(toml))
    graph = model.graph()
    _timed(stages, "  of which: liveness check (check_live)", lambda: check_live(graph))
    hw = _timed(stages, "howard", lambda: howard(graph))
    stages[-1] = (f"howard ({hw.iterations} iterations)", stages[-1][1])
    _timed(stages, "certificate (certify)", lambda: certify(graph, hw))
    crit = _timed(stages, "critical places", lambda: critical_places(graph, hw))
    period = _timed(stages, "cyclicity", lambda: cyclicity(graph, hw, crit))
    _timed(stages, "periodic schedule", lambda: periodic_schedule(graph, hw))
    _timed(stages, "slack", lambda: slack(graph, hw))
    _timed(stages, "characteristic polynomial (or skip)", lambda: an._charpoly(graph))
    horizon = max(int(np.clip(an.TRANSIENT_WORK_LIMIT // max(graph.n_places, 1), 20, 2000)),
                  2 * period + 2)
    _timed(stages, f"transient measurement ({horizon} firings)",
           lambda: transient(graph, hw.cycle_time, period, horizon))
    _timed(stages, "strongly connected components",
           lambda: strongly_connected_components(graph))
    whole = _timed(stages, "analyze_graph as one call (warm memory)",
                   lambda: an.analyze_graph(graph))
    doc = _timed(stages, "result document (model + analysis sections)",
                 lambda: {**res.model_section(model), **res.analysis_section(model, whole)})
    text = _timed(stages, "JSON text (result.dumps, indent=2)", lambda: res.dumps(doc))
    _timed(stages, "  for comparison: json.dumps without indent",
           lambda: json.dumps(doc, allow_nan=False))
    stages.append((f"  JSON size: {len(text) / 1e6:.1f} MB", float("nan")))
    return stages


def cprofile_top(toml: Path, count: int = 25) -> str:
    """cProfile of load + analyze + dumps in process, top entries by internal time."""
    from cyclecheck.simulate import analyze
    from cyclecheck.simulate.modelfile import load_model
    from cyclecheck.simulate.result import dumps

    prof = cProfile.Profile()
    prof.enable()
    dumps(analyze(load_model(toml)))
    prof.disable()
    buf = io.StringIO()
    pstats.Stats(prof, stream=buf).sort_stats("tottime").print_stats(count)
    return buf.getvalue()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3, help="timed runs per size")
    parser.add_argument("--profile", action="store_true", help="stage breakdown and cProfile")
    parser.add_argument("--profile-runs", type=int, default=2,
                        help="in-process runs of the stage breakdown (minimum shown)")
    parser.add_argument("--sizes", default="small,large",
                        help="comma list of: small, large, huge (10^7 places)")
    args = parser.parse_args()
    sizes = [s.strip() for s in args.sizes.split(",")]

    with tempfile.TemporaryDirectory(prefix="bench_analyze_") as tmp:
        env = numba_cache(Path(tmp))
        models = {s: write_random_model(Path(tmp), *SIZES[s], seed=SEED) for s in sizes}
        # The very first run compiles the kernels (cold): on 10^6 places when asked for.
        first = "large" if "large" in sizes else sizes[0]
        cold = (first, run_measured([CYCLECHECK, "analyze", str(models[first]), "--json"],
                                    env=env))
        info = {s: check_output(models[s], env) for s in sizes}
        timed = [s for s in sizes if s != "huge"]
        runs: dict[str, list[Any]] = {s: [] for s in sizes}
        for r in range(args.repeat):
            for s in timed if r % 2 == 0 else timed[::-1]:
                runs[s].append(run_measured([CYCLECHECK, "analyze", str(models[s]), "--json"],
                                            env=env))
        if "huge" in sizes:  # one warm run: time and memory
            runs["huge"].append(run_measured([CYCLECHECK, "analyze", str(models["huge"]),
                                              "--json"], env=env))

        print(f"cyclecheck analyze MODEL --json > /dev/null, whole process, warm numba cache, "
              f"{args.repeat} runs per size (alternating; 10^7: one run), after one check run")
        print(f"{'places':>10} {'trans.':>9} {'wall med':>9} {'wall min':>9} {'CPU med':>8} "
              f"{'CPU min':>8} {'of it sys':>9} {'peak RSS':>9} {'JSON':>8} {'Howard it.':>10}")
        for s in sizes:
            n, m = SIZES[s]
            wall = median_min([x.wall for x in runs[s]])
            cpu = median_min([x.cpu for x in runs[s]])
            rss = max(x.maxrss for x in runs[s])
            sys_med = median_min([x.sys for x in runs[s]])[0]
            print(f"{m:>10,} {n:>9,} {wall[0]:>8.2f}s {wall[1]:>8.2f}s {cpu[0]:>7.2f}s "
                  f"{cpu[1]:>7.2f}s {sys_med:>8.2f}s {rss / 2**20:>7.0f}MiB "
                  f"{info[s]['json_bytes'] / 1e6:>6.1f}MB {info[s]['howard_iterations']!s:>10}")
        if cold:
            s, c = cold
            print(f"cold (first run, compiles the kernels) at {SIZES[s][1]:,} places: wall "
                  f"{c.wall:.2f} s, CPU {c.cpu:.2f} s, peak RSS {c.maxrss / 2**20:.0f} MiB")
        if "small" in sizes and "large" in sizes:
            w = [median_min([x.wall for x in runs[s]])[0] for s in ("small", "large")]
            c = [median_min([x.cpu for x in runs[s]])[0] for s in ("small", "large")]
            rss = max(x.maxrss for x in runs["large"])
            print(f"ratio 10^6 : 10^5 (medians): wall {w[1] / w[0]:.1f}x, CPU {c[1] / c[0]:.1f}x "
                  f"(target <= {TARGET_RATIO:.0f}x)")
            print(f"at 10^6 places, warm: wall {w[1]:.2f} s, CPU {c[1]:.2f} s (target <= "
                  f"{TARGET_SECONDS:.0f} s, aim {AIM_SECONDS:.0f} s); peak RSS "
                  f"{rss / 1e9:.2f} GB (target <= {TARGET_BYTES / 1e9:.0f} GB)")
        if "huge" in sizes:
            h = runs["huge"][0]
            print(f"at 10^7 places, warm: wall {h.wall:.1f} s, CPU {h.cpu:.1f} s, peak RSS "
                  f"{h.maxrss / 1e9:.2f} GB (target <= {HUGE_BYTES / 1e9:.0f} GB)")

        if args.profile:
            for s in timed:
                n, m = SIZES[s]
                tables = [stage_profile(models[s]) for _ in range(args.profile_runs)]
                print(f"\nstages in process, CPU seconds, minimum of {args.profile_runs} runs: "
                      f"{m:,} places, {n:,} transitions")
                for i, (name, _) in enumerate(tables[0]):
                    sec = min(t[i][1] for t in tables)
                    print(f"  {name:<48} {'' if sec != sec else f'{sec:8.2f}'}")
            last = timed[-1]
            print(f"\ncProfile, load + analyze + dumps, {SIZES[last][1]:,} places "
                  "(profiler overhead inflates Python-level code):")
            print(cprofile_top(models[last]))


if __name__ == "__main__":
    main()
