"""Weekly time records (ISO weeks) give the same demand as the monthly records they split."""

from __future__ import annotations

import datetime
import shutil
from pathlib import Path

import pandas as pd
import pytest
from demand_helpers import DEMO, DEMO_HISTORY

from rebalance.cli import EXIT_INVALID_INPUT, EXIT_OK, main
from rebalance.demand.history import month_index, period_name, reporting_period
from rebalance.readers import read_instance


def test_iso_weeks_by_the_thursday_rule() -> None:
    # ISO 8601: a week belongs to the year (and here the month) of its Thursday.  Dates
    # checked with GNU date (`date -d 2024-12-30 +%G-W%V` prints 2025-W01).
    assert reporting_period("2025-W01")[2] == month_index("2025-01")  # Monday 2024-12-30
    assert reporting_period("2026-W01")[2] == month_index("2026-01")  # Thursday 2026-01-01
    assert reporting_period("2026-W53")[2] == month_index("2026-12")  # Thursday 2026-12-31
    assert reporting_period("2025-W53") is None  # 2025 has 52 ISO weeks
    assert reporting_period("2026-13") is None
    _, w1, _ = reporting_period("2026-W01")  # type: ignore[misc]
    _, w2, _ = reporting_period("2025-W52")  # type: ignore[misc]
    assert w1 - w2 == 1
    assert period_name("week", w1) == "2026-W01"


def _weeks_of(month: str) -> list[str]:
    year, mon = int(month[:4]), int(month[5:])
    day, out = datetime.date(year, mon, 1), []
    while day.month == mon:
        if day.weekday() == 3:  # a Thursday: its ISO week belongs to this month
            iso = day.isocalendar()
            out.append(f"{iso[0]:04d}-W{iso[1]:02d}")
        day += datetime.timedelta(days=1)
    return out


def _to_weekly(history: Path) -> None:
    for name, hours in (("time_records.csv", "hours"), ("expected_hours.csv", "expected_hours")):
        frame = pd.read_csv(history / name, dtype={"period": str})
        weeks = {m: _weeks_of(m) for m in frame["period"].unique()}
        frame["weeks"] = frame["period"].map(weeks)
        frame[hours] = frame[hours] / frame["weeks"].map(len)
        frame = frame.explode("weeks").drop(columns=["period"]).rename(columns={"weeks": "period"})
        frame.to_csv(history / name, index=False)


def _instance(folder: Path) -> Path:
    folder.mkdir()
    for name in ("settings.toml", "offices.csv", "skills.csv", "staff.csv", "budget.csv"):
        shutil.copy(DEMO / name, folder / name)
    return folder


def test_weekly_records_give_about_the_monthly_demand(tmp_path: Path) -> None:
    history = tmp_path / "history"
    shutil.copytree(DEMO_HISTORY, history)
    _to_weekly(history)
    out = _instance(tmp_path / "instance")
    assert main(["demand", str(history), "-o", str(out)]) == EXIT_OK
    weekly = read_instance(out)
    monthly = read_instance(DEMO)
    total_weekly = sum(d.fte for d in weekly.demand)
    total_monthly = sum(d.fte for d in monthly.demand)
    # Same hours, split evenly over weeks; only which timesheets QC excludes differs.
    assert total_weekly == pytest.approx(total_monthly, rel=0.01)
    compliance = pd.read_csv(out / "demand_report" / "qc_compliance.csv")
    assert compliance["period"].str.match(r"^\d{4}-W\d{2}$").all()


def test_mixed_period_kinds_are_an_error(tmp_path: Path, capsys) -> None:  # type: ignore[no-untyped-def]
    history = tmp_path / "history"
    shutil.copytree(DEMO_HISTORY, history)
    lines = (history / "time_records.csv").read_text().splitlines(keepends=True)
    parts = lines[3].split(",")
    parts[1] = "2026-W05"
    lines[3] = ",".join(parts)
    (history / "time_records.csv").write_text("".join(lines))
    out = _instance(tmp_path / "instance")
    assert main(["demand", str(history), "-o", str(out)]) == EXIT_INVALID_INPUT
    assert ("time_records.csv:4: period: '2026-W05' is a week but earlier rows use months"
            in capsys.readouterr().err)
