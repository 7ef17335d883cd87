"""Read an instance folder and validate it: every problem at once, each naming file, row, column.

Rows are numbered as a spreadsheet shows them: the header is row 1, the first data row is row 2.
Nothing here solves or writes anything; a caller gets an :class:`Instance` or an
:class:`InstanceError` carrying the full list of :class:`~rebalance.problems.Problem` records.
The settings are checked by :mod:`rebalance.settings_reader`.
"""

from __future__ import annotations

import codecs
import csv
import io
import math
import re
import tomllib
from collections import Counter
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from rebalance.instance import (
    Budget,
    Demand,
    Instance,
    MoveCost,
    Office,
    Period,
    Person,
    Skill,
)
from rebalance.problems import Problem, describe_range
from rebalance.settings_reader import (
    known_period_names,
    read_money,
    read_periods,
    read_sections,
    warn_unknown_settings,
)

__all__ = [
    "InstanceError",
    "NotUtf8",
    "RawTable",
    "TableRows",
    "collapse_repeats",
    "count_problems",
    "plain_csv_columns",
    "read_csv_table",
    "read_instance",
    "read_tables",
    "read_utf8",
    "table_problems",
]

REQUIRED_TABLES = ("offices", "skills", "staff", "demand", "budget")
OPTIONAL_TABLES = ("move_costs", "vacancies", "attrition")
COLUMNS: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    # table: (required columns, optional columns)
    "offices": (("office", "location"), ("seats", "max_hires_per_period")),
    "skills": (("skill", "salary_per_period", "onboarding_cost", "time_to_hire"), ("ramp",)),
    "staff": (
        ("person", "home_office", "fte", "skills"),
        ("can_detail", "can_relocate", "last_period"),
    ),
    "demand": (("office", "skill", "period"), ("fte", "hours", "priority")),
    "move_costs": (
        ("from_location", "to_location"),
        ("detail_cost_per_period", "relocation_cost"),
    ),
    "vacancies": (("office", "skill", "count"), ()),
    "attrition": (("skill", "annual_rate"), ("office",)),
    "budget": (("year",), ("hiring", "moves")),
}
TRUE_WORDS = {"true", "yes", "y", "1"}
FALSE_WORDS = {"false", "no", "n", "0"}


def count_problems(problems: list[Problem]) -> int:
    """How many problems ``problems`` stand for, the rows of collapsed repeats included."""
    return sum(p.repeats for p in problems)


class InstanceError(Exception):
    """The input is invalid; ``problems`` lists everything found, not just the first."""

    def __init__(self, problems: list[Problem]) -> None:
        self.problems = problems
        super().__init__("\n".join(str(p) for p in problems))


@dataclass(frozen=True)
class RawTable:
    """A table as text cells, with the label used in messages (a file or a sheet)."""

    label: str
    columns: tuple[str, ...]
    rows: tuple[dict[str, str], ...]
    first_row_number: int = 2
    # Row numbers with filled cells beyond the header's columns, which no column reads.
    overlong_rows: tuple[int, ...] = ()
    # (row, 1-based column) of filled cells under a column with no name, which no column reads.
    unnamed_cells: tuple[tuple[int, int], ...] = ()
    # (row, column) of cells holding a line break: a quote that never closed swallows the
    # rows after it into one cell.
    multiline_cells: tuple[tuple[int, str], ...] = ()
    # Why the file could not be read at all (not UTF-8), and the row that showed it; then it
    # has no columns.
    fault: tuple[int | None, str] | None = None


def collapse_repeats(problems: list[Problem], keep: int = 10) -> list[Problem]:
    """Every problem, but one fault repeated on thousands of rows (an office name that a
    broken offices table left unknown to every staff row) listed ``keep`` times."""
    seen: dict[tuple[str, str | None, str], int] = {}
    out: list[Problem] = []
    for p in problems:
        key = (p.file, p.column, p.message)
        seen[key] = seen.get(key, 0) + 1
        if seen[key] <= keep:
            out.append(p)
    for (file, column, message), count in seen.items():
        if count > keep:
            out.append(Problem(file, None, column, f"{message} (and {count - keep} more rows "
                                                   "like this)", repeats=count - keep))
    return out


def table_problems(table: RawTable) -> list[Problem]:
    """What is wrong with ``table`` as a table, before any cell is read: a file that could not
    be read, a column named twice (which copy would be read?), and cells no column reads,
    such as the second half of a number a comma split (``1,234``)."""
    if table.fault is not None:
        return [Problem(table.label, table.fault[0], None, table.fault[1])]
    problems = [Problem(table.label, 1, column, f"is a column name {count} times; expected "
                        "each column once") for column, count in _repeated_columns(table).items()]
    hint = " (a comma inside a value?)" if table.label.endswith(".csv") else ""
    problems += [Problem(table.label, number, None,
                         f"more cells than the header's {len(table.columns)} columns; expected "
                         f"one value per column{hint}")
                 for number in table.overlong_rows]
    problems += [Problem(table.label, number, f"column {position}",
                         f"a value under a column with no name; expected a name in row 1 for "
                         f"every filled column{hint}")
                 for number, position in table.unnamed_cells]
    problems += [Problem(table.label, number, column,
                         "runs over several lines (a quote that is not closed?); expected one "
                         "line per row")
                 for number, column in table.multiline_cells]
    return problems


def _repeated_columns(table: RawTable) -> dict[str, int]:
    """Column names the header holds more than once, with how often."""
    counts = Counter(c for c in table.columns if c)
    return {column: count for column, count in counts.items() if count > 1}


def read_csv_table(path: Path) -> RawTable:
    try:
        text = read_utf8(path)
    except NotUtf8 as exc:
        return RawTable(path.name, (), (), fault=(exc.row, f"{exc} (in a spreadsheet program: "
                                                            "save as CSV UTF-8)"))
    return _csv_table(path.name, csv.reader(io.StringIO(text, newline="")))


def plain_csv_columns(file: Path) -> dict[str, np.ndarray] | None:
    """The cells of a plain table, read by pandas' C reader (Python's csv reader had taken
    two thirds of the time), as ``read_csv_table`` reads them: stripped, a blank line a row
    of empty cells.  None for a file with anything that reader reports or reads another way
    (not UTF-8, a quote, a line break other than \\n or \\r\\n, a NUL, more cells than the
    header, a column with no name or named twice): read it with ``read_csv_table``.  Plan
    folders use it (verify, replan, report): 150k work rows had taken a second."""
    try:
        text = read_utf8(file)
    except NotUtf8:
        return None
    if not text or '"' in text or "\x00" in text or "\r" in text.replace("\r\n", ""):
        return None
    try:
        frame = pd.read_csv(io.StringIO(text), header=None, dtype=str, quoting=csv.QUOTE_NONE,
                            na_filter=False, skip_blank_lines=False, index_col=False,
                            engine="c")
    except (pd.errors.ParserError, ValueError):
        return None
    header = [str(name).strip() for name in frame.iloc[0]]
    if "" in header or len(set(header)) < len(header):
        return None
    return {name: frame[i].iloc[1:].str.strip().to_numpy(dtype=object)
            for i, name in zip(frame.columns, header, strict=True)}


class NotUtf8(ValueError):
    """A text file that is not UTF-8; ``row`` is the line of the first byte that is not."""

    def __init__(self, row: int, byte: int) -> None:
        super().__init__(f"is not UTF-8 text (byte 0x{byte:02x} on this line); expected the "
                         "file saved as UTF-8")
        self.row = row


def read_utf8(path: Path) -> str:
    """The file's text (a byte-order mark, which some programs write, dropped), or
    :class:`NotUtf8` naming the line where it stops being UTF-8."""
    data = path.read_bytes().removeprefix(codecs.BOM_UTF8)
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise NotUtf8(data.count(b"\n", 0, exc.start) + 1, data[exc.start]) from None


def _csv_table(label: str, reader: Iterator[list[str]]) -> RawTable:
    try:
        header = [h.strip() for h in next(reader)]
    except StopIteration:
        return RawTable(label, (), ())
    rows, overlong, unnamed, multiline = [], [], [], []
    for number, cells in enumerate(reader, 2):
        if not any(c.strip() for c in cells):
            cells = []  # blank line: keep numbering, drop content
        if any(c.strip() for c in cells[len(header):]):
            overlong.append(number)
        unnamed += [(number, i + 1) for i, (h, c) in enumerate(zip(header, cells, strict=False))
                    if not h and c.strip()]
        padded = list(cells) + [""] * (len(header) - len(cells))
        multiline += [(number, h or f"column {i + 1}") for i, (h, c)
                      in enumerate(zip(header, padded, strict=False)) if "\n" in c or "\r" in c]
        rows.append({h: padded[i].strip() for i, h in enumerate(header) if h})
    return RawTable(label, tuple(header), tuple(rows), overlong_rows=tuple(overlong),
                    unnamed_cells=tuple(unnamed), multiline_cells=tuple(multiline))


def read_tables(folder: Path) -> tuple[dict[str, Any], dict[str, RawTable], list[Problem]]:
    """Settings and raw tables from an instance folder, plus problems of missing files."""
    problems: list[Problem] = []
    settings: dict[str, Any] = {}
    settings_path = folder / "settings.toml"
    if not folder.is_dir():
        what = ("is a file; expected an instance folder or an .xlsx workbook"
                if folder.exists() else "instance folder not found")
        return {}, {}, [Problem(str(folder), None, None, what)]
    if settings_path.is_file():
        try:
            settings = tomllib.loads(read_utf8(settings_path))
        except tomllib.TOMLDecodeError as exc:
            problems.append(Problem("settings.toml", None, None, f"not valid TOML: {exc}"))
        except NotUtf8 as exc:
            problems.append(Problem("settings.toml", exc.row, None, str(exc)))
    else:
        problems.append(Problem("settings.toml", None, None, "file is missing"))
    tables: dict[str, RawTable] = {}
    for name in REQUIRED_TABLES + OPTIONAL_TABLES:
        path = folder / f"{name}.csv"
        if path.is_file():
            tables[name] = read_csv_table(path)
        elif name in REQUIRED_TABLES:
            problems.append(Problem(f"{name}.csv", None, None, "file is missing"))
    return settings, tables, problems


def read_instance(path: str | Path) -> Instance:
    """Read and validate an instance folder (or one ``.xlsx`` workbook); raise
    :class:`InstanceError` listing all problems."""
    if str(path).lower().endswith(".xlsx"):
        from rebalance.workbook_reader import read_workbook  # only workbooks need openpyxl

        return read_workbook(path)
    folder = Path(path)
    settings, tables, problems = read_tables(folder)
    if not folder.is_dir():  # nothing was read: checking empty settings would only add noise
        raise InstanceError(problems)
    return build_instance(folder.name, settings, tables, problems)


# --------------------------------------------------------------------------------------------
# cell parsing


class TableRows:
    """Iterates a table's rows and collects problems with their locations.

    ``columns`` is (required, optional); by default the instance table of that name.  Other
    readers (the workload history) subclass it with their own columns and cell types.
    """

    def __init__(self, table: RawTable, problems: list[Problem],
                 columns: tuple[tuple[str, ...], tuple[str, ...]] | None = None) -> None:
        self.table = table
        self.problems = problems
        self.row_number = 0
        self.columns_ok = True
        required, optional = columns or COLUMNS[_table_name(table.label)]
        if table.fault is not None:  # said once by table_problems; no column is missing too
            self.columns_ok = False
            return
        missing = [c for c in required if c not in table.columns]
        # A column named twice is said by table_problems; which copy to read is unknowable,
        # so no row is read (each would report the copy that happened to be kept).
        twice = _repeated_columns(table)
        for column in missing:
            self.problems.append(Problem(table.label, 1, column, "required column is missing"))
        unknown = [c for c in table.columns if c and c not in required + optional]
        for column in unknown:
            self.problems.append(
                Problem(
                    table.label,
                    1,
                    column,
                    "unknown column (expected one of: " + ", ".join(required + optional) + ")",
                    is_warning=True,
                )
            )
        self.columns_ok = not missing and not twice

    def __iter__(self) -> Iterator[dict[str, str]]:
        if not self.columns_ok:
            return
        # A row a quote left open is said once, by table_problems: its cells hold the rows it
        # swallowed, newlines and all, and reading them would say the fault again, unquotably.
        swallowed = {number for number, _ in self.table.multiline_cells}
        for i, row in enumerate(self.table.rows):
            self.row_number = self.table.first_row_number + i
            if any(row.values()) and self.row_number not in swallowed:
                yield row

    def error(self, column: str | None, message: str) -> None:
        self.problems.append(Problem(self.table.label, self.row_number, column, message))

    def warn(self, column: str | None, message: str) -> None:
        self.problems.append(
            Problem(self.table.label, self.row_number, column, message, is_warning=True)
        )

    def text(self, row: Mapping[str, str], column: str) -> str | None:
        value = row.get(column, "")
        if value == "":
            self.error(column, "is empty; a value is required")
            return None
        return value

    def number(
        self,
        row: Mapping[str, str],
        column: str,
        *,
        required: bool = True,
        minimum: float | None = 0.0,
        maximum: float | None = None,
        open_minimum: bool = False,
        integer: bool = False,
        expected: str | None = None,
    ) -> float | None:
        raw = row.get(column, "")
        what = expected or describe_range(minimum, maximum, open_minimum, integer)
        if raw == "":
            if required:
                self.error(column, f"is empty; expected {what}")
            return None
        try:
            value = float(raw)
        except ValueError:
            self.error(column, f"'{raw}' is not a number; expected {what}")
            return None
        bad = not math.isfinite(value)
        bad = bad or (integer and value != int(value))
        below = minimum is not None and (value <= minimum if open_minimum else value < minimum)
        bad = bad or below
        bad = bad or (maximum is not None and value > maximum)
        if bad:
            self.error(column, f"'{raw}' is out of range; expected {what}")
            return None
        return value

    def boolean(self, row: Mapping[str, str], column: str, default: bool) -> bool:
        raw = row.get(column, "").lower()
        if raw == "":
            return default
        if raw in TRUE_WORDS:
            return True
        if raw in FALSE_WORDS:
            return False
        self.error(column, f"'{row.get(column)}' is not a yes/no value; expected true or false")
        return default

    def reference(self, row: Mapping[str, str], column: str,
                  known: Mapping[str, Any] | set[str] | None, kind: str,
                  defined_in: str) -> str | None:
        """The cell's name if ``known`` lists it; ``known`` None: the table that defines the
        names could not be read, so every name would read as unknown and none is checked."""
        value = self.text(row, column)
        if value is not None and known is not None and value not in known:
            self.error(column, f"unknown {kind} '{value}'; expected one listed in {defined_in}")
            return None
        return value


def _table_name(label: str) -> str:
    # "staff.csv" from a folder, "demo.xlsx[staff]" from a workbook.
    if label.endswith("]") and "[" in label:
        return label[label.rindex("[") + 1:-1]
    return label.removesuffix(".csv")


SKILL_NAME = re.compile(r"^[A-Za-z0-9_.\-]+$")
# A blank proficiency (``intake`` or ``intake:``) is 1.0.
SKILL_TOKEN = re.compile(r"^([A-Za-z0-9_.\-]+)(?::([^:\s]*))?$")


# --------------------------------------------------------------------------------------------
# tables


def build_instance(name: str, settings: Mapping[str, Any], tables: Mapping[str, RawTable],
                   problems: list[Problem]) -> Instance:
    """Validate settings and raw tables into an :class:`Instance` (or raise with all problems)."""
    for raw in tables.values():
        problems += table_problems(raw)
    # Settings that could not be read (missing, not TOML) are reported once, not again as
    # every setting they lack.
    unread = any(p.file == "settings.toml" and p.column is None for p in problems)
    settings_problems: list[Problem] = [] if unread else problems
    if not unread:
        warn_unknown_settings(settings, settings_problems)
    periods, periods_per_year = read_periods(settings, settings_problems)
    policy, defaults, objective, solver = read_sections(settings, settings_problems)
    money = read_money(settings, settings_problems)

    def table(name: str) -> RawTable:
        # A missing file is already reported; read it as empty so other checks still run.
        return tables.get(name) or RawTable(f"{name}.csv", COLUMNS[name][0], (), 2)

    def names(defined: dict[str, Any], name: str) -> dict[str, Any] | None:
        # Where the table defining the names could not be read as a whole (missing, not
        # UTF-8, a required column missing or named twice), every reference to it would read
        # as unknown: one fault, already said, would come back as a problem per row.
        raw = tables.get(name)
        # A quote left open swallows the rows after it, names and all.
        broken = raw is None or raw.fault is not None or bool(raw.multiline_cells) or any(
            p.file == raw.label and p.row in (None, 1) and not p.is_warning for p in problems)
        return None if broken else defined

    offices = _read_offices(table("offices"), problems)
    skills = _read_skills(table("skills"), problems)
    known_offices, known_skills = names(offices, "offices"), names(skills, "skills")
    known_periods = None if unread else known_period_names(settings, periods)
    staff = _read_staff(table("staff"), problems, known_offices, known_skills, known_periods)
    demand = _read_demand(table("demand"), problems, known_offices, known_skills, periods,
                          known_periods, check_empty="demand" in tables)
    locations = None if known_offices is None else {o.location for o in offices.values()}
    move_costs = _read_move_costs(tables.get("move_costs"), problems, locations)
    vacancies = _read_vacancies(tables.get("vacancies"), problems, known_offices, known_skills)
    attrition = _read_attrition(tables.get("attrition"), problems, known_offices, known_skills)
    budgets = _read_budgets(table("budget"), problems, periods, given="budget" in tables)

    # Warnings that do not stop a solve (only worth saying once the tables themselves are sound).
    if any(not p.is_warning for p in problems):
        raise InstanceError(collapse_repeats([p for p in problems if not p.is_warning])
                            + [p for p in problems if p.is_warning])
    staffed_skills = {s for p in staff for s, _ in p.skills}
    warned: set[str] = set()
    for d in demand:
        if d.skill not in staffed_skills and d.skill not in warned:
            warned.add(d.skill)
            problems.append(Problem("demand.csv", None, "skill",
                                    f"nobody on staff has skill '{d.skill}'; only hires can "
                                    "cover it", is_warning=True))
    homes = {p.home_office for p in staff}
    for office in offices:
        if office not in homes:
            problems.append(Problem("offices.csv", None, "office",
                                    f"office '{office}' has no staff", is_warning=True))

    errors = [p for p in problems if not p.is_warning]
    if errors:
        raise InstanceError(errors + [p for p in problems if p.is_warning])
    return Instance(
        name=name,
        periods=periods,
        periods_per_year=periods_per_year,
        offices=tuple(offices.values()),
        skills=tuple(skills.values()),
        staff=tuple(staff),
        demand=tuple(demand),
        move_costs=move_costs,
        vacancies=vacancies,
        attrition=attrition,
        budgets=tuple(budgets),
        policy=policy,
        move_cost_defaults=defaults,
        objective=objective,
        solver=solver,
        money=money,
        warnings=tuple(str(p) for p in problems if p.is_warning),
    )


def _unique(rows: TableRows, column: str, value: str | None, seen: dict[str, int]) -> bool:
    if value is None:
        return False
    if value in seen:
        rows.error(column, f"'{value}' is listed twice (first at row {seen[value]})")
        return False
    seen[value] = rows.row_number
    return True


def _read_offices(table: RawTable, problems: list[Problem]) -> dict[str, Office]:
    rows, out = TableRows(table, problems), {}
    seen: dict[str, int] = {}
    for row in rows:
        name = rows.text(row, "office")
        location = rows.text(row, "location")
        seats = rows.number(row, "seats", required=False, integer=True)
        max_hires = rows.number(row, "max_hires_per_period", required=False, integer=True)
        # Registered even when another cell of its row is wrong (the row's problem is said),
        # so the rows that name it are not all reported as naming an unknown office.
        if _unique(rows, "office", name, seen) and name is not None:
            out[name] = Office(name, location or "", None if seats is None else int(seats),
                               None if max_hires is None else int(max_hires))
    return out


def _read_skills(table: RawTable, problems: list[Problem]) -> dict[str, Skill]:
    rows, out = TableRows(table, problems), {}
    seen: dict[str, int] = {}
    for row in rows:
        name = rows.text(row, "skill")
        if name is not None and not SKILL_NAME.match(name):
            rows.error("skill", f"'{name}' is not a usable skill name; expected letters, digits, "
                       "'_', '.' or '-' only (staff.csv lists skills as name:proficiency, "
                       "separated by spaces)")
        salary = rows.number(row, "salary_per_period")
        onboarding = rows.number(row, "onboarding_cost")
        time_to_hire = rows.number(row, "time_to_hire", integer=True)
        ramp: list[float] = []
        for token in row.get("ramp", "").split():
            try:
                value = float(token)
            except ValueError:
                value = math.nan
            if not 0.0 <= value <= 1.0:
                rows.error("ramp", f"'{token}' is not valid; expected numbers in [0, 1] "
                           "separated by spaces, e.g. '0.5 0.8'")
                break
            ramp.append(value)
        # Registered even when another cell is wrong, as offices are (0 stands in for a
        # number that could not be read: the instance is not built while a problem stands).
        if _unique(rows, "skill", name, seen) and name is not None:
            out[name] = Skill(name, salary or 0.0, onboarding or 0.0, int(time_to_hire or 0),
                              tuple(ramp))
    return out


def _read_staff(table: RawTable, problems: list[Problem], offices: Mapping[str, Office] | None,
                skills: Mapping[str, Skill] | None,
                period_index: Mapping[str, int | None] | None) -> list[Person]:
    rows, out = TableRows(table, problems), []
    seen: dict[str, int] = {}
    for row in rows:
        person = rows.text(row, "person")
        home = rows.reference(row, "home_office", offices, "office", "offices.csv")
        fte = rows.number(row, "fte", maximum=1.0, open_minimum=True)
        person_skills = _parse_skills(rows, row.get("skills", ""), skills)
        can_detail = rows.boolean(row, "can_detail", True)
        can_relocate = rows.boolean(row, "can_relocate", False)
        last = row.get("last_period", "")
        last_period = None
        if last and period_index is not None:
            if last not in period_index:
                rows.error("last_period", f"unknown period '{last}'; expected one of the "
                           "periods in settings.toml")
            else:
                last_period = period_index[last]
        unique = _unique(rows, "person", person, seen)
        if unique and home and fte is not None and person_skills and person is not None:
            out.append(Person(person, home, fte, person_skills, can_detail, can_relocate,
                              last_period))
    return out


def _parse_skills(rows: TableRows, raw: str, skills: Mapping[str, Skill] | None) -> tuple[
        tuple[str, float], ...] | None:
    """The cell's (skill, proficiency) pairs; every bad one is said, not only the first."""
    if not raw:
        rows.error("skills", "is empty; expected skill:proficiency pairs, e.g. "
                   "'intake:1.0 statistics:0.6'")
        return None
    parsed: list[tuple[str, float]] = []
    ok = True
    for token in raw.split():
        match = SKILL_TOKEN.match(token)
        if match is None:
            rows.error("skills", f"'{token}' is malformed; expected skill:proficiency, e.g. "
                       "'intake:0.8'")
            ok = False
            continue
        name, value = match.group(1), match.group(2)
        try:
            proficiency = float(value) if value else 1.0
        except ValueError:
            proficiency = math.nan
        if skills is not None and name not in skills:
            rows.error("skills", f"unknown skill '{name}'; expected one listed in skills.csv")
            ok = False
        elif not 0.0 < proficiency <= 1.0:
            rows.error("skills", f"proficiency '{value}' for '{name}' is out of range; "
                       "expected a number in (0, 1]")
            ok = False
        elif any(name == s for s, _ in parsed):
            rows.error("skills", f"skill '{name}' is listed twice")
            ok = False
        else:
            parsed.append((name, proficiency))
    return tuple(parsed) if ok else None


def _read_demand(table: RawTable, problems: list[Problem], offices: Mapping[str, Office] | None,
                 skills: Mapping[str, Skill] | None, periods: tuple[Period, ...],
                 known_periods: Mapping[str, int | None] | None,
                 check_empty: bool = True) -> list[Demand]:
    rows, out = TableRows(table, problems), []
    seen: dict[tuple[str, str, str], int] = {}
    period_index = {p.name: i for i, p in enumerate(periods)}
    read = 0
    for row in rows:
        read += 1
        office = rows.reference(row, "office", offices, "office", "offices.csv")
        skill = rows.reference(row, "skill", skills, "skill", "skills.csv")
        period = rows.reference(row, "period", known_periods, "period", "settings.toml")
        has_fte, has_hours = bool(row.get("fte")), bool(row.get("hours"))
        fte = hours = None
        if has_fte and has_hours:
            rows.error("hours", "both fte and hours are given; expected exactly one")
        elif has_fte:
            fte = rows.number(row, "fte")
        elif has_hours:
            hours = rows.number(row, "hours")
        else:
            rows.error("fte", "neither fte nor hours is given; expected exactly one")
        priority = rows.number(row, "priority", required=False)
        if office is None or skill is None or period is None:
            continue
        key = (office, skill, period)
        if key in seen:
            rows.error("office, skill, period",
                       f"demand for office '{office}', skill '{skill}', period '{period}' is "
                       f"listed twice (first at row {seen[key]})")
            continue
        seen[key] = rows.row_number
        if period not in period_index:  # the settings could not be read: nothing to convert
            continue
        t = period_index[period]
        if hours is not None:
            fte = hours / periods[t].hours_per_fte
        if fte is not None:
            out.append(Demand(office, skill, t, fte, 1.0 if priority is None else priority,
                              hours))
    if check_empty and rows.columns_ok and not read and not any(
            p.file == table.label for p in problems if not p.is_warning):
        problems.append(Problem(table.label, None, None,
                                "has no demand rows; expected at least one"))
    return out


def _read_move_costs(table: RawTable | None, problems: list[Problem],
                     locations: set[str] | None) -> dict[tuple[str, str], MoveCost]:
    if table is None:
        return {}
    rows, out = TableRows(table, problems), {}
    known = None if locations is None else {loc: None for loc in locations}
    for row in rows:
        a = rows.reference(row, "from_location", known, "location", "offices.csv")
        b = rows.reference(row, "to_location", known, "location", "offices.csv")
        detail = rows.number(row, "detail_cost_per_period", required=False)
        relocation = rows.number(row, "relocation_cost", required=False)
        if a is None or b is None:
            continue
        if (a, b) in out:
            rows.error("from_location, to_location",
                       f"move costs from '{a}' to '{b}' are listed twice")
            continue
        out[(a, b)] = MoveCost(detail, relocation)
    return out


def _read_vacancies(table: RawTable | None, problems: list[Problem],
                    offices: Mapping[str, Office] | None,
                    skills: Mapping[str, Skill] | None) -> dict[
                        tuple[str, str], int]:
    if table is None:
        return {}
    rows, out = TableRows(table, problems), {}
    for row in rows:
        office = rows.reference(row, "office", offices, "office", "offices.csv")
        skill = rows.reference(row, "skill", skills, "skill", "skills.csv")
        count = rows.number(row, "count", integer=True)
        if office is None or skill is None or count is None:
            continue
        if (office, skill) in out:
            rows.error("office, skill", f"vacancies for '{office}', '{skill}' are listed twice")
            continue
        out[(office, skill)] = int(count)
    return out


def _read_attrition(table: RawTable | None, problems: list[Problem],
                    offices: Mapping[str, Office] | None,
                    skills: Mapping[str, Skill] | None) -> dict[
                        tuple[str, str | None], float]:
    if table is None:
        return {}
    rows, out = TableRows(table, problems), {}
    for row in rows:
        skill = rows.reference(row, "skill", skills, "skill", "skills.csv")
        office = None
        if row.get("office"):
            office = rows.reference(row, "office", offices, "office", "offices.csv")
            if office is None:
                continue
        rate = rows.number(row, "annual_rate", maximum=1.0, expected="a number in [0, 1)")
        if rate is not None and rate >= 1.0:
            rows.error("annual_rate", f"'{row['annual_rate']}' is out of range; expected a "
                       "number in [0, 1)")
            continue
        if skill is None or rate is None:
            continue
        if (skill, office) in out:
            rows.error("skill, office", f"attrition for '{skill}' at '{office or 'any office'}' is "
                       "listed twice")
            continue
        out[(skill, office)] = rate
    return out


def _read_budgets(table: RawTable, problems: list[Problem],
                  periods: tuple[Period, ...], given: bool = True) -> list[Budget]:
    """The budget rows; ``given`` is False where the table itself is missing (reported
    already), so its years are not reported again, one by one, as having no row."""
    rows, out = TableRows(table, problems), []
    seen: dict[str, int] = {}
    years = {p.year for p in periods}
    for row in rows:
        year = rows.text(row, "year")
        hiring = rows.number(row, "hiring", required=False)
        moves = rows.number(row, "moves", required=False)
        if year is not None and year not in years and periods:
            rows.error("year", f"budget year '{year}' belongs to no period; expected one of "
                       + ", ".join(sorted(years)))
            continue
        if _unique(rows, "year", year, seen) and year is not None:
            if not row.get("hiring"):  # blank; a value that could not be read is an error
                rows.warn("hiring", f"no hiring cap for {year}")
            out.append(Budget(year, hiring, moves))
    listed = {b.year for b in out}
    # A year that could not be read may be the one "missing": say nothing of missing years then.
    # So may the rows a quote left open swallowed.
    unreadable = bool(table.multiline_cells) or any(
        p.file == table.label and p.column == "year" and not p.is_warning for p in problems)
    if rows.columns_ok and not unreadable and given:
        for year in sorted(years - listed):
            problems.append(Problem(table.label, None, "year",
                                    f"budget year '{year}' has no row; hiring and moves are "
                                    "uncapped that year",
                                    is_warning=True))
    return out

