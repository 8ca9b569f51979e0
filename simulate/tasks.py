"""Independent tasks on local processes or a Dask cluster, surviving lost workers and Ctrl-C.

A sweep is many small pure tasks: a function of its arguments alone (a point's model, a seed, a
range of replications), so a task run twice, anywhere, gives the same result bit for bit. That
makes failures simple to survive:

- **Dask** (``--scheduler``): when a worker dies, the scheduler runs its tasks again on another
  worker (Dask's own rule; a task that killed several workers in turn fails with
  ``KilledWorker``, reported here as an error).
- **Local processes** (``--workers N``): a worker that dies (killed, out of memory) breaks the
  whole :class:`~concurrent.futures.ProcessPoolExecutor`. The results that had arrived are
  kept, and the unfinished tasks are submitted again to a fresh pool, up to
  :data:`MAX_RESTARTS` times.
- **Ctrl-C**: local workers ignore it (they are started so); the main process cancels what has
  not started, terminates the workers and lets the ``KeyboardInterrupt`` go on, so the caller
  can save what had finished and write nothing else.

Results reach the caller one by one, in whatever order tasks finish; callers that need a fixed
order (every decision of the sweep does) keep results by key and decide only when a whole set
is in. The executors themselves are opened by
:func:`cyclecheck.simulate.experiment.open_executor`, the one place that makes them.
"""

from __future__ import annotations

import contextlib
from collections.abc import Callable, Hashable, Sequence
from concurrent.futures import FIRST_COMPLETED, Executor, Future, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass, field
from typing import Any

from .errors import ModelError

__all__ = ["MAX_RESTARTS", "Task", "TaskRunner"]

#: Fresh local pools started after worker processes died, before the run gives up.
MAX_RESTARTS = 3


@dataclass(frozen=True)
class Task:
    """One pure task: ``function(*args)``, known to the caller by ``key``."""

    key: Hashable
    function: Callable[..., Any]
    args: tuple[Any, ...] = field(default=())


class TaskRunner:
    """Runs sets of tasks on the executor the settings ask for; a context manager.

    Parameters
    ----------
    workers : int
        Local worker processes; 1 runs the tasks in this process, one after the other.
    scheduler : str or None
        Address of a Dask scheduler; when given, tasks run there.
    note : callable, optional
        Receives a sentence when something the user should know happened (a lost worker).
    """

    def __init__(self, workers: int = 1, scheduler: str | None = None,
                 note: Callable[[str], None] | None = None) -> None:
        self.workers = workers
        self.scheduler = scheduler
        self.note = note or (lambda text: None)
        self.restarts = 0
        self._executor: Executor | None = None
        self._close: Callable[[], Any] = lambda: None

    @property
    def local(self) -> bool:
        """Tasks run in this process."""
        return self.scheduler is None and self.workers <= 1

    @property
    def slots(self) -> int:
        """How many tasks can run at once: 1 here, the local workers, or the threads of the
        cluster's workers (tasks are sized by it; the results do not depend on it)."""
        if self.local:
            return 1
        if self.scheduler is None:
            return self.workers
        self._open()
        client = getattr(self._close, "__self__", None)  # close is the Client's own method
        try:
            return max(1, sum(client.nthreads().values()))  # type: ignore[union-attr]
        except Exception:  # an older or other client: guess generously
            return 2 * self.workers

    def __enter__(self) -> TaskRunner:
        return self

    def __exit__(self, kind: type[BaseException] | None, *rest: Any) -> None:
        if kind is None:
            self._shut()
        else:
            self._stop()

    def _open(self) -> Executor:
        if self._executor is None:
            from .experiment import open_executor

            executor, self._close = open_executor(self.workers, self.scheduler,
                                                  ignore_interrupts=True)
            assert executor is not None
            self._executor = executor
        return self._executor

    def _shut(self) -> None:
        """Close the executor after a normal end."""
        if self._executor is not None:
            executor, self._executor = self._executor, None
            if isinstance(executor, ProcessPoolExecutor):
                executor.shutdown(wait=True)
            else:
                executor.shutdown(wait=False)
                self._close()

    def _stop(self) -> None:
        """Stop at once: cancel what has not started, end the local workers."""
        executor, self._executor = self._executor, None
        if executor is None:
            return
        if isinstance(executor, ProcessPoolExecutor):
            # The pool's own processes (no public handle before Python 3.14): terminated, so
            # that a Ctrl-C does not wait for the tasks they are running.
            processes = list((getattr(executor, "_processes", None) or {}).values())
            executor.shutdown(wait=False, cancel_futures=True)
            for process in processes:
                with contextlib.suppress(Exception):
                    process.terminate()
            for process in processes:
                with contextlib.suppress(Exception):
                    process.join(5)
        else:
            with contextlib.suppress(Exception):
                executor.shutdown(wait=False)
            with contextlib.suppress(Exception):
                self._close()

    def run(self, tasks: Sequence[Task], done: Callable[[Hashable, Any], None]) -> None:
        """Run every task; call ``done(key, result)`` as each finishes (in this thread).

        Raises
        ------
        ModelError
            When local worker processes died more than :data:`MAX_RESTARTS` times, or a Dask
            task was lost with the workers that ran it.
        KeyboardInterrupt
            After stopping the workers (the results passed to ``done`` stay with the caller).
        """
        if not tasks:
            return
        if self.local:
            for task in tasks:
                done(task.key, task.function(*task.args))
            return
        pending = {task.key: task for task in tasks}
        while pending:
            executor = self._open()
            futures: dict[Future[Any], Hashable] = {
                executor.submit(task.function, *task.args): key for key, task in pending.items()}
            try:
                self._collect(futures, pending, done)
            except BrokenProcessPool:
                self._restart(futures, pending, done)
            except Exception as err:
                if type(err).__name__ == "KilledWorker":
                    raise ModelError("the Dask cluster lost the workers running a task several "
                                     f"times ({err}); the workers may run out of memory",
                                     item="--scheduler") from None
                raise

    @staticmethod
    def _collect(futures: dict[Future[Any], Hashable], pending: dict[Hashable, Task],
                 done: Callable[[Hashable, Any], None]) -> None:
        waiting = set(futures)
        while waiting:
            finished, waiting = wait(waiting, return_when=FIRST_COMPLETED)
            for future in finished:
                result = future.result()
                key = futures[future]
                del pending[key]
                done(key, result)

    def _restart(self, futures: dict[Future[Any], Hashable], pending: dict[Hashable, Task],
                 done: Callable[[Hashable, Any], None]) -> None:
        """A local worker died: keep what finished, and start a fresh pool for the rest."""
        for future, key in futures.items():
            if key in pending and future.done() and not future.cancelled() \
                    and future.exception() is None:
                del pending[key]
                done(key, future.result())
        self._stop()
        self.restarts += 1
        if self.restarts > MAX_RESTARTS:
            raise ModelError(f"worker processes died {self.restarts} times (killed, or out of "
                             "memory?); the run stops", item="--workers")
        self.note(f"a worker process died; its {len(pending)} unfinished tasks run again on "
                  "fresh processes (the results do not change)")
