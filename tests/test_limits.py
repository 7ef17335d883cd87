"""The away-share rows counted in whole people (``rebalance.limits.rounded_down``).

A valid inequality keeps every whole-number point of its row. Checked two ways: on random
rows, by enumerating every whole-number point of a small box (brute force); on random
instances, where the optimum of scipy's ``milp`` (its own HiGHS) must be the same with and
without the rounded rows, while the LP relaxation (scipy's ``linprog``) may only rise.
The rounding itself is textbook mixed-integer rounding (Nemhauser and Wolsey, *Integer and
Combinatorial Optimization*, II.1.7).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import replace

import numpy as np
import pytest
from conftest import scipy_lp, scipy_milp
from randomized import everyone_moves, random_instance

from rebalance.instance import Instance, Period
from rebalance.limits import rounded_down
from rebalance.model import Model, build_model, without_rounded_rows


@pytest.mark.parametrize("seed", range(40))
def test_the_rounded_row_keeps_every_whole_point_of_the_row(seed):
    # Shapes of the away-share rows: +1 for people away, -share for heads a reassignment
    # may bring in, +share for heads one may take away.
    rng = np.random.default_rng(seed)
    n = int(rng.integers(1, 5))
    share = float(rng.choice([0.15, 0.3, 0.5, 0.7]))
    a = rng.choice([1.0, -share, share, 2.0], n)
    a[0] = 1.0  # a row has people who may go away
    upper = float(rng.uniform(0.2, 4.8))
    whole = rounded_down(list(range(n)), list(a), upper, np.ones(n, bool), np.zeros(n))
    assert whole is not None  # a random right-hand side has a fraction
    cols, coefs, rounded_upper = whole
    assert rounded_upper == math.floor(upper)
    lifted = np.zeros(n)
    lifted[cols] = coefs
    kept = 0
    for x in itertools.product(range(6), repeat=n):
        point = np.asarray(x, float)
        if a @ point <= upper + 1e-12:
            assert lifted @ point <= rounded_upper + 1e-9, x
            kept += 1
    # And it cuts off a point of the LP: a fraction of a person away.
    edge = np.zeros(n)
    edge[0] = upper
    assert kept >= 1 and lifted @ edge > rounded_upper + 1e-9


def test_no_rounded_row_for_a_whole_right_hand_side_or_a_continuous_column():
    assert rounded_down([0, 1], [1.0, -0.5], 3.0, np.ones(2, bool), np.zeros(2)) is None
    assert rounded_down([0, 1], [1.0, -1.0], 3.5, np.array([True, False]), np.zeros(2)) is None


def _without_whole_rows(model: Model) -> Model:
    family = next(f for f in model.rows if f.name == "away_share_in_whole_people")
    keep = np.ones(model.num_rows, bool)
    keep[family.start:family.stop] = False
    return replace(model, matrix=model.matrix[keep], row_lower=model.row_lower[keep],
                   row_upper=model.row_upper[keep])


def _sharing(seed: int, instance: Instance) -> Instance:
    share = [0.2, 0.34, 0.5][seed % 3]
    return replace(instance, policy=replace(instance.policy, max_away_share=share))


def test_the_rounded_rows_keep_the_optimum_and_may_only_raise_the_lp():
    checked = raised = 0
    for seed in range(16):
        base = random_instance(seed, people=5, periods=3, offices=3, skills=2)
        instance = _sharing(seed, everyone_moves(base) if seed % 2 else base)
        model = build_model(instance, pair_details=bool(seed % 4 < 2))
        family = next(f for f in model.rows if f.name == "away_share_in_whole_people")
        if family.stop == family.start:
            continue  # every share of heads already whole, or nobody may go on detail
        plain = _without_whole_rows(model)
        for objective in (model.shortfall_weight, model.cost + 1e4 * model.shortfall_weight):
            with_rows, without = scipy_milp(model, objective), scipy_milp(plain, objective)
            assert with_rows.status == 0 and without.status == 0
            assert with_rows.fun == pytest.approx(without.fun, rel=1e-6, abs=1e-6), seed
            lp_with, lp_without = scipy_lp(model, objective), scipy_lp(plain, objective)
            scale = 1e-6 * (1 + abs(lp_without.fun))
            assert lp_with.fun >= lp_without.fun - scale, seed
            raised += lp_with.fun > lp_without.fun + scale
        checked += 1
    assert checked >= 6 and raised >= 1, (checked, raised)


def test_without_rounded_rows_the_lp_is_the_lp_without_them():
    # The LPs whose prices bound a stage leave the rounded rows free (priced 0): the same LP
    # as the model with those rows taken out (scipy's linprog on both).
    for seed in range(16):
        base = random_instance(seed, people=5, periods=3, offices=3, skills=2)
        model = build_model(_sharing(seed, base))
        family = next(f for f in model.rows if f.name == "away_share_in_whole_people")
        if family.stop == family.start:
            continue
        free = without_rounded_rows(model)
        assert free.num_rows == model.num_rows and np.all(np.isinf(
            free.row_upper[family.start:family.stop]))
        reference = scipy_lp(_without_whole_rows(model), model.shortfall_weight)
        assert scipy_lp(free, model.shortfall_weight).fun == pytest.approx(
            reference.fun, rel=1e-7, abs=1e-7)
        assert scipy_lp(model, model.shortfall_weight).fun >= reference.fun - 1e-7
        return
    raise AssertionError("no instance with rounded rows")


def _seats_short_at(share: float) -> Instance:
    from conftest import DATA

    from rebalance.instance import Policy
    from rebalance.readers import read_instance

    instance = read_instance(DATA / "seats_short")
    return instance.with_changes(policy=Policy(max_away_share=share))


def test_seat_counts_are_the_hand_count_of_seats_short():
    # Hand count (tests/data/seats_short/NOTE.md): A has 2 seats; a1-a5 are based there in
    # Q1, Q2 and a5 leaves after Q2. At a share of 0.25 may go: a5 reassigned + floor(0.25 x
    # 4) = 1 detail = 2 in Q1, Q2; floor(0.25 x 4) = 1 in Q3, Q4 (a5 gone, nobody relocatable).
    instance = _seats_short_at(0.25)
    counts = [(c.office, c.period, c.seats, c.based, c.must_go, c.may_go)
              for c in instance.seat_shortages()]
    assert counts == [("A", 0, 2, 5, 3, 2), ("A", 1, 2, 5, 3, 2), ("A", 2, 2, 4, 2, 1),
                      ("A", 3, 2, 4, 2, 1)]
    # One pass over the staff gives what most_away gives for each office and period.
    for c in instance.seat_counts():
        assert c.may_go == instance.most_away(c.office, c.period)
    assert instance.away_limits() == ("can_detail", "can_relocate", "max_away_share")


def test_a_seats_conflict_says_the_seats_the_people_based_there_and_who_may_go():
    # The same hand count: every period of A is short (over by 1 each: 3 must go, 2 may).
    from rebalance.planning import options_from_instance
    from rebalance.solve import Status, solve

    instance = _seats_short_at(0.25)
    model = build_model(instance)
    result = solve(model, options_from_instance(instance, relative_gap=0.0), instance)
    assert result.status is Status.INFEASIBLE
    assert ("seats: A in 2027-Q1 (over by 1): 2 seats for 5 people based there; 3 must be "
            "away or moved, and at most 2 may be away or moved (can_detail, can_relocate, "
            "max_away_share)") in result.conflicts
    assert ("seats: A in 2027-Q3 (over by 1): 2 seats for 4 people based there; 2 must be "
            "away or moved, and at most 1 may be away or moved (can_detail, can_relocate, "
            "max_away_share)") in result.conflicts
    # Without the instance the rows are named as before.
    bare = solve(model, options_from_instance(instance, relative_gap=0.0))
    assert "seats: A in 2027-Q1 (over by 1)" in bare.conflicts


def test_a_hire_costs_onboarding_in_its_start_year_and_a_new_positions_salary_by_year(tiny):
    # Hand reckoning by the hiring_budget rule of docs/model.md, on tests/data/tiny's review
    # skill (skills.csv: 8,000 to onboard, 20,000 a period), its quarters moved to span two
    # budget years (2027-Q3 to 2028-Q2).
    periods = tuple(Period(name, name[:4], 480.0)
                    for name in ("2027-Q3", "2027-Q4", "2028-Q1", "2028-Q2"))
    instance = tiny.with_changes(periods=periods)
    assert instance.hire_cost_by_year("review", 1, 2, new_position=True) == {
        "2027": 2 * (8_000 + 20_000), "2028": 2 * 2 * 20_000}
    assert instance.hire_cost_by_year("review", 2, new_position=True) == {
        "2028": 8_000 + 2 * 20_000}
    assert instance.hire_cost_by_year("review", 1, 3, new_position=False) == {"2027": 3 * 8_000}


def test_hire_ruled_out_names_every_rule_of_the_data_that_leaves_no_hire(tiny):
    # By hand from tests/data/tiny (NOTE.md): time to hire 1; intake is wanted at A in
    # 2027-Q1 only; no vacancies.csv, so no funded vacancy; both offices may hire 1 a period.
    assert tiny.hire_ruled_out("B", "review", 1, new_position=True) == ()
    assert tiny.hire_ruled_out("B", "review", 0, new_position=True) == ("before_time_to_hire",)
    assert tiny.hire_ruled_out("A", "intake", 1, new_position=False) == ("no_demand",
                                                                       "no_vacancy")
    closed = tiny.with_changes(offices=tuple(replace(o, max_hires_per_period=0)
                                             for o in tiny.offices))
    assert closed.hire_ruled_out("B", "review", 0, new_position=True) == (
        "may_not_hire", "before_time_to_hire")
    a1 = tiny.staff[0]
    assert tiny.move_ruled_out(a1, 1, "detail") == ()
    assert tiny.move_ruled_out(a1, 1, "reassignment") == ("may_not_relocate",)


@pytest.mark.parametrize("seed", range(6))
def test_the_model_has_a_hire_column_exactly_where_the_data_rule_none_out(seed):
    # One statement of the rule (Instance.hire_ruled_out): the model's hire block, the
    # re-plan's refusals and the change reasons all read it.
    instance = random_instance(seed, people=3, periods=5, offices=3, skills=2)
    model = build_model(instance, pooled=False)
    hire = model.blocks["hire"]
    columns = {(int(o), int(k), int(s), int(new)) for o, k, s, new in zip(
        *(hire.keys[c] for c in ("office", "skill", "period", "new")), strict=True)}
    for (o, office), (k, skill), s, new in itertools.product(
            enumerate(instance.offices), enumerate(instance.skills), range(len(instance.periods)),
            (0, 1)):
        ruled_out = instance.hire_ruled_out(office.name, skill.name, s, new_position=bool(new))
        assert ((o, k, s, new) in columns) == (not ruled_out), (office.name, skill.name, s, new)


def test_who_may_go_counts_only_details_to_work_for_their_skills(tmp_path, capsys):
    # By hand from tests/data/tiny edited: A has 2 seats for a1, a2, a3; a2 may not be
    # reassigned; B's review demand of 2027-Q1 is gone.  In 2027-Q1 the only office with
    # work for review or intake is A itself, and details go only where there is work for the
    # person's skills (docs/model.md, Pruning): none may go, 1 must.  From Q2 B wants review,
    # so a1 and a2 could, and tiny's away share lets 1 go (0.5 of 3 people, whole).  'check'
    # had said "valid" here while 'plan' found the seats in conflict, with "at most 2 may be
    # away" in its words (a reviewer's finding).
    import shutil

    from conftest import DATA

    from rebalance import read_instance
    from rebalance.cli import EXIT_INFEASIBLE, main

    folder = tmp_path / "tiny"
    shutil.copytree(DATA / "tiny", folder)
    offices = folder / "offices.csv"
    offices.write_text(offices.read_text().replace("A,Alder,10,1", "A,Alder,2,1"))
    staff = folder / "staff.csv"
    staff.write_text(staff.read_text().replace("a2,A,1.0,review:0.8 intake:1.0,true,true,",
                                               "a2,A,1.0,review:0.8 intake:1.0,true,false,"))
    demand = folder / "demand.csv"
    demand.write_text(demand.read_text().replace("B,review,2027-Q1,1.0,2\n", ""))
    instance = read_instance(folder)
    counts = {(c.office, c.period): c for c in instance.seat_counts()}
    assert (counts["A", 0].must_go, counts["A", 0].may_go, counts["A", 0].no_work_elsewhere) \
        == (1, 0, 2)
    assert (counts["A", 1].may_go, counts["A", 1].no_work_elsewhere) == (1, 0)
    assert instance.most_away("A", 0) == 0 and instance.most_away("A", 1) == 1
    assert main(["check", str(folder)]) == EXIT_INFEASIBLE
    capsys.readouterr()
    assert main(["plan", str(folder), "-o", str(tmp_path / "out"), "-q"]) == EXIT_INFEASIBLE
    # The list's heading stands as a heading, its ways out as bullets under it.
    said = capsys.readouterr().out.splitlines()
    assert "    Way out (the least that must give):" in said
    assert any(line.startswith("    - (a) seats: A in 2027-Q1") for line in said)
