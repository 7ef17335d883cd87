"""Naming people in a group: detail counts per period -> who goes when.

The pooled model only limits a group's detail-periods in each window of m+1 periods to
m x size.  The claim that makes pooling exact is that any such counts can be split into
person-level schedules with at most m detail periods in every window of m+1.  Checked here
by property-based search (hypothesis) and, for small cases, against brute-force enumeration
of every assignment.
"""

from __future__ import annotations

import itertools
import shutil

import pytest
from conftest import DATA
from hypothesis import given, settings
from hypothesis import strategies as st

from rebalance import make_plan, options_from_instance, read_instance
from rebalance.model import build_model
from rebalance.plan import extract_plan, schedule_details


def window_ok(periods: set[int], horizon: int, m: int | None) -> bool:
    if m is None:
        return True
    return all(len(periods & set(range(s, s + m + 1))) <= m for s in range(horizon - m))


def counts_strategy():
    @st.composite
    def build(draw):
        size = draw(st.integers(1, 4))
        horizon = draw(st.integers(1, 7))
        m = draw(st.integers(1, 3))
        counts = []
        for t in range(horizon):
            # keep every window of m+1 periods at or under m x size
            window = counts[max(0, t - m):t]
            cap = min(size, m * size - sum(window)) if len(window) == m else size
            counts.append(draw(st.integers(0, max(0, cap))))
        return size, counts, m

    return build()


@settings(max_examples=400, deadline=None)
@given(counts_strategy())
def test_group_counts_always_split_into_person_schedules(case):
    size, counts, m = case
    schedule = schedule_details(size, counts, m)
    assert [len(s) for s in schedule] == counts
    for member in range(size):
        on = {t for t, chosen in enumerate(schedule) if member in chosen}
        assert window_ok(on, len(counts), m)


def brute_force_exists(size: int, counts: list[int], m: int) -> bool:
    choices = [list(itertools.combinations(range(size), n)) for n in counts]
    for combo in itertools.product(*choices):
        if all(window_ok({t for t, c in enumerate(combo) if i in c}, len(counts), m)
               for i in range(size)):
            return True
    return False


def test_window_condition_is_exactly_what_brute_force_allows():
    # Every count vector on 3 people x 4 periods with m = 1 and m = 2: a person-level split
    # exists (brute force) exactly when every window holds at most m x size detail-periods.
    for m in (1, 2):
        for counts in itertools.product(range(4), repeat=4):
            windows_ok = all(sum(counts[s:s + m + 1]) <= m * 3 for s in range(4 - m))
            assert brute_force_exists(3, list(counts), m) == windows_ok
            if windows_ok:
                schedule_details(3, list(counts), m)


def test_keeps_people_on_their_detail_when_it_can():
    # Two people, one detail in each of two periods, limit 2: one person goes twice (fewer
    # people moved), not one each.
    assert schedule_details(2, [1, 1], 2) == [[0], [0]]
    # With limit 1 the second period must go to the other person.
    assert schedule_details(2, [1, 1], 1) == [[0], [1]]


def test_a_sliver_of_a_groups_work_is_one_persons_row_and_keeps_every_total(tmp_path):
    # A group's work column can be a sliver the least shortfall needs (what whole hires'
    # attrition leaves of a demand); split evenly it had become a row for each member
    # (16 rows of 2.2e-4 FTE in a generated plan).  Common practice for a readable
    # schedule: such a sliver goes to one member, and every total stays what the solver had.
    folder = tmp_path / "group"
    shutil.copytree(DATA / "tiny", folder)
    staff = (folder / "staff.csv").read_text().replace(
        "a2,A,1.0,review:0.8 intake:1.0,true,true,",
        "\n".join(f"a{i},A,1.0,review:0.8 intake:1.0,true,false," for i in (2, 4, 5)))
    (folder / "staff.csv").write_text(staff)
    instance = read_instance(folder)
    result = make_plan(instance, options_from_instance(instance))
    assert result.verified and result.solve.x is not None
    model = build_model(instance)
    group = next(u for u, members in enumerate(model.units) if len(members) == 3)
    work = model.blocks["work"]
    x = result.solve.x.copy()
    mine = [work.start + j for j in range(len(work))
            if work.keys["unit"][j] == group and x[work.start + j] > 0.01]
    assert mine, "the group works somewhere"
    x[mine[0]] = 5e-4  # a third of it per member would be under the floor
    plan = extract_plan(instance, model, x)
    j = mine[0] - work.start
    office = instance.offices[work.keys["office"][j]].name
    skill = instance.skills[work.keys["skill"][j]].name
    period = instance.period_names[work.keys["period"][j]]
    members = {instance.staff[p].person for p in model.units[group]}
    rows = plan.work[plan.work["person"].isin(members) & (plan.work["office"] == office)
                     & (plan.work["skill"] == skill) & (plan.work["period"] == period)]
    assert len(rows) == 1 and rows["fte"].iloc[0] == pytest.approx(5e-4, abs=1e-12)
    # Every column's total is still the solver's, and nobody works more than they have.
    for c in range(len(work)):
        if work.keys["unit"][c] != group or x[work.start + c] <= 1e-9:
            continue
        cell = plan.work[plan.work["person"].isin(members)
                         & (plan.work["office"] == instance.offices[work.keys["office"][c]].name)
                         & (plan.work["skill"] == instance.skills[work.keys["skill"][c]].name)
                         & (plan.work["period"] == instance.period_names[work.keys["period"][c]])]
        assert cell["fte"].sum() == pytest.approx(x[work.start + c], abs=1e-12)
    people = {p.person: p for p in instance.staff}
    for (person, period), fte in plan.work.groupby(["person", "period"])["fte"].sum().items():
        t = instance.period_names.index(period)
        assert fte <= instance.available_fte(people[person], t) + 1e-9
