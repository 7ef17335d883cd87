"""report.html without a browser: one self-contained file whose chart data add up to the plan
tables, with analysis sections only when their tables exist, read defensively."""

from __future__ import annotations

import html
import itertools
import json
import re
import shutil
from pathlib import Path

import pandas as pd
import pytest
from report_cases import TINY, page_payload, tiny_analysis_folder, tiny_plan_folder
from test_report_page_reading import ASSETS, _lab

from rebalance import read_instance, read_plan
from rebalance.planning import CAUTION
from rebalance.report.html import render_html
from rebalance.report.inputs import report_data_from_folder


def _page(folder: Path) -> str:
    return (folder / "report.html").read_text(encoding="utf-8")


def test_report_is_one_file_that_needs_no_network():
    page = _page(tiny_plan_folder())
    assert "<link" not in page
    assert not re.search(r"<script[^>]+src=", page)
    assert not re.search(r"<img\b", page)
    assert "@import" not in page and "url(" not in page
    # Only in-page links; the one URL-looking string is the SVG namespace the script needs.
    assert set(re.findall(r'href="([^"#][^"]*)"', page)) == set()
    assert set(re.findall(r"https?://[^\s\"')]+", page)) == {"http://www.w3.org/2000/svg"}
    assert page.count(CAUTION) >= 2  # under the header and in the footer


def test_chart_data_add_up_to_the_plan_tables():
    folder = tiny_plan_folder()
    instance = read_instance(TINY)
    plan = read_plan(folder)
    data = page_payload(_page(folder))
    everywhere = data["coverage"]["series"][0]
    assert everywhere["office"] == "all offices"
    # Demand against the instance itself (the input), not the plan's copy of it.
    assert sum(everywhere["demand"]) == pytest.approx(sum(d.fte for d in instance.demand))
    covered = [a + b for a, b in zip(everywhere["staff"], everywhere["hires"], strict=True)]
    assert sum(covered) == pytest.approx(plan.coverage["covered_fte"].sum(), abs=1e-3)
    heat_total = sum(c["shortfall"] for row in data["heat"]["cells"] for c in row)
    assert heat_total == pytest.approx(plan.shortfall_fte, abs=1e-3)
    assert sum(f["detail_periods"] for f in data["flows"]["flows"]) == len(plan.details)
    assert sum(sum(row) for row in data["hires"]["counts"]) == plan.hires_count()
    spend = sum(r["spend"] for r in data["budget"])
    assert spend == pytest.approx(plan.total_cost)


def test_analysis_sections_appear_only_with_their_tables():
    plain = _page(tiny_plan_folder())
    full = _page(tiny_analysis_folder())
    for anchor in ("frontier", "scenarios", "marginal"):
        assert f'id="{anchor}"' not in plain
        assert f'id="{anchor}"' in full
        assert f'data-chart="{anchor}"' in full
    # scenario_costs.csv is the scenarios' cost columns stacked: a sheet of plan.xlsx only.
    assert (tiny_analysis_folder() / "scenario_costs.csv").is_file()
    assert 'id="scenario_costs"' not in full
    payload = page_payload(full)
    frontier = pd.read_csv(tiny_analysis_folder() / "frontier.csv")
    lines = payload["frontier"]["series"]
    assert len(lines) == frontier["moves_budget"].nunique() == 2
    for line, (_, part) in zip(lines, frontier.groupby("moves_budget"), strict=True):
        assert [p["x"] for p in line["points"]] == sorted(part["hiring_budget"])
        assert sum(p["knee"] for p in line["points"]) == part["knee"].sum()
        # More hiring budget never raises the least shortfall (each point an exact re-solve).
        shortfalls = list(part.sort_values("hiring_budget")["weighted_shortfall"])
        assert all(b <= a + 1e-9 for a, b in itertools.pairwise(shortfalls))
    marginal = payload["marginal"]["rows"]
    assert [abs(r["value"]) for r in marginal] == sorted((abs(r["value"]) for r in marginal),
                                                         reverse=True)


def _copy(tmp_path: Path) -> Path:
    folder = tmp_path / "plan"
    shutil.copytree(tiny_plan_folder(), folder)
    return folder


def test_analysis_tables_with_other_column_names(tmp_path):
    folder = _copy(tmp_path)
    # Four levels: fewer ring no knee (test_report_page_reading).
    pd.DataFrame({"budget": [0, 5000, 9000, 12000], "shortfall": [3.0, 1.0, 0.5, 0.4],
                  "is_knee": ["no", "yes", "no", "no"]}).to_csv(folder / "frontier.csv",
                                                                index=False)
    pd.DataFrame({"name": ["base", "surge"], "weighted_shortfall": [1.0, 2.5],
                  "total_cost": [10.0, 20.0]}).to_csv(folder / "comparison.csv", index=False)
    pd.DataFrame({"constraint": ["seats", "hiring"], "office": ["A", "B"],
                  "delta_shortfall": [0.2, -1.5]}).to_csv(folder / "marginal_values.csv",
                                                          index=False)
    page = render_html(report_data_from_folder(folder, read_instance(TINY)))
    data = page_payload(page)
    assert [p["knee"] for p in data["frontier"]["series"][0]["points"]] == [False, True, False,
                                                                           False]
    assert data["scenarios"]["labels"] == ["base", "surge"]
    assert [r["label"] for r in data["marginal"]["rows"]] == ["hiring · B", "seats · A"]


def test_unrecognised_or_broken_analysis_tables_do_not_break_the_report(tmp_path):
    folder = _copy(tmp_path)
    pd.DataFrame({"a": ["x", "y"], "b": ["p", "q"]}).to_csv(folder / "frontier.csv",
                                                            index=False)
    (folder / "scenarios.csv").write_bytes(b"\x00\xff\x00garbage\n\"unterminated")
    (folder / "marginal_values.csv").write_text("")
    page = render_html(report_data_from_folder(folder, read_instance(TINY)))
    assert 'id="frontier"' in page and 'data-chart="frontier"' not in page
    assert "not recognised for a chart" in page
    assert 'id="marginal"' not in page  # an empty file has nothing to show


def test_rebuild_command(tmp_path, capsys):
    # In-process (rebalance.cli.main) to keep it quick; report_cases runs the CLI as a user does.
    from rebalance.cli import main

    folder = _copy(tmp_path)
    (folder / "report.html").unlink()
    (folder / "plan.xlsx").unlink()
    assert main(["report", str(folder)]) == 0
    assert (folder / "report.html").is_file() and (folder / "plan.xlsx").is_file()
    # No temporary file left behind (the folder's own mark stays).
    assert [p.name for p in folder.iterdir() if p.name.startswith(".")] == [".rebalance-folder"]
    # Without a stored instance path the command asks for one; --instance supplies it.
    summary = json.loads((folder / "summary.json").read_text())
    summary.pop("instance_path")
    (folder / "summary.json").write_text(json.dumps(summary))
    capsys.readouterr()
    assert main(["report", str(folder)]) == 2
    assert "--instance" in capsys.readouterr().err
    assert main(["report", str(folder), "--instance", str(TINY)]) == 0
    assert main(["report", str(tmp_path / "nowhere")]) == 3
    assert "Traceback" not in capsys.readouterr().err


def test_a_rebuilt_report_says_what_verification_finds_now_not_what_was_stored(tmp_path,
                                                                               capsys):
    # A sweep edited a plan's hires.csv (2 -> 5 hires) and deleted coverage.csv: the rebuilt
    # reports had said "verified independently", from the summary.json written with the plan.
    from rebalance.cli import EXIT_VERIFICATION_FAILED, main

    folder = _copy(tmp_path)
    hires = pd.read_csv(folder / "hires.csv")
    hires.loc[0, "count"] += 3
    hires.to_csv(folder / "hires.csv", index=False)
    assert main(["report", str(folder)]) == EXIT_VERIFICATION_FAILED
    assert "verification failed" in capsys.readouterr().err
    page = (folder / "report.html").read_text()
    assert "FAILED verification" in page and "verified independently" not in page
    (folder / "coverage.csv").unlink()
    assert main(["report", str(folder)]) == EXIT_VERIFICATION_FAILED
    assert "coverage.csv: file is missing" in (folder / "report.html").read_text()


def test_long_tables_are_cut_with_a_pointer_to_the_full_files():
    from rebalance.report.htmlparts import table_html

    rows = [[f"p{i}", float(i)] for i in range(30)]
    cut = table_html(["person", "cost"], rows, name="x", numeric=[False, True], limit=10)
    assert cut.count("<tr>") == 11  # header and ten rows
    assert "first 10 of 30 rows" in cut and "plan.xlsx" in cut
    whole = table_html(["person", "cost"], rows, name="x", numeric=[False, True])
    assert whole.count("<tr>") == 31 and "Showing" not in whole


def test_frontier_over_both_budgets_draws_one_line_per_moves_budget(tmp_path):
    # Columns as the issue-5 frontier writes them (point, hiring_budget, moves_budget, ...).
    folder = _copy(tmp_path)
    rows = []
    for point, (hiring, moves, short) in enumerate([(0, 10, 3.0), (5, 10, 2.0), (0, 20, 2.5),
                                                    (5, 20, 1.0)]):
        rows.append({"point": point, "hiring_budget": hiring, "moves_budget": moves,
                     "status": "optimal", "verified": True, "gap": 0.0,
                     "weighted_shortfall": short, "shortfall_fte_periods": short,
                     "total_cost": hiring + moves, "hiring_spend": hiring, "moves_spend": moves,
                     "hires": 0, "detail_periods": 0, "reassignments": 0, "knee": point == 3})
    pd.DataFrame(rows).to_csv(folder / "frontier.csv", index=False)
    data = page_payload(render_html(report_data_from_folder(folder, read_instance(TINY))))
    frontier = data["frontier"]
    assert (frontier["x_label"], frontier["y_label"]) == ("hiring_budget", "weighted_shortfall")
    assert [s["label"] for s in frontier["series"]] == ["moves budget 10", "moves budget 20"]
    assert [[p["y"] for p in s["points"]] for s in frontier["series"]] == [[3.0, 2.0],
                                                                          [2.5, 1.0]]


def test_tables_an_analysis_writes_before_the_reports_are_shown(tmp_path):
    # The compare/replan/marginal commands hand their tables to write_plan_folder, which
    # writes them into the staging folder before the reports, so the report of that one swap
    # already shows them.
    from report_cases import scenario_table

    from rebalance import make_plan, options_from_instance
    from rebalance.files import staged_folder
    from rebalance.report.files import write_plan_folder

    instance = read_instance(TINY)
    result = make_plan(instance, options_from_instance(instance, relative_gap=0.0))
    reasons = pd.DataFrame({"action": ["hire"], "subject": ["B review"], "office": ["B"],
                            "skill": ["review"], "first_period": ["2027-Q4"],
                            "last_period": ["2027-Q4"], "amount": [1],
                            "reason": ["b1 leaves after 2027-Q3"], "binding_limits": [""]})
    out = tmp_path / "compare"
    with staged_folder(out, kind="plan") as folder:
        write_plan_folder(result, folder, tables={"reasons.csv": reasons}, instance_path=TINY,
                          more=lambda into: scenario_table(instance).to_csv(
                              into / "scenarios.csv", index=False))
    page = _page(out)
    assert 'data-chart="scenarios"' in page
    assert 'id="reasons"' in page and "b1 leaves after 2027-Q3" in page
    from openpyxl import load_workbook

    assert load_workbook(out / "plan.xlsx").sheetnames[-2:] == ["scenarios", "reasons"]
    assert json.loads((out / "summary.json").read_text())["instance_path"] == str(TINY)


def test_a_wide_gap_is_flagged_at_the_top(tmp_path):
    folder = _copy(tmp_path)
    instance = read_instance(TINY)
    assert "a better plan may exist" not in _page(folder)  # tiny is solved to optimality
    summary = json.loads((folder / "summary.json").read_text())
    summary.update(status="feasible_with_gap", gap=0.4)
    (folder / "summary.json").write_text(json.dumps(summary))
    page = render_html(report_data_from_folder(folder, instance))
    assert "a gap of 40.00%" in page and "a better plan may exist" in page
    assert page.index("a better plan may exist") < page.index('id="glance"')


def test_the_heat_map_says_how_many_skills_are_short_beside_the_worst_three():
    # A sweep: the tip said "skills short: a, b, c" where eight were short.
    from dataclasses import replace

    from rebalance.report.chart_data import _heat

    data = report_data_from_folder(tiny_plan_folder(), read_instance(TINY))
    coverage = pd.DataFrame([
        {"office": "A", "skill": f"s{i}", "period": "2027-Q1", "demand_fte": 2.0,
         "shortfall_fte": 0.1 * (i + 1), "weighted_shortfall": 0.1 * (i + 1)}
        for i in range(5)])
    heat = _heat(replace(data, plan=replace(data.plan, coverage=coverage)))
    cell = heat["cells"][heat["offices"].index("A")][0]
    assert cell["skills"] == ["s4", "s3", "s2"] and cell["skills_short"] == 5


def _relative_luminance(colour: str) -> float:
    """WCAG 2.1 relative luminance of a #rrggbb colour."""
    def linear(c: float) -> float:
        return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4

    r, g, b = (linear(int(colour[i:i + 2], 16) / 255) for i in (1, 3, 5))
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def test_frontier_lines_use_colours_that_mean_nothing_else_on_the_pages():
    # A review: the frontier drew its lines in the staff blue and the shortfall brick.
    # Source of the colours that mean something: the page's own keys, report.js (C, the budget
    # parts PART, the heat scale HEAT, the skills SKILL) and report.css (:root); distance as
    # CIE76 (as for the skills in test_report_page_reading.py); contrast as WCAG 2.1 (1.4.11:
    # 3:1 for the parts of a graphic) against the sheet's white.
    script = (ASSETS / "report.js").read_text(encoding="utf-8")
    css = (ASSETS / "report.css").read_text(encoding="utf-8")

    def hexes(text: str) -> list[str]:
        return [c.lower() for c in re.findall(r"#[0-9a-fA-F]{6}\b", text)]

    lines = hexes(re.search(r"var LINES = \[(.*?)\];", script, re.S).group(1))
    keys = re.search(r"var C = \{(.*?)\};", script, re.S).group(1)
    meaning = {c: "C" for c in hexes(keys)}
    meaning |= {c: "PART" for c in hexes(re.search(r"var PART = \{(.*?)\};", script,
                                                    re.S).group(1))}
    meaning |= {c: "SKILL" for c in hexes(re.search(r"var SKILL = \[(.*?)\];", script,
                                                    re.S).group(1))}
    heat = re.search(r"var HEAT = \[(.*)\];", script).group(1)
    meaning |= {"#" + "".join(f"{int(v):02x}" for v in rgb): "HEAT"
                for rgb in re.findall(r"\[(\d+), (\d+), (\d+)\]", heat)}
    for name in ("staff", "hire", "short", "detail", "move", "amber", "good", "fair", "bad"):
        meaning[re.search(rf"--{name}: (#[0-9a-fA-F]{{6}})", css).group(1).lower()] = name
    assert len(lines) >= 4 and len(meaning) >= 25

    def distance(a: str, b: str) -> float:
        return sum((x - y) ** 2 for x, y in zip(_lab(a), _lab(b), strict=True)) ** 0.5

    white = _relative_luminance("#ffffff")
    for colour in lines:
        for other, where in meaning.items():
            assert distance(colour, other) >= 20, f"line {colour} is near {other} ({where})"
        assert (white + 0.05) / (_relative_luminance(colour) + 0.05) >= 3, colour
    for a, b in itertools.combinations(lines, 2):
        assert distance(a, b) >= 20, (a, b)


def test_a_comparison_page_titles_the_plan_sections_as_the_base_plans():
    # A practitioner's reading of the demo comparison (/tmp/reading/cmpshot.txt): "At a
    # glance", "Who moves where", "Money" and "Why each action" showed the base plan only,
    # unlabelled, beside the scenarios.  A single plan's page keeps its headings.
    def headings(page: str) -> list[str]:
        return re.findall(r"<h2>(.*?)</h2>", page)

    plain = headings(_page(tiny_plan_folder()))
    assert plain[:6] == ["At a glance", "Work and capacity", "Where the gaps are",
                         "Who moves where", "Hiring", "Money"]
    assert not any(h.startswith("Base plan") for h in plain)
    full = headings(_page(tiny_analysis_folder()))
    for title in ("At a glance", "Who moves where", "Money", "Why each action",
                  "How it was found"):
        assert f"Base plan: {title[0].lower()}{title[1:]}" in full, title
    # The comparison's own sections keep theirs.
    assert "Scenarios side by side" in full and "Actions that differ from the base" in full
    assert "Budget frontier" in full


def test_a_scenarios_plan_says_it_is_that_scenarios(tmp_path):
    # rebalance compare writes each scenario's plan to scenarios/<name>/ with "scenario" in
    # its summary.json (tests/analysis/test_analysis_cli.py); its page had been headed with
    # the instance's name alone.
    folder = _copy(tmp_path)
    summary = json.loads((folder / "summary.json").read_text())
    (folder / "summary.json").write_text(json.dumps({**summary, "scenario": "b-surge"}))
    page = render_html(report_data_from_folder(folder, read_instance(TINY)))
    assert re.findall(r"<h1>(.*?)</h1>", page) == ["Scenario b-surge"]
    assert "<title>Scenario b-surge · tiny</title>" in page


def test_a_plan_made_ahead_for_a_replan_says_so_in_its_heading(tmp_path):
    # rebalance replan --planned-ahead writes the plan made ahead to planned_ahead/ with its
    # scenario and a "planned_ahead" key in summary.json (rebalance/cli_planned_ahead.py); its page
    # had been headed "Scenario b-up", with no word that it was made ahead for a re-plan
    # (common practice: a page's heading says what it holds).
    folder = _copy(tmp_path)
    summary = json.loads((folder / "summary.json").read_text())
    (folder / "summary.json").write_text(json.dumps(
        {**summary, "scenario": "b-up", "planned_ahead": {"for_replan_at": "2027-Q3"}}))
    page = render_html(report_data_from_folder(folder, read_instance(TINY)))
    heading = "Planned ahead: scenario b-up planned from 2027-Q1, for the re-plan at 2027-Q3"
    assert re.findall(r"<h1>(.*?)</h1>", page) == [heading]
    assert f"<title>{heading} · tiny</title>" in page
    # A key it cannot read (no period): headed as the scenario's plan, as before.
    (folder / "summary.json").write_text(json.dumps(
        {**summary, "scenario": "b-up", "planned_ahead": {}}))
    page = render_html(report_data_from_folder(folder, read_instance(TINY)))
    assert re.findall(r"<h1>(.*?)</h1>", page) == ["Scenario b-up"]


def test_a_replans_planned_ahead_column_is_named_a_plan_and_its_gaps_read_as_percentages(
        tmp_path):
    # Read in Chromium as a leader would (rebalance replan --planned-ahead on the demo): the
    # last column, headed "planned ahead" right after "difference", read as one more
    # difference, and the stage gaps' rows had no word of what they are.  Gaps as percentages
    # with two decimals is the number rule's (rebalance/numbers.py gap_text), as the console.
    from dataclasses import replace

    from report_cases import replan_with_ahead

    from rebalance.report.inputs import ReplanSummary
    from rebalance.report.late_notice_words import GAP_ROWS_NOTE

    table = replan_with_ahead((0.0032, 0.0204), (0.01, 0.0362))
    data = report_data_from_folder(tiny_plan_folder(), read_instance(TINY))
    data = replace(data, tables=(("replan", table),),
                   summary=replace(data.summary, replan=ReplanSummary("2027-Q3", "b-up")))
    page = render_html(data)
    replan = page[page.index('<section id="replan">'):]
    replan = replan[:replan.index("</section>")]
    headers = [html.unescape(h) for h in re.findall(r"<th[^>]*>(.*?)</th>", replan)]
    assert headers[-1] == "planned ahead from 2027-Q1", headers
    assert "the table's last column, planned ahead from 2027-Q1, gives its figures" in replan
    cells = re.findall(r'<td class="num" data-v="[^"]*">([^<]*)</td>', replan)
    assert [c for c in cells if c.endswith("%")] == ["0.32%", "1.00%", "2.04%", "3.62%"]
    assert _escaped(GAP_ROWS_NOTE) in replan
    # Without the plan made ahead: the table as before, no note.
    plain = render_html(replace(data, tables=(("replan", table.drop(
        columns="planned_ahead").iloc[:3]),)))
    assert "planned ahead from" not in plain and _escaped(GAP_ROWS_NOTE) not in plain


def _escaped(text: str) -> str:
    return html.escape(text, quote=True)


def test_the_page_says_an_fte_period():
    # English grammar: "FTE" is said "eff-tee-ee", so "an FTE-period" (the page had "A").
    text = html.unescape(re.sub(r"<[^>]+>", "", _page(tiny_plan_folder())))
    assert "An FTE-period is one full-time person for one period" in text
    assert not re.search(r"\b[Aa] FTE", text)


def test_the_work_and_capacity_section_says_why_a_persons_fte_shrinks():
    # Hand computation from docs/model.md, A(p,t) = fte(p) (1 - r)^(t/q): tiny's a1 (fte 1.0,
    # review) with review's attrition set to 12% a year, q = 4, is 1.0, 0.88^(1/4) = 0.969,
    # 0.88^(2/4) = 0.938, 0.88^(3/4) = 0.909 in Q1..Q4, which work.csv shows unexplained.
    from conftest import solve_verified

    from rebalance.report.inputs import report_data

    instance = read_instance(TINY)
    leaving = instance.with_changes(attrition={("review", None): 0.12,
                                               ("intake", None): 0.12})
    result = solve_verified(leaving)
    assert result.plan is not None
    a1 = result.plan.work[result.plan.work["person"] == "a1"].groupby("period")["fte"].sum()
    assert [round(float(v), 3) for v in a1] == [1.0, 0.969, 0.938, 0.909]
    page = html.unescape(render_html(report_data(result)))
    capacity = page[page.index('id="capacity"'):page.index('id="gaps"')]
    assert ("Available FTE falls period by period with expected attrition, so a person's fte "
            "in the work table (work.csv, the work sheet) shrinks over the horizon.") in capacity
    # Without attrition (tiny as it is, no attrition.csv) there is nothing to explain.
    assert "expected attrition" not in _page(tiny_plan_folder())


def test_a_titled_instance_heads_the_page_and_the_workbook_and_still_names_its_folder(
        tmp_path):
    # Common practice: a report is headed with the title its author gives (settings.toml,
    # report.title), and says which input it was made from (the folder's name, tiny).
    from openpyxl import load_workbook

    from rebalance.report.workbook import write_workbook

    title = "Fenmarch permit review, 2027"  # fictional
    instance = read_instance(TINY).with_changes(title=title)
    data = report_data_from_folder(tiny_plan_folder(), instance)
    page = render_html(data)
    assert f"<title>Staffing plan: {title}</title>" in page
    assert re.findall(r"<h1>(.*?)</h1>", page) == [title]
    assert "<dt>instance</dt><dd>tiny</dd>" in page  # the run's details
    sheet = load_workbook(write_workbook(data, tmp_path / "plan.xlsx"))["summary"]
    assert sheet["A1"].value == f"Staffing plan for {title}"
    assert str(sheet["A2"].value).startswith("instance tiny: 4 periods, 2027-Q1 to 2027-Q4")
    # A scenario's plan of it: the kicker and <title> name the instance by its title too.
    folder = _copy(tmp_path)
    summary = json.loads((folder / "summary.json").read_text())
    (folder / "summary.json").write_text(json.dumps({**summary, "scenario": "b-surge"}))
    page = render_html(report_data_from_folder(folder, instance))
    assert f"<title>Scenario b-surge · {title}</title>" in page
    assert f'<p class="kicker">Staffing plan · {title}</p>' in page


def _moved_and_one_more_hire(folder: Path) -> Path:
    """``folder`` with its first hires.csv count raised by 1 and its first work.csv row moved
    to the other office: the hand edits a planner tries first."""
    hires = (folder / "hires.csv").read_text().splitlines()
    office, skill, start, count, *rest = hires[1].split(",")
    hires[1] = ",".join([office, skill, start, str(int(count) + 1), *rest])
    (folder / "hires.csv").write_text("\n".join(hires) + "\n")
    work = (folder / "work.csv").read_text().splitlines()
    person, period, office, *rest = work[1].split(",")
    work[1] = ",".join([person, period, {"A": "B", "B": "A"}[office], *rest])
    (folder / "work.csv").write_text("\n".join(work) + "\n")
    return folder


def test_the_run_details_list_each_problem_once_with_its_knock_on_rows_under_it(tmp_path):
    # A sweep raised one hire and moved one work row: the page had listed 15 lines, one a
    # violation (the moved row's coverage figures one a line), where verify lists 7 problems
    # with the coverage rows under the one each follows from.  The page's list is verify's.
    from rebalance.report.console import format_violations
    from rebalance.verify import verify_folder

    folder = _moved_and_one_more_hire(_copy(tmp_path))
    instance = read_instance(TINY)
    violations = verify_folder(instance, folder)
    said = format_violations(violations).splitlines()[1:]
    problems = [line.removeprefix("  - ") for line in said if line.startswith("  - ")]
    under = [line.removeprefix("      so ") for line in said if line.startswith("      so ")]
    assert len(problems) + len(under) == len(said) and under  # the edit leaves knock-ons
    page = render_html(report_data_from_folder(folder, instance, violations))
    listed = page[page.index('<ul class="problems">'):]
    listed = listed[:re.search(r"</ul>(?!</li>)", listed).start()]  # the outer list's end
    assert listed.count("<li>so ") == len(under) and listed.count("<li>") == len(said)
    for text in problems:
        assert listed.count(f"<li>{html.escape(text)}") == 1
    for text in under:
        assert listed.count(f"<li>so {html.escape(text)}</li>") == 1
    # The note at the top counts what the list shows: problems, not its lines.
    assert (f'{len(problems)} problems, listed under Problems in <a href="#run">How it was '
            "found</a>") in page


def test_a_failed_plans_notes_name_and_link_the_section_that_lists_its_problems(tmp_path):
    # A reviewer's hand check of a broken plan's page: the notes said "the run details list
    # why" and "listed under the run's details", but the section is headed "How it was
    # found" and its list "Violations", where the console says "problems".  Each pointer now
    # names the section as headed and links its anchor; the list is headed as the console
    # words it.
    from rebalance.verify import verify_folder

    folder = _moved_and_one_more_hire(_copy(tmp_path))
    instance = read_instance(TINY)
    data = report_data_from_folder(folder, instance, verify_folder(instance, folder))
    assert data.summary.verified is False
    page = render_html(data)
    notes = re.findall(r'<p class="note">(.*?)</p>', page)
    assert ('This plan FAILED independent verification; the list of Problems in <a '
            'href="#run">How it was found</a> says why.') in notes
    assert sum('listed under Problems in <a href="#run">How it was found</a>' in n
               for n in notes) == 1
    assert '<section id="run"><h2>How it was found</h2>' in page
    assert "<h3>Problems</h3>" in page and "Violations" not in page
    assert "run details" not in page and "run's details" not in page
    # The workbook lists no problems: its notes send the reader to rebalance verify.
    from openpyxl import load_workbook

    from rebalance.report.workbook import write_workbook

    book = load_workbook(write_workbook(data, tmp_path / "plan.xlsx"))
    said = " ".join(str(c) for row in book["summary"].iter_rows(values_only=True) for c in row
                    if c is not None)
    assert "This plan FAILED independent verification; rebalance verify lists why." in said
    assert "run details" not in said


def test_a_fresh_plans_page_groups_its_problems_as_a_rebuilt_one_does(tmp_path):
    # report_data (rebalance plan's page) and report_data_from_folder (rebalance report's)
    # carry the same grouping; summary.json keeps only the flat lines.
    from dataclasses import replace

    from conftest import solve_verified

    from rebalance.report.inputs import report_data
    from rebalance.verify import verify_folder

    folder = _moved_and_one_more_hire(_copy(tmp_path))
    instance = read_instance(TINY)
    violations = tuple(verify_folder(instance, folder))
    fresh = report_data(replace(solve_verified(instance), violations=violations))
    again = report_data_from_folder(folder, instance, violations)
    assert fresh.problems == again.problems and any(p.under for p in fresh.problems)
    assert len(fresh.summary.violations) == len(violations)  # summary.json's lines, flat


def test_the_page_lists_the_first_problems_as_the_console_does_and_counts_the_rest():
    # The console's cap (PROBLEMS_SHOWN, verify's 20) counted in problems, each whole with
    # its knock-on rows; a page without grouped problems lists summary.json's lines.
    from rebalance.report.console import PROBLEMS_SHOWN
    from rebalance.report.htmlparts import problem_list
    from rebalance.report.inputs import ProblemText

    problems = [ProblemText(f"hires.csv:{i}: wrong", (f"coverage.csv:{i}: off",))
                for i in range(PROBLEMS_SHOWN + 5)]
    page = problem_list(problems)
    assert page.count('<ul class="knock-ons">') == PROBLEMS_SHOWN
    assert f"<li>hires.csv:{PROBLEMS_SHOWN - 1}: wrong" in page
    assert f"hires.csv:{PROBLEMS_SHOWN}: wrong" not in page
    assert f"Showing the first {PROBLEMS_SHOWN} of {PROBLEMS_SHOWN + 5} problems" in page
    flat = problem_list([], ["costs.csv:4: says 1; recomputed 2"])
    assert "<li>costs.csv:4: says 1; recomputed 2</li>" in flat and "Showing" not in flat
    assert "knock-ons" not in flat and problem_list([], []) == ""


def test_a_hire_rows_salary_a_year_after_the_horizon_is_plannings_rule():
    # Hand-worked on tests/data/tiny: review costs 20,000 a quarter, four quarters a year, and
    # the plan's one hire is a new review position at B: 80,000 a year after the horizon, the
    # figure new_position_salaries gives by skill (tests/report/test_report_audit.py).
    from rebalance.planning import new_position_salaries, new_position_salary_per_year

    instance = read_instance(TINY)
    assert new_position_salary_per_year(instance, "review", 1) == 80_000
    assert new_position_salary_per_year(instance, "review", 3) == 240_000
    assert new_position_salary_per_year(instance, "no such skill", 2) == 0
    folder = tiny_plan_folder()
    assert new_position_salaries(instance, read_plan(folder))["per_year"].tolist() == [80_000]
    row = re.search(r'data-table="hires">.*?<tbody><tr>(.*?)</tr>', _page(folder))
    assert row is not None
    assert re.findall(r'data-v="([^"]+)"', row.group(1))[-1] == "80000.0"
