"""The sections of the page that follow firings over time: the periodic schedule, the
transient x(k) − kλ, and the variability of the estimates (running estimate, replications).

A fixed model has a periodic regime, drawn exactly; a random model has none, so its firing
times are shown as a band over the transitions and its estimates with their intervals. Every
sentence here is written for one kind of model: a fixed model's page never speaks of random
draws, a random model's never of a periodic regime.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from . import figures
from .markup import Figures, count, fmt, get, is_random, more, pct, section, time_unit, with_unit

__all__ = ["in_range", "schedule", "transient", "variability"]


def _no_schedule(document: Mapping[str, Any]) -> str:
    """Why the document has no periodic schedule, in plain words ("" when it does not say)."""
    analysis = get(document, "analysis") or {}
    if is_random(document):
        why = ("the durations are random, so the firings never settle into a periodic regime: "
               "each cycle takes a different time, and no start times repeat from one cycle "
               "to the next")
    elif analysis.get("strongly_connected") is False:
        why = ("the graph is not strongly connected, and its parts run at different cycle "
               "times (column “cycle time” of the transitions table): no single period fits "
               "every transition")
    else:
        return ""
    return section("schedule", "Periodic schedule",
                   f'<p class="note">No periodic schedule: {why}.</p>\n')


def schedule(document: Mapping[str, Any], figs: Figures) -> str:
    data = get(document.get("figures"), "schedule")
    unit = time_unit(document)
    if not data:
        return _no_schedule(document)
    analysis = get(document, "analysis") or {}
    critical = {str(t) for c in analysis.get("critical_circuits") or [] for t in c}
    start = {str(k): float(v) for k, v in data["start"].items()}
    duration = {str(k): float(v) for k, v in data["duration"].items()}
    lam = float(data["cycle_time"])
    svg = figures.schedule_figure(start, duration, lam, critical, unit)
    cut = ""
    if len(start) > figures.MAX_GANTT_ROWS:
        cut = (f" Drawn: the first {figures.MAX_GANTT_ROWS} transitions by start time, "
               f"{more(len(start) - figures.MAX_GANTT_ROWS, 'transition')} in the table.")
    caption = ("Each transition starts at its periodic start time (from the eigenvector) plus a "
               f"whole number of cycles of λ = {with_unit(fmt(lam, 6), unit)}; bars show the "
               "firing duration, hatched bars the transitions on a critical circuit, dashed "
               f"lines the cycle boundaries.{cut}")
    return section("schedule", "Periodic schedule",
                   figs.wrap("schedule", "Periodic schedule over two cycles", svg, caption))


def transient(document: Mapping[str, Any], figs: Figures) -> str:
    data = get(document.get("figures"), "transient")
    if not data or not data.get("recursion"):
        return ""
    unit = time_unit(document)
    recursion = {str(k): v for k, v in data["recursion"].items()}
    simulation = {str(k): v for k, v in (data.get("simulation") or {}).items()}
    analysis = get(document, "analysis") or {}
    if is_random(document):
        svg = figures.transient_figure(data["k"], recursion, simulation or None, unit,
                                       band=True)
        rings = (" Rings: the median of the SimPy simulation on the same draws; when they sit "
                 "on the line, both engines computed the same times." if simulation else "")
        caption = ("x(k) − kλ against the firing number k, on the random draws of one "
                   "replication: the completion time of firing k less k times the estimated "
                   f"cycle time. The band spans the {count(len(recursion), 'transition')} "
                   "(smallest to largest at each k), the line is their median (max-plus "
                   f"recursion).{rings} With random durations there is no periodic regime: "
                   "the band keeps wandering as the draws vary.")
        return section("transient", "Firing times against the cycle time",
                       figs.wrap("transient", "Firing times less k·λ", svg, caption))
    svg = figures.transient_figure(data["k"], recursion, simulation or None, unit)
    caption = ("x(k) − kλ against the firing number k: the completion time of firing k less k "
               "cycle times. Lines: the max-plus recursion; rings: the SimPy simulation. When "
               "every ring sits on its line, both engines computed the same times.")
    settle = analysis.get("transient_firings")
    if settle is not None:
        caption += f" The periodic regime starts after {count(settle, 'firing')}"
        if analysis.get("cyclicity"):
            caption += f" and repeats every {count(analysis['cyclicity'], 'firing')}"
        caption += "."
    if len(recursion) > figures.MAX_SERIES:
        caption += (f" Drawn: {figures.MAX_SERIES} of the {fmt(len(recursion))} transitions "
                    f"in the document ({more(len(recursion) - figures.MAX_SERIES, 'transition')}"
                    " not drawn).")
    return section("transient", "Transient and periodic regime",
                   figs.wrap("transient", "Transient", svg, caption))


def in_range(bounds: Mapping[str, Any] | None, values: Sequence[float]
             ) -> tuple[dict[str, float], dict[str, float]]:
    """The bounds inside the span of the data (drawn as lines) and those outside (a note):
    an axis starts where its data start, not at a bound far away."""
    inside: dict[str, float] = {}
    outside: dict[str, float] = {}
    if not bounds or not values:
        return inside, outside
    low, high = min(values), max(values)
    pad = 0.25 * (high - low) if high > low else 0.05 * abs(high) or 1.0
    for name in ("lower", "upper"):
        value = bounds.get(name)
        if value is None:
            continue
        (inside if low - pad <= value <= high + pad else outside)[name] = float(value)
    return inside, outside


def _outside_note(outside: Mapping[str, float], unit: str) -> str:
    if not outside:
        return ""
    words = [f"the {name} bound {with_unit(fmt(value), unit)}" for name, value in
             outside.items()]
    verb = "lies" if len(words) == 1 else "lie"
    drawn = "is" if len(words) == 1 else "are"
    text = " and ".join(words)
    return (f" {text[0].upper()}{text[1:]} {verb} outside the range of the data and {drawn} "
            "not drawn, so that the axis shows the data.")


def variability(document: Mapping[str, Any], figs: Figures) -> str:
    fig_data = get(document, "figures") or {}
    running = fig_data.get("running_estimate")
    replications = fig_data.get("replication_estimates")
    analysis = get(document, "analysis") or {}
    simulation = get(document, "simulation") or {}
    # The bounds themselves are stated with the mean durations, below the answers.
    bounds = analysis.get("bounds")
    if not (running or replications):
        return ""
    unit = time_unit(document)
    out = ""
    settings = get(document, "settings") or {}
    if running:
        values = [*running["low"], *running["high"], *running["estimate"]]
        inside, outside = in_range(bounds, values)
        svg = figures.running_estimate_figure(running["work"], running["estimate"],
                                              running["low"], running["high"], inside, unit)
        target = settings.get("precision")
        reached = analysis.get("relative_half_width")
        caption = "The estimate of λ and its 95 % interval as firings are computed."
        if target:
            caption += (" Replications are added in rounds until the interval's relative "
                        f"half-width is at most the target {pct(target)}")
            if isinstance(reached, int | float):
                met = " (the first round can already do better)" if reached < target else ""
                caption += f"; it reached {pct(reached)}{met}"
            caption += "."
        caption += _outside_note(outside, unit)
        out += figs.wrap("running", "Running estimate", svg, caption)
    if replications:
        intervals = {"recursion": analysis.get("cycle_time_ci"),
                     "simulation": simulation.get("cycle_time_ci")}
        intervals = {k: v for k, v in intervals.items() if v}
        values = [v for name in ("recursion", "simulation") for v in replications.get(name) or []]
        values += [x for v in intervals.values() for x in v if x is not None]
        inside, outside = in_range(bounds, values)
        svg = figures.replications_figure(replications, intervals, inside, unit)
        counts = {name: len(replications.get(name) or [])
                  for name in ("recursion", "simulation")}
        counts = {name: n for name, n in counts.items() if n}
        if len(set(counts.values())) == 1 and len(counts) == 2:
            each = f"each of the {count(counts['recursion'], 'replication')}, for each engine"
        else:
            engine = {"recursion": "of the max-plus recursion", "simulation": "of the SimPy "
                      "simulation"}
            each = ("each replication: " +
                    " and ".join(f"{fmt(n)} {engine[name]}" for name, n in counts.items()))
        lines = " and the bounds in range as lines" if inside else ""
        caption = (f"The estimate of λ from {each}, with the 95 % interval of the mean above "
                   f"them{lines}.{_outside_note(outside, unit)}")
        out += figs.wrap("replications", "Estimates per replication", svg, caption)
    return section("variability", "Variability", out)
