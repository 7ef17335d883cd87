"""The large-model path (rebalance.heuristics, rebalance.stage_bounds): a first plan one kind
of decision at a time, bounds beside the search, trimming, and searches a few offices at a
time.  Forced here on small instances, each must keep the optimum and its proof, or hand back
a plan of the whole model.
"""

from __future__ import annotations

import importlib
import time
from dataclasses import replace

import pytest
from conftest import DATA, solve_verified
from randomized import everyone_moves, random_instance, with_twins

from rebalance import Status, make_plan, options_from_instance, read_instance


@pytest.mark.parametrize("seed", range(4))
def test_first_plan_by_decision_leads_to_the_same_optimum(seed, monkeypatch):
    # Large models take their first plan one kind of decision at a time (hires, then
    # details); forced here on small instances, branch and bound from that plan must still
    # reach the optimum of the usual LP-and-rounding path, in both stages.
    heuristics = importlib.import_module("rebalance.heuristics")

    instance = with_twins(random_instance(seed, people=3, periods=4, offices=3, skills=2))
    options = options_from_instance(instance, relative_gap=0.0)
    usual = make_plan(instance, options)
    said: list[str] = []
    monkeypatch.setattr(heuristics, "LARGE_MODEL_COLUMNS", 0)
    forced = make_plan(instance, replace(options, progress=said.append))
    if usual.status is Status.INFEASIBLE:  # too few seats for any plan (seed 2): say so too
        assert forced.status is Status.INFEASIBLE and forced.solve.conflicts
        return
    assert any(" alone: plan with" in line for line in said)
    assert usual.verified and forced.verified
    assert usual.plan is not None and forced.plan is not None
    assert forced.status is usual.status is Status.OPTIMAL
    assert forced.plan.weighted_shortfall == pytest.approx(usual.plan.weighted_shortfall,
                                                           rel=1e-6, abs=1e-6)
    assert forced.plan.total_cost == pytest.approx(usual.plan.total_cost, rel=1e-6, abs=1e-3)


def test_first_plan_by_decision_is_a_plan_of_the_whole_model():
    # Each pass holds the other decisions, so what it returns must satisfy every row and
    # bound of the unrestricted model, with whole numbers where the model wants them.
    import numpy as np

    from rebalance.backends import HighsBackend, SolveOptions
    from rebalance.heuristics import first_plan_by_decision
    from rebalance.model import build_model

    model = build_model(read_instance(DATA / "tiny"))
    first = first_plan_by_decision(HighsBackend(), model, model.shortfall_weight, [],
                                   SolveOptions(), float("inf"), lambda _: None)
    x = first.x
    assert x is not None
    activity = model.matrix @ x
    assert np.all(activity >= model.row_lower - 1e-6)
    assert np.all(activity <= model.row_upper + 1e-6)
    assert np.all(x >= model.col_lower - 1e-9) and np.all(x <= model.col_upper + 1e-9)
    assert np.allclose(x[model.is_integer], np.rint(x[model.is_integer]), atol=1e-6)
    nothing_done = first_plan_by_decision(
        HighsBackend(), model, model.shortfall_weight, [], SolveOptions(), 0.0, lambda _: None)
    assert nothing_done.x is None and nothing_done.bound is None


@pytest.mark.parametrize(("threads", "said_of_the_lp"), [
    (2, "beside the search"), (1, "row prices")])
def test_a_large_model_gets_its_lp_bound(monkeypatch, threads, said_of_the_lp):
    # On a large model the LP relaxation runs on a second thread while the first plan is
    # sought; with one thread the passes bring a bound from the rounding LP's row prices
    # before the search of the whole model gets the rest.  Forced here on tiny, neither may
    # change the optimum or its proof.
    heuristics = importlib.import_module("rebalance.heuristics")
    tiny = read_instance(DATA / "tiny")
    usual = solve_verified(tiny)
    said: list[str] = []
    monkeypatch.setattr(heuristics, "LARGE_MODEL_COLUMNS", 0)
    forced = solve_verified(tiny, threads=threads, progress=said.append)
    assert any(said_of_the_lp in line for line in said)
    assert forced.status is Status.OPTIMAL
    assert forced.plan.total_cost == pytest.approx(usual.plan.total_cost, rel=1e-9)
    assert forced.plan.weighted_shortfall == pytest.approx(usual.plan.weighted_shortfall,
                                                           abs=1e-9)


def test_the_lp_beside_the_search_stops_within_its_stage(monkeypatch):
    # With two threads the LP bound runs beside the search, in stage two beside trimming;
    # its limit must be what is left of the stage when it starts, not the stage's whole
    # share (a medium run once ended 4.7 s past its limit that way).
    solve_module = importlib.import_module("rebalance.solve")
    heuristics = importlib.import_module("rebalance.heuristics")
    monkeypatch.setattr(heuristics, "LARGE_MODEL_COLUMNS", 0)
    deadlines: list[float] = []
    overruns: list[float] = []
    bounds_module = importlib.import_module("rebalance.stage_bounds")
    real_stage, real_lp_bound = solve_module.solve_stage, bounds_module.lp_bound

    def stage(*args, **kwargs):
        deadlines.append(args[5])  # (backend, model, objective, extra_rows, options, deadline)
        return real_stage(*args, **kwargs)

    def lp_bound(backend, model, objective, extra_rows, options, time_limit, say, when):
        overruns.append(time.perf_counter() + time_limit - deadlines[-1])
        return real_lp_bound(backend, model, objective, extra_rows, options, time_limit, say,
                             when)

    real_trimmed = solve_module.trimmed

    def slow_trimmed(*args, **kwargs):
        time.sleep(0.5)  # as trimming takes seconds at scale
        return real_trimmed(*args, **kwargs)

    monkeypatch.setattr(solve_module, "solve_stage", stage)
    monkeypatch.setattr(bounds_module, "lp_bound", lp_bound)
    monkeypatch.setattr(solve_module, "trimmed", slow_trimmed)
    solve_verified(read_instance(DATA / "tiny"), threads=2)
    assert len(overruns) == 2  # one per stage
    assert max(overruns) < 0.1  # the thread's start, not the half second of trimming


@pytest.mark.parametrize("seed", range(3))
def test_whole_plans_bound_both_stages_of_a_large_model_beside_the_search(monkeypatch, seed):
    # Relocatable people written per destination (as past ten offices): with two threads the
    # bound beside the search comes from their whole plans (rebalance.decomposition) in
    # both stages, and replaces stage two's LP with homes held.  Forced here on small
    # instances; the optimum and its proof must stand, and no bound may pass it.
    heuristics = importlib.import_module("rebalance.heuristics")
    base = random_instance(seed, people=4, periods=4, offices=3, skills=2)
    instance = everyone_moves(base)
    usual = solve_verified(instance, pair_details=False)
    said: list[str] = []
    monkeypatch.setattr(heuristics, "LARGE_MODEL_COLUMNS", 0)
    forced = solve_verified(instance, pair_details=False, threads=2, progress=said.append)
    whole = [line for line in said if "relocatable people's whole plans" in line]
    assert len(whole) == 2, said  # one per stage
    assert not any("LP with homes held" in line for line in said)
    optima = (usual.plan.weighted_shortfall, usual.plan.total_cost)
    for line, optimum in zip(whole, optima, strict=True):
        if "none" not in line:  # printed to six digits
            bound = float(line.split("): ")[1].split(" in ")[0])
            assert bound <= optimum + 1e-5 * (1 + abs(optimum))
    assert forced.status is usual.status is Status.OPTIMAL
    assert forced.plan.weighted_shortfall == pytest.approx(usual.plan.weighted_shortfall,
                                                           rel=1e-6, abs=1e-6)
    assert forced.plan.total_cost == pytest.approx(usual.plan.total_cost, rel=1e-6, abs=1e-3)


def test_a_failed_whole_plans_bound_gives_way_to_the_lp(monkeypatch):
    # Where the column generation fails (here forced: a person's rows of a shape its
    # shortest path does not read), the bound beside the search comes from the LP
    # relaxation instead, and the optimum stands.
    from rebalance.whole_plans import DecompositionError

    heuristics = importlib.import_module("rebalance.heuristics")
    base = random_instance(1, people=4, periods=4, offices=3, skills=2)
    instance = everyone_moves(base)
    usual = solve_verified(instance, pair_details=False)

    def failing(*args, **kwargs):
        raise DecompositionError("a row of another shape")

    said: list[str] = []
    monkeypatch.setattr(heuristics, "LARGE_MODEL_COLUMNS", 0)
    monkeypatch.setattr(importlib.import_module("rebalance.stage_bounds"), "plan_bound",
                        failing)
    forced = solve_verified(instance, pair_details=False, threads=2, progress=said.append)
    assert any("whole plans (beside the search) failed" in line for line in said)
    assert any("LP relaxation (beside the search)" in line for line in said)
    assert forced.status is usual.status
    assert forced.plan.weighted_shortfall == pytest.approx(usual.plan.weighted_shortfall,
                                                           rel=1e-6, abs=1e-6)


def test_without_a_bound_from_prices_the_lp_relaxation_runs_after_the_passes(monkeypatch):
    # One thread, and the rounding brings no bound (forced here): the LP relaxation runs
    # after the passes for the bound instead, and the optimum and its proof stand.
    heuristics = importlib.import_module("rebalance.heuristics")
    tiny = read_instance(DATA / "tiny")
    usual = solve_verified(tiny)
    said: list[str] = []
    monkeypatch.setattr(heuristics, "LARGE_MODEL_COLUMNS", 0)
    monkeypatch.setattr(importlib.import_module("rebalance.stage_bounds"), "priced_bound",
                        lambda *args: None)
    forced = solve_verified(tiny, threads=1, progress=said.append)
    assert any("LP relaxation (after the passes, for the bound)" in line for line in said)
    assert not any("row prices" in line for line in said)
    assert forced.status is Status.OPTIMAL
    assert forced.plan.weighted_shortfall == pytest.approx(usual.plan.weighted_shortfall,
                                                           abs=1e-9)


@pytest.mark.parametrize("threads", [1, 2])
def test_a_model_too_large_to_stop_on_time_keeps_the_first_plan(monkeypatch, threads):
    # Above WHOLE_SEARCH_MAX_NONZEROS a large model with a first plan gets no whole-model
    # branch and bound (HiGHS could not be stopped in its presolve at agency size), nor an
    # LP beside the search with two threads (agency's was not solved in 237 s); forced here
    # on tiny, the first plan must come back verified and never called optimal.
    heuristics = importlib.import_module("rebalance.heuristics")
    tiny = read_instance(DATA / "tiny")
    said: list[str] = []
    monkeypatch.setattr(heuristics, "LARGE_MODEL_COLUMNS", 0)
    monkeypatch.setattr(heuristics, "WHOLE_SEARCH_MAX_NONZEROS", 0)
    result = solve_verified(tiny, threads=threads, progress=said.append)
    assert any("no search of the whole model" in line for line in said)
    assert not any("LP relaxation" in line for line in said)
    assert result.status is Status.FEASIBLE_WITH_GAP
    assert all(stage.bound is not None and stage.bound >= 0 for stage in result.solve.stages)
    # Stage one's bound comes from the rounding LP's row prices (priced beside the search
    # with two threads), stage two's from those of an LP with homes held: with one thread
    # its own, with two one worked out beside stage one's search, for the shortfall its
    # plan had then, and moved to the shortfall stage two holds.  Neither above the optimum.
    priced = [line for line in said if "rounding LP's row prices" in line]
    assert priced and all(("beside the search" in line) == (threads == 2) for line in priced)
    ahead = [line for line in said if "bound from beside stage 1's search" in line]
    assert any("LP with homes held" in line for line in said) == (threads == 1)
    assert len(ahead) == (threads == 2)
    optimum = solve_verified(tiny).plan
    shortfall, cost = result.solve.stages
    assert shortfall.bound is not None and shortfall.bound <= optimum.weighted_shortfall + 1e-6
    assert cost.bound is not None and cost.bound <= optimum.total_cost * (1 + 1e-9) + 1e-6


@pytest.mark.parametrize("seed", [1, 3])
def test_trimming_finds_the_cheapest_plan_at_or_below_the_start(seed):
    # The cost stage of a large model first trims stage one's plan: the cheapest plan whose
    # whole-number decisions are each at most the plan's, with the shortfall held.
    # Reference: brute force over every such choice of whole numbers, the rest of each
    # plan (work split, shortfall) solved by scipy's linprog (its own HiGHS build).
    import itertools

    import numpy as np
    import scipy.sparse as sp
    from conftest import scipy_lp

    from rebalance import heuristics
    from rebalance.backends import HighsBackend, SolveOptions
    from rebalance.model import build_model

    model = build_model(random_instance(seed, people=4, periods=4, offices=3, skills=2))
    backend, options = HighsBackend(), SolveOptions(relative_gap=0.0)
    least = backend.run(model, model.shortfall_weight, [], options, 60, None).objective
    assert least is not None
    held = least + 1e-6
    # A plan with surplus to drop: the dearest one with the least shortfall.
    start = backend.run(model, -model.cost, [(model.shortfall_weight, held)], options, 60,
                        None).x
    assert start is not None
    trimmed = heuristics.trimmed(backend, model, model.cost, [(model.shortfall_weight, held)],
                                 options, start, 60, lambda _: None)

    integer = model.is_integer
    assert np.all(np.rint(trimmed[integer]) <= np.rint(start[integer]))
    assert model.shortfall_weight @ trimmed <= held + 1e-6
    activity = model.matrix @ trimmed
    assert np.all(activity >= model.row_lower - 1e-6)
    assert np.all(activity <= model.row_upper + 1e-6)

    with_held = replace(model,
                        matrix=sp.vstack([model.matrix, model.shortfall_weight], format="csr"),
                        row_lower=np.append(model.row_lower, -np.inf),
                        row_upper=np.append(model.row_upper, held))
    used = np.flatnonzero(integer & (np.rint(start) > 0))
    cheapest = np.inf
    for counts in itertools.product(*(range(int(np.rint(start[j])) + 1) for j in used)):
        lower, upper = model.col_lower.copy(), model.col_upper.copy()
        lower[integer] = upper[integer] = 0.0
        lower[used] = upper[used] = counts
        res = scipy_lp(with_held, model.cost, lower, upper)
        if res.status == 0:
            cheapest = min(cheapest, float(res.fun))
    assert float(model.cost @ trimmed) == pytest.approx(cheapest, rel=1e-6, abs=1e-3)
    assert cheapest < float(model.cost @ start) - 1.0  # the start had something to drop


@pytest.mark.parametrize("seed", [2, 5, 8])
def test_office_groups_reach_the_optimum_when_one_group_holds_every_office(seed):
    # With every office in one group, the search a few offices at a time is branch and bound
    # on the whole box, so from a poor start it must reach the model's least shortfall.
    # Reference: scipy's milp (its own HiGHS build) on the same rows.
    import time

    from conftest import scipy_milp

    from rebalance.backends import HighsBackend, SolveOptions
    from rebalance.heuristics import OFFICES_PER_GROUP, search_by_office_groups
    from rebalance.model import build_model

    instance = random_instance(seed, people=5, periods=3, offices=3, skills=2)
    assert len(instance.offices) <= OFFICES_PER_GROUP
    model = build_model(instance, pair_details=False)
    backend, options = HighsBackend(), SolveOptions(relative_gap=0.0)
    start = backend.run(model, model.cost, [], options, 60, None).x  # the cheapest plan
    assert start is not None
    found = search_by_office_groups(backend, model, model.shortfall_weight, [], options,
                                    time.perf_counter() + 60, start,
                                    (model.col_lower, model.col_upper), lambda _: None)
    reference = scipy_milp(model, model.shortfall_weight)
    assert reference.status == 0
    assert model.shortfall_weight @ start > reference.fun + 1e-3  # the start had room
    assert float(model.shortfall_weight @ found) == pytest.approx(reference.fun, rel=1e-6,
                                                                  abs=1e-6)


@pytest.mark.parametrize("seed", [1, 4])
def test_office_groups_keep_a_plan_of_the_whole_model_inside_the_box(seed):
    # Groups smaller than the offices: whatever the search returns is a plan of the whole
    # model (every row holds), no worse than the start, each whole number inside the box
    # or where the start had it.  Common practice for neighbourhood searches.
    import time

    import numpy as np

    from rebalance.backends import HighsBackend, SolveOptions
    from rebalance.heuristics import OFFICES_PER_GROUP, search_by_office_groups
    from rebalance.model import build_model

    instance = random_instance(seed, people=8, periods=3, offices=6, skills=2)
    assert len(instance.offices) > OFFICES_PER_GROUP
    model = build_model(instance)
    backend, options = HighsBackend(), SolveOptions(relative_gap=0.0)
    start = backend.run(model, model.cost, [], options, 60, None).x
    assert start is not None
    integer = model.is_integer
    lower, upper = model.col_lower.copy(), model.col_upper.copy()
    upper[integer] = np.minimum(upper[integer], 1.0)  # a narrower box than the model's
    found = search_by_office_groups(backend, model, model.shortfall_weight, [], options,
                                    time.perf_counter() + 60, start, (lower, upper),
                                    lambda _: None)
    activity = model.matrix @ found
    assert np.all(activity >= model.row_lower - 1e-6)
    assert np.all(activity <= model.row_upper + 1e-6)
    assert model.shortfall_weight @ found <= model.shortfall_weight @ start + 1e-9
    whole, known = np.rint(found[integer]), np.rint(start[integer])
    assert np.allclose(found[integer], whole, atol=1e-6)
    assert np.all((whole == known) | ((whole >= lower[integer]) & (whole <= upper[integer])))


def test_columns_name_the_offices_their_decision_is_about():
    # A detail column written per destination (relocatable people) names only where it goes;
    # the office it leaves from is the person's home in the instance.
    import numpy as np

    from rebalance.model import build_model

    instance = random_instance(3, people=6, periods=3, offices=3, skills=2)
    model = build_model(instance, pair_details=False)
    first, second = model.offices_of_columns()
    offices = [o.name for o in instance.offices]
    detail = model.blocks["detail"]
    keys = detail.keys
    assert (keys["home"] < 0).any()  # the instance has relocatable people
    for j in range(len(detail)):
        col = detail.start + j
        person = instance.staff[model.units[keys["unit"][j]][0]]
        home = keys["home"][j] if keys["home"][j] >= 0 else offices.index(person.home_office)
        assert (first[col], second[col]) == (home, keys["office"][j])
    hire = model.blocks["hire"]
    assert np.array_equal(first[hire.start:hire.stop], hire.keys["office"])


def test_a_restricted_search_worse_than_its_start_does_not_say_it_found_a_plan(monkeypatch):
    # HiGHS has handed back a plan worse than the start it was given (the caller keeps the
    # start); the progress line must not read as if the plan had become that one.
    import numpy as np

    from rebalance.backends import BackendOutcome, HighsBackend, SolveOptions, Status
    from rebalance.model import build_model

    heuristics = importlib.import_module("rebalance.heuristics")
    model = build_model(random_instance(1, people=3, periods=2, offices=2, skills=1))
    start = np.zeros(model.num_cols)
    worse = np.zeros(model.num_cols)
    objective = np.ones(model.num_cols)
    worse[0] = 5.0
    monkeypatch.setattr(heuristics, "run_within", lambda *_: BackendOutcome(
        Status.FEASIBLE_WITH_GAP, worse, 5.0, 0.0, "Stopped at the time limit", 1.0))
    said: list[str] = []
    heuristics._restricted_run(HighsBackend(), model, objective, [], SolveOptions(),
                               (model.col_lower, model.col_upper), 1.0, start, "group",
                               said.append)
    assert said == ["  group: nothing better than its start (5 found, 1.0s)"]


def test_models_with_relocatable_people_per_destination_take_the_passes_sooner(tmp_path):
    # Past ten offices relocatable people's details are written per destination, and the
    # LP relaxation of such a model is slow for its size (a 20,672-column one was not done in
    # 14 s and gave no plan in 60 s), so from 10,000 columns it takes the passes.  Measured
    # in benchmarks/notes.md ("2026-12-04: office groups to the end of a mid-size stage");
    # this checks the wiring.
    from rebalance.backends import CbcBackend, HighsBackend
    from rebalance.generate import GeneratorSpec, generate, write_generated
    from rebalance.model import build_model
    from rebalance.rounding import MOVERS_FREE_MIN_SHARE, movers_free, relocatable_share

    heuristics = importlib.import_module("rebalance.heuristics")
    spec = GeneratorSpec(staff=200, offices=12, skills=4, periods=6, relocatable_share=0.4,
                         seed=24)
    write_generated(generate(spec), tmp_path / "movers")
    model = build_model(read_instance(tmp_path / "movers"))
    detail = model.blocks["detail"]
    assert (detail.keys["home"] < 0).any()
    assert (heuristics.LARGE_MODEL_COLUMNS_WITH_MOVERS < model.num_cols
            < heuristics.LARGE_MODEL_COLUMNS)
    assert heuristics.is_large(model, HighsBackend())
    assert not heuristics.is_large(model, CbcBackend())  # CBC reruns dearly
    # A share that large, on a model that small: their details join the rounding's LP.
    assert relocatable_share(model) >= MOVERS_FREE_MIN_SHARE and movers_free(model)
    # Per pair (no per-destination columns), the same people keep the LP path.
    paired = build_model(read_instance(tmp_path / "movers"), pair_details=True)
    assert paired.num_cols < heuristics.LARGE_MODEL_COLUMNS
    assert not heuristics.is_large(paired, HighsBackend())
