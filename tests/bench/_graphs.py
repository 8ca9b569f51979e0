"""Shared pieces of the benchmark scripts: random event graphs and whole-process measurement.

Graphs
------
:func:`random_live_graph` builds a random *live, strongly connected* timed event graph:

* a ring through all ``n`` transitions in a random order (strong connectivity); each ring place
  holds one token with probability ``ring_token_share``, and at least one ring place does;
* ``m - n`` chords between random transitions (self-loops allowed), each with 1 to 3 tokens;
* durations uniform on [0.5, 5), holds uniform on [0, 2), rounded to 1e-3 so that the CSV
  tables hold short exact decimals;
* the places in a random order, so that no solver profits from the construction order.

Every chord carries a token, so the token-free places are ring places; at least one ring place
has a token, so they form paths, not a circuit: every circuit holds a token and the graph is
live (Baccelli, Cohen, Olsder & Quadrat, *Synchronization and Linearity*, 1992, §2.5: a timed
event graph is live iff every circuit holds a token). With the default share 1/2 the token-free
paths are short (about log2 n places at most), as in a line with many buffers.

Measurement
-----------
:func:`run_measured` runs a command as a child process and returns its wall time, its CPU time
(user + system) and its peak resident memory, read from ``os.wait4`` (the child's own rusage,
not the maximum over all children as ``RUSAGE_CHILDREN`` would give). The whole process is
timed: interpreter start, imports, reading the files, the work and the output.

Compiled kernels
----------------
The kernels of ``cyclecheck.algebra.kernels`` are compiled by numba on their first use and kept
in numba's on-disk cache. :func:`numba_cache` makes a fresh cache folder (``NUMBA_CACHE_DIR``)
for a benchmark: its first run is the *cold* one (it compiles, as the first run after an
install does), the following runs are *warm* (they load the cache).
"""

from __future__ import annotations

import os
import statistics
import subprocess
import sys
import time
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

__all__ = [
    "PYTHON",
    "Measured",
    "median_min",
    "numba_cache",
    "random_live_graph",
    "run_measured",
    "write_random_model",
]

#: The interpreter of the project's environment (the one running the benchmark).
PYTHON = sys.executable
#: The console script installed beside it.
CYCLECHECK = str(Path(sys.executable).with_name("cyclecheck"))


def random_live_graph(n: int, m: int, seed: int, *,
                      ring_token_share: float = 0.5) -> dict[str, np.ndarray]:
    """A random live strongly connected event graph with ``n`` transitions and ``m >= n`` places.

    Returns the arrays ``duration`` (n,), ``source``, ``target``, ``tokens``, ``hold`` (m,),
    in the argument order of ``write_csv_model`` and ``EventGraph``.
    """
    if m < n or n < 1:
        raise ValueError(f"need 1 <= n <= m, got n={n}, m={m}")
    rng = np.random.default_rng(np.random.SeedSequence(seed))
    order = rng.permutation(n)
    ring_src, ring_dst = order, np.roll(order, -1)
    ring_tok = (rng.random(n) < ring_token_share).astype(np.int64)
    ring_tok[rng.integers(n)] = 1  # at least one token on the ring: no token-free circuit
    c = m - n
    source = np.concatenate([ring_src, rng.integers(0, n, c)])
    target = np.concatenate([ring_dst, rng.integers(0, n, c)])
    tokens = np.concatenate([ring_tok, rng.integers(1, 4, c)])
    shuffle = rng.permutation(m)
    return {
        "duration": np.round(rng.uniform(0.5, 5.0, n), 3),
        "source": source[shuffle],
        "target": target[shuffle],
        "tokens": tokens[shuffle],
        "hold": np.round(rng.uniform(0.0, 2.0, m), 3),
    }


def write_random_model(directory: Path, n: int, m: int, seed: int) -> Path:
    """Write :func:`random_live_graph` as a CSV model (TOML + two tables); the TOML path."""
    from cyclecheck.simulate.modelfile import write_csv_model

    g = random_live_graph(n, m, seed)
    return write_csv_model(directory, f"random_{n}_{m}", g["duration"], g["source"],
                           g["target"], g["tokens"], g["hold"])


@dataclass(frozen=True)
class Measured:
    """One run of a child process."""

    wall: float  # seconds
    cpu: float  # user + system seconds of the child
    sys: float  # system seconds of the child (page faults of fresh memory show up here)
    maxrss: int  # bytes, peak resident set of the child
    returncode: int


def run_measured(cmd: Sequence[str], *, stdout: int | None = subprocess.DEVNULL,
                 cwd: Path | None = None, env: dict[str, str] | None = None,
                 accept: Sequence[int] = (0,)) -> Measured:
    """Run ``cmd`` to completion; wall clock from spawn to exit, the child's own rusage.
    ``env``: variables added to this process's environment. An exit code outside ``accept``
    raises."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(list(cmd), stdout=stdout, stderr=subprocess.PIPE, cwd=cwd,
                            env={**os.environ, **env} if env else None)
    assert proc.stderr is not None
    err = proc.stderr.read()  # drain stderr so that a chatty child never blocks
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)  # tell Popen the child is reaped
    proc.stderr.close()
    if proc.returncode not in accept:
        raise RuntimeError(f"{' '.join(cmd)} exited {proc.returncode}: "
                           f"{err.decode(errors='replace')[-2000:]}")
    return Measured(wall, usage.ru_utime + usage.ru_stime, usage.ru_stime,
                    usage.ru_maxrss * 1024, proc.returncode)


def numba_cache(directory: Path) -> dict[str, str]:
    """Environment of a fresh, empty numba cache in ``directory`` (the first run compiles)."""
    cache = directory / "numba-cache"
    cache.mkdir(parents=True, exist_ok=True)
    return {"NUMBA_CACHE_DIR": str(cache)}


def median_min(values: Sequence[float]) -> tuple[float, float]:
    """(median, minimum) of repeated measurements."""
    return statistics.median(values), min(values)
