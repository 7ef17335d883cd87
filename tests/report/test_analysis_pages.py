"""Findings of a practitioner's audit of the analysis pages (marginal values, re-plan), each
pinned down: what a step is, which limits the chart shows and why, and which re-plan a page is,
with the disruption cost its cost stage weighed."""

from __future__ import annotations

import html
import json
import re
import shutil
from pathlib import Path

import pandas as pd
from report_cases import (
    TINY,
    cli,
    demo_marginal_table,
    demo_tables_folder,
    page_payload,
    page_text,
    tiny_plan_folder,
)

from rebalance import make_plan, options_from_instance, read_instance
from rebalance.planning import CAUTION
from rebalance.report.html import render_html
from rebalance.report.inputs import report_data, report_data_from_folder


def _section(page: str, anchor: str) -> str:
    start = page.index(f'<section id="{anchor}">')
    return page[start:page.index("</section>", start)]


def _demo_page() -> str:
    return (demo_tables_folder() / "report.html").read_text(encoding="utf-8")


# 1. "What one more unit buys" over steps of +10 seats and +100,000 of money.

def test_the_marginal_section_says_what_a_step_is_and_each_label_its_step():
    page = _demo_page()
    marginal = _section(page, "marginal")
    assert "What one more unit buys" not in page
    title = re.search(r"<h2>(.*?)</h2>", marginal)
    assert title is not None and title.group(1) == "What one more step of each limit buys"
    lead = page_text(re.search(r'<p class="lead">(.*?)</p>', marginal, re.S).group(1))
    assert "one step" in lead.lower()
    for step in ("+10 seats (seats)", "+100,000 money (moves budget, hiring budget)",
                 "+0.05 share of people (away share)", "+1 vacancy (funded vacancies)",
                 "+1 hire per period (hiring slots)", "-1 period (time to hire)"):
        assert step in lead, step
    labels = [r["label"] for r in page_payload(page)["marginal"]["rows"]]
    # The limit in words, as reasons.csv names it: demo_marginal_table predates the
    # limit_in_words column, so the page words its codes itself.
    assert labels[0] == "seats at port-ilse-central in every period, +10 seats"
    assert all(label.endswith(", +10 seats") for label in labels)


# 2. The chart showed 4 of 21 rows without saying so; the rest were ranked 5 to 21.

def test_the_marginal_chart_shows_measured_limits_only_and_says_so():
    page = _demo_page()
    table = demo_marginal_table()
    view = page_payload(page)["marginal"]
    measured = table[table["shortfall_reduction"].notna()]
    assert [r["value"] for r in view["rows"]] == measured["shortfall_reduction"].tolist()
    assert view["title"] == ("shortfall reduction: the 4 of 12 limits measured by a "
                             "re-solve")
    words = page_text(_section(page, "marginal"))
    assert "The chart shows only the 4 of 12 limits measured by a re-solve" in words
    assert "The other 8 have no measured value (not re-solved: --max-resolves" in words
    assert "without a rank, ordered by their estimate." in words  # each has one
    assert "Only limits actually re-solved are ranked" in words
    assert CAUTION in page_text(page)


def test_with_nothing_measured_the_page_says_so_instead_of_misreading_the_table(tmp_path):
    folder = tmp_path / "plan"
    shutil.copytree(tiny_plan_folder(), folder)
    table = demo_marginal_table()
    table = table[table["shortfall_reduction"].isna()]
    table.to_csv(folder / "marginal_values.csv", index=False)
    page = render_html(report_data_from_folder(folder, read_instance(TINY)))
    words = page_text(_section(page, "marginal"))
    assert "No limit was measured by a re-solve" in words
    assert "not recognised" not in words


# 4. The re-plan page never named its period or scenario; the cost stage's objective held the
#    disruption cost, the headline total cost did not, and nothing said so.

def _replan_folder(tmp_path: Path, scenario: str | None) -> Path:
    folder = tmp_path / "replan"
    shutil.copytree(tiny_plan_folder(), folder)
    summary = json.loads((folder / "summary.json").read_text())
    summary["replan"] = {"from_period": "2027-Q3", "scenario": scenario}
    summary["stages"] = [
        {"stage": "shortfall", "status": "optimal", "objective": 171.329, "bound": 170.649,
         "gap": 0.004, "seconds": 4.0, "solver_says": "Optimal"},
        {"stage": "cost", "status": "optimal", "objective": 2571000.0, "bound": 2546525.59,
         "gap": 0.0095, "seconds": 4.7, "solver_says": "Optimal"}]
    (folder / "summary.json").write_text(json.dumps(summary))
    pd.DataFrame({"measure": ["weighted_shortfall", "total_cost", "changes", "disruption_cost"],
                  "old_plan": [175.037, 2465500.0, 0.0, 0.0],
                  "new_plan": [171.296, 2513000.0, 22.0, 58000.0],
                  "difference": [-3.741, 47500.0, 22.0, 58000.0]}).to_csv(
        folder / "replan.csv", index=False)
    pd.DataFrame({"change": ["added"], "kind": ["detail"], "who": ["E0003"], "skill": [None],
                  "period": ["2027-Q4"], "old": [None], "new": ["A -> B"],
                  "disruption_cost": [2000.0]}).to_csv(folder / "changes.csv", index=False)
    return folder


def test_the_re_plan_section_names_its_period_scenario_and_disruption_cost(tmp_path):
    folder = _replan_folder(tmp_path, "hollin-cross-storm")
    page = render_html(report_data_from_folder(folder, read_instance(TINY)))
    words = page_text(_section(page, "replan"))
    assert ("Re-planned from 2027-Q3 on, with scenario hollin-cross-storm applied to the data "
            "first") in words
    assert "includes the disruption cost of the changes" in words
    assert "new money in the headline figures and in this table is without it" in words
    assert ("cost stage objective 2,571,000 = new money 2,513,000 + disruption cost "
            "58,000") in words
    assert 'href="#run"' in _section(page, "replan")  # to the stage table it explains
    assert "From 2027-Q3 on:" in page_text(_section(page, "changes"))


def test_a_re_plan_without_scenario_says_so_and_a_plan_is_no_re_plan(tmp_path):
    folder = _replan_folder(tmp_path, None)
    page = render_html(report_data_from_folder(folder, read_instance(TINY)))
    assert ("Re-planned from 2027-Q3 on, with no scenario applied (the instance's own data)"
            in page_text(_section(page, "replan")))
    plain = render_html(report_data_from_folder(tiny_plan_folder(), read_instance(TINY)))
    assert "Re-planned from" not in plain and "disruption cost" not in plain


def test_a_fresh_report_reads_which_re_plan_from_the_folder(tmp_path):
    # rebalance replan writes its report from the fresh result (summary_dict), which has no
    # replan key: the folder's summary.json has it.
    from rebalance.report.inputs import ReplanSummary

    instance = read_instance(TINY)
    result = make_plan(instance, options_from_instance(instance, time_limit_seconds=60.0))
    (tmp_path / "summary.json").write_text(json.dumps(
        {"replan": {"from_period": "2027-Q2", "scenario": "surge"}}))
    assert report_data(result, tmp_path).summary.replan == ReplanSummary("2027-Q2", "surge")
    assert report_data(result).summary.replan is None


def test_rebalance_replan_writes_a_page_that_names_its_period(tmp_path):
    out = tmp_path / "replan"
    done = cli("replan", str(TINY), "--from", str(tiny_plan_folder()), "--at", "2027-Q2",
               "-o", str(out), "-q")
    assert done.returncode == 0, done.stderr
    words = page_text((out / "report.html").read_text(encoding="utf-8"))
    assert "Re-planned from 2027-Q2 on, with no scenario applied" in words
    assert "includes the disruption cost of the changes" in words
    assert CAUTION in words


def test_a_step_is_written_with_its_unit_as_people_write_it():
    from rebalance.report.analysis_charts import step_words

    assert step_words(1_000_000.0, "money") == "+1,000,000 money"  # not +1e+06
    assert step_words(0.05, "share of people") == "+0.05 share of people"
    assert step_words(-1.0, "periods") == "-1 period"
    assert step_words(1.0, "hires per period") == "+1 hire per period"
    assert step_words(1.0, "vacancies") == "+1 vacancy"
    assert step_words(100_000.0, "money", "EUR") == "+100,000 EUR"
    # marginal_values.csv written for an instance with a currency says it in its unit column
    assert step_words(100_000.0, "EUR", "EUR") == "+100,000 EUR"
    assert step_words(1.0, "EUR") == "+1 EUR"


def test_a_unit_s_singular_is_given_not_guessed_and_every_limit_kind_has_one():
    from rebalance.analysis.marginal import STEP_UNITS  # marginal.py writes the units
    from rebalance.report.analysis_charts import step_words

    # The singular had been derived by cutting letters; a unit the table's writer adds later
    # is now kept as written rather than guessed at.
    assert step_words(1.0, "share of people") == "+1 share of people"
    assert step_words(1.0, "boxes") == "+1 boxes"  # unknown: kept as written
    table = demo_marginal_table()
    for limit, unit in zip(table["limit"], table["unit"], strict=True):
        assert STEP_UNITS[limit].plural == unit, limit


def test_the_measured_rows_are_worked_out_once_for_chart_and_caption():
    from rebalance.report.analysis_charts import _marginal, _marginal_table, _marginal_words

    table = _marginal_table(demo_marginal_table())
    assert table is not None
    assert table.measured.tolist() == demo_marginal_table()["shortfall_reduction"].notna().tolist()
    view = _marginal(table)
    _, caption = _marginal_words(table.frame, table)
    assert view is not None and len(view["rows"]) == int(table.measured.sum()) == 4
    assert f"only the 4 of {len(table.frame)} limits measured" in caption


# 5. The limits read as code names (hiring_budget, moves_budget, max_hires) on the console, the
#    page and the workbook; marginal values re-solved no budget with --max-resolves 3.

def _marginal_rows(page: str) -> list[list[str]]:
    table = re.search(r'<table class="sortable" data-table="marginal">(.*?)</table>',
                      _section(page, "marginal"), re.S)
    assert table is not None
    return [[page_text(c) for c in re.findall(r"<td\b[^>]*>(.*?)</td>", row, re.S)]
            for row in re.findall(r"<tr>(.*?)</tr>", table.group(1), re.S)[1:]]


def test_the_marginal_table_names_each_limit_in_words_not_codes():
    page = _demo_page()
    headers = re.findall(r"<th\b[^>]*>(.*?)</th>", re.search(
        r'data-table="marginal">(.*?)</thead>', page, re.S).group(1))
    assert headers[:3] == ["rank", "limit", "current"]  # one column in words, no "where"
    limits = [row[1] for row in _marginal_rows(page)]
    # Expected words written out by hand from demo_marginal_table's limit and where columns.
    assert limits == [
        "seats at port-ilse-central in every period", "seats at fenmarch-south in every period",
        "seats at fenmarch-north in every period", "seats at port-ilse-harbour in every period",
        "seats at aldercombe in every period", "moves budget 2028", "hiring budget 2027",
        "away share, every office", "funded vacancies of technical_review at port-ilse-central",
        "hiring slots at port-ilse-harbour in every period",
        "time to hire of environmental_review", "time to hire of intake"]
    for code in ("hiring_budget", "moves_budget", "max_hires", "away_share", "time_to_hire"):
        assert code not in page_text(_section(page, "marginal")), code


def test_a_new_marginal_csv_s_words_are_what_the_page_shows(tmp_path):
    # A marginal_values.csv with limit_in_words (as rebalance marginal now writes it): the
    # page shows that column's words as written and keeps the codes out of the table.
    folder = tmp_path / "plan"
    shutil.copytree(tiny_plan_folder(), folder)
    table = demo_marginal_table()
    table.insert(3, "limit_in_words", [f"limit number {i}" for i in range(len(table))])
    table.to_csv(folder / "marginal_values.csv", index=False)
    page = render_html(report_data_from_folder(folder, read_instance(TINY)))
    assert [row[1] for row in _marginal_rows(page)] == [
        f"limit number {i}" for i in range(len(table))]
    labels = [r["label"] for r in page_payload(page)["marginal"]["rows"]]
    assert labels[0] == "limit number 0, +10 seats"


# 6. "Why each action" had some 300 rows on the demo, 2.5 of them in view in its box.

def test_the_reasons_section_leads_with_tables_by_office_and_by_limit():
    page = _demo_page()
    reasons = _section(page, "reasons")
    first = reasons.index('data-table="reasons_by_office"')
    assert first < reasons.index('data-table="reasons_by_limit"') < reasons.index(
        '<details class="all-reasons">') < reasons.index('data-table="reasons"')
    assert "All 3 reasons, one row per action and shortfall" in page_text(reasons)
    by_limit = re.search(r'data-table="reasons_by_limit">(.*?)</table>', reasons, re.S)
    assert by_limit is not None
    words = page_text(by_limit.group(1))
    # demo_reasons_table's two shortfalls, counted by hand: seats at port-ilse-harbour and
    # hiring slots there hold back both (0.932 + 0.046), the budgets the first only.
    for limit in ("seats at port-ilse-harbour 2 0.978", "hiring slots at port-ilse-harbour 2",
                  "hiring budget 2027 1 0.932", "moves budget 2028 1 0.932"):
        assert limit in words, limit
    assert "seats|" not in words and "hiring_budget" not in words


def test_a_scenario_named_null_keeps_its_name_on_the_page(tmp_path: Path) -> None:
    # A sweep: scenarios.csv read back with pandas' defaults turned the name "null" (and NA,
    # None, nan) into a missing value; the page said "nan: ..." and its title left it out.
    from report_cases import demo_scenarios_table, tiny_plan_folder

    folder = tmp_path / "null"
    shutil.copytree(tiny_plan_folder(), folder)
    table = demo_scenarios_table()
    table.loc[1, "scenario"] = "null"
    table.to_csv(folder / "scenarios.csv", index=False)
    data = report_data_from_folder(folder, read_instance(TINY))
    assert data.scenarios is not None and "null" in data.scenarios["scenario"].tolist()
    text = page_text(render_html(data))
    assert "null" in text and "nan:" not in text


# The scenarios section had said each scenario "was solved as its own plan" (each is solved
# from the base plan), and "optimal" beside a gap of 0.99%.

def test_the_scenarios_section_says_from_the_base_plan_and_optimal_within_the_gap(tmp_path):
    from report_cases import demo_scenarios_table

    folder = tmp_path / "plan"
    shutil.copytree(tiny_plan_folder(), folder)
    table = demo_scenarios_table()
    table.insert(1, "description", ["the instance as it is", "a rush", "a storm"])
    table.loc[1, "status"] = "optimal"
    table.loc[1, "gap"] = 0.0099
    table.to_csv(folder / "scenarios.csv", index=False)
    # Made-up offices: the rush's demand and shortfall land at one office.
    pd.DataFrame({"scenario": ["base", "harbour-permit-rush"], "office": ["A", "A"],
                  "demand_fte_periods": [10.0, 34.0], "shortfall_fte_periods": [1.0, 21.2],
                  "weighted_shortfall": [1.0, 21.2]}).to_csv(
        folder / "scenario_offices.csv", index=False)
    data = report_data_from_folder(folder, read_instance(TINY))
    section = _section(render_html(data), "scenarios")
    assert "solved from the base plan, and a change that did not pay" in section
    assert "solved as its own plan" not in section
    assert "optimal within the gap asked (0.99% left)" in section
    assert "demand +24.0 FTE-periods (A +24.0)" in section
    assert "shortfall by office against the base: A +20.2" in section


def test_the_scenario_line_on_the_page_says_who_moves_and_what_holds_it_back(tmp_path):
    # A planner's reading of the demo comparison: who moves for the surge, and why so much
    # of it is left short, were only in scenario_actions.csv and each folder's reasons.csv.
    from report_cases import demo_scenarios_table

    folder = tmp_path / "plan"
    shutil.copytree(tiny_plan_folder(), folder)
    table = demo_scenarios_table()
    table.insert(1, "description", ["the instance as it is", "a rush", "a storm"])
    # Made-up keys in scenarios.csv's form (office names from tests/data/tiny).
    table["details_added"] = [None, "B|A|3", None]
    table["hires_changed"] = [None, "earlier|B|review|new|2027-Q2|1|1|2027-Q4", None]
    table["changes_before"] = [None, 2, 0]
    table["held_back_by"] = [None, "seats|B|2027-Q2,2027-Q3|4;hiring_budget|2027||1", None]
    table.to_csv(folder / "scenarios.csv", index=False)
    data = report_data_from_folder(folder, read_instance(TINY))
    section = html.unescape(_section(render_html(data), "scenarios"))
    assert ("left short, held back mostly by seats at B (full 2027-Q2 to 2027-Q3), cited by "
            "4.0 FTE-periods of new shortfall there, and less by the hiring budget of 2027; "
            "moves for it: 3 detail-periods into B (3 from A); hires: "
            "1 review at B brought forward from 2027-Q4 to 2027-Q2; 2 changes before the "
            "scenario's changes begin;") in section
    # Said in the lead, so the table leaves the keys out.
    assert ">details added<" not in section and "B|A|3" not in section


# A practitioner's reading of the demo comparison: the actions table took two rows for a
# rerouted detail, hid detail rows' skills, and did not say which changes came before the
# surge or were made under every scenario.

def test_the_scenario_actions_section_shows_change_when_and_every_scenario(tmp_path):
    from rebalance.analysis.scenario_actions import ACTION_COLUMNS

    folder = tmp_path / "plan"
    shutil.copytree(tiny_plan_folder(), folder)
    # Made-up rows in the table's columns (office names from tests/data/tiny).
    rows = [("rush", "rerouted", "detail", "a1", "review", "2027-Q1", "A -> B, now A -> C", 1,
             1, "before", True),
            ("storm", "rerouted", "detail", "a1", "review", "2027-Q1", "A -> B, now A -> C", 1,
             1, "before", True),
            ("rush", "more", "hire", "B", "review", "2027-Q3", "new", 0, 1, "during", False)]
    pd.DataFrame(rows, columns=list(ACTION_COLUMNS)).to_csv(
        folder / "scenario_actions.csv", index=False)
    section = _section(render_html(report_data_from_folder(folder, read_instance(TINY))),
                       "scenario_actions")
    words = html.unescape(page_text(section))
    # Counted by hand from the three rows above.
    assert ("2 of the 3 changes fall before their scenario's changes begin; 1 is made under "
            "every scenario, 1 of them before any scenario's changes begin: those likely suit "
            "the base plan too.") in words
    for header in ("change", "route or funding", "when", "in every scenario"):
        assert f">{header}<" in html.unescape(section), header
    assert "rush rerouted detail a1 review 2027-Q1 A -> B, now A -> C 1 1 before yes" in words


def test_marginal_values_within_the_gap_are_said_not_firm() -> None:
    # A practitioner's reading: a +100,000 budget's 0.842 read as a measured gain, where the
    # solves' shortfall gap of 1% of 168.6 is 1.7 FTE-periods.  Made-up rows.
    from rebalance.report.analysis_words import marginal_gap_words

    frame = pd.DataFrame({"limit_in_words": ["seats at A", "hiring budget 2027", "seats at B"],
                          "shortfall_reduction": [20.2, 0.842, None],
                          "shortfall_gap": [0.01, 0.0069, None]})
    assert marginal_gap_words(frame, 168.6) == (
        "Measured values within the solves' shortfall gap (1.00% of 168.6 FTE-periods: 1.7) "
        "are not firm: hiring budget 2027.")
    assert marginal_gap_words(frame.assign(shortfall_gap=0.0), 168.6) == ""  # exact solves
    assert marginal_gap_words(frame, None) == ""


# A planner's reading of the analysis pages of the demo (compare, frontier, marginal).

def _table_rows(section: str, name: str) -> list[list[str]]:
    table = re.search(rf'<table class="sortable" data-table="{name}">(.*?)</table>', section,
                      re.S)
    assert table is not None
    return [[html.unescape(page_text(c)).strip()
             for c in re.findall(r"<td\b[^>]*>(.*?)</td>", row, re.S)]
            for row in re.findall(r"<tr>(.*?)</tr>", table.group(1), re.S)[1:]]


def _headers(section: str, name: str) -> list[str]:
    head = re.search(rf'data-table="{name}">(.*?)</thead>', section, re.S)
    assert head is not None
    return [html.unescape(h) for h in re.findall(r"<th\b[^>]*>(.*?)</th>", head.group(1))]


def test_marginal_amounts_that_are_counts_read_as_whole_numbers():
    # The page had "52.000" seats and a step of "10.000", time to hire "2.000" and "-1.000"
    # periods, a hire count "2.000": one column held a share of 0.15 too, so every row took
    # three decimals.  Expected texts written by hand from demo_marginal_table's rows.
    section = _section(_demo_page(), "marginal")
    headers = _headers(section, "marginal")
    rows = {row[headers.index("limit")]: row for row in _table_rows(section, "marginal")}
    current, step = headers.index("current"), headers.index("step")
    seats = rows["seats at port-ilse-central in every period"]
    assert (seats[current], seats[step]) == ("52", "+10 seats")
    hire = rows["time to hire of environmental_review"]
    assert (hire[current], hire[step]) == ("2", "-1 period")
    slots = rows["hiring slots at port-ilse-harbour in every period"]
    assert (slots[current], slots[step]) == ("2", "+1 hire per period")
    budget = rows["hiring budget 2027"]
    assert (budget[current], budget[step]) == ("520,000", "+100,000 money")
    share = rows["away share, every office"]
    assert (share[current], share[step]) == ("0.150", "+0.05 share of people")


def test_a_budget_year_reads_as_a_year_in_the_scenarios_table(tmp_path):
    # The page had written the storm's hiring budget year as "2,027": read back from
    # scenarios.csv a single year is a number.  The demo comparison's budget columns.
    folder = tmp_path / "plan"
    shutil.copytree(tiny_plan_folder(), folder)
    table = demo_scenarios_table_with_budgets()
    table.to_csv(folder / "scenarios.csv", index=False)
    section = _section(render_html(report_data_from_folder(folder, read_instance(TINY))),
                       "scenarios")
    headers = _headers(section, "scenarios")
    rows = _table_rows(section, "scenarios")
    years = headers.index("hiring budget years")
    assert [row[years] for row in rows] == ["", "", "2027"]
    assert "2,027" not in page_text(section)


def demo_scenarios_table_with_budgets() -> pd.DataFrame:
    """The demo comparison's table (report_cases) with the budget columns of a planner's
    run: the storm's hiring budget +150,000 in 2027."""
    from report_cases import demo_scenarios_table

    table = demo_scenarios_table()
    table.insert(1, "description", ["the instance as it is", "a rush", "a storm"])
    table["hiring_budget_change"] = [0.0, 0.0, 150_000.0]
    table["hiring_budget_years"] = ["", "", "2027"]
    table["hiring_spent_change"] = [0.0, 0.0, 148_000.0]
    return table


def test_a_frontier_table_gives_factors_as_typed_and_each_point_s_money(tmp_path):
    # The page had shown only factors, "1.000" and "1.500", and marked no knee in its chart
    # while the table said knee = yes.  Figures of the demo's frontier (1x, 1.5x, 2x of
    # hiring caps 520,000 and 1,400,000: totals 1,920,000, 2,880,000, 3,840,000 by hand).
    folder = tmp_path / "plan"
    shutil.copytree(tiny_plan_folder(), folder)
    pd.DataFrame({
        "point": [1, 2, 3], "hiring_budget": [1.0, 1.5, 2.0], "moves_budget": [None] * 3,
        "budget_unit": ["times each year's cap"] * 3,
        "hiring_cap_total": [1_920_000.0, 2_880_000.0, 3_840_000.0],
        "moves_cap_total": [560_000.0] * 3, "status": ["feasible_with_gap"] * 3,
        "verified": [True] * 3, "gap": [0.0241, 0.0791, 0.1524],
        "shortfall_gap": [0.0048, 0.0090, 0.0126],
        "weighted_shortfall": [168.592, 161.740, 159.071],
        "total_cost": [2_463_500.0, 3_420_000.0, 4_229_000.0],
        "extra_cost": [0.0, 956_500.0, 1_765_500.0], "knee": [False] * 3,
    }).to_csv(folder / "frontier.csv", index=False)
    section = _section(render_html(report_data_from_folder(folder, read_instance(TINY))),
                       "frontier")
    headers = _headers(section, "frontier")
    rows = _table_rows(section, "frontier")
    factor, cap, extra = (headers.index(h) for h in ("hiring budget", "hiring cap total",
                                                      "extra cost"))
    assert [row[factor] for row in rows] == ["1.0", "1.5", "2.0"]
    assert [row[cap] for row in rows] == ["1,920,000", "2,880,000", "3,840,000"]
    assert [row[extra] for row in rows] == ["0", "956,500", "1,765,500"]
    note = html.unescape(page_text(section))
    assert "(the shortfall gap column)" in note and "CSV file" not in note
