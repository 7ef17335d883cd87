"""Bounds from row prices, checked against scipy's HiGHS (scipy.optimize.linprog).

The reference LP optimum comes from scipy's own HiGHS build through ``linprog``, which reads
the model's rows as plain inequalities: no row scaling, no presolve choices of ours.  Weak
and strong LP duality are textbook facts (any prices bound the optimum from below; the
optimum's own prices reach it).
"""

from __future__ import annotations

import time
from dataclasses import replace
from types import SimpleNamespace

import numpy as np
import pytest
import scipy.sparse as sp
from conftest import scipy_lp, scipy_milp
from randomized import everyone_moves, random_instance

from rebalance import stage_bounds
from rebalance.backends import HighsBackend, SolveOptions, Status
from rebalance.bounds import dual_bound, priced_bound
from rebalance.instance import Instance
from rebalance.model import Model, build_model
from rebalance.rounding import held_lp_bounds
from rebalance.split import relaxed, solve_relaxation
from rebalance.stage_bounds import cost_bound_ahead


def _movers(seed: int) -> Instance:
    """A random instance whose people may all be detailed and relocated."""
    base = random_instance(seed, people=4, periods=4, offices=4, skills=2)
    return everyone_moves(base)


def _scipy_lp_optimum(model: Model, objective: np.ndarray) -> float:
    """The LP relaxation's optimum by scipy's linprog (HiGHS), rows as A x <= b."""
    res = scipy_lp(model, objective)
    assert res.status == 0, res.message
    return float(res.fun)


def _model_and_objectives(seed: int) -> tuple[Model, list[np.ndarray]]:
    # Per-destination details: the formulation with cost-adjustment columns and big-M rows,
    # and money rows with large coefficients (the backend scales rows; prices must not be).
    model = build_model(_movers(seed), pair_details=False)
    assert "detail_cost_adjustment" in model.blocks
    return model, [model.shortfall_weight, model.cost + 1e4 * model.shortfall_weight]


@pytest.mark.parametrize("seed", range(4))
def test_the_lp_optimums_prices_give_its_value_and_any_prices_a_lower_bound(seed):
    model, objectives = _model_and_objectives(seed)
    rng = np.random.default_rng(seed)
    for objective in objectives:
        reference = _scipy_lp_optimum(model, objective)
        lp = HighsBackend().run(relaxed(model), objective, [], SolveOptions(), 60, None)
        assert lp.status is Status.OPTIMAL and lp.row_dual is not None
        scale = 1e-6 * (1.0 + abs(reference))
        assert dual_bound(model, objective, lp.row_dual) == pytest.approx(reference, abs=scale)
        for _ in range(5):
            prices = lp.row_dual + rng.normal(0.0, 1.0, model.num_rows)
            assert dual_bound(model, objective, prices) <= reference + scale


@pytest.mark.parametrize("seed", range(4))
def test_priced_bound_is_a_bound_and_exact_from_the_optimums_prices(seed):
    # Prices from an LP with every home and relocatable detail held at zero (as the
    # rounding heuristic's LP holds them) must still bound the whole LP from below; prices
    # of the whole LP's optimum must give back its value (strong duality).
    model, objectives = _model_and_objectives(seed)
    backend = HighsBackend()
    held = model.col_upper.copy()
    for name in ("home", "detail_cost_adjustment"):
        held[model.blocks[name].start:model.blocks[name].stop] = 0.0
    detail = model.blocks["detail"]
    held[detail.start:detail.stop][detail.keys["home"] < 0] = 0.0
    for objective in objectives:
        reference = _scipy_lp_optimum(model, objective)
        scale = 1e-6 * (1.0 + abs(reference))
        restricted = backend.run(relaxed(replace(model, col_upper=held)), objective, [],
                                 SolveOptions(), 60, None)
        assert restricted.row_dual is not None
        bound = priced_bound(backend, model, objective, restricted.row_dual, SolveOptions(), 60)
        assert bound is not None and bound <= reference + scale
        whole = backend.run(relaxed(model), objective, [], SolveOptions(), 60, None)
        assert whole.row_dual is not None
        exact = priced_bound(backend, model, objective, whole.row_dual, SolveOptions(), 60)
        assert exact == pytest.approx(reference, abs=1e-5 * (1.0 + abs(reference)))


@pytest.mark.parametrize("seed", range(3))
def test_priced_bound_under_a_held_objective_is_exact_from_the_optimums_prices(seed):
    # Stage two: least cost with the weighted shortfall held at most at a level (here the
    # LP's least shortfall plus a little).  The held row is priced with the rest.
    model, _ = _model_and_objectives(seed)
    backend = HighsBackend()
    least = _scipy_lp_optimum(model, model.shortfall_weight)
    extra = [(model.shortfall_weight, least + 0.1)]
    held = replace(model, matrix=sp.vstack([model.matrix, model.shortfall_weight], format="csr"),
                   row_lower=np.append(model.row_lower, -np.inf),
                   row_upper=np.append(model.row_upper, least + 0.1))
    reference = _scipy_lp_optimum(held, model.cost)
    whole = backend.run(relaxed(model), model.cost, extra, SolveOptions(), 60, None)
    assert whole.status is Status.OPTIMAL and whole.row_dual is not None
    assert whole.row_dual.size == model.num_rows + 1
    exact = priced_bound(backend, model, model.cost, whole.row_dual, SolveOptions(), 60, extra)
    assert exact == pytest.approx(reference, abs=1e-5 * (1.0 + abs(reference)))


@pytest.mark.parametrize("seed", range(4))
def test_priced_bound_with_whole_plans_is_a_bound_and_no_weaker(seed):
    # Relocatable people's pieces solved exactly over whole plans (a shortest path) instead
    # of as LPs: the bound must stay below the MIP optimum (scipy's milp) and, at the same
    # prices, at least the bound with LP pieces (each exact piece is at least its LP).
    from conftest import scipy_milp

    from rebalance.whole_plans import WholePlans

    model, objectives = _model_and_objectives(seed)
    backend = HighsBackend()
    pieces = WholePlans(model)
    assert pieces.columns.any() and pieces.own_rows.any()
    rng = np.random.default_rng(seed)
    for objective in objectives:
        best = scipy_milp(model, objective)
        assert best.status == 0
        lp = backend.run(relaxed(model), objective, [], SolveOptions(), 60, None)
        assert lp.row_dual is not None
        for prices in (lp.row_dual, lp.row_dual + rng.normal(0.0, 0.5, model.num_rows)):
            apart = priced_bound(backend, model, objective, prices, SolveOptions(), 60)
            exact = priced_bound(backend, model, objective, prices, SolveOptions(), 60, None,
                                 pieces)
            assert apart is not None and exact is not None
            # Each bound keeps a slack of 1e-9 of its terms' size for rounding.
            scale = 1e-6 * (1.0 + abs(best.fun) + abs(apart))
            assert apart - scale <= exact <= best.fun + scale


def test_the_first_plan_of_a_large_model_brings_a_bound_near_the_lp():
    # On the demo (a surge, budgets binding) the passes' bound from the rounding LP's prices
    # must lie below the LP optimum (scipy) and within a tenth of it: a bound that means
    # something, not just a number below the plan.
    from conftest import ROOT

    from rebalance import read_instance
    from rebalance.heuristics import first_plan_by_decision

    model = build_model(read_instance(ROOT / "instances" / "demo"))
    reference = _scipy_lp_optimum(model, model.shortfall_weight)
    first = first_plan_by_decision(HighsBackend(), model, model.shortfall_weight, [],
                                   SolveOptions(relative_gap=0.01), float("inf"),
                                   lambda _: None)
    assert first.x is not None and first.bound is not None
    assert 0.9 * reference <= first.bound <= reference + 1e-6 * reference
    assert first.bound <= float(model.shortfall_weight @ first.x)


@pytest.mark.parametrize("seed", range(3))
def test_an_lp_asked_for_its_point_only_lands_near_the_optimum_and_its_prices_still_bound(
        seed, monkeypatch):
    # Large LPs wanted for a point to round go to HiGHS's first-order method (PDLP) with a
    # loose tolerance; here every LP counts as large.  Its objective is near scipy's optimum
    # but claims no bound; any prices, its own included, bound the optimum from below.
    import rebalance.backends.highs as highs_module

    monkeypatch.setattr(highs_module, "IPM_LP_COLUMNS", 0)
    model, objectives = _model_and_objectives(seed)
    for objective in objectives:
        reference = _scipy_lp_optimum(model, objective)
        lp = solve_relaxation(HighsBackend(), model, objective, [], SolveOptions(), 60,
                              point_only=True)
        assert lp.status is Status.APPROXIMATE and lp.bound is None
        assert lp.x is not None and lp.row_dual is not None and lp.objective is not None
        loose = 5 * highs_module.POINT_ONLY_TOLERANCE * (1.0 + abs(reference))
        assert float(objective @ lp.x) == pytest.approx(reference, abs=loose)
        scale = 1e-6 * (1.0 + abs(reference))
        assert dual_bound(model, objective, lp.row_dual) <= reference + scale


@pytest.mark.parametrize("seed", [0, 1, 5, 6])  # seeds where the held row binds
def test_a_cost_bound_for_one_held_shortfall_moves_to_any_other_and_stays_a_bound(seed):
    # Weak duality: prices from an LP with the shortfall held at S' bound the least cost
    # under any held shortfall, and only the held row's term moves with it (linearly).
    # Reference: scipy's milp on the whole model with the shortfall row added (relocatable
    # people's pieces are solved as whole plans, so the bound may pass the LP's optimum).
    model, _ = _model_and_objectives(seed)
    start = model.col_lower.copy()  # nobody moved, nobody hired
    _, lower, upper = held_lp_bounds(model, start)
    least_held = float(scipy_lp(model, model.shortfall_weight, lower, upper).fun)
    least = _scipy_lp_optimum(model, model.shortfall_weight)
    ahead_at = least_held + 0.1  # close to the least: the held row binds
    ahead = cost_bound_ahead(HighsBackend(), model, SolveOptions(), start, ahead_at,
                             time.perf_counter() + 60, lambda _: None)
    assert ahead is not None and ahead.held_price < 0.0
    checked = 0
    for held in np.linspace(ahead_at + 1.0, least, 6):
        found = scipy_milp(model, model.cost, extra_rows=((model.shortfall_weight, held),))
        if found.status != 0:
            continue  # no whole plan reaches that shortfall
        reference = float(found.fun)
        bound = ahead.at(float(held))
        assert (bound > ahead.bound) == (held < ahead_at)
        assert bound <= reference + 1e-6 * (1.0 + abs(reference))
        checked += 1
    assert checked >= 2


def test_no_cost_bound_beside_the_search_without_the_memory_for_it(monkeypatch):
    # The bound is optional; a run that swaps or is killed for it is not. Memory is read
    # through psutil, here told that almost none is free.
    model, _ = _model_and_objectives(0)
    start = model.col_lower.copy()
    said: list[str] = []

    def run() -> object:
        return cost_bound_ahead(HighsBackend(), model, SolveOptions(), start, 1e9,
                                time.perf_counter() + 60, said.append)

    assert run() is not None and not said[-1].startswith("  no bound")
    free = stage_bounds.MEMORY_RESERVE_BYTES + 10 * model.matrix.nnz
    monkeypatch.setattr(stage_bounds.psutil, "virtual_memory",
                        lambda: SimpleNamespace(available=free))
    assert run() is None
    assert said[-1].startswith("  no bound for the cost stage beside the search")
    assert "GiB are free" in said[-1]


def test_no_cost_bound_beside_the_search_without_the_time_its_lp_took_in_stage_one():
    # Started too late (agency at 60 s: 5 s left against the 25 s the same LP took in
    # stage 1), the job would only hold a core and memory until the stage ends.
    model, _ = _model_and_objectives(0)
    start = model.col_lower.copy()
    said: list[str] = []
    deadline = time.perf_counter() + 60
    assert cost_bound_ahead(HighsBackend(), model, SolveOptions(), start, 1e9, deadline,
                            said.append, expected_seconds=1.0) is not None
    assert cost_bound_ahead(HighsBackend(), model, SolveOptions(), start, 1e9, deadline,
                            said.append, expected_seconds=600.0) is None
    assert said[-1].startswith("  no bound for the cost stage beside the search: its LP")
