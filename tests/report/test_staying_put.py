"""What the plan buys: the weighted shortfall with nobody moved or hired (the work split at its
best) beside the plan's, in summary.json, on the console, the page and the workbook; absent
where it was not worked out (a re-plan, whose old plan may stand in for staying put)."""

from __future__ import annotations

import json
from dataclasses import replace
from functools import lru_cache
from pathlib import Path

import numpy as np
import pytest
from conftest import DATA, scipy_lp, solve_verified
from openpyxl import load_workbook
from report_cases import page_text

from rebalance import options_from_instance, read_instance
from rebalance.analysis.replan import replan
from rebalance.model import build_model
from rebalance.planning import PlanResult, summary_dict, write_outputs
from rebalance.report.console import format_summary
from rebalance.report.html import render_html
from rebalance.report.inputs import report_data, report_data_from_folder
from rebalance.report.workbook import write_workbook

# Hand count on tests/data/tiny (its NOTE.md): with nobody moved or hired, office B has only
# b1 for review demand of 1, 2, 2, 1 FTE in 2027-Q1..Q4 at priority 2, and b1 leaves after
# Q3: 1 FTE short in each of Q2, Q3 and Q4, so 3 FTE-periods x 2 = 6.0 weighted.  A's own
# people cover A's demand (a1 review 1.0, a2 review 0.8 or intake, a3 intake 0.5).
STAYING_PUT_TINY = 6.0
CONSOLE_LINE = ("  staying put          6.0 FTE-periods weighted with nobody moved or hired "
                "(the plan removes 6.0)")
PAGE_WORDS = "6.0 with nobody moved or hired"
SHEET_LABEL = "staying put (FTE-periods, weighted)"


@lru_cache(maxsize=1)
def _tiny() -> PlanResult:
    return solve_verified(read_instance(DATA / "tiny"))


@lru_cache(maxsize=1)
def _replanned() -> PlanResult:
    tiny = read_instance(DATA / "tiny")
    base = _tiny()
    assert base.plan is not None
    options = options_from_instance(tiny, relative_gap=0.0, time_limit_seconds=60.0)
    result = replan(tiny, base.plan, 2, options).result
    assert result.verified
    return result


def _sheet_rows(path: Path) -> dict[object, object]:
    sheet = load_workbook(path)["summary"]
    return {row[0]: row[1] for row in sheet.iter_rows(values_only=True) if row[0]}


def test_the_figure_is_the_best_work_split_with_every_whole_number_decision_at_its_least():
    result = _tiny()
    assert result.solve.staying_put_shortfall == pytest.approx(STAYING_PUT_TINY)  # hand count
    # Outside check: scipy's linprog (its own HiGHS build) on the work split alone, every
    # whole-number column (moves, details, hires) held at its lower bound.
    model = build_model(read_instance(DATA / "tiny"))
    held = np.where(model.is_integer, model.col_lower, model.col_upper)
    lp = scipy_lp(model, model.shortfall_weight, upper=held)
    assert lp.status == 0
    assert result.solve.staying_put_shortfall == pytest.approx(lp.fun, abs=1e-6)
    # The plan itself removes all of it (tiny's optimum leaves none: NOTE.md).
    assert result.plan is not None and result.plan.weighted_shortfall == pytest.approx(0.0)


def test_summary_json_carries_it_and_a_folder_redraws_it(tmp_path: Path):
    result = _tiny()
    assert summary_dict(result)["staying_put_weighted_shortfall"] == pytest.approx(6.0)
    write_outputs(result, tmp_path / "plan")
    raw = json.loads((tmp_path / "plan" / "summary.json").read_text())
    assert raw["staying_put_weighted_shortfall"] == pytest.approx(STAYING_PUT_TINY)
    again = report_data_from_folder(tmp_path / "plan", read_instance(DATA / "tiny"))
    assert again.summary.staying_put_weighted_shortfall == pytest.approx(STAYING_PUT_TINY)
    assert PAGE_WORDS in page_text(render_html(again))


def test_the_console_says_it_under_the_weighted_shortfall():
    lines = format_summary(_tiny()).splitlines()
    at = next(i for i, line in enumerate(lines) if line.startswith("  weighted shortfall   "))
    assert lines[at + 1] == CONSOLE_LINE
    # The figure starts in the same column as the weighted shortfall's.
    assert lines[at + 1].index("6.0") == lines[at].index("0.0")


def test_the_console_says_none_of_it_where_the_plan_removes_nothing():
    result = _tiny()
    assert result.plan is not None
    same = replace(result, solve=replace(result.solve, staying_put_shortfall=0.0))
    assert ("  staying put          0.0 FTE-periods weighted with nobody moved or hired "
            "(the plan removes none of it)") in format_summary(same)


def test_the_page_card_and_the_workbook_row(tmp_path: Path):
    data = report_data(_tiny())
    assert data.summary.staying_put_weighted_shortfall == pytest.approx(STAYING_PUT_TINY)
    page = page_text(render_html(data))
    assert f"of 9.5 demanded; {PAGE_WORDS}" in page
    rows = _sheet_rows(write_workbook(data, tmp_path / "plan.xlsx"))
    assert rows[SHEET_LABEL] == pytest.approx(STAYING_PUT_TINY)


def test_a_replan_shows_none_of_it(tmp_path: Path):
    result = _replanned()
    assert result.solve.staying_put_shortfall is None
    assert summary_dict(result)["staying_put_weighted_shortfall"] is None
    assert "staying put" not in format_summary(result)
    data = report_data(result)
    assert data.summary.staying_put_weighted_shortfall is None
    assert "with nobody moved or hired" not in page_text(render_html(data))
    assert SHEET_LABEL not in _sheet_rows(write_workbook(data, tmp_path / "plan.xlsx"))


def test_weighted_mode_does_not_work_it_out():
    result = solve_verified(read_instance(DATA / "tiny"), mode="weighted")
    assert result.solve.staying_put_shortfall is None
    assert summary_dict(result)["staying_put_weighted_shortfall"] is None


def test_with_nothing_whole_to_decide_staying_put_is_the_plan_itself():
    # tests/data/priority_pool has no detail, reassignment or hire column (nobody may be
    # detailed or moved, and no office may hire): staying put is the plan, and its
    # figure had been left out of summary.json (a reviewer's finding).
    from rebalance import make_plan, options_from_instance, read_instance

    instance = read_instance(DATA / "priority_pool")
    result = make_plan(instance, options_from_instance(instance, time_limit_seconds=30))
    assert result.plan is not None
    assert result.solve.staying_put_shortfall == pytest.approx(result.plan.weighted_shortfall,
                                                               abs=1e-6)
