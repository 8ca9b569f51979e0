"""Review pages from real `check` runs, in a real browser.

The renderer's own tests use hand-written documents; these use what `cyclecheck check` actually
produced for a fixed-duration and a random-duration model, one of them named with markup
(``<b>x</b> & "y"``), and open the pages in headless Chromium through the same DevTools driver
as tests/test_report_browser.py. Checked: every section the review needs is there, every figure
has a size, no network request, the key numbers are visible text, model text is escaped, and the
page re-renders byte for byte from the saved JSON.
"""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

import pytest
from cyclecheck.reports.page import fmt, render_page
from cyclecheck.simulate import check, load_document, save_document
from cyclecheck.simulate.modelfile import load_model

from tests.test_report_browser import (
    CHROMIUM,
    MEASURE,
    _Browser,
    _require,
    _Server,
    open_page,
    requests_of,
)

MODELS = Path(__file__).resolve().parents[1] / "models"
NASTY = '<b>x</b> & "y"'
COMMON_SECTIONS = ["numbers", "graph", "elements", "schedule", "transient", "sample-path",
                   "semantics", "reproducibility", "cautions"]


def _random_model_with_markup_name(folder: Path) -> Path:
    text = (MODELS / "closed_line_exponential.toml").read_text(encoding="utf-8")
    text = text.replace('name = "Closed inspection loop, exponential stations"',
                        f"name = {json.dumps(NASTY)}")
    text = text.replace('id = "s1"', 'id = "s1"\nlabel = "<script>alert(1)</script>"')
    path = folder / "nasty.toml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def documents(tmp_path_factory: pytest.TempPathFactory) -> dict[str, dict[str, Any]]:
    folder = tmp_path_factory.mktemp("e2e")
    fixed = check(load_model(MODELS / "packaging_cell.toml"))
    random = check(load_model(_random_model_with_markup_name(folder)), precision=0.02,
                         firings=2000)
    return {"fixed": fixed, "random": random}


@pytest.mark.parametrize("name", ["fixed", "random"])
def test_page_has_every_section_and_escapes_model_text(documents: dict[str, Any],
                                                       name: str) -> None:
    """The sections of a review are all there; names and labels never become markup."""
    page = render_page(documents[name])
    for section in COMMON_SECTIONS + (["variability"] if name == "random" else ["algebra"]):
        assert f'id="{section}"' in page, section
    assert "<script" not in page
    if name == "random":
        assert "&lt;b&gt;x&lt;/b&gt; &amp; &quot;y&quot;" in page
        assert "<b>x</b>" not in page


@pytest.mark.parametrize("name", ["fixed", "random"])
def test_page_rerenders_identically_from_saved_json(documents: dict[str, Any], name: str,
                                                    tmp_path: Path) -> None:
    """Save the document, read it back, render: the same bytes."""
    saved = tmp_path / "result.json"
    save_document(documents[name], saved)
    assert render_page(load_document(saved)) == render_page(documents[name])


@pytest.mark.browser
@pytest.mark.parametrize("name", ["fixed", "random"])
def test_real_page_in_browser(documents: dict[str, Any], name: str, tmp_path: Path) -> None:
    """Chromium renders the page from a real run: figures sized, numbers visible, no request."""
    _require(CHROMIUM, "chromium")
    doc = documents[name]
    page = render_page(doc)
    server = _Server()
    try:
        server.pages["/page.html"] = page.encode("utf-8")
        browser = _Browser(tmp_path / "profile")
        try:
            session = open_page(browser, server.url("/page.html"))
            measured = json.loads(browser.call("Runtime.evaluate", session, expression=MEASURE,
                                               returnByValue=True)["result"]["value"])
            requests = requests_of(browser, session)
        finally:
            browser.close()
    finally:
        server.close()
    assert requests == [server.url("/page.html")]
    # fixed: graph, schedule, transient; random: graph, transient, running estimate, replications
    assert len(measured["figures"]) >= (4 if name == "random" else 3)
    for figure in measured["figures"]:
        assert figure["width"] > 200 and figure["height"] > 80, figure
    text = re.sub(r"[\s\u00a0\u202f]+", " ", measured["text"])
    assert "Agrees" in text
    analysis = doc["analysis"]
    digits = 6 if analysis.get("exact") else 4
    assert fmt(analysis["cycle_time"], digits) in text
    if name == "random":
        assert NASTY in text  # shown as the literal text the user wrote
        lo, hi = analysis["cycle_time_ci"]
        assert fmt(lo) in text and fmt(hi) in text
