"""Each relocatable person's best whole plan, checked against scipy's HiGHS.

Reference: scipy's ``milp`` (its own HiGHS build) over the same person's own rows and
columns, with the same (random) reduced costs: the shortest path must find its optimum.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
import scipy.sparse as sp
from randomized import movers
from scipy.optimize import Bounds, LinearConstraint, milp

from rebalance.model import Model, build_model
from rebalance.whole_plans import WholePlans, best_plan, decomposable


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
@pytest.mark.parametrize("max_run", [0, 1, 2, None])
def test_each_persons_best_plan_is_the_milp_optimum_of_their_own_rows(seed, max_run):
    model = build_model(movers(seed, max_run), pair_details=False)
    assert decomposable(model)
    plans = WholePlans(model)
    people, own = plans.people, plans.own_rows
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
            value, plan = best_plan(p, reduced)
            reference = _own_optimum(model, p.columns, rows, reduced)
            assert value == pytest.approx(reference, abs=1e-6 * (1 + abs(reference)))
            assert float(reduced[p.columns] @ plan) == pytest.approx(value, abs=1e-9)


def _rows_of(model: Model, columns: np.ndarray) -> np.ndarray:
    touched = model.matrix.tocsc()[:, columns]
    return np.unique(sp.find(touched)[0])



def test_models_without_people_placed_per_destination_are_not_decomposed():
    instance = movers(0)
    assert not decomposable(build_model(instance, pair_details=True))
    nobody = instance.with_changes(staff=tuple(replace(p, can_relocate=False)
                                               for p in instance.staff))
    assert not decomposable(build_model(nobody, pair_details=False))
