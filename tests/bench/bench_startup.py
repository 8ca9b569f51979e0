"""Benchmark: start-up time of the command line, ``cyclecheck --help``, whole process.

Method: ``--repeat`` rounds (default 10); each round runs, in rotating order, ``python -c pass``
(the baseline: the interpreter alone), ``python -c "import cyclecheck.simulate.cli"`` (the CLI
module and what it imports at start-up) and the console script ``cyclecheck --help`` (adds the
entry-point wrapper and click's help text). Each is a child process timed from spawn to exit
(wall) with its own CPU time (rusage). The table gives medians and minima; the ratios are
medians against the baseline in the same run. Target (our own): ``cyclecheck --help`` under
0.5 s wall.

When the target is missed, or with ``--importtime``, the script also shows the largest entries
of ``python -X importtime -c "import cyclecheck.simulate.cli"`` (microseconds, one run).

Run with ``python tests/bench/bench_startup.py [--repeat R] [--importtime]``.
"""

from __future__ import annotations

import argparse
import re
import subprocess
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _graphs import CYCLECHECK, PYTHON, median_min, run_measured

TARGET_SECONDS = 0.5
COMMANDS = {
    "python -c pass": [PYTHON, "-c", "pass"],
    "import cli module": [PYTHON, "-c", "import cyclecheck.simulate.cli"],
    "cyclecheck --help": [CYCLECHECK, "--help"],
}


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

    for cmd in COMMANDS.values():  # untimed: warm the file cache, check that each one works
        run_measured(cmd)
    names = list(COMMANDS)
    runs: dict[str, list] = {name: [] for name in names}
    for r in range(args.repeat):
        shift = r % len(names)
        for name in names[shift:] + names[:shift]:
            runs[name].append(run_measured(COMMANDS[name]))

    base_wall = median_min([x.wall for x in runs[names[0]]])[0]
    base_cpu = median_min([x.cpu for x in runs[names[0]]])[0]
    print(f"start-up, whole processes, {args.repeat} rounds (rotating order)")
    print(f"{'command':<20} {'wall med':>9} {'wall min':>9} {'CPU med':>8} {'x wall':>7} "
          f"{'x CPU':>6}")
    for name in names:
        wall = median_min([x.wall for x in runs[name]])
        cpu = median_min([x.cpu for x in runs[name]])
        print(f"{name:<20} {wall[0]:>8.3f}s {wall[1]:>8.3f}s {cpu[0]:>7.3f}s "
              f"{wall[0] / base_wall:>6.1f}x {cpu[0] / base_cpu:>5.1f}x")
    helped = median_min([x.wall for x in runs["cyclecheck --help"]])[0]
    met = helped < TARGET_SECONDS
    print(f"cyclecheck --help: median {helped:.3f} s wall (target < {TARGET_SECONDS} s: "
          f"{'met' if met else 'missed'})")
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
