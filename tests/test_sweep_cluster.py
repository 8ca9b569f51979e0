"""A sweep on a real Dask cluster gives the numbers of a local run, even when a worker dies.

The tasks of a sweep are pure (a point's model, a seed, a range of replications), so where and
how often they run cannot change a bit of the result. A real ``distributed.LocalCluster`` with
worker processes on 127.0.0.1 (Dask documentation: LocalCluster for tests; a nanny restarts a
worker process that dies, and the scheduler runs its tasks again elsewhere).
"""

from __future__ import annotations

import os
import signal
import threading
import time
from pathlib import Path

import pytest
from cyclecheck.simulate import sweep

MODELS = Path(__file__).resolve().parents[1] / "models"
LINE = MODELS / "closed_line_exponential.toml"
OPTIONS = {"vary": ["s5.mean=0.5:2:4"], "seed": 3, "replications": 8, "precision": 0.004,
           "quiet": True}

pytestmark = pytest.mark.cluster


@pytest.fixture(scope="module")
def cluster():
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(host="127.0.0.1", n_workers=2, threads_per_worker=1,
                                  processes=True, dashboard_address=None) as running:
        yield running


@pytest.fixture(scope="module")
def local() -> dict:
    return sweep(LINE, workers=1, **OPTIONS)


def test_the_cluster_gives_the_local_numbers(cluster, local: dict) -> None:
    """The same sweep on the cluster (one task per replication) and in one local process:
    identical points, bit for bit."""
    remote = sweep(LINE, scheduler=cluster.scheduler_address, **OPTIONS)
    assert remote["points"] == local["points"]
    assert remote["settings"]["scheduler"] == cluster.scheduler_address


@pytest.mark.slow
def test_a_killed_dask_worker_changes_nothing(cluster, local: dict) -> None:
    """A worker process killed (SIGKILL) while the sweep runs: the scheduler runs its tasks
    again, the nanny starts a new worker, and the points are those of the local run."""
    import distributed

    with distributed.Client(cluster.scheduler_address) as client:
        before = client.run(os.getpid)
        result: dict = {}
        thread = threading.Thread(target=lambda: result.update(
            doc=sweep(LINE, scheduler=cluster.scheduler_address, **OPTIONS)))
        thread.start()
        # wait until the cluster is busy with the sweep's replications
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline and not client.processing():
            time.sleep(0.02)
        while time.monotonic() < deadline and not any(client.processing().values()):
            time.sleep(0.02)
        time.sleep(0.3)
        assert thread.is_alive(), "the sweep ended before a worker could be killed"
        victim = next(iter(before.values()))
        os.kill(victim, signal.SIGKILL)
        thread.join(300)
        assert not thread.is_alive()
        client.wait_for_workers(2, timeout=60)
        after = client.run(os.getpid)
    assert victim not in after.values()  # the worker really died and was replaced
    assert result["doc"]["points"] == local["points"]
