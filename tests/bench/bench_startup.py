"""Benchmark: start-up time of the command line, ``cyclecheck --help``, whole process, and the
small analysis ``cyclecheck analyze models/packaging_cell.toml`` cold and warm.

Method: ``--repeat`` rounds (default 10); each round runs, in rotating order, ``python -c pass``
(the baseline: the interpreter alone), ``python -c "import cyclecheck.simulate.cli"`` (the CLI
module and what it imports at start-up), the console script ``cyclecheck --help`` (adds the
entry-point wrapper and click's help text) and ``cyclecheck analyze models/packaging_cell.toml``
(warm). Each is a child process timed from spawn to exit (wall) with its own CPU time (rusage).
The table gives medians and minima; the ratios are medians against the baseline in the same
run. Target (our own): ``cyclecheck --help`` under 0.2 s wall.

Cold and warm: the compiled kernels (numba) must cost small runs nothing. Every command here
runs with a fresh numba cache (``NUMBA_CACHE_DIR`` in a temporary folder); the first analysis of
the packaging cell, before any other run, is the cold one and is shown apart. The script also
lists whether numba (the compiler) and pyarrow (the CSV reader) are imported by ``--help`` and by
that analysis (``python -X importtime``): ``--help`` must import neither.

When the target is missed, or with ``--importtime``, the script also shows the largest entries
of ``python -X importtime -c "import cyclecheck.simulate.cli"`` (microseconds, one run).

Run with ``python tests/bench/bench_startup.py [--repeat R] [--importtime]``.
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _graphs import CYCLECHECK, PYTHON, median_min, numba_cache, run_measured

TARGET_SECONDS = 0.2
CELL = str(Path(__file__).resolve().parents[2] / "models" / "packaging_cell.toml")
COMMANDS = {
    "python -c pass": [PYTHON, "-c", "pass"],
    "import cli module": [PYTHON, "-c", "import cyclecheck.simulate.cli"],
    "cyclecheck --help": [CYCLECHECK, "--help"],
    "analyze packaging_cell": [CYCLECHECK, "analyze", CELL, "--json"],
}
WATCHED = ("numba", "llvmlite", "pyarrow")


def imported(cmd: list[str], env: dict[str, str]) -> list[str]:
    """Which of ``WATCHED`` the command imports (``python -X importtime`` on the script)."""
    err = subprocess.run([PYTHON, "-X", "importtime", *cmd], capture_output=True, text=True,
                         env={**os.environ, **env}).stderr
    found = {m.group(1).split(".")[0] for m in re.finditer(r"\|\s*(\S+)\s*$", err, re.M)}
    return [w for w in WATCHED if w in found]


def import_times(top: int = 12) -> tuple[list[tuple[int, int, str]], list[tuple[int, int, str]]]:
    """(self µs, cumulative µs, module) of the costliest imports: by cumulative, then by self."""
    err = subprocess.run([PYTHON, "-X", "importtime", "-c", "import cyclecheck.simulate.cli"],
                         capture_output=True, text=True, check=True).stderr
    rows = []
    for line in err.splitlines():
        m = re.match(r"import time:\s+(\d+) \|\s+(\d+) \|( *)(\S+)", line)
        if m:
            depth = len(m.group(3)) // 2
            rows.append((int(m.group(1)), int(m.group(2)), "  " * depth + m.group(4)))
    by_cumulative = sorted(rows, key=lambda r: -r[1])[:top]
    by_self = sorted(rows, key=lambda r: -r[0])[:top]
    return by_cumulative, by_self


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=10, help="rounds")
    parser.add_argument("--importtime", action="store_true", help="always show import times")
    args = parser.parse_args()

    with tempfile.TemporaryDirectory(prefix="bench_startup_") as tmp:
        env = numba_cache(Path(tmp))
        cold = run_measured(COMMANDS["analyze packaging_cell"], env=env)  # before any other
        for cmd in COMMANDS.values():  # untimed: warm the file cache, check that each one works
            run_measured(cmd, env=env)
        names = list(COMMANDS)
        runs: dict[str, list] = {name: [] for name in names}
        for r in range(args.repeat):
            shift = r % len(names)
            for name in names[shift:] + names[:shift]:
                runs[name].append(run_measured(COMMANDS[name], env=env))
        loads = {name: imported(COMMANDS[name][:1] + COMMANDS[name][1:], env)
                 for name in ("cyclecheck --help", "analyze packaging_cell")}

    base_wall = median_min([x.wall for x in runs[names[0]]])[0]
    base_cpu = median_min([x.cpu for x in runs[names[0]]])[0]
    print(f"start-up, whole processes, {args.repeat} rounds (rotating order), warm")
    print(f"{'command':<24} {'wall med':>9} {'wall min':>9} {'CPU med':>8} {'x wall':>7} "
          f"{'x CPU':>6}")
    for name in names:
        wall = median_min([x.wall for x in runs[name]])
        cpu = median_min([x.cpu for x in runs[name]])
        print(f"{name:<24} {wall[0]:>8.3f}s {wall[1]:>8.3f}s {cpu[0]:>7.3f}s "
              f"{wall[0] / base_wall:>6.1f}x {cpu[0] / base_cpu:>5.1f}x")
    print(f"{'analyze, cold (1st run)':<24} {cold.wall:>8.3f}s {'':>9} {cold.cpu:>7.3f}s")
    for name, mods in loads.items():
        print(f"{name} imports: {', '.join(mods) if mods else 'none'} of {', '.join(WATCHED)}")
    helped = median_min([x.wall for x in runs["cyclecheck --help"]])[0]
    met = helped < TARGET_SECONDS and not loads["cyclecheck --help"]
    print(f"cyclecheck --help: median {helped:.3f} s wall (target < {TARGET_SECONDS} s, no "
          f"numba: {'met' if met else 'missed'})")
    if args.importtime or not met:
        by_cumulative, by_self = import_times()
        print('\npython -X importtime -c "import cyclecheck.simulate.cli" (one run, µs)')
        print(f"{'self':>8} {'cumul.':>8}  module (by cumulative)")
        for s, c, mod in by_cumulative:
            print(f"{s:>8} {c:>8}  {mod}")
        print(f"{'self':>8} {'cumul.':>8}  module (by self)")
        for s, c, mod in by_self:
            print(f"{s:>8} {c:>8}  {mod.strip()}")


if __name__ == "__main__":
    main()
