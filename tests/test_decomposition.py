"""The bound from relocatable people's whole plans, checked against scipy's HiGHS.

References: scipy's ``milp`` (its own HiGHS build) for each person's best plan at given
prices and for the whole model's optimum, and scipy's ``linprog`` for the LP relaxation.
That a Dantzig-Wolfe master at its optimum bounds the MIP from below and the LP relaxation
from above is a textbook fact (the convex hull of each person's whole plans lies between
the two).
"""

from __future__ import annotations

import time
from dataclasses import replace

import numpy as np
import pytest
import scipy.sparse as sp
from conftest import scipy_lp, scipy_milp
from randomized import random_instance
from scipy.optimize import Bounds, LinearConstraint, milp

from rebalance.decomposition import _best_plan, _people, decomposable, plan_bound
from rebalance.instance import Instance
from rebalance.model import Model, build_model


def _movers(seed: int, max_run: int | None = 1) -> Instance:
    """A random instance whose people may all be detailed and relocated (each a unit of
    one), with a consecutive-detail limit."""
    base = random_instance(seed, people=4, periods=4, offices=3, skills=2)
    policy = replace(base.policy, max_consecutive_detail_periods=max_run)
    return base.with_changes(staff=tuple(replace(p, can_relocate=True, can_detail=True)
                                         for p in base.staff), policy=policy)


def _per_destination(instance: Instance) -> Model:
    model = build_model(instance, pair_details=False)
    assert decomposable(model)
    return model


def _own_optimum(model: Model, columns: np.ndarray, rows: np.ndarray,
                 reduced: np.ndarray) -> float:
    """The least ``reduced`` cost over one person's own rows, by scipy's milp."""
    matrix = model.matrix[rows][:, columns]
    res = milp(reduced[columns], integrality=model.is_integer[columns].astype(int),
               bounds=Bounds(model.col_lower[columns], model.col_upper[columns]),
               constraints=[LinearConstraint(matrix, model.row_lower[rows],
                                             model.row_upper[rows])],
               options={"mip_rel_gap": 0.0})
    assert res.status == 0, res.message
    return float(res.fun)


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("max_run", [1, 2, None])
def test_each_persons_best_plan_is_the_milp_optimum_of_their_own_rows(seed, max_run):
    model = _per_destination(_movers(seed, max_run))
    people, own = _people(model)
    assert people
    own_rows = np.flatnonzero(own)
    row_person = model.key_of_columns("unit")
    rng = np.random.default_rng(seed)
    for _ in range(4):
        reduced = rng.normal(0.0, 1.0, model.num_cols) * rng.choice([0.0, 1.0, 50.0],
                                                                     model.num_cols)
        for p in people:
            rows = own_rows[np.isin(own_rows, _rows_of(model, p.columns))]
            assert np.all(row_person[p.columns] == p.unit)
            value, plan = _best_plan(p, reduced)
            reference = _own_optimum(model, p.columns, rows, reduced)
            assert value == pytest.approx(reference, abs=1e-6 * (1 + abs(reference)))
            assert float(reduced[p.columns] @ plan) == pytest.approx(value, abs=1e-9)


def _rows_of(model: Model, columns: np.ndarray) -> np.ndarray:
    touched = model.matrix.tocsc()[:, columns]
    return np.unique(sp.find(touched)[0])


@pytest.mark.parametrize("seed", range(5))
def test_the_converged_bound_lies_between_the_lp_and_the_optimum(seed):
    model = _per_destination(_movers(seed, 2))
    for objective in (model.shortfall_weight, model.cost + 1e4 * model.shortfall_weight):
        lp = scipy_lp(model, objective)
        best = scipy_milp(model, objective)
        assert lp.status == 0 and best.status == 0
        heard: list[float] = []
        bound, rounds = plan_bound(model, objective, [], time.perf_counter() + 60,
                                   heard.append)
        assert bound is not None and rounds >= 1
        scale = 1e-6 * (1.0 + abs(best.fun))
        assert lp.fun - scale <= bound <= best.fun + scale
        assert heard == sorted(heard) and heard[-1] == bound


@pytest.mark.parametrize("seed", range(5))
def test_cuts_in_the_master_lift_the_bound_no_higher_than_the_optimum(seed):
    # Coverage cuts (rebalance.cuts) join the master once no plan pays; they keep every
    # whole-number plan, so the bound must stay below the optimum (scipy's milp), and at
    # least where it stood without them.
    model = _per_destination(_movers(seed + 10, 2))
    for objective in (model.shortfall_weight, model.cost + 1e4 * model.shortfall_weight):
        best = scipy_milp(model, objective)
        assert best.status == 0
        plain, _ = plan_bound(model, objective, [], time.perf_counter() + 60)
        cut, _ = plan_bound(model, objective, [], time.perf_counter() + 60, None, 20)
        assert plain is not None and cut is not None
        scale = 1e-6 * (1.0 + abs(best.fun))
        assert plain - scale <= cut <= best.fun + scale


def test_a_held_objective_row_joins_the_master():
    # Stage two: least cost with the shortfall held; the bound must respect that row.
    model = _per_destination(_movers(3, 2))
    least = scipy_milp(model, model.shortfall_weight)
    held = [(model.shortfall_weight, float(least.fun) + 1e-6)]
    best = scipy_milp(model, model.cost, extra_rows=tuple(held))
    assert best.status == 0
    bound, _ = plan_bound(model, model.cost, held, time.perf_counter() + 60)
    assert bound is not None and bound <= best.fun + 1e-6 * (1 + abs(best.fun))
    free, _ = plan_bound(model, model.cost, [], time.perf_counter() + 60)
    assert free is not None and free <= bound + 1e-6


def test_models_without_people_placed_per_destination_are_not_decomposed():
    instance = _movers(0)
    assert not decomposable(build_model(instance, pair_details=True))
    nobody = instance.with_changes(staff=tuple(replace(p, can_relocate=False)
                                               for p in instance.staff))
    assert not decomposable(build_model(nobody, pair_details=False))
