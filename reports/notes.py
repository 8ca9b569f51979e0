"""The written parts of the review page: algebraic checks, semantics, reproducibility, cautions.

These sections are mostly prose. What they state about a run (the certificate, the corners of
the characteristic maxpolynomial, seeds and versions) comes from the result document; the rest
is the fixed wording of the tool's semantics and of its limits.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from .markup import e, fmt, is_random, more, pct, section, table

__all__ = ["algebra", "cautions", "footer", "reproducibility", "semantics"]

#: Largest number of terms of the characteristic maxpolynomial written out.
MAX_TERMS = 16

_SUPERSCRIPT = str.maketrans("0123456789", "⁰¹²³⁴⁵⁶⁷⁸⁹")


def _power(k: int) -> str:
    return "" if k == 0 else "z" if k == 1 else f"z{str(k).translate(_SUPERSCRIPT)}"


def algebra(document: Mapping[str, Any]) -> str:
    """The appendix: the certificate of the exact result and the characteristic
    maxpolynomial; of a random model, those of its mean durations."""
    analysis = document.get("analysis") or {}
    certificate = analysis.get("certificate")
    charpoly = analysis.get("charpoly")
    if not certificate and not charpoly:
        return ""
    random = is_random(document)
    out = ('<p class="note">The numbers below verify the exact analysis of the <strong>mean '
           "durations</strong> (every random duration replaced by its mean): the lower bound "
           "and the critical circuit of the mean durations, not the estimates of this "
           "model.</p>\n") if random else ""
    if certificate:
        checked = bool(certificate.get("checked"))
        mark = "✓ Checked" if checked else "○ Not checked"
        names = [("circuit_ratio", "Circuit ratio (cycle time of the critical circuit)", 6),
                 ("circuit_gap", "Gap between circuit ratio and cycle time", 4),
                 ("monotone_gap", "Monotonicity gap", 4),
                 ("eigen_residual", "Eigenvector residual", 4),
                 ("max_reduced_weight", "Largest reduced weight", 4),
                 ("tolerance", "Tolerance", 4)]
        rows = [[label, fmt(certificate[key], digits)] for key, label, digits in names
                if certificate.get(key) is not None]
        out += (f'<p class="result {"good" if checked else "plain"}"><strong>{mark}.</strong> '
                f'{e(str(certificate.get("text") or ""))}</p>\n')
        if rows:
            out += table(["Quantity", "Value"], rows, {1}, "Certificate of the cycle time",
                         compact=True)
        out += ('<p class="note">A certificate is checked without the algorithm that found the '
                "answer: a circuit whose ratio is the cycle time, and an eigenvector against "
                "which no place has a positive reduced weight.</p>\n")
    if charpoly and "skipped" in charpoly:
        out += ("<p>Characteristic maxpolynomial: not computed "
                f"({e(str(charpoly['skipped']))}).</p>\n")
    elif charpoly:
        corners = charpoly.get("corners") or []
        rows = [["ε (−∞)" if value is None else fmt(value, 6), fmt(int(mult))]
                for value, mult in corners]
        terms = sorted(charpoly.get("terms") or [], key=lambda term: -term[0])
        written = [
            (_power(int(k)) if float(c) == 0 and k else
             f"{fmt(c, 6)}{' ⊗ ' + _power(int(k)) if k else ''}") for k, c in terms[:MAX_TERMS]]
        if written:
            rest = (f" ⊕ … ({more(len(terms) - MAX_TERMS, 'term')})"
                    if len(terms) > MAX_TERMS else "")
            out += ('<p>Characteristic maxpolynomial (essential terms): '
                    f'<span class="formula">χ(z) = {" ⊕ ".join(written)}{rest}</span></p>\n')
        if rows:
            out += table(["Corner", "Multiplicity"], rows, {0, 1},
                         "Corners of the characteristic maxpolynomial", compact=True)
            out += ('<p class="note">The corners are the roots of χ; the greatest corner is '
                    "the cycle time of the matrix of the expanded event graph.</p>\n")
    heading = ("Appendix: the algebra of the mean durations" if random else
               "Appendix: how the exact result was verified")
    return section("algebra", heading, out)


def semantics(document: Mapping[str, Any]) -> str:
    """Assumptions and semantics in plain words."""
    model = document["model"]
    random = is_random(document)
    unit = model.get("time_unit")
    items = [
        "A <em>transition</em> is an event that repeats (a machine finishes a part, a vehicle "
        "departs a stop); a <em>place</em> is a condition between two transitions (a buffer, "
        "a link) with an initial number of <em>tokens</em> and a <em>holding time</em>.",
        "Firing k of transition t completes at x<sub>t</sub>(k) = d<sub>t</sub>(k) + the "
        "latest over its input places p = (u → t) of x<sub>u</sub>(k − m<sub>p</sub>) + "
        "h<sub>p</sub>(k). Initial tokens are available at time 0.",
        "Firings of one transition may overlap unless a self-loop place limits them: with one "
        "token the transition is a single server; with n tokens firing k waits for firing "
        "k − n (this is not the same as a pooled queue with n servers).",
        "Tokens leave a place in the order of the firings that produced them (firing k takes "
        "token k − m of each input place" + (", even if a random hold lets a later token "
                                             "arrive first" if random else "") + "), so the "
        "recursion describes the simulation exactly.",
        "The <em>cycle time</em> λ is the long-run time between two firings of a transition; "
        "the throughput is 1/λ. A <em>critical circuit</em> is a circuit whose total duration "
        "per token equals λ" + (" of the mean durations" if random else "") + ". <em>Slack"
        "</em> is how much a duration or a hold may grow before λ changes" + (
            " (of the mean durations)" if random else "") + ". The <em>bottleneck</em> is the "
        "element whose duration (or hold) the cycle time depends on most, the largest "
        "dλ/d(duration)" + (": under variability it need not lie on the critical circuit of "
                            "the mean durations." if random else
                            ": with fixed durations it lies on a critical circuit."),
    ]
    if random:
        criticality = (document.get("analysis") or {}).get("criticality") or {}
        definition = criticality.get("definition")
        meaning = (f"<em>Criticality</em>: {e(str(definition))}." if definition else
                   "<em>Criticality</em> is the share of firings in which an element was on "
                   "the path that set the firing time.")
        items.append(
            "With random durations λ is the long-run rate of the random max-plus recursion (its "
            "Lyapunov exponent), estimated from independent replications with a 95 % "
            "confidence interval. Each random draw is indexed by element and firing number, "
            f"so the simulation and the recursion use the same draws. {meaning} The cycle "
            "time of the mean durations is a lower bound: variability slows a synchronised "
            "system down.")
    else:
        items.append(
            "With fixed durations λ is exact: the largest ratio of duration to tokens over the "
            "circuits of the graph (the max-plus eigenvalue). After a transient the firings "
            "repeat periodically; the periodic schedule comes from an eigenvector.")
    if unit:
        items.append(f"All times are in {e(str(unit))}; throughputs are per {e(str(unit))}.")
    content = "<ul>\n" + "".join(f"<li>{item}</li>\n" for item in items) + "</ul>\n"
    return section("semantics", "Assumptions and semantics", content)


def reproducibility(document: Mapping[str, Any]) -> str:
    """Seed, settings, versions, command line and model hash."""
    model = document["model"]
    settings = document.get("settings") or {}
    versions = document.get("versions") or {}
    rows = []
    if document.get("command_line"):
        rows.append(("Command line", f"<code>{e(str(document['command_line']))}</code>"))
    labels = [("seed", "Seed", fmt), ("precision", "Target precision (relative half-width)",
                                       pct),
              ("replications", "Replications", fmt),
              ("firings_per_replication", "Firings per replication", fmt),
              ("warmup", "Warm-up (firings deleted per replication)", fmt)]
    if not is_random(document):
        labels = labels[2:]  # seed and precision target belong to estimates of random models
    for key, label, how in labels:
        if settings.get(key) is not None:
            rows.append((label, how(settings[key])))
    if model.get("path"):
        rows.append(("Model file", f"<code>{e(str(model['path']))}</code>"))
    if model.get("sha256"):
        rows.append(("Model SHA-256", f'<code class="hash">{e(str(model["sha256"]))}</code>'))
    if versions:
        text = ", ".join(f"{e(str(k))} {e(str(v))}" for k, v in versions.items())
        rows.append(("Versions", text))
    if document.get("created"):
        rows.append(("Created", e(str(document["created"]))))
    items = "".join(f"<dt>{label}</dt><dd>{value}</dd>\n" for label, value in rows)
    what = ("The same command" if str(document.get("command_line", "")).startswith("cyclecheck")
            else "The same call")
    seed = "seed, " if is_random(document) else ""
    log = ", the same event log" if document.get("command") == "trace" else ""
    text = (f"<p>{what} with the same {seed}model file{log} and versions gives the same "
            "numbers, on any number of workers.</p>\n")
    return section("reproducibility", "Reproducibility",
                   text + f'<dl class="record">\n{items}</dl>\n')


def cautions(document: Mapping[str, Any]) -> str:
    """What the results are, and what they are not."""
    random = is_random(document)
    if document.get("command") == "trace":
        alpha = document.get("alpha")
        level = f"{100 * float(alpha):g} %" if isinstance(alpha, int | float) else "α"
        items = [
            "The judgement compares a log with the model file: a consistent log shows that the "
            "simulation that wrote it behaves as the model says, not that the model describes "
            "the real system.",
            "The statistical tests can err: with a family-wise error rate of "
            f"{level}, a consistent model is called inconsistent that often by chance; a "
            "consistent verdict means no evidence against the model in this log, and the "
            "detectable changes say how large a difference it could have missed.",
            "Decisions that affect safety — a rail timetable, a plant's capacity — follow local "
            "rules and the sign-off of a responsible engineer.",
        ]
        content = "<ul>\n" + "".join(f"<li>{item}</li>\n" for item in items) + "</ul>\n"
        return section("cautions", "Cautions", content)
    items = [
        "The results are model-based: they hold for the model as written, its structure, its "
        "durations and their distributions. Checking the simulation against the theory shows "
        "that the simulation computes the model correctly; it does not show that the model "
        "describes the real system.",
        ("Estimates under random durations carry statistical error; the intervals are 95 % "
         "confidence intervals, not guarantees. Numbers of the mean durations are exact for "
         "the mean durations only." if random else
         "The durations are fixed: real durations vary, and variability slows a synchronised "
         "system down, so the cycle time here is what the system achieves at best with these "
         "durations."),
        "Decisions that affect safety — a rail timetable, a plant's capacity — follow local "
        "rules and the sign-off of a responsible engineer.",
    ]
    content = "<ul>\n" + "".join(f"<li>{item}</li>\n" for item in items) + "</ul>\n"
    return section("cautions", "Cautions", content)


def footer(document: Mapping[str, Any]) -> str:
    """The closing line: what wrote the page, from which document."""
    version = (document.get("versions") or {}).get("cyclecheck")
    written = f"cyclecheck {e(str(version))}" if version else "cyclecheck"
    return (f'<footer><p>Written by {written} from a result document (schema version '
            f'{fmt(int(document["schema_version"]))}). The page holds no scripts and loads '
            "nothing from elsewhere.</p></footer>\n")
