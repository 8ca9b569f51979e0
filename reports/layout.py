"""A drawing layout of the event graph for the review page.

Transitions are boxes, places are small circles on the arcs between them (with their tokens
inside), in the manner of a Petri net. Two layouts are used:

* **layered**, the default: the places *without* tokens form an acyclic graph in a live event
  graph (a token-free circuit is a deadlock), so transitions are put in columns by their longest
  token-free path from a source, left to right in the order a firing propagates. Places with
  tokens close the circuits and are drawn as bows. Inside a column, transitions on a critical
  circuit come first (the top row is the bottleneck), the others follow by the barycentre of
  their neighbours in the column before (a few sweeps, ties broken by document order).
* **circle**, when the drawn graph is one elementary circuit (a ring of stops, a loop of
  stations) or when the layered layout would be a single column.

Large graphs (more than ``limit`` transitions) are drawn in part: the critical circuits and
the transitions one place away from them. The :class:`Drawing` says what was left out so that
the page can say so.

The module is pure geometry: no matplotlib, no analysis. Coordinates are in abstract units
(about 0.55 inch each once drawn); y grows upwards.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from itertools import pairwise

__all__ = [
    "Arc",
    "Drawing",
    "PlaceSpec",
    "choose_critical_places",
    "layout_graph",
    "place_labels",
    "short_label",
]

Point = tuple[float, float]

#: Height of a transition box and the radius of a place circle, in layout units.
BOX_HEIGHT = 0.5
PLACE_RADIUS = 0.17
#: Longest transition id written inside a box; longer ids are shortened with an ellipsis.
MAX_LABEL = 12


@dataclass(frozen=True)
class PlaceSpec:
    """What the layout needs to know about one place."""

    index: int
    source: str
    target: str
    tokens: int


@dataclass(frozen=True)
class Arc:
    """One drawn place: a quadratic Bézier curve (or a cubic loop for a self-loop)."""

    place: int
    source: str
    target: str
    tokens: int
    #: Control points: 3 for a quadratic curve, 4 for the cubic self-loop.
    points: tuple[Point, ...]
    #: Where the place circle sits, and the unit vector pointing to the side of its label.
    mid: Point
    label_side: Point
    critical: bool


@dataclass(frozen=True)
class Drawing:
    """A laid-out graph, ready to be drawn."""

    kind: str  # "layered" or "circle"
    nodes: dict[str, Point]
    box_width: float
    box_height: float
    arcs: tuple[Arc, ...]
    critical_transitions: frozenset[str]
    hidden_transitions: int
    hidden_places: int

    @property
    def partial(self) -> bool:
        """True when part of the graph was left out."""
        return self.hidden_transitions > 0 or self.hidden_places > 0

    def bounds(self) -> tuple[float, float, float, float]:
        """``(xmin, xmax, ymin, ymax)`` of everything drawn, labels included."""
        xs = [x for x, _ in self.nodes.values()]
        ys = [y for _, y in self.nodes.values()]
        for arc in self.arcs:
            for point in _sample(arc.points):
                xs.append(point[0])
                ys.append(point[1])
            xs.append(arc.mid[0] + 0.6 * arc.label_side[0])
            ys.append(arc.mid[1] + 0.45 * arc.label_side[1])
        half_w, half_h = self.box_width / 2, self.box_height / 2
        return min(xs) - half_w, max(xs) + half_w, min(ys) - half_h, max(ys) + half_h


def _sample(points: tuple[Point, ...], steps: int = 12) -> list[Point]:
    """Points along a Bézier curve given by its control points (de Casteljau)."""
    out = []
    for i in range(steps + 1):
        t = i / steps
        level = list(points)
        while len(level) > 1:
            level = [((1 - t) * a[0] + t * b[0], (1 - t) * a[1] + t * b[1])
                     for a, b in pairwise(level)]
        out.append(level[0])
    return out


def short_label(text: str) -> str:
    """The id as written in a box: at most :data:`MAX_LABEL` characters."""
    return text if len(text) <= MAX_LABEL else text[: MAX_LABEL - 1] + "…"


def choose_critical_places(
    circuits: Sequence[Sequence[str]],
    places: Sequence[PlaceSpec],
    slack: Sequence[float | None] | None,
) -> set[int]:
    """The places to highlight for critical circuits given as transition ids in circuit order.

    Between two consecutive transitions of a circuit there may be parallel places; the one
    with the least slack in the document is the critical one. Without slacks, all of them are
    highlighted (the document does not say which).
    """
    by_pair: dict[tuple[str, str], list[PlaceSpec]] = {}
    for place in places:
        by_pair.setdefault((place.source, place.target), []).append(place)
    chosen: set[int] = set()
    for circuit in circuits:
        for i, source in enumerate(circuit):
            target = circuit[(i + 1) % len(circuit)]
            candidates = by_pair.get((source, target), [])
            known = [] if slack is None else [
                p for p in candidates if p.index < len(slack) and slack[p.index] is not None
            ]
            if known:
                best = min(slack[p.index] for p in known)  # type: ignore[index,type-var]
                chosen.update(p.index for p in known if slack[p.index] == best)  # type: ignore[index]
            else:
                chosen.update(p.index for p in candidates)
    return chosen


def _select(
    transitions: Sequence[str],
    places: Sequence[PlaceSpec],
    critical: set[str],
    limit: int,
) -> list[str]:
    """Transitions to draw: all of them, or the critical ones and their neighbours."""
    if len(transitions) <= limit:
        return list(transitions)
    order = {t: i for i, t in enumerate(transitions)}
    keep = sorted(critical, key=order.__getitem__)[:limit]
    kept = set(keep)
    neighbours: set[str] = set()
    for place in places:
        if place.source in kept:
            neighbours.add(place.target)
        if place.target in kept:
            neighbours.add(place.source)
    extra = sorted(neighbours - kept, key=order.__getitem__)
    keep.extend(extra[: max(0, limit - len(keep))])
    if not keep:  # no critical circuit known: the first transitions in document order
        keep = list(transitions[:limit])
    return keep


def _columns(nodes: list[str], places: Sequence[PlaceSpec]) -> dict[str, int]:
    """Longest token-free path from a source (cycles, which a live graph has not, are cut)."""
    succ: dict[str, list[str]] = {t: [] for t in nodes}
    for place in places:
        if place.tokens == 0 and place.source != place.target:
            succ[place.source].append(place.target)
    # Depth-first topological order; an arc to a node still on the stack closes a cycle and
    # is ignored, so the result is defined for any input.
    state: dict[str, int] = {}
    order: list[str] = []
    for root in nodes:
        if root in state:
            continue
        stack = [(root, iter(succ[root]))]
        state[root] = 1
        while stack:
            node, it = stack[-1]
            nxt = next(it, None)
            if nxt is None:
                state[node] = 2
                order.append(node)
                stack.pop()
            elif nxt not in state:
                state[nxt] = 1
                stack.append((nxt, iter(succ[nxt])))
    order.reverse()
    rank = {t: i for i, t in enumerate(order)}
    column = dict.fromkeys(nodes, 0)
    fed: set[str] = set()
    for node in order:
        for nxt in succ[node]:
            if rank[nxt] > rank[node]:
                column[nxt] = max(column[nxt], column[node] + 1)
                fed.add(nxt)
    # A source sits just before the first transition it feeds, not in column 0: a second
    # product line joining a shared vessel is drawn beside the vessel, not at the far left.
    for node in reversed(order):
        later = [column[n] for n in succ[node] if rank[n] > rank[node]]
        if node not in fed and later:
            column[node] = max(column[node], min(later) - 1)
    return column


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


def _layered(
    nodes: list[str], places: Sequence[PlaceSpec], critical: set[str], spacing: float
) -> dict[str, Point] | None:
    column = _columns(nodes, places)
    n_columns = max(column.values()) + 1
    if n_columns == 1:
        return None
    index = {t: i for i, t in enumerate(nodes)}
    neighbours: dict[str, list[str]] = {t: [] for t in nodes}
    for place in places:
        if place.source != place.target:
            neighbours[place.source].append(place.target)
            neighbours[place.target].append(place.source)
    layers: list[list[str]] = [[] for _ in range(n_columns)]
    for t in nodes:
        layers[column[t]].append(t)
    row: dict[str, float] = {}
    for layer in layers:
        layer.sort(key=lambda t: (t not in critical, index[t]))
        row.update({t: float(i) for i, t in enumerate(layer)})
    # Barycentre sweeps, left to right then right to left; critical transitions stay on top.
    for sweep in range(4):
        sequence = layers if sweep % 2 == 0 else layers[::-1]
        for layer in sequence[1:]:
            def key(t: str) -> tuple[bool, float, int]:
                near = [row[u] for u in neighbours[t] if column[u] != column[t]]
                centre = sum(near) / len(near) if near else row[t]
                return (t not in critical, centre, index[t])

            layer.sort(key=key)
            row.update({t: float(i) for i, t in enumerate(layer)})
    return {t: (column[t] * spacing, -row[t] * 1.6) for t in nodes}


def _circle(ring: list[str], spacing: float) -> dict[str, Point]:
    n = len(ring)
    radius = max(1.6, n * spacing / (2 * math.pi))
    positions = {}
    for i, t in enumerate(ring):
        angle = math.pi / 2 - 2 * math.pi * i / n  # clockwise from the top
        positions[t] = (radius * math.cos(angle), radius * math.sin(angle))
    return positions


def _ring_order(nodes: list[str], places: Sequence[PlaceSpec], circuits: Sequence[Sequence[str]]
                ) -> list[str]:
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


def _border(centre: Point, toward: Point, half_w: float, half_h: float) -> Point:
    """Where the segment from a box centre toward a point leaves the box (plus a small gap)."""
    dx, dy = toward[0] - centre[0], toward[1] - centre[1]
    length = math.hypot(dx, dy) or 1.0
    ux, uy = dx / length, dy / length
    t = min(half_w / abs(ux) if ux else math.inf, half_h / abs(uy) if uy else math.inf)
    t += 0.06
    return centre[0] + t * ux, centre[1] + t * uy


def _bows(
    positions: dict[str, Point], places: Sequence[PlaceSpec], spacing: float, kind: str
) -> dict[int, float]:
    """How far each arc bends: the offset of its control point along its left-hand normal."""
    ys = [y for _, y in positions.values()]
    centre_y = (max(ys) + min(ys)) / 2
    centre_x = sum(x for x, _ in positions.values()) / len(positions)
    nearest = min(
        (math.dist(p, q) for s, p in positions.items() for t, q in positions.items() if s < t),
        default=spacing,
    )
    bows: dict[int, float] = {}
    for place in places:
        a, b = positions[place.source], positions[place.target]
        dx, dy = b[0] - a[0], b[1] - a[1]
        length = math.hypot(dx, dy)
        nx, ny = -dy / length, dx / length
        if kind == "circle":
            # Neighbours on the ring bow outwards (clockwise travel: left is outside).
            bows[place.index] = 0.3 if length < 1.2 * nearest else 0.0
            continue
        if place.tokens == 0 and 0 < dx <= 1.01 * spacing:
            bows[place.index] = 0.0  # a forward step to the next column: straight
            continue
        bow = 0.22 * length + 0.3 if dx > 0 else 0.3 * length + 0.6
        # Bow away from the middle of the drawing, so that circuits close around it; on a
        # tie (a drawing of one row), upwards.
        mx, my = (a[0] + b[0]) / 2, (a[1] + b[1]) / 2

        def spread(sign: float, mx: float = mx, my: float = my, nx: float = nx,
                   ny: float = ny, bow: float = bow) -> float:
            x, y = mx + sign * bow * nx, my + sign * bow * ny
            return math.hypot(x - centre_x, y - centre_y) + 1e-6 * sign * ny

        bows[place.index] = bow if spread(1.0) >= spread(-1.0) else -bow
    # Places between one pair of transitions that would lie on one curve are spread apart.
    # Offsets are compared in the frame of the sorted pair, where the normal of the
    # opposite direction points the other way.
    groups: dict[tuple[str, str, float], list[PlaceSpec]] = {}
    for place in places:
        lo, hi = sorted((place.source, place.target))
        sign = 1.0 if (place.source, place.target) == (lo, hi) else -1.0
        groups.setdefault((lo, hi, round(sign * bows[place.index], 6)), []).append(place)
    for (lo, hi, offset), members in groups.items():
        if len(members) < 2:
            continue
        for k, place in enumerate(members):
            sign = 1.0 if (place.source, place.target) == (lo, hi) else -1.0
            shift = (k - (len(members) - 1) / 2) * 0.5 if offset == 0 else k * 0.45
            bows[place.index] = sign * (offset + math.copysign(shift, offset or 1.0))
    return bows


def _arcs(
    positions: dict[str, Point],
    places: Sequence[PlaceSpec],
    critical_places: set[int],
    box_width: float,
    spacing: float,
    kind: str,
) -> list[Arc]:
    half_w, half_h = box_width / 2, BOX_HEIGHT / 2
    loops = [p for p in places if p.source == p.target]
    bows = _bows(positions, [p for p in places if p.source != p.target], spacing, kind)
    arcs: dict[int, Arc] = {}
    leaving: dict[str, list[float]] = {t: [] for t in positions}  # vertical directions used
    for place in places:
        if place.source == place.target:
            continue
        a, b = positions[place.source], positions[place.target]
        dx, dy = b[0] - a[0], b[1] - a[1]
        length = math.hypot(dx, dy)
        nx, ny = -dy / length, dx / length  # the left-hand normal of the direction a -> b
        bow = bows[place.index]
        control = ((a[0] + b[0]) / 2 + bow * nx, (a[1] + b[1]) / 2 + bow * ny)
        start = _border(a, control, half_w, half_h)
        end = _border(b, control, half_w, half_h)
        leaving[place.source].append(start[1] - a[1])
        leaving[place.target].append(end[1] - b[1])
        mid = ((start[0] + 2 * control[0] + end[0]) / 4, (start[1] + 2 * control[1] + end[1]) / 4)
        side = (nx, ny) if bow >= 0 else (-nx, -ny)
        arcs[place.index] = Arc(place.index, place.source, place.target, place.tokens,
                                (start, control, end), mid, side,
                                place.index in critical_places)
    stacked: dict[str, int] = {}
    for place in loops:
        # A self-loop goes above the box, or below it when more arcs leave from the top.
        x, y = positions[place.source]
        used = leaving[place.source]
        up = 1.0 if sum(v > 1e-9 for v in used) <= sum(v < -1e-9 for v in used) else -1.0
        k = stacked.get(place.source, 0)
        stacked[place.source] = k + 1
        lift = up * (0.75 + 0.35 * k)
        edge = y + up * half_h
        points = ((x - 0.22, edge), (x - 0.45, edge + lift), (x + 0.45, edge + lift),
                  (x + 0.22, edge))
        arcs[place.index] = Arc(place.index, place.source, place.target, place.tokens, points,
                                (x, edge + 0.75 * lift), (1.0, 0.0),
                                place.index in critical_places)
    return [arcs[p.index] for p in places]


def layout_graph(
    transitions: Sequence[str],
    places: Sequence[PlaceSpec],
    critical_circuits: Sequence[Sequence[str]] = (),
    critical_places: set[int] | None = None,
    limit: int = 60,
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
        Largest number of transitions drawn; beyond it only the critical circuits and their
        neighbourhood are drawn.

    Returns
    -------
    Drawing
        Positions, arcs and what was left out.
    """
    critical = {t for circuit in critical_circuits for t in circuit}
    chosen = _select(transitions, places, critical, limit)
    kept = set(chosen)
    drawn = [p for p in places if p.source in kept and p.target in kept]
    width = max(0.9, 0.13 * max(len(short_label(t)) for t in chosen) + 0.4)
    spacing = width + 1.5
    ring = _is_ring(chosen, drawn)
    positions = None if ring else _layered(chosen, drawn, critical, spacing)
    kind = "layered"
    if positions is None:
        kind = "circle"
        positions = _circle(ring or _ring_order(chosen, drawn, critical_circuits), spacing)
    arcs = _arcs(positions, drawn, critical_places or set(), width, spacing, kind)
    return Drawing(
        kind=kind,
        nodes=positions,
        box_width=width,
        box_height=BOX_HEIGHT,
        arcs=tuple(arcs),
        critical_transitions=frozenset(critical & kept),
        hidden_transitions=len(transitions) - len(chosen),
        hidden_places=len(places) - len(drawn),
    )


def place_labels(
    drawing: Drawing, values: Mapping[int, str]
) -> list[tuple[Point, str, str]]:
    """Label positions beside the place circles: ``(point, text, horizontal alignment)``."""
    out = []
    for arc in drawing.arcs:
        text = values.get(arc.place)
        if not text:
            continue
        sx, sy = arc.label_side
        point = (arc.mid[0] + sx * 0.3, arc.mid[1] + sy * 0.3)
        align = "left" if sx > 0.3 else "right" if sx < -0.3 else "center"
        out.append((point, text, align))
    return out
