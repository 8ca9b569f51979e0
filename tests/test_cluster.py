"""Replications on other workers give the same numbers: local processes and a real Dask cluster.

The draws of replication ``r`` depend only on ``(seed, r)`` (numpy SeedSequence spawn keys), so
where a replication runs must not change a single bit of its result. The Dask test starts a real
``distributed.LocalCluster`` on 127.0.0.1 (Dask documentation: LocalCluster for tests; tasks
submitted with ``pure=False``).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from cyclecheck.simulate.experiment import open_executor, run_replications
from cyclecheck.simulate.modelfile import load_model

MODELS = Path(__file__).resolve().parents[1] / "models"
SCRIPT = Path(sys.executable).with_name("cyclecheck")


@pytest.fixture(scope="module")
def model():
    return load_model(MODELS / "closed_line_exponential.toml")


def test_process_pool_gives_the_same_replications(model) -> None:
    """Four replications in two local processes equal the same four run in this process."""
    here = run_replications(model, "recursion", 5, range(4), 500)
    executor, close = open_executor(workers=2)
    try:
        there = run_replications(model, "recursion", 5, range(4), 500, executor=executor,
                                 chunks=2)
    finally:
        close()
    np.testing.assert_array_equal(here.x, there.x)
    np.testing.assert_array_equal(here.replications, there.replications)


def _chunks_done(dask_scheduler) -> int:
    """Replication tasks that reached memory on the cluster (the scheduler counts every state
    a task of a prefix has entered, so this only grows)."""
    prefix = dask_scheduler.task_prefixes.get("run_chunk")
    return 0 if prefix is None else int(prefix.state_counts.get("memory", 0))


@pytest.mark.cluster
def test_dask_cluster_gives_the_same_estimate(model) -> None:
    """A real LocalCluster on 127.0.0.1: `analyze --scheduler` prints the same document numbers
    as a run in one process, and both engines' replications match bit for bit."""
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(host="127.0.0.1", n_workers=2, threads_per_worker=1,
                                  processes=True, dashboard_address=None) as cluster:
        executor, close = open_executor(scheduler=cluster.scheduler_address)
        try:
            for engine in ("recursion", "simpy"):
                remote = run_replications(model, engine, 11, range(4), 300, executor=executor,
                                          chunks=4)
                local = run_replications(model, engine, 11, range(4), 300)
                np.testing.assert_array_equal(remote.x, local.x)
        finally:
            close()
        # The command line sends its replications to the cluster (one task each), not to
        # this process: the scheduler has seen the tasks.
        from cyclecheck.simulate.experiment import estimate_with_executor
        from cyclecheck.simulate.settings import RunSettings

        with distributed.Client(cluster.scheduler_address) as client:
            before = client.run_on_scheduler(_chunks_done)
            settings = RunSettings.resolve(seed=2, replications=4, firings=300,
                                           scheduler=cluster.scheduler_address)
            estimate_with_executor(model, "recursion", settings, precision=None)
            assert client.run_on_scheduler(_chunks_done) >= before + 4
        args = ["analyze", str(MODELS / "closed_line_exponential.toml"), "--json",
                "--replications", "4", "--firings", "2000", "--seed", "3"]
        remote = subprocess.run([str(SCRIPT), *args, "--scheduler", cluster.scheduler_address],
                                capture_output=True, text=True, timeout=300, check=False)
        local = subprocess.run([str(SCRIPT), *args], capture_output=True, text=True,
                               timeout=300, check=False)
    assert remote.returncode == 0, remote.stderr
    assert local.returncode == 0, local.stderr
    a, b = json.loads(remote.stdout), json.loads(local.stdout)
    assert a["cycle_time"] == b["cycle_time"]
    assert a["cycle_time_ci"] == b["cycle_time_ci"]


def test_unreachable_scheduler_is_an_input_error() -> None:
    """A scheduler address where nothing listens: exit 2 with a message, no traceback."""
    pytest.importorskip("distributed")
    out = subprocess.run([str(SCRIPT), "analyze", str(MODELS / "closed_line_exponential.toml"),
                          "--scheduler", "tcp://127.0.0.1:9", "--replications", "2"],
                         capture_output=True, text=True, timeout=120, check=False)
    assert out.returncode == 2, out.stderr
    assert "scheduler" in out.stderr and "Traceback" not in out.stderr


def test_derivatives_do_not_depend_on_how_replications_are_split(monkeypatch) -> None:
    """The path sums behind the derivatives are fixed per replication (windows, look-ahead,
    segments): five replications run together, split 2 + 3 as two workers would get them, or
    one by one give the same bits, also when the record of a replication does not fit its
    budget and the sums are taken over windows (budget lowered here to force them)."""
    from cyclecheck.algebra import lineage
    from cyclecheck.simulate import experiment
    from cyclecheck.simulate.experiment import Batch

    ring = load_model(MODELS / "closed_line_exponential.toml")
    default = lineage.LINEAGE_MEMORY
    for budget in (default, 300 * lineage.LineageSweep.bytes_per_firing(5, 10)):
        monkeypatch.setattr(lineage, "LINEAGE_MEMORY", budget)
        monkeypatch.setattr(experiment, "LINEAGE_MEMORY", budget)
        whole = run_replications(ring, "recursion", 3, range(5), 2000)
        parts = Batch.concatenate([run_replications(ring, "recursion", 3, r, 2000)
                                   for r in (range(2), range(2, 5))])
        singles = Batch.concatenate([run_replications(ring, "recursion", 3, [r], 2000)
                                     for r in range(5)])
        windowed = budget < default
        assert (whole.paths.lookahead is not None) == windowed
        for other in (parts, singles):
            assert other.paths.lookahead == whole.paths.lookahead
            np.testing.assert_array_equal(other.paths.segments, whole.paths.segments)
            assert other.paths.weighted.tobytes() == whole.paths.weighted.tobytes()
            assert other.paths.mass.tobytes() == whole.paths.mass.tobytes()
