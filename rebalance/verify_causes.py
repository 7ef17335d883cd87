"""Which coverage lines of a verification follow from an earlier violation.

A plan edited by hand in one place (a work row moved to another office, more FTE than a
person has, a detail that may not be) leaves coverage.csv as it was: each coverage row the
edit touches then differs from its recomputed figures in several columns, and each of those
lines had read as one more problem.  Here such a line is linked to the violation it follows
from (:attr:`~rebalance.verify_rules.Violation.follows`, the first where several apply; the
rest are its ``also_follows``), so a report can show it under the first and name the others.

A coverage line follows from a cause only where all of this holds, else it stays a problem
of its own:

- it is a figure downstream of work and hires (staff or hire output, covered, shortfall,
  weighted shortfall), and its row agrees with itself: covered, shortfall and weighted
  shortfall are what its own demand, priority and outputs give (a row edited by hand does
  not, and is its own problem);
- a changed staff output has a flagged person in that period whose output can reach the
  office (they work there, are based there, or are detailed or reassigned from or to it)
  in that skill, and the change is no more than those people can bring: proficiency x the
  larger of their available FTE and the FTE work.csv gives them;
- a changed hire output has a flagged hires.csv row of that office and skill started by
  then (no bound: the row's count may be what was edited).

:func:`group_problems` then gathers the violations into problems as a report lists them:
each with the lines that follow from it, and the same seats excess at one office over
consecutive periods (one extra hire had read as one problem a period) as one run.

:func:`hire_cost_lines` says what is wrong with a hires.csv row's costs; where both fit
another count than the row's, the count is what was edited, and that is the one line.
"""

from __future__ import annotations

import math
from collections import defaultdict
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from typing import Any

from rebalance.instance import Instance
from rebalance.numbers import distinct_texts, money_text, number_text
from rebalance.plan import Plan, records
from rebalance.verify_rules import ABS_TOL, Violation, close

__all__ = ["KNOCK_ONS_SHOWN", "KNOCK_ON_RULES", "PROBLEMS_SHOWN", "ViolationGroup",
           "first_problems", "group_problems", "hire_cost_lines", "link_knock_ons",
           "money_amounts"]

# Problems listed of a failed verification before the rest are counted (on the console and the
# page alike), and the knock-on lines kept under each where the list runs long.
PROBLEMS_SHOWN = 20
KNOCK_ONS_SHOWN = 3
# Coverage figures recomputed from work and hires: the ones an edit of those tables moves.
KNOCK_ON_RULES = frozenset(f"coverage_{column}" for column in (
    "staff_output", "hire_output", "covered", "shortfall", "weighted_shortfall"))
PERSON_TABLES = ("work", "details", "reassignments")


def money_amounts(instance: Instance, *values: float) -> list[str]:
    """Amounts of money as the reports write them (whole units with separators, the
    instance's currency after them), to the cent or beyond where whole units would make two
    of them read the same: a mismatch must not read as none ("cost 1,500 but 1,500
    applies")."""
    whole = distinct_texts(values, [money_text(v) for v in values], 2)
    return [instance.money.amount(text) for text in whole]


def hire_cost_lines(instance: Instance, count: float, onboarding: tuple[float, float],
                    salary: tuple[float, float]) -> list[str]:
    """What is wrong with a hires.csv row's costs, each given as (the row's figure, the
    price of one hire: 0 for the salary of a vacancy hire); none when both match ``count``.

    Where both fit one other whole count (a price of 0 fits any, if its figure is 0), the
    count was edited: one line says so, not a cost line each that points at a price.
    """
    costs = {"onboarding_cost": onboarding, "salary_cost": salary}
    wrong = {name: (found, each * count) for name, (found, each) in costs.items()
             if not close(found, each * count)}
    if not wrong:
        return []
    telling = [name for name, (_, each) in costs.items() if each > 0]
    if telling and math.isfinite(ratio := costs[telling[0]][0] / costs[telling[0]][1]):
        fit = round(ratio)
        if fit >= 1 and fit != count and all(close(found, each * fit)
                                             for found, each in costs.values()):
            return [f"count {number_text(count)} disagrees with {' and '.join(telling)}, "
                    f"which fit{'s' if len(telling) == 1 else ''} {fit}"]
    lines = []
    for name, (found, expected) in wrong.items():
        stated, priced = money_amounts(instance, found, expected)
        lines.append(f"{name.replace('_', ' ')} {stated} but {priced} applies")
    return lines


def link_knock_ons(instance: Instance, plan: Plan, violations: Sequence[Violation],
                   lines: Callable[[str], list[int]]) -> list[Violation]:
    """``violations`` with each coverage line that follows from an earlier one marked so
    (its ``follows`` set to that violation, the first where several apply, and the others in
    ``also_follows``: a row that 25 moved work rows changed had named only the first).

    ``lines`` gives each row's line in its file, as the verifier numbered them.
    """
    if not any(v.rule in KNOCK_ON_RULES for v in violations):
        return list(violations)  # the usual case, a plan that passes: no work for nothing
    rows: dict[str, dict[int, Any]] = {
        table: dict(zip(lines(table), records(plan.table(table)), strict=True))
        for table in (*PERSON_TABLES, "hires", "coverage")}
    period_ix = {name: t for t, name in enumerate(instance.period_names)}
    people = {p.person: p for p in instance.staff}
    fte_of: dict[tuple[str, int], float] = defaultdict(float)  # work.csv's FTE a person-period
    staff: dict[tuple[str, str, int], float] = defaultdict(float)  # output an office-skill-period
    for row in rows["work"].values():
        t = period_ix[row.period]
        fte_of[(row.person, t)] += float(row.fte)
        staff[(row.office, row.skill, t)] += float(row.fte) * people[row.person].proficiency(
            row.skill)
    # Offices a person's output may have been at or gone to, each period.
    reach: dict[tuple[str, int], set[str]] = defaultdict(set)
    for row in rows["work"].values():
        reach[(row.person, period_ix[row.period])].add(row.office)
    for row in rows["details"].values():
        reach[(row.person, period_ix[row.period])] |= {row.from_office, row.to_office}
    for row in rows["reassignments"].values():
        for t in range(period_ix[row.period], len(instance.periods)):
            reach[(row.person, t)] |= {row.from_office, row.to_office}

    # The person-periods and hire rows each non-coverage violation is about.
    person_causes: dict[tuple[str, int], int] = {}  # the first violation of each
    hire_causes: list[tuple[int, str, str, int]] = []
    for ix, v in enumerate(violations):
        table, line = v.table, v.line
        found: list[tuple[str, int]] = []
        if table in PERSON_TABLES and line is not None and line in rows[table]:
            row = rows[table][line]
            t = period_ix[row.period]
            last = len(instance.periods) if table == "reassignments" else t + 1
            found = [(row.person, s) for s in range(t, last)]
        elif (v.rule == "work_capacity" and v.person is not None
              and (worked := (v.person, period_ix.get(v.period or "", -1))) in fte_of):
            found = [worked]
        elif table == "hires" and line is not None and line in rows["hires"]:
            row = rows["hires"][line]
            hire_causes.append((ix, row.office, row.skill, period_ix[row.start_period]))
        for key in found:
            person_causes.setdefault(key, ix)

    flagged: dict[int, set[str]] = defaultdict(set)
    for v in violations:
        if v.rule.startswith("coverage_") and v.line is not None:
            flagged[v.line].add(v.rule)
    causes_in: dict[int, list[tuple[str, int]]] = defaultdict(list)  # period -> person, cause
    for (name, t), ix in person_causes.items():
        causes_in[t].append((name, ix))
    cause_of: dict[int, list[int]] = {}  # coverage line -> its causes, first first
    for line, rules in flagged.items():
        row = rows["coverage"].get(line)
        if (row is None or not rules <= KNOCK_ON_RULES or not _agrees(row)
                or str(row.period) not in period_ix):
            continue
        office, skill, t = row.office, row.skill, period_ix[str(row.period)]
        causes: list[int] = []
        if "coverage_staff_output" in rules:
            near = [(name, ix) for name, ix in causes_in[t]
                    if office in reach[(name, t)] | {people[name].home_office}
                    and people[name].proficiency(skill) > 0]
            most = sum(people[name].proficiency(skill) * max(
                fte_of[(name, t)], instance.available_fte(people[name], t)) for name, _ in near)
            change = abs(staff[(office, skill, t)] - float(row.staff_output_fte))
            if not near or change > most + ABS_TOL:
                continue
            causes += [ix for _, ix in near]
        if "coverage_hire_output" in rules:
            hired = [ix for ix, o, s, start in hire_causes
                     if (o, s) == (office, skill) and start <= t]
            if not hired:
                continue
            causes += hired
        if causes:  # a row whose outputs agree differs only in figures edited by hand
            cause_of[line] = sorted(set(causes))
    return [replace(v, follows=violations[cause_of[line][0]],
                    also_follows=tuple(violations[ix] for ix in cause_of[line][1:]))
            if v.rule in KNOCK_ON_RULES and (line := v.line) in cause_of else v
            for v in violations]


def _agrees(row: Any) -> bool:
    """Whether a coverage row's covered and shortfall figures are those its own demand and
    outputs give: then only its outputs are out of date."""
    demand, output = float(row.demand_fte), float(row.staff_output_fte) + float(
        row.hire_output_fte)
    shortfall = max(0.0, demand - output)
    return (close(float(row.covered_fte), min(demand, output))
            and close(float(row.shortfall_fte), shortfall)
            and close(float(row.weighted_shortfall), float(row.priority) * shortfall))


@dataclass(frozen=True)
class ViolationGroup:
    """One problem as a report lists it: ``run``, its violations (one, or the same excess of
    seats at one office in consecutive periods, in period order), and ``under``, the lines
    that follow from it, each the figures of one coverage.csv row or a run as ``run`` is."""

    run: tuple[Violation, ...]
    under: tuple[tuple[Violation, ...], ...] = ()


def group_problems(violations: Sequence[Violation]) -> list[ViolationGroup]:
    """``violations`` as problems, in the order of each one's first violation: a run of
    violations ``at`` one office in consecutive periods, with the same rule, table and line
    (file, where those are unset), message and cause, is one; a violation that ``follows``
    another goes under that one's problem.  Every violation is in exactly one problem."""
    runs: list[list[Violation]] = []
    open_runs: dict[tuple[object, ...], list[Violation]] = {}  # a run the next period may join
    for v in violations:
        if v.at is None:
            runs.append([v])
            continue
        key = (v.rule, _place(v), v.message, v.follows, v.at[0])
        run = open_runs.get(key)
        if run is not None and run[-1].at == (v.at[0], v.at[1] - 1):
            run.append(v)
        else:
            runs.append([v])
            open_runs[key] = runs[-1]
    home: dict[Violation, int] = {}  # each violation's run (the first, where one repeats)
    for ix, run in enumerate(runs):
        for v in run:
            home.setdefault(v, ix)

    def top(ix: int) -> int:
        """The run ``ix`` is listed under: its cause's, or that one's, or itself."""
        seen = {ix}
        while (cause := runs[ix][0].follows) is not None and home.get(cause, ix) not in seen:
            ix = home[cause]
            seen.add(ix)
        return ix

    under: dict[int, dict[object, list[Violation]]] = defaultdict(dict)
    listed: list[int] = []
    for ix, run in enumerate(runs):
        if (head := top(ix)) == ix:
            listed.append(ix)
        else:  # a coverage row's figures read as one line; a run keeps its own
            row = ix if run[0].at is not None else _place(run[0])
            under[head].setdefault(row, []).extend(run)
    return [ViolationGroup(tuple(runs[ix]), tuple(tuple(group) for group in under[ix].values()))
            for ix in listed]


def _place(v: Violation) -> tuple[object, ...]:
    """Which table and line ``v`` is about, as verify set them; its printed ``file`` where
    it was built without them (summary.json's, or one made by hand)."""
    return (v.table, v.line) if v.table else (v.file,)


def first_problems(lines: Sequence[str], hint: str = "") -> list[str]:
    """The first :data:`PROBLEMS_SHOWN` problems of ``lines`` and a count of the rest (an old
    plan of another instance had listed 66 lines of names the instance lacks); ``hint`` says
    how to see them all.  A line indented deeper than the problem's own (verify's "so" lines)
    goes with it, so the cap and the count are of problems; past the cap in lines, a problem
    shows its first :data:`KNOCK_ONS_SHOWN` such lines and counts the rest.  Verify's list
    (``rebalance.cli_common``), the commands' and the console summary's are cut alike."""
    if len(lines) <= PROBLEMS_SHOWN:
        return list(lines)
    problems: list[list[str]] = []
    for line in lines:
        if problems and _indent(line) > _indent(problems[-1][0]):
            problems[-1].append(line)
        else:
            problems.append([line])
    out: list[str] = []
    cut = None  # the last line that says how many are left out: it carries the hint
    for first, *under in problems[:PROBLEMS_SHOWN]:
        out += [first, *under[:KNOCK_ONS_SHOWN]]
        if len(under) > KNOCK_ONS_SHOWN:
            cut = len(out)
            out.append(f"{' ' * _indent(under[0])}... and {len(under) - KNOCK_ONS_SHOWN} more "
                       "under it")
    if len(problems) > PROBLEMS_SHOWN:
        cut = len(out)
        out.append(f"{' ' * _indent(lines[0])}... and {len(problems) - PROBLEMS_SHOWN} more")
    if cut is not None:
        out[cut] += hint
    return out


def _indent(line: str) -> int:
    return len(line) - len(line.lstrip(" "))
