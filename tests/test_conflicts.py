"""The other ways out of a conflict (``rebalance.conflicts.other_ways_out``).

The least total relaxation adds seats to money, so it names whichever is the smaller number;
after it, each other kind of limit relaxed alone says whether it would do, and by how much.
Amounts are checked by hand from the instances' notes and by solving again with the limit
raised by that amount (a plan) and by one less (none).
"""

from __future__ import annotations

import json
import shutil
import time
from dataclasses import replace

import pytest
from conftest import DATA

from rebalance import read_instance
from rebalance.backends import HighsBackend, SolveOptions, Status
from rebalance.cli import EXIT_INFEASIBLE, main
from rebalance.conflicts import find_conflicts
from rebalance.instance import Budget, Instance
from rebalance.model import build_model
from rebalance.planning import make_plan, options_from_instance, summary_dict

# Hand count (tests/data/seats_short/NOTE.md, share 0.5): A's 2 seats hold 5 people in Q1-Q2
# and 4 in Q3-Q4. The one way to keep the seats: reassign a5 (relocation 20,000; detailing a5
# too would put 3 of 5 away, over the share of 2.5) and detail a1 and a2 in all four quarters
# (8 detail-periods x 5,000 = 40,000): 60,000 of moves in 2027.
MOVES_NEEDED = 60_000


def _seats_short_with_moves(moves: float) -> Instance:
    instance = read_instance(DATA / "seats_short")
    return instance.with_changes(budgets=(Budget("2027", 0.0, moves),))


def _conflicts(instance: Instance) -> tuple[str, ...]:
    result = make_plan(instance, options_from_instance(instance, relative_gap=0.0))
    assert result.status is Status.INFEASIBLE and result.plan is None
    return result.solve.conflicts


def test_a_moves_budget_of_0_is_named_as_the_other_way_out_with_its_amount():
    conflicts = _conflicts(_seats_short_with_moves(0.0))
    # The least total names seats (3 + 3 + 2 + 2 = 10 seat-periods is a smaller number than
    # 60,000 of money), as before.
    assert conflicts[0].startswith("seats: over by 10 in all, across 4 limits")
    ways = [c for c in conflicts if c.startswith("or, instead")]
    # Hires cannot free a seat and no move is paid for, so the budget is the one other way.
    assert ways == [f"or, instead: moves budget 2027 raised by {MOVES_NEEDED:,} would do, "
                    "with every other limit kept"]
    assert not any("not settled" in c or "too little time" in c for c in conflicts)


def test_the_amount_named_is_just_enough():
    # Solving again: the moves budget raised by the amount gives a verified plan; by one less,
    # none, and the budget is then named as 1 short (the hand count above, by the solver).
    raised = _seats_short_with_moves(MOVES_NEEDED)
    result = make_plan(raised, options_from_instance(raised, relative_gap=0.0))
    assert result.status is Status.OPTIMAL and result.verified
    assert result.plan is not None and result.plan.cost_by_kind()
    conflicts = _conflicts(_seats_short_with_moves(MOVES_NEEDED - 1))
    # 1 of money ties with one seat-period for the least total: either may be the answer.
    assert ("or, instead: moves budget 2027 raised by 1 would do, with every other limit kept"
            in conflicts or "moves budget 2027 (over by 1)" in conflicts)


def test_the_other_ways_out_that_resolve_it_are_each_named():
    # seats_short with the moves budget 5,000 short of the hand count: one seat-period over
    # (a detail fewer) is the least total.  Then each other kind that would do alone: the
    # moves budget by 5,000, or the away share by half a person in Q1 and Q2 (a5 detailed
    # for 2 x 5,000 rather than reassigned for 20,000: 50,000 of moves, within 55,000; 5
    # people x 0.5 = 2.5 may be away, 3 are).
    conflicts = _conflicts(_seats_short_with_moves(MOVES_NEEDED - 5_000))
    assert conflicts[0].startswith("seats: A in 2027-")
    assert "(over by 1)" in conflicts[0] and len(conflicts) == 3
    ways = [c for c in conflicts if c.startswith("or, instead")]
    assert ways == [
        "or, instead: away share raised by 1 in all, across 2 limits (A in 2027-Q1 by 0.500, A "
        "in 2027-Q2 by 0.500) and away share in whole people raised by 2 in all, across 2 "
        "limits (A in 2027-Q1 by 1, A in 2027-Q2 by 1) would do, with every other limit kept",
        "or, instead: moves budget 2027 raised by 5,000 would do, with every other limit "
        "kept"]


def test_where_only_seats_would_do_there_is_no_other_way_out():
    # tiny with one seat at each office (tests/test_solvers.py: 7 seat-periods over, counted
    # by hand): both offices are full, so no move, budget or share frees a seat.
    instance = read_instance(DATA / "tiny")
    instance = instance.with_changes(offices=tuple(replace(o, seats=1)
                                                   for o in instance.offices))
    conflicts = _conflicts(instance)
    assert conflicts[0].startswith("seats: over by 7 in all")
    assert not any(c.startswith("or, instead") for c in conflicts)
    assert not any("not settled" in c or "too little time" in c for c in conflicts)


def test_with_too_little_time_the_other_ways_out_are_skipped_and_that_is_said():
    # 0.2 s in all: what the least total leaves is under 0.1 s (MIN_ALTERNATIVE_SECONDS)
    # for each of the other kinds (moves and hiring budgets, away share, ...).
    instance = _seats_short_with_moves(0.0)
    model = build_model(instance)
    started = time.perf_counter()
    conflicts = find_conflicts(model, HighsBackend(), SolveOptions(relative_gap=0.0), 0.2,
                               instance)
    assert time.perf_counter() - started < 0.2 + 0.3  # a little slack for a busy machine
    assert conflicts[0].startswith("seats: over by 10 in all")
    assert conflicts[-1].startswith("too little time left to check other ways out")
    assert not any(c.startswith("or, instead") for c in conflicts)


@pytest.mark.parametrize("solver", ["highs", "cbc"])
def test_both_solvers_name_the_same_other_way_out(solver):
    instance = _seats_short_with_moves(0.0)
    result = make_plan(instance, options_from_instance(instance, solver=solver,
                                                       relative_gap=0.0))
    assert (f"or, instead: moves budget 2027 raised by {MOVES_NEEDED:,} would do, with every "
            "other limit kept") in result.solve.conflicts
    # summary.json's "conflicts" is the same list, as strings.
    assert json.loads(json.dumps(summary_dict(result)))["conflicts"] == list(
        result.solve.conflicts)


def test_the_command_line_lists_the_other_way_out(tmp_path, capsys):
    folder = tmp_path / "seats_short"
    shutil.copytree(DATA / "seats_short", folder)
    (folder / "budget.csv").write_text("year,hiring,moves\n2027,0,0\n")
    code = main(["plan", str(folder), "-o", str(tmp_path / "out"), "-q"])
    out = capsys.readouterr().out
    assert code == EXIT_INFEASIBLE
    assert "    - seats: over by 10 in all" in out
    assert (f"    - or, instead: moves budget 2027 raised by {MOVES_NEEDED:,} would do, with "
            "every other limit kept") in out
