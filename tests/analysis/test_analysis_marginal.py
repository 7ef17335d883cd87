"""Marginal values: exact re-solves against independent finite differences, and the LP duals
against scipy's HiGHS interface."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from analysis_helpers import exact_options, feasible_random
from conftest import DATA, scipy_lp, solve_verified
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.optimize import linprog

from rebalance import make_plan, read_instance
from rebalance.analysis.limits import limit_use
from rebalance.analysis.marginal import (
    Candidate,
    Steps,
    binding_candidates,
    first_vacancies,
    marginal_values,
    resolve_choice,
)
from rebalance.analysis.marginal_estimate import lp_row_duals
from rebalance.instance import Budget, Instance
from rebalance.model import Model, build_model, without_rounded_rows


def _relaxed_by_hand(instance: Instance, limit: str, where: str, steps: Steps) -> Instance:
    """The relaxation written again, apart from Candidate.relax."""
    if limit == "hiring_budget":
        return instance.with_changes(budgets=tuple(
            Budget(b.year, b.hiring + steps.budget, b.moves)
            if b.year == where and b.hiring is not None else b for b in instance.budgets))
    if limit == "moves_budget":
        return instance.with_changes(budgets=tuple(
            Budget(b.year, b.hiring, b.moves + steps.budget)
            if b.year == where and b.moves is not None else b for b in instance.budgets))
    if limit == "seats":
        return instance.with_changes(offices=tuple(
            replace(o, seats=(o.seats or 0) + steps.seats) if o.name == where else o
            for o in instance.offices))
    if limit == "max_hires":
        return instance.with_changes(offices=tuple(
            replace(o, max_hires_per_period=(o.max_hires_per_period or 0) + steps.max_hires)
            if o.name == where else o for o in instance.offices))
    if limit == "away_share":
        return instance.with_changes(policy=replace(
            instance.policy, max_away_share=min(1.0, instance.policy.max_away_share
                                                + steps.away_share)))
    if limit == "vacancies":
        skill, office = where.split(" at ")
        vac = dict(instance.vacancies)
        vac[(office, skill)] = vac.get((office, skill), 0) + steps.vacancies
        return instance.with_changes(vacancies=vac)
    assert limit == "time_to_hire"
    return instance.with_changes(skills=tuple(
        replace(s, time_to_hire=s.time_to_hire - steps.time_to_hire) if s.name == where else s
        for s in instance.skills))


@settings(max_examples=5, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000))
def test_marginal_value_equals_the_finite_difference_of_two_solves(seed: int) -> None:
    # Reference: two independent exact solves (base, and the limit relaxed by hand); their
    # difference in weighted shortfall and cost is the marginal value by definition.
    instance, base = feasible_random(seed, people=4, periods=3)
    steps = Steps()
    values = marginal_values(base, exact_options(instance), steps, workers=1)
    assert base.plan is not None
    for row in values.table.itertuples(index=False):
        relaxed = solve_verified(_relaxed_by_hand(instance, row.limit, row.where, steps))
        assert relaxed.plan is not None
        assert row.shortfall_reduction == pytest.approx(
            base.plan.weighted_shortfall - relaxed.plan.weighted_shortfall, abs=1e-6)
        assert row.shortfall_reduction >= -1e-6  # relaxing a limit never hurts
        if abs(row.shortfall_reduction) < 1e-9:
            # Same shortfall: stage two's least cost is unique, so the costs must agree.
            assert row.cost_change == pytest.approx(
                relaxed.plan.total_cost - base.plan.total_cost, abs=1e-3)
    ranked = values.table["shortfall_reduction"].tolist()
    assert ranked == sorted(ranked, reverse=True)


def test_only_binding_limits_are_candidates(tiny) -> None:
    base = solve_verified(tiny)
    assert base.plan is not None
    binding = {(u.limit, "policy" if u.limit == "away_share" else u.where)
               for u in limit_use(tiny, base.plan) if u.binding}
    first = {(c.limit, c.where) for c in first_vacancies(tiny)}
    for cand in binding_candidates(base):
        # Else a first funded vacancy, where the tables have no vacancy row to bind.
        assert (cand.limit, cand.where) in binding | first
        if (cand.limit, cand.where) not in binding:
            assert cand.binding_rows == 0 and cand.current == 0


def test_lp_row_duals_agree_with_scipy_highs(tiny) -> None:
    # Reference: scipy.optimize.linprog (method "highs"), whose ineqlin marginals are the
    # row duals of the <= rows; the model's rows are rewritten as A_ub x <= b_ub.
    base = solve_verified(tiny)
    assert base.solve.x is not None
    model = build_model(tiny)
    duals = lp_row_duals(model, base.solve.x, model.shortfall_weight)
    assert duals is not None
    x = base.solve.x
    integer = model.is_integer
    lower, upper = model.col_lower.copy(), model.col_upper.copy()
    lower[integer] = np.maximum(lower[integer], np.rint(x[integer]) - 1)
    upper[integer] = np.minimum(upper[integer], np.rint(x[integer]) + 1)
    A = model.matrix.toarray()
    rows_up = np.flatnonzero(np.isfinite(model.row_upper))
    rows_lo = np.flatnonzero(np.isfinite(model.row_lower))
    A_ub = np.vstack([A[rows_up], -A[rows_lo]])
    b_ub = np.concatenate([model.row_upper[rows_up], -model.row_lower[rows_lo]])
    ref = linprog(model.shortfall_weight, A_ub=A_ub, b_ub=b_ub,
                  bounds=list(zip(lower, upper, strict=True)), method="highs")
    assert ref.status == 0
    marg = ref.ineqlin.marginals
    ref_duals = np.zeros(model.num_rows)
    ref_duals[rows_up] += marg[:rows_up.size]
    ref_duals[rows_lo] -= marg[rows_up.size:]
    # Duals need not be unique; the objective change they predict for each limit row must be.
    limit_rows = [i for f in model.rows if f.name in ("hiring_budget", "seats", "max_hires")
                  for i in range(f.start, f.stop)]
    for i in limit_rows:
        assert duals[i] == pytest.approx(ref_duals[i], abs=1e-6)


def test_max_resolves_takes_the_best_estimates_first(tiny) -> None:
    base = solve_verified(tiny)
    values = marginal_values(base, exact_options(tiny), workers=1, max_resolves=1)
    table = values.table
    solved = table[table["status"] != "not re-solved"]
    assert len(solved) == 1
    finite = table["estimate_shortfall_reduction"].dropna()
    if len(finite):
        assert solved["estimate_shortfall_reduction"].iloc[0] == finite.max()


def test_limits_not_re_solved_follow_by_their_estimate_and_claim_no_verdict(tiny) -> None:
    # A sweep found the tail of the ranking in the order the limits were found (an estimate
    # of 1.9 ranked above one of 31.1) and "verified False" on rows never solved.
    base = solve_verified(tiny)
    table = marginal_values(base, exact_options(tiny), workers=1, max_resolves=1).table
    tail = table[table["status"] == "not re-solved"]
    assert len(tail) >= 2, "tiny should leave more than one limit unsolved here"
    estimates = tail["estimate_shortfall_reduction"].dropna().tolist()
    assert estimates == sorted(estimates, reverse=True)
    assert tail["verified"].isna().all()


def test_only_what_a_re_solve_measured_is_ranked(tiny, tmp_path) -> None:
    # The demo's marginal_values.csv ranked all 21 limits after 4 re-solves: ranks 5 to 21
    # went to estimates, and to time-to-hire rows with no value at all.
    from rebalance.analysis.output import write_table

    base = solve_verified(tiny)
    table = marginal_values(base, exact_options(tiny), workers=1, max_resolves=1).table
    measured = table["shortfall_reduction"].notna()
    assert 1 <= measured.sum() < len(table)
    assert measured.iloc[:measured.sum()].all()  # the measured rows come first
    assert list(table.loc[measured, "rank"]) == list(range(1, measured.sum() + 1))
    assert table.loc[~measured, "rank"].isna().all()
    assert (table.loc[~measured, "status"] == "not re-solved").all()
    # In the CSV: whole ranks, and an empty cell where there is none.
    written = write_table(table, tmp_path / "marginal_values.csv").read_text().splitlines()
    ranks = [line.split(",", 1)[0] for line in written[1:]]
    assert ranks == [str(r) for r in range(1, measured.sum() + 1)] + [""] * (~measured).sum()


def _short_at_b(tiny: Instance, b_hires: int) -> Instance:
    """tiny with six FTE of review demand at B from 2027-Q2, money to hire and none to move,
    and ``b_hires`` starts allowed per period at B: hiring slots at B are what hold it back."""
    demand = tuple(replace(d, fte=6.0) if d.office == "B" and d.period >= 1 else d
                   for d in tiny.demand)
    offices = tuple(replace(o, max_hires_per_period=b_hires) if o.name == "B" else o
                    for o in tiny.offices)
    return tiny.with_changes(demand=demand, offices=offices,
                             budgets=(Budget("2027", 900_000.0, 0.0),))


def _boxed(model: Model, x_of_key: dict[tuple[int, ...], float]) -> tuple[np.ndarray, ...]:
    """Column bounds of the estimate's LP: integer columns within one unit of the plan's value
    (hire columns found by key, so a column only this model has is boxed at 0)."""
    x = np.zeros(model.num_cols)
    hire = model.blocks["hire"]
    for j in range(len(hire)):
        key = tuple(int(hire.keys[k][j]) for k in ("office", "skill", "period", "new"))
        x[hire.start + j] = x_of_key.get(key, 0.0)
    lower, upper = model.col_lower.copy(), model.col_upper.copy()
    integer = model.is_integer
    lower[integer] = np.maximum(lower[integer], np.rint(x[integer]) - 1)
    upper[integer] = np.minimum(upper[integer], np.rint(x[integer]) + 1)
    return lower, upper


@pytest.mark.parametrize("b_hires", [1, 0])
def test_a_limit_held_by_column_bounds_has_an_estimate(tiny: Instance, b_hires: int) -> None:
    # With one possible start per office and period the model bounds that hire column by the
    # cap instead of writing a max_hires row (and with a cap of 0 it has no column at all):
    # the estimate had been NaN.  Reference: the estimate's own LP (integer columns boxed to
    # one unit around the plan, rounded rows free) solved by scipy's linprog before and after
    # the relaxation; with a step inside the basis' range the two differ by the estimate.
    instance = _short_at_b(tiny, b_hires)
    base = solve_verified(instance)
    assert base.plan is not None and base.solve.x is not None
    table = marginal_values(base, exact_options(instance), workers=1).table
    row = table[(table["limit"] == "max_hires") & (table["where"] == "B")].iloc[0]
    model = without_rounded_rows(build_model(instance))
    assert not [f for f in model.rows if f.name == "max_hires" and f.stop > f.start]
    relaxed_instance = _relaxed_by_hand(instance, "max_hires", "B", Steps())
    relaxed = without_rounded_rows(build_model(relaxed_instance))
    hire = model.blocks["hire"]
    x_of_key = {tuple(int(hire.keys[k][j]) for k in ("office", "skill", "period", "new")):
                float(base.solve.x[hire.start + j]) for j in range(len(hire))}
    before = scipy_lp(model, model.shortfall_weight, *_boxed(model, x_of_key))
    after = scipy_lp(relaxed, relaxed.shortfall_weight, *_boxed(relaxed, x_of_key))
    assert before.status == 0 and after.status == 0
    assert before.fun - after.fun > 1.0  # the cap holds the LP back, not only the plan
    assert row["estimate_shortfall_reduction"] == pytest.approx(before.fun - after.fun,
                                                                abs=1e-6)
    # Here one more slot per period buys what the LP says (exact re-solve, gap 0).
    assert row["shortfall_reduction"] == pytest.approx(before.fun - after.fun, abs=1e-6)
    # A shorter time to hire opens hire columns for an earlier start (it had no estimate):
    # the same reference, on the model built for that relaxation by hand.
    [sooner] = table[table["limit"] == "time_to_hire"].itertuples()
    earlier = without_rounded_rows(build_model(
        _relaxed_by_hand(instance, "time_to_hire", sooner.where, Steps())))
    assert earlier.blocks["hire"].stop - earlier.blocks["hire"].start > len(hire)
    opened = scipy_lp(earlier, earlier.shortfall_weight, *_boxed(earlier, x_of_key))
    assert opened.status == 0
    assert sooner.estimate_shortfall_reduction == pytest.approx(before.fun - opened.fun,
                                                                abs=1e-6)
    assert "estimate from an LP re-solve" in sooner.method


def test_every_limit_but_time_to_hire_has_an_estimate(tiny: Instance) -> None:
    # tiny's max_hires at B has no row either; no shortfall is left, so every estimate is 0.
    base = solve_verified(tiny)
    table = marginal_values(base, exact_options(tiny), workers=1).table
    assert "max_hires" in set(table["limit"])
    others = table[table["limit"] != "time_to_hire"]
    assert (others["estimate_shortfall_reduction"] == 0.0).all()


def test_weighted_mode_calls_a_priced_trade_a_trade_and_ranks_by_the_objective() -> None:
    # tests/data/weighted_trade/NOTE.md, by hand: relaxing the moves budget swaps the hire
    # (50,000) for a detail (20,000 + 0.4 x 30,000 short): shortfall 0.4 up, cost 30,000 down,
    # the objective 18,000 better. It had read as "below 0 only within the two solves' gap"
    # and come last (a sweep of weighted mode).
    instance = read_instance(DATA / "weighted_trade")
    base = make_plan(instance, exact_options(instance))
    assert base.verified
    table = marginal_values(base, exact_options(instance), workers=1).table
    moves = table[table["limit"] == "moves_budget"].iloc[0]
    assert moves["shortfall_reduction"] == pytest.approx(-0.4)
    assert moves["cost_change"] == pytest.approx(-30_000.0)
    assert "more shortfall for less cost" in moves["method"] and "gap" not in moves["method"]
    # A first funded review vacancy at B does better still, by hand from the same NOTE.md:
    # the same hire from Q2 pays onboarding only, 10,000, not 50,000, and covers it all: no
    # shortfall change, cost 40,000 down, the objective 40,000 better.  Ranked by the
    # objective's gain: the vacancy (40,000) first, the moves budget (18,000) next.
    vacancy = table[table["limit"] == "vacancies"].iloc[0]
    assert vacancy["where"] == "review at B"
    assert vacancy["shortfall_reduction"] == pytest.approx(0.0, abs=1e-6)
    assert vacancy["cost_change"] == pytest.approx(-40_000.0)
    assert (vacancy["rank"], moves["rank"]) == (1, 2)


def test_weighted_mode_with_free_shortfall_gives_no_estimate_not_nan_by_accident(tiny) -> None:
    from dataclasses import replace

    free = replace(tiny, objective=replace(tiny.objective, mode="weighted",
                                           shortfall_cost=0.0))
    base = make_plan(free, exact_options(free))
    table = marginal_values(base, exact_options(free), workers=1).table
    assert all("shortfall_cost is 0" in m or "time to hire" in m for m in table["method"])


def _with_shortfall(result, weighted_shortfall: float):
    """``result`` with its plan's weighted shortfall set to ``weighted_shortfall`` (all on the
    first coverage row): the shortfalls two solves report, without solving for them."""
    assert result.plan is not None
    coverage = result.plan.coverage.copy()
    coverage["weighted_shortfall"] = 0.0
    coverage.loc[coverage.index[0], "weighted_shortfall"] = weighted_shortfall
    return replace(result, plan=replace(result.plan, coverage=coverage))


@pytest.mark.parametrize(("relaxed", "reduction", "gap_words"), [
    # /tmp sweep, vacancies row: 6.983486704228082 against the cost stage's cap 1e-6 above it
    # had read -6.98e-06, "worse only within the two solves' gap".
    (6.983486704228082 * (1 + 1e-6), 0.0, False),
    (6.983486704228082 * (1 - 1e-6), 0.0, False),  # better within it: no change either
    (6.983486704228082 + 0.01, -0.01, True),  # beyond the tolerance: the gap's doing
])
def test_a_shortfall_within_the_shortfall_tolerance_is_no_change(
        tiny, monkeypatch, relaxed: float, reduction: float, gap_words: bool) -> None:
    from rebalance.analysis import marginal

    options = exact_options(tiny)
    assert options.mode == "shortfall-first" and options.shortfall_tolerance == 1e-6
    solved = solve_verified(tiny)
    base = _with_shortfall(solved, 6.983486704228082)
    monkeypatch.setattr(marginal, "solve_many", lambda instances, *_: [
        _with_shortfall(solved, relaxed) for _ in instances])
    candidate = marginal.Candidate("seats", "A", 3.0, 10.0, "seats", 1)
    row = marginal_values(base, options, workers=1, candidates=[candidate]).table.iloc[0]
    assert row["shortfall_reduction"] == pytest.approx(reduction, abs=1e-12)
    assert ("solves' gap" in row["method"]) is gap_words


def test_a_budget_step_is_counted_in_the_instance_currency(tiny) -> None:
    from rebalance.analysis.marginal import STEP_UNITS, step_unit
    from rebalance.instance import Money

    euros = tiny.with_changes(money=Money("EUR"))
    units = {c.limit: c.unit for c in binding_candidates(solve_verified(euros))}
    assert units["hiring_budget"] == "EUR"
    assert units["max_hires"] == "hires per period"  # not money: unchanged
    assert {c.limit: c.unit for c in binding_candidates(solve_verified(tiny))}[
        "hiring_budget"] == "money"  # no currency set
    for limit, unit in STEP_UNITS.items():
        assert step_unit(limit, euros) == ("EUR" if unit.plural == "money" else unit.plural)


def _candidate(limit: str, where: str) -> Candidate:
    return Candidate(limit, where, 1.0, 1.0, "unit", 1)


def test_max_resolves_keeps_the_best_hiring_budget_among_the_limits_it_re_solves() -> None:
    # The demo's --max-resolves 3 re-solved three seats and no budget: what more money buys is
    # what leaders ask first.  Expected choices worked out by hand from the estimates below.
    chosen = [_candidate("seats", "A"), _candidate("seats", "B"), _candidate("seats", "C"),
              _candidate("moves_budget", "2027"), _candidate("hiring_budget", "2028"),
              _candidate("hiring_budget", "2027")]
    estimates = [20.0, 15.0, 8.0, 2.5, 0.8, 1.7]
    assert resolve_choice(chosen, estimates, None) == [0, 1, 2, 3, 5, 4]
    assert resolve_choice(chosen, estimates, 3) == [0, 1, 5]  # hiring 2027 before 2028
    assert resolve_choice(chosen, estimates, 2) == [0, 5]
    assert resolve_choice(chosen, estimates, 1) == [0]  # one re-solve: the best alone
    # A budget among the best already: the ranking stands.
    assert resolve_choice(chosen, [20.0, 15.0, 8.0, 9.0, 0.8, 1.7], 3) == [0, 1, 3]
    # No hiring budget a candidate: a moves budget is kept instead.
    assert resolve_choice(chosen[:4], estimates[:4], 2) == [0, 3]
    # A hiring budget with no estimate is still kept (it ranks last otherwise).
    assert resolve_choice(chosen[:3] + chosen[5:], [20.0, 15.0, 8.0, math.nan], 2) == [0, 3]
    # No budget a candidate: the N best.
    assert resolve_choice(chosen[:3], estimates[:3], 2) == [0, 1]


def test_marginal_values_re_solves_a_budget_the_estimates_rank_last(tiny) -> None:
    # tiny's three binding limits all estimate 0, so they rank in the order given: the
    # hiring budget, given last, is re-solved with --max-resolves 2 all the same.
    base = solve_verified(tiny)
    found = {c.limit: c for c in binding_candidates(base) if c.binding_rows}
    assert set(found) == {"hiring_budget", "away_share", "max_hires"}
    given = [found["away_share"], found["max_hires"], found["hiring_budget"]]
    table = marginal_values(base, exact_options(tiny), workers=1, max_resolves=2,
                            candidates=given).table
    solved = table.loc[table["status"] != "not re-solved", "limit"].tolist()
    assert len(solved) == 2 and "hiring_budget" in solved
    # Each limit in words beside its codes (written out by hand from tiny's budget.csv and
    # offices.csv).
    assert dict(zip(table["limit"], table["limit_in_words"], strict=True)) == {
        "hiring_budget": "hiring budget 2027", "away_share": "away share, every office",
        "max_hires": "hiring slots at B in every period"}
