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
    harbour surge).  Whole timelines are swapped between members, who are alike in every
    rule, so the plan keeps every limit; the renaming that leaves the fewest detail periods
    differing is an assignment problem (scipy's ``linear_sum_assignment``)."""
    from scipy.optimize import linear_sum_assignment

    staff = instance.staff
    timelines = {name: _details_of(p) for name, p in (("plan", plan), ("base", base))}
    rename: dict[str, str] = {}
    for unit in group_units(instance):
        if len(unit) < 2:
            continue
        people = [staff[p].person for p in unit]
        mine = [timelines["plan"].get(person, frozenset()) for person in people]
        theirs = [timelines["base"].get(person, frozenset()) for person in people]
        if mine == theirs or not any(mine):
            continue
        differing = np.asarray([[len(a ^ b) for b in theirs] for a in mine])
        rows, cols = linear_sum_assignment(differing)
        if differing[rows, cols].sum() < np.trace(differing):
            rename.update({people[r]: people[c] for r, c in zip(rows, cols, strict=True)
                           if r != c})
    if not rename:
        return plan

    def renamed(frame: pd.DataFrame) -> pd.DataFrame:
        out = frame.copy()
        out["person"] = frame["person"].astype(str).map(lambda p: rename.get(p, p))
        return out

    return replace(plan, details=renamed(plan.details), work=renamed(plan.work))


def _details_of(plan: Plan) -> dict[str, frozenset[tuple[str, str, str]]]:
    """Each person's detail periods with their routes."""
    d = plan.details
    out: dict[str, set[tuple[str, str, str]]] = {}
    for person, period, src, dst in zip(d["person"].astype(str), d["period"].astype(str),
                                        d["from_office"].astype(str), d["to_office"].astype(str),
                                        strict=True):
        out.setdefault(person, set()).add((period, src, dst))
    return {person: frozenset(periods) for person, periods in out.items()}
