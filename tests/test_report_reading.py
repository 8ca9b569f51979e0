"""Honest pages: what is exact, what is estimated and what belongs to the mean durations, each
said where it is shown; pages of fixed models that never speak of random draws; axes that
start where their data start; cut lists that say how much they leave out; rates per hour.
"""

from __future__ import annotations

import functools
import re
from typing import Any

import pytest
from cyclecheck.reports import render_page

from tests.report_documents import (
    fixed_document,
    line_document,
    press_document,
    random_document,
    unstable_document,
)
from tests.test_report_page import section_text, table_rows, visible_text

#: Words that speak of randomness or estimation: none may appear on a fixed model's page.
RANDOM_WORDS = re.compile(r"\brandom|\bdraws?\b|estimat|confidence|95 %|Lyapunov|"
                          r"mean duration|\bbounds?\b", re.I)


@functools.cache
def page_of(make: Any) -> str:
    """The page of an unchanged sample document, rendered once per module."""
    return render_page(make())


@pytest.mark.parametrize("make", [fixed_document, unstable_document,
                                  lambda: line_document(30)])
def test_fixed_pages_never_speak_of_random_draws(make: Any) -> None:
    """Every sentence of a fixed model's page (captions, cautions, semantics, sample path,
    reproducibility) is written for fixed durations."""
    text = visible_text(page_of(make))
    found = sorted({m.group(0).lower() for m in RANDOM_WORDS.finditer(text)})
    assert found == [], [text[max(0, m.start() - 60):m.end() + 30]
                         for m in RANDOM_WORDS.finditer(text)][:5]


def _order(page: str) -> list[str]:
    main = page[page.index("<main>"):page.index("</main>")]
    return re.findall(r'<section id="([\w-]+)"', main)


def test_random_page_puts_the_mean_durations_below_the_answers() -> None:
    """The answers (verdict with the bottleneck, estimates, where to act, the graph, the
    variability) come first; what belongs to the mean durations after them, labelled so; the
    algebra of the mean durations is the last, an appendix."""
    page = page_of(random_document)
    order = _order(page)
    assert order[:4] == ["verdict", "numbers", "act", "graph"]
    assert order.index("variability") < order.index("mean-durations")
    assert order.index("sample-path") < order.index("mean-durations") < order.index("cautions")
    assert order[-1] == "algebra"
    assert "Appendix: the algebra of the mean durations" in section_text(page, "algebra")
    assert "verify the exact analysis of the mean durations" in section_text(page, "algebra")
    numbers = section_text(page, "numbers")
    assert "Critical circuit" not in numbers and "Bounds" not in numbers
    assert "estimate; 95 % interval 10.41 – 10.83 min" in numbers
    mean = section_text(page, "mean-durations")
    assert "Of the mean durations: a lower bound, not the answer" in mean
    assert "Critical circuit of the mean durations: dock → gate → yard → depot → dock" in mean
    assert table_rows(page, "Transitions")[0][-2] == "Slack (mean durations)"
    assert "Transitions (◆ on a critical circuit of the mean durations; times in min)" in page
    assert "The critical circuit of the mean durations is drawn thick" in \
        section_text(page, "graph")


def test_fixed_page_order_and_appendix() -> None:
    page = page_of(fixed_document)
    order = _order(page)
    assert order[:4] == ["verdict", "numbers", "act", "graph"]
    assert order[-2:] == ["cautions", "algebra"]
    assert "Appendix: how the exact result was verified" in section_text(page, "algebra")
    assert "mean-durations" not in order
    numbers = section_text(page, "numbers")
    assert "exact: the max-plus eigenvalue" in numbers
    assert "the max-plus numbers are exact (no statistical error)" in numbers


def test_firings_card_counts_both_sides() -> None:
    """The max-plus side of a fixed model computed no firing: exact, no simulation; the
    card counts the SimPy side's firings beside it; a random model counts both."""
    fixed = section_text(page_of(fixed_document), "numbers")
    assert "Firings computed max-plus: exact, no simulation SimPy: 12,000" in fixed
    random = section_text(page_of(random_document), "numbers")
    assert "Firings computed max-plus: 80,000 SimPy: 40,000 all replications together" in random


def test_throughput_is_also_given_per_hour() -> None:
    """1 / 13.5 per min = 4.444 per hour; 1 / 12.9 per s = 279.1 per hour (by hand)."""
    assert "4.444 per hour" in section_text(page_of(fixed_document), "numbers")
    assert "279.1 per hour" in section_text(page_of(press_document), "numbers")
    document = fixed_document()
    document["model"]["time_unit"] = "cycles"
    assert "per hour" not in section_text(render_page(document), "numbers")


def _figure(page: str, name: str) -> str:
    """The drawing of a figure (its SVG, without title and caption)."""
    start = page.index(f'<figure id="figure-{name}">')
    return page[page.index("<svg", start):page.index("</svg>", start)]


def _ticks(svg: str) -> list[float]:
    """Numbers written on the axes of a figure (matplotlib's tick labels)."""
    values = []
    for text in re.findall(r"<text[^>]*>([^<]*)</text>", svg):
        text = text.replace("−", "-").replace(",", "").strip()
        if re.fullmatch(r"-?\d+(\.\d+)?", text):
            values.append(float(text))
    return values


def test_running_estimate_axis_starts_where_its_data_start() -> None:
    """The shuttle's running interval spans 10.29 – 11.53 min; the lower bound 9.75 and the
    upper bound 12.64 lie outside: no tick reaches down to the bound, and the caption says
    why the bounds are not drawn. A bound inside the data's range is drawn and labelled."""
    page = page_of(random_document)
    svg = _figure(page, "running")
    assert min(t for t in _ticks(svg) if t < 100) > 10.0
    assert "lower bound" not in svg
    caption = section_text(page, "variability")
    assert ("The lower bound 9.75 min and the upper bound 12.64 min lie outside the range of "
            "the data and are not drawn") in caption
    document = random_document()
    document["analysis"]["bounds"]["lower"] = 10.5
    page = render_page(document)
    assert "lower bound" in _figure(page, "running")
    assert "The upper bound 12.64 min lies outside" in section_text(page, "variability")


def test_random_transient_is_a_band_and_fixed_keeps_its_curves() -> None:
    """A random model's x(k) − kλ is one band with its median (no line per transition); a
    fixed model keeps one exact curve per transition, named in the legend."""
    random_svg = _figure(page_of(random_document), "transient")
    texts = re.findall(r"<text[^>]*>([^<]*)</text>", random_svg)
    assert "all transitions (smallest to largest)" in texts
    assert not {"dock", "gate", "yard", "depot"} & set(texts)
    fixed_svg = _figure(page_of(fixed_document), "transient")
    texts = re.findall(r"<text[^>]*>([^<]*)</text>", fixed_svg)
    assert {"mix", "proof", "bake", "wrap"} <= set(texts)


def test_cut_lists_say_how_many_were_left_out() -> None:
    """Transient curves beyond 8, Gantt rows beyond 30, χ terms beyond 16, more critical
    circuits than the card shows: each says "and N more"."""
    document = line_document(40)
    document["critical_circuits"] = [["s17"], ["s18"], ["s19"]]
    names = [t["id"] for t in document["model"]["transitions"]]
    document["figures"] = {
        "transient": {"k": [1, 2, 3], "recursion": {t: [0.0, 0.5, 0.0] for t in names[:11]}},
        "schedule": {"cycle_time": 3.0, "start": {t: float(i) for i, t in enumerate(names)},
                     "duration": dict.fromkeys(names, 1.0)}}
    document["charpoly"] = {"terms": [[k, float(k)] for k in range(20)]}
    page = render_page(document)
    assert "and 3 more transitions not drawn" in section_text(page, "transient")
    assert "and 10 more transitions in the table" in section_text(page, "schedule")
    assert "(and 4 more terms)" in section_text(page, "algebra")
    assert "the circuit that sets λ; and 2 more critical circuits" in \
        section_text(page, "numbers")


@pytest.mark.parametrize("make", [fixed_document, random_document, press_document,
                                  unstable_document])
def test_no_python_object_leaks_into_a_page(make: Any) -> None:
    """Every value on the page is formatted: no repr of a function or an object."""
    page = page_of(make)
    assert " at 0x" not in page and "<function" not in page and "None" not in visible_text(page)
