"""What a layout hands to the figure: places, arcs, the drawing, and the shapes both layouts
share (a self-loop on a box).

Pure geometry and data: no matplotlib, no document. Coordinates are layout units (see
:mod:`cyclecheck.reports.geometry`), y growing upwards.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

from .geometry import Label, Point, text_size

__all__ = ["BOX_HEIGHT", "MAX_LABEL", "PLACE_RADIUS", "Arc", "Drawing", "PlaceSpec",
           "choose_critical_places", "self_loop", "short_label", "stack_loops", "token_text"]

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




def self_loop(p: PlaceSpec, centre: Point, half_h: float, up: float, k: int,
               critical: bool) -> Arc:
    x, y = centre
    lift = up * (0.6 + 0.3 * k)
    edge = y + up * half_h
    points = ((x - 0.22, edge), (x - 0.45, edge + lift), (x + 0.45, edge + lift),
              (x + 0.22, edge))
    return Arc(p.index, p.source, p.target, p.tokens, points, (x, edge + 0.75 * lift),
               (0.0, up), critical)


def stack_loops(arcs: dict[int, Arc], places: Sequence[PlaceSpec],
                 positions: dict[str, Point], half_h: float, critical: set[int],
                 up: Mapping[str, float]) -> None:
    """Several self-loops on one transition are nested, each a little higher."""
    count: dict[str, int] = {}
    for p in places:
        if p.source == p.target:
            k = count.get(p.source, 0)
            count[p.source] = k + 1
            arcs[p.index] = self_loop(p, positions[p.source], half_h, up[p.source], k,
                                       p.index in critical)


