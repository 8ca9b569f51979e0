"""The settings of a run, resolved once and carried from the command line to the engines.

Every command that runs a model (``analyze``, ``simulate``, ``check``, ``trace``, ``sweep``)
takes the same options. :meth:`RunSettings.resolve` is the one place that checks them and fills
in their defaults, with the messages the command line prints; the Python front door calls it
too, so that ``analyze(path, precision=1.5)`` fails exactly as ``--precision 1.5`` does. What it
returns is recorded in every result document (``settings``), so a run can be repeated:

- ``seed=None`` becomes a fresh seed drawn from the operating system's entropy
  (:class:`numpy.random.SeedSequence`), and that number is what the document records;
- ``workers=None`` becomes the number of cores this process may use.

Defaults that depend on the model (firings per replication, the precision of a random model)
stay ``None`` here and are chosen by the estimation (:mod:`cyclecheck.simulate.experiment`),
which records what it used.
"""

from __future__ import annotations

import math
import os
from dataclasses import asdict, dataclass
from typing import Any

from .errors import ModelError

__all__ = ["DEFAULT_SEED", "RunSettings", "available_cores"]

#: The seed of the command line when ``--seed`` is not given: runs repeat by default.
DEFAULT_SEED = 1
#: Largest seed accepted: SeedSequence takes any integer >= 0, JSON readers are happier with
#: what fits 128 bits (the size of a fresh seed).
MAX_SEED = 2**128 - 1
#: Most replications per round accepted as an option (the run itself checks first that they fit
#: in memory, and says so).
MAX_REPLICATIONS = 10**9
#: Most firings per replication: firing numbers must stay exact in a float64 (2^53).
MAX_FIRINGS = 2**53


def available_cores() -> int:
    """Cores this process may run on (its CPU affinity where the system tells it)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def _fail(option: str, rule: str) -> ModelError:
    return ModelError(rule, item=option)


def _integer(value: Any, option: str, least: int, most: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int):
        if isinstance(value, float) and value.is_integer():
            value = int(value)
        else:
            raise _fail(option, f"must be an integer >= {least}, got {value!r}")
    if not least <= value <= most:
        raise _fail(option, f"must be an integer from {least} to {most:,}, got {value}")
    return int(value)


@dataclass(frozen=True)
class RunSettings:
    """The options of one run, checked, with the defaults that do not depend on the model.

    Attributes
    ----------
    seed : int
        Seed of every random draw (replication ``r`` of element ``e`` draws from
        ``SeedSequence(seed, spawn_key=(r, kind, e, block))``).
    precision : float or None
        Target relative half-width of the 95 % interval, in (0, 1); None: the command's
        default (0.01 for a random model; fixed models need none).
    replications : int or None
        Replications per round of the sequential procedure (``>= 2``); None: the command's
        default.
    firings : int or None
        Firings of every transition per replication (``>= 10``); None: chosen from the model.
    workers : int
        Local worker processes (``>= 1``).
    scheduler : str or None
        Address of a Dask scheduler; when given, replications run there instead.
    progress : bool
        Show the progress line on stderr (only ever when stderr is a terminal).
    """

    seed: int = DEFAULT_SEED
    precision: float | None = None
    replications: int | None = None
    firings: int | None = None
    workers: int = 1
    scheduler: str | None = None
    progress: bool = False

    @classmethod
    def resolve(cls, *, seed: int | None = DEFAULT_SEED, precision: float | None = None,
                replications: int | None = None, firings: int | None = None,
                workers: int | None = None, scheduler: str | None = None,
                progress: bool = False) -> RunSettings:
        """Check the options and fill in the defaults; raise :class:`ModelError` naming the
        option (``--precision``) and the rule, as the command line reports it.

        Examples
        --------
        >>> RunSettings.resolve(seed=7, precision=0.02, workers=1).precision
        0.02
        >>> RunSettings.resolve(precision=1.5)
        Traceback (most recent call last):
        ...
        cyclecheck.simulate.errors.ModelError: --precision: must lie strictly between 0 and 1 \
(a relative half-width such as 0.01), got 1.5
        >>> RunSettings.resolve(seed=None).seed >= 0      # a fresh seed, recorded
        True
        """
        if seed is None:
            import numpy as np

            seed = int(np.random.SeedSequence().entropy)  # type: ignore[arg-type]
        seed = _integer(seed, "--seed", 0, MAX_SEED)
        if precision is not None:
            if isinstance(precision, bool) or not isinstance(precision, int | float):
                raise _fail("--precision", f"must be a number, got {precision!r}")
            precision = float(precision)
            if not (0.0 < precision < 1.0 and math.isfinite(precision)):
                raise _fail("--precision", "must lie strictly between 0 and 1 (a relative "
                            f"half-width such as 0.01), got {precision:g}")
        if replications is not None:
            replications = _integer(replications, "--replications", 2, MAX_REPLICATIONS)
        if firings is not None:
            firings = _integer(firings, "--firings", 10, MAX_FIRINGS)
        workers = available_cores() if workers is None else _integer(workers, "--workers", 1,
                                                                      4096)
        if scheduler is not None:
            if not isinstance(scheduler, str) or not scheduler.strip():
                raise _fail("--scheduler", "must be the address of a Dask scheduler, such as "
                            f"tcp://127.0.0.1:8786, got {scheduler!r}")
            scheduler = scheduler.strip()
        return cls(seed, precision, replications, firings, workers, scheduler, bool(progress))

    def replace(self, **changes: Any) -> RunSettings:
        """A copy with some options changed, checked again."""
        values = asdict(self)
        values.update(changes)
        return RunSettings.resolve(**values)

    def to_dict(self) -> dict[str, Any]:
        """The options for the ``settings`` section of a result document."""
        return {"seed": self.seed, "precision": self.precision,
                "replications": self.replications, "firings_per_replication": self.firings,
                "workers": self.workers, "scheduler": self.scheduler}
