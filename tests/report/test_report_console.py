"""Console summary: what a stage stopped early leaves open, in the stage's own units."""

from __future__ import annotations

from rebalance.report.console import room_left
from rebalance.solve import StageResult, Status


def stage(name: str, status: Status, objective: float, bound: float, gap: float) -> StageResult:
    return StageResult(name, status, objective, bound, gap, 10.0, "Time limit reached")


def test_a_cost_stage_stopped_early_says_how_much_cheaper_a_plan_might_be():
    text = room_left(stage("cost", Status.FEASIBLE_WITH_GAP, 2_461_000.0, 2_410_000.0,
                            51_000 / 2_461_000))
    assert text == "a plan with the same shortfall may cost up to 51,000 less (gap 2.07%)"


def test_a_shortfall_stage_stopped_early_says_how_much_less_short_a_plan_might_be():
    text = room_left(stage("shortfall", Status.FEASIBLE_WITH_GAP, 1808.47, 1528.95,
                            279.52 / 1808.47))
    assert text is not None and "up to 279.520 weighted FTE-periods less shortfall" in text


def test_a_proven_stage_leaves_nothing_open():
    assert room_left(stage("cost", Status.OPTIMAL, 43_000.0, 43_000.0, 0.0)) is None


def test_a_stage_bounded_only_by_zero_says_it_had_no_time_to_bound_rather_than_all_may_go():
    # A sweep of generated instances: 50 small offices at 15 s left the cost stage 2 s.
    text = room_left(stage("cost", Status.FEASIBLE_WITH_GAP, 6_945_700.0, 0.0, 1.0))
    assert text == "no bound worked out in the 10.00s this stage had, beyond 0 (gap 100.00%)"


def test_a_stage_optimal_within_the_gap_asked_says_what_is_left():
    # A sweep read "optimal" beside a bound 0.53% below: optimal as asked, not exactly.
    from dataclasses import replace

    from conftest import DATA, solve_verified

    from rebalance import read_instance
    from rebalance.report.console import format_summary

    result = solve_verified(read_instance(DATA / "tiny"))
    first = replace(result.solve.stages[0], objective=165.945, bound=165.061,
                    gap=0.884 / 165.945)
    text = format_summary(replace(result, solve=replace(result.solve,
                                                        stages=(first, *result.solve.stages[1:]))))
    assert "stage shortfall: optimal within the gap asked (0.53% left), objective 165.945" in text
    assert "stage cost: optimal, objective 43,000" in text  # exact: no words added
