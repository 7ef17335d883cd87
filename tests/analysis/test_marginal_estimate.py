"""The marginal estimate: the plan's boxed LP solved again with the limit moved by its step.

References outside the code under test: scipy's linprog and milp (their own HiGHS build,
through ``conftest.scipy_lp`` and ``conftest.scipy_milp``) on models built for one relaxation
at a time by ``build_model``, the relaxation written again by hand."""

from __future__ import annotations

from collections import Counter
from dataclasses import replace

import numpy as np
import pytest
from analysis_helpers import exact_options
from conftest import DATA, scipy_lp, scipy_milp, solve_verified
from randomized import random_instance
from test_analysis_marginal import _relaxed_by_hand, _short_at_b

import rebalance.analysis.marginal_estimate as marginal_estimate
from rebalance import make_plan, read_instance
from rebalance.analysis.marginal import Steps, marginal_values
from rebalance.analysis.marginal_estimate import _rows_of, lp_row_duals
from rebalance.instance import Budget, Instance
from rebalance.model import Model, build_model, without_rounded_rows

HIRE_KEYS = ("office", "skill", "period", "new")


def _plan_box(model: Model, base_model: Model, x: np.ndarray) -> tuple[np.ndarray, ...]:
    """Column bounds of the estimate's LP on ``model`` (the base model or a relaxed one):
    integer columns within one unit of the plan ``x`` of ``base_model``, matched by key for
    hire columns (a column only ``model`` has sits at 0) and by place for the rest."""
    at = np.zeros(model.num_cols)
    for name, block in model.blocks.items():
        here = base_model.blocks[name]
        if name == "hire":
            col_of = {tuple(int(here.keys[k][j]) for k in HIRE_KEYS): here.start + j
                      for j in range(len(here))}
            for j in range(len(block)):
                col = col_of.get(tuple(int(block.keys[k][j]) for k in HIRE_KEYS))
                at[block.start + j] = 0.0 if col is None else x[col]
        else:
            assert len(here) == len(block), name
            at[block.start:block.stop] = x[here.start:here.stop]
    lower, upper = model.col_lower.copy(), model.col_upper.copy()
    integer = model.is_integer
    lower[integer] = np.maximum(lower[integer], np.rint(at[integer]) - 1)
    upper[integer] = np.minimum(upper[integer], np.rint(at[integer]) + 1)
    return lower, upper


def _boxed_lp_value(model: Model, base_model: Model, x: np.ndarray) -> float:
    free = without_rounded_rows(model)  # as the estimate's LP: those rows priced 0
    out = scipy_lp(free, free.shortfall_weight, *_plan_box(model, base_model, x))
    assert out.status == 0, out.message
    return float(out.fun)


@pytest.mark.parametrize(("seed", "shape"), [
    (23, {"people": 4, "periods": 3}), (28, {"people": 4, "periods": 3}),
    (34, {"people": 4, "periods": 3}), (29, {"people": 6, "periods": 4, "skills": 2}),
])
def test_the_estimate_is_the_boxed_lp_re_solved_with_the_limit_moved(
        seed: int, shape: dict[str, int]) -> None:
    # Reference: scipy's linprog on the base model and on the model built for that one
    # relaxation alone (the relaxation by hand), both boxed around the plan.  marginal
    # builds one model per limit with all its candidates relaxed, and moves bounds on it:
    # the two ways must give the same LP.  Each of these seeds has two max_hires
    # candidates, so that sharing is exercised.
    instance = random_instance(seed, **shape)
    base = make_plan(instance, exact_options(instance))
    assert base.plan is not None and base.verified and base.solve.x is not None
    x = base.solve.x
    values = marginal_values(base, exact_options(instance), workers=1, max_resolves=0)
    table = values.table
    assert Counter(table["limit"])["max_hires"] >= 2
    model = build_model(instance)
    before = _boxed_lp_value(model, model, x)
    duals = lp_row_duals(model, x, model.shortfall_weight)
    assert duals is not None
    steps = Steps()
    for row in table.itertuples(index=False):
        relaxed = build_model(_relaxed_by_hand(instance, row.limit, row.where, steps))
        gain = before - _boxed_lp_value(relaxed, model, x)
        expected = min(max(gain, 0.0), base.plan.weighted_shortfall)
        assert row.estimate_shortfall_reduction == pytest.approx(expected, abs=1e-6), row
        assert "estimate from an LP re-solve" in row.method
        if row.limit in ("hiring_budget", "moves_budget", "seats"):
            # The LP's value is convex in a row's bound: its duals' extrapolation over the
            # step is never below the re-solved difference.
            [cand] = [c for c in values.candidates
                      if (c.limit, c.where) == (row.limit, row.where)]
            first_order = -sum(duals[r] * d for r, d in _rows_of(model, cand, instance))
            assert row.estimate_shortfall_reduction <= first_order + 1e-6


def _seats_held_at_b(tiny: Instance) -> Instance:
    """tiny with six FTE of review demand at B from 2027-Q2, two seats and one start per
    period there, and money to hire: seats hold the plan back, then the one start."""
    demand = tuple(replace(d, fte=6.0) if d.office == "B" and d.period >= 1 else d
                   for d in tiny.demand)
    offices = tuple(replace(o, seats=2, max_hires_per_period=1) if o.name == "B" else o
                    for o in tiny.offices)
    return tiny.with_changes(demand=demand, offices=offices,
                             budgets=(Budget("2027", 900_000.0, 0.0),))


def test_ten_more_seats_are_estimated_at_what_they_buy_not_at_ten_times_the_first() -> None:
    # The duals price the first seat at B; ten more pass the range where that price holds
    # (one start per period is the next limit), and the first-order estimate was 30
    # FTE-periods (clipped to the plan's 26 of shortfall), where the re-solve gives 3.
    # Reference: scipy's milp on the model of each instance (the least weighted shortfall).
    instance = _seats_held_at_b(read_instance(DATA / "tiny"))
    base = solve_verified(instance)
    assert base.plan is not None and base.solve.x is not None
    model = build_model(instance)
    least = scipy_milp(model, model.shortfall_weight)
    relaxed = build_model(_relaxed_by_hand(instance, "seats", "B", Steps()))
    least_relaxed = scipy_milp(relaxed, relaxed.shortfall_weight)
    assert least.status == 0 and least_relaxed.status == 0
    assert least.fun - least_relaxed.fun == pytest.approx(3.0, abs=1e-6)
    values = marginal_values(base, exact_options(instance), workers=1)
    table = values.table
    row = table[(table["limit"] == "seats") & (table["where"] == "B")].iloc[0]
    assert row["estimate_shortfall_reduction"] == pytest.approx(3.0, abs=1e-6)
    assert row["shortfall_reduction"] == pytest.approx(3.0, abs=1e-6)
    duals = lp_row_duals(model, base.solve.x, model.shortfall_weight)
    assert duals is not None
    [cand] = [c for c in values.candidates if (c.limit, c.where) == ("seats", "B")]
    first_order = -sum(duals[r] * d for r, d in _rows_of(model, cand, instance))
    assert first_order == pytest.approx(30.0, abs=1e-6)


@pytest.mark.parametrize("b_hires", [1, 0])
def test_without_time_for_the_re_solves_the_duals_price_a_bound_held_limit(
        monkeypatch: pytest.MonkeyPatch, b_hires: int) -> None:
    # The fallback where the re-solves' time runs out: the first-order estimate from the
    # duals and the reduced costs of the hire columns the relaxation raises or opens, those
    # columns read from the one model built with every max_hires candidate relaxed.
    # Reference: scipy's linprog on the boxed LP before and after the relaxation, built for
    # it alone; the step stays within the basis' range here, so the two agree.
    monkeypatch.setattr(marginal_estimate, "_relaxed_lp", lambda *args: None)
    instance = _short_at_b(read_instance(DATA / "tiny"), b_hires)
    base = solve_verified(instance)
    assert base.plan is not None and base.solve.x is not None
    table = marginal_values(base, exact_options(instance), workers=1, max_resolves=0).table
    row = table[(table["limit"] == "max_hires") & (table["where"] == "B")].iloc[0]
    assert "estimate from LP duals" in row["method"]
    model = build_model(instance)
    relaxed = build_model(_relaxed_by_hand(instance, "max_hires", "B", Steps()))
    gain = (_boxed_lp_value(model, model, base.solve.x)
            - _boxed_lp_value(relaxed, model, base.solve.x))
    assert gain > 1.0
    assert row["estimate_shortfall_reduction"] == pytest.approx(gain, abs=1e-6)
