"""Readable console text for a plan result, an instance check and a verification."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
import pandas as pd

from rebalance.instance import Instance
from rebalance.planning import BUILD_STAGE, CAUTION, PlanResult
from rebalance.solve import StageResult, Status
from rebalance.verify import Violation

__all__ = [
    "MONEY_WORDS",
    "NEAR_ZERO",
    "format_check",
    "format_frame",
    "format_outcome",
    "format_summary",
    "format_violations",
    "is_gap",
    "is_money",
    "money_text",
    "number_text",
    "room_left",
]

STATUS_WORDS = {
    Status.OPTIMAL: "optimal (proven within the relative gap)",
    Status.FEASIBLE_WITH_GAP: "feasible, not proven optimal (stopped early)",
    Status.INFEASIBLE: "infeasible: the hard limits cannot all hold",
    Status.NO_PLAN_IN_TIME: "no plan found within the time limit",
    Status.ERROR: "solver error",
    Status.UNKNOWN: "unknown solver outcome",
}


# --------------------------------------------------------------------------------------------
# numbers as people write them: one rule for the console and the page (htmlparts imports it)

# Values this close to zero are rounding left over from the solver: shown as 0.
NEAR_ZERO = 1e-9
# Columns holding money (shown in whole units): names as in the CSV files.  Not "budget": a
# frontier's budget columns may hold factors of each year's cap (its budget_unit says which).
MONEY_WORDS = ("cost", "spend", "salary")


def is_gap(column: str) -> bool:
    """A column holding a relative gap (``gap``, ``stage_gap``, ``gap_at_stop``)."""
    name = column.lower()
    return name == "gap" or name.endswith("_gap") or name.startswith("gap_")


def is_money(column: str) -> bool:
    return any(word in column.lower() for word in MONEY_WORDS)


def money_text(value: float) -> str:
    """An amount of money in whole units with separators (cents are noise in a plan)."""
    return f"{float(value) + 0.0:,.0f}"


def number_text(value: float, column: str = "", *, digits: int = 3) -> str:
    """A number as a reader wants it: solver dust such as 4.4e-16 as 0, gaps as percentages,
    money and whole numbers without decimals (so also anything from 1,000 up, where decimals
    are noise), ``digits`` decimals otherwise.  ``column`` is the table column's name, which
    says whether it holds a gap or money."""
    v = float(value)
    if abs(v) < NEAR_ZERO:
        v = 0.0
    if is_gap(column):
        return f"{v:.2%}"
    v += 0.0  # no "-0" on show
    if is_money(column) or v.is_integer() or abs(v) >= 1000:
        return f"{v:,.0f}"
    return f"{v:,.{digits}f}"


def is_flag(value: object) -> bool:
    return isinstance(value, bool | np.bool_)


def is_missing(value: object) -> bool:
    """None, NaN or pandas' NA: a cell with no value."""
    return (value is None or value is pd.NA or value is pd.NaT
            or (isinstance(value, float | np.floating) and math.isnan(value)))


def _money(value: float, currency: str | None = None) -> str:
    return money_text(value) + (f" {currency}" if currency else "")


def _table(headers: Sequence[str], rows: Sequence[Sequence[object]]) -> list[str]:
    cells = [[str(h) for h in headers]] + [[str(c) for c in r] for r in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(headers))]

    def line(r: Sequence[str]) -> str:
        return "  ".join(c.rjust(w) if i else c.ljust(w)
                         for i, (c, w) in enumerate(zip(r, widths, strict=True)))

    return [line(cells[0]), "  ".join("-" * w for w in widths)] + [line(r) for r in cells[1:]]


def counted(number: int, noun: str) -> str:
    """``number`` with ``noun``, plural unless one (``1 period``, ``3 periods``)."""
    return f"{number:,} {noun}" + ("" if number == 1 else "s")


def format_check(instance: Instance) -> str:
    periods = instance.periods
    span = periods[0].name if len(periods) == 1 else f"{periods[0].name} to {periods[-1].name}"
    lines = [
        f"Instance {instance.name}: valid",
        f"  {counted(len(instance.offices), 'office')} in "
        f"{counted(len({o.location for o in instance.offices}), 'location')}, "
        f"{counted(len(instance.skills), 'skill')}, {len(instance.staff):,} staff, "
        f"{counted(len(periods), 'period')} ({span}), "
        f"{counted(len(instance.demand), 'demand row')} "
        f"({sum(d.fte for d in instance.demand):,.1f} FTE-periods)",
    ]
    lines += [f"  warning: {w}" for w in instance.warnings]
    return "\n".join(lines)


def format_summary(result: PlanResult) -> str:
    lines = _outcome_lines(result)
    plan = result.plan
    money = result.instance.money
    if plan is not None:
        demand = float(plan.coverage["demand_fte"].sum())
        lines += [
            "",
            f"  weighted shortfall   {plan.weighted_shortfall:,.3f} FTE-periods "
            f"({plan.shortfall_fte:,.3f} unweighted, {plan.shortfall_fte / demand:.1%} of "
            f"{demand:,.1f} demanded)" if demand else "  no demand",
            f"  total cost           {money.amount(money_text(plan.total_cost))}",
            f"  hires                {plan.hires_count()}",
            f"  detail periods       {len(plan.details)} "
            f"({plan.details['person'].nunique()} people)",
            f"  reassignments        {len(plan.reassignments)}",
            "",
        ]
        costs = plan.costs.groupby(["year", "kind"])["cost"].sum().to_dict()
        rows = []
        for year in result.instance.years:
            budget = result.instance.budget(year)

            def spent(*kinds: str, year: str = year) -> float:
                return sum(float(costs.get((year, k), 0.0)) for k in kinds)

            hiring = spent("onboarding", "new_position_salary")
            moves = spent("detail", "relocation")
            cap_h = "no cap" if budget is None or budget.hiring is None else money_text(
                budget.hiring)
            cap_m = "no cap" if budget is None or budget.moves is None else money_text(
                budget.moves)
            rows.append((year, money_text(hiring), cap_h, money_text(moves), cap_m))
        lines += ["  " + x for x in _table(
            ("year", *(money.header(h) for h in ("hiring spend", "hiring cap", "moves spend",
                                                  "moves cap"))), rows)]
        short = (plan.coverage[plan.coverage["shortfall_fte"] > 1e-6]
                 .groupby("office")["shortfall_fte"].sum().sort_values(ascending=False))
        if len(short):
            lines += ["", "  shortfall by office (FTE-periods): " + ", ".join(
                f"{office} {value:.2f}" for office, value in short.items())]
        lines += ["", f"  independent verification: {_verdict(result)}"]
        lines += [f"    - {v}" for v in result.violations[:20]]
    lines += ["", "  Caution: " + CAUTION]
    return "\n".join(lines)


def format_outcome(result: PlanResult) -> str:
    """How the solve ended (status, model, each stage and what it leaves open) and whether
    the plan passed verification: the head of :func:`format_summary`, for commands that
    print their own tables of the plan."""
    lines = _outcome_lines(result)
    if result.plan is not None:
        lines.append(f"  independent verification: {_verdict(result)}")
    return "\n".join(lines)


def _verdict(result: PlanResult) -> str:
    return "passed" if result.verified else f"FAILED ({len(result.violations)} problems)"


def _outcome_lines(result: PlanResult) -> list[str]:
    s = result.solve
    currency = result.instance.money.currency
    lines = [f"Plan for {result.instance.name}: {STATUS_WORDS[result.status]}"]
    if [stage.name for stage in s.stages] == [BUILD_STAGE]:
        # Cut short while building: no model, so no model size and no stage to show.
        return [*lines, f"  {s.stages[0].solver_words}"]
    gap = s.gap
    lines.append(f"  solver {s.solver_version}; model {result.num_cols:,} columns "
                 f"({result.num_integer:,} integer) x {result.num_rows:,} rows; "
                 f"build {result.build_seconds:.2f}s, solve {s.solve_seconds:.2f}s"
                 + (f", gap {gap:.4%}" if gap is not None else ""))
    for stage in s.stages:
        # The cost and weighted stages count money; the shortfall stage FTE-periods.
        unit = f" {currency}" if currency and stage.name in MONEY_STAGES else ""
        bound = "-" if stage.bound is None or not math.isfinite(stage.bound) else (
            f"{stage.bound:,.6g}{unit}")
        objective = "-" if stage.objective is None else f"{stage.objective:,.6g}{unit}"
        status = stage.status.value
        if stage.status is Status.OPTIMAL and stage.gap:
            # Optimal as asked: within the relative gap the run was given, not exactly.
            status += f" within the gap asked ({stage.gap:.2%} left)"
        lines.append(f"  stage {stage.name}: {status}, objective {objective}, "
                     f"bound {bound}, {stage.seconds:.2f}s ({stage.solver_words})")
        room = room_left(stage, currency)
        if room:
            lines.append(f"    not proven: {room}")
    if s.conflicts:
        lines.append("  limits in conflict:")
        lines += [f"    - {c}" for c in s.conflicts]
    return lines


# Stages whose objective is an amount of money.
MONEY_STAGES = ("cost", "weighted")
ROOM_WORDS = {
    "shortfall": "a plan may exist with up to {room} weighted FTE-periods less shortfall",
    "cost": "a plan with the same shortfall may cost up to {room} less",
    "weighted": "a plan may score up to {room} lower on cost plus shortfall cost",
}


def room_left(stage: StageResult, currency: str | None = None) -> str | None:
    """What a stage stopped early leaves open, in the stage's own units (money in
    ``currency`` where one is given)."""
    if (stage.status is not Status.FEASIBLE_WITH_GAP or stage.gap is None
            or stage.objective is None or stage.bound is None
            or stage.name not in ROOM_WORDS):
        return None
    if stage.bound <= 0.0 < stage.objective:
        # Only the floor (nothing costs less than 0): "may cost up to all of it less" reads
        # as a finding about the plan, when the stage simply had no time to bound it.
        return (f"no bound worked out in the {stage.seconds:.1f}s this stage had, beyond 0 "
                f"(gap {stage.gap:.2%})")
    room = stage.objective - stage.bound
    amount = _money(room, currency) if stage.name == "cost" else f"{room:,.3g}"
    return ROOM_WORDS[stage.name].format(room=amount) + f" (gap {stage.gap:.2%})"


def format_frame(frame: pd.DataFrame, currency: str | None = None) -> str:
    """A result table for the console, as a reader wants it (:func:`number_text`, two
    decimals to keep columns narrow), yes/no for flags and "-" where there is no value (pandas
    printed ``NaN``, ``True`` and ``2465500.0``).  Column names stay those of the CSV files;
    with a ``currency``, money columns' names say it (``total_cost (EUR)``)."""

    def cell(column: str, value: object) -> str:
        if is_missing(value):
            return "-"
        if is_flag(value):
            return "yes" if value else "no"
        if isinstance(value, int | float | np.integer | np.floating):
            return number_text(float(value), column, digits=2)
        return str(value)

    columns = [str(c) for c in frame.columns]
    rows = [[cell(c, v) for c, v in zip(columns, values, strict=True)]
            for values in frame.itertuples(index=False)]
    headers = [f"{c} ({currency})" if currency and is_money(c) else c for c in columns]
    return "\n".join(_table(headers, rows))


def format_violations(violations: Sequence[Violation]) -> str:
    if not violations:
        return "verification passed: every rule and total checks out"
    lines = [f"verification failed: {counted(len(violations), 'problem')}"]
    lines += [f"  - {v}" for v in violations]
    return "\n".join(lines)
