"""The Python front door: the same commands, options, messages and documents as the CLI.

``from cyclecheck.simulate import load_model, analyze, simulate, check, trace`` takes a path or
a loaded model and the command line's options; every document it returns passes the one
checker of result documents and renders as a page. Also: the one error root, the cases of
input that once crashed, the doctests of the front door and the README's Python examples.
"""

from __future__ import annotations

import doctest
import json
import re
import subprocess
import sys
from pathlib import Path

import pytest
from cyclecheck.algebra.exceptions import CycleCheckError, MaxPlusError
from cyclecheck.reports import ReportError, check_document, render_page
from cyclecheck.simulate import (
    ModelError,
    RunSettings,
    analyze,
    check,
    load_model,
    simulate,
    trace,
)
from cyclecheck.simulate.errors import ArgumentError

ROOT = Path(__file__).resolve().parents[1]
MODELS = ROOT / "models"
SCRIPT = Path(sys.executable).with_name("cyclecheck")
FIXED = MODELS / "packaging_cell.toml"
RANDOM = MODELS / "closed_line_exponential.toml"
QUICK = {"precision": 0.05, "firings": 500, "replications": 4, "workers": 1}


def cli(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([str(SCRIPT), *args], capture_output=True, text=True, timeout=300,
                          check=False)


# --- paths or models, options as on the command line ---------------------------------------


@pytest.mark.parametrize("given", [str(FIXED), FIXED, "loaded"])
def test_a_path_or_a_loaded_model(given: object) -> None:
    """A str, a PathLike and a Model give the same answer."""
    model = load_model(FIXED) if given == "loaded" else given
    doc = analyze(model)  # type: ignore[arg-type]
    assert doc["cycle_time"] == 17.375  # worked by hand in the model file


def test_something_else_is_an_argument_error() -> None:
    """A number where a model belongs: an ArgumentError (a CycleCheckError), not a crash."""
    with pytest.raises(ArgumentError, match="model must be a path"):
        analyze(17)  # type: ignore[arg-type]


def test_bad_option_fails_as_on_the_command_line() -> None:
    """precision=1.5 gives the message of --precision 1.5, word for word."""
    with pytest.raises(ModelError) as caught:
        analyze(RANDOM, precision=1.5)
    assert str(caught.value) == ("--precision: must lie strictly between 0 and 1 (a relative "
                                 "half-width such as 0.01), got 1.5")
    done = cli("analyze", str(RANDOM), "--precision", "1.5")
    assert done.returncode == 2
    assert done.stderr.strip() == f"cyclecheck: {caught.value}"


@pytest.mark.parametrize(("options", "item"), [
    ({"seed": -1}, "--seed"), ({"replications": 1}, "--replications"),
    ({"firings": 3}, "--firings"), ({"workers": 0}, "--workers"),
    ({"precision": "0.1"}, "--precision"), ({"scheduler": ""}, "--scheduler"),
])
def test_every_option_is_checked_once(options: dict[str, object], item: str) -> None:
    """Each run option is checked by RunSettings and the error names it."""
    with pytest.raises(ModelError) as caught:
        RunSettings.resolve(**options)  # type: ignore[arg-type]
    assert caught.value.item == item


def test_seed_none_is_a_fresh_seed_that_is_recorded() -> None:
    """seed=None draws a fresh seed and records it; both engines use it, so the sample paths
    are identical (it once reported a false "sample paths differ" and recorded null), and the
    recorded seed repeats the run. (The verdict itself is not asserted: with a fresh seed the
    two intervals fail to overlap now and then, as 95 % intervals do.)"""
    doc = check(RANDOM, seed=None, **QUICK)
    seed = doc["settings"]["seed"]
    assert isinstance(seed, int) and seed >= 0
    assert doc["comparison"]["sample_path"]["identical"] is True
    again = check(RANDOM, seed=seed, **QUICK)
    assert again["analysis"]["cycle_time"] == doc["analysis"]["cycle_time"]
    assert again["simulation"]["per_replication"] == doc["simulation"]["per_replication"]


def test_workers_default_to_all_cores_with_the_same_numbers() -> None:
    """workers=None uses every core; the numbers do not depend on the worker count."""
    many = analyze(RANDOM, seed=4, precision=0.05, firings=500, replications=4)
    one = analyze(RANDOM, seed=4, precision=0.05, firings=500, replications=4, workers=1)
    assert many["settings"]["workers"] >= 1
    assert many["cycle_time"] == one["cycle_time"]
    assert many["per_replication"] == one["per_replication"]


# --- one checker, every document renders ---------------------------------------------------


@pytest.fixture(scope="module")
def documents(tmp_path_factory: pytest.TempPathFactory) -> dict[str, dict[str, object]]:
    folder = tmp_path_factory.mktemp("logs")
    log = folder / "log.csv"
    simulate(FIXED, firings=60, trace=log)
    return {
        "analyze fixed": analyze(FIXED),
        "analyze random": analyze(RANDOM, **QUICK),
        "simulate fixed": simulate(FIXED, firings=200),
        "simulate random": simulate(RANDOM, **QUICK),
        "check fixed": check(FIXED),
        "check random": check(RANDOM, **QUICK),
        "trace": trace(FIXED, log),
    }


@pytest.mark.parametrize("name", ["analyze fixed", "analyze random", "simulate fixed",
                                  "simulate random", "check fixed", "check random", "trace"])
def test_every_document_passes_the_one_checker(documents: dict[str, dict[str, object]],
                                               name: str) -> None:
    """Every command's document is a versioned result document the checker accepts, and
    survives JSON."""
    doc = json.loads(json.dumps(documents[name]))
    check_document(doc)
    assert doc["document"] == "cyclecheck-result" and doc["schema_version"] == 1
    assert doc["command"] == name.split()[0]


@pytest.mark.parametrize("name", ["analyze fixed", "analyze random", "simulate fixed",
                                  "simulate random", "check fixed", "check random"])
def test_every_run_document_renders_as_a_page(documents: dict[str, dict[str, object]],
                                              name: str) -> None:
    """An analysis alone gives an analysis page (it once failed with 'analysis: is missing')."""
    page = render_page(documents[name])
    assert page.startswith("<!DOCTYPE html>")
    assert "is missing" not in page


def test_analyze_report_writes_an_exact_page(tmp_path: Path) -> None:
    """`analyze --report` writes the exact analysis page a design review wants."""
    page = tmp_path / "cell.html"
    done = cli("analyze", str(FIXED), "--report", str(page))
    assert done.returncode == 0, done.stderr
    text = page.read_text(encoding="utf-8")
    assert "17.375" in text and "fill → cap → label → pack" in text


# --- one error root ------------------------------------------------------------------------


def test_one_error_root() -> None:
    """Model, usage, algebra and report errors all descend from CycleCheckError."""
    for kind in (ModelError, ArgumentError, MaxPlusError, ReportError):
        assert issubclass(kind, CycleCheckError)


# --- inputs that once crashed --------------------------------------------------------------


def _model(folder: Path, body: str) -> Path:
    path = folder / "m.toml"
    path.write_text('[model]\nname = "edge"\n' + body, encoding="utf-8")
    return path


LOOP = """
[[transitions]]
id = "a"
duration = {a}
[[transitions]]
id = "b"
duration = {b}
[[places]]
from = "a"
to = "b"
[[places]]
from = "b"
to = "a"
tokens = {tokens}
"""


@pytest.mark.parametrize(("durations", "item"), [
    ((1e308, 1e308), 'transition "a"'),   # once an OverflowError in spectral._extract_circuit
    ((1.5e308, 1.0), 'transition "a"'),   # once an AssertionError in charpoly._line_at
    ((1.0, 1e101), 'transition "b"'),
])
def test_numbers_near_the_float_limit_are_refused(tmp_path: Path,
                                                  durations: tuple[float, float],
                                                  item: str) -> None:
    """Durations above 1e100 are refused with the item named, exit 2, no traceback."""
    path = _model(tmp_path, LOOP.format(a=durations[0], b=durations[1], tokens=1))
    done = cli("analyze", str(path))
    assert done.returncode == 2, done.stdout
    assert f"{path}: {item}: duration: must be at most 1e100" in done.stderr
    assert "Traceback" not in done.stderr


def test_a_self_loop_at_the_float_limit_names_the_place(tmp_path: Path) -> None:
    """A self-loop with duration and hold 1e308: the message names the file and the item (it
    once named neither, among numpy warnings)."""
    body = ('[[transitions]]\nid = "a"\nduration = 1.0\n'
            '[[places]]\nfrom = "a"\nto = "a"\ntokens = 1\nhold = 1e308\n')
    done = cli("check", str(_model(tmp_path, body)))
    assert done.returncode == 2
    assert re.search(r"m\.toml: place 1 \(a -> a, index 0\): hold: must be at most 1e100",
                     done.stderr), done.stderr
    assert "Warning" not in done.stderr and "Traceback" not in done.stderr


def test_largest_accepted_values_compute(tmp_path: Path) -> None:
    """At the limit itself (1e100) the analysis is exact: the loop's cycle time is the sum."""
    path = _model(tmp_path, LOOP.format(a=1e100, b=1e100, tokens=1))
    doc = analyze(path)
    assert doc["cycle_time"] == pytest.approx(2e100, rel=1e-12)


def test_a_trillion_tokens_are_analysed(tmp_path: Path) -> None:
    """A place with 10^12 tokens: the analysis gives its cycle time (it once advised fewer
    firings); the simulation runs and says that its runs see only a transient."""
    path = _model(tmp_path, LOOP.format(a=2.0, b=3.0, tokens=10**12) +
                  '[[places]]\nfrom = "a"\nto = "a"\ntokens = 1\n'
                  '[[places]]\nfrom = "b"\nto = "b"\ntokens = 1\n')
    doc = analyze(path)
    assert doc["cycle_time"] == 3.0  # the self-loop of b: max(2, 3, 5 / 10^12)
    sim = simulate(path, firings=100, replications=2)
    assert "10^12" in sim["notes"][0].replace("1,000,000,000,000", "10^12")
    assert check(path)["comparison"]["verdict"] == "agrees"


# --- documentation that runs ---------------------------------------------------------------


@pytest.mark.parametrize("module", ["cyclecheck.simulate.api", "cyclecheck.simulate.settings",
                                    "cyclecheck.simulate.errors"])
def test_doctests_of_the_front_door(module: str, monkeypatch: pytest.MonkeyPatch) -> None:
    """The examples in the docstrings of the front door hold (run from the checkout)."""
    import importlib

    monkeypatch.chdir(ROOT)
    result = doctest.testmod(importlib.import_module(module),
                             optionflags=doctest.NORMALIZE_WHITESPACE | doctest.ELLIPSIS)
    assert result.attempted > 0 and result.failed == 0


def _readme_python_blocks() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    return re.findall(r"```python\n(.*?)```", text, flags=re.S)


def test_readme_has_python_examples() -> None:
    """The README shows Python use of the front door (the blocks below are run)."""
    assert len(_readme_python_blocks()) >= 1


@pytest.mark.parametrize("index", range(len(_readme_python_blocks())))
def test_readme_python_examples_run(index: int, tmp_path: Path) -> None:
    """Each ```python block of the README runs as written in a fresh interpreter, in a scratch
    folder holding a copy of models/ (so the pages it writes land there)."""
    import shutil

    shutil.copytree(MODELS, tmp_path / "models")
    code = _readme_python_blocks()[index]
    done = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, capture_output=True,
                          text=True, timeout=600, check=False)
    assert done.returncode == 0, done.stdout + done.stderr
