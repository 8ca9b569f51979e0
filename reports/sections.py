"""The sections of the review page, each built from one part of the result document.

Each function returns HTML text (or ``""`` when the document has nothing for it). Every string
from the document goes through :func:`html.escape`; numbers go through
:func:`cyclecheck.reports.markup.fmt`. The order of the page: the verdict with the bottleneck
(and a warning when the model is unstable), the key numbers, where to act (sensitivity,
utilization), the event graph, transitions and places, the periodic schedule or the
variability of the estimates, the transient, the sample-path comparison, what belongs to the
mean durations (random models), semantics, reproducibility, cautions, and the algebraic
verification as an appendix.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from typing import Any

from . import bottleneck, notes, timing
from .graph import critical_place_set, graph_section
from .markup import (
    MAX_ROWS,
    Figures,
    circuit,
    e,
    fmt,
    get,
    hourly,
    interval,
    is_random,
    more,
    pct,
    section,
    table,
    time_unit,
    with_unit,
)
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
            word = "Analysis only"
            line = ("No SimPy simulation was run: the estimates come from the max-plus "
                    "recursion on random draws." if is_random(document) else
                    "No simulation was run: the numbers are max-plus theory.")
        else:
            word, line = "No verdict", "The document holds no comparison of the two engines."
        why = ""
    return (f'<section id="verdict" class="verdict {css}" aria-labelledby="verdict-heading">\n'
            f'<h2 id="verdict-heading" class="verdict-word"><span class="mark" aria-hidden='
            f'"true">{mark}</span> {word}</h2>\n<p class="verdict-line">{line}</p>\n{why}'
            f"{bottleneck.headline(document)}</section>\n")


def _per_hour(rate: Any, unit: str) -> str:
    """``; 207.2 per hour`` where the time unit makes a rate per hour easier to read."""
    if not isinstance(rate, int | float):
        return ""
    converted = hourly(float(rate), unit)
    if converted is None or converted[1] == unit:
        return ""
    return f"; {fmt(converted[0])} per {converted[1]}"


def _numbers(document: Mapping[str, Any]) -> str:
    unit = time_unit(document)
    analysis = get(document, "analysis") or {}
    simulation = get(document, "simulation") or {}
    main = analysis or simulation
    random = is_random(document)
    exact = bool(analysis.get("exact")) and not random
    lam = main.get("cycle_time")
    ci = main.get("cycle_time_ci") or [None, None]
    per = f"per\u00a0{e(unit)}" if unit else "per time unit"
    cards = []
    if exact:
        sub = "exact: the max-plus eigenvalue"
    elif random:
        sub = f"estimate; 95 % interval {with_unit(interval(ci[0], ci[1]), unit)}"
    else:
        sub = "measured by the simulation after its transient"
    cards.append(('Cycle time <span class="sym">λ</span>',
                  with_unit(fmt(lam, 4 if random else 6), unit), sub))
    cards.append(("Throughput", f'{fmt(main.get("throughput"))}<span class="unit">\u00a0{per}'
                  "</span>", ("estimated " if random else "")
                  + f"firings of each transition (1/λ){_per_hour(main.get('throughput'), unit)}"))
    circuits = analysis.get("critical_circuits") or []
    if circuits and not random:
        extra = (f"; {more(len(circuits) - 1, 'critical circuit')}" if len(circuits) > 1
                 else "")
        cards.append(("Critical circuit", circuit(circuits[0]),
                      "the circuit that sets λ" + extra))
    sides = [("max-plus", analysis, exact), ("SimPy", simulation, False)]
    counted = [(name, _firings(side, is_exact)) for name, side, is_exact in sides
               if side and side.get("firings_simulated") is not None]
    if counted:
        value = ("<br>".join(f"{name}: {text}" for name, text in counted) if len(counted) > 1
                 else counted[0][1])
        cyclicity = analysis.get("cyclicity")
        cards.append(("Firings computed", value,
                      f"cyclicity {fmt(cyclicity)} firings" if cyclicity and not random else
                      "all replications together" if random else
                      ("max-plus" if counted[0][0] == "max-plus" else "SimPy")
                      + " side" if len(counted) == 1 else "both engines"))
    html_cards = "".join(
        f'<div class="card"><p class="card-label">{label}</p><p class="card-value'
        f'{" long" if len(re.sub("<[^>]+>", "", value)) > 24 or "<br>" in value else ""}">'
        f'{value}</p><p class="card-sub">{sub}</p></div>'
        for label, value, sub in cards)
    out = f'<div class="cards">{html_cards}</div>\n'
    if random:
        out += ('<p class="note">How to read the numbers: estimates come from simulation '
                "and carry a 95 % interval; numbers marked “of the mean durations” belong to "
                "the model with every random duration replaced by its mean (a lower bound on "
                "the cycle time, not the answer) and are shown below the answers.</p>\n")
    else:
        out += ('<p class="note">How to read the numbers: the durations are fixed, so the '
                "max-plus numbers are exact (no statistical error), and the simulation must "
                "reproduce them.</p>\n")
    if analysis and simulation:
        # Exact values keep the digits the cards give them (17.375, not 17.38).
        sides_t = [(analysis, 4 if random else 6), (simulation, 4 if random else 6)]
        rows = [["Cycle time", *(fmt(side.get("cycle_time"), d) for side, d in sides_t)],
                ["Throughput", *(fmt(side.get("throughput")) for side, _ in sides_t)]]
        if random:
            cells = []
            for side, digits in sides_t:
                low, high = side.get("cycle_time_ci") or [None, None]
                cells.append(interval(low, high, digits))
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
        return "exact, no simulation"
    return fmt(firings)


def _spec_text(spec: Any) -> str:
    """A duration as written, with places to break after its opening parenthesis and commas
    (``exponential(mean=1.25)`` has no space to wrap at)."""
    return e(str(spec)).replace("(", "(<wbr>").replace(",", ",<wbr>")


def _cut(items: list[Any], key: Any, what: str, total: int) -> tuple[list[Any], str]:
    """The rows to show, and a note when the table is cut."""
    if len(items) <= MAX_ROWS and total <= len(items):
        return items, ""
    chosen = sorted(sorted(items, key=key)[:MAX_ROWS], key=lambda item: item[0])
    left = total - len(chosen)
    return chosen, (f'<p class="note">Showing {len(chosen)} of {fmt(total)} {what}: the '
                    f"critical ones and those with the least slack, {more(left, what[:-1])} "
                    "in the result document.</p>\n")


def _elements(document: Mapping[str, Any]) -> str:
    model = document["model"]
    analysis = get(document, "analysis") or {}
    simulation = get(document, "simulation") or {}
    circuits = analysis.get("critical_circuits") or []
    critical_t = {str(t) for c in circuits for t in c}
    slack = analysis.get("slack") or {}
    critical_p = critical_place_set(document)
    crit = analysis.get("criticality") or simulation.get("criticality") or {}
    random = is_random(document)
    # A random model's slack and critical circuit are those of its mean durations.
    slack_name = "Slack (mean durations)" if random else "Slack"
    of_mean = " of the mean durations" if random else ""
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
    if t_slack:
        columns.append((slack_name, True, lambda t: fmt(t_slack.get(t["id"]))))
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
                 f"Transitions (◆ on a critical circuit{of_mean}{in_unit})") + note
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
        p_columns.append((slack_name, True,
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
                  f"Places (◆ on a critical circuit{of_mean}{in_unit})") + p_note
    return section("elements", "Transitions and places", out)


def _mean_durations(document: Mapping[str, Any]) -> str:
    """What a random model's document says of its mean durations, below the answers."""
    if not is_random(document):
        return ""
    analysis = get(document, "analysis") or {}
    unit = time_unit(document)
    bounds = analysis.get("bounds") or {}
    out = ""
    if bounds:
        low, high = bounds.get("lower"), bounds.get("upper")
        out += (f'<p>Bounds on λ: {fmt(low)} – {with_unit(fmt(high), unit)}: lower '
                f"{with_unit(fmt(low), unit)}, the cycle time of the mean durations (exact; "
                "variability can only slow a synchronised graph down), upper "
                f"{with_unit(fmt(high), unit)} (the subadditive bound, estimated from the "
                "simulation, the upper end of its 95 % interval).</p>\n")
    circuits = analysis.get("critical_circuits") or []
    if circuits:
        extra = f", {more(len(circuits) - 1, 'circuit')}" if len(circuits) > 1 else ""
        out += (f"<p>Critical circuit of the mean durations: {circuit(circuits[0])}"
                f"{extra}. It sets the lower bound; under variability the bottleneck may lie "
                "elsewhere (see the top of the page).</p>\n")
    if not out:
        return ""
    out += ('<p class="note">The slack in the tables, the ◆ marks and the thick circuit in the '
            "event graph belong to the mean durations too; the appendix verifies their "
            "analysis algebraically. They are not estimates of this model.</p>\n")
    return section("mean-durations", "Of the mean durations: a lower bound, not the answer",
                   out)


def sample_path(document: Mapping[str, Any]) -> str:
    data = get(get(document, "comparison"), "sample_path")
    if not data:
        return ""
    firings = fmt(data.get("firings_compared"))
    n = data.get("replications_compared")
    reps = f"{fmt(n)} replication{'' if n == 1 else 's'}"
    random = is_random(document)
    draws = "on the same random draws" if random else "from the same fixed durations"
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
    read = ("both read the same random durations, indexed by element and firing number"
            if random else "both read the same fixed durations")
    theory = "bounds, critical circuit" if random else "cycle time, critical circuit"
    why = ("<p>This is the strongest validation the tool offers. Both engines implement one "
           f"definition of the model, and {read}. If they agree firing by firing, the "
           "simulation implements the model's semantics exactly, and its results can be read "
           f"with the theory ({theory}) beside them.</p>\n")
    return section("sample-path", "Sample-path identity", head + why)


def body(document: Mapping[str, Any]) -> str:
    """The ``<body>`` content of the page."""
    figs = Figures()
    parts = [
        _masthead(document),
        "<main>\n",
        bottleneck.warning(document),
        _verdict(document),
        _numbers(document),
        bottleneck.section(document),
        graph_section(document, figs, bottleneck.focus(document)),
        _elements(document),
        timing.schedule(document, figs),
        timing.variability(document, figs),
        timing.transient(document, figs),
        sample_path(document),
        _mean_durations(document),
        notes.semantics(document),
        notes.reproducibility(document),
        notes.cautions(document),
        notes.algebra(document),
        "</main>\n",
        notes.footer(document),
    ]
    return "".join(parts)
