"""The review page of a sweep: throughput against each varied parameter, and every point.

A sweep document (``command: "sweep"``, built by ``cyclecheck.simulate.result``) holds the
targets (``vary``) and one row per point (``points``). The page shows, for each target, the
throughput against its values with the 95 % intervals as bands (one line for each combination
of the other targets' values), then a table of the points: values, cycle time and interval,
throughput, the paired difference to the previous value of the last target, and the critical
circuit (for random durations that of the mean durations, with the busiest server). Like
every part of the page it computes nothing but formats and draws what the document holds.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from . import notes
from .figures import ACCENT, DASHES, MARKERS, MAX_SERIES, SERIES, _plain, _render
from .markup import Figures, e, fmt, pct, section, table, time_unit, with_unit

__all__ = ["body", "throughput_figure"]

#: Rows of the table of points; a longer sweep is cut and the page says so.
MAX_POINT_ROWS = 200


def _series(document: Mapping[str, Any], axis: int) -> list[tuple[str, list[Mapping[str, Any]]]]:
    """The points along target ``axis``, grouped by the values of the other targets."""
    vary = document["vary"]
    name = vary[axis]["target"]
    others = [v["target"] for i, v in enumerate(vary) if i != axis]
    groups: dict[tuple[Any, ...], list[Mapping[str, Any]]] = {}
    for point in document["points"]:
        key = tuple(point["values"][t] for t in others)
        groups.setdefault(key, []).append(point)
    out = []
    for key, points in groups.items():
        label = ", ".join(f"{t} = {fmt(v)}" for t, v in zip(others, key, strict=True))
        out.append((label, sorted(points, key=lambda p: p["values"][name])))
    return out


def throughput_figure(target: str, series: Sequence[tuple[str, Sequence[Mapping[str, Any]]]],
                      unit: str, key: str) -> str:
    """Throughput against one target: a line per series, 95 % intervals as bands, points
    that are not live as crosses at 0."""
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    def draw(fig: Any) -> None:
        ax = fig.add_subplot()
        handles = []
        for i, (label, points) in enumerate(series[:MAX_SERIES]):
            # a cycle time of 0 has no finite throughput to draw
            live = [p for p in points if p.get("throughput") is not None
                    and p.get("cycle_time") is not None]
            xs = [p["values"][target] for p in live]
            ys = [p["throughput"] for p in live]
            low = [(p.get("throughput_ci") or [None, None])[0] for p in live]
            high = [(p.get("throughput_ci") or [None, None])[1] for p in live]
            colour = SERIES[i]
            if xs and all(v is not None for v in low + high):
                ax.fill_between(xs, low, high, color=colour, alpha=0.18, linewidth=0)
            ax.plot(xs, ys, color=colour, linestyle=DASHES[i], marker=MARKERS[i], markersize=4,
                    linewidth=1.3)
            dead = [p["values"][target] for p in points if p.get("cycle_time") is None]
            if dead:
                ax.plot(dead, [0.0] * len(dead), linestyle="none", marker="x", color=ACCENT,
                        markersize=7)
            if label:
                handles.append(Line2D([], [], color=colour, linestyle=DASHES[i],
                                      marker=MARKERS[i], markersize=4, label=_plain(label)))
        if any(p.get("status") == "estimated" for _, points in series for p in points):
            handles.append(Patch(facecolor=SERIES[0], alpha=0.18, label="95 % interval (band)"))
        if any(p.get("cycle_time") is None for _, points in series for p in points):
            handles.append(Line2D([], [], linestyle="none", marker="x", color=ACCENT,
                                  label="not live (deadlock)"))
        values = [p["values"][target] for _, points in series for p in points]
        if all(isinstance(v, int) for v in values):
            from matplotlib.ticker import MaxNLocator

            ax.xaxis.set_major_locator(MaxNLocator(integer=True))
        ax.set_xlabel(_plain(target))
        per = f"per {unit}" if unit else "per time unit"
        ax.set_ylabel(_plain(f"throughput ({per})"))
        ax.set_ylim(bottom=0)
        fig.legend(handles=handles, loc="outside lower center", ncols=2, fontsize=7.5)

    extra = 0.2 * ((min(len(series), MAX_SERIES) + 2) // 2)
    return _render(key, f"Throughput against {target}", draw, 7.2, 3.2 + extra)


def _figures(document: Mapping[str, Any], figs: Figures) -> str:
    unit = time_unit(document)
    out = ""
    for axis, entry in enumerate(document["vary"]):
        target = entry["target"]
        series = _series(document, axis)
        svg = throughput_figure(target, series, unit, f"sweep-{axis}")
        caption = (f"Throughput (1/λ) at each value of {e(target)}; bands: the 95 % intervals "
                   "of random points (exact points have none).")
        if len(series) > 1:
            caption += " One line for each combination of the other targets' values."
        if len(series) > MAX_SERIES:
            caption += f" Showing {MAX_SERIES} of the {len(series)} lines."
        out += figs.wrap(f"sweep-{axis}", f"Throughput against {e(target)}", svg, caption)
    return out


def _where(point: Mapping[str, Any]) -> str:
    if point.get("cycle_time") is None:
        circuit = point.get("deadlock") or []
        return "deadlock: " + " → ".join(e(str(t)) for t in [*circuit, *circuit[:1]])
    circuit = point.get("critical_circuit") or []
    text = " → ".join(e(str(t)) for t in [*circuit, *circuit[:1]]) or "–"
    busiest = point.get("busiest")
    if busiest:
        text += (f"; busiest {e(str(busiest['transition']))} "
                 f"({pct(busiest['utilization'])} busy)")
    return text


def _table(document: Mapping[str, Any]) -> str:
    unit = time_unit(document)
    targets = [v["target"] for v in document["vary"]]
    last = targets[-1]
    random = any(p.get("status") == "estimated" for p in document["points"])
    rows = []
    for p in document["points"][:MAX_POINT_ROWS]:
        live = p.get("cycle_time") is not None
        ci = p.get("cycle_time_ci") or [None, None]
        diff = (p.get("differences") or {}).get(last)
        diff_text = "–"
        if diff:
            low, high = diff.get("ci") or [None, None]
            diff_text = fmt(diff.get("cycle_time_difference"))
            if not diff.get("exact", low == high):
                diff_text += f" [{fmt(low)}, {fmt(high)}]"
        rows.append([
            str(p["point"]), *(fmt(p["values"][t]) for t in targets),
            fmt(p["cycle_time"], 6 if p.get("exact") else 4) if live else "not live",
            ("exact" if p.get("exact") else f"{fmt(ci[0])} – {fmt(ci[1])}") if live else "",
            fmt(p.get("throughput")), diff_text, _where(p)])
    headers = ["#", *(e(t) for t in targets), "Cycle time", "95 % interval", "Throughput",
               f"Δ cycle time from the previous {e(last)}", "Critical circuit"
               + (" (random points: of the mean durations)" if random else "")]
    numeric = set(range(len(targets) + 5))
    caption = "Points of the sweep" + (f" (times in {e(unit)})" if unit else "")
    out = table(headers, rows, numeric, caption)
    if len(document["points"]) > MAX_POINT_ROWS:
        out += (f'<p class="note">Showing {MAX_POINT_ROWS} of {fmt(len(document["points"]))} '
                "points; the result document and the CSV table have them all.</p>\n")
    return out


def _summary(document: Mapping[str, Any]) -> str:
    unit = time_unit(document)
    items = "".join(f"<li><code>{e(v['target'])}</code> ({e(str(v.get('name', '')))}): "
                    f"{', '.join(fmt(x) for x in v['values'])}</li>"
                    for v in document["vary"])
    out = (f"<p>{fmt(len(document['points']))} points, every combination of these values "
           f"(the last target varies fastest):</p>\n<ul>{items}</ul>\n")
    best = document.get("best_point")
    if best is not None:
        p = document["points"][best]
        values = ", ".join(f"{e(t)} = {fmt(v)}" for t, v in p["values"].items())
        out += (f"<p>Shortest cycle time: {with_unit(fmt(p['cycle_time'], 6), unit)} at point "
                f"{best} ({values}).</p>\n")
    if document.get("common_random_numbers"):
        out += (f'<p class="note">Random points share their draws ('
                f"{e(str(document['common_random_numbers']))}), so the difference between "
                "neighbouring points is known far more precisely than either point.</p>\n")
    for text in document.get("notes") or []:
        out += f'<p class="note">{e(str(text))}</p>\n'
    return out


def body(document: Mapping[str, Any]) -> str:
    """The ``<body>`` content of a sweep's page."""
    from .sections import _masthead as masthead  # the masthead of every page

    figs = Figures()
    content = _summary(document) + _figures(document, figs) + _table(document)
    return "".join([
        masthead(document),
        "<main>\n",
        section("sweep", "Sweep", content),
        notes.reproducibility(document),
        notes.cautions(document),
        "</main>\n",
        notes.footer(document),
    ])
