"""Rounding an LP point to a whole plan (rebalance.rounding): repairs of the rows a floor
breaks, details moved with their at-home partners, and the plans it gives from a start.
"""

from __future__ import annotations

from dataclasses import replace

import pytest
from conftest import ROOT
from randomized import everyone_moves, random_instance

from rebalance import read_instance


def test_rounding_repairs_the_rows_a_floor_breaks_without_breaking_others():
    # Two columns x0, x1 in [0, 2]; LP point (1.6, 0.5).  Rows: x0 + x1 <= 2 (a budget),
    # -x0 <= -1.5 (a seat row that needs x0 out).  Flooring gives (1, 0), which breaks the
    # seat row; the repair must step x0 up to 2 (its ceiling), not x1, and keep the budget.
    import numpy as np
    import scipy.sparse as sp

    from rebalance.model import Model
    from rebalance.rounding import RowActivity, repair_rows

    model = Model(matrix=sp.csr_matrix(np.array([[1.0, 1.0], [-1.0, 0.0]])),
                  row_lower=np.array([-np.inf, -np.inf]), row_upper=np.array([2.0, -1.5]),
                  col_lower=np.zeros(2), col_upper=np.full(2, 2.0),
                  is_integer=np.ones(2, bool), shortfall_weight=np.zeros(2), cost=np.zeros(2),
                  blocks={}, rows=())
    lp = np.array([1.6, 0.5])
    x = np.floor(lp)
    everything = np.ones(2, bool)
    assert repair_rows(RowActivity(model, x, everything), everything, lp, model.col_lower,
                       np.ceil(lp))
    assert list(x) == [2.0, 0.0]
    # With the budget at 1 the seat row cannot be met by whole steps: say so.
    tight = replace(model, row_upper=np.array([1.0, -1.5]))
    y = np.floor(lp)
    assert not repair_rows(RowActivity(tight, y, everything), everything, lp, model.col_lower,
                           np.ceil(lp))


def test_a_step_on_a_detail_moves_its_at_home_partner_the_other_way():
    # Columns: a detail d (whole, [0, 1]) and the person's at-home x (continuous, [0, 1]).
    # Rows: d + x = 1 (one place) and -d <= -1 (a seat row that needs the person out).
    # From (0, 1) the seat row needs d up, which alone breaks the one-place row; linked,
    # d and x move together to (1, 0).  Worked out by hand.
    import numpy as np
    import scipy.sparse as sp

    from rebalance.model import Model
    from rebalance.rounding import RowActivity, repair_rows

    model = Model(matrix=sp.csr_matrix(np.array([[1.0, 1.0], [-1.0, 0.0]])),
                  row_lower=np.array([1.0, -np.inf]), row_upper=np.array([1.0, -1.0]),
                  col_lower=np.zeros(2), col_upper=np.ones(2),
                  is_integer=np.array([True, False]), shortfall_weight=np.zeros(2),
                  cost=np.zeros(2), blocks={}, rows=())
    checked, movable, lp = np.ones(2, bool), np.array([True, False]), np.array([0.4, 0.6])
    alone = np.array([0.0, 1.0])
    assert not repair_rows(RowActivity(model, alone, checked), movable, lp, model.col_lower,
                           model.col_upper)
    linked = np.array([0.0, 1.0])
    rows = RowActivity(model, linked, checked, partner=np.array([1, -1]))
    assert repair_rows(rows, movable, lp, model.col_lower, model.col_upper)
    assert list(linked) == [1.0, 0.0]
    assert np.allclose(rows.activity, model.matrix @ linked)
    # Its partner at 0 (already away), the detail cannot step up again.
    assert not rows.fits(0, 1.0)


def test_rounding_gives_a_whole_plan_of_the_model_better_than_its_start():
    # On the demo (a surge that details can meet), from the hires-only plan.
    import numpy as np

    from rebalance.backends import HighsBackend, SolveOptions
    from rebalance.model import build_model
    from rebalance.rounding import neighbourhood, plan_by_rounding

    model = build_model(read_instance(ROOT / "instances" / "demo"))
    backend = HighsBackend()
    options = SolveOptions(relative_gap=0.01)
    hires_only = model.col_upper.copy()
    detail = model.blocks["detail"]
    hires_only[detail.start:detail.stop] = 0
    start = backend.run(replace(model, col_upper=hires_only), model.shortfall_weight, [],
                        options, 60, None)
    assert start.x is not None
    rounding = plan_by_rounding(backend, model, model.shortfall_weight, options,
                                float("inf"), start.x, lambda _: None)
    x = rounding.plan
    assert x is not None and rounding.lp_x is not None
    assert float(model.shortfall_weight @ x) < start.objective - 1.0
    activity = model.matrix @ x
    assert np.all(activity >= model.row_lower - 1e-6)
    assert np.all(activity <= model.row_upper + 1e-6)
    assert np.all(x >= model.col_lower - 1e-9) and np.all(x <= model.col_upper + 1e-9)
    assert np.array_equal(x[model.is_integer], np.rint(x[model.is_integer]))
    assert x[detail.start:detail.stop].sum() > 0
    # The neighbourhood of the LP point holds the plan, and the LP point lies in it.
    lower, upper = neighbourhood(rounding.lp_x, rounding.lower, rounding.upper,
                                 model.is_integer, x)
    assert np.all(lower <= x + 1e-9) and np.all(x <= upper + 1e-9)
    assert np.all(lower <= rounding.lp_x + 1e-6) and np.all(rounding.lp_x <= upper + 1e-6)


def test_rounding_lp_started_before_the_hires_are_known_rounds_to_the_same_plan():
    # The rounding's LP frees every hire, so an LP started from a plan without hires (as
    # agency's stage one does, beside its hires pass) is the LP of the plan with them.
    import numpy as np

    from rebalance.backends import HighsBackend, SolveOptions
    from rebalance.model import build_model
    from rebalance.rounding import early_lp, held_lp_bounds, plan_by_rounding

    model = build_model(read_instance(ROOT / "instances" / "demo"))
    backend = HighsBackend()
    options = SolveOptions(relative_gap=0.01)
    held = model.col_upper.copy()
    held[model.is_integer] = model.col_lower[model.is_integer]
    hire = model.blocks["hire"]
    held[hire.start:hire.stop] = model.col_upper[hire.start:hire.stop]
    start = backend.run(replace(model, col_upper=held), model.shortfall_weight, [], options,
                        60, None)
    assert start.x is not None and start.x[hire.start:hire.stop].sum() > 0
    early = early_lp(backend, model, model.shortfall_weight, options, 60, model.col_lower)
    _, lower, upper = held_lp_bounds(model, start.x)
    assert np.array_equal(early.lower, lower) and np.array_equal(early.upper, upper)
    with_early = plan_by_rounding(backend, model, model.shortfall_weight, options,
                                  float("inf"), start.x, lambda _: None, early)
    without = plan_by_rounding(backend, model, model.shortfall_weight, options,
                               float("inf"), start.x, lambda _: None)
    assert with_early.plan is not None and without.plan is not None
    assert np.allclose(with_early.plan, without.plan)


@pytest.mark.parametrize("seed", [5, 6])
def test_rounding_details_relocatable_people_with_their_at_home_columns(seed):
    # Everyone may relocate, so every detail is written per destination and sits in an
    # equality row with the person's at-home columns (one place a period).  With those
    # details free in the rounding's LP, rounding and repair move each with its at-home
    # column: the plan details relocatable people, keeps every row of the model, and is no
    # better than the optimum (reference: scipy's milp, its own HiGHS build).  Held, as
    # before, the same rounding details nobody.
    import numpy as np
    from conftest import scipy_milp

    from rebalance.backends import HighsBackend, SolveOptions
    from rebalance.model import build_model
    from rebalance.rounding import plan_by_rounding

    instance = everyone_moves(random_instance(seed, people=10, periods=4, offices=4, skills=2))
    model = build_model(instance, pair_details=False)
    detail = model.blocks["detail"]
    assert np.all(detail.keys["home"] < 0)
    backend, options = HighsBackend(), SolveOptions(relative_gap=0.0)
    nobody_away = model.col_upper.copy()
    nobody_away[detail.start:detail.stop] = 0
    start = backend.run(replace(model, col_upper=nobody_away), model.shortfall_weight, [],
                        options, 60, None)
    assert start.x is not None and start.objective is not None

    def rounded(movers_free: bool) -> np.ndarray | None:
        return plan_by_rounding(backend, model, model.shortfall_weight, options,
                                float("inf"), start.x, lambda _: None,
                                movers_free=movers_free).plan

    x = rounded(True)
    assert x is not None
    assert x[detail.start:detail.stop].sum() >= 1
    activity = model.matrix @ x
    assert np.all(activity >= model.row_lower - 1e-6)
    assert np.all(activity <= model.row_upper + 1e-6)
    assert np.array_equal(x[model.is_integer], np.rint(x[model.is_integer]))
    optimum = scipy_milp(model, model.shortfall_weight)
    assert optimum.status == 0
    assert optimum.fun - 1e-6 <= model.shortfall_weight @ x < start.objective - 1e-6
    held = rounded(False)
    assert held is None or held[detail.start:detail.stop].sum() == 0
