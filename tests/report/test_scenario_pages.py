"""A plan made under a scenario says what the scenario assumed: its page's box, its workbook's
summary sheet and its summary.json, from `rebalance compare` and `rebalance replan --scenario`.

A practitioner's reading of the demo storm comparison: the storm's page showed the 2027 hiring
cap of 670,000 with no word that 150,000 of it was the scenario's.
"""

from __future__ import annotations

import html
import json
from functools import lru_cache
from pathlib import Path

from openpyxl import load_workbook
from report_cases import TINY, cli, page_text, scratch_folder

from rebalance import read_instance
from rebalance.analysis.scenario_files import (
    BudgetChange,
    DemandChange,
    Scenario,
    apply_scenario,
    read_scenario,
)
from rebalance.report.html import render_html
from rebalance.report.htmlparts import SCENARIO_FIGURES, scenario_box
from rebalance.report.inputs import SCENARIO_KEY, ScenarioSummary, report_data_from_folder
from rebalance.report.scenario_notes import budget_words, demand_words, scenario_entry

SCENARIO = """name = "b-surge"
description = "Review rush at B in the second half"

[[demand]]
offices = ["B"]
skills = ["review"]
periods = ["2027-Q3", "2027-Q4"]
multiplier = 1.5

[[budget]]
years = ["2027"]
hiring_add = 20000
"""
# By hand from tests/data/tiny: demand.csv sums to 9.5 FTE-periods (1 + 0.5 + 0.5 + 1 + 0.5
# at A, 1 + 2 + 2 + 1 at B); B's review of 2.0 and 1.0 in 2027-Q3/Q4 times 1.5 adds 1.5, so
# 11.0.  budget.csv's 2027 hiring cap is 40,000, plus 20,000 is 60,000 (no currency is set).
EXPECTED = {
    "name": "b-surge",
    "description": "Review rush at B in the second half",
    "demand": ["demand for review at B in 2027-Q3 and 2027-Q4 multiplied by 1.5",
               "in all, 11.0 FTE-periods of demand, against 9.5 in the instance's data (+1.5)"],
    "budget": ["hiring cap of 2027 raised by 20,000",
               "2027 hiring cap: 60,000 under the scenario, 40,000 in the instance's data"],
}


@lru_cache(maxsize=1)
def _runs() -> tuple[Path, Path, Path]:
    """A compare of tiny under the scenario, and a re-plan of its base plan under it."""
    root = scratch_folder("rebalance-scenario-pages-")
    scenario = root / "surge.toml"
    scenario.write_text(SCENARIO)
    out, again = root / "compare", root / "replan"
    done = cli("compare", str(TINY), "--scenario", str(scenario), "-o", str(out), "--gap", "0",
               "-q")
    assert done.returncode == 0, done.stderr
    done = cli("replan", str(TINY), "--from", str(out), "--at", "2027-Q3", "-o", str(again),
               "--gap", "0", "-q", "--scenario", str(scenario))
    assert done.returncode == 0, done.stderr
    return scenario, out, again


def _box_text(page: str) -> str:
    start = page.index('<aside class="scenario-box"')
    return html.unescape(page_text(page[start:page.index("</aside>", start)]))


def _assert_box(page: str) -> None:
    box = _box_text(page)
    for text in ("Scenario b-surge.", EXPECTED["description"], *EXPECTED["demand"],
                 *EXPECTED["budget"], SCENARIO_FIGURES):
        assert text in box, text
    # Near the top: before the first section of figures.
    assert page.index("scenario-box") < page.index('<section id="glance"')


def test_compare_writes_what_the_scenario_assumed_into_its_folder() -> None:
    _, out, _ = _runs()
    sub = out / "scenarios" / "b-surge"
    summary = json.loads((sub / "summary.json").read_text())
    assert summary[SCENARIO_KEY] == EXPECTED
    assert summary["scenario"] == "b-surge"  # the name alone, as 'rebalance replan' reads it
    _assert_box((sub / "report.html").read_text(encoding="utf-8"))
    # The base plan's page is the instance's own data: no box.
    assert '<aside class="scenario-box"' not in (out / "report.html").read_text(encoding="utf-8")
    assert SCENARIO_KEY not in json.loads((out / "summary.json").read_text())


def test_the_scenario_workbook_says_it_at_the_top_of_its_summary() -> None:
    _, out, _ = _runs()
    rows = [r[:2] for r in load_workbook(out / "scenarios" / "b-surge" / "plan.xlsx")[
        "summary"].iter_rows(values_only=True) if r[0]]
    labels = [label for label, _ in rows]
    top = labels.index("Scenario b-surge")
    assert top < labels.index("Headline")
    assert rows[top + 1:top + 6] == [
        ("description", EXPECTED["description"]),
        *(("demand", text) for text in EXPECTED["demand"]),
        *(("budgets", text) for text in EXPECTED["budget"])]
    assert "Headline" not in labels[:top] and "Scenario" not in " ".join(
        str(label) for label in labels[:top])
    base = [r[0] for r in load_workbook(out / "plan.xlsx")["summary"].iter_rows(
        values_only=True) if r[0]]
    assert not any(str(label).startswith("Scenario ") for label in base)


def test_rebalance_report_redraws_the_same_box_from_the_folder() -> None:
    scenario, out, _ = _runs()
    sub = out / "scenarios" / "b-surge"
    instance = read_instance(TINY)
    # The scenario's own data, as compare drew the page (the folder stores no instance path).
    applied = apply_scenario(instance, read_scenario(scenario, instance))
    again = render_html(report_data_from_folder(sub, applied))
    assert _box_text(again) == _box_text((sub / "report.html").read_text(encoding="utf-8"))


def test_replan_under_a_scenario_says_what_it_assumed() -> None:
    _, _, again = _runs()
    summary = json.loads((again / "summary.json").read_text())
    assert summary["replan"] == {"from_period": "2027-Q3", "scenario": "b-surge"}
    assert summary[SCENARIO_KEY] == EXPECTED
    _assert_box((again / "report.html").read_text(encoding="utf-8"))


def test_a_folder_without_the_key_or_with_a_broken_one_has_no_box() -> None:
    # Folders written before the key (or edited by hand) still draw, without a box.
    for raw in (None, "storm", [], {}, {"name": ""}, {"description": "x"}):
        assert ScenarioSummary.from_raw(raw) is None
    assert scenario_box(None) == ""
    odd = ScenarioSummary.from_raw({"name": "<b>", "demand": "not a list", "budget": [3]})
    assert odd == ScenarioSummary("<b>", "", (), ("3",))
    box = scenario_box(odd)
    assert "&lt;b&gt;" in box and "<b>" not in box
    # Nothing said of one kind: as the instance's data.
    assert page_text(box).count("as in the instance's data") == 1


def test_changes_in_words_for_every_selection() -> None:
    # By hand from DemandChange and BudgetChange (rebalance/analysis/scenario_files.py):
    # None selects everything; add_fte is per row and period; a budget change without years
    # changes every budget year's cap.
    instance = read_instance(TINY)
    # add_fte of a table naming no office or skill is per office, skill and period; no row
    # of tiny's demand.csv is under 0.5, so none stops at 0.
    assert demand_words(DemandChange(None, None, None, add_fte=-0.5), instance) == (
        "demand for every skill at every office in every period lowered by 0.5 FTE in each "
        "office, skill and period")
    # tiny's demand.csv has intake at A in 2027-Q1 only: the row of 2027-Q3 is new, at
    # add_fte (apply_scenario multiplies only rows there were).
    assert demand_words(DemandChange(("A",), ("intake",), (2,), multiplier=2.0, add_fte=1.0,
                                     priority=3.0), instance) == (
        "demand for intake at A in 2027-Q3: 1 row of 1 FTE added where there was none "
        "(priority 3)")
    assert budget_words(BudgetChange(None, moves_add=-1000.0), "EUR") == [
        "moves cap of every budget year each lowered by 1,000 EUR"]
    assert budget_words(BudgetChange(("2027",), hiring_add=5.0, moves_add=7.0), None) == [
        "hiring cap of 2027 raised by 5", "moves cap of 2027 raised by 7"]


def test_an_add_to_rows_there_are_is_no_row_added() -> None:
    # A reviewer's hand check of the demo's harbour surge: instances/demo/demand.csv has
    # technical_review and environmental_review at port-ilse-harbour in 2028-Q1 to Q4 (one
    # row each), so add_fte raises those 8 rows (apply_scenario: fte x multiplier + add_fte)
    # and adds none; the page had said "a row of 4 FTE added where there was none".
    root = Path(__file__).resolve().parents[2] / "instances"
    demo = read_instance(root / "demo")
    rush = read_scenario(root / "demo_scenarios" / "harbour_permit_rush.toml", demo)
    quarters = "2028-Q1, 2028-Q2, 2028-Q3 and 2028-Q4"
    assert [demand_words(c, demo) for c in rush.demand] == [
        f"demand for technical_review at port-ilse-harbour in {quarters} raised by 4 FTE in "
        "each period",
        f"demand for environmental_review at port-ilse-harbour in {quarters} raised by 2 FTE "
        "in each period"]
    # The box's total: 4 x 4 + 4 x 2 = 24 FTE-periods more, no row more (demand.csv).
    entry = scenario_entry(rush, demo, apply_scenario(demo, rush))
    assert entry["demand"][-1].endswith("(+24.0)")
    assert len(apply_scenario(demo, rush).demand) == len(demo.demand)


def test_rows_added_raised_and_held_at_zero_are_each_said() -> None:
    # By hand from tests/data/tiny/demand.csv: intake at A has a row in 2027-Q1 only; review
    # at A is 0.5 in 2027-Q2 and Q3 (so 0.8 less stops at 0 there), 1.0 elsewhere and at B.
    instance = read_instance(TINY)
    assert demand_words(DemandChange(("A",), ("intake",), (0, 1), add_fte=1.0), instance) == (
        "demand for intake at A in 2027-Q1 and 2027-Q2 raised by 1 FTE in each period where "
        "it has demand (1 row); 1 row of 1 FTE added where there was none (priority 1)")
    assert demand_words(DemandChange(None, ("review",), None, add_fte=-0.8), instance) == (
        "demand for review at every office in every period lowered by 0.8 FTE in each office, "
        "skill and period (2 rows to 0, not below)")
    # A second table finds the row the first added (apply_scenario applies them in turn).
    add = DemandChange(("A",), ("intake",), (1,), add_fte=1.0)
    twice = Scenario("twice", "", (add, add))
    assert scenario_entry(twice, instance, apply_scenario(instance, twice))["demand"][:2] == [
        "demand for intake at A in 2027-Q2: 1 row of 1 FTE added where there was none "
        "(priority 1)",
        "demand for intake at A in 2027-Q2 raised by 1 FTE"]


def test_a_scenario_line_says_new_money_at_a_different_shortfall_is_not_like_for_like() -> None:
    import pandas as pd

    from rebalance.report.analysis_words import scenario_lines
    from rebalance.report.like_for_like_words import NOT_LIKE_FOR_LIKE

    # The demo's comparison as a reviewer read it: weighted shortfall 169.478 -> 193.152
    # (+23.7) and new money 2,443,500 -> 2,277,000 (-166,500), by hand; less money for more
    # left short is no saving (shortfall is weighed first), as the late-notice line says.
    # Made-up rows beside it: more money for less short (the other way too), both up (money
    # bought nothing back, no clause), shortfall the same (like for like).
    frame = pd.DataFrame({
        "scenario": ["base", "rush", "spend", "worse", "same"],
        "description": ["the instance as it is", "a rush", "more spent", "both up", "flat"],
        "demand_fte_periods": [2021.6] * 5,
        "weighted_shortfall": [169.478, 193.152, 160.0, 180.0, 169.478],
        "total_cost": [2_443_500.0, 2_277_000.0, 2_500_000.0, 2_500_000.0, 2_400_000.0]})
    rush, spend, worse, same = scenario_lines(frame)
    assert "weighted shortfall +23.7; new money -166,500" in rush
    assert rush.endswith(f". {NOT_LIKE_FOR_LIKE}")
    assert spend.endswith(f". {NOT_LIKE_FOR_LIKE}")
    assert NOT_LIKE_FOR_LIKE not in worse and NOT_LIKE_FOR_LIKE not in same
