r"""The review page: a result document rendered as one self-contained HTML file.

The page computes nothing of the analysis: every number on it comes from the document; the
page only lays out the graph drawing, formats numbers and draws figures. It has no scripts, no
external references (CSS inline, figures inline SVG), and the same document always gives the
same bytes. Text that comes from the model (names, labels, descriptions, ids, reasons) is
escaped.

The result document, version 1
------------------------------
A JSON-ready ``dict``. Keys marked *required* must be there; every other key may be missing
or ``None``, and the page then leaves its part out. Which sections a document needs depends on
its command: ``check`` needs ``analysis``, ``simulation`` and ``comparison``; ``analyze``
needs ``analysis``; ``simulate`` needs ``simulation``; any other at least one of ``analysis``
and ``simulation``. A key that is there must have the type given below (a number where a number
belongs): :func:`cyclecheck.reports.schema.check_document` enforces all of it and raises
:class:`ReportError` naming the key and the rule::

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
        cycle_time          float: λ, exact for fixed durations, the estimate    required
                            otherwise
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
                            (0 for an exact analysis: the eigenvalue needs no firings)
        exact               bool: fixed durations, so λ is exact
        strongly_connected  bool: when false, transitions may have different cycle times
        eigenvector         {id: float} | None
        slack               {"transitions": {id: float | None}, "places": [float | None,
                            one per place]}: how much a duration (a hold) may grow before
                            λ changes
        certificate         {"checked": bool, "text": str, and any of the numbers
                            "circuit_ratio", "circuit_gap", "monotone_gap", "eigen_residual",
                            "max_reduced_weight", "tolerance"}
        charpoly            {"corners": [[value | None (ε), multiplicity], ...], "terms":
                            [[k, coeff], ...] meaning coeff ⊗ z^k} | {"skipped": reason}
        transient_firings   int | None: firings before the periodic regime (fixed
                            durations only; a random model has no periodic regime, and its
                            ``mean_value_transient_firings``, which belongs to the mean
                            durations, is not shown as the model's transient)
        criticality         {"transitions": {id: fraction}, "places": [fraction, ...],
                            "definition": str} | None: how often the element set the firing
                            time (random durations); the definition, when given, is shown
        utilization         {id: fraction ≥ 0} | None: mean busy servers / servers (at most 1
                            when ``servers`` is given; older documents without it gave the
                            share of time busy, which may exceed 1 where firings overlap)
        servers             {id: int ≥ 1 | None}: the tokens of the transition's self-loop,
                            None without one (no limit)
        busy_servers        {id: float ≥ 0 | None}: mean firings in progress (shown for
                            transitions without a server limit)
        sensitivity         [{"element": "transition" | "place" (required), "id": id
                              (transitions, required), "index": place index from 0 (places,
                              required), "derivative": finite float | None: dλ/d(mean
                              duration or hold), "ci": [low, high] with low <= high (the 95 %
                              interval; for fixed durations the one-sided derivatives
                              [decrease, increase])}]
        sensitivity_exact   bool: exact derivatives (fixed durations)
        sensitivity_omitted int: entries left out of a long list
        bottleneck          a ``sensitivity`` entry (the largest derivative among elements of
                            positive mean) | None, optionally with "mean", "name",
                            "on_mean_critical_circuit": bool, "faster_10_percent": {"mean",
                            "cycle_time", "change"} (first order), or
                            "cycle_time_if_10_percent_faster" and
                            "cycle_time_if_10_percent_faster_ci": [low, high]
        unbounded_places    [{"index", "from", "to" (required), "growth_rate": tokens per
                            time unit | None (no bound at all), "status": "unstable" |
                            "critical load", "from_cycle_time", "to_cycle_time", "text"}]:
                            places that gain tokens without bound; ``from`` and ``to`` those
                            of model.places[index]; [] when none
                            Ids in these keys must name transitions of model.transitions when
                            the model lists all of them (n_transitions equal to the list's
                            length); place indices must be below n_places.
    simulation      the SimPy side: cycle_time (required), cycle_time_ci, throughput,
                    firings_simulated, exact, utilization, criticality, and the keys from
                    servers to unbounded_places above, as in ``analysis`` (the page reads
                    them from ``analysis`` first)
    comparison      {"verdict": "agrees" | "disagrees" (required), "reasons": [str, ...],
                     "sample_path": {"identical": bool, "max_relative_difference": float,
                                     "firings_compared": int, "replications_compared": int}}
    figures
        transient       {"k": [int], "recursion": {id: [x(k) − kλ]}, "simulation": {id: [...]}}
                        (every curve as long as k)
        schedule        {"cycle_time": float, "start": {id: float}, "duration": {id: float}}
                        (periodic schedule from the eigenvector) | None: None for random
                        durations and for components that run at different cycle times,
                        and the page says which
        running_estimate {"work": [firings], "estimate": [...], "low": [...], "high": [...]}
                        (four lists of one length) | None
        replication_estimates {"recursion": [float], "simulation": [float]} | None

The documents of ``analyze`` and ``simulate`` may hold the keys of ``analysis`` (or of
``simulation``) at their top level, as ``--json`` prints them;
:func:`cyclecheck.reports.schema.as_sections` maps them into their section.

Numbers are written with 4 significant digits (6 for an exact cycle time, wherever it is
shown), both ends of an interval with as many decimals, integers with thousands separators,
fractions as percentages, rates also per hour where the time unit is s or min, and negative
numbers with a true minus sign.

The page, top to bottom: a warning when places grow without bound; the verdict with the
bottleneck (its derivative, what 10 % faster gives, ties, and for random models whether it
lies on the critical circuit of the mean durations); the key numbers, each said to be exact
or estimated; where to act (sensitivity, utilization per server); the event graph (folded
into bands, in part with a map of its components above 60 transitions); transitions and
places; the periodic schedule or the variability of the estimates; x(k) − kλ (a band for
random models); the sample paths; what belongs to the mean durations (random models);
semantics, reproducibility and cautions; and the algebra as an appendix.
"""

from __future__ import annotations

import html
from collections.abc import Mapping
from importlib import resources
from typing import Any

from .markup import fmt, pct
from .schema import SCHEMA_VERSION, ReportError, as_sections, check_document

__all__ = ["MARKER", "ReportError", "fmt", "pct", "render_page"]

#: The first line after the doctype of every page written here: how a report is recognised.
MARKER = "<!-- cyclecheck-report"


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
    from . import sections, sweep, trace  # import matplotlib; kept out of the CLI's start-up

    check_document(document)
    document = as_sections(document)
    model = document["model"]
    try:
        body = {"sweep": sweep.body, "trace": trace.body}.get(
            document.get("command"), sections.body)(document)
    # check_document lets through only what the sections can draw; this is the last guard,
    # so that a document never ends in anything but a ReportError.
    except (AttributeError, TypeError, ValueError, KeyError, IndexError,
            ArithmeticError) as error:
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
