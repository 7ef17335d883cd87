"""Backend contracts that the two-stage solve relies on."""

from __future__ import annotations

import importlib
import sys
from pathlib import Path

from rebalance.backends import HighsBackend

sys.path.insert(0, str(Path(__file__).parent / "analysis"))


def test_a_start_never_replaces_a_better_plan():
    # A re-plan model where HiGHS 1.16, given the old plan as a feasible start, reported the
    # optimal cost (11,000) but returned the start (24,000) as its solution (issue 5 report).
    from analysis_helpers import exact_options
    from randomized import random_instance

    from rebalance import make_plan

    replan = importlib.import_module("rebalance.analysis.replan")
    instance = random_instance(307, people=5, periods=5)
    options = exact_options(instance)
    base = make_plan(instance, options)
    captured = []
    original = replan._fix_and_price
    try:
        replan._fix_and_price = lambda *a, **k: captured.append(original(*a, **k)) or captured[-1]
        result = replan.replan(instance, base.plan, 4, options)
    finally:
        replan._fix_and_price = original
    model, start = captured[-1], result.result.solve.x
    backend = HighsBackend()
    first = backend.run(model, model.shortfall_weight, [], options, 30, None)
    rows = [(model.shortfall_weight, first.objective + 1e-6)]
    fresh = backend.run(model, model.cost, rows, options, 30, None)
    warm = backend.run(model, model.cost, rows, options, 30, start)
    for out in (fresh, warm):
        assert out.x is not None
        assert abs(float(model.cost @ out.x) - out.objective) <= 1e-6 * (1 + abs(out.objective))
    assert warm.objective <= fresh.objective + 1e-6 * (1 + abs(fresh.objective))


def test_relative_gap_of_a_plan_scoring_zero_above_a_lower_bound_is_undefined():
    from rebalance.backends import relative_gap

    assert relative_gap(0.0, -5.0) is None
    assert relative_gap(0.0, 0.0) == 0.0
    assert relative_gap(100.0, 90.0) == 0.1
    assert relative_gap(100.0, None) is None


def test_a_bound_below_zero_is_raised_to_the_objective_floor():
    # Costs and shortfall are never negative, so 0 bounds every stage from below; the
    # relaxation's bound can sit under it (relocatable cost-adjustment columns).
    import numpy as np

    from rebalance.backends import BackendOutcome, Status
    from rebalance.solve import _with_floor

    x = np.zeros(1)
    zero = BackendOutcome(Status.FEASIBLE_WITH_GAP, x, 0.0, -4e4, "Time limit reached", 1.0)
    proven = _with_floor(zero, 0.01)
    assert proven.status is Status.OPTIMAL and proven.bound == 0.0
    some = BackendOutcome(Status.FEASIBLE_WITH_GAP, x, 50.0, -4e4, "Time limit reached", 1.0)
    raised = _with_floor(some, 0.01)
    assert raised.status is Status.FEASIBLE_WITH_GAP and raised.bound == 0.0
    none = BackendOutcome(Status.NO_PLAN_IN_TIME, None, None, -4e4, "Time limit reached", 1.0)
    assert _with_floor(none, 0.01) == none
