"""Plans that keep what their stages claim, where solver tolerances meet large priorities.

Both instances come from a reviewer's hunt for wrong answers on valid but extreme data
(priorities up to 1e6, demand rows of 1e-6 FTE).
"""

from __future__ import annotations

import pytest
from conftest import DATA

from rebalance import make_plan, options_from_instance, read_instance
from rebalance.planning import PlanResult


def _verified_plan(name: str, solver: str) -> tuple[PlanResult, float]:
    """tests/data/``name`` planned with ``solver``: the result and the weighted shortfall its
    cost stage was to hold."""
    instance = read_instance(DATA / name)
    options = options_from_instance(instance, solver=solver, time_limit_seconds=30)
    result = make_plan(instance, options)
    assert result.plan is not None and result.verified
    return result, options.held_shortfall(result.solve.stages[0].objective or 0.0)


@pytest.mark.parametrize("solver", ["highs", "cbc"])
def test_the_cost_stage_keeps_the_held_shortfall(solver: str) -> None:
    # tests/data/held_row_slip: HiGHS had kept the cost stage's held-shortfall row only to
    # its feasibility tolerance (4.9e-4 over a held 4,515.094) and called a plan costing 900
    # optimal.  CBC, and a person-level MILP a reviewer wrote from docs/model.md and solved
    # with scipy.optimize.milp (HiGHS; not kept), both give 1,200 with the hold kept.
    result, held = _verified_plan("held_row_slip", solver)
    assert result.plan is not None
    shortfall_stage, cost_stage = result.solve.stages
    assert shortfall_stage.objective is not None
    assert result.plan.weighted_shortfall <= held + 1e-9 * held
    assert result.plan.total_cost == pytest.approx(1200.0)
    assert cost_stage.objective == pytest.approx(1200.0)


def test_cbc_plans_keep_full_precision_in_their_work_split() -> None:
    # tests/data/priority_pool: 300 people with r:1 s:0.7 at A, every priority 1e6, nothing
    # whole to decide.  By hand: each period's r demand (about 100.1 FTE) and s demand (about
    # 139.0 FTE, so 198.6 FTE of these people at 0.7) fit in 300 FTE, so no shortfall is
    # needed.  CBC's solution file holds 8 significant digits: its work split had left rows
    # about 1e-8 short, 9.2 weighted in all, beside a stage 1 "optimal at 0".
    instance = read_instance(DATA / "priority_pool")
    result = make_plan(instance, options_from_instance(instance, solver="cbc",
                                                       time_limit_seconds=30))
    assert result.plan is not None and result.verified
    assert result.plan.weighted_shortfall < 1e-3
    assert result.solve.stages[0].objective == pytest.approx(0.0, abs=1e-3)


@pytest.mark.parametrize("solver", ["highs", "cbc"])
def test_a_shortfall_tolerance_set_in_the_settings_is_kept_whole(solver: str) -> None:
    # tests/data/tolerance_kept, with [objective] shortfall_tolerance = 0.05: the cost stage
    # may leave 5% more weighted shortfall than stage 1's 14.726, up to 15.462.  The row had
    # been set halfway (15.094), and the run called 11,000 optimal; a reviewer's person-level
    # MILP (scipy.optimize.milp, from docs/model.md; not kept) with the whole tolerance gives
    # 5,500, one reassignment and one detail, a plan `rebalance verify` accepts.
    result, held = _verified_plan("tolerance_kept", solver)
    assert result.plan is not None
    assert held == pytest.approx(14.726 * 1.05, rel=1e-4)
    assert result.plan.weighted_shortfall <= held * (1 + 1e-9)
    assert result.plan.total_cost == pytest.approx(5500.0)
