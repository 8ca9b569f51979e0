r"""Durations and holds of an event log against the model's laws: the tests of the judge.

Durations
    A firing's duration is ``time − start``. The start is the log's ``start`` column; without
    it, the start is still known exactly where every input hold of the transition is fixed and
    every firing it waits for is logged (the start is then the last token's arrival,
    :attr:`~.tracecheck.ExactCheck.ready_low`). Each transition with a random law gets two tests
    (:mod:`.gof`): the fit of the whole law (Kolmogorov–Smirnov for a continuous law,
    chi-square over the values of a resampled list) and the mean (z with the model's own
    variance), with a 95 % interval of the observed mean beside the model's mean.
Holds (censored observations)
    Firing ``k`` of ``t`` starts at :math:`s = \max(L_k,\ x_u(k - m_p) + h_p(k))`, where
    :math:`L_k` is the latest of the *other* input terms. Where those other holds are fixed,
    :math:`L_k` is known from the log, and the start shows the hold exactly when
    :math:`s > L_k` (the token of ``p`` came last): :math:`h = s - x_u(k - m_p)`; otherwise
    it only shows :math:`h \le c_k = L_k - x_u(k - m_p)` (censored). The draw :math:`h_p(k)`
    is independent of everything that fixes :math:`c_k` (those are earlier firings), so
    conditionally on :math:`h > c_k`,

    .. math::  U_k = \frac{F(h) - F(c_k)}{1 - F(c_k)} \sim \mathrm{Uniform}(0, 1),

    independently across firings: a KS test of the :math:`U_k` against the uniform law is
    exact. The censored firings give a second test: their count has mean
    :math:`\sum_k F(c_k)` and variance :math:`\sum_k F(c_k)(1 - F(c_k))` (a sum of independent
    Bernoulli variables), judged by a two-sided z test where both the expected count of
    censored and of exact firings are at least 5 (common practice, no source). A place whose
    target has another random input hold, whose target's start is unknown (no ``start``
    column and a random duration), or whose hold is a resampled list (a discrete law makes
    ties with :math:`L_k` ambiguous) is listed as not judged by this log.

A duration that a resampled list cannot give (not one of its values, within the tolerance) is
a certain disagreement, like a duration outside the support.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from .durations import Distribution, SpecTable
from .gof import chi_square, ks_grouped, z_mean
from .modelfile import Model
from .tracecheck import ExactCheck

__all__ = ["FIGURE_POINTS", "MIN_OBSERVATIONS", "Finding", "Samples", "judge_durations",
           "judge_holds"]

MIN_OBSERVATIONS = 10
"""Fewest observations of an element for its tests (fewer: listed as not judged)."""
FIGURE_POINTS = 200
"""Most points of an empirical-CDF / QQ figure of one element."""


@dataclass
class Finding:
    """One test of the family: what was tested, its figures and (after Holm) the decision."""

    element: str  # "transition", "place" or "component"
    id: str
    kind: str  # "duration fit", "duration mean", "hold fit", "hold censoring", "cycle time"
    test: str
    statistic: float
    p_value: float
    n: int
    summary: str  # the figures in words, for a reason
    adjusted_p: float = math.nan
    rejected: bool = False

    def to_dict(self) -> dict[str, Any]:
        return {"element": self.element, "id": self.id, "kind": self.kind, "test": self.test,
                "statistic": _num(self.statistic), "p_value": _num(self.p_value), "n": self.n,
                "adjusted_p": _num(self.adjusted_p), "rejected": self.rejected,
                "summary": self.summary}


def _num(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)


def _fmt(x: float) -> str:
    return f"{x:.6g}"


@dataclass
class Samples:
    """Observed values of several elements, for the figures: ``value``, ``u`` (the
    probability-integral transform, conditional for holds) and ``group`` (index into
    ``element``, the transition or place of each group) per observation, in log order."""

    kind: str  # "duration" or "hold"
    element: np.ndarray
    value: np.ndarray
    u: np.ndarray
    group: np.ndarray

    def of(self, j: int) -> np.ndarray:
        """The sorted values (durations) or transforms (holds) of group ``j``."""
        return np.sort((self.value if self.kind == "duration" else self.u)[self.group == j])


@dataclass
class Judged:
    """What :func:`judge_durations` or :func:`judge_holds` found."""

    findings: list[Finding]
    rows: list[dict[str, Any]]  # one per element, JSON-ready except the Finding references
    samples: Samples
    certain: list[str] = field(default_factory=list)  # reasons for a certain disagreement
    not_judged: list[dict[str, str]] = field(default_factory=list)


def _law_groups(table: SpecTable, elements: np.ndarray) -> dict[int, np.ndarray]:
    """Code of the law -> positions in ``elements`` that have it (random laws only)."""
    codes = table.codes[elements]
    return {int(c): np.flatnonzero(codes == c) for c in np.unique(codes) if c >= 0}


def _pit(table: SpecTable, element: np.ndarray, values: np.ndarray) -> np.ndarray:
    """``F(value)`` with the law of each observation's element, one vectorized call per law."""
    u = np.full(values.size, np.nan)
    for code, rows in _law_groups(table, element).items():
        u[rows] = table.laws[code].cdf(values[rows])
    return u


def _observed_durations(model: Model, exact: ExactCheck) -> tuple[np.ndarray, np.ndarray, str]:
    """Rows with an observed duration of a random law, their durations and where from."""
    log = exact.log
    t = log.transition
    random_t = np.zeros(model.n_transitions, dtype=bool)
    random_t[model.durations.random_elements] = True
    if log.start is not None:
        rows = np.flatnonzero(random_t[t])
        return rows, np.maximum(log.time[rows] - log.start[rows], 0.0), "start column"
    known = exact.judged & (exact.ready_low == exact.ready_high) & np.isfinite(exact.ready_low)
    rows = np.flatnonzero(random_t[t] & known)
    return (rows, np.maximum(log.time[rows] - exact.ready_low[rows], 0.0),
            "last token's arrival (every input hold is fixed)")


def judge_durations(model: Model, exact: ExactCheck, *, seed: int = 1) -> Judged:
    """Tests of the durations of every transition with a random law (see the module doc)."""
    from scipy.stats import t as student

    log = exact.log
    rows, d, source = _observed_durations(model, exact)
    t = log.transition[rows]
    table = model.durations
    findings: list[Finding] = []
    out_rows: list[dict[str, Any]] = []
    not_judged: list[dict[str, str]] = []
    certain: list[str] = []
    counts = np.bincount(t, minlength=model.n_transitions)
    unit = float(d.max()) if d.size and d.max() > 0 else 1.0  # moments without overflow
    sums = np.bincount(t, weights=d / unit, minlength=model.n_transitions) * unit
    squares = np.bincount(t, weights=(d / unit) ** 2, minlength=model.n_transitions)
    u = _pit(table, t, d)
    continuous = np.array([law.is_continuous for law in table.laws] + [True])[table.codes]
    ks = ks_grouped(np.where(continuous[t], u, 0.0), t, model.n_transitions)
    seeds = np.random.SeedSequence(seed).spawn(model.n_transitions) if not continuous.all() \
        else None
    for e in table.random_elements.tolist():
        law, tid, n = table[e], model.transition_ids[e], int(counts[e])
        row: dict[str, Any] = {"id": tid, "law": law.describe(), "model_mean": law.mean,
                               "model_sd": law.sd, "observed": n, "durations_from": source}
        out_rows.append(row)
        if n < MIN_OBSERVATIONS:
            why = (f"{n} durations observed, fewer than {MIN_OBSERVATIONS}" if n or
                   log.start is not None else
                   "no duration observed: the log has no start column and an input hold of "
                   "this transition is random (its start is unknown)")
            row["not_judged"] = why
            not_judged.append({"element": "transition", "id": tid, "what": "duration",
                               "reason": why})
            continue
        mean = sums[e] / n
        m1 = mean / unit
        sd = unit * math.sqrt(max(squares[e] / n - m1 * m1, 0.0) * n / (n - 1))
        half = float(student.ppf(0.975, n - 1)) * sd / math.sqrt(n)
        row.update(observed_mean=mean, observed_sd=sd, observed_mean_ci=[mean - half,
                                                                         mean + half])
        z, p = z_mean(mean, n, law.mean, law.sd)
        rel = (mean - law.mean) / law.mean if law.mean else math.nan
        mean_text = (f"observed mean {_fmt(mean)} (95 % interval [{_fmt(mean - half)}, "
                     f"{_fmt(mean + half)}]) against the model's {_fmt(law.mean)} "
                     f"({100 * rel:+.3g} %), {n} durations")
        row["mean_test"] = Finding("transition", tid, "duration mean", "z test of the mean "
                                   "with the model's variance", float(z), float(p), n,
                                   mean_text)
        if law.is_continuous:
            row["fit_test"] = Finding("transition", tid, "duration fit", "Kolmogorov-Smirnov",
                                      float(ks.statistic[e]), float(ks.p_value[e]), n,
                                      f"largest gap between the observed and the model's "
                                      f"distribution function D = {ks.statistic[e]:.4g}, "
                                      f"{n} durations of {law.describe()}")
        else:
            sel = d[t == e]
            fit, off = _resampled_fit(law, sel, exact.tolerance, seeds[e])  # type: ignore[index]
            row["fit_test"] = Finding("transition", tid, "duration fit", fit["method"],
                                      fit["statistic"], fit["p_value"], n, fit["summary"])
            row["counts"] = fit["counts"]
            if off:
                certain.append(f'{off} duration{"s" if off > 1 else ""} of "{tid}" '
                               f'{"are" if off > 1 else "is"} not among the values of '
                               f"{law.describe()} (for example {_fmt(fit['example'])}): a "
                               "resampled list cannot give it")
        findings += [row["fit_test"], row["mean_test"]]
    samples = Samples("duration", np.arange(model.n_transitions), d, u, t)
    return Judged(findings, out_rows, samples, certain, not_judged)


def _resampled_fit(law: Distribution, values: np.ndarray, tol: float,
                   seed: np.random.SeedSequence) -> tuple[dict[str, Any], int]:
    """Chi-square of the values of a resampled list; also the count of impossible values."""
    support, prob = law.support  # type: ignore[attr-defined]
    pos = np.clip(np.searchsorted(support, values), 1, support.size - 1) if support.size > 1 \
        else np.zeros(values.size, dtype=np.int64)
    if support.size > 1:
        nearer = np.abs(values - support[pos - 1]) <= np.abs(values - support[pos])
        pos = np.where(nearer, pos - 1, pos)
    match = np.abs(values - support[pos]) <= tol * np.maximum(1.0, np.abs(support[pos]))
    counts = np.bincount(pos[match], minlength=support.size)
    stat, p, method = chi_square(counts, prob, seed)
    off = int((~match).sum())
    return ({"method": f"{method} over the {support.size} values", "statistic": stat,
             "p_value": p, "example": float(values[~match][0]) if off else math.nan,
             "summary": f"counts of the {support.size} values against {values.size} draws of "
                        f"{law.describe()}, X² = {stat:.4g}",
             "counts": {"values": support.tolist(), "observed": counts.tolist(),
                        "expected": (prob * match.sum()).tolist()}}, off)


# --------------------------------------------------------------------------------------- holds


def _hold_eligibility(model: Model, exact: ExactCheck) -> tuple[np.ndarray, dict[int, str]]:
    """Places whose holds this log can judge, and the reason for each random one it cannot."""
    graph = model.graph()
    holds, durations = model.holds, model.durations
    random_p = np.zeros(model.n_places, dtype=bool)
    random_p[holds.random_elements] = True
    per_target = np.bincount(graph.target, weights=random_p, minlength=model.n_transitions)
    fixed_d = np.ones(model.n_transitions, dtype=bool)
    fixed_d[durations.random_elements] = False
    ok = random_p.copy()
    why: dict[int, str] = {}
    for p in np.flatnonzero(random_p).tolist():
        t = int(graph.target[p])
        law = holds[p]
        if not law.is_continuous:
            why[p] = ("a resampled (discrete) hold: ties with the other tokens' arrival make "
                      "the censored observations ambiguous")
        elif per_target[t] > 1:
            why[p] = (f'"{model.transition_ids[t]}" has {int(per_target[t])} random input '
                      "holds: the last token's arrival does not tell which hold it shows")
        elif exact.log.start is None and not fixed_d[t]:
            why[p] = (f'the log has no start column and the duration of '
                      f'"{model.transition_ids[t]}" is random: its start is unknown')
        if p in why:
            ok[p] = False
    return ok, why


def judge_holds(model: Model, exact: ExactCheck) -> Judged:
    """Tests of the random holds this log can judge (see the module doc)."""
    log, pairs = exact.log, exact.pairs
    ok, why = _hold_eligibility(model, exact)
    findings: list[Finding] = []
    rows: list[dict[str, Any]] = []
    not_judged = [{"element": "place", "id": model.place_name(p), "what": "hold", "reason": r}
                  for p, r in why.items()]
    empty = Samples("hold", np.zeros(0, np.int64), np.zeros(0), np.zeros(0),
                    np.zeros(0, np.int64))  # no judged place
    if not ok.any():
        return Judged(findings, rows, empty, [], not_judged)
    t = log.transition
    count = model.graph().in_degree[t]
    row_of = np.repeat(np.arange(log.n_firings), count)
    mine = ok[pairs.place]
    other_low = np.where(mine, -np.inf, pairs.low)
    other_missing = (~mine & pairs.need & ~pairs.found).astype(np.int64)
    ready = np.maximum.reduceat(other_low, pairs.offsets)
    blind = np.add.reduceat(other_missing, pairs.offsets) > 0
    sel = np.flatnonzero(mine & pairs.need & pairs.found)
    i = row_of[sel]
    start = (log.start[i] if log.start is not None
             else log.time[i] - model.durations.values[t[i]])
    keep = ~blind[i]
    sel, i, start = sel[keep], i[keep], start[keep]
    place = pairs.place[sel]
    before = log.time[pairs.pos[sel]]  # completion of the firing that made the token
    level = ready[i]
    tol = exact.tolerance
    scale = np.maximum(1.0, np.maximum(np.abs(start), np.abs(np.where(np.isfinite(level),
                                                                      level, 0.0))))
    censored = np.isfinite(level) & (start <= level + tol * scale)
    h = np.maximum(start - before, 0.0)
    c = level - before  # -inf where the place is the only input
    fc = _pit(model.holds, place, np.maximum(c, 0.0))
    fh = _pit(model.holds, place, h)
    with np.errstate(divide="ignore", invalid="ignore"):
        u = np.clip((fh - fc) / (1.0 - fc), 0.0, 1.0)
    exact_obs = ~censored & (fc < 1.0)
    places = np.flatnonzero(ok)
    group = np.searchsorted(places, place)
    ks = ks_grouped(u[exact_obs], group[exact_obs], places.size)
    n_cens = np.bincount(group[censored], minlength=places.size)
    n_used = np.bincount(group, minlength=places.size)
    expect = np.bincount(group, weights=fc, minlength=places.size)
    var = np.bincount(group, weights=fc * (1.0 - fc), minlength=places.size)
    from scipy.special import ndtr

    for j, p in enumerate(places.tolist()):
        name, law = model.place_name(p), model.holds[p]
        n_exact = int(ks.n[j])
        row: dict[str, Any] = {"index": p, "id": name, "law": law.describe(),
                               "model_mean": law.mean, "firings": int(n_used[j]),
                               "exact": n_exact, "censored": int(n_cens[j]),
                               "expected_censored": float(expect[j])}
        rows.append(row)
        if n_exact < MIN_OBSERVATIONS:
            reason = (f"{n_exact} holds shown exactly (their token came last), fewer than "
                      f"{MIN_OBSERVATIONS}")
            row["not_judged"] = reason
            not_judged.append({"element": "place", "id": name, "what": "hold",
                               "reason": reason})
            continue
        row["fit_test"] = Finding("place", name, "hold fit", "Kolmogorov-Smirnov on the "
                                  "holds shown exactly, conditioned on exceeding the others' "
                                  "arrival", float(ks.statistic[j]), float(ks.p_value[j]),
                                  n_exact, f"D = {ks.statistic[j]:.4g} over {n_exact} holds "
                                  f"of {law.describe()} shown exactly")
        findings.append(row["fit_test"])
        if min(expect[j], n_used[j] - expect[j]) >= 5:
            gap = n_cens[j] - expect[j]
            if var[j] > 0:
                z = gap / math.sqrt(var[j])
                p = float(2.0 * ndtr(-abs(z)))
            else:  # every chance is 0 or 1: the count is certain under the model
                z, p = (0.0, 1.0) if abs(gap) < 0.5 else (math.copysign(math.inf, gap), 0.0)
            row["censoring_test"] = Finding(
                "place", name, "hold censoring", "z test of the count of holds hidden by a "
                "later token", float(z), p, int(n_used[j]),
                f"{int(n_cens[j])} of {int(n_used[j])} holds hidden by a later token, "
                f"{expect[j]:.4g} expected")
            findings.append(row["censoring_test"])
    samples = Samples("hold", places, h[exact_obs], u[exact_obs], group[exact_obs])
    return Judged(findings, rows, samples, [], not_judged)


def figure_data(model: Model, samples: Samples, j: int, points: int = FIGURE_POINTS
                ) -> dict[str, Any]:
    """Points of an empirical-CDF and a QQ figure of group ``j`` against the model's law.

    Durations: ``x`` (observed quantiles), ``ecdf`` (their empirical probability),
    ``model_cdf`` (the law's CDF there) and ``model_quantile`` (the law's quantile at the same
    probability: the QQ pairs are ``(model_quantile, x)``). Holds: the same for the conditional
    transform ``U`` against the uniform law (censoring makes raw holds incomparable).
    """
    values = samples.of(j)
    n = values.size
    e = int(samples.element[j])
    if n == 0:
        return {"n": 0}
    idx = np.unique(np.linspace(0, n - 1, min(points, n)).round().astype(np.int64))
    prob = (idx + 0.5) / n
    if samples.kind == "duration":
        law = model.durations[e]
        x = values[idx]
        return {"kind": "duration", "id": model.transition_ids[e], "law": law.describe(),
                "n": n, "x": x.tolist(), "ecdf": ((idx + 1) / n).tolist(),
                "model_cdf": law.cdf(x).tolist(), "model_quantile": law.ppf(prob).tolist()}
    x = values[idx]
    return {"kind": "hold", "id": model.place_name(e), "law": model.holds[e].describe(),
            "n": n, "scale": "conditional probability-integral transform U (uniform under the "
            "model)", "x": x.tolist(), "ecdf": ((idx + 1) / n).tolist(),
            "model_cdf": x.tolist(), "model_quantile": prob.tolist()}
