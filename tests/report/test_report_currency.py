"""A currency set in settings.toml shows wherever money does: the console summary and money
tables, the page's money columns, chart labels and costs section.  None set, money stays bare
(the other report tests pin that output)."""

from __future__ import annotations

import re
from dataclasses import replace
from functools import lru_cache

import pandas as pd
from conftest import solve_verified
from report_cases import TINY, demo_tables_folder, page_payload, page_text

from rebalance import read_instance
from rebalance.instance import Money
from rebalance.planning import PlanResult
from rebalance.report.console import format_frame, format_summary, room_left
from rebalance.report.html import render_html
from rebalance.report.inputs import report_data, report_data_from_folder
from rebalance.solve import StageResult, Status


@lru_cache(maxsize=2)
def _tiny(currency: str | None) -> PlanResult:
    return solve_verified(read_instance(TINY).with_changes(money=Money(currency)))


def _headers(page: str, table: str) -> list[str]:
    start = page.index(f'data-table="{table}"')
    head = page[start:page.index("</thead>", start)]
    return re.findall(r"<th\b[^>]*>(.*?)</th>", head)


def test_the_console_summary_names_the_currency_of_every_amount():
    text = format_summary(_tiny("EUR"))
    assert "new money            43,000 EUR (of 70,000 EUR allowed)" in text
    assert "stage cost: optimal, objective 43,000 EUR, bound 43,000 EUR" in text
    assert "stage shortfall: optimal, objective 0, bound 0," in text  # FTE-periods, not money
    header = next(line for line in text.splitlines() if "hiring spend" in line).split("  ")
    assert [h.strip() for h in header if h.strip()] == [
        "year", "hiring spend (EUR)", "hiring cap (EUR)", "moves spend (EUR)",
        "moves cap (EUR)"]
    bare = format_summary(_tiny(None))
    assert "new money            43,000 (of 70,000 allowed)\n" in bare
    assert "(EUR)" not in bare and "None" not in bare


def test_what_a_cost_stage_leaves_open_is_in_the_currency():
    stage = StageResult("cost", Status.FEASIBLE_WITH_GAP, 2_461_000.0, 2_410_000.0,
                        51_000 / 2_461_000, 10.0, "Time limit reached")
    assert room_left(stage, "EUR") == ("a plan with the same shortfall may cost up to "
                                       "51,000 EUR less (gap 2.07%)")


def test_console_tables_name_the_currency_of_their_money_columns_only():
    frame = pd.DataFrame({"scenario": ["base"], "total_cost": [2465500.0], "hires": [24],
                          "moves_spend": [1500.0], "gap": [0.0]})
    header = format_frame(frame, currency="EUR").splitlines()[0].split("  ")
    assert [h.strip() for h in header if h.strip()] == [
        "scenario", "total_cost (EUR)", "hires", "moves_spend (EUR)", "gap"]
    assert format_frame(frame).splitlines()[0].split() == list(frame.columns)


def test_the_page_shows_the_currency_in_money_columns_cards_chart_and_costs():
    page = render_html(report_data(_tiny("EUR")))
    assert _headers(page, "details")[-1] == "cost (EUR)"
    assert _headers(page, "costs") == ["year", "budget line", "spent (EUR)", "cap (EUR)",
                                       "used"]
    assert _headers(page, "hires")[5:] == ["onboarding cost (EUR)",
                                           "new salary to horizon end (EUR)",
                                           "salary a year after it (EUR)"]
    assert _headers(page, "commitments")[2:] == ["salary per period (EUR)",
                                                 "salary a year (EUR)"]
    words = page_text(page)
    assert "New money 43,000 EUR" in words
    assert "Salaries after the horizon 80,000 EUR a year" in words
    assert "80,000 EUR a year in salaries" in words
    assert "All bars share one scale, in EUR." in words
    # The budget chart's axis is drawn by the script; its caption names the currency.
    assert '<figcaption>Amounts in EUR.</figcaption>' in page
    stages = page[page.index('data-table="stages"'):]
    assert "43,000 EUR<" in stages


def test_without_a_currency_the_page_says_no_unit_and_never_none():
    page = render_html(report_data(_tiny(None)))
    assert _headers(page, "costs") == ["year", "budget line", "spent", "cap", "used"]
    assert "None" not in page_text(page) and "Amounts in" not in page


def test_a_currency_is_escaped_on_the_page():
    result = _tiny(None)
    instance = result.instance.with_changes(money=Money("<b>"))
    page = render_html(report_data(replace(result, instance=instance)))
    assert "43,000 &lt;b&gt;" in page and "(&lt;b&gt;)" in page
    assert "(<b>)" not in page and "k <b>" not in page


def test_analysis_sections_name_the_currency_of_money_steps_and_metrics():
    instance = read_instance(TINY).with_changes(money=Money("EUR"))
    page = render_html(report_data_from_folder(demo_tables_folder(), instance))
    start = page.index('<section id="marginal">')
    marginal = page_text(page[start:page.index("</section>", start)])
    assert "+100,000 EUR (moves budget, hiring budget)" in marginal
    assert "+10 seats (seats)" in marginal  # other units unchanged
    names = [m["name"] for m in page_payload(page)["scenarios"]["metrics"]]
    assert "new money (EUR)" in names  # total_cost in words, as the table heads it
    assert not any(n.startswith("weighted shortfall (") for n in names)


def test_a_frontier_names_the_currency_of_its_budget_axis_unless_the_grid_is_factors(tmp_path):
    from rebalance.report.analysis_charts import _frontier

    frame = pd.DataFrame({"point": [1, 2], "hiring_budget": [0.0, 10_000.0],
                          "moves_budget": [5_000.0, 5_000.0],
                          "budget_unit": ["money, each year"] * 2,
                          "weighted_shortfall": [3.0, 1.0], "total_cost": [5_000.0, 15_000.0]})
    view = _frontier(frame, "EUR")
    assert view is not None
    assert (view["x_label"], view["cost_label"]) == ("hiring_budget (EUR)", "new money (EUR)")
    factors = frame.assign(budget_unit="times each year's cap", hiring_budget=[0.5, 1.0])
    view = _frontier(factors, "EUR")
    assert view is not None
    # A factor grid's axis names its unit instead (the practitioner's reading of the demo
    # frontier, /tmp/read60/fr_plan: "0.800 1.000 1.200 / hiring budget" had none).
    assert (view["x_label"], view["cost_label"]) == ("hiring_budget (times each year's cap)",
                                                     "new money (EUR)")


def _sheet_headers(sheet) -> list[str]:
    return [c.value for c in sheet[1]]


def test_the_workbook_names_the_currency_of_its_money_and_keeps_amounts_numbers(tmp_path):
    from openpyxl import load_workbook

    from rebalance.report.workbook import write_workbook

    frontier = pd.DataFrame({"point": [1, 2], "hiring_budget": [0.5, 1.0],
                             "budget_unit": ["times each year's cap"] * 2,
                             "weighted_shortfall": [3.0, 1.0],
                             "total_cost": [5_000.0, 15_000.0]})
    data = replace(report_data(_tiny("EUR")), frontier=frontier)
    book = load_workbook(write_workbook(data, tmp_path / "plan.xlsx"))
    summary = book["summary"]
    rows = {row[0].value: row for row in summary.iter_rows() if row[0].value}
    money = rows["new money, all years"][1]
    assert money.value == 43_000 and money.number_format == '#,##0 "EUR"'  # 43,000 EUR
    assert rows["new positions' salaries a year"][1].number_format == '#,##0 "EUR"'
    assert [c.value for c in rows["year"][:5]] == [
        "year", "hiring spend (EUR)", "hiring cap (EUR)", "moves spend (EUR)",
        "moves cap (EUR)"]
    # Money columns' names say the currency, as on the page; the cells stay plain numbers.
    assert _sheet_headers(book["costs"])[-1] == "cost (EUR)"
    hires = book["hires"]
    column = _sheet_headers(hires).index("onboarding_cost (EUR)") + 1
    assert isinstance(hires.cell(row=2, column=column).value, int | float)
    assert hires.cell(row=2, column=column).number_format == "#,##0"
    # One money rule with the page: a factor grid's budget is not money, nor shown as 1.
    sheet = book["frontier"]
    assert _sheet_headers(sheet) == ["point", "hiring_budget", "budget_unit",
                                     "weighted_shortfall", "total_cost (EUR)"]
    assert sheet["B2"].value == 0.5 and sheet["B2"].number_format == "#,##0.0"  # 0.5, 1.0
    bare = load_workbook(write_workbook(report_data(_tiny(None)), tmp_path / "bare.xlsx"))
    assert _sheet_headers(bare["costs"])[-1] == "cost"
    rows = {row[0].value: row for row in bare["summary"].iter_rows() if row[0].value}
    assert rows["new money, all years"][1].number_format == "#,##0"


def test_a_currency_with_a_quote_is_escaped_in_the_number_format():
    from rebalance.report.workbook import _money_format

    assert _money_format('E"U') == '#,##0 \\E\\"\\U'
    assert _money_format(None) == "#,##0"


def test_a_cost_stage_stopped_early_says_its_room_in_the_currency_in_the_workbook(tmp_path):
    from openpyxl import load_workbook

    from rebalance.report.inputs import StageSummary
    from rebalance.report.workbook import write_workbook

    data = report_data(_tiny("EUR"))
    stage = StageSummary("cost", "feasible_with_gap", 2_461_000.0, 2_410_000.0,
                         51_000 / 2_461_000, 10.0, "Time limit reached")
    data = replace(data, summary=replace(data.summary, stages=(stage,)))
    sheet = load_workbook(write_workbook(data, tmp_path / "plan.xlsx"))["summary"]
    rows = {r[0]: r[1] for r in sheet.iter_rows(values_only=True) if r[0]}
    assert rows["cost stage"] == ("not proven optimal: a plan with the same shortfall may cost up "
                                  "to 51,000 EUR less (gap 2.07%)")
