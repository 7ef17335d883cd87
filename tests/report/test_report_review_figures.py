"""A reviewer's recomputation of a plan's four outputs (console, summary.json, report.html,
plan.xlsx): what verify's pass claims, a hiring cap of a year the horizon cuts, the wide-gap
warning on every output, summary.json's currency, parts that add up to their total, and
singular counts.  Each expected figure is worked out by hand beside it."""

from __future__ import annotations

import json
import shutil
from dataclasses import replace
from pathlib import Path

import pandas as pd
import pytest
from conftest import solve_verified
from openpyxl import load_workbook
from report_cases import TINY, page_text, tiny_plan_folder

from rebalance import read_instance
from rebalance.planning import plan_run_rate, run_rate_note, run_rate_warning, summary_dict
from rebalance.report.console import format_summary, format_violations
from rebalance.report.htmlparts import VERIFIED_WORDS
from rebalance.report.words import parts_decimals, total_text
from rebalance.solve import Status


@pytest.fixture(scope="module")
def tiny_result():
    return solve_verified(read_instance(TINY))


def test_a_pass_names_the_solvers_figures_as_its_own_report():
    # verify recomputes rules and plan figures, but cannot re-solve: the status, bounds,
    # gaps and staying-put shortfall are checked only against each other (a status of
    # "optimal" beside an edited gap and a staying put of 999 had passed under "every rule
    # and total checks out" / "every rule and total recomputed").
    for words in (format_violations([]), VERIFIED_WORDS):
        assert "every rule and total" not in words
        assert "solver's own report" in words or "solver's status" in words
        for figure in ("status" if words.startswith("verification") else "outcome", "bounds",
                       "gaps", "staying-put shortfall"):
            assert figure in words, (figure, words)
    page = page_text((tiny_plan_folder() / "report.html").read_text(encoding="utf-8"))
    assert "every rule and total recomputed" not in page
    assert "plan tables verified independently; outcome as the solver reports it" in page


def _cut_tiny(tmp_path: Path, hiring: dict[str, str]) -> Path:
    """tiny over six quarters, 2027-Q1 to 2028-Q2: budget year 2028 has 2 of its 4 quarters
    in the horizon.  ``hiring`` is each year's hiring cap ("" for none)."""
    folder = tmp_path / "tiny6"
    shutil.copytree(TINY, folder)
    settings = folder / "settings.toml"
    settings.write_text(settings.read_text().replace("count = 4", "count = 6"))
    (folder / "budget.csv").write_text("year,hiring,moves\n" + "".join(
        f"{year},{cap},30000\n" for year, cap in hiring.items()))
    return folder


# One new review position: 20,000 a period (tests/data/tiny/skills.csv) x 4 quarters.
SALARIES = pd.DataFrame([{"skill": "review", "positions": 1, "salary_per_period": 20000.0,
                          "per_year": 80000.0}])


def test_salaries_are_not_set_against_the_cap_of_a_year_the_horizon_cuts(tmp_path):
    # 2027 (whole, cap 100,000) and 2028 (2 of 4 quarters, cap 50,000).  The old reading,
    # 80,000 / 50,000 = 160.0% of 2028's cap "would not cover even these salaries", set a
    # year of salaries against a half year's cap.  Against the last whole year's cap:
    # 80,000 / 100,000 = 80.0%, no warning, and the cut year said.
    instance = read_instance(_cut_tiny(tmp_path, {"2027": "100000", "2028": "50000"}))
    rate = plan_run_rate(instance, None, SALARIES)  # type: ignore[arg-type]
    assert not rate.above_cap and run_rate_warning(rate, None) == ""
    assert run_rate_note(rate, None) == (
        "80.0% of 2027's hiring cap (100,000), the last whole year's (2028's covers only 2 "
        "periods of its 4 in the horizon)")
    assert (rate.cap_year, rate.cap, rate.compared) == ("2027", 100000.0, 80000.0)


def test_with_only_a_cut_year_capped_its_periods_salaries_are_set_against_it(tmp_path):
    # No 2027 hiring cap; 2028's 50,000 caps its 2 quarters in the horizon, whose salaries
    # are 2 x 20,000 = 40,000: 40,000 / 50,000 = 80.0% (the old reading: 160.0% and a
    # warning).
    instance = read_instance(_cut_tiny(tmp_path, {"2027": "", "2028": "50000"}))
    rate = plan_run_rate(instance, None, SALARIES)  # type: ignore[arg-type]
    assert not rate.above_cap
    assert run_rate_note(rate, None) == (
        "over 2028's 2 periods in the horizon (40,000), 80.0% of 2028's hiring cap (50,000), "
        "which caps only its 2 periods of 4 in the horizon (no capped year is whole in it)")
    assert (rate.cap_year, rate.compared) == ("2028", 40000.0)
    # At a cap of 30,000 the same 40,000 is 133.3% (40 / 30), and the warning says so.
    instance = read_instance(_cut_tiny(tmp_path / "b", {"2027": "", "2028": "30000"}))
    rate = plan_run_rate(instance, None, SALARIES)  # type: ignore[arg-type]
    assert rate.above_cap and "133.3% of 2028's hiring cap (30,000)" in run_rate_warning(
        rate, None)
    assert "a hiring budget at 2028's pace would not cover" in run_rate_warning(rate, None)


def _stopped(result, gap: float):
    """``result`` as if its cost stage had stopped at the time limit with ``gap`` left."""
    first, cost = result.solve.stages
    cost = replace(cost, status=Status.FEASIBLE_WITH_GAP, bound=cost.objective * (1 - gap),
                   gap=gap)
    return replace(result, status=Status.FEASIBLE_WITH_GAP,
                   solve=replace(result.solve, status=Status.FEASIBLE_WITH_GAP,
                                 stages=(first, cost)))


def test_the_wide_gap_warning_is_on_the_console_and_in_summary_json(tiny_result):
    # A cost gap of 46.84% (the reviewer's gen2 run) is above the 5% past which the page
    # and the workbook warn; the console and summary.json's plan_warnings had not.
    result = _stopped(tiny_result, 0.4684)
    wanted = ("The solver stopped at its time limit with a gap of 46.84% between this plan "
              "and the best bound it proved: a better plan may exist. Give it more time "
              "(--time-limit) before relying on these figures.")
    assert f"  warning: {wanted}" in format_summary(result).splitlines()
    assert wanted in summary_dict(result)["plan_warnings"]
    # At 4% (below 5%) none of them warns.
    calm = _stopped(tiny_result, 0.04)
    assert "Give it more time" not in format_summary(calm)
    assert not any("Give it more time" in w for w in summary_dict(calm)["plan_warnings"])


def test_summary_json_records_the_currency_of_its_money(tiny_result):
    # tiny sets no [money] currency: null; with "EUR" set, "EUR" (docs/instance-format.md,
    # [money] currency).
    assert summary_dict(tiny_result)["currency"] is None
    instance = tiny_result.instance
    euros = replace(tiny_result, instance=replace(instance, money=replace(instance.money,
                                                                           currency="EUR")))
    assert summary_dict(euros)["currency"] == "EUR"
    written = json.loads((tiny_plan_folder() / "summary.json").read_text())
    assert "currency" in written and written["currency"] is None


def test_shown_parts_add_up_to_the_shown_total():
    # The demo's idle capacity: 52.130 + 18.934 = 71.064.  At one decimal 52.1 + 18.9 =
    # 71.0, not the 71.1 shown; at two, 52.13 + 18.93 = 71.06, as the total shows.
    assert parts_decimals([52.130, 18.934]) == 2
    assert [total_text(v, 2) for v in (52.130 + 18.934, 52.130, 18.934)] == [
        "71.06", "52.13", "18.93"]
    # 1.0 + 2.0 = 3.0 adds up at one decimal already.
    assert parts_decimals([1.0, 2.0]) == 1
    # 0.04 + 0.04 = 0.08: 0.0 + 0.0 = 0.0 beside 0.1 at one decimal; 0.04 + 0.04 at two.
    assert parts_decimals([0.04, 0.04]) == 2


def test_one_of_a_thing_reads_singular(tiny_result):
    # tiny's plan: 1 hire, a new position (tests/data/tiny/NOTE.md); its details take 2
    # people.  "1 new positions", "1 new positions x salary per period" and "The 1 new
    # position this plan creates keep being paid" had read on the page and in the workbook.
    page = page_text((tiny_plan_folder() / "report.html").read_text(encoding="utf-8"))
    assert "1 new position, 0 into vacancies" in page
    assert "The 1 new position this plan creates keeps being paid" in page
    assert "1 new positions" not in page
    sheet = load_workbook(tiny_plan_folder() / "plan.xlsx")["summary"]
    cells = [str(c.value) for row in sheet.iter_rows() for c in row if c.value is not None]
    assert any("1 new position x salary per period x 4 periods a year" in c for c in cells)
    assert not any("1 new positions" in c for c in cells)
    # One person detailed reads "1 person" on the console (it had read "1 people").
    plan = tiny_result.plan
    one = plan.details[plan.details["person"] == plan.details["person"].iloc[0]]
    alone = replace(tiny_result, plan=replace(plan, details=one))
    assert f"  detail periods       {len(one)} (1 person)" in format_summary(alone).splitlines()
