"""The drawing of the event graph: igraph's Sugiyama layers folded into bands that fit the page,
labels placed without overlap, large graphs drawn in part with a map of their components.

Geometry is checked in layout units with the layout's own text-size estimate; the browser test
(tests/test_report_browser.py) measures the same in Chromium's rendering.
"""

from __future__ import annotations

import math
import os
import re
import subprocess
import sys
from pathlib import Path
from typing import Any

from cyclecheck.reports import layout, render_page
from cyclecheck.reports.layers import print_scale
from hypothesis import HealthCheck, given, settings

from tests.report_documents import line_document
from tests.strategies import live_event_graphs
from tests.test_report_page import section_text, visible_text


def _specs(document: dict[str, Any]) -> tuple[list[str], list[layout.PlaceSpec]]:
    model = document["model"]
    return ([t["id"] for t in model["transitions"]],
            [layout.PlaceSpec(i, p["from"], p["to"], p["tokens"])
             for i, p in enumerate(model["places"])])


def test_a_long_line_is_folded_into_bands_that_fit_the_page() -> None:
    """30 and 60 stations: several bands, no wider than the screen's column (9 in), printed
    on A4 (text block 184 mm wide, the graph up to 180 mm high) at full size for 30 stations
    and at least at 75 % for 60 (8 pt ids, 7 pt labels: no less than 6 and 5.2 pt on paper),
    read like text: every token-free place leads to a later position in reading order
    (band by band, left to right)."""
    for n, smallest in ((30, 1.0), (60, 0.75)):
        ids, places = _specs(line_document(n))
        drawing = layout.layout_graph(ids, places, [["s17"]])
        assert drawing.kind == "layered" and drawing.bands >= 3
        xmin, xmax, ymin, ymax = drawing.bounds()
        assert (xmax - xmin) * layout.INCH <= 9.0 + 1e-9
        assert print_scale(xmax - xmin, ymax - ymin + 0.6) >= smallest  # with the legend
        rows = sorted({y for _, y in drawing.nodes.values()}, reverse=True)
        assert len(rows) == drawing.bands  # one row per band for a line
        reading = {t: (rows.index(y), x) for t, (x, y) in drawing.nodes.items()}
        for p in places:
            if p.tokens == 0 and p.source != p.target:
                assert reading[p.target] > reading[p.source], p


def _boxes(drawing: layout.Drawing) -> tuple[list[tuple[float, ...]], list[tuple[float, ...]]]:
    """Label boxes, and the boxes of transitions and place circles, in layout units."""
    labels = []
    for label in drawing.labels:
        w, h = layout.text_size(label.text, label.points, label.bold)
        labels.append((label.centre[0] - w / 2, label.centre[1] - h / 2,
                       label.centre[0] + w / 2, label.centre[1] + h / 2))
    hw, hh = drawing.box_width / 2, drawing.box_height / 2
    solid = [(x - hw, y - hh, x + hw, y + hh) for x, y in drawing.nodes.values()]
    r = layout.PLACE_RADIUS
    solid += [(a.mid[0] - r, a.mid[1] - r, a.mid[0] + r, a.mid[1] + r) for a in drawing.arcs]
    return labels, solid


def _meet(a: tuple[float, ...], b: tuple[float, ...]) -> bool:
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


def _assert_apart(drawing: layout.Drawing) -> None:
    labels, solid = _boxes(drawing)
    for i, a in enumerate(labels):
        assert not any(_meet(a, b) for b in labels[i + 1:]), drawing.labels[i]
        assert not any(_meet(a, b) for b in solid), drawing.labels[i]


def test_labels_keep_clear_of_each_other_boxes_and_places_on_a_long_line() -> None:
    ids, places = _specs(line_document(60))
    text = {p.index: f"{p.index / 7:.3g}" for p in places}
    drawing = layout.layout_graph(ids, places, [["s17"]], place_text=text, bottleneck="s17")
    assert len(drawing.labels) + drawing.dropped_labels == len(places) + 1
    assert drawing.dropped_labels == 0
    _assert_apart(drawing)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(live_event_graphs(max_transitions=14, max_places=36))
def test_labels_keep_clear_on_any_live_graph(graph: Any) -> None:
    """Whatever the graph, a placed label meets no other label, box or place circle (a
    label with no free spot is dropped and counted instead)."""
    ids = [f"t{i}" for i in range(graph.n_transitions)]
    places = [layout.PlaceSpec(p, ids[int(graph.source[p])], ids[int(graph.target[p])],
                               int(graph.tokens[p])) for p in range(graph.n_places)]
    drawing = layout.layout_graph(ids, places, place_text={p.index: "88.8 %" for p in places},
                                  bottleneck=ids[0])
    # Every drawn place asked for a label, and so did the bottleneck (a dense graph is drawn
    # in part: the places left out have no label).
    assert len(drawing.labels) + drawing.dropped_labels == len(drawing.arcs) + 1
    _assert_apart(drawing)
    for arc in drawing.arcs:
        assert (len(arc.points) - 1) % 3 == 0  # cubic segments


def test_the_figure_is_drawn_at_the_layout_scale() -> None:
    """The SVG's view box is the drawing's extent at INCH inches per unit (72 pt per inch),
    so the text sizes the layout planned with are the ones drawn; a small graph is then
    shown larger as a whole (its width and height scaled alike)."""
    from cyclecheck.reports.figures import graph_figure

    ids, places = _specs(line_document(30))
    drawing = layout.layout_graph(ids, places, [["s17"]])
    svg = graph_figure(drawing)
    width, _ = (float(v) for v in re.search(r'viewBox="0 0 ([\d.]+) ([\d.]+)"',
                                                 svg).groups())
    xmin, xmax, _, _ = drawing.bounds()
    assert math.isclose(width, (xmax - xmin + 0.3) * layout.INCH * 72, rel_tol=1e-3)
    shown = float(re.search(r'width="([\d.]+)pt"', svg).group(1))
    assert shown == width  # wide enough: not enlarged
    small = graph_figure(layout.layout_graph(["a", "b"], [
        layout.PlaceSpec(0, "a", "b", 0), layout.PlaceSpec(1, "b", "a", 1)]))
    box = [float(v) for v in re.search(r'viewBox="0 0 ([\d.]+) ([\d.]+)"', small).groups()]
    shown_w = float(re.search(r'width="([\d.]+)pt"', small).group(1))
    shown_h = float(re.search(r'height="([\d.]+)pt"', small).group(1))
    assert shown_w > box[0] and math.isclose(shown_w / box[0], shown_h / box[1], rel_tol=1e-3)


def _components_document() -> dict[str, Any]:
    """Three rings of 30 stations in series (A → B → C), durations 1 min, 2, 3 and 1 tokens.

    Worked by hand: ring A runs at 30 / 2 = 15 min, ring B at 30 / 3 = 10 on its own but
    waits for A (15), ring C at 30 / 1 = 30: the cycle times are 15, 15 and 30 (the largest
    of the components upstream, DESIGN.md), the critical circuit is ring C, and the place
    B → C gains 1/15 − 1/30 = 1/30 token per minute, 2 per hour.
    """
    document = line_document(3)
    ids: list[str] = []
    places: list[dict[str, Any]] = []
    tokens = {"a": 2, "b": 3, "c": 1}
    for ring in "abc":
        names = [f"{ring}{i}" for i in range(1, 31)]
        ids += names
        for i, t in enumerate(names):
            last = i == len(names) - 1
            places.append({"index": len(places), "from": t, "to": names[(i + 1) % 30],
                           "tokens": tokens[ring] if last else 0, "hold": "0",
                           "mean_hold": 0.0})
    for source, target in (("a30", "b1"), ("b30", "c1")):
        places.append({"index": len(places), "from": source, "to": target, "tokens": 0,
                       "hold": "0", "mean_hold": 0.0})
    by_t = {t: 30.0 if t.startswith("c") else 15.0 for t in ids}
    document["model"].update(
        name="Three rings", n_transitions=90, n_places=len(places), places=places,
        transitions=[{"id": t, "duration": "1", "mean_duration": 1.0} for t in ids])
    document.update(
        cycle_time=30.0, cycle_time_ci=[30.0, 30.0], throughput=1 / 30,
        cycle_time_by_transition=by_t, critical_circuits=[[f"c{i}" for i in range(1, 31)]],
        strongly_connected=False, slack=None, sensitivity=None, bottleneck=None,
        critical_places=None,
        unbounded_places=[{"index": 91, "from": "b30", "to": "c1", "growth_rate": 1 / 30}])
    return document


def test_a_large_graph_gets_a_map_of_its_components() -> None:
    page = render_page(_components_document())
    graph = section_text(page, "graph")
    # Drawn: ring C (30) and b30, the one transition a place away from it.
    assert "59 transitions and 61 places are not shown" in graph
    assert "The 3 strongly connected components of the graph" in graph
    svg = page[page.index('<figure id="figure-components">'):]
    svg = svg[:svg.index("</figure>")]
    texts = re.findall(r"<text[^>]*>([^<]*)</text>", svg)
    for expected in ("C1 · 30 · λ 15", "C2 · 30 · λ 15", "C3 · 30 · λ 30"):
        assert expected in texts, texts
    assert "grows by 2 tokens per hour" in section_text(page, "unstable")


def test_the_bottleneck_is_drawn_in_a_large_graph_even_off_the_critical_circuit() -> None:
    """80 stations: only the neighbourhoods are drawn, the bottleneck's included (an invented
    derivative makes s50 the largest)."""
    document = line_document(80)
    sensitivity = document["sensitivity"]
    sensitivity[49]["derivative"] = 1.5
    sensitivity[49]["ci"] = [1.5, 1.5]
    document["bottleneck"] = dict(sensitivity[49])
    page = render_page(document)
    svg = page[page.index('<figure id="figure-graph">'):]
    texts = re.findall(r"<text[^>]*>([^<]*)</text>", svg[:svg.index("</figure>")])
    assert {"s49", "s50", "s51", "s16", "s17", "s18", "bottleneck"} <= set(texts)
    assert "s30" not in texts
    assert "only the critical circuits, the bottleneck and their neighbours are drawn" in \
        visible_text(page)


def test_a_folded_page_is_the_same_in_a_fresh_interpreter() -> None:
    """Same document, same bytes: igraph's layout and the label placement depend on nothing
    but the document (another hash seed, another process)."""
    code = ("import sys; from tests.report_documents import line_document;"
            "from cyclecheck.reports import render_page;"
            "sys.stdout.write(render_page(line_document(30)))")
    root = Path(__file__).resolve().parent.parent
    out = subprocess.run([sys.executable, "-c", code], cwd=root, check=True, text=True,
                         env=dict(os.environ, PYTHONHASHSEED="4321"), capture_output=True,
                         encoding="utf-8").stdout
    assert out == render_page(line_document(30))


def test_token_counts_fit_their_circle() -> None:
    assert [layout.token_text(n) for n in (3, 999, 1000, 12_345, 2_500_000, 7 * 10**9)] == \
        ["3", "999", "1k", "12k", "2M", "7G"]
    assert len(layout.token_text(2**53)) <= 4


def test_a_dense_graph_is_drawn_in_part_to_stay_legible() -> None:
    """40 transitions in a chain with 80 long token-carrying places back (seeded, invented):
    drawn whole it would print far below 65 %, so only the critical circuit and its
    neighbours are drawn, and that prints at 65 % or more; a sparse line of 30 stays whole."""
    import numpy as np

    rng = np.random.default_rng(1)
    ids = [f"m{i}" for i in range(40)]
    places = [layout.PlaceSpec(i - 1, ids[int(rng.integers(max(0, i - 4), i))], ids[i], 0)
              for i in range(1, 40)]
    while len(places) < 120:
        a, b = sorted(int(v) for v in rng.integers(0, 40, 2))
        if a != b:
            places.append(layout.PlaceSpec(len(places), ids[b], ids[a], 1))
    circuit = ["m5", "m6", "m7"]
    drawing = layout.layout_graph(ids, places, [circuit])
    assert drawing.partial and set(circuit) <= set(drawing.nodes)
    xmin, xmax, ymin, ymax = drawing.bounds()
    assert print_scale(xmax - xmin, ymax - ymin) >= layout.MIN_PRINT_SCALE
    ids30, places30 = _specs(line_document(30))
    assert not layout.layout_graph(ids30, places30, [["s17"]]).partial


def test_igraph_gets_layers_and_one_layer_steps_only(monkeypatch: Any) -> None:
    """igraph 1.0's layout_sugiyama reads uninitialised memory on edges that span several
    layers (valgrind; it crashed the suite now and then): the layout hands it the layers and
    cuts every place into downward steps of one layer through dummy vertices."""
    import igraph

    calls = []
    original = igraph.Graph.layout_sugiyama

    def spy(graph: Any, layers: Any = None, **options: Any) -> Any:
        assert layers is not None
        for a, b in graph.get_edgelist():
            assert layers[b] == layers[a] + 1, (a, b, layers)
        calls.append(graph.vcount())
        return original(graph, layers=layers, **options)

    monkeypatch.setattr(igraph.Graph, "layout_sugiyama", spy)
    ids, places = _specs(line_document(20))
    places.append(layout.PlaceSpec(len(places), "s20", "s1", 5))  # spans every layer
    drawing = layout.layout_graph(ids, places, [["s17"]])
    assert calls and calls[0] > len(ids)  # dummy vertices were added
    assert set(drawing.nodes) == set(ids)


def _ring_toml(path: Path, n: int, rings: int = 1) -> Path:
    """``rings`` rings of ``n`` stations and one pallet each, ring i feeding ring i + 1."""
    lines = ['[model]', 'name = "rings"', 'time_unit = "s"', '']
    for r in range(rings):
        for i in range(n):
            lines += ["[[transitions]]", f'id = "r{r}s{i}"', f"duration = {1 + (i % 3)}", ""]
    for r in range(rings):
        for i in range(n):
            lines += ["[[places]]", f'from = "r{r}s{i}"', f'to = "r{r}s{(i + 1) % n}"',
                      f"tokens = {1 if i == n - 1 else 0}", ""]
        if r:
            lines += ["[[places]]", f'from = "r{r - 1}s0"', f'to = "r{r}s0"', ""]
    path.write_text("\n".join(lines), encoding="utf-8")
    return path


def test_a_model_listed_in_part_renders_with_the_whole_graph_s_components(
        tmp_path: Path, monkeypatch: Any) -> None:
    """A document lists at most MAX_LISTED transitions and places (lowered here to 30): its
    places and critical circuits may name transitions it does not list. The page renders, and
    the components are those the analysis counted on the whole graph, not those of the listed
    part (which alone would look cut into pieces)."""
    from cyclecheck.simulate import analyze, result

    monkeypatch.setattr(result, "MAX_LISTED", 30)
    ring = analyze(_ring_toml(tmp_path / "ring.toml", 80), quiet=True)
    assert len(ring["model"]["transitions"]) == 30 and ring["components"] == 1
    text = visible_text(render_page(ring))
    assert "The graph is strongly connected: one component of 80 transitions." in text
    two = analyze(_ring_toml(tmp_path / "two.toml", 40, rings=2), quiet=True)
    assert two["components"] == 2
    text = visible_text(render_page(two))
    assert "the whole graph has 2 components" in text
