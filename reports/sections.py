"""The sections of the review page, each built from one part of the result document.

Each function returns HTML text (or ``""`` when the document has nothing for it). Every string
from the document goes through :func:`html.escape`; numbers go through
:func:`cyclecheck.reports.page.fmt`. The order of the page: verdict, key numbers, the event
graph, transitions and places, the periodic schedule, the transient, variability (random
durations), the sample-path comparison, the algebraic checks, semantics, reproducibility and
cautions.
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from typing import Any

from . import figures, notes
from .layout import PlaceSpec, choose_critical_places, layout_graph
from .markup import MAX_ROWS, Figures, e, fmt, get, pct, section, table, time_unit, with_unit
from .schema import ReportError

__all__ = ["body"]

def _masthead(document: Mapping[str, Any]) -> str:
    model = document["model"]
    command = get(document, "command")
    kind = {"check": "simulation checked against max-plus theory",
            "analyze": "max-plus analysis", "simulate": "simulation",
            "sweep": "parameter sweep", "trace": "event log judged against the model"}.get(
        command, f"result of “{e(str(command))}”" if command else "result")
    description = model.get("description")
    parts = [f'<p class="kicker">cyclecheck review page · {kind}</p>',
             f"<h1>{e(model['name'])}</h1>"]
    if description:
        parts.append(f'<p class="description">{e(str(description))}</p>')
    facts = []
    if model.get("path"):
        facts.append(f"<div><dt>Model</dt><dd><code>{e(str(model['path']))}</code></dd></div>")
    n_t = model.get("n_transitions", len(model["transitions"]))
    n_p = model.get("n_places", len(model["places"]))
    facts.append(f"<div><dt>Size</dt><dd>{fmt(n_t)} transitions, {fmt(n_p)} places, "
                 f"{'random' if model.get('is_random') else 'fixed'} durations</dd></div>")
    if document.get("created"):
        facts.append(f"<div><dt>Created</dt><dd>{e(str(document['created']))}</dd></div>")
    parts.append(f'<dl class="facts">{"".join(facts)}</dl>')
    parts.append('<p class="model-note">Results below are model-based; '
                 '<a href="#cautions">read the cautions</a> before acting on them.</p>')
    return '<header class="masthead">\n' + "\n".join(parts) + "\n</header>\n"


def _verdict(document: Mapping[str, Any]) -> str:
    comparison = get(document, "comparison")
    if comparison:
        verdict = comparison.get("verdict")
        if verdict not in ("agrees", "disagrees"):
            raise ReportError("comparison.verdict", "must be 'agrees' or 'disagrees'")
        agrees = verdict == "agrees"
        mark, word = ("✓", "Agrees") if agrees else ("✗", "Disagrees")
        line = ("The SimPy simulation and the max-plus theory agree on this model."
                if agrees else "The SimPy simulation and the max-plus theory disagree on this "
                "model: the model or the simulation needs attention before its numbers are "
                "used.")
        reasons = comparison.get("reasons") or []
        why = "".join(f"<li>{e(str(r))}</li>" for r in reasons)
        why = f'<ul class="reasons">{why}</ul>' if why else ""
        css = "agrees" if agrees else "disagrees"
    else:
        mark, css = "○", "neutral"
        if document.get("analysis") and not document.get("simulation"):
            word, line = "Analysis only", "No simulation was run: the numbers are max-plus theory."
        else:
            word, line = "No verdict", "The document holds no comparison of the two engines."
        why = ""
    return (f'<section id="verdict" class="verdict {css}" aria-labelledby="verdict-heading">\n'
            f'<h2 id="verdict-heading" class="verdict-word"><span class="mark" aria-hidden='
            f'"true">{mark}</span> {word}</h2>\n<p class="verdict-line">{line}</p>\n{why}'
            "</section>\n")


def _circuit_text(circuit: Sequence[str]) -> str:
    names = [e(str(t)) for t in circuit]
    return " → ".join([*names, names[0]]) if names else "–"


def _numbers(document: Mapping[str, Any]) -> str:
    unit = time_unit(document)
    analysis = get(document, "analysis") or {}
    simulation = get(document, "simulation") or {}
    main = analysis or simulation
    exact = bool(analysis.get("exact"))
    lam = main.get("cycle_time")
    ci = main.get("cycle_time_ci") or [None, None]
    per = f"per\u00a0{e(unit)}" if unit else "per time unit"
    cards = []
    sub = ("exact: the max-plus eigenvalue" if exact else
           f"95 % interval {fmt(ci[0])} – {with_unit(fmt(ci[1]), unit)}")
    cards.append(('Cycle time <span class="sym">λ</span>',
                  with_unit(fmt(lam, 6 if exact else 4), unit), sub))
    cards.append(("Throughput", f'{fmt(main.get("throughput"))}<span class="unit">\u00a0{per}'
                  "</span>",
                  "firings of each transition (1/λ)"))
    circuits = analysis.get("critical_circuits") or []
    bounds = analysis.get("bounds")
    if bounds:
        cards.append(('Bounds on <span class="sym">λ</span>', f"{fmt(bounds.get('lower'))} – "
                      f"{with_unit(fmt(bounds.get('upper')), unit)}",
                      "lower: cycle time of the mean durations"))
    if circuits:
        more = f"; {len(circuits)} critical circuits in all" if len(circuits) > 1 else ""
        cards.append(("Critical circuit", _circuit_text(circuits[0]),
                      "the bottleneck" + (" of the mean durations" if bounds else "") + more))
    # An exact analysis computes no firings for its answer: show what the simulation ran.
    firings = (simulation or main).get("firings_simulated")
    if firings is not None:
        cyclicity = analysis.get("cyclicity")
        value = _firings(simulation or main, exact and not simulation)
        cards.append(("Firings simulated" if simulation else "Firings computed", value,
                      f"cyclicity {fmt(cyclicity)} firings" if cyclicity else
                      "all replications together"))
    html_cards = "".join(
        f'<div class="card"><p class="card-label">{label}</p><p class="card-value'
        f'{" long" if len(re.sub("<[^>]+>", "", value)) > 24 else ""}">{value}</p>'
        f'<p class="card-sub">{sub}</p></div>'
        for label, value, sub in cards)
    out = f'<div class="cards">{html_cards}</div>\n'
    if analysis and simulation:
        # Exact values keep the digits the cards give them (17.375, not 17.38).
        sides = [(analysis, 6 if exact else 4),
                 (simulation, 6 if simulation.get("exact", exact) else 4)]
        rows = [["Cycle time", *(fmt(side.get("cycle_time"), d) for side, d in sides)],
                ["Throughput", *(fmt(side.get("throughput")) for side, _ in sides)]]
        cells = []
        for side, digits in sides:
            low, high = side.get("cycle_time_ci") or [None, None]
            cells.append(f"{fmt(low, digits)} – {fmt(high, digits)}")
        rows.append(["95 % interval", *cells])
        rows.append(["Firings computed", _firings(analysis, exact), _firings(simulation, False)])
        out += table(["", "Max-plus recursion", "SimPy simulation"], rows, {1, 2},
                      "Both engines side by side" + (f" (times in {e(unit)})" if unit else ""))
    if analysis.get("strongly_connected") is False:
        out += ('<p class="note">The graph is not strongly connected: transitions have '
                "different cycle times (column “cycle time” of the transitions table).</p>\n")
    return section("numbers", "Cycle time and throughput", out)


def _firings(side: Mapping[str, Any], exact: bool) -> str:
    """Firings computed by one side; an exact analysis computes none, and says so."""
    firings = side.get("firings_simulated")
    if exact and firings == 0:
        return "exact (no simulation)"
    return fmt(firings)


def _places_spec(model: Mapping[str, Any]) -> list[PlaceSpec]:
    return [PlaceSpec(i, str(p["from"]), str(p["to"]), int(p["tokens"]))
            for i, p in enumerate(model["places"])]


def _critical_places(analysis: Mapping[str, Any], circuits: list[Any], specs: list[PlaceSpec]
                     ) -> set[int]:
    """The places on critical circuits: from the document, or chosen by the least slack."""
    given = analysis.get("critical_places")
    if given is not None:
        return {int(i) for i in given}
    return choose_critical_places(circuits, specs, get(analysis.get("slack"), "places"))


def _graph(document: Mapping[str, Any], figs: Figures) -> str:
    model = document["model"]
    analysis = get(document, "analysis") or {}
    ids = [str(t["id"]) for t in model["transitions"]]
    if not ids:
        return ""
    specs = _places_spec(model)
    circuits = [[str(t) for t in c] for c in analysis.get("critical_circuits") or []]
    slack = get(analysis.get("slack"), "places")
    criticality = get(analysis.get("criticality"), "places")
    drawing = layout_graph(ids, specs, circuits, _critical_places(analysis, circuits, specs))
    random = bool(model.get("is_random")) and criticality
    unit = time_unit(document)
    if random:
        text = {i: pct(v) for i, v in enumerate(criticality) if v is not None}
        definition = get(analysis.get("criticality"), "definition")
        legend = ("the criticality of the place (" + (e(definition) if definition else
                  "share of firings it was on the deciding path") + ")")
    elif slack:
        text = {i: fmt(v) for i, v in enumerate(slack) if v is not None}
        legend = "the slack of the place" + (f" in {e(unit)}" if unit else "")
    else:
        text, legend = {}, ""
    svg = figures.graph_figure(drawing, text)
    caption = ("Transitions are boxes, places are circles on the arcs, with their tokens as dots "
               "(three or more as a number). The critical circuit is drawn thick with framed, "
               "shaded boxes.")
    if legend:
        caption += f" Numbers beside the places: {legend}."
    if drawing.partial:
        caption += (f" <strong>Part of the graph:</strong> the model has {fmt(len(ids))} "
                    f"transitions; only the critical circuits and their neighbours are drawn "
                    f"({fmt(drawing.hidden_transitions)} transitions and "
                    f"{fmt(drawing.hidden_places)} places are not shown).")
    return section("graph", "The event graph and its critical circuit",
                    figs.wrap("graph", "Event graph", svg, caption))


def _spec_text(spec: Any) -> str:
    """A duration as written, with places to break after its opening parenthesis and commas
    (``exponential(mean=1.25)`` has no space to wrap at)."""
    return e(str(spec)).replace("(", "(<wbr>").replace(",", ",<wbr>")


def _cut(items: list[Any], key: Any, what: str, total: int) -> tuple[list[Any], str]:
    """The rows to show, and a note when the table is cut."""
    if len(items) <= MAX_ROWS and total <= len(items):
        return items, ""
    chosen = sorted(sorted(items, key=key)[:MAX_ROWS], key=lambda item: item[0])
    return chosen, (f'<p class="note">Showing {len(chosen)} of {fmt(total)} {what}: the '
                    "critical ones and those with the least slack. The result document has "
                    "them all.</p>\n")


def _elements(document: Mapping[str, Any]) -> str:
    model = document["model"]
    analysis = get(document, "analysis") or {}
    simulation = get(document, "simulation") or {}
    circuits = analysis.get("critical_circuits") or []
    critical_t = {str(t) for c in circuits for t in c}
    specs = _places_spec(model)
    slack = analysis.get("slack") or {}
    critical_p = _critical_places(analysis, circuits, specs)
    crit = analysis.get("criticality") or simulation.get("criticality") or {}
    util_a, util_s = analysis.get("utilization") or {}, simulation.get("utilization") or {}
    start = get(get(document.get("figures"), "schedule"), "start") or {}
    by_t = analysis.get("cycle_time_by_transition") or {}
    t_slack = slack.get("transitions") or {}
    t_crit = crit.get("transitions") or {}
    columns: list[tuple[str, bool, Any]] = [
        ("Transition", False, lambda t: ("◆ " if t["id"] in critical_t else "") + e(t["id"])),
        ("Label", False, lambda t: e(str(t.get("label") or ""))),
        ("Duration", False, lambda t: _spec_text(t.get("duration", ""))),
        ("Mean", True, lambda t: fmt(t.get("mean_duration"))),
    ]
    if not any(t.get("label") for t in model["transitions"]):
        del columns[1]  # an empty column only takes room from the others
    if util_a:
        columns.append(("Utilization" + (" (max-plus)" if util_s else ""), True,
                        lambda t: pct(util_a.get(t["id"]))))
    if util_s:
        columns.append(("Utilization (SimPy)", True, lambda t: pct(util_s.get(t["id"]))))
    if t_slack:
        columns.append(("Slack", True, lambda t: fmt(t_slack.get(t["id"]))))
    if t_crit:
        columns.append(("Criticality", True, lambda t: pct(t_crit.get(t["id"]))))
    if start:
        columns.append(("Periodic start", True, lambda t: fmt(start.get(t["id"]))))
    if analysis.get("strongly_connected") is False:
        columns.append(("Cycle time", True, lambda t: fmt(by_t.get(t["id"]))))
    items = list(enumerate(model["transitions"]))

    def t_key(item: tuple[int, Mapping[str, Any]]) -> tuple[bool, float, int]:
        s = t_slack.get(item[1]["id"])
        return (item[1]["id"] not in critical_t, float("inf") if s is None else s, item[0])

    shown, note = _cut(items, t_key, "transitions",
                       int(model.get("n_transitions") or len(items)))
    rows = [[f(t) for _, _, f in columns] for _, t in shown]
    unit = time_unit(document)
    in_unit = f"; times in {e(unit)}" if unit else ""
    out = table([c[0] for c in columns], rows, {i for i, c in enumerate(columns) if c[1]},
                 f"Transitions (◆ on a critical circuit{in_unit})") + note
    p_slack = slack.get("places") or []
    p_crit = crit.get("places") or []
    definition = crit.get("definition")
    if definition and (t_crit or p_crit):
        out += f'<p class="note">Criticality: {e(str(definition))}.</p>\n'
    p_columns: list[tuple[str, bool, Any]] = [
        ("#", True, lambda i, p: ("◆ " if i in critical_p else "") + str(i)),
        ("From → to", False, lambda i, p: f"{e(str(p['from']))} → {e(str(p['to']))}"),
        ("Tokens", True, lambda i, p: fmt(int(p["tokens"]))),
        ("Hold", False, lambda i, p: _spec_text(p.get("hold", ""))),
        ("Mean hold", True, lambda i, p: fmt(p.get("mean_hold"))),
    ]
    if any(p.get("label") for p in model["places"]):
        p_columns.append(("Label", False, lambda i, p: e(str(p.get("label") or ""))))
    if p_slack:
        p_columns.append(("Slack", True,
                          lambda i, p: fmt(p_slack[i] if i < len(p_slack) else None)))
    if p_crit:
        p_columns.append(("Criticality", True,
                          lambda i, p: pct(p_crit[i] if i < len(p_crit) else None)))
    p_items = list(enumerate(model["places"]))

    def p_key(item: tuple[int, Mapping[str, Any]]) -> tuple[bool, float, int]:
        i = item[0]
        s = p_slack[i] if i < len(p_slack) else None
        return (i not in critical_p, float("inf") if s is None else s, i)

    p_shown, p_note = _cut(p_items, p_key, "places", int(model.get("n_places") or len(p_items)))
    p_rows = [[f(i, p) for _, _, f in p_columns] for i, p in p_shown]
    out += table([c[0] for c in p_columns], p_rows,
                  {i for i, c in enumerate(p_columns) if c[1]},
                  f"Places (◆ on a critical circuit{in_unit})") + p_note
    return section("elements", "Transitions and places", out)


def _is_random(document: Mapping[str, Any]) -> bool:
    """Random durations: the model says so, or the analysis is not exact."""
    analysis = get(document, "analysis") or {}
    return bool(document["model"].get("is_random")) or analysis.get("exact") is False


def _no_schedule(document: Mapping[str, Any]) -> str:
    """Why the document has no periodic schedule, in plain words ("" when it does not say)."""
    analysis = get(document, "analysis") or {}
    if _is_random(document):
        why = ("the durations are random, so the firings never settle into a periodic regime: "
               "each cycle takes a different time, and no start times repeat from one cycle "
               "to the next")
    elif analysis.get("strongly_connected") is False:
        why = ("the graph is not strongly connected, and its parts run at different cycle "
               "times (column “cycle time” of the transitions table): no single period fits "
               "every transition")
    else:
        return ""
    return section("schedule", "Periodic schedule",
                   f'<p class="note">No periodic schedule: {why}.</p>\n')


def schedule(document: Mapping[str, Any], figs: Figures) -> str:
    data = get(document.get("figures"), "schedule")
    unit = time_unit(document)
    if not data:
        return _no_schedule(document)
    analysis = get(document, "analysis") or {}
    critical = {str(t) for c in analysis.get("critical_circuits") or [] for t in c}
    start = {str(k): float(v) for k, v in data["start"].items()}
    duration = {str(k): float(v) for k, v in data["duration"].items()}
    lam = float(data["cycle_time"])
    svg = figures.schedule_figure(start, duration, lam, critical, unit)
    cut = ""
    if len(start) > figures.MAX_GANTT_ROWS:
        cut = (f" Only the first {figures.MAX_GANTT_ROWS} of {fmt(len(start))} transitions "
               "(by start time) are drawn.")
    caption = ("Each transition starts at its periodic start time (from the eigenvector) plus a "
               f"whole number of cycles of λ = {with_unit(fmt(lam, 6), unit)}; bars show the "
               "firing duration, hatched bars the transitions on a critical circuit, dashed "
               f"lines the cycle boundaries.{cut}")
    return section("schedule", "Periodic schedule",
                   figs.wrap("schedule", "Periodic schedule over two cycles", svg, caption))


def transient(document: Mapping[str, Any], figs: Figures) -> str:
    data = get(document.get("figures"), "transient")
    if not data or not data.get("recursion"):
        return ""
    unit = time_unit(document)
    recursion = {str(k): v for k, v in data["recursion"].items()}
    simulation = {str(k): v for k, v in (data.get("simulation") or {}).items()}
    svg = figures.transient_figure(data["k"], recursion, simulation or None, unit)
    lines = ("Lines: the max-plus recursion; rings: the SimPy simulation. When every ring sits "
             "on its line, both engines computed the same times.")
    analysis = get(document, "analysis") or {}
    if _is_random(document):
        # No periodic regime here; the transient of the mean durations is not this model's.
        caption = ("x(k) − kλ against the firing number k, on the random draws of one "
                   "replication: the completion time of firing k less k times the estimated "
                   f"cycle time. {lines} With random durations there is no periodic regime: "
                   "the curves keep wandering as the draws vary.")
        heading, title = "Firing times against the cycle time", "Firing times less k·λ"
    else:
        caption = ("x(k) − kλ against the firing number k: the completion time of firing k "
                   f"less k cycle times. {lines}")
        heading, title = "Transient and periodic regime", "Transient"
        settle = analysis.get("transient_firings")
        if settle is not None:
            caption += f" The periodic regime starts after {_count(settle, 'firing')}"
            if analysis.get("cyclicity"):
                caption += f" and repeats every {_count(analysis['cyclicity'], 'firing')}"
            caption += "."
    if len(recursion) > figures.MAX_SERIES:
        caption += (f" Showing {figures.MAX_SERIES} of the {fmt(len(recursion))} transitions "
                    "in the document.")
    return section("transient", heading, figs.wrap("transient", title, svg, caption))


def _count(n: int, word: str) -> str:
    return f"{fmt(n)} {word}{'' if n == 1 else 's'}"


def variability(document: Mapping[str, Any], figs: Figures) -> str:
    fig_data = get(document, "figures") or {}
    running = fig_data.get("running_estimate")
    replications = fig_data.get("replication_estimates")
    analysis = get(document, "analysis") or {}
    simulation = get(document, "simulation") or {}
    bounds = analysis.get("bounds")
    if not (running or replications or bounds):
        return ""
    unit = time_unit(document)
    out = ""
    if bounds:
        out += (f'<p>Bounds on the cycle time: lower {with_unit(fmt(bounds.get("lower")), unit)}'
                " (the cycle time of the mean durations: variability can only slow the graph "
                f'down), upper {with_unit(fmt(bounds.get("upper")), unit)}.</p>\n')
    settings = get(document, "settings") or {}
    if running:
        svg = figures.running_estimate_figure(running["work"], running["estimate"],
                                              running["low"], running["high"], bounds, unit)
        target = settings.get("precision")
        reached = analysis.get("relative_half_width")
        caption = "The estimate of λ and its 95 % interval as firings are computed."
        if target:
            caption += (" Replications are added in rounds until the interval's relative "
                        f"half-width is at most the target {pct(target)}")
            if isinstance(reached, int | float):
                met = " (the first round can already do better)" if reached < target else ""
                caption += f"; it reached {pct(reached)}{met}"
            caption += "."
        out += figs.wrap("running", "Running estimate", svg, caption)
    if replications:
        intervals = {"recursion": analysis.get("cycle_time_ci"),
                     "simulation": simulation.get("cycle_time_ci")}
        svg = figures.replications_figure(replications, {k: v for k, v in intervals.items()
                                                         if v}, bounds, unit)
        counts = {name: len(replications.get(name) or [])
                  for name in ("recursion", "simulation")}
        counts = {name: n for name, n in counts.items() if n}
        if len(set(counts.values())) == 1 and len(counts) == 2:
            each = f"each of the {_count(counts['recursion'], 'replication')}, for each engine"
        else:
            engine = {"recursion": "of the max-plus recursion", "simulation": "of the SimPy "
                      "simulation"}
            each = ("each replication: " +
                    " and ".join(f"{fmt(n)} {engine[name]}" for name, n in counts.items()))
        caption = (f"The estimate of λ from {each}, with the 95 % interval of the mean above "
                   "them and the bounds as lines.")
        out += figs.wrap("replications", "Estimates per replication", svg, caption)
    return section("variability", "Variability", out)


def sample_path(document: Mapping[str, Any]) -> str:
    data = get(get(document, "comparison"), "sample_path")
    if not data:
        return ""
    firings = fmt(data.get("firings_compared"))
    count = data.get("replications_compared")
    reps = f"{fmt(count)} replication{'' if count == 1 else 's'}"
    draws = ("on the same random draws" if document["model"].get("is_random") else
             "from the same fixed durations")
    if data.get("identical"):
        head = ('<p class="result good"><span class="mark" aria-hidden="true">✓</span> '
                "<strong>Identical sample paths.</strong> The SimPy model and the max-plus "
                f"recursion computed the same firing times {draws}: "
                f"{firings} firings in {reps}, largest relative difference "
                f"{fmt(data.get('max_relative_difference'))}.</p>\n")
    else:
        head = ('<p class="result bad"><span class="mark" aria-hidden="true">✗</span> '
                f"<strong>The sample paths differ.</strong> {draws.capitalize()}, the SimPy "
                "model and the max-plus recursion computed different firing times: largest "
                f"relative difference {fmt(data.get('max_relative_difference'))} over "
                f"{firings} firings in {reps}.</p>\n")
    why = ("<p>This is the strongest validation the tool offers. Both engines implement one "
           "definition of the model, and both read the same random durations, indexed by "
           "element and firing number. If they agree firing by firing, the simulation "
           "implements the model's semantics exactly, and its statistics can be read with the "
           "theory (bounds, critical circuit) beside them.</p>\n")
    return section("sample-path", "Sample-path identity", head + why)


def body(document: Mapping[str, Any]) -> str:
    """The ``<body>`` content of the page."""
    figs = Figures()
    parts = [
        _masthead(document),
        "<main>\n",
        _verdict(document),
        _numbers(document),
        _graph(document, figs),
        _elements(document),
        schedule(document, figs),
        transient(document, figs),
        variability(document, figs),
        sample_path(document),
        notes.algebra(document),
        notes.semantics(document),
        notes.reproducibility(document),
        notes.cautions(),
        "</main>\n",
        notes.footer(document),
    ]
    return "".join(parts)
