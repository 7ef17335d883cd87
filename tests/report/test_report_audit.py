"""Findings of a practitioner's reading of the demo plan's report, each pinned down: idle
capacity shown, each stage's gap said in its own units, salaries committed beyond the horizon,
one money scale, numbers as people write them, and tables that fit the page."""

from __future__ import annotations

import json
import re
import shutil
from dataclasses import replace
from pathlib import Path

import pandas as pd
import pytest
from openpyxl import load_workbook
from report_cases import TINY, page_text, tiny_plan_folder

from rebalance import read_instance
from rebalance.planning import new_position_salaries
from rebalance.report.chart_data import _coverage_series, spare_capacity
from rebalance.report.html import render_html
from rebalance.report.htmlparts import frame_table_html
from rebalance.report.inputs import report_data_from_folder
from rebalance.report.workbook import write_workbook


def _tiny():
    return report_data_from_folder(tiny_plan_folder(), read_instance(TINY))


def _summary_cells(path: Path) -> list[str]:
    sheet = load_workbook(path)["summary"]
    return [str(v) for row in sheet.iter_rows(values_only=True) for v in row if v is not None]


# 1. Output beyond demand was capped away (min(staff output, demand)), so idle staff at one
#    office never showed beside a shortfall at another.

def test_output_beyond_demand_is_shown_per_office_with_a_total():
    data = _tiny()
    cov = data.plan.coverage
    beyond = (cov["staff_output_fte"] + cov["hire_output_fte"] - cov["covered_fte"]).clip(
        lower=0)
    assert beyond.sum() == pytest.approx(0.9)  # tiny: A has 0.3 spare twice, B once
    spare = spare_capacity(data).set_index("office")["spare_fte"]
    assert spare.to_dict() == pytest.approx({"A": 0.6, "B": 0.3})
    series = {s["office"]: s for s in _coverage_series(data)["series"]}
    assert sum(series["all offices"]["spare"]) == pytest.approx(0.9)
    assert sum(series["A"]["spare"]) == pytest.approx(0.6)
    page = render_html(data)
    table = page[page.index('data-table="spare"'):]
    table = table[:table.index("</table>")]
    assert "<tfoot>" in table and "all offices" in table.split("<tfoot>")[1]
    assert "Idle capacity" in page_text(page)


def test_time_with_no_work_counts_people_the_plan_leaves_idle():
    # Output beyond demand misses people with no work rows at all (their skills are not
    # wanted where they are then).  Hand count on tests/data/tiny's plan: at A, a2 has no
    # work in 2027-Q1 (A's review is a1's, its intake a3's) and a3 (intake only, 0.5 FTE, no
    # details) has none in Q2-Q4, A having intake demand in Q1 only: 1.0 + 3 x 0.5 = 2.5.
    # At B, b1 works until leaving after Q3 and the visitors work: 0.
    unassigned = spare_capacity(_tiny()).set_index("office")["unassigned_fte"]
    assert unassigned.to_dict() == pytest.approx({"A": 2.5, "B": 0.0})
    assert "time with no work" in page_text(render_html(_tiny()))


def test_solver_dust_is_no_spare_capacity():
    data = _tiny()
    cov = data.plan.coverage.copy()
    cov["staff_output_fte"] = cov["covered_fte"] + 4.440892098500626e-16
    cov["hire_output_fte"] = 0.0
    dusty = replace(data, plan=replace(data.plan, coverage=cov))
    assert spare_capacity(dusty)["spare_fte"].sum() == 0.0
    assert all(v == 0.0 for s in _coverage_series(dusty)["series"] for v in s["spare"])


# 2. "plan found, not proven optimal / gap 2.6% at stop" beside weighted shortfall, where that gap
#    was the cost stage's; raw status words on the page.

def _stopped_folder(tmp_path: Path) -> Path:
    folder = tmp_path / "plan"
    shutil.copytree(tiny_plan_folder(), folder)
    summary = json.loads((folder / "summary.json").read_text())
    summary.update(status="feasible_with_gap", gap=0.02616102210504932, stages=[
        {"stage": "shortfall", "status": "optimal", "objective": 165.94510168882454,
         "bound": 165.06059122905236, "gap": 0.0053301390084461876, "seconds": 9.472,
         "solver_says": "Optimal"},
        {"stage": "cost", "status": "feasible_with_gap", "objective": 2465499.999999999,
         "bound": 2401000.0, "gap": 0.02616102210504932, "seconds": 8.27,
         "solver_says": "stopped at the time limit"}])
    (folder / "summary.json").write_text(json.dumps(summary))
    return folder


def test_each_stage_says_what_its_gap_means_in_its_own_units(tmp_path):
    data = report_data_from_folder(_stopped_folder(tmp_path), read_instance(TINY))
    page = render_html(data)
    glance = page_text(page[page.index('id="glance"'):page.index('id="capacity"')])
    # The console's words (report/console.py), per stage.
    assert "shortfall stage: optimal within the gap asked (0.53% left)" in glance
    assert ("cost stage: not proven optimal: a plan with the same shortfall may cost up to 64,500 "
            "less (gap 2.62%)") in glance
    assert "gap 2.6% at stop" not in glance
    assert "feasible_with_gap" not in page
    stages = page[page.index('data-table="stages"'):]
    assert "2,465,500<" in stages and "2,465,500.00" not in stages
    cells = _summary_cells(write_workbook(data, tmp_path / "plan.xlsx"))
    assert not any("feasible_with_gap" in c for c in cells)
    assert "plan found, not proven optimal" in cells
    assert "optimal within the gap asked (0.53% left)" in cells


# 3. New money stopped at the horizon: new positions' salaries after it were nowhere.

def test_salaries_new_positions_commit_beyond_the_horizon(tmp_path):
    data = _tiny()
    instance = data.instance
    hires = pd.read_csv(tiny_plan_folder() / "hires.csv")
    salary = {s.name: s.salary_per_period for s in instance.skills}
    new = hires[hires["funding"] == "new"]
    expected = float((new["count"] * new["skill"].map(salary)).sum()
                     * instance.periods_per_year)
    assert expected == 80_000  # one new review position, 20,000 a quarter
    salaries = new_position_salaries(data.instance, data.plan)
    assert salaries["per_year"].sum() == pytest.approx(expected)
    text = page_text(render_html(data))
    assert "Salaries after the horizon 80,000 a year, every year after 2027-Q4" in text
    assert "80,000 a year in salaries" in text
    sheet = load_workbook(write_workbook(data, tmp_path / "plan.xlsx"))["summary"]
    values = {row[0]: row[1] for row in sheet.iter_rows(values_only=True) if row[0]}
    assert values["new positions' salaries a year"] == expected


# 5. "24.000", "0.000", "current 52.000", a gap as 0.026, True, snake_case headers, 4.44e-16.

def test_analysis_tables_read_as_people_write_numbers():
    frame = pd.DataFrame({"limit": ["seats", "hiring_budget"], "current": [52.0, 260000.0],
                          "hires": [24.0, 0.0], "shortfall_reduction": [20.117503, 4.4e-16],
                          "status": ["feasible_with_gap", "optimal"], "verified": [True, False],
                          "gap": [0.02616102210504932, 0.0]})
    page = frame_table_html(frame, "marginal")
    headers = re.findall(r"<th\b[^>]*>(.*?)</th>", page)
    assert headers == ["limit", "current", "hires", "shortfall reduction", "status",
                       "verified", "gap"]
    cells = re.findall(r"<td\b[^>]*>(.*?)</td>", page)
    assert cells[:7] == ["seats", "52", "24", "20.118", "plan found, not proven optimal", "yes",
                         "2.62%"]
    # A column with decimals in one row has them in every row (solver dust is 0 all the same).
    assert cells[7:] == ["hiring_budget", "260,000", "0", "0.000", "optimal", "no", "0.00%"]
    assert 'data-v="20.117503"' in page  # sorting keeps the raw value


def test_workbook_numbers_gaps_and_solver_dust(tmp_path):
    data = _tiny()
    cov = data.plan.coverage.copy()
    cov.loc[0, "shortfall_fte"] = 4.440892098500626e-16
    marginal = pd.DataFrame({"limit": ["seats", "hiring"], "current": [52.0, 40000.0],
                             "gap": [0.026, 0.0], "shortfall_reduction": [1.5, 0.25]})
    replan = pd.DataFrame({"measure": ["weighted_shortfall", "hires"],
                           "old_plan": [175.0374, 24.0]})
    data = replace(data, plan=replace(data.plan, coverage=cov), marginal_values=marginal,
                   tables=(("replan", replan),))
    book = load_workbook(write_workbook(data, tmp_path / "plan.xlsx"))
    assert book["coverage"]["H2"].value == 0  # shortfall_fte
    sheet = book["marginal_values"]
    assert sheet["C2"].number_format == "0.00%"
    assert sheet["B2"].number_format == "#,##0"  # whole numbers without decimals
    old = book["replan"]
    assert old["B2"].number_format == "#,##0.000" and old["B3"].number_format == "#,##0"
