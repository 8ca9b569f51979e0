"""The example models: each cycle time is worked by hand in the model file's comment.

The hand computation enumerates the model's simple circuits and takes the largest ratio
(weight / tokens): the characterisation of the cycle time of a timed event graph in Baccelli,
Cohen, Olsder & Quadrat (1992), *Synchronization and Linearity*, ch. 2. The test repeats that
enumeration independently with networkx, then checks the project's analysis against both.
"""

from __future__ import annotations

import itertools
from pathlib import Path

import networkx as nx
import pytest
from cyclecheck.algebra.analysis import analyze_graph
from cyclecheck.simulate.modelfile import load_model

MODELS = Path(__file__).resolve().parents[1] / "models"

# Values worked by hand in each file's header comment.
HAND_WORKED = {
    "packaging_cell.toml": (17.375, ["fill", "cap", "label", "pack"]),
    "shuttle_loop.toml": (227.5, ["depart_A", "depart_B", "depart_C"]),
    "image_pipeline.toml": (30.5 / 3, ["ingest", "decode", "denoise", "segment", "fuse", "encode"]),
    "batch_plant.toml": (270.0, ["react_A", "clean_A", "react_B", "clean_B"]),
    # random durations: the cycle time of the mean durations (the arrivals' 4 min)
    "probe_line.toml": (4.0, ["arrive"]),
}


def brute_force_cycle_time(graph) -> float:
    """Largest circuit ratio over every simple circuit and every choice of parallel places."""
    multi: dict[tuple[int, int], list[int]] = {}
    for p in range(graph.n_places):
        multi.setdefault((int(graph.source[p]), int(graph.target[p])), []).append(p)
    digraph = nx.DiGraph(list(multi))
    best = float("-inf")
    for cycle in nx.simple_cycles(digraph):
        arcs = list(zip(cycle, cycle[1:] + cycle[:1], strict=True))
        for choice in itertools.product(*(multi[a] for a in arcs)):
            weight = sum(float(graph.hold[p] + graph.duration[graph.target[p]]) for p in choice)
            tokens = sum(int(graph.tokens[p]) for p in choice)
            best = max(best, weight / tokens)
    return best


@pytest.mark.parametrize("name", sorted(HAND_WORKED))
def test_example_cycle_time_matches_hand_computation(name: str) -> None:
    """Howard, brute force and the hand computation in the file agree on every example."""
    expected, circuit = HAND_WORKED[name]
    model = load_model(MODELS / name)
    graph = model.graph()
    analysis = analyze_graph(graph)
    assert analysis.cycle_time == pytest.approx(expected, rel=1e-12)
    assert brute_force_cycle_time(graph) == pytest.approx(expected, rel=1e-12)
    assert analysis.certificate.holds
    critical = [[model.transition_ids[t] for t in c.transitions] for c in analysis.howard.circuits]
    rotations = [circuit[i:] + circuit[:i] for i in range(len(circuit))]
    assert any(c in rotations for c in critical), critical


def test_every_bundled_model_loads_and_is_live() -> None:
    """Every TOML file in models/ is a valid, live model."""
    files = sorted(MODELS.glob("*.toml"))
    assert len(files) >= 5
    for path in files:
        model = load_model(path)
        assert model.n_transitions > 0
        assert analyze_graph(model.graph()).certificate.holds
