"""The ``cyclecheck`` command line: parse options, call the library, print.

Exit codes: 0 done (and, for ``check`` and ``trace``, the model agrees with the theory); 1 the
simulation or the event log disagrees with the theory; 2 bad input or usage, with one paragraph
on stderr naming the file, the item and the rule, never a traceback; 130 interrupted.

Heavy libraries (numpy, scipy, pandas, simpy, matplotlib) are imported inside the commands so
that ``cyclecheck --help`` starts fast.
"""

from __future__ import annotations

import functools
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

import click

__all__ = ["main"]

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
        from ..algebra.exceptions import MaxPlusError
        from ..reports.page import ReportError
        from .errors import ModelError

        try:
            return func(*args, **kwargs)
        except (ModelError, ReportError) as err:
            _fail(str(err))
        except MaxPlusError as err:
            _fail(f"the model breaks a rule of the algebra: {err}")
        except KeyboardInterrupt:
            click.echo("cyclecheck: interrupted; no output file was written or changed", err=True)
            sys.exit(EXIT_INTERRUPTED)
        except MemoryError:
            _fail("the run needs more memory than this machine has: ask for fewer firings or "
                  "replications")
        except OSError as err:
            _fail(f"{err.filename or ''}: {err.strerror or err}".lstrip(": "))

    return wrapper  # type: ignore[return-value]


def _precision(ctx: click.Context, param: click.Parameter, value: float | None) -> float | None:
    if value is not None and not 0.0 < value < 1.0:
        raise click.BadParameter(
            f"must lie strictly between 0 and 1 (a relative half-width such as 0.01), got {value}"
        )
    return value


def _common(func: F) -> F:
    """Options shared by the commands that run the model."""
    options = [
        click.option("--json", "as_json", is_flag=True,
                     help="Print the result document as JSON on stdout, nothing else."),
        click.option("--seed", type=click.IntRange(min=0), default=1, show_default=True,
                     help="Seed of the random draws (numpy SeedSequence)."),
        click.option("--precision", type=float, default=None, callback=_precision,
                     help="Target relative half-width of the 95 % confidence interval; the "
                          "run adds work until it is reached. [default: 0.01 for random models]"),
        click.option("--replications", type=click.IntRange(min=2), default=None,
                     help="Independent replications per round (default 10)."),
        click.option("--firings", type=click.IntRange(min=10), default=None,
                     help="Firings of every transition per replication [default: chosen "
                          "from the model size]."),
        click.option("--workers", type=click.IntRange(min=1), default=1, show_default=True,
                     help="Local worker processes for replications."),
        click.option("--scheduler", default=None, metavar="ADDRESS",
                     help="Address of a Dask scheduler to run replications on."),
        click.option("--quiet", is_flag=True, help="No progress on stderr."),
    ]
    for option in reversed(options):
        func = option(func)
    return func


EXIT_CODES = ("Exit codes: 0 done, or the model agrees with the theory; 1 the simulation or "
              "the log disagrees; 2 bad input or usage; 130 interrupted.")


@click.group(context_settings={"help_option_names": ["-h", "--help"], "max_content_width": 100},
             epilog=EXIT_CODES)
@click.version_option(package_name="cyclecheck")
def main() -> None:
    """Check a timed event graph model against max-plus theory.

    Cycle time (the max-plus eigenvalue), critical circuit, periodic schedule and slack for
    fixed durations; the Lyapunov exponent with confidence intervals for random ones; a SimPy
    simulation run beside the max-plus recursion on the same random draws; review pages.
    """


@main.command(short_help="Exact cycle time, critical circuit, slack; Lyapunov estimate.",
              epilog=EXIT_CODES)
@click.argument("model", type=click.Path(path_type=Path))
@_common
@_guarded
def analyze(model: Path, as_json: bool, seed: int, precision: float | None,
            replications: int | None, firings: int | None, workers: int,
            scheduler: str | None, quiet: bool) -> None:
    """Max-plus analysis of MODEL: exact for fixed durations, Lyapunov estimate for random ones."""
    from . import summary
    from .api import analyze_model
    from .modelfile import load_model

    loaded = load_model(model)
    doc = analyze_model(loaded, seed=seed, precision=precision, replications=replications,
                        firings=firings, workers=workers, scheduler=scheduler,
                        progress=not quiet and not as_json)
    _emit(doc, as_json, summary.analysis_text)


@main.command(name="simulate", short_help="Cycle time estimated from the SimPy engine.",
              epilog=EXIT_CODES)
@click.argument("model", type=click.Path(path_type=Path))
@_common
@click.option("--trace", "trace_path", type=click.Path(path_type=Path), default=None,
              help="Write the event log of the first replication to this CSV file.")
@click.option("--force", is_flag=True, help="Overwrite an existing trace file.")
@_guarded
def simulate_cmd(model: Path, as_json: bool, seed: int, precision: float | None,
                 replications: int | None, firings: int | None, workers: int,
                 scheduler: str | None, quiet: bool, trace_path: Path | None,
                 force: bool) -> None:
    """Run the SimPy model of MODEL and estimate its cycle time from the simulation."""
    from . import summary
    from .api import simulate_model
    from .modelfile import load_model

    loaded = load_model(model)
    if trace_path is not None:
        _refuse_overwrite(trace_path, force)
    doc = simulate_model(loaded, seed=seed, precision=precision, replications=replications,
                         firings=firings, workers=workers, scheduler=scheduler,
                         progress=not quiet and not as_json, trace_path=trace_path)
    _emit(doc, as_json, summary.simulation_text)


@main.command(short_help="SimPy beside the max-plus recursion, with a verdict.",
              epilog=EXIT_CODES)
@click.argument("model", type=click.Path(path_type=Path))
@_common
@click.option("--report", "report_path", type=click.Path(path_type=Path), default=None,
              help="Write the review page (self-contained HTML) to this file.")
@click.option("--save", "save_path", type=click.Path(path_type=Path), default=None,
              help="Keep the result document (JSON) in this file.")
@click.option("--force", is_flag=True, help="Overwrite files that are not earlier results.")
@_guarded
def check(model: Path, as_json: bool, seed: int, precision: float | None,
          replications: int | None, firings: int | None, workers: int,
          scheduler: str | None, quiet: bool, report_path: Path | None,
          save_path: Path | None, force: bool) -> None:
    """Run the SimPy model and the max-plus recursion side by side and give a verdict.

    Exit 0 when the simulation agrees with the theory, 1 when it does not.
    """
    from . import summary
    from .api import check_model
    from .modelfile import load_model

    loaded = load_model(model)
    for path in (report_path, save_path):
        if path is not None:
            _refuse_overwrite(path, force)
    doc = check_model(loaded, seed=seed, precision=precision, replications=replications,
                      firings=firings, workers=workers, scheduler=scheduler,
                      progress=not quiet and not as_json)
    _write_outputs(doc, report_path, save_path, force)
    _emit(doc, as_json, summary.check_text)
    for path in (report_path, save_path):
        if path is not None and not quiet:
            click.echo(f"wrote {path}", err=True)
    sys.exit(EXIT_AGREES if doc["comparison"]["verdict"] == "agrees" else EXIT_DISAGREES)


@main.command(short_help="Re-render a saved result document as a page.", epilog=EXIT_CODES)
@click.argument("result", type=click.Path(path_type=Path))
@click.option("-o", "--output", "output", type=click.Path(path_type=Path), required=True,
              help="The page to write (HTML).")
@click.option("--force", is_flag=True, help="Overwrite a file that is not an earlier report.")
@_guarded
def report(result: Path, output: Path, force: bool) -> None:
    """Render a saved result document (JSON from `check --save`) as a review page."""
    from .api import load_result

    doc = load_result(result)
    _write_outputs(doc, output, None, force)
    click.echo(f"wrote {output}", err=True)


@main.command(short_help="Judge an event log of any simulator against the model.",
              epilog=EXIT_CODES)
@click.argument("model", type=click.Path(path_type=Path))
@click.argument("log", type=click.Path(path_type=Path))
@click.option("--json", "as_json", is_flag=True, help="Print the judgement as JSON on stdout.")
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
@click.option("--seed", type=click.IntRange(min=0), default=1, show_default=True,
              help="Seed of the model's cycle-time estimate.")
@click.option("--precision", type=float, default=None, callback=_precision,
              help="Relative half-width asked of the model's cycle-time estimate [default: "
                   "three times tighter than the log's].")
@click.option("--workers", type=click.IntRange(min=1), default=1, show_default=True,
              help="Local worker processes for the model's estimate.")
@click.option("--tolerance", type=float, default=1e-6, show_default=True,
              help="Relative tolerance on firing times.")
@click.option("--quiet", is_flag=True, help="No progress on stderr.")
@_guarded
def trace(model: Path, log: Path, as_json: bool, alpha: float, partial: bool,
          columns: str | None, rename: tuple[str, ...], time_scale: float, seed: int,
          precision: float | None, workers: int, tolerance: float, quiet: bool) -> None:
    """Judge an event log of any simulator (CSV or Parquet: transition,firing,time[,start]
    [,replication]) against MODEL.

    Fixed durations are judged exactly; random ones statistically (fit and mean of the
    durations, the holds the log shows, the cycle time against the model's), at a family-wise
    error rate --alpha. Exit 0 when the log is consistent with the model, 1 when not.
    """
    from . import summary
    from .api import judge_trace
    from .modelfile import load_model

    doc = judge_trace(load_model(model), log, tolerance=tolerance, alpha=alpha,
                      partial=partial, columns=columns, rename=list(rename) or None,
                      time_scale=time_scale, seed=seed, precision=precision, workers=workers,
                      progress=not quiet and not as_json)
    _emit(doc, as_json, summary.trace_text)
    sys.exit(EXIT_AGREES if doc["verdict"] == "agrees" else EXIT_DISAGREES)


def _emit(doc: dict[str, Any], as_json: bool, text: Callable[[dict[str, Any]], str]) -> None:
    from .result import dumps

    click.echo(dumps(doc) if as_json else text(doc))


def _refuse_overwrite(path: Path, force: bool) -> None:
    """Stop before any work when an output cannot be written, or would overwrite a file the
    user did not make with cyclecheck."""
    from .api import check_output_path, is_our_output

    check_output_path(path)
    if force or not path.exists() or is_our_output(path):
        return
    _fail(f"{path}: exists and is not an earlier cyclecheck output; use --force to overwrite it")


def _write_outputs(doc: dict[str, Any], report_path: Path | None, save_path: Path | None,
                   force: bool) -> None:
    from .api import write_outputs

    write_outputs(doc, report_path=report_path, save_path=save_path, force=force)


if __name__ == "__main__":  # pragma: no cover
    main()
