r"""The layered layout of an event graph, folded into bands that fit the page.

igraph's Sugiyama layout (``Graph.layout_sugiyama``; K. Sugiyama, S. Tagawa and M. Toda,
"Methods for visual understanding of hierarchical system structures", IEEE Transactions on
Systems, Man, and Cybernetics 11(2), 109–125, 1981) places the transitions. The layers come
from the places *without* tokens, which form an acyclic graph in a live event graph (a
token-free circuit is a deadlock), so a firing propagates left to right; igraph then orders
each layer against crossings, every place (token-carrying ones too) counted. A source sits
just before the first transition it feeds.

When the layers do not fit, they are **folded** into bands of equal length, read like lines
of text: band 2 continues below band 1. The number of bands is the one that prints largest on
A4 and letter, the drawing no wider than the page's column on screen (:func:`_bands`).

Arcs between neighbouring layers of a band are straight (several places between one pair of
transitions spread into a lens); every other arc leaves its box upwards or downwards into a
horizontal corridor between the bands on a track of its own, and, when it changes corridor,
runs along a vertical lane beside the drawing: no long arc crosses the boxes of a band (a box
in the middle row of a band of several rows can still sit on a corridor arc's way out). Pure
geometry, deterministic.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from .drawing import BOX_HEIGHT, Arc, PlaceSpec, stack_loops
from .geometry import INCH, Point, arc_at, border, line, quadratic, rounded

__all__ = ["GAP_X", "MAX_WIDTH", "PRINT_HEIGHT", "PRINT_WIDTH", "ROW", "layered",
           "print_scale"]

#: Widest drawing, in layout units: 9 inches (864 px), inside the page's column on screen.
MAX_WIDTH = 9.0 / INCH
#: Room for a figure on paper, in inches: the A4 text block is 184 mm wide (letter's 190 mm),
#: and the style sheet gives the event graph 180 mm of height (title and caption fit beside).
PRINT_WIDTH, PRINT_HEIGHT = 184 / 25.4, 180 / 25.4
#: Horizontal gap between two layers, vertical pitch of the rows of a band, in layout units.
GAP_X, ROW = 1.0, 1.8
#: Spacing of the tracks of a corridor and of the lanes beside the drawing.
TRACK, LANE = 0.42, 0.4


def _sugiyama(nodes: list[str], places: Sequence[PlaceSpec]) -> tuple[dict[str, int],
                                                                       dict[str, float]]:
    """Layer and position inside the layer of each node, from igraph's Sugiyama layout.

    The layers are the longest token-free paths from a source, taken along igraph's
    topological order of the token-free places (acyclic in a live graph; places that would
    close a cycle in a damaged document are skipped), and handed to igraph, which orders each
    layer against crossings. igraph is asked neither to find the layers nor to cut long
    edges into steps: igraph 1.0's ``layout_sugiyama`` reads uninitialised memory on edges
    that span several layers (valgrind shows it), and crashed the test suite (a segmentation
    fault) about once in six runs.
    """
    import igraph

    index = {t: i for i, t in enumerate(nodes)}
    free = sorted({(index[p.source], index[p.target]) for p in places
                   if p.tokens == 0 and p.source != p.target})
    try:
        order = igraph.Graph(n=len(nodes), edges=free, directed=True).topological_sorting()
    except igraph.InternalError:  # a token-free circuit: document order, back places skipped
        order = list(range(len(nodes)))
    rank = {v: i for i, v in enumerate(order)}
    succ: dict[int, list[int]] = {v: [] for v in range(len(nodes))}
    for a, b in free:
        if a in rank and b in rank and rank[a] < rank[b]:
            succ[a].append(b)
    depth = dict.fromkeys(range(len(nodes)), 0)
    fed: set[int] = set()
    for v in order:
        for w in succ[v]:
            depth[w] = max(depth[w], depth[v] + 1)
            fed.add(w)
    # A source sits just before the first transition it feeds, not in layer 0: a second
    # product line joining a shared vessel is drawn beside the vessel.
    for v in reversed(order):
        if v not in fed and succ[v]:
            depth[v] = max(depth[v], min(depth[w] for w in succ[v]) - 1)
    used = sorted(set(depth.values()))  # no empty layer
    layer = {t: used.index(depth[index[t]]) for t in nodes}
    # Positions inside the layers against crossings, every place between two layers counted,
    # directed downwards and cut into steps of one layer through dummy vertices of our own
    # (with longer edges igraph 1.0 reads uninitialised memory, found with valgrind, and
    # crashed the test suite now and then).
    levels = [layer[t] for t in nodes]
    edges: list[tuple[int, int]] = []
    for a, b in sorted({tuple(sorted((index[p.source], index[p.target]),
                                     key=lambda v: levels[v]))
                        for p in places if layer[p.source] != layer[p.target]}):
        previous = a
        for level in range(levels[a] + 1, levels[b]):
            levels.append(level)
            edges.append((previous, len(levels) - 1))
            previous = len(levels) - 1
        edges.append((previous, b))
    graph = igraph.Graph(n=len(levels), edges=edges, directed=True)
    second = graph.layout_sugiyama(layers=levels)
    position = {t: float(second.coords[index[t]][0]) for t in nodes}
    return layer, position


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


def print_scale(width: float, height: float) -> float:
    """How much a drawing of this size (layout units) shrinks on paper, at most 1."""
    return min(1.0, PRINT_WIDTH / (width * INCH), PRINT_HEIGHT / (height * INCH))


def _bands(n_layers: int, pitch: float, box_width: float, rows_height: float) -> int:
    """The number of bands that prints largest: the drawing no wider than the screen's
    column (:data:`MAX_WIDTH`), and as little shrunk on A4 or letter as its shape allows;
    among equals, the fewest bands. A band's height is estimated before the routing: its rows,
    the self-loops above, the lenses below and a corridor of two tracks."""
    band_height = rows_height + 3.2
    best, chosen = -1.0, 1
    for n in range(1, n_layers + 1):
        per = math.ceil(n_layers / n)
        width = (per - 1) * pitch + box_width + 2 * LANE
        if width > MAX_WIDTH and per > 2:
            continue
        scale = print_scale(width, n * band_height)
        if scale > best + 1e-9:
            best, chosen = scale, n
    return chosen


def layered(nodes: list[str], places: Sequence[PlaceSpec], box_width: float,
             critical_places: set[int]) -> tuple[dict[str, Point], list[Arc], int] | None:
    """Positions, arcs and the number of bands of the layered layout; None when the graph
    forms a single layer of at most 12 transitions (a circle reads better then)."""
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
    # igraph's order inside each layer, as ranks: a chain stays on one row.
    members: dict[int, list[str]] = {}
    for t in sorted(nodes, key=lambda t: (position[t], nodes.index(t))):
        members.setdefault(layer[t], []).append(t)
    pitch = box_width + GAP_X
    widest = max(len(m) for m in members.values())
    n_bands = _bands(n_layers, pitch, box_width, (widest - 1) * ROW)
    per_band = math.ceil(n_layers / n_bands)  # balanced bands
    n_bands = math.ceil(n_layers / per_band)  # 10 layers in 6 bands of 2 are 5 bands
    band = {t: layer[t] // per_band for t in nodes}
    column = {t: layer[t] % per_band for t in nodes}
    # Rows: the rank in the layer, a layer with fewer transitions centred in its band.
    rows_of_band = [max((len(m) for k, m in members.items() if k // per_band == b), default=1)
                    for b in range(n_bands)]
    position = {t: i + (rows_of_band[band[t]] - len(m)) / 2
                for m in members.values() for i, t in enumerate(m)}
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
        start, end = border(a, control, half_w, half_h), border(b, control, half_w, half_h)
        points = quadratic(start, control, end) if bow else line(start, end)
        mid, normal = arc_at(points)
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
        points = rounded(waypoints)
        mid, normal = arc_at(points)
        arcs[p.index] = Arc(p.index, p.source, p.target, p.tokens, tuple(points), mid, normal,
                            p.index in critical_places)
    stack_loops(arcs, places, positions, half_h, critical_places,
                 {t: 1.0 for t in nodes})
    return positions, [arcs[p.index] for p in places], n_bands


