"""The layout of the event graph for the review page: pure geometry, no drawing.

Transitions are boxes, places are small circles on the arcs between them (with their tokens
inside), in the manner of a Petri net. Two layouts are used:

* **layered**, the default (:mod:`cyclecheck.reports.layers`): igraph's Sugiyama layout, its
  layers following the token-free places left to right, **folded** into bands read like lines
  of text when they do not fit the page width, long arcs routed in corridors between the bands;
* **circle**, when the drawn graph is one small elementary circuit (a ring of stops, a loop of
  stations, self-loops aside) or a handful of transitions that form no layers.

Labels (slack, criticality, tags) are then placed with a collision check against each other,
the boxes, the place circles and the token marks (:func:`cyclecheck.reports.geometry.
place_labels`); a label that finds no free spot is dropped, and the :class:`Drawing` counts it
so that the page can say so.

Large graphs (more than ``limit`` transitions, or fewer joined so densely that the drawing
would print below :data:`MIN_PRINT_SCALE`) are drawn in part: the critical circuits, the
bottleneck and the transitions one place away from them. :func:`component_map` lays out the
strongly connected components of a graph as a small map instead.

Coordinates are in layout units, :data:`INCH` inches each once drawn, with y growing upwards;
text sizes are in points (:mod:`cyclecheck.reports.geometry`), which the figure must use for
the collision check to hold. The same input always gives the same layout.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from .drawing import (
    BOX_HEIGHT,
    PLACE_RADIUS,
    Arc,
    Drawing,
    PlaceSpec,
    choose_critical_places,
    short_label,
    stack_loops,
    token_text,
)
from .geometry import (
    BOX_FONT,
    INCH,
    Box,
    Boxes,
    Label,
    Point,
    Strokes,
    arc_at,
    border,
    line,
    place_labels,
    quadratic,
    text_size,
)
from .layers import GAP_X, layered, print_scale

#: Largest ring drawn as a circle; a longer one is laid out in layers and folded.
MAX_CIRCLE = 12
#: Smallest print scale of a drawing (8 pt ids at 5.2 pt): a denser graph is drawn in part.
MIN_PRINT_SCALE = 0.65

__all__ = [
    "INCH",
    "PLACE_RADIUS",
    "Arc",
    "ComponentMap",
    "Drawing",
    "Label",
    "PlaceSpec",
    "choose_critical_places",
    "component_map",
    "layout_graph",
    "short_label",
    "text_size",
    "token_text",
]


def _select(transitions: Sequence[str], places: Sequence[PlaceSpec], focus: Sequence[str],
            limit: int) -> list[str]:
    """Transitions to draw: all of them, or the focus (critical circuits, bottleneck) and the
    transitions one place away from it, at most ``limit``."""
    if len(transitions) <= limit:
        return list(transitions)
    order = {t: i for i, t in enumerate(transitions)}
    keep = list(dict.fromkeys(t for t in focus if t in order))[:limit]
    if not keep:  # nothing known to focus on: the first transitions in document order
        return list(transitions[:limit])
    kept = set(keep)
    neighbours: set[str] = set()
    for place in places:
        if place.source in kept:
            neighbours.add(place.target)
        if place.target in kept:
            neighbours.add(place.source)
    # (a large model lists only its first transitions: neighbours not listed are not drawn)
    extra = sorted((neighbours - kept) & order.keys(), key=order.__getitem__)
    return keep + extra[: max(0, limit - len(keep))]



def _is_ring(nodes: list[str], places: Sequence[PlaceSpec]) -> list[str] | None:
    """The nodes in ring order if, self-loops and parallel places aside, they form one circuit."""
    succ: dict[str, set[str]] = {t: set() for t in nodes}
    pred: dict[str, set[str]] = {t: set() for t in nodes}
    for place in places:
        if place.source != place.target:
            succ[place.source].add(place.target)
            pred[place.target].add(place.source)
    if len(nodes) < 3 or any(len(succ[t]) != 1 or len(pred[t]) != 1 for t in nodes):
        return None
    ring = [nodes[0]]
    while len(ring) <= len(nodes):
        (nxt,) = succ[ring[-1]]
        if nxt == ring[0]:
            break
        ring.append(nxt)
    return ring if len(ring) == len(nodes) else None


def _ring_order(nodes: list[str], places: Sequence[PlaceSpec],
                circuits: Sequence[Sequence[str]]) -> list[str]:
    """Critical circuit first, then the others by a walk along the arcs, then the rest."""
    present = set(nodes)
    order: list[str] = []
    for circuit in circuits:
        order.extend(t for t in circuit if t in present and t not in order)
    succ: dict[str, list[str]] = {t: [] for t in nodes}
    for place in places:
        succ[place.source].append(place.target)
    for t in nodes:
        if t not in order:
            order.append(t)
            nxt = succ[t]
            while nxt and nxt[0] not in order and nxt[0] in present:
                order.append(nxt[0])
                nxt = succ[nxt[0]]
    return order



# --- the circle layout -----------------------------------------------------------------------

def _circle(ring: list[str], places: Sequence[PlaceSpec], box_width: float,
            critical_places: set[int]) -> tuple[dict[str, Point], list[Arc]]:
    n = len(ring)
    # Room for a box, a place circle and its label between two neighbours on the ring.
    pitch = box_width + GAP_X + 0.9
    radius = max(2.0, n * pitch / (2 * math.pi))
    positions = {}
    for i, t in enumerate(ring):
        angle = math.pi / 2 - 2 * math.pi * i / n  # clockwise from the top
        positions[t] = (radius * math.cos(angle), radius * math.sin(angle))
    half_w, half_h = box_width / 2, BOX_HEIGHT / 2
    nearest = min((math.dist(positions[s], positions[t]) for s in ring for t in ring if s < t),
                  default=pitch)
    groups: dict[tuple[str, str], list[PlaceSpec]] = {}
    for p in places:
        if p.source != p.target:
            groups.setdefault((p.source, p.target), []).append(p)
    arcs: dict[int, Arc] = {}
    for (source, target), members in groups.items():
        a, b = positions[source], positions[target]
        dx, dy = b[0] - a[0], b[1] - a[1]
        length = math.hypot(dx, dy)
        nx, ny = -dy / length, dx / length
        # Neighbours on the ring bow outwards (clockwise travel: left is outside).
        base = 0.3 if length < 1.2 * nearest else 0.0
        for k, p in enumerate(sorted(members, key=lambda p: p.index)):
            bow = base + k * 0.45
            control = ((a[0] + b[0]) / 2 + bow * nx, (a[1] + b[1]) / 2 + bow * ny)
            start, end = border(a, control, half_w, half_h), border(b, control, half_w, half_h)
            points = quadratic(start, control, end) if bow else line(start, end)
            mid, normal = arc_at(points)
            arcs[p.index] = Arc(p.index, p.source, p.target, p.tokens, tuple(points), mid,
                                normal, p.index in critical_places)
    # Self-loops point away from the centre: up in the upper half, down in the lower one.
    up = {t: 1.0 if y >= -1e-9 else -1.0 for t, (_, y) in positions.items()}
    stack_loops(arcs, places, positions, half_h, critical_places, up)
    return positions, [arcs[p.index] for p in places]



# --- labels ----------------------------------------------------------------------------------

def _obstacles(nodes: Mapping[str, Point], half_w: float, half_h: float,
               arcs: Sequence[Arc], show_places: bool) -> list[Box]:
    boxes = [(x - half_w, y - half_h, x + half_w, y + half_h) for x, y in nodes.values()]
    if show_places:
        r = PLACE_RADIUS + 0.02
        boxes += [(a.mid[0] - r, a.mid[1] - r, a.mid[0] + r, a.mid[1] + r) for a in arcs]
    return boxes



# --- the front door --------------------------------------------------------------------------

def _arrange(chosen: list[str], drawn: list[PlaceSpec], box_width: float,
             critical_places: set[int], critical_circuits: Sequence[Sequence[str]]
             ) -> tuple[str, dict[str, Point], list[Arc], int]:
    """Kind, positions, arcs and bands: a circle for a small ring, else the layers."""
    ring = _is_ring(chosen, drawn)
    small_ring = ring is not None and len(ring) <= MAX_CIRCLE
    result = None if small_ring else layered(chosen, drawn, box_width, critical_places)
    if result is None:
        order = ring if small_ring and ring else _ring_order(chosen, drawn, critical_circuits)
        positions, arcs = _circle(order, drawn, box_width, critical_places)
        return "circle", positions, arcs, 1
    positions, arcs, bands = result
    return "layered", positions, arcs, bands


def layout_graph(
    transitions: Sequence[str],
    places: Sequence[PlaceSpec],
    critical_circuits: Sequence[Sequence[str]] = (),
    critical_places: set[int] | None = None,
    limit: int = 60,
    place_text: Mapping[int, str] | None = None,
    bottleneck: str | None = None,
    bottleneck_place: int | None = None,
    box_text: Mapping[str, str] | None = None,
    show_places: bool = True,
) -> Drawing:
    """Lay out an event graph.

    Parameters
    ----------
    transitions
        Transition ids in document order.
    places
        The places; ``source`` and ``target`` are transition ids.
    critical_circuits
        Circuits as transition ids in circuit order (from the document).
    critical_places
        Indices of the places to highlight (see :func:`choose_critical_places`).
    limit
        Largest number of transitions drawn; beyond it only the critical circuits, the
        bottleneck and their neighbourhood are drawn. A smaller graph too dense to print at
        :data:`MIN_PRINT_SCALE` is drawn in part the same way.
    place_text
        Text to write beside each place (slack, criticality), placed without overlap.
    bottleneck, bottleneck_place
        The bottleneck transition or place, tagged in the drawing and always drawn.
    box_text
        Text written in each box instead of its shortened id.
    show_places
        False for a map without places (the components): no circles, no tokens.

    Returns
    -------
    Drawing
        Positions, arcs, labels and what was left out.
    """
    critical = {t for circuit in critical_circuits for t in circuit}
    focus = [t for circuit in critical_circuits for t in circuit]
    by_index = {p.index: p for p in places}
    if bottleneck_place is not None and bottleneck_place in by_index:
        bp = by_index[bottleneck_place]
        focus = [bp.source, bp.target, *focus]
    if bottleneck is not None:
        focus = [bottleneck, *focus]
    critical_places = critical_places or set()
    # A graph too dense to print legibly is drawn in part, like a large one: fewer
    # transitions around the focus until it prints at MIN_PRINT_SCALE or more.
    size = limit
    while True:
        chosen = _select(transitions, places, focus, size)
        kept = set(chosen)
        drawn = [p for p in places if p.source in kept and p.target in kept]
        texts = {t: (box_text or {}).get(t) or short_label(t) for t in chosen}
        box_width = max(0.8, max(text_size(s, BOX_FONT, True)[0] for s in texts.values())
                        + 0.3)
        kind, positions, arcs, bands = _arrange(chosen, drawn, box_width, critical_places,
                                                critical_circuits)
        xmin, xmax, ymin, ymax = Drawing(kind, positions, box_width, BOX_HEIGHT, tuple(arcs),
                                         frozenset(), 0, 0).bounds()
        if len(chosen) <= 12 or print_scale(xmax - xmin, ymax - ymin) >= MIN_PRINT_SCALE:
            break
        size = max(12, int(len(chosen) * 0.75))
    positions = {t: (round(x, 9), round(y, 9)) for t, (x, y) in positions.items()}
    half_w, half_h = box_width / 2, BOX_HEIGHT / 2
    obstacles = _obstacles(positions, half_w, half_h, arcs, show_places)
    wanted: list[tuple[Point, Point, float, str, str, bool]] = []
    if bottleneck in positions:
        wanted.append((positions[bottleneck], (0.0, -1.0), half_h, "bottleneck", "tag", True))
    arc_of = {a.place: a for a in arcs}
    if bottleneck_place in arc_of and show_places:
        a = arc_of[bottleneck_place]  # type: ignore[index]
        wanted.append((a.mid, a.normal, PLACE_RADIUS, "bottleneck", "tag", True))
    texts_wanted = place_text or {}
    # Critical places first: their labels are the ones a reviewer reads.
    for arc in sorted(arcs, key=lambda a: (not a.critical, a.place)):
        text = texts_wanted.get(arc.place)
        if text and show_places:
            wanted.append((arc.mid, arc.normal, PLACE_RADIUS, text, "place", False))
    labels, dropped = place_labels(wanted, Boxes(obstacles), Strokes([a.points for a in arcs]))
    return Drawing(
        kind=kind,
        nodes=positions,
        box_width=box_width,
        box_height=BOX_HEIGHT,
        arcs=tuple(arcs),
        critical_transitions=frozenset(critical & kept),
        hidden_transitions=len(transitions) - len(chosen),
        hidden_places=len(places) - len(drawn),
        labels=tuple(labels),
        dropped_labels=dropped,
        box_text=texts,
        bands=bands,
        bottleneck=bottleneck if bottleneck in positions else None,
        bottleneck_place=bottleneck_place if bottleneck_place in arc_of else None,
        show_places=show_places,
    )


@dataclass(frozen=True)
class ComponentMap:
    """The strongly connected components of a graph, laid out as a small map."""

    drawing: Drawing
    #: Per component, in map order: its name, its transitions, and whether it is critical.
    names: tuple[str, ...]
    members: tuple[tuple[str, ...], ...]
    hidden_components: int


def component_map(transitions: Sequence[str], places: Sequence[PlaceSpec],
                  value_text: Mapping[str, str], critical: set[str],
                  limit: int = 30) -> ComponentMap:
    """The condensation of the graph: one box per strongly connected component.

    Each box says its name, its size and ``value_text`` of its first transition (the cycle
    time, formatted by the page); arcs join components joined by a place. At most ``limit``
    components are drawn: those holding critical transitions and then the largest.
    """
    import igraph

    index = {t: i for i, t in enumerate(transitions)}
    edges = sorted({(index[p.source], index[p.target]) for p in places
                    if p.source in index and p.target in index})
    graph = igraph.Graph(n=len(transitions), edges=edges, directed=True)
    membership = graph.connected_components(mode="strong").membership
    groups: dict[int, list[str]] = {}
    for t in transitions:
        groups.setdefault(membership[index[t]], []).append(t)
    # Components in the order of their first transition in the document.
    ordered = sorted(groups.values(), key=lambda g: index[g[0]])
    ranked = sorted(range(len(ordered)), key=lambda i: (not (set(ordered[i]) & critical),
                                                        -len(ordered[i]), i))
    shown = sorted(ranked[:limit])
    names = {i: f"C{i + 1}" for i in shown}
    comp_of = {t: i for i, g in enumerate(ordered) for t in g}
    links = sorted({(comp_of[p.source], comp_of[p.target]) for p in places
                    if p.source in comp_of and p.target in comp_of
                    and comp_of[p.source] != comp_of[p.target]
                    and comp_of[p.source] in names and comp_of[p.target] in names})
    specs = [PlaceSpec(k, names[a], names[b], 0) for k, (a, b) in enumerate(links)]
    box_text = {names[i]: f"{names[i]} · {len(ordered[i])} · {value_text.get(ordered[i][0], '–')}"
                for i in shown}
    crit_names = [names[i] for i in shown if set(ordered[i]) & critical]
    drawing = layout_graph([names[i] for i in shown], specs, [crit_names] if crit_names else [],
                           box_text=box_text, show_places=False, limit=limit)
    return ComponentMap(drawing, tuple(names[i] for i in shown),
                        tuple(tuple(ordered[i]) for i in shown), len(ordered) - len(shown))

