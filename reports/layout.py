"""A drawing layout of the event graph for the review page: pure geometry, no drawing.

Transitions are boxes, places are small circles on the arcs between them (with their tokens
inside), in the manner of a Petri net. Two layouts are used:

* **layered**, the default: the Sugiyama layout of igraph (``Graph.layout_sugiyama``;
  Sugiyama, Tagawa & Toda, "Methods for visual understanding of hierarchical system
  structures", IEEE Trans. SMC 11(2), 1981). The layers come from the places *without* tokens,
  which form an acyclic graph in a live event graph (a token-free circuit is a deadlock), so a
  firing propagates left to right; igraph then orders each layer against crossings, with every
  place (token-carrying ones too) counted. A source sits just before the first transition it
  feeds. When the layers do not fit the page width, they are **folded** into bands read like
  lines of text: band 2 continues below band 1, and so on.
* **circle**, when the drawn graph is one small elementary circuit (a ring of stops, a loop of
  stations, self-loops aside) or when the layered layout would be a single layer.

Arcs between neighbouring layers of a band are straight (several places between one pair of
transitions spread into a lens); every other arc leaves its box upwards or downwards into a
horizontal corridor between the bands, and, when it changes corridor, runs along a vertical
lane beside the drawing: no long arc crosses the boxes of a band. Labels (slack, criticality,
tags) are placed with a collision check against each other, the boxes, the place circles and
the token marks; a label that finds no free spot is dropped, and the :class:`Drawing` counts
it so that the page can say so.

Large graphs (more than ``limit`` transitions) are drawn in part: the critical circuits, the
bottleneck and the transitions one place away from them. :func:`component_map` lays out the
strongly connected components of a graph as a small map instead.

Coordinates are in layout units, :data:`INCH` inches each once drawn, with y growing upwards;
text sizes are in points (:data:`BOX_FONT`, :data:`LABEL_FONT`, :data:`TOKEN_FONT`), which the
figure must use for the collision check to hold. The same input always gives the same layout.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

__all__ = [
    "INCH",
    "Arc",
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

Point = tuple[float, float]

#: Inches per layout unit in the figure.
INCH = 0.5
#: Font sizes in points: transition ids, labels beside places, token counts.
BOX_FONT, LABEL_FONT, TOKEN_FONT = 8.0, 7.0, 6.0
#: Height of a transition box and the radius of a place circle, in layout units.
BOX_HEIGHT = 0.5
PLACE_RADIUS = 0.17
#: Widest drawing, in layout units: 7 inches, inside the A4 and letter text blocks (7.2 in).
MAX_WIDTH = 7.0 / INCH
#: Longest transition id written inside a box; longer ids are shortened with an ellipsis.
MAX_LABEL = 12
#: Horizontal gap between two layers, vertical pitch of the rows of a band, in layout units.
GAP_X, ROW = 1.0, 1.8
#: Spacing of the tracks of a corridor and of the lanes beside the drawing.
TRACK, LANE = 0.42, 0.4
#: Free room kept around a label.
MARGIN = 0.04

#: Advance widths in em of a sans-serif font, rounded up (a little wider than DejaVu Sans and
#: Liberation Sans, the fonts a browser picks for the page's font stack on Linux).
_WIDTHS = {**dict.fromkeys("0123456789", 0.64), **dict.fromkeys(".,:;'|!il", 0.34),
           **dict.fromkeys(" \u00a0\u202f", 0.33), "%": 0.96, "−": 0.84, "–": 0.5, "…": 1.0,
           **dict.fromkeys("mwMW", 1.0), **dict.fromkeys("fjrt()[]", 0.42)}


def text_size(text: str, points: float, bold: bool = False) -> tuple[float, float]:
    """Width and height of a one-line text in layout units (an estimate on the safe side)."""
    em = sum(_WIDTHS.get(c, 0.72 if c.isupper() else 0.62 if c.isascii() else 1.0)
             for c in text)
    scale = points / 72 / INCH
    return em * scale * (1.08 if bold else 1.0), 1.3 * scale


@dataclass(frozen=True)
class PlaceSpec:
    """What the layout needs to know about one place."""

    index: int
    source: str
    target: str
    tokens: int


@dataclass(frozen=True)
class Arc:
    """One drawn place: a path of cubic Bézier segments (1 + 3k control points)."""

    place: int
    source: str
    target: str
    tokens: int
    points: tuple[Point, ...]
    #: Where the place circle sits, and the unit normal of the arc there.
    mid: Point
    normal: Point
    critical: bool


@dataclass(frozen=True)
class Label:
    """A text placed beside a place or a box: centre, size in points, what it belongs to."""

    text: str
    centre: Point
    points: float
    owner: str  # "place" or "tag"
    bold: bool = False


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
    labels: tuple[Label, ...] = ()
    #: Labels asked for but left out, as no free spot was found.
    dropped_labels: int = 0
    #: Text written in each box (the id, shortened).
    box_text: dict[str, str] = field(default_factory=dict)
    bands: int = 1
    bottleneck: str | None = None
    bottleneck_place: int | None = None
    show_places: bool = True

    @property
    def partial(self) -> bool:
        """True when part of the graph was left out."""
        return self.hidden_transitions > 0 or self.hidden_places > 0

    def bounds(self) -> tuple[float, float, float, float]:
        """``(xmin, xmax, ymin, ymax)`` of everything drawn, labels included."""
        half_w, half_h = self.box_width / 2, self.box_height / 2
        xs = [x + s * half_w for x, _ in self.nodes.values() for s in (-1, 1)]
        ys = [y + s * half_h for _, y in self.nodes.values() for s in (-1, 1)]
        for arc in self.arcs:
            xs.extend(p[0] for p in arc.points)
            ys.extend(p[1] for p in arc.points)
        for label in self.labels:
            w, h = text_size(label.text, label.points, label.bold)
            xs += [label.centre[0] - w / 2, label.centre[0] + w / 2]
            ys += [label.centre[1] - h / 2, label.centre[1] + h / 2]
        return min(xs), max(xs), min(ys), max(ys)


def short_label(text: str, limit: int = MAX_LABEL) -> str:
    """The id as written in a box: at most ``limit`` characters."""
    return text if len(text) <= limit else text[: limit - 1] + "…"


def token_text(tokens: int) -> str:
    """A marking as written inside a place circle: at most four characters."""
    if tokens < 1000:
        return str(tokens)
    for power, suffix in ((9, "G"), (6, "M"), (3, "k")):
        if tokens >= 10**power:
            value = tokens // 10**power
            return f"{value}{suffix}" if value < 1000 else ">1k" + suffix
    return str(tokens)  # pragma: no cover - unreachable


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
    extra = sorted(neighbours - kept, key=order.__getitem__)
    return keep + extra[: max(0, limit - len(keep))]


def _sugiyama(nodes: list[str], places: Sequence[PlaceSpec]) -> tuple[dict[str, int],
                                                                       dict[str, float]]:
    """Layer and position inside the layer of each node, from igraph's Sugiyama layout."""
    import igraph

    index = {t: i for i, t in enumerate(nodes)}
    free = sorted({(index[p.source], index[p.target]) for p in places
                   if p.tokens == 0 and p.source != p.target})
    # Layers from the token-free places alone (acyclic in a live graph; igraph breaks any
    # cycle of a damaged document with the heuristic of Eades, Lin & Smyth).
    every = sorted({(index[p.source], index[p.target]) for p in places
                    if p.source != p.target})
    first = igraph.Graph(n=len(nodes), edges=free, directed=True).layout_sugiyama()
    layer = {t: round(first.coords[index[t]][1]) for t in nodes}
    if len(set(layer.values())) == 1 and len(nodes) > 12:
        # Tokens on every place: no flow to follow. igraph layers all places instead (it
        # breaks their circuits with the heuristic of Eades, Lin & Smyth).
        first = igraph.Graph(n=len(nodes), edges=every, directed=True).layout_sugiyama()
        layer = {t: round(first.coords[index[t]][1]) for t in nodes}
    # A source sits just before the first transition it feeds, not in layer 0: a second
    # product line joining a shared vessel is drawn beside the vessel.
    fed = {nodes[b] for _, b in free}
    succ: dict[str, list[str]] = {t: [] for t in nodes}
    for a, b in free:
        succ[nodes[a]].append(nodes[b])
    for t in sorted(nodes, key=lambda t: -layer[t]):
        later = [layer[u] for u in succ[t]]
        if t not in fed and later:
            layer[t] = max(layer[t], min(later) - 1)
    # Positions inside the layers against crossings, every place counted.
    graph = igraph.Graph(n=len(nodes), edges=every, directed=True)
    second = graph.layout_sugiyama(layers=[layer[t] for t in nodes])
    position = {t: float(second.coords[index[t]][0]) for t in nodes}
    return layer, position


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


# --- paths -----------------------------------------------------------------------------------

def _cubic_point(p: Sequence[Point], t: float) -> Point:
    s = 1 - t
    return (s**3 * p[0][0] + 3 * s * s * t * p[1][0] + 3 * s * t * t * p[2][0] + t**3 * p[3][0],
            s**3 * p[0][1] + 3 * s * s * t * p[1][1] + 3 * s * t * t * p[2][1] + t**3 * p[3][1])


def _line(a: Point, b: Point) -> list[Point]:
    return [a, (a[0] + (b[0] - a[0]) / 3, a[1] + (b[1] - a[1]) / 3),
            (a[0] + 2 * (b[0] - a[0]) / 3, a[1] + 2 * (b[1] - a[1]) / 3), b]


def _quadratic(a: Point, c: Point, b: Point) -> list[Point]:
    """A quadratic Bézier curve as the cubic that traces it."""
    return [a, (a[0] + 2 * (c[0] - a[0]) / 3, a[1] + 2 * (c[1] - a[1]) / 3),
            (b[0] + 2 * (c[0] - b[0]) / 3, b[1] + 2 * (c[1] - b[1]) / 3), b]


def _rounded(waypoints: Sequence[Point], radius: float = 0.22) -> list[Point]:
    """An orthogonal polyline with rounded corners, as cubic segments."""
    pts = [p for i, p in enumerate(waypoints) if i == 0 or math.dist(p, waypoints[i - 1]) > 1e-9]
    if len(pts) == 2:
        return _line(pts[0], pts[1])
    out: list[Point] = [pts[0]]
    current = pts[0]
    for before, corner, after in zip(pts, pts[1:], pts[2:], strict=False):
        r = min(radius, math.dist(before, corner) / 2, math.dist(corner, after) / 2)
        into = _toward(corner, before, r)
        out_of = _toward(corner, after, r)
        out += _line(current, into)[1:] + _quadratic(into, corner, out_of)[1:]
        current = out_of
    return out + _line(current, pts[-1])[1:]


def _toward(a: Point, b: Point, distance: float) -> Point:
    length = math.dist(a, b) or 1.0
    return a[0] + (b[0] - a[0]) * distance / length, a[1] + (b[1] - a[1]) * distance / length


def _border(centre: Point, toward: Point, half_w: float, half_h: float) -> Point:
    """Where the segment from a box centre toward a point leaves the box (plus a small gap)."""
    dx, dy = toward[0] - centre[0], toward[1] - centre[1]
    length = math.hypot(dx, dy) or 1.0
    ux, uy = dx / length, dy / length
    t = min(half_w / abs(ux) if ux else math.inf, half_h / abs(uy) if uy else math.inf) + 0.06
    return centre[0] + t * ux, centre[1] + t * uy


def _arc_at(points: Sequence[Point], where: Point | None = None) -> tuple[Point, Point]:
    """The middle of a path (or of its segment nearest ``where``) and the unit normal there."""
    segments = [points[i:i + 4] for i in range(0, len(points) - 1, 3)]
    if where is None:
        lengths = [math.dist(s[0], s[3]) for s in segments]
        segment = segments[lengths.index(max(lengths))] if len(segments) > 1 else segments[0]
    else:
        segment = min(segments, key=lambda s: math.dist(_cubic_point(s, 0.5), where))
    mid = _cubic_point(segment, 0.5)
    a, b = _cubic_point(segment, 0.45), _cubic_point(segment, 0.55)
    dx, dy = b[0] - a[0], b[1] - a[1]
    length = math.hypot(dx, dy) or 1.0
    return mid, (-dy / length, dx / length)


# --- the layered layout ----------------------------------------------------------------------

def _assign_tracks(spans: list[tuple[float, float, int]], gap: float) -> dict[int, int]:
    """Greedy interval colouring: each span (low, high, key) gets the lowest free track."""
    ends: list[float] = []
    track: dict[int, int] = {}
    for low, high, key in sorted(spans):
        for i, end in enumerate(ends):
            if end + gap <= low:
                ends[i] = high
                track[key] = i
                break
        else:
            track[key] = len(ends)
            ends.append(high)
    return track


def _layered(nodes: list[str], places: Sequence[PlaceSpec], box_width: float,
             critical_places: set[int]) -> tuple[dict[str, Point], list[Arc], int] | None:
    layer, position = _sugiyama(nodes, places)
    n_layers = max(layer.values()) + 1
    if n_layers == 1:
        if len(nodes) <= 12:
            return None  # a small circle reads better
        # Nothing joins the transitions into layers: one per layer, folded like a line.
        order = sorted(nodes, key=lambda t: (position[t], nodes.index(t)))
        layer = {t: i for i, t in enumerate(order)}
        position = dict.fromkeys(nodes, 0.0)
        n_layers = len(nodes)
    pitch = box_width + GAP_X
    per_band = max(2, int((MAX_WIDTH - box_width) / pitch) + 1)
    n_bands = math.ceil(n_layers / per_band)
    per_band = math.ceil(n_layers / n_bands)  # balanced bands
    band = {t: layer[t] // per_band for t in nodes}
    column = {t: layer[t] % per_band for t in nodes}
    # Rows of each band from igraph's positions, shifted to start at 0.
    low = [min((position[t] for t in nodes if band[t] == b), default=0.0)
           for b in range(n_bands)]
    rows = [max((position[t] - low[b] for t in nodes if band[t] == b), default=0.0)
            for b in range(n_bands)]
    loops = {p.source for p in places if p.source == p.target}
    local = {t: (column[t] * pitch, -(position[t] - low[band[t]]) * ROW) for t in nodes}
    half_w, half_h = box_width / 2, BOX_HEIGHT / 2

    # Which places are drawn inside a band (straight or as a lens) and which in corridors.
    pairs: dict[tuple[str, str], list[PlaceSpec]] = {}
    for p in places:
        if p.source != p.target:
            lo, hi = sorted((p.source, p.target))
            pairs.setdefault((lo, hi), []).append(p)

    def near(a: str, b: str) -> bool:
        if band[a] != band[b]:
            return False
        dl = abs(layer[a] - layer[b])
        if dl == 1:
            return True
        return dl == 0 and abs(position[a] - position[b]) <= 1.0 + 1e-9

    inside = [p for ps in pairs.values() for p in ps if near(p.source, p.target)]
    corridor_places = [p for ps in pairs.values() for p in ps if not near(p.source, p.target)]
    bows: dict[int, float] = {}
    for (lo, _hi), ps in pairs.items():
        members = sorted((p for p in ps if near(p.source, p.target)),
                         key=lambda p: (p.source != lo, p.index))
        for k, p in enumerate(members):
            offset = (k - (len(members) - 1) / 2) * 0.55
            bows[p.index] = offset if p.source == lo else -offset

    # Vertical extent of each band in local coordinates: boxes, self-loops, lenses, labels.
    top = [half_h + (1.05 if any(t in loops and band[t] == b and position[t] == low[b]
                                  for t in nodes) else 0.45) for b in range(n_bands)]
    bottom = [-rows[b] * ROW - half_h - 0.55 for b in range(n_bands)]
    # Corridor tracks: each corridor place picks its corridors first, then tracks are assigned.
    plan: dict[int, tuple[int, int]] = {}
    for p in corridor_places:
        a, b = band[p.source], band[p.target]
        if a == b:
            r = max(position[p.source], position[p.target]) - low[a]
            below = not (rows[a] > 0 and r < rows[a] / 2)
            c = a + 1 if below else a
            plan[p.index] = (c, c)
        else:
            plan[p.index] = (a + 1 if b > a else a, b if b > a else b + 1)
    spans: dict[int, list[tuple[float, float, int]]] = {}
    lane_spans: dict[str, list[tuple[float, float, int]]] = {"left": [], "right": []}
    x_of = {t: local[t][0] for t in nodes}
    full = [x_of[t] for t in nodes]
    xmin, xmax = min(full) - half_w, max(full) + half_w
    side: dict[int, str] = {}
    for p in corridor_places:
        c1, c2 = plan[p.index]
        xa, xb = x_of[p.source], x_of[p.target]
        if c1 == c2:
            spans.setdefault(c1, []).append((min(xa, xb) - 0.1, max(xa, xb) + 0.1, p.index))
            continue
        side[p.index] = "left" if (xa + xb) / 2 <= (xmin + xmax) / 2 else "right"
        edge = xmin if side[p.index] == "left" else xmax
        spans.setdefault(c1, []).append((min(xa, edge), max(xa, edge), p.index))
        spans.setdefault(c2, []).append((min(xb, edge), max(xb, edge), p.index))
        lane_spans[side[p.index]].append((min(c1, c2), max(c1, c2), p.index))
    tracks = {c: _assign_tracks(s, 0.5) for c, s in spans.items()}
    n_tracks = [max(tracks.get(c, {0: -1}).values(), default=-1) + 1 for c in range(n_bands + 1)]
    # Stack the bands: corridor c between band c-1 and band c is as high as its tracks.
    offset, band_shift = 0.0, []
    band_top: list[float] = []
    band_bottom: list[float] = []
    for b in range(n_bands):
        if b > 0:
            offset -= n_tracks[b] * TRACK + 0.2
        shift = offset - top[b]
        band_shift.append(shift)
        band_top.append(shift + top[b])
        band_bottom.append(shift + bottom[b])
        offset = band_bottom[-1]
    positions = {t: (local[t][0], local[t][1] + band_shift[band[t]]) for t in nodes}

    def corridor_y(c: int, track: int) -> float:
        if c == 0:
            return band_top[0] + (track + 0.7) * TRACK
        return band_bottom[c - 1] - (track + 0.7) * TRACK

    lanes = {s: _assign_tracks([(lo, hi, k) for lo, hi, k in v], 1)
             for s, v in lane_spans.items()}
    arcs: dict[int, Arc] = {}
    for p in inside:
        a, b = positions[p.source], positions[p.target]
        dx, dy = b[0] - a[0], b[1] - a[1]
        length = math.hypot(dx, dy)
        nx, ny = -dy / length, dx / length
        bow = bows[p.index]
        control = ((a[0] + b[0]) / 2 + bow * nx, (a[1] + b[1]) / 2 + bow * ny)
        start, end = _border(a, control, half_w, half_h), _border(b, control, half_w, half_h)
        points = _quadratic(start, control, end) if bow else _line(start, end)
        mid, normal = _arc_at(points)
        if bow < 0:
            normal = (-normal[0], -normal[1])
        arcs[p.index] = Arc(p.index, p.source, p.target, p.tokens, tuple(points), mid, normal,
                            p.index in critical_places)
    for p in corridor_places:
        c1, c2 = plan[p.index]
        a, b = positions[p.source], positions[p.target]
        y1 = corridor_y(c1, tracks[c1][p.index])
        y2 = corridor_y(c2, tracks[c2][p.index])
        start = (a[0], a[1] + math.copysign(half_h + 0.06, y1 - a[1]))
        end = (b[0], b[1] + math.copysign(half_h + 0.06, y2 - b[1]))
        if c1 == c2:
            waypoints = [start, (a[0], y1), (b[0], y1), end]
        else:
            k = lanes[side[p.index]][p.index]
            lane_x = (xmin - (k + 1) * LANE if side[p.index] == "left"
                      else xmax + (k + 1) * LANE)
            waypoints = [start, (a[0], y1), (lane_x, y1), (lane_x, y2), (b[0], y2), end]
        points = _rounded(waypoints)
        mid, normal = _arc_at(points)
        arcs[p.index] = Arc(p.index, p.source, p.target, p.tokens, tuple(points), mid, normal,
                            p.index in critical_places)
    for p in places:
        if p.source == p.target:
            arcs[p.index] = _self_loop(p, positions[p.source], half_h, 1.0, 0,
                                       p.index in critical_places)
    _stack_loops(arcs, places, positions, half_h, critical_places,
                 {t: 1.0 for t in nodes})
    return positions, [arcs[p.index] for p in places], n_bands


def _self_loop(p: PlaceSpec, centre: Point, half_h: float, up: float, k: int,
               critical: bool) -> Arc:
    x, y = centre
    lift = up * (0.6 + 0.3 * k)
    edge = y + up * half_h
    points = ((x - 0.22, edge), (x - 0.45, edge + lift), (x + 0.45, edge + lift),
              (x + 0.22, edge))
    return Arc(p.index, p.source, p.target, p.tokens, points, (x, edge + 0.75 * lift),
               (0.0, up), critical)


def _stack_loops(arcs: dict[int, Arc], places: Sequence[PlaceSpec],
                 positions: dict[str, Point], half_h: float, critical: set[int],
                 up: Mapping[str, float]) -> None:
    """Several self-loops on one transition are nested, each a little higher."""
    count: dict[str, int] = {}
    for p in places:
        if p.source == p.target:
            k = count.get(p.source, 0)
            count[p.source] = k + 1
            arcs[p.index] = _self_loop(p, positions[p.source], half_h, up[p.source], k,
                                       p.index in critical)


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
            start, end = _border(a, control, half_w, half_h), _border(b, control, half_w, half_h)
            points = _quadratic(start, control, end) if bow else _line(start, end)
            mid, normal = _arc_at(points)
            arcs[p.index] = Arc(p.index, p.source, p.target, p.tokens, tuple(points), mid,
                                normal, p.index in critical_places)
    # Self-loops point away from the centre: up in the upper half, down in the lower one.
    up = {t: 1.0 if y >= -1e-9 else -1.0 for t, (_, y) in positions.items()}
    _stack_loops(arcs, places, positions, half_h, critical_places, up)
    return positions, [arcs[p.index] for p in places]


# --- labels ----------------------------------------------------------------------------------

Box = tuple[float, float, float, float]  # xmin, ymin, xmax, ymax


def _meet(a: Box, b: Box) -> bool:
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


class _Boxes:
    """Boxes in a grid of cells, so that a new box is compared with its neighbours only."""

    CELL = 1.0

    def __init__(self, boxes: Sequence[Box] = ()) -> None:
        self.cells: dict[tuple[int, int], list[Box]] = {}
        for box in boxes:
            self.add(box)

    def _span(self, box: Box) -> list[tuple[int, int]]:
        c = self.CELL
        return [(i, j) for i in range(math.floor(box[0] / c), math.floor(box[2] / c) + 1)
                for j in range(math.floor(box[1] / c), math.floor(box[3] / c) + 1)]

    def add(self, box: Box) -> None:
        for cell in self._span(box):
            self.cells.setdefault(cell, []).append(box)

    def hit(self, box: Box) -> bool:
        return any(_meet(box, other) for cell in self._span(box)
                   for other in self.cells.get(cell, ()))


class _Strokes:
    """Points along the arcs in a grid of cells: a label should not sit on a line if it can
    help it (it may, where nothing else is free: lines are not text)."""

    CELL = 0.5

    def __init__(self, arcs: Sequence[Arc]) -> None:
        self.cells: dict[tuple[int, int], list[Point]] = {}
        for arc in arcs:
            for p in sample(arc.points, 12):
                self.cells.setdefault(self._cell(p), []).append(p)

    def _cell(self, p: Point) -> tuple[int, int]:
        return math.floor(p[0] / self.CELL), math.floor(p[1] / self.CELL)

    def crosses(self, box: Box) -> bool:
        x0, y0 = self._cell((box[0], box[1]))
        x1, y1 = self._cell((box[2], box[3]))
        return any(box[0] <= p[0] <= box[2] and box[1] <= p[1] <= box[3]
                   for i in range(x0, x1 + 1) for j in range(y0, y1 + 1)
                   for p in self.cells.get((i, j), ()))


def _place_labels(wanted: Sequence[tuple[Point, Point, float, str, str, bool]],
                  obstacles: _Boxes, strokes: _Strokes) -> tuple[list[Label], int]:
    """Put each text beside its anchor ``(anchor, normal, radius, text, owner, bold)`` at the
    first free spot: along the normal first, then the other sides, then farther out; a spot
    off the lines is preferred to one on a line."""
    labels, dropped = [], 0
    for anchor, normal, radius, text, owner, bold in wanted:
        size = LABEL_FONT
        w, h = text_size(text, size, bold)
        nx, ny = normal
        tx, ty = ny, -nx
        candidates = []
        for distance in (1.0, 1.9, 2.8):
            gap = radius * distance + 0.08
            for sx, sy in ((nx, ny), (-nx, -ny), (tx, ty), (-tx, -ty), (nx + tx, ny + ty),
                           (nx - tx, ny - ty), (-nx + tx, -ny + ty), (-nx - tx, -ny - ty)):
                norm = math.hypot(sx, sy) or 1.0
                ux, uy = sx / norm, sy / norm
                # The distance from the anchor to the edge of the text box along (ux, uy).
                reach = min(w / 2 / abs(ux) if abs(ux) > 1e-9 else math.inf,
                            h / 2 / abs(uy) if abs(uy) > 1e-9 else math.inf)
                candidates.append((anchor[0] + ux * (gap + reach),
                                   anchor[1] + uy * (gap + reach)))
        boxes = [(cx - w / 2 - MARGIN, cy - h / 2 - MARGIN, cx + w / 2 + MARGIN,
                  cy + h / 2 + MARGIN) for cx, cy in candidates]
        free = [box for box in boxes if not obstacles.hit(box)]
        if not free:
            dropped += 1
            continue
        box = next((b for b in free if not strokes.crosses(b)), free[0])
        obstacles.add(box)
        centre = ((box[0] + box[2]) / 2, (box[1] + box[3]) / 2)
        labels.append(Label(text, (round(centre[0], 6), round(centre[1], 6)), size, owner,
                            bold))
    return labels, dropped


def _obstacles(nodes: Mapping[str, Point], half_w: float, half_h: float,
               arcs: Sequence[Arc], show_places: bool) -> list[Box]:
    boxes = [(x - half_w, y - half_h, x + half_w, y + half_h) for x, y in nodes.values()]
    if show_places:
        r = PLACE_RADIUS + 0.02
        boxes += [(a.mid[0] - r, a.mid[1] - r, a.mid[0] + r, a.mid[1] + r) for a in arcs]
    return boxes


# --- the front door --------------------------------------------------------------------------

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
        bottleneck and their neighbourhood are drawn.
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
    chosen = _select(transitions, places, focus, limit)
    kept = set(chosen)
    drawn = [p for p in places if p.source in kept and p.target in kept]
    texts = {t: (box_text or {}).get(t) or short_label(t) for t in chosen}
    box_width = max(0.8, max(text_size(s, BOX_FONT, True)[0] for s in texts.values()) + 0.3)
    critical_places = critical_places or set()
    ring = _is_ring(chosen, drawn)
    small_ring = ring is not None and len(ring) * (box_width + GAP_X) / math.pi <= MAX_WIDTH
    result = None if small_ring else _layered(chosen, drawn, box_width, critical_places)
    kind, bands = "layered", 1
    if result is None:
        kind = "circle"
        order = ring if small_ring and ring else _ring_order(chosen, drawn, critical_circuits)
        positions, arcs = _circle(order, drawn, box_width, critical_places)
    else:
        positions, arcs, bands = result
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
    labels, dropped = _place_labels(wanted, _Boxes(obstacles), _Strokes(arcs))
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


def sample(points: Sequence[Point], steps: int = 8) -> list[Point]:
    """Points along a path of cubic segments (for tests and bounds)."""
    out = []
    for i in range(0, len(points) - 1, 3):
        segment = points[i:i + 4]
        out += [_cubic_point(segment, k / steps) for k in range(steps + 1)]
    return out

