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
