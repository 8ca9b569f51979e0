"""The review page: content, escaping, determinism, self-containment and safe writing.

The sample documents come from ``tests/report_documents.py`` (hand-built, invented scenarios).
The page is parsed with the standard library's :mod:`html.parser` (the reference parser here);
the expected texts are written out by hand from the documents and the formatting rule in the
docstring of :mod:`cyclecheck.reports.page` (4 significant digits, 6 for an exact cycle time,
thousands separators, true minus signs).
"""

from __future__ import annotations

import json
import math
import os
import re
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path
from typing import Any

import pytest
from cyclecheck.reports import layout
from cyclecheck.reports.page import ReportError, fmt, render_page
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tests.report_documents import fixed_document, random_document
from tests.strategies import live_event_graphs


class _Page(HTMLParser):
    """Collects the visible text, the ids, the tags and the attributes of a page."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.text: list[str] = []
        self.ids: list[str] = []
        self.tags: list[str] = []
        self.attributes: list[tuple[str, str, str]] = []
        self._skip = 0
        self._glue = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.tags.append(tag)
        if tag == "wbr":  # a place to break a word, not a space: the word stays whole
            self._glue = True
        for name, value in attrs:
            self.attributes.append((tag, name, value or ""))
            if name == "id":
                self.ids.append(value or "")
        if tag in ("style", "script"):
            self._skip += 1

    def handle_endtag(self, tag: str) -> None:
        if tag in ("style", "script"):
            self._skip -= 1

    def handle_data(self, data: str) -> None:
        if self._skip:
            return
        if self._glue and self.text:
            self.text[-1] += data
        else:
            self.text.append(data)
        self._glue = False


def parse(page: str) -> _Page:
    parser = _Page()
    parser.feed(page)
    parser.close()
    return parser


def visible_text(page: str) -> str:
    """The text of the page with runs of white space (including no-break spaces) as one space."""
    return re.sub(r"[\s\u00a0\u202f]+", " ", " ".join(parse(page).text))


@pytest.fixture(scope="module")
def fixed_page() -> str:
    return render_page(fixed_document())


@pytest.fixture(scope="module")
def random_page() -> str:
    return render_page(random_document())


# --- content -------------------------------------------------------------------------------

FIXED_TEXTS = [
    "Bakery tray loop",
    "Agrees",
    "SimPy cycle time 13.5 equals the max-plus eigenvalue 13.5.",  # a reason, verbatim
    "13.5 min",  # cycle time with its unit
    "exact: the max-plus eigenvalue",
    "0.07407 per min",  # throughput 1/13.5 to 4 significant digits
    "mix → proof → bake → cool → wrap → mix",  # the critical circuit, closed
    "12,000",  # firings simulated
    "cyclicity 3 firings",
    "88.9 %",  # utilization of the oven, 12/13.5
    "32.5",  # periodic start of wrap
    "10.5",  # slack of wrap's self-loop
    "Identical sample paths.",
    "strongest validation the tool offers",
    "same firing times from the same fixed durations",
    "12,000 firings in 1 replication,",
    "χ(z) = z⁸ ⊕ 40.5 ⊗ z⁵ ⊕ 52.5 ⊗ z⁴ ⊕ 60 ⊗ z³ ⊕ 69 ⊗ z ⊕ 72",
    "The tray loop has ratio 40.5/3 = 13.5",
    "cyclecheck check models/bakery.toml --seed 7 --report bakery.html",
    "3f1c9a0e7b2d4c6f8a1e3b5d7c9f0a2b4d6e8f0a1c3e5b7d9f1a3c5e7b9d1f3a",
    "python 3.11.7",
    "simpy 4.1.1",
    "2026-12-01T23:00:00Z",
    "a rail timetable, a plant's capacity",
    "sign-off of a responsible engineer",
    "model-based",
]

RANDOM_TEXTS = [
    "Shuttle loop",
    "Agrees",
    "10.62 min",  # the estimate
    "95 % interval 10.41 – 10.83 min",
    "0.09416 per min",  # 1/10.62
    "9.75 – 12.64 min",  # the bounds card
    "lower 9.75 min",
    "upper 12.64 min",
    "40,000 firings in 5 replications,",  # SimPy's replications, on which paths were compared
    "same firing times on the same random draws",
    "max-plus: 80,000 SimPy: 40,000",  # the firings card counts both sides
    "gamma(mean=3, cv=0.5)",
    "lognormal(mean=4, cv=0.3)",
    "91.0 %",  # criticality of the dock
    "16.5",  # slack of the berth
    "target 2.0 %",  # the precision setting
    "80,000",  # firings of the recursion, side by side
    "Lyapunov exponent",
    "No periodic schedule",
    "not computed (durations are random)",
]


@pytest.mark.parametrize("expected", FIXED_TEXTS)
def test_fixed_page_shows_the_key_numbers(fixed_page: str, expected: str) -> None:
    """Every key number and statement of the fixed-duration document is visible text."""
    assert expected in visible_text(fixed_page)


@pytest.mark.parametrize("expected", RANDOM_TEXTS)
def test_random_page_shows_the_key_numbers(random_page: str, expected: str) -> None:
    """Every key number and statement of the random-duration document is visible text."""
    assert expected in visible_text(random_page)


def test_verdict_comes_first(fixed_page: str) -> None:
    """The verdict is the first section of the main part, before any number."""
    main = fixed_page[fixed_page.index("<main>"):]
    assert main.index('id="verdict"') < main.index('id="numbers"') < main.index('id="graph"')


def test_disagreement_is_said_in_words_not_colour() -> None:
    """A disagreeing verdict has its mark and its word, and the reasons are listed."""
    document = fixed_document()
    document["comparison"]["verdict"] = "disagrees"
    document["comparison"]["reasons"] = ["SimPy cycle time 14.1 is outside [13.5, 13.5]."]
    document["comparison"]["sample_path"]["identical"] = False
    document["comparison"]["sample_path"]["max_relative_difference"] = 0.0123
    text = visible_text(render_page(document))
    assert "✗ Disagrees" in text
    assert "SimPy cycle time 14.1 is outside [13.5, 13.5]." in text
    assert "The sample paths differ." in text and "0.0123" in text


def test_analysis_only_document_renders() -> None:
    """A document of `analyze` (no simulation, no comparison) gives a page without a verdict."""
    document = fixed_document()
    for key in ("simulation", "comparison"):
        del document[key]
    document["command"] = "analyze"
    text = visible_text(render_page(document))
    assert "Analysis only" in text and "13.5 min" in text
    assert "Sample-path identity" not in text


def section_text(page: str, name: str) -> str:
    """The visible text of one section of the page ("" when the page has no such section)."""
    start = page.find(f'<section id="{name}"')
    if start < 0:
        return ""
    return visible_text(page[start:page.index("</section>", start)])


def table_rows(page: str, caption: str) -> list[list[str]]:
    """The cells (visible text) of each row of the table whose caption starts so."""
    start = page.index(f"<caption>{caption}")
    body = page[start:page.index("</table>", start)]
    return [[visible_text(cell) for cell in re.findall(r"<t[hd][^>]*>(.*?)</t[hd]>", row)]
            for row in re.findall(r"<tr>(.*?)</tr>", body, re.S)]


def _exact(cycle_time: float) -> dict[str, Any]:
    """The fixed document with another exact cycle time on both sides."""
    document = fixed_document()
    for side in ("analysis", "simulation"):
        document[side].update(cycle_time=cycle_time, cycle_time_ci=[cycle_time, cycle_time],
                              throughput=1 / cycle_time)
    return document


def test_side_by_side_shows_exact_values_as_the_cards_do() -> None:
    """An exact 17.375 is 17.375 in the table too, not 17.38 (6 significant digits, as on the
    cards); estimates keep 4. The value is the cycle time of models/packaging_cell.toml,
    worked by hand in its header: the carrier loop (1.5 + 9 + 2 + 10 + 1 + 14 + 20 + 12) / 4
    (Baccelli et al., Synchronization and Linearity, 1992, §2.5: cycle time = the largest
    circuit ratio)."""
    assert fmt(17.375) == "17.38"  # what 4 digits would have shown
    page = render_page(_exact(69.5 / 4))
    rows = {row[0]: row[1:] for row in table_rows(page, "Both engines side by side")}
    assert rows["Cycle time"] == ["17.375", "17.375"]
    assert "95 % interval" not in rows  # fixed durations: no interval to speak of
    assert rows["Throughput"] == [fmt(4 / 69.5)] * 2  # as the throughput card
    assert "Cycle time λ 17.375 min" in section_text(page, "numbers")  # the card
    random_rows = {row[0]: row[1:] for row in table_rows(render_page(random_document()),
                                                         "Both engines side by side")}
    assert random_rows["Cycle time"] == ["10.62", "10.58"]
    assert random_rows["95 % interval"] == ["10.41 – 10.83", "10.27 – 10.95"]


def test_exact_side_says_it_needed_no_firings(fixed_page: str, random_page: str) -> None:
    """The max-plus side of a fixed model computed no firings: the table says it is exact
    instead of showing 0; the SimPy side and random models show their counts."""
    rows = {row[0]: row[1:] for row in table_rows(fixed_page, "Both engines side by side")}
    assert rows["Firings computed"] == ["exact, no simulation", "12,000"]
    rows = {row[0]: row[1:] for row in table_rows(random_page, "Both engines side by side")}
    assert rows["Firings computed"] == ["80,000", "40,000"]
    document = fixed_document()
    for key in ("simulation", "comparison"):
        del document[key]
    document["command"] = "analyze"
    numbers = section_text(render_page(document), "numbers")
    assert "Firings computed exact, no simulation" in numbers
    assert " 0 " not in numbers


def test_replication_caption_counts_each_engine(random_page: str) -> None:
    """The caption gives the number of replications of each engine, from the data: the
    recursion ran 10, SimPy 5 of its own."""
    text = section_text(random_page, "variability")
    assert ("The estimate of λ from each replication: 10 of the max-plus recursion and 5 of "
            "the SimPy simulation,") in text
    assert "each of the 10 replications" not in text
    document = random_document()
    estimates = document["figures"]["replication_estimates"]
    estimates["simulation"] = estimates["simulation"][:3] + estimates["recursion"][:7]
    text = section_text(render_page(document), "variability")
    assert "from each of the 10 replications, for each engine," in text


def test_no_periodic_schedule_says_why(random_page: str) -> None:
    """Random durations: no periodic regime. Parts at different cycle times: no single
    period. A fixed, strongly connected document without a schedule shows no section."""
    text = section_text(random_page, "schedule")
    assert "No periodic schedule: the durations are random, so the firings never settle into "\
           "a periodic regime" in text
    document = fixed_document()
    document["figures"]["schedule"] = None
    document["analysis"]["strongly_connected"] = False
    document["analysis"]["cycle_time_by_transition"]["check"] = 12.5
    page = render_page(document)
    text = section_text(page, "schedule")
    assert "No periodic schedule: the graph is not strongly connected, and its parts run at "\
           "different cycle times" in text
    assert "Periodic start" not in visible_text(page)
    document["analysis"]["strongly_connected"] = True
    assert 'id="schedule"' not in render_page(document)


def test_random_transient_claims_no_periodic_regime(fixed_page: str, random_page: str) -> None:
    """A random model's transient figure says there is no periodic regime and shows no
    transient length, not even the mean durations' (5 firings in the document) or an old
    document's transient_firings; the fixed model's caption gives its transient and period."""
    text = section_text(random_page, "transient")
    assert "there is no periodic regime" in text
    assert "regime starts" not in text and "5 firings" not in text
    assert "Transient and periodic regime" not in text
    document = random_document()
    document["analysis"]["transient_firings"] = 7
    assert "7 firings" not in section_text(render_page(document), "transient")
    text = section_text(fixed_page, "transient")
    assert "The periodic regime starts after 3 firings and repeats every 3 firings." in text
    document = fixed_document()
    document["analysis"].update(transient_firings=1, cyclicity=1)
    text = section_text(render_page(document), "transient")
    assert "starts after 1 firing and repeats every 1 firing." in text


DEFINITION = ("place: share of its target's firings whose start it set; transition: the "
              "largest share among its output places")


def test_criticality_definition_is_shown(random_page: str) -> None:
    """The document's definition of criticality is the note of the criticality column (and
    the legend of the graph); without one, no such note."""
    assert random_document()["analysis"]["criticality"]["definition"] == DEFINITION
    assert f"Criticality: {DEFINITION}." in section_text(random_page, "elements")
    assert f"criticality of the place ({DEFINITION})" in section_text(random_page, "graph")
    document = random_document()
    del document["analysis"]["criticality"]["definition"]
    page = render_page(document)
    assert "Criticality:" not in section_text(page, "elements")
    assert "Criticality" in table_rows(page, "Transitions")[0]  # the column itself stays


def test_wide_tables_are_set_tighter() -> None:
    """Tables of more than six columns get the tighter style, durations may break after their
    parenthesis, and a label column with no label is left out."""
    from tests.report_documents import wide_document

    page = render_page(wide_document())
    headers = table_rows(page, "Transitions")[0]
    # Utilization has its own table now (section "Where to act"): 8 columns here.
    assert headers[0] == "Transition" and headers[-1] == "Cycle time" and len(headers) == 8
    assert '<table class="wide"><caption>Transitions' in page
    assert "exponential(<wbr>mean=2)" in page
    document = random_document()
    for item in document["model"]["transitions"] + document["model"]["places"]:
        item["label"] = ""
    page = render_page(document)
    assert "Label" not in table_rows(page, "Transitions")[0]
    assert "Label" not in table_rows(page, "Places")[0]
    assert "Label" in table_rows(render_page(random_document()), "Places")[0]


def test_figures_are_numbered_and_inline(fixed_page: str, random_page: str) -> None:
    """Each figure holds one inline SVG; the fixed page has 3 figures, the random page 4."""
    for page, count in ((fixed_page, 3), (random_page, 4)):
        tags = parse(page).tags
        assert tags.count("figure") == count
        assert tags.count("svg") == count
        assert f"Figure {count}" in visible_text(page)


def test_ids_are_unique(fixed_page: str, random_page: str) -> None:
    """Several SVG figures share one page: their ids (clip paths, markers) must not clash."""
    for page in (fixed_page, random_page):
        ids = parse(page).ids
        assert len(ids) == len(set(ids))
        # every local reference points at an id of the page
        for ref in re.findall(r'(?:href="#|url\(#)([^")]+)', page):
            assert ref in ids


# --- escaping ------------------------------------------------------------------------------

def _rename(document: dict[str, Any], old: str, new: str) -> dict[str, Any]:
    """The document with transition id ``old`` replaced by ``new`` everywhere."""
    text = json.dumps(document, ensure_ascii=False)
    return json.loads(text.replace(json.dumps(old), json.dumps(new, ensure_ascii=False)))


def test_text_from_the_model_is_escaped() -> None:
    """Names, labels, descriptions and ids with markup come out as text, never as tags."""
    document = _rename(fixed_document(), "check", "<i>chk</i>")
    document["model"]["name"] = '<b>x</b> & "y"'
    document["model"]["description"] = "<img src=x onerror=alert(1)>"
    document["model"]["transitions"][0]["label"] = "<script>alert(1)</script>"
    document["comparison"]["reasons"] = ["<em>raw</em>"]
    page = render_page(document)
    for raw in ("<b>x</b>", "<i>chk</i>", "<img", "<script", "<em>raw</em>"):
        assert raw not in page
    assert "&lt;b&gt;x&lt;/b&gt; &amp; &quot;y&quot;" in page
    text = visible_text(page)
    assert '<b>x</b> & "y"' in text  # shown as text
    assert "<i>chk</i>" in text  # in the tables and in the figures
    assert "script" not in parse(page).tags


def test_dollar_signs_are_not_mathtext() -> None:
    """A `$` in an id is text for matplotlib too (it would otherwise start mathtext)."""
    page = render_page(_rename(fixed_document(), "wrap", "pack$1$"))
    svg_text = " ".join(re.findall(r"<text[^>]*>([^<]*)</text>", page))
    assert "pack$1$" in svg_text


# --- determinism and self-containment ------------------------------------------------------

def test_rendering_is_deterministic(fixed_page: str, random_page: str) -> None:
    """The same document gives byte-identical pages, here and in a fresh interpreter."""
    assert render_page(fixed_document()) == fixed_page
    assert render_page(random_document()) == random_page
    code = ("import sys; from tests.report_documents import random_document;"
            "from cyclecheck.reports.page import render_page;"
            "sys.stdout.write(render_page(random_document()))")
    env = dict(os.environ, PYTHONHASHSEED="12345")
    root = Path(__file__).resolve().parent.parent
    out = subprocess.run([sys.executable, "-c", code], cwd=root, env=env, check=True,
                         capture_output=True, text=True, encoding="utf-8").stdout
    assert out == random_page


EXTERNAL = re.compile(r"https?:|ftp:|file:|//[\w.-]+|@import|<script|<iframe|<object"
                      r"|<embed|<img|<base|<audio|<video|<source", re.I)


def test_no_external_references(fixed_page: str, random_page: str) -> None:
    """No URL, no script, no fetched resource: only local `#` references, and the empty
    icon (``data:,``) that keeps browsers from asking for /favicon.ico."""
    for page in (fixed_page, random_page):
        assert not EXTERNAL.search(page), EXTERNAL.search(page)
        links = [(tag, name, value) for tag, name, value in parse(page).attributes
                 if tag == "link"]
        assert links == [("link", "rel", "icon"), ("link", "href", "data:,")]
        for tag, name, value in parse(page).attributes:
            if name in ("href", "src", "xlink:href") and tag != "link":
                assert value.startswith("#"), (tag, name, value)
            assert not name.startswith("on"), (tag, name)
        for url in re.findall(r"url\(([^)]*)\)", page):
            assert url.startswith("#")


# --- bad documents -------------------------------------------------------------------------

@pytest.mark.parametrize(
    ("change", "item", "rule"),
    [
        (lambda d: d.update(document="something-else"), "document", "'cyclecheck-result'"),
        (lambda d: d.update(schema_version=2), "schema_version", "version 2 is not supported"),
        (lambda d: d["model"].pop("name"), "model.name", "model name is required"),
        (lambda d: d["model"]["places"][3].update({"to": "nowhere"}), "model.places[3].to",
         "must name a transition"),
        (lambda d: d["model"]["places"][0].update(tokens=-1), "model.places[0].tokens",
         "integer >= 0"),
        (lambda d: d["comparison"].update(verdict="maybe"), "comparison.verdict",
         "'agrees' or 'disagrees'"),
        (lambda d: [d.pop("analysis"), d.pop("simulation"), d.pop("command")], "analysis",
         "needs an analysis or a simulation"),
        # A check page without one of its sides would show a verdict on nothing.
        (lambda d: d.pop("analysis"), "analysis",
         "is missing: a document of `check` has the sections analysis, simulation and "
         "comparison"),
        (lambda d: d.update(simulation=None), "simulation", "is missing"),
        (lambda d: d.pop("comparison"), "comparison", "is missing"),
        (lambda d: d.update(analysis={}), "analysis.cycle_time", "is required"),
        (lambda d: d.update(command="analyze", analysis=None), "analysis",
         "a document of `analyze` has the section analysis"),
        (lambda d: d.update(schema_version=99), "schema_version",
         "version 99 is not supported; this cyclecheck reads version 1"),
        (lambda d: d.update(schema_version="1"), "schema_version",
         'must be the number 1 (the version this cyclecheck reads), not the text "1"'),
        (lambda d: d.update(schema_version=True), "schema_version", "not true"),
        # A text, a list or a truth value where a number belongs.
        (lambda d: d["analysis"].update(cycle_time="fast"), "analysis.cycle_time",
         'must be a number, not the text "fast"'),
        (lambda d: d["simulation"].update(cycle_time_ci=[13.5, "x"]),
         "simulation.cycle_time_ci[1]", "must be a number"),
        (lambda d: d["analysis"].update(cycle_time_ci=[13.5]), "analysis.cycle_time_ci",
         "must be a list of 2 values, not 1"),
        (lambda d: d["analysis"].update(throughput=[1]), "analysis.throughput",
         "must be a number, not a list"),
        (lambda d: d["analysis"].update(exact="yes"), "analysis.exact",
         'must be true or false, not the text "yes"'),
        (lambda d: d["analysis"]["utilization"].update(bake="89 %"),
         "analysis.utilization.bake", "must be a number"),
        (lambda d: d["analysis"]["slack"]["places"].__setitem__(3, {}),
         "analysis.slack.places[3]", "must be a number, not an object"),
        (lambda d: d["analysis"]["charpoly"]["corners"].__setitem__(0, [13.5]),
         "analysis.charpoly.corners[0]", "must be a list of 2 values"),
        (lambda d: d["analysis"].update(cyclicity=1.5), "analysis.cyclicity",
         "must be a whole number, not the number 1.5"),
        (lambda d: d["analysis"].update(critical_circuits=[["mix", "oven"]]),
         "analysis.critical_circuits[0][1]", "must name a transition of model.transitions"),
        (lambda d: d["analysis"].update(critical_places=[0, 13]), "analysis.critical_places[1]",
         "must be the index of a place"),
        (lambda d: d["settings"].update(seed="seven"), "settings.seed", "must be a whole number"),
        (lambda d: d["comparison"]["sample_path"].update(firings_compared=-1),
         "comparison.sample_path.firings_compared", "must be >= 0, not -1"),
        (lambda d: d["figures"]["transient"]["recursion"]["mix"].pop(),
         "figures.transient.recursion.mix",
         "must have as many values as figures.transient.k (18), not 17"),
        (lambda d: d["figures"]["schedule"]["start"].update(wrap=math.inf),
         "figures.schedule.start.wrap", "must be a finite number"),
        (lambda d: d["figures"]["schedule"].update(start={}), "figures.schedule.start",
         "must not be empty"),
        (lambda d: d["figures"]["schedule"].pop("duration"), "figures.schedule.duration",
         "is required"),
        (lambda d: d["model"]["transitions"][0].update(mean_duration="4"),
         "model.transitions[0].mean_duration", "must be a number"),
        (lambda d: d["model"]["transitions"][2].update(id="mix"), "model.transitions[2].id",
         "the id 'mix' is used twice"),
        (lambda d: d.update(versions=["0.1.0"]), "versions", "must be an object when present"),
    ],
)
def test_bad_documents_are_named(change: Any, item: str, rule: str) -> None:
    """Each broken rule raises ReportError whose text names the item and the rule."""
    document = fixed_document()
    change(document)
    with pytest.raises(ReportError) as caught:
        render_page(document)
    assert caught.value.item == item
    assert str(caught.value) == f"result document: {item}: {caught.value.rule}"
    assert rule in str(caught.value)


@pytest.mark.parametrize(
    ("change", "item", "rule"),
    [
        (lambda d: d["figures"]["running_estimate"]["low"].pop(),
         "figures.running_estimate.low",
         "must have as many values as figures.running_estimate.work (10), not 9"),
        (lambda d: d["figures"]["replication_estimates"]["simulation"].__setitem__(2, "x"),
         "figures.replication_estimates.simulation[2]", "must be a number"),
        (lambda d: d["analysis"]["bounds"].update(lower="9.75"), "analysis.bounds.lower",
         "must be a number"),
        (lambda d: d["analysis"]["criticality"].update(definition=5),
         "analysis.criticality.definition", "must be a text, not the number 5"),
    ],
)
def test_bad_random_documents_are_named(change: Any, item: str, rule: str) -> None:
    """The parts only a random document has are checked the same way."""
    document = random_document()
    change(document)
    with pytest.raises(ReportError) as caught:
        render_page(document)
    assert (caught.value.item, rule in caught.value.rule) == (item, True)


#: Numbers the page never reads: a wrong type there does not stop the page (the transient of
#: the mean durations is deliberately not shown as a random model's).
UNREAD = re.compile(r"model\.places\[\d+\]\.index$|analysis\.mean_value_transient_firings$")


def _numeric_leaves(value: Any, path: str = "") -> list[str]:
    """Key paths (in the notation of ReportError.item) of the numbers of a document; of a
    long list only the first and the last element."""
    if isinstance(value, dict):
        return [leaf for key, v in value.items()
                for leaf in _numeric_leaves(v, f"{path}.{key}" if path else key)]
    if isinstance(value, list):
        picked = sorted({0, len(value) - 1}) if len(value) > 3 else range(len(value))
        return [leaf for i in picked for leaf in _numeric_leaves(value[i], f"{path}[{i}]")]
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return [path]
    return []


def _replace(document: Any, path: str, new: Any) -> None:
    steps = re.findall(r"\[(\d+)\]|([^.\[\]]+)", path)
    node = document
    for index, key in steps[:-1]:
        node = node[int(index)] if index else node[key]
    index, key = steps[-1]
    node[int(index) if index else key] = new


@pytest.mark.parametrize("make", [fixed_document, random_document])
def test_a_text_for_any_number_is_named(make: Any) -> None:
    """Every number of both documents, replaced by a text, gives a ReportError naming
    exactly that key: the page never draws from a value of the wrong type."""
    paths = _numeric_leaves(make())
    assert len(paths) > 80
    for path in paths:
        if UNREAD.match(path):
            continue
        document = make()
        _replace(document, path, "fast")
        with pytest.raises(ReportError) as caught:
            render_page(document)
        assert caught.value.item == path, (path, str(caught.value))


_JSON = st.recursive(
    st.none() | st.booleans() | st.integers(-10**6, 10**6)
    | st.floats(allow_nan=True, allow_infinity=True) | st.text(max_size=5),
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=4), inner,
                                                                max_size=3),
    max_leaves=6)


def _all_paths(value: Any, path: str = "") -> list[str]:
    here = [path] if path else []
    if isinstance(value, dict):
        return here + [p for key, v in value.items()
                       for p in _all_paths(v, f"{path}.{key}" if path else key)]
    if isinstance(value, list):
        picked = sorted({0, len(value) - 1}) if len(value) > 3 else range(len(value))
        return here + [p for i in picked for p in _all_paths(value[i], f"{path}[{i}]")]
    return here


_PATHS = {"fixed": _all_paths(fixed_document()), "random": _all_paths(random_document())}


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.sampled_from(["fixed", "random"]), st.data(), _JSON)
def test_any_broken_value_gives_a_page_or_a_report_error(kind: str, data: Any, new: Any
                                                          ) -> None:
    """Whatever value replaces whatever part of a document, the page is drawn or a
    ReportError is raised, never another exception (the command line turns ReportError
    into exit 2)."""
    path = data.draw(st.sampled_from(_PATHS[kind]))
    document = fixed_document() if kind == "fixed" else random_document()
    _replace(document, path, new)
    try:
        page = render_page(document)
    except ReportError as error:
        assert error.item and error.rule
        assert str(error) == f"result document: {error.item}: {error.rule}"
    else:
        assert page.startswith("<!DOCTYPE html>")


def test_report_command_exits_2_on_a_check_without_its_analysis(tmp_path: Path) -> None:
    """`cyclecheck report` on a check result whose analysis is deleted writes no page and
    exits 2 with one line naming the file, the key and the rule (no traceback)."""
    saved = tmp_path / "result.json"
    document = fixed_document()
    del document["analysis"]
    saved.write_text(json.dumps(document), encoding="utf-8")
    page = tmp_path / "page.html"
    script = Path(sys.executable).with_name("cyclecheck")
    done = subprocess.run([str(script), "report", str(saved), "-o", str(page)],
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 2, done.stderr
    assert "analysis: is missing" in done.stderr
    assert "Traceback" not in done.stderr
    assert not page.exists()


def test_doctests_of_the_page_and_the_rules() -> None:
    """The examples in the docstrings of reports/markup.py and reports/schema.py hold."""
    import doctest

    from cyclecheck.reports import markup, schema

    for module in (markup, schema):
        result = doctest.testmod(module, optionflags=doctest.NORMALIZE_WHITESPACE)
        assert result.attempted > 0 and result.failed == 0, module.__name__


# --- number formatting ---------------------------------------------------------------------

@pytest.mark.parametrize(
    ("value", "digits", "expected"),
    [
        (13.5, 4, "13.5"), (1 / 13.5, 4, "0.07407"), (37 / 3, 6, "12.3333"),
        (12000, 4, "12,000"), (12000.0, 4, "12,000"), (-0.25, 4, "−0.25"), (0.0, 4, "0"),
        (2.5e-5, 4, "2.5×10⁻⁵"), (math.inf, 4, "∞"), (None, 4, "–"), (9999.4, 4, "9,999"),
    ],
)
def test_fmt(value: Any, digits: int, expected: str) -> None:
    """Numbers: significant digits, separators, true minus, small numbers with a power of 10."""
    assert fmt(value, digits) == expected


# --- layout --------------------------------------------------------------------------------

def _specs(graph: Any) -> tuple[list[str], list[layout.PlaceSpec]]:
    ids = [f"t{i}" for i in range(graph.n_transitions)]
    places = [layout.PlaceSpec(p, ids[int(graph.source[p])], ids[int(graph.target[p])],
                               int(graph.tokens[p])) for p in range(graph.n_places)]
    return ids, places


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(live_event_graphs(max_transitions=12, max_places=30))
def test_layout_properties(graph: Any) -> None:
    """Every transition gets its own spot and every place an arc; in the layered layout each
    token-free place points strictly to the right (token-free places form an acyclic graph in
    a live event graph: Baccelli et al., Synchronization and Linearity, 1992, §2.5)."""
    ids, places = _specs(graph)
    drawing = layout.layout_graph(ids, places)
    assert set(drawing.nodes) == set(ids)
    spots = {(round(x, 6), round(y, 6)) for x, y in drawing.nodes.values()}
    assert len(spots) == len(ids)
    assert sorted(a.place for a in drawing.arcs) == list(range(len(places)))
    assert not drawing.partial
    if drawing.kind == "layered":
        for p in places:
            if p.tokens == 0 and p.source != p.target:
                assert drawing.nodes[p.target][0] > drawing.nodes[p.source][0]
    for arc in drawing.arcs:
        assert all(math.isfinite(c) for point in arc.points for c in point)


def test_ring_is_drawn_as_a_circle() -> None:
    """A loop of stops (self-loops aside) is laid out on a circle, in circuit order."""
    ids = ["a", "b", "c", "d"]
    places = [layout.PlaceSpec(i, s, t, m) for i, (s, t, m) in enumerate(
        [("a", "b", 1), ("b", "c", 0), ("c", "d", 0), ("d", "a", 1), ("a", "a", 1)])]
    drawing = layout.layout_graph(ids, places, [ids])
    assert drawing.kind == "circle"
    angles = [math.atan2(y, x) for x, y in (drawing.nodes[t] for t in ids)]
    # clockwise from the top: each angle is smaller than the previous one, modulo a turn
    steps = [(angles[i] - angles[i + 1]) % (2 * math.pi) for i in range(3)]
    assert all(0 < s < math.pi for s in steps)


def test_critical_place_among_parallels_is_the_one_without_slack() -> None:
    """Between two critical transitions, the parallel place with the least slack is marked."""
    places = [layout.PlaceSpec(0, "a", "b", 0), layout.PlaceSpec(1, "a", "b", 1),
              layout.PlaceSpec(2, "b", "a", 1)]
    assert layout.choose_critical_places([["a", "b"]], places, [2.0, 0.0, 0.0]) == {1, 2}
    assert layout.choose_critical_places([["a", "b"]], places, None) == {0, 1, 2}


def _large_document(n: int) -> dict[str, Any]:
    """A closed line of n stations with one slow station (s17, duration 30): its self-loop
    is the critical circuit (30 / 1 token) as long as the loop is faster per token."""
    document = fixed_document()
    ids = [f"s{i}" for i in range(n)]
    places = []
    for i, t in enumerate(ids):
        places.append({"index": len(places), "from": t, "to": ids[(i + 1) % n],
                       "tokens": 2 if i == n - 1 else 0, "hold": "0", "mean_hold": 0.0})
    for t in ids:
        places.append({"index": len(places), "from": t, "to": t, "tokens": 1, "hold": "0",
                       "mean_hold": 0.0})
    model = document["model"]
    model.update(n_transitions=n, n_places=len(places), places=places, transitions=[
        {"id": t, "label": "", "duration": "30" if t == "s17" else "1",
         "mean_duration": 30.0 if t == "s17" else 1.0} for t in ids])
    analysis = document["analysis"]
    analysis.update(critical_circuits=[["s17"]], cycle_time=30.0, eigenvector=None,
                    cycle_time_by_transition=dict.fromkeys(ids, 30.0),
                    slack={"transitions": {t: (0.0 if t == "s17" else 29.0) for t in ids},
                           "places": [None] * n + [0.0 if t == "s17" else 29.0 for t in ids]},
                    utilization=None, charpoly={"skipped": "too large"}, sensitivity=None,
                    bottleneck=None, servers=None)
    document["simulation"]["utilization"] = None
    document["figures"].update(schedule=None, transient=None)
    return document


def test_large_graph_is_drawn_in_part_and_says_so() -> None:
    """Beyond 60 transitions only the critical circuit and its neighbours are drawn, and the
    tables are cut to 40 rows; the page says both."""
    page = render_page(_large_document(80))
    text = visible_text(page)
    assert "Part of the graph:" in text
    assert "77 transitions and 155 places are not shown" in text  # s16, s17, s18 drawn
    assert "Showing 40 of 80 transitions" in text and "and 40 more transitions" in text
    assert "Showing 40 of 160 places" in text and "and 120 more places" in text
    assert "◆ s17" in text


@settings(max_examples=8, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(live_event_graphs(max_transitions=7, max_places=14), st.booleans())
def test_any_live_graph_renders(graph: Any, random_kind: bool) -> None:
    """The page renders for any live event graph put into the fixed document's frame."""
    ids, places = _specs(graph)
    document = fixed_document()
    document["model"].update(
        is_random=random_kind, n_transitions=len(ids), n_places=len(places),
        transitions=[{"id": t, "duration": "1", "mean_duration": 1.0} for t in ids],
        places=[{"index": p.index, "from": p.source, "to": p.target, "tokens": p.tokens}
                for p in places])
    document["analysis"].update(critical_circuits=[], slack=None, eigenvector=None,
                                utilization=None, cycle_time_by_transition=None,
                                sensitivity=None, bottleneck=None, servers=None)
    document["simulation"]["utilization"] = None
    document["figures"].update(schedule=None, transient=None)
    page = render_page(document)
    assert parse(page).tags.count("svg") == 1
