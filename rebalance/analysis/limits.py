"""How much of each limit a plan uses, recomputed from the instance and the plan tables alone.

Marginal values and reasons both need to know which limits *bind*.  The answer is taken from
the plan tables, the way the verifier reads them, not from solver row activities: a reason must
stand on the published plan, and a limit the tables show slack on must never be cited.

A limit binds when what is left of it cannot pay for one more unit of what it limits: less than
one seat, one hire slot, one head away, one vacancy, or less money than the cheapest action the
budget pays for (a hire starting that year, one detail period).
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass

import pandas as pd

from rebalance.instance import Instance
from rebalance.plan import Plan, budget_lines

__all__ = ["BUDGET_LIMITS", "LIMIT_COLUMNS", "LIMIT_NAMES", "HireRow", "LimitUse", "hire_rows",
           "limit_use", "limit_use_frame", "limit_words"]

LIMIT_COLUMNS = ("limit", "where", "period", "used", "cap", "slack", "binding")

# Tolerance on money and heads: plan tables are written with float round-off.
_TOL = 1e-6


@dataclass(frozen=True)
class LimitUse:
    """One limit row: ``limit`` is a limit kind, ``where`` its scope (year, office, skill)."""

    limit: str
    where: str
    period: str
    used: float
    cap: float
    binding: bool

    @property
    def slack(self) -> float:
        return self.cap - self.used


@dataclass(frozen=True)
class HireRow:
    """One row of ``hires.csv`` (typed: the column ``count`` shadows a tuple method)."""

    office: str
    skill: str
    start_period: str
    count: int
    funding: str
    onboarding_cost: float


def hire_rows(plan: Plan) -> list[HireRow]:
    h = plan.hires
    return [HireRow(str(o), str(k), str(s), int(n), str(f), float(c)) for o, k, s, n, f, c in zip(
        h["office"].tolist(), h["skill"].tolist(), h["start_period"].tolist(),
        h["count"].tolist(), h["funding"].tolist(), h["onboarding_cost"].tolist(), strict=True)]


def _cheapest_hire(instance: Instance, year: str,
                   vacancy_used: Counter[tuple[str, str]]) -> float | None:
    """Least hiring-budget money one *more* hire starting in ``year`` needs: onboarding, and
    the new-position salary paid in ``year`` (every period from the start to the horizon's
    end, docs/model.md) unless a funded vacancy of that skill at that office is still left
    after the ``vacancy_used`` of the plan (:meth:`Instance.hire_cost_by_year`).  Offices
    that may not hire have no hire to price."""
    best: float | None = None
    for t, period in enumerate(instance.periods):
        if period.year != year:
            continue
        for office in instance.offices:
            if office.max_hires_per_period == 0:
                continue
            for skill in instance.skills:
                if t < skill.time_to_hire:
                    continue
                left = instance.vacancies.get((office.name, skill.name), 0) - vacancy_used[
                    (office.name, skill.name)]
                amount = instance.hire_cost_by_year(skill.name, t, new_position=left <= 0).get(
                    year, 0.0)
                best = amount if best is None else min(best, amount)
    return best


def _cheapest_detail(instance: Instance) -> float:
    offices = [o.name for o in instance.offices]
    costs = [instance.detail_cost_per_period(a, b) for a in offices for b in offices if a != b]
    return min(costs) if costs else 0.0


def limit_use(instance: Instance, plan: Plan) -> tuple[LimitUse, ...]:
    """Every limit of ``instance`` with what ``plan`` uses of it, in a fixed order."""
    names = instance.period_names
    ix = {name: t for t, name in enumerate(names)}
    T = len(names)
    people = {p.person: p for p in instance.staff}
    out: list[LimitUse] = []

    # Home in force and whereabouts per person and period, from the tables.
    home = {name: [p.home_office] * T for name, p in people.items()}
    for row in plan.reassignments.itertuples(index=False):
        for t in range(ix[str(row.period)], T):
            home[str(row.person)][t] = str(row.to_office)
    away: dict[tuple[str, int], str] = {}
    for row in plan.details.itertuples(index=False):
        away[(str(row.person), ix[str(row.period)])] = str(row.to_office)

    starts: Counter[tuple[str, int]] = Counter()
    held: Counter[tuple[str, int]] = Counter()
    vacancy_used: Counter[tuple[str, str]] = Counter()
    for hire in hire_rows(plan):
        s = ix[hire.start_period]
        n = hire.count
        if hire.funding != "new":
            vacancy_used[(hire.office, hire.skill)] += n
        starts[(hire.office, s)] += n
        for t in range(s, T):
            held[(hire.office, t)] += n

    # Spending per year: costs.csv's, as the pages' money tables and the console's budget
    # table show it.  Onboarding had come from hires.csv and salaries from its count priced
    # afresh, so a plan whose count was edited showed a sum no file or check gave.
    cheapest_detail = _cheapest_detail(instance)
    for line in budget_lines(instance, plan):
        if line.cap is None:
            continue
        if line.cap_name == "hiring":
            step = _cheapest_hire(instance, line.year, vacancy_used)
            # No hire can start or be paid in that year: the cap cannot bind there.
            binding = step is not None and line.cap - line.spent < step - _TOL
        else:
            binding = line.cap - line.spent < max(cheapest_detail, _TOL) - _TOL
        out.append(LimitUse(f"{line.cap_name}_budget", line.year, "", line.spent, line.cap,
                            binding))

    share = instance.policy.max_away_share
    present: Counter[tuple[str, int]] = Counter()
    gone: Counter[tuple[str, int]] = Counter()
    arrived: Counter[tuple[str, int]] = Counter()
    for name, person in people.items():
        for t in range(T):
            if person.is_present(t):
                present[(home[name][t], t)] += 1
    for (name, t), destination in away.items():
        gone[(home[name][t], t)] += 1
        arrived[(destination, t)] += 1
    for office in instance.offices:
        o = office.name
        for t in range(T):
            if share < 1.0:
                cap = share * present[(o, t)]
                out.append(LimitUse("away_share", o, names[t], float(gone[(o, t)]), cap,
                                    cap - gone[(o, t)] < 1.0 - _TOL))
            if office.seats is not None:
                used = present[(o, t)] - gone[(o, t)] + arrived[(o, t)] + held[(o, t)]
                out.append(LimitUse("seats", o, names[t], float(used), float(office.seats),
                                    office.seats - used < 1.0 - _TOL))
            if office.max_hires_per_period is not None:
                cap_hires = office.max_hires_per_period
                out.append(LimitUse("max_hires", o, names[t], float(starts[(o, t)]),
                                    float(cap_hires), cap_hires - starts[(o, t)] < 1.0 - _TOL))
    for (o, k), funded in sorted(instance.vacancies.items()):
        used = vacancy_used[(o, k)]
        out.append(LimitUse("vacancies", f"{k} at {o}", "", float(used), float(funded),
                            funded - used < 1.0 - _TOL))
    for skill in instance.skills:
        # Time to hire: no hire of the skill can start before period index time_to_hire; it
        # binds in exactly those periods (cap = earliest start index, used = period index).
        for t in range(min(skill.time_to_hire, T)):
            out.append(LimitUse("time_to_hire", skill.name, names[t], float(t),
                                float(skill.time_to_hire), True))
    return tuple(out)


def limit_use_frame(uses: tuple[LimitUse, ...]) -> pd.DataFrame:
    rows = [(u.limit, u.where, u.period, u.used, u.cap, u.slack, u.binding) for u in uses]
    return pd.DataFrame(rows, columns=list(LIMIT_COLUMNS))


# Each limit kind as a planner names it (``reasons.csv`` says the same words).
LIMIT_NAMES = {
    "hiring_budget": "hiring budget", "moves_budget": "moves budget", "seats": "seats",
    "max_hires": "hiring slots", "away_share": "away share", "vacancies": "funded vacancies",
    "time_to_hire": "time to hire",
}
BUDGET_LIMITS = ("hiring_budget", "moves_budget")


def limit_words(limit: str, where: str, period: str | None = None) -> str:
    """A limit in plain words: ``hiring budget 2027``, ``seats at aldercombe in 2027-Q3``,
    ``funded vacancies of intake at aldercombe``, ``time to hire of intake``.

    ``period`` None is the limit as a marginal value relaxes it: seats and hiring slots in
    every period; "" leaves the period out.  A kind not in :data:`LIMIT_NAMES` is written
    ``kind · where``."""
    if limit not in LIMIT_NAMES:
        return " · ".join(t for t in (limit.replace("_", " "), where, period) if t)
    name = LIMIT_NAMES[limit]
    if period is None:
        period = "every period" if limit in ("seats", "max_hires") else ""
    when = f" in {period}" if period else ""
    if limit in BUDGET_LIMITS:
        return f"{name} {where}"
    if limit in ("vacancies", "time_to_hire"):  # where: "skill at office", or a skill
        return f"{name} of {where}{when}"
    if limit == "away_share" and where == "policy":
        return f"{name}, every office{when}"
    return f"{name} at {where}{when}" if where else f"{name}{when}"
