"""Turn a solution vector into a plan of named people and counts; read and write plan tables.

Nothing here refers to solver objects.  The work split is cleaned before it is reported: integer
decisions are rounded, work is kept only where the person really is that period, and a
person's work is scaled down if solver tolerance let it exceed their available FTE.  Coverage
and shortfall are then recomputed exactly from those tables, not taken from the solver.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from rebalance.instance import Instance
from rebalance.model import Model
from rebalance.problems import CLOSE_MATCHES_SHOWN, Problem, did_you_mean, range_words
from rebalance.readers import InstanceError
from rebalance.tables import (
    RawTable,
    TableRows,
    collapse_repeats,
    known_case,
    plain_csv_columns,
    read_csv_table,
    table_problems,
)

__all__ = [
    "BUDGET_LINES",
    "PLAN_TABLES",
    "BudgetLine",
    "NamingError",
    "Plan",
    "PlanError",
    "budget_lines",
    "extract_plan",
    "read_plan",
    "schedule_details",
    "write_plan",
]

PLAN_TABLES: dict[str, tuple[str, ...]] = {
    "details": ("person", "period", "from_office", "to_office", "cost"),
    "reassignments": ("person", "period", "from_office", "to_office", "cost"),
    "hires": ("office", "skill", "start_period", "count", "funding", "onboarding_cost",
              "salary_cost"),
    "work": ("person", "period", "office", "skill", "fte", "output_fte"),
    "coverage": ("office", "skill", "period", "demand_fte", "staff_output_fte",
                 "hire_output_fte", "covered_fte", "shortfall_fte", "priority",
                 "weighted_shortfall"),
    "costs": ("year", "kind", "cost"),
}
COST_KINDS = ("detail", "relocation", "onboarding", "new_position_salary")
# Each cap of a budget year (budget.csv's columns) and the kinds of cost it limits.
BUDGET_LINES = (("hiring", ("onboarding", "new_position_salary")),
                ("moves", ("detail", "relocation")))
# Columns of the plan tables that hold names (read back as text, never as numbers).
NAME_COLUMNS = frozenset({"person", "period", "start_period", "year", "office", "from_office",
                          "to_office", "skill", "funding", "kind"})


def records(frame: pd.DataFrame) -> Iterator[Any]:
    """Rows as named tuples (typed loosely: the columns are checked where they are read)."""
    return iter(frame.itertuples(index=False))


@dataclass(frozen=True)
class Plan:
    """A staffing plan as tables (see ``docs/instance-format.md``, section Outputs)."""

    details: pd.DataFrame
    reassignments: pd.DataFrame
    hires: pd.DataFrame
    work: pd.DataFrame
    coverage: pd.DataFrame
    costs: pd.DataFrame

    def table(self, name: str) -> pd.DataFrame:
        frame: pd.DataFrame = getattr(self, name)
        return frame

    @property
    def weighted_shortfall(self) -> float:
        return float(self.coverage["weighted_shortfall"].sum())

    @property
    def shortfall_fte(self) -> float:
        return float(self.coverage["shortfall_fte"].sum())

    @property
    def total_cost(self) -> float:
        return float(self.costs["cost"].sum())

    def cost_by_kind(self) -> dict[str, float]:
        sums = self.costs.groupby("kind")["cost"].sum()
        return {kind: float(sums.get(kind, 0.0)) for kind in COST_KINDS}

    def hires_count(self) -> int:
        return int(self.hires["count"].sum())

    def spent_by_cap(self) -> dict[tuple[str, str], float]:
        """``costs.csv`` summed by (year, cap name): what the plan spends under each cap of
        each budget year (:data:`BUDGET_LINES`); a pair costs.csv has no row for is left out
        (it lists every year and kind, at 0 where nothing is spent)."""
        cap_of = {kind: cap for cap, kinds in BUDGET_LINES for kind in kinds}
        out: dict[tuple[str, str], float] = defaultdict(float)
        for year, kind, cost in zip(self.costs["year"].astype(str),
                                    self.costs["kind"].astype(str),
                                    self.costs["cost"].astype(float), strict=True):
            if kind in cap_of:
                out[(year, cap_of[kind])] += cost
        return dict(out)


@dataclass(frozen=True)
class BudgetLine:
    """What a plan spends under one cap of one budget year, against the cap (None: none)."""

    year: str
    cap_name: str  # "hiring" or "moves" (BUDGET_LINES)
    spent: float
    cap: float | None


def budget_lines(instance: Instance, plan: Plan) -> tuple[BudgetLine, ...]:
    """Every budget year's caps with what ``plan`` spends under them, year by year and in the
    order of :data:`BUDGET_LINES` within a year (spending from ``costs.csv``: a plan whose
    counts were edited by hand shows the sum its own file gives)."""
    spent = plan.spent_by_cap()
    return tuple(BudgetLine(year, cap_name, spent.get((year, cap_name), 0.0),
                            instance.budget_cap(year, cap_name))
                 for year in instance.years for cap_name, _ in BUDGET_LINES)


def _frame(name: str, rows: Sequence[tuple[Any, ...]]) -> pd.DataFrame:
    return pd.DataFrame(rows, columns=list(PLAN_TABLES[name]))


class NamingError(RuntimeError):
    """A group's detail counts cannot be split into person-level schedules (a model bug)."""


def _edf_feasible(runs: list[int], counts: list[int], m: int) -> bool:
    """Can ``counts[t]`` people be on detail in each later period, no one more than m in a row?

    Earliest-deadline-first: detail the people with the shortest current run, so those
    closest to the limit rest.  Among unit-length jobs with these deadlines EDF is optimal.
    """
    runs = list(runs)
    for n in counts:
        order = sorted(range(len(runs)), key=lambda i: (runs[i], i))
        chosen = [i for i in order if runs[i] < m][:n]
        if len(chosen) < n:
            return False
        picked = set(chosen)
        runs = [r + 1 if i in picked else 0 for i, r in enumerate(runs)]
    return True


def schedule_details(size: int, counts: list[int], m: int | None) -> list[list[int]]:
    """Which members of a group of ``size`` are on detail in each period.

    Prefers to keep people who are already on detail there (fewer people moved, longer
    stretches), but falls back to earliest-deadline-first whenever continuing would make a
    later period impossible under the limit of ``m`` consecutive detail periods.
    """
    runs = [0] * size
    out: list[list[int]] = []
    for t, n in enumerate(counts):
        eligible = [i for i in range(size) if m is None or runs[i] < m]
        if len(eligible) < n:
            raise NamingError(f"{n} of {size} needed on detail but only {len(eligible)} may go")
        keep_going = sorted(eligible, key=lambda i: (runs[i] == 0, -runs[i], i))[:n]
        chosen = keep_going
        if m is not None:
            after = [r + 1 if i in set(keep_going) else 0 for i, r in enumerate(runs)]
            if not _edf_feasible(after, counts[t + 1:], m):
                chosen = sorted(eligible, key=lambda i: (runs[i], i))[:n]
        picked = set(chosen)
        runs = [r + 1 if i in picked else 0 for i, r in enumerate(runs)]
        out.append(sorted(chosen))
    return out


# Below this FTE a member, a unit's work on one skill at one office is not split among its
# members (see extract_plan): about half an hour a quarter at 450 hours an FTE.
SHARE_FLOOR = 1e-3


def extract_plan(instance: Instance, model: Model, x: np.ndarray) -> Plan:
    """Decode ``x`` into named tables, cleaning solver tolerance as described above."""
    offices = [o.name for o in instance.offices]
    skills = [s.name for s in instance.skills]
    periods = instance.period_names
    T = len(periods)
    staff = instance.staff
    units = model.units
    m = instance.policy.max_consecutive_detail_periods

    def chosen(block: str) -> tuple[np.ndarray, dict[str, np.ndarray]]:
        blk = model.blocks[block]
        values = np.rint(x[blk.start:blk.stop]).astype(np.int64)
        keep = values > 0
        return values[keep], {k: v[keep] for k, v in blk.keys.items()}

    # Reassignments first (single-person units only): they set the home in force.  The home
    # columns are 1 from the reassignment on; the first such period is when it takes effect.
    _, rk = chosen("home")
    moved_to: dict[int, tuple[int, int]] = {}
    for u, o, t in zip(rk["unit"], rk["office"], rk["period"], strict=True):
        p = units[u][0]
        if p not in moved_to or t < moved_to[p][1]:
            moved_to[p] = (int(o), int(t))
    reassignment_rows = []
    # In the order of the people's ids, as work.csv: not staff.csv's rows.
    for p, (o, t) in sorted(moved_to.items(), key=lambda item: staff[item[0]].person):
        person = staff[p]
        reassignment_rows.append((person.person, periods[t], person.home_office, offices[o],
                                  instance.relocation_cost(person.home_office, offices[o])))

    def home_in_force(p: int, t: int) -> str:
        move = moved_to.get(p)
        if move is not None and move[1] <= t:
            return offices[move[0]]
        return staff[p].home_office

    # Details: counts per unit, period and (home, destination); then name who goes.
    counts, dk = chosen("detail")
    by_unit: dict[int, list[dict[tuple[int, int], int]]] = defaultdict(
        lambda: [defaultdict(int) for _ in range(T)])
    for n, u, a, o, t in zip(counts, dk["unit"], dk["home"], dk["office"], dk["period"],
                             strict=True):
        by_unit[int(u)][int(t)][(int(a), int(o))] += int(n)
    located: dict[tuple[int, int], str] = {}
    detail_rows = []
    for u, per_period in sorted(by_unit.items()):
        members = units[u]
        totals = [sum(c.values()) for c in per_period]
        schedule = schedule_details(len(members), totals, m)
        previous: dict[int, tuple[int, int]] = {}
        for t, on_detail in enumerate(schedule):
            left = dict(per_period[t])
            assigned: dict[int, tuple[int, int]] = {}
            for i in on_detail:  # keep people at the destination they were at last period
                key = previous.get(i)
                if key is not None and left.get(key, 0) > 0:
                    assigned[i] = key
                    left[key] -= 1
            for i in on_detail:
                if i not in assigned:
                    key = next(k for k, c in sorted(left.items()) if c > 0)
                    assigned[i] = key
                    left[key] -= 1
            previous = assigned
            for i, (a, o) in sorted(assigned.items()):
                p = members[i]
                located[(p, t)] = offices[o]
                # home -1: a relocatable person, who leaves from the home in force
                frm = home_in_force(p, t) if a < 0 else offices[a]
                detail_rows.append((staff[p].person, periods[t], frm, offices[o],
                                    instance.detail_cost_per_period(frm, offices[o])))
    detail_rows.sort(key=lambda r: (r[0], periods.index(str(r[1]))))

    hire_counts, hk = chosen("hire")
    hire_rows = []
    for n, o, k, s, new in zip(hire_counts, hk["office"], hk["skill"], hk["period"], hk["new"],
                               strict=True):
        skill = instance.skills[k]
        salary = skill.salary_per_period * (T - s) * n if new else 0.0
        hire_rows.append((offices[o], skills[k], periods[s], int(n),
                          "new" if new else "vacancy", skill.onboarding_cost * n, salary))

    # Work: a unit's FTE at an office is shared evenly by the members who are there, but an
    # amount too small to share (under SHARE_FLOOR a member) goes whole to the first of them,
    # who does that much less of the rest.  Such amounts are real: the least shortfall needs
    # them (a demand that whole hires' ramp and attrition leave a sliver short of), and an
    # even split had made one of them a row for each member (16 rows of 2.2e-4 FTE).
    wb = model.blocks["work"]
    w = np.clip(x[wb.start:wb.stop], 0.0, None)
    work_by_pt: dict[tuple[int, int], list[tuple[int, float]]] = defaultdict(list)
    by_place: dict[tuple[int, int, int], list[int]] = defaultdict(list)
    for j in np.flatnonzero(w > 1e-9).tolist():
        u, o, t = int(wb.keys["unit"][j]), int(wb.keys["office"][j]), int(wb.keys["period"][j])
        by_place[(u, o, t)].append(j)
    for (u, o, t), cols in by_place.items():
        there = [p for p in units[u]
                 if (located.get((p, t)) or home_in_force(p, t)) == offices[o]]
        n = len(there)
        small = [j for j in cols if n > 1 and w[j] / n < SHARE_FLOOR]
        whole = float(sum(w[j] for j in small))
        first_avail = instance.available_fte(staff[there[0]], t) if there else 0.0
        if not small or whole > first_avail:
            for p in there:
                for j in cols:
                    work_by_pt[(p, t)].append((j, float(w[j]) / n))
            continue
        shared = [j for j in cols if j not in small]
        total = float(sum(w[j] for j in shared))
        own = min(total / n, first_avail - whole)  # the first member's part of the rest
        for j in small:
            work_by_pt[(there[0], t)].append((j, float(w[j])))
        for j in shared:
            if own > 0:
                work_by_pt[(there[0], t)].append((j, float(w[j]) * own / total))
            for p in there[1:]:
                work_by_pt[(p, t)].append((j, float(w[j]) * (total - own) / (total * (n - 1))))
    # People with one skill work it in full wherever there is demand for it.
    wanted = {(d.office, d.skill, d.period) for d in instance.demand if d.fte > 0}
    direct_rows: dict[tuple[int, int], tuple[str, str, float, float]] = {}
    for u in model.direct_units:
        for p in units[u]:
            skill, proficiency = staff[p].skills[0]
            for t in range(T):
                avail = instance.available_fte(staff[p], t)
                where = located.get((p, t)) or home_in_force(p, t)
                if avail > 0 and (where, skill, t) in wanted:
                    direct_rows[(p, t)] = (where, skill, avail, avail * proficiency)
    work_rows = []
    for (p, t), (where, skill, fte, output) in direct_rows.items():
        work_rows.append((staff[p].person, periods[t], where, skill, fte, output))
    for (p, t), entries in sorted(work_by_pt.items()):
        total = sum(v for _, v in entries)
        avail = instance.available_fte(staff[p], t)
        scale = min(1.0, avail / total) if total > 0 else 0.0
        for col, v in entries:
            o_j, k_j = int(wb.keys["office"][col]), int(wb.keys["skill"][col])
            fte = v * scale
            work_rows.append((staff[p].person, periods[t], offices[o_j], skills[k_j], fte,
                              fte * staff[p].proficiency(skills[k_j])))

    order = {name: i for i, name in enumerate(periods)}
    work_rows.sort(key=lambda r: (str(r[0]), order[str(r[1])], str(r[3])))
    details = _frame("details", detail_rows)
    reassignments = _frame("reassignments", reassignment_rows)
    hires = _frame("hires", hire_rows)
    work = _frame("work", work_rows)
    coverage = coverage_table(instance, work, hires)
    costs = cost_table(instance, details, reassignments, hires)
    return Plan(details, reassignments, hires, work, coverage, costs)


def coverage_table(instance: Instance, work: pd.DataFrame, hires: pd.DataFrame) -> pd.DataFrame:
    """Demand, output and shortfall per demand row, from the work and hire tables."""
    periods = instance.period_names
    staff_out = work.groupby(["office", "skill", "period"])["output_fte"].sum().to_dict()
    hire_out: dict[tuple[str, str, str], float] = defaultdict(float)
    period_ix = {name: i for i, name in enumerate(periods)}
    for row in records(hires):
        s = period_ix[row.start_period]
        for t in range(s, len(periods)):
            hire_out[(row.office, row.skill, periods[t])] += row.count * instance.hire_fte(
                row.skill, row.office, s, t)
    rows = []
    # Office, skill and period in the instance's order, whatever demand.csv's rows (a
    # scenario re-sorts its demand, and the base's coverage.csv had followed the file).
    office_ix = {o.name: i for i, o in enumerate(instance.offices)}
    skill_ix = {k.name: i for i, k in enumerate(instance.skills)}
    for d in sorted(instance.demand, key=lambda d: (office_ix.get(d.office, -1),
                                                     skill_ix.get(d.skill, -1), d.period)):
        key = (d.office, d.skill, periods[d.period])
        staff_fte = float(staff_out.get(key, 0.0))
        hire_fte = float(hire_out.get(key, 0.0))
        covered = min(d.fte, staff_fte + hire_fte)
        # Below 1e-12 FTE a difference is rounding in the sums (coverage.csv had shown
        # 4.440892098500626e-16 for a covered row).
        shortfall = d.fte - covered if d.fte - covered > 1e-12 else 0.0
        rows.append((d.office, d.skill, periods[d.period], d.fte, staff_fte, hire_fte, covered,
                     shortfall, d.priority, d.priority * shortfall))
    return _frame("coverage", rows)


def cost_table(instance: Instance, details: pd.DataFrame, reassignments: pd.DataFrame,
               hires: pd.DataFrame) -> pd.DataFrame:
    """Spending by budget year and kind; new-position salary falls in the years it is paid."""
    year_of = {p.name: p.year for p in instance.periods}
    periods = instance.period_names
    totals: dict[tuple[str, str], float] = defaultdict(float)
    for row in records(details):
        totals[(year_of[row.period], "detail")] += row.cost
    for row in records(reassignments):
        totals[(year_of[row.period], "relocation")] += row.cost
    for row in records(hires):
        totals[(year_of[row.start_period], "onboarding")] += row.onboarding_cost
        if row.funding == "new":
            salary = instance.skill(row.skill).salary_per_period * row.count
            for t in range(periods.index(row.start_period), len(periods)):
                totals[(year_of[periods[t]], "new_position_salary")] += salary
    rows = [(year, kind, totals.get((year, kind), 0.0)) for year in instance.years
            for kind in COST_KINDS]
    return _frame("costs", rows)


def write_plan(plan: Plan, folder: Path) -> None:
    for name, columns in PLAN_TABLES.items():
        plan.table(name).to_csv(folder / f"{name}.csv", columns=list(columns), index=False)


class PlanError(InstanceError):
    """A plan folder cannot be read; ``problems`` lists everything found, each naming its file."""


def read_plan(folder: str | Path, *, complete: bool = False) -> Plan:
    """Read plan tables back (for the verifier, re-planning and reports), or raise
    :class:`PlanError` listing every problem.  A missing table reads as empty (a report still
    draws the others) unless ``complete`` asks for every table.  Each table's rows are
    indexed by their line in the file less 2 (0, 1, ... but for blank lines skipped)."""
    path = Path(folder)
    if not path.is_dir():
        what = "is a file; expected a plan folder" if path.exists() else "plan folder not found"
        raise PlanError([Problem(str(path), None, None, what)])
    problems: list[Problem] = []
    frames = {}
    for name, columns in PLAN_TABLES.items():
        file = path / f"{name}.csv"
        if file.is_file():
            frames[name] = _read_table(file, columns, problems)
            continue
        if file.exists():
            problems.append(Problem(str(file), None, None, "is not a file; expected a CSV table"))
        elif complete:
            problems.append(Problem(str(file), None, None, "file is missing; expected in "
                                    "every plan folder (rebalance plan writes it)"))
        frames[name] = pd.DataFrame(columns=list(columns))
    # Unknown columns (warnings) are no reason to stop: no check reads them.
    errors = [p for p in problems if not p.is_warning]
    if errors:
        raise PlanError(collapse_repeats(errors))
    return Plan(**frames)


def _read_table(file: Path, columns: tuple[str, ...], problems: list[Problem]) -> pd.DataFrame:
    """One plan table, checked as instance tables are: names as text, as written (offices
    named 101 and 102 had read as numbers and failed every lookup; one named NA as missing),
    numbers finite, hire counts whole; every problem labelled with the file's path.

    The cells are checked a column at a time with numpy (row by row had taken 1 s for 150k
    work rows), then the problems put in the order a row-by-row reading says them."""
    plain = plain_csv_columns(file)
    if plain is not None:
        # Columns named as the instance's are, but for case (known_case): "Office" had
        # drawn "required column is missing".
        raw = known_case(RawTable(str(file), tuple(plain), ()), columns)
        cells = dict(zip(raw.columns, plain.values(), strict=True))
    else:
        raw = replace(read_csv_table(file, columns), label=str(file))
        cells = {c: np.asarray([row[c] for row in raw.rows], dtype=object)
                 for c in dict.fromkeys(raw.columns) if c}
    problems += table_problems(raw)
    header: list[Problem] = []
    rows = TableRows(raw, header, columns=(columns, ()))  # the header's problems
    problems += _misspelt_columns(header, raw.columns, columns)
    if not rows.columns_ok:
        return _named(pd.DataFrame([], columns=list(columns)))
    # Rows with any cell filled (an unknown column's too), except those a quote left open
    # swallowed: their empty cells are said once, by table_problems, not for each column.
    keep = np.zeros(len(next(iter(cells.values()))), dtype=bool)
    for values in cells.values():
        keep |= values != ""
    swallowed = [number - raw.first_row_number for number, _ in raw.multiline_cells]
    keep[swallowed] = False
    if not keep.any():
        return _named(pd.DataFrame([], columns=list(columns)))
    numbers = np.flatnonzero(keep) + raw.first_row_number
    found: list[tuple[int, int, Problem]] = []  # (row, column position, problem)

    def say(bad: np.ndarray, position: int, column: str, message: str,
            quoting: np.ndarray | None = None) -> None:
        """``message`` for each ``bad`` row, after the cell's text if ``quoting``."""
        for i in np.flatnonzero(bad).tolist():
            row = int(numbers[i])
            what = message if quoting is None else f"'{quoting[i]}' {message}"
            found.append((row, position, Problem(str(file), row, column, what)))

    out: dict[str, np.ndarray] = {}
    for position, column in enumerate(columns):
        text = cells[column][keep]
        empty = text == ""
        if column in NAME_COLUMNS:
            say(empty, position, column, "is empty; a value is required")
            out[column] = text
            continue
        whole = column == "count"  # whole people: 1.5 and -1 had been read as 1 and -1
        what = range_words(1 if whole else None, None, integer=whole)
        value, parsed = _to_float(text, empty)
        finite = np.isfinite(value)
        bad = parsed & ~finite
        if whole:
            bad |= parsed & finite & ((value != np.trunc(value)) | (value < 1))
        say(empty, position, column, f"is empty; expected {what}")
        say(~empty & ~parsed, position, column, f"is not a number; expected {what}", text)
        say(bad, position, column, f"is out of range; expected {what}", text)
        value[~parsed | bad] = np.nan
        ok = not (empty.any() or bad.any() or (~parsed).any())
        out[column] = value.astype(np.int64) if whole and ok else value
    problems += [p for _, _, p in sorted(found, key=lambda f: (f[0], f[1]))]
    # Indexed by the row's place among the file's rows (its line less 2), as a plan made in
    # memory is: a blank line skipped must not shift the lines a re-plan's refusals name.
    index = pd.RangeIndex(len(numbers)) if keep.all() else pd.Index(numbers - 2)
    return _named(pd.DataFrame(out, columns=list(columns), index=index))


def _misspelt_columns(header: list[Problem], names: Sequence[str],
                      columns: tuple[str, ...]) -> list[Problem]:
    """The header's problems, a missing column's naming the unknown ones close to it: the
    unknown column's own warning is not shown beside the error (read_plan stops at errors),
    and "to_office: required column is missing" alone had hidden a header's 'to_ofice'."""
    unknown = [name for name in dict.fromkeys(names) if name and name not in columns]
    out = []
    for p in header:
        close = [name for name in unknown if did_you_mean(name, [p.column])]
        if p.is_warning or p.column not in columns or not close:
            out.append(p)
            continue
        has = " or ".join(f"'{name}'" for name in close[:CLOSE_MATCHES_SHOWN])
        out.append(replace(p, message=f"{p.message}; the header has {has} (a misspelling?)"))
    return out


def _to_float(text: np.ndarray, empty: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Cells as numbers, read as ``float`` reads them (numpy's conversion calls it), and
    which of them read; a column with a bad cell is read a cell at a time."""
    value = np.full(len(text), np.nan)
    parsed = ~empty
    try:
        value[parsed] = text[parsed].astype(np.float64)
        return value, parsed
    except ValueError:
        pass
    for i in np.flatnonzero(parsed).tolist():
        try:
            value[i] = float(text[i])
        except ValueError:
            parsed[i] = False
    return value, parsed


def _named(frame: pd.DataFrame) -> pd.DataFrame:
    # Text even when empty, as pandas reads a header-only file.
    return frame.astype({c: str for c in frame.columns if c in NAME_COLUMNS})
