"""Read a workload-history folder and validate it: every problem at once, file:row: column.

The folder holds case arrivals, time records, expected hours and the activity codes (see
``docs/instance-format.md``, section *Workload history*).  Structural faults (a cell that is not
a number, an unknown office, a missing month) are input errors and stop the run.  Faults of
*data quality* in the time records (implausible hours, unknown activity codes, incomplete
timesheets) are not errors here: :mod:`rebalance.demand.quality` finds, excludes and counts them.
"""

from __future__ import annotations

import datetime
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from rebalance.readers import (
    InstanceError,
    NotUtf8,
    Problem,
    RawTable,
    TableRows,
    read_csv_table,
    read_utf8,
    table_problems,
)

__all__ = [
    "DemandSettings",
    "History",
    "HistoryError",
    "month_index",
    "month_name",
    "period_name",
    "read_history",
    "reporting_period",
]

TABLES: dict[str, tuple[tuple[str, ...], tuple[str, ...], bool]] = {
    # file stem: (required columns, optional columns, file required)
    "case_arrivals": (("month", "office", "case_type", "count"), (), True),
    "time_records": (("person", "period", "office", "skill", "activity", "hours"), (), True),
    "expected_hours": (("person", "period", "expected_hours"), (), True),
    "activities": (("activity", "kind"), ("description",), True),
    "adjustments": (("office", "first_month", "last_month", "factor"),
                    ("case_type", "note"), False),
}
ACTIVITY_KINDS = ("case", "non_case")
MONTH = re.compile(r"^(\d{4})-(\d{2})$")
WEEK = re.compile(r"^(\d{4})-W(\d{2})$")
PERIODS_PER_YEAR = {"month": 12, "week": 52}


class HistoryError(InstanceError):
    """The history folder is invalid; ``problems`` lists everything found."""


def month_index(name: str) -> int | None:
    """``"2026-03"`` -> a whole number that counts months (year x 12 + month - 1)."""
    match = MONTH.match(name)
    if match is None or not 1 <= int(match.group(2)) <= 12:
        return None
    return int(match.group(1)) * 12 + int(match.group(2)) - 1


def month_name(index: int) -> str:
    return f"{index // 12:04d}-{index % 12 + 1:02d}"


def reporting_period(name: str) -> tuple[str, int, int] | None:
    """A reporting period -> (kind, index, month index); None if it is neither form.

    ``YYYY-MM`` is a monthly pay period (index = month index).  ``YYYY-Www`` is an ISO week:
    index counts weeks (Monday's ordinal // 7) and the week belongs to the month of its
    Thursday, the ISO rule that also decides a week's year.
    """
    month = month_index(name)
    if month is not None:
        return "month", month, month
    match = WEEK.match(name)
    if match is None:
        return None
    try:
        monday = datetime.date.fromisocalendar(int(match.group(1)), int(match.group(2)), 1)
    except ValueError:
        return None
    thursday = monday + datetime.timedelta(days=3)
    return "week", (monday.toordinal() - 1) // 7, thursday.year * 12 + thursday.month - 1


def period_name(kind: str, index: int) -> str:
    """Inverse of :func:`reporting_period` for its index."""
    if kind == "month":
        return month_name(index)
    year, week, _ = datetime.date.fromordinal(index * 7 + 1).isocalendar()
    return f"{year:04d}-W{week:02d}"


@dataclass(frozen=True)
class QualitySettings:
    completeness_tolerance: float = 0.10   # reported within +-10% of expected is complete
    max_record_hours: float = 200.0        # one record above this is implausible
    anomaly_threshold: float = 5.0         # robust score above which a record is anomalous
    anomaly_min_hours: float = 24.0        # ... and at least this many hours (3 days) off it
    anomaly_window: int = 6                # previous reporting periods in the reference set
    anomaly_min_reference: int = 6         # score only with at least this many of them
    anomaly_floor_share: float = 0.25      # scale is at least this share of the median
    compliance_target: float = 0.95        # share of person-periods complete for a "good" verdict


@dataclass(frozen=True)
class StandardSettings:
    shrinkage_cases: float = 200.0         # k in w = n / (n + k)
    bootstrap_samples: int = 400
    interval_level: float = 0.90
    seed: int = 0


@dataclass(frozen=True)
class ForecastSettings:
    holdout_months: int = 12
    selection_origins: int = 3
    origin_step_months: int = 6
    min_training_months: int = 36
    interval_level: float = 0.80
    seed: int = 0


@dataclass(frozen=True)
class DemandSettings:
    """Parameters from ``demand.toml`` in the history folder (every key optional)."""

    priority: Mapping[str, float] = field(default_factory=dict)
    quality: QualitySettings = QualitySettings()
    standards: StandardSettings = StandardSettings()
    forecast: ForecastSettings = ForecastSettings()


@dataclass(frozen=True)
class History:
    """Validated workload history.  Months are whole numbers (see :func:`month_index`).

    ``arrivals``: office, case_type, month, count (every month of every series present).
    ``records``: row, person, period, month, office, skill, activity, hours (``row`` is the
    CSV row; ``period`` the reporting period's index, ``month`` the month it belongs to).
    ``expected``: person, period, expected_hours.  ``period_kind``: "month" or "week".
    ``adjustments``: office, case_type (None = every type), first_month, last_month, factor.
    """

    arrivals: pd.DataFrame
    records: pd.DataFrame
    expected: pd.DataFrame
    activities: Mapping[str, str]
    adjustments: pd.DataFrame
    settings: DemandSettings
    period_kind: str = "month"

    @property
    def periods_per_year(self) -> int:
        """Reporting periods in a year: the lag of "the same period a year earlier"."""
        return PERIODS_PER_YEAR[self.period_kind]

    @property
    def case_types(self) -> tuple[str, ...]:
        return tuple(a for a, kind in self.activities.items() if kind == "case")

    @property
    def last_month(self) -> int:
        return int(self.arrivals["month"].max())


class _Cells(TableRows):
    """The instance readers' row iterator, with the history's columns and cell types."""

    def __init__(self, table: RawTable, stem: str, problems: list[Problem]) -> None:
        required, optional, _ = TABLES[stem]
        super().__init__(table, problems, (required, optional))

    def choice(self, row: Mapping[str, str], column: str, known: Mapping[str, Any] | set[str]
               | tuple[str, ...] | None, what: str) -> str | None:
        """A value from ``known``; ``known`` None accepts any (names could not be read)."""
        value = self.text(row, column)
        if value is not None and known is not None and value not in known:
            self.error(column, f"unknown {column.replace('_', ' ')} '{value}'; expected {what}")
            return None
        return value

    def month(self, row: Mapping[str, str], column: str) -> int | None:
        value = self.text(row, column)
        if value is None:
            return None
        index = month_index(value)
        if index is None:
            self.error(column, f"'{value}' is not a month; expected YYYY-MM, e.g. 2026-03")
        return index

    def period(self, row: Mapping[str, str], column: str, kinds: dict[str, str]
               ) -> tuple[int, int] | None:
        """(index, month) of a reporting period; all rows of all tables share one kind."""
        value = self.text(row, column)
        if value is None:
            return None
        parsed = reporting_period(value)
        if parsed is None:
            self.error(column, f"'{value}' is not a reporting period; expected a month YYYY-MM "
                       "(e.g. 2026-03) or an ISO week YYYY-Www (e.g. 2026-W09)")
            return None
        kind, index, month = parsed
        first = kinds.setdefault("kind", kind)
        if kind != first:
            self.error(column, f"'{value}' is a {kind} but earlier rows use {first}s; expected "
                       "one kind of reporting period throughout")
            return None
        return index, month


def read_history(folder: str | Path, offices: set[str] | None, skills: set[str] | None
                 ) -> History:
    """Read and validate a history folder against the instance's offices and skills.

    ``None`` for offices or skills skips that check (the caller could not read the names and
    reports why); every other check still runs.

    Raises :class:`HistoryError` listing every problem found.
    """
    path = Path(folder)
    problems: list[Problem] = []
    if not path.is_dir():
        raise HistoryError([Problem(str(path), None, None, "history folder not found")])
    tables: dict[str, RawTable] = {}
    for stem, (required, _, needed) in TABLES.items():
        file = path / f"{stem}.csv"
        if file.is_file():
            tables[stem] = read_csv_table(file)
            problems += table_problems(tables[stem])
        elif needed:
            problems.append(Problem(f"{stem}.csv", None, None, "file is missing"))
            tables[stem] = RawTable(f"{stem}.csv", required, ())
    settings = _read_settings(path / "demand.toml", skills, problems)
    activities = _read_activities(tables["activities"], problems)
    case_types = {a for a, kind in activities.items() if kind == "case"}
    have_activities = bool(activities) or "activities" not in tables
    arrivals = _read_arrivals(tables["case_arrivals"], problems, offices,
                              case_types if have_activities else None)
    kinds: dict[str, str] = {}
    records = _read_records(tables["time_records"], problems, offices, skills, kinds)
    expected = _read_expected(tables["expected_hours"], problems, kinds)
    adjustments = _read_adjustments(tables.get("adjustments"), problems, offices, case_types)
    errors = [p for p in problems if not p.is_warning]
    if errors:
        raise HistoryError(errors + [p for p in problems if p.is_warning])
    return History(arrivals, records, expected, activities, adjustments, settings,
                   kinds.get("kind", "month"))


def _read_settings(file: Path, skills: set[str] | None, problems: list[Problem]
                   ) -> DemandSettings:
    if not file.is_file():
        return DemandSettings()
    try:
        raw = tomllib.loads(read_utf8(file))
    except tomllib.TOMLDecodeError as exc:
        problems.append(Problem("demand.toml", None, None, f"not valid TOML: {exc}"))
        return DemandSettings()
    except NotUtf8 as exc:
        problems.append(Problem("demand.toml", exc.row, None, str(exc)))
        return DemandSettings()
    priority: dict[str, float] = {}
    for skill, value in raw.get("priority", {}).items():
        if skills is not None and skill not in skills:
            problems.append(Problem("demand.toml", None, f"priority.{skill}",
                                    f"unknown skill '{skill}'; expected one in skills.csv"))
        elif not isinstance(value, int | float) or isinstance(value, bool) or value < 0:
            problems.append(Problem("demand.toml", None, f"priority.{skill}",
                                    f"'{value}' is not a number >= 0"))
        else:
            priority[skill] = float(value)

    def section(name: str, default: Any) -> Any:
        values = raw.get(name, {})
        kwargs: dict[str, Any] = {}
        for key, value in values.items():
            if not hasattr(default, key):
                problems.append(Problem("demand.toml", None, f"{name}.{key}", "unknown key"))
                continue
            wanted = type(getattr(default, key))
            ok = isinstance(value, int) if wanted is int else isinstance(value, int | float)
            if not ok or isinstance(value, bool) or value < 0:
                problems.append(Problem("demand.toml", None, f"{name}.{key}",
                                        f"'{value}' is not {'a whole' if wanted is int else 'a'}"
                                        " number >= 0"))
                continue
            kwargs[key] = wanted(value)
        return type(default)(**kwargs)

    return DemandSettings(priority, section("quality", QualitySettings()),
                          section("standards", StandardSettings()),
                          section("forecast", ForecastSettings()))


def _read_activities(table: RawTable, problems: list[Problem]) -> dict[str, str]:
    cells = _Cells(table, "activities", problems)
    out: dict[str, str] = {}
    seen: dict[str, int] = {}
    for row in cells:
        activity = cells.text(row, "activity")
        kind = cells.choice(row, "kind", ACTIVITY_KINDS, "case or non_case")
        if activity is None or kind is None:
            continue
        if activity in seen:
            cells.error("activity", f"'{activity}' is listed twice (first at row "
                        f"{seen[activity]})")
            continue
        seen[activity] = cells.row_number
        out[activity] = kind
    return out


def _read_arrivals(table: RawTable, problems: list[Problem], offices: set[str] | None,
                   case_types: set[str] | None) -> pd.DataFrame:
    cells = _Cells(table, "case_arrivals", problems)
    rows: list[tuple[str, str, int, int]] = []
    seen: dict[tuple[str, str, int], int] = {}
    # Months whose row is there but was rejected (its count, say): reported once, at the row,
    # not again as a month with no row.
    rejected: set[tuple[str, str, int]] = set()
    for row in cells:
        month = cells.month(row, "month")
        office = cells.choice(row, "office", offices, "one listed in the instance's offices.csv")
        if case_types is None:
            case_type = cells.text(row, "case_type")
        else:
            case_type = cells.choice(row, "case_type", case_types,
                                     "an activity of kind 'case' in activities.csv")
        count = cells.number(row, "count", integer=True)
        if month is None or office is None or case_type is None or count is None:
            if month is not None and office is not None and case_type is not None:
                rejected.add((office, case_type, month))
            continue
        key = (office, case_type, month)
        if key in seen:
            cells.error(None, f"arrivals for office '{office}', case type '{case_type}', month "
                        f"{month_name(month)} are listed twice (first at row {seen[key]})")
            continue
        seen[key] = cells.row_number
        rows.append((office, case_type, month, int(count)))
    frame = pd.DataFrame(rows, columns=["office", "case_type", "month", "count"])
    if cells.columns_ok and not rows and not any(p.file == table.label for p in problems):
        problems.append(Problem(table.label, None, None, "has no rows; expected monthly "
                                "counts"))
    if rows:
        # Forecasting needs every month of a series: a gap is ambiguous (no cases, or no data).
        last = int(frame["month"].max())
        for series, group in frame.groupby(["office", "case_type"], sort=True):
            office, case_type = str(series[0]), str(series[1])
            months = {int(m) for m in group["month"]}
            first = min(months)
            missing = [m for m in range(first, last + 1)
                       if m not in months and (office, case_type, m) not in rejected]
            if missing:
                shown = ", ".join(month_name(m) for m in missing[:6])
                more = f" and {len(missing) - 6} more" if len(missing) > 6 else ""
                problems.append(Problem(table.label, None, "month",
                                        f"office '{office}', case type '{case_type}' has no row "
                                        f"for {shown}{more}; expected one row per month up to "
                                        f"{month_name(last)} (count 0 if no cases arrived)"))
    return frame


def _read_records(table: RawTable, problems: list[Problem], offices: set[str] | None,
                  skills: set[str] | None, kinds: dict[str, str]) -> pd.DataFrame:
    cells = _Cells(table, "time_records", problems)
    rows: list[tuple[int, str, int, int, str, str, str, float]] = []
    for row in cells:
        person = cells.text(row, "person")
        period = cells.period(row, "period", kinds)
        office = cells.choice(row, "office", offices, "one listed in the instance's offices.csv")
        skill = cells.choice(row, "skill", skills, "one listed in the instance's skills.csv")
        activity = cells.text(row, "activity")
        # Any number is accepted here: hours out of plausible bounds are a quality finding.
        hours = cells.number(row, "hours", minimum=None)
        if person is None or period is None or office is None or skill is None:
            continue
        if activity is None or hours is None:
            continue
        rows.append((cells.row_number, person, period[0], period[1], office, skill, activity,
                     float(hours)))
    if cells.columns_ok and not rows and not any(p.file == table.label for p in problems):
        problems.append(Problem(table.label, None, None, "has no rows; expected time records"))
    return pd.DataFrame(rows, columns=["row", "person", "period", "month", "office", "skill",
                                       "activity", "hours"])


def _read_expected(table: RawTable, problems: list[Problem], kinds: dict[str, str]
                   ) -> pd.DataFrame:
    cells = _Cells(table, "expected_hours", problems)
    rows: list[tuple[str, int, float]] = []
    seen: dict[tuple[str, int], int] = {}
    for row in cells:
        person = cells.text(row, "person")
        period = cells.period(row, "period", kinds)
        hours = cells.number(row, "expected_hours")
        if person is None or period is None or hours is None:
            continue
        key = (person, period[0])
        if key in seen:
            cells.error(None, f"expected hours for '{person}' in {row['period']} are listed "
                        f"twice (first at row {seen[key]})")
            continue
        seen[key] = cells.row_number
        rows.append((person, period[0], hours))
    return pd.DataFrame(rows, columns=["person", "period", "expected_hours"])


def _read_adjustments(table: RawTable | None, problems: list[Problem], offices: set[str] | None,
                      case_types: set[str]) -> pd.DataFrame:
    columns = ["office", "case_type", "first_month", "last_month", "factor", "note"]
    if table is None:
        return pd.DataFrame(columns=columns)
    cells = _Cells(table, "adjustments", problems)
    rows: list[tuple[str, str | None, int, int, float, str]] = []
    for row in cells:
        office = cells.choice(row, "office", offices, "one listed in the instance's offices.csv")
        case_type = None
        if row.get("case_type"):
            case_type = cells.choice(row, "case_type", case_types,
                                     "an activity of kind 'case' in activities.csv")
            if case_type is None:
                continue
        first, last = cells.month(row, "first_month"), cells.month(row, "last_month")
        factor = cells.number(row, "factor")
        if office is None or first is None or last is None or factor is None:
            continue
        if last < first:
            cells.error("last_month", f"{month_name(last)} is before first_month "
                        f"{month_name(first)}; expected a month on or after it")
            continue
        rows.append((office, case_type, first, last, factor, row.get("note", "")))
    return pd.DataFrame(rows, columns=columns)
