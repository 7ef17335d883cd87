"""A re-plan keeps no change that does not pay, even where its gap would allow one."""

from __future__ import annotations

import shutil
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from analysis_helpers import a2_moved_then_forbidden, exact_options
from conftest import solve_verified

from rebalance import options_from_instance, read_instance
from rebalance.analysis.change_reasons import change_reasons
from rebalance.analysis.reasons import reasons
from rebalance.analysis.replan import Replan, replan
from rebalance.analysis.scenario_files import DemandChange, Scenario, apply_scenario
from rebalance.generate import GeneratorSpec, generate, write_generated
from rebalance.instance import Budget, Demand, Instance, Office
from rebalance.plan import PLAN_TABLES, Plan, cost_table, coverage_table
from rebalance.planning import make_plan


def _changes(frame) -> set[tuple[str, str, str, str]]:
    return {(r.change, r.who, r.period, f"{r.old}|{r.new}") for r in frame.itertuples()}


def test_no_detail_is_handed_to_an_identical_colleague_for_nothing(tmp_path: Path) -> None:
    # Found by a sweep: one person leaves after 2028-Q1; the re-plan at 2028-Q2 (gap 1%)
    # dropped S00001's detail and gave the same detail to S00003, whose staff rows are the
    # same: 4,000 of disruption within 1% of 513,200.  The reference is the same re-plan
    # solved with no gap (the exact optimum): it makes three changes and no swap.
    folder = write_generated(generate(GeneratorSpec(staff=40, offices=3, skills=2, periods=6,
                                                    seed=1)), tmp_path / "g1")
    instance = read_instance(folder)
    old = make_plan(instance, options_from_instance(instance, time_limit_seconds=15))
    assert old.plan is not None and old.verified
    staff = folder / "staff.csv"
    lines = staff.read_text().splitlines()
    lines = [line + "2028-Q1" if line.startswith("S00018,") and line.endswith(",")
             else line for line in lines]
    staff.write_text("\n".join(lines) + "\n")
    changed = read_instance(folder)
    at = changed.period_names.index("2028-Q2")
    loose = replan(changed, old.plan, at, options_from_instance(changed, time_limit_seconds=20))
    exact = replan(changed, old.plan, at, options_from_instance(changed, time_limit_seconds=20,
                                                                relative_gap=0.0))
    assert loose.result.verified and exact.result.verified
    assert _changes(loose.changes) == _changes(exact.changes)
    assert loose.disruption_cost == exact.disruption_cost
    shutil.rmtree(folder)


def test_no_change_is_made_for_less_shortfall_than_the_gap_asked(tmp_path: Path) -> None:
    # A sweep: a re-plan made 15 changes (52,000 of disruption) for 0.057 of 32.8 weighted
    # shortfall, inside the 0.99% its own search had left open.  Where the old plan's
    # shortfall is within the gap asked of stage 1's bound, the cost stage may keep it.
    # Reference: the same re-plan solved with no gap (the exact optimum).  Seed 7: on seed 1
    # the generator's data since a9e1c3c let the search itself end within the gap, and the
    # rule under test was no longer reached.
    folder = write_generated(generate(GeneratorSpec(staff=40, offices=3, skills=2, periods=6,
                                                    seed=7)), tmp_path / "g7")
    instance = read_instance(folder)
    old = make_plan(instance, options_from_instance(instance, relative_gap=0.0,
                                                    time_limit_seconds=30))
    assert old.plan is not None and old.verified
    demand = folder / "demand.csv"
    lines = demand.read_text().splitlines()
    header = lines[0].split(",")
    cells = lines[5].split(",")
    column = header.index("fte" if "fte" in header else "hours")
    cells[column] = repr(float(cells[column]) * 1.3)
    lines[5] = ",".join(cells)
    demand.write_text("\n".join(lines) + "\n")
    changed = read_instance(folder)
    gap = 0.05
    exact = replan(changed, old.plan, 2, options_from_instance(changed, relative_gap=0.0,
                                                               time_limit_seconds=30))
    loose = replan(changed, old.plan, 2, options_from_instance(changed, relative_gap=gap,
                                                               time_limit_seconds=30))
    assert exact.result.plan is not None and loose.result.plan is not None
    assert loose.result.verified
    best = exact.result.plan.weighted_shortfall
    kept = loose.result.plan.weighted_shortfall
    before = loose.summary.set_index("measure").loc["weighted_shortfall", "old_plan"]
    assert best <= kept <= best / (1 - gap)  # within the gap asked of the optimum
    assert kept <= before + 1e-6  # and no worse than the old plan
    assert len(loose.changes) < len(exact.changes)
    stage = loose.result.solve.stages[0]
    assert stage.objective == pytest.approx(kept, rel=1e-9) and stage.gap <= gap
    assert "keeps the old plan's shortfall" in stage.solver_words
    shutil.rmtree(folder)


def test_the_old_plans_least_shortfall_is_worked_out_once(tmp_path: Path,
                                                         monkeypatch: pytest.MonkeyPatch) -> None:
    # The old plan's moves and hires with their least-shortfall work split are a first plan
    # for stage 1 and, after it, the test of whether the cost stage may keep the old plan's
    # shortfall: one LP for both (it had been solved twice in every re-plan).
    import sys

    heuristics = sys.modules["rebalance.heuristics"]
    real = heuristics.work_split_for
    hint_splits: list[float] = []

    def counted(backend, model, objective, options, deadline, values):  # type: ignore[no-untyped-def]
        out = real(backend, model, objective, options, deadline, values)
        if (model.hint is not None and objective is model.shortfall_weight
                and np.array_equal(values, heuristics._hint_held(model))):
            hint_splits.append(float("nan") if out is None else float(out.objective))
        return out

    monkeypatch.setattr(heuristics, "work_split_for", counted)
    folder = write_generated(generate(GeneratorSpec(staff=40, offices=3, skills=2, periods=6,
                                                    seed=1)), tmp_path / "g1")
    instance = read_instance(folder)
    options = options_from_instance(instance, relative_gap=0.05, time_limit_seconds=20)
    old = make_plan(instance, options)
    assert old.plan is not None and old.verified
    assert hint_splits == []  # no old plan, no hint
    again = replan(instance, old.plan, 2, options)
    assert again.result.verified
    assert len(hint_splits) == 1
    shutil.rmtree(folder)


# -- why each change was made: changes.csv's reason (docs/analysis.md, "changes.csv") ----------
# Hand-worked on tests/data/tiny (NOTE.md there): the old plan details a1 A -> B in Q2-Q3 and
# a2 A -> B in Q4, and hires one reviewer at B from Q4 (new position: 8,000 onboarding and
# 20,000 salary for its one period).  Each case below changes the data so one reason is
# known by construction.

def _reason(out: Replan, change: str, who: str, period: str) -> str:
    rows = out.changes[(out.changes.change == change) & (out.changes.who == who)
                       & (out.changes.period == period)]
    assert len(rows) == 1, out.changes
    return str(rows["reason"].iloc[0])


def _tiny_base(tiny: Instance) -> Plan:
    base = solve_verified(tiny)
    assert base.plan is not None
    assert base.plan.details[["person", "period"]].values.tolist() == [
        ["a1", "2027-Q2"], ["a1", "2027-Q3"], ["a2", "2027-Q4"]]
    return base.plan


def test_changes_the_data_force_say_which_data(tiny) -> None:
    # By hand: with B's Q4 review demand multiplied by 0, B wants nothing a2 can do in Q4
    # (a2 has review and intake; B's only demand is review), and a reviewer hired at B from
    # Q4 has no demand left to cover: both are forced (replan_model's `forced`).
    old = _tiny_base(tiny)
    calm = apply_scenario(tiny, Scenario("calm", "", (
        DemandChange(("B",), ("review",), (3,), multiplier=0.0),)))
    out = replan(calm, old, 2, exact_options(calm))
    assert out.result.verified
    assert out.changes["reason"].tolist() == [
        "forced by the data: B has no demand left for a2's skills in 2027-Q4",
        "forced by the data: no review demand is left at B from 2027-Q4 on for a hire to "
        "cover"]


def test_a_reassignment_the_flags_now_forbid_is_forced_and_an_added_detail_reuses_reasons(
        tiny) -> None:
    # By hand (as test_analysis_replan's test of the same data): the old plan moves a2 to B
    # from Q4; staff.csv now says a2 may not be reassigned, so the move is dropped, forced,
    # and a2's Q4 detail comes back.  The added detail's reason is the new plan's own
    # reasons.csv row for it, word for word (one rule per fact).
    old, fixed = a2_moved_then_forbidden(tiny)
    out = replan(fixed, old, 2, exact_options(fixed))
    assert out.result.verified and out.result.plan is not None
    assert _reason(out, "dropped", "a2", "2027-Q4") == (
        "forced by the data: staff.csv now says a2 may not be reassigned (can_relocate)")
    table = reasons(fixed, out.result.plan, replanned_at=2).table
    (own,) = table[(table.action == "detail") & (table.subject == "a2")]["reason"].tolist()
    assert _reason(out, "added", "a2", "2027-Q4") == own


def test_a_dropped_detail_says_the_destination_is_covered_without_them(tiny) -> None:
    # By hand: B's Q3 review demand halves from 2.0 to 1.0, which b1 (1.0 FTE, proficiency 1)
    # covers alone; with early recall a1's Q3 detail is dropped and a1 is at home at A.
    old = _tiny_base(tiny)
    half = apply_scenario(tiny, Scenario("half", "", (
        DemandChange(("B",), ("review",), (2,), multiplier=0.5),)))
    out = replan(half, old, 2, exact_options(half), allow_recall=True)
    assert out.result.verified
    why = _reason(out, "dropped", "a1", "2027-Q3")
    assert why.startswith("now at home at A ")
    assert why.endswith("; B covers review in 2027-Q3 without them: demand there fell from "
                        "2.000 to 1.000 FTE")


def test_a_rerouted_detail_says_where_the_gap_is_larger(tiny) -> None:
    # By hand: as above, and a third office C (its own town) needs 1.0 FTE of review in Q3
    # at priority 3 with no one of its own; a1 (1.0 FTE of review at proficiency 1, no
    # attrition) is the one who covers it all, so a1's Q3 detail goes to C instead of B.
    old = _tiny_base(tiny)
    half = apply_scenario(tiny, Scenario("half", "", (
        DemandChange(("B",), ("review",), (2,), multiplier=0.5),)))
    more = half.with_changes(offices=(*half.offices, Office("C", "Cedar", 6, 1)),
                             demand=(*half.demand, Demand("C", "review", 2, 1.0, 3.0)))
    out = replan(more, old, 2, exact_options(more), allow_recall=True)
    assert out.result.verified
    assert _reason(out, "rerouted", "a1", "2027-Q3") == (
        "detailed to C instead, which would be 1.000 FTE short of review without them "
        "(priority 3); B covers review in 2027-Q3 without them: demand there fell from 2.000 "
        "to 1.000 FTE")


def test_fewer_hires_say_what_the_budget_bought_instead(tiny) -> None:
    # By hand: A now needs 3.0 FTE of intake in Q4 at priority 3 (a3 gives 0.5, a2 1.0, one
    # intake hire 1.0: no ramp) and the 2027 hiring budget is cut to 35,000.  An intake hire
    # at A from Q4 costs 5,000 + 15,000 = 20,000, the old reviewer at B 8,000 + 20,000 =
    # 28,000: both do not fit, and the intake hire meets 1.0 x 3 of weighted need against the
    # reviewer's 0.5 x 2 (ramp 0.5), so the reviewer goes and 15,000 is left.  a2 stays home
    # for intake (A 1.5 short without them, 1.0 x 3 weighted, against 0.8 x 2 at B); a1 has
    # been on detail the two periods before, the most in a row; so B is 1.0 short of review.
    old = _tiny_base(tiny)
    rush = tiny.with_changes(demand=(*tiny.demand, Demand("A", "intake", 3, 3.0, 3.0)),
                             budgets=(Budget("2027", 35000.0, 30000.0),))
    out = replan(rush, old, 2, exact_options(rush))
    assert out.result.verified
    assert _reason(out, "fewer", "B", "2027-Q4") == (
        "the new plan leaves 15,000 of the 2027 hiring budget, less than the 28,000 it would "
        "cost then; it hires instead 1 x intake at A from 2027-Q4; review demand at B from "
        "2027-Q4 on is left 1.000 FTE-periods short")
    assert _reason(out, "dropped", "a2", "2027-Q4") == (
        "now at home at A covering intake there (A would be 1.500 FTE short without them, "
        "priority 3); B is left 1.000 FTE short of review in 2027-Q4 (priority 2); they meet no "
        "less need at A than they could at B (priority-weighted FTE: 3.000 against 1.600)")


def test_fewer_hires_name_the_full_seats_and_who_took_them(tiny) -> None:
    # By hand: B now has 1 seat and needs 2.0 FTE of review in Q4 (times 2); A may not hire.
    # Re-planned from Q2, b1 fills B's one seat in Q2-Q3 (a1's details go), and in Q4 one of
    # a1 (1.0 of review: B 1.0 short x 2, A 0.2 short x 1 = 2.2), a2 (0.8: B 1.2 x 2 = 2.4) or
    # the reviewer hired from Q4 (0.5 at ramp 0.5: B 1.5 x 2 = 3.0) can sit there: a1.  The
    # hire would hold the seat from Q4 on; budget (0 of 40,000 spent) and slots (0 of 1) are
    # free.  It had said "no binding limit found that keeps the hire (review)".
    more = apply_scenario(tiny, Scenario("more", "", (
        DemandChange(("B",), ("review",), (3,), multiplier=2.0),)))
    tight = more.with_changes(offices=tuple(
        replace(o, seats=1) if o.name == "B" else replace(o, max_hires_per_period=0)
        for o in more.offices))
    out = replan(tight, _tiny_base(tiny), 1, exact_options(tight))
    assert out.result.verified
    assert _reason(out, "fewer", "B", "2027-Q4") == (
        "a hire there would hold a seat from 2027-Q4 on, and the seats at B are full in "
        "2027-Q4 (1 of 1 used), taken by a1 detailed in; review demand at B from 2027-Q4 on "
        "is left 1.000 FTE-periods short")


def test_a_moved_hire_says_what_held_its_old_start_back(tiny) -> None:
    # By hand: with 200,000 of hiring budget and B's Q3 review demand at 150% (3.0), the exact
    # plan hires B's reviewer from Q2 (b1 + a1 cover Q2's 2.0; the hire, 0.5 then, 1.0 after,
    # covers Q4's 1.0 alone).  With B cut to 2 seats, b1 and a1 fill them in Q2 and Q3, and the
    # re-plan from Q1 starts the hire in Q4 beside a2 on detail (0.8 + 0.5 >= 1.0).  Demand
    # above the staff's output, hires left out: Q2 2.0 - 2.0 = 0 in both plans; Q4 1.0 - 0 in
    # the old, 1.0 - 0.8 in the new.
    rich = tiny.with_changes(budgets=tuple(replace(b, hiring=200_000) for b in tiny.budgets))
    early = apply_scenario(rich, Scenario("early", "", (
        DemandChange(("B",), ("review",), (2,), multiplier=1.5),)))
    base = solve_verified(early)
    assert base.plan is not None
    assert base.plan.hires[["office", "start_period", "count"]].values.tolist() == [
        ["B", "2027-Q2", 1]]
    tight = early.with_changes(offices=tuple(replace(o, seats=2) if o.name == "B" else o
                                             for o in early.offices))
    out = replan(tight, base.plan, 0, exact_options(tight))
    assert out.result.verified
    why = _reason(out, "moved", "B", "2027-Q4")
    assert why.startswith(
        "starts in 2027-Q4 instead of 2027-Q2; B's review demand above its staff's output "
        "(hires left out) is 0.000 FTE in 2027-Q2 and 1.000 in 2027-Q4 in the old plan, "
        "0.000 and 0.200 in the new plan; a start in 2027-Q2 is held back: the seats at B are "
        "full in 2027-Q2, 2027-Q3 (2 of 2 used in each); ")


def test_a_rerouted_details_reason_speaks_of_the_skill_its_row_names(tiny) -> None:
    # By hand: a third office C (may not hire) needs 0.44 FTE of review and 0.45 of intake in
    # Q4 at priority 3.  a2 (review 0.8, intake 1.0) covers both only as 0.55 FTE of review
    # (0.44 output) and 0.45 of intake: most time on review (the row's skill), most output
    # on intake.  a1 may not go a third period in a row and A may have one away, so a2's Q4
    # detail goes to C instead of B: 2.670 of priority-weighted need (0.89 x 3) against B's
    # 1.000 (its 0.5 short x 2, the hire giving 0.5).  It had said "short of intake".
    more = tiny.with_changes(offices=(*tiny.offices, Office("C", "Cedar", 6, 0)),
                             demand=(*tiny.demand, Demand("C", "review", 3, 0.44, 3.0),
                                     Demand("C", "intake", 3, 0.45, 3.0)))
    out = replan(more, _tiny_base(tiny), 2, exact_options(more))
    assert out.result.verified
    row = out.changes[out.changes.change == "rerouted"]
    assert row[["who", "skill", "period"]].values.tolist() == [["a2", "review", "2027-Q4"]]
    assert _reason(out, "rerouted", "a2", "2027-Q4") == (
        "detailed to C instead, which would be 0.440 FTE short of review without them "
        "(priority 3); B is left 0.500 FTE short of review in 2027-Q4 (priority 2); they meet "
        "no less need at C than they could at B (priority-weighted FTE: 2.670 against 1.000)")


def test_own_staff_back_from_a_detail_are_given_their_own_share(tiny) -> None:
    # By hand: the old plan is tiny's with b1 (B's only staff) also detailed to A in Q3; B's
    # Q3 review demand is halved to 1.0.  With early recall b1 stays home and gives its 1.0
    # (B's whole demand), so a1's Q3 detail goes: B's own staff gave 0 (b1 away) and give
    # 1.0, all of it b1's.  It had said "its own staff give 1.000 FTE more (b1 no longer
    # detailed out)", which read as theirs a share that may be others' work split.
    base = _tiny_base(tiny)
    details = pd.concat([base.details, pd.DataFrame(
        [["b1", "2027-Q3", "B", "A", 5000.0]], columns=list(base.details.columns))],
        ignore_index=True)
    work = base.work.copy()
    work.loc[(work.person == "b1") & (work.period == "2027-Q3"), "office"] = "A"
    old = replace(base, details=details, work=work,
                  coverage=coverage_table(tiny, work, base.hires))
    half = apply_scenario(tiny, Scenario("half", "", (
        DemandChange(("B",), ("review",), (2,), multiplier=0.5),)))
    out = replan(half, old, 2, exact_options(half), allow_recall=True)
    assert out.result.verified
    assert _reason(out, "dropped", "a1", "2027-Q3").endswith(
        "; B covers review in 2027-Q3 without them: demand there fell from 2.000 to 1.000 "
        "FTE; b1 no longer detailed out gives 1.000 FTE")


# Moved and fewer hires by hand: tiny's exact plan (above) with its hires table swapped, its
# coverage and costs redone on the data given (no solve, so each figure is known by hand).
# Prices (skills.csv): a review hire 8,000 onboarding and 20,000 salary a period, an intake
# hire 5,000 and 15,000; every period is in 2027.

def _hiring(instance: Instance, plan: Plan, hires: list[tuple[str, str, str]]) -> Plan:
    """``plan`` with one new-position hire per (office, skill, start) of ``hires``."""
    names = instance.period_names
    rows = [(o, k, t, 1, "new", instance.skill(k).onboarding_cost,
             instance.skill(k).salary_per_period * (len(names) - names.index(t)))
            for o, k, t in hires]
    table = pd.DataFrame(rows, columns=list(PLAN_TABLES["hires"]))
    return replace(plan, hires=table, coverage=coverage_table(instance, plan.work, table),
                   costs=cost_table(instance, plan.details, plan.reassignments, table))


def _why(instance: Instance, old: Plan, new: Plan, *rows: tuple[str, ...]) -> list[str]:
    """change_reasons of ``rows`` (change, kind, who, skill, period, old, new)."""
    changes = pd.DataFrame(list(rows), columns=["change", "kind", "who", "skill", "period",
                                                "old", "new"])
    return change_reasons(instance, old, new, changes, reasons(instance, new))


def test_a_moved_hires_old_plan_figures_are_on_the_current_data(tiny) -> None:
    # By hand: B's 2027-Q4 review demand doubles to 2.0; the old plan (made on tiny) hires
    # B's reviewer from Q4, the new from Q3, with the same work.  In Q4 the old plan's staff
    # at B are a2 on detail, 1.0 FTE at review 0.8: 2.0 - 0.8 = 1.200 on the current data
    # (its own coverage table, made for 1.0 of demand, had given 0.200); in Q3 b1 and a1
    # give 1.0 each of 2.0: 0.000.  The new plan's work is the same: 1.200 and 0.000.
    base = _tiny_base(tiny)
    more = apply_scenario(tiny, Scenario("more", "", (
        DemandChange(("B",), ("review",), (3,), multiplier=2.0),)))
    rich = more.with_changes(budgets=(Budget("2027", 200_000.0, 30_000.0),))
    new = _hiring(rich, base, [("B", "review", "2027-Q3")])
    (why,) = _why(rich, base, new, ("moved", "hire (new)", "B", "review", "2027-Q3",
                                    "1 in 2027-Q4", "1 in 2027-Q3"))
    assert why.startswith(
        "starts in 2027-Q3 instead of 2027-Q4; B's review demand above its staff's output "
        "(hires left out) is 1.200 FTE in 2027-Q4 and 0.000 in 2027-Q3 in the old plan, "
        "1.200 and 0.000 in the new plan; ")


def test_a_moved_hire_names_the_budget_by_what_the_earlier_start_costs_more(tiny) -> None:
    # By hand: the old plan hires B's reviewer from Q3, the new (tiny's) from Q4.  The new
    # plan spends 8,000 + 20,000 = 28,000 of 2027's 40,000: 12,000 left.  A start in Q3
    # costs 2027 one period's salary more (onboarding is in 2027 either way): 20,000, more
    # than is left, so the budget holds it back.  B's seats (2 of 6 in Q3) and slots (none
    # used in Q3) do not.  Gaps: Q3 2.0 - (b1 1.0 + a1 1.0) = 0; Q4 1.0 - a2's 0.8 = 0.200,
    # the same work in both plans.  It had said "leaves less than any hire costs".
    base = _tiny_base(tiny)
    old = _hiring(tiny, base, [("B", "review", "2027-Q3")])
    (why,) = _why(tiny, old, base, ("moved", "hire (new)", "B", "review", "2027-Q4",
                                    "1 in 2027-Q3", "1 in 2027-Q4"))
    assert why.startswith(
        "starts in 2027-Q4 instead of 2027-Q3; B's review demand above its staff's output "
        "(hires left out) is 0.000 FTE in 2027-Q3 and 0.200 in 2027-Q4 in the old plan, "
        "0.000 and 0.200 in the new plan; a start in 2027-Q3 is held back: the hiring budget "
        "2027 (28,000 of 40,000 spent) leaves less than the 20,000 more a start then costs "
        "in 2027; ")


def test_fewer_hires_name_only_hires_that_cost_the_short_year_more(tiny) -> None:
    # By hand: 2027's hiring cap is 68,000.  The old plan hires B's reviewer from Q4 and an
    # intake hire at A from Q2 (5,000 + 3 x 15,000 = 50,000); the new drops B's reviewer,
    # moves the intake hire to Q3 (5,000 + 2 x 15,000 = 35,000: 15,000 less) and hires a
    # reviewer at A from Q4 (8,000 + 20,000 = 28,000 more).  It spends 63,000: 5,000 left,
    # less than B's reviewer's 28,000.  Only A's reviewer costs 2027 more; the moved intake
    # hire had been named too.  B's Q4 review: 1.0 - a2's 0.8 = 0.200 short.
    base = _tiny_base(tiny)
    capped = tiny.with_changes(budgets=(Budget("2027", 68_000.0, 30_000.0),))
    old = _hiring(capped, base, [("B", "review", "2027-Q4"), ("A", "intake", "2027-Q2")])
    new = _hiring(capped, base, [("A", "intake", "2027-Q3"), ("A", "review", "2027-Q4")])
    (why,) = _why(capped, old, new, ("fewer", "hire (new)", "B", "review", "2027-Q4", "1",
                                     "0"))
    assert why == (
        "the new plan leaves 5,000 of the 2027 hiring budget, less than the 28,000 it would "
        "cost then; it hires instead 1 x review at A from 2027-Q4; review demand at B from "
        "2027-Q4 on is left 0.200 FTE-periods short")


def test_a_hire_moved_earlier_takes_no_seat_after_its_old_start(tiny) -> None:
    # By hand: B has 3 seats and may hire 2 a period; 2027's hiring cap is 200,000.  The old
    # plan hires a reviewer and an intake hire at B from Q3; the new drops the reviewer and
    # starts the intake hire in Q2.  The new plan's seats at B: Q3 b1, a1 (on detail) and
    # the intake hire, 3 of 3; Q4 a2 and the intake hire, 2.  In Q3 the old plan seats the
    # intake hire too, so it takes no seat there the old plan left free: no one is named.
    # It had said "taken by 1 x intake hired there from 2027-Q2".  The budget leaves 150,000
    # (50,000 spent), more than the reviewer's 48,000; B's Q4 review is 0.200 short.
    base = _tiny_base(tiny)
    tight = tiny.with_changes(
        offices=tuple(replace(o, seats=3, max_hires_per_period=2) if o.name == "B" else o
                      for o in tiny.offices),
        budgets=(Budget("2027", 200_000.0, 30_000.0),))
    old = _hiring(tight, base, [("B", "review", "2027-Q3"), ("B", "intake", "2027-Q3")])
    new = _hiring(tight, base, [("B", "intake", "2027-Q2")])
    (why,) = _why(tight, old, new, ("fewer", "hire (new)", "B", "review", "2027-Q3", "1",
                                    "0"))
    assert why == (
        "a hire there would hold a seat from 2027-Q3 on, and the seats at B are full in "
        "2027-Q3 (3 of 3 used); review demand at B from 2027-Q3 on is left 0.200 "
        "FTE-periods short")


def test_a_dropped_detail_names_a_moves_budget_short_of_its_route(tiny) -> None:
    # A planner's reading of the demo comparison: the storm's plan dropped a detail that cost
    # 9,000 where 2,000 of 2027's moves budget was left, and said "no binding limit (review)":
    # the budget binds only below the cheapest detail anywhere.  By hand on tiny: a detail
    # from A (Alder) to B (Birch) costs 9,000 (listed), B to A the default 5,000 (the
    # cheapest).  The new plan is tiny's exact plan without a2's Q4 detail (a2 works at home
    # instead): a1's two details spend 18,000 of 24,000, leaving 6,000: not binding (5,000
    # would still pay), less than the 9,000 a2's detail costs.  B's Q4 review: 1.0 - the
    # hire's 0.5 (ramp) = 0.500 short; A's seats and away share are free (0 of 3 away).
    from rebalance.instance import MoveCost

    base = _tiny_base(tiny)
    dear = tiny.with_changes(move_costs={("Alder", "Birch"): MoveCost(9_000.0, None)},
                             budgets=(Budget("2027", 40_000.0, 24_000.0),))

    def priced(details: pd.DataFrame, work: pd.DataFrame) -> Plan:
        details = details.assign(cost=9_000.0)
        return replace(base, details=details, work=work,
                       coverage=coverage_table(dear, work, base.hires),
                       costs=cost_table(dear, details, base.reassignments, base.hires))

    old = priced(base.details, base.work)
    a2_q4 = (base.work["person"] == "a2") & (base.work["period"] == "2027-Q4")
    new = priced(base.details[base.details["person"] != "a2"].reset_index(drop=True),
                 base.work.assign(office=base.work["office"].where(~a2_q4, "A")))
    (why,) = _why(dear, old, new, ("dropped", "detail", "a2", "review", "2027-Q4", "A -> B",
                                   ""))
    assert why.endswith(
        "B is left 0.500 FTE short of review in 2027-Q4 (priority 2); held back by moves "
        "budget 2027 (18,000 of 24,000 spent): 6,000 left, less than the 9,000 a detail from "
        "A to B costs"), why


def test_fewer_hires_of_one_funding_say_the_other_funding_starts_instead(tiny) -> None:
    # By hand: B now has one funded review vacancy; the old plan (tiny's) hires B's reviewer
    # from Q4 as a new position, the new plan fills the vacancy then instead, with the same
    # work.  The new-position row's reason had said only "met without it", the vacancy hire
    # unnamed (hires are netted by office, skill and start across fundings).
    base = _tiny_base(tiny)
    funded = tiny.with_changes(vacancies={("B", "review"): 1})
    hires = base.hires.assign(funding="vacancy", salary_cost=0.0)
    new = replace(base, hires=hires, coverage=coverage_table(funded, base.work, hires),
                  costs=cost_table(funded, base.details, base.reassignments, hires))
    (why,) = _why(funded, base, new, ("fewer", "hire (new)", "B", "review", "2027-Q4", "1",
                                      "0"))
    assert why == ("review demand at B from 2027-Q4 on is met without it: 1 review hire "
                   "filling a funded vacancy starts there then instead")


def test_a_change_no_limit_explains_says_when_it_is_within_the_solves_gaps(tiny) -> None:
    # By hand: tiny's exact plan as the old plan; the new drops B's reviewer from Q4 with
    # nothing in its place, the budget then free (12,000 left had bound), B's seats (2 of 6)
    # and slots free: "no binding limit found (review)".  B's Q4 review is then 1.0 - a2's
    # 0.8 = 0.200 short at priority 2: the hire (0.5 at ramp) could take at most 0.400 off
    # the weighted shortfall, of 0.400 in all.  Solves proven within 1% leave 0.004: review;
    # within 200% (a made-up figure), 0.800: said so instead.
    base = _tiny_base(tiny)
    rich = tiny.with_changes(budgets=(Budget("2027", 200_000.0, 30_000.0),))
    new = _hiring(rich, base, [])
    changes = pd.DataFrame([("fewer", "hire (new)", "B", "review", "2027-Q4", "1", "0")],
                           columns=["change", "kind", "who", "skill", "period", "old", "new"])
    for gap, said in ((None, "(review)"), (0.01, "(review)"),
                      (2.0, "hire; within the solves' gaps: the hire could take at most "
                            "0.400 off the weighted shortfall, and the plans are proven only "
                            "within 200.00% of it (0.800 of 0.400), so where each search "
                            "stopped, not a limit in the tables, may account for it")):
        (why,) = change_reasons(rich, base, new, changes, reasons(rich, new),
                                shortfall_gap=gap)
        assert why.startswith("review demand at B from 2027-Q4 on is left 0.200 "
                              "FTE-periods short, and no binding limit found that keeps the "
                              "hire"), why
        assert said in why, (gap, why)


def test_a_replan_hands_its_own_shortfall_gap_to_the_change_reasons(tiny, monkeypatch) -> None:
    # A change nothing in the tables explains is weighed against where the re-plan's search
    # stopped; without the gap every such change read "(review)".
    import sys

    replan_module = sys.modules["rebalance.analysis.replan"]
    real = replan_module.change_reasons
    seen: list[float | None] = []

    def spy(*args, **kwargs):
        seen.append(kwargs.get("shortfall_gap"))
        return real(*args, **kwargs)

    monkeypatch.setattr(replan_module, "change_reasons", spy)
    calm = apply_scenario(tiny, Scenario("calm", "", (
        DemandChange(("B",), ("review",), (3,), multiplier=0.0),)))
    out = replan(calm, _tiny_base(tiny), 2, exact_options(calm))
    assert seen == [out.result.solve.shortfall_gap] and seen[0] is not None


def test_a_detail_handed_to_a_colleague_on_the_same_route_says_so(tiny) -> None:
    # A planner's reading of the demo comparison: E0097's detail hollin-cross ->
    # port-ilse-harbour was dropped and E0103's added on the same route and period, and the
    # reason had spoken of the moves budget.  By hand on tiny with B's Q4 review demand 2.0:
    # the old plan (tiny's) details a2 (review 0.8) A -> B in Q4; the new details a1 (review
    # 1.0) there instead (from Q3, dropping Q2), a2 staying at A.  B's Q4: a1's 1.0 and the
    # hire's 0.5 of 2.0 leave 0.500 short, so the reason says who went in their place.
    base = _tiny_base(tiny)
    more = apply_scenario(tiny, Scenario("more", "", (
        DemandChange(("B",), ("review",), (3,), multiplier=2.0),)))
    details = pd.DataFrame({"person": ["a1", "a1"], "period": ["2027-Q3", "2027-Q4"],
                            "from_office": ["A", "A"], "to_office": ["B", "B"],
                            "cost": [5_000.0, 5_000.0]})
    moved = {("a1", "2027-Q2"): "A", ("a1", "2027-Q4"): "B", ("a2", "2027-Q4"): "A"}
    work = base.work.assign(office=[moved.get((p, t), o) for p, t, o in zip(
        base.work["person"], base.work["period"], base.work["office"], strict=True)])
    old = replace(base, coverage=coverage_table(more, base.work, base.hires))
    new = replace(base, details=details, work=work,
                  coverage=coverage_table(more, work, base.hires),
                  costs=cost_table(more, details, base.reassignments, base.hires))
    (why,) = _why(more, old, new, ("dropped", "detail", "a2", "review", "2027-Q4", "A -> B",
                                   ""))
    assert why.endswith("; replaced on the same route by a1 (review 1 against their 0.8)"), why
