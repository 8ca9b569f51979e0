"""The ``cyclecheck`` command line: parse options, call the front door, print.

Every command is one function of :mod:`cyclecheck.simulate.api` with the same options; this
module only turns words into arguments and documents into text. Options are checked by the
front door (:class:`~cyclecheck.simulate.settings.RunSettings`, the output checks of
:mod:`~cyclecheck.simulate.files`), so a script and the command line get the same messages.

Exit codes: 0 done (and, for ``check`` and ``trace``, the model agrees with the theory); 1 the
simulation or the event log disagrees with the theory; 2 bad input or usage, with one paragraph
on stderr naming the file, the item and the rule, never a traceback; 130 interrupted.

Heavy libraries (numpy, scipy, pandas, simpy, matplotlib) are imported inside the commands so
that ``cyclecheck --help`` starts fast.
"""

from __future__ import annotations

import functools
import os
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

import click

__all__ = ["main", "run"]

EXIT_AGREES = 0
EXIT_DISAGREES = 1
EXIT_BAD_INPUT = 2
EXIT_INTERRUPTED = 130

F = TypeVar("F", bound=Callable[..., Any])


def _fail(message: str) -> None:
    click.echo(f"cyclecheck: {message}", err=True)
    sys.exit(EXIT_BAD_INPUT)


def _guarded(func: F) -> F:
    """Turn input errors into exit 2 and Ctrl-C into exit 130, each with one clear line."""

    @functools.wraps(func)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        from ..algebra.exceptions import CycleCheckError, MaxPlusError

        try:
            return func(*args, **kwargs)
        except MaxPlusError as err:
            _fail(f"the model breaks a rule of the algebra: {err}")
        except CycleCheckError as err:
            _fail(str(err))
        except KeyboardInterrupt:
            click.echo("cyclecheck: interrupted; no output file was written or changed", err=True)
            sys.exit(EXIT_INTERRUPTED)
        except MemoryError:
            _fail("the run needs more memory than this machine has: ask for fewer firings or "
                  "replications (--firings, --replications)")
        except OSError as err:
            _fail(f"{err.filename or ''}: {err.strerror or err}".lstrip(": "))

    return wrapper  # type: ignore[return-value]


def _options(*options: Callable[[F], F]) -> Callable[[F], F]:
    def apply(func: F) -> F:
        for option in reversed(options):
            func = option(func)
        return func

    return apply


JSON = click.option("--json", "as_json", is_flag=True,
                    help="Print the result document as JSON on stdout, nothing else.")
QUIET = click.option("--quiet", is_flag=True, help="No progress line and no notes on stderr.")
FORCE = click.option("--force", is_flag=True,
                     help="Replace output files that are not earlier outputs of the same kind.")
REPORT = click.option("--report", "report_path", type=click.Path(path_type=Path), default=None,
                      metavar="PAGE", help="Also write the review page (self-contained HTML).")
SAVE = click.option("--save", "save_path", type=click.Path(path_type=Path), default=None,
                    metavar="RESULT", help="Also keep the result document (JSON), for "
                                           "`cyclecheck report`.")

#: Options of every command that runs a model (checked by RunSettings.resolve).
RUN = _options(
    JSON,
    click.option("--seed", type=int, default=1, show_default=True,
                 help="Seed of the random draws (numpy SeedSequence), an integer >= 0."),
    click.option("--precision", type=float, default=None,
                 help="Target relative half-width of the 95 % confidence interval, in (0, 1); "
                      "replications are added until it is reached.  [default: 0.01 for "
                      "random models]"),
    click.option("--replications", type=int, default=None,
                 help="Replications per round of the estimate (>= 2).  [default: 10; for "
                      "the SimPy side of `check`: 5]"),
    click.option("--firings", type=int, default=None,
                 help="Firings of every transition per replication (>= 10).  [default: chosen "
                      "from the model size]"),
    click.option("--workers", type=int, default=None,
                 help="Local worker processes for replications.  [default: all cores]"),
    click.option("--scheduler", default=None, metavar="ADDRESS",
                 help="Address of a Dask scheduler (tcp://host:port) to run replications on."),
    QUIET,
)

EXIT_CODES = ("Exit codes: 0 done, or the model agrees with the theory; 1 the simulation or "
              "the log disagrees; 2 bad input or usage; 130 interrupted.")
#: The exit codes of a command that gives no verdict.
EXIT_DONE = "Exit codes: 0 done; 2 bad input or usage; 130 interrupted."
#: The exit codes of a command that gives a verdict.
EXIT_VERDICT = ("Exit codes: 0 the model agrees (check) / the log is consistent (trace); 1 it "
                "disagrees / is not; 2 bad input or usage; 130 interrupted.")


@click.group(context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100},
             epilog=EXIT_CODES)
@click.version_option(package_name="cyclecheck")
def main() -> None:
    """Check a timed event graph model against max-plus theory.

    Cycle time (the max-plus eigenvalue), critical circuit, periodic schedule and slack for
    fixed durations; the Lyapunov exponent with confidence intervals for random ones; a SimPy
    simulation run beside the max-plus recursion on the same random draws; the judgement of
    event logs from any simulator; review pages.
    """


def _run_options(seed: int, precision: float | None, replications: int | None,
                 firings: int | None, workers: int | None, scheduler: str | None,
                 quiet: bool, as_json: bool) -> dict[str, Any]:
    return {"seed": seed, "precision": precision, "replications": replications,
            "firings": firings, "workers": workers, "scheduler": scheduler,
            "quiet": quiet or as_json}


def _wrote(paths: list[Path | None], quiet: bool) -> None:
    for path in paths:
        if path is not None and not quiet:
            click.echo(f"wrote {path}", err=True)


@main.command(short_help="Exact cycle time, critical circuit, slack; Lyapunov estimate.",
              epilog=EXIT_DONE)
@click.argument("model", type=click.Path(path_type=Path))
@RUN
@REPORT
@SAVE
@FORCE
@_guarded
def analyze(model: Path, as_json: bool, seed: int, precision: float | None,
            replications: int | None, firings: int | None, workers: int | None,
            scheduler: str | None, quiet: bool, report_path: Path | None,
            save_path: Path | None, force: bool) -> None:
    """Max-plus analysis of MODEL: exact for fixed durations, Lyapunov estimate for random ones."""
    from . import api, summary

    doc = api.analyze(model, **_run_options(seed, precision, replications, firings, workers,
                                            scheduler, quiet, as_json),
                      report=report_path, save=save_path, force=force)
    _emit(doc, as_json, summary.analysis_text)
    _wrote([report_path, save_path], quiet)


@main.command(name="simulate", short_help="Cycle time estimated from the SimPy engine.",
              epilog=EXIT_DONE)
@click.argument("model", type=click.Path(path_type=Path))
@RUN
@click.option("--trace", "trace_path", type=click.Path(path_type=Path), default=None,
              metavar="LOG", help="Write the event log of replication 0 to this CSV file.")
@REPORT
@SAVE
@FORCE
@_guarded
def simulate_cmd(model: Path, as_json: bool, seed: int, precision: float | None,
                 replications: int | None, firings: int | None, workers: int | None,
                 scheduler: str | None, quiet: bool, trace_path: Path | None,
                 report_path: Path | None, save_path: Path | None, force: bool) -> None:
    """Run the SimPy model of MODEL and estimate its cycle time from the simulation."""
    from . import api, summary

    doc = api.simulate(model, **_run_options(seed, precision, replications, firings, workers,
                                             scheduler, quiet, as_json),
                       trace=trace_path, report=report_path, save=save_path, force=force)
    _emit(doc, as_json, summary.simulation_text)
    _wrote([trace_path, report_path, save_path], quiet)


@main.command(short_help="SimPy beside the max-plus recursion, with a verdict.",
              epilog=EXIT_VERDICT)
@click.argument("model", type=click.Path(path_type=Path))
@RUN
@REPORT
@SAVE
@FORCE
@_guarded
def check(model: Path, as_json: bool, seed: int, precision: float | None,
          replications: int | None, firings: int | None, workers: int | None,
          scheduler: str | None, quiet: bool, report_path: Path | None,
          save_path: Path | None, force: bool) -> None:
    """Run the SimPy model and the max-plus recursion side by side and give a verdict.

    Exit 0 when the simulation agrees with the theory, 1 when it does not.
    """
    from . import api, summary

    doc = api.check(model, **_run_options(seed, precision, replications, firings, workers,
                                          scheduler, quiet, as_json),
                    report=report_path, save=save_path, force=force)
    _emit(doc, as_json, summary.check_text)
    _wrote([report_path, save_path], quiet)
    sys.exit(EXIT_AGREES if doc["comparison"]["verdict"] == "agrees" else EXIT_DISAGREES)


@main.command(short_help="Re-render a saved result document as a page.", epilog=EXIT_DONE)
@click.argument("result", type=click.Path(path_type=Path))
@click.option("-o", "--output", "output", type=click.Path(path_type=Path), required=True,
              metavar="PAGE", help="The page to write (HTML).")
@FORCE
@_guarded
def report(result: Path, output: Path, force: bool) -> None:
    """Render a saved result document (JSON from --save) as a review page."""
    from . import api

    api.report(result, output, force=force)
    click.echo(f"wrote {output}", err=True)


@main.command(short_help="Judge an event log of any simulator against the model.",
              epilog=EXIT_VERDICT)
@click.argument("model", type=click.Path(path_type=Path))
@click.argument("log", type=click.Path(path_type=Path))
@JSON
@click.option("--alpha", type=float, default=0.05, show_default=True,
              help="Family-wise error rate of the statistical tests (Holm).")
@click.option("--partial", is_flag=True,
              help="Judge the transitions that are logged; list the others as not judged.")
@click.option("--columns", default=None, metavar="OURS=THEIRS,...",
              help="Column names of the log, e.g. transition=Activity,time=End,start=Begin,"
                   "replication=Run.")
@click.option("--rename", multiple=True, metavar="FILE|LOGNAME=ID",
              help="Map the log's transition names to model ids: a two-column CSV file or "
                   "LOGNAME=ID (repeat the option).")
@click.option("--time-scale", type=float, default=1.0, show_default=True,
              help="Factor turning the log's times into model time units.")
@click.option("--tolerance", type=float, default=1e-6, show_default=True,
              help="Relative tolerance on firing times.")
@click.option("--seed", type=int, default=1, show_default=True,
              help="Seed of the model's cycle-time estimate (and of Monte Carlo p-values).")
@click.option("--precision", type=float, default=None,
              help="Relative half-width asked of the model's cycle-time estimate.  [default: "
                   "three times tighter than the log's]")
@click.option("--workers", type=int, default=None,
              help="Local worker processes for the model's estimate.  [default: all cores]")
@click.option("--scheduler", default=None, metavar="ADDRESS",
              help="Address of a Dask scheduler for the model's estimate.")
@REPORT
@SAVE
@FORCE
@QUIET
@_guarded
def trace(model: Path, log: Path, as_json: bool, alpha: float, partial: bool,
          columns: str | None, rename: tuple[str, ...], time_scale: float, tolerance: float,
          seed: int, precision: float | None, workers: int | None, scheduler: str | None,
          report_path: Path | None, save_path: Path | None, force: bool, quiet: bool) -> None:
    """Judge an event log of any simulator (CSV or Parquet: transition,firing,time[,start]
    [,replication]) against MODEL.

    Fixed durations are judged exactly; random ones statistically (fit and mean of the
    durations, the holds the log shows, the cycle time against the model's), at a family-wise
    error rate --alpha. Exit 0 when the log is consistent with the model, 1 when not.
    """
    from . import api, summary

    doc = api.trace(model, log, alpha=alpha, partial=partial, columns=columns,
                    rename=list(rename) or None, time_scale=time_scale, tolerance=tolerance,
                    seed=seed, precision=precision, workers=workers, scheduler=scheduler,
                    quiet=quiet or as_json, report=report_path, save=save_path, force=force)
    _emit(doc, as_json, summary.trace_text)
    _wrote([report_path, save_path], quiet)
    sys.exit(EXIT_AGREES if doc["verdict"] == "agrees" else EXIT_DISAGREES)


@main.command(short_help="A grid of parameter values, in parallel.", epilog=EXIT_DONE)
@click.argument("model", type=click.Path(path_type=Path))
@click.option("--vary", "vary", multiple=True, required=True, metavar="TARGET=VALUES",
              help="What to vary and its values (repeat for a grid). TARGET: TRANSITION.duration,"
                   " TRANSITION.PARAM (a parameter of its law, e.g. press.mean, press.cv), "
                   "FROM->TO.tokens, FROM->TO.hold (a place's label may stand for FROM->TO). "
                   "VALUES: a:b (the integers a to b), a:b:n (n evenly spaced) or v1,v2,...")
@RUN
@click.option("--csv", "csv_path", type=click.Path(path_type=Path), default=None,
              metavar="FILE", help="Also write the points as a CSV table (first column point).")
@REPORT
@SAVE
@click.option("--resume", "resume_path", type=click.Path(path_type=Path), default=None,
              metavar="STATE", help="Keep finished tasks in this state file as they finish; run "
                                    "again with the same file to go on from there.")
@FORCE
@_guarded
def sweep(model: Path, vary: tuple[str, ...], as_json: bool, seed: int,
          precision: float | None, replications: int | None, firings: int | None,
          workers: int | None, scheduler: str | None, quiet: bool, csv_path: Path | None,
          report_path: Path | None, save_path: Path | None, resume_path: Path | None,
          force: bool) -> None:
    """Run MODEL at every point of a grid of parameter values (--vary), in parallel.

    Fixed durations give the exact cycle time and critical circuit of every point; random
    ones the estimate, its 95 % interval and bounds, on common random numbers across points.
    """
    from . import api, summary

    try:
        doc = api.sweep(model, vary=list(vary), **_run_options(seed, precision, replications,
                                                              firings, workers, scheduler,
                                                              quiet, as_json),
                        csv=csv_path, report=report_path, save=save_path,
                        resume=resume_path, force=force)
    except KeyboardInterrupt:
        if resume_path is not None and resume_path.exists():
            click.echo(f"cyclecheck: interrupted; the finished tasks are kept in {resume_path} "
                       "(run the same command to resume); no other output was written",
                       err=True)
            sys.exit(EXIT_INTERRUPTED)
        raise
    _emit(doc, as_json, summary.sweep_text)
    _wrote([csv_path, report_path, save_path], quiet)


def _emit(doc: dict[str, Any], as_json: bool, text: Callable[[dict[str, Any]], str]) -> None:
    from .result import dumps

    click.echo(dumps(doc) if as_json else text(doc))


def run() -> None:
    """The ``cyclecheck`` program: :func:`main`, then leave without the interpreter's teardown.

    Finalizing the modules of numba, llvmlite and scipy takes about 0.3 s once the work is
    done. By then every output is written and closed (atomic writes, executors shut down), so
    the exit handlers are run and the process leaves at once, with the command's exit code.
    Scripts and tests call :func:`main`, which exits as usual.
    """
    try:
        main()
    except SystemExit as exc:
        code = exc.code
    else:  # pragma: no cover - click's main always raises SystemExit
        code = 0
    if code is None:
        code = 0
    elif not isinstance(code, int):  # sys.exit("text"): the text on stderr, exit 1
        print(code, file=sys.stderr)
        code = 1
    import atexit

    atexit._run_exitfuncs()
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):  # a closed pipe (| head): nothing more to say
            pass
    os._exit(code)


if __name__ == "__main__":  # pragma: no cover
    run()
