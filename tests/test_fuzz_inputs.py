"""Fuzzing the inputs a user gives: model files, CSV tables and event logs, run end to end.

Hypothesis draws models whose structure is well formed but whose values are anything a user
might write, typos and extremes included (negative, NaN, 1e308, 10^12 tokens, 2^53 + 1 tokens,
distributions with absurd parameters, unknown ids), and event logs with rows of every kind.
Whatever comes in, the library either answers or raises the one error root
:class:`~cyclecheck.algebra.exceptions.CycleCheckError`; nothing else escapes (no OverflowError,
AssertionError, numpy warning turned error, MemoryError). The command line then exits 0, 1 or
2, and with 2 it prints one line naming the file, never a traceback.
"""

from __future__ import annotations

import json
import warnings
from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner
from cyclecheck.algebra.exceptions import CycleCheckError
from cyclecheck.simulate import analyze, check, load_model, simulate, trace
from cyclecheck.simulate.cli import main
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

VALID = [0, 1, 2.5, 1e-300, 1e99, 1e100, 0.0, 100]
NUMBERS = VALID * 3 + [1e101, 1.5e308, -1]  # mostly accepted, so that models get run
TOKENS: list[Any] = [0, 1, 2, 3] * 3 + [10**12, 2**53, 2**53 + 1, -1, 1.5]
IDS = ["a", "b", "c", "d"]
QUICK = {"precision": 0.3, "firings": 40, "replications": 2, "workers": 1, "quiet": True}


def _toml_value(value: Any) -> str:
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{k} = {_toml_value(v)}" for k, v in value.items()) + " }"
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return json.dumps(value)
    return repr(value)


numbers = st.sampled_from(NUMBERS)
positive = st.sampled_from([1e-300, 1, 2.5, 1e99, 1e100])
cvs = st.sampled_from([0.01, 1, 100])
# laws a user could mean (extreme but accepted), and laws with any parameters at all
accepted_laws = st.one_of(
    st.builds(lambda m: {"dist": "exponential", "mean": m}, positive),
    st.builds(lambda m, c: {"dist": "gamma", "mean": m, "cv": c}, positive, cvs),
    st.builds(lambda m, c: {"dist": "lognormal", "mean": m, "cv": c}, positive, cvs),
    st.builds(lambda a, b: {"dist": "uniform", "low": min(a, b), "high": max(a, b)},
              positive, positive),
    st.builds(lambda s, c: {"dist": "weibull", "shape": s, "scale": c},
              st.sampled_from([0.05, 1, 50]), positive),
    st.builds(lambda v: {"dist": "empirical", "values": v}, st.lists(positive, min_size=1,
                                                                      max_size=3)),
    st.builds(lambda m, sd: {"dist": "normal", "mean": m, "sd": sd, "truncate": True},
              positive, positive),
)
any_laws = st.one_of(
    st.sampled_from(["x", True, "nan", "gamma(mean=2, cv=0.5)", "fixed(value=1e308)"]),
    st.builds(lambda m, c: {"dist": "gamma", "mean": m, "cv": c}, numbers, numbers),
    st.builds(lambda a, b: {"dist": "uniform", "low": a, "high": b}, numbers, numbers),
    st.builds(lambda s, c: {"dist": "weibull", "shape": s, "scale": c}, numbers, numbers),
    st.builds(lambda v: {"dist": "empirical", "values": v}, st.lists(numbers, max_size=3)),
)
laws = st.one_of(numbers, numbers, accepted_laws, accepted_laws, any_laws)


@st.composite
def model_texts(draw: st.DrawFn) -> str:
    """A TOML model: well formed, with any values; half of them with accepted values only
    (extreme ones included), so that many models get as far as being run."""
    wild = draw(st.booleans())
    value = laws if wild else st.one_of(st.sampled_from(VALID), accepted_laws)
    marking = st.sampled_from(TOKENS if wild else [0, 1, 2, 3, 10**12, 2**53])
    n = draw(st.integers(1, 3))
    lines = ['[model]', 'name = "fuzz"']
    for t in IDS[:n]:
        lines += ["[[transitions]]", f'id = "{t}"', f"duration = {_toml_value(draw(value))}"]
    ends = st.sampled_from([*IDS[:n]] * 4 + (["zz"] if wild else []))
    # one self-loop per transition keeps most drawn models live, so that they are run
    places = [(t, t) for t in IDS[:n]] + draw(st.lists(st.tuples(ends, ends), max_size=4))
    for i, (src, dst) in enumerate(places):
        tokens = draw(marking)
        if i < n and not wild:
            tokens = max(tokens, 1)  # a marked self-loop: a server, not a deadlock
        lines += ["[[places]]", f'from = "{src}"', f'to = "{dst}"',
                  f"tokens = {_toml_value(tokens)}", f"hold = {_toml_value(draw(value))}"]
    return "\n".join(lines) + "\n"


def _run_everything(path: Path) -> None:
    """Load, analyze, simulate and check a model: an answer or a CycleCheckError."""
    try:
        model = load_model(path)
        analyze(model, **QUICK)
        simulate(model, **QUICK)
        check(model, **QUICK)
    except CycleCheckError as error:
        assert str(error)


@settings(max_examples=80, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(text=model_texts())
def test_any_model_gives_an_answer_or_the_one_error(tmp_path: Path, text: str) -> None:
    """Only CycleCheckError escapes the library, and no warning is printed on the way."""
    path = tmp_path / "m.toml"
    path.write_text(text, encoding="utf-8")
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a numpy overflow warning would be a bug too
        _run_everything(path)


@settings(max_examples=40, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(durations=st.lists(st.sampled_from([*NUMBERS, "x", "", "gamma(mean=1e308, cv=1)",
                                            "uniform(low=3, high=1)"]), min_size=2, max_size=2),
       tokens=st.lists(st.sampled_from([*TOKENS, "", "t"]), min_size=3, max_size=3),
       holds=st.lists(st.sampled_from([*NUMBERS, "nan", "inf", "-0"]), min_size=3, max_size=3))
def test_any_csv_table_gives_an_answer_or_the_one_error(tmp_path: Path, durations: list[Any],
                                                         tokens: list[Any],
                                                         holds: list[Any]) -> None:
    """The same through CSV tables (cells quoted where they hold commas)."""
    def cell(value: Any) -> str:
        text = str(value)
        return f'"{text}"' if "," in text else text

    (tmp_path / "t.csv").write_text("id,duration\n" + "".join(
        f"{t},{cell(d)}\n" for t, d in zip("ab", durations, strict=True)))
    (tmp_path / "p.csv").write_text("from,to,tokens,hold\n" + "".join(
        f"{s},{d},{cell(k)},{cell(h)}\n"
        for (s, d), k, h in zip([("a", "a"), ("b", "b"), ("a", "b")], tokens, holds,
                                strict=True)))
    path = tmp_path / "m.toml"
    path.write_text('[model]\nname = "csv fuzz"\ntransitions_csv = "t.csv"\n'
                    'places_csv = "p.csv"\n')
    _run_everything(path)


LOG_CELLS = {
    "transition": ["a", "b", "zz", "", " a"],
    "firing": ["1", "2", "3", "0", "-1", "1.5", "x", "1e20", ""],
    "time": ["0", "1", "2.5", "1e308", "-1", "nan", "inf", "x", ""],
}


@pytest.fixture(scope="module")
def loop_model(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("loop") / "loop.toml"
    path.write_text('[model]\nname = "loop"\n'
                    '[[transitions]]\nid = "a"\nduration = 1.0\n'
                    '[[transitions]]\nid = "b"\nduration = { dist = "exponential", mean = 2 }\n'
                    '[[places]]\nfrom = "a"\nto = "b"\n'
                    '[[places]]\nfrom = "b"\nto = "a"\ntokens = 1\n')
    return path


@settings(max_examples=80, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(rows=st.lists(st.tuples(*(st.sampled_from(v) for v in LOG_CELLS.values())),
                     max_size=8),
       with_start=st.booleans())
def test_any_event_log_gives_an_answer_or_the_one_error(tmp_path: Path, loop_model: Path,
                                                       rows: list[tuple[str, str, str]],
                                                       with_start: bool) -> None:
    """An event log with rows of any kind: a judgement or a CycleCheckError."""
    header = "transition,firing,time" + (",start" if with_start else "")
    body = "".join(",".join(r) + (",0" if with_start else "") + "\n" for r in rows)
    log = tmp_path / "log.csv"
    log.write_text(header + "\n" + body)
    try:
        doc = trace(loop_model, log)
        assert doc["verdict"] in ("agrees", "disagrees")
    except CycleCheckError as error:
        assert str(error)


@settings(max_examples=25, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(text=model_texts())
def test_the_command_line_exits_2_naming_the_file(tmp_path: Path, text: str) -> None:
    """On the command line: exit 0, 1 or 2; with 2 one message that names the file (or the
    option), never a traceback."""
    path = tmp_path / "m.toml"
    path.write_text(text, encoding="utf-8")
    result = CliRunner().invoke(main, ["check", str(path), "--quiet", "--precision", "0.3",
                                       "--firings", "40", "--replications", "2",
                                       "--workers", "1"])
    assert result.exit_code in (0, 1, 2), result.output
    assert not isinstance(result.exception, Exception) or isinstance(result.exception,
                                                                     SystemExit)
    if result.exit_code == 2:
        message = result.stderr.strip()
        assert message.startswith("cyclecheck: ") and "\n" not in message
        assert str(path) in message or "circuit" in message, message
        assert "Traceback" not in result.output
