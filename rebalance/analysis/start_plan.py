"""An earlier plan's decisions written onto a model's whole-number columns.

``compare`` solves each scenario from the base plan: the scenario's model gets the base
plan's details, reassignments and hires as its ``hint``, which the solve tries as a first
plan and, at the end, moves the scenario's plan back toward wherever a difference does not
pay (:func:`rebalance.heuristics.toward_hint`).  Solved from scratch, two runs of the same
instance differ by the solver's path alone, and a comparison then shows that noise as the
scenario's effect (the demo's harbour surge: 90 actions differed, 19 of them before the
surge began).
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Callable
from dataclasses import replace

import numpy as np
import pandas as pd

from rebalance.analysis.limits import hire_rows
from rebalance.analysis.scenario_actions import plan_actions
from rebalance.instance import Instance
from rebalance.model import Model, group_units
from rebalance.plan import Plan

__all__ = ["from_plan", "named_like", "plan_hint"]


def plan_hint(instance: Instance, model: Model, plan: Plan) -> np.ndarray:
    """Values of ``model``'s detail, home and hire columns that make ``plan``'s decisions,
    0 elsewhere.  Decisions with no column (the model pruned them) are left out; values are
    not clipped to the columns' bounds (the solve clips them)."""
    offices = {o.name: i for i, o in enumerate(instance.offices)}
    skills = {k.name: i for i, k in enumerate(instance.skills)}
    periods = {name: t for t, name in enumerate(instance.period_names)}
    staff = instance.staff
    hint = np.zeros(model.num_cols)

    # Details: a unit's column counts its members on that route then.  A relocatable
    # person's detail (home -1) leaves from the home in force, so only its destination counts.
    on_route: Counter[tuple[str, int, int, int]] = Counter()
    d = plan.details
    for person, period, src, dst in zip(d["person"].astype(str), d["period"].astype(str),
                                        d["from_office"].astype(str), d["to_office"].astype(str),
                                        strict=True):
        t, a, b = periods.get(period), offices.get(src), offices.get(dst)
        if t is not None and a is not None and b is not None:
            on_route[(person, a, b, t)] += 1
            on_route[(person, -1, b, t)] += 1
    det = model.blocks["detail"]
    keys = det.keys
    for j in range(len(det)):
        u, a, b, t = (int(keys[name][j]) for name in ("unit", "home", "office", "period"))
        hint[det.start + j] = sum(on_route[(staff[p].person, a, b, t)] for p in model.units[u])

    # Homes: 1 from the period a reassignment takes effect, at its new office.
    moved = {str(person): (periods.get(str(period)), offices.get(str(dst)))
             for person, period, dst in zip(plan.reassignments["person"],
                                            plan.reassignments["period"],
                                            plan.reassignments["to_office"], strict=True)}
    home = model.blocks["home"]
    for j in range(len(home)):
        u, o, t = (int(home.keys[name][j]) for name in ("unit", "office", "period"))
        move = moved.get(staff[model.units[u][0]].person)
        if move is not None and move[0] is not None and move[1] == o and move[0] <= t:
            hint[home.start + j] = 1.0

    # Hires by office, skill, start period and funding.
    started: Counter[tuple[int, int, int, int]] = Counter()
    for h in hire_rows(plan):
        office, skill, start = (offices.get(h.office), skills.get(h.skill),
                                periods.get(h.start_period))
        if office is not None and skill is not None and start is not None:
            started[(office, skill, start, int(h.funding == "new"))] += h.count
    hire = model.blocks["hire"]
    for j in range(len(hire)):
        o, k, s, new = (int(hire.keys[name][j]) for name in ("office", "skill", "period", "new"))
        hint[hire.start + j] = started[(o, k, s, new)]
    return hint


def from_plan(instance: Instance, plan: Plan,
              words: str = "the base plan") -> Callable[[Model], Model]:
    """An ``adjust`` hook for :func:`rebalance.planning.make_plan`: the model with ``plan``
    as its hint, named ``words`` in progress lines."""

    def adjust(model: Model) -> Model:
        return replace(model, hint=plan_hint(instance, model, plan), hint_words=words)

    return adjust


def named_like(instance: Instance, plan: Plan, base: Plan) -> Plan:
    """``plan`` with the members of each pool of interchangeable people (same home office,
    skills, FTE, eligibility and leaving period: :func:`~rebalance.model.group_units`)
    renamed so that their details match ``base``'s as closely as they can.

    The model decides how many of a pool go where; which of them is named afterwards.  Two
    solves can name the same detail for different members, and a comparison then lists a
    change that is only a swap of names (a sweep: 6 of the 18 detail rows of the demo's
    harbour surge).  First whole timelines are given to the members whose base timelines
    they differ from least (an assignment problem, scipy's ``linear_sum_assignment``); then
    single periods are traded between two members where that brings both nearer the base
    and neither breaks the limit on consecutive detail periods.  The members are alike in
    every other rule, so the plan keeps every limit (the caller verifies it again)."""
    from scipy.optimize import linear_sum_assignment

    staff = instance.staff
    names = instance.period_names
    periods = {name: t for t, name in enumerate(names)}
    most = instance.policy.max_consecutive_detail_periods
    routes = {name: _routes_of(p, periods) for name, p in (("plan", plan), ("base", base))}
    # (person, period index) -> who does that person's period of ``plan`` once renamed.
    given: dict[tuple[str, int], str] = {}
    for unit in group_units(instance):
        if len(unit) < 2:
            continue
        people = [staff[p].person for p in unit]
        mine = [routes["plan"].get(person, {}) for person in people]
        theirs = [routes["base"].get(person, {}) for person in people]
        if mine == theirs or not any(mine):
            continue
        differing = np.asarray([[_differing(a, b, len(names)) for b in theirs] for a in mine])
        rows, cols = linear_sum_assignment(differing)
        # now[c]: the timeline member c does (from member owner[c][t] of ``plan`` at t).
        now: list[dict[int, str]] = [{} for _ in people]
        owner = [[c] * len(names) for c in range(len(people))]
        for r, c in zip(rows, cols, strict=True):
            now[c] = dict(mine[r])
            owner[c] = [r] * len(names)
        for t in range(len(names)):
            for a in range(len(people)):
                if now[a].get(t) == theirs[a].get(t):
                    continue
                for b in range(len(people)):
                    if b == a or now[b].get(t) != theirs[a].get(t):
                        continue
                    kept = int(now[b].get(t) != theirs[b].get(t))
                    if int(now[a].get(t) != theirs[b].get(t)) >= 1 + kept:
                        continue  # b would lose its match for a's gain
                    swapped_a, swapped_b = _traded(now[a], now[b], t)
                    if _runs_ok(swapped_a, most) and _runs_ok(swapped_b, most):
                        now[a], now[b] = swapped_a, swapped_b
                        owner[a][t], owner[b][t] = owner[b][t], owner[a][t]
                        break
        for c, person in enumerate(people):
            for t in range(len(names)):
                if owner[c][t] != c:
                    given[(people[owner[c][t]], t)] = person
    if not given:
        return plan

    def renamed(frame: pd.DataFrame) -> pd.DataFrame:
        out = frame.copy()
        out["person"] = [given.get((person, periods.get(period, -1)), person) for person, period
                         in zip(frame["person"].astype(str), frame["period"].astype(str),
                                strict=True)]
        return out

    return replace(plan, details=renamed(plan.details), work=renamed(plan.work))


def _routes_of(plan: Plan, periods: dict[str, int]) -> dict[str, dict[int, str]]:
    """Each person's detail periods (by index) with their routes
    (:func:`~rebalance.analysis.scenario_actions.plan_actions`)."""
    out: dict[str, dict[int, str]] = {}
    for (person, period), route in plan_actions(plan).details.items():
        if period in periods:
            out.setdefault(person, {})[periods[period]] = route
    return out


def _differing(a: dict[int, str], b: dict[int, str], T: int) -> int:
    """Periods in which two timelines are not on the same detail (or both at home)."""
    return sum(a.get(t) != b.get(t) for t in range(T))


def _traded(a: dict[int, str], b: dict[int, str],
            t: int) -> tuple[dict[int, str], dict[int, str]]:
    """Timelines ``a`` and ``b`` with period ``t`` traded."""
    new_a, new_b = dict(a), dict(b)
    new_a.pop(t, None)
    new_b.pop(t, None)
    if t in b:
        new_a[t] = b[t]
    if t in a:
        new_b[t] = a[t]
    return new_a, new_b


def _runs_ok(timeline: dict[int, str], most: int | None) -> bool:
    """No more than ``most`` detail periods in a row (None: no limit)."""
    if most is None:
        return True
    run, last = 0, -2
    for t in sorted(timeline):
        run = run + 1 if t == last + 1 else 1
        last = t
        if run > most:
            return False
    return True
