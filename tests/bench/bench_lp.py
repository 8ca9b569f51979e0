r"""Benchmark: ``cyclecheck analyze`` against a linear program solved by HiGHS, whole processes.

The cycle time of a live strongly connected timed event graph is the value of the linear program

.. math::

    \min \lambda \quad \text{s.t.} \quad \pi_u - \pi_t + d_t + h_p - \lambda m_p \le 0
    \quad \text{for every place } p = (u \to t)

(the periodic schedule ``x_t(k) = \pi_t + k \lambda`` satisfies every place's constraint
``x_t(k) >= x_u(k - m_p) + h_p + d_t``; its dual is the maximum cycle ratio: Baccelli, Cohen,
Olsder & Quadrat, *Synchronization and Linearity*, 1992, §2.5 and ch. 3; the LP view of the
maximum cycle ratio, Dasdan, ACM TODAES 9(4), 2004, §2). One potential is fixed at 0 (the
others and λ are free), which removes the translation invariance without changing λ.

The baseline is what an engineer with scipy would write: a child process that reads the same CSV
tables with pandas, builds the constraint matrix as a ``scipy.sparse`` matrix and calls
``scipy.optimize.linprog(method="highs")``. It is this file run with ``--lp MODEL``.

Method: random live strongly connected graphs (tests/bench/_graphs.py) with 3·10^4 transitions
and 9·10^4 places, and 2·10^4 transitions and 6·10^4 places, as CSV models. One untimed run of
each program per size checks that both give the same λ (relative difference <= 1e-6); then each
repetition runs both whole processes, in alternating order, and records wall and CPU time
(child rusage). Speed-up = median of the LP / median of ``cyclecheck analyze MODEL --json >
/dev/null``, in the same run. cyclecheck runs with a fresh numba cache (``NUMBA_CACHE_DIR`` in
the temporary folder); its first run, the untimed check, is shown as the cold one (below
2·10^5 places Howard runs in numpy, so it compiles nothing). Target (our own): at least 30x at
3·10^4 transitions.

``--profile`` adds the stage breakdown of ``cyclecheck analyze`` at each size (in process, CPU
seconds, as in bench_analyze.py).

Run with ``python tests/bench/bench_lp.py [--repeat R] [--profile]``.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _graphs import CYCLECHECK, PYTHON, median_min, numba_cache, run_measured, write_random_model

SIZES = [(30_000, 90_000), (20_000, 60_000)]
SEED = 20261202
TARGET_SPEEDUP = 30.0
RTOL = 1e-6


def solve_lp(toml: Path) -> dict[str, Any]:
    """The baseline: read the CSV model with pandas, solve the LP with HiGHS, return λ."""
    import tomllib

    import numpy as np
    import pandas as pd
    from scipy.optimize import linprog
    from scipy.sparse import coo_matrix

    meta = tomllib.loads(toml.read_text())["model"]
    trans = pd.read_csv(toml.parent / meta["transitions_csv"], dtype={"id": str})
    places = pd.read_csv(toml.parent / meta["places_csv"], dtype={"from": str, "to": str})
    index = pd.Index(trans["id"])
    u = index.get_indexer(places["from"])
    t = index.get_indexer(places["to"])
    n, m = len(trans), len(places)
    d = trans["duration"].to_numpy(np.float64)
    h = places["hold"].to_numpy(np.float64)
    tokens = places["tokens"].to_numpy(np.float64)
    rows = np.arange(m)
    # columns 0..n-1: potentials pi; column n: lambda. A self-loop's +1 and -1 cancel.
    a = coo_matrix(
        (np.concatenate([np.ones(m), -np.ones(m), -tokens]),
         (np.concatenate([rows, rows, rows]), np.concatenate([u, t, np.full(m, n)]))),
        shape=(m, n + 1),
    ).tocsr()
    b = -(d[t] + h)
    c = np.zeros(n + 1)
    c[n] = 1.0
    bounds = [(0.0, 0.0)] + [(None, None)] * n  # pi_0 = 0; the other pi and lambda free
    res = linprog(c, A_ub=a, b_ub=b, bounds=bounds, method="highs")
    if res.status != 0:
        raise SystemExit(f"linprog failed: {res.message}")
    return {"cycle_time": float(res.x[n]), "solver": res.message}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3, help="timed runs of each program")
    parser.add_argument("--profile", action="store_true",
                        help="stage breakdown of cyclecheck analyze (see bench_analyze.py)")
    parser.add_argument("--lp", type=Path, default=None, metavar="MODEL",
                        help="(internal) run the LP baseline on MODEL and print λ as JSON")
    args = parser.parse_args()
    if args.lp is not None:
        print(json.dumps(solve_lp(args.lp)))
        return

    programs = {
        "cyclecheck": lambda toml: [CYCLECHECK, "analyze", str(toml), "--json"],
        "LP (HiGHS)": lambda toml: [PYTHON, str(Path(__file__).resolve()), "--lp", str(toml)],
    }
    print(f"whole processes, {args.repeat} timed runs each (alternating), after one check run; "
          "speed-up = LP median / cyclecheck median")
    print(f"{'trans.':>7} {'places':>7} {'program':<11} {'wall med':>9} {'wall min':>9} "
          f"{'CPU med':>8} {'CPU min':>8} {'peak RSS':>9}  cycle time")
    with tempfile.TemporaryDirectory(prefix="bench_lp_") as tmp:
        env = numba_cache(Path(tmp))
        for n, m in SIZES:
            toml = write_random_model(Path(tmp), n, m, seed=SEED)
            lam = {}
            for name, cmd in programs.items():
                t0 = time.perf_counter()
                out = subprocess.run(cmd(toml), capture_output=True, check=True,
                                     env={**os.environ, **env})
                if name == "cyclecheck" and n == SIZES[0][0]:
                    print(f"(cold: the first cyclecheck run, fresh numba cache, took "
                          f"{time.perf_counter() - t0:.2f} s wall; at these sizes Howard runs "
                          "in numpy and nothing is compiled)")
                lam[name] = json.loads(out.stdout)["cycle_time"]
            a, b = lam["cyclecheck"], lam["LP (HiGHS)"]
            rel = abs(a - b) / abs(a)
            if rel > RTOL:
                raise SystemExit(f"λ differs: cyclecheck {a!r}, LP {b!r} (relative {rel:.1e})")
            runs: dict[str, list[Any]] = {name: [] for name in programs}
            order = list(programs)
            for r in range(args.repeat):
                for name in order if r % 2 == 0 else order[::-1]:
                    runs[name].append(run_measured(programs[name](toml), env=env))
            for name in programs:
                wall = median_min([x.wall for x in runs[name]])
                cpu = median_min([x.cpu for x in runs[name]])
                rss = max(x.maxrss for x in runs[name])
                print(f"{n:>7,} {m:>7,} {name:<11} {wall[0]:>8.2f}s {wall[1]:>8.2f}s "
                      f"{cpu[0]:>7.2f}s {cpu[1]:>7.2f}s {rss / 2**20:>7.0f}MiB  {lam[name]!r}")
            w = [median_min([x.wall for x in runs[k]])[0] for k in programs]
            c = [median_min([x.cpu for x in runs[k]])[0] for k in programs]
            print(f"{'':>16}speed-up of cyclecheck: wall {w[1] / w[0]:.1f}x, CPU "
                  f"{c[1] / c[0]:.1f}x (target >= {TARGET_SPEEDUP:.0f}x); "
                  f"λ agree to {rel:.1e} relative")
            if args.profile:
                from bench_analyze import stage_profile

                tables = [stage_profile(toml) for _ in range(2)]
                print(f"{'':>16}cyclecheck stages in process, CPU seconds, minimum of 2 runs:")
                for i, (name, _) in enumerate(tables[0]):
                    sec = min(t[i][1] for t in tables)
                    print(f"{'':>18}{name:<48} {'' if sec != sec else f'{sec:8.2f}'}")


if __name__ == "__main__":
    main()
