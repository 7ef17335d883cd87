"""Scenario files: read and check a surge scenario against an instance, and apply it
(:func:`demand_effects` says what each demand table did, for the words of a report).

A scenario is a variant of an instance (``Instance.with_changes``): demand multiplied or
raised for a selection of offices, skills and periods, and optionally budgets changed.  The
file format is described in ``docs/instance-format.md`` (section *Scenario files*).
"""

from __future__ import annotations

import tomllib
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from rebalance.instance import MAX_PRIORITY, Budget, Demand, Instance
from rebalance.numbers import plain_number
from rebalance.problems import Problem, did_you_mean, is_finite_number, range_words
from rebalance.tables import NotUtf8, read_utf8

__all__ = [
    "BudgetChange",
    "DemandChange",
    "DemandEffect",
    "DemandKey",
    "Scenario",
    "ScenarioError",
    "apply_scenario",
    "demand_effects",
    "folder_name",
    "read_scenario",
    "read_scenarios",
]

# Bounds on a scenario's numbers, far past any surge or budget change a plan is made for:
# beyond them a value is a typo, and at the extreme no number a solve can use (multiplier =
# 1e308 overflowed the demand to inf).  A priority is bounded as in demand.csv (0 to
# MAX_PRIORITY): it labels rows demand.csv could hold.
MAX_MULTIPLIER = 1000.0
MAX_ADD_FTE = 100_000.0  # FTE added to one office, skill and period
MAX_BUDGET_ADD = 1e12  # money; the bound of objective.shortfall_cost too
# Longest folder name: NAME_MAX, 255 bytes, on Linux and macOS file systems (common practice).
MAX_FOLDER_BYTES = 255
# A demand row: office, skill and period index.
DemandKey = tuple[str, str, int]


@dataclass(frozen=True)
class DemandChange:
    """Demand of the selected rows becomes ``fte x multiplier + add_fte``.

    ``None`` selects everything.  ``add_fte`` creates missing demand rows only when offices
    and skills are both named (a surge in a skill not asked for before).
    """

    offices: tuple[str, ...] | None
    skills: tuple[str, ...] | None
    periods: tuple[int, ...] | None
    multiplier: float = 1.0
    add_fte: float = 0.0
    priority: float | None = None  # priority of rows this change creates (default 1)

    @property
    def added_priority(self) -> float:
        """The priority of rows this change creates: 1 unless given (0 is a priority
        demand.csv allows, docs/instance-format.md)."""
        return 1.0 if self.priority is None else self.priority


@dataclass(frozen=True)
class BudgetChange:
    """Caps of the selected years change by ``hiring_add`` and ``moves_add`` (money)."""

    years: tuple[str, ...] | None
    hiring_add: float = 0.0
    moves_add: float = 0.0


@dataclass(frozen=True)
class Scenario:
    name: str
    description: str
    demand: tuple[DemandChange, ...] = ()
    budget: tuple[BudgetChange, ...] = ()


class ScenarioError(ValueError):
    """A scenario file with problems; ``problems`` lists all of them."""

    def __init__(self, problems: list[Problem]) -> None:
        super().__init__("; ".join(str(p) for p in problems))
        self.problems = problems


# The keys of a [[demand]] and a [[budget]] table, in the order messages list them.
DEMAND_KEYS = ("offices", "skills", "periods", "multiplier", "add_fte", "priority")
BUDGET_KEYS = ("years", "hiring_add", "moves_add")


def _names(raw: Any, known: Sequence[str], what: str, where: str,
           problems: list[Problem], file: str) -> tuple[str, ...] | None:
    if raw is None:
        return None
    if isinstance(raw, str | int | float) and not isinstance(raw, bool):
        raw = [raw]
    if not isinstance(raw, list) or not all(isinstance(v, str) for v in raw) or not raw:
        # A name that looks like a number, unquoted (years = [2027]), is a TOML number: say
        # so, as "expected a list of names" alone left the number looking right (a sweep).
        numbers = [f"{v:g}" if isinstance(v, float) else str(v) for v in
                   (raw if isinstance(raw, list) else []) if isinstance(v, int | float)
                   and not isinstance(v, bool)]
        hint = "" if not numbers else (
            f": {', '.join(numbers)} {'is a number' if len(numbers) == 1 else 'are numbers'}; "
            f'names are text in quotes ("{numbers[0]}")')
        problems.append(Problem(file, None, where, f"expected a list of {what} names{hint}"))
        return None
    unknown = [v for v in raw if v not in known]
    if unknown:
        problems.append(Problem(file, None, where, f"unknown {what} {', '.join(unknown)}; "
                                f"expected one of {', '.join(known)}"
                                + (did_you_mean(unknown[0], known) if len(unknown) == 1 else "")))
    return tuple(raw)


def _number(raw: Any, default: float, where: str, problems: list[Problem], file: str,
            scenario: str, minimum: float, maximum: float | None) -> float:
    """``raw`` as a float, or ``default`` with a problem: nan, inf and a 400-digit integer
    are no numbers to plan with (nan had set the demand to 0 and inf overflowed)."""
    if raw is None:
        return default
    what = f"expected {range_words(minimum, maximum)} (scenario '{scenario}')"
    if isinstance(raw, bool) or not isinstance(raw, int | float):
        problems.append(Problem(file, None, where, f"'{raw}' is not a number; {what}"))
        return default
    shown = plain_number(raw)
    if not is_finite_number(raw):
        problems.append(Problem(file, None, where, f"'{shown}' is not a finite number; {what}"))
        return default
    if raw < minimum or (maximum is not None and raw > maximum):
        problems.append(Problem(file, None, where, f"'{shown}' is out of range; {what}"))
        return default
    return float(raw)


def folder_name(name: str) -> str:
    """The folder of scenario ``name`` under ``OUT/scenarios/`` of ``rebalance compare``."""
    return "".join(c if c.isalnum() or c in "-_." else "_" for c in name) or "scenario"


def _unusable_folder(name: str) -> str | None:
    """Why ``name`` cannot name a scenario folder, or None."""
    folder = folder_name(name)
    if folder in (".", ".."):
        return f"'{name}' is not usable as a folder name; expected a name other than . or .."
    if len(folder.encode("utf-8")) > MAX_FOLDER_BYTES:
        return (f"'{name[:40]}...' is too long for a folder name; expected at most "
                f"{MAX_FOLDER_BYTES} bytes")
    return None


def read_scenario(path: str | Path, instance: Instance) -> Scenario:
    """Read and check a scenario TOML file against ``instance``; all problems at once."""
    scenario, _, problems = _read(path, instance)
    if scenario is None:
        raise ScenarioError(problems)
    return scenario


def _read(path: str | Path, instance: Instance) -> tuple[Scenario | None, str | None,
                                                         list[Problem]]:
    """The scenario (None where the file has problems), its name where the file gives a
    usable one (None otherwise), and the file's problems.  The name comes back with the
    problems so that :func:`read_scenarios` checks it against the other files' names in the
    same run (a reserved or clashing name had been reported only once all else was fixed)."""
    file = str(path)
    problems: list[Problem] = []
    try:
        # As settings.toml is read: a file saved as UTF-16 says which line and byte, not
        # Python's codec words (a sweep).
        raw = tomllib.loads(read_utf8(Path(path)))
    except FileNotFoundError:
        return None, None, [Problem(file, None, "", "file not found")]
    except NotUtf8 as exc:
        return None, None, [Problem(file, exc.row, "", str(exc))]
    except tomllib.TOMLDecodeError as exc:
        return None, None, [Problem(file, None, "", f"not valid TOML: {exc}")]
    known_keys = {"name", "description", "demand", "budget"}
    for key in raw:
        if key not in known_keys:
            problems.append(Problem(file, None, key, f"unknown key; expected one of "
                                    f"{', '.join(sorted(known_keys))}"
                                    + did_you_mean(key, known_keys)))
    name = raw.get("name")
    usable = False
    if not isinstance(name, str) or not name.strip():
        problems.append(Problem(file, None, "name", "missing; expected a scenario name"))
        name = Path(path).stem
    else:
        # Found here, before any solve: the plans are written to a folder named after it.
        unusable = _unusable_folder(name.strip())
        if unusable is not None:
            problems.append(Problem(file, None, "name", unusable))
        usable = unusable is None
    name = name.strip()
    description = raw.get("description", "")
    if not isinstance(description, str):
        problems.append(Problem(file, None, "description", "expected text"))
        description = ""
    offices = [o.name for o in instance.offices]
    skills = [s.name for s in instance.skills]
    periods = list(instance.period_names)
    demand: list[DemandChange] = []
    for at, entry, before in _entries(raw, "demand", DEMAND_KEYS, problems, file):
        chosen = _names(entry.get("periods"), periods, "period", f"{at}.periods", problems,
                        file)
        change = DemandChange(
            offices=_names(entry.get("offices"), offices, "office", f"{at}.offices", problems,
                           file),
            skills=_names(entry.get("skills"), skills, "skill", f"{at}.skills", problems, file),
            periods=None if chosen is None else tuple(
                periods.index(p) for p in chosen if p in periods),
            multiplier=_number(entry.get("multiplier"), 1.0, f"{at}.multiplier", problems,
                               file, name, 0.0, MAX_MULTIPLIER),
            add_fte=_number(entry.get("add_fte"), 0.0, f"{at}.add_fte", problems, file, name,
                            -MAX_ADD_FTE, MAX_ADD_FTE),
            priority=(None if entry.get("priority") is None else _number(
                entry.get("priority"), 1.0, f"{at}.priority", problems, file, name, 0.0,
                MAX_PRIORITY)),
        )
        # A table with a bad value is not said to change nothing too (nan read as the default)
        problem = _inert(change, instance) if len(problems) == before else None
        if problem is not None:
            problems.append(Problem(file, None, at, problem))
        demand.append(change)
    budget: list[BudgetChange] = []
    years = list(instance.years)
    for at, entry, before in _entries(raw, "budget", BUDGET_KEYS, problems, file):
        bchange = BudgetChange(
            years=_names(entry.get("years"), years, "budget year", f"{at}.years", problems,
                         file),
            hiring_add=_number(entry.get("hiring_add"), 0.0, f"{at}.hiring_add", problems,
                               file, name, -MAX_BUDGET_ADD, MAX_BUDGET_ADD),
            moves_add=_number(entry.get("moves_add"), 0.0, f"{at}.moves_add", problems, file,
                              name, -MAX_BUDGET_ADD, MAX_BUDGET_ADD),
        )
        if len(problems) == before:
            problems += [Problem(file, None, f"{at}{key}", message)
                         for key, message in _inert_budget(bchange, instance)]
        budget.append(bchange)
    if not raw.get("demand") and not raw.get("budget"):  # none given; wrong ones said above
        problems.append(Problem(file, None, "demand", "the scenario changes nothing; expected "
                                "at least one [[demand]] or [[budget]] table"))
    scenario = Scenario(name, description.strip(), tuple(demand), tuple(budget))
    return (None if problems else scenario), (name if usable else None), problems


def _entries(raw: dict[str, Any], key: str, keys: Sequence[str], problems: list[Problem],
             file: str) -> Iterator[tuple[str, dict[str, Any], int]]:
    """Each ``[[key]]`` table of a scenario file that is a table, with where it is
    (``demand[2]``) and the count of ``problems`` before its values are read; its unknown
    keys are said first."""
    for i, entry in enumerate(_tables(raw, key, problems, file), 1):
        at = f"{key}[{i}]"
        if not isinstance(entry, dict):
            problems.append(Problem(file, None, at, f"expected a [[{key}]] table"))
            continue
        before = len(problems)
        for name in entry:
            if name not in keys:
                problems.append(Problem(file, None, f"{at}.{name}", "unknown key; expected "
                                        + ", ".join(keys) + did_you_mean(name, keys)))
        yield at, entry, before


def _tables(raw: dict[str, Any], key: str, problems: list[Problem], file: str) -> list[Any]:
    """The ``[[key]]`` entries; ``demand = 3`` had been an internal error."""
    entries = raw.get(key, [])
    if not isinstance(entries, list):
        problems.append(Problem(file, None, key, f"expected [[{key}]] tables"))
        return []
    return entries


def read_scenarios(paths: Sequence[str | Path], instance: Instance) -> list[Scenario]:
    """Read several scenario files (:func:`read_scenario`) for one comparison, and check
    that their names, and the folders named after them, differ from each other and from
    ``base``; every problem of every file at once."""
    scenarios: list[Scenario] = []
    problems: list[Problem] = []
    names: dict[str, str] = {}  # name -> its file
    folders: dict[str, tuple[str, str]] = {}  # case-folded folder -> name, file
    for path in paths:
        scenario, name, found = _read(path, instance)
        problems += found
        if scenario is not None:
            scenarios.append(scenario)
        file = str(path)
        if name is None:  # no usable name: said in ``found``
            continue
        if name == "base":
            problems.append(Problem(file, None, "name", "scenario 'base' has the base plan's "
                                    "name; expected another name"))
            continue
        if name in names:
            problems.append(Problem(file, None, "name", f"scenario '{name}' is also the name "
                                    f"of the scenario in {names[name]}; expected names that "
                                    "differ from each other"))
            continue
        names[name] = file
        # Case folded: on the usual macOS and Windows file systems Storm and storm are one
        # folder (common practice).
        folder = folder_name(name).casefold()
        if folder in folders:
            other, other_file = folders[folder]
            problems.append(Problem(file, None, "name", f"scenarios '{other}' (in {other_file}) "
                                    f"and '{name}' would both be written to folder scenarios/"
                                    f"{folder_name(name)}: their folder names clash; expected "
                                    "names whose folder names differ (case aside; characters "
                                    "other than letters, digits, '-', '_' and '.' become '_')"))
            continue
        folders[folder] = (name, file)
    if problems:
        raise ScenarioError(problems)
    return scenarios


def _inert(change: DemandChange, instance: Instance) -> str | None:
    """Why a [[demand]] table would leave the demand as it is, or None.  A scenario that
    silently changed nothing had been solved and compared as if it were a surge."""
    if change.multiplier == 1.0 and change.add_fte == 0.0:
        # priority only labels the rows add_fte creates
        return "changes nothing; expected a multiplier other than 1, or add_fte"
    adds_rows = change.add_fte > 0 and change.offices is not None and change.skills is not None
    if not adds_rows and not any(_selected(change, d.office, d.skill, d.period)
                                 for d in instance.demand):
        return ("selects no demand row of the instance; name offices, skills and periods "
                "that have demand, or give offices, skills and add_fte to add rows")
    return None


def _inert_budget(change: BudgetChange, instance: Instance) -> list[tuple[str, str]]:
    """Why a [[budget]] table would leave every cap as it is, as (key, message) pairs; empty
    where it changes a cap (as :func:`_inert`)."""
    if change.hiring_add == 0.0 and change.moves_add == 0.0:
        return [("", "changes nothing; expected hiring_add or moves_add other than 0")]
    caps = {b.year: b for b in instance.budgets}
    chosen = change.years if change.years is not None else instance.years
    amounts = {"hiring": change.hiring_add, "moves": change.moves_add}
    capped = {kind: [y for y in instance.years if y in caps and getattr(caps[y], kind) is not None]
              for kind in amounts}
    if any(amount and y in capped[kind] for kind, amount in amounts.items() for y in chosen):
        return []
    # Each amount given is named with its own cap: the message had said "moves no cap" of a
    # table that only added to a hiring cap.
    out = []
    for kind, amount in amounts.items():
        if not amount:
            continue
        verb = "adding to" if amount > 0 else "taking from"
        if change.years is None:
            lacking = f"no year has a {kind} cap, so {verb} one"
        else:
            shown = list(change.years)
            listed = shown[0] if len(shown) == 1 else f"{', '.join(shown[:-1])} and {shown[-1]}"
            lacking = (f"{listed} has no {kind} cap, so {verb} it" if len(shown) == 1
                       else f"{listed} have no {kind} cap, so {verb} them")
        others = capped[kind]
        expected = (f"expected years with a {kind} cap ({', '.join(others)})" if others
                    else f"expected years with a {kind} cap, and the instance has none")
        out.append((f".{kind}_add", f"{lacking} changes nothing (a year without a cap stays "
                    f"without one); {expected}"))
    return out


def _selected(change: DemandChange, office: str, skill: str, period: int) -> bool:
    return ((change.offices is None or office in change.offices)
            and (change.skills is None or skill in change.skills)
            and (change.periods is None or period in change.periods))


@dataclass(frozen=True)
class DemandEffect:
    """What one ``[[demand]]`` table did to demand as it found it (the tables before it
    applied), by (office, skill, period index): ``changed``, the rows there it selected;
    ``floored``, those of them taken to 0 rather than below; ``added``, the rows it created,
    at ``add_fte`` each with :attr:`DemandChange.added_priority`."""

    changed: tuple[DemandKey, ...] = ()
    floored: tuple[DemandKey, ...] = ()
    added: tuple[DemandKey, ...] = ()


def _apply_demand(instance: Instance, changes: Sequence[DemandChange]
                  ) -> tuple[dict[DemandKey, Demand], tuple[DemandEffect, ...]]:
    """``instance``'s demand rows with ``changes`` applied in turn, and what each did."""
    rows = {(d.office, d.skill, d.period): d for d in instance.demand}
    effects = []
    for change in changes:
        changed, floored, added = [], [], []
        for key, d in sorted(rows.items()):
            if _selected(change, *key):
                fte = d.fte * change.multiplier + change.add_fte
                changed.append(key)
                if fte < 0:
                    floored.append(key)
                rows[key] = Demand(d.office, d.skill, d.period, max(0.0, fte), d.priority, None)
        if change.add_fte > 0 and change.offices is not None and change.skills is not None:
            chosen = change.periods if change.periods is not None else range(
                len(instance.periods))
            for o in change.offices:
                for k in change.skills:
                    for t in chosen:
                        if (o, k, t) not in rows:
                            added.append((o, k, t))
                            rows[(o, k, t)] = Demand(o, k, t, change.add_fte,
                                                     change.added_priority, None)
        effects.append(DemandEffect(tuple(changed), tuple(floored), tuple(added)))
    return rows, tuple(effects)


def demand_effects(instance: Instance, scenario: Scenario) -> tuple[DemandEffect, ...]:
    """What each of ``scenario``'s ``[[demand]]`` tables does to ``instance``'s demand, as
    :func:`apply_scenario` applies them (in turn, never below zero)."""
    return _apply_demand(instance, scenario.demand)[1]


def apply_scenario(instance: Instance, scenario: Scenario) -> Instance:
    """The instance with the scenario's changes; demand and caps never go below zero."""
    rows = _apply_demand(instance, scenario.demand)[0]
    budgets = {b.year: b for b in instance.budgets}
    for bchange in scenario.budget:
        for year in bchange.years if bchange.years is not None else instance.years:
            old = budgets.get(year, Budget(year, None, None))
            budgets[year] = Budget(
                year,
                None if old.hiring is None else max(0.0, old.hiring + bchange.hiring_add),
                None if old.moves is None else max(0.0, old.moves + bchange.moves_add),
            )
    demand = tuple(sorted(rows.values(), key=lambda d: (d.period, d.office, d.skill)))
    return instance.with_changes(
        name=f"{instance.name}+{scenario.name}", demand=demand,
        budgets=tuple(budgets[y] for y in instance.years if y in budgets))
