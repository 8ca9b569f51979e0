"""A probe for a SimPy model of one's own: record its firings into an event log, judge it.

An engineer who wrote a SimPy model by hand (a ``simpy.Resource`` per machine, a process per
part) adds one line per activity, keyed by the id of the transition that stands for it in the
model file::

    probe = Probe(env)
    ...
    with probe.firing("mill"):              # around the service of the mill
        yield env.timeout(service_time)

(or ``k = probe.start("mill")`` ... ``probe.finish("mill", k)``). After the run,
``probe.log()`` is the event log as a pandas table (columns ``transition,firing,start,time``
and ``replication`` once there are several), ``probe.write(path)`` writes it (CSV, or Parquet
for a ``.parquet`` name) for ``cyclecheck trace``, and ``probe.judge(model)`` judges it in the
same process and returns the same document as ``cyclecheck trace --json``.

The written log is an output of kind ``log`` (:mod:`.files`): written atomically, and never
over a file of another kind (a model file, a page) unless ``force=True``. A CSV log starts
with the header ``transition,firing,start,time`` (``,replication`` after it when there are
several); a Parquet log carries :data:`~.files.PARQUET_MARK` in its footer metadata, by
which a later write recognises it as the probe's own.

Firing numbers. In the event graph, firing ``k`` of ``t`` consumes token ``k − m_p`` of each
input place: tokens are consumed in the order of the firing that made them, not in order of
arrival, so a firing number is the number of the job (part, customer, vehicle) it serves. By
default the ``k``-th firing of a transition to *start* is firing ``k``: right wherever jobs
start an activity in their own order (a single server with a FIFO queue, a source, transport
that does not overtake). Where a later job may start first, pass the job's number:
``probe.firing("inspect", firing=part)``. That is the case of ``n`` servers taking jobs in
turn (job ``k`` waits for job ``k − n``: the next job of a free server starts while the
previous job waits for a busy one). A model that lets jobs overtake where the model file says
they cannot (one pooled resource for servers that take jobs in turn, a forgotten buffer
limit) then shows firings that start before their tokens were available, which is what the
judge reports.
"""

from __future__ import annotations

import io
import os
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Any

from .errors import ArgumentError

if TYPE_CHECKING:
    import pandas as pd
    import simpy

    from .modelfile import Model

__all__ = ["Probe"]


class Probe:
    """Records the start and the completion of firings of a SimPy model, by transition id.

    Parameters
    ----------
    env : simpy.Environment
        The environment of the model; its clock gives the times.

    Examples
    --------
    >>> import simpy
    >>> env = simpy.Environment()
    >>> probe = Probe(env)
    >>> def machine(env):
    ...     for _ in range(2):
    ...         with probe.firing("press"):
    ...             yield env.timeout(3.0)
    >>> _ = env.process(machine(env))
    >>> env.run()
    >>> probe.log().to_dict("list")
    {'transition': ['press', 'press'], 'firing': [1, 2], 'start': [0.0, 3.0], 'time': [3.0, 6.0]}
    """

    def __init__(self, env: simpy.Environment) -> None:
        self.env = env
        self.replication = 0
        self._started: dict[str, int] = {}
        self._open: dict[tuple[str, int], float] = {}
        self._rows: list[tuple[int, str, int, float, float]] = []

    def restart(self, env: simpy.Environment) -> None:
        """Start recording the next replication, in a new environment: firing numbers count
        from 1 again, and the log gets a ``replication`` column."""
        self.env = env
        self.replication += 1
        self._started.clear()
        self._open.clear()

    def start(self, transition: str, firing: int | None = None) -> int:
        """Firing of ``transition`` starts now; returns its number (see the module doc)."""
        if firing is None:
            firing = self._started.get(transition, 0) + 1
        elif isinstance(firing, bool) or not isinstance(firing, int) or firing < 1:
            raise ArgumentError(f'firing of "{transition}" must be an integer >= 1 (firings '
                                f"count from 1), got {firing!r}")
        key = (transition, firing)
        if key in self._open:  # a number used twice after completion is caught by the judge
            raise ArgumentError(f'firing {firing} of "{transition}" has started already '
                                "(and not finished): each firing number starts once")
        self._started[transition] = max(self._started.get(transition, 0), firing)
        self._open[key] = float(self.env.now)
        return firing

    def finish(self, transition: str, firing: int) -> None:
        """Firing ``firing`` of ``transition`` completes now."""
        start = self._open.pop((transition, firing), None)
        if start is None:
            raise ArgumentError(f'firing {firing} of "{transition}" was not started (call '
                                "start first) or has finished already")
        self._rows.append((self.replication, transition, firing, start, float(self.env.now)))

    @contextmanager
    def firing(self, transition: str, firing: int | None = None) -> Iterator[int]:
        """``with probe.firing("mill"): yield env.timeout(d)`` records one firing around the
        service. A firing interrupted by an exception is not recorded as complete."""
        k = self.start(transition, firing)
        yield k
        self.finish(transition, k)

    def log(self) -> pd.DataFrame:
        """The completed firings as an event log, sorted by completion time."""
        import pandas as pd

        frame = pd.DataFrame(self._rows, columns=["replication", "transition", "firing",
                                                  "start", "time"])
        frame = frame.sort_values(["replication", "time"], kind="stable", ignore_index=True)
        columns = ["transition", "firing", "start", "time"]  # files.LOG_HEADER's order
        return frame[columns + (["replication"] if self.replication else [])]

    def write(self, path: str | os.PathLike[str], *, force: bool = False) -> Path:
        """Write the log to ``path`` (Parquet for a ``.parquet`` name, else CSV), atomically.

        Raises
        ------
        ModelError
            When ``path`` exists and is not an event log cyclecheck wrote (a model file, a
            page, another program's log), unless ``force``; or cannot be written.
        """
        from .files import PARQUET_MARK, Output, write_outputs

        path = Path(path)
        frame = self.log()
        if path.suffix.lower() in (".parquet", ".pq"):
            import pyarrow as pa
            import pyarrow.parquet as pq

            table = pa.Table.from_pandas(frame, preserve_index=False)
            key, value = PARQUET_MARK
            table = table.replace_schema_metadata({**(table.schema.metadata or {}),
                                                   key: value})
            buffer = io.BytesIO()
            pq.write_table(table, buffer)
            content: str | bytes = buffer.getvalue()
        else:
            content = frame.to_csv(index=False)
        write_outputs([Output(path, "log", content)], force=force)
        return path

    def judge(self, model: Model | str | os.PathLike[str], **options: Any) -> dict[str, Any]:
        """Judge the log against ``model`` (a loaded model or a model file): the document of
        ``cyclecheck trace --json``; ``options`` as there (``alpha``, ``partial``, ``seed``,
        ``model_estimate``, ...)."""
        from .api import trace

        return trace(model, self.log(), **options)
