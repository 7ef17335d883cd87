"""Read the settings of an instance: horizon and periods, policy, move-cost defaults, objective,
solver, money and the reports' title, from settings.toml (or a workbook's settings sheet, given
as the same keys).

Every problem is collected, not just the first, each naming the dotted key it is about.
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Collection, Iterable, Mapping
from dataclasses import dataclass
from typing import Any, TypeGuard

from rebalance.instance import Money, MoveCostDefaults, Objective, Period, Policy, SolverSettings
from rebalance.numbers import plain_number
from rebalance.problems import (
    Problem,
    close_names,
    did_you_mean,
    is_finite_number,
    range_words,
)
from rebalance.read_limits import (
    HOURS_PER_FTE_MAX,
    HOURS_PER_FTE_MIN,
    MAX_NUMBER,
    MAX_TIME_LIMIT_SECONDS,
)

__all__ = [
    "SETTINGS_KEYS",
    "CellDate",
    "known_period_names",
    "meant_for",
    "read_money",
    "read_periods",
    "read_sections",
    "read_title",
    "typo_words",
    "warn_unknown_settings",
]

# Quarters a generated horizon may have: a plan runs a few years (the issue: 12 quarters); a
# typo such as 1e18 had the reader try to list that many periods.
MAX_PERIODS = 400

# Every key settings.toml understands, dotted (plus horizon.periods, a list of tables with
# name, year and hours_per_fte); the workbook's settings sheet takes the same keys.
SETTINGS_KEYS = (
    "horizon.start", "horizon.count", "horizon.hours_per_fte", "horizon.periods_per_year",
    "policy.max_away_share", "policy.max_consecutive_detail_periods",
    "move_costs.detail_cost_per_period", "move_costs.relocation_cost",
    "move_costs.same_location_detail_cost_per_period",
    "move_costs.same_location_relocation_cost",
    "objective.mode", "objective.shortfall_cost", "objective.shortfall_tolerance",
    "solver.name", "solver.time_limit_seconds", "solver.relative_gap", "solver.threads",
    "solver.seed", "money.currency", "report.title",
)
PERIOD_KEYS = ("name", "year", "hours_per_fte")
# What each optional key's default means (docs/instance-format.md, the settings table): said
# where a misspelt key leaves it in force, as the plan would run that way.
DEFAULT_MEANINGS = {
    "horizon.periods_per_year": "4 periods in a year",
    "policy.max_away_share": "1.0: no cap",
    "policy.max_consecutive_detail_periods": "none: no limit",
    **dict.fromkeys(("move_costs.detail_cost_per_period", "move_costs.relocation_cost",
                     "move_costs.same_location_detail_cost_per_period",
                     "move_costs.same_location_relocation_cost"),
                    "0: free where move_costs.csv gives no cost"),
    "objective.mode": "shortfall-first: least shortfall, then least cost",
    "objective.shortfall_cost": "100,000 a priority-weighted FTE-period short",
    "objective.shortfall_tolerance": "1e-6",
    "solver.name": "highs",
    "solver.time_limit_seconds": "300",
    "solver.relative_gap": "0.0001",
    "solver.threads": "1",
    "solver.seed": "0",
    "money.currency": "none: amounts shown bare",
    "report.title": "none: the reports are headed with the instance's name",
}
MAX_SHORTFALL_COST = 1e12
_PERIOD_HOURS = re.compile(r"horizon\.periods\[\d+\]\.hours_per_fte")


@dataclass(frozen=True)
class CellDate:
    """A settings value a workbook's cell holds as a date: a spreadsheet reads 2027-01-01 typed
    in a cell as one, and only such a cell's message says so (a TOML date, or text such as
    2027Q1, is no cell's)."""

    value: dt.date  # a datetime is a date too

    @property
    def day(self) -> dt.date:
        """The date without its time."""
        return self.value.date() if isinstance(self.value, dt.datetime) else self.value

    @property
    def shown(self) -> str:
        """The date as the cell shows it: ISO, with no time at midnight."""
        midnight = self.value == dt.datetime.combine(self.day, dt.time())
        return (self.day if midnight else self.value).isoformat()

    @property
    def quarter(self) -> str:
        """The quarter the date falls in, as a period is named: ``2027-Q1``."""
        return f"{self.day.year}-Q{(self.day.month - 1) // 3 + 1}"

    def instead_of(self, what: str, typed: str, example: str) -> str:
        """The message for a date in a cell that expects ``what`` as text (``a quarter``)."""
        return (f"the cell holds a date ({self.shown}), not {what}; type {typed} as text, e.g. "
                f"{example} (a spreadsheet reads 2027-01-01 typed in a cell as a date)")

    @property
    def not_period_name(self) -> str:
        """The message for this date where a period's name is expected."""
        return self.instead_of("a period name", "the period name", self.quarter)

    @property
    def not_budget_year(self) -> str:
        """The message for this date where a budget year's name is expected."""
        return self.instead_of("a budget year", "the year's name", str(self.day.year))


def warn_unknown_settings(settings: Mapping[str, Any], problems: list[Problem]) -> None:
    """A warning for each setting nothing reads: a typo (``max_away_shares``) would otherwise
    leave the default in force without a word; an error where :func:`typo_words` says so."""
    def warn(key: str, what: str, expected: list[str], hint: str = "") -> None:
        given = key.rpartition(".")[2]  # the key within its section, as ``expected`` lists it
        problems.append(Problem("settings.toml", None, key, f"unknown {what}, ignored (expected "
                                "one of: " + ", ".join(expected) + ")"
                                + (hint or did_you_mean(given, expected)), is_warning=True,
                                unknown_key=key if what == "key" else None))

    sections = list(dict.fromkeys(key.partition(".")[0] for key in SETTINGS_KEYS))
    given = {f"{section}.{key}" for section, table in settings.items()
             if isinstance(table, dict) for key in table}
    for section, table in settings.items():
        if section not in sections:
            typos = [(f"{section}.{key}", typo_words(f"{section}.{key}", given))
                     for key in (table if isinstance(table, dict) else {})]
            problems += [Problem("settings.toml", None, key, words, unknown_key=key)
                         for key, words in typos if words]
            if any(words for _, words in typos):
                continue  # its keys' errors say where they belong
            # A key of a section written above every section (title = "..." at the top).
            owner = [k.partition(".")[0] for k in SETTINGS_KEYS if k.endswith("." + section)]
            warn(section, "section", sections,
                 f" (did you mean '{section}' under [{owner[0]}]?)" if owner else "")
            continue
        if not isinstance(table, dict):
            continue  # said by the reader of the section
        keys = [k.partition(".")[2] for k in SETTINGS_KEYS if k.startswith(section + ".")]
        keys += ["periods"] if section == "horizon" else []
        for key in table:
            if key in keys:
                continue
            if words := typo_words(f"{section}.{key}", given):
                problems.append(Problem("settings.toml", None, f"{section}.{key}", words,
                                        unknown_key=f"{section}.{key}"))
            else:
                warn(f"{section}.{key}", "key", keys)
    listed = settings.get("horizon", {})
    listed = listed.get("periods") if isinstance(listed, dict) else None
    for i, entry in enumerate(listed if isinstance(listed, list) else [], 1):
        for key in entry if isinstance(entry, dict) else {}:
            if key not in PERIOD_KEYS:
                warn(f"horizon.periods[{i}].{key}", "key", list(PERIOD_KEYS))


def typo_words(key: str, given: Collection[str], *, dotted: bool = False) -> str:
    """The message for unknown dotted ``key`` where it is a close match (:func:`close_names`,
    the closest) for an optional key not in ``given`` (dotted): an error, as that key stays
    at its default, which the message says; "" otherwise, where a warning says it is ignored.

    The key is named as written: within its section in settings.toml (``max_away_share``),
    dotted where ``key`` is of no known section or ``dotted`` (a workbook's key column)."""
    section, _, name = key.partition(".")
    known = _section_names(section)
    close = close_names(name, known)[:1] if known else close_names(key, SETTINGS_KEYS)[:1]
    meant = [f"{section}.{c}" for c in close] if known else close
    if not meant or meant[0] not in DEFAULT_MEANINGS or meant[0] in given:
        return ""
    shown = close[0] if known and not dotted else meant[0]
    return (f"unknown key; did you mean {shown}? (as written, {shown} stays at its default, "
            f"{DEFAULT_MEANINGS[meant[0]]})")


def _section_names(section: str) -> tuple[str, ...]:
    """The keys a section understands: a listed period's (section ``horizon.periods[2]``) or
    a settings section's."""
    if re.fullmatch(r"horizon\.periods\[\d+\]", section):
        return PERIOD_KEYS
    names = tuple(k.partition(".")[2] for k in SETTINGS_KEYS if k.startswith(section + "."))
    return names + (("periods",) if section == "horizon" else ())


def meant_for(missing: str, given: Iterable[str]) -> tuple[str, list[str]]:
    """Words to end the message that the required key ``missing`` (dotted; ``horizon`` for
    start and count, said together) is missing, naming the keys of ``given`` (dotted, as
    written) that nothing reads and may be meant as it; and those keys.

    A key is meant as ``missing`` when :func:`close_names` offers its name among its
    section's keys, as the unknown key's warning would (a misspelt ``strat`` had drawn
    "horizon.start: is missing" and, apart, a warning suggesting start), or, for a key of no
    known section, when ``missing`` is its closest key.  A listed period's
    hours_per_fte may also be meant by a misspelt default, horizon.hours_per_fte."""
    given = list(given)
    sections = {k.partition(".")[0] for k in SETTINGS_KEYS}
    targets = [(missing, "it")]
    if missing == "horizon":
        targets = [("horizon.start", "start"), ("horizon.count", "count")]
    elif _PERIOD_HOURS.fullmatch(missing):
        targets.append(("horizon.hours_per_fte", "horizon.hours_per_fte"))
    parts, meant = [], []
    for key, word in targets:
        section, _, name = key.rpartition(".")
        known = _section_names(section)
        close = [g for g in given if (
            g.rpartition(".")[0] == section and g.rpartition(".")[2] not in known
            and name in close_names(g.rpartition(".")[2], known)) or (
            # a workbook's key row of no known section (horizn.start): its closest key
            g.partition(".")[0] not in sections and close_names(g, SETTINGS_KEYS)[:1] == [key])]
        if close:
            parts.append(" or ".join(close) + f" may be meant as {word}")
            meant += close
    return (" (" + "; ".join(parts) + ")" if parts else ""), meant


def _whole(value: Any) -> TypeGuard[int | float]:
    """A whole number: a TOML integer or a float such as ``4.0``, as a CSV or workbook cell of
    4.0 is whole (``true`` is an int to Python, not a count)."""
    return is_finite_number(value) and value == int(value)


def _shown(value: Any) -> str:
    """A settings value quoted for messages: ``true`` as TOML spells it, not Python's
    ``True``; a number as :func:`plain_number` writes it (``1e13`` as 10,000,000,000,000,
    not Python's ``1e+13``, a sweep)."""
    if isinstance(value, bool):
        return "'true'" if value else "'false'"
    if isinstance(value, int | float):
        return f"'{plain_number(value)}'"
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, list):
        return "a list"
    return f"'{value}'"


def _invalid(value: Any) -> str:
    """``'x' is not valid``; for a workbook cell holding a date, that it does (the date as the
    cell shows it, not as ISO text with a time)."""
    if isinstance(value, CellDate):
        return f"the cell holds a date ({value.shown}), which is not valid"
    return f"{_shown(value)} is not valid"


def _not_valid(value: Any) -> str:
    """:func:`_invalid` of a number; for one in quotes (hours_per_fte = "450"), that it is text:
    TOML reads it as a string, and "'450' is not valid" left the quotes unsaid (a sweep)."""
    if isinstance(value, str) and re.fullmatch(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?",
                                               value.strip()):
        return f'"{value}" is text in quotes, not a number (remove the quotes)'
    return _invalid(value)


def _period_text(entry: Mapping[str, Any], key: str) -> str | None:
    """An explicit period's name or year as text (a year may be the integer 2027); None if
    missing or blank (a workbook's periods sheet gives a blank cell as "")."""
    value = entry.get(key)
    if isinstance(value, bool) or not isinstance(value, str | int):
        return None
    return str(value).strip() or None


def known_period_names(settings: Mapping[str, Any], periods: tuple[Period, ...]) -> dict[
        str, int | None] | None:
    """Period names rows may refer to, with their index in ``periods``.

    An explicit period whose name reads but whose year or hours do not is known all the same
    (its problem is said once, in settings), so rows naming it are not each reported as naming
    an unknown period.  None where the periods cannot be read as a whole (an entry without a
    name, bad start or count): then no row's period is checked.
    """
    index: dict[str, int | None] = {p.name: i for i, p in enumerate(periods)}
    horizon = settings.get("horizon")
    listed = horizon.get("periods") if isinstance(horizon, dict) else None
    if isinstance(listed, list) and listed:
        names = [_period_text(e, "name") if isinstance(e, dict) else None for e in listed]
        if any(n is None for n in names):
            return None
        return {n: index.get(n) for n in names if n is not None}
    return index or None


def read_periods(settings: Mapping[str, Any], problems: list[Problem]) -> tuple[
        tuple[Period, ...], int]:
    """The planning periods (listed in ``horizon.periods`` or generated from ``horizon.start``
    and ``count``) and the periods per year; none where the horizon cannot be read.

    A required key said missing names the unknown keys that may be meant as it (in
    ``Problem.meant_keys`` too), and their warnings are taken back: one problem says both.
    The unknown keys are those of ``settings`` and of the problems already said about one
    (``Problem.unknown_key``: :func:`warn_unknown_settings`'s, called first, or a workbook's
    key rows, which its reader leaves out of ``settings``); this is the one place that rule
    lives."""
    def bad(key: str, message: str) -> None:
        problems.append(Problem("settings.toml", None, key, message))

    def missing(key: str, message: str) -> None:
        words, meant = meant_for(key, given)
        problems[:] = [p for p in problems if not (p.is_warning and p.unknown_key in meant)]
        problems.append(Problem("settings.toml", None, key, message + words,
                                meant_keys=tuple(meant)))

    horizon = settings.get("horizon", {})
    if not isinstance(horizon, dict):
        bad("horizon", "must be a table")
        return (), 4
    listed = horizon.get("periods")
    given = [f"horizon.{k}" for k in horizon] + [  # the keys as written, for missing()
        f"horizon.periods[{i}].{k}" for i, e in enumerate(
            listed if isinstance(listed, list) else [], 1) if isinstance(e, dict) for k in e]
    # Taken before missing() takes any back: each missing key may name the same one.
    given = list(dict.fromkeys(given + [p.unknown_key for p in problems if p.unknown_key]))
    periods_per_year = horizon.get("periods_per_year", 4)
    if not _whole(periods_per_year) or periods_per_year < 1:
        bad("horizon.periods_per_year",
            f"{_not_valid(periods_per_year)}; expected a whole number >= 1")
        periods_per_year = 4
    periods_per_year = int(periods_per_year)
    default_hours = horizon.get("hours_per_fte")
    if default_hours is not None and (said := _hours_problem(default_hours)):
        bad("horizon.hours_per_fte", said)
        default_hours = None
    periods: list[Period] = []
    if listed is not None:
        if not isinstance(listed, list) or not listed:
            bad("horizon.periods", "must be a non-empty list of {name, year[, hours_per_fte]}")
            return (), periods_per_year
        for generator_key in ("start", "count"):
            if generator_key in horizon:
                problems.append(Problem(
                    "settings.toml", None, f"horizon.{generator_key}",
                    "ignored, as horizon.periods lists the periods; expected either "
                    "[[horizon.periods]] or start and count, not both", is_warning=True))
        for i, entry in enumerate(listed, 1):
            key = f"horizon.periods[{i}]"
            if not isinstance(entry, dict):
                bad(key, f"{_invalid(entry)}; expected a table with name, year and optional "
                    "hours_per_fte")
                continue
            name, budget_year = _period_text(entry, "name"), _period_text(entry, "year")
            for part, value, expected in (
                    ("name", name, 'the period\'s name, as text such as "FY27-P1"'),
                    ("year", budget_year, "the budget year its spending falls in, as text such as "
                                   '"FY27"')):
                if part not in entry:
                    missing(f"{key}.{part}", f"is missing; expected {expected}")
                elif isinstance(entry[part], CellDate):  # a workbook's periods sheet
                    day = entry[part]
                    bad(f"{key}.{part}", day.not_period_name if part == "name"
                        else day.not_budget_year)
                elif value is None:
                    found = ("is empty" if isinstance(entry[part], str)
                             else _invalid(entry[part]))
                    bad(f"{key}.{part}", f"{found}; expected {expected}")
            hours = entry.get("hours_per_fte", default_hours)
            if "hours_per_fte" in entry and (said := _hours_problem(hours)):
                bad(key + ".hours_per_fte", said)
                hours = None
            elif hours is None and "hours_per_fte" not in horizon:  # a bad default: said once
                missing(key + ".hours_per_fte", "is missing and horizon.hours_per_fte gives "
                        "no default; expected a number > 0 here or in horizon.hours_per_fte")
            if name is None or budget_year is None or hours is None:
                continue
            periods.append(Period(name, budget_year, float(hours)))
    else:
        start, count = horizon.get("start"), horizon.get("count")
        match = re.fullmatch(r"(\d{4})-Q([1-4])", str(start)) if start is not None else None
        if start is None and count is None:
            missing("horizon", "give either periods = [...] or start = \"YYYY-Qn\" with count = N")
            return (), periods_per_year
        # Each key said on its own, so a workbook can point at its row (a date typed in the
        # start cell had read as "give either periods or start", with no row).
        if start is None:
            missing("horizon.start", "is missing; expected text such as \"2027-Q1\"")
        elif isinstance(start, CellDate):
            bad("horizon.start", start.instead_of("a quarter", "the quarter", start.quarter))
        elif match is None:
            bad("horizon.start", f"{_shown(start)} is not a quarter; expected text such as "
                "\"2027-Q1\"")
        if count is None:
            missing("horizon.count", f"is missing; expected a whole number from 1 to "
                    f"{MAX_PERIODS}")
        elif not _whole(count) or not 1 <= count <= MAX_PERIODS:
            bad("horizon.count", f"{_not_valid(count)}; expected a whole number from 1 to "
                f"{MAX_PERIODS}")
        if match is None or not _whole(count) or not 1 <= count <= MAX_PERIODS:
            return (), periods_per_year
        if default_hours is None:
            if "hours_per_fte" not in horizon:  # a bad value is said above, once
                missing("horizon.hours_per_fte", "is missing; expected a number > 0 "
                        "(required when periods are generated from start)")
            return (), periods_per_year
        year, quarter = int(match.group(1)), int(match.group(2))
        for _ in range(int(count)):
            periods.append(Period(f"{year}-Q{quarter}", str(year), float(default_hours)))
            quarter += 1
            if quarter > 4:
                year, quarter = year + 1, 1
    names = [p.name for p in periods]
    # In the file's order: a set's order of strings changes with each run's hash seed.
    for name in dict.fromkeys(n for n in names if names.count(n) > 1):
        bad("horizon.periods", f"period '{name}' is listed twice")
    return tuple(periods), periods_per_year


def _hours_problem(hours: Any) -> str:
    """What is wrong with an hours_per_fte value, or "": a number > 0, and (said only of a
    number beyond them) from 1 to 10,000 hours (an hours_per_fte of 1e-300 had turned a few
    hours of demand into more FTE than a solver takes)."""
    if not is_finite_number(hours) or hours <= 0:
        return f"{_not_valid(hours)}; expected a number > 0"
    if not HOURS_PER_FTE_MIN <= hours <= HOURS_PER_FTE_MAX:
        return (f"{_not_valid(hours)}; expected "
                f"{range_words(HOURS_PER_FTE_MIN, HOURS_PER_FTE_MAX)}")
    return ""


def read_sections(settings: Mapping[str, Any], problems: list[Problem]) -> tuple[
        Policy, MoveCostDefaults, Objective, SolverSettings]:
    """The policy, move_costs, objective and solver sections; a default for each key that is
    missing or not valid (the latter said in ``problems``)."""
    def section(name: str) -> dict[str, Any]:
        value = settings.get(name, {})
        if not isinstance(value, dict):
            problems.append(Problem("settings.toml", None, name, "must be a table"))
            return {}
        return value

    def num(sec: str, table: dict[str, Any], key: str, default: Any, low: float,
            high: float | None = None, integer: bool = False, allow_none: bool = False,
            ceiling: float = MAX_NUMBER) -> Any:
        # ``ceiling`` bounds a key with no ``high``, and is named only for a value above it.
        if key not in table:
            return default
        value = table[key]
        ok = (_whole(value) if integer else is_finite_number(value)) and value >= low
        ok = ok and (high is None or value <= high)
        if ok and high is None and value > ceiling:
            high, ok = ceiling, False
        if not ok:
            what = range_words(low, high, integer=integer)
            problems.append(Problem("settings.toml", None, f"{sec}.{key}",
                                    f"{_not_valid(value)}; expected {what}"))
            return default
        return int(value) if integer else value

    policy_t = section("policy")
    policy = Policy(
        max_away_share=float(num("policy", policy_t, "max_away_share", 1.0, 0.0, 1.0)),
        max_consecutive_detail_periods=num(
            "policy", policy_t, "max_consecutive_detail_periods", None, 0, integer=True),
    )
    costs_t = section("move_costs")
    defaults = MoveCostDefaults(
        detail_cost_per_period=float(num("move_costs", costs_t, "detail_cost_per_period", 0.0, 0)),
        relocation_cost=float(num("move_costs", costs_t, "relocation_cost", 0.0, 0)),
        same_location_detail_cost_per_period=float(
            num("move_costs", costs_t, "same_location_detail_cost_per_period", 0.0, 0)),
        same_location_relocation_cost=float(
            num("move_costs", costs_t, "same_location_relocation_cost", 0.0, 0)),
    )
    obj_t = section("objective")
    mode = obj_t.get("mode", "shortfall-first")
    if mode not in ("shortfall-first", "weighted"):
        problems.append(Problem("settings.toml", None, "objective.mode",
                                f"{_invalid(mode)}; expected shortfall-first or weighted"))
        mode = "shortfall-first"
    objective = Objective(
        mode=mode,
        # Past 1e12 the shortfall term swamps cost beyond what solvers' tolerances resolve
        # (CBC called a feasible model infeasible at 1e100); mode shortfall-first is that.
        shortfall_cost=float(num("objective", obj_t, "shortfall_cost", 100_000.0, 0,
                                 MAX_SHORTFALL_COST)),
        shortfall_tolerance=float(num("objective", obj_t, "shortfall_tolerance", 1e-6, 0, 0.1)),
    )
    solver_t = section("solver")
    name = solver_t.get("name", "highs")
    if name not in ("highs", "cbc"):
        problems.append(Problem("settings.toml", None, "solver.name",
                                f"{_invalid(name)}; expected highs or cbc"))
        name = "highs"
    solver = SolverSettings(
        name=name,
        time_limit_seconds=float(num("solver", solver_t, "time_limit_seconds", 300.0, 0.1,
                                     ceiling=MAX_TIME_LIMIT_SECONDS)),
        relative_gap=float(num("solver", solver_t, "relative_gap", 1e-4, 0.0, 1.0)),
        threads=int(num("solver", solver_t, "threads", 1, 1, integer=True)),
        seed=int(num("solver", solver_t, "seed", 0, 0, integer=True)),
    )
    return policy, defaults, objective, solver


# A currency label sits beside every amount and in column headers, so it is kept short.
CURRENCY_MAX_CHARACTERS = 5


def read_money(settings: Mapping[str, Any], problems: list[Problem]) -> Money:
    """The money section: the currency label amounts are shown with."""
    money = settings.get("money", {})
    if not isinstance(money, dict):
        problems.append(Problem("settings.toml", None, "money", "must be a table"))
        return Money()
    if "currency" not in money:
        return Money()
    value = money["currency"]
    text = value.strip() if isinstance(value, str) else ""
    # Printable and without spaces: the label is written into console columns and page
    # headers, where a tab or line break would break the layout.
    if not (1 <= len(text) <= CURRENCY_MAX_CHARACTERS and text.isprintable()
            and not any(c.isspace() for c in text)):
        problems.append(Problem(
            "settings.toml", None, "money.currency",
            f"{_invalid(value)}; expected text of 1 to {CURRENCY_MAX_CHARACTERS} "
            "characters without spaces, such as \"EUR\", \"USD\" or \"\u20ac\""))
        return Money()
    return Money(text)


# A title heads the page and the workbook; past this it would wrap a heading over many lines.
TITLE_MAX_CHARACTERS = 120


def read_title(settings: Mapping[str, Any], problems: list[Problem]) -> str | None:
    """The report section's title, the words the reports are headed with; None where none is
    given (the folder's name heads them)."""
    report = settings.get("report", {})
    if not isinstance(report, dict):
        problems.append(Problem("settings.toml", None, "report", "must be a table"))
        return None
    if "title" not in report:
        return None
    value = report["title"]
    # A whole number is text to a reader (a workbook cell of 2027 reads as one), as a year is,
    # and a cell's date the date it shows.
    text = value.shown if isinstance(value, CellDate) else _period_text(report, "title") or ""
    # One line of printable text (no tab or line break): it heads a page and a workbook cell.
    if not (1 <= len(text) <= TITLE_MAX_CHARACTERS and text.isprintable()):
        problems.append(Problem(
            "settings.toml", None, "report.title",
            f"{_invalid(value)}; expected one line of text of 1 to "
            f"{TITLE_MAX_CHARACTERS} characters, such as \"Permit review staffing\""))
        return None
    return text
