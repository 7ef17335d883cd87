"""A scenario solved from the base plan keeps the base plan wherever a difference would not pay.

The instance has two optimal plans that differ only in who goes on detail (a1 or a2, who are
alike but for a leaving date at the horizon's end, so they are not one pool).  The optimum
itself is checked by enumerating every plan (``brute_force``, as in tests/test_brute_force.py).
"""

from __future__ import annotations

import itertools
from dataclasses import replace
from pathlib import Path

import pandas as pd
import pytest
from analysis_helpers import exact_options
from test_brute_force import brute_force

from rebalance import read_instance
from rebalance.analysis.scenario_files import DemandChange, Scenario, apply_scenario
from rebalance.analysis.scenarios import compare_scenarios, solve_many
from rebalance.analysis.start_plan import named_like
from rebalance.instance import Instance
from rebalance.plan import Plan
from rebalance.verify import verify_plan

FILES = {
    "settings.toml": """
[horizon]
start = "2027-Q1"
count = 4
hours_per_fte = 480

[policy]
max_away_share = 0.5

[move_costs]
detail_cost_per_period = 5000
relocation_cost = 20000

[solver]
name = "highs"
relative_gap = 0
""",
    "offices.csv": "office,location,seats,max_hires_per_period\nA,Alder,10,0\nB,Birch,10,0\n",
    "skills.csv": "skill,salary_per_period,onboarding_cost,time_to_hire,ramp\n"
                  "review,20000,8000,1,\n",
    "staff.csv": "person,home_office,fte,skills,can_detail,can_relocate,last_period\n"
                 "a1,A,1.0,review:1.0,true,false,\n"
                 "a2,A,1.0,review:1.0,true,false,2027-Q4\n"
                 "b1,B,1.0,review:1.0,false,false,\n",
    "demand.csv": "office,skill,period,fte\n"
                  + "".join(f"A,review,2027-Q{q},1.0\n" for q in range(1, 5))
                  + "".join(f"B,review,2027-Q{q},{2.0 if q == 2 else 1.0}\n"
                            for q in range(1, 5)),
    "budget.csv": "year,hiring,moves\n2027,0,100000\n",
}


@pytest.fixture
def instance(tmp_path: Path) -> Instance:
    for name, text in FILES.items():
        (tmp_path / name).write_text(text.lstrip())
    return read_instance(tmp_path)


def _detailed(plan: Plan) -> list[tuple[str, str]]:
    return sorted(zip(plan.details["person"], plan.details["period"], strict=True))


def _swapped(plan: Plan, a: str, b: str) -> Plan:
    """``plan`` with persons ``a`` and ``b`` trading every row (alike people: still a plan)."""
    def swap(frame: pd.DataFrame) -> pd.DataFrame:
        if "person" not in frame:
            return frame
        out = frame.copy()
        out["person"] = frame["person"].map(lambda p: {a: b, b: a}.get(p, p))
        return out
    return replace(plan, details=swap(plan.details), reassignments=swap(plan.reassignments),
                   work=swap(plan.work))


def test_a_solve_from_a_start_keeps_its_equally_good_choice(instance: Instance) -> None:
    least_shortfall, least_cost, _ = brute_force(instance)  # enumeration: the reference
    options = exact_options(instance)
    (scratch,) = solve_many([instance], options, 1)
    assert scratch.plan is not None and scratch.verified
    chosen = _detailed(scratch.plan)
    assert len(chosen) == 1
    other = "a2" if chosen[0][0] == "a1" else "a1"
    start = _swapped(scratch.plan, chosen[0][0], other)

    (kept,) = solve_many([instance], options, 1, start=start)
    assert kept.plan is not None and kept.verified
    # The start's choice, not the one the solver makes from scratch, and still optimal.
    assert _detailed(kept.plan) == [(other, chosen[0][1])]
    assert kept.plan.weighted_shortfall == pytest.approx(least_shortfall, abs=1e-6)
    assert kept.plan.total_cost == pytest.approx(least_cost, rel=1e-6)


def test_a_scenario_differs_from_the_base_by_what_it_calls_for(instance: Instance) -> None:
    # One more reviewer wanted at B in 2027-Q3: one more detail, and nothing else changes.
    surge = Scenario("b-q3", "B needs one more reviewer in 2027-Q3",
                     (DemandChange(("B",), ("review",), (2,), add_fte=1.0),))
    comparison = compare_scenarios(instance, [surge], exact_options(instance), workers=1)
    base, scenario = comparison.results
    assert base.verified and scenario.verified
    assert scenario.plan is not None
    _, least_cost, _ = brute_force(apply_scenario(instance, surge))
    assert scenario.plan.total_cost == pytest.approx(least_cost, rel=1e-6)
    differing = comparison.actions
    # By hand: the one added detail, whoever the solver sent (a1 and a2 do equally well).
    (who,) = scenario.plan.details.loc[scenario.plan.details["period"] == "2027-Q3", "person"]
    assert [tuple(r) for r in differing.drop(columns="reason").itertuples(index=False)] == [
        ("b-q3", "added", "detail", who, "review", "2027-Q3", "A -> B", 0, 1, "during", False)]
    assert comparison.table.set_index("scenario").loc["b-q3", "actions_differing"] == 1


def _three_offices(tmp_path: Path) -> Instance:
    """The instance above with an office C (no staff) and only a1 free to go on detail: the
    base sends a1 to B in 2027-Q2, its one choice."""
    folder = tmp_path / "three"
    folder.mkdir()
    for name, text in FILES.items():
        (folder / name).write_text(text.lstrip())
    (folder / "offices.csv").write_text(FILES["offices.csv"] + "C,Cedar,10,0\n")
    (folder / "staff.csv").write_text(
        FILES["staff.csv"].replace("a2,A,1.0,review:1.0,true", "a2,A,1.0,review:1.0,false"))
    return read_instance(folder)


def test_a_detail_sent_elsewhere_is_one_rerouted_row(tmp_path: Path) -> None:
    # A practitioner's reading: a rerouted detail had taken two rows (old route 1 -> 0, new
    # route 0 -> 1).  Both scenarios move B's extra 2027-Q2 need to C, so a1 goes to C
    # instead: one row each, made under both; the second also wants one more at B in Q4.
    instance = _three_offices(tmp_path)
    moved = (DemandChange(("B",), ("review",), (1,), multiplier=0.5),
             DemandChange(("C",), ("review",), (1,), add_fte=1.0))
    both = [Scenario("c-q2", "", moved),
            Scenario("c-q2-b-q4", "", (*moved, DemandChange(("B",), ("review",), (3,),
                                                            add_fte=1.0)))]
    comparison = compare_scenarios(instance, both, exact_options(instance), workers=1)
    base = comparison.results[0].plan
    assert base is not None and _detailed(base) == [("a1", "2027-Q2")]
    assert all(r.verified for r in comparison.results)
    # Reference: the rows written out by hand from the instance above.
    rerouted = ("rerouted", "detail", "a1", "review", "2027-Q2", "A -> B, now A -> C", 1, 1,
                "during", True)
    assert [tuple(r) for r in comparison.actions.drop(columns="reason")
            .itertuples(index=False)] == [
        ("c-q2", *rerouted),
        ("c-q2-b-q4", *rerouted),
        ("c-q2-b-q4", "added", "detail", "a1", "review", "2027-Q4", "A -> B", 0, 1, "during",
         False)]
    counts = comparison.table.set_index("scenario")["actions_differing"]
    assert counts.to_dict() == {"base": 0, "c-q2": 1, "c-q2-b-q4": 2}
    # Why, by hand: C would be 1 FTE short without a1; B's need fell from 2 to 1.
    assert comparison.actions["reason"].iloc[0].startswith(
        "detailed to C instead, which would be 1.000 FTE short of review without them")


def _alike(tmp_path: Path) -> Instance:
    """The instance above with a1, a2 and a3 alike in every rule: one pool of three."""
    folder = tmp_path / "alike"
    folder.mkdir()
    for name, text in FILES.items():
        (folder / name).write_text(text.lstrip())
    (folder / "staff.csv").write_text(
        "person,home_office,fte,skills,can_detail,can_relocate,last_period\n"
        + "".join(f"a{i},A,1.0,review:1.0,true,false,\n" for i in (1, 2, 3))
        + "b1,B,1.0,review:1.0,false,false,\n")
    return read_instance(folder)


def _with_details(plan: Plan, rows: list[tuple[str, str]]) -> Plan:
    """``plan`` with A -> B details for (person, period) ``rows`` (work left as it is: only
    the names of details are compared here)."""
    details = pd.DataFrame([(p, t, "A", "B", 5000.0) for p, t in rows],
                           columns=["person", "period", "from_office", "to_office", "cost"])
    return replace(plan, details=details)


def test_alike_people_are_named_as_in_the_base_plan(tmp_path: Path) -> None:
    instance = _alike(tmp_path)
    (solved,) = solve_many([instance], exact_options(instance), 1)
    assert solved.plan is not None and solved.verified
    (person, period), = _detailed(solved.plan)
    other = "a3" if person != "a3" else "a1"
    base = _swapped(solved.plan, person, other)
    renamed = named_like(instance, solved.plan, base)
    assert _detailed(renamed) == [(other, period)]
    assert verify_plan(instance, renamed) == []  # a swap of alike people keeps every rule


def test_the_renaming_leaves_the_fewest_details_differing(tmp_path: Path) -> None:
    # Reference: every renaming of the pool of three, enumerated.
    instance = _alike(tmp_path)
    (solved,) = solve_many([instance], exact_options(instance), 1)
    assert solved.plan is not None
    q = [f"2027-Q{i}" for i in range(1, 5)]
    plan = _with_details(solved.plan, [("a1", q[0]), ("a1", q[1]), ("a2", q[2]), ("a3", q[3])])
    base = _with_details(solved.plan, [("a3", q[0]), ("a3", q[1]), ("a1", q[3]), ("a2", q[0])])

    def differing(p: Plan) -> int:
        return len(set(_detailed(p)) ^ set(_detailed(base)))

    people = ("a1", "a2", "a3")
    least = min(differing(_renamed_by(plan, dict(zip(people, order, strict=True))))
                for order in itertools.permutations(people))
    assert differing(named_like(instance, plan, base)) == least < differing(plan)


def _renamed_by(plan: Plan, mapping: dict[str, str]) -> Plan:
    details = plan.details.copy()
    details["person"] = details["person"].map(mapping)
    return replace(plan, details=details)


def test_single_periods_are_traded_where_whole_timelines_cannot_match(tmp_path: Path) -> None:
    # a1 on detail in Q1 and Q3, the base has a1 in Q1 and a2 in Q3: no renaming of whole
    # timelines matches (each leaves one period differing), trading Q3 does.
    instance = _alike(tmp_path)
    (solved,) = solve_many([instance], exact_options(instance), 1)
    assert solved.plan is not None
    plan = _with_details(solved.plan, [("a1", "2027-Q1"), ("a1", "2027-Q3")])
    base = _with_details(solved.plan, [("a1", "2027-Q1"), ("a2", "2027-Q3")])
    assert _detailed(named_like(instance, plan, base)) == _detailed(base)


def test_no_trade_makes_a_run_longer_than_the_limit(tmp_path: Path) -> None:
    # The base wants a1 on detail in Q2 and Q3; with at most one detail period in a row
    # (max_consecutive_detail_periods = 1) giving a1 a2's Q3 would break that rule.
    instance = _alike(tmp_path)
    (solved,) = solve_many([instance], exact_options(instance), 1)
    assert solved.plan is not None
    plan = _with_details(solved.plan, [("a1", "2027-Q2"), ("a2", "2027-Q3")])
    base = _with_details(solved.plan, [("a1", "2027-Q2"), ("a1", "2027-Q3")])
    assert _detailed(named_like(instance, plan, base)) == _detailed(base)  # no limit: traded
    limited = replace(instance, policy=replace(instance.policy,
                                               max_consecutive_detail_periods=1))
    assert _detailed(named_like(limited, plan, base)) == _detailed(plan)
