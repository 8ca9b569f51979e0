"""Sweeps: targets and values, exact points against brute force, random points against
Gordon–Newell, common random numbers, outputs, resume, lost workers and Ctrl-C.

Sources of the checks:

- Baccelli, Cohen, Olsder & Quadrat, *Synchronization and Linearity* (1992), ch. 2–3: the
  cycle time of a live strongly connected timed event graph is its maximum cycle ratio
  (Σ durations and holds / Σ tokens over a circuit). Twin here: brute force over the circuits
  (networkx.simple_cycles).
- Gordon & Newell (1967), Buzen (1973), Reiser & Lavenberg (1980): the throughput of a closed
  cyclic line of exponential single servers (``tests/queueing.py``), and the utilization law
  ``U_i = X·D_i`` (every station sees the same throughput X).
- Law & Kelton, *Simulation Modeling and Analysis*, ch. 11 (common random numbers): a paired
  comparison on common random numbers has variance ``Var X + Var Y − 2 Cov(X, Y)``, below that
  of independent runs when the points are positively correlated.
"""

from __future__ import annotations

import itertools
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from cyclecheck.reports import ReportError, check_document, render_page
from cyclecheck.simulate import ModelError, load_model, points_frame, sweep
from cyclecheck.simulate.grid import make_grid, parse_values, point_model

from tests.queueing import gordon_newell_throughput, mva_throughput

ROOT = Path(__file__).resolve().parents[1]
MODELS = ROOT / "models"
KANBAN = MODELS / "kanban_loop.toml"
LINE = MODELS / "closed_line_exponential.toml"
SCRIPT = Path(sys.executable).with_name("cyclecheck")
LINE_MEANS = {"s1": 1.0, "s2": 1.25, "s3": 0.8, "s4": 1.0, "s5": 1.5}


def cli(*args: str, timeout: float = 300) -> subprocess.CompletedProcess[str]:
    return subprocess.run([str(SCRIPT), *args], capture_output=True, text=True,
                          timeout=timeout, check=False)


def brute_force_cycle_time(model) -> float:
    """Maximum cycle ratio over all elementary circuits (networkx.simple_cycles), the places
    between two transitions taken one by one (parallel places are separate circuits)."""
    graph = model.graph()
    multi = nx.MultiDiGraph()
    for p in range(graph.n_places):
        u, v = int(graph.source[p]), int(graph.target[p])
        multi.add_edge(u, v, weight=graph.hold[p] + graph.duration[v], tokens=graph.tokens[p])
    best = -np.inf
    simple = nx.DiGraph(multi)
    for cycle in nx.simple_cycles(simple):
        arcs = list(zip(cycle, cycle[1:] + cycle[:1], strict=True))
        # every choice of parallel place along the circuit
        choices = [list(multi.get_edge_data(u, v).values()) for u, v in arcs]
        for pick in np.array(np.meshgrid(*[range(len(c)) for c in choices])).T.reshape(
                -1, len(choices)):
            weight = sum(choices[i][j]["weight"] for i, j in enumerate(pick))
            tokens = sum(choices[i][j]["tokens"] for i, j in enumerate(pick))
            best = max(best, np.inf if tokens == 0 else weight / tokens)
    return float(best)


# --- exact points ---------------------------------------------------------------------------


def test_kanban_cards_give_the_exact_cycle_time_at_every_point() -> None:
    """Cards 1..6: at every point the cycle time is the maximum cycle ratio found by brute
    force over the circuits, and the hand-worked values of the model file
    (max(6, 20/c)); the critical circuit's ratio is the cycle time."""
    doc = sweep(KANBAN, vary=["kanban cards.tokens=1:6"], quiet=True)
    base = load_model(KANBAN)
    grid = make_grid(base, ["kanban cards.tokens=1:6"])
    assert [p["values"]["kanban cards.tokens"] for p in doc["points"]] == [1, 2, 3, 4, 5, 6]
    for point, values in zip(doc["points"], grid.points(), strict=True):
        cards = values[0]
        assert point["status"] == "exact" and point["exact"]
        assert point["cycle_time"] == pytest.approx(brute_force_cycle_time(
            point_model(base, grid, values)), rel=1e-12)
        assert point["cycle_time"] == pytest.approx(max(6.0, 20.0 / cards), rel=1e-12)
        assert point["cycle_time_ci"] == [point["cycle_time"]] * 2
        assert point["throughput"] == pytest.approx(1 / point["cycle_time"])
        circuit = point["critical_circuit"]
        expected = ["press"] if cards >= 4 else ["cut", "press", "weld"]
        assert sorted(circuit) == sorted(expected)
    diffs = [p["differences"].get("kanban cards.tokens") for p in doc["points"]]
    assert diffs[0] is None and diffs[1]["cycle_time_difference"] == pytest.approx(-10.0)


def test_a_point_that_is_not_live_is_reported_not_fatal() -> None:
    """Zero cards empty the card loop: that point is a deadlock in its row (the circuit
    named), the others are computed."""
    doc = sweep(KANBAN, vary={"kanban cards.tokens": "0:2"}, quiet=True)
    dead, one, two = doc["points"]
    assert dead["status"] == "not live" and dead["cycle_time"] is None
    assert dead["throughput"] == 0.0
    assert sorted(dead["deadlock"]) == ["cut", "press", "weld"]
    assert (one["cycle_time"], two["cycle_time"]) == (20.0, 10.0)
    assert "difference" not in json.dumps(dead["differences"])
    check_document(json.loads(json.dumps(doc)))


def test_a_grid_of_two_targets_is_their_product() -> None:
    """Two --vary make a grid, the last varying fastest; each point is exact."""
    doc = sweep(KANBAN, vary=["kanban cards.tokens=2:3", "press.duration=5,7"], quiet=True)
    got = [(p["values"]["kanban cards.tokens"], p["values"]["press.duration"],
            p["cycle_time"]) for p in doc["points"]]
    # card loop (15 + d_press + 5 ... ) worked as (4 + d + 5 + 1 + 1 + 3) / c against d
    assert got == [(2, 5, 9.5), (2, 7, 10.5), (3, 5, pytest.approx(19 / 3)), (3, 7, 7.0)]


# --- targets and values ---------------------------------------------------------------------


@pytest.mark.parametrize(("spec", "values"), [
    ("1:4", [1, 2, 3, 4]), ("0:1:5", [0.0, 0.25, 0.5, 0.75, 1.0]), ("2,2.5,3", [2, 2.5, 3]),
    ("7", [7]),
])
def test_value_lists(spec: str, values: list[float]) -> None:
    assert parse_values(spec) == values


@pytest.mark.parametrize(("vary", "words"), [
    ("pres.mean=1:2", ['no transition or place "pres"', 'did you mean "press"',
                       "targets of this model: cut.duration"]),
    ("press.cv=0.1,0.2", ['transition "press" has a fixed duration', "fields: duration"]),
    ("kanban cards.tokens=-1,2", ["tokens must be an integer from 0 to 2^53, got -1"]),
    ("kanban cards.tokens=0:1:3", ["tokens must be an integer", "got 0.5"]),
    ("press.duration=1e101", ["duration must be from 0 to 1e100"]),
    ("press.duration=3:1", ["a:b takes integers a <= b"]),
    ("press.duration=x", ['"x" is not a number']),
    ("kanban cards=1:3", ["a target is ELEMENT.FIELD"]),
    ("cut->weld.tokens=1", ['no place "cut->weld"']),
])
def test_a_bad_target_or_value_is_exit_2_naming_it(vary: str, words: list[str]) -> None:
    """The message names the model file, the --vary item and the rule (with the valid targets
    where the target is unknown); exit 2, no traceback, nothing written."""
    done = cli("sweep", str(KANBAN), "--vary", vary)
    assert done.returncode == 2, done.stdout
    assert f"{KANBAN}: --vary" in done.stderr or "--vary" in done.stderr
    for word in words:
        assert word in done.stderr, done.stderr
    assert "Traceback" not in done.stderr


def test_law_parameters_keep_the_others_and_are_checked(tmp_path: Path) -> None:
    """`press.mean` of a gamma keeps its cv; a parameter the law lacks lists its parameters;
    cv above 100 is refused as in a model file."""
    path = tmp_path / "g.toml"
    path.write_text('[model]\nname = "g"\n[[transitions]]\nid = "press"\n'
                    'duration = { dist = "gamma", mean = 3.0, cv = 0.5 }\n'
                    '[[places]]\nfrom = "press"\nto = "press"\ntokens = 1\n', encoding="utf-8")
    model = load_model(path)
    grid = make_grid(model, ["press.mean=4,6"])
    law = point_model(model, grid, (6,)).durations[0]
    assert (law.name, law.mean, law.cv) == ("gamma", 6, 0.5)
    with pytest.raises(ModelError, match=r"has no \"shape\".*fields: duration, mean, cv"):
        make_grid(model, ["press.shape=1,2"])
    with pytest.raises(ModelError, match="cv must be at most 100"):
        make_grid(model, ["press.cv=1,200"])


def test_a_changed_mean_keeps_the_draws_common() -> None:
    """Common random numbers: the draws of an exponential whose mean is swept are the same
    standard draws scaled (numpy draws scale × standard exponential), firing by firing."""
    model = load_model(LINE)
    grid = make_grid(model, ["s5.mean=1,2"])
    a, b = (point_model(model, grid, v).sampler(3, 7) for v in grid.points())
    np.testing.assert_allclose(b.duration(4, 1, 500), 2 * a.duration(4, 1, 500), rtol=1e-15)
    np.testing.assert_array_equal(b.duration(0, 1, 500), a.duration(0, 1, 500))


# --- random points --------------------------------------------------------------------------


@pytest.fixture(scope="module")
def line_sweep() -> dict:
    """The closed line with s5's mean swept, two workers."""
    return sweep(LINE, vary=["s5.mean=0.5:2:4"], seed=11, workers=2, quiet=True)


def test_gordon_newell_cycle_time_is_inside_every_interval(line_sweep: dict) -> None:
    """At every point the exact cycle time 1/X of the closed exponential line (Buzen's
    convolution; MVA agrees) lies in the 95 % interval (fixed seed), above the mean-value
    lower bound; the busiest server is the station of largest demand and its utilization is
    X·D_i (utilization law) within 3 %."""
    for point in line_sweep["points"]:
        means = dict(LINE_MEANS, s5=point["values"]["s5.mean"])
        rates = [1 / means[s] for s in ("s1", "s2", "s3", "s4", "s5")]
        x = gordon_newell_throughput(rates, 3)
        assert x == pytest.approx(mva_throughput(rates, 3), rel=1e-12)
        low, high = point["cycle_time_ci"]
        assert low <= 1 / x <= high, (point["values"], 1 / x, low, high)
        assert point["relative_half_width"] <= 0.01 and point["precision_met"]
        assert point["bounds"]["lower"] <= low
        slowest = max(means, key=means.get)
        assert point["busiest"]["transition"] == slowest
        assert point["busiest"]["utilization"] == pytest.approx(x * means[slowest], rel=0.03)


def test_common_random_numbers_narrow_the_differences(line_sweep: dict) -> None:
    """The paired interval of the difference between neighbouring points (a third larger
    mean at s5, a large step) is narrower than the interval of either point, and less than half
    the unpaired interval the same replications would give as independent samples (Law &
    Kelton ch. 11); the exact difference (Buzen at both points) lies inside it."""
    points = line_sweep["points"]
    for prev, point in itertools.pairwise(points):
        diff = point["differences"]["s5.mean"]
        assert diff["from_point"] == prev["point"]
        width = diff["ci"][1] - diff["ci"][0]
        widths = [p["cycle_time_ci"][1] - p["cycle_time_ci"][0] for p in (prev, point)]
        # measured (seed 11): 0.46, 0.46 and 0.33 of the narrower point's width
        assert width < min(widths) / 1.5, (width, widths)
        # the same replications taken as independent samples (no pairing)
        a, b = np.array(point["per_replication"]), np.array(prev["per_replication"])
        n = diff["replications"]
        unpaired = 2 * 1.96 * np.sqrt(a[:n].var(ddof=1) / n + b[:n].var(ddof=1) / n)
        assert width < unpaired / 2, (width, unpaired)  # measured: 0.25 to 0.31
        # the exact difference lies in the paired interval (Buzen at both points)
        exact = [1 / gordon_newell_throughput(
            [1 / dict(LINE_MEANS, s5=p["values"]["s5.mean"])[s] for s in LINE_MEANS], 3)
            for p in (prev, point)]
        assert diff["ci"][0] <= exact[1] - exact[0] <= diff["ci"][1]


def test_a_point_equals_analyze_of_its_model(line_sweep: dict) -> None:
    """The point at the file's own value (s5 mean 1.5) is the estimate `analyze` gives the
    model with the same seed: one estimation, whatever the command."""
    from cyclecheck.simulate import analyze

    point = next(p for p in line_sweep["points"] if p["values"]["s5.mean"] == 1.5)
    doc = analyze(LINE, seed=11, workers=1, quiet=True)
    # equal up to rounding: the sweep averages a component's firing times before taking
    # their growth, analyze after
    assert point["cycle_time"] == pytest.approx(doc["cycle_time"], rel=1e-12)
    assert point["cycle_time_ci"] == pytest.approx(doc["cycle_time_ci"], rel=1e-12)
    assert point["per_replication"] == pytest.approx(doc["per_replication"], rel=1e-12)
    assert point["warmup_firings"] == doc["warmup_firings"]
    # the busiest server's utilization is analyze's, per server and at most 1
    busiest = point["busiest"]
    assert 0 < busiest["utilization"] <= 1
    assert busiest["utilization"] == pytest.approx(doc["utilization"][busiest["transition"]],
                                                   rel=1e-12)


def test_the_numbers_do_not_depend_on_the_workers(line_sweep: dict) -> None:
    """One process and two give the same document points, bit for bit."""
    one = sweep(LINE, vary=["s5.mean=0.5:2:4"], seed=11, workers=1, quiet=True)
    assert one["points"] == line_sweep["points"]


def test_a_round_split_over_workers_gives_the_same_numbers() -> None:
    """One point on two workers: its round is split into two tasks (workers would idle
    otherwise), and the numbers are those of one task, bit for bit."""
    options = {"vary": ["s5.mean=1.5"], "seed": 4, "firings": 600, "replications": 6,
               "precision": 0.2, "quiet": True}
    one, two = sweep(LINE, workers=1, **options), sweep(LINE, workers=2, **options)
    assert one["points"] == two["points"]
    assert two["points"][0]["replications"] >= 6


def test_a_fixed_value_and_a_law_parameter_of_one_element_are_refused() -> None:
    """`s5.mean` and `s5.duration` at once: the fixed value would replace the law and the
    labels of the points would lie; refused naming both, in either order."""
    for vary in (["s5.mean=1,2", "s5.duration=3"], ["s5.duration=3", "s5.mean=1,2"]):
        with pytest.raises(ModelError, match=r"s5\.duration sets a fixed value and s5\.mean "
                                             r"a parameter of its law"):
            sweep(LINE, vary=vary, quiet=True)


def test_one_number_is_a_list_of_one() -> None:
    """A value given as a number (Python) is a list of one value."""
    doc = sweep(KANBAN, vary={"kanban cards.tokens": 3}, quiet=True)
    assert [p["values"]["kanban cards.tokens"] for p in doc["points"]] == [3]


# --- outputs --------------------------------------------------------------------------------


def test_csv_json_page_and_frame(tmp_path: Path) -> None:
    """--csv writes a sweep table (first line `point,...`), --save the document, --report the
    page; the DataFrame holds the same rows; --json prints the document alone."""
    table, saved, page = tmp_path / "k.csv", tmp_path / "k.json", tmp_path / "k.html"
    done = cli("sweep", str(KANBAN), "--vary", "kanban cards.tokens=1:3", "--csv", str(table),
               "--save", str(saved), "--report", str(page), "--json")
    assert done.returncode == 0, done.stderr
    doc = json.loads(done.stdout)
    assert doc["command"] == "sweep" and len(doc["points"]) == 3
    text = table.read_text(encoding="utf-8")
    assert text.startswith("point,kanban cards.tokens,status,cycle_time,")
    import pandas as pd

    csv_frame = pd.read_csv(table).set_index("point")
    frame = points_frame(doc)
    assert csv_frame["cycle_time"].tolist() == frame["cycle_time"].tolist() == [20, 10, 20 / 3]
    assert json.loads(saved.read_text(encoding="utf-8"))["points"] == doc["points"]
    html = page.read_text(encoding="utf-8")
    assert "Throughput against kanban cards.tokens" in html and "cut → press → weld" in html
    # a table is replaced only by a table
    log = tmp_path / "log.csv"
    log.write_text("something else\n", encoding="utf-8")
    again = cli("sweep", str(KANBAN), "--vary", "kanban cards.tokens=1:2", "--csv", str(log))
    assert again.returncode == 2 and "left untouched" in again.stderr
    assert log.read_text(encoding="utf-8") == "something else\n"


def test_the_checker_guards_sweep_documents(line_sweep: dict) -> None:
    """The document passes the one checker and renders; a point missing a target's value, or
    a critical circuit naming no transition, is refused with the key named."""
    doc = json.loads(json.dumps(line_sweep))
    check_document(doc)
    assert "Throughput against s5.mean" in render_page(doc)
    broken = json.loads(json.dumps(line_sweep))
    broken["points"][1]["values"] = {}
    with pytest.raises(ReportError, match=r"points\[1\]\.values"):
        check_document(broken)
    broken = json.loads(json.dumps(line_sweep))
    broken["points"][0]["critical_circuit"] = ["nowhere"]
    with pytest.raises(ReportError, match=r"points\[0\]\.critical_circuit\[0\]"):
        check_document(broken)


# --- resume, lost workers, Ctrl-C ----------------------------------------------------------

QUICK_LINE = ["--vary", "s5.mean=1,1.5", "--firings", "2000", "--replications", "4",
              "--precision", "0.02", "--seed", "5"]


def test_resume_gives_the_same_document(tmp_path: Path) -> None:
    """A state file keeps every finished task; a run resumed from a complete or a partial
    state (tasks removed, as after an interruption) gives the same points; a state of another
    sweep is refused."""
    state = tmp_path / "state.json"
    kwargs = {"vary": ["s5.mean=1,1.5"], "firings": 2000, "replications": 4,
              "precision": 0.02, "seed": 5, "workers": 1, "quiet": True}
    first = sweep(LINE, resume=state, **kwargs)
    data = json.loads(state.read_text(encoding="utf-8"))
    assert data["document"] == "cyclecheck-sweep-state"
    assert len(data["runs"]) == sum(p["replications"] for p in first["points"])
    again = sweep(LINE, resume=state, **kwargs)
    assert again["points"] == first["points"]
    # an interrupted run: keep half of the replications of point 1 and no exact analysis
    data["runs"] = {k: v for k, v in data["runs"].items()
                    if not (k.startswith("1:") and int(k.split(":")[1]) % 2)}
    data["exact"].pop("1")
    state.write_text(json.dumps(data), encoding="utf-8")
    resumed = sweep(LINE, resume=state, **kwargs)
    assert resumed["points"] == first["points"]
    with pytest.raises(ModelError, match=r"another sweep.*seed"):
        sweep(LINE, resume=state, **dict(kwargs, seed=6))


def _children(pid: int) -> list[int]:
    """Child processes of ``pid`` (Linux /proc)."""
    found = []
    for task in Path(f"/proc/{pid}/task").iterdir():
        text = (task / "children").read_text()
        found += [int(x) for x in text.split()]
    return found


SLOW_LINE = ["--vary", "s5.mean=0.5:2:6", "--seed", "2", "--replications", "12",
             "--precision", "0.002"]


@pytest.fixture(scope="module")
def slow_reference(tmp_path_factory: pytest.TempPathFactory) -> dict:
    """A sweep of several seconds, run in one process: the numbers every other run of it must
    give."""
    out = tmp_path_factory.mktemp("ref") / "ref.json"
    done = cli("sweep", str(LINE), *SLOW_LINE, "--workers", "1", "--save", str(out), "--quiet")
    assert done.returncode == 0, done.stderr
    return json.loads(out.read_text(encoding="utf-8"))


@pytest.mark.slow
def test_a_killed_local_worker_changes_nothing(tmp_path: Path, slow_reference: dict) -> None:
    """A worker process killed (SIGKILL) mid-run: its tasks run again on a fresh pool, the
    user is told, and the document's points are those of the run in one process."""
    out = tmp_path / "run.json"
    proc = subprocess.Popen([str(SCRIPT), "sweep", str(LINE), *SLOW_LINE, "--workers", "2",
                             "--save", str(out)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 60
    while not _children(proc.pid) and time.monotonic() < deadline:
        time.sleep(0.05)
    time.sleep(0.5)
    victims = _children(proc.pid)
    assert victims and proc.poll() is None, "the run ended before a worker could be killed"
    os.kill(victims[0], signal.SIGKILL)
    _, stderr = proc.communicate(timeout=300)
    assert proc.returncode == 0, stderr
    assert "worker process died" in stderr
    assert json.loads(out.read_text(encoding="utf-8"))["points"] == slow_reference["points"]


@pytest.mark.slow
def test_ctrl_c_writes_nothing_and_the_run_resumes(tmp_path: Path, slow_reference: dict) -> None:
    """Ctrl-C mid-run: exit 130, no --csv or --save written, the state file whole; the run
    resumed from it gives the points of an uninterrupted run."""
    state, table, saved = tmp_path / "state.json", tmp_path / "t.csv", tmp_path / "r.json"
    args = [str(SCRIPT), "sweep", str(LINE), *SLOW_LINE, "--workers", "2", "--csv", str(table),
            "--save", str(saved), "--resume", str(state)]
    proc = subprocess.Popen(args, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 120
    while not state.exists() and time.monotonic() < deadline and proc.poll() is None:
        time.sleep(0.05)
    assert proc.poll() is None, "the run ended before it could be interrupted"
    proc.send_signal(signal.SIGINT)
    _, stderr = proc.communicate(timeout=120)
    assert proc.returncode == 130, stderr
    assert "interrupted" in stderr and "Traceback" not in stderr
    assert not table.exists() and not saved.exists()
    kept = json.loads(state.read_text(encoding="utf-8"))
    assert kept["runs"] or kept["exact"]
    done = subprocess.run(args, capture_output=True, text=True, timeout=300, check=False)
    assert done.returncode == 0, done.stderr
    assert "taken from" in done.stderr
    assert json.loads(saved.read_text(encoding="utf-8"))["points"] == slow_reference["points"]


TWO_MACHINES = """[model]
name = "two machines and a buffer"
[[transitions]]
id = "m1"
duration = { dist = "gamma", mean = 1.0, cv = 0.5 }
[[transitions]]
id = "m2"
duration = { dist = "lognormal", mean = 1.0, cv = 0.5 }
[[places]]
from = "m1"
to = "m2"
[[places]]
from = "m2"
to = "m1"
tokens = 2
label = "slots"
[[places]]
from = "m1"
to = "m1"
tokens = 1
[[places]]
from = "m2"
to = "m2"
tokens = 1
"""


def test_variability_and_buffers(tmp_path: Path) -> None:
    """Sweeping a law's cv and a buffer's slots: more variability lowers the throughput, more
    slots recover it (common practice, no source), every estimate lies above the cycle time of
    the mean durations (1, Baccelli et al. 1992, ch. 8), and the paired differences along the
    cv are positive intervals."""
    path = tmp_path / "two.toml"
    path.write_text(TWO_MACHINES, encoding="utf-8")
    doc = sweep(path, vary=["m2.cv=0.1,0.5,1.0", "slots.tokens=2,4"], firings=5000,
                precision=0.01, workers=1, quiet=True)
    table = {(p["values"]["m2.cv"], p["values"]["slots.tokens"]): p for p in doc["points"]}
    for slots in (2, 4):
        times = [table[cv, slots]["cycle_time"] for cv in (0.1, 0.5, 1.0)]
        assert times == sorted(times)
        for cv in (0.5, 1.0):
            diff = table[cv, slots]["differences"]["m2.cv"]
            assert diff["ci"][0] > 0, diff
    for cv in (0.1, 0.5, 1.0):
        assert table[cv, 4]["cycle_time_ci"][1] < table[cv, 2]["cycle_time_ci"][0]
    assert all(p["cycle_time_ci"][0] > p["bounds"]["lower"] == 1.0 for p in doc["points"])
