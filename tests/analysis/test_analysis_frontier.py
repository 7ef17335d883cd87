"""Budget frontier: grid parsing, the knee, monotonicity, and the process pool."""

from __future__ import annotations

import itertools

import pandas as pd
import pytest
from analysis_helpers import exact_options, feasible_random
from conftest import DATA, solve_verified
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rebalance import read_instance
from rebalance.analysis.frontier import (
    BudgetGrid,
    budget_frontier,
    find_knee,
    mark_knees,
    parse_grid,
    with_budgets,
)


def test_parse_grid() -> None:
    assert parse_grid("0,50000,100000") == ((0.0, 50000.0, 100000.0), False)
    assert parse_grid("0:100_000:25_000") == ((0.0, 25000.0, 50000.0, 75000.0, 100000.0), False)
    assert parse_grid("0.5x,1x,2x") == ((0.5, 1.0, 2.0), True)
    assert parse_grid("0:2:0.5x") == ((0.0, 0.5, 1.0, 1.5, 2.0), True)
    for bad in ("", "1,2x", "5:1:1", "0:1", "-1,2", "a,b"):
        with pytest.raises(ValueError):
            parse_grid(bad)
    # A sweep: '1,,2' had dropped the empty value, and 'x' said "could not convert string
    # to float: ''".
    with pytest.raises(ValueError, match="empty value"):
        parse_grid("1,,2")
    with pytest.raises(ValueError, match="'' is not a number"):
        parse_grid("x")


def test_knee_of_a_hand_drawn_curve() -> None:
    # Scaled to [0, 1] the chord runs from (0, 1) to (1, 0); the point (0.25, 0.2) lies 0.55
    # below it, farther than any other point (hand arithmetic).
    x = [0, 25, 50, 75, 100]
    y = [100, 20, 10, 5, 0]
    assert find_knee(x, y) == 1
    assert find_knee([0, 1, 2], [3, 2, 1]) is None  # a straight line has no knee
    assert find_knee([0, 1], [1, 0]) is None
    assert find_knee([0, 1, 2], [1, 1, 1]) is None


def test_knees_are_marked_per_moves_level() -> None:
    # The hand-drawn curve above at two moves levels (None: the instance's caps), plus an
    # unverified point that must be ignored.
    rows = [{"hiring_budget": x, "moves_budget": m, "weighted_shortfall": y, "verified": True}
            for m in (None, 5000.0)
            for x, y in zip([0, 25, 50, 75, 100], [100, 20, 10, 5, 0], strict=True)]
    rows.append({"hiring_budget": 10, "moves_budget": None, "weighted_shortfall": 0.0,
                 "verified": False})
    marked = mark_knees(pd.DataFrame(rows))
    knees = marked[marked["knee"]]
    assert knees["hiring_budget"].tolist() == [25, 25]
    assert knees["moves_budget"].isna().sum() == 1


@settings(max_examples=8, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000))
def test_more_budget_never_raises_shortfall(seed: int) -> None:
    # Property (hypothesis, random small instances, exact solves): a larger hiring cap only
    # adds plans, so the least weighted shortfall cannot rise along the grid.
    instance, _ = feasible_random(seed, people=3, periods=3)
    grid = BudgetGrid((0.0, 10_000.0, 30_000.0, 80_000.0))
    frontier = budget_frontier(instance, grid, exact_options(instance), workers=1)
    table = frontier.table
    assert table["verified"].all()
    shortfall = table.sort_values("hiring_budget")["weighted_shortfall"].tolist()
    for before, after in itertools.pairwise(shortfall):
        assert after <= before + 1e-6
    assert table["hiring_spend"].le(table["hiring_budget"] * len(instance.years) + 1e-6).all()


def test_pool_gives_the_same_points_as_one_process(tiny) -> None:
    grid = BudgetGrid((0.5, 1.0), as_factor=True)
    options = exact_options(tiny)
    pooled = budget_frontier(tiny, grid, options, workers=2).table
    alone = budget_frontier(tiny, grid, options, workers=1).table
    assert pooled["weighted_shortfall"].tolist() == pytest.approx(
        alone["weighted_shortfall"].tolist())
    # Reference: the half-budget point solved directly.
    half = solve_verified(with_budgets(tiny, 0.5, None, as_factor=True))
    assert half.plan is not None
    assert pooled.loc[0, "weighted_shortfall"] == pytest.approx(half.plan.weighted_shortfall)
    budget = tiny.budgets[0]
    assert budget.hiring is not None
    assert with_budgets(tiny, 0.5, None, True).budgets[0].hiring == budget.hiring / 2


def test_a_factor_grid_says_its_unit_and_names_years_it_cannot_cap(tiny) -> None:
    # A sweep read 0.5 and 1.0 under hiring_budget as money, and on a year with no cap every
    # factor gave the same plan without a word.
    from dataclasses import replace

    from rebalance.analysis.frontier import FACTOR_UNIT, uncapped_years

    grid = BudgetGrid((0.5, 1.0), as_factor=True)
    table = budget_frontier(tiny, grid, exact_options(tiny), workers=1).table
    assert (table["budget_unit"] == FACTOR_UNIT).all()
    assert uncapped_years(tiny, grid) == []
    uncapped = tiny.with_changes(budgets=tuple(replace(b, hiring=None) for b in tiny.budgets))
    assert uncapped_years(uncapped, grid) == ["2027"]
    assert uncapped_years(uncapped, BudgetGrid((1000.0,))) == []  # an amount caps every year


def test_a_weighted_instance_frontier_is_the_least_shortfall_each_budget_buys() -> None:
    # tests/data/weighted_frontier/NOTE.md, by hand: in weighted mode more hiring money buys a
    # cheaper plan with 0.5 more shortfall, so the "frontier" rose (0 -> 0.5) and its knee
    # marked that; shortfall first, every point has 0 (a sweep of weighted mode).
    instance = read_instance(DATA / "weighted_frontier")
    grid = BudgetGrid(hiring=(0.0, 10_000.0, 20_000.0, 100_000.0))
    table = budget_frontier(instance, grid, exact_options(instance), workers=1).table
    assert list(table["weighted_shortfall"]) == pytest.approx([0.0, 0.0, 0.0, 0.0])


def test_no_knee_is_marked_below_four_levels_in_the_csv_as_on_the_page() -> None:
    # A planner's reading of the demo's 3-level frontier (1x, 1.5x, 2x): frontier.csv and the
    # console marked knee = yes at 1.5x while the page said "No knee is marked: with fewer
    # than 4 budget levels any line bends somewhere".  The demo's figures (/tmp frontier.csv
    # of that reading): by hand, 1.5x lies below the chord, so the old rule marked it.
    from rebalance.analysis.frontier import KNEE_MIN_POINTS
    from rebalance.report.analysis_charts import KNEE_MIN_POINTS as PAGE_RULE

    assert KNEE_MIN_POINTS == PAGE_RULE == 4  # one rule, the page's
    x, y = [1.0, 1.5, 2.0], [168.592, 161.740, 159.071]
    assert find_knee(x, y) is None
    rows = [{"hiring_budget": h, "moves_budget": None, "weighted_shortfall": w,
             "verified": True} for h, w in zip(x, y, strict=True)]
    assert not mark_knees(pd.DataFrame(rows))["knee"].any()
    # Four points of the hand-drawn curve above still have their knee at 25.
    assert find_knee([0, 25, 50, 100], [100, 20, 10, 0]) == 1


def test_each_point_says_its_caps_in_money_and_its_new_money_over_point_1(tiny) -> None:
    # A planner's reading: a factor grid's table said only "1.000", "1.500", not how much
    # money a point's caps allow, nor what more it spends than the first point.
    grid = BudgetGrid((0.5, 1.0), as_factor=True)
    table = budget_frontier(tiny, grid, exact_options(tiny), workers=1).table
    # tests/data/tiny/budget.csv: one year, hiring cap 40,000; 0.5x and 1x of it by hand.
    assert table["hiring_cap_total"].tolist() == pytest.approx([20_000.0, 40_000.0])
    assert table["moves_cap_total"].tolist() == pytest.approx([30_000.0, 30_000.0])
    assert table["extra_cost"].tolist() == pytest.approx(
        [0.0, table.loc[1, "total_cost"] - table.loc[0, "total_cost"]])
    # An uncapped year leaves the total unbounded: blank, not the capped years' sum.
    from dataclasses import replace

    from rebalance.analysis.frontier import cap_total

    uncapped = tiny.with_changes(budgets=tuple(replace(b, hiring=None) for b in tiny.budgets))
    assert pd.isna(cap_total(uncapped, "hiring"))
