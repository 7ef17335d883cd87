"""Helpers shared by the analysis tests (not a conftest.py: that would shadow tests/conftest.py)."""

from __future__ import annotations

from dataclasses import replace

import pandas as pd
from conftest import solve_verified
from hypothesis import assume
from randomized import random_instance

from rebalance import make_plan, options_from_instance
from rebalance.instance import Instance
from rebalance.plan import Plan
from rebalance.planning import PlanResult
from rebalance.solve import SolveOptions


def exact_options(instance: Instance) -> SolveOptions:
    """Exact solves (gap 0) with room to finish: the analyses' differences are then exact."""
    return options_from_instance(instance, relative_gap=0.0, time_limit_seconds=60.0)


def feasible_random(seed: int, **kwargs: int) -> tuple[Instance, PlanResult]:
    """A random instance whose hard limits hold together (hypothesis skips the others: a
    random seat count can be below the people already at home) and its verified plan."""
    instance = random_instance(seed, **kwargs)
    first = make_plan(instance, exact_options(instance))
    assume(first.plan is not None)
    return instance, solve_verified(instance)


def a2_moved_then_forbidden(tiny: Instance) -> tuple[Plan, Instance]:
    """tests/data/tiny's optimum with a2 moved to B from 2027-Q4 instead of detailed there
    (the old plan), and tiny with a2 no longer allowed to be reassigned (the data now)."""
    base = solve_verified(tiny)
    assert base.plan is not None
    moves = pd.DataFrame([["a2", "2027-Q4", "A", "B", 20000.0]],
                         columns=list(base.plan.reassignments.columns))
    details = base.plan.details
    old = replace(base.plan, reassignments=moves, details=details[details.person != "a2"])
    fixed = tiny.with_changes(staff=tuple(
        replace(p, can_relocate=False) if p.person == "a2" else p for p in tiny.staff))
    return old, fixed
