"""The rules a result document must keep before a page is drawn from it.

:func:`check_document` is the one place that validates a document; everything the page does
afterwards trusts what it let through. It raises :class:`ReportError`, carrying the key path
of what is wrong (``"analysis.cycle_time"``, ``"model.places[3].to"``) and the rule in words,
so that the command line can print one clear line and exit 2. The shape itself is described
in the docstring of :mod:`cyclecheck.reports.page`.

Keys the page does not read are not checked (more keys are welcome); keys it reads may be
missing or ``null`` unless the shape marks them required, and otherwise must have the type the
page needs: a number where a number belongs, a list of numbers of the right length for each
figure, ids that name transitions of the model.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable, Iterable, Mapping
from typing import Any

from ..algebra.exceptions import CycleCheckError

__all__ = ["DOCUMENT_KIND", "SCHEMA_VERSION", "ReportError", "as_sections", "check_document"]

#: The value of the key ``document`` that marks a cyclecheck result document.
DOCUMENT_KIND = "cyclecheck-result"
#: The version of the documents' shape; the one definition, which the builder of the
#: documents (``cyclecheck.simulate.result``) writes and this checker requires.
SCHEMA_VERSION = 1

#: The sections without which a document of each command cannot be reviewed: a check page
#: without the max-plus side, the SimPy side or the comparison would show a verdict on nothing.
REQUIRED_SECTIONS = {
    "check": ("analysis", "simulation", "comparison"),
    "analyze": ("analysis",),
    "simulate": ("simulation",),
    "trace": ("verdict",),
    "sweep": ("vary", "points"),
}


class ReportError(CycleCheckError, ValueError):
    """A result document that cannot be rendered.

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


#: A check takes a value that is not ``None`` and the key path it was found at.
Check = Callable[[Any, str], None]


def _what(value: Any) -> str:
    """A wrong value as a message names it (JSON words: a document is JSON)."""
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        shown = value if len(value) <= 40 else value[:37] + "…"
        return f'the text "{shown}"'
    if isinstance(value, Mapping):
        return "an object"
    if isinstance(value, (list, tuple)):
        return "a list"
    if isinstance(value, (int, float)):
        return f"the number {value!r}"
    return f"a {type(value).__name__}"


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def number(value: Any, item: str) -> None:
    if not _is_number(value):
        raise ReportError(item, f"must be a number, not {_what(value)}")


def finite(value: Any, item: str) -> None:
    """A number a figure can place on an axis."""
    number(value, item)
    if not math.isfinite(value):
        raise ReportError(item, f"must be a finite number, not {value!r}")


def integer(minimum: int | None = None) -> Check:
    def check(value: Any, item: str) -> None:
        if not isinstance(value, int) or isinstance(value, bool):
            raise ReportError(item, f"must be a whole number, not {_what(value)}")
        if minimum is not None and value < minimum:
            raise ReportError(item, f"must be >= {minimum}, not {value}")
    return check


def boolean(value: Any, item: str) -> None:
    if not isinstance(value, bool):
        raise ReportError(item, f"must be true or false, not {_what(value)}")


def text(value: Any, item: str) -> None:
    if not isinstance(value, str):
        raise ReportError(item, f"must be a text, not {_what(value)}")


def scalar(value: Any, item: str) -> None:
    """Shown as written: a text or a number (a duration written as ``3``)."""
    if not isinstance(value, str) and not _is_number(value):
        raise ReportError(item, f"must be a text or a number, not {_what(value)}")


def _at_least(low: float) -> Check:
    def check(value: Any, item: str) -> None:
        number(value, item)
        if not value >= low:
            raise ReportError(item, f"must be >= {low:g}, not {value!r}")
    return check


def nullable(check: Check) -> Check:
    def inner(value: Any, item: str) -> None:
        if value is not None:
            check(value, item)
    return inner


def one_of(*choices: str) -> Check:
    words = " or ".join(repr(c) for c in choices)

    def check(value: Any, item: str) -> None:
        if value not in choices or not isinstance(value, str):
            raise ReportError(item, f"must be {words}")
    return check


def member(names: Iterable[str], rule: str) -> Check:
    known = frozenset(names)

    def check(value: Any, item: str) -> None:
        if not isinstance(value, str) or value not in known:
            raise ReportError(item, rule)
    return check


def index_below(bound: int, rule: str) -> Check:
    def check(value: Any, item: str) -> None:
        integer(0)(value, item)
        if value >= bound:
            raise ReportError(item, rule)
    return check


def list_of(check: Check, length: int | None = None, nonempty: bool = False) -> Check:
    def inner(value: Any, item: str) -> None:
        if not isinstance(value, list):
            raise ReportError(item, f"must be a list, not {_what(value)}")
        if length is not None and len(value) != length:
            raise ReportError(item, f"must be a list of {length} values, not {len(value)}")
        if nonempty and not value:
            raise ReportError(item, "must not be empty")
        for i, element in enumerate(value):
            check(element, f"{item}[{i}]")
    return inner


def pair(first: Check, second: Check) -> Check:
    def inner(value: Any, item: str) -> None:
        list_of(lambda v, i: None, length=2)(value, item)
        first(value[0], f"{item}[0]")
        second(value[1], f"{item}[1]")
    return inner


def mapping_of(check: Check, nonempty: bool = False) -> Check:
    """An object whose keys are ids (of transitions) and whose values all pass ``check``."""
    def inner(value: Any, item: str) -> None:
        if not isinstance(value, Mapping):
            raise ReportError(item, f"must be an object, not {_what(value)}")
        if nonempty and not value:
            raise ReportError(item, "must not be empty")
        for key, element in value.items():
            check(element, f"{item}.{key}")
    return inner


def fields(spec: Mapping[str, Check], required: Iterable[str] = ()) -> Check:
    """An object with known keys: ``null`` counts as missing, unknown keys are welcome."""
    needed = tuple(required)

    def inner(value: Any, item: str) -> None:
        if not isinstance(value, Mapping):
            raise ReportError(item, f"must be an object, not {_what(value)}")
        for key in needed:
            if value.get(key) is None:
                raise ReportError(f"{item}.{key}", "is required")
        for key, check in spec.items():
            if value.get(key) is not None:
                check(value[key], f"{item}.{key}")
    return inner


def series(names: tuple[str, ...], length_of: str) -> Check:
    """Lists of finite numbers, all as long as the list under ``length_of``."""
    def inner(value: Any, item: str) -> None:
        fields({name: list_of(finite) for name in names}, required=names)(value, item)
        length = len(value[length_of])
        for name in names:
            if len(value[name]) != length:
                raise ReportError(f"{item}.{name}", f"must have as many values as "
                                  f"{item}.{length_of} ({length}), not {len(value[name])}")
    return inner


def _transient(value: Any, item: str) -> None:
    curves = mapping_of(list_of(finite))
    fields({"k": list_of(finite), "recursion": curves, "simulation": curves})(value, item)
    if not value.get("recursion"):
        return  # the page leaves the figure out
    if value.get("k") is None:
        raise ReportError(f"{item}.k", "is required to draw the curves")
    length = len(value["k"])
    for side in ("recursion", "simulation"):
        for name, curve in (value.get(side) or {}).items():
            if len(curve) != length:
                raise ReportError(f"{item}.{side}.{name}", f"must have as many values as "
                                  f"{item}.k ({length}), not {len(curve)}")


def _charpoly(value: Any, item: str) -> None:
    if isinstance(value, Mapping) and value.get("skipped") is not None:
        scalar(value["skipped"], f"{item}.skipped")
        return
    fields({"corners": list_of(pair(nullable(number), integer(0))),
            "terms": list_of(pair(integer(0), number))})(value, item)


CERTIFICATE_NUMBERS = ("circuit_ratio", "circuit_gap", "monotone_gap", "eigen_residual",
                       "max_reduced_weight", "tolerance")


def _entry(transition: Check, place: Check) -> Check:
    """One element of ``sensitivity``: a transition by id or a place by index, dλ/d(mean),
    and its 95 % interval (``[d, d]`` for fixed durations)."""
    def check(value: Any, item: str) -> None:
        # A derivative the estimate could not give (not finite) is written null.
        fields({"element": one_of("transition", "place"), "derivative": finite,
                "ci": list_of(nullable(finite), length=2), "path_criticality": number},
               required=("element",))(value, item)
        if value["element"] == "transition":
            fields({"id": transition}, required=("id",))(value, item)
        else:
            fields({"index": place}, required=("index",))(value, item)
        low, high = value.get("ci") or [None, None]
        if low is not None and high is not None and low > high:
            raise ReportError(f"{item}.ci", f"the low end {low!r} must not exceed the high "
                                            f"end {high!r}")
    return check


def _bottleneck(entry: Check) -> Check:
    """The bottleneck: a sensitivity entry (the largest derivative among elements of positive
    mean), with what a 10 % faster element gives, in either of two spellings."""
    def check(value: Any, item: str) -> None:
        entry(value, item)
        fields({"cycle_time_if_10_percent_faster": finite,
                "cycle_time_if_10_percent_faster_ci": list_of(nullable(finite), length=2),
                "faster_10_percent": fields({"mean": finite, "cycle_time": finite,
                                             "change": finite}),
                "mean": number, "name": text, "on_mean_critical_circuit": boolean}
               )(value, item)
    return check


def _where_to_act(side: Any, item: str, places: list[Any]) -> None:
    """Rules that join keys: an unbounded place is the place of the model at its index,
    utilization per server is at most 1."""
    if not isinstance(side, Mapping):
        return
    for i, grow in enumerate(side.get("unbounded_places") or []):
        index = grow["index"]
        if index < len(places):
            for end in ("from", "to"):
                if grow[end] != places[index][end]:
                    raise ReportError(f"{item}.unbounded_places[{i}].{end}",
                                      f"must be {places[index][end]!r}, the {end} of "
                                      f"model.places[{index}]")
    if side.get("servers") is not None:
        for key, value in (side.get("utilization") or {}).items():
            if value is not None and value > 1 + 1e-9:
                raise ReportError(f"{item}.utilization.{key}", "busy servers per server must be "
                                  f"at most 1, not {value!r}")


def _sections(ids: set[str], n_places: int, complete: bool = True) -> dict[str, Check]:
    """The checks of the document's sections, for a model with these transitions and places
    (``complete``: the model lists all its transitions, so ids can be checked by name)."""
    by_id = mapping_of(nullable(number))
    per_place = list_of(nullable(number))
    interval = list_of(nullable(number), length=2)
    transition = member(ids, "must name a transition of model.transitions")
    criticality = fields({"transitions": by_id, "places": per_place, "definition": text})
    named = transition if complete else text
    place = index_below(n_places, "must be the index of a place of the model")
    entry = _entry(named, place)

    def keyed(check: Check) -> Check:
        """An object by transition id whose values pass ``check``; ids named when known."""
        def inner(value: Any, item: str) -> None:
            mapping_of(check)(value, item)
            for key in value:
                named(key, f"{item}.{key}")
        return inner

    act = {
        "sensitivity": list_of(entry),
        "bottleneck": _bottleneck(entry),
        "sensitivity_exact": boolean,
        "sensitivity_omitted": integer(0),
        # growth_rate null: without bound in no time (the source never waits).
        "unbounded_places": list_of(fields(
            {"index": place, "from": named, "to": named, "growth_rate": finite,
             "status": one_of("unstable", "critical load"), "from_cycle_time": number,
             "to_cycle_time": number, "text": scalar},
            required=("index", "from", "to"))),
        "utilization": keyed(nullable(_at_least(0.0))),
        "utilization_definition": text,
        "busy_servers": keyed(nullable(_at_least(0.0))),
        "servers": keyed(nullable(integer(1))),
    }
    analysis = fields({
        "cycle_time": number,
        "cycle_time_ci": interval,
        "throughput": number,
        "cycle_time_by_transition": by_id,
        "critical_circuits": list_of(list_of(named)),
        "critical_places": list_of(index_below(n_places, "must be the index of a place of "
                                                         "model.places")),
        "cyclicity": integer(1),
        "bounds": fields({"lower": number, "upper": number}),
        "firings_simulated": integer(0),
        "exact": boolean,
        "strongly_connected": boolean,
        "eigenvector": by_id,
        "slack": fields({"transitions": by_id, "places": per_place}),
        "certificate": fields({"checked": boolean, "text": scalar,
                               **dict.fromkeys(CERTIFICATE_NUMBERS, number)}),
        "charpoly": _charpoly,
        "transient_firings": integer(0),
        "criticality": criticality,
        **act,
    }, required=("cycle_time",))
    simulation = fields({
        "cycle_time": number,
        "cycle_time_ci": interval,
        "throughput": number,
        "cycle_time_by_transition": by_id,
        "firings_simulated": integer(0),
        "exact": boolean,
        "criticality": criticality,
        **act,
    }, required=("cycle_time",))
    comparison = fields({
        "verdict": one_of("agrees", "disagrees"),
        "reasons": list_of(scalar),
        "sample_path": fields({"identical": boolean, "max_relative_difference": number,
                               "firings_compared": integer(0),
                               "replications_compared": integer(0)}),
    }, required=("verdict",))
    figures = fields({
        "transient": _transient,
        "schedule": fields({"cycle_time": finite, "start": mapping_of(finite, nonempty=True),
                            "duration": mapping_of(finite)},
                           required=("cycle_time", "start", "duration")),
        "running_estimate": series(("work", "estimate", "low", "high"), "work"),
        "replication_estimates": fields({"recursion": list_of(finite),
                                         "simulation": list_of(finite)}),
    })
    settings = fields({"seed": integer(), "precision": number, "replications": integer(0),
                       "firings_per_replication": integer(0), "warmup": integer(0)})
    return {"analysis": analysis, "simulation": simulation, "comparison": comparison,
            "figures": figures, "settings": settings, "versions": mapping_of(scalar),
            "command": text, "command_line": text, "created": text}


MODEL = fields({
    "name": text, "time_unit": text, "description": text, "path": text, "sha256": text,
    "n_transitions": integer(0), "n_places": integer(0), "is_random": boolean,
    "transitions": list_of(fields({"label": text, "duration": scalar,
                                   "mean_duration": number})),
    "places": list_of(fields({"hold": scalar, "mean_hold": number, "label": text})),
})


def _distribution(value: Any, item: str) -> None:
    """The figure data of one element: x, ecdf and model_cdf of one length (finite), and the
    model's quantiles beside them (null where the law has none)."""
    fields({"x": list_of(finite), "ecdf": list_of(finite), "model_cdf": list_of(finite),
            "model_quantile": list_of(nullable(finite)), "n": integer(0), "id": scalar,
            "law": scalar, "kind": one_of("duration", "hold"), "rejected": boolean,
            "adjusted_p": number}, required=("x", "ecdf", "model_cdf"))(value, item)
    length = len(value["x"])
    for key in ("ecdf", "model_cdf", "model_quantile"):
        if value.get(key) is not None and len(value[key]) != length:
            raise ReportError(f"{item}.{key}", f"must have as many values as {item}.x "
                              f"({length}), not {len(value[key])}")


_INTERVAL = list_of(nullable(number), length=2)
_TEST = fields({"p_value": number, "adjusted_p": number, "rejected": boolean,
                "summary": scalar, "test": scalar})
#: The judgement of an event log (``trace``): checked at the top level of its document.
JUDGEMENT = {
    "verdict": one_of("agrees", "disagrees"), "reasons": list_of(scalar),
    "notes": list_of(scalar), "violations": integer(0), "firings_checked": integer(0),
    "firings_logged": integer(0), "replications": integer(1),
    "first_violations": list_of(fields({"transition": scalar, "firing": integer(0),
                                        "rule": scalar, "message": scalar})),
    "family": fields({"tests": integer(0), "alpha": number}),
    "power": fields({"probability": number, "method": scalar}),
    "transitions": list_of(fields({
        "id": scalar, "law": scalar, "observed": integer(0), "observed_mean": number,
        "observed_mean_ci": _INTERVAL, "model_mean": number, "fit_test": _TEST,
        "mean_test": _TEST, "detectable_change": number}, required=("id",))),
    "places": list_of(fields({"index": integer(0), "id": scalar, "law": scalar,
                              "exact": integer(0), "censored": integer(0),
                              "fit_test": _TEST, "censoring_test": _TEST})),
    "cycle_time_test": fields({"components": list_of(fields({
        "component": scalar, "log": number, "log_ci": _INTERVAL, "model": number,
        "model_ci": _INTERVAL, "test": _TEST, "detectable_change": number}))}),
    "figures": fields({"distributions": list_of(_distribution)}),
    "not_judged": list_of(fields({"id": scalar, "what": scalar, "reason": scalar})),
}


def _sweep(document: Mapping[str, Any], ids: set[str]) -> None:
    """A sweep: its targets, and one point per combination of their values, in order."""
    transition = member(ids, "must name a transition of model.transitions")
    vary = document["vary"]
    list_of(fields({"target": text, "values": list_of(finite, nonempty=True)},
                   required=("target", "values")), nonempty=True)(vary, "vary")
    targets = [v["target"] for v in vary]
    count = math.prod(len(v["values"]) for v in vary)
    number_pair = list_of(number, length=2)
    point = fields({
        "point": integer(0), "values": mapping_of(finite),
        "status": one_of("exact", "estimated", "not live"), "exact": boolean,
        "cycle_time": finite, "cycle_time_ci": number_pair, "throughput": finite,
        "throughput_ci": list_of(nullable(number), length=2),
        "critical_circuit": list_of(transition), "critical_circuits": list_of(list_of(transition)),
        "deadlock": list_of(transition), "bounds": fields({"lower": number, "upper": number}),
        "relative_half_width": number, "replications": integer(0),
        "busiest": fields({"transition": transition, "utilization": finite},
                          required=("transition", "utilization")),
        "differences": mapping_of(fields({"from_point": index_below(count, "must be the "
                                                                           "index of a point"),
                                          "cycle_time_difference": finite,
                                          "ci": number_pair})),
    }, required=("values", "status"))
    points = document["points"]
    list_of(point, length=count)(points, "points")
    for i, p in enumerate(points):
        item = f"points[{i}]"
        if p.get("point", i) != i:
            raise ReportError(f"{item}.point", f"must be {i}: points are listed in order")
        if sorted(p["values"]) != sorted(targets):
            raise ReportError(f"{item}.values", "must hold one value for each target of vary "
                              f"({', '.join(targets)})")
        if p["status"] != "not live" and p.get("cycle_time") is None:
            raise ReportError(f"{item}.cycle_time", "is required at a live point")


def _lists_every_transition(model: Mapping[str, Any]) -> bool:
    """Whether the model section lists all the model's transitions: a large model lists only
    its first ones (``model.elements_listed``), and its ids can then not be checked by name."""
    return model.get("n_transitions") in (None, len(model["transitions"]))


def _structure(document: Any) -> None:
    """The rules without which nothing can be looked up: kind, version, model, ids."""
    if not isinstance(document, Mapping):
        raise ReportError("document", "a result document is a JSON object (a dict)")
    if document.get("document") != DOCUMENT_KIND:
        raise ReportError("document", f"key 'document' must be '{DOCUMENT_KIND}'")
    version = document.get("schema_version")
    if not isinstance(version, int) or isinstance(version, bool):
        raise ReportError("schema_version", f"must be the number {SCHEMA_VERSION} (the version "
                          f"this cyclecheck reads), not {_what(version)}")
    if version != SCHEMA_VERSION:
        raise ReportError("schema_version", f"version {version} is not supported; this "
                          f"cyclecheck reads version {SCHEMA_VERSION}")
    model = document.get("model")
    if not isinstance(model, Mapping):
        raise ReportError("model", "the model section is required")
    if not isinstance(model.get("name"), str):
        raise ReportError("model.name", "the model name is required (a string)")
    for key in ("transitions", "places"):
        if not isinstance(model.get(key), list):
            raise ReportError(f"model.{key}", "a list is required")
    seen: set[str] = set()
    for i, t in enumerate(model["transitions"]):
        if not isinstance(t, Mapping) or not isinstance(t.get("id"), str):
            raise ReportError(f"model.transitions[{i}].id", "every transition needs a string id")
        if t["id"] in seen:
            raise ReportError(f"model.transitions[{i}].id",
                              f"the id {t['id']!r} is used twice; ids must be unique")
        seen.add(t["id"])
    complete = _lists_every_transition(model)  # else a listed place may join unlisted ones
    for i, p in enumerate(model["places"]):
        if not isinstance(p, Mapping):
            raise ReportError(f"model.places[{i}]", "every place is an object")
        for end in ("from", "to"):
            if not isinstance(p.get(end), str) or (complete and p[end] not in seen):
                raise ReportError(f"model.places[{i}].{end}",
                                  "must name a transition of model.transitions")
        tokens = p.get("tokens")
        if not isinstance(tokens, int) or isinstance(tokens, bool) or tokens < 0:
            raise ReportError(f"model.places[{i}].tokens", "must be an integer >= 0")


#: Keys of every document that belong to none of its sections.
COMMON_KEYS = frozenset({"document", "schema_version", "command", "command_line", "created",
                         "versions", "model", "settings", "figures"})
#: The section that holds the results of the flat documents ``analyze`` and ``simulate`` print.
FLAT_SECTION = {"analyze": "analysis", "simulate": "simulation"}


def as_sections(document: Mapping[str, Any]) -> Mapping[str, Any]:
    """The document with its results in sections, as a ``check`` document has them.

    ``analyze --json`` and ``simulate --json`` print their results at the top level (the keys
    of DESIGN.md); the page and the checks read them under ``analysis`` or ``simulation``.
    Any other document is returned as it is.
    """
    command = document.get("command")
    key = FLAT_SECTION.get(command) if isinstance(command, str) else None
    if key is None or document.get(key) is not None or "cycle_time" not in document:
        return document
    view = {k: v for k, v in document.items() if k in COMMON_KEYS}
    view[key] = {k: v for k, v in document.items() if k not in COMMON_KEYS}
    return view


def check_document(document: Any) -> None:
    """Check a result document against the rules of schema version 1.

    Parameters
    ----------
    document
        The parsed JSON document.

    Raises
    ------
    ReportError
        At the first broken rule, naming the key path and the rule.

    Examples
    --------
    >>> try:
    ...     check_document({"document": "cyclecheck-result", "schema_version": 1,
    ...                     "command": "check", "simulation": {"cycle_time": 2.0},
    ...                     "model": {"name": "m", "transitions": [], "places": []}})
    ... except ReportError as error:
    ...     print(error.item)
    ...     print(error.rule)
    analysis
    is missing: a document of `check` has the sections analysis, simulation and comparison
    """
    _structure(document)
    document = as_sections(document)
    model = document["model"]
    MODEL(model, "model")
    for key in ("analysis", "simulation", "comparison", "figures", "settings", "versions"):
        if document.get(key) is not None and not isinstance(document[key], Mapping):
            raise ReportError(key, f"must be an object when present, not {_what(document[key])}")
    command = document.get("command")
    needed = REQUIRED_SECTIONS.get(command, ()) if isinstance(command, str) else ()
    for key in needed:
        if document.get(key) is None:
            names = ", ".join(needed[:-1]) + (" and " if len(needed) > 1 else "") + needed[-1]
            raise ReportError(key, f"is missing: a document of `{command}` has the "
                                   f"section{'s' if len(needed) > 1 else ''} {names}")
    if command == "trace":
        for key, check in JUDGEMENT.items():
            if document.get(key) is not None:
                check(document[key], key)
    elif command == "sweep":
        _sweep(document, {str(t["id"]) for t in model["transitions"]})
    elif not document.get("analysis") and not document.get("simulation"):
        raise ReportError("analysis", "a document needs an analysis or a simulation section")
    ids = {str(t["id"]) for t in model["transitions"]}
    complete = _lists_every_transition(model)
    n_places = max(len(model["places"]), model.get("n_places") or 0)
    for key, check in _sections(ids, n_places, complete).items():
        if document.get(key) is not None:
            check(document[key], key)
    for key in ("analysis", "simulation"):
        _where_to_act(document.get(key), key, model["places"])
