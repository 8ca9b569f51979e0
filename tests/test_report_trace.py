"""The review page of a judged event log (`trace --report`): verdict first, the log's cycle
time beside the model's, the tables of durations and holds, the distribution figures of the
rejected elements, the violations, what was not judged.

The documents come from real judgements of logs of the project's SimPy engine on an invented
press line (tests/judge_models.py), one of them with the press 30 % slower than the model says;
the page is parsed with the standard library's :mod:`html.parser`.
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import pytest
from cyclecheck.reports import check_document, render_page
from cyclecheck.simulate import trace
from cyclecheck.simulate.engine import simulate_event_graph
from cyclecheck.simulate.files import kind_of
from cyclecheck.simulate.logcycle import model_cycle_time
from cyclecheck.simulate.modelfile import load_model

from tests.judge_models import CONVEYOR, PRESS_LINE

SCRIPT = Path(sys.executable).with_name("cyclecheck")
MODELS = Path(__file__).resolve().parents[1] / "models"


class _Text(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.parts: list[str] = []
        self.ids: list[str] = []
        self._skip = 0

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        self.ids += [v or "" for k, v in attrs if k == "id"]
        if tag in ("style", "svg"):
            self._skip += 1

    def handle_endtag(self, tag: str) -> None:
        if tag in ("style", "svg"):
            self._skip -= 1

    def handle_data(self, data: str) -> None:
        if not self._skip:
            self.parts.append(data)


def _read(page: str) -> tuple[str, list[str]]:
    parser = _Text()
    parser.feed(page)
    return re.sub(r"\s+", " ", " ".join(parser.parts)), parser.ids


def _model(folder: Path, press: float) -> Path:
    path = folder / f"press_{press}.toml"
    path.write_text(PRESS_LINE.format(press=press, conveyor=CONVEYOR), encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def judged(tmp_path_factory: pytest.TempPathFactory) -> dict[str, dict[str, object]]:
    folder = tmp_path_factory.mktemp("trace")
    model_path = _model(folder, 1.6)
    model = load_model(model_path)
    estimate = model_cycle_time(model, precision=0.005, seed=3)
    slow = load_model(_model(folder, 2.08))  # the press 30 % slower than the model says
    logs = {
        "consistent": simulate_event_graph(model.graph(), model.sampler(8),
                                           n_firings=3000).event_log(),
        "slow press": simulate_event_graph(slow.graph(), slow.sampler(4),
                                           n_firings=1500).event_log(),
    }
    logs["missing pack"] = logs["consistent"][logs["consistent"]["transition"] != "pack"]
    in_seconds = logs["consistent"].copy()
    in_seconds[["start", "time"]] *= 60  # a log in seconds of a model in minutes
    logs["in seconds"] = in_seconds
    docs = {name: trace(model_path, log, model_estimate=estimate, quiet=True)
            for name, log in logs.items()}
    docs["partial"] = trace(model_path, logs["missing pack"], model_estimate=estimate,
                            partial=True, quiet=True)
    return docs


@pytest.mark.parametrize("name", ["consistent", "slow press", "missing pack", "partial",
                                  "in seconds"])
def test_every_judgement_passes_the_checker_and_renders(judged: dict[str, dict[str, object]],
                                                        name: str) -> None:
    """Each judgement is a result document that renders, the same bytes every time."""
    doc = json.loads(json.dumps(judged[name]))
    check_document(doc)
    assert render_page(doc) == render_page(doc)


def test_consistent_log_page(judged: dict[str, dict[str, object]]) -> None:
    """A consistent log: the verdict, the cycle-time comparison, the durations table."""
    text, ids = _read(render_page(judged["consistent"]))
    assert "Consistent" in text and "Inconsistent" not in text
    for section in ("verdict", "cycle-time", "transitions", "violations"):
        assert section in ids
    firings = judged["consistent"]["firings_checked"]
    assert f"All {firings:,} judged firings obey" in text
    assert "Would detect" in text


def test_slower_press_page_names_it(judged: dict[str, dict[str, object]]) -> None:
    """The press drawn 30 % slower: the verdict names it with its test, the durations table
    marks its rejected tests, and its distribution is drawn against the model's law."""
    doc = judged["slow press"]
    assert doc["verdict"] == "disagrees"
    page = render_page(doc)
    text, ids = _read(page)
    assert "Inconsistent" in text
    assert re.search(r'transition "press": the duration mean test .* rejects the model', text)
    assert "✗" in text and "distributions" in ids
    first = doc["figures"]["distributions"][0]  # type: ignore[index]
    assert first["id"] == "press"
    assert "press: the log against the model's law" in text
    assert page.count('<svg class="figure"') >= 1


def test_missing_transition_and_partial(judged: dict[str, dict[str, object]]) -> None:
    """A transition with no row: a disagreement named on the page; with --partial it is
    listed as not judged."""
    text, _ = _read(render_page(judged["missing pack"]))
    assert "Inconsistent" in text and "pack" in text
    text, ids = _read(render_page(judged["partial"]))
    assert "not-judged" in ids and "listed as not judged (--partial)" in text


def test_notes_stand_next_to_the_verdict(judged: dict[str, dict[str, object]]) -> None:
    """The judge's notes (here: the --time-scale to try) have a section of their own after the
    verdict, not among what was not judged."""
    page = render_page(judged["in seconds"])
    text, ids = _read(page)
    assert "Inconsistent" in text and "notes" in ids
    assert ids.index("notes") < ids.index("log")
    assert "judge it again with --time-scale 0.01666666667" in text
    if "not-judged" in ids:
        start = page.index('id="not-judged"')
        assert "--time-scale" not in page[start:]


def test_trace_report_from_the_command_line(tmp_path: Path) -> None:
    """`trace --report` writes the page (a page by its content) and exits as the verdict."""
    log = tmp_path / "cell.csv"
    done = subprocess.run([str(SCRIPT), "simulate", str(MODELS / "packaging_cell.toml"),
                           "--firings", "60", "--trace", str(log), "--quiet"],
                          capture_output=True, text=True, timeout=300, check=False)
    assert done.returncode == 0, done.stderr
    page = tmp_path / "cell.html"
    done = subprocess.run([str(SCRIPT), "trace", str(MODELS / "packaging_cell.toml"),
                           str(log), "--report", str(page)],
                          capture_output=True, text=True, timeout=300, check=False)
    assert done.returncode == 0, done.stdout + done.stderr
    assert kind_of(page) == "page"
    text, _ = _read(page.read_text(encoding="utf-8"))
    assert "Consistent" in text and "the model's equations" in text
