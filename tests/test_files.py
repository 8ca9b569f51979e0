"""Output safety and input reading (simulate/files.py), through the front door's writers.

The rules under test: an existing file is replaced only by an output of the same kind written
by cyclecheck, or with ``force``; the kind is read from the file, not from its name; a new
file named for another kind is refused; every write is atomic (a failure leaves the old file
and no temporary file); the outputs of one command appear together or not at all.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from cyclecheck.reports import render_page
from cyclecheck.simulate import ModelError, check, save_document, save_page, simulate
from cyclecheck.simulate.files import (
    LOG_HEADER,
    Output,
    check_output,
    kind_of,
    load_document,
    read_input,
    write_outputs,
)

from tests.report_documents import fixed_document, random_document

MODELS = Path(__file__).resolve().parents[1] / "models"


def _leftovers(folder: Path, keep: set[str]) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name not in keep)


# --- kinds ---------------------------------------------------------------------------------


def test_kind_is_read_from_the_content(tmp_path: Path) -> None:
    """Each kind is recognised by its first bytes whatever the file is called; other files are
    of no kind."""
    page = tmp_path / "page.json"
    page.write_text(render_page(fixed_document()), encoding="utf-8")
    result = tmp_path / "result.html"
    result.write_text(json.dumps(fixed_document(), indent=2), encoding="utf-8")
    log = tmp_path / "log.txt"
    log.write_text(LOG_HEADER + "\nfill,1,0,12\n", encoding="utf-8")
    other_html = tmp_path / "other.html"
    other_html.write_text("<!DOCTYPE html>\n<html><body>cyclecheck-report</body></html>\n")
    other_json = tmp_path / "other.json"
    other_json.write_text('{"document": "something else"}')
    assert kind_of(page) == "page"
    assert kind_of(result) == "result"
    assert kind_of(log) == "log"
    assert kind_of(other_html) is None
    assert kind_of(other_json) is None
    assert kind_of(tmp_path / "missing.html") is None


# --- writing a page ------------------------------------------------------------------------


def test_write_new_and_replace_report(tmp_path: Path) -> None:
    """A new page is written; a previous page is replaced without `force`."""
    target = tmp_path / "review.html"
    assert save_page(fixed_document(), target) == target
    assert target.read_text(encoding="utf-8") == render_page(fixed_document())
    save_page(random_document(), target)
    assert target.read_text(encoding="utf-8") == render_page(random_document())
    assert _leftovers(tmp_path, {"review.html"}) == []


def test_refuses_to_overwrite_a_foreign_file(tmp_path: Path) -> None:
    """An existing file that is no cyclecheck output is kept; the error names the path, the
    option and the way out."""
    target = tmp_path / "notes.html"
    target.write_text("my own notes\n")
    with pytest.raises(ModelError) as caught:
        save_page(fixed_document(), target)
    message = str(caught.value)
    assert message.startswith(str(target)) and "--report" in message
    assert "not a cyclecheck output" in message and "--force" in message
    assert target.read_text() == "my own notes\n"
    save_page(fixed_document(), target, force=True)
    assert kind_of(target) == "page"
    assert _leftovers(tmp_path, {"notes.html"}) == []


def test_refuses_to_replace_an_output_of_another_kind(tmp_path: Path) -> None:
    """A saved result document is not replaced by a page, even under a page's name."""
    target = tmp_path / "result.html"
    save_document(fixed_document(), tmp_path / "r.json")
    (tmp_path / "r.json").rename(target)
    with pytest.raises(ModelError, match="exists and is a cyclecheck result document"):
        save_page(fixed_document(), target)
    assert kind_of(target) == "result"


def test_refuses_a_new_file_named_for_another_kind(tmp_path: Path) -> None:
    """A page to be written as x.json (options swapped) is refused before anything is
    written."""
    with pytest.raises(ModelError, match=r"the name says a cyclecheck result document \(\.json\)"):
        save_page(fixed_document(), tmp_path / "x.json")
    assert _leftovers(tmp_path, set()) == []
    save_page(fixed_document(), tmp_path / "x.json", force=True)
    assert kind_of(tmp_path / "x.json") == "page"


def test_refuses_a_folder_and_a_missing_folder(tmp_path: Path) -> None:
    """A folder as the output, or an output in a folder that does not exist: errors naming
    them."""
    with pytest.raises(ModelError, match="is a folder"):
        save_page(fixed_document(), tmp_path)
    with pytest.raises(ModelError, match=r"the folder .* does not exist"):
        save_page(fixed_document(), tmp_path / "no" / "page.html")


def test_failed_write_keeps_the_old_page(tmp_path: Path, monkeypatch: pytest.MonkeyPatch
                                         ) -> None:
    """A failure while writing leaves the old file as it was and no temporary file."""
    target = tmp_path / "review.html"
    save_page(fixed_document(), target)
    old = target.read_bytes()

    def broken_fsync(fd: int) -> None:
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "fsync", broken_fsync)
    with pytest.raises(ModelError, match="No space left"):
        save_page(random_document(), target)
    assert target.read_bytes() == old
    assert _leftovers(tmp_path, {"review.html"}) == []


def test_failed_rendering_keeps_the_old_page(tmp_path: Path) -> None:
    """A document that cannot be rendered raises before anything is written."""
    from cyclecheck.reports import ReportError

    target = tmp_path / "review.html"
    save_page(fixed_document(), target)
    old = target.read_bytes()
    broken = fixed_document()
    broken["figures"]["schedule"]["start"] = "not a mapping"
    with pytest.raises(ReportError):
        save_page(broken, target)
    assert target.read_bytes() == old
    assert _leftovers(tmp_path, {"review.html"}) == []


def test_outputs_of_one_command_appear_together(tmp_path: Path,
                                                monkeypatch: pytest.MonkeyPatch) -> None:
    """When the second of two outputs cannot be written, neither is."""
    real = os.replace
    calls: list[str] = []

    def second_fails(src: str, dst: str) -> None:
        calls.append(dst)
        if len(calls) == 2:
            raise OSError(13, "Permission denied")
        real(src, dst)

    first, second, third = tmp_path / "a.json", tmp_path / "b.html", tmp_path / "c.json"
    save_document(fixed_document(), third)
    old = third.read_bytes()
    outputs = [Output(third, "result", '{"document": "cyclecheck-result"}', "--save"),
               Output(second, "page", "<p>", "--report"),
               Output(first, "result", "{}", "--save")]
    monkeypatch.setattr(os, "replace", second_fails)
    with pytest.raises(ModelError, match="Permission denied; no output of this run"):
        write_outputs(outputs, force=True)
    # the first rename was rolled back: the old document is back, nothing else is left
    assert third.read_bytes() == old
    assert _leftovers(tmp_path, {"c.json"}) == []


def test_same_path_for_two_outputs(tmp_path: Path) -> None:
    """--report and --save naming one file: refused before any work."""
    path = tmp_path / "x.html"
    with pytest.raises(ModelError, match="both --report and --save"):
        check(MODELS / "packaging_cell.toml", report=path, save=path, force=True)
    assert not path.exists()


# --- the front door writes as the command line does ----------------------------------------


def test_simulate_trace_does_not_replace_a_result(tmp_path: Path) -> None:
    """`simulate(trace=...)` onto a saved result document is refused, before the run."""
    saved = tmp_path / "result.json"
    save_document(fixed_document(), saved)
    before = saved.read_bytes()
    with pytest.raises(ModelError, match=r"--trace: exists and is a cyclecheck result"):
        simulate(MODELS / "packaging_cell.toml", trace=saved, firings=50)
    assert saved.read_bytes() == before


def test_simulate_trace_does_not_replace_a_users_csv(tmp_path: Path) -> None:
    """A user's own CSV is not overwritten by the front door either."""
    mine = tmp_path / "mine.csv"
    mine.write_text("a,b\n1,2\n")
    with pytest.raises(ModelError, match="not a cyclecheck output"):
        simulate(MODELS / "packaging_cell.toml", trace=str(mine), firings=50)
    assert mine.read_text() == "a,b\n1,2\n"
    doc = simulate(MODELS / "packaging_cell.toml", trace=tmp_path / "log.csv", firings=50)
    assert doc["trace"] == str(tmp_path / "log.csv")
    assert kind_of(tmp_path / "log.csv") == "log"


def test_check_writes_page_and_result_given_as_strings(tmp_path: Path) -> None:
    """Paths may be strings; both outputs are written and are of their kinds."""
    page, result = str(tmp_path / "p.html"), str(tmp_path / "r.json")
    doc = check(MODELS / "packaging_cell.toml", report=page, save=result)
    assert kind_of(page) == "page" and kind_of(result) == "result"
    assert load_document(result)["comparison"] == json.loads(json.dumps(doc["comparison"]))


# --- reading -------------------------------------------------------------------------------


@pytest.mark.parametrize(("content", "rule"), [
    (None, "no such file"),
    (b"a\0b", "binary file"),
    (b"caf\xe9\n", "not UTF-8"),
])
def test_read_input_refuses_what_cannot_be_text(tmp_path: Path, content: bytes | None,
                                                rule: str) -> None:
    """Missing, binary and non-UTF-8 files are named with the rule they break."""
    path = tmp_path / "in.toml"
    if content is not None:
        path.write_bytes(content)
    with pytest.raises(ModelError, match=rule) as caught:
        read_input(path, "TOML model file")
    assert str(caught.value).startswith(str(path))


def test_load_document_refuses_other_json(tmp_path: Path) -> None:
    """A JSON file that is not a result document is named as such."""
    path = tmp_path / "x.json"
    path.write_text('{"a": 1}')
    with pytest.raises(ModelError, match="not a cyclecheck result document"):
        load_document(path)
    path.write_text("{broken")
    with pytest.raises(ModelError, match="not valid JSON") as caught:
        load_document(path)
    assert caught.value.item == "line 1, column 2"


def test_check_output_names_the_option(tmp_path: Path) -> None:
    """The message of a refused output names the option it came from."""
    mine = tmp_path / "mine.html"
    mine.write_text("x")
    with pytest.raises(ModelError) as caught:
        check_output(mine, "page", option="--report")
    assert "--report" in str(caught.value)


def test_large_documents_keep_one_key_per_line_and_their_kind(tmp_path, monkeypatch):
    """A document past PRETTY_LIMIT is written one top-level key per line with compact values
    (the compiled encoder): the same JSON for a reader, still recognised as a result."""
    from cyclecheck.simulate import result

    doc = dict(fixed_document())
    small = result.dumps(doc)
    monkeypatch.setattr(result, "PRETTY_LIMIT", 10)
    large = result.dumps(doc)
    assert json.loads(large) == json.loads(small)
    lines = large.splitlines()
    assert lines[0] == "{" and lines[-1] == "}" and len(lines) == len(doc) + 2
    assert lines[1] == '  "document": "cyclecheck-result",'
    target = tmp_path / "big.json"
    target.write_text(large + "\n", encoding="utf-8")
    assert kind_of(target) == "result"
