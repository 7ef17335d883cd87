"""Effort standards: pooled ratio, shrinkage toward it, seeded bootstrap; non-case trend."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd
import pytest

from rebalance.demand.history import (
    DemandSettings,
    History,
    QualitySettings,
    StandardSettings,
    month_index,
)
from rebalance.demand.quality import check_quality
from rebalance.demand.standards import estimate_standards, forecast_noncase

START = month_index("2026-01")


def _history(k: float = 200.0, seed: int = 0) -> History:
    """Two offices, one case type, one skill, four months; office 'small' has few cases."""
    arrivals, records, expected = [], [], []
    cases = {"big": [240, 260, 250, 250], "small": [2, 3, 2, 3]}
    hours_per_case = {"big": 2.0, "small": 5.0}
    for office, counts in cases.items():
        for i, n in enumerate(counts):
            month = START + i
            arrivals.append((office, "permit", month, n))
            case_hours = n * hours_per_case[office]
            records.append((len(records) + 2, f"{office}-1", month, month, office, "review",
                            "permit", case_hours))
            records.append((len(records) + 2, f"{office}-1", month, month, office, "review",
                            "training", 10.0 + 2.0 * i))
            expected.append((f"{office}-1", month, case_hours + 10.0 + 2.0 * i))
    # One person books a whole office here, so the per-record bound is lifted.
    settings = DemandSettings(quality=QualitySettings(max_record_hours=1000.0),
                              standards=StandardSettings(shrinkage_cases=k,
                                                         bootstrap_samples=300, seed=seed))
    return History(
        arrivals=pd.DataFrame(arrivals, columns=["office", "case_type", "month", "count"]),
        records=pd.DataFrame(records, columns=["row", "person", "period", "month", "office",
                                               "skill", "activity", "hours"]),
        expected=pd.DataFrame(expected, columns=["person", "period", "expected_hours"]),
        activities={"permit": "case", "training": "non_case"},
        adjustments=pd.DataFrame(columns=["office", "case_type", "first_month", "last_month",
                                          "factor", "note"]),
        settings=settings)


def test_shrinkage_follows_the_documented_formula() -> None:
    history = _history(k=200.0)
    standards = estimate_standards(history, check_quality(history))
    table = standards.table.set_index("office")
    # By hand: big 1000 cases, 2000 h; small 10 cases, 50 h.  pooled = 2050 / 1010.
    pooled = 2050 / 1010
    assert table.loc["big", "pooled_hours_per_case"] == pytest.approx(pooled)
    assert table.loc["small", "office_hours_per_case"] == pytest.approx(5.0)
    # standard = (H + k pooled) / (N + k)  (docs/instance-format.md, "Effort standards")
    assert table.loc["small", "hours_per_case"] == pytest.approx((50 + 200 * pooled) / 210)
    assert table.loc["big", "hours_per_case"] == pytest.approx((2000 + 200 * pooled) / 1200)
    assert table.loc["small", "weight"] == pytest.approx(10 / 210)
    # k = 0 leaves every office with its own ratio.
    raw = estimate_standards(_history(k=0.0), check_quality(_history(k=0.0))).table
    assert raw.set_index("office").loc["small", "hours_per_case"] == pytest.approx(5.0)


def test_bootstrap_is_seeded_and_brackets_the_estimate() -> None:
    history = _history()
    a = estimate_standards(history, check_quality(history)).table
    b = estimate_standards(history, check_quality(history)).table
    pd.testing.assert_frame_equal(a, b)
    assert (a["lower"] <= a["hours_per_case"] + 1e-9).all()
    assert (a["hours_per_case"] <= a["upper"] + 1e-9).all()
    other = estimate_standards(_history(seed=5), check_quality(_history(seed=5))).table
    assert not np.allclose(a["lower"], other["lower"]) or not np.allclose(a["upper"],
                                                                          other["upper"])


def test_noncase_hours_follow_their_trend() -> None:
    # Training hours rise by exactly 2 h a month: the Theil-Sen line is that line.
    history = _history()
    standards = estimate_standards(history, check_quality(history))
    months = [START + 4, START + 5]
    out = forecast_noncase(standards, months)
    big = out[out["office"] == "big"].set_index("month")["hours"]
    assert big[START + 4] == pytest.approx(18.0)
    assert big[START + 5] == pytest.approx(20.0)


def test_a_case_type_whose_records_book_no_hours_is_said() -> None:
    # Sweep: with every time record of a case type at 0 hours, the case type left the
    # standards (and the demand) without a word, while deleting those records warned "has
    # arrivals but no hours booked to it".  Common practice: dropping input is said.
    history = _history()
    records = history.records.copy()
    records.loc[records["activity"] == "permit", "hours"] = 0.0
    # The timesheets then book only their training hours, as expected.
    booked = records.groupby(["person", "period"], as_index=False)["hours"].sum()
    history = replace(history, records=records,
                      expected=booked.rename(columns={"hours": "expected_hours"}))
    standards = estimate_standards(history, check_quality(history))
    assert not len(standards.table)
    assert standards.notes == ("case type 'permit' has arrivals but no hours booked to it "
                               "(its 8 time record(s) all book 0 hours); it adds no demand",)


def test_a_timesheet_without_records_counts_in_its_months_coverage() -> None:
    # Review: a timesheet with expected hours but no time records dropped out of the
    # per-month coverage factor of non-case hours (its month was taken from its records),
    # while the office-wide factor for case hours counted it.  Method:
    # docs/instance-format.md, "Non-case work" (each month grossed up by its own coverage).
    history = _history()
    # A second person at 'big' expects 20 h every month and books 20 h of training in the
    # first two months, nothing in the last two (those timesheets are excluded: incomplete).
    extra_records = pd.DataFrame(
        [(100 + i, "big-2", START + i, START + i, "big", "review", "training", 20.0)
         for i in range(2)], columns=history.records.columns)
    extra_expected = pd.DataFrame([("big-2", START + i, 20.0) for i in range(4)],
                                  columns=history.expected.columns)
    history = replace(history,
                      records=pd.concat([history.records, extra_records], ignore_index=True),
                      expected=pd.concat([history.expected, extra_expected], ignore_index=True))
    standards = estimate_standards(history, check_quality(history))
    nc = standards.noncase[standards.noncase["office"] == "big"].set_index("month")["hours"]
    # By hand: big-1 expects 250 x 2 + 14 = 514 h in month 3 and 500 + 16 = 516 h in month
    # 4, all kept; big-2's 20 h are not.  Factors 534 / 514 and 536 / 516; months 1 and 2
    # keep everything (factor 1): 10 + 20 and 12 + 20 hours of training.
    assert nc[START] == pytest.approx(30.0)
    assert nc[START + 1] == pytest.approx(32.0)
    assert nc[START + 2] == pytest.approx(14.0 * 534 / 514)  # 14.5447; 14.0 before the fix
    assert nc[START + 3] == pytest.approx(16.0 * 536 / 516)  # 16.6202; 16.0 before the fix
