"""The command line as a user runs it: the installed console script, in a subprocess.

Checks the contract of DESIGN.md: commands, JSON keys, exit codes (0 agrees, 1 disagrees,
2 bad input with a one-paragraph message and no traceback), and that outputs are never left
half-written.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

MODELS = Path(__file__).resolve().parents[1] / "models"
SCRIPT = Path(sys.executable).with_name("cyclecheck")
DESIGN_KEYS = {"cycle_time", "cycle_time_ci", "throughput", "cycle_time_by_transition",
               "critical_circuits", "bounds", "firings_simulated", "cyclicity"}


def run(*args: str, timeout: float = 300) -> subprocess.CompletedProcess[str]:
    return subprocess.run([str(SCRIPT), *args], capture_output=True, text=True,
                          timeout=timeout, check=False)


def test_analyze_json_has_the_contract_keys() -> None:
    """`analyze --json` prints one JSON document with the keys of DESIGN.md, nothing else."""
    out = run("analyze", str(MODELS / "packaging_cell.toml"), "--json")
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)
    assert DESIGN_KEYS <= doc.keys()
    assert doc["cycle_time"] == 17.375  # worked by hand in the model file
    assert doc["cycle_time_ci"] == [17.375, 17.375]
    assert doc["throughput"] == pytest.approx(1 / 17.375)
    assert doc["cyclicity"] == 4
    assert set(doc["cycle_time_by_transition"]) == {"fill", "cap", "label", "pack"}
    assert doc["critical_circuits"][0] == ["fill", "cap", "label", "pack"]
    assert doc["bounds"] is None


def test_analyze_random_model_gives_estimate_interval_and_bounds() -> None:
    """A random model: Lyapunov estimate, interval, bounds, criticality."""
    out = run("analyze", str(MODELS / "closed_line_exponential.toml"), "--json",
              "--precision", "0.02")
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)
    lo, hi = doc["cycle_time_ci"]
    assert lo < doc["cycle_time"] < hi
    assert (hi - lo) / 2 <= 0.02 * doc["cycle_time"]
    assert doc["bounds"]["lower"] <= hi and doc["bounds"]["upper"] >= lo
    assert doc["firings_simulated"] > 0
    assert set(doc["criticality"]["transitions"]) == {"s1", "s2", "s3", "s4", "s5"}


@pytest.mark.parametrize("name", ["packaging_cell", "shuttle_loop", "image_pipeline",
                                  "batch_plant"])
def test_check_agrees_on_fixed_examples(name: str) -> None:
    """`check` exits 0 with identical sample paths on every fixed-duration example."""
    out = run("check", str(MODELS / f"{name}.toml"), "--json")
    assert out.returncode == 0, out.stdout + out.stderr
    doc = json.loads(out.stdout)
    assert doc["comparison"]["verdict"] == "agrees"
    assert doc["comparison"]["sample_path"]["identical"] is True


def test_check_agrees_on_random_example(tmp_path: Path) -> None:
    """`check` on a random model: identical sample paths and overlapping intervals."""
    out = run("check", str(MODELS / "closed_line_exponential.toml"), "--json",
              "--precision", "0.02", "--firings", "2000")
    assert out.returncode == 0, out.stdout + out.stderr
    doc = json.loads(out.stdout)
    assert doc["comparison"]["sample_path"]["identical"] is True
    assert doc["comparison"]["sample_path"]["replications_compared"] >= 2


def _write(tmp_path: Path, text: str, name: str = "m.toml") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


GOOD_HEAD = '[model]\nname = "x"\n[[transitions]]\nid = "a"\nduration = 1.0\n'


@pytest.mark.parametrize(
    ("text", "needles"),
    [
        (GOOD_HEAD + '[[places]]\nfrom = "a"\nto = "a"\ntoekns = 1\n', ["toekns", "tokens"]),
        (GOOD_HEAD + '[[places]]\nfrom = "a"\nto = "b"\ntokens = 1\n', ['"b"']),
        (GOOD_HEAD + '[[places]]\nfrom = "a"\nto = "a"\ntokens = -1\n', ["tokens"]),
        (GOOD_HEAD + '[[places]]\nfrom = "a"\nto = "a"\n', ["a", "token"]),
        ('[model]\nname = "x"\n[[transitions]]\nid = "a"\nduration = \n', ["line"]),
        ("", ["m.toml"]),
        (GOOD_HEAD + '[[places]]\nfrom = "a"\nto = "a"\ntokens = 1\nhold = '
         '{ dist = "gama", mean = 1 }\n', ["gama"]),
    ],
    ids=["typo-key", "unknown-id", "negative-tokens", "dead-circuit", "syntax", "empty",
         "unknown-dist"],
)
def test_bad_input_exits_2_with_a_clear_message(tmp_path: Path, text: str,
                                                needles: list[str]) -> None:
    """Bad model files: exit 2, one message naming file and item, no traceback."""
    path = _write(tmp_path, text)
    out = run("analyze", str(path))
    assert out.returncode == 2, out.stdout + out.stderr
    assert "Traceback" not in out.stderr
    assert "m.toml" in out.stderr
    for needle in needles:
        assert needle in out.stderr, out.stderr
    assert out.stdout == ""


def test_missing_and_binary_files_exit_2(tmp_path: Path) -> None:
    """A file that does not exist, a directory and a binary file are input errors."""
    binary = tmp_path / "b.toml"
    binary.write_bytes(b"\x00\x01\x02\xff" * 10)
    for target in (tmp_path / "nope.toml", tmp_path, binary):
        out = run("analyze", str(target))
        assert out.returncode == 2, out.stderr
        assert "Traceback" not in out.stderr


def test_bad_options_exit_2() -> None:
    """Precision outside (0, 1) and a seed that is not an integer are usage errors."""
    model = str(MODELS / "packaging_cell.toml")
    for args in (["--precision", "0"], ["--precision", "1.5"], ["--seed", "abc"]):
        out = run("analyze", model, *args)
        assert out.returncode == 2, out.stderr
        assert "Traceback" not in out.stderr


def test_report_rerenders_identically_and_refuses_foreign_files(tmp_path: Path) -> None:
    """`check --report --save` then `report` gives the same page; a foreign file is kept."""
    page, saved, again = tmp_path / "p.html", tmp_path / "r.json", tmp_path / "q.html"
    out = run("check", str(MODELS / "batch_plant.toml"), "--report", str(page),
              "--save", str(saved), "--quiet")
    assert out.returncode == 0, out.stderr
    out = run("report", str(saved), "-o", str(again))
    assert out.returncode == 0, out.stderr
    assert page.read_bytes() == again.read_bytes()
    foreign = tmp_path / "notes.html"
    foreign.write_text("<p>my notes</p>")
    out = run("check", str(MODELS / "batch_plant.toml"), "--report", str(foreign))
    assert out.returncode == 2
    assert foreign.read_text() == "<p>my notes</p>"


def test_trace_of_simulate_agrees(tmp_path: Path) -> None:
    """The event log written by `simulate --trace` is judged consistent by `trace`."""
    log = tmp_path / "log.csv"
    out = run("simulate", str(MODELS / "shuttle_loop.toml"), "--trace", str(log),
              "--replications", "2", "--firings", "100", "--quiet")
    assert out.returncode == 0, out.stderr
    assert log.read_text().splitlines()[0].startswith("transition,firing")
    out = run("trace", str(MODELS / "shuttle_loop.toml"), str(log))
    assert out.returncode == 0, out.stdout + out.stderr
    # One transition's completions a second late disagree with the model: exit 1 from the
    # installed program too (cli.run passes the command's code on).
    header, *rows = log.read_text().splitlines()
    late = rows[0].split(",")[0]
    shifted = []
    for row in rows:
        transition, firing, start, time = row.split(",")
        if transition == late:
            time = repr(float(time) + 1.0)
        shifted.append(",".join([transition, firing, start, time]))
    log.write_text("\n".join([header, *shifted]) + "\n")
    out = run("trace", str(MODELS / "shuttle_loop.toml"), str(log))
    assert out.returncode == 1, out.stdout + out.stderr


def test_interrupt_leaves_no_output(tmp_path: Path) -> None:
    """Ctrl-C during a long check: exit 130, no page and no result file."""
    page, saved = tmp_path / "p.html", tmp_path / "r.json"
    proc = subprocess.Popen(
        [str(SCRIPT), "check", str(MODELS / "closed_line_exponential.toml"), "--precision",
         "0.0001", "--report", str(page), "--save", str(saved)],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        env={**os.environ, "PYTHONUNBUFFERED": "1"},
    )
    time.sleep(4.0)
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, err
    assert "Traceback" not in err
    assert not page.exists() and not saved.exists()
    assert not list(tmp_path.glob(".*tmp"))


def test_asking_for_more_memory_than_the_machine_has_exits_2() -> None:
    """A run that cannot fit in memory is refused before it starts, with the sizes named."""
    out = run("analyze", str(MODELS / "closed_line_exponential.toml"), "--replications",
              "100000000")
    assert out.returncode == 2, out.stderr
    assert "GiB" in out.stderr and "Traceback" not in out.stderr


def test_bad_options_on_a_random_model_exit_2(tmp_path: Path) -> None:
    """A negative seed and an unreachable or malformed scheduler address are usage errors on a
    random model too; a precision of 0.7 is honoured (met more strictly), not a crash."""
    model = str(MODELS / "closed_line_exponential.toml")
    for args in (["--seed", "-1"], ["--scheduler", "foo://bar"],
                 ["--scheduler", "tcp://127.0.0.1:notaport"]):
        out = run("analyze", model, *args, timeout=120)
        assert out.returncode == 2, (args, out.stderr)
        assert "Traceback" not in out.stderr
    out = run("analyze", model, "--precision", "0.7", "--firings", "500")
    assert out.returncode == 0, out.stderr


def test_outputs_are_checked_before_the_run_and_readable(tmp_path: Path) -> None:
    """A missing output folder, a folder as output, and one path for both outputs are refused
    at once; written files get the usual permissions (0666 less the umask)."""
    model = str(MODELS / "batch_plant.toml")
    for args in (["--report", str(tmp_path / "nodir" / "p.html")],
                 ["--save", str(tmp_path)],
                 ["--report", str(tmp_path / "x"), "--save", str(tmp_path / "x")]):
        out = run("check", model, *args)
        assert out.returncode == 2, (args, out.stderr)
        assert "Traceback" not in out.stderr and ".tmp" not in out.stderr
    assert list(tmp_path.iterdir()) == []
    page = tmp_path / "p.html"
    assert run("check", model, "--report", str(page), "--quiet").returncode == 0
    assert page.stat().st_mode & 0o044 == 0o044  # group and others may read


def test_report_of_a_damaged_document_exits_2(tmp_path: Path) -> None:
    """A result document with a wrong schema version or a text for a number: exit 2."""
    saved = tmp_path / "r.json"
    assert run("check", str(MODELS / "batch_plant.toml"), "--save", str(saved),
               "--quiet").returncode == 0
    doc = json.loads(saved.read_text())
    for damage in ({"schema_version": 99}, {"analysis": None}):
        broken = tmp_path / "broken.json"
        broken.write_text(json.dumps({**doc, **damage}))
        out = run("report", str(broken), "-o", str(tmp_path / "p.html"))
        assert out.returncode == 2, (damage, out.stderr)
        assert "Traceback" not in out.stderr


def test_simulate_may_overwrite_its_own_trace(tmp_path: Path) -> None:
    """Re-running the README's `simulate --trace` replaces the earlier log without --force."""
    log = tmp_path / "log.csv"
    args = ("simulate", str(MODELS / "shuttle_loop.toml"), "--trace", str(log),
            "--replications", "2", "--firings", "50", "--quiet")
    assert run(*args).returncode == 0
    out = run(*args)
    assert out.returncode == 0, out.stderr


def test_the_program_leaves_with_everything_written(tmp_path: Path) -> None:
    """The console script skips the interpreter's teardown (``cli.run``): the printed document
    is whole, the saved files are complete, the exit code is the command's, and a reader that
    stops early (``| head``) gets no traceback."""
    save, page = tmp_path / "result.json", tmp_path / "page.html"
    out = run("check", str(MODELS / "kanban_loop.toml"), "--json", "--save", str(save),
              "--report", str(page), "--quiet")
    assert out.returncode == 0, out.stderr
    assert json.loads(out.stdout) == json.loads(save.read_text(encoding="utf-8"))
    assert page.read_text(encoding="utf-8").rstrip().endswith("</html>")
    proc = subprocess.Popen([str(SCRIPT), "analyze", str(MODELS / "packaging_cell.toml"),
                             "--json"], stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    assert proc.stdout is not None and proc.stderr is not None
    first = proc.stdout.readline()
    proc.stdout.close()  # the reader goes away, as `head -1` does
    err = proc.stderr.read().decode()
    proc.wait(timeout=300)
    assert first.strip() == b"{"
    assert "Traceback" not in err
