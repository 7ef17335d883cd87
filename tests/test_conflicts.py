"""The ways out of a conflict (``rebalance.conflicts``), each enough on its own.

The least total relaxation adds seats to money, so it names whichever is the smaller number:
way out (a); after it, each other kind of limit relaxed alone says whether it would do, and
by how much: (b), (c), ...  Amounts are checked by hand from the instances' notes and by
solving again with the limit raised by that amount (a plan) and by one less (none).  The
wording answers a practitioner's reading of seats_short with a moves budget of 0: the seats
line had read as keepable alone, the amounts as "over by 10 ... across 4 limits", the budget
only as "raised by", and where no kind would do alone nothing was said.
"""

from __future__ import annotations

import json
import re
import shutil
import time
from dataclasses import replace

import numpy as np
import pytest
import scipy.sparse as sp
from conftest import DATA
from scipy.optimize import Bounds, LinearConstraint, milp

from rebalance import read_instance
from rebalance.backends import BackendOutcome, HighsBackend, SolveOptions, Status
from rebalance.backends.common import KILLED
from rebalance.cli import EXIT_INFEASIBLE, main
from rebalance.conflicts import (
    ONE_WAY_HEADING,
    WAYS_HEADING,
    WaysOut,
    _ways_lines,
    find_conflicts,
)
from rebalance.generate import GeneratorSpec, generate, write_generated
from rebalance.instance import Budget, Instance, Policy
from rebalance.model import LIMIT_FAMILIES, build_model
from rebalance.planning import make_plan, options_from_instance, summary_dict

# Hand count (tests/data/seats_short/NOTE.md, share 0.5): A's 2 seats hold 5 people in Q1-Q2
# and 4 in Q3-Q4. The one way to keep the seats: reassign a5 (relocation 20,000; detailing a5
# too would put 3 of 5 away, over the share of 2.5) and detail a1 and a2 in all four quarters
# (8 detail-periods x 5,000 = 40,000): 60,000 of moves in 2027.
MOVES_NEEDED = 60_000


def _seats_short_with_moves(moves: float, share: float = 0.5) -> Instance:
    instance = read_instance(DATA / "seats_short")
    return instance.with_changes(budgets=(Budget("2027", 0.0, moves),),
                                 policy=Policy(max_away_share=share))


def _tiny_with_one_seat() -> Instance:
    instance = read_instance(DATA / "tiny")
    return instance.with_changes(offices=tuple(replace(o, seats=1) for o in instance.offices))


def _conflicts(instance: Instance) -> tuple[str, ...]:
    result = make_plan(instance, options_from_instance(instance, relative_gap=0.0))
    assert result.status is Status.INFEASIBLE and result.plan is None
    return result.solve.conflicts


def _ways(conflicts: tuple[str, ...]) -> list[str]:
    """The ways out after the least total, (b) on."""
    return [c for c in conflicts if c[:3] in {"(b)", "(c)", "(d)"}]


def test_a_moves_budget_of_0_is_named_as_a_way_out_from_its_cap_to_the_cap_needed():
    conflicts = _conflicts(_seats_short_with_moves(0.0))
    assert conflicts[0] == WAYS_HEADING
    # The least total names seats (3 + 3 + 2 + 2 = 10 seat-periods is a smaller number than
    # 60,000 of money): way out (a), in seat-periods across office-periods.
    assert conflicts[1] == ("(a) seats: 10 seat-periods short in all, across 4 office-periods "
                            "(the total is firm; which offices and periods take it can differ)")
    # Hires cannot free a seat and no move is paid for, so the budget is the one other way,
    # said from the cap it has to the cap it would need.
    assert _ways(conflicts) == [f"(b) raise the moves budget 2027 from 0 to {MOVES_NEEDED:,}, "
                                "keeping every other limit"]
    assert not any("not settled" in c or "too little time" in c or "no other kind" in c
                   for c in conflicts)


def test_seats_that_the_rules_let_go_but_money_does_not_say_so():
    # NOTE.md's hand count at a share of 0.5: in Q1 3 must go and 3 may (a5 reassigned, 2
    # of the other 4 detailed); in Q3 2 and 2.  The rules allow it: the moves budget of 0,
    # a way out alone, is what stops it, and the seats line names it with its cap.
    conflicts = _conflicts(_seats_short_with_moves(0.0))
    assert ("seats: A in 2027-Q1 (over by 3): 2 seats for 5 people based there; 3 must be "
            "away or moved, and at most 3 may be away or moved under the rules, but moving "
            "them costs money the moves budget 2027 (0) does not have") in conflicts
    assert ("seats: A in 2027-Q3 (over by 2): 2 seats for 4 people based there; 2 must be "
            "away or moved, and at most 2 may be away or moved under the rules, but moving "
            "them costs money the moves budget 2027 (0) does not have") in conflicts


def test_the_amount_named_is_just_enough():
    # Solving again: the moves budget raised by the amount gives a verified plan; by one less,
    # none, and the budget is then named as 1 short (the hand count above, by the solver).
    raised = _seats_short_with_moves(MOVES_NEEDED)
    result = make_plan(raised, options_from_instance(raised, relative_gap=0.0))
    assert result.status is Status.OPTIMAL and result.verified
    assert result.plan is not None and result.plan.cost_by_kind()
    conflicts = _conflicts(_seats_short_with_moves(MOVES_NEEDED - 1))
    # 1 of money ties with one seat-period for the least total: either may be the answer.
    assert (f"raise the moves budget 2027 from {MOVES_NEEDED - 1:,} to {MOVES_NEEDED:,}, "
            "keeping every other limit" in " ".join(_ways(conflicts))
            or "(a) moves budget 2027 (over by 1)" in conflicts)


def test_the_other_ways_out_that_resolve_it_are_each_named():
    # seats_short with the moves budget 5,000 short of the hand count: one seat-period over
    # (a detail fewer) is the least total.  Then each other kind that would do alone: the
    # moves budget by 5,000, or the away share by half a person in Q1 and Q2 (a5 detailed
    # for 2 x 5,000 rather than reassigned for 20,000: 50,000 of moves, within 55,000; 5
    # people x 0.5 = 2.5 may be away, 3 are).
    conflicts = _conflicts(_seats_short_with_moves(MOVES_NEEDED - 5_000))
    assert conflicts[0] == WAYS_HEADING and conflicts[1].startswith("(a) seats: A in 2027-")
    assert "(over by 1)" in conflicts[1] and len(conflicts) == 4
    assert _ways(conflicts) == [
        "(b) raise the away share by 1 person-period away in all, across 2 office-periods (A "
        "in 2027-Q1 by 0.500 people away, A in 2027-Q2 by 0.500 people away) and the away "
        "share in whole people by 2 person-periods away in all, across 2 office-periods (A in "
        "2027-Q1 by 1 person away, A in 2027-Q2 by 1 person away), keeping every other limit",
        f"(c) raise the moves budget 2027 from {MOVES_NEEDED - 5_000:,} to {MOVES_NEEDED:,}, "
        "keeping every other limit"]


def test_where_only_seats_would_do_there_is_no_other_way_out_and_that_is_said():
    # tiny with one seat at each office (tests/test_solvers.py: 7 seat-periods over, counted
    # by hand): both offices are full, so no move, budget or share frees a seat.
    conflicts = _conflicts(_tiny_with_one_seat())
    assert conflicts[0] == ONE_WAY_HEADING
    assert conflicts[1].startswith("(a) seats: 7 seat-periods short in all, across ")
    assert not _ways(conflicts)
    assert conflicts[-1].startswith("no other kind of limit raised alone would do (each was "
                                    "tried: ")
    assert not any("not settled" in c or "too little time" in c for c in conflicts)
    # No moves budget would do alone, so no seats line blames money.
    assert not any("does not have" in c for c in conflicts)


def test_where_no_other_kind_would_do_alone_that_is_said():
    # seats_short with a moves budget of 10,000 at a share of 0.25 (NOTE.md: then 3 must go
    # in Q1 and at most 2 may, so the rules stop it): 10,000 pays two detail-periods, 10 - 2
    # = 8 seat-periods short.  The moves budget alone is stopped by the share, and the share
    # alone by the money (a reassignment is 20,000; ten detail-periods 50,000).
    conflicts = _conflicts(_seats_short_with_moves(10_000, share=0.25))
    assert conflicts[0] == ONE_WAY_HEADING
    assert conflicts[1].startswith("(a) seats: 8 seat-periods short in all, across 4 ")
    assert conflicts[-1] == ("no other kind of limit raised alone would do (each was tried: "
                             "away share, moves budget); any way out but (a) needs more than "
                             "one kind to give together")
    # Here the rules stop the moves, and the seats line names them, not money.
    assert not any("does not have" in c for c in conflicts)
    assert any(c.endswith("(can_detail, can_relocate, max_away_share)") for c in conflicts)


def test_where_the_least_total_gives_in_several_kinds_and_none_would_alone_that_is_said():
    # The words alone (no instance found to need it in a small case): two kinds in (a), every
    # kind tried alone, none enough.
    lines = _ways_lines(build_model(_seats_short_with_moves(0.0)),
                        ["seats: A in 2027-Q1 (over by 1)", "moves budget 2027 (over by 1)"],
                        WaysOut(tried=("seats", "moves budget")), True)
    assert lines == [ONE_WAY_HEADING, "(a) seats: A in 2027-Q1 (over by 1)",
                     "moves budget 2027 (over by 1)",
                     "no one kind of limit raised alone would do; the ones above must give "
                     "together"]


def test_with_too_little_time_the_other_ways_out_are_skipped_and_that_is_said():
    # 0.2 s in all: what the least total leaves is under 0.1 s (MIN_ALTERNATIVE_SECONDS)
    # for each of the other kinds (moves and hiring budgets, away share, ...).
    instance = _seats_short_with_moves(0.0)
    model = build_model(instance)
    started = time.perf_counter()
    conflicts = find_conflicts(model, HighsBackend(), SolveOptions(relative_gap=0.0), 0.2,
                               instance)
    assert time.perf_counter() - started < 0.2 + 0.3  # a little slack for a busy machine
    assert conflicts[1].startswith("(a) seats: 10 seat-periods short in all")
    assert conflicts[-1].startswith("too little time left to check other ways out")
    assert not _ways(conflicts) and not any("no other kind" in c for c in conflicts)
    # Untried, the budget is not known to be what stops the moves: the seats do not say so.
    assert not any("does not have" in c for c in conflicts)


@pytest.mark.parametrize("solver", ["highs", "cbc"])
def test_both_solvers_name_the_same_other_way_out(solver):
    instance = _seats_short_with_moves(0.0)
    result = make_plan(instance, options_from_instance(instance, solver=solver,
                                                       relative_gap=0.0))
    assert (f"(b) raise the moves budget 2027 from 0 to {MOVES_NEEDED:,}, keeping every other "
            "limit") in result.solve.conflicts
    # summary.json's "conflicts" is the same list, as strings.
    assert json.loads(json.dumps(summary_dict(result)))["conflicts"] == list(
        result.solve.conflicts)


def test_the_command_line_lists_the_ways_out(tmp_path, capsys):
    folder = tmp_path / "seats_short"
    shutil.copytree(DATA / "seats_short", folder)
    (folder / "budget.csv").write_text("year,hiring,moves\n2027,0,0\n")
    code = main(["plan", str(folder), "-o", str(tmp_path / "out"), "-q"])
    out = capsys.readouterr().out
    assert code == EXIT_INFEASIBLE
    # The heading as a heading, the ways out as bullets under it.
    assert f"  limits in conflict:\n    {WAYS_HEADING}\n    - (a) seats: 10 seat-periods" in out
    assert "but moving them costs money the moves budget 2027 (0) does not have" in out
    assert (f"    - (b) raise the moves budget 2027 from 0 to {MOVES_NEEDED:,}, keeping every "
            "other limit") in out


class _CountingHighs:
    """HiGHS, counting its whole-number runs; ``reruns_cheaply`` False makes every kind
    alone a search (CBC's way), the reference for what an LP first may leave out."""

    name = "highs"

    def __init__(self, reruns_cheaply: bool) -> None:
        self.inner, self.reruns_cheaply, self.searches = HighsBackend(), reruns_cheaply, 0

    def version(self) -> str:
        return self.inner.version()

    def run(self, model, objective, extra_rows, options, time_limit, start):
        self.searches += bool(model.num_integer)
        return self.inner.run(model, objective, extra_rows, options, time_limit, start)


@pytest.mark.parametrize(("case", "searches"), [
    # The least total, then (NOTE.md's counts above) the moves budget alone, a way out.
    (lambda: _seats_short_with_moves(0.0), 2),
    # The least total, then the away share and the moves budget, each a way out.
    (lambda: _seats_short_with_moves(MOVES_NEEDED - 5_000), 3),
    # Only the least total: the share alone and the money alone are infeasible as LPs.
    (lambda: _seats_short_with_moves(10_000, share=0.25), 1),
    # Only the least total: both offices full, no other kind frees a seat, even in the LP.
    (_tiny_with_one_seat, 1),
], ids=["moves 0", "moves 55,000", "share 0.25", "tiny one seat"])
def test_a_kind_the_lp_rules_out_is_not_searched_and_the_lines_are_the_searches(case,
                                                                                 searches):
    # Reference: every kind alone searched as a whole-number model (before LPs first).
    instance = case()
    model = build_model(instance)
    lp_first, searched_only = _CountingHighs(True), _CountingHighs(False)
    options = SolveOptions(relative_gap=0.0)
    assert (find_conflicts(model, lp_first, options, 20.0, instance)
            == find_conflicts(model, searched_only, options, 20.0, instance))
    assert lp_first.searches == searches


class _StoppedFirst:
    """HiGHS whose first run, the least total, is handed back as a search stopped at the time
    limit with its plan and a lower bound of half of it: the outcome of a run cut short,
    forced (a real stop depends on the machine's speed).  Records each run's gap asked."""

    name, reruns_cheaply = "highs", True

    def __init__(self) -> None:
        self.inner, self.gaps = HighsBackend(), []

    def version(self) -> str:
        return self.inner.version()

    def run(self, model, objective, extra_rows, options, time_limit, start):
        self.gaps.append(options.relative_gap)
        out = self.inner.run(model, objective, extra_rows, options, time_limit, start)
        if len(self.gaps) == 1 and out.objective is not None:
            out = replace(out, status=Status.FEASIBLE_WITH_GAP, words=KILLED,
                          bound=out.objective / 2)
        return out


def test_a_least_total_not_proven_says_at_most_and_why_and_is_never_firm():
    # seats_short at a moves budget of 0: the least total is 10 seat-periods (hand count
    # above); here its search is stopped with a bound of 5.
    instance = _seats_short_with_moves(0.0)
    backend = _StoppedFirst()
    conflicts = find_conflicts(build_model(instance), backend,
                               SolveOptions(relative_gap=0.01), 20.0, instance)
    assert conflicts[1] == ("(a) at most 10 in all (each limit in its own unit, added as one); "
                            "not proven the least: the search stopped at the time limit, a gap "
                            "of 50.0% left")
    assert conflicts[2] == ("seats: 10 seat-periods short in all, across 4 office-periods (not "
                            "proven the least; which offices and periods take it can differ)")
    assert not any("firm" in c for c in conflicts)
    # The least total is searched to a gap of 0 whatever the plan's gap (0.01 here).
    assert backend.gaps[0] == 0.0


def _least_total(conflicts: tuple[str, ...] | list[str]) -> float:
    """The sum of way out (a)'s rows, "(over by 21)" each."""
    rows = conflicts[1:next((i for i, c in enumerate(conflicts) if c.startswith("(b)")),
                            len(conflicts))]
    return sum(float(m.group(1).replace(",", ""))
               for c in rows for m in [re.search(r"\(over by ([\d,.]+)\)", c)] if m)


def test_the_least_total_is_the_least_and_firm_at_the_plans_gap_of_1_percent(tmp_path):
    # The reviewer's case: 300 generated people, the first office at 5 seats for 30 based
    # there. At the generated gap of 1% HiGHS had stopped at 167.65 (away share 1.65, away
    # share in whole people 3, seats 163) and called it firm; the least is seats alone, 166.
    spec = GeneratorSpec(staff=300, offices=8, skills=6, periods=8, seed=1)
    folder = write_generated(generate(spec), tmp_path / "small")
    offices = folder / "offices.csv"
    lines = offices.read_text().splitlines()
    cells = lines[1].split(",")
    cells[2] = "5"
    offices.write_text("\n".join([lines[0], ",".join(cells), *lines[2:]]) + "\n")
    instance = read_instance(folder)
    assert instance.solver.relative_gap == 0.01
    model = build_model(instance)
    conflicts = find_conflicts(model, HighsBackend(),
                               options_from_instance(instance, solver="highs"), 30.0, instance)
    # Reference: scipy's milp (its own HiGHS build, asked for a gap of 0) on the same rows
    # with an elastic column on every limit row, built here, not by rebalance.conflicts.
    limit_rows = [i for f in model.rows if f.name in LIMIT_FAMILIES
                  for i in range(f.start, f.stop) if np.isfinite(model.row_upper[i])]
    k = len(limit_rows)
    elastic = sp.csr_matrix((-np.ones(k), (limit_rows, np.arange(k))),
                            shape=(model.num_rows, k))
    reference = milp(np.concatenate([np.zeros(model.num_cols), np.ones(k)]),
                     constraints=LinearConstraint(sp.hstack([model.matrix, elastic]),
                                                  model.row_lower, model.row_upper),
                     integrality=np.concatenate([model.is_integer, np.zeros(k)]),
                     bounds=Bounds(np.concatenate([model.col_lower, np.zeros(k)]),
                                   np.concatenate([model.col_upper, np.full(k, np.inf)])),
                     options={"mip_rel_gap": 0.0})
    assert reference.status == 0 and reference.fun == pytest.approx(166.0)
    assert _least_total(conflicts) == pytest.approx(reference.fun, abs=1e-6)
    assert conflicts[1] == ("(a) seats: 166 seat-periods short in all, across 8 office-periods "
                            "(the total is firm; which offices and periods take it can differ)")


class _NoPlanInTime:
    """HiGHS that finds nothing in the time: every run ends as no plan within the limit."""

    name, reruns_cheaply = "highs", True

    def version(self) -> str:
        return HighsBackend().version()

    def run(self, model, objective, extra_rows, options, time_limit, start):
        return BackendOutcome(Status.NO_PLAN_IN_TIME, None, None, None, KILLED, time_limit)


def test_with_no_relaxation_in_the_time_the_seats_the_instance_proves_are_named():
    # tiny with 1 seat at each office. Hand count (as tests/test_seat_windows.py): A has a1,
    # a2, a3 every quarter, so 2 must be away each quarter; a2 may be reassigned and a1
    # detailed, 2 a quarter, but a1 at most 2 quarters of any 3 and a3 never: in Q1-Q3 6
    # person-periods must be away and at most 5 may be. B's 1 seat holds b1. The relaxation
    # finding nothing had named no limit.
    instance = _tiny_with_one_seat()
    conflicts = find_conflicts(build_model(instance), _NoPlanInTime(), SolveOptions(), 5.0,
                               instance)
    assert conflicts[0] == ("Limits that no plan can keep, from the instance alone (the "
                            "analysis found no relaxation in the time (stopped at the time "
                            "limit); so not how far each must give, nor the other ways out):")
    assert conflicts[1:] == [
        f"seats: A in 2027-Q{q}: 1 seat for 3 people based there; 2 must be away or moved, "
        "and at most 2 may be away or moved then, but not in every period: in 2027-Q1 to "
        "2027-Q3, 6 person-periods must be away and at most 5 may be "
        "(max_consecutive_detail_periods = 2: a person on detail is back 1 period in any 3)"
        for q in range(1, 4)]
    # Without the instance there is nothing to prove it by: said as before.
    assert find_conflicts(build_model(instance), _NoPlanInTime(), SolveOptions(), 5.0) == [
        "the limits conflict, but the analysis found no relaxation in the time (stopped at "
        "the time limit)"]


def test_a_plan_the_instance_proves_impossible_goes_straight_to_the_conflicts():
    # No stage is run where `rebalance check` already proves the seats cannot hold: medium
    # at 10 seats had spent 9.6 s of 15 on a stage that ended with no plan (exit 5).
    instance = _tiny_with_one_seat()
    result = make_plan(instance, options_from_instance(instance))
    assert result.status is Status.INFEASIBLE and result.solve.stages == ()
    assert result.solve.conflicts[1].startswith("(a) seats: ")
