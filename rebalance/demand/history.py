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
from collections.abc import Collection, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from rebalance.instance import MAX_PRIORITY
from rebalance.numbers import plain_number
from rebalance.problems import Problem, did_you_mean, is_finite_number, range_words
from rebalance.readers import InstanceError
from rebalance.tables import (
    NotUtf8,
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
    "read_history_partly",
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
    ``adjustments``: office, case_type (None = every type), first_month, last_month, factor,
    note, row (its row in adjustments.csv).
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

    def choice(self, row: Mapping[str, str], column: str, known: Collection[str] | None,
               what: str = "", *, listed_in: str = "") -> str | None:
        """A value from ``known``; ``known`` None accepts any (names could not be read).  An
        unknown value is said as not ``what`` was expected, or as not listed in the file
        ``listed_in`` (then a name unknown in many rows is said once, as the instance's)."""
        value = self.text(row, column)
        if value is not None and known is not None and value not in known:
            kind = column.replace("_", " ")
            if listed_in:
                self.unknown(column, value, known, kind, listed_in)
            else:
                self.error(column, f"unknown {kind} '{value}'; expected {what}"
                           + self.suggest(column, value, known))
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


def read_history(folder: str | Path, offices: Collection[str] | None,
                 skills: Collection[str] | None) -> History:
    """Read and validate a history folder against the instance's offices and skills.

    ``None`` for offices or skills skips that check (the caller could not read the names and
    reports why); every other check still runs.

    Raises :class:`HistoryError` listing every problem found.
    """
    history, problems = read_history_partly(folder, offices, skills)
    errors = [p for p in problems if not p.is_warning]
    if errors or history is None:
        raise HistoryError(errors + [p for p in problems if p.is_warning])
    return history


def read_history_partly(folder: str | Path, offices: Collection[str] | None,
                        skills: Collection[str] | None) -> tuple[History | None, list[Problem]]:
    """The history from the rows that read, and every problem found (None: no folder).

    Checks that span the history and the instance (``build._check_horizon``) run on it even
    when some rows failed, so one bad cell does not hide their findings until the next run.
    """
    path = Path(folder)
    problems: list[Problem] = []
    if not path.is_dir():
        what = "is a file; expected a history folder" if path.exists() else (
            "history folder not found")
        return None, [Problem(str(path), None, None, what)]
    tables: dict[str, RawTable] = {}
    for stem, (required, optional, needed) in TABLES.items():
        file = path / f"{stem}.csv"
        if file.is_file():
            # Columns named but for case, as the instance's are (known_case): "Office" had
            # drawn "required column is missing".
            tables[stem] = read_csv_table(file, required + optional)
            problems += table_problems(tables[stem])
        elif needed:
            problems.append(Problem(f"{stem}.csv", None, None, "file is missing"))
            tables[stem] = RawTable(f"{stem}.csv", required, ())
    settings = _read_settings(path / "demand.toml", skills, problems)
    activities = _read_activities(tables["activities"], problems)
    case_types = dict.fromkeys(a for a, kind in activities.items() if kind == "case")
    have_activities = bool(activities) or "activities" not in tables
    arrivals = _read_arrivals(tables["case_arrivals"], problems, offices,
                              case_types if have_activities else None)
    kinds: dict[str, str] = {}
    records = _read_records(tables["time_records"], problems, offices, skills, kinds)
    expected = _read_expected(tables["expected_hours"], problems, kinds)
    adjustments = _read_adjustments(tables.get("adjustments"), problems, offices, case_types)
    return History(arrivals, records, expected, activities, adjustments, settings,
                   kinds.get("kind", "month")), problems


# The range of each demand.toml number: (low, high, low excluded, high excluded, whole
# number).  Counts start at 1; shares and interval levels are fractions; hours and case counts
# stop at magnitudes no office reaches, as the instance readers bound theirs (a 1e300 had
# passed and written 300-digit hours).
Range = tuple[float, float | None, bool, bool, bool]
INTERVAL: Range = (0.0, 1.0, True, True, False)
SHARE: Range = (0.0, 1.0, False, False, False)
SEED: Range = (0, 2**32 - 1, False, False, True)
SETTING_RANGES: dict[str, dict[str, Range]] = {
    "quality": {
        "completeness_tolerance": SHARE,
        "max_record_hours": (0.0, 8784.0, True, False, False),   # hours in a (leap) year
        "anomaly_threshold": (0.0, 1e6, True, False, False),
        "anomaly_min_hours": (0.0, 8784.0, False, False, False),
        "anomaly_window": (1, 1000, False, False, True),
        "anomaly_min_reference": (1, 1000, False, False, True),
        "anomaly_floor_share": SHARE,
        "compliance_target": SHARE,
    },
    "standards": {
        "shrinkage_cases": (0.0, 1e6, False, False, False),
        "bootstrap_samples": (1, 100_000, False, False, True),
        "interval_level": INTERVAL,
        "seed": SEED,
    },
    "forecast": {
        "holdout_months": (1, 120, False, False, True),
        "selection_origins": (1, 100, False, False, True),
        "origin_step_months": (1, 120, False, False, True),
        # The baseline, a three-year average, forecasts from 36 months and no fewer.
        "min_training_months": (36, 600, False, False, True),
        "interval_level": INTERVAL,
        "seed": SEED,
    },
}
# Case counts a month and hours of one record or timesheet beyond any office's: 1e300 had
# passed, written 300-digit hours or rows of 0.00 hours and numpy overflow warnings.
MAX_COUNT = 1e9
MAX_HOURS = 1e6
MAX_FACTOR = 1e3


def _describe(spec: Range) -> str:
    low, high, open_low, open_high, whole = spec
    return range_words(low, high, open_minimum=open_low, open_maximum=open_high, integer=whole)


def _in_range(value: Any, spec: Range) -> bool:
    low, high, open_low, open_high, whole = spec
    # A float such as 4.0 is whole, as in settings.toml and in CSV and workbook cells.
    if not is_finite_number(value) or (whole and value != int(value)):
        return False
    if value < low or (open_low and value == low):
        return False
    return high is None or value < high or (value == high and not open_high)


def _shown(value: Any) -> str:
    """A TOML value as the user wrote it (true, not Python's True), a number as
    :func:`~rebalance.numbers.plain_number` writes it (1e300, not Python's 1e+300)."""
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, int | float):
        return plain_number(value)
    if isinstance(value, str):
        return str(value)
    return f"a {type(value).__name__}"


def _read_settings(file: Path, skills: Collection[str] | None, problems: list[Problem]
                   ) -> DemandSettings:
    """Every key range-checked, every problem said: ``demand.toml: key: what; expected``."""
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

    def bad(key: str, message: str) -> None:
        problems.append(Problem("demand.toml", None, key, message))

    known = ["priority", *SETTING_RANGES]
    tables: dict[str, dict[str, Any]] = {}
    for name, value in raw.items():
        if name not in known:
            # A misspelt [forcast] had been ignored, its settings silently left at defaults.
            bad(name, "unknown section; expected one of: " + ", ".join(known)
                + did_you_mean(name, known))
        elif not isinstance(value, dict):
            bad(name, f"'{_shown(value)}' is not a section; expected [{name}] with its keys")
        else:
            tables[name] = value
    priority: dict[str, float] = {}
    for skill, value in tables.get("priority", {}).items():
        if skills is not None and skill not in skills:
            bad(f"priority.{skill}", f"unknown skill '{skill}'; expected one in skills.csv"
                + did_you_mean(skill, skills))
        elif not _in_range(value, (0.0, MAX_PRIORITY, False, False, False)):
            bad(f"priority.{skill}", f"'{_shown(value)}' is out of range; expected "
                f"{range_words(0.0, MAX_PRIORITY)}")
        else:
            priority[skill] = float(value)

    def section(name: str, default: Any) -> Any:
        ranges = SETTING_RANGES[name]
        kwargs: dict[str, Any] = {}
        for key, value in tables.get(name, {}).items():
            if key not in ranges:
                bad(f"{name}.{key}", "unknown key; expected one of: " + ", ".join(ranges)
                    + did_you_mean(key, ranges))
                continue
            if not _in_range(value, ranges[key]):
                bad(f"{name}.{key}",
                    f"'{_shown(value)}' is out of range; expected {_describe(ranges[key])}")
                continue
            kwargs[key] = type(getattr(default, key))(value)
        return type(default)(**kwargs)

    quality = section("quality", QualitySettings())
    if quality.anomaly_min_reference > quality.anomaly_window:
        bad("quality.anomaly_min_reference",
            f"{quality.anomaly_min_reference} is more than anomaly_window "
            f"({quality.anomaly_window}), so no record would be scored; expected at most "
            f"{quality.anomaly_window}")
    return DemandSettings(priority, quality, section("standards", StandardSettings()),
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


def _read_arrivals(table: RawTable, problems: list[Problem], offices: Collection[str] | None,
                   case_types: Collection[str] | None) -> pd.DataFrame:
    cells = _Cells(table, "case_arrivals", problems)
    rows: list[tuple[str, str, int, int]] = []
    seen: dict[tuple[str, str, int], int] = {}
    # Months whose row is there but was rejected (its count, say): reported once, at the row,
    # not again as a month with no row.
    rejected: set[tuple[str, str, int]] = set()
    for row in cells:
        month = cells.month(row, "month")
        office = cells.choice(row, "office", offices, listed_in="the instance's offices.csv")
        if case_types is None:
            case_type = cells.text(row, "case_type")
        else:
            case_type = cells.choice(row, "case_type", case_types,
                                     "an activity of kind 'case' in activities.csv")
        count = cells.number(row, "count", integer=True, maximum=MAX_COUNT)
        if month is None or office is None or case_type is None or count is None:
            if month is not None and office is not None and case_type is not None:
                rejected.add((office, case_type, month))
            continue
        key = (office, case_type, month)
        if key in seen:
            cells.error("office, case_type, month",
                        f"arrivals for office '{office}', case type '{case_type}', month "
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


def _read_records(table: RawTable, problems: list[Problem], offices: Collection[str] | None,
                  skills: Collection[str] | None, kinds: dict[str, str]) -> pd.DataFrame:
    cells = _Cells(table, "time_records", problems)
    rows: list[tuple[int, str, int, int, str, str, str, float]] = []
    for row in cells:
        person = cells.text(row, "person")
        period = cells.period(row, "period", kinds)
        office = cells.choice(row, "office", offices, listed_in="the instance's offices.csv")
        skill = cells.choice(row, "skill", skills, listed_in="the instance's skills.csv")
        activity = cells.text(row, "activity")
        # Hours out of plausible bounds are a quality finding, not an error here; only a
        # magnitude no timesheet holds is (1e300 had been written out as 300 digits).
        hours = cells.number(row, "hours", minimum=-MAX_HOURS, maximum=MAX_HOURS)
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
        hours = cells.number(row, "expected_hours", maximum=MAX_HOURS)
        if person is None or period is None or hours is None:
            continue
        key = (person, period[0])
        if key in seen:
            cells.error("person, period", f"expected hours for '{person}' in "
                        f"{row['period']} are listed twice (first at row {seen[key]})")
            continue
        seen[key] = cells.row_number
        rows.append((person, period[0], hours))
    return pd.DataFrame(rows, columns=["person", "period", "expected_hours"])


def _read_adjustments(table: RawTable | None, problems: list[Problem],
                      offices: Collection[str] | None,
                      case_types: Collection[str]) -> pd.DataFrame:
    columns = ["office", "case_type", "first_month", "last_month", "factor", "note", "row"]
    if table is None:
        return pd.DataFrame(columns=columns)
    cells = _Cells(table, "adjustments", problems)
    rows: list[tuple[str, str | None, int, int, float, str, int]] = []
    for row in cells:
        office = cells.choice(row, "office", offices, listed_in="the instance's offices.csv")
        case_type = None
        if row.get("case_type"):
            case_type = cells.choice(row, "case_type", case_types,
                                     "an activity of kind 'case' in activities.csv")
        first, last = cells.month(row, "first_month"), cells.month(row, "last_month")
        factor = cells.number(row, "factor", maximum=MAX_FACTOR)
        # Every problem of the row at once: reversed months had gone unsaid beside a bad
        # factor (a review).
        if first is not None and last is not None and last < first:
            cells.error("last_month", f"{month_name(last)} is before first_month "
                        f"{month_name(first)}; expected a month on or after it")
            continue
        if office is None or first is None or last is None or factor is None:
            continue
        if row.get("case_type") and case_type is None:
            continue
        rows.append((office, case_type, first, last, factor, row.get("note", ""),
                     cells.row_number))
    return pd.DataFrame(rows, columns=columns)
