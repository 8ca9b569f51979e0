"""A progress line on stderr for runs longer than a second.

Shown only when stderr is a terminal and the user did not ask for ``--quiet`` or ``--json``;
it rewrites one line in place and clears it when the run ends, so nothing of it stays in logs.
"""

from __future__ import annotations

import sys
import time
from typing import TextIO

import numpy as np

__all__ = ["ProgressLine"]

#: Seconds of work before the line appears: short runs stay silent.
DELAY = 1.0


class ProgressLine:
    """Reports replications done and the running interval of the estimate.

    Parameters
    ----------
    target : float, optional
        The requested relative half-width, shown beside the current one.
    stream : file, optional
        Where to write; default ``sys.stderr``.
    """

    def __init__(self, target: float | None = None, stream: TextIO | None = None) -> None:
        self.stream = stream if stream is not None else sys.stderr
        self.target = target
        self.started = time.monotonic()
        self.shown = False

    @classmethod
    def when_useful(cls, enabled: bool, target: float | None = None) -> ProgressLine | None:
        """A progress line if enabled and stderr is a terminal, else None."""
        return cls(target) if enabled and sys.stderr.isatty() else None

    def __call__(self, engine: str, replications: int, values: np.ndarray) -> None:
        """Update the line after a round of replications (``values``: all estimates so far)."""
        if time.monotonic() - self.started < DELAY or values.size == 0:
            return
        mean = float(np.mean(values))
        text = f"{engine}: {replications} replications, cycle time {mean:.6g}"
        if values.size >= 2 and mean:
            from .estimate import student_quantile

            half = student_quantile(0.975, values.size - 1) * np.std(values, ddof=1) / np.sqrt(
                values.size)
            text += f" ±{100 * half / abs(mean):.2g} %"
            if self.target:
                text += f" (target {100 * self.target:.2g} %)"
        self.show(text)

    def show(self, text: str) -> None:
        """Replace the line by ``text`` (after the first second of the run)."""
        if time.monotonic() - self.started < DELAY:
            return
        self.stream.write("\r\033[K" + text)
        self.stream.flush()
        self.shown = True

    def stage(self, text: str, *, now: bool = False) -> None:
        """Show what a long job is doing (``now``: even within its first second, for a step
        known to be long, such as reading a large file)."""
        if not now and time.monotonic() - self.started < DELAY:
            return
        self.stream.write("\r\033[K" + text)
        self.stream.flush()
        self.shown = True

    def close(self) -> None:
        """Clear the line."""
        if self.shown:
            self.stream.write("\r\033[K")
            self.stream.flush()
            self.shown = False
