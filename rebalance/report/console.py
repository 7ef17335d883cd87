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
    "format_check",
    "format_frame",
    "format_outcome",
    "format_summary",
    "format_violations",
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


def _money(value: float) -> str:
    return f"{value:,.0f}"


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
    if plan is not None:
        demand = float(plan.coverage["demand_fte"].sum())
        lines += [
            "",
            f"  weighted shortfall   {plan.weighted_shortfall:,.3f} FTE-periods "
            f"({plan.shortfall_fte:,.3f} unweighted, {plan.shortfall_fte / demand:.1%} of "
            f"{demand:,.1f} demanded)" if demand else "  no demand",
            f"  total cost           {_money(plan.total_cost)}",
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
            cap_h = "no cap" if budget is None or budget.hiring is None else _money(
                budget.hiring)
            cap_m = "no cap" if budget is None or budget.moves is None else _money(budget.moves)
            rows.append((year, _money(hiring), cap_h, _money(moves), cap_m))
        lines += ["  " + x for x in _table(
            ("year", "hiring spend", "hiring cap", "moves spend", "moves cap"), rows)]
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
        bound = "-" if stage.bound is None or not math.isfinite(stage.bound) else (
            f"{stage.bound:,.6g}")
        objective = "-" if stage.objective is None else f"{stage.objective:,.6g}"
        status = stage.status.value
        if stage.status is Status.OPTIMAL and stage.gap:
            # Optimal as asked: within the relative gap the run was given, not exactly.
            status += f" within the gap asked ({stage.gap:.2%} left)"
        lines.append(f"  stage {stage.name}: {status}, objective {objective}, "
                     f"bound {bound}, {stage.seconds:.2f}s ({stage.solver_words})")
        room = room_left(stage)
        if room:
            lines.append(f"    not proven: {room}")
    if s.conflicts:
        lines.append("  limits in conflict:")
        lines += [f"    - {c}" for c in s.conflicts]
    return lines


ROOM_WORDS = {
    "shortfall": "a plan may exist with up to {room} weighted FTE-periods less shortfall",
    "cost": "a plan with the same shortfall may cost up to {room} less",
    "weighted": "a plan may score up to {room} lower on cost plus shortfall cost",
}


def room_left(stage: StageResult) -> str | None:
    """What a stage stopped early leaves open, in the stage's own units."""
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
    amount = _money(room) if stage.name == "cost" else f"{room:,.3g}"
    return ROOM_WORDS[stage.name].format(room=amount) + f" (gap {stage.gap:.2%})"


def format_frame(frame: pd.DataFrame) -> str:
    """A result table for the console, as a reader wants it: gaps as percentages, money in
    whole units with separators, other amounts to two decimals, whole counts without any,
    yes/no for flags and "-" where there is no value (pandas printed ``NaN``, ``True`` and
    ``2465500.0``).  Column names stay those of the CSV files."""

    def cell(column: str, value: object) -> str:
        if value is None or (isinstance(value, float) and math.isnan(value)):
            return "-"
        if isinstance(value, bool | np.bool_):
            return "yes" if value else "no"
        if isinstance(value, int | np.integer):
            return f"{int(value):,}"
        if isinstance(value, float | np.floating):
            number = float(value)
            if column == "gap":
                return f"{number:.2%}"
            if any(word in column for word in MONEY_WORDS):
                return f"{number:,.0f}"
            return f"{number:,.0f}" if number.is_integer() else f"{number:,.2f}"
        return str(value)

    rows = [[cell(str(c), v) for c, v in zip(frame.columns, values, strict=True)]
            for values in frame.itertuples(index=False)]
    return "\n".join(_table([str(c) for c in frame.columns], rows))


# Columns holding money (shown in whole units): names as in the CSV files.
MONEY_WORDS = ("cost", "spend", "salary")


def format_violations(violations: Sequence[Violation]) -> str:
    if not violations:
        return "verification passed: every rule and total checks out"
    lines = [f"verification failed: {counted(len(violations), 'problem')}"]
    lines += [f"  - {v}" for v in violations]
    return "\n".join(lines)
