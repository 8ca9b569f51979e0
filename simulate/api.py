"""The front door: everything the command line can do, a Python script can do.

Each command of the command line is one function here, with the command's options as keyword
arguments of the same names, the same checks and messages, and the same result: the document
that ``--json`` prints. A model is a path (``str`` or path-like) or a model loaded with
:func:`load_model`. Outputs (``report``, ``save``, ``trace``) get the command line's safety:
checked before any work, written atomically, never replacing a file of another kind without
``force``.

>>> from cyclecheck.simulate import analyze
>>> doc = analyze("models/packaging_cell.toml")
>>> doc["cycle_time"], doc["critical_circuits"][0]
(17.375, ['fill', 'cap', 'label', 'pack'])

Errors a user can cause raise :class:`~cyclecheck.simulate.errors.ModelError` (or another
:class:`~cyclecheck.algebra.exceptions.CycleCheckError`): ``str(error)`` names the file, the
item and the rule.
"""

from __future__ import annotations

import contextlib
import os
import sys
from collections.abc import Iterator, Mapping, Sequence
from pathlib import Path
from typing import Any

from .errors import ArgumentError, ModelError
from .files import Output, check_outputs, load_document, write_outputs
from .modelfile import Model, load_model
from .progress import ProgressLine
from .settings import DEFAULT_SEED, RunSettings

__all__ = [
    "analyze",
    "check",
    "load_document",
    "load_model",
    "points_frame",
    "report",
    "save_document",
    "save_page",
    "simulate",
    "sweep",
    "trace",
]

PathLike = str | os.PathLike[str]
ModelLike = Model | PathLike


def _model(model: ModelLike) -> Model:
    """A loaded model from a model or a path."""
    if isinstance(model, Model):
        return model
    if isinstance(model, str | os.PathLike):
        return load_model(model)
    raise ArgumentError(f"model must be a path to a model file or a Model from load_model, "
                        f"got {type(model).__name__}")


def _optional_path(value: PathLike | None, option: str) -> Path | None:
    if value is None:
        return None
    if not isinstance(value, str | os.PathLike) or not os.fspath(value):
        raise ModelError(f"must be a file name, got {value!r}", item=option)
    return Path(value)


@contextlib.contextmanager
def _progress_line(settings: RunSettings, target: float | None
                   ) -> Iterator[ProgressLine | None]:
    """A progress line for the duration of a run (None when not wanted), cleared at the end."""
    line = ProgressLine.when_useful(settings.progress, target)
    try:
        yield line
    finally:
        if line is not None:
            line.close()


def _outputs(report: PathLike | None = None, save: PathLike | None = None,
             trace_log: PathLike | None = None, *, force: bool,
             table: PathLike | None = None) -> list[Output]:
    """The outputs a command was asked for, checked before any work."""
    wanted = [(report, "page", "--report"), (save, "result", "--save"),
              (trace_log, "log", "--trace"), (table, "table", "--csv")]
    outputs = [Output(path, kind, option=option) for value, kind, option in wanted
               if (path := _optional_path(value, option)) is not None]
    check_outputs(outputs, force=force)
    return outputs


def _finish(doc: dict[str, Any], outputs: list[Output], *, force: bool,
            log_text: str | None = None) -> dict[str, Any]:
    """Render and write the outputs of a command together (nothing is written on failure)."""
    if not outputs:
        return doc
    from .result import dumps

    for out in outputs:
        if out.kind == "page":
            from ..reports import render_page

            out.content = render_page(doc)
        elif out.kind == "result":
            out.content = dumps(doc) + "\n"
        elif out.kind == "log":
            out.content = log_text or ""
        elif out.kind == "table":
            out.content = _table_text(doc)
    write_outputs(outputs, force=force)
    return doc


def analyze(model: ModelLike, *, seed: int | None = DEFAULT_SEED,
            precision: float | None = None, replications: int | None = None,
            firings: int | None = None, workers: int | None = None,
            scheduler: str | None = None, quiet: bool = False,
            report: PathLike | None = None, save: PathLike | None = None,
            force: bool = False) -> dict[str, Any]:
    """Max-plus analysis: exact for fixed durations, a Lyapunov estimate for random ones.

    Parameters
    ----------
    model : str, path-like or Model
        The model file, or a model from :func:`load_model`.
    seed, precision, replications, firings, workers, scheduler, quiet
        As the command line's options (``cyclecheck analyze --help``); ``seed=None`` draws a
        fresh seed and records it, ``workers=None`` uses every core. For random durations the
        recursion runs replications until the relative half-width of the 95 % interval is at
        most ``precision`` (default 0.01).
    report, save : str or path-like, optional
        Also write the review page (HTML) / the result document (JSON) there.
    force : bool
        Replace files that are not earlier outputs of the same kind.

    Returns
    -------
    dict
        The document ``cyclecheck analyze --json`` prints (keys in the README).

    Examples
    --------
    >>> doc = analyze("models/packaging_cell.toml")
    >>> doc["cycle_time"], doc["cyclicity"]
    (17.375, 4)
    """
    from .result import analysis_document

    settings = RunSettings.resolve(seed=seed, precision=precision, replications=replications,
                                   firings=firings, workers=workers, scheduler=scheduler,
                                   progress=not quiet)
    outputs = _outputs(report, save, force=force)
    loaded = _model(model)
    from ..algebra.analysis import analyze_graph

    exact = analyze_graph(loaded.graph())
    est = None
    if loaded.is_random:
        # Imported here: the experiments (process pools, the recursion) cost a fixed model
        # about 0.1 s of start-up for nothing.
        from .experiment import DEFAULT_PRECISION, estimate_with_executor

        settings = settings.replace(precision=settings.precision or DEFAULT_PRECISION)
        with _progress_line(settings, settings.precision) as line:
            est = estimate_with_executor(loaded, "recursion", settings,
                                         cyclicity_of_mean=exact.cyclicity, progress=line)
    doc = analysis_document(loaded, exact, est, settings)
    return _finish(doc, outputs, force=force)


def simulate(model: ModelLike, *, seed: int | None = DEFAULT_SEED,
             precision: float | None = None, replications: int | None = None,
             firings: int | None = None, workers: int | None = None,
             scheduler: str | None = None, quiet: bool = False, trace: PathLike | None = None,
             report: PathLike | None = None, save: PathLike | None = None,
             force: bool = False) -> dict[str, Any]:
    """Estimate the cycle time from the SimPy engine.

    Parameters are those of :func:`analyze`, and ``trace``: write the event log of
    replication 0 there (CSV ``transition,firing,start,time``).

    Returns
    -------
    dict
        The document ``cyclecheck simulate --json`` prints.

    Examples
    --------
    >>> doc = simulate("models/packaging_cell.toml", firings=200)
    >>> doc["cycle_time"]
    17.375
    """
    from ..algebra.critical import cyclicity
    from ..algebra.spectral import howard
    from .engine import simulate_event_graph
    from .experiment import DEFAULT_PRECISION, estimate_with_executor
    from .result import simulation_document

    settings = RunSettings.resolve(seed=seed, precision=precision, replications=replications,
                                   firings=firings, workers=workers, scheduler=scheduler,
                                   progress=not quiet)
    outputs = _outputs(report, save, trace, force=force)
    loaded = _model(model)
    if settings.precision is None and loaded.is_random:
        settings = settings.replace(precision=DEFAULT_PRECISION)
    if not loaded.is_random and settings.replications is None:
        # fixed durations: every replication is the same run; two make the (zero) interval
        settings = settings.replace(replications=2)
    graph = loaded.graph()
    mean_value = howard(graph)
    period = cyclicity(graph, mean_value)
    with _progress_line(settings, settings.precision) as line:
        est = estimate_with_executor(loaded, "simpy", settings, cyclicity_of_mean=period,
                                     progress=line)
    _add_sensitivity(loaded, est, mean_value)
    doc = simulation_document(loaded, est, mean_value, period, settings)
    log_text = None
    if trace is not None:
        run = simulate_event_graph(graph, loaded.sampler(settings.seed, 0),
                                   n_firings=est.firings)
        log_text = run.event_log().to_csv(index=False)
        doc["trace"] = os.fspath(trace)
    return _finish(doc, outputs, force=force, log_text=log_text)


def _add_sensitivity(model: Model, est: Any, mean_value: Any) -> None:
    """Derivatives for the SimPy engine's estimate: exact for fixed durations, else from the
    recursion on the same draws."""
    from .experiment import sensitivity_on_same_draws
    from .sensitivity import fixed_model_sensitivity

    est.sensitivity = (sensitivity_on_same_draws(model, est) if model.is_random
                       else fixed_model_sensitivity(model.graph(), mean_value))


def check(model: ModelLike, *, seed: int | None = DEFAULT_SEED,
          precision: float | None = None, replications: int | None = None,
          firings: int | None = None, workers: int | None = None,
          scheduler: str | None = None, quiet: bool = False, report: PathLike | None = None,
          save: PathLike | None = None, force: bool = False) -> dict[str, Any]:
    """Both engines side by side, the sample-path comparison and the verdict.

    Parameters are those of :func:`analyze`. For a random model the recursion runs to
    ``precision`` and the SimPy engine runs replications of its own (``replications``, 5 by
    default), on the same draws as the recursion recomputes them.

    Returns
    -------
    dict
        The document ``cyclecheck check --json`` prints: ``analysis``, ``simulation``,
        ``comparison`` (``verdict``: ``"agrees"`` or ``"disagrees"``, ``reasons``), ``figures``,
        ``settings``.

    Examples
    --------
    >>> doc = check("models/packaging_cell.toml")
    >>> doc["comparison"]["verdict"]
    'agrees'
    """
    from .compare import compare
    from .result import comparison_document

    settings = RunSettings.resolve(seed=seed, precision=precision, replications=replications,
                                   firings=firings, workers=workers, scheduler=scheduler,
                                   progress=not quiet)
    outputs = _outputs(report, save, force=force)
    loaded = _model(model)
    with _progress_line(settings, settings.precision) as line:
        doc = comparison_document(loaded, compare(loaded, settings, progress=line), settings)
    return _finish(doc, outputs, force=force)


def trace(model: ModelLike, log: PathLike | Any, *, alpha: float = 0.05,
          partial: bool = False, columns: str | Mapping[str, str] | None = None,
          rename: str | list[str] | Mapping[str, str] | None = None, time_scale: float = 1.0,
          tolerance: float = 1e-6, seed: int | None = DEFAULT_SEED,
          precision: float | None = None, workers: int | None = None,
          scheduler: str | None = None, quiet: bool = False, report: PathLike | None = None,
          save: PathLike | None = None, force: bool = False,
          model_estimate: Any = None) -> dict[str, Any]:
    """Judge an event log of any simulator against the model.

    Fixed durations are judged exactly, firing by firing; random ones statistically (the fit
    and mean of the durations, the holds the log shows, the cycle time of each strongly
    connected component against the model's Lyapunov exponent), all tests in one Holm family
    at ``alpha``.

    Parameters
    ----------
    model : str, path-like or Model
    log : str, path-like or pandas.DataFrame
        The event log: CSV or Parquet with the columns ``transition,firing,time`` and
        optionally ``start`` and ``replication``, or a table in memory.
    alpha : float
        Family-wise error rate of the statistical tests.
    partial : bool
        Judge the logged transitions only and list the others (else a transition without a
        row makes the verdict "disagrees").
    columns, rename, time_scale
        How to read a log of another simulator: ``"transition=Activity,time=End"``, a
        two-column CSV file or ``"LOGNAME=ID"`` texts (or a dict), and the factor that turns
        the log's times into model time units.
    tolerance : float
        Relative tolerance on firing times.
    seed, precision, workers, scheduler, quiet
        For the model's cycle-time estimate (``precision`` default: several times tighter
        than the log's interval), as on the command line.
    report, save, force
        As for :func:`analyze`.
    model_estimate : ModelCycleTime, optional
        Python only: the model's cycle-time estimate computed once
        (:func:`cyclecheck.simulate.logcycle.model_cycle_time`), for judging many logs of one
        model.

    Returns
    -------
    dict
        The judgement document ``cyclecheck trace --json`` prints (``verdict``, ``reasons``
        and the keys listed in the README).

    Examples
    --------
    >>> import os, tempfile
    >>> log = os.path.join(tempfile.mkdtemp(), "cell.csv")
    >>> _ = simulate("models/packaging_cell.toml", firings=50, trace=log)
    >>> trace("models/packaging_cell.toml", log)["verdict"]
    'agrees'
    """
    from .judge import judge_log
    from .result import trace_document

    settings = RunSettings.resolve(seed=seed, precision=precision, workers=workers,
                                   scheduler=scheduler, progress=not quiet)
    outputs = _outputs(report, save, force=force)
    loaded = _model(model)
    if isinstance(rename, str):
        rename = [rename]
    with _progress_line(settings, None) as line:
        judgement = judge_log(loaded, log, columns=columns, rename=rename,
                              time_scale=time_scale, alpha=alpha, partial=partial,
                              tolerance=tolerance, seed=settings.seed,
                              precision=settings.precision, workers=settings.workers,
                              scheduler=settings.scheduler, model_estimate=model_estimate,
                              progress=line)
    doc = trace_document(loaded, judgement, settings)
    return _finish(doc, outputs, force=force)


def sweep(model: ModelLike, *, vary: Mapping[str, Any] | Sequence[Any],
          seed: int | None = DEFAULT_SEED, precision: float | None = None,
          replications: int | None = None, firings: int | None = None,
          workers: int | None = None, scheduler: str | None = None, quiet: bool = False,
          csv: PathLike | None = None, report: PathLike | None = None,
          save: PathLike | None = None, resume: PathLike | None = None,
          force: bool = False) -> dict[str, Any]:
    """Run a model at every point of a grid of parameter values, in parallel.

    Parameters
    ----------
    model : str, path-like or Model
    vary : mapping or sequence
        What to vary, as ``--vary`` takes it: ``{"press.mean": "10:14:5"}``,
        ``["kanban cards.tokens=1:6", "press.cv=0.2,0.5"]`` or ``[("press.mean", [10, 12])]``.
        Targets: ``TRANSITION.duration``, ``TRANSITION.PARAM`` (a parameter of its law),
        ``FROM->TO.tokens``, ``FROM->TO.hold`` (a place's label may stand for ``FROM->TO``);
        values ``a:b`` (integers), ``a:b:n`` (n evenly spaced) or ``v1,v2,...``. Several
        targets make a grid.
    seed, precision, replications, firings, workers, scheduler, quiet
        As for :func:`analyze`: every random point runs replications until its interval's
        relative half-width is at most ``precision`` (default 0.01); ``replications`` is the
        first round of every point (default 10). The numbers do not depend on ``workers`` or
        ``scheduler``.
    csv, report, save : str or path-like, optional
        Also write the points as CSV (``point,...``), the review page, the document.
    resume : str or path-like, optional
        A state file: finished tasks are saved there as they finish; a later run of the same
        sweep with the same file skips them and gives the same document.
    force : bool
        Replace files that are not earlier outputs of the same kind; start a state file of
        another sweep afresh.

    Returns
    -------
    dict
        The document ``cyclecheck sweep --json`` prints: ``vary``, ``points`` (one per point:
        ``values``, ``cycle_time``, ``cycle_time_ci``, ``throughput``, ``critical_circuit``,
        ``differences``, ...). :func:`points_frame` makes a DataFrame of the points.

    Examples
    --------
    >>> doc = sweep("models/kanban_loop.toml", vary=["kanban cards.tokens=1:6"], quiet=True)
    >>> [round(p["cycle_time"], 3) for p in doc["points"]]
    [20.0, 10.0, 6.667, 6.0, 6.0, 6.0]
    """
    from .experiment import DEFAULT_PRECISION
    from .grid import make_grid
    from .result import sweep_document
    from .sweep import run_sweep

    settings = RunSettings.resolve(seed=seed, precision=precision, replications=replications,
                                   firings=firings, workers=workers, scheduler=scheduler,
                                   progress=not quiet)
    outputs = _outputs(report, save, force=force, table=csv)
    state = _optional_path(resume, "--resume")
    if state is not None:
        check_outputs([*outputs, Output(state, "state", option="--resume")], force=force)
    loaded = _model(model)
    grid = make_grid(loaded, vary)
    settings = settings.replace(precision=settings.precision or DEFAULT_PRECISION)
    notes: list[str] = []

    def note(text: str) -> None:
        if not quiet:
            print(f"cyclecheck: {text}", file=sys.stderr)

    with _progress_line(settings, None) as line:
        outcomes, resumed = run_sweep(loaded, grid, settings, state_path=state, force=force,
                                      progress=None if line is None else line.show, note=note)
    if resumed:
        note(f"{resumed} finished tasks were taken from {state}")
    for target in grid.targets:
        law = (loaded.durations if target.element == "transition"
               else loaded.holds)[target.index]
        if target.field in ("duration", "hold") and law.is_random:
            notes.append(f"{target.text} sets a fixed {target.field}, replacing "
                         f"{law.describe()}; to keep the law, vary one of its parameters")
    doc = sweep_document(loaded, grid, outcomes, settings, notes)
    return _finish(doc, outputs, force=force)


def points_frame(document: Mapping[str, Any]) -> Any:
    """The points of a sweep document as a pandas DataFrame (the columns of ``--csv``, one
    row per point, indexed by ``point``).

    Examples
    --------
    >>> frame = points_frame(sweep("models/kanban_loop.toml", vary={"kanban cards.tokens": "1:3"},
    ...                            quiet=True))
    >>> frame["cycle_time"].round(3).tolist()
    [20.0, 10.0, 6.667]
    """
    import pandas as pd

    from .result import sweep_rows

    if document.get("command") != "sweep":
        raise ArgumentError("points_frame takes the document of a sweep, got one of "
                            f"{document.get('command')!r}")
    columns, rows = sweep_rows(document)
    return pd.DataFrame(rows, columns=columns).set_index("point")


def _table_text(document: Mapping[str, Any]) -> str:
    """The ``--csv`` table of a sweep document."""
    import csv
    import io

    from .result import sweep_rows

    columns, rows = sweep_rows(document)
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(columns)
    writer.writerows([["" if v is None else repr(v) if isinstance(v, float) else v
                       for v in row] for row in rows])
    return buffer.getvalue()


def report(result: Mapping[str, Any] | PathLike, output: PathLike, *,
           force: bool = False) -> Path:
    """Render a result document (or a saved one, by its path) as a review page at ``output``.

    Returns
    -------
    pathlib.Path
        The page written.

    Examples
    --------
    >>> import os, tempfile
    >>> folder = tempfile.mkdtemp()
    >>> saved = os.path.join(folder, "cell.json")
    >>> _ = analyze("models/packaging_cell.toml", save=saved)
    >>> report(saved, os.path.join(folder, "cell.html")).name
    'cell.html'
    """
    doc = dict(result) if isinstance(result, Mapping) else load_document(result)
    return _save_page(doc, output, force=force, option="-o")


def save_document(document: Mapping[str, Any], path: PathLike, *,
                  force: bool = False) -> Path:
    """Keep a result document as JSON, atomically; refuses to replace a file of another kind
    without ``force``.

    Examples
    --------
    >>> import os, tempfile
    >>> path = os.path.join(tempfile.mkdtemp(), "cell.json")
    >>> saved = save_document(analyze("models/packaging_cell.toml"), path)
    >>> load_document(saved)["cycle_time"]
    17.375
    """
    from .result import dumps

    target = _optional_path(path, "--save")
    assert target is not None
    write_outputs([Output(target, "result", dumps(dict(document)) + "\n", "--save")],
                  force=force)
    return target


def save_page(document: Mapping[str, Any], path: PathLike, *, force: bool = False) -> Path:
    """Render a result document as a review page and write it, atomically; refuses to replace
    a file of another kind without ``force``.

    Examples
    --------
    >>> import os, tempfile
    >>> path = os.path.join(tempfile.mkdtemp(), "cell.html")
    >>> save_page(analyze("models/packaging_cell.toml"), path).suffix
    '.html'
    """
    return _save_page(document, path, force=force, option="--report")


def _save_page(document: Mapping[str, Any], path: PathLike, *, force: bool,
               option: str) -> Path:
    from ..reports import render_page

    target = _optional_path(path, option)
    assert target is not None
    check_outputs([Output(target, "page", option=option)], force=force)
    write_outputs([Output(target, "page", render_page(document), option)], force=force)
    return target
