"""Minimal-change re-planning from an earlier plan at a given period.

Everything before the period is fixed as it happened (details, reassignments, hires and the
work split); hires whose recruitment has begun (start before ``at + time_to_hire``) can be
neither undone nor added to; a detail under way at ``at`` runs to the end the old plan gave it
unless early recall is allowed.  From ``at`` on, every change against the old plan carries a
disruption cost, so the new plan moves away from the old one only where it pays.

How: people are pooled by their whole old schedule (``make_plan``'s ``pool_key``), so every
unit's members had identical plans and fixing a unit's counts fixes each person's past.  The
old plan is checked against the current data before any model (``replan_checks``); the
``adjust`` hook then fixes the past and prices each change from ``at`` on (``replan_model``).
This module runs the re-plan and says what changed and what it bought.
"""

from __future__ import annotations

import math
from collections.abc import Hashable
from dataclasses import dataclass, replace
from pathlib import Path

import pandas as pd

from rebalance.analysis.change_facts import work_on_current_data
from rebalance.analysis.change_reasons import change_reasons
from rebalance.analysis.reasons import Reasons, reasons
from rebalance.analysis.replan_checks import PastWork, ReplanError, _checked_past
from rebalance.analysis.replan_model import (
    DisruptionCosts,
    _fix_and_price,
    _runs_kept,
    _with_committed_hires,
)
from rebalance.analysis.scenario_actions import hire_changes, main_skills, plan_actions
from rebalance.instance import Instance, Person
from rebalance.model import DetailRoute, Model, group_units
from rebalance.plan import PLAN_TABLES, Plan, cost_table, coverage_table
from rebalance.planning import PlanResult, make_plan
from rebalance.solve import SolveOptions
from rebalance.verify import verify_plan

__all__ = ["CHANGE_COLUMNS", "REPLAN_COLUMNS", "SPLIT_TOLERANCE_FTE", "DisruptionCosts", "Replan",
           "ReplanError", "plan_measures", "replan", "work_split_changes"]

# Verifier rules about the old plan's own figures, not about what it does.
BOOKKEEPING = frozenset({"costs", "hire_cost", "detail_cost", "reassignment_cost"})
# ``reason``: why, from the data and both plans (change_reasons), one short sentence.
CHANGE_COLUMNS = ("change", "kind", "who", "skill", "period", "old", "new", "disruption_cost",
                  "reason")
# replan.csv's columns as written here: one row per measure.  A re-plan with a plan made
# ahead adds planned_ahead.AHEAD_COLUMN after them.
REPLAN_COLUMNS = ("measure", "old_plan", "new_plan", "difference")

# The default rates, made once as a call in the signature was (ruff B008 cannot see
# that the dataclass, imported from replan_model, is frozen).
_DEFAULT_COSTS = DisruptionCosts()

# FTE two plans' work rows may differ by and still count as the same split: the solver's
# float dust (0.79999992 for 0.8), far below any share a planner would give.
SPLIT_TOLERANCE_FTE = 1e-6


@dataclass(frozen=True)
class Replan:
    """The new plan, what changed against the old one, and what the changes bought."""

    at: int
    result: PlanResult
    changes: pd.DataFrame   # CHANGE_COLUMNS, one row per change (``changes.csv``)
    summary: pd.DataFrame   # REPLAN_COLUMNS, one row per measure (``replan.csv``)
    disruption_cost: float
    old_plan_violations: tuple[str, ...]
    notes: tuple[str, ...] = ()
    # The new plan's own reasons (``reasons.csv``), worked out once for the change reasons
    # and kept for the writer; None without a new plan.
    reasons: Reasons | None = None


def replan(instance: Instance, old: Plan, at: int, options: SolveOptions,
           costs: DisruptionCosts = _DEFAULT_COSTS, allow_recall: bool = False,
           folder: str | Path | None = None) -> Replan:
    """Re-plan ``instance`` from period index ``at`` keeping close to ``old`` (read from
    ``folder``, if given: problems with its tables then name their files there)."""
    # Verified once: the refusals of its past and the violations reported beside the new
    # plan both read it (it had been verified twice, a full pass each time).
    verified = verify_plan(instance, old, folder=folder)
    details, moves, past_work = _checked_past(instance, old, at, folder, verified)

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
    # The old plan's coverage table and prices are bookkeeping at the old data's demand,
    # prices and horizon (a longer one adds years and salary periods): only its rules count.
    old_violations = tuple(str(v) for v in verified
                           if not v.rule.startswith("coverage") and v.rule not in BOOKKEEPING)
    # The old plan on the current data, made once: replan.csv scores it and the change
    # reasons read its staff's output (each had made its own).
    old_now = _under_current_data(instance, old)
    new_reasons = None
    if result.plan is not None:
        changes = _changes(instance, old, result.plan, costs)
        new_reasons = reasons(instance, result.plan, replanned_at=at)
        # A change nothing in the tables explains may be where the re-plan's search stopped:
        # its own gap (the old plan was made for other data, so it has none here).
        changes["reason"] = change_reasons(instance, old, result.plan, changes, new_reasons,
                                           old_work_now=old_now.work,
                                           shortfall_gap=result.solve.gap_on_shortfall)
    else:
        changes = pd.DataFrame(columns=list(CHANGE_COLUMNS))
    # Priced from the person-level change table; equal to the model's change columns plus
    # the constant for decisions that lost their column (_fix_and_price's `forced`).
    disruption = float(changes["disruption_cost"].sum()) if len(changes) else 0.0
    summary = _summary(instance, old, old_now, result.plan, changes, disruption, at)
    return Replan(at, result, changes, summary, disruption, old_violations,
                  tuple(idle + notes + _past_work_idle(instance, past_work)), new_reasons)


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


# --------------------------------------------------------------------------------------------
# what changed, and what it bought


def _changes(instance: Instance, old: Plan, new: Plan, costs: DisruptionCosts) -> pd.DataFrame:
    """Every difference between ``old`` and ``new``, priced: all from the re-plan period on,
    since the past is fixed (the tests check it).  A detail's or reassignment's ``skill`` is
    the one the person works most at the destination then, as ``scenario_actions.csv`` has it
    (the new plan's; the old one's for a dropped one; empty where there is no work)."""
    names = instance.period_names
    ix = {name: t for t, name in enumerate(names)}
    skills = {"old": main_skills(old), "new": main_skills(new)}
    rows: list[tuple[object, ...]] = []

    def skill_at(side: str, person: str, period: str, route: str) -> str:
        return skills[side].get((person, period, route.split(" -> ")[-1]), "")

    def details_of(plan: Plan) -> dict[tuple[str, int], str]:
        return {(str(r.person), ix[str(r.period)]): f"{r.from_office} -> {r.to_office}"
                for r in plan.details.itertuples(index=False)}

    a, b = details_of(old), details_of(new)
    for person, t in sorted(set(a) | set(b), key=lambda k: (k[1], k[0])):
        before, after = a.get((person, t), ""), b.get((person, t), "")
        if before != after:
            change = "added" if not before else "dropped" if not after else "rerouted"
            skill = (skill_at("old", person, names[t], before) if not after
                     else skill_at("new", person, names[t], after))
            rows.append((change, "detail", person, skill, names[t], before, after,
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
        side, kept = ("new", move_after) if move_after is not None else ("old", move_before)
        if kept is None:  # both None: equal, skipped above
            continue
        period, route = kept
        rows.append((change, "reassignment", person, skill_at(side, person, period, route),
                     period,
                     "" if move_before is None else f"{move_before[1]} from {move_before[0]}",
                     "" if move_after is None else f"{move_after[1]} from {move_after[0]}",
                     costs.reassignment * (2 if change == "changed" else 1)))
    rows.extend(_hire_changes(old, new, ix, costs))
    return pd.DataFrame(rows, columns=list(CHANGE_COLUMNS[:-1]))  # reason: added after


def _hire_changes(old: Plan, new: Plan, ix: dict[str, int],
                  costs: DisruptionCosts) -> list[tuple[object, ...]]:
    """Hires ``more`` or ``fewer`` by office, skill, start period and funding, or one
    ``moved`` row where the same number of an office, skill and funding start in one other
    period and nothing else of theirs changes (``old`` and ``new`` then say the start, as
    ``1 in 2028-Q1``; ``period`` is the new start), by compare's rule
    (:func:`~rebalance.analysis.scenario_actions.hire_changes`).  Priced per start period and
    funding as the model prices its hire columns, so a moved hire costs its two columns'
    changes."""
    rows: list[tuple[object, ...]] = []
    for c in hire_changes(plan_actions(old).hires, plan_actions(new).hires, ix.__getitem__):
        kind = f"hire ({c.funding})"
        if c.moved_from is not None:
            rows.append(("moved", kind, c.office, c.skill, c.start, f"{c.before} in {c.moved_from}",
                         f"{c.after} in {c.start}", costs.hire * 2 * c.before))
        else:
            rows.append(("more" if c.after > c.before else "fewer", kind, c.office, c.skill,
                         c.start, c.before, c.after, costs.hire * abs(c.after - c.before)))
    # By start period (a moved hire's new one), then office, skill and funding.
    return sorted(rows, key=lambda r: (ix[str(r[4])], str(r[2]), str(r[3]), str(r[1])))


def plan_measures(instance: Instance, plan: Plan) -> dict[str, float]:
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
    work = work_on_current_data(instance, old.work)
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


def work_split_changes(instance: Instance, old: Plan, new: Plan, at: int) -> int:
    """How many person-periods from period index ``at`` on work differently in ``new`` than
    in ``old``: some office and skill's FTE differs by more than :data:`SPLIT_TOLERANCE_FTE`
    (a row in one plan only counts against 0).  Such moves carry no disruption cost, so
    ``changes`` does not list them, though they change the plan's figures (a practitioner's
    reading: "0 change(s)" beside a different idle capacity).

    Alike people (the model's pools, :func:`~rebalance.model.group_units`: same home office,
    skills, FTE, eligibility and leaving period) are compared as a group, as compare names
    them alike (:func:`~rebalance.analysis.start_plan.named_like`): the model decides a
    group's work in all and names its members afterwards, so however the members share it,
    a group whose work in all is the same in a period has no change then (a review: 48
    person-periods "worked differently" in a re-plan where alike people had only traded
    work).  Where it differs, the count is the fewest members that difference takes: the
    larger of the FTE it adds and the FTE it takes away, in whole members' FTE (1 for a
    person on their own)."""
    names = instance.period_names
    ix = {name: t for t, name in enumerate(names)}
    groups = [[instance.staff[p] for p in unit] for unit in group_units(instance)]
    members = [([p.person for p in group], max(group[0].fte, 1e-9)) for group in groups]

    def split(plan: Plan) -> dict[tuple[str, int], dict[tuple[str, str], float]]:
        w = plan.work
        out: dict[tuple[str, int], dict[tuple[str, str], float]] = {}
        for person, period, office, skill, fte in zip(
                w["person"].astype(str), w["period"].astype(str), w["office"].astype(str),
                w["skill"].astype(str), w["fte"].astype(float), strict=True):
            t = ix.get(period)
            if t is not None and t >= at:
                work = out.setdefault((person, t), {})
                work[(office, skill)] = work.get((office, skill), 0.0) + fte
        return out

    a, b = split(old), split(new)
    known = {person for people, _ in members for person in people}
    # Someone in a plan but no longer in the data is compared alone.
    members += [([person], math.inf) for person in sorted({p for p, _ in (*a, *b)} - known)]
    moved = 0
    for people, fte in members:
        for t in range(at, len(names)):
            before = _total([a.get((person, t), {}) for person in people])
            after = _total([b.get((person, t), {}) for person in people])
            differs = [after.get(key, 0.0) - before.get(key, 0.0)
                       for key in before.keys() | after.keys()]
            if all(abs(d) <= SPLIT_TOLERANCE_FTE for d in differs):
                continue
            most = max(sum(d for d in differs if d > 0), -sum(d for d in differs if d < 0))
            moved += min(len(people), max(1, math.ceil(most / fte - 1e-9)))
    return moved


def _total(works: list[dict[tuple[str, str], float]]) -> dict[tuple[str, str], float]:
    """A group's work in all, by office and skill."""
    out: dict[tuple[str, str], float] = {}
    for work in works:
        for key, fte in work.items():
            out[key] = out.get(key, 0.0) + fte
    return out


def _summary(instance: Instance, old: Plan, old_now: Plan, new: Plan | None,
             changes: pd.DataFrame, disruption: float, at: int) -> pd.DataFrame:
    """``replan.csv``: ``old_now`` (:func:`_under_current_data` of ``old``) measured against
    ``new``."""
    before = plan_measures(instance, old_now)
    after = plan_measures(instance, new) if new is not None else {}
    rows = [(k, before[k], after.get(k, math.nan), after.get(k, math.nan) - before[k])
            for k in before]
    rows.append(("changes", 0.0, float(len(changes)), float(len(changes))))
    # Not a change (no disruption cost), but the plan's figures move with it: said beside.
    split = float(work_split_changes(instance, old, new, at)) if new is not None else math.nan
    rows.append(("work_split_changes", 0.0, split, split))
    rows.append(("disruption_cost", 0.0, disruption, disruption))
    return pd.DataFrame(rows, columns=list(REPLAN_COLUMNS))
