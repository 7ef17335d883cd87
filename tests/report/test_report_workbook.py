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
    # 'rebalance plan' writes reasons.csv beside the plan now (rebalance/cli.py cmd_plan),
    # so its sheet follows the plan's; with or without it, the plan's sheets come first.
    assert book.sheetnames[:1 + len(PLAN_TABLES)] == ["summary", *PLAN_TABLES]
    assert book.sheetnames[1 + len(PLAN_TABLES):] in ([], ["reasons"])
    with_analysis = load_workbook(tiny_analysis_folder() / "plan.xlsx")
    # Every analysis table present gets a sheet, scenario_costs.csv of compare too.
    assert with_analysis.sheetnames == ["summary", *PLAN_TABLES, "frontier", "scenarios",
                                        "marginal_values", "reasons", "scenario_actions",
                                        "scenario_costs"]


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
        widths = _fitted_widths(sheet)
        for cell in sheet[1]:
            assert widths[cell.column_letter] >= len(str(cell.value)), (name, cell.value)
        if sheet.max_row > 1:
            assert sheet.auto_filter.ref, name
    hires = book["hires"]
    header = [c.value for c in hires[1]]
    assert hires.cell(row=2, column=header.index("onboarding_cost") + 1).number_format == "#,##0"
    coverage = book["coverage"]
    header = [c.value for c in coverage[1]]
    assert coverage.cell(row=2, column=header.index("demand_fte") + 1).number_format == \
        "#,##0.000"  # the number rule's decimals, as on the page


def test_summary_sheet_figures_and_caution():
    folder = tiny_plan_folder()
    summary = json.loads((folder / "summary.json").read_text())
    sheet = load_workbook(folder / "plan.xlsx")["summary"]
    values = {row[0]: row[1] for row in sheet.iter_rows(values_only=True) if row[0]}
    assert values["weighted shortfall (FTE-periods)"] == pytest.approx(
        summary["weighted_shortfall"])
    assert values["new money, all years"] == pytest.approx(summary["total_cost"])
    assert values["people hired"] == summary["hires"]
    assert values["outcome"] == "optimal"  # tiny solves to optimality
    assert summary["status"] == "optimal"
    assert CAUTION in values


def _fitted_widths(sheet) -> dict[str, float]:
    """Column widths by letter; a writer may store neighbours of equal width as one range."""
    from openpyxl.utils import get_column_letter

    widths = {}
    for dimension in sheet.column_dimensions.values():
        if dimension.customWidth:
            for index in range(dimension.min, dimension.max + 1):
                widths[get_column_letter(index)] = dimension.width
    return widths


def test_every_column_has_a_fitted_width():
    book = load_workbook(tiny_analysis_folder() / "plan.xlsx")
    for name in book.sheetnames[1:]:
        sheet = book[name]
        widths = _fitted_widths(sheet)
        # The header is the row above the freeze (the scenarios sheet's notes come first).
        for cell in sheet[int(sheet.freeze_panes[1:]) - 1]:
            assert widths[cell.column_letter] >= len(str(cell.value)) + 2, (name, cell.value)
    summary = _fitted_widths(book["summary"])
    assert summary["A"] >= 36 and all(summary[letter] >= 16 for letter in "BCDE")


def _tiny_data(tables):
    from dataclasses import replace

    from report_cases import TINY

    from rebalance import read_instance
    from rebalance.report.inputs import report_data_from_folder

    return replace(report_data_from_folder(tiny_plan_folder(), read_instance(TINY)),
                   tables=tables)


def test_text_stays_text_and_missing_or_infinite_numbers_stay_readable(tmp_path):
    from rebalance.report.workbook import write_workbook

    odd = pd.DataFrame({
        "person": ["00123", "=1+1", "https://example.invalid/p", "1e3"],
        "year": ["2027", "2028", None, "2029"],
        "gain_fte": [1.5, float("nan"), float("inf"), -float("inf")],
    })
    path = write_workbook(_tiny_data((("reasons", odd),)), tmp_path / "plan.xlsx")
    sheet = load_workbook(path)["reasons"]
    rows = list(sheet.iter_rows(min_row=2, values_only=True))
    assert [r[0] for r in rows] == ["00123", "=1+1", "https://example.invalid/p", "1e3"]
    assert all(sheet.cell(row=i, column=1).data_type == "s" for i in range(2, 6))
    assert [r[1] for r in rows] == [2027, 2028, None, 2029]  # a year is a number in every sheet
    assert [r[2] for r in rows] == [1.5, None, "inf", "-inf"]
    assert sheet.cell(row=2, column=3).number_format == "#,##0.000"
    assert not sheet.cell(row=2, column=1).hyperlink


def test_empty_table_keeps_a_filter_over_its_header(tmp_path):
    from rebalance.report.workbook import write_workbook

    empty = pd.DataFrame(columns=["change", "person", "cost"])
    path = write_workbook(_tiny_data((("changes", empty),)), tmp_path / "plan.xlsx")
    sheet = load_workbook(path)["changes"]
    assert sheet.auto_filter.ref == "A1:C1"
    assert [c.value for c in sheet[1]] == ["change", "person", "cost"]


def test_a_failed_write_leaves_the_old_workbook_and_no_temporary_file(tmp_path, monkeypatch):
    from rebalance.report import workbook

    path = tmp_path / "plan.xlsx"
    path.write_bytes(b"the previous workbook")

    def broken(*args, **kwargs):
        raise RuntimeError("disk went away")

    monkeypatch.setattr(workbook, "_table_sheet", broken)
    with pytest.raises(RuntimeError):
        workbook.write_workbook(_tiny_data(()), path)
    assert path.read_bytes() == b"the previous workbook"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan.xlsx"]


def test_a_table_longer_than_a_sheet_is_cut_and_the_summary_says_so_first(tmp_path,
                                                                          monkeypatch):
    from rebalance.report import workbook

    data = _tiny_data((("reasons", pd.DataFrame({"person": [f"p{i}" for i in range(1000)]})),))
    assert max(len(data.plan.table(name)) for name in PLAN_TABLES) < 999
    monkeypatch.setattr(workbook, "SHEET_ROWS", 1000)  # instead of a million-row table
    book = load_workbook(workbook.write_workbook(data, tmp_path / "plan.xlsx"))
    reasons = [row[0] for row in book["reasons"].iter_rows(min_row=2, values_only=True)]
    assert reasons == [f"p{i}" for i in range(999)]
    summary = [row[0] for row in book["summary"].iter_rows(values_only=True) if row[0]]
    note = next(i for i, text in enumerate(summary) if "reasons sheet" in text)
    assert "999 of its 1,000 rows" in summary[note]
    assert summary[note - 1] == "Read this first"


def _year_cells(sheet, header_row: int = 1, first: int = 2, last: int | None = None):
    column = [c.value for c in sheet[header_row]].index("year") + 1
    return [sheet.cell(row=r, column=column) for r in range(first, (last or sheet.max_row) + 1)]


def test_a_year_is_one_type_in_every_sheet():
    # The costs sheet had years as text and scenario_costs as numbers, so a pivot over both
    # kept 2027 and "2027" apart.  Reference: the CSV files, read by pandas, hold numbers.
    folder = tiny_analysis_folder()
    book = load_workbook(folder / "plan.xlsx")
    for name in ("costs", "scenario_costs"):
        cells = _year_cells(book[name])
        assert cells and {c.data_type for c in cells} == {"n"}, name
        assert all(c.number_format == "General" for c in cells), name  # 2027, not 2,027
        csv_years = pd.read_csv(folder / f"{name}.csv")["year"]
        assert csv_years.dtype.kind == "i"
        assert [c.value for c in cells] == csv_years.tolist(), name
    summary = book["summary"]
    at = next(c.row for c in summary["A"] if c.value == "Spending against budget") + 1
    years = _year_cells(summary, at, at + 1, at + 1)  # tiny has one budget year
    assert [c.value for c in years] == [2027] and years[0].data_type == "n"


def test_years_that_are_not_numbers_stay_text_everywhere():
    from rebalance.report.workbook import _numeric_years, _year_cell

    assert _numeric_years(("2027", "2028")) and not _numeric_years(("2027", "FY28"))
    assert not _numeric_years(("0027",))  # leading zeros would be lost
    assert [_year_cell(v, False) for v in ("FY28", 2027, 2027.0, None)] == [
        "FY28", "2027", "2027", None]


def test_a_column_of_mixed_limits_shows_large_figures_without_decimals(tmp_path) -> None:
    # A practitioner's reading: the marginal sheet's `current` column (seats 52, a moves
    # budget of 300,000, an away share of 0.15) read "300,000.000" in Excel, where the page
    # and console write 300,000 (from 1,000 up decimals are noise: rebalance.numbers).  The
    # workbook is written with xlsxwriter and read back with openpyxl.
    import xlsxwriter

    from rebalance.report.workbook import _Styles, _table_sheet

    path = tmp_path / "limits.xlsx"
    book = xlsxwriter.Workbook(str(path))
    frame = pd.DataFrame({"limit": ["seats", "moves_budget", "away_share"],
                          "current": [52.0, 300_000.0, 0.15]})
    _table_sheet(book.add_worksheet("limits"), _Styles(book), frame)
    book.close()
    sheet = load_workbook(path)["limits"]
    formats = [sheet.cell(row, 2).number_format for row in (2, 3, 4)]
    assert formats == ["#,##0.000", "#,##0", "#,##0.000"]


def test_only_the_scenarios_sheet_opens_with_notes(tmp_path):
    # A practitioner's reading of a demo comparison's plan.xlsx: the scenarios sheet did not
    # say what the console and the page say, that each scenario was solved from the base plan
    # (actions_differing counts the changes that paid), nor warn where the solves stopped
    # short of proof (rebalance/report/analysis_words.py gap_caution).
    from rebalance.report.analysis_words import FROM_BASE_WORDS as FROM_BASE_NOTE
    from rebalance.report.analysis_words import gap_caution

    book = load_workbook(tiny_analysis_folder() / "plan.xlsx")
    for name in book.sheetnames[1:]:
        sheet = book[name]
        if name == "scenarios":
            assert sheet["A1"].value == FROM_BASE_NOTE and sheet["A2"].value is None
            assert sheet["A3"].value == "scenario" and sheet["A3"].font.bold
            assert sheet.freeze_panes == "A4" and sheet.auto_filter.ref.startswith("A3:")
        else:  # every other sheet as before: its header on the first row
            assert sheet.freeze_panes == "A2" and sheet["A1"].font.bold, name
    # Solves stopped short of proof: the gap caution follows, and the table reads back whole.
    from dataclasses import replace

    from rebalance.report.workbook import write_workbook

    scenarios = pd.read_csv(tiny_analysis_folder() / "scenarios.csv", keep_default_na=False,
                            na_values=[""])
    scenarios["gap"] = [0.0, 0.031, 0.0]  # base and its two surges (report_cases)
    path = write_workbook(replace(_tiny_data(()), scenarios=scenarios), tmp_path / "plan.xlsx")
    sheet = load_workbook(path)["scenarios"]
    caution = gap_caution(scenarios)
    assert caution and [sheet["A1"].value, sheet["A2"].value, sheet["A3"].value] == [
        FROM_BASE_NOTE, caution, None]
    assert sheet["A4"].value == "scenario" and sheet.freeze_panes == "A5"
    back = pd.read_excel(path, sheet_name="scenarios", header=3)
    assert back["scenario"].tolist() == scenarios["scenario"].tolist()
    # A scenarios table from elsewhere, without actions_differing or gaps: no note, as before.
    plain = pd.DataFrame({"scenario": ["a", "b"], "hires": [1, 2]})
    sheet = load_workbook(write_workbook(replace(_tiny_data(()), scenarios=plain),
                                         tmp_path / "plain.xlsx"))["scenarios"]
    assert sheet["A1"].value == "scenario" and sheet.freeze_panes == "A2"


def test_summary_words_match_the_page_model_size_and_marginal_steps():
    # The page's words (report.html, "How it was found"): "whole-number" columns, where the
    # workbook had "integer".  Marginal's steps are ten seats, 100,000 money
    # (docs/analysis.md), so its sheet buys "one more step", not "one more unit".
    values = _summary_values(tiny_analysis_folder())
    model = _summary(tiny_analysis_folder())["model"]
    assert values["model size"] == (f"{model['columns']:,} columns "
                                    f"({model['integer_columns']:,} whole-number) x "
                                    f"{model['rows']:,} rows")
    assert values["marginal_values"] == "what one more step of each binding limit buys"


def test_the_sheet_list_says_why_a_persons_fte_shrinks(tmp_path):
    # Hand computation from docs/model.md, A(p,t) = fte(p) (1 - r)^(t/q): with review's
    # attrition at 12% a year, tiny's a1 (fte 1.0) works 0.88^(1/4) = 0.969 in 2027-Q2, as
    # the work sheet shows; the summary's list of sheets says why, beside "work".
    from conftest import solve_verified
    from report_cases import TINY

    from rebalance import read_instance
    from rebalance.report.inputs import report_data
    from rebalance.report.workbook import write_workbook

    leaving = read_instance(TINY).with_changes(attrition={("review", None): 0.12})
    path = write_workbook(report_data(solve_verified(leaving)), tmp_path / "plan.xlsx")
    book = load_workbook(path)
    (a1,) = [row for row in book["work"].iter_rows(min_row=2, values_only=True)
             if row[:2] == ("a1", "2027-Q2")]
    assert round(a1[4], 3) == 0.969
    sheets = {row[0]: row[1] for row in book["summary"].iter_rows(values_only=True) if row[0]}
    assert sheets["work"] == (
        "who works where on which skill, per period. Available FTE falls period by period "
        "with expected attrition, so a person's fte in the work table (work.csv, the work "
        "sheet) shrinks over the horizon.")
    # Tiny as it is has no attrition.csv: nothing to explain.
    assert _summary_values(tiny_plan_folder())["work"] == "who works where on which skill, " \
        "per period"


def _summary(folder):
    return json.loads((folder / "summary.json").read_text())


def _summary_values(folder):
    sheet = load_workbook(folder / "plan.xlsx")["summary"]
    return {row[0]: row[1] for row in sheet.iter_rows(values_only=True) if row[0]}


def _sheet_cells(path, name: str, column: str, header_row: int = 1):
    """(value, number format) of each cell under ``column``'s header in sheet ``name``."""
    sheet = load_workbook(path)[name]
    headers = [c.value for c in sheet[header_row]]
    j = headers.index(column) + 1
    return [(sheet.cell(i, j).value, sheet.cell(i, j).number_format)
            for i in range(header_row + 1, sheet.max_row + 1)]


def test_scenario_budget_years_are_text_not_thousands(tmp_path):
    # A practitioner's reading of the demo storm comparison's plan.xlsx: hiring_budget_years
    # of the storm (its file: years = ["2027"]) read 2,027, as pandas reads "2027" back from
    # scenarios.csv as a number.  Both ways in: a frame holding numbers, and the folder's CSV.
    from dataclasses import replace

    from rebalance.report.workbook import write_workbook

    scenarios = pd.DataFrame({"scenario": ["base", "storm", "both"],
                              "hiring_budget_years": [float("nan"), 2027.0, "2027; 2028"]})
    path = write_workbook(replace(_tiny_data(()), scenarios=scenarios), tmp_path / "plan.xlsx")
    cells = _sheet_cells(path, "scenarios", "hiring_budget_years")
    assert [v for v, _ in cells] == [None, "2027", "2027; 2028"]
    assert cells[1][1] == "General"
    # Read from a folder: the years come in as text, so every later reader sees "2027".
    import shutil

    from report_cases import TINY

    from rebalance import read_instance
    from rebalance.report.inputs import report_data_from_folder

    folder = tmp_path / "folder"
    shutil.copytree(tiny_plan_folder(), folder)
    (folder / "scenarios.csv").write_text("scenario,hiring_budget_years,hires\n"
                                          "base,,1\nstorm,2027,2\n")
    data = report_data_from_folder(folder, read_instance(TINY))
    assert data.scenarios is not None
    assert data.scenarios["hiring_budget_years"].tolist()[1] == "2027"
    assert data.scenarios["hires"].tolist() == [1, 2]  # other columns as numbers still
    path = write_workbook(data, tmp_path / "read.xlsx")
    assert [v for v, _ in _sheet_cells(path, "scenarios", "hiring_budget_years")] == [
        None, "2027"]


def test_marginal_amounts_have_a_format_per_row(tmp_path):
    # A practitioner's reading of the demo's marginal run (marginal_values.csv): seats 52 at
    # port-ilse-central read 52.000 beside the away share's 0.15.  Rows copied by hand from
    # that file: seats 52 (step 10), moves budget 300,000 (step 100,000), away share 0.15
    # (step 0.05), time to hire 2 periods (step -1).  Whole counts whole, as the page.
    from dataclasses import replace

    from rebalance.report.workbook import write_workbook

    marginal = pd.DataFrame({"limit": ["seats", "moves_budget", "away_share", "time_to_hire"],
                             "current": [52.0, 300_000.0, 0.15, 2.0],
                             "step": [10.0, 100_000.0, 0.05, -1.0],
                             "unit": ["seats", "money", "share of people", "periods"]})
    path = write_workbook(replace(_tiny_data(()), marginal_values=marginal),
                          tmp_path / "plan.xlsx")
    current = _sheet_cells(path, "marginal_values", "current")
    assert [f for _, f in current] == ["#,##0", "#,##0", "#,##0.000", "#,##0"]
    assert [v for v, _ in current] == [52, 300_000, 0.15, 2]
    step = _sheet_cells(path, "marginal_values", "step")
    # The step as the page and the console write it ("+0.05 share of people").
    assert [f for _, f in step] == ["#,##0", "#,##0", "#,##0.00", "#,##0"]


def test_frontier_factors_show_as_typed(tmp_path):
    # `rebalance frontier tests/data/tiny --hiring 1x,1.5x,2x` wrote hiring_budget 1.0, 1.5,
    # 2.0 (its frontier.csv), which the sheet showed 1.000, 1.500, 2.000; as typed, the same
    # decimals in every row: 1.0, 1.5, 2.0.
    from dataclasses import replace

    from rebalance.report.workbook import write_workbook

    frontier = pd.DataFrame({"point": [1, 2, 3], "hiring_budget": [1.0, 1.5, 2.0],
                             "moves_budget": [float("nan")] * 3,
                             "hiring_cap_total": [40_000.0, 60_000.0, 80_000.0]})
    path = write_workbook(replace(_tiny_data(()), frontier=frontier), tmp_path / "plan.xlsx")
    cells = _sheet_cells(path, "frontier", "hiring_budget")
    assert cells == [(1, "#,##0.0"), (1.5, "#,##0.0"), (2, "#,##0.0")]
    assert [v for v, _ in _sheet_cells(path, "frontier", "moves_budget")] == [None] * 3
    # Amounts, not factors (--hiring 40000,60000): separators, no decimals.
    amounts = frontier.assign(hiring_budget=[40_000.0, 60_000.0, 80_000.0])
    path = write_workbook(replace(_tiny_data(()), frontier=amounts), tmp_path / "amounts.xlsx")
    assert {f for _, f in _sheet_cells(path, "frontier", "hiring_budget")} == {"#,##0"}


def _replan_with_ahead() -> pd.DataFrame:
    from report_cases import replan_with_ahead

    return replan_with_ahead((0.0001, 0.0312), (0.0, 0.003))


def test_a_replans_gap_rows_read_as_percentages_under_the_late_notice_line(tmp_path):
    # The replan sheet had shown the stage gaps' rows as 0.003 (#,##0.000), where the console
    # and the page give a gap as a percentage (rebalance/numbers.py gap_text: 0.30%); and the
    # page's re-plan section leads with the "Late notice" line, the sheet had not.  Read back
    # with openpyxl; number formats as ECMA-376 Part 1, 18.8.31 (numFmts) spells them.
    from dataclasses import replace

    from rebalance.report.inputs import ReplanSummary
    from rebalance.report.late_notice_words import late_notice_line
    from rebalance.report.workbook import write_workbook

    table = _replan_with_ahead()
    data = _tiny_data((("replan", table),))
    data = replace(data, summary=replace(data.summary, replan=ReplanSummary("2027-Q3", "b-up")))
    path = write_workbook(data, tmp_path / "plan.xlsx")
    sheet = load_workbook(path)["replan"]
    line = late_notice_line(table, "2027-Q3", "2027-Q1")
    assert line and line.startswith("Late notice: reacting in 2027-Q3")
    assert [sheet["A1"].value, sheet["A2"].value, sheet["A3"].value] == [line, None, "measure"]
    assert sheet.freeze_panes == "A4"
    rows = {r[0].value: r for r in sheet.iter_rows(min_row=4)}
    for measure in ("shortfall gap", "new money gap"):  # the measure in words (readable)
        for cell in rows[measure][2:]:
            if cell.value is not None:
                assert cell.number_format == "0.00%", (measure, cell.column_letter)
    # 0.0001 is 0.01%: kept, not written as the 0 a figure of three places rounds to.
    assert rows["shortfall gap"][2].value == 0.0001
    assert rows["new money gap"][4].value == 0.003
    # The other rows as before: money whole, FTE-periods to the rule's places.
    assert rows["new money"][2].number_format.startswith("#,##0")
    assert "%" not in rows["weighted shortfall"][4].number_format
    # A re-plan without planned_ahead: no line, its header on the first row as before.
    plain = replace(data, tables=(("replan", table.drop(columns="planned_ahead")),))
    sheet = load_workbook(write_workbook(plain, tmp_path / "plain.xlsx"))["replan"]
    assert sheet["A1"].value == "measure" and sheet.freeze_panes == "A2"


def test_a_plan_made_ahead_for_a_replan_says_so_in_its_heading(tmp_path):
    # A re-plan's planned_ahead/ folder (rebalance/cli_planned_ahead.py) had been headed as any
    # scenario's plan; its summary.json's planned_ahead key says which re-plan it was made
    # for (common practice: a document's heading says what it holds).  Read back with
    # openpyxl.
    from dataclasses import replace

    from rebalance.report.inputs import PlannedAheadSummary
    from rebalance.report.workbook import write_workbook

    data = _tiny_data(())
    ahead = replace(data, summary=replace(data.summary, scenario="b-up",
                                          planned_ahead=PlannedAheadSummary("2027-Q3")))
    sheet = load_workbook(write_workbook(ahead, tmp_path / "plan.xlsx"))["summary"]
    assert sheet["A1"].value == ("Planned ahead: scenario b-up planned from 2027-Q1, for the "
                                 "re-plan at 2027-Q3 · tiny")
    sheet = load_workbook(write_workbook(data, tmp_path / "plain.xlsx"))["summary"]
    assert sheet["A1"].value == "Staffing plan for tiny"
