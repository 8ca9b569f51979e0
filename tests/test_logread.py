"""Logs of other simulators: column names, transition names, time units, Parquet, and bad
input (exit 2 naming the item, no traceback, nothing on stdout) through `cyclecheck trace`."""

from __future__ import annotations

import json

import pandas as pd
import pytest
from click.testing import CliRunner
from cyclecheck.simulate.cli import main
from cyclecheck.simulate.engine import simulate_event_graph
from cyclecheck.simulate.errors import ModelError
from cyclecheck.simulate.eventlog import read_log
from cyclecheck.simulate.judge import judge_log
from cyclecheck.simulate.logformat import LogFormat, log_format, parse_columns
from cyclecheck.simulate.modelfile import load_model

from tests.judge_models import CONVEYOR, PRESS_LINE

NAMES = {"arrive": "Arrival", "press": "Press #1", "pack": "Case packer"}


@pytest.fixture(scope="module")
def setup(tmp_path_factory):
    """The press line of test_judge, one engine log in our format, and the same log as
    another tool writes it: its own column names and order, names, minutes, a run column."""
    tmp = tmp_path_factory.mktemp("logs")
    path = tmp / "press.toml"
    path.write_text(PRESS_LINE.format(press=1.6, conveyor=CONVEYOR), encoding="utf-8")
    model = load_model(path)
    frames = []
    for r in range(3):
        run = simulate_event_graph(model.graph(), model.sampler(4, r), n_firings=400)
        frames.append(run.event_log().assign(replication=r + 1))
    ours = pd.concat(frames, ignore_index=True)
    theirs = pd.DataFrame({"Run": ours["replication"],
                           "Activity": ours["transition"].map(NAMES),
                           "Begin": ours["start"] / 60.0, "End": ours["time"] / 60.0,
                           "Seq": ours["firing"], "Operator": "night shift"})
    return model, path, tmp, ours, theirs


COLUMNS = "transition=Activity,firing=Seq,time=End,start=Begin,replication=Run"


def _invoke(*args):
    result = CliRunner().invoke(main, ["trace", *map(str, args)])
    assert "Traceback" not in result.output
    return result


def test_another_tools_log_is_read_like_ours(setup):
    """Mapped columns, renamed activities (file and option), minutes turned into seconds: the
    same firings, so the same judgement as our own log."""
    model, path, tmp, ours, theirs = setup
    rename = tmp / "names.csv"
    rename.write_text("# log name, model id\nArrival,arrive\n\"Press #1\",press\n",
                      encoding="utf-8")
    log = tmp / "theirs.csv"
    theirs.to_csv(log, index=False)
    fmt = log_format(model.transition_ids, columns=COLUMNS,
                     rename=[str(rename), "Case packer=pack"], time_scale=60.0)
    a = read_log(model, log, fmt)
    own = tmp / "ours.csv"
    ours.to_csv(own, index=False)
    b = read_log(model, own)
    assert a.n_replications == b.n_replications == 3
    for name in ("transition", "firing", "replication", "row"):
        assert (getattr(a, name) == getattr(b, name)).all(), name
    assert abs(a.time - b.time).max() < 1e-9 * b.time.max()
    out = _invoke(path, log, "--columns", COLUMNS, "--rename", rename,
                  "--rename", "Case packer=pack", "--time-scale", "60", "--json",
                  "--precision", "0.02")
    assert out.exit_code == 0, out.output
    doc = json.loads(out.stdout)
    assert doc["verdict"] == "agrees" and doc["replications"] == 3
    assert doc["log_format"]["columns"]["time"] == "End"
    assert doc["log_format"]["time_scale"] == 60.0 and doc["log_format"]["renamed"] == 3


def test_parquet_log_is_judged_like_csv(setup):
    model, _path, tmp, ours, _ = setup
    csv, parquet = tmp / "log.csv", tmp / "log.parquet"
    ours.to_csv(csv, index=False)
    ours.to_parquet(parquet, index=False)
    a = judge_log(model, csv, precision=0.02)
    b = judge_log(model, parquet, precision=0.02)
    assert b["log_format"]["format"] == "parquet" and a["log_format"]["format"] == "csv"
    assert a["verdict"] == b["verdict"] == "agrees"
    assert a["tests"] == b["tests"]
    # a Parquet file is recognised by its content even under another name
    disguised = tmp / "log.dat"
    disguised.write_bytes(parquet.read_bytes())
    assert read_log(model, disguised).source == "parquet"


def test_parse_columns_rules():
    assert parse_columns("time=End, start = Begin") == {"time": "End", "start": "Begin"}
    for text, rule in (("tim=End", 'unknown column "tim"; did you mean "time"?'),
                       ("time", '"time" must read OURS=THEIRS'),
                       ("time=End,time=Stop", 'column "time" is mapped twice'),
                       ("time=End,start=End", 'both mapped to the log\'s column "End"')):
        with pytest.raises(ModelError) as info:
            parse_columns(text)
        assert info.value.item == "--columns" and rule in info.value.rule
    assert LogFormat().is_plain


BAD = [
    ("mapping names a missing column", ["--columns", "time=Stop"],
     'column "Stop" (given by --columns time=Stop) is not in the log'),
    ("rename file with an unknown id", ["--rename", "{tmp}/bad_names.csv"],
     'bad_names.csv: line 2: unknown transition id "presss"; did you mean "press"?'),
    ("rename option with an unknown id", ["--rename", "Press #1=pres"],
     '--rename Press #1=pres: unknown transition id "pres"'),
    ("non-numeric time", ["--columns", "time=End"], "time must be a number, got \"soon\""),
    ("non-positive time scale", ["--time-scale", "0"],
     "--time-scale: must be a finite number > 0"),
    ("negative time scale", ["--time-scale", "-60"], "--time-scale: must be a finite number > 0"),
    ("alpha out of range", ["--alpha", "1.5"], "--alpha: must lie strictly between 0 and 1"),
]


@pytest.mark.parametrize("name, options, message", BAD, ids=[b[0] for b in BAD])
def test_bad_input_exits_2_naming_the_item(setup, name, options, message):
    _model, path, tmp, ours, _ = setup
    log = tmp / "bad_input.csv"
    frame = ours.copy()
    if name == "non-numeric time":
        frame = frame.rename(columns={"time": "End"})
        frame["End"] = frame["End"].astype(object)
        frame.loc[7, "End"] = "soon"
    frame.to_csv(log, index=False)
    (tmp / "bad_names.csv").write_text("Arrival,arrive\n\"Press #1\",presss\n", "utf-8")
    before = sorted(p.name for p in tmp.iterdir())
    result = _invoke(path, log, *(o.format(tmp=tmp) for o in options))
    assert result.exit_code == 2, result.output
    assert message in result.stderr
    assert result.stdout == ""
    assert sorted(p.name for p in tmp.iterdir()) == before  # nothing written
    if name == "non-numeric time":
        assert f"{log}: line 9: " in result.stderr  # data row 8 is line 9


@pytest.mark.parametrize("content, message", [
    (b"", "the event log is empty"),
    (b"transition,firing,time\n", "the event log is empty: it has a header but no firing"),
    (b"transition,firing,time\npress,1,2.5\n", "is not a Parquet file"),
])
def test_empty_logs_and_false_parquet(setup, content, message):
    _model, path, tmp, _, _ = setup
    name = "false.parquet" if b"press" in content else "empty.csv"
    log = tmp / name
    log.write_bytes(content)
    result = _invoke(path, log)
    assert result.exit_code == 2 and message in result.stderr and result.stdout == ""
    assert result.stderr.startswith(f"cyclecheck: {log}")


def test_repeated_firing_and_unknown_transition_name_the_line(setup):
    _model, path, tmp, ours, _ = setup
    log = tmp / "repeat.csv"
    one = ours[ours["replication"] == 1].drop(columns="replication")
    pd.concat([one.iloc[:5], one.iloc[[2]], one.iloc[5:]]).to_csv(log, index=False)
    result = _invoke(path, log)
    assert result.exit_code == 2
    assert f"{log}: line 7: firing" in result.stderr and "is logged twice (first at line 4)" \
        in result.stderr
    one.assign(transition=one["transition"].replace("pack", "packer")).to_csv(log, index=False)
    result = _invoke(path, log)
    assert result.exit_code == 2 and 'unknown transition "packer"; did you mean "pack"?' \
        in result.stderr and "--rename" in result.stderr


def test_partial_through_the_command_line(setup):
    """A transition with no row: exit 1 naming it; with --partial, exit 0 and it is listed."""
    _model, path, tmp, ours, _ = setup
    log = tmp / "no_pack.csv"
    ours[ours["transition"] != "pack"].to_csv(log, index=False)
    result = _invoke(path, log, "--precision", "0.02")
    assert result.exit_code == 1 and 'has no row in the log: "pack" (pass' in result.stdout
    result = _invoke(path, log, "--precision", "0.02", "--partial", "--json")
    assert result.exit_code == 0, result.output
    assert json.loads(result.stdout)["absent_transitions"] == ["pack"]
