"""Geometry shared by the drawings of the review page: Bézier paths, text extents, and
labels placed without overlap.

Paths are lists of cubic Bézier control points (1 + 3k points, as matplotlib's ``CURVE4``
codes take them). Text extents are estimated from advance widths of a sans-serif font, on the
safe side, in layout units of :data:`INCH` inches at the font sizes below, which the figures
must use. :func:`place_labels` puts each label at the first free spot around its anchor,
checked against every box placed so far (kept in a grid, so that a page of 200 labels stays
fast), preferring spots off the drawn lines; a label with no free spot is dropped and counted.
Pure geometry: no matplotlib, no document.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

__all__ = [
    "BOX_FONT",
    "INCH",
    "LABEL_FONT",
    "MARGIN",
    "TOKEN_FONT",
    "Box",
    "Boxes",
    "Label",
    "Point",
    "Strokes",
    "arc_at",
    "border",
    "cubic_point",
    "line",
    "meet",
    "place_labels",
    "quadratic",
    "rounded",
    "sample",
    "text_size",
    "toward",
]

Point = tuple[float, float]
Box = tuple[float, float, float, float]  # xmin, ymin, xmax, ymax

#: Inches per layout unit in the figure.
INCH = 0.5
#: Font sizes in points: transition ids, labels beside places, token counts.
BOX_FONT, LABEL_FONT, TOKEN_FONT = 8.0, 7.0, 6.0
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
class Label:
    """A text placed beside a place or a box: centre, size in points, what it belongs to."""

    text: str
    centre: Point
    points: float
    owner: str  # "place" or "tag"
    bold: bool = False



# --- paths -----------------------------------------------------------------------------------

def cubic_point(p: Sequence[Point], t: float) -> Point:
    s = 1 - t
    return (s**3 * p[0][0] + 3 * s * s * t * p[1][0] + 3 * s * t * t * p[2][0] + t**3 * p[3][0],
            s**3 * p[0][1] + 3 * s * s * t * p[1][1] + 3 * s * t * t * p[2][1] + t**3 * p[3][1])


def line(a: Point, b: Point) -> list[Point]:
    return [a, (a[0] + (b[0] - a[0]) / 3, a[1] + (b[1] - a[1]) / 3),
            (a[0] + 2 * (b[0] - a[0]) / 3, a[1] + 2 * (b[1] - a[1]) / 3), b]


def quadratic(a: Point, c: Point, b: Point) -> list[Point]:
    """A quadratic Bézier curve as the cubic that traces it."""
    return [a, (a[0] + 2 * (c[0] - a[0]) / 3, a[1] + 2 * (c[1] - a[1]) / 3),
            (b[0] + 2 * (c[0] - b[0]) / 3, b[1] + 2 * (c[1] - b[1]) / 3), b]


def rounded(waypoints: Sequence[Point], radius: float = 0.22) -> list[Point]:
    """An orthogonal polyline with rounded corners, as cubic segments."""
    pts = [p for i, p in enumerate(waypoints) if i == 0 or math.dist(p, waypoints[i - 1]) > 1e-9]
    if len(pts) == 2:
        return line(pts[0], pts[1])
    out: list[Point] = [pts[0]]
    current = pts[0]
    for before, corner, after in zip(pts, pts[1:], pts[2:], strict=False):
        r = min(radius, math.dist(before, corner) / 2, math.dist(corner, after) / 2)
        into = toward(corner, before, r)
        out_of = toward(corner, after, r)
        out += line(current, into)[1:] + quadratic(into, corner, out_of)[1:]
        current = out_of
    return out + line(current, pts[-1])[1:]


def toward(a: Point, b: Point, distance: float) -> Point:
    length = math.dist(a, b) or 1.0
    return a[0] + (b[0] - a[0]) * distance / length, a[1] + (b[1] - a[1]) * distance / length


def border(centre: Point, toward: Point, half_w: float, half_h: float) -> Point:
    """Where the segment from a box centre toward a point leaves the box (plus a small gap)."""
    dx, dy = toward[0] - centre[0], toward[1] - centre[1]
    length = math.hypot(dx, dy) or 1.0
    ux, uy = dx / length, dy / length
    t = min(half_w / abs(ux) if ux else math.inf, half_h / abs(uy) if uy else math.inf) + 0.06
    return centre[0] + t * ux, centre[1] + t * uy


def arc_at(points: Sequence[Point], where: Point | None = None) -> tuple[Point, Point]:
    """The middle of a path (or of its segment nearest ``where``) and the unit normal there."""
    segments = [points[i:i + 4] for i in range(0, len(points) - 1, 3)]
    if where is None:
        lengths = [math.dist(s[0], s[3]) for s in segments]
        segment = segments[lengths.index(max(lengths))] if len(segments) > 1 else segments[0]
    else:
        segment = min(segments, key=lambda s: math.dist(cubic_point(s, 0.5), where))
    mid = cubic_point(segment, 0.5)
    a, b = cubic_point(segment, 0.45), cubic_point(segment, 0.55)
    dx, dy = b[0] - a[0], b[1] - a[1]
    length = math.hypot(dx, dy) or 1.0
    return mid, (-dy / length, dx / length)



def sample(points: Sequence[Point], steps: int = 8) -> list[Point]:
    """Points along a path of cubic segments."""
    out = []
    for i in range(0, len(points) - 1, 3):
        segment = points[i:i + 4]
        out += [cubic_point(segment, k / steps) for k in range(steps + 1)]
    return out


# --- labels ----------------------------------------------------------------------------------

def meet(a: Box, b: Box) -> bool:
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


class Boxes:
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
        return any(meet(box, other) for cell in self._span(box)
                   for other in self.cells.get(cell, ()))


class Strokes:
    """Points along the arcs in a grid of cells: a label should not sit on a line if it can
    help it (it may, where nothing else is free: lines are not text)."""

    CELL = 0.5

    def __init__(self, paths: Sequence[Sequence[Point]]) -> None:
        self.cells: dict[tuple[int, int], list[Point]] = {}
        for path in paths:
            for p in sample(path, 12):
                self.cells.setdefault(self._cell(p), []).append(p)

    def _cell(self, p: Point) -> tuple[int, int]:
        return math.floor(p[0] / self.CELL), math.floor(p[1] / self.CELL)

    def crosses(self, box: Box) -> bool:
        x0, y0 = self._cell((box[0], box[1]))
        x1, y1 = self._cell((box[2], box[3]))
        return any(box[0] <= p[0] <= box[2] and box[1] <= p[1] <= box[3]
                   for i in range(x0, x1 + 1) for j in range(y0, y1 + 1)
                   for p in self.cells.get((i, j), ()))


def place_labels(wanted: Sequence[tuple[Point, Point, float, str, str, bool]],
                  obstacles: Boxes, strokes: Strokes) -> tuple[list[Label], int]:
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


