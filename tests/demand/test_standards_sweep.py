"""Effort standards pair hours and cases over the same months (a sweep found four ways they
did not).  Every expected value is hand arithmetic written out in the test."""

from __future__ import annotations

import warnings
from dataclasses import replace

import pandas as pd
import pytest

from rebalance.demand.history import (
    DemandSettings,
    History,
    StandardSettings,
    month_index,
)
from rebalance.demand.quality import check_quality
from rebalance.demand.standards import estimate_standards

JAN_2025 = month_index("2025-01")
assert JAN_2025 is not None
MONTHS = list(range(JAN_2025, JAN_2025 + 24))  # 2025-01 .. 2026-12
Y2026 = MONTHS[12:]


def _history(arrivals: dict[str, dict[int, int]],
             records: list[tuple[str, int, str, float]],
             expected: list[tuple[str, int, float]], k: float = 200.0) -> History:
    """One case type 'permit', one skill 'review'; records are (person, month, office, hours)."""
    arr = [(o, "permit", m, n) for o, series in arrivals.items() for m, n in series.items()]
    rec = [(i + 2, p, m, m, o, "review", "permit", h) for i, (p, m, o, h) in enumerate(records)]
    settings = DemandSettings(standards=StandardSettings(shrinkage_cases=k,
                                                         bootstrap_samples=20))
    return History(
        arrivals=pd.DataFrame(arr, columns=["office", "case_type", "month", "count"]),
        records=pd.DataFrame(rec, columns=["row", "person", "period", "month", "office",
                                           "skill", "activity", "hours"]),
        expected=pd.DataFrame(expected, columns=["person", "period", "expected_hours"]),
        activities={"permit": "case"},
        adjustments=pd.DataFrame(columns=["office", "case_type", "first_month", "last_month",
                                          "factor", "note"]),
        settings=settings)


def _table(history: History) -> pd.DataFrame:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return estimate_standards(history, check_quality(history)).table.set_index("office")


def test_an_office_is_measured_over_its_own_record_months() -> None:
    # A: 100 cases and 150 h every month of 2025-2026; B: 50 cases every month, but time
    # records (100 h a month) for 2026 only.
    arrivals = {"A": dict.fromkeys(MONTHS, 100), "B": dict.fromkeys(MONTHS, 50)}
    records = [("pa", m, "A", 150.0) for m in MONTHS] + [("pb", m, "B", 100.0) for m in Y2026]
    expected = [(p, m, h) for p, m, _, h in records]
    table = _table(_history(arrivals, records, expected))
    # Hand arithmetic: A 24 x 100 = 2400 cases, 3600 h; B 12 x 50 = 600 cases (2026 only),
    # 1200 h.  pooled = 4800 / 3000 = 1.6; k = 200:
    # A = (3600 + 200 x 1.6) / 2600, B = (1200 + 320) / 800 = 1.9 (was 1520 / 1400 = 1.086).
    assert table.loc["B", "cases"] == pytest.approx(600)
    assert table.loc["B", "hours_per_case"] == pytest.approx(1520 / 800)
    assert table.loc["A", "hours_per_case"] == pytest.approx(3920 / 2600)


def test_a_timesheet_with_expected_hours_but_no_records_counts_its_month() -> None:
    # B's person has expected hours (100) for all 24 months but records only in 2026: the
    # 2025 timesheets are incomplete, so the coverage factor doubles B's kept hours, and 2025's
    # cases must count too.
    arrivals = {"A": dict.fromkeys(MONTHS, 100), "B": dict.fromkeys(MONTHS, 50)}
    records = [("pa", m, "A", 150.0) for m in MONTHS] + [("pb", m, "B", 100.0) for m in Y2026]
    expected = [("pa", m, 150.0) for m in MONTHS] + [("pb", m, 100.0) for m in MONTHS]
    table = _table(_history(arrivals, records, expected, k=0.0))
    # Hand arithmetic: coverage 2400 / 1200 = 2, B hours 1200 x 2 = 2400 over 24 x 50 = 1200
    # cases = 2.0 a case (k = 0: the office's own ratio).
    assert table.loc["B", "hours"] == pytest.approx(2400)
    assert table.loc["B", "hours_per_case"] == pytest.approx(2.0)


def test_an_office_with_cases_but_no_records_takes_the_pool_with_a_warning() -> None:
    arrivals = {"A": dict.fromkeys(MONTHS, 100), "B": dict.fromkeys(MONTHS, 50)}
    records = [("pa", m, "A", 150.0) for m in MONTHS]
    expected = [(p, m, h) for p, m, _, h in records]
    history = _history(arrivals, records, expected)
    standards = estimate_standards(history, check_quality(history))
    assert standards.notes[0].startswith("office 'B' has 1,200 cases of type 'permit'")
    table = standards.table.set_index("office")
    # Hand arithmetic: the pool is A's alone, 3600 / 2400 = 1.5 (B's 1200 cases with no hours
    # had pulled it to 3600 / 3600 = 1.0); B takes it, A = (3600 + 200 x 1.5) / 2600 = 1.5.
    assert table.loc["B", "hours_per_case"] == pytest.approx(1.5)
    assert table.loc["B", "basis"].startswith("pooled")
    assert table.loc["A", "hours_per_case"] == pytest.approx(1.5)
    # And B, with no records at all, has no non-case work estimated: said too (a review).
    assert len(standards.notes) == 2
    assert standards.notes[1].startswith("office 'B' has no usable time records")


def test_a_fully_excluded_month_is_corrected_once() -> None:
    # 100 cases a month at 1.5 h, except 2025-04 with 200 cases: its 300 h record is above
    # max_record_hours (200), so that timesheet (the month's only one) is excluded.
    counts = {m: (200 if m == MONTHS[3] else 100) for m in MONTHS}
    records = [("pa", m, "A", 1.5 * n) for m, n in counts.items()]
    expected = [(p, m, h) for p, m, _, h in records]
    table = _table(_history({"A": counts}, records, expected, k=0.0))
    # Hand arithmetic: kept 23 x 150 = 3450 h, coverage (3450 + 300) / 3450, so 3750 h over
    # all 23 x 100 + 200 = 2500 cases = 1.5 (dropping the month's cases too gave 3750 / 2300).
    assert table.loc["A", "hours"] == pytest.approx(3750)
    assert table.loc["A", "cases"] == pytest.approx(2500)
    assert table.loc["A", "hours_per_case"] == pytest.approx(1.5)


def test_records_after_the_last_arrivals_month_are_left_out() -> None:
    extra = [MONTHS[-1] + 1, MONTHS[-1] + 2]  # 2027-01, 2027-02: no arrivals rows
    records = [("pa", m, "A", 150.0) for m in MONTHS + extra]
    expected = [(p, m, h) for p, m, _, h in records]
    table = _table(_history({"A": dict.fromkeys(MONTHS, 100)}, records, expected, k=0.0))
    # Hand arithmetic: 24 x 150 = 3600 h over 2400 cases = 1.5 (was 26 x 150 / 2400 = 1.625).
    assert table.loc["A", "hours_per_case"] == pytest.approx(1.5)


def test_an_expected_hours_typo_cannot_scale_an_office() -> None:
    # A: 150 h a month, B: 75 h; A's expected hours for 2025-06 typed 1500 instead of 150.
    arrivals = {"A": dict.fromkeys(MONTHS, 100), "B": dict.fromkeys(MONTHS, 50)}
    records = [("pa", m, "A", 150.0) for m in MONTHS] + [("pb", m, "B", 75.0) for m in MONTHS]
    expected = [(p, m, 1500.0 if (p, m) == ("pa", MONTHS[5]) else h)
                for p, m, _, h in records]
    history = _history(arrivals, records, expected)
    quality = check_quality(history)
    coverage = quality.coverage.set_index("office")["coverage_factor"]
    # Hand arithmetic: the typo counts at pa's median expected hours, 150, so A's factor is
    # 24 x 150 / (23 x 150) = 24 / 23 (the typo gave (3450 + 1500) / 3450 = 1.435).
    assert coverage["A"] == pytest.approx(24 / 23)
    table = _table(history)
    # A: 3450 x 24 / 23 = 3600 h over 2400 cases; B: 1800 / 1200; both 1.5, pooled 1.5.
    assert table.loc["A", "hours"] == pytest.approx(3600)
    assert table.loc["A", "hours_per_case"] == pytest.approx(1.5)
    # 47 of 48 timesheets complete (97.9%) and 150 of 5400 h excluded (2.8%) made it "good".
    assert quality.verdict.startswith("usable with care"), quality.verdict
    assert "1 implausible expected-hours value" in quality.verdict
    assert int((~quality.timesheets["plausible"]).sum()) == 1


def test_a_fully_excluded_month_does_not_raise_the_non_case_trend() -> None:
    # 30 h of training every month of 2025-2026 beside 150 h on permits; 2025-06's permit
    # record (225 h) is above max_record_hours (200), so that month's timesheet is excluded.
    # Hand arithmetic: the office-wide coverage factor is 4320 / 4140 = 24/23; spread over
    # the 23 kept months it made them 31.30 h while 2025-06 read as 0, and the median-based
    # trend kept 31.30.  Each month grossed up by its own coverage (1 where nothing was
    # excluded) and the excluded month left out: 30.0.
    from rebalance.demand.standards import forecast_noncase

    arrivals = {"A": dict.fromkeys(MONTHS, 100)}
    records = [("pa", m, "A", 225.0 if i == 5 else 150.0) for i, m in enumerate(MONTHS)]
    history = _history(arrivals, records, [(p, m, 180.0) for p, m, _, _ in records])
    training = pd.DataFrame([(1000 + i, "pa", m, m, "A", "review", "training", 30.0)
                             for i, m in enumerate(MONTHS)], columns=history.records.columns)
    history = replace(history, records=pd.concat([history.records, training],
                                                 ignore_index=True),
                      activities={"permit": "case", "training": "noncase"})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        standards = estimate_standards(history, check_quality(history))
    trend = forecast_noncase(standards, [MONTHS[-1] + 1, MONTHS[-1] + 2])
    assert trend["hours"].tolist() == pytest.approx([30.0, 30.0])
