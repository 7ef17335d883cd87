"""Holding most columns of a model and handing a solver only the rest
(``rebalance.submodel``) must not change what the rest can reach."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import scipy_lp, scipy_milp
from randomized import random_instance

from rebalance.backends import HighsBackend, SolveOptions
from rebalance.model import build_model
from rebalance.split import resplit
from rebalance.submodel import hold_apart


@pytest.mark.parametrize("seed", [0, 3, 6, 9])
def test_held_apart_reaches_the_same_optimum_as_the_whole_model_in_the_same_bounds(seed):
    # Reference: scipy's milp on the whole model with the held columns' bounds met.
    rng = np.random.default_rng(seed)
    model = build_model(random_instance(seed, people=5, periods=3, offices=3, skills=2))
    backend, options = HighsBackend(), SolveOptions(relative_gap=0.0)
    plan = backend.run(model, model.cost, [], options, 60, None).x  # the cheapest plan
    assert plan is not None
    held_shortfall = [(model.shortfall_weight, float(model.shortfall_weight @ plan))]
    # Hold about half the columns, integer or not, where the plan has them.
    hold = rng.random(model.num_cols) < 0.5
    value = np.where(model.is_integer, np.rint(plan), plan)
    lower, upper = model.col_lower.copy(), model.col_upper.copy()
    lower[hold] = upper[hold] = np.clip(value, model.col_lower, model.col_upper)[hold]

    for objective, extra in ((model.shortfall_weight, []), (model.cost, held_shortfall)):
        part = hold_apart(model, lower, upper, extra)
        assert part is not None
        assert part.model.num_cols == int((lower < upper).sum()) + 1  # one for the held
        out = backend.run(part.model, part.objective(objective), part.extra_rows, options, 60,
                          None)
        reference = scipy_milp(model, objective, lower, upper, tuple(extra))
        assert reference.status == 0  # the plan itself is inside the bounds
        assert out.objective is not None and out.x is not None
        # The part's objective values are the whole model's.
        assert out.objective == pytest.approx(reference.fun, rel=1e-6, abs=1e-6)
        whole = part.whole(out.x)  # a plan of the whole model
        assert float(objective @ whole) == pytest.approx(out.objective, rel=1e-9, abs=1e-9)
        assert np.array_equal(part.whole(part.part(whole)), whole)
        activity = model.matrix @ whole
        assert np.all(activity >= model.row_lower - 1e-6)
        assert np.all(activity <= model.row_upper + 1e-6)


def test_held_values_that_break_a_row_with_nothing_free_are_refused():
    # Common practice for presolve: a row left with only fixed columns is checked, not
    # dropped blindly.
    model = build_model(random_instance(1, people=4, periods=3, offices=2, skills=2))
    # Every column at its (finite) upper bound: each person on every detail at once.
    value = np.where(np.isfinite(model.col_upper), model.col_upper, model.col_lower)
    assert hold_apart(model, value, value.copy(), []) is None
    # One column left free does not save the rows it is not in.
    upper = value.copy()
    lower = value.copy()
    lower[0] = model.col_lower[0]
    assert hold_apart(model, lower, upper, []) is None


@pytest.mark.parametrize("seed", [0, 4, 8])
def test_resplit_finds_the_least_shortfall_for_a_plans_whole_numbers(seed):
    # Reference: scipy's linprog on the whole model with every integer column fixed where
    # the plan has it.  The work split is solved with the held columns taken out.
    model = build_model(random_instance(seed, people=5, periods=3, offices=3, skills=2))
    backend, options = HighsBackend(), SolveOptions(relative_gap=0.0)
    plan = backend.run(model, model.cost, [], options, 60, None).x  # cheap, so short
    assert plan is not None
    split = resplit(backend, model, plan, model.shortfall_weight, options, 60)
    fixed = np.where(model.is_integer, np.rint(plan), model.col_lower)
    lower = np.where(model.is_integer, fixed, model.col_lower)
    upper = np.where(model.is_integer, fixed, model.col_upper)
    reference = scipy_lp(model, model.shortfall_weight, lower, upper)
    assert reference.status == 0 and split is not None and split.x is not None
    assert split.objective == pytest.approx(reference.fun, rel=1e-6, abs=1e-6)
    assert np.array_equal(split.x[model.is_integer], fixed[model.is_integer])
    activity = model.matrix @ split.x
    assert np.all(activity >= model.row_lower - 1e-6)
    assert np.all(activity <= model.row_upper + 1e-6)
