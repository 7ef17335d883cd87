"""plan.xlsx: a summary sheet first, then one formatted sheet per plan table whose cells match
the CSV files (read back with pandas as the reference reader)."""

from __future__ import annotations

import json

import pandas as pd
import pytest
from openpyxl import load_workbook
from report_cases import tiny_analysis_folder, tiny_plan_folder

from rebalance.plan import PLAN_TABLES
from rebalance.planning import CAUTION


def test_sheets_summary_first_then_every_plan_table():
    book = load_workbook(tiny_plan_folder() / "plan.xlsx")
    assert book.sheetnames == ["summary", *PLAN_TABLES]
    with_analysis = load_workbook(tiny_analysis_folder() / "plan.xlsx")
    assert with_analysis.sheetnames == ["summary", *PLAN_TABLES, "frontier", "scenarios",
                                        "marginal_values", "reasons", "scenario_actions"]


@pytest.mark.parametrize("table", list(PLAN_TABLES))
def test_each_sheet_holds_the_csv_table(table):
    folder = tiny_plan_folder()
    from_csv = pd.read_csv(folder / f"{table}.csv", dtype={"year": str})
    from_book = pd.read_excel(folder / "plan.xlsx", sheet_name=table, dtype={"year": str})
    assert list(from_book.columns) == list(PLAN_TABLES[table])
    pd.testing.assert_frame_equal(from_book, from_csv, check_dtype=False)


def test_headers_frozen_filtered_and_formatted():
    book = load_workbook(tiny_plan_folder() / "plan.xlsx")
    for name in PLAN_TABLES:
        sheet = book[name]
        assert sheet.freeze_panes == "A2", name
        assert sheet["A1"].font.bold, name
        for cell in sheet[1]:
            width = sheet.column_dimensions[cell.column_letter].width
            assert width >= len(str(cell.value)), (name, cell.value)
        if sheet.max_row > 1:
            assert sheet.auto_filter.ref, name
    hires = book["hires"]
    header = [c.value for c in hires[1]]
    assert hires.cell(row=2, column=header.index("onboarding_cost") + 1).number_format == "#,##0"
    coverage = book["coverage"]
    header = [c.value for c in coverage[1]]
    assert coverage.cell(row=2, column=header.index("demand_fte") + 1).number_format == \
        "#,##0.00"


def test_summary_sheet_figures_and_caution():
    folder = tiny_plan_folder()
    summary = json.loads((folder / "summary.json").read_text())
    sheet = load_workbook(folder / "plan.xlsx")["summary"]
    values = {row[0]: row[1] for row in sheet.iter_rows(values_only=True) if row[0]}
    assert values["weighted shortfall (FTE-periods)"] == pytest.approx(
        summary["weighted_shortfall"])
    assert values["new money, all years"] == pytest.approx(summary["total_cost"])
    assert values["people hired"] == summary["hires"]
    assert values["status"] == summary["status"]
    assert CAUTION in values
