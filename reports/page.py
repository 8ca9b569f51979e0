r"""The review page: a result document rendered as one self-contained HTML file.

The page computes nothing of the analysis: every number on it comes from the document; the
page only lays out the graph drawing, formats numbers and draws figures. It has no scripts, no
external references (CSS inline, figures inline SVG), and the same document always gives the
same bytes. Text that comes from the model (names, labels, descriptions, ids, reasons) is
escaped.

The result document, version 1
------------------------------
A JSON-ready ``dict``. Keys marked *required* must be there; every other key may be missing
or ``None``, and the page then leaves its part out (a document of ``analyze`` has no
``simulation`` and no ``comparison``; one of ``simulate`` has no ``analysis``)::

    document        "cyclecheck-result"                                   required
    schema_version  1                                                     required
    command         "check" | "analyze" | "simulate" | ...
    command_line    str, the command as typed
    created         str, ISO 8601 UTC time stamp (shown, never generated here)
    versions        {package: version string}, e.g. cyclecheck, python, numpy, scipy, simpy
    model                                                                 required
        name            str                                               required
        time_unit       str ("" when none)
        description     str
        path            str, the model file
        sha256          str, hash of the model file
        n_transitions   int (may exceed len(transitions) if the lists were cut)
        n_places        int
        is_random       bool: some duration or hold is random
        transitions     [{"id": str (required), "label": str, "duration": str (as written,
                          e.g. "gamma(mean=3, cv=0.5)" or "3"), "mean_duration": float}]
        places          [{"index": int, "from": id (required), "to": id (required),
                          "tokens": int (required), "hold": str, "mean_hold": float,
                          "label": str}]      (list position = place index)
    settings        {"seed": int, "precision": float (target relative half-width of the 95 %
                     interval), "replications": int, "firings_per_replication": int,
                     "warmup": int (firings deleted at the start of each replication)}
    analysis        the max-plus side (keys of ``cyclecheck analyze --json``)
        cycle_time          float: λ, exact for fixed durations, the estimate otherwise
        cycle_time_ci       [low, high], 95 %; [λ, λ] when exact
        throughput          float: 1/λ, firings per time unit
        cycle_time_by_transition  {id: float}
        critical_circuits   [[id, ...] in circuit order]; for random durations those of the
                            mean durations (may be empty)
        critical_places     [place index, ...] on critical circuits (optional: without it
                            the place of least slack between two critical transitions)
        cyclicity           int | None: period in firings of the periodic regime
        bounds              {"lower": float, "upper": float} | None (random durations)
        firings_simulated   int: firings computed for the estimate, all replications
        exact               bool
        eigenvector         {id: float} | None
        slack               {"transitions": {id: float | None}, "places": [float | None,
                            one per place]}: how much a duration (a hold) may grow before
                            λ changes
        certificate         {"checked": bool, "text": str, and any of the numbers
                            "circuit_ratio", "circuit_gap", "monotone_gap", "eigen_residual",
                            "max_reduced_weight", "tolerance"}
        charpoly            {"corners": [[value | None (ε), multiplicity], ...], "terms":
                            [[k, coeff], ...] meaning coeff ⊗ z^k} | {"skipped": reason}
        transient_firings   int | None: firings before the periodic regime
        criticality         {"transitions": {id: fraction}, "places": [fraction, ...]} |
                            None: share of firings in which the element was on the path that
                            set the firing time (random durations)
        utilization         {id: fraction} | None: share of time busy (per server)
    simulation      the SimPy side: cycle_time, cycle_time_ci, throughput, firings_simulated,
                    utilization, criticality, as in ``analysis``
    comparison      {"verdict": "agrees" | "disagrees", "reasons": [str, ...],
                     "sample_path": {"identical": bool, "max_relative_difference": float,
                                     "firings_compared": int, "replications_compared": int}}
    figures
        transient       {"k": [int], "recursion": {id: [x(k) − kλ]}, "simulation": {id: [...]}}
        schedule        {"cycle_time": float, "start": {id: float}, "duration": {id: float}}
                        (periodic schedule from the eigenvector) | None
        running_estimate {"work": [firings], "estimate": [...], "low": [...], "high": [...]}
                        | None
        replication_estimates {"recursion": [float], "simulation": [float]} | None

Numbers are written with 4 significant digits (6 for an exact cycle time), integers with
thousands separators, fractions as percentages, and negative numbers with a true minus sign.
"""

from __future__ import annotations

import html
import math
import os
import tempfile
from collections.abc import Mapping
from importlib import resources
from pathlib import Path
from typing import Any

__all__ = ["MARKER", "ReportError", "fmt", "is_report", "render_page", "write_page"]

#: The first line after the doctype of every page written here: how a report is recognised.
MARKER = "<!-- cyclecheck-report"
SCHEMA_VERSION = 1


class ReportError(ValueError):
    """A result document that cannot be rendered, or a page that may not be written.

    Attributes
    ----------
    item
        What is wrong: a key path in the document (``"analysis.cycle_time"``) or ``"output"``.
    rule
        The rule that was broken, in words.
    path
        The file concerned, when there is one.
    """

    def __init__(self, item: str, rule: str, path: str | os.PathLike[str] | None = None):
        self.item = item
        self.rule = rule
        self.path = None if path is None else os.fspath(path)
        super().__init__(str(self))

    def __str__(self) -> str:
        where = self.path if self.path is not None else "result document"
        return f"{where}: {self.item}: {self.rule}"


def fmt(value: Any, digits: int = 4) -> str:
    """Format a number for the page (``None`` becomes an en dash).

    Examples
    --------
    >>> fmt(13.5), fmt(1 / 13.5), fmt(12000), fmt(-0.25), fmt(123456.7), fmt(None)
    ('13.5', '0.07407', '12,000', '−0.25', '123,457', '–')
    """
    if value is None:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return f"{value:,}".replace("-", "−")
    x = float(value)
    if math.isnan(x):
        return "not a number"
    if math.isinf(x):
        return "∞" if x > 0 else "−∞"
    if x == 0:
        return "0"
    if abs(x) >= 10**digits:
        text = f"{round(x):,}"
    elif abs(x) < 1e-3:
        mantissa, exponent = f"{x:.{digits - 1}e}".split("e")
        mantissa = mantissa.rstrip("0").rstrip(".")
        sup = str(int(exponent)).translate(str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹"))
        text = f"{mantissa}×10{sup}"
    else:
        text = f"{x:.{digits}g}"
        if abs(x) >= 1000 and "." not in text and "e" not in text:
            text = f"{int(text):,}"
    return text.replace("-", "−")


def pct(value: Any) -> str:
    """A fraction as a percentage with one decimal (``0.8889`` → ``88.9 %``)."""
    if value is None:
        return "–"
    return f"{100 * float(value):.1f}\u202f%".replace("-", "−")


def _check(document: Any) -> None:
    """The few rules without which no page can be drawn."""
    if not isinstance(document, Mapping):
        raise ReportError("document", "a result document is a JSON object (a dict)")
    if document.get("document") != "cyclecheck-result":
        raise ReportError("document", "key 'document' must be 'cyclecheck-result'")
    version = document.get("schema_version")
    if version != SCHEMA_VERSION:
        raise ReportError("schema_version",
                          f"version {version!r} is not supported; this cyclecheck reads "
                          f"version {SCHEMA_VERSION}")
    model = document.get("model")
    if not isinstance(model, Mapping):
        raise ReportError("model", "the model section is required")
    if not isinstance(model.get("name"), str):
        raise ReportError("model.name", "the model name is required (a string)")
    for key in ("transitions", "places"):
        if not isinstance(model.get(key), list):
            raise ReportError(f"model.{key}", "a list is required")
    for i, t in enumerate(model["transitions"]):
        if not isinstance(t, Mapping) or not isinstance(t.get("id"), str):
            raise ReportError(f"model.transitions[{i}].id", "every transition needs a string id")
    ids = {t["id"] for t in model["transitions"]}
    for i, p in enumerate(model["places"]):
        if not isinstance(p, Mapping):
            raise ReportError(f"model.places[{i}]", "every place is an object")
        for end in ("from", "to"):
            if p.get(end) not in ids:
                raise ReportError(f"model.places[{i}].{end}",
                                  "must name a transition of model.transitions")
        if not isinstance(p.get("tokens"), int) or p["tokens"] < 0:
            raise ReportError(f"model.places[{i}].tokens", "must be an integer >= 0")
    for key in ("analysis", "simulation", "comparison", "figures", "settings", "versions"):
        if document.get(key) is not None and not isinstance(document[key], Mapping):
            raise ReportError(key, "must be an object when present")
    if not document.get("analysis") and not document.get("simulation"):
        raise ReportError("analysis", "a document needs an analysis or a simulation section")


def _stylesheet() -> str:
    return resources.files("cyclecheck.reports").joinpath("style.css").read_text("utf-8")


def render_page(document: Mapping[str, Any]) -> str:
    """Render a result document as a self-contained HTML page.

    Parameters
    ----------
    document
        A result document of schema version 1 (see the module docstring).

    Returns
    -------
    str
        The page. The same document always gives the same text.

    Raises
    ------
    ReportError
        When the document is not a result document of a supported version, or a value has
        the wrong type (the error names the key).
    """
    from . import sections  # imports matplotlib; kept out of the CLI's start-up

    _check(document)
    model = document["model"]
    try:
        body = sections.body(document)
    except (AttributeError, TypeError, ValueError, KeyError, IndexError) as error:
        if isinstance(error, ReportError):
            raise
        raise ReportError(getattr(error, "item", "document"),
                          f"a value has the wrong type or shape ({error})") from error
    title = html.escape(f"{model['name']} · cycle check")
    version = html.escape(str((document.get("versions") or {}).get("cyclecheck", "")))
    return (
        "<!DOCTYPE html>\n"
        f"{MARKER} schema {SCHEMA_VERSION}: a review page written by cyclecheck "
        "(it may be overwritten by a newer one) -->\n"
        '<html lang="en">\n<head>\n<meta charset="utf-8">\n'
        '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
        f'<meta name="generator" content="cyclecheck-report {version}">\n'
        # An empty icon: browsers would otherwise ask the server for /favicon.ico.
        '<link rel="icon" href="data:,">\n'
        f"<title>{title}</title>\n<style>\n{_stylesheet()}</style>\n</head>\n"
        f"<body>\n{body}</body>\n</html>\n"
    )


def is_report(path: str | os.PathLike[str]) -> bool:
    """True if the file at ``path`` is a page written by :func:`write_page`."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(512).decode("utf-8", errors="replace")
    except OSError:
        return False
    lines = head.lstrip("\ufeff").splitlines()
    return len(lines) >= 2 and lines[0] == "<!DOCTYPE html>" and lines[1].startswith(MARKER)


def write_page(
    document: Mapping[str, Any], path: str | os.PathLike[str], force: bool = False
) -> Path:
    """Render ``document`` and write it to ``path`` atomically.

    The page is rendered first, written to a temporary file in the same folder, flushed to
    disk and renamed over ``path``: a reader never sees half a page, and a failure leaves any
    old file as it was.

    Parameters
    ----------
    document
        The result document.
    path
        Where to write the page.
    force
        Overwrite a file that is not a cyclecheck report page. Without it, only a missing file
        or an earlier report is replaced.

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    ReportError
        When ``path`` is a folder, or an existing file that is not a report and ``force`` is
        false, or the document cannot be rendered.
    """
    target = Path(path)
    if target.is_dir():
        raise ReportError("output", "the path is a folder; give a file name for the page",
                          target)
    if target.exists() and not force and not is_report(target):
        raise ReportError(
            "output",
            "the file exists and is not a cyclecheck report page; it is left untouched "
            "(overwrite it with force=True, on the command line --force)",
            target,
        )
    data = render_page(document).encode("utf-8")
    folder = target.parent
    if not folder.is_dir():
        raise ReportError("output", "the folder of the page does not exist", target)
    handle, temporary = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp",
                                         dir=folder)
    try:
        with os.fdopen(handle, "wb") as stream:
            stream.write(data)
            stream.flush()
            os.fsync(stream.fileno())
        os.chmod(temporary, 0o644)
        os.replace(temporary, target)
    except BaseException:
        try:
            os.unlink(temporary)
        except FileNotFoundError:
            pass
        raise
    try:  # make the rename itself durable; not possible on every platform
        folder_handle = os.open(folder, os.O_RDONLY)
    except OSError:
        return target
    try:
        os.fsync(folder_handle)
    except OSError:
        pass
    finally:
        os.close(folder_handle)
    return target
