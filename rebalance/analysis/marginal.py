"""Marginal values: what one more unit of each binding limit buys.

Exact values come from re-solving the instance with that one limit relaxed by one documented
unit (:class:`Steps`) and differencing the two verified plans: the MIP truth.  A fast estimate
(:mod:`rebalance.analysis.marginal_estimate`) ranks the limits and chooses which to re-solve
when ``max_resolves`` is set (keeping a budget among them: :func:`resolve_choice`)."""

from __future__ import annotations

import math
from collections import defaultdict
from collections.abc import Sequence
from dataclasses import dataclass, replace

import pandas as pd

from rebalance.analysis.limits import BUDGET_LIMITS, limit_use, limit_words
from rebalance.analysis.marginal_estimate import ESTIMATE_SECONDS, _estimates, _objective
from rebalance.analysis.solving import solve_many
from rebalance.instance import Budget, Instance
from rebalance.plan import Plan
from rebalance.planning import PlanResult
from rebalance.solve import SolveOptions

__all__ = ["MARGINAL_COLUMNS", "STEP_UNITS", "Candidate", "MarginalValues", "StepUnit", "Steps",
           "binding_candidates", "first_vacancies", "marginal_values", "most_seconds",
           "resolve_choice", "resolve_count"]

# At most this many first funded vacancies are tried (our choice, for the run's time: each is
# a re-solve, and the plan's shortfall ranks them).
FIRST_VACANCIES = 5
# The solvers' primal feasibility tolerance (HiGHS's and CBC's default): a stage's shortfall
# may be this far under its true least value.
FEASIBILITY_TOLERANCE = 1e-6

# ``limit`` and ``where`` are codes for machines; ``limit_in_words`` says the same to people.
MARGINAL_COLUMNS = (
    "rank", "limit", "where", "limit_in_words", "current", "step", "unit", "binding_rows",
    "shortfall_reduction", "cost_change", "estimate_shortfall_reduction", "status", "verified",
    "gap", "shortfall_gap", "method",
)


@dataclass(frozen=True)
class Steps:
    """One unit of each limit: the amount a limit is relaxed by."""

    budget: float = 100_000.0    # money, hiring or moves budget of one year
    seats: int = 10              # seats at one office, every period
    max_hires: int = 1           # hires that may start per period at one office
    away_share: float = 0.05     # the policy's share of people away at once
    vacancies: int = 1           # funded vacancies of one skill at one office
    time_to_hire: int = 1        # periods less to hire one skill


@dataclass(frozen=True)
class StepUnit:
    """The unit of one step of a limit: as ``marginal_values.csv``'s ``unit`` column writes it
    (for any step but one), and for a step of exactly one."""

    plural: str
    singular: str


# Each limit kind with its step's unit in both forms, given rather than derived: which word of
# "hires per period" is plural, or whether a unit has a plural at all ("money", "share of
# people"), is not something letters can tell.  Budgets' "money" gives way to the instance's
# currency where it has one (:func:`step_unit`).
STEP_UNITS = {
    "hiring_budget": StepUnit("money", "money"),
    "moves_budget": StepUnit("money", "money"),
    "seats": StepUnit("seats", "seat"),
    "max_hires": StepUnit("hires per period", "hire per period"),
    "away_share": StepUnit("share of people", "share of people"),
    "vacancies": StepUnit("vacancies", "vacancy"),
    "time_to_hire": StepUnit("periods", "period"),
}


def step_unit(limit: str, instance: Instance) -> str:
    """The ``unit`` column's words for a step of ``limit``: the currency for a budget where
    the instance names one, else :data:`STEP_UNITS`' plural."""
    unit = STEP_UNITS[limit].plural
    return (instance.money.currency or unit) if unit == "money" else unit


@dataclass(frozen=True)
class Candidate:
    """A binding limit, or a first funded vacancy, and how to relax it."""

    limit: str
    where: str
    current: float
    step: float
    unit: str
    binding_rows: int

    @property
    def first_vacancy(self) -> bool:
        """A first funded vacancy where the tables fund none (:func:`first_vacancies`): a
        candidate that binds nothing."""
        return self.limit == "vacancies" and self.current == 0

    def relax(self, instance: Instance) -> Instance:
        """``instance`` with this limit relaxed by ``step``."""
        if self.limit in BUDGET_LIMITS:
            budgets = []
            for b in instance.budgets:
                if b.year == self.where and self.limit == "hiring_budget" and b.hiring is not None:
                    b = Budget(b.year, b.hiring + self.step, b.moves)
                elif b.year == self.where and b.moves is not None and self.limit == "moves_budget":
                    b = Budget(b.year, b.hiring, b.moves + self.step)
                budgets.append(b)
            return instance.with_changes(budgets=tuple(budgets))
        if self.limit in ("seats", "max_hires"):
            offices = []
            for o in instance.offices:
                if o.name == self.where and self.limit == "seats" and o.seats is not None:
                    o = replace(o, seats=o.seats + int(self.step))
                elif (o.name == self.where and self.limit == "max_hires"
                      and o.max_hires_per_period is not None):
                    o = replace(o, max_hires_per_period=o.max_hires_per_period + int(self.step))
                offices.append(o)
            return instance.with_changes(offices=tuple(offices))
        if self.limit == "away_share":
            share = min(1.0, instance.policy.max_away_share + self.step)
            return instance.with_changes(policy=replace(instance.policy, max_away_share=share))
        if self.limit == "vacancies":
            skill, office = self.where.split(" at ", 1)
            vac = dict(instance.vacancies)
            vac[(office, skill)] = vac.get((office, skill), 0) + int(self.step)
            return instance.with_changes(vacancies=vac)
        if self.limit == "time_to_hire":
            # The step is negative (fewer periods); it shortens the time to hire.
            skills = tuple(replace(s, time_to_hire=max(0, s.time_to_hire - abs(int(self.step))))
                           if s.name == self.where else s for s in instance.skills)
            return instance.with_changes(skills=skills)
        raise ValueError(f"unknown limit {self.limit}")


@dataclass(frozen=True)
class MarginalValues:
    # MARGINAL_COLUMNS, best first (``marginal_values.csv``): re-solved limits ranked 1, 2, ...;
    # after them the limits not re-solved (or not verified), by their estimate, rank empty.
    table: pd.DataFrame
    candidates: tuple[Candidate, ...]
    results: tuple[PlanResult | None, ...]  # re-solve per candidate (None: not re-solved)


def binding_candidates(base: PlanResult, steps: Steps = Steps()) -> list[Candidate]:
    """The limits the base plan's tables show binding, one candidate per limit a planner can
    change (a year's budget, an office's seats or hiring slots, the away share, ...), every
    capped budget year while the plan has shortfall (or the objective prices it), and a first
    funded vacancy wherever one could help (:func:`first_vacancies`)."""
    instance = base.instance
    plan = base.plan
    if plan is None:
        return []
    uses = limit_use(instance, plan)
    count: dict[tuple[str, str], int] = defaultdict(int)
    if plan.weighted_shortfall > 1e-6 or base.options.mode == "weighted":
        # Money left over can still be less than the hire or move that would help: the
        # tables' test prices only the cheapest one (a sweep of random instances found 23
        # budgets in 250 whose raise lowered the least shortfall with the tables showing
        # slack).  So every capped budget is a candidate, with 0 binding rows where the
        # tables show slack, and the re-solve says what its raise buys.
        for u in uses:
            if u.limit in ("hiring_budget", "moves_budget"):
                count.setdefault((u.limit, u.where), 0)
    for u in uses:
        if u.binding:
            key = (u.limit, "policy" if u.limit == "away_share" else u.where)
            count[key] += 1
    short_skills = set(plan.coverage.loc[
        plan.coverage["shortfall_fte"] > 1e-6, "skill"].astype(str))
    out: list[Candidate] = []

    def unit(limit: str) -> str:
        return step_unit(limit, instance)

    for (limit, where), n in count.items():
        if limit in BUDGET_LIMITS:
            current = instance.budget_cap(where, limit.removesuffix("_budget")) or 0.0
            out.append(Candidate(limit, where, current, steps.budget, unit(limit), n))
        elif limit == "seats":
            out.append(Candidate(limit, where, float(instance.office(where).seats or 0),
                                 steps.seats, unit(limit), n))
        elif limit == "max_hires":
            out.append(Candidate(limit, where,
                                 float(instance.office(where).max_hires_per_period or 0),
                                 steps.max_hires, unit(limit), n))
        elif limit == "away_share" and instance.policy.max_away_share < 1.0:
            out.append(Candidate(limit, where, instance.policy.max_away_share,
                                 steps.away_share, unit(limit), n))
        elif limit == "vacancies":
            skill, office = where.split(" at ", 1)
            out.append(Candidate(limit, where, float(instance.vacancies.get((office, skill), 0)),
                                 steps.vacancies, unit(limit), n))
        elif limit == "time_to_hire" and where in short_skills:
            # It binds by definition before the first start; worth a re-solve only where
            # demand of that skill goes uncovered.
            out.append(Candidate(limit, where, float(instance.skill(where).time_to_hire),
                                 -steps.time_to_hire, unit(limit), n))
    taken = {(c.limit, c.where) for c in out}
    out.extend(c for c in first_vacancies(instance, steps, plan)
               if (c.limit, c.where) not in taken)
    return out


def first_vacancies(instance: Instance, steps: Steps = Steps(),
                    plan: Plan | None = None) -> list[Candidate]:
    """A first funded vacancy (``current`` 0, ``binding_rows`` 0) for every office and skill
    with none where a hire could help: the office may hire and some start the time to hire
    allows has demand a hire could cover (:meth:`Instance.hire_need`); given ``plan``, only
    where it leaves that skill short there from the time to hire on, or hires it there as
    new positions (a vacancy hire would save the salary).

    The tables show no vacancy row there, so nothing binds, yet a vacancy hire pays
    onboarding only, no new-position salary: a review found one vacancy buying 6.4 of
    weighted shortfall for 8,000 where the best binding limit's 100,000 bought 6.6.  Without
    the plan's filter the demo had 43 of them to re-solve, most of them buying nothing."""
    wanted: dict[tuple[str, str], tuple[int, float]] | None = None
    if plan is not None:
        # Each pair's new positions and the weighted shortfall a hire could reach there.
        ix = {name: t for t, name in enumerate(instance.period_names)}
        wanted = defaultdict(lambda: (0, 0.0))
        c, h = plan.coverage, plan.hires
        for o, k, t, short in zip(c["office"].astype(str), c["skill"].astype(str),
                                  c["period"].astype(str), c["weighted_shortfall"].astype(float),
                                  strict=True):
            if short > 1e-6 and ix.get(t, -1) >= instance.skill(k).time_to_hire:
                wanted[(o, k)] = (wanted[(o, k)][0], wanted[(o, k)][1] + short)
        for o, k, n, funding in zip(h["office"].astype(str), h["skill"].astype(str),
                                    h["count"].astype(int), h["funding"].astype(str),
                                    strict=True):
            if funding == "new":
                wanted[(o, k)] = (wanted[(o, k)][0] + n, wanted[(o, k)][1])
    out: list[Candidate] = []
    for office in instance.offices:
        if office.max_hires_per_period == 0:
            continue
        for skill in instance.skills:
            if instance.vacancies.get((office.name, skill.name), 0) > 0:
                continue  # funded: a vacancy row of the tables, binding when used up
            if wanted is not None and wanted.get((office.name, skill.name), (0, 0.0)) == (
                    0, 0.0):
                continue
            if any(instance.hire_need(office.name, skill.name, t) > 0
                   for t in range(len(instance.periods))):
                out.append(Candidate("vacancies", f"{skill.name} at {office.name}", 0.0,
                                     steps.vacancies, step_unit("vacancies", instance), 0))
    if wanted is None:
        return out
    # The pairs with most new positions (whose salary a vacancy saves), then most shortfall
    # within a hire's reach, at most FIRST_VACANCIES of them: a medium plan at staying put
    # had 84 pairs short, each a re-solve.
    def weight(candidate: Candidate) -> tuple[int, float]:
        skill, office = candidate.where.split(" at ", 1)
        return wanted[(office, skill)]

    return sorted(out, key=weight, reverse=True)[:FIRST_VACANCIES]


def resolve_choice(chosen: Sequence[Candidate], estimates: Sequence[float],
                   max_resolves: int | None) -> list[int]:
    """Which candidates to re-solve, best estimate first (no estimate last).

    With ``max_resolves`` N of 2 or more and no budget among the N best while some budget is
    a candidate, the N-th gives way to the best-ranked hiring budget year (a moves budget
    where no hiring budget is a candidate): what more money buys is asked first, and the
    demo's three best estimates had all been seats."""
    order = sorted(range(len(chosen)), key=lambda c: (
        (0, -estimates[c], c) if math.isfinite(estimates[c]) else (1, 0.0, c)))
    if max_resolves is None or max_resolves >= len(order):
        return order
    picked = order[:max_resolves]
    budgets = [c for c in order[max_resolves:] if chosen[c].limit in BUDGET_LIMITS]
    if max_resolves >= 2 and budgets and not any(
            chosen[c].limit in BUDGET_LIMITS for c in picked):
        hiring = [c for c in budgets if chosen[c].limit == "hiring_budget"]
        picked[-1] = (hiring or budgets)[0]
    return picked


def resolve_count(candidates: Sequence[Candidate], max_resolves: int | None) -> int:
    """How many of ``candidates`` :func:`marginal_values` re-solves (:func:`resolve_choice`)."""
    return len(candidates) if max_resolves is None else min(max_resolves, len(candidates))


def most_seconds(resolves: int, options: SolveOptions, workers: int) -> float:
    """The longest :func:`marginal_values` may spend solving with ``resolves`` re-solves,
    ``workers`` at a time: the estimates' LPs (the first, then the others together, each
    share at most :data:`ESTIMATE_SECONDS` or the time limit), then the re-solves in rounds of
    ``workers``, each solve stopped at ``options.time_limit_seconds``.  Building models and
    starting the pool's processes come on top (on the demo a build is 0.1 s)."""
    if resolves <= 0:
        return 0.0
    limit = options.time_limit_seconds
    rounds = math.ceil(resolves / max(1, min(workers, resolves)))
    return 2.0 * min(ESTIMATE_SECONDS, limit) + rounds * limit


def marginal_values(base: PlanResult, options: SolveOptions, steps: Steps = Steps(),
                    workers: int = 2, max_resolves: int | None = None,
                    candidates: Sequence[Candidate] | None = None) -> MarginalValues:
    """Rank the binding limits of ``base`` by what one more unit of each buys.

    ``max_resolves`` re-solves only that many, chosen by :func:`resolve_choice`: the best
    estimates, with a budget kept among them."""
    instance = base.instance
    chosen = list(candidates) if candidates is not None else binding_candidates(base, steps)
    estimates, how, no_lp = _estimates(base, options, chosen)
    resolve = resolve_choice(chosen, estimates, max_resolves)
    relaxed = [chosen[c].relax(instance) for c in resolve]
    solved = solve_many(relaxed, options, workers)
    results: list[PlanResult | None] = [None] * len(chosen)
    for c, solved_result in zip(resolve, solved, strict=True):
        results[c] = solved_result
    rows = []
    plan = base.plan
    for c, cand in enumerate(chosen):
        result = results[c]
        # An empty estimate says why in words: the CSV shows NaN as an empty cell.
        estimate = how[c] if math.isfinite(estimates[c]) else f"no estimate ({no_lp})"
        row: dict[str, object] = {
            "limit": cand.limit, "where": cand.where,
            "limit_in_words": limit_words(cand.limit, cand.where), "current": cand.current,
            "step": cand.step, "unit": cand.unit, "binding_rows": cand.binding_rows,
            "estimate_shortfall_reduction": estimates[c],
            "method": f"re-solve with the limit relaxed; {estimate}",
        }
        if result is None:
            # Nothing was solved, so nothing verified or failed: the row has its estimate only.
            row.update({"status": "not re-solved", "verified": None,
                        "method": f"{estimate}; not re-solved"})
        else:
            row.update({"status": result.status.value, "verified": result.verified,
                        "gap": _gap(base, result),
                        "shortfall_gap": _larger(base.solve.shortfall_gap,
                                                 result.solve.shortfall_gap)})
            if result.plan is not None and plan is not None and result.verified:
                reduction = plan.weighted_shortfall - result.plan.weighted_shortfall
                # Within the shortfall tolerance both hold the same least shortfall: no change.
                if abs(reduction) <= _shortfall_noise(plan.weighted_shortfall,
                                                      result.plan.weighted_shortfall, options):
                    reduction = 0.0
                row["shortfall_reduction"] = reduction
                row["cost_change"] = result.plan.total_cost - plan.total_cost
                # Shortfall first, the objective is the shortfall, its tolerance taken out.
                if (reduction < 0 if options.mode == "shortfall-first" else
                        _objective(result, options) > _objective(base, options) + 1e-9 * max(
                            1.0, abs(_objective(base, options)))):
                    # Relaxing a limit cannot raise the optimum: this is the solves' gap.
                    row["method"] = (f"{row['method']}; worse only within the two "
                                     "solves' gap")
                elif reduction < 0:
                    # Weighted mode prices shortfall: the relaxed plan may take more of it
                    # where that saves more money than shortfall_cost says it is worth.
                    row["method"] = (f"{row['method']}; more shortfall for less cost, a "
                                     "trade the weighted objective prefers")
        rows.append(row)
    table = pd.DataFrame(rows, columns=list(MARGINAL_COLUMNS))
    # Re-solved limits by what the re-solve removed, then the rest by their estimate (the
    # tail had kept the order the limits were found in: a 1.9 estimate above a 31.1).
    resolved = table["shortfall_reduction"].notna()
    if options.mode == "weighted":  # by what the objective gains, shortfall priced
        gain = (table["shortfall_reduction"] * options.shortfall_cost - table["cost_change"])
        by_gain = table[resolved].assign(_gain=gain[resolved]).sort_values(
            "_gain", ascending=False, kind="stable").drop(columns="_gain")
    else:
        by_gain = table[resolved].sort_values(["shortfall_reduction", "cost_change"],
                                              ascending=[False, True], kind="stable")
    table = pd.concat([
        by_gain,
        table[~resolved].sort_values("estimate_shortfall_reduction", ascending=False,
                                     na_position="last", kind="stable")])
    # Only what a re-solve measured is ranked; the rest follow by their estimate with no rank
    # (the demo's 4 re-solves had been followed by ranks 5 to 21, down to time-to-hire rows
    # with no value at all).  Whole numbers and None (object dtype): the CSV shows 1, 2 and
    # an empty cell, the console "-".
    unmeasured = len(table) - len(by_gain)
    table["rank"] = pd.Series([*range(1, len(by_gain) + 1), *[None] * unmeasured],
                              index=table.index, dtype=object)
    index = list(table.index)
    return MarginalValues(table.reset_index(drop=True), tuple(chosen[i] for i in index),
                          tuple(results[i] for i in index))


def _shortfall_noise(before: float, after: float, options: SolveOptions) -> float:
    """How far apart two plans' weighted shortfalls may be with the same least shortfall, in
    shortfall-first mode (0 otherwise): the cost stage may take up to
    :meth:`SolveOptions.held_shortfall`'s slack above it (1e-6 relative by default), and
    stage 1 may sit a feasibility tolerance (1e-6) below it.  A demo re-solve had read
    -6.98e-06 at a shortfall of 6.98 as "worse only within the two solves' gap"."""
    if options.mode != "shortfall-first":
        return 0.0
    most = max(before, after)
    return options.held_shortfall(most) - most + FEASIBILITY_TOLERANCE


def _gap(base: PlanResult, result: PlanResult) -> float | None:
    """The larger of the two solves' gaps: the difference is exact only when both are 0."""
    return _larger(base.solve.gap, result.solve.gap)


def _larger(a: float | None, b: float | None) -> float | None:
    gaps = [g for g in (a, b) if g is not None]
    return max(gaps) if gaps else None
