"""work_split_changes on hand-made plans: work traded between alike people is no change, work
that really moves is counted (by hand, from tests/data/tiny with a second a1 added)."""

from __future__ import annotations

from dataclasses import replace

import pandas as pd
import pytest
from conftest import solve_verified

from rebalance.analysis.replan import work_split_changes
from rebalance.instance import Instance
from rebalance.model import group_units
from rebalance.plan import PLAN_TABLES, Plan

Q3, Q4 = "2027-Q3", "2027-Q4"


@pytest.fixture()
def twins(tiny: Instance) -> tuple[Instance, Plan]:
    """tiny with a4, a1's twin (staff.csv: A, 1.0 FTE, review 1.0, may be detailed, may not
    be relocated, no leaving period), and a plan of it to take tables from."""
    a1 = next(p for p in tiny.staff if p.person == "a1")
    instance = tiny.with_changes(staff=(*tiny.staff, replace(a1, person="a4")))
    names = [p.person for p in instance.staff]
    # The model pools them (the pooling key: home, skills, FTE, eligibility, leaving period).
    assert (names.index("a1"), names.index("a4")) in group_units(instance)
    plan = solve_verified(instance).plan
    assert plan is not None
    return instance, plan


def _with_work(plan: Plan, rows: list[tuple[str, str, str, str, float]]) -> Plan:
    """``plan`` with its work table replaced by ``rows`` (person, period, office, skill, fte;
    output as fte, proficiency 1.0)."""
    frame = pd.DataFrame([(*row, row[4]) for row in rows], columns=list(PLAN_TABLES["work"]))
    return replace(plan, work=frame)


# b1 and a3 work alike in every plan below: only a1 and a4 differ.
OTHERS = [("b1", Q3, "B", "review", 1.0), ("a3", Q3, "A", "intake", 0.5),
          ("a3", Q4, "A", "intake", 0.5)]


def _twins(plan: Plan, q3: tuple[str, str], q4: tuple[str, str], q4_fte: float = 1.0) -> Plan:
    """``plan`` with OTHERS' work and a1's and a4's review at the offices ``q3`` and ``q4``
    give them (a1's first), 1.0 FTE in 2027-Q3 and ``q4_fte`` in 2027-Q4."""
    return _with_work(plan, [*OTHERS, ("a1", Q3, q3[0], "review", 1.0),
                             ("a4", Q3, q3[1], "review", 1.0),
                             ("a1", Q4, q4[0], "review", q4_fte),
                             ("a4", Q4, q4[1], "review", q4_fte)])


def test_alike_people_trading_their_work_is_no_change(twins) -> None:
    instance, plan = twins
    # Old: a1 at A in Q3 and on detail at B in Q4, a4 the other way round; new: the two
    # traded.  The pool's work in all is the same each period (A review 1.0, B review 1.0).
    old = _twins(plan, ("A", "B"), ("B", "A"))
    new = _twins(plan, ("B", "A"), ("A", "B"))
    assert work_split_changes(instance, old, new, 2) == 0
    # Shared another way (each half at A, half at B): still the same work in all.
    halves = _with_work(plan, [*OTHERS, *[(p, t, o, "review", 0.5) for p in ("a1", "a4")
                                          for t in (Q3, Q4) for o in ("A", "B")]])
    assert work_split_changes(instance, old, halves, 2) == 0


def test_work_that_really_moves_is_counted(twins) -> None:
    instance, plan = twins
    old = _twins(plan, ("A", "B"), ("A", "B"))
    # Q3 as before, traded; in Q4 B loses a4's 1.0 FTE of review to A (both at A): one
    # member's work, so 1 person-period by hand.
    one = _twins(plan, ("B", "A"), ("A", "A"))
    assert work_split_changes(instance, old, one, 2) == 1
    # In Q4 both at A on 0.3 FTE of review: A's review goes from 1.0 to 0.6 (-0.4) and B's
    # from 1.0 to 0 (-1.0), in all 1.4 FTE taken away and none added, more than one member's
    # 1.0 FTE: 2 person-periods by hand.
    two = _twins(plan, ("A", "B"), ("A", "A"), q4_fte=0.3)
    assert work_split_changes(instance, old, two, 2) == 2
    # From Q4 on only: Q3's trade in ``one`` is out of range either way.
    assert work_split_changes(instance, old, one, 3) == 1
    # b1 (on their own) off by more than float dust in Q3: one more person-period.
    b1 = _with_work(plan, [("b1", Q3, "B", "review", 0.9), *OTHERS[1:],
                           *[r[:5] for r in one.work.itertuples(index=False, name=None)
                             if r[0] in ("a1", "a4")]])
    assert work_split_changes(instance, old, b1, 2) == 2
