"""The SimPy probe (simulate/probe.py) and the example scripts that use it (models/*.py)."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest
import simpy
from click.testing import CliRunner
from cyclecheck.simulate.cli import main
from cyclecheck.simulate.errors import ArgumentError, ModelError
from cyclecheck.simulate.files import LOG_HEADER, kind_of
from cyclecheck.simulate.probe import Probe

from tests.simpy_lines import closed_line_probe

ROOT = Path(__file__).resolve().parents[1]
CLOSED_LINE = ROOT / "models" / "closed_line_exponential.toml"


def test_firings_are_numbered_by_start_unless_given():
    """Two jobs share a machine (FIFO): firings count in order of start; a job number given
    explicitly is kept (two servers in turn: job 2 may start before job 1)."""
    env = simpy.Environment()
    probe = Probe(env)
    machine = simpy.Resource(env, capacity=1)

    def job(n, delay, service):
        yield env.timeout(delay)
        with machine.request() as req:
            yield req
            with probe.firing("saw"):
                yield env.timeout(service)
        with probe.firing("check", firing=n):
            yield env.timeout(5.0 if n == 1 else 1.0)

    env.process(job(1, 0.0, 2.0))
    env.process(job(2, 0.5, 1.0))
    env.run()
    log = probe.log()
    assert log.to_dict("list") == {
        "transition": ["saw", "saw", "check", "check"], "firing": [1, 2, 2, 1],
        "start": [0.0, 2.0, 3.0, 2.0], "time": [2.0, 3.0, 4.0, 7.0]}


def test_replications_and_misuse():
    """A call outside the probe's rules is an ArgumentError (a ValueError) naming the
    transition and the firing."""
    probe = Probe(simpy.Environment())
    k = probe.start("press")
    with pytest.raises(ArgumentError) as info:
        probe.start("press", firing=1)
    assert str(info.value) == ('firing 1 of "press" has started already (and not finished): '
                               "each firing number starts once")
    probe.finish("press", k)
    with pytest.raises(ArgumentError) as info:
        probe.finish("press", k)
    assert str(info.value) == ('firing 1 of "press" was not started (call start first) or '
                               "has finished already")
    with pytest.raises(ValueError) as info:
        probe.start("press", firing=0)
    assert str(info.value) == ('firing of "press" must be an integer >= 1 (firings count from '
                               "1), got 0")
    probe.restart(simpy.Environment())
    assert probe.start("press") == 1  # numbers count again in the new replication
    probe.finish("press", 1)
    log = probe.log()
    assert list(log.columns) == ["transition", "firing", "start", "time", "replication"]
    assert log["replication"].tolist() == [0, 1] and log["firing"].tolist() == [1, 1]


def _probe(replications):
    probe = Probe(simpy.Environment())
    for r in range(replications):
        if r:
            probe.restart(simpy.Environment())
        probe.finish("press", probe.start("press"))
    return probe


@pytest.mark.parametrize("replications", [1, 2])
@pytest.mark.parametrize("suffix", [".csv", ".parquet"])
def test_write_is_an_output_of_kind_log(tmp_path, suffix, replications):
    """probe.write goes through the one writer of outputs (simulate/files.py): a log the
    probe wrote is recognised as an event log and replaced; a file of another kind (a model
    file) is left untouched unless force; nothing half-written is left behind."""
    probe = _probe(replications)
    path = tmp_path / f"log{suffix}"
    probe.write(path)
    assert kind_of(path) == "log"
    if suffix == ".csv":
        header = path.read_text(encoding="utf-8").splitlines()[0]
        assert header == LOG_HEADER + (",replication" if replications > 1 else "")
    probe.write(path)  # its own earlier log: replaced
    back = pd.read_parquet(path) if suffix == ".parquet" else pd.read_csv(path)
    assert back.shape == probe.log().shape
    model = tmp_path / f"line{suffix}.toml"
    model.write_text('[model]\nname = "line"\n', encoding="utf-8")
    with pytest.raises(ModelError, match="exists and is not a cyclecheck output") as info:
        probe.write(model)
    assert info.value.file == model
    assert model.read_text(encoding="utf-8") == '[model]\nname = "line"\n'
    probe.write(model, force=True)
    assert kind_of(model) == "log"
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []


def test_a_foreign_parquet_file_is_not_a_log_of_ours(tmp_path):
    """A Parquet file written by another program has no cyclecheck mark in its footer: it
    is not replaced without force."""
    path = tmp_path / "theirs.parquet"
    pd.DataFrame({"transition": ["press"], "firing": [1], "time": [1.0]}).to_parquet(path)
    assert kind_of(path) is None
    with pytest.raises(ModelError, match="not a cyclecheck output"):
        _probe(1).write(path)


def test_an_interrupted_firing_is_not_complete():
    env = simpy.Environment()
    probe = Probe(env)

    def worker():
        try:
            with probe.firing("weld"):
                yield env.timeout(10.0)
        except simpy.Interrupt:
            pass

    proc = env.process(worker())

    def breaker():
        yield env.timeout(3.0)
        proc.interrupt()

    env.process(breaker())
    env.run()
    assert probe.log().empty


def test_probe_judgement_is_the_document_of_trace(tmp_path):
    """`probe.judge` gives the document `cyclecheck trace --json` gives for the written log
    (provenance and the log's name aside); CSV and Parquet are written atomically."""
    probe = closed_line_probe(5, 600)
    frame = probe.log()
    doc = probe.judge(CLOSED_LINE, seed=3, precision=0.01)
    for suffix in (".csv", ".parquet"):
        path = probe.write(tmp_path / f"log{suffix}")
        assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []
        back = pd.read_parquet(path) if suffix == ".parquet" else pd.read_csv(path)
        assert back.shape == frame.shape
        out = CliRunner().invoke(main, ["trace", str(CLOSED_LINE), str(path), "--json",
                                        "--seed", "3", "--precision", "0.01"])
        assert out.exit_code == (0 if doc["verdict"] == "agrees" else 1), out.output
        cli = json.loads(out.stdout)
        assert set(cli) == set(doc)
        assert cli["log_format"]["format"] == suffix[1:] and doc["log_format"]["format"] == "table"
        for key in ("verdict", "reasons", "tests", "transitions", "cycle_time_test",
                    "family", "model", "violations", "firings_checked"):
            assert json.loads(json.dumps(doc[key])) == cli[key], key


@pytest.mark.parametrize("slip, verdict", [(None, "agrees"), ("rate", "disagrees"),
                                           ("fixtures", "disagrees"), ("pooled", "disagrees")])
def test_example_scripts_give_the_expected_verdict(slip, verdict):
    """models/probe_line.py: a hand-written SimPy line recorded by the probe; without a slip
    the judge finds it consistent with models/probe_line.toml, with each slip it does not."""
    args = [sys.executable, str(ROOT / "models" / "probe_line.py")]
    if slip:
        args += ["--slip", slip]
    out = subprocess.run(args, capture_output=True, text=True, timeout=300, check=False)
    assert out.returncode == 0, out.stdout + out.stderr
    assert f"verdict: {verdict} (expected {verdict})" in out.stdout
    if slip == "rate":
        assert 'transition "mill": the duration mean test' in out.stdout
    if slip == "fixtures":
        assert 'of "turn" started at' in out.stdout and '"free fixtures"' in out.stdout
    if slip == "pooled":
        assert 'of "inspect" started at' in out.stdout and '"inspectors"' in out.stdout
