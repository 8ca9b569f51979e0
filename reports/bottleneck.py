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
    if isinstance(entry.get("on_mean_critical_circuit"), bool):
        return bool(entry["on_mean_critical_circuit"])
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


def _growth(item: Mapping[str, Any], unit: str) -> str:
    rate = item.get("growth_rate")
    if rate is None:
        return "grows without bound"
    per_hour = hourly(float(rate), unit)
    if per_hour is not None:
        return f"grows by {fmt(per_hour[0])} tokens per {per_hour[1]}"
    return f"grows by {fmt(rate)} tokens per {e(unit) if unit else 'time unit'}"


def warning(document: Mapping[str, Any]) -> str:
    """The warning of an unstable model, first on the page ("" for a stable one)."""
    places = results(document).get("unbounded_places") or []
    if not places:
        return ""
    unit = time_unit(document)
    lines = []
    for item in places[:MAX_UNSTABLE]:
        place = _place(document, int(item["index"]))
        label = f" (“{e(str(place['label']))}”)" if place and place.get("label") else ""
        source, target = e(str(item["from"])), e(str(item["to"]))
        name = f"the buffer {source} → {target}{label}"
        if item.get("status") == "critical load":
            head = (f"Critical load: {name} is fed as fast as it is emptied, within the "
                    "precision of the estimate; at equal rates a random buffer grows without "
                    "bound, like the square root of time")
        else:
            head = f"Unstable: {name} {_growth(item, unit)}"
        rates = ""
        if item.get("from_cycle_time") is not None and item.get("to_cycle_time") is not None:
            rates = (f": {source} fires every {with_unit(fmt(item['from_cycle_time']), unit)}, "
                     f"{target} every {with_unit(fmt(item['to_cycle_time']), unit)}")
        elif item.get("status") != "critical load":
            rates = f": {source} fires faster than {target} takes its tokens"
        lines.append(f"<li><strong>{head}</strong> (place {fmt(int(item['index']))}){rates}."
                     "</li>")
    if len(places) > MAX_UNSTABLE:
        lines.append(f"<li>{more(len(places) - MAX_UNSTABLE, 'growing place')}.</li>")
    unstable = any(item.get("status") != "critical load" for item in places)
    title = "The model is unstable" if unstable else "The model is at critical load"
    return ('<section id="unstable" class="alarm" aria-labelledby="unstable-heading">\n'
            '<h2 id="unstable-heading" class="alarm-word"><span class="mark" '
            f'aria-hidden="true">⚠</span> {title}</h2>\n<ul>'
            + "".join(lines) + "</ul>\n<p>Such a place has no steady state: a real buffer "
            "overflows or blocks its source. Transitions on either side run at different "
            "cycle times, and averages taken from a simulation depend on its length. Give the "
            "place a capacity (a return place with tokens) or slow its source down before "
            "reading the numbers below.</p>\n</section>\n")


def _exact(document: Mapping[str, Any], side: Mapping[str, Any]) -> bool:
    """Exact derivatives: the document says so, or the durations are fixed."""
    flag = side.get("sensitivity_exact")
    return flag if isinstance(flag, bool) else not is_random(document)


def headline(document: Mapping[str, Any]) -> str:
    """The bottleneck statement, for the verdict area."""
    side = results(document)
    neck = side.get("bottleneck")
    if not isinstance(neck, Mapping):
        return ""
    unit = time_unit(document)
    random = is_random(document)
    exact = _exact(document, side)
    place = neck.get("element") == "place"
    what = ("mean " if random else "") + ("hold" if place else "duration")
    derivative = neck.get("derivative")
    word = e(unit_word(unit))
    lines = [f'<p class="neck-name"><strong>Bottleneck: {element_text(document, neck)}</strong>'
             f"{' (exact)' if exact else ''}</p>"]
    lines.append(f"<p>dλ/d({what}) = {fmt(derivative)}{_interval(neck, exact)}: "
                 f"each {word} added to its {what} adds {fmt(derivative)} {word} to the "
                 "cycle time.</p>")
    low, high = (neck.get("ci") or [None, None])[:2]
    if exact and low is not None and high is not None and low != high:
        lines.append(f"<p>Shortening it changes λ by {fmt(low)} per {word}, lengthening it by "
                     f"{fmt(high)}: several critical circuits meet here.</p>")
    lines.append(_faster(document, side, neck, what, random))
    lines.append(_ties(side, neck, exact))
    if random:
        lines.append(_against_mean_values(document, neck))
    return '<div class="neck">\n' + "\n".join(x for x in lines if x) + "\n</div>\n"


def _faster(document: Mapping[str, Any], side: Mapping[str, Any], neck: Mapping[str, Any],
            what: str, random: bool) -> str:
    """What the cycle time would be with the bottleneck 10 % faster (when the document says)."""
    unit = time_unit(document)
    first_order = neck.get("faster_10_percent")
    faster = neck.get("cycle_time_if_10_percent_faster")
    if faster is None and isinstance(first_order, Mapping):
        faster = first_order.get("cycle_time")
    if faster is None:
        return ""
    mean = neck.get("mean")
    if mean is None:
        mean = _mean(document, neck)
    change = (f" ({what} {with_unit(fmt(mean), unit)} → "
              f"{with_unit(fmt(0.9 * float(mean)), unit)})" if mean else "")
    ci = neck.get("cycle_time_if_10_percent_faster_ci")
    ci_text = (f" (95 % interval {interval(ci[0], ci[1])})"
               if random and isinstance(ci, Sequence) and len(ci) == 2 else "")
    how = (" to first order (from the derivative)" if isinstance(first_order, Mapping)
           and neck.get("cycle_time_if_10_percent_faster") is None else "")
    lam = side.get("cycle_time")
    digits = 4 if random else 6
    now = f", instead of {with_unit(fmt(lam, digits), unit)}" if lam else ""
    return (f"<p>10 % faster{change}: cycle time {with_unit(fmt(faster, digits), unit)}"
            f"{how}{ci_text}{now}.</p>")


def _ties(side: Mapping[str, Any], neck: Mapping[str, Any], exact: bool) -> str:
    """Other elements the data cannot rank below the bottleneck."""
    entries = [s for s in side.get("sensitivity") or []
               if not _same(s, neck) and s.get("derivative") is not None]
    if neck.get("derivative") is None:
        return ""
    value = float(neck["derivative"])
    if exact:
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
    exact = _exact(document, side)

    def rank(item: tuple[int, Mapping[str, Any]]) -> tuple[bool, float, int]:
        d = item[1].get("derivative")
        return (d is None, -float(d) if d is not None else 0.0, item[0])

    shown = sorted(enumerate(entries), key=rank)[:MAX_SENSITIVITY]
    # Fixed durations: [decrease, increase] differ where critical circuits tie.
    one_sided = exact and any((s.get("ci") or [None, None])[0] != (s.get("ci") or [0, 0])[1]
                              for _, s in shown)
    basis = " of the mean durations" if random else ""
    headers = ["Rank", "Element", "dλ/d(mean)" if random else "dλ/d(value)"]
    if not exact:
        headers.append("95 % interval")
    elif one_sided:
        headers.append("Shorter / longer")
    headers.append(f"On the critical circuit{basis}")
    rows = []
    for n, (_, entry) in enumerate(shown, start=1):
        row = [fmt(n), element_text(document, entry), fmt(entry.get("derivative"))]
        low, high = (entry.get("ci") or [None, None])[:2]
        if not exact:
            row.append(interval(low, high))
        elif one_sided:
            row.append(f"{fmt(low)} / {fmt(high)}")
        row.append("◆ yes" if _on_critical(document, entry) else "no")
        rows.append(row)
    numeric = {0, 2, 3} if len(headers) == 5 else {0, 2}
    out = table(headers, rows, numeric, "Sensitivity of the cycle time, largest first")
    left = len(entries) - len(shown) + int(side.get("sensitivity_omitted") or 0)
    if left > 0:
        out += (f'<p class="note">{more(left, "element").capitalize()} with smaller '
                "derivatives" + ("" if side.get("sensitivity_omitted") else
                                 "; the result document has them all") + ".</p>\n")
    what = "mean duration (a transition) or mean hold (a place)" if random else (
        "duration (a transition) or hold (a place)")
    out += (f"<p>dλ/d(…): how much the cycle time grows per time unit added to an element's "
            f"{what}, a number without unit (time per time). 0.5 means: one "
            f"{e(unit_word(time_unit(document)))} more there costs half of one per "
            "cycle; 0 means the element does not limit the cycle time at this operating "
            "point." + (" Exact for fixed durations" + (
                "; where critical circuits tie, shortening and lengthening an element differ "
                "(column “shorter / longer”)" if one_sided else "") + "." if exact else
                " Estimated from the simulation, with 95 % intervals.") + "</p>\n")
    return out


def _utilization(document: Mapping[str, Any]) -> str:
    analysis = get(document, "analysis") or {}
    simulation = get(document, "simulation") or {}
    sides = [(name, side.get("utilization")) for name, side in
             (("max-plus", analysis), ("SimPy", simulation)) if side.get("utilization")]
    if not sides:
        return ""
    servers = analysis.get("servers") or simulation.get("servers")
    busy = analysis.get("busy_servers") or simulation.get("busy_servers")
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
            in_progress = (busy or {}).get(t)
            row.append(fmt(n) if n is not None else "no limit" if in_progress is None else
                       f"no limit ({fmt(in_progress)} busy)")
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
                   "is none, so firings overlap as tokens allow"
                   + (", with the mean number in progress" if busy else "") + "): at 100 % "
                   "the servers never rest, and the cycle time cannot drop unless that "
                   "transition gets faster or more servers.")
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
