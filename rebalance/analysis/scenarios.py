"""Surge scenarios compared: solve the base and each scenario, tabulate the plans side by side.

Scenarios are read and applied by :mod:`rebalance.analysis.scenario_files`.  Every plan is
made by :func:`rebalance.planning.make_plan` and verified; the comparison only reads the
resulting plan tables.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import pandas as pd

from rebalance.analysis.change_reasons import BASE_AND_SCENARIO, change_reasons
from rebalance.analysis.limits import BUDGET_LIMITS
from rebalance.analysis.reasons import reasons
from rebalance.analysis.scenario_actions import (
    ACTION_COLUMNS,
    SUMMARY_COLUMNS,
    action_rows,
    action_summary,
    actions_table,
    change_rows,
    plan_actions,
)
from rebalance.analysis.scenario_files import Scenario, apply_scenario
from rebalance.analysis.solving import solve_many
from rebalance.analysis.start_plan import named_like
from rebalance.instance import Instance
from rebalance.plan import BUDGET_LINES, Plan
from rebalance.planning import PlanResult, plan_run_rate
from rebalance.solve import SolveOptions
from rebalance.verify import verify_plan

__all__ = [
    "ACTION_COLUMNS",
    "HELD_BACK_COLUMN",
    "LIMITS_SAID",
    "OFFICE_COLUMNS",
    "SCENARIO_COST_COLUMNS",
    "SUMMARY_COLUMNS",
    "Comparison",
    "changed_offices",
    "changed_periods",
    "compare_scenarios",
    "held_back_by",
    "plan_actions",
    "shortfall_by_cell",
]

OFFICE_COLUMNS = ("scenario", "office", "demand_fte_periods", "shortfall_fte_periods",
                  "weighted_shortfall")
# scenario_costs.csv's columns: each plan's costs.csv rows, named by scenario.
SCENARIO_COST_COLUMNS = ("scenario", "year", "kind", "cost")


@dataclass(frozen=True)
class Comparison:
    """Plans of the base and of each scenario, and the tables that compare them.

    ``table`` (``scenarios.csv``): one row per plan.  ``costs`` (``scenario_costs.csv``): cost
    by scenario, year and kind.  ``actions`` (``scenario_actions.csv``): one row per hire,
    detail or reassignment decision a scenario's plan changes against the base plan, with its
    reason.
    ``offices`` (``scenario_offices.csv``): demand and shortfall by scenario and office, to
    say where a surge lands and where it is left short.  ``reasons``: each scenario plan's
    ``reasons.csv`` table by scenario name (the base's and plan-less scenarios' left out),
    worked out once here for ``held_back_by`` and written as they are.
    """

    names: tuple[str, ...]
    results: tuple[PlanResult, ...]
    table: pd.DataFrame
    costs: pd.DataFrame
    actions: pd.DataFrame
    offices: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(
        columns=list(OFFICE_COLUMNS)))
    reasons: Mapping[str, pd.DataFrame] = field(default_factory=dict)


def _named_like_base(result: PlanResult, base: Plan | None) -> PlanResult:
    """``result`` with its plan's interchangeable people named as in the ``base`` plan where
    they do the same (:func:`~rebalance.analysis.start_plan.named_like`), verified again."""
    if result.plan is None or base is None:
        return result
    plan = named_like(result.instance, result.plan, base)
    if plan is result.plan:
        return result
    return replace(result, plan=plan, violations=tuple(verify_plan(result.instance, plan)))


def changed_periods(instance: Instance, scenario: Scenario) -> tuple[int, ...]:
    """Indices of the periods the scenario's demand changes touch (``None``: all); for a
    scenario with budget changes only, the periods of the years it changes."""
    every = range(len(instance.periods))
    if scenario.demand:
        return tuple(sorted({t for c in scenario.demand
                             for t in (every if c.periods is None else c.periods)}))
    years = {y for b in scenario.budget for y in (instance.years if b.years is None
                                                  else b.years)}
    return tuple(t for t in every if instance.periods[t].year in years)


def changed_offices(instance: Instance, scenario: Scenario) -> tuple[str, ...]:
    """The offices whose demand the scenario changes (``None`` in a change: every office), in
    the instance's order."""
    every = tuple(o.name for o in instance.offices)
    named = {o for c in scenario.demand for o in (every if c.offices is None else c.offices)}
    return tuple(o for o in every if o in named)


# How many limits a scenario's ``held_back_by`` names, most shortfall first.
LIMITS_SAID = 3
HELD_BACK_COLUMN = "held_back_by"


def shortfall_by_cell(base: Plan) -> dict[tuple[str, str, str], float]:
    """(office, skill, period) -> ``base``'s shortfall FTE there, summed from its coverage
    table once for every scenario's :func:`held_back_by`."""
    before: dict[tuple[str, str, str], float] = {}
    c = base.coverage
    for key, short in zip(zip(c["office"].astype(str), c["skill"].astype(str),
                              c["period"].astype(str), strict=True),
                          c["shortfall_fte"].astype(float), strict=True):
        before[key] = before.get(key, 0.0) + short
    return before


def held_back_by(variant: Instance, table: pd.DataFrame,
                 before: dict[tuple[str, str, str], float], offices: Sequence[str],
                 from_period: int = 0) -> str:
    """The limits the scenario's new shortfall at ``offices`` cites most (``reasons.csv``'s
    ``binding_limits`` of its plan), for ``scenarios.csv``: a planner's reading found the
    harbour surge's 19.9 FTE-periods left short explained only in the scenario's folder.

    A shortfall row weighs what it is above the base plan's shortfall in the same office,
    skill and period (``before``: :func:`shortfall_by_cell` of the base plan).  A limit is
    its kind and office (a budget: its kind, every year together), ranked by the weight of
    the rows citing it (ties by name); at most :data:`LIMITS_SAID` and any tied with the last
    of them, as
    ``kind|where,where|period,period|fte|of_fte`` joined by ``;`` (periods in horizon order;
    ``of_fte``: the new shortfall of all the rows weighed, so the words can tell a limit
    every row cites from one that leads, where every row citing the same limits had read as
    "mostly" the first by name).
    ``table``: the scenario plan's reasons table (:func:`~rebalance.analysis.reasons.reasons`,
    worked out once, as its folder's reasons.csv).  Rows before ``from_period`` (the first
    period the scenario changes) are not weighed: a shortfall the solve moved about there is
    no part of the scenario's (the harbour surge, from 2028, had named away share in
    2027-Q2)."""
    rows = table[(table["action"] == "shortfall") & table["office"].astype(str).isin(offices)]
    order = {p: t for t, p in enumerate(variant.period_names)}
    weight: dict[tuple[str, str], float] = {}
    total = 0.0
    wheres: dict[tuple[str, str], set[str]] = {}
    periods: dict[tuple[str, str], set[str]] = {}
    for o, k, t, short, cited in zip(rows["office"].astype(str), rows["skill"].astype(str),
                                     rows["first_period"].astype(str),
                                     rows["amount"].astype(float),
                                     rows["binding_limits"].astype(str), strict=True):
        new = short - before.get((o, k, t), 0.0)
        if new <= 1e-9 or order.get(t, from_period) < from_period:
            continue
        total += new
        groups: set[tuple[str, str]] = set()
        for limit in (x for x in cited.split(";") if x):
            kind, where, period = [*limit.split("|"), "", ""][:3]
            group = (kind, "" if kind in BUDGET_LIMITS else where)
            groups.add(group)
            wheres.setdefault(group, set()).add(where)
            if period:
                periods.setdefault(group, set()).add(period)
        # A row citing seats in five periods counts once for seats.
        for group in groups:
            weight[group] = weight.get(group, 0.0) + new
    # As written: sums of the same rows in another order differ in float dust, not in rank.
    written = {g: float(f"{w:.6g}") for g, w in weight.items()}
    ranked = sorted(weight, key=lambda g: (-written[g], g))
    # Limits tied with the last one said are said too: a cut by name would pick among equals.
    kept = ranked[:LIMITS_SAID]
    kept += [g for g in ranked[LIMITS_SAID:] if kept and written[g] == written[kept[-1]]]
    return ";".join(
        f"{kind}|{','.join(sorted(wheres[(kind, w)]))}|"
        f"{','.join(sorted(periods.get((kind, w), set()), key=lambda p: order.get(p, -1)))}|"
        f"{weight[(kind, w)]:.6g}|{total:.6g}" for kind, w in kept)


# The base's description in scenarios.csv, beside each scenario's own.
BASE_DESCRIPTION = "the instance as it is"


def _budget_changes(base: Instance, variant: Instance) -> dict[str, dict[str, float]]:
    """How much each cap of ``variant`` differs from ``base``'s, as applied (never below 0,
    only where a cap is set): cap name -> year -> money, years that did not change left out."""
    out: dict[str, dict[str, float]] = {}
    for cap_name, _ in BUDGET_LINES:
        for year in base.years:
            before, after = base.budget_cap(year, cap_name), variant.budget_cap(year, cap_name)
            if before is not None and after is not None and abs(after - before) > 1e-9:
                out.setdefault(cap_name, {})[year] = after - before
    return out


def _spent(plan: Plan | None, cap_name: str, years: Sequence[str]) -> float:
    """What ``plan`` spends under the ``cap_name`` caps of ``years`` (nan with no plan)."""
    if plan is None:
        return math.nan
    spent = plan.spent_by_cap()
    return sum((spent.get((year, cap_name), 0.0) for year in years), 0.0)


def _budget_columns(base: Instance, variant: Instance, base_plan: Plan | None,
                    plan: Plan | None) -> dict[str, Any]:
    """The scenario's budget changes for ``scenarios.csv``: for each cap, the money added
    (taken, below 0) over the years it changed, those years, and how much more the plan
    spends under that cap in those years than the base plan (a leader had read a surge's
    cost difference without the 150,000 of budget it was given)."""
    changes = _budget_changes(base, variant)
    row: dict[str, Any] = {}
    for cap_name, _ in BUDGET_LINES:
        years = list(changes.get(cap_name, {}))
        row[f"{cap_name}_budget_change"] = sum(changes.get(cap_name, {}).values(), 0.0)
        row[f"{cap_name}_budget_years"] = "; ".join(years)
        row[f"{cap_name}_spent_change"] = (
            _spent(plan, cap_name, years) - _spent(base_plan, cap_name, years) if years
            else 0.0)
    return row


def _office_rows(name: str, result: PlanResult, instance: Instance) -> list[tuple[Any, ...]]:
    """Demand and shortfall by office of one plan (``scenario_offices.csv``): from the plan's
    coverage table, or demand alone (shortfall blank) where there is no plan."""
    if result.plan is None:
        demand: dict[str, float] = {}
        for d in instance.demand:
            demand[d.office] = demand.get(d.office, 0.0) + d.fte
        return [(name, o, demand.get(o, 0.0), math.nan, math.nan)
                for o in (x.name for x in instance.offices)]
    columns = ["demand_fte", "shortfall_fte", "weighted_shortfall"]
    coverage = result.plan.coverage
    by = coverage.groupby(coverage["office"].astype(str))[columns].sum().to_dict("index")
    return [(name, o, *(float(by.get(o, {}).get(c, 0.0)) for c in columns))
            for o in (x.name for x in instance.offices)]


def _row(name: str, description: str, result: PlanResult, instance: Instance,
         differing: int | None) -> dict[str, Any]:
    plan = result.plan
    row: dict[str, Any] = {
        "scenario": name,
        "description": description,
        "status": result.status.value,
        "verified": result.verified,
        "gap": result.solve.gap,
        "shortfall_gap": result.solve.shortfall_gap,
        "demand_fte_periods": sum(d.fte for d in instance.demand),
    }
    if plan is None:
        return row
    row.update({
        "weighted_shortfall": plan.weighted_shortfall,
        "shortfall_fte_periods": plan.shortfall_fte,
        "total_cost": plan.total_cost,
        # What the plan's new positions cost in salaries every year after the horizon, not in
        # total_cost (new money within it): a surge's cost had been read without it.
        "salary_after_horizon_per_year": plan_run_rate(instance, plan).per_year,
        "hires": plan.hires_count(),
        "detail_periods": len(plan.details),
        "reassignments": len(plan.reassignments),
        "actions_differing": differing,
    })
    for kind, cost in plan.cost_by_kind().items():
        row[f"cost_{kind}"] = cost
    by_year = plan.costs.groupby(plan.costs["year"].astype(str))["cost"].sum()
    for year in instance.years:
        row[f"cost_{year}"] = float(by_year.get(year, 0.0))
    return row


def _shortfall_gap(*results: PlanResult) -> float | None:
    """The largest relative gap on weighted shortfall of ``results``' solves (the whole
    objective's gap in weighted mode), None where none is known."""
    gaps = [g for r in results if (g := r.solve.gap_on_shortfall) is not None]
    return max(gaps) if gaps else None


def compare_scenarios(instance: Instance, scenarios: Sequence[Scenario], options: SolveOptions,
                      workers: int = 2) -> Comparison:
    """Solve the base, then each scenario from the base plan, and tabulate them side by side.

    Each scenario starts from the base plan and keeps it wherever a difference would not
    pay (:mod:`rebalance.analysis.start_plan`), so what differs is what the scenario calls
    for, not the solver's path.  The base is solved first, alone; the scenarios then run
    ``workers`` at a time.  With no base plan, the scenarios are solved from scratch.
    """
    variants = [instance] + [apply_scenario(instance, s) for s in scenarios]
    names = ("base", *tuple(s.name for s in scenarios))
    if len(set(names)) != len(names):
        raise ValueError("scenario names must differ from each other and from 'base'")
    base = solve_many(variants[:1], options, 1, names=names[:1])[0]
    if options.progress is not None and len(variants) > 2 and workers > 1:
        options.progress(f"solving {len(variants) - 1} scenarios from the base plan, "
                         f"{min(workers, len(variants) - 1)} at a time (no progress lines "
                         "from them until all are done)")
    results = [base, *[_named_like_base(r, base.plan) for r in solve_many(
        variants[1:], options, workers, start=base.plan, names=names[1:])]]
    descriptions = {"base": BASE_DESCRIPTION, **{s.name: s.description for s in scenarios}}
    base_plan = results[0].plan
    base_short = shortfall_by_cell(base_plan) if base_plan is not None else {}
    changed = {s.name: changed_periods(instance, s) for s in scenarios}
    offices_of = {s.name: changed_offices(instance, s) for s in scenarios}
    rows = []
    cost_rows = []
    actions: list[tuple[Any, ...]] = []
    action_reasons: list[str] = []
    office_rows: list[tuple[Any, ...]] = []
    explained: dict[str, pd.DataFrame] = {}
    for name, variant, result in zip(names, variants, results, strict=True):
        # Against a base with no plan there is nothing to differ from.
        differing: int | None = 0 if base_plan is not None else None
        # Who moves for it and what holds its shortfall back (blank for the base).
        summary: dict[str, Any] = {}
        if result.plan is not None:
            if name != "base":
                # Once per scenario plan: its folder's reasons.csv is this table.
                why = reasons(variant, result.plan)
                explained[name] = why.table
            if name != "base" and base_plan is not None:
                # One row per changed decision (a rerouted detail is one): the count is the
                # table's rows for this scenario.
                found = action_rows(name, base_plan, result.plan, instance.period_names,
                                    changed[name])
                differing = len(found)
                actions += found
                # Why, as a re-plan's changes.csv says it: the base plan as the old plan, on
                # the scenario's data, from the first period (the scenario's solve only starts
                # from the base plan; it may change any period, changes_before counts those).
                action_reasons += change_reasons(
                    variant, base_plan, result.plan, change_rows(found), why,
                    BASE_AND_SCENARIO, shortfall_gap=_shortfall_gap(results[0], result))
                summary = action_summary(base_plan, result.plan, instance.period_names,
                                         changed[name], offices_of[name], found)
                summary[HELD_BACK_COLUMN] = held_back_by(
                    variant, explained[name], base_short, offices_of[name],
                    min(changed[name]) if changed[name] else 0)
            c = result.plan.costs
            for year, kind, cost in zip(c["year"].astype(str), c["kind"].astype(str),
                                        c["cost"].astype(float), strict=True):
                cost_rows.append((name, year, kind, cost))
        rows.append({**_row(name, descriptions[name], result, variant, differing),
                     **_budget_columns(instance, variant, base_plan, result.plan), **summary})
        office_rows += _office_rows(name, result, variant)
    table = pd.DataFrame(rows)
    costs = pd.DataFrame(cost_rows, columns=list(SCENARIO_COST_COLUMNS))
    actions_frame = actions_table(actions, names[1:], action_reasons)
    offices = pd.DataFrame(office_rows, columns=list(OFFICE_COLUMNS))
    return Comparison(names, tuple(results), table, costs, actions_frame, offices, explained)
