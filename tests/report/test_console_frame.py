"""Result tables on the console read as a planner expects, not as pandas prints them."""

from __future__ import annotations

import math
import re

import pandas as pd

from rebalance.report.console import format_frame


def test_gaps_money_counts_flags_and_missing_values_read_plainly() -> None:
    # A practitioner's reading of compare, frontier and marginal: "True", "NaN", "2465500.0",
    # a gap as 0.026161 beside percentages elsewhere.
    frame = pd.DataFrame({"scenario": ["base", "surge"], "verified": [True, False],
                          "gap": [0.026161, math.nan], "weighted_shortfall": [165.945102, 0.5],
                          "total_cost": [2465500.0, 2442000.4], "hires": [24, 25],
                          "step": [10.0, 0.05]})
    text = format_frame(frame)
    assert "2.62%" in text and "2,465,500" in text and "2,442,000" in text
    assert "165.945" in text and "yes" in text and "no" in text  # the rule's three decimals
    assert "NaN" not in text and "True" not in text and "2465500.0" not in text
    lines = text.splitlines()
    assert lines[0].split() == list(frame.columns) and len(lines) == 4
    assert lines[3].split()[2] == "-"  # the missing gap
    # One column, one count of decimals: "10" beside "0.05" had read as two kinds of figure.
    assert lines[2].split()[-1] == "10.000" and lines[3].split()[-1] == "0.050"


def test_the_console_and_the_page_write_numbers_by_one_rule():
    # Two rules had drifted: the page wrote solver dust as 0 and 1,234.6 as 1,235 while the
    # console wrote 0.00 and 1,234.60; the page wrote a cost of 123.456 with decimals.
    from rebalance.numbers import number_text
    from rebalance.report import console, htmlparts

    assert console.number_text is number_text  # the console's rule is rebalance.numbers'
    frame = pd.DataFrame({"shortfall_reduction": [4.4e-16, 1234.6, -1e-12],
                          "total_cost": [123.456, 2.0, 0.4], "stage_gap": [0.5, 0.0, 0.01]})
    rows = [line.split() for line in format_frame(frame).splitlines()[2:]]
    assert rows == [["0", "123", "50.00%"], ["1,235", "2", "0.00%"], ["0", "0", "1.00%"]]
    page = htmlparts.frame_table_html(frame, "t")
    cells = re.findall(r"<td\b[^>]*>(.*?)</td>", page)
    assert cells == ["0", "123", "50.00%", "1,235", "2", "0.00%", "0", "0", "1.00%"]
    # The rule's decimals serve every surface (the console's tables had kept two of their own).
    assert number_text(165.945102, digits=2) == "165.95" and number_text(165.945102) == "165.945"


def test_a_status_reads_in_the_words_of_the_page_on_the_console_and_in_the_workbook(
        tmp_path) -> None:
    # A practitioner's reading: compare's, marginal's and frontier's consoles and the
    # workbook's analysis sheets said "feasible_with_gap" where the page says "plan found,
    # not proven optimal" (the CSV files keep the code).
    from openpyxl import load_workbook

    from rebalance.report.workbook import _Styles, _table_sheet

    frame = pd.DataFrame({"scenario": ["base", "surge", "slow"],
                          "status": ["optimal", "feasible_with_gap", "not re-solved"]})
    text = format_frame(frame)
    assert "plan found, not proven optimal" in text and "feasible_with_gap" not in text
    assert "not re-solved" in text
    import xlsxwriter

    path = tmp_path / "t.xlsx"
    book = xlsxwriter.Workbook(str(path))
    _table_sheet(book.add_worksheet("scenarios"), _Styles(book), frame)
    book.close()
    cells = [r[1] for r in load_workbook(path)["scenarios"].iter_rows(values_only=True)]
    assert cells == ["status", "optimal", "plan found, not proven optimal", "not re-solved"]


def test_old_new_and_difference_of_a_measure_read_alike_on_the_console_and_the_page():
    # A practitioner's reading of the demo re-plan's replan.csv (old 168.59153075497005, new
    # 168.5913621636079, difference -0.00016859136215430226): the console read "168.592
    # 168.591 0.000", a difference that is not that of the figures beside it.  By hand: at
    # four decimals 168.5914 - 168.5915 = -0.0001 against -0.0002, so five: 168.59136 -
    # 168.59153 = -0.00017.  A difference of 0.0009 (1.0004 to 1.0013) reads as the figures
    # shown differ, 1.001 - 1.000; whole counts and money keep the rule.
    from rebalance.report.htmlparts import frame_table_html

    frame = pd.DataFrame({
        "measure": ["weighted_shortfall", "idle", "hires", "total_cost", "work_split_changes"],
        "old_plan": [168.59153075497005, 1.0004, 24.0, 2_463_500.0, 0.0],
        "new_plan": [168.5913621636079, 1.0013, 24.0, 2_463_500.4, 61.0],
        "difference": [-0.00016859136215430226, 0.0009, 0.0, 0.4, 61.0]})
    # Columns are two spaces or more apart; a measure reads in words ("weighted shortfall").
    lines = {cells[0]: cells[1:] for cells in (re.split(r"\s{2,}", line.strip())
                                               for line in format_frame(frame, "EUR")
                                               .splitlines()[2:])}
    assert lines["weighted shortfall"] == ["168.59153", "168.59136", "-0.00017"]
    assert lines["idle"] == ["1.000", "1.001", "0.001"]
    assert lines["hires"] == ["24", "24", "0"]
    assert lines["new money"] == ["2,463,500 EUR", "2,463,500 EUR", "0 EUR"]
    assert lines["work split changes"] == ["0", "61", "61"]
    page = re.sub(r"<[^>]+>", " ", frame_table_html(frame, "replan", currency="EUR"))
    words = " ".join(page.split())
    assert "weighted shortfall 168.59153 168.59136 -0.00017" in words
    assert "idle 1.000 1.001 0.001" in words and "hires 24 24 0" in words
    # The sort value stays the exact figure.
    assert 'data-v="-0.00016859136215430226"' in frame_table_html(frame, "replan")


def test_a_plan_made_ahead_reads_with_the_decimals_of_the_figures_beside_it():
    # The demo re-plan with --planned-ahead read five decimals for old, new and difference
    # and three for the plan made ahead.  By hand: 170.96049 and 170.96032 read apart at four
    # decimals (170.9605, 170.9603, difference -0.0002), so 165.5 reads 165.5000, not the
    # rule's 165.500; money and counts keep the rule.
    from rebalance.report.htmlparts import frame_table_html

    frame = pd.DataFrame({
        "measure": ["shortfall_fte_periods", "total_cost", "hires"],
        "old_plan": [170.96049, 2_463_500.0, 24.0],
        "new_plan": [170.96032, 2_539_500.0, 23.0],
        "difference": [-0.00017, 76_000.0, -1.0],
        "planned_ahead": [165.5, 2_580_000.0, 25.0]})
    lines = {cells[0]: cells[1:] for cells in (re.split(r"\s{2,}", line.strip())
                                               for line in format_frame(frame, "EUR")
                                               .splitlines()[2:])}
    assert lines["shortfall FTE-periods"] == ["170.9605", "170.9603", "-0.0002", "165.5000"]
    assert lines["new money"][3] == "2,580,000 EUR" and lines["hires"][3] == "25"
    page = " ".join(re.sub(r"<[^>]+>", " ", frame_table_html(frame, "replan")).split())
    assert "170.9605 170.9603 -0.0002 165.5000" in page


def test_a_difference_one_off_in_the_last_place_keeps_the_rules_decimals():
    # A reviewer's reading of a re-plan: shortfall FTE-periods 185.733247, 185.424554 and
    # -0.308693 were written to six decimals, as 185.425 - 185.733 = -0.308 against -0.309 at
    # three.  By hand, as in any rounded table, one in the last place is rounding; with more
    # decimals than the rule's the difference stays exact (168.59153 above).
    from rebalance.numbers import compared_texts

    assert compared_texts(185.733247, 185.424554, -0.308693, "shortfall_fte_periods") == [
        "185.733", "185.425", "-0.309"]
    assert compared_texts(168.59153075497005, 168.5913621636079, -0.00016859136215430226,
                          "weighted_shortfall") == ["168.59153", "168.59136", "-0.00017"]
