"""The Python API behind each command: everything the CLI can do, a script can do.

>>> from cyclecheck.simulate.api import analyze_model          # doctest: +SKIP
>>> from cyclecheck.simulate.modelfile import load_model        # doctest: +SKIP
>>> doc = analyze_model(load_model("models/packaging_cell.toml"))   # doctest: +SKIP
>>> doc["cycle_time"]                                            # doctest: +SKIP
17.375
"""

from __future__ import annotations

import contextlib
import json
import os
import signal
import tempfile
import threading
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from ..algebra.analysis import analyze_graph
from ..algebra.critical import cyclicity
from ..algebra.spectral import howard
from .errors import ModelError
from .experiment import DEFAULT_PRECISION, estimate_with_executor
from .modelfile import Model
from .progress import ProgressLine
from .result import (
    DOCUMENT_KIND,
    analysis_section,
    estimate_section,
    model_section,
    provenance,
    random_analysis_section,
    settings_section,
)

__all__ = [
    "analyze_model",
    "check_model",
    "is_our_output",
    "judge_trace",
    "load_result",
    "save_result",
    "simulate_model",
    "write_outputs",
]



#: First line of the event logs ``simulate --trace`` writes.
TRACE_HEADER = "transition,firing,start,time\n"


@contextlib.contextmanager
def _progress_line(enabled: bool, target: float | None) -> Iterator[ProgressLine | None]:
    """A progress line for the duration of a run (None when not wanted), cleared at the end."""
    line = ProgressLine.when_useful(enabled, target)
    try:
        yield line
    finally:
        if line is not None:
            line.close()


def _base(model: Model, command: str) -> dict[str, Any]:
    doc = provenance()
    doc["command"] = command
    doc["model"] = model_section(model)
    return doc


def analyze_model(model: Model, *, seed: int = 1, precision: float | None = None,
                  replications: int | None = None, firings: int | None = None,
                  workers: int = 1, scheduler: str | None = None,
                  progress: bool = False) -> dict[str, Any]:
    """The max-plus analysis: exact for fixed durations, a Lyapunov estimate for random ones.

    For random durations the recursion is run on replications until the relative half-width of
    the 95 % interval reaches ``precision`` (default 1 %); the bounds and the criticality of
    every element come with it, and the exact analysis of the mean durations is kept under
    ``mean_value_analysis``.
    """
    doc = _base(model, "analyze")
    exact = analyze_graph(model.graph())
    if not model.is_random:
        doc.update(analysis_section(model, exact))
        doc["settings"] = settings_section(seed, None, None, None)
        return doc
    precision = precision if precision is not None else DEFAULT_PRECISION
    with _progress_line(progress, precision) as line:
        est = estimate_with_executor(model, "recursion", seed=seed, precision=precision,
                                     replications=replications, firings=firings,
                                     workers=workers, scheduler=scheduler,
                                     cyclicity_of_mean=exact.cyclicity, progress=line)
    doc.update(random_analysis_section(model, exact, est))
    doc["settings"] = settings_section(seed, precision, est.replications, est.firings)
    return doc


def simulate_model(model: Model, *, seed: int = 1, precision: float | None = None,
                   replications: int | None = None, firings: int | None = None,
                   workers: int = 1, scheduler: str | None = None, progress: bool = False,
                   trace_path: Path | None = None) -> dict[str, Any]:
    """Estimate the cycle time from the SimPy engine; optionally write replication 0's log."""
    from .engine import simulate_event_graph

    doc = _base(model, "simulate")
    if precision is None and model.is_random:
        precision = DEFAULT_PRECISION
    graph = model.graph()
    mean_value = howard(graph)
    period = cyclicity(graph, mean_value)
    with _progress_line(progress, precision) as line:
        est = estimate_with_executor(model, "simpy", seed=seed, precision=precision,
                                     replications=replications, firings=firings,
                                     workers=workers, scheduler=scheduler,
                                     cyclicity_of_mean=period,
                                     progress=line)
    doc.update(estimate_section(model, est, mean_value.max_cycle_time))
    if not model.is_random:
        # Fixed durations: the simulation is exact up to the transient; the structure is known.
        doc["bounds"] = None
        doc["cyclicity"] = period
        doc["critical_circuits"] = [[model.transition_ids[t] for t in c.transitions]
                                    for c in mean_value.circuits]
    doc["settings"] = settings_section(seed, precision, est.replications, est.firings)
    if trace_path is not None:
        run = simulate_event_graph(model.graph(), model.sampler(seed, 0), n_firings=est.firings)
        _atomic_write(trace_path, run.event_log().to_csv(index=False))
        doc["trace"] = str(trace_path)
    return doc


def check_model(model: Model, *, seed: int = 1, precision: float | None = None,
                replications: int | None = None, firings: int | None = None,
                workers: int = 1, scheduler: str | None = None,
                progress: bool = False) -> dict[str, Any]:
    """Both engines side by side, the sample-path comparison and the verdict."""
    from .compare import compare

    doc = _base(model, "check")
    with _progress_line(progress, precision) as line:
        doc.update(compare(model, seed=seed, precision=precision, replications=replications,
                           firings=firings, workers=workers, scheduler=scheduler,
                           progress=line))
    return doc


def judge_trace(model: Model, log: Any, *, tolerance: float = 1e-6, progress: bool = False,
                **options: Any) -> dict[str, Any]:
    """Judge an event log (a CSV or Parquet path, or a pandas table) of any simulator against
    the model; ``options`` as :func:`cyclecheck.simulate.judge.judge_log` (``alpha``,
    ``partial``, ``columns``, ``rename``, ``time_scale``, ``seed``, ``precision``, ...)."""
    from .judge import judge_log

    doc = _base(model, "trace")
    with _progress_line(progress, None) as line:
        doc.update(judge_log(model, log, tolerance=tolerance, progress=line, **options))
    return doc


def check_output_path(path: Path) -> None:
    """Fail before any work when an output cannot be written there (missing folder, a folder)."""
    path = Path(path)
    if path.is_dir():
        raise ModelError("is a folder; give a file name for the output", file=path)
    if not (path.parent if str(path.parent) else Path(".")).is_dir():
        raise ModelError(f"cannot be written: the folder {path.parent} does not exist", file=path)


def _atomic_write(path: Path, text: str) -> None:
    """Write through a temporary file in the same folder and rename: never a half-written file.

    The file gets the permissions of a plain ``open`` (0666 less the umask), not the private
    0600 of a temporary file; errors name the output, not the temporary file.
    """
    path = Path(path)
    check_output_path(path)
    umask = os.umask(0)
    os.umask(umask)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    except OSError as err:
        raise ModelError(f"cannot be written: {err.strerror}", file=path) from None
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, path)
    except BaseException as err:
        Path(tmp).unlink(missing_ok=True)
        if isinstance(err, OSError):
            raise ModelError(f"cannot be written: {err.strerror or err}", file=path) from None
        raise


def save_result(doc: dict[str, Any], path: Path, *, force: bool = False) -> None:
    """Keep a result document as JSON (atomically)."""
    from .result import dumps

    if path.exists() and not force and not is_our_output(path):
        raise ModelError("exists and is not an earlier cyclecheck result; use --force",
                         file=path)
    _atomic_write(path, dumps(doc) + "\n")


@contextlib.contextmanager
def _interrupt_deferred() -> Iterator[None]:
    """Hold Ctrl-C back while files are renamed into place: the outputs of a run appear
    together or not at all. A Ctrl-C that came meanwhile is dropped: by then the run is
    complete and written."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    caught: list[object] = []
    previous = signal.signal(signal.SIGINT, lambda *args: caught.append(args))
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)


def write_outputs(doc: dict[str, Any], *, report_path: Path | None = None,
                  save_path: Path | None = None, force: bool = False) -> None:
    """Write the result document and the review page, both or neither.

    The page is rendered and the JSON text made first (the slow, interruptible part, which
    writes nothing); then both files are written atomically with Ctrl-C held back.
    """
    from ..reports.page import render_page
    from .result import dumps

    for path in (report_path, save_path):
        if path is not None and path.exists() and not force and not is_our_output(path):
            raise ModelError("exists and is not an earlier cyclecheck output; use --force",
                             file=path)
    page = render_page(doc) if report_path is not None else None
    text = dumps(doc) + "\n" if save_path is not None else None
    if report_path is not None and save_path is not None and (
            Path(report_path).resolve() == Path(save_path).resolve()):
        raise ModelError("is given for both --report and --save; give two files",
                         file=report_path)
    with _interrupt_deferred():
        if save_path is not None and text is not None:
            _atomic_write(save_path, text)
        if report_path is not None and page is not None:
            _atomic_write(report_path, page)


def load_result(path: Path) -> dict[str, Any]:
    """Read a saved result document, checking that it is one."""
    try:
        text = Path(path).read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise ModelError("is not a result document (not UTF-8 text)", file=path) from None
    except OSError as err:
        raise ModelError(f"cannot be read: {err.strerror or err}", file=path) from None
    try:
        doc = json.loads(text)
    except json.JSONDecodeError as err:
        raise ModelError(f"is not valid JSON: {err.msg}", file=path,
                         item=f"line {err.lineno}, column {err.colno}") from None
    if not isinstance(doc, dict) or doc.get("document") != DOCUMENT_KIND:
        raise ModelError(f'is not a cyclecheck result document (no "document": '
                         f'"{DOCUMENT_KIND}")', file=path)
    if doc.get("command") != "check":
        raise ModelError("holds the result of "
                         f"`cyclecheck {doc.get('command')}`; pages are made from `check` "
                         "results (cyclecheck check MODEL --save RESULT.json)", file=path)
    return doc


def is_our_output(path: Path) -> bool:
    """True when ``path`` is a result document, a review page or an event log written by
    cyclecheck (a log is known by the exact header ``simulate --trace`` writes)."""
    from ..reports.page import is_report

    try:
        if is_report(path):
            return True
        with open(path, "rb") as fh:
            head = fh.read(4096)
    except OSError:
        return False
    return (f'"document": "{DOCUMENT_KIND}"'.encode() in head
            or head.startswith(TRACE_HEADER.encode()))
