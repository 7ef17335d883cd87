"""The bound from relocatable people's whole plans, checked against scipy's HiGHS.

References: scipy's ``milp`` (its own HiGHS build) for the whole model's optimum, and
scipy's ``linprog`` for the LP relaxation.
That a Dantzig-Wolfe master at its optimum bounds the MIP from below and the LP relaxation
from above is a textbook fact (the convex hull of each person's whole plans lies between
the two).
"""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path

import pytest
from conftest import scipy_lp, scipy_milp
from randomized import movers

from rebalance.decomposition import plan_bound
from rebalance.instance import Instance
from rebalance.model import Model, build_model
from rebalance.whole_plans import decomposable


def _per_destination(instance: Instance) -> Model:
    model = build_model(instance, pair_details=False)
    assert decomposable(model)
    return model


@pytest.mark.parametrize("seed", range(5))
def test_the_converged_bound_lies_between_the_lp_and_the_optimum(seed):
    model = _per_destination(movers(seed, 2))
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
    model = _per_destination(movers(seed + 10, 2))
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
    model = _per_destination(movers(3, 2))
    least = scipy_milp(model, model.shortfall_weight)
    held = [(model.shortfall_weight, float(least.fun) + 1e-6)]
    best = scipy_milp(model, model.cost, extra_rows=tuple(held))
    assert best.status == 0
    bound, _ = plan_bound(model, model.cost, held, time.perf_counter() + 60)
    assert bound is not None and bound <= best.fun + 1e-6 * (1 + abs(best.fun))
    free, _ = plan_bound(model, model.cost, [], time.perf_counter() + 60)
    assert free is not None and free <= bound + 1e-6


def test_the_bound_prints_nothing_to_standard_output(tmp_path):
    # A plan's summary goes to standard output, so a solver process must not write there:
    # HiGHS prints a banner on the first Highs object a process makes (seen at the top of
    # medium's summary when this bound ran beside the search).  A fresh process, since the
    # banner comes once per process.
    code = (
        "import time\n"
        "from randomized import movers\n"
        "from rebalance.decomposition import plan_bound\n"
        "from rebalance.model import build_model\n"
        "model = build_model(movers(0, 2), pair_details=False)\n"
        "bound, _ = plan_bound(model, model.shortfall_weight, [], time.perf_counter() + 60)\n"
        "assert bound is not None\n"
    )
    tests = Path(__file__).parent
    done = subprocess.run([sys.executable, "-c", code], cwd=tests, capture_output=True,
                          text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert done.stdout == ""
