"""The event-graph section of the page: the drawing, and a map of the components when the
graph is too large to draw whole.

The geometry is :mod:`cyclecheck.reports.layout`'s; this module picks what to write beside the
places (the slack of a fixed model, the criticality of a random one), which transitions and
places are critical, and says in the caption what the figure leaves out.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from . import figures
from .layout import PlaceSpec, choose_critical_places, component_map, layout_graph
from .markup import Figures, count, e, fmt, get, is_random, pct, section, time_unit

__all__ = ["critical_place_set", "graph_section", "place_specs"]


def place_specs(model: Mapping[str, Any]) -> list[PlaceSpec]:
    """The places of the model as the layout needs them."""
    return [PlaceSpec(i, str(p["from"]), str(p["to"]), int(p["tokens"]))
            for i, p in enumerate(model["places"])]


def critical_place_set(document: Mapping[str, Any]) -> set[int]:
    """The places on critical circuits: from the document, or chosen by the least slack."""
    analysis = get(document, "analysis") or {}
    given = analysis.get("critical_places")
    if given is not None:
        return {int(i) for i in given}
    circuits = [[str(t) for t in c] for c in analysis.get("critical_circuits") or []]
    return choose_critical_places(circuits, place_specs(document["model"]),
                                  get(analysis.get("slack"), "places"))


def graph_section(document: Mapping[str, Any], figs: Figures,
                  focus: tuple[str | None, int | None] = (None, None)) -> str:
    """The event graph with its critical circuit, the bottleneck and the place labels."""
    model = document["model"]
    analysis = get(document, "analysis") or {}
    ids = [str(t["id"]) for t in model["transitions"]]
    if not ids:
        return ""
    specs = place_specs(model)
    circuits = [[str(t) for t in c] for c in analysis.get("critical_circuits") or []]
    slack = get(analysis.get("slack"), "places")
    criticality = get(analysis.get("criticality"), "places")
    random = is_random(document)
    unit = time_unit(document)
    if random and criticality:
        text = {i: pct(v) for i, v in enumerate(criticality) if v is not None}
        definition = get(analysis.get("criticality"), "definition")
        legend = ("the criticality of the place (" + (e(definition) if definition
                  else "share of firings it was on the deciding path") + "), estimated")
    elif slack:
        text = {i: fmt(v) for i, v in enumerate(slack) if v is not None}
        legend = ("the slack of the place" + (" of the mean durations" if random else "")
                  + (f" in {e(unit)}" if unit else ""))
    else:
        text, legend = {}, ""
    neck, neck_place = focus
    drawing = layout_graph(ids, specs, circuits, critical_place_set(document),
                           place_text=text, bottleneck=neck, bottleneck_place=neck_place)
    svg = figures.graph_figure(drawing)
    basis = " of the mean durations" if random else ""
    caption = ("Transitions are boxes, places are circles on the arcs, with their tokens as dots "
               f"(three or more as a number). The critical circuit{basis} is drawn thick with "
               "framed, shaded boxes.")
    if drawing.bottleneck or drawing.bottleneck_place is not None:
        caption += (" The bottleneck is tagged “bottleneck”" + (" (dashed frame)"
                    if drawing.bottleneck else " (heavy ring)") + ".")
    if drawing.bands > 1:
        caption += (f" The layers are folded into {fmt(drawing.bands)} bands, read like lines "
                    "of text; long arcs run in the corridors between the bands.")
    if legend:
        caption += f" Numbers beside the places: {legend}."
        if drawing.dropped_labels:
            caption += (f" {count(drawing.dropped_labels, 'label')} found no free spot and "
                        "were left out rather than drawn over another; the places table has "
                        "every value.")
    out = figs.wrap("graph", "Event graph", svg, caption)
    if drawing.partial:
        n_t = int(model.get("n_transitions") or len(ids))
        n_p = int(model.get("n_places") or len(specs))
        hidden_t = drawing.hidden_transitions + n_t - len(ids)
        hidden_p = drawing.hidden_places + n_p - len(specs)
        drawn = ("the critical circuits, the bottleneck and their neighbours are" if circuits
                 or neck or neck_place is not None else
                 f"the first {fmt(len(drawing.nodes))} transitions of the model are")
        out = out.replace(
            "</figcaption>",
            f" <strong>Part of the graph:</strong> the model has {fmt(n_t)} transitions, too "
            f"many or too densely joined to print legibly whole; only {drawn} drawn "
            f"({fmt(hidden_t)} transitions and {fmt(hidden_p)} places are not shown; the map "
            "of the components below shows the whole).</figcaption>", 1)
        out += _components(document, figs, ids, specs, circuits)
    return section("graph", "The event graph and its critical circuit", out)


def _components(document: Mapping[str, Any], figs: Figures, ids: list[str],
                specs: list[PlaceSpec], circuits: list[list[str]]) -> str:
    """The map of the strongly connected components of a graph drawn in part."""
    analysis = get(document, "analysis") or get(document, "simulation") or {}
    by_t = analysis.get("cycle_time_by_transition") or {}
    digits = 4 if is_random(document) else 6
    values = {t: f"λ {fmt(v, digits)}" for t, v in by_t.items() if v is not None}
    critical = {t for c in circuits for t in c}
    listed = int(document["model"].get("n_transitions") or len(ids))
    whole = analysis.get("components")  # counted on the whole graph by the analysis
    if listed > len(ids) and whole == 1:  # the listed part alone would look disconnected
        return (f'<p class="note">The graph is strongly connected: one component of '
                f"{count(listed, 'transition')}.</p>\n")
    found = component_map(ids, specs, values, critical)
    n = len(found.names) + found.hidden_components
    if n == 1:
        return (f'<p class="note">The graph is strongly connected: one component of '
                f"{count(len(ids), 'transition')}"
                + (f", cycle time {values[ids[0]]}" if ids[0] in values else "") + ".</p>\n")
    svg = figures.graph_figure(found.drawing, key="components",
                               label="Map of the strongly connected components")
    unit = time_unit(document)
    caption = (f"The {fmt(n)} strongly connected components of the graph: each box gives its "
               "name, its number of transitions and its cycle time"
               + (f" in {e(unit)}" if unit else "") + "; an arrow joins two components when "
               "a place leads from one to the other (upstream to downstream). The component "
               "of the critical circuit is framed.")
    if found.hidden_components:
        caption += (f" Drawn: the {fmt(len(found.names))} largest and the critical one; "
                    f"{count(found.hidden_components, 'smaller component')} left out.")
    if listed > len(ids):
        caption += (f" Built from the {fmt(len(ids))} transitions the document lists (of "
                    f"{fmt(listed)}) and the places between them"
                    + (f"; the whole graph has {fmt(whole)} components" if whole else "")
                    + ".")
    return figs.wrap("components", "Strongly connected components", svg, caption)
