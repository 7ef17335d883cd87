"""Minimal-change re-planning from an earlier plan at a given period.

Everything before the period is fixed as it happened (details, reassignments, hires and the
work split); hires whose recruitment has begun (start before ``at + time_to_hire``) can be
neither undone nor added to; a detail under way at ``at`` runs to the end the old plan gave it
unless early recall is allowed.  From ``at`` on, every change against the old plan carries a
disruption cost, so the new plan moves away from the old one only where it pays.

How: people are pooled by their whole old schedule (``make_plan``'s ``pool_key``), so every
unit's members had identical plans and fixing a unit's counts fixes each person's past.  The
``adjust`` hook then fixes column bounds and appends *change* columns ``plus, minus >= 0`` with
``expr - plus + minus = old`` for each decision from ``at`` on (a detail count, a hire count,
the step of a home column, i.e. a reassignment taking effect), costing the disruption rate.
"""

from __future__ import annotations

import math
from collections import defaultdict
from collections.abc import Callable, Hashable
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import pandas as pd
import scipy.sparse as sp

from rebalance.analysis.limits import hire_rows
from rebalance.instance import Instance, Person
from rebalance.model import ColumnBlock, DetailRoute, Model, RowFamily
from rebalance.plan import PLAN_TABLES, Plan, cost_table, coverage_table
from rebalance.planning import PlanResult, make_plan
from rebalance.solve import SolveOptions
from rebalance.verify import unknown_names, verify_plan

__all__ = ["CHANGE_COLUMNS", "DisruptionCosts", "Replan", "ReplanError", "replan"]

# Verifier rules about the old plan's own figures, not about what it does.
BOOKKEEPING = frozenset({"costs", "hire_cost", "detail_cost", "reassignment_cost"})
CHANGE_COLUMNS = ("change", "kind", "who", "skill", "period", "old", "new", "disruption_cost")


@dataclass(frozen=True)
class DisruptionCosts:
    """Cost charged for each change against the old plan (money, like every other cost).

    ``detail_per_period``: a person-period of detail added, dropped or sent elsewhere counts
    once per period.  ``reassignment``: a reassignment added or dropped (moved in time or place:
    both).  ``hire``: one hire more or fewer in an office, skill, start period and funding.
    """

    detail_per_period: float = 2_000.0
    reassignment: float = 10_000.0
    hire: float = 5_000.0


@dataclass(frozen=True)
class Replan:
    """The new plan, what changed against the old one, and what the changes bought."""

    at: int
    result: PlanResult
    changes: pd.DataFrame   # CHANGE_COLUMNS, one row per change (``changes.csv``)
    summary: pd.DataFrame   # measure, old_plan, new_plan, difference (``replan.csv``)
    disruption_cost: float
    old_plan_violations: tuple[str, ...]
    notes: tuple[str, ...] = ()


class ReplanError(ValueError):
    """The old plan cannot be carried into the model (its past no longer fits the data)."""

    def __init__(self, problems: list[str]) -> None:
        super().__init__("; ".join(problems))
        self.problems = problems


def replan(instance: Instance, old: Plan, at: int, options: SolveOptions,
           costs: DisruptionCosts = DisruptionCosts(), allow_recall: bool = False,
           folder: str | Path | None = None) -> Replan:
    """Re-plan ``instance`` from period index ``at`` keeping close to ``old`` (read from
    ``folder``, if given: problems with its tables then name their files there)."""
    T = len(instance.periods)
    if not 0 <= at < T:
        raise ReplanError([f"period index {at} is outside the horizon (0..{T - 1})"])
    unknown = unknown_names(instance, old, folder)
    if unknown:  # an old plan of another instance, or one edited by hand
        # As read_plan's problems read: file:row: what is wrong (input, not a broken rule).
        raise ReplanError([f"{v.where}: {v.message}" for v in unknown])

    def file(table: str) -> str:
        return f"{table}.csv" if folder is None else str(Path(folder) / f"{table}.csv")

    names = instance.period_names
    ix = {name: t for t, name in enumerate(names)}
    people = {p.person: p for p in instance.staff}
    problems: list[str] = []
    details: dict[str, dict[int, tuple[str, str]]] = defaultdict(dict)
    detail_lines: dict[tuple[str, int], int] = {}
    for line, row in enumerate(old.details.itertuples(index=False), 2):
        if str(row.person) not in people or str(row.period) not in ix:
            problems.append(f"{file('details')}: person {row.person} in {row.period} is not "
                            "in the instance")
            continue
        details[str(row.person)][ix[str(row.period)]] = (str(row.from_office),
                                                          str(row.to_office))
        detail_lines[(str(row.person), ix[str(row.period)])] = line
    moves: dict[str, tuple[int, str]] = {}
    for row in old.reassignments.itertuples(index=False):
        if str(row.person) not in people or str(row.period) not in ix:
            problems.append(f"{file('reassignments')}: person {row.person} in {row.period} is "
                            "not in the instance")
            continue
        moves[str(row.person)] = (ix[str(row.period)], str(row.to_office))
    # A past reassignment the data rule out is the first thing to say: where the person's
    # home was then is in doubt, so their details and work are not checked against it.
    doubtful = {name: (t, dst) for name, (t, dst) in moves.items()
                if t < at and (not people[name].can_relocate or not people[name].is_present(t))}
    problems += [f"reassignment of {name} to {dst} in {names[t]}, before {names[at]}, is ruled "
                 f"out by the data now: {_why_not(instance, people[name], t, 'reassignment')}"
                 for name, (t, dst) in sorted(doubtful.items())]
    sure = {name: run for name, run in details.items() if name not in doubtful}
    problems += _details_not_from_home(instance, sure, detail_lines, moves, file)
    past_work = _past_work(old, ix, at)
    problems += _past_work_ruled_out(
        instance, {k: v for k, v in past_work.items() if k not in doubtful}, details, moves,
        at, file)
    problems += _started_hires_ruled_out(instance, old, at)
    if problems:
        raise ReplanError(problems)

    def pool_key(person: Person) -> Hashable:
        # The past work split too: a unit's members then had the same one, so the unit's
        # fixed work columns give each person's own back (issue: past work rewritten).
        return (tuple(sorted(details.get(person.person, {}).items())),
                moves.get(person.person),
                tuple((t, o, k, fte) for _, t, o, k, fte in past_work.get(person.person, ())))

    notes: list[str] = []

    def adjust(model: Model) -> Model:
        model = _with_committed_hires(instance, model, old, at)
        notes.clear()  # one model per call; keep the notes of the last
        return _fix_and_price(instance, model, old, details, moves, at, costs, allow_recall,
                              notes)

    keep = _runs_kept(details, at) if not allow_recall else []
    idle = _idle_runs(instance, keep)
    # The past keeps its details even where the data now have no demand there then.
    past = [(person, dst, t) for person, run in sorted(details.items())
            for t, (_, dst) in sorted(run.items()) if t < at]
    result = _with_past_work(instance, make_plan(instance, options, pool_key=pool_key,
                                                 adjust=adjust, keep_details=keep + past),
                             past_work, at)
    # The old plan's coverage table states the old demand; only its rules are checked here.
    # Its coverage table and its prices are bookkeeping at the old data's demand, prices and
    # horizon (a longer one adds years and salary periods): only its rules are checked.
    old_violations = tuple(str(v) for v in verify_plan(instance, old)
                           if not v.rule.startswith("coverage") and v.rule not in BOOKKEEPING)
    changes = _changes(instance, old, result.plan, at, costs) if result.plan is not None else \
        pd.DataFrame(columns=list(CHANGE_COLUMNS))
    # Priced from the person-level change table; equal to the model's change columns plus
    # the constant for decisions that lost their column (_fix_and_price's `forced`).
    disruption = float(changes["disruption_cost"].sum()) if len(changes) else 0.0
    summary = _summary(instance, old, result.plan, changes, disruption)
    return Replan(at, result, changes, summary, disruption, old_violations,
                  tuple(idle + notes + _past_work_idle(instance, past_work)))


def _under_way(run: dict[int, tuple[str, str]], at: int, t: int) -> bool:
    """``run`` (period -> route) is on detail on one route in every period from ``at - 1``
    through ``t``: a detail under way at ``at`` that goes on until ``t``."""
    return (at > 0 and t >= at and run.get(t) is not None
            and all(run.get(s) == run.get(t) for s in range(at - 1, t + 1)))


def _runs_kept(details: dict[str, dict[int, tuple[str, str]]],
               at: int) -> list[DetailRoute]:
    """The detail periods from ``at`` on of every run under way at ``at``: they go on."""
    return [(person, dst, t) for person, run in sorted(details.items())
            for t, (_, dst) in sorted(run.items()) if _under_way(run, at, t)]


def _idle_runs(instance: Instance, kept: list[DetailRoute]) -> list[str]:
    """A note for each kept detail period whose destination wants none of the person's
    skills then (the data changed since the old plan): the person is there with nothing to do,
    which only early recall ends."""
    wanted = {(d.office, d.skill, d.period) for d in instance.demand if d.fte > 0}
    people = {p.person: p for p in instance.staff}
    names = instance.period_names
    notes = []
    for person, dst, t in kept:
        if not any((dst, skill, t) in wanted for skill, _ in people[person].skills):
            notes.append(f"detail of {person} in {names[t]} (to {dst}) is under way and runs "
                         f"on, but {dst} has no demand left for their skills then; "
                         "early recall (--allow-recall) would end it")
    return notes


def _fix_and_price(instance: Instance, model: Model, old: Plan,
                   details: dict[str, dict[int, tuple[str, str]]],
                   moves: dict[str, tuple[int, str]], at: int, costs: DisruptionCosts,
                   allow_recall: bool, notes: list[str]) -> Model:
    offices = [o.name for o in instance.offices]
    skills = [s.name for s in instance.skills]
    names = instance.period_names
    ix = {name: t for t, name in enumerate(names)}
    staff = instance.staff
    people = {p.person: p for p in staff}
    lower, upper = model.col_lower.copy(), model.col_upper.copy()
    problems: list[str] = []
    # Disruption of old decisions from `at` on that have no column any more (the data took
    # it away: demand gone, the person left or may no longer move): unavoidable, so a
    # constant, but counted so the cost stage's objective is total_cost + disruption_cost.
    forced = 0.0

    def fix(col: int, value: float, what: str) -> None:
        if value > model.col_upper[col] + 1e-9 * max(1.0, value):
            problems.append(f"{what}: the old plan has {value:g} but the data now allow "
                            f"{model.col_upper[col]:g}")
        lower[col] = upper[col] = value

    def pin_hire(col: int, value: float) -> None:
        # Above the builder's cap, a hire column's bound is only what the demand left can
        # use (the rules' own caps were checked in _started_hires_ruled_out): a hire under
        # way stays even where demand fell, as one whose demand is gone does.
        lower[col] = upper[col] = value

    # -- details: old count per column; fixed before `at` and for runs under way ---------
    det = model.blocks["detail"]
    old_detail = np.zeros(len(det))
    seen: set[tuple[int, int, int, int]] = set()
    for j in range(len(det)):
        u, a, b, t = (int(det.keys[k][j]) for k in ("unit", "home", "office", "period"))
        rep = staff[model.units[u][0]].person
        route = details.get(rep, {}).get(t)
        # home -1: a relocatable person's detail leaves from the home in force, which the
        # fixed home columns decide; only the destination has to match.
        if route is not None and route[1] == offices[b] and (a < 0 or route[0] == offices[a]):
            old_detail[j] = len(model.units[u])
            seen.add((u, a, b, t))
    unit_of = {staff[p].person: u for u, members in enumerate(model.units) for p in members}

    def under_way(person: str, t: int) -> bool:
        return _under_way(details.get(person, {}), at, t)

    for person, by_period in details.items():
        for t, (src, dst) in by_period.items():
            key = (unit_of[person], offices.index(src), offices.index(dst), t)
            if key in seen or (key[0], -1, key[2], t) in seen:
                continue
            if t < at:
                problems.append(f"detail of {person} in {names[t]} ({src} -> {dst}), before "
                                f"{names[at]}, is ruled out by the data now: "
                                f"{_why_not(instance, people[person], t, 'detail')}")
                continue
            forced += costs.detail_per_period  # dropped, as changes.csv lists it
            if under_way(person, t) and not allow_recall:
                # Kept routes get their column (``keep_details``) unless the data now rule the
                # detail out (the person left, or may no longer go on detail): it ends, aloud.
                notes.append(f"detail of {person} in {names[t]} ({src} -> {dst}) was under way "
                             "but the data no longer allow it then; it ends")
    for j in range(len(det)):
        u, a, b, t = (int(det.keys[k][j]) for k in ("unit", "home", "office", "period"))
        col = det.start + j
        if t < at:
            fix(col, old_detail[j], f"detail {j}")
            continue
        if allow_recall or old_detail[j] == 0:
            continue
        if under_way(staff[model.units[u][0]].person, t):
            lower[col] = old_detail[j]

    # -- home columns: 1 from an old reassignment's period on --------------------------------
    home = model.blocks["home"]
    old_home = np.zeros(len(home))
    for j in range(len(home)):
        u, o, t = (int(home.keys[k][j]) for k in ("unit", "office", "period"))
        move = moves.get(staff[model.units[u][0]].person)
        if move is not None and move[1] == offices[o] and move[0] <= t:
            old_home[j] = 1.0
        if t < at:
            fix(home.start + j, old_home[j], f"home column {j}")
    homes = {(int(home.keys["unit"][j]), int(home.keys["office"][j]), int(home.keys["period"][j]))
             for j in range(len(home))}
    for person, (t, dst) in sorted(moves.items()):
        if t < at and (unit_of[person], offices.index(dst), t) not in homes:
            # Not a column: the move would silently vanish from the past.
            problems.append(f"reassignment of {person} to {dst} in {names[t]}, before "
                            f"{names[at]}, is ruled out by the data now: "
                            f"{_why_not(instance, people[person], t, 'reassignment')}")
        elif t >= at and not any((unit_of[person], offices.index(dst), s) in homes
                                 for s in range(t, len(names))):
            # A later column would carry the step and its price; none: dropped for certain.
            forced += costs.reassignment

    # -- hires: fixed while recruitment is under way or done -------------------------------
    hire = model.blocks["hire"]
    old_hires: dict[tuple[int, int, int, int], float] = defaultdict(float)
    for h in hire_rows(old):
        old_hires[(offices.index(h.office), skills.index(h.skill), ix[h.start_period],
                   int(h.funding == "new"))] += float(h.count)
    old_hire = np.zeros(len(hire))
    hire_cols: set[tuple[int, int, int, int]] = set()
    for j in range(len(hire)):
        o, k, s, new = (int(hire.keys[name][j]) for name in ("office", "skill", "period", "new"))
        hire_cols.add((o, k, s, new))
        old_hire[j] = old_hires.get((o, k, s, new), 0.0)
        if s < at + instance.skills[k].time_to_hire:
            pin_hire(hire.start + j, old_hire[j])
    for (o, k, s, new), n in old_hires.items():
        if (o, k, s, new) not in hire_cols and s < at + instance.skills[k].time_to_hire:
            # Not expected: the data's reasons were refused before the model was built, and
            # _with_committed_hires gives the others a column.
            problems.append(f"{n:g} hire(s) of {skills[k]} at {offices[o]} from {names[s]} "
                            "have started, but the model has no place for them")
        elif (o, k, s, new) not in hire_cols:
            forced += costs.hire * n  # not started, and no demand left it could cover

    # -- work before `at`: the split as it happened ------------------------------------------
    work = model.blocks["work"]
    old_work: dict[tuple[int, int, int, int], float] = defaultdict(float)
    w = old.work
    for person, period, office, skill, fte in zip(
            w["person"].astype(str), w["period"].astype(str), w["office"].astype(str),
            w["skill"].astype(str), w["fte"].astype(float), strict=True):
        wt = ix.get(period)
        if wt is None or wt >= at or person not in unit_of:
            continue
        old_work[(unit_of[person], offices.index(office), skills.index(skill), wt)] += fte
    for j in range(len(work)):
        wkey = (int(work.keys["unit"][j]), int(work.keys["office"][j]),
                int(work.keys["skill"][j]), int(work.keys["period"][j]))
        if wkey[3] < at:
            # Exactly, not clipped to the column's cap nor given slack: _past_work_ruled_out
            # refused past work the data no longer allow (clipping had rewritten a1's 1.0 as
            # 0.5 after an FTE cut, and a 1e-7 slack made 1.0 into 0.9999999, more with each
            # re-plan of a re-plan).  Past work with no column (the data now have no demand
            # there) counts for nothing here and is put back in the table by
            # _with_past_work.
            fix(work.start + j, old_work.get(wkey, 0.0), f"work column {j}")
    if problems:
        raise ReplanError(problems)

    # -- change columns from `at` on ---------------------------------------------------------
    exprs: list[tuple[list[int], list[float], float, float, str, int]] = []
    for j in range(len(det)):
        t = int(det.keys["period"][j])
        col = det.start + j
        if t >= at and lower[col] < upper[col]:
            exprs.append(([col], [1.0], old_detail[j], costs.detail_per_period,
                          f"detail column {j}", 0))
    home_col = {tuple(int(home.keys[k][j]) for k in ("unit", "office", "period")): home.start + j
                for j in range(len(home))}
    for (u, o, t), col in home_col.items():
        if t < at:
            continue
        before = home_col.get((u, o, t - 1))
        cols, vals = [col], [1.0]
        old_step = old_home[col - home.start]
        if before is not None:
            cols.append(before)
            vals.append(-1.0)
            old_step -= old_home[before - home.start]
        exprs.append((cols, vals, old_step, costs.reassignment,
                      f"reassignment of unit {u} to {offices[o]} in {names[t]}", 1))
    for j in range(len(hire)):
        col = hire.start + j
        if lower[col] < upper[col]:
            exprs.append(([col], [1.0], old_hire[j], costs.hire, f"hire column {j}", 2))
    # The old plan's decisions as a first plan to try: at a short limit the search had
    # handed back a plan that changed 105 things and left twice the shortfall of keeping it.
    hint = np.zeros(model.num_cols)
    hint[det.start:det.stop] = old_detail
    hint[home.start:home.stop] = old_home
    hint[hire.start:hire.stop] = old_hire
    return _with_forced_disruption(
        _with_change_columns(replace(model, col_lower=lower, col_upper=upper, hint=hint), exprs),
        forced)


# (line in work.csv, period index, office, skill, fte) of one person's work before `at`.
PastWork = tuple[int, int, str, str, float]


def _past_work(old: Plan, ix: dict[str, int], at: int) -> dict[str, list[PastWork]]:
    """The old plan's work rows before ``at`` by person, with their line in ``work.csv``."""
    out: dict[str, list[PastWork]] = defaultdict(list)
    w = old.work
    for line, (person, period, office, skill, fte) in enumerate(zip(
            w["person"].astype(str), w["period"].astype(str), w["office"].astype(str),
            w["skill"].astype(str), w["fte"].astype(float), strict=True), 2):
        t = ix.get(period)
        if t is not None and t < at:
            out[person].append((line, t, office, skill, float(fte)))
    for rows in out.values():
        rows.sort(key=lambda r: r[1:4])
    return out


def _home_in_force(person: Person, moves: dict[str, tuple[int, str]], t: int) -> str:
    move = moves.get(person.person)
    return move[1] if move is not None and move[0] <= t else person.home_office


def _details_not_from_home(instance: Instance, details: dict[str, dict[int, tuple[str, str]]],
                           lines: dict[tuple[str, int], int],
                           moves: dict[str, tuple[int, str]],
                           file: Callable[[str], str]) -> list[str]:
    """Refusals for old details that leave from somewhere other than the person's home then:
    the old plan contradicts itself or the data's home office, and the model has no such
    route (it had been refused as "ruled out by the data ... no place for it")."""
    people = {p.person: p for p in instance.staff}
    names = instance.period_names
    problems = []
    for person, run in sorted(details.items()):
        for t, (src, _dst) in sorted(run.items()):
            home = _home_in_force(people[person], moves, t)
            if src != home:
                after = (f", after the reassignment in {file('reassignments')}"
                         if home != people[person].home_office else "")
                problems.append(
                    f"{file('details')}:{lines[(person, t)]}: detail of {person} in {names[t]} "
                    f"leaves from {src}, but {person}'s home then is {home} (staff.csv "
                    f"home_office{after}): from_office should be {home}")
    return problems


def _past_work_ruled_out(instance: Instance, past_work: dict[str, list[PastWork]],
                         details: dict[str, dict[int, tuple[str, str]]],
                         moves: dict[str, tuple[int, str]], at: int,
                         file: Callable[[str], str]) -> list[str]:
    """Refusals for work before ``at`` that cannot have happened under the current data (the
    person had left, lacks the skill, has less FTE than it, or was elsewhere in the old plan
    itself).  Such work is refused, never rewritten: it had been dropped or clipped in
    silence.  Work where the data now have no demand is not refused: it happened, and is kept
    (it covers nothing)."""
    people = {p.person: p for p in instance.staff}
    names = instance.period_names
    problems = []
    for name, rows in sorted(past_work.items()):
        person = people[name]
        total: dict[int, float] = defaultdict(float)
        first_line: dict[int, int] = {}
        for line, t, office, skill, fte in rows:
            where = f"{file('work')}:{line}: {name} works {fte:g} FTE on {skill} at {office} in "
            where += f"{names[t]}, before {names[at]}, but"
            total[t] += fte
            first_line.setdefault(t, line)
            if not person.is_present(t):
                problems.append(f"{where} has left by then (staff.csv last_period)")
                continue
            if skill not in {k for k, _ in person.skills}:
                problems.append(f"{where} does not have {skill} (staff.csv skills)")
            run = details.get(name, {})
            at_office = run[t][1] if t in run else _home_in_force(person, moves, t)
            if office != at_office:
                problems.append(f"{where} the old plan has them at {at_office} then "
                                "(its details.csv and reassignments.csv)")
        for t, fte in sorted(total.items()):
            available = instance.available_fte(person, t)
            if person.is_present(t) and fte > available + 1e-9 * max(1.0, fte):
                problems.append(
                    f"{file('work')}:{first_line[t]}: {name} works {fte:g} FTE in {names[t]}, "
                    f"before {names[at]}, but the data now give them {available:g} then "
                    "(staff.csv fte, less expected attrition.csv if any)")
    return problems


def _past_work_idle(instance: Instance, past_work: dict[str, list[PastWork]]) -> list[str]:
    """A note on past work kept where the data now have no demand: it happened, so it stays
    in work.csv, but it covers nothing (demand removed, or a scenario's multiplier 0)."""
    wanted = {(d.office, d.skill, d.period) for d in instance.demand if d.fte > 0}
    names = instance.period_names
    idle = [f"{name} on {skill} at {office} in {names[t]}"
            for name, rows in sorted(past_work.items()) for _, t, office, skill, _ in rows
            if (office, skill, t) not in wanted]
    if not idle:
        return []
    more = f" and {len(idle) - 3} more" if len(idle) > 3 else ""
    return [f"work before the re-plan period is kept as it happened where the data now have "
            f"no demand, and covers nothing there: {', '.join(idle[:3])}{more}"]


def _with_past_work(instance: Instance, result: PlanResult,
                    past_work: dict[str, list[PastWork]], at: int) -> PlanResult:
    """``result`` with each person's work before ``at`` as the old plan had it, row for row.

    The model fixed it (its columns pinned to the old values), but the plan's table is
    decoded from the solution: a row with no column (no demand there now) was missing, and
    a pooled split came back as an even share with rounding (0.79999992 for 0.8).  Where
    the old plan has no row for a person and period (someone new, say), the decoded ones
    stand.  Coverage and verification are done again on the table as it is written.
    """
    plan = result.plan
    if plan is None or not past_work:
        return result
    people = {p.person: p for p in instance.staff}
    names = instance.period_names
    ix = {name: t for t, name in enumerate(names)}
    kept = {(name, t) for name, rows in past_work.items() for _, t, _, _, _ in rows}
    w = plan.work
    mask = [(str(p), ix[str(q)]) not in kept for p, q in zip(w["person"], w["period"],
                                                              strict=True)]
    # At today's proficiency, as the model counted it.
    old_rows = pd.DataFrame(
        [(name, names[t], office, skill, fte, fte * people[name].proficiency(skill))
         for name, rows in past_work.items() for _, t, office, skill, fte in rows],
        columns=list(PLAN_TABLES["work"]))
    work = pd.concat([w.loc[mask, list(PLAN_TABLES["work"])], old_rows], ignore_index=True)
    order = work["period"].map(ix)
    work = (work.assign(_t=order).sort_values(["person", "_t", "skill"], kind="stable")
            .drop(columns="_t").reset_index(drop=True))
    new_plan = replace(plan, work=work,
                       coverage=coverage_table(instance, work, plan.hires))
    return replace(result, plan=new_plan, violations=tuple(verify_plan(instance, new_plan)))


def _why_not(instance: Instance, person: Person, t: int, what: str) -> str:
    """Which data rule out ``person``'s detail or reassignment in period ``t`` (for a refusal:
    the past cannot change, and each person's flags hold for the whole horizon)."""
    if not person.is_present(t):
        return f"{person.person} has left by then (staff.csv last_period)"
    if what == "detail" and not person.can_detail:
        return f"staff.csv says {person.person} may not go on detail (can_detail)"
    if what == "detail" and instance.policy.max_consecutive_detail_periods == 0:
        return "settings.toml allows no details (max_consecutive_detail_periods = 0)"
    if what == "reassignment" and not person.can_relocate:
        return f"staff.csv says {person.person} may not be reassigned (can_relocate)"
    return "the model has no place for it"


def _started_hires_ruled_out(instance: Instance, old: Plan, at: int) -> list[str]:
    """Refusals for the old plan's hires whose recruitment has begun (start before ``at`` +
    time to hire) that the data now rule out, each naming the data, as for a past detail or
    reassignment.  Checked here, before any model: cutting vacancies below such hires had
    been refused from one hire column ("the data now allow 1", naming no file) and reported
    infeasible (exit 4) from another, where the pruned column was added back."""
    skills = {s.name: s for s in instance.skills}
    offices = {o.name: o for o in instance.offices}
    names = instance.period_names
    ix = {name: t for t, name in enumerate(names)}
    started: dict[tuple[str, str, int, str], int] = defaultdict(int)
    for h in hire_rows(old):
        s = ix[h.start_period]
        if s < at + skills[h.skill].time_to_hire:
            started[(h.office, h.skill, s, h.funding)] += h.count
    problems = []

    def refuse(count: int, office: str, skill: str, s: int, why: str) -> None:
        problems.append(f"{count:g} hire(s) of {skill} at {office} from {names[s]} have "
                        f"started (their recruitment has begun), but the data now rule them "
                        f"out: {why}")

    by_start: dict[tuple[str, int], int] = defaultdict(int)
    by_vacancy: dict[tuple[str, str], list[tuple[int, int]]] = defaultdict(list)
    for (office, skill, s, funding), count in sorted(started.items(), key=lambda i: i[0][2]):
        tth = skills[skill].time_to_hire
        if s < tth:
            refuse(count, office, skill, s, f"it starts before {skill}'s time to hire ({tth} "
                   "periods from the horizon's start, skills.csv time_to_hire)")
        elif offices[office].max_hires_per_period == 0:
            refuse(count, office, skill, s,
                   f"{office} may not hire (offices.csv max_hires_per_period = 0)")
        else:
            by_start[(office, s)] += count
            if funding == "vacancy":
                by_vacancy[(office, skill)].append((s, count))
    for (office, s), count in by_start.items():
        cap = offices[office].max_hires_per_period
        if cap is not None and count > cap:
            problems.append(f"{count} hires at {office} from {names[s]} have started (their "
                            "recruitment has begun), but the data now allow "
                            f"{cap} (offices.csv max_hires_per_period)")
    for (office, skill), starts in by_vacancy.items():
        funded = instance.vacancies.get((office, skill), 0)
        filled = sum(count for _, count in starts)
        if filled > funded:
            when = ", ".join(f"{count} from {names[s]}" for s, count in starts)
            problems.append(f"{filled} hire(s) of {skill} at {office} into funded vacancies "
                            f"have started ({when}; their recruitment has begun), but the data "
                            f"now fund {funded} (vacancies.csv)")
    return problems


def _with_committed_hires(instance: Instance, model: Model, old: Plan, at: int) -> Model:
    """Add hire columns the builder pruned (no demand left for them to cover) for hires whose
    recruitment has begun: they still take seats, hiring slots, vacancies and budget.

    The column goes at the end of the hire block (plan extraction decodes blocks by range),
    with its coefficients in the existing limit rows; a limit with no row yet (the builder
    writes none without a variable term) gets one.
    """
    offices = [o.name for o in instance.offices]
    skills = [s.name for s in instance.skills]
    names = instance.period_names
    hire = model.blocks["hire"]
    have = {tuple(int(hire.keys[k][j]) for k in ("office", "skill", "period", "new"))
            for j in range(len(hire))}
    missing: dict[tuple[int, int, int, int], int] = defaultdict(int)
    for h in hire_rows(old):
        key = (offices.index(h.office), skills.index(h.skill), names.index(h.start_period),
               int(h.funding == "new"))
        # Before the skill's time to hire the rules allow no hire at all: such a hire is
        # refused in _started_hires_ruled_out, not carried in.
        if (key not in have and instance.skills[key[1]].time_to_hire <= key[2]
                < at + instance.skills[key[1]].time_to_hire):
            missing[key] += h.count
    for (o, k, s, new), count in sorted(missing.items()):
        model = _insert_hire(instance, model, o, k, s, new, count)
    return model


def _insert_hire(instance: Instance, model: Model, o: int, k: int, s: int, new: int,
                 count: int) -> Model:
    names = instance.period_names
    T = len(names)
    office, skill = instance.offices[o], instance.skills[k]
    hire = model.blocks["hire"]
    p = hire.stop  # the new column's index
    row_of = {(f.name, label): f.start + i for f in model.rows for i, label in
              enumerate(f.labels)}
    same_start = [hire.start + j for j in range(len(hire))
                  if int(hire.keys["office"][j]) == o and int(hire.keys["period"][j]) == s]
    vacancy_cols = [hire.start + j for j in range(len(hire))
                    if int(hire.keys["office"][j]) == o and int(hire.keys["skill"][j]) == k
                    and int(hire.keys["new"][j]) == 0]
    coef: dict[int, float] = {}
    new_rows: list[tuple[str, str, list[int], float]] = []  # family, label, other cols, upper

    def limit(family: str, label: str, value: float, others: list[int], upper: float) -> None:
        row = row_of.get((family, label))
        if row is not None:
            coef[row] = coef.get(row, 0.0) + value
        else:
            new_rows.append((family, label, others, upper))
            coef[-len(new_rows)] = value

    if office.seats is not None:
        for t in range(s, T):
            heads = sum(1 for x in instance.staff if x.home_office == office.name
                        and x.is_present(t))
            limit("seats", f"{office.name} in {names[t]}", 1.0, [], office.seats - heads)
    if office.max_hires_per_period is not None:
        limit("max_hires", f"{office.name} in {names[s]}", 1.0, same_start,
              float(office.max_hires_per_period))
    if not new:
        limit("vacancies", f"{skill.name} at {office.name}", 1.0, vacancy_cols,
              float(instance.vacancies.get((office.name, skill.name), 0)))
    for year in instance.years:
        budget = instance.budget(year)
        if budget is None or budget.hiring is None:
            continue
        amount = skill.onboarding_cost if instance.periods[s].year == year else 0.0
        if new:
            amount += skill.salary_per_period * sum(
                1 for t in range(s, T) if instance.periods[t].year == year)
        if amount:
            limit("hiring_budget", f"hiring budget {year}", amount, [], budget.hiring)

    m, n = model.num_rows, model.num_cols
    csc = model.matrix.tocsc()
    rows_idx = [r if r >= 0 else m + (-r - 1) for r in coef]
    column = sp.csc_matrix((list(coef.values()), (rows_idx, [0] * len(coef))),
                           shape=(m + len(new_rows), 1))
    extra_r = [i for i, (_, _, others, _) in enumerate(new_rows) for _ in others]
    extra_c = [c for (_, _, others, _) in new_rows for c in others]
    extra = sp.csc_matrix(([1.0] * len(extra_c), (extra_r, extra_c)), shape=(len(new_rows), n))
    grown = sp.vstack([csc, extra], format="csc")
    matrix = sp.hstack([grown[:, :p], column, grown[:, p:]], format="csr")

    def insert(array: np.ndarray, value: float) -> np.ndarray:
        return np.insert(array, p, value)

    blocks = {}
    for name, block in model.blocks.items():
        if name == "hire":
            keys = {key: np.append(v, {"office": o, "skill": k, "period": s, "new": new}[key])
                    for key, v in block.keys.items()}
            blocks[name] = ColumnBlock(name, block.start, block.stop + 1, keys)
        elif block.start >= p:
            blocks[name] = ColumnBlock(name, block.start + 1, block.stop + 1, block.keys)
        else:
            blocks[name] = block
    families = list(model.rows)
    for i, (family, label, _, _) in enumerate(new_rows):
        families.append(RowFamily(family, m + i, m + i + 1, (label,)))
    return replace(
        model,
        matrix=matrix,
        row_lower=np.concatenate([model.row_lower, np.full(len(new_rows), -math.inf)]),
        row_upper=np.concatenate([model.row_upper, [r[3] for r in new_rows]]),
        col_lower=insert(model.col_lower, 0.0),
        col_upper=insert(model.col_upper, float(count)),
        is_integer=np.insert(model.is_integer, p, True),
        shortfall_weight=insert(model.shortfall_weight, 0.0),
        cost=insert(model.cost, skill.onboarding_cost + new * skill.salary_per_period * (T - s)),
        blocks=blocks,
        rows=tuple(families),
    )


def _with_change_columns(model: Model, exprs: list[tuple[list[int], list[float], float, float,
                                                         str, int]]) -> Model:
    """Append plus/minus columns and one equality row per expression (see module doc)."""
    n, m, k = model.num_cols, model.num_rows, len(exprs)
    rows, cols, vals = [], [], []
    for i, (ecols, evals, _, _, _, _) in enumerate(exprs):
        rows += [i] * (len(ecols) + 2)
        cols += [*ecols, n + 2 * i, n + 2 * i + 1]
        vals += [*evals, -1.0, 1.0]
    bottom = sp.csr_matrix((vals, (rows, cols)), shape=(k, n + 2 * k))
    top = sp.hstack([model.matrix, sp.csr_matrix((m, 2 * k))], format="csr")
    rhs = np.asarray([e[2] for e in exprs], dtype=float)
    rate = np.repeat(np.asarray([e[3] for e in exprs], dtype=float), 2)
    blocks = dict(model.blocks)
    blocks["change"] = ColumnBlock(
        "change", n, n + 2 * k,
        {"kind": np.repeat(np.asarray([e[5] for e in exprs], dtype=np.int64), 2),
         "row": np.repeat(np.arange(k, dtype=np.int64), 2)})
    family = RowFamily("replan_changes", m, m + k, tuple(e[4] for e in exprs))
    return replace(
        model,
        matrix=sp.vstack([top, bottom], format="csr"),
        row_lower=np.concatenate([model.row_lower, rhs]),
        row_upper=np.concatenate([model.row_upper, rhs]),
        col_lower=np.concatenate([model.col_lower, np.zeros(2 * k)]),
        col_upper=np.concatenate([model.col_upper, np.full(2 * k, math.inf)]),
        is_integer=np.concatenate([model.is_integer, np.zeros(2 * k, bool)]),
        shortfall_weight=np.concatenate([model.shortfall_weight, np.zeros(2 * k)]),
        cost=np.concatenate([model.cost, rate]),
        blocks=blocks,
        rows=(*model.rows, family),
        hint=None if model.hint is None else np.concatenate([model.hint, np.zeros(2 * k)]),
    )


def _with_forced_disruption(model: Model, amount: float) -> Model:
    """Append one continuous column fixed at 1 costing ``amount``: the model has no constant
    term, and the solvers and gap figures all read ``cost @ x``."""
    if amount <= 0:
        return model
    n = model.num_cols
    blocks = dict(model.blocks)
    blocks["forced_change"] = ColumnBlock("forced_change", n, n + 1, {})
    return replace(
        model,
        matrix=sp.hstack([model.matrix, sp.csr_matrix((model.num_rows, 1))], format="csr"),
        col_lower=np.append(model.col_lower, 1.0),
        col_upper=np.append(model.col_upper, 1.0),
        is_integer=np.append(model.is_integer, False),
        shortfall_weight=np.append(model.shortfall_weight, 0.0),
        cost=np.append(model.cost, amount),
        blocks=blocks,
        hint=None if model.hint is None else np.append(model.hint, 1.0),
    )


# --------------------------------------------------------------------------------------------
# what changed, and what it bought


def _changes(instance: Instance, old: Plan, new: Plan, at: int,
             costs: DisruptionCosts) -> pd.DataFrame:
    names = instance.period_names
    ix = {name: t for t, name in enumerate(names)}
    rows: list[tuple[object, ...]] = []

    def details_of(plan: Plan) -> dict[tuple[str, int], str]:
        return {(str(r.person), ix[str(r.period)]): f"{r.from_office} -> {r.to_office}"
                for r in plan.details.itertuples(index=False)}

    a, b = details_of(old), details_of(new)
    for person, t in sorted(set(a) | set(b), key=lambda k: (k[1], k[0])):
        before, after = a.get((person, t), ""), b.get((person, t), "")
        if before != after:
            change = "added" if not before else "dropped" if not after else "rerouted"
            rows.append((change, "detail", person, "", names[t], before, after,
                         costs.detail_per_period * (2 if change == "rerouted" else 1)))

    def moves_of(plan: Plan) -> dict[str, tuple[str, str]]:
        return {str(r.person): (str(r.period), f"{r.from_office} -> {r.to_office}")
                for r in plan.reassignments.itertuples(index=False)}

    ma, mb = moves_of(old), moves_of(new)
    for person in sorted(set(ma) | set(mb)):
        move_before, move_after = ma.get(person), mb.get(person)
        if move_before == move_after:
            continue
        change = ("added" if move_before is None else "dropped" if move_after is None
                  else "changed")
        period = (move_after[0] if move_after is not None
                  else move_before[0] if move_before is not None else "")
        rows.append((change, "reassignment", person, "", period,
                     "" if move_before is None else f"{move_before[1]} from {move_before[0]}",
                     "" if move_after is None else f"{move_after[1]} from {move_after[0]}",
                     costs.reassignment * (2 if change == "changed" else 1)))

    def hires_of(plan: Plan) -> dict[tuple[str, str, str, str], int]:
        out: dict[tuple[str, str, str, str], int] = defaultdict(int)
        for h in hire_rows(plan):
            out[(h.office, h.skill, h.start_period, h.funding)] += h.count
        return out

    ha, hb = hires_of(old), hires_of(new)
    for key in sorted(set(ha) | set(hb), key=lambda k: (ix[k[2]], k)):
        before_n, after_n = ha.get(key, 0), hb.get(key, 0)
        if before_n != after_n:
            office, skill, period, funding = key
            rows.append(("more" if after_n > before_n else "fewer", f"hire ({funding})", office,
                         skill, period, before_n, after_n, costs.hire * abs(after_n - before_n)))
    frame = pd.DataFrame(rows, columns=list(CHANGE_COLUMNS))
    del at  # every change is from `at` on by construction; the tests check it
    return frame


def _measures(instance: Instance, plan: Plan) -> dict[str, float]:
    """Headline figures of a plan against ``instance`` (coverage and costs recomputed, so an
    old plan is measured against the new data)."""
    coverage = coverage_table(instance, plan.work, plan.hires)
    spend = cost_table(instance, plan.details, plan.reassignments, plan.hires)
    out = {
        "weighted_shortfall": float(coverage["weighted_shortfall"].sum()),
        "shortfall_fte_periods": float(coverage["shortfall_fte"].sum()),
        "total_cost": float(spend["cost"].sum()),
    }
    by_kind = spend.groupby("kind")["cost"].sum()
    for kind, cost in by_kind.items():
        out[f"cost_{kind}"] = float(cost)
    out["hires"] = float(plan.hires["count"].sum()) if len(plan.hires) else 0.0
    out["detail_periods"] = float(len(plan.details))
    out["reassignments"] = float(len(plan.reassignments))
    return out


def _under_current_data(instance: Instance, old: Plan) -> Plan:
    """The old plan's decisions as the current data would have them: work only by people
    present then, at their current proficiency and within their current FTE, and every move
    and hire at current prices.  (Its own tables hold the old data's output and prices: a
    person who has since left still covered demand there, which overstated the old plan.)"""
    people = {p.person: p for p in instance.staff}
    ix = {name: t for t, name in enumerate(instance.period_names)}
    work = old.work.copy()
    person = work["person"].astype(str)
    t = work["period"].astype(str).map(ix)
    present = [name in people and not pd.isna(i) and people[name].is_present(int(i))
               for name, i in zip(person, t, strict=True)]
    work = work[present].copy()
    person, t = person[present], t[present]
    # Within what each person has now, shares kept.
    had = work.groupby([person, t])["fte"].transform("sum")
    has = [instance.available_fte(people[name], int(i)) for name, i in zip(person, t,
                                                                            strict=True)]
    work["fte"] = work["fte"] * np.minimum(1.0, np.asarray(has) / had.clip(lower=1e-12))
    work["output_fte"] = work["fte"] * [people[name].proficiency(str(k))
                                        for name, k in zip(person, work["skill"], strict=True)]
    details = old.details.copy()
    details["cost"] = [instance.detail_cost_per_period(str(a), str(b))
                       for a, b in zip(details["from_office"], details["to_office"],
                                       strict=True)]
    moves = old.reassignments.copy()
    moves["cost"] = [instance.relocation_cost(str(a), str(b))
                     for a, b in zip(moves["from_office"], moves["to_office"], strict=True)]
    hires = old.hires.copy()
    hires["onboarding_cost"] = [instance.skill(str(k)).onboarding_cost * int(n)
                                for k, n in zip(hires["skill"], hires["count"], strict=True)]
    return replace(old, work=work, details=details, reassignments=moves, hires=hires)


def _summary(instance: Instance, old: Plan, new: Plan | None, changes: pd.DataFrame,
             disruption: float) -> pd.DataFrame:
    before = _measures(instance, _under_current_data(instance, old))
    after = _measures(instance, new) if new is not None else {}
    rows = [(k, before[k], after.get(k, math.nan), after.get(k, math.nan) - before[k])
            for k in before]
    rows.append(("changes", 0.0, float(len(changes)), float(len(changes))))
    rows.append(("disruption_cost", 0.0, disruption, disruption))
    return pd.DataFrame(rows, columns=["measure", "old_plan", "new_plan", "difference"])
