r"""The verdict of ``cyclecheck trace``: an event log of any simulator against the model.

One judgement puts together

1. the exact part (:mod:`.tracecheck`): every firing against the bounds its draws allow; with
   fixed numbers the log must match the model's equations. A violation is a certain
   disagreement;
2. completeness: a transition of the model with no row in the log (in some replication) is a
   disagreement, unless ``partial`` asks to judge what is logged and list the rest;
3. the statistics of random models, one family of tests under Holm's procedure at ``alpha``:
   the fit and the mean of each random duration and the holds the log can show
   (:mod:`.logstats`), and the cycle time of each component against the model's Lyapunov
   exponent (:mod:`.logcycle`).

The log is consistent with the model (``"agrees"``, exit 0) when there is no violation, no
missing transition (or ``partial``) and no test of the family rejects; else ``"disagrees"``
(exit 1), each reason naming the element, the test and the figures.

Power: beside each transition and component the judgement reports the smallest relative
change of the mean that this log detects with probability 0.8 (:data:`~.gof.POWER`) at the
level of Holm's *first* step, ``alpha / m`` for ``m`` tests: a single changed element among
``m`` is rejected for certain when its p-value is below ``alpha / m`` (it is then first in
line), so the figure is what this log guarantees, not what it may achieve when other elements
have changed too.
"""

from __future__ import annotations

import math
import os
from typing import TYPE_CHECKING, Any

import numpy as np

from .errors import ArgumentError, ModelError
from .estimate import student_quantile
from .eventlog import EventLog, read_log
from .gof import POWER, detectable_change_mean, detectable_change_t, holm, welch_t
from .logcycle import (
    MAX_COMPONENTS,
    LogCycleTime,
    ModelCycleTime,
    circuit_components,
    log_cycle_times,
    model_cycle_time,
    model_precision,
)
from .logformat import log_format
from .logstats import Finding, Judged, figure_data, judge_durations, judge_holds
from .modelfile import Model
from .result import finite_or_none
from .tracecheck import MAX_LISTED, ExactCheck, check_events, check_tolerance

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["DEFAULT_ALPHA", "MAX_FIGURES", "judge_events", "judge_log"]

DEFAULT_ALPHA = 0.05
"""Family-wise error rate of a judgement unless ``--alpha`` says otherwise."""
MAX_FIGURES = 6
"""Elements whose empirical CDF / QQ data enter the document: the rejected ones, else the
smallest adjusted p-values."""
_NAMES_SHOWN = 3


def _alpha(alpha: float) -> float:
    if (isinstance(alpha, bool) or not isinstance(alpha, (int, float, np.floating))
            or not 0.0 < alpha < 1.0):
        raise ModelError(f"must lie strictly between 0 and 1 (a family-wise error rate such "
                         f"as 0.05), got {alpha!r}", item="--alpha")
    return float(alpha)


def judge_log(model: Model, log: str | os.PathLike[str] | pd.DataFrame, *,
              columns: str | dict[str, str] | None = None,
              rename: list[str] | dict[str, str] | None = None, time_scale: float = 1.0,
              **options: Any) -> dict[str, Any]:
    """Judge an event log (a CSV or Parquet file, or a pandas table) against the model.

    Parameters
    ----------
    model : Model
    log : path or pandas.DataFrame
    columns, rename, time_scale
        How to read the log (:func:`~.logformat.log_format`): ``--columns``, ``--rename``
        (files or ``LOGNAME=ID`` texts, or a dict) and ``--time-scale``.
    **options
        Passed to :func:`judge_events`: ``alpha``, ``partial``, ``tolerance``, ``seed``,
        ``precision``, ``model_estimate``, ``workers``, ``scheduler``, ``max_listed``,
        ``progress``.

    Returns
    -------
    dict
        The judgement document (see :func:`judge_events`), with ``log_format``.
    """
    import pandas as pd

    _alpha(options.get("alpha", DEFAULT_ALPHA))  # bad options fail before a long read
    check_tolerance(options.get("tolerance", 1e-6))
    fmt = log_format(model.transition_ids, columns=columns, rename=rename,
                     time_scale=time_scale)
    progress = options.get("progress")
    if progress is not None:
        big = (not isinstance(log, pd.DataFrame) and os.path.isfile(log)
               and os.path.getsize(log) > 10 * 2**20)
        progress.stage("reading the event log", now=big)
    events = (EventLog.from_frame(model, log, fmt) if isinstance(log, pd.DataFrame)
              else read_log(model, log, fmt))
    doc = judge_events(model, events, time_scale=fmt.time_scale, **options)
    doc["log_format"] = {**fmt.describe(), "format": events.source}
    return doc


def judge_events(model: Model, log: EventLog, *, alpha: float = DEFAULT_ALPHA,
                 partial: bool = False, tolerance: float = 1e-6, seed: int = 1,
                 precision: float | None = None, model_estimate: ModelCycleTime | None = None,
                 workers: int = 1, scheduler: str | None = None, max_listed: int = MAX_LISTED,
                 progress: Any = None, time_scale: float = 1.0) -> dict[str, Any]:
    """Judge a checked :class:`~.eventlog.EventLog` (see the module doc).

    ``time_scale`` is the scale the log was read with (``--time-scale``), for the note that
    suggests another one.

    ``precision`` is the relative half-width asked of the model's cycle-time estimate (default:
    several times tighter than the log's, see :func:`~.logcycle.model_precision`);
    ``model_estimate`` is a :class:`~.logcycle.ModelCycleTime` computed before (for many logs
    of one model); ``seed`` drives the model's estimate and the Monte Carlo p-values.
    """
    alpha = _alpha(alpha)
    stage = progress.stage if progress is not None else (lambda text: None)
    stage(f"checking {log.n_firings:,} firings against the model's equations")
    exact = check_events(model, log, tolerance=tolerance, max_listed=max_listed)
    reasons = exact.reasons()
    notes = list(exact.notes)
    not_judged: list[dict[str, str]] = []
    absent = exact.absent(model)
    if absent:
        shown = ", ".join(f'"{a}"' for a in absent[:10]) + (
            f" and {len(absent) - 10} more" if len(absent) > 10 else "")
        if partial:
            notes.append(f"not judged (no row in the log): {shown}")
            not_judged += [{"element": "transition", "id": a, "what": "everything",
                            "reason": "no row in the log"} for a in absent]
        else:
            reasons.append(f"{_count(len(absent), 'transition')} of the model "
                           f"{'has' if len(absent) == 1 else 'have'} no row in the log: "
                           f"{shown} (pass --partial to judge the others)")

    stage("testing durations and holds")
    judged = []
    if model.durations.is_random:
        judged.append(judge_durations(model, exact, seed=seed))
    if model.holds.is_random:
        judged.append(judge_holds(model, exact))
    findings = [f for j in judged for f in j.findings]
    certain = [c for j in judged for c in j.certain]
    not_judged += [n for j in judged for n in j.not_judged]

    cycle: dict[str, Any] | None = None
    cycle_findings: list[tuple[Finding, dict[str, Any]]] = []
    if model.is_random:
        cycle, cycle_findings, skipped = _cycle_time(
            model, log, exact, precision=precision, seed=seed, model_estimate=model_estimate,
            workers=workers, scheduler=scheduler, progress=progress)
        not_judged += skipped
        findings += [f for f, _ in cycle_findings]

    adjusted, rejected = holm([f.p_value for f in findings], alpha)
    for f, a, r in zip(findings, adjusted, rejected, strict=True):
        f.adjusted_p, f.rejected = float(a), bool(r)
    level = alpha / max(len(findings), 1)
    _power(judged, cycle_findings, level)
    for f, entry in cycle_findings:
        entry["test"] = f.to_dict()

    reasons += certain
    reasons += [f'{f.element} "{f.id}": the {f.kind} test ({f.test}) rejects the model '
                f"(p = {f.p_value:.3g}, Holm-adjusted {f.adjusted_p:.3g} <= {alpha:g}): "
                f"{f.summary}" for f in sorted(findings, key=lambda f: f.adjusted_p)
                if f.rejected]
    verdict = "agrees" if not reasons else "disagrees"
    section = exact.section(model)
    if verdict == "agrees":
        reasons = _agreement(model, exact, findings, alpha)
    else:
        notes += _unit_hint(model, exact.log, section, judged, time_scale)
    if partial and absent and len(absent) * 2 >= model.n_transitions:
        notes.append(f"--partial: {len(absent)} of the model's {model.n_transitions} "
                     "transitions have no row in the log, so this verdict rests on the "
                     f"{model.n_transitions - len(absent)} logged ones only")
    doc: dict[str, Any] = {"verdict": verdict, "reasons": reasons, "notes": notes}
    doc.update(section)
    doc.update({
        "alpha": alpha,
        "partial": partial,
        "replications": log.n_replications,
        "family": {"method": "Holm (1979) step-down", "alpha": alpha, "tests": len(findings),
                   "rejected": int(rejected.sum()), "first_step_level": level},
        "power": {"probability": POWER, "level": level,
                  "method": "normal approximation, two-sided, at the level of Holm's first "
                            "step (alpha / tests)"},
        "tests": [f.to_dict() for f in findings],
        "transitions": _rows(judged, "duration"),
        "places": _rows(judged, "hold"),
        "cycle_time_test": cycle,
        "figures": {"distributions": _figures(model, judged)},
        "not_judged": not_judged,
        "absent_transitions": absent,
        "certain_disagreements": certain,
    })
    return _json_ready(doc)


#: Ratios of time units a log may be written in against the model's: seconds, minutes,
#: hours and days to one another, milliseconds to seconds.
UNIT_FACTORS = {60.0: "minutes and seconds, or hours and minutes", 3600.0: "hours and seconds",
                1000.0: "seconds and milliseconds", 24.0: "days and hours",
                1440.0: "days and minutes"}
#: How far every ratio of the log's durations to the model's may stray from one factor.
UNIT_SPREAD = 0.05


def _unit_hint(model: Model, log: EventLog, section: dict[str, Any], judged: list[Judged],
               time_scale: float) -> list[str]:
    """A note when the log looks written in another time unit: the mean logged duration of
    every transition (at least two) is one of :data:`UNIT_FACTORS` times the model's mean, or
    its inverse, to :data:`UNIT_SPREAD` (without durations in the log: the log's cycle time
    against a fixed model's). The scale suggested includes ``time_scale``, the one used."""
    ratios = [row["observed_mean"] / row["model_mean"]
              for j in judged if j.samples.kind == "duration" for row in j.rows
              if row.get("observed_mean") and row.get("model_mean")]
    fixed = model.graph().duration
    if not ratios and log.start is not None and np.any(fixed > 0):
        # fixed durations (random laws judged above): each transition's mean logged duration
        count = np.bincount(log.transition, minlength=model.n_transitions)
        total = np.bincount(log.transition, weights=log.time - log.start,
                            minlength=model.n_transitions)
        has = (count > 0) & (fixed > 0)
        has[model.durations.random_elements] = False
        ratios = (total[has] / count[has] / fixed[has]).tolist()
    what = "every judged mean duration"
    if len(ratios) < 2 and log.start is None and not model.is_random:
        seen, expected = section.get("cycle_time_from_log"), section.get("cycle_time")
        if isinstance(seen, float) and isinstance(expected, float) and expected > 0:
            ratios, what = [seen / expected], "the cycle time"
    elif len(ratios) < 2:  # one transition alone may just be slow
        return []
    if not ratios or min(ratios) <= 0:
        return []
    ratio = float(np.median(ratios))
    if any(abs(r / ratio - 1.0) > UNIT_SPREAD for r in ratios):
        return []
    for factor, units in UNIT_FACTORS.items():
        for scale in (factor, 1.0 / factor):
            if abs(ratio / scale - 1.0) <= UNIT_SPREAD:
                return [f"the log's times are about {ratio:.4g} times the model's ({what}): "
                        f"if the log and the model count time in other units ({units}), "
                        f"judge it again with --time-scale {time_scale / scale:.10g}"]
    return []


def _json_ready(value: Any) -> Any:
    """The document with every number JSON can hold (:func:`~.result.finite_or_none`: NaN and
    infinities become None; a log with absurd times still gets a judgement, not a crash when
    it is printed). The one pass over the whole document: its parts keep plain floats."""
    if isinstance(value, dict):
        return {k: _json_ready(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_json_ready(v) for v in value]
    if isinstance(value, float | np.floating):
        return finite_or_none(value)
    if isinstance(value, np.integer):
        return int(value)
    return value


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}" + ("" if n == 1 else "s")


def _agreement(model: Model, exact: ExactCheck, findings: list[Finding],
               alpha: float) -> list[str]:
    n_checked = exact.firings_checked
    n_unjudged = exact.log.n_firings - n_checked
    what = ("every bound the model's distributions allow" if model.is_random else
            "the model's equations")
    rounded = (f" and the log's rounding of {exact.resolution:g}" if exact.resolution else "")
    out = [f"all {n_checked} judged firings obey {what} within a tolerance of "
           f"{exact.tolerance:g} relative to each duration or hold{rounded}"
           + (f" ({n_unjudged} not judged)" if n_unjudged else "")]
    if findings:
        low = min(f.adjusted_p for f in findings)
        out.append(f"none of the {len(findings)} statistical tests rejects the model at the "
                   f"family-wise level {alpha:g} (Holm); smallest adjusted p-value {low:.3g}")
    return out


def _power(judged: list[Judged], cycle: list[tuple[Finding, dict[str, Any]]],
           level: float) -> None:
    for j in judged:
        if j.samples.kind != "duration":
            continue
        for row in j.rows:
            if "mean_test" in row:
                cv = row["model_sd"] / row["model_mean"] if row["model_mean"] else math.nan
                row["detectable_change"] = float(detectable_change_mean(cv, row["observed"],
                                                                        level))
    for _, entry in cycle:
        entry["detectable_change"] = detectable_change_t(
            entry["combined_se"], entry["df"], entry["model"], level)


def _rows(judged: list[Judged], kind: str) -> list[dict[str, Any]]:
    out = []
    for j in judged:
        if j.samples.kind != kind:
            continue
        for row in j.rows:
            out.append({k: (v.to_dict() if isinstance(v, Finding) else v)
                        for k, v in row.items()})
    return out


def _figures(model: Model, judged: list[Judged]) -> list[dict[str, Any]]:
    """Data of the figures: rejected elements first, then the smallest adjusted p-values."""
    ranked = []
    for j in judged:
        key = "id"
        groups = {int(e): g for g, e in enumerate(j.samples.element.tolist())}
        for row in j.rows:
            tests = [row[k] for k in ("fit_test", "mean_test", "censoring_test") if k in row]
            if not tests:
                continue
            e = (row["index"] if j.samples.kind == "hold"
                 else model.transition_index(row[key]))
            worst = min(t.adjusted_p for t in tests)
            ranked.append((not any(t.rejected for t in tests), worst, j, groups[e]))
    ranked.sort(key=lambda r: (r[0], r[1]))
    out = []
    for failed_first, worst, j, g in ranked[:MAX_FIGURES]:
        data = figure_data(model, j.samples, g)
        data.update(rejected=not failed_first, adjusted_p=worst)
        out.append(data)
    return out


def _component_name(model: Model, members: np.ndarray) -> str:
    ids = [model.transition_ids[t] for t in members[:_NAMES_SHOWN]]
    more = members.size - len(ids)
    return ", ".join(ids) + (f" and {more} more" if more else "")


def _cycle_time(model: Model, log: EventLog, exact: ExactCheck, *, precision: float | None,
                seed: int, model_estimate: ModelCycleTime | None, workers: int,
                scheduler: str | None, progress: Any
                ) -> tuple[dict[str, Any], list[tuple[Finding, dict[str, Any]]],
                           list[dict[str, str]]]:
    labels, with_circuit = circuit_components(model)
    log_side: LogCycleTime = log_cycle_times(log, labels, with_circuit, exact.present)
    skipped: list[dict[str, str]] = []
    section: dict[str, Any] = {"components": [], "model": None}
    if not log_side.estimates:
        for c, why in log_side.not_judged.items():
            skipped.append({"element": "component",
                            "id": _component_name(model, np.flatnonzero(labels == c)),
                            "what": "cycle time", "reason": why})
        return section, [], skipped
    if model_estimate is None:
        if progress is not None:
            progress.stage("estimating the model's cycle time (recursion)")
        model_estimate = model_cycle_time(model, precision=model_precision(log_side, precision),
                                          seed=seed, workers=workers, scheduler=scheduler,
                                          progress=progress)
    if not np.array_equal(model_estimate.labels, labels):
        raise ArgumentError(f"model_estimate belongs to another model: its strongly connected "
                            f"components differ from those of \"{model.name}\" (compute it "
                            "with logcycle.model_cycle_time of this model)")
    section["model"] = model_estimate.describe()
    random_c = [int(c) for c in with_circuit if model_estimate.random[c]]
    random_c.sort(key=lambda c: -model_estimate.estimate[c])
    if len(random_c) > MAX_COMPONENTS:
        skipped.append({"element": "component", "id": f"{len(random_c) - MAX_COMPONENTS} "
                        "components", "what": "cycle time",
                        "reason": f"at most {MAX_COMPONENTS} components are tested, those "
                                  "with the largest cycle times"})
    found: list[tuple[Finding, dict[str, Any]]] = []
    unit = f" {model.time_unit}" if model.time_unit else ""
    for c in random_c[:MAX_COMPONENTS]:
        members = np.flatnonzero(labels == c)
        name = _component_name(model, members)
        lam, lam_se = float(model_estimate.estimate[c]), float(model_estimate.se[c])
        lam_half = float(student_quantile(0.975, model_estimate.df)) * lam_se
        entry: dict[str, Any] = {"component": name,
                                 "transitions": [model.transition_ids[t] for t in members],
                                 "model": lam, "model_ci": [lam - lam_half, lam + lam_half]}
        section["components"].append(entry)
        if c not in log_side.estimates:
            entry["not_judged"] = log_side.not_judged.get(c, "not logged")
            skipped.append({"element": "component", "id": name, "what": "cycle time",
                            "reason": entry["not_judged"]})
            continue
        e = log_side.estimates[c]
        stat, df, p = welch_t(e.estimate, e.se, e.df, lam, lam_se, model_estimate.df)
        rel = (e.estimate - lam) / lam if lam else math.nan
        entry.update(log=e.estimate, log_ci=[e.low, e.high], log_method=e.method,
                     warmup_firings=e.warmup_firings, firings=e.firings, note=e.note,
                     statistic=stat, df=df, p_value=p,
                     combined_se=math.hypot(e.se, lam_se))
        summary = (f"the log's cycle time {e.estimate:.6g}{unit} (95 % interval "
                   f"[{e.low:.6g}, {e.high:.6g}], {e.method}) against the model's "
                   f"{lam:.6g}{unit} ([{lam - lam_half:.6g}, {lam + lam_half:.6g}]), "
                   f"{100 * rel:+.3g} %")
        f = Finding("component", name, "cycle time", "Welch t test, log against model", stat,
                    p, e.firings, summary)
        entry["test"] = f
        found.append((f, entry))
    return section, found, skipped
