"""Small random instances for tests that compare the model with an outside reference.

The data is random on purpose (it checks the model, it is not a scenario); every instance is a
pure function of its seed.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from rebalance.instance import (
    Budget,
    Demand,
    Instance,
    MoveCost,
    MoveCostDefaults,
    Office,
    Period,
    Person,
    Policy,
    Skill,
)


def random_instance(seed: int, *, people: int = 2, periods: int = 3, offices: int = 2,
                    skills: int = 2, hiring: bool = True) -> Instance:
    rng = np.random.default_rng(seed)
    periods_t = tuple(Period(f"P{t + 1}", "Y1" if t < 2 else "Y2", 400.0) for t in range(periods))
    office_names = [f"O{i}" for i in range(offices)]
    office_t = tuple(
        Office(name, f"L{i}", seats=int(rng.integers(1, people + 2)) if rng.random() < 0.4
               else None,
               max_hires_per_period=(1 if (hiring and i == 0) else 0))
        for i, name in enumerate(office_names))
    skill_names = [f"k{i}" for i in range(skills)]
    skill_t = tuple(
        Skill(name, float(rng.integers(5, 20)) * 1000, float(rng.integers(1, 8)) * 1000,
              int(rng.integers(0, 2)), tuple(float(v) for v in rng.choice([0.5, 1.0], size=1))
              if rng.random() < 0.5 else ())
        for name in skill_names)
    staff = []
    for p in range(people):
        n_sk = int(rng.integers(1, skills + 1))
        chosen = rng.choice(skills, size=n_sk, replace=False)
        person_skills = tuple((skill_names[k], float(rng.choice([0.5, 0.8, 1.0])))
                              for k in chosen)
        last = int(rng.integers(1, periods)) if rng.random() < 0.2 else None
        staff.append(Person(f"p{p}", office_names[int(rng.integers(0, offices))],
                            float(rng.choice([0.5, 1.0])), person_skills,
                            can_detail=bool(rng.random() < 0.8),
                            can_relocate=bool(rng.random() < 0.4), last_period=last))
    demand = []
    for o in office_names:
        for k in skill_names:
            for t in range(periods):
                if rng.random() < 0.6:
                    demand.append(Demand(o, k, t, float(np.round(rng.uniform(0.1, 1.6), 2)),
                                         float(rng.choice([1.0, 2.0]))))
    if not demand:
        demand.append(Demand(office_names[0], skill_names[0], 0, 1.0))
    move_costs = {}
    for a in range(offices):
        for b in range(offices):
            if a != b and rng.random() < 0.7:
                move_costs[(f"L{a}", f"L{b}")] = MoveCost(float(rng.integers(1, 6)) * 1000,
                                                          float(rng.integers(2, 12)) * 1000)
    vacancies = {(office_names[0], skill_names[0]): int(rng.integers(0, 2))}
    attrition = {(skill_names[0], None): float(rng.choice([0.0, 0.1]))}
    budgets = (Budget("Y1", float(rng.integers(5, 40)) * 1000 if rng.random() < 0.7 else None,
                      float(rng.integers(2, 12)) * 1000 if rng.random() < 0.6 else None),
               Budget("Y2", float(rng.integers(5, 40)) * 1000, None))
    policy = Policy(max_away_share=float(rng.choice([0.5, 1.0])),
                    max_consecutive_detail_periods=(None if rng.random() < 0.4
                                                    else int(rng.integers(0, 3))))
    return Instance(
        name=f"random-{seed}",
        periods=periods_t,
        periods_per_year=2,
        offices=office_t,
        skills=skill_t,
        staff=tuple(staff),
        demand=tuple(demand),
        move_costs=move_costs,
        vacancies=vacancies,
        attrition=attrition,
        budgets=budgets,
        policy=policy,
        move_cost_defaults=MoveCostDefaults(3000.0, 8000.0, 500.0, 1000.0),
    )


def movers(seed: int, max_run: int | None = 1) -> Instance:
    """A random instance whose people may all be detailed and relocated (each a unit of
    one), with a consecutive-detail limit."""
    base = random_instance(seed, people=4, periods=4, offices=3, skills=2)
    policy = replace(base.policy, max_consecutive_detail_periods=max_run)
    return everyone_moves(base.with_changes(policy=policy))


def everyone_moves(instance: Instance) -> Instance:
    """``instance`` with every person allowed to go on detail and to be relocated."""
    return instance.with_changes(staff=tuple(replace(p, can_relocate=True, can_detail=True)
                                             for p in instance.staff))


def with_twins(instance: Instance, copies: int = 2) -> Instance:
    """Add interchangeable copies of each person, so the pooled model has real groups."""
    staff = []
    for person in instance.staff:
        staff.append(person)
        for i in range(copies):
            staff.append(replace(person, person=f"{person.person}-twin{i}"))
    offices = tuple(replace(o, seats=None if o.seats is None else o.seats * (copies + 1))
                    for o in instance.offices)
    return instance.with_changes(staff=tuple(staff), offices=offices)
