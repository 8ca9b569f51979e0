"""The figures of the review page, drawn with matplotlib and returned as inline SVG.

Every function takes plain data from the result document and returns one ``<svg>`` element as
text, ready to be put into the page. The figures are built on :class:`matplotlib.figure.Figure`
with the SVG canvas, so the global matplotlib backend and state are left alone, and inside
:func:`matplotlib.rc_context`, so no global setting changes. The SVG is made deterministic
(a fixed hash salt, no date) and self-contained: the XML prologue, the metadata block and the
namespace URLs are stripped (the HTML parser knows inline SVG), ids are prefixed per figure so
that several figures can share a page, and the font family is left to the page's stylesheet.

Visual language: ink for the max-plus side, blue for the SimPy side, burnt orange for what is
critical. Colour never carries meaning alone: critical arcs are thicker, critical bars hatched,
the series have their own markers and dash patterns, and every figure has a legend in words.
"""

from __future__ import annotations

import io
import math
import re
from collections.abc import Mapping, Sequence
from typing import Any

from .geometry import BOX_FONT, INCH, TOKEN_FONT
from .layout import PLACE_RADIUS, Drawing, short_label, token_text

__all__ = [
    "graph_figure",
    "replications_figure",
    "running_estimate_figure",
    "schedule_figure",
    "transient_figure",
]

INK = "#1f2633"
MUTED = "#767f8e"
FAINT = "#d5d9e0"
ACCENT = "#b5481c"
ACCENT_TINT = "#f7e4d9"
SIM = "#2b63a6"
SIM_TINT = "#c9d8ea"
#: Series colours for per-transition lines; each also has its own marker and dash pattern.
SERIES = ["#1f2633", "#2b63a6", "#b5481c", "#6f4a94", "#7f6a2e", "#4f97c9", "#9a3a5c", "#3d7a6b"]
MARKERS = ["o", "s", "^", "D", "v", "P", "X", "h"]
DASHES = ["-", "--", "-.", ":", (0, (5, 1, 1, 1)), (0, (3, 1)), (0, (1, 1)), (0, (6, 2))]
#: Most series drawn in one figure; the page says so when a document has more.
MAX_SERIES = len(SERIES)
MAX_GANTT_ROWS = 30
#: Largest enlargement of a small event graph on the page.
MAX_ENLARGE = 1.5

_RC = {
    "svg.hashsalt": "cyclecheck-report",
    "svg.fonttype": "none",
    "font.size": 8.5,
    "axes.edgecolor": MUTED,
    "axes.labelcolor": INK,
    "axes.linewidth": 0.8,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "grid.color": FAINT,
    "grid.linewidth": 0.6,
    "xtick.color": MUTED,
    "ytick.color": MUTED,
    "xtick.labelcolor": INK,
    "ytick.labelcolor": INK,
    "legend.frameon": False,
    "text.color": INK,
    "text.usetex": False,
}


def _plain(text: str) -> str:
    """Text for matplotlib: a ``$`` would start mathtext, so it is escaped."""
    return text.replace("\\", "\\\\").replace("$", r"\$")


def _new_figure(width: float, height: float, layout: str | None = "constrained") -> Any:
    from matplotlib.backends.backend_svg import FigureCanvasSVG
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height), layout=layout)
    FigureCanvasSVG(fig)
    return fig


_ID = re.compile(r'(\bid="|href="#|url\(#)([^")]+)')


def _to_svg(fig: Any, key: str, label: str) -> str:
    """Serialise a figure as a clean inline ``<svg>`` element."""
    buffer = io.StringIO()
    fig.savefig(buffer, format="svg", metadata={"Date": None})
    text = buffer.getvalue()
    text = text[text.index("<svg"):]
    text = re.sub(r"<metadata>.*?</metadata>\s*", "", text, flags=re.S)
    text = re.sub(r'\s+xmlns(:\w+)?="[^"]*"', "", text)
    text = text.replace("xlink:href=", "href=")
    text = re.sub(r"font-family:[^;\"]*;?\s*", "", text)
    text = _ID.sub(lambda m: f"{m.group(1)}{key}-{m.group(2)}", text)
    title = label.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    text = text.replace(
        "<svg ", f'<svg class="figure" role="img" aria-label="{title.replace(chr(34), "&quot;")}" ',
        1,
    )
    return text.strip() + "\n"


def _render(key: str, label: str, draw: Any, width: float, height: float,
            layout: str | None = "constrained") -> str:
    import matplotlib

    with matplotlib.rc_context(_RC):
        fig = _new_figure(width, height, layout)
        draw(fig)
        return _to_svg(fig, key, label)


def graph_figure(drawing: Drawing, key: str = "graph",
                 label: str = "Event graph with the critical circuit highlighted") -> str:
    """The event graph: transitions as boxes, places as circles with tokens, critical in bold.

    Parameters
    ----------
    drawing
        The layout, from :func:`cyclecheck.reports.layout.layout_graph`, with its labels
        already placed (the figure draws at the layout's scale and font sizes, so that the
        collision check of the layout holds in the figure).
    """
    from matplotlib.lines import Line2D
    from matplotlib.patches import Circle, FancyArrowPatch, FancyBboxPatch
    from matplotlib.path import Path

    xmin, xmax, ymin, ymax = drawing.bounds()
    pad = 0.15
    width = (xmax - xmin + 2 * pad) * INCH
    height = (ymax - ymin + 2 * pad) * INCH
    legend = 0.3 if drawing.show_places else 0.0
    if width < 3.0:  # a tiny graph keeps its scale: room is added on both sides
        extra = (3.0 - width) / INCH / 2
        xmin, xmax, width = xmin - extra, xmax + extra, 3.0

    def draw(fig: Any) -> None:
        # The axes fill the figure exactly: one layout unit is INCH inches, as the layout's
        # text sizes assume. Patches go in with add_artist: the limits are set, and the
        # autoscaling add_patch does would cost seconds on a large graph.
        ax = fig.add_axes((0.0, legend / (height + legend), 1.0, height / (height + legend)))
        ax.set_axis_off()
        ax.set_xlim(xmin - pad, xmax + pad)
        ax.set_ylim(ymin - pad, ymax + pad)
        for arc in drawing.arcs:
            colour, lw = (ACCENT, 2.4) if arc.critical else (MUTED, 1.0)
            codes = [Path.MOVETO] + [Path.CURVE4] * (len(arc.points) - 1)
            ax.add_artist(FancyArrowPatch(
                path=Path(arc.points, codes), arrowstyle="-|>", mutation_scale=8 + lw * 2,
                color=colour, linewidth=lw, zorder=1 + arc.critical))
            if not drawing.show_places:
                continue
            ring = 2.0 if arc.place == drawing.bottleneck_place else lw * 0.7
            ax.add_artist(Circle(arc.mid, PLACE_RADIUS, facecolor="white",
                                edgecolor=INK if arc.place == drawing.bottleneck_place
                                else colour, linewidth=ring, zorder=3))
            if arc.tokens in (1, 2):
                offsets = [0.0] if arc.tokens == 1 else [-0.065, 0.065]
                for off in offsets:
                    ax.add_artist(Circle((arc.mid[0] + off, arc.mid[1]), 0.045, color=INK,
                                        zorder=4))
            elif arc.tokens > 2:
                ax.text(arc.mid[0], arc.mid[1], token_text(arc.tokens), ha="center",
                        va="center", fontsize=TOKEN_FONT, fontweight="bold", zorder=4)
        for text in drawing.labels:
            ax.text(text.centre[0], text.centre[1], _plain(text.text), ha="center",
                    va="center", fontsize=text.points, color=ACCENT if text.owner == "tag"
                    else INK, fontweight="bold" if text.bold else "normal", zorder=8)
        half_w, half_h = drawing.box_width / 2, drawing.box_height / 2
        for name, (x, y) in drawing.nodes.items():
            critical = name in drawing.critical_transitions
            neck = name == drawing.bottleneck
            ax.add_artist(FancyBboxPatch(
                (x - half_w, y - half_h), 2 * half_w, 2 * half_h,
                boxstyle="round,pad=0,rounding_size=0.12",
                facecolor=ACCENT_TINT if critical else "white",
                edgecolor=ACCENT if critical else INK,
                linewidth=2.6 if neck else 2.0 if critical else 0.9,
                linestyle=(0, (3, 1.5)) if neck else "-", zorder=6))
            ax.text(x, y, _plain(drawing.box_text.get(name, name)), ha="center", va="center",
                    fontsize=BOX_FONT, fontweight="bold" if critical else "normal", zorder=7)
        if drawing.show_places:
            handles = [
                Line2D([], [], color=ACCENT, linewidth=2.4, label="critical (thick)"),
                Line2D([], [], color=MUTED, linewidth=1.0, label="other place"),
                Line2D([], [], color=INK, marker="o", markersize=3, linestyle="none",
                       label="token"),
            ]
            fig.legend(handles=handles, loc="lower center", ncols=3, fontsize=7,
                       bbox_to_anchor=(0.5, 0.0))

    svg = _render(key, label, draw, width, height + legend, layout=None)
    # A small graph is shown larger: the whole drawing scales, text included, so nothing that
    # was apart comes together.
    factor = min(MAX_ENLARGE, 5.0 / width)
    if factor > 1:
        head_end = svg.index(">")
        head = re.sub(r'\b(width|height)="([\d.]+)pt"',
                      lambda m: f'{m.group(1)}="{float(m.group(2)) * factor:.2f}pt"',
                      svg[:head_end])
        svg = head + svg[head_end:]
    return svg


def schedule_figure(
    start: Mapping[str, float],
    duration: Mapping[str, float],
    cycle_time: float,
    critical: set[str],
    time_unit: str,
    key: str = "schedule",
) -> str:
    """Gantt chart of the periodic schedule over two cycles (rows sorted by start time)."""
    from matplotlib.patches import Patch

    names = sorted(start, key=lambda t: (start[t], t))[:MAX_GANTT_ROWS]
    height = 0.9 + 0.26 * len(names)

    def draw(fig: Any) -> None:
        ax = fig.add_subplot()
        origin = min(start[t] for t in names)
        for row, name in enumerate(names):
            is_critical = name in critical
            for cycle in range(2):
                left = start[name] + cycle * cycle_time
                ax.barh(row, duration.get(name, 0.0), left=left, height=0.62,
                        color=ACCENT_TINT if is_critical else SIM_TINT,
                        edgecolor=ACCENT if is_critical else SIM,
                        hatch="////" if is_critical else None, linewidth=0.9)
        for cycle, text in enumerate(("0", "λ", "2λ")):
            ax.axvline(origin + cycle * cycle_time, color=INK, linewidth=0.8,
                       linestyle=(0, (4, 3)))
            ax.text(origin + cycle * cycle_time, -0.75, text, ha="center", va="bottom",
                    fontsize=7.5, color=INK)
        ax.set_yticks(range(len(names)), [_plain(short_label(t)) for t in names])
        ax.set_ylim(len(names) - 0.3 + 0.6, -0.75)
        ax.set_xlabel(_plain(f"time ({time_unit})" if time_unit else "time"))
        ax.grid(axis="y", visible=False)
        fig.legend(handles=[
            Patch(facecolor=ACCENT_TINT, edgecolor=ACCENT, hatch="////",
                  label="on a critical circuit (hatched)"),
            Patch(facecolor=SIM_TINT, edgecolor=SIM, label="other transitions"),
        ], loc="outside lower center", ncols=2, fontsize=7.5)

    return _render(key, "Periodic schedule over two cycles", draw, 7.2, height + 0.5)


def _transient_axes(ax: Any, time_unit: str) -> None:
    """The axes of x(k) − kλ: whole firing numbers, the time unit on the vertical axis."""
    from matplotlib.ticker import MaxNLocator

    ax.set_xlabel("firing number k")
    ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    unit = f" ({time_unit})" if time_unit else ""
    ax.set_ylabel(_plain(f"x(k) − kλ{unit}"))


def transient_figure(
    k: Sequence[float],
    recursion: Mapping[str, Sequence[float]],
    simulation: Mapping[str, Sequence[float]] | None,
    time_unit: str,
    key: str = "transient",
    band: bool = False,
) -> str:
    """x(k) − kλ against k: recursion as lines, simulation as hollow markers on top; with
    ``band`` (random durations) the band over the transitions and its median instead."""
    if band:
        return _transient_band(k, recursion, simulation, time_unit, key)
    from matplotlib.lines import Line2D

    names = list(recursion)[:MAX_SERIES]

    def draw(fig: Any) -> None:
        ax = fig.add_subplot()
        every = max(1, math.ceil(len(k) / 40))
        for i, name in enumerate(names):
            ax.plot(k, recursion[name], color=SERIES[i], linestyle=DASHES[i], linewidth=1.3,
                    marker=MARKERS[i], markersize=3.2, markevery=every,
                    label=_plain(short_label(name)))
            if simulation and name in simulation:
                ax.plot(k, simulation[name], linestyle="none", marker=MARKERS[i],
                        markersize=7, markerfacecolor="none", markeredgecolor=SERIES[i],
                        markeredgewidth=0.9, markevery=every)
        _transient_axes(ax, time_unit)
        fig.legend(loc="outside right upper", fontsize=7.5, title="transition",
                   title_fontsize=7.5)
        how = [Line2D([], [], color=INK, linewidth=1.3, label="max-plus recursion (line)")]
        if simulation:
            how.append(Line2D([], [], color=INK, linestyle="none", marker="o", markersize=7,
                              markerfacecolor="none", label="SimPy simulation (ring)"))
        fig.legend(handles=how, loc="outside lower center", ncols=2, fontsize=7.5)

    return _render(key, "Transient: x(k) minus k times the cycle time", draw, 7.2, 3.3)


def _transient_band(k: Sequence[float], recursion: Mapping[str, Sequence[float]],
                    simulation: Mapping[str, Sequence[float]] | None, time_unit: str,
                    key: str) -> str:
    """x(k) − kλ of a random model: the band over the transitions (smallest to largest at
    each k) and its median, the recursion's as a line, the simulation's as rings."""
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    def spread(curves: Mapping[str, Sequence[float]]) -> tuple[list[float], ...]:
        columns = list(zip(*curves.values(), strict=True))
        middle = [sorted(c)[len(c) // 2] if len(c) % 2 else
                  (sorted(c)[len(c) // 2 - 1] + sorted(c)[len(c) // 2]) / 2 for c in columns]
        return [min(c) for c in columns], middle, [max(c) for c in columns]

    def draw(fig: Any) -> None:
        ax = fig.add_subplot()
        low, middle, high = spread(recursion)
        ax.fill_between(k, low, high, facecolor=SIM_TINT, edgecolor=SIM, linewidth=0.6,
                        alpha=0.8)
        ax.plot(k, middle, color=INK, linewidth=1.4)
        how = [Patch(facecolor=SIM_TINT, edgecolor=SIM,
                     label="all transitions (smallest to largest)"),
               Line2D([], [], color=INK, linewidth=1.4, label="median, max-plus recursion")]
        if simulation and len(simulation) == len(recursion):
            every = max(1, math.ceil(len(k) / 40))
            ax.plot(k, spread(simulation)[1], linestyle="none", marker="o", markersize=6,
                    markerfacecolor="none", markeredgecolor=SIM, markeredgewidth=0.9,
                    markevery=every)
            how.append(Line2D([], [], color=SIM, linestyle="none", marker="o", markersize=6,
                              markerfacecolor="none", label="median, SimPy simulation (ring)"))
        _transient_axes(ax, time_unit)
        fig.legend(handles=how, loc="outside lower center", ncols=3, fontsize=7.5)

    return _render(key, "Firing times less k times the cycle time: band over the transitions",
                   draw, 7.2, 3.3)


def _bound_lines(ax: Any, bounds: Mapping[str, float] | None, vertical: bool) -> list[Any]:
    from matplotlib.lines import Line2D

    handles = []
    if not bounds:
        return handles
    for name, style, text in (("lower", (0, (5, 2)), "lower bound"),
                              ("upper", (0, (1, 1.5)), "upper bound")):
        value = bounds.get(name)
        if value is None or not math.isfinite(value):
            continue  # an unbounded side has no line to draw
        line = ax.axvline if vertical else ax.axhline
        line(value, color=ACCENT, linewidth=1.2, linestyle=style)
        handles.append(Line2D([], [], color=ACCENT, linewidth=1.2, linestyle=style,
                              label=text))
    return handles


def running_estimate_figure(
    work: Sequence[float],
    estimate: Sequence[float],
    low: Sequence[float],
    high: Sequence[float],
    bounds: Mapping[str, float] | None,
    time_unit: str,
    key: str = "running",
) -> str:
    """The running cycle-time estimate and its 95 % interval against firings computed."""
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    def draw(fig: Any) -> None:
        ax = fig.add_subplot()
        ax.fill_between(work, low, high, facecolor=SIM_TINT, edgecolor=SIM, linewidth=0.6,
                        hatch="....")
        ax.plot(work, estimate, color=INK, linewidth=1.5, marker="o", markersize=2.5)
        handles = [Line2D([], [], color=INK, linewidth=1.5, marker="o", markersize=2.5,
                          label="estimate"),
                   Patch(facecolor=SIM_TINT, edgecolor=SIM, hatch="....",
                         label="95 % interval (dotted band)")]
        handles += _bound_lines(ax, bounds, vertical=False)
        from matplotlib.ticker import FuncFormatter

        ax.set_xlabel("firings computed")
        ax.set_ylabel(_plain(f"cycle time ({time_unit})" if time_unit else "cycle time"))
        ax.xaxis.set_major_formatter(FuncFormatter(lambda x, _: f"{x:,.0f}"))
        fig.legend(handles=handles, loc="outside lower center", ncols=4, fontsize=7.5)

    return _render(key, "Running estimate of the cycle time with its interval", draw, 7.2, 3.0)


def replications_figure(
    estimates: Mapping[str, Sequence[float]],
    intervals: Mapping[str, Sequence[float]],
    bounds: Mapping[str, float] | None,
    time_unit: str,
    key: str = "replications",
) -> str:
    """Per-replication estimates, one row per engine, with the interval and the bounds."""
    rows = [name for name in ("recursion", "simulation") if estimates.get(name)]
    names = {"recursion": "max-plus recursion", "simulation": "SimPy simulation"}
    style = {"recursion": (INK, "o"), "simulation": (SIM, "^")}

    def draw(fig: Any) -> None:
        from matplotlib.lines import Line2D

        ax = fig.add_subplot()
        handles = []
        for row, name in enumerate(rows):
            colour, marker = style[name]
            values = list(estimates[name])
            # Stack equal values so that they stay visible (a deterministic beeswarm).
            seen: dict[float, int] = {}
            ys = []
            for value in values:
                n = seen.get(round(value, 12), 0)
                seen[round(value, 12)] = n + 1
                ys.append(row + 0.09 * n)
            ax.plot(values, ys, linestyle="none", marker=marker, markersize=5,
                    markerfacecolor="none", markeredgecolor=colour, markeredgewidth=1.0)
            interval = intervals.get(name)
            if interval:
                ax.plot(interval, [row - 0.22, row - 0.22], color=colour, linewidth=2.2,
                        solid_capstyle="butt")
                for end in interval:
                    ax.plot([end, end], [row - 0.3, row - 0.14], color=colour, linewidth=1.2)
            handles.append(Line2D([], [], linestyle="none", marker=marker, markersize=5,
                                  markerfacecolor="none", markeredgecolor=colour,
                                  label=f"{names[name]}: one replication"))
        handles.append(Line2D([], [], color=INK, linewidth=2.2,
                              label="95 % interval (bar above the points)"))
        handles += _bound_lines(ax, bounds, vertical=True)
        ax.set_yticks(range(len(rows)), [names[r] for r in rows])
        ax.set_ylim(len(rows) - 0.4, -0.6)
        ax.grid(axis="y", visible=False)
        ax.set_xlabel(_plain(f"cycle time ({time_unit})" if time_unit else "cycle time"))
        fig.legend(handles=handles, loc="outside lower center", ncols=2, fontsize=7.5)

    return _render(key, "Per-replication estimates of the cycle time", draw, 7.2,
                   1.6 + 0.55 * len(rows))
