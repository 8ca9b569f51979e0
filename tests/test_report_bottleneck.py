"""Where to act on the review page: the bottleneck at the top, the sensitivity table, the
utilization per server, the warning of an unstable model, and the rules the document keeps.

The documents are hand-built (tests/report_documents.py). Numbers the page derives are
worked by hand beside each check; invented numbers (random estimates) are only shown, never
derived, and the tests say so.
"""

from __future__ import annotations

import copy
import functools
import re
from typing import Any

import pytest
from cyclecheck.reports import ReportError, render_page

from tests.report_documents import (
    fixed_document,
    line_document,
    loop_document,
    press_document,
    random_document,
    unstable_document,
)
from tests.test_report_page import section_text as _section_text
from tests.test_report_page import table_rows, visible_text


@functools.cache
def page_of(make: Any) -> str:
    """The page of an unchanged sample document, rendered once per module."""
    return render_page(make())


def section_text(page: str, name: str) -> str:
    """The section's visible text, with no space before closing punctuation (a unit is set in
    its own element, which the parser separates by a space)."""
    return re.sub(r" ([),.:;])", r"\1", _section_text(page, name))


def test_fixed_bottleneck_is_named_at_the_top_with_what_a_faster_element_gives() -> None:
    """Bakery tray loop: the oven (on the only critical circuit, 3 tokens) has dλ/dd = 1/3;
    12 min → 10.8 min gives (40.5 − 1.2) / 3 = 13.1 min (the tray loop stays critical: the
    loop through the check gives (36.5 − 1.2) / 3 = 11.77, the oven alone 10.8); the other
    nine elements of the loop share the derivative 1/3."""
    text = section_text(page_of(fixed_document), "verdict")
    assert "Bottleneck: transition bake (Tunnel oven) (exact)" in text
    assert "dλ/d(duration) = 0.3333: each minute added to its duration adds 0.3333 minute" in text
    assert "10 % faster (duration 12 min → 10.8 min): cycle time 13.1 min, instead of 13.5 min." \
        in text
    assert "9 other elements have the same derivative (they share its circuit)" in text
    assert "95 %" not in text  # exact: no interval


def test_random_bottleneck_shows_intervals_and_overlapping_elements() -> None:
    """Shuttle loop (invented sensitivities): the dock's interval [0.55, 0.67] overlaps
    those of yard (high 0.64), place 0 (0.61), place 2 (0.60) and depot (0.57): 4 others,
    counted from the document; the dock lies on the critical circuit of the mean durations."""
    text = section_text(page_of(random_document), "verdict")
    assert "Bottleneck: transition dock (Loading dock)" in text
    assert "dλ/d(mean duration) = 0.61 (95 % interval 0.55 – 0.67)" in text
    assert ("10 % faster (mean duration 3 min → 2.7 min): cycle time 10.44 min (95 % interval "
            "10.23 – 10.65), instead of 10.62 min.") in text
    assert "The intervals of 4 other elements overlap the bottleneck's" in text
    assert "It lies on the critical circuit of the mean durations (dock → gate → yard → depot " \
           "→ dock)" in text


def test_bottleneck_off_the_mean_value_circuit_is_said() -> None:
    """Two presses: the mean durations make press A critical (10 > 9.75 > 9.5), but the
    document's bottleneck is press B: the page says the two differ, in the verdict area of a
    flat `analyze` document (its keys at the top level)."""
    page = page_of(press_document)
    text = section_text(page, "verdict")
    assert "Bottleneck: transition B (Press B)" in text
    assert "This differs from the critical circuit of the mean durations (A → A)" in text
    assert "mean duration 9.5 s → 8.55 s" in text  # 0.9 × 9.5
    assert "each second added to its mean duration adds 0.81 second" in text
    assert "No SimPy simulation was run: the estimates come from the max-plus recursion" in text


def test_documents_without_the_new_keys_still_render() -> None:
    """An older document (no sensitivity, bottleneck, servers or unbounded places) renders
    without a bottleneck statement or a sensitivity table; its utilization stays."""
    document = fixed_document()
    for key in ("sensitivity", "bottleneck", "servers", "unbounded_places"):
        del document["analysis"][key]
    page = render_page(document)
    assert "Bottleneck:" not in visible_text(page)
    assert "Sensitivity of the cycle time" not in page
    assert "Utilization is the share of time a transition was busy, per server" in \
        section_text(page, "act")
    assert 'id="unstable"' not in page


def test_sensitivity_table_is_sorted_and_counts_what_it_leaves_out() -> None:
    """A line of 60 stations: 60 transitions and 178 places have a derivative, the table
    shows the 10 largest (s17 and its self-loop first, derivative 1) and says 228 more."""
    page = page_of(lambda: line_document(60))
    rows = table_rows(page, "Sensitivity of the cycle time")
    assert rows[0] == ["Rank", "Element", "dλ/d(value)", "On the critical circuit"]
    assert len(rows) == 11
    assert rows[1] == ["1", "transition s17", "1", "◆ yes"]
    assert rows[2] == ["2", "place 16 (s17 → s17)", "1", "◆ yes"]
    assert rows[3][2] == "0"
    assert "And 228 more elements with smaller derivatives" in section_text(page, "act")


def test_random_sensitivity_table_has_intervals_and_mean_value_marks() -> None:
    rows = table_rows(page_of(random_document), "Sensitivity of the cycle time")
    assert rows[0] == ["Rank", "Element", "dλ/d(mean)", "95 % interval",
                       "On the critical circuit of the mean durations"]
    assert rows[1] == ["1", "transition dock (Loading dock)", "0.61", "0.55 – 0.67", "◆ yes"]
    assert rows[-1] == ["9", "place 4 (dock → dock, “one berth”)", "0.02", "0.00 – 0.05", "no"]


def test_utilization_per_server_busiest_first() -> None:
    """Shuttle loop: busiest first, the dock's single berth is 1 server, stops without a
    self-loop have no limit; the five-station loop: U = X·D with X = 1 / 2.6311 (the
    utilization law; Denning & Buzen 1978): s5 1.5 / 2.6311 = 57.0 %."""
    page = page_of(random_document)
    rows = table_rows(page, "Utilization per server")
    assert rows[0] == ["Transition", "Label", "Utilization (max-plus)", "Utilization (SimPy)",
                       "Servers"]
    assert [r[0] for r in rows[1:]] == ["dock", "yard", "depot", "gate"]
    assert rows[1][-1] == "1" and rows[2][-1] == "no limit"
    assert "mean number of busy servers divided by the number of servers" in \
        section_text(page, "act")
    loop = table_rows(page_of(loop_document), "Utilization per server")
    assert loop[1] == ["s5", f"{100 * 1.5 / 2.6311:.1f} %", "1"]


def test_unstable_model_is_warned_first_in_an_hourly_rate() -> None:
    """Open station: the buffer gains 1/12 − 1/15 = 1/60 part per second, 60 per hour
    (worked by hand); the warning is the first section of the page."""
    page = page_of(unstable_document)
    main = page[page.index("<main>"):]
    assert main.index('id="unstable"') < main.index('id="verdict"')
    text = section_text(page, "unstable")
    assert "The model is unstable" in text
    assert "Unstable: the buffer arrive → serve (“queue”) grows by 60 tokens per hour" in text
    document = unstable_document()
    document["model"]["time_unit"] = "min"
    assert "grows by 1 tokens per hour" in section_text(render_page(document), "unstable")
    document["model"]["time_unit"] = ""
    assert "grows by 0.01667 tokens per time unit" in section_text(render_page(document),
                                                                   "unstable")
    assert 'id="unstable"' not in page_of(fixed_document)


def _fixed(change: Any) -> dict[str, Any]:
    document = fixed_document()
    change(document)
    return document


@pytest.mark.parametrize(
    ("change", "item", "rule"),
    [
        (lambda d: d["analysis"]["sensitivity"][0].update(element="machine"),
         "analysis.sensitivity[0].element", "must be 'transition' or 'place'"),
        (lambda d: d["analysis"]["sensitivity"][0].pop("id"), "analysis.sensitivity[0].id",
         "is required"),
        (lambda d: d["analysis"]["sensitivity"][0].update(id="oven"),
         "analysis.sensitivity[0].id", "must name a transition of model.transitions"),
        (lambda d: d["analysis"]["sensitivity"][7].update(index=13),
         "analysis.sensitivity[7].index", "must be the index of a place of the model"),
        (lambda d: d["analysis"]["sensitivity"][7].pop("index"),
         "analysis.sensitivity[7].index", "is required"),
        (lambda d: d["analysis"]["sensitivity"][1].update(ci=[0.4, 0.3]),
         "analysis.sensitivity[1].ci", "the low end 0.4 must not exceed the high end 0.3"),
        (lambda d: d["analysis"]["sensitivity"][1].update(ci=[0.3]),
         "analysis.sensitivity[1].ci", "must be a list of 2 values, not 1"),
        (lambda d: d["analysis"]["sensitivity"][1].update(derivative=float("nan")),
         "analysis.sensitivity[1].derivative", "must be a finite number"),
        (lambda d: d["analysis"]["bottleneck"].update(faster_10_percent={"cycle_time": "x"}),
         "analysis.bottleneck.faster_10_percent.cycle_time", "must be a number"),
        (lambda d: d["analysis"].update(unbounded_places=[
            {"index": 3, "from": "bake", "to": "check", "status": "growing"}]),
         "analysis.unbounded_places[0].status", "must be 'unstable' or 'critical load'"),
        (lambda d: d["analysis"]["bottleneck"].update(cycle_time_if_10_percent_faster="13"),
         "analysis.bottleneck.cycle_time_if_10_percent_faster", "must be a number"),
        (lambda d: d["analysis"].update(unbounded_places=[
            {"index": 3, "from": "bake", "to": "cool", "growth_rate": 0.1}]),
         "analysis.unbounded_places[0].to", "must be 'check', the to of model.places[3]"),
        (lambda d: d["analysis"].update(unbounded_places=[{"index": 3, "from": "bake"}]),
         "analysis.unbounded_places[0].to", "is required"),
        (lambda d: d["analysis"]["utilization"].update(bake=1.2),
         "analysis.utilization.bake", "busy servers per server must be at most 1, not 1.2"),
        (lambda d: d["analysis"]["utilization"].update(bake=-0.1),
         "analysis.utilization.bake", "must be >= 0"),
        (lambda d: d["analysis"]["utilization"].update(oven=0.5),
         "analysis.utilization.oven", "must name a transition"),
        (lambda d: d["analysis"]["servers"].update(bake=0), "analysis.servers.bake",
         "must be >= 1, not 0"),
        (lambda d: d["simulation"].update(servers={"mix": 1.5}), "simulation.servers.mix",
         "must be a whole number"),
    ],
)
def test_bad_new_keys_are_named(change: Any, item: str, rule: str) -> None:
    """Each broken rule of the new keys raises ReportError naming the key and the rule."""
    with pytest.raises(ReportError) as caught:
        render_page(_fixed(change))
    assert caught.value.item == item
    assert rule in caught.value.rule


def test_old_utilization_above_one_is_kept_without_servers() -> None:
    """Documents written before `servers` gave busy time per horizon, which may exceed 1 for
    a transition whose firings overlap: without `servers` the value is shown, not refused."""
    document = fixed_document()
    del document["analysis"]["servers"]
    document["analysis"]["utilization"]["proof"] = 1.5
    assert "150.0 %" in section_text(render_page(document), "act")


def test_ids_of_a_cut_model_are_not_checked_by_name() -> None:
    """A model listed in part (n_transitions above the list) may name transitions the list
    leaves out; the rules accept them and the page names them as written."""
    document = random_document()
    document["model"]["n_transitions"] = 9000
    document["analysis"]["utilization"]["t8000"] = 0.5
    document["analysis"]["servers"]["t8000"] = 1
    document["analysis"]["sensitivity"].append({"element": "transition", "id": "t8000",
                                                "derivative": 0.1, "ci": [0.0, 0.2]})
    page = render_page(document)
    assert "transition t8000" in section_text(page, "act")


def test_a_random_bottleneck_without_interval_or_faster_value() -> None:
    """Optional parts stay out when missing: no interval, no 10 % line."""
    document = copy.deepcopy(random_document())
    neck = document["analysis"]["bottleneck"]
    for key in ("ci", "cycle_time_if_10_percent_faster", "cycle_time_if_10_percent_faster_ci"):
        neck.pop(key)
    text = section_text(render_page(document), "verdict")
    assert "dλ/d(mean duration) = 0.61: each minute" in text
    assert "10 % faster" not in text and "other elements overlap" not in text


def test_the_builders_spelling_of_the_keys() -> None:
    """The keys as the document builder writes them: the bottleneck's ``faster_10_percent``
    (a first-order value), ``mean`` and ``on_mean_critical_circuit``; one-sided derivatives
    [decrease, increase] of a fixed model where circuits tie; a derivative the estimate could
    not give (null); ``sensitivity_omitted``; an unbounded place at critical load with no
    rate; ``busy_servers`` of a transition without a self-loop. The numbers are invented;
    the 10 % line is 0.9 × 12 = 10.8 and the value the document gives."""
    document = fixed_document()
    analysis = document["analysis"]
    neck = analysis["bottleneck"]
    del neck["cycle_time_if_10_percent_faster"]
    neck.update(mean=12.0, name="bake", on_mean_critical_circuit=True, ci=[0.25, 1 / 3],
                faster_10_percent={"mean": 10.8, "cycle_time": 13.2, "change": -0.3})
    analysis["sensitivity"][2]["ci"] = [0.25, 1 / 3]
    analysis["sensitivity"][3]["derivative"] = None
    analysis.update(sensitivity_exact=True, sensitivity_omitted=100,
                    busy_servers={"check": 0.4}, unbounded_places=[
                        {"index": 3, "from": "bake", "to": "check", "growth_rate": None,
                         "status": "critical load", "from_cycle_time": 13.5,
                         "to_cycle_time": 13.5, "text": "critical load: ..."}])
    analysis["servers"]["check"] = None
    analysis["utilization"]["check"] = None
    document["simulation"]["utilization"]["check"] = None
    page = page_of(lambda: document)
    top = section_text(page, "verdict")
    assert ("10 % faster (duration 12 min → 10.8 min): cycle time 13.2 min to first order "
            "(from the derivative), instead of 13.5 min.") in top
    assert "Shortening it changes λ by 0.25 per minute, lengthening it by 0.3333" in top
    rows = table_rows(page, "Sensitivity of the cycle time")
    by_element = {r[1]: r for r in rows[1:]}
    assert rows[0][3] == "Shorter / longer"
    assert by_element["transition bake (Tunnel oven)"][3] == "0.25 / 0.3333"
    assert "transition check (Quality check)" not in by_element  # null derivative: last
    act = section_text(page, "act")
    assert "And 109 more elements with smaller derivatives." in act  # 19 − 10 + 100
    assert ["check", "Quality check", "–", "–", "no limit (0.4 busy)"] in \
        table_rows(page, "Utilization per server")
    warning = section_text(page, "unstable")
    assert "The model is at critical load" in warning
    assert "Critical load: the buffer bake → check (“sample”) is fed as fast as it is " \
           "emptied" in warning
    assert "bake fires every 13.5 min, check every 13.5 min" in warning
