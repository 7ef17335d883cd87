"""The analysis commands end to end on tests/data/tiny, run as a user would run them."""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pandas as pd
from conftest import DATA, ROOT
from openpyxl import load_workbook

from rebalance import read_instance, verify_folder
from rebalance.analysis.frontier import FRONTIER_COLUMNS
from rebalance.analysis.marginal import MARGINAL_COLUMNS
from rebalance.analysis.reasons import REASON_COLUMNS
from rebalance.analysis.replan import CHANGE_COLUMNS
from rebalance.cli import EXIT_INFEASIBLE

TINY = DATA / "tiny"


def run(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "rebalance.cli", *args], cwd=ROOT,
                          capture_output=True, text=True, timeout=300)


def test_compare_and_replan(tmp_path: Path) -> None:
    scenario = tmp_path / "surge.toml"
    scenario.write_text('name = "b-surge"\n[[demand]]\noffices = ["B"]\nskills = ["review"]\n'
                        'periods = ["2027-Q3", "2027-Q4"]\nmultiplier = 1.5\n')
    out = tmp_path / "compare"
    done = run("compare", str(TINY), "--scenario", str(scenario), "-o", str(out), "--gap", "0")
    assert done.returncode == 0, done.stderr
    assert "b-surge" in done.stdout and "Caution" in done.stdout
    # What the scenario is and did, said (a practitioner's reading worked it out by hand):
    # by hand from demand.csv, B's review demand of 2.0 and 1.0 in 2027-Q3/Q4 times 1.5.
    assert "b-surge: no description; against the base: demand +1.5 FTE-periods" in done.stdout
    table = pd.read_csv(out / "scenarios.csv")
    assert table["scenario"].tolist() == ["base", "b-surge"]
    assert table["verified"].all()
    for name in ("scenario_costs.csv", "scenario_actions.csv", "scenario_offices.csv",
                 "reasons.csv", "report.html"):
        assert (out / name).exists(), name
    # By hand, as above: the 1.5 FTE-periods land at B; budgets were not changed.
    assert "demand +1.5 FTE-periods (B +1.5)" in done.stdout
    assert "budgets unchanged" in done.stdout
    offices = pd.read_csv(out / "scenario_offices.csv")
    assert set(offices["scenario"]) == {"base", "b-surge"}
    # plan.xlsx has a sheet per analysis table in the folder (docs/instance-format.md).
    sheets = load_workbook(out / "plan.xlsx", read_only=True).sheetnames
    assert {"scenarios", "scenario_costs", "scenario_actions", "scenario_offices",
            "reasons"} <= set(sheets)
    instance = read_instance(TINY)
    assert verify_folder(instance, out) == []
    assert (out / "scenarios" / "b-surge" / "hires.csv").exists()

    # Re-plan from the base plan at 2027-Q3 on the same data: nothing changes.
    again = tmp_path / "replan"
    done = run("replan", str(TINY), "--from", str(out), "--at", "2027-Q3", "-o", str(again),
               "--gap", "0", "-q")
    assert done.returncode == 0, done.stderr
    changes = pd.read_csv(again / "changes.csv")
    assert list(changes.columns) == list(CHANGE_COLUMNS) and len(changes) == 0
    assert verify_folder(instance, again) == []
    assert (again / "replan.csv").exists()
    # How the solve ended and which re-plan it is are said (a practitioner's reading: the
    # console had no status or verification, the folder no re-plan period).
    assert "independent verification: passed" in done.stdout
    assert json.loads((again / "summary.json").read_text())["replan"] == {
        "from_period": "2027-Q3", "scenario": None}
    # The work split is said beside the changes (a practitioner's reading: "0 change(s)"
    # while 88 work rows differed); on the same data nobody's differs.
    assert "work split: everyone works as in the old plan from 2027-Q3 on" in done.stdout
    split = pd.read_csv(again / "replan.csv").set_index("measure").loc["work_split_changes"]
    assert split.tolist() == [0.0, 0.0, 0.0]
    # Hand edit of the old plan's work.csv (tests/data/tiny: a2 has review and intake): a2's
    # Q3 review at A split half to intake.  The re-plan works as the base plan, so by hand
    # one person-period works differently, at no disruption cost and with no change listed.
    edited = tmp_path / "edited"
    shutil.copytree(out, edited)
    work = pd.read_csv(edited / "work.csv")
    a2_q3 = (work.person == "a2") & (work.period == "2027-Q3")
    assert work[a2_q3][["office", "skill", "fte"]].values.tolist() == [["A", "review", 1.0]]
    work.loc[a2_q3, ["fte", "output_fte"]] = [0.5, 0.4]
    work = pd.concat([work, pd.DataFrame([["a2", "2027-Q3", "A", "intake", 0.5, 0.5]],
                                         columns=work.columns)], ignore_index=True)
    work.to_csv(edited / "work.csv", index=False)
    done = run("replan", str(TINY), "--from", str(edited), "--at", "2027-Q3", "-o",
               str(tmp_path / "replan-edited"), "--gap", "0", "-q")
    assert done.returncode == 0, done.stderr
    assert "0 changes against the old plan from 2027-Q3 on" in done.stdout
    assert ("work split: 1 person-period works differently from 2027-Q3 on (no disruption "
            "cost: moving work between a person's skills is not a change of detail, "
            "reassignment or hire)") in done.stdout
    # The page says it in the re-plan's lead too (its table row alone had).
    page = " ".join(re.sub(r"<[^>]+>", " ",
                           (tmp_path / "replan-edited" / "report.html").read_text()).split())
    assert "The work split changed for 1 person-period from 2027-Q3 on" in page

    # A re-plan under a scenario names it.
    surge = tmp_path / "replan-surge"
    done = run("replan", str(TINY), "--from", str(out), "--at", "2027-Q3", "-o", str(surge),
               "--gap", "0", "-q", "--scenario", str(scenario))
    assert done.returncode == 0, done.stderr
    assert json.loads((surge / "summary.json").read_text())["replan"]["scenario"] == "b-surge"
    # It keeps its scenario file, and verify checks it against the data it was made for,
    # saying so (it had failed it against the instance's own data).
    assert (surge / "scenario.toml").read_bytes() == scenario.read_bytes()
    done = run("verify", str(TINY), str(surge))
    assert done.returncode == 0, done.stdout + done.stderr
    assert "with scenario 'b-surge' applied to the instance's data" in done.stdout
    # A folder without the copy (written before plans kept one) is checked against the
    # instance's own data and fails, saying first why (a practitioner's reading:
    # "verification failed" with no word of it).
    (surge / "scenario.toml").unlink()
    done = run("verify", str(TINY), str(surge))
    assert done.returncode == 6 and "made under scenario 'b-surge'" in done.stdout
    named = json.loads((out / "scenarios" / "b-surge" / "summary.json").read_text())
    assert named["scenario"] == "b-surge"
    # A re-plan into its own --from folder is refused, and the old plan is kept.
    before = (out / "hires.csv").read_text()
    done = run("replan", str(TINY), "--from", str(out), "--at", "2027-Q3", "-o", str(out), "-q")
    assert done.returncode == 2 and "--from folder" in done.stderr
    assert (out / "hires.csv").read_text() == before


def _page_text(page: Path) -> str:
    return " ".join(re.sub(r"<[^>]+>", " ", page.read_text(encoding="utf-8")).split())


def test_compare_writes_each_scenario_a_report_of_its_own(tmp_path: Path) -> None:
    # A practitioner's reading of a demo comparison (/tmp/reading/cmpshot.txt): each
    # scenarios/<name>/ folder had CSV files only, and 'rebalance report' on one against the
    # base instance said "FAILED independent verification".  By hand from tests/data/tiny's
    # budget.csv (2027: hiring 40,000, moves 30,000): the base allows 70,000; this scenario's
    # hiring_add of 60,000 makes it 130,000.
    from rebalance.analysis.scenario_files import apply_scenario, read_scenario
    from rebalance.report.analysis_words import FROM_BASE_WORDS as FROM_BASE_NOTE

    scenario = tmp_path / "surge.toml"
    scenario.write_text('name = "b-surge"\n[[demand]]\noffices = ["B"]\nskills = ["review"]\n'
                        'periods = ["2027-Q3", "2027-Q4"]\nmultiplier = 1.5\n'
                        "[[budget]]\nhiring_add = 60000\n")
    out = tmp_path / "compare"
    done = run("compare", str(TINY), "--scenario", str(scenario), "-o", str(out), "--gap", "0",
               "-q")
    assert done.returncode == 0, done.stderr
    sub = out / "scenarios" / "b-surge"
    assert (sub / "report.html").is_file() and (sub / "plan.xlsx").is_file()
    # No file of the staged write is left behind.
    assert not [p.name for p in sub.iterdir() if p.name.startswith(".") or "tmp" in p.name]
    page = _page_text(sub / "report.html")
    assert "Scenario b-surge" in page and "of 130,000 allowed" in page
    assert "verified independently" in page and "FAILED" not in page
    # The figures are those of the scenario's own data, by the same check as 'verify'.
    instance = read_instance(TINY)
    assert verify_folder(apply_scenario(instance, read_scenario(scenario, instance)), sub) == []
    summary = load_workbook(sub / "plan.xlsx", read_only=True)["summary"]
    assert next(summary.iter_rows(values_only=True))[0] == "Staffing plan for tiny+b-surge"
    # The base instance's path and the scenario file beside the plan: 'verify' and 'report'
    # apply it, as the comparison did ('report' had asked for an instance, and the base's
    # alone gives the wrong demand and budgets).
    assert json.loads((sub / "summary.json").read_text())["instance_path"] == str(
        TINY.resolve())
    assert (sub / "scenario.toml").read_bytes() == scenario.read_bytes()
    done = run("verify", str(TINY), str(sub))
    assert done.returncode == 0, done.stdout + done.stderr
    (sub / "report.html").unlink()
    done = run("report", str(sub))
    assert done.returncode == 0, done.stdout + done.stderr
    assert "of 130,000 allowed" in _page_text(sub / "report.html")
    # A scenario copy that no longer fits the instance given is bad input, said as such.
    (sub / "scenario.toml").write_text('name = "b-surge"\n[[demand]]\noffices = ["Z"]\n'
                                       "multiplier = 2\n")
    done = run("verify", str(TINY), str(sub))
    assert done.returncode == 3
    assert "does not fit the instance given" in done.stderr and "unknown office Z" in done.stderr
    assert "nothing was written" not in done.stderr

    # The base's page titles its plan sections as the base plan's; its money is the base's.
    base = _page_text(out / "report.html")
    for title in ("at a glance", "who moves where", "money", "why each action"):
        assert f"Base plan: {title}" in base, title
    assert "of 70,000 allowed" in base
    # The scenarios sheet opens with how its plans were solved (as the console says), the
    # header below a blank row; exact solves: no gap caution.
    sheet = load_workbook(out / "plan.xlsx")["scenarios"]
    rows = list(sheet.iter_rows(max_row=3, max_col=2, values_only=True))
    assert rows == [(FROM_BASE_NOTE, None), (None, None), ("scenario", "description")]
    assert sheet.freeze_panes == "A4" and sheet.auto_filter.ref.startswith("A3:")
    assert pd.read_excel(out / "plan.xlsx", sheet_name="scenarios", header=2)[
        "scenario"].tolist() == ["base", "b-surge"]


def test_bad_inputs_exit_cleanly(tmp_path: Path) -> None:
    bad = tmp_path / "bad.toml"
    bad.write_text('name = "x"\n[[demand]]\noffices = ["nowhere"]\n')
    done = run("compare", str(TINY), "--scenario", str(bad), "-o", str(tmp_path / "o"))
    assert done.returncode == 3
    assert f"{bad}: demand[1].offices: unknown office nowhere" in done.stderr
    assert "Traceback" not in done.stderr and not (tmp_path / "o").exists()
    done = run("replan", str(TINY), "--from", str(tmp_path), "--at", "2027-Q2", "-o",
               str(tmp_path / "o"))
    assert done.returncode == 3 and "not a plan folder" in done.stderr
    done = run("frontier", str(TINY), "--hiring", "5:1:1", "-o", str(tmp_path / "o"))
    assert done.returncode == 2 and "grid" in done.stderr


def test_frontier_and_marginal(tmp_path: Path) -> None:
    out = tmp_path / "analysis"
    done = run("frontier", str(TINY), "--hiring", "0,20000,40000", "--moves", "0,30000",
               "-o", str(out), "--gap", "0", "--workers", "2")
    assert done.returncode == 0, done.stderr
    frontier = pd.read_csv(out / "frontier.csv")
    assert list(frontier.columns) == list(FRONTIER_COLUMNS) and len(frontier) == 6
    assert frontier["verified"].all()
    assert "Caution:" in done.stdout  # as every command that shows plans (a reading found none)
    # Every point has its moves caps from --moves, so no "-" is shown, and no footnote says
    # what a "-" means (a review found one under such a table); tiny caps every year.
    table = done.stdout.split("\n\n")[0]
    assert " - " not in table
    said = " ".join(done.stdout.split())
    assert "of - " not in said and "hiring_cap_total: the hiring caps" in said
    done = run("marginal", str(TINY), "-o", str(out), "--gap", "0", "-q")
    assert done.returncode == 0, done.stderr
    marginal = pd.read_csv(out / "marginal_values.csv")
    assert list(marginal.columns) == list(MARGINAL_COLUMNS)
    reasons = pd.read_csv(out / "reasons.csv")
    assert list(reasons.columns) == list(REASON_COLUMNS)
    assert (out / "hires.csv").exists() and (out / "summary.json").exists()
    # The plan folder was replaced whole, but the frontier already in it was kept.
    assert pd.read_csv(out / "frontier.csv").equals(frontier)


def test_a_factor_frontier_on_the_console_gives_factors_as_typed_and_each_point_s_money(
        tmp_path: Path) -> None:
    # A planner's reading of the demo's frontier: the console showed "1.000" and "1.500", no
    # money, a knee on a 3-level grid the page said had none, and a footnote about "an empty
    # moves_budget" above a table that shows "-".
    out = tmp_path / "fr"
    done = run("frontier", str(TINY), "--hiring", "0.5x,1x,1.5x", "-o", str(out), "--gap", "0",
               "--workers", "1")
    assert done.returncode == 0, done.stderr
    lines = done.stdout.splitlines()
    header = lines[0].split()
    assert header[:4] == ["point", "hiring_budget", "moves_budget", "hiring_cap_total"]
    assert "extra_cost" in header
    rows = [line.split() for line in lines[2:5]]
    # tests/data/tiny/budget.csv: hiring cap 40,000; 0.5x, 1x and 1.5x of it by hand.
    assert [row[1:4] for row in rows] == [["0.5", "-", "20,000"], ["1.0", "-", "40,000"],
                                          ["1.5", "-", "60,000"]]
    assert [row[-1] for row in rows] == ["no", "no", "no"]  # 3 levels: no knee
    assert not pd.read_csv(out / "frontier.csv")["knee"].any()
    said = " ".join(done.stdout.split())
    assert "empty moves_budget" not in said
    assert "a moves_budget of - keeps the instance's caps" in said
    assert "a hiring_cap_total of -" not in said  # every total shown (tiny caps 2027)


def test_a_frontier_footnote_explains_a_dash_only_under_a_column_that_shows_one(
        tmp_path: Path) -> None:
    # tiny with 2027's hiring uncapped: a factor grid leaves it so, and the hiring caps'
    # total is unbounded ("-", frontier.cap_total); --moves given, so no moves_budget "-".
    shutil.copytree(TINY, tmp_path / "t")
    (tmp_path / "t" / "budget.csv").write_text("year,hiring,moves\n2027,,30000\n")
    done = run("frontier", str(tmp_path / "t"), "--hiring", "1x", "--moves", "1x", "-o",
               str(tmp_path / "fr"), "--gap", "0", "--workers", "1")
    assert done.returncode == 0, done.stderr
    [row] = [line.split() for line in done.stdout.splitlines()[2:3]]
    assert row[1:4] == ["1", "1", "-"]  # the factors as typed
    said = " ".join(done.stdout.split())
    assert "a hiring_cap_total of - has some year with no hiring cap" in said
    assert "a moves_budget of -" not in said


def test_replan_lists_the_rules_the_old_plan_breaks(tmp_path: Path) -> None:
    # A sweep: "the old plan breaks 3 rule(s)" named none of them.  With a1 leaving after
    # 2027-Q2, the old plan's later work and detail by a1 break the leaving rule.
    shutil.copytree(TINY, tmp_path / "tiny")
    staff = tmp_path / "tiny" / "staff.csv"
    staff.write_text(staff.read_text().replace("a1,A,1.0,review:1.0,true,false,",
                                               "a1,A,1.0,review:1.0,true,false,2027-Q2"))
    old = tmp_path / "old"
    assert run("plan", str(TINY), "-o", str(old), "-q").returncode == 0
    done = run("replan", str(tmp_path / "tiny"), "--from", str(old), "--at", "2027-Q3", "-o",
               str(tmp_path / "new"), "-q")
    assert done.returncode == 0, done.stderr
    head = next(line for line in done.stderr.splitlines() if "the old plan breaks" in line)
    listed = done.stderr.split(head, 1)[1].splitlines()[1:]
    assert listed and listed[0].startswith("  ") and "a1" in listed[0]


def test_replan_from_a_scenario_plan_says_whose_data_it_reads(tmp_path: Path) -> None:
    # A sweep: a re-plan --from a scenario's plan folder ran on the instance's own data
    # without a word, where verify says so of the same folder.
    old = tmp_path / "old"
    assert run("plan", str(TINY), "-o", str(old), "-q").returncode == 0
    summary = json.loads((old / "summary.json").read_text())
    (old / "summary.json").write_text(json.dumps({**summary, "scenario": "storm"}))
    done = run("replan", str(TINY), "--from", str(old), "--at", "2027-Q3", "-o",
               str(tmp_path / "new"), "-q")
    assert done.returncode == 0, done.stderr
    assert ("note: the old plan was made under scenario 'storm' (its summary.json); this "
            "re-plan reads the instance's own data; to re-plan under it, give --scenario "
            "with its file") in done.stderr


def seats_short(tmp_path: Path, share: str) -> Path:
    """tests/data/seats_short with ``max_away_share`` set to ``share``."""
    target = tmp_path / "seats_short"
    shutil.copytree(DATA / "seats_short", target)
    settings = target / "settings.toml"
    settings.write_text(settings.read_text().replace("max_away_share = 0.5",
                                                     f"max_away_share = {share}"))
    return target


def test_a_frontier_with_no_plan_at_any_point_says_so_and_exits_infeasible(tmp_path: Path
                                                                           ) -> None:
    # Hand count (tests/data/seats_short/NOTE.md): at a share of 0.25 A's 2 seats hold 5
    # people with at most 2 of them able to go, whatever the budgets: every point infeasible.
    # It had exited 0, as if the frontier were fine.
    out = tmp_path / "o"
    done = run("frontier", str(seats_short(tmp_path, "0.25")), "--hiring", "0,20000",
               "-o", str(out), "-q")
    assert done.returncode == EXIT_INFEASIBLE, done.stderr
    assert (f"no budget point gave a plan (2 infeasible); {out / 'frontier.csv'} lists each "
            "point's status") in done.stderr
    assert "Caution: This plan supports" not in done.stdout  # no plan to caution about
    # The table is still written: that every point was infeasible is the answer.
    frontier = pd.read_csv(out / "frontier.csv")
    assert frontier["status"].tolist() == ["infeasible", "infeasible"]
    assert not frontier["knee"].any()


def test_a_frontier_with_some_points_planless_exits_0_and_counts_them(tmp_path: Path) -> None:
    # seats_short as it is (share 0.5): with no moves money nobody can leave A, so its seats
    # cannot hold (hand count, NOTE.md: 3 must be away); with 100,000 they can (a5 reassigned
    # for 20,000 and a1, a2 detailed all four periods at 5,000: 60,000).
    out = tmp_path / "o"
    done = run("frontier", str(DATA / "seats_short"), "--hiring", "0", "--moves", "0,100000",
               "-o", str(out), "--gap", "0", "-q")
    assert done.returncode == 0, done.stderr
    assert "1 of 2 points had no plan (1 infeasible)" in done.stdout
    assert "no budget point gave a plan" not in done.stderr
    frontier = pd.read_csv(out / "frontier.csv")
    assert frontier["status"].tolist() == ["infeasible", "optimal"]


def test_compare_keeps_the_other_plans_when_a_scenario_has_none(tmp_path: Path, monkeypatch,
                                                                 capsys) -> None:
    # A scenario with no plan (here: its solve made to come back out of time) is an answer
    # to list, not a reason to throw away the base plan and the other scenarios' plans.
    from dataclasses import replace

    import rebalance.analysis.scenarios as scenarios_module
    from rebalance.cli import main
    from rebalance.solve import Status

    real = scenarios_module.solve_many

    def second_out_of_time(variants, options, workers, start=None, names=()):
        results = list(real(variants, options, workers, start=start, names=names))
        if start is not None:  # the scenarios, solved from the base plan: 'slow' first
            results[0] = replace(results[0], plan=None, status=Status.NO_PLAN_IN_TIME,
                                 violations=())
        return results

    monkeypatch.setattr(scenarios_module, "solve_many", second_out_of_time)
    files = []
    for name in ("slow", "fine"):
        files += ["--scenario", str(tmp_path / f"{name}.toml")]
        (tmp_path / f"{name}.toml").write_text(
            f'name = "{name}"\n[[demand]]\noffices = ["B"]\nmultiplier = 1.2\n')
    out = tmp_path / "compare"
    code = main(["compare", str(TINY), *files, "-o", str(out), "--workers", "1", "-q"])
    printed = capsys.readouterr().out
    assert code == 0
    assert "scenario 'slow': no plan within the time limit\n" in printed
    table = pd.read_csv(out / "scenarios.csv")
    assert table["status"].tolist() == ["optimal", "no_plan_in_time", "optimal"]
    assert (out / "hires.csv").exists() and (out / "scenarios" / "fine" / "hires.csv").exists()
    assert not (out / "scenarios" / "slow").exists()
    assert verify_folder(read_instance(TINY), out) == []
