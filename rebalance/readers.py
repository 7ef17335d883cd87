"""Read an instance folder and validate it: every problem at once, each naming file, row, column.

Rows are numbered as a spreadsheet shows them: the header is row 1, the first data row is row 2.
Nothing here solves or writes anything; a caller gets an :class:`Instance` or an
:class:`InstanceError` carrying the full list of :class:`~rebalance.problems.Problem` records.
The settings are checked by :mod:`rebalance.settings_reader`; files are read into raw tables,
and their cells parsed, by :mod:`rebalance.tables`.
"""

from __future__ import annotations

import os
import re
import tomllib
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from rebalance.files import MARKER
from rebalance.instance import (
    MAX_PRIORITY,
    Budget,
    Demand,
    Instance,
    MoveCost,
    Office,
    Period,
    Person,
    SeatCount,
    Skill,
)
from rebalance.problems import Problem, range_words
from rebalance.read_limits import (
    COLUMNS,
    MAX_DEMAND_FTE,
    MAX_DEMAND_HOURS,
    seats_too_few,
    table_rows,
)
from rebalance.settings_reader import (
    known_period_names,
    read_money,
    read_periods,
    read_sections,
    read_title,
    warn_unknown_settings,
)
from rebalance.tables import (
    NotUtf8,
    RawTable,
    TableRows,
    collapse_repeats,
    parse_number,
    read_csv_table,
    read_utf8,
    table_problems,
)

__all__ = [
    "COLUMNS",
    "InstanceError",
    "count_problems",
    "read_instance",
    "read_tables",
]

REQUIRED_TABLES = ("offices", "skills", "staff", "demand", "budget")
OPTIONAL_TABLES = ("move_costs", "vacancies", "attrition")

def count_problems(problems: list[Problem]) -> int:
    """How many problems ``problems`` stand for, the rows of collapsed repeats included."""
    return sum(p.repeats for p in problems)


class InstanceError(Exception):
    """The input is invalid; ``problems`` lists everything found, not just the first."""

    def __init__(self, problems: list[Problem]) -> None:
        self.problems = problems
        super().__init__("\n".join(str(p) for p in problems))


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
        except RecursionError:  # a = [[[[...]]]] thousands deep had been an internal error
            problems.append(Problem("settings.toml", None, None, "cannot be read: values "
                                    "nested too deeply; expected tables and lists a few deep"))
    else:
        problems.append(_not_a_file("settings.toml", settings_path))
    tables: dict[str, RawTable] = {}
    for name in REQUIRED_TABLES + OPTIONAL_TABLES:
        path = folder / f"{name}.csv"
        if path.is_file():
            tables[name] = read_csv_table(path, COLUMNS[name][0] + COLUMNS[name][1])
        elif name in REQUIRED_TABLES or path.is_dir():
            problems.append(_not_a_file(f"{name}.csv", path))
    return settings, tables, problems


def _not_a_file(name: str, path: Path) -> Problem:
    """A file that is missing, or a folder in its place (it had been said missing)."""
    return Problem(name, None, None, "is a folder; expected a file" if path.is_dir()
                   else "file is missing")


def read_instance(path: str | Path) -> Instance:
    """Read and validate an instance folder (or one ``.xlsx`` workbook); raise
    :class:`InstanceError` listing all problems."""
    if str(path).lower().endswith(".xlsx"):
        from rebalance.workbook_reader import read_workbook  # only workbooks need openpyxl

        return read_workbook(path)
    folder = Path(path)
    if (folder / MARKER).is_file():
        # A plan folder given for its instance had drawn six "file is missing" lines.
        kind = (folder / MARKER).read_text(encoding="utf-8", errors="replace").strip()
        raise InstanceError([Problem(str(folder), None, None, f"is a {kind or 'plan'} folder "
                                     "this tool wrote, not an instance; expected the instance "
                                     "folder it was made from (summary.json's instance_path)")])
    settings, tables, problems = read_tables(folder)
    if not folder.is_dir():  # nothing was read: checking empty settings would only add noise
        raise InstanceError(problems)
    # `.` and `..` name the folder they stand for (`.` had given an empty name everywhere);
    # abspath keeps a symbolic link's own name, as the plain name does.
    name = Path(os.path.abspath(folder)).name or "instance"
    return build_instance(name, settings, tables, problems)


SKILL_NAME = re.compile(r"^[A-Za-z0-9_.\-]+$")
# A blank proficiency (``intake`` or ``intake:``) is 1.0.
SKILL_TOKEN = re.compile(r"^([A-Za-z0-9_.\-]+)(?::([^:\s]*))?$")
# Ranges said in plain words where a reader checks the bounds itself.
PROFICIENCY_RANGE = range_words(0.0, 1.0, open_minimum=True)
ANNUAL_RATE_RANGE = range_words(0.0, 1.0, open_maximum=True)


# -- tables ----------------------------------------------------------------------------------


def build_instance(name: str, settings: Mapping[str, Any], tables: Mapping[str, RawTable],
                   problems: list[Problem]) -> Instance:
    """Validate settings and raw tables into an :class:`Instance` (or raise with all problems)."""
    for table_name, raw in tables.items():
        required, optional = COLUMNS.get(table_name, ((), ()))
        problems += table_problems(raw, known=(*required, *optional))
    # Settings that could not be read (missing, not TOML) are reported once, not again as
    # every setting they lack.
    unread = any(p.file == "settings.toml" and p.column is None for p in problems)
    settings_problems: list[Problem] = [] if unread else problems
    if not unread:
        warn_unknown_settings(settings, settings_problems)
    periods, periods_per_year = read_periods(settings, settings_problems)
    policy, defaults, objective, solver = read_sections(settings, settings_problems)
    money, title = read_money(settings, settings_problems), read_title(settings, settings_problems)

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
            p.file == raw.label and p.row in (None, raw.header_row) and not p.is_warning
            for p in problems)
        return None if broken else defined

    office_rows: dict[str, int] = {}
    skill_rows: dict[str, int] = {}
    offices = _read_offices(table("offices"), problems, office_rows)
    skills = _read_skills(table("skills"), problems, skill_rows)
    known_offices, known_skills = names(offices, "offices"), names(skills, "skills")
    known_periods = None if unread else known_period_names(settings, periods)
    staff = _read_staff(table("staff"), problems, known_offices, known_skills, known_periods)
    demand = _read_demand(table("demand"), problems, known_offices, known_skills, periods,
                          known_periods, check_empty="demand" in tables)
    locations = None if known_offices is None else [o.location for o in offices.values()]
    move_costs = _read_move_costs(tables.get("move_costs"), problems, locations)
    vacancies = _read_vacancies(tables.get("vacancies"), problems, known_offices, known_skills)
    attrition = _read_attrition(tables.get("attrition"), problems, known_offices, known_skills)
    budgets = _read_budgets(table("budget"), problems, periods, given="budget" in tables)

    # Warnings that do not stop a solve (only worth saying once the tables themselves are sound).
    if any(not p.is_warning for p in problems):
        raise InstanceError(collapse_repeats([p for p in problems if not p.is_warning])
                            + [p for p in problems if p.is_warning])
    instance = Instance(
        name=name, title=title,
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
    )
    # Appended to ``problems``, not only returned: the workbook reader relabels them from there.
    problems += _data_warnings(instance, office_rows, skill_rows)
    return instance.with_changes(warnings=tuple(str(p) for p in problems if p.is_warning))


def _data_warnings(instance: Instance, office_rows: Mapping[str, int],
                   skill_rows: Mapping[str, int]) -> list[Problem]:
    """What sound tables still say that a planner would want to hear before solving."""
    out: list[Problem] = []
    staffed_skills = {s for p in instance.staff for s, _ in p.skills}
    warned: set[str] = set()
    for d in instance.demand:
        if d.skill not in staffed_skills and d.skill not in warned:
            warned.add(d.skill)
            out.append(Problem("demand.csv", None, "skill",
                               f"nobody on staff has skill '{d.skill}'; only hires can "
                               "cover it", is_warning=True))
    T = len(instance.periods)
    # Likely a typo (9 for 2 quarters): the skill can then never be hired.
    for skill in (s for s in instance.skills if s.time_to_hire >= T):
        out.append(Problem("skills.csv", skill_rows.get(skill.name), "time_to_hire",
                           f"{skill.time_to_hire} periods for '{skill.name}' is the whole horizon "
                           f"({T} periods) or more: no hire of it can start", is_warning=True))
    # A period with no rows among periods with some is more likely rows lost than no work.
    with_demand = {d.period for d in instance.demand}
    empty = [p.name for t, p in enumerate(instance.periods) if t not in with_demand]
    if with_demand and empty:
        out.append(Problem("demand.csv", None, "period",
                           f"no rows for {_some(empty)}, while other periods have some: "
                           "were rows left out?", is_warning=True))
    if instance.objective.mode == "weighted" and instance.objective.shortfall_cost == 0:
        out.append(Problem("settings.toml", None, "objective.shortfall_cost",
                           "is 0, so the weighted objective prices money only: the plan will "
                           "move and hire nobody that costs anything, whatever the shortfall",
                           is_warning=True))
    homes = {p.home_office for p in instance.staff}
    seat_counts: dict[str, list[SeatCount]] = {}
    for count in instance.seat_counts():
        seat_counts.setdefault(count.office, []).append(count)
    windows = {w.office: w for w in instance.seat_windows()}
    # An office with staff and no demand at all: its people can only be sent away or idle,
    # as where rows were lost (a history of two offices written over six's demand).
    demanded = {d.office for d in instance.demand}
    for office in instance.offices:
        if office.name in homes and demanded and office.name not in demanded:
            out.append(Problem("offices.csv", office_rows.get(office.name), "office",
                               f"no demand rows for '{office.name}', where staff are based: "
                               "its people can only be detailed out or left idle; were rows "
                               "left out?", is_warning=True))
        if office.name not in homes:
            out.append(Problem("offices.csv", office_rows.get(office.name), "office",
                               f"nobody on staff is based at '{office.name}'",
                               is_warning=True))
        elif office.name in seat_counts:
            said = seats_too_few(instance, seat_counts[office.name],
                                  windows.get(office.name))
            if said:
                out.append(Problem("offices.csv", office_rows.get(office.name), "seats", said,
                                   is_warning=True))
    return out


def _some(names: list[str]) -> str:
    """A few names said briefly: 'Q1', 'Q1 and Q3', 'Q1, Q2, Q3 and 4 more'."""
    if len(names) == 1:
        return names[0]
    if len(names) <= 3:
        return f"{', '.join(names[:-1])} and {names[-1]}"
    return f"{', '.join(names[:3])} and {len(names) - 3} more"


def _unique(rows: TableRows, column: str, value: str | None, seen: dict[str, int]) -> bool:
    if value is None:
        return False
    if value in seen:
        rows.error(column, f"'{value}' is listed twice (first at row {seen[value]})")
        return False
    seen[value] = rows.row_number
    return True


def _read_offices(table: RawTable, problems: list[Problem],
                  seen: dict[str, int]) -> dict[str, Office]:
    """The offices by name; ``seen`` is filled with each one's row, for warnings to name."""
    rows, out = table_rows("offices", table, problems), {}
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


def _read_skills(table: RawTable, problems: list[Problem],
                 seen: dict[str, int]) -> dict[str, Skill]:
    rows, out = table_rows("skills", table, problems), {}
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
            value = parse_number(token)
            if value is None or not 0.0 <= value <= 1.0:
                rows.error("ramp", f"'{token}' is not valid; expected numbers from 0 to 1 "
                           "separated by spaces, e.g. '0.5 0.8'")
                break
            ramp.append(value)
        # Registered even when another cell is wrong, as offices are (0 stands in for a
        # number that could not be read: the instance is not built while a problem stands);
        # not when the name itself is, which other files' unknown names had been told they
        # might mean ("unknown skill 'review' (did you mean 're view'?)").
        if (_unique(rows, "skill", name, seen) and name is not None
                and SKILL_NAME.match(name)):
            out[name] = Skill(name, salary or 0.0, onboarding or 0.0, int(time_to_hire or 0),
                              tuple(ramp))
    return out


def _read_staff(table: RawTable, problems: list[Problem], offices: Mapping[str, Office] | None,
                skills: Mapping[str, Skill] | None,
                period_index: Mapping[str, int | None] | None) -> list[Person]:
    rows, out = table_rows("staff", table, problems), []
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
                           "periods in settings.toml"
                           + rows.suggest("last_period", last, period_index))
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
        proficiency = parse_number(value) if value else 1.0
        if skills is not None and name not in skills:
            rows.unknown("skills", name, skills, "skill", "skills.csv")
            ok = False
        elif proficiency is None or not 0.0 < proficiency <= 1.0:
            fault = "is not a number" if proficiency is None else "is out of range"
            rows.error("skills", f"proficiency '{value}' for '{name}' {fault}; "
                       f"expected {PROFICIENCY_RANGE}")
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
    rows, out = table_rows("demand", table, problems), []
    seen: dict[tuple[str, str, str], int] = {}
    period_index = {p.name: i for i, p in enumerate(periods)}
    # The horizon is often start and count, not a list: name its ends, so "listed in
    # settings.toml" is not sought there in vain.
    if not periods:
        periods_defined = "settings.toml"
    elif len(periods) == 1:
        periods_defined = f"settings.toml ({periods[0].name})"
    else:
        periods_defined = f"settings.toml ({periods[0].name} to {periods[-1].name})"
    read = 0
    # A header with neither column is said once, not on every row (nor for a missing file).
    amounts = {"fte", "hours"} & set(table.columns)
    if check_empty and rows.columns_ok and not amounts:
        problems.append(Problem(table.label, table.header_row, "fte", "neither fte nor hours "
                                "is a column; expected one of them, a value in each row"))
    for row in rows:
        read += 1
        office = rows.reference(row, "office", offices, "office", "offices.csv")
        skill = rows.reference(row, "skill", skills, "skill", "skills.csv")
        period = rows.reference(row, "period", known_periods, "period", periods_defined)
        has_fte, has_hours = bool(row.get("fte")), bool(row.get("hours"))
        fte = hours = None
        if has_fte and has_hours:
            rows.error("hours", "both fte and hours are given; expected exactly one")
        elif has_fte:
            fte = rows.number(row, "fte", ceiling=MAX_DEMAND_FTE)
        elif has_hours:
            hours = rows.number(row, "hours", ceiling=MAX_DEMAND_HOURS)
        elif amounts:
            rows.error("fte", "neither fte nor hours is given; expected exactly one")
        priority = rows.number(row, "priority", required=False, maximum=MAX_PRIORITY)
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
            if fte > MAX_DEMAND_FTE:
                rows.error("hours", f"'{row['hours']}' hours at {periods[t].hours_per_fte:g} "
                           f"hours per FTE in {period} are {fte:,.0f} FTE; expected at most "
                           f"{MAX_DEMAND_FTE:,.0f} FTE")
                continue
        if fte is not None:
            out.append(Demand(office, skill, t, fte, 1.0 if priority is None else priority,
                              hours))
    if check_empty and rows.columns_ok and not read and not any(
            p.file == table.label for p in problems if not p.is_warning):
        problems.append(Problem(table.label, None, None,
                                "has no demand rows; expected at least one"))
    return out


def _read_move_costs(table: RawTable | None, problems: list[Problem],
                     locations: list[str] | None) -> dict[tuple[str, str], MoveCost]:
    if table is None:
        return {}
    rows, out = table_rows("move_costs", table, problems), {}
    known = None if locations is None else dict.fromkeys(locations)  # file order
    seen: dict[tuple[str, str], int] = {}
    for row in rows:
        a = rows.reference(row, "from_location", known, "location", "offices.csv")
        b = rows.reference(row, "to_location", known, "location", "offices.csv")
        detail = rows.number(row, "detail_cost_per_period", required=False)
        relocation = rows.number(row, "relocation_cost", required=False)
        if a is None or b is None:
            continue
        if (a, b) in seen:
            rows.error("from_location, to_location", f"move costs from '{a}' to '{b}' are "
                       f"listed twice (first at row {seen[(a, b)]})")
            continue
        seen[(a, b)] = rows.row_number
        out[(a, b)] = MoveCost(detail, relocation)
    return out


def _read_vacancies(table: RawTable | None, problems: list[Problem],
                    offices: Mapping[str, Office] | None,
                    skills: Mapping[str, Skill] | None) -> dict[
                        tuple[str, str], int]:
    if table is None:
        return {}
    rows, out = table_rows("vacancies", table, problems), {}
    seen: dict[tuple[str, str], int] = {}  # a row whose count is bad is a first copy too
    for row in rows:
        office = rows.reference(row, "office", offices, "office", "offices.csv")
        skill = rows.reference(row, "skill", skills, "skill", "skills.csv")
        count = rows.number(row, "count", integer=True)
        if office is None or skill is None:
            continue
        if (office, skill) in seen:
            rows.error("office, skill", f"vacancies for '{office}', '{skill}' are listed twice "
                       f"(first at row {seen[(office, skill)]})")
            continue
        seen[(office, skill)] = rows.row_number
        if count is not None:
            out[(office, skill)] = int(count)
    return out


def _read_attrition(table: RawTable | None, problems: list[Problem],
                    offices: Mapping[str, Office] | None,
                    skills: Mapping[str, Skill] | None) -> dict[
                        tuple[str, str | None], float]:
    if table is None:
        return {}
    rows, out = table_rows("attrition", table, problems), {}
    seen: dict[tuple[str, str | None], int] = {}  # a row whose rate is bad is a first copy too
    for row in rows:
        skill = rows.reference(row, "skill", skills, "skill", "skills.csv")
        office = None
        if row.get("office"):  # an unknown office is said, and its rate is checked all the same
            office = rows.reference(row, "office", offices, "office", "offices.csv")
        rate = rows.number(row, "annual_rate", maximum=1.0, expected=ANNUAL_RATE_RANGE)
        if rate is not None and rate >= 1.0:
            rows.error("annual_rate", f"'{row['annual_rate']}' is out of range; expected "
                       f"{ANNUAL_RATE_RANGE}")
            rate = None
        if skill is None or (row.get("office") and office is None):
            continue
        if (skill, office) in seen:
            rows.error("skill, office", f"attrition for '{skill}' at '{office or 'any office'}' is "
                       f"listed twice (first at row {seen[(skill, office)]})")
            continue
        seen[(skill, office)] = rows.row_number
        if rate is not None:
            out[(skill, office)] = rate
    return out


def _read_budgets(table: RawTable, problems: list[Problem],
                  periods: tuple[Period, ...], given: bool = True) -> list[Budget]:
    """The budget rows; ``given`` is False where the table itself is missing (reported
    already), so its years are not reported again, one by one, as having no row."""
    rows, out = table_rows("budget", table, problems), []
    seen: dict[str, int] = {}
    years = {p.year for p in periods}
    for row in rows:
        year = rows.text(row, "year")
        hiring = rows.number(row, "hiring", required=False)
        moves = rows.number(row, "moves", required=False)
        if year is not None and year not in years and periods:
            rows.error("year", f"budget year '{year}' belongs to no period; expected one of "
                       + ", ".join(sorted(years)) + rows.suggest("year", year, sorted(years)))
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

