"""The review page of a judged event log (``cyclecheck trace --report``).

A trace document (``command: "trace"``, built by :mod:`cyclecheck.simulate.judge` and
``cyclecheck.simulate.result``) holds the verdict on a log of someone's own simulation model
against the model file. The page shows, in this order: the verdict and its reasons; the log's
cycle time beside the model's, per strongly connected component, with their intervals and the
smallest change the log could detect; a table of the transitions (observed mean, model mean,
interval, the tests, Holm-adjusted p-values, detectable change) and one of the places whose
holds were judged; for the rejected elements (or the closest to rejection) the empirical
distribution function of the log against the model's, and a QQ plot; the certain violations
(firings that break the model's equations or its laws' supports); what was not judged. Like
every part of the page it computes nothing but formats and draws what the document holds.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from . import notes
from .figures import INK, SIM, _plain, _render
from .markup import Figures, e, fmt, section, table, time_unit, with_unit

__all__ = ["body", "distribution_figure"]

#: Reasons and violations listed on the page; the rest are counted.
MAX_LISTED = 20
#: Violations named in the verdict (the section of violations lists more).
VERDICT_VIOLATIONS = 3
#: Rows of the tables of transitions and places.
MAX_ROWS = 60


def _more(shown: int, total: int, what: str) -> str:
    left = total - shown
    return f'<p class="note">… and {fmt(left)} more {what}.</p>\n' if left > 0 else ""


def _verdict(document: Mapping[str, Any]) -> str:
    agrees = document["verdict"] == "agrees"
    mark, word, css = ("✓", "Consistent", "agrees") if agrees else ("✗", "Inconsistent",
                                                                   "disagrees")
    family = document.get("family") or {}
    if agrees:
        line = ("The event log is consistent with the model: no firing breaks the model's "
                "equations and no statistical test rejects it. That is no evidence against the "
                "model in this log, not a proof: the tables say how large a change it could "
                "have missed")
    else:
        line = ("The event log is not consistent with the model: the simulation model that "
                "wrote it does not behave as the model file says")
    if family.get("tests"):
        line += (f" ({fmt(family['tests'])} tests at a family-wise error rate of "
                 f"{fmt(family.get('alpha'))}, Holm)")
    # The certain violations are listed in their own section: here the first few, then every
    # other reason (rejected tests, missing transitions), which would drown below them.
    violations = {str(v.get("message")) for v in document.get("first_violations") or []}
    reasons = [str(r) for r in document.get("reasons") or []]
    firings = [r for r in reasons if r in violations]
    others = [r for r in reasons if r not in violations and not r.startswith("... and ")]
    shown = firings[:VERDICT_VIOLATIONS] + others[:MAX_LISTED]
    why = "".join(f"<li>{e(r)}</li>" for r in shown)
    why = f'<ul class="reasons">{why}</ul>' if why else ""
    count = int(document.get("violations") or 0)
    if count > len(firings[:VERDICT_VIOLATIONS]):
        why += (f'<p class="note">{fmt(count)} firings break the model\'s equations in all: '
                'see <a href="#violations">the violations</a>.</p>')
    if len(others) > MAX_LISTED:
        why += f'<p class="note">… and {fmt(len(others) - MAX_LISTED)} more reasons.</p>'
    return (f'<section id="verdict" class="verdict {css}" aria-labelledby="verdict-heading">\n'
            f'<h2 id="verdict-heading" class="verdict-word"><span class="mark" aria-hidden='
            f'"true">{mark}</span> {word}</h2>\n<p class="verdict-line">{line}.</p>\n{why}'
            "</section>\n")


def _interval(ci: Sequence[Any] | None, unit: str = "") -> str:
    if not ci or len(ci) != 2:
        return "–"
    return with_unit(f"[{fmt(ci[0])}, {fmt(ci[1])}]", unit)


def _change(value: Any) -> str:
    return "–" if value is None else f"{fmt(100 * float(value), 2)} %"


def _p(test: Mapping[str, Any] | None) -> str:
    if not test:
        return "–"
    adjusted = test.get("adjusted_p")
    text = fmt(adjusted if adjusted is not None else test.get("p_value"), 3)
    return f"<strong>{text} ✗</strong>" if test.get("rejected") else text


def _cycle_time(document: Mapping[str, Any]) -> str:
    unit = time_unit(document)
    test = document.get("cycle_time_test") or {}
    components = [c for c in test.get("components") or [] if "log" in c]
    if not components:
        lam = document.get("cycle_time_from_log")
        if lam is None:
            return ""
        basis = str(document.get("cycle_time_basis") or "")
        return section("cycle-time", "Cycle time", (
            f"<p>The log's cycle time is {with_unit(fmt(lam), unit)}; the model's "
            f"{'lower bound' if basis.startswith('lower') else 'cycle time'} is "
            f"{with_unit(fmt(document.get('cycle_time')), unit)}.</p>\n"))
    rows = [[e(str(c.get("component", ""))), with_unit(fmt(c["log"]), unit),
             _interval(c.get("log_ci")), with_unit(fmt(c.get("model")), unit),
             _interval(c.get("model_ci")), _p(c.get("test")),
             _change(c.get("detectable_change"))] for c in components]
    model = test.get("model") or {}
    text = ("<p>Each strongly connected component's cycle time in the log (after its warm-up) "
            "beside the model's Lyapunov exponent, estimated by the max-plus recursion to a "
            "tighter precision; a two-sided Welch test compares them. The last column is the "
            "smallest relative change of the cycle time this log would detect with probability "
            "0.8.</p>\n")
    methods = sorted({str(c.get("log_method")) for c in components if c.get("log_method")})
    foot = ""
    if methods or model.get("method"):
        foot = ('<p class="note">Log: ' + e("; ".join(methods)) + ". Model: "
                + e(str(model.get("method", ""))) + ".</p>\n")
    return section("cycle-time", "Cycle time: the log against the model", text + table(
        ["Component", "Log", "95 % interval", "Model", "95 % interval", "p (Holm)",
         "Would detect"], rows, {1, 2, 3, 4, 5, 6}) + foot)


def _transitions(document: Mapping[str, Any]) -> str:
    unit = time_unit(document)
    rows_in = list(document.get("transitions") or [])
    if not rows_in:
        return ""
    rows = []
    for r in rows_in[:MAX_ROWS]:
        rows.append([e(str(r.get("id", ""))), e(str(r.get("law", ""))),
                     fmt(r.get("observed")), with_unit(fmt(r.get("observed_mean")), unit),
                     _interval(r.get("observed_mean_ci")),
                     with_unit(fmt(r.get("model_mean")), unit), _p(r.get("fit_test")),
                     _p(r.get("mean_test")), _change(r.get("detectable_change"))])
    power = document.get("power") or {}
    text = ("<p>The durations of each transition with a random law, where the log shows them "
            "(from its start column, or where every input hold is fixed): the fit of the law "
            "(Kolmogorov–Smirnov for continuous laws, chi-square for resampled lists) and the "
            "mean against the model's; p-values adjusted by Holm's procedure, ✗ where the "
            "test rejects the model. The last column is the smallest relative change of the "
            "mean this log would detect with probability "
            f"{fmt(power.get('probability', 0.8))} ({e(str(power.get('method', '')))}).</p>\n")
    return section("transitions", "Durations", text + table(
        ["Transition", "Law", "Durations", "Observed mean", "95 % interval", "Model mean",
         "Fit p", "Mean p", "Would detect"], rows, {2, 3, 4, 5, 6, 7, 8})
        + _more(len(rows), len(rows_in), "transitions"))


def _places(document: Mapping[str, Any]) -> str:
    rows_in = list(document.get("places") or [])
    if not rows_in:
        return ""
    rows = []
    for r in rows_in[:MAX_ROWS]:
        tests = [t for t in (r.get("fit_test"), r.get("censoring_test")) if t]
        rows.append([fmt(r.get("index")), e(str(r.get("id", ""))), e(str(r.get("law", ""))),
                     fmt(r.get("exact")), fmt(r.get("censored")), _p(r.get("fit_test")),
                     _p(r.get("censoring_test")) if tests else "–"])
    text = ("<p>A firing's start shows the hold of a place exactly when that place's token "
            "came last; otherwise only that the hold was shorter. The exact holds are tested on "
            "the scale of the model's law given that they exceeded the other tokens' arrival "
            "(uniform under the model), and the number hidden by another token against the "
            "number the law predicts.</p>\n")
    return section("places", "Holds", text + table(
        ["Index", "Place", "Law", "Exact", "Hidden", "Fit p", "Hidden p"], rows,
        {0, 3, 4, 5, 6}) + _more(len(rows), len(rows_in), "places"))


def distribution_figure(data: Mapping[str, Any], unit: str, key: str) -> str:
    """The log's empirical distribution function beside the model's (left) and the QQ plot of
    the log's values against the model's quantiles (right)."""
    from matplotlib.lines import Line2D

    x = [float(v) for v in data["x"]]
    ecdf = [float(v) for v in data["ecdf"]]
    model_cdf = [float(v) for v in data["model_cdf"]]
    quantile = [None if v is None else float(v) for v in data.get("model_quantile") or []]
    on_uniform = data.get("kind") == "hold"

    def draw(fig: Any) -> None:
        left, right = fig.subplots(1, 2)
        left.step(x, ecdf, where="post", color=SIM, linewidth=1.3)
        left.plot(x, model_cdf, color=INK, linestyle="--", linewidth=1.2)
        left.set_xlabel(_plain("U, the hold on the law's scale" if on_uniform else
                               f"duration ({unit})" if unit else "duration"))
        left.set_ylabel("share of values ≤ x")
        left.set_ylim(0, 1)
        pairs = [(q, v) for q, v in zip(quantile, x, strict=False) if q is not None]
        if pairs:
            qs, vs = zip(*pairs, strict=True)
            right.plot(qs, vs, linestyle="none", marker="o", markersize=2.5, color=SIM)
            low, high = min(min(qs), min(vs)), max(max(qs), max(vs))
            right.plot([low, high], [low, high], color=INK, linestyle="--", linewidth=1.0)
        right.set_xlabel("model quantile")
        right.set_ylabel("log value")
        handles = [Line2D([], [], color=SIM, linewidth=1.3, marker="o", markersize=2.5,
                          label="the log"),
                   Line2D([], [], color=INK, linestyle="--", label="the model's law")]
        fig.legend(handles=handles, loc="outside lower center", ncols=2, fontsize=7.5)

    label = f"Distribution of {data.get('id')} in the log against the model"
    return _render(key, label, draw, 7.2, 3.0)


def _distributions(document: Mapping[str, Any], figs: Figures) -> str:
    items = list((document.get("figures") or {}).get("distributions") or [])
    if not items:
        return ""
    unit = time_unit(document)
    out = ""
    for i, data in enumerate(items):
        if not data.get("x"):
            continue
        what = "durations" if data.get("kind") != "hold" else "holds"
        status = ('<strong class="bad">rejected</strong>' if data.get("rejected")
                  else "not rejected")
        caption = (f"{fmt(data.get('n'))} {what} of {e(str(data.get('id')))} against "
                   f"{e(str(data.get('law', 'the model')))}: {status} (Holm-adjusted p = "
                   f"{fmt(data.get('adjusted_p'), 3)}). Left, the share of logged values up to "
                   "x beside the model's distribution function; right, the logged values "
                   "against the model's quantiles (on the dashed line when they follow the "
                   "law).")
        title = f"{e(str(data.get('id')))}: the log against the model's law"
        out += figs.wrap(f"distribution-{i}", title,
                         distribution_figure(data, unit, f"dist{i}"), caption)
    text = ('<p>The elements rejected by a test, or those closest to rejection, at most '
            f"{fmt(len(items))} of them (at most 200 points each).</p>\n")
    return section("distributions", "Distributions", text + out)


def _violations(document: Mapping[str, Any]) -> str:
    count = int(document.get("violations") or 0)
    listed = list(document.get("first_violations") or [])
    checks = document.get("checks")
    what = ("the model's equations" if checks == "exact" else
            "the bounds every draw of the model's laws respects")
    if count == 0:
        text = (f"<p>All {fmt(document.get('firings_checked', 0))} judged firings obey {what} "
                f"(relative tolerance {fmt(document.get('tolerance'))}).</p>\n")
        return section("violations", "Firings against the model's equations", text)
    rows = [[e(str(v.get("transition", ""))), fmt(v.get("firing")), e(str(v.get("rule", ""))),
             e(str(v.get("message", "")))] for v in listed[:MAX_LISTED]]
    text = (f'<p class="result bad"><span class="mark" aria-hidden="true">✗</span> '
            f"<strong>{fmt(count)} firings break {what}</strong>: each is a certain "
            "disagreement, whatever the statistics say. The first, in time:</p>\n")
    return section("violations", "Firings against the model's equations", text + table(
        ["Transition", "Firing", "Rule", "What happened"], rows, {1})
        + _more(len(rows), count, "violations"))


def _not_judged(document: Mapping[str, Any]) -> str:
    items = [f"{e(str(n.get('id', '')))} ({e(str(n.get('what', '')))}): "
             f"{e(str(n.get('reason', '')))}" for n in document.get("not_judged") or []]
    absent = [str(a.get("id", a)) if isinstance(a, Mapping) else str(a)
              for a in document.get("absent_transitions") or []]
    if not (items or absent):
        return ""
    out = ""
    if absent:
        way = ("listed as not judged (--partial)" if document.get("partial") else
               "a disagreement: the log must hold every transition of the model (or use "
               "--partial)")
        out += (f"<p>Transitions of the model with no row in the log: "
                f"{e(', '.join(absent[:MAX_LISTED]))}"
                f"{' …' if len(absent) > MAX_LISTED else ''}; {way}.</p>\n")
    if items:
        out += ("<p>Not judged by this log:</p>\n<ul>\n"
                + "".join(f"<li>{item}</li>\n" for item in items[:MAX_LISTED]) + "</ul>\n"
                + _more(min(len(items), MAX_LISTED), len(items), "elements"))
    return section("not-judged", "What was not judged", out)


def _notes(document: Mapping[str, Any]) -> str:
    """The judge's notes (a time unit to try, what --partial left out, the log's rounding),
    next to the verdict they qualify."""
    items = [str(n) for n in document.get("notes") or []]
    if not items:
        return ""
    return section("notes", "Notes on this log",
                   "<ul>\n" + "".join(f"<li>{e(n)}</li>\n" for n in items) + "</ul>\n")


def _log(document: Mapping[str, Any]) -> str:
    fmt_ = document.get("log_format") or {}
    rows = [("Event log", f"<code>{e(str(document.get('log') or 'a table in memory'))}</code>"),
            ("Firings logged", fmt(document.get("firings_logged"))),
            ("Replications", fmt(document.get("replications") or 1))]
    if fmt_.get("format"):
        rows.append(("Format", e(str(fmt_["format"]))))
    if fmt_.get("time_scale") not in (None, 1, 1.0):
        rows.append(("Time scale", fmt(fmt_["time_scale"])))
    if fmt_.get("renamed"):
        rows.append(("Names mapped", fmt(fmt_["renamed"])))
    items = "".join(f"<dt>{label}</dt><dd>{value}</dd>\n" for label, value in rows)
    return f'<dl class="record">\n{items}</dl>\n'


def body(document: Mapping[str, Any]) -> str:
    """The ``<body>`` content of a trace judgement's page."""
    from .sections import _masthead as masthead  # the masthead of every page

    figs = Figures()
    return "".join([
        masthead(document),
        "<main>\n",
        _verdict(document),
        _notes(document),
        section("log", "The log", _log(document)),
        _cycle_time(document),
        _transitions(document),
        _places(document),
        _distributions(document, figs),
        _violations(document),
        _not_judged(document),
        notes.reproducibility(document),
        notes.cautions(document),
        "</main>\n",
        notes.footer(document),
    ])
