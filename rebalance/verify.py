"""Independent verifier: recompute every rule and total from the instance and plan tables alone.

It never imports a solver or the model builder, and never uses ``assert`` (dropped under
``-O``): it returns a list of :class:`Violation`, empty when the plan keeps every rule.  The
sums here are written again on purpose, apart from :mod:`rebalance.plan`, so a slip in plan
extraction cannot hide itself.
"""

from __future__ import annotations

import json
import math
from collections import Counter, defaultdict
from collections.abc import Callable, Mapping
from pathlib import Path

from rebalance.instance import Instance
from rebalance.numbers import figures, number_text, share_of
from rebalance.plan import (
    BUDGET_LINES,
    COST_KINDS,
    PLAN_TABLES,
    Plan,
    PlanError,
    read_plan,
    records,
)
from rebalance.problems import Problem, did_you_mean
from rebalance.verify_causes import hire_cost_lines, link_knock_ons
from rebalance.verify_causes import money_amounts as _amounts
from rebalance.verify_rules import (
    ABS_TOL,
    RULES,
    NameKind,
    Violation,
    close,
    over,
    solver_report_problems,
)

__all__ = ["NameKind", "Violation", "unknown_names", "verify_folder", "verify_plan"]

# Unknown names listed per table and column before the rest are counted.
UNKNOWN_NAMES_LISTED = 5
HAND_EDIT_SLIPS = 3  # unknown names in one column up to which each gets a suggestion
# Said of a person unknown among known ones instead of a suggestion: ids differing in a digit
# are other people ('S00039' for 'S00040'), and the usual cause is a row deleted from
# staff.csv for someone who left (docs/instance-format.md, staff.csv last_period).
PERSON_LEFT_HINT = (" (not in staff.csv: a person who has left stays in staff.csv, with "
                    "last_period set to the last period they work)")


def _beyond(value: float, limit: float) -> str:
    """``value`` as :func:`_figures` writes it beside ``limit``: a negative -1e-10 must not
    read as "0" (solver dust to the number rule, but below zero to a rule)."""
    return figures(value, limit)[0] if value != limit else number_text(value)


def _slip_hint(value: str, kind: NameKind, known: Mapping[str, object], slips: bool) -> str:
    """What follows an unknown name a hand edit may have left: the closest known names, but
    for a person why they may be missing (a near id is another person); "" for a plan of
    another instance (``slips`` false), where neither would help."""
    if not slips:
        return ""
    return PERSON_LEFT_HINT if kind == "person" else did_you_mean(value, known)


def verify_folder(instance: Instance, folder: str | Path, *,
                  complete: bool = False) -> list[Violation]:
    """Verify the plan tables (and summary.json, if present) in ``folder``.

    Tables that cannot be read raise :class:`~rebalance.plan.PlanError`.  A missing table is a
    violation (a report still draws the rest), or with ``complete`` a problem of that error.
    """
    path = Path(folder)
    missing = [name for name in PLAN_TABLES if not (path / f"{name}.csv").exists()]
    if missing and not complete:
        files = {name: str(path / f"{name}.csv") for name in missing}
        return [Violation("missing_table", file, "file is missing", file=file, table=name)
                for name, file in files.items()]
    summary_path = path / "summary.json"
    if complete and not summary_path.exists():
        # Its figures are checked too: without it "verification passed" had said more than
        # was checked.  Listed with any table problems, all at once.
        no_summary = Problem(str(summary_path), None, None, "file is missing; expected in every "
                          "plan folder (rebalance plan writes it)")
        try:
            read_plan(path, complete=True)
        except PlanError as exc:
            raise PlanError([*exc.problems, no_summary]) from None
        raise PlanError([no_summary])
    checker = _Checker(instance, read_plan(path, complete=complete), path)
    checker.run()
    if summary_path.exists() and not checker.violations:
        file = str(summary_path)
        try:
            summary = json.loads(summary_path.read_text(encoding="utf-8"))
        except (ValueError, UnicodeDecodeError) as exc:
            return [Violation("summary", file, f"cannot be read as JSON ({exc})", file=file)]
        if not isinstance(summary, dict):
            return [Violation("summary", file, "holds no object of figures", file=file)]
        return _check_summary(checker, summary, file)
    return checker.violations


def unknown_names(instance: Instance, plan: Plan,
                  folder: str | Path | None = None) -> list[Violation]:
    """Names in ``plan`` (people, offices, skills, periods) that ``instance`` lacks, and
    missing columns: what must hold before a plan can be read against an instance.  With
    ``folder`` (where the plan was read from) each names its file there."""
    checker = _Checker(instance, plan, folder)
    checker._references_ok()
    return checker.violations


def verify_plan(instance: Instance, plan: Plan, *,
                folder: str | Path | None = None) -> list[Violation]:
    """All rule violations of ``plan`` against ``instance``; with ``folder`` (where the plan
    was read from) a violation naming a table names its file there.  Where names are
    unknown (:func:`unknown_names`), those are all it returns."""
    checker = _Checker(instance, plan, folder)
    checker.run()
    return checker.violations


class _Checker:
    def __init__(self, instance: Instance, plan: Plan, folder: str | Path | None = None) -> None:
        self.i = instance
        self.plan = plan
        self.folder = None if folder is None else Path(folder)
        self.violations: list[Violation] = []
        self.people = {p.person: p for p in instance.staff}
        self.offices = {o.name: o for o in instance.offices}
        self.skills = {s.name: s for s in instance.skills}
        self.period_ix = {name: t for t, name in enumerate(instance.period_names)}
        self.T = len(instance.periods)
        # Spending by (year, kind) as the rules price it, not as the plan's rows say: a row
        # a little under its price passes its own check, and many would ease a budget.
        self.spend: dict[tuple[str, str], float] = defaultdict(float)

    def flag(self, rule: str, where: str, message: str, line: int | None = None,
             at: tuple[str, int] | None = None, *, person: str | None = None,
             period: str | None = None, figure_column: str | None = None) -> None:
        self.add(rule, where, message, RULES[rule][0], line, at=at, person=person,
                 period=period, figure_column=figure_column)

    def add(self, rule: str, where: str, message: str, table: str, line: int | None = None, *,
            column: str | None = None, name_kind: NameKind | None = None,
            at: tuple[str, int] | None = None, person: str | None = None,
            period: str | None = None, figure_column: str | None = None) -> None:
        """A violation of ``table`` (at ``line``), its ``file`` as printed made from them;
        ``at``'s period is named too (a run's printed last period)."""
        if at is not None and period is None:
            period = self.i.period_names[at[1]]
        self.violations.append(Violation(
            rule, where, message, column, name_kind, file=self.file(table, line), at=at,
            table=table, line=line, person=person, period=period, figure_column=figure_column))

    def row_flag(self, where: str, line: int) -> Callable[[str, str], None]:
        return lambda rule, message: self.flag(rule, where, message, line)

    def person_flag(self, person: str, period: str, line: int) -> Callable[[str, str], None]:
        """Flags a plan row about ``person`` in ``period``, its ``where`` said of them."""
        where = f"person {person} in {period}"
        return lambda rule, message: self.flag(rule, where, message, line, person=person,
                                               period=period)

    def lines(self, table: str) -> list[int]:
        """Each row's line in its file: read_plan indexes rows by line less 2 (blank lines
        skipped); a plan made in memory is written in row order."""
        frame = self.plan.table(table)
        return [int(ix) + 2 for ix in (range(len(frame)) if self.folder is None else frame.index)]

    def file(self, table: str, line: int | None = None) -> str:
        """The table's file (and line), with its folder when known: a line that names it can
        be pasted (as read_plan's problems can)."""
        name = f"{table}.csv"
        file = name if self.folder is None else str(self.folder / name)
        return file if line is None else f"{file}:{line}"

    def run(self) -> None:
        if not self._references_ok():
            return  # later checks would only repeat the unknown names
        home = self._check_reassignments()
        away = self._check_details(home)
        self._check_work(home, away)
        self._check_hires()
        self._check_coverage()
        self._check_heads(home, away)
        self._check_costs()
        self.violations = link_knock_ons(self.i, self.plan, self.violations, self.lines)

    # -- references ----------------------------------------------------------------------
    def _references_ok(self) -> bool:
        ok = True
        names: dict[NameKind, Mapping[str, object]] = {
            "person": self.people, "office": self.offices, "skill": self.skills,
            "period": self.period_ix}
        spec: dict[str, dict[str, NameKind]] = {
            "details": {"person": "person", "period": "period", "from_office": "office",
                        "to_office": "office"},
            "reassignments": {"person": "person", "period": "period", "from_office": "office",
                              "to_office": "office"},
            "hires": {"office": "office", "skill": "skill", "start_period": "period"},
            "work": {"person": "person", "period": "period", "office": "office",
                     "skill": "skill"},
            # Their names are checked against the demand and the budget years below; here
            # only that every column is there (a headline figure is summed from each).
            "coverage": {},
            "costs": {},
        }
        for table, columns in spec.items():
            frame = self.plan.table(table)
            missing = [column for column in PLAN_TABLES[table] if column not in frame.columns]
            for column in missing:
                self.add("missing_column", self.file(table), f"column {column} is missing",
                         table)
            ok = ok and not missing
            if missing:
                continue  # this table's names cannot be read; the other tables' still can
            for column, kind in columns.items():
                known = names[kind]
                unknown = [(row, value) for row, value in
                           zip(self.lines(table), frame[column].astype(str), strict=True)
                           if value not in known]
                # A name or two unknown among known ones is a slip of a hand edit, worth a
                # suggestion; more, or most of a column, is a plan of another instance,
                # where none would help ('xa1' is no slip for 'a1').
                slips = len(unknown) <= HAND_EDIT_SLIPS and 2 * len(unknown) < len(frame)
                for row, value in unknown[:UNKNOWN_NAMES_LISTED]:
                    self.add("unknown_reference", self.file(table, row),
                             f"{column} '{value}' is not in the instance"
                             + _slip_hint(value, kind, known, slips), table, row,
                             column=column, name_kind=kind)
                if len(unknown) > UNKNOWN_NAMES_LISTED:
                    # A plan of another instance names thousands; the first few say enough.
                    self.add("unknown_reference", self.file(table),
                             f"{len(unknown) - UNKNOWN_NAMES_LISTED:,} more rows whose "
                             f"{column} is not in the instance", table, column=column,
                             name_kind=kind)
                ok = ok and not unknown
        return ok

    # -- reassignments -------------------------------------------------------------------
    def _check_reassignments(self) -> dict[str, list[str]]:
        """Home in force per person and period, after the plan's reassignments."""
        home = {name: [p.home_office] * self.T for name, p in self.people.items()}
        seen: Counter[str] = Counter()
        for line, row in zip(self.lines("reassignments"), records(self.plan.reassignments),
                             strict=True):
            flag = self.person_flag(row.person, row.period, line)
            person = self.people[row.person]
            t = self.period_ix[row.period]
            seen[row.person] += 1
            if seen[row.person] > 1:
                flag("one_reassignment", "more than one reassignment")
            if not person.can_relocate:
                flag("reassignment_allowed", "person may not be relocated")
            if not person.is_present(t):
                flag("reassignment_present", "person has left by then")
            if row.from_office != person.home_office:
                flag("reassignment_from",
                     f"from {row.from_office} but the home is {person.home_office}")
            if row.to_office == person.home_office:
                flag("reassignment_to", "reassigned to the office they are in")
            expected = self.i.relocation_cost(person.home_office, row.to_office)
            self.spend[(self.i.periods[t].year, "relocation")] += expected
            if not close(float(row.cost), expected):
                stated, priced = _amounts(self.i, float(row.cost), expected)
                flag("reassignment_cost", f"cost {stated} but {priced} applies")
            for s in range(t, self.T):
                home[row.person][s] = row.to_office
        return home

    # -- details -------------------------------------------------------------------------
    def _check_details(self, home: dict[str, list[str]]) -> dict[tuple[str, int], str]:
        away: dict[tuple[str, int], str] = {}
        m = self.i.policy.max_consecutive_detail_periods
        for line, row in zip(self.lines("details"), records(self.plan.details), strict=True):
            person = self.people[row.person]
            t = self.period_ix[row.period]
            flag = self.person_flag(row.person, row.period, line)
            if (row.person, t) in away:
                flag("one_detail", "two details in one period")
            away[(row.person, t)] = row.to_office
            if not person.can_detail:
                flag("detail_allowed", "person may not be detailed")
            if m == 0:
                flag("detail_allowed", "details are not allowed by policy")
            if not person.is_present(t):
                flag("detail_present", "person has left by then")
            if row.from_office != home[row.person][t]:
                flag("detail_from", f"from {row.from_office} but the home in force "
                     f"is {home[row.person][t]}")
            if row.to_office == home[row.person][t]:
                flag("detail_to", "detailed to their own home office")
            expected = self.i.detail_cost_per_period(home[row.person][t], row.to_office)
            self.spend[(self.i.periods[t].year, "detail")] += expected
            if not close(float(row.cost), expected):
                stated, priced = _amounts(self.i, float(row.cost), expected)
                flag("detail_cost", f"cost {stated} but {priced} applies")
        if m is not None and m > 0:
            by_person: dict[str, set[int]] = defaultdict(set)
            for name, t in away:
                by_person[name].add(t)
            for name, periods in by_person.items():
                for start in range(0, self.T - m):
                    window = set(range(start, start + m + 1))
                    if len(periods & window) > m:
                        self.flag("consecutive_details",
                                  f"person {name} from {self.i.periods[start].name}",
                                  f"{len(periods & window)} detail periods in {m + 1} "
                                  f"consecutive periods; at most {m} allowed", person=name)
        return away

    # -- work ----------------------------------------------------------------------------
    def _check_work(self, home: dict[str, list[str]], away: dict[tuple[str, int], str]) -> None:
        totals: dict[tuple[str, int], float] = defaultdict(float)
        # Output per office, skill and period, recomputed as proficiency x fte: summing the
        # reported output would let each row's rounding allowance add up over many rows.
        self.staff_output: dict[tuple[str, str, int], float] = defaultdict(float)
        seen: set[tuple[str, str, str, str]] = set()
        for line, row in zip(self.lines("work"), records(self.plan.work), strict=True):
            person = self.people[row.person]
            t = self.period_ix[row.period]
            flag = self.person_flag(row.person, row.period, line)
            key = (row.person, row.period, row.office, row.skill)
            if key in seen:
                # One row per person, period, office and skill: repeats could carry small
                # amounts each, within every per-row allowance, that add up.
                flag("work_repeated", f"{row.skill} at {row.office} is listed twice")
            seen.add(key)
            fte = float(row.fte)
            if fte < 0:
                flag("work_negative", f"negative fte {_beyond(fte, 0.0)}")
            at = away.get((row.person, t), home[row.person][t])
            if row.office != at:
                flag("work_location", f"works at {row.office} but is at {at}")
            proficiency = person.proficiency(row.skill)
            if proficiency == 0:
                flag("work_skill", f"does not have skill {row.skill}")
            if not close(float(row.output_fte), fte * proficiency):
                output, product = figures(float(row.output_fte), fte * proficiency)
                flag("work_output", f"output {output} but proficiency "
                     f"{number_text(proficiency)} x fte {number_text(fte)} = {product}")
            totals[(row.person, t)] += fte
            self.staff_output[(row.office, row.skill, t)] += fte * proficiency
        for (name, t), total in totals.items():
            available = self.i.available_fte(self.people[name], t)
            if over(total, available):
                works, has = figures(total, available)
                period = self.i.periods[t].name
                self.flag("work_capacity", f"person {name} in {period}",
                          f"works {works} FTE but has {has} available", person=name,
                          period=period)

    # -- hires ---------------------------------------------------------------------------
    def _check_hires(self) -> None:
        per_office_period: Counter[tuple[str, int]] = Counter()
        vacancy_used: Counter[tuple[str, str]] = Counter()
        for line, row in zip(self.lines("hires"), records(self.plan.hires), strict=True):
            where = f"{row.count} {row.skill} at {row.office} from {row.start_period}"
            flag = self.row_flag(where, line)
            skill = self.skills[row.skill]
            s = self.period_ix[row.start_period]
            count = float(row.count)
            if count != int(count) or count < 1:
                flag("hire_count", "count must be a whole number >= 1")
            if s < (wait := skill.time_to_hire):
                earliest = self.i.period_names[wait] if wait < self.T else "the horizon's end"
                flag("time_to_hire", f"starts before {earliest}, the earliest its time to hire "
                     f"({wait} period{'' if wait == 1 else 's'}) allows")
            if row.funding not in ("vacancy", "new"):
                flag("hire_funding", f"funding '{row.funding}' is not vacancy/new")
            if row.funding == "vacancy":
                vacancy_used[(row.office, row.skill)] += int(count)
            per_office_period[(row.office, s)] += int(count)
            salary = skill.salary_per_period * (self.T - s) if row.funding == "new" else 0.0
            for message in hire_cost_lines(self.i, count,
                                           (float(row.onboarding_cost), skill.onboarding_cost),
                                           (float(row.salary_cost), salary)):
                flag("hire_cost", message)
        for (office, s), count in per_office_period.items():
            cap = self.offices[office].max_hires_per_period
            if cap is not None and count > cap:
                self.flag("max_hires", f"{office} in {self.i.periods[s].name}",
                          f"{count} {'hire starts' if count == 1 else 'hires start'}; "
                          f"at most {cap} allowed", period=self.i.periods[s].name)
        for (office_name, skill_name), used in vacancy_used.items():
            funded = self.i.vacancies.get((office_name, skill_name), 0)
            if used > funded:
                self.flag("vacancies", f"{skill_name} at {office_name}",
                          f"{used} {'hire fills' if used == 1 else 'hires fill'} vacancies "
                          f"but only {funded} "
                          f"{'is' if funded == 1 else 'are'} funded")

    # -- coverage ------------------------------------------------------------------------
    def _hire_output(self) -> dict[tuple[str, str, int], float]:
        out: dict[tuple[str, str, int], float] = defaultdict(float)
        for row in records(self.plan.hires):
            skill = self.skills[row.skill]
            s = self.period_ix[row.start_period]
            rate = self.i.attrition.get((row.skill, row.office),
                                        self.i.attrition.get((row.skill, None), 0.0))
            for t in range(s, self.T):
                j = t - s
                productivity = skill.ramp[j] if j < len(skill.ramp) else 1.0
                out[(row.office, row.skill, t)] += float(row.count) * productivity * (
                    1.0 - rate) ** (j / self.i.periods_per_year)
        return out

    def _check_coverage(self) -> None:
        hire_out = self._hire_output()
        reported: dict[tuple[str, str, str], tuple[int, object]] = {}
        for number, r in zip(self.lines("coverage"), records(self.plan.coverage), strict=True):
            key = (r.office, r.skill, str(r.period))
            if key in reported:
                self.flag("coverage_rows", f"{r.skill} at {r.office} in {r.period}",
                          "listed twice", line=number, period=str(r.period))
            reported[key] = (number, r)
        weighted = unweighted = 0.0
        demanded = set()
        for d in self.i.demand:
            name = self.i.periods[d.period].name
            demanded.add((d.office, d.skill, name))
            where = f"{d.skill} at {d.office} in {name}"
            staff = self.staff_output[(d.office, d.skill, d.period)]
            hired = hire_out[(d.office, d.skill, d.period)]
            covered = min(d.fte, staff + hired)
            shortfall = max(0.0, d.fte - staff - hired)
            weighted += d.priority * shortfall
            unweighted += shortfall
            if (d.office, d.skill, name) not in reported:
                self.flag("coverage_missing", where, "no row for this demand row",
                          period=name)
                continue
            number, row = reported[(d.office, d.skill, name)]
            # Every figure of the row: the report's headlines are sums of these columns.
            for column, expected in (("demand_fte", d.fte), ("staff_output_fte", staff),
                                     ("hire_output_fte", hired), ("covered_fte", covered),
                                     ("shortfall_fte", shortfall), ("priority", d.priority),
                                     ("weighted_shortfall", d.priority * shortfall)):
                value = float(getattr(row, column))
                if not close(value, expected):
                    stated, recomputed = figures(value, expected)
                    self.flag(f"coverage_{column.removesuffix('_fte')}", where,
                              f"{column} {stated} but recomputed {recomputed}", line=number,
                              period=name, figure_column=column)
        for office, skill, period in sorted(set(reported) - demanded):
            self.flag("coverage_rows", f"{skill} at {office} in {period}",
                      "a coverage row for no demand row", reported[(office, skill, period)][0],
                      period=period)
        self.weighted_shortfall = weighted
        self.shortfall_fte = unweighted

    # -- heads: away share and seats -------------------------------------------------------
    def _check_heads(self, home: dict[str, list[str]], away: dict[tuple[str, int], str]) -> None:
        share = self.i.policy.max_away_share
        present: Counter[tuple[str, int]] = Counter()
        gone: Counter[tuple[str, int]] = Counter()
        arrived: Counter[tuple[str, int]] = Counter()
        for name, person in self.people.items():
            for t in range(self.T):
                if person.is_present(t):
                    present[(home[name][t], t)] += 1
        for (name, t), destination in away.items():
            gone[(home[name][t], t)] += 1
            arrived[(destination, t)] += 1
        hires_held: Counter[tuple[str, int]] = Counter()
        for row in records(self.plan.hires):
            for t in range(self.period_ix[row.start_period], self.T):
                hires_held[(row.office, t)] += int(row.count)
        for office in self.i.offices:
            for t in range(self.T):
                where, key = f"{office.name} in {self.i.periods[t].name}", (office.name, t)
                if over(gone[key], share * present[key]):
                    self.flag("away_share", where, f"{gone[key]} of {present[key]} "
                              f"{'person' if present[key] == 1 else 'people'} away; "
                              f"at most {share_of(share)} of them may be",
                              period=self.i.periods[t].name)
                used = present[key] - gone[key] + arrived[key] + hires_held[key]
                if office.seats is not None and used > office.seats:
                    self.flag("seats", where, f"{used} seat{'' if used == 1 else 's'} used; "
                              f"{office.seats} {'exists' if office.seats == 1 else 'exist'}",
                              at=key)

    # -- costs and budgets -----------------------------------------------------------------
    def _check_costs(self) -> None:
        year_of = [p.year for p in self.i.periods]
        spend = self.spend
        for row in records(self.plan.hires):
            skill = self.skills[row.skill]
            s = self.period_ix[row.start_period]
            spend[(year_of[s], "onboarding")] += skill.onboarding_cost * float(row.count)
            if row.funding == "new":
                for t in range(s, self.T):
                    spend[(year_of[t], "new_position_salary")] += (
                        skill.salary_per_period * float(row.count))
        reported: dict[tuple[str, str], float] = {}
        line_of: dict[tuple[str, str], int] = {}
        expected_keys = {(year, kind) for year in self.i.years for kind in COST_KINDS}
        for number, r in zip(self.lines("costs"), records(self.plan.costs), strict=True):
            key = (str(r.year), str(r.kind))
            if key in reported:
                self.flag("costs", f"{key[1]} in {key[0]}", "listed twice", line=number)
            elif key not in expected_keys:
                self.flag("costs", f"'{key[1]}' in '{key[0]}'", "not a kind of cost ("
                          + ", ".join(COST_KINDS) + ") in a budget year", line=number)
            reported[key], line_of[key] = float(r.cost), number
        for key in sorted(expected_keys - set(reported)):
            self.flag("costs", f"{key[1]} in {key[0]}", "row missing")
        # In the file's order (a set's order had changed with the hash seed), then the rest.
        for key in sorted(set(spend) | set(reported),
                          key=lambda k: (line_of.get(k, math.inf), k)):
            if not close(spend.get(key, 0.0), reported.get(key, 0.0), tol=1e-4):
                stated, priced = _amounts(self.i, reported.get(key, 0.0), spend.get(key, 0.0))
                self.flag("costs", f"{key[1]} in {key[0]}",
                          f"says {stated}; recomputed {priced}", line_of.get(key))
        for year in self.i.years:
            if (budget := self.i.budget(year)) is None:
                continue
            line = {cap: sum(spend[(year, kind)] for kind in kinds)
                    for cap, kinds in BUDGET_LINES}
            hiring, moves = line["hiring"], line["moves"]
            if budget.hiring is not None and over(hiring, budget.hiring):
                spent, cap = _amounts(self.i, hiring, budget.hiring)
                self.flag("hiring_budget", year, f"hiring spend {spent} exceeds {cap}")
            if budget.moves is not None and over(moves, budget.moves):
                spent, cap = _amounts(self.i, moves, budget.moves)
                self.flag("moves_budget", year, f"moves spend {spent} exceeds {cap}")
        self.total_cost = sum(spend.values())
        self.cost_by_kind = {kind: sum(v for (_, k), v in spend.items() if k == kind)
                             for kind in COST_KINDS}


def _check_summary(checker: _Checker, summary: dict[str, object],
                   file: str) -> list[Violation]:
    """Every figure summary.json (at ``file``) states of the plan, against the tables (the
    report and the console lead with them)."""
    plan = checker.plan
    stated_figures: list[tuple[str, object, float, float]] = [
        # FTE figures within ABS_TOL (plus REL_TOL of their size), as docs/instance-format.md
        # says; 1e-4 had let a stated 0.00009 pass beside a recomputed 0.
        ("weighted_shortfall", summary.get("weighted_shortfall"), checker.weighted_shortfall,
         ABS_TOL),
        ("shortfall_fte_periods", summary.get("shortfall_fte_periods"), checker.shortfall_fte,
         ABS_TOL),
        ("total_cost", summary.get("total_cost"), checker.total_cost, 1e-4),
        ("hires", summary.get("hires"), float(plan.hires["count"].sum()), 0.0),
        ("detail_periods", summary.get("detail_periods"), float(len(plan.details)), 0.0),
        ("reassignments", summary.get("reassignments"), float(len(plan.reassignments)), 0.0),
    ]
    by_kind = summary.get("cost_by_kind")
    for kind, value in checker.cost_by_kind.items():
        stated = by_kind.get(kind) if isinstance(by_kind, dict) else None
        stated_figures.append((f"cost_by_kind.{kind}", stated, value, 1e-4))
    out = []
    for key, reported, value, tol in stated_figures:
        number = isinstance(reported, int | float) and not isinstance(reported, bool)
        if not number or not close(float(reported), value, tol=tol):  # type: ignore[arg-type]
            if number and (key == "total_cost" or key.startswith("cost_by_kind.")):
                said, recomputed = _amounts(checker.i, float(reported), value)  # type: ignore[arg-type]
            else:
                said, recomputed = (figures(float(reported), value) if number  # type: ignore[arg-type]
                                    else (str(reported), number_text(value)))
            out.append(Violation("summary", key, f"says {said}; recomputed {recomputed}",
                                 file=file))
    # The solver's own figures cannot be recomputed without solving again: they are checked
    # against each other, and staying put against the weighted demand it cannot exceed.
    out += [Violation("solver_report", key, message, file=file)
            for key, message in solver_report_problems(summary)]
    staying = summary.get("staying_put_weighted_shortfall")
    most = sum(d.priority * d.fte for d in checker.i.demand)
    if staying is not None and (not isinstance(staying, int | float) or isinstance(
            staying, bool) or float(staying) < -ABS_TOL or over(float(staying), most)):
        out.append(Violation("solver_report", "staying_put_weighted_shortfall",
                             f"says {staying}; it lies between 0 and the weighted demand "
                             f"{number_text(most)}", file=file))
    return out
