"""Where to act: the bottleneck, the sensitivity of the cycle time, utilization and stability.

The document says, for each element, how much the cycle time grows per time unit added to its
mean duration (a transition) or hold (a place): ``sensitivity``, with a 95 % interval;
``bottleneck`` is the entry with the largest derivative, possibly with the cycle time a 10 %
faster element would give. ``unbounded_places`` lists places that gain tokens without bound
(the model is unstable), ``utilization`` the mean busy servers per server and ``servers`` the
servers of each transition. This module turns them into the statement at the top of the page
(:func:`headline`) and the section that backs it (:func:`section`); it computes nothing but the
display of what the document holds (a duration 10 % shorter, a rate per hour).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from .graph import critical_place_set
from .markup import (
    circuit,
    e,
    fmt,
    get,
    hourly,
    interval,
    is_random,
    more,
    pct,
    table,
    time_unit,
    unit_word,
    with_unit,
)
from .markup import (
    section as make_section,
)

__all__ = ["element_text", "focus", "headline", "results", "section", "warning"]

#: Rows of the sensitivity and utilization tables; the rest is counted ("and N more").
MAX_SENSITIVITY = 10
MAX_UTILIZATION = 12
#: Unbounded places named in the warning at the top.
MAX_UNSTABLE = 5
#: Two derivatives this close (relative) are the same number: ties of a shared circuit.
TIE = 1e-9


def results(document: Mapping[str, Any]) -> Mapping[str, Any]:
    """The section holding the new keys: the analysis, else the simulation."""
    for key in ("analysis", "simulation"):
        side = get(document, key) or {}
        if any(side.get(k) is not None for k in ("sensitivity", "bottleneck",
                                                  "unbounded_places", "servers")):
            return side
    return get(document, "analysis") or get(document, "simulation") or {}


def focus(document: Mapping[str, Any]) -> tuple[str | None, int | None]:
    """The bottleneck as the graph draws it: a transition id or a place index."""
    neck = get(results(document), "bottleneck")
    if not isinstance(neck, Mapping):
        return None, None
    if neck.get("element") == "place":
        return None, neck.get("index")
    return neck.get("id"), None


def _place(document: Mapping[str, Any], index: int) -> Mapping[str, Any] | None:
    places = document["model"]["places"]
    return places[index] if 0 <= index < len(places) else None


def element_text(document: Mapping[str, Any], entry: Mapping[str, Any]) -> str:
    """An element named for a reader: ``transition press (Press)``, ``place 3 (a → b)``."""
    if entry.get("element") == "place":
        index = int(entry.get("index", -1))
        place = _place(document, index)
        if place is None:
            return f"place {fmt(index)}"
        label = f", “{e(str(place['label']))}”" if place.get("label") else ""
        return f"place {fmt(index)} ({e(str(place['from']))} → {e(str(place['to']))}{label})"
    tid = str(entry.get("id"))
    labels = {str(t["id"]): t.get("label") for t in document["model"]["transitions"]}
    label = f" ({e(str(labels[tid]))})" if labels.get(tid) else ""
    return f"transition <code>{e(tid)}</code>{label}"


def _mean(document: Mapping[str, Any], entry: Mapping[str, Any]) -> float | None:
    """The element's mean duration (or hold) from the model, when listed."""
    if entry.get("element") == "place":
        place = _place(document, int(entry.get("index", -1)))
        return None if place is None else place.get("mean_hold")
    for t in document["model"]["transitions"]:
        if str(t["id"]) == str(entry.get("id")):
            return t.get("mean_duration")
    return None


def _on_critical(document: Mapping[str, Any], entry: Mapping[str, Any]) -> bool:
    analysis = get(document, "analysis") or get(document, "simulation") or {}
    circuits = analysis.get("critical_circuits") or []
    if entry.get("element") == "place":
        return entry.get("index") in critical_place_set(document)
    return any(str(entry.get("id")) in map(str, c) for c in circuits)


def _interval(entry: Mapping[str, Any], exact: bool, digits: int = 4) -> str:
    low, high = entry.get("ci") or [None, None]
    if exact or low is None or high is None:
        return ""
    return f" (95 % interval {interval(low, high, digits)})"


def warning(document: Mapping[str, Any]) -> str:
    """The warning of an unstable model, first on the page ("" for a stable one)."""
    places = results(document).get("unbounded_places") or []
    if not places:
        return ""
    unit = time_unit(document)
    lines = []
    for item in places[:MAX_UNSTABLE]:
        rate = float(item["growth_rate"])
        per_hour = hourly(rate, unit)
        if per_hour is not None:
            amount = f"{fmt(per_hour[0])} tokens per {per_hour[1]}"
        else:
            amount = f"{fmt(rate)} tokens per {e(unit) if unit else 'time unit'}"
        place = _place(document, int(item["index"]))
        label = f" (“{e(str(place['label']))}”)" if place and place.get("label") else ""
        lines.append(f"<li><strong>Unstable: the buffer {e(str(item['from']))} → "
                     f"{e(str(item['to']))}{label} grows by {amount}</strong> (place "
                     f"{fmt(int(item['index']))}): {e(str(item['from']))} fires faster than "
                     f"{e(str(item['to']))} takes its tokens.</li>")
    if len(places) > MAX_UNSTABLE:
        lines.append(f"<li>{more(len(places) - MAX_UNSTABLE, 'growing place')}.</li>")
    return ('<section id="unstable" class="alarm" aria-labelledby="unstable-heading">\n'
            '<h2 id="unstable-heading" class="alarm-word"><span class="mark" '
            'aria-hidden="true">⚠</span> The model is unstable</h2>\n<ul>'
            + "".join(lines) + "</ul>\n<p>Such a place has no steady state: a real buffer "
            "overflows or blocks its source. Transitions on either side run at different "
            "cycle times, and averages taken from a simulation depend on its length. Give the "
            "place a capacity (a return place with tokens) or slow its source down before "
            "reading the numbers below.</p>\n</section>\n")


def headline(document: Mapping[str, Any]) -> str:
    """The bottleneck statement, for the verdict area."""
    out = ""
    side = results(document)
    neck = side.get("bottleneck")
    if not isinstance(neck, Mapping):
        return out
    unit = time_unit(document)
    random = is_random(document)
    what = "mean hold" if neck.get("element") == "place" else (
        "mean duration" if random else "duration")
    if neck.get("element") == "place" and not random:
        what = "hold"
    derivative = neck.get("derivative")
    lines = [f'<p class="neck-name"><strong>Bottleneck: {element_text(document, neck)}</strong>'
             f"{'' if random else ' (exact)'}</p>"]
    word = e(unit_word(unit))
    lines.append(f"<p>dλ/d({what}) = {fmt(derivative)}{_interval(neck, not random)}: "
                 f"each {word} added to its {what} adds {fmt(derivative)} {word} to the "
                 "cycle time.</p>")
    faster = neck.get("cycle_time_if_10_percent_faster")
    if faster is not None:
        mean = _mean(document, neck)
        change = (f" ({what} {with_unit(fmt(mean), unit)} → "
                  f"{with_unit(fmt(0.9 * float(mean)), unit)})" if mean else "")
        ci = neck.get("cycle_time_if_10_percent_faster_ci")
        ci_text = (f" (95 % interval {interval(ci[0], ci[1])})"
                   if random and isinstance(ci, Sequence) and len(ci) == 2 else "")
        lam = side.get("cycle_time")
        now = f", instead of {with_unit(fmt(lam, 4 if random else 6), unit)}" if lam else ""
        lines.append(f"<p>10 % faster{change}: cycle time "
                     f"{with_unit(fmt(faster, 4 if random else 6), unit)}{ci_text}{now}.</p>")
    lines.append(_ties(document, side, neck, random))
    if random:
        lines.append(_against_mean_values(document, neck))
    return out + ('<div class="neck">\n' + "\n".join(x for x in lines if x) + "\n</div>\n")


def _ties(document: Mapping[str, Any], side: Mapping[str, Any], neck: Mapping[str, Any],
          random: bool) -> str:
    """Other elements the data cannot rank below the bottleneck."""
    entries = [s for s in side.get("sensitivity") or [] if not _same(s, neck)]
    value = float(neck.get("derivative") or 0.0)
    if not random:
        equal = [s for s in entries
                 if abs(float(s["derivative"]) - value) <= TIE * max(1.0, abs(value))]
        if not equal or value == 0:
            return ""
        return (f"<p>{fmt(len(equal))} other element{'s have' if len(equal) > 1 else ' has'} "
                "the same derivative (they share its circuit): shortening any of them helps "
                "alike, until another circuit takes over.</p>")
    low = (neck.get("ci") or [None, None])[0]
    if low is None:
        return ""
    close = [s for s in entries if (s.get("ci") or [None, None])[1] is not None
             and float(s["ci"][1]) >= float(low)]
    if not close:
        return ""
    return (f"<p>The intervals of {fmt(len(close))} other element"
            f"{'s overlap' if len(close) > 1 else ' overlap'} the bottleneck's: the data do "
            "not rank them apart (see the table of sensitivities); a longer run would.</p>")


def _same(a: Mapping[str, Any], b: Mapping[str, Any]) -> bool:
    return (a.get("element"), a.get("id"), a.get("index")) == (
        b.get("element"), b.get("id"), b.get("index"))


def _against_mean_values(document: Mapping[str, Any], neck: Mapping[str, Any]) -> str:
    """Whether the bottleneck under variability is where the mean durations put it."""
    analysis = get(document, "analysis") or {}
    circuits = analysis.get("critical_circuits") or []
    if not circuits:
        return ""
    written = circuit(circuits[0])
    if _on_critical(document, neck):
        return (f"<p>It lies on the critical circuit of the mean durations ({written}), "
                "where a mean-value analysis would also look.</p>")
    return (f'<p class="neck-differs"><strong>This differs from the critical circuit of the '
            f"mean durations</strong> ({written}): a mean-value analysis would point there, "
            "but with the durations' variability this element limits the cycle time most. "
            "That is what a mean-value analysis cannot show.</p>")


def _sensitivity_table(document: Mapping[str, Any], side: Mapping[str, Any]) -> str:
    entries = list(side.get("sensitivity") or [])
    if not entries:
        return ""
    random = is_random(document)
    ranked = sorted(enumerate(entries), key=lambda item: (-float(item[1]["derivative"]),
                                                          item[0]))
    shown = ranked[:MAX_SENSITIVITY]
    basis = " of the mean durations" if random else ""
    headers = ["Rank", "Element", "dλ/d(mean)" if random else "dλ/d(value)"]
    if random:
        headers.append("95 % interval")
    headers.append(f"On the critical circuit{basis}")
    rows = []
    for rank, (_, entry) in enumerate(shown, start=1):
        row = [fmt(rank), element_text(document, entry), fmt(entry["derivative"])]
        if random:
            low, high = entry.get("ci") or [None, None]
            row.append(interval(low, high))
        row.append("◆ yes" if _on_critical(document, entry) else "no")
        rows.append(row)
    numeric = {0, 2, 3} if random else {0, 2}
    out = table(headers, rows, numeric, "Sensitivity of the cycle time, largest first")
    if len(entries) > len(shown):
        out += (f'<p class="note">{more(len(entries) - len(shown), "element").capitalize()}'
                " with smaller derivatives; the result document has them all.</p>\n")
    what = "mean duration (a transition) or mean hold (a place)" if random else (
        "duration (a transition) or hold (a place)")
    out += (f"<p>dλ/d(…): how much the cycle time grows per time unit added to an element's "
            f"{what}, a number without unit (time per time). 0.5 means: one "
            f"{e(unit_word(time_unit(document)))} more there costs half of one per "
            "cycle; 0 means the element does not limit the cycle time at this operating "
            "point." + (" Estimated from the simulation, with 95 % intervals." if random else
                        " Exact for fixed durations.") + "</p>\n")
    return out


def _utilization(document: Mapping[str, Any]) -> str:
    analysis = get(document, "analysis") or {}
    simulation = get(document, "simulation") or {}
    sides = [(name, side.get("utilization")) for name, side in
             (("max-plus", analysis), ("SimPy", simulation)) if side.get("utilization")]
    if not sides:
        return ""
    servers = analysis.get("servers") or simulation.get("servers")
    first = sides[0][1]
    labels = {str(t["id"]): t.get("label") for t in document["model"]["transitions"]}
    ids = sorted(first, key=lambda t: (-(first[t] if first[t] is not None else -1.0),
                                       list(first).index(t)))
    shown = ids[:MAX_UTILIZATION]
    headers = ["Transition"]
    if any(labels.get(t) for t in shown):
        headers.append("Label")
    headers += [f"Utilization ({name})" if len(sides) > 1 else "Utilization"
                for name, _ in sides]
    if servers is not None:
        headers.append("Servers")
    rows = []
    for t in shown:
        row = [e(t)] + ([e(str(labels.get(t) or ""))] if "Label" in headers else [])
        row += [pct(values.get(t)) for _, values in sides]
        if servers is not None:
            n = servers.get(t)
            row.append(fmt(n) if n is not None else "no limit")
        rows.append(row)
    numeric = set(range(len(headers))) - {0, 1} if "Label" in headers else set(
        range(1, len(headers)))
    out = table(headers, rows, numeric, "Utilization per server, busiest first")
    if len(ids) > len(shown):
        out += (f'<p class="note">{more(len(ids) - len(shown), "transition").capitalize()};'
                " the result document has them all.</p>\n")
    if servers is not None:
        meaning = ("Utilization is the mean number of busy servers divided by the number of "
                   "servers (the tokens on the transition's self-loop; “no limit” where there "
                   "is none, so firings may overlap): at 100 % the servers never rest, and "
                   "the cycle time cannot drop unless that transition gets faster or more "
                   "servers.")
    else:
        meaning = ("Utilization is the share of time a transition was busy, per server: at "
                   "100 % it never rests, and the cycle time cannot drop unless it gets "
                   "faster or more servers.")
    return out + f"<p>{meaning} The busiest element need not be the bottleneck: the cycle " \
                 "time also waits for tokens and holds.</p>\n"


def section(document: Mapping[str, Any]) -> str:
    """The sensitivity table and the utilization, below the key numbers."""
    side = results(document)
    content = _sensitivity_table(document, side) + _utilization(document)
    if not content:
        return ""
    return make_section("act", "Where to act: sensitivity and utilization", content)
