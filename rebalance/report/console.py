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
    "MEASURE_COLUMN",
    "MONEY_WORDS",
    "NEAR_ZERO",
    "cell_text",
    "format_check",
    "format_frame",
    "format_outcome",
    "format_summary",
    "format_violations",
    "fte_total_text",
    "is_gap",
    "is_money",
    "measure_names",
    "money_amount",
    "money_text",
    "number_text",
    "room_left",
    "seconds_text",
    "share_text",
    "stage_value",
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
    v = float(value)
    if not math.isfinite(v):
        return f"{v:,.0f}"
    # round() gives an int, which has no "-0" (-0.00017 of solver dust had shown as "-0").
    return f"{round(v):,d}"


def money_amount(value: float, currency: str | None = None) -> str:
    """:func:`money_text` with the ``currency`` after it, where there is one."""
    return money_text(value) + (f" {currency}" if currency else "")


# Totals of FTE-periods in headlines (console summary, page cards, workbook summary): one
# decimal everywhere, so 168.592 / 168.6 / 168.59 of one figure read as one figure.
FTE_TOTAL_DIGITS = 1


def fte_total_text(value: float) -> str:
    """A headline total of FTE-periods: :data:`FTE_TOTAL_DIGITS` decimals, no "-0"."""
    v = float(value)
    return f"{(0.0 if abs(v) < NEAR_ZERO else v) + 0.0:,.{FTE_TOTAL_DIGITS}f}"


def seconds_text(value: float) -> str:
    """Seconds with two decimals, rounded first to the three that summary.json stores: the
    console (which has the exact value) and the page (which reads the stored one) had shown
    0.03 and 0.04 for one build."""
    return f"{round(float(value), 3):,.2f}"


def share_text(part: float, whole: float) -> str:
    """``part`` as a percentage of ``whole``, one decimal where a whole percent would read
    as 100% or 0% without being it: 298,500 of 300,000 is 99.5%, not 100%."""
    if not whole:
        return "-"
    share = 100.0 * part / whole
    text = f"{share:.0f}%"
    if text == "100%" and share != 100.0:
        # Kept off 100, so 99.96% reads 99.9% and 100.04% reads 100.1%.
        return f"{min(share, 99.9) if share < 100.0 else max(share, 100.1):.1f}%"
    if text == "0%" and share > 0.0:
        return f"{share:.1f}%" if share >= 0.05 else "under 0.1%"
    return text


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
    if is_money(column) or v.is_integer() or abs(v) >= 1000:
        return money_text(v)
    text = f"{v + 0.0:,.{digits}f}"
    # No "-0.000": -0.00017 rounds to nothing, and a sign on nothing reads as a loss.
    return text[1:] if text.startswith("-") and not text.strip("-0.,") else text


def is_flag(value: object) -> bool:
    return isinstance(value, bool | np.bool_)


def is_missing(value: object) -> bool:
    """None, NaN or pandas' NA: a cell with no value."""
    return (value is None or value is pd.NA or value is pd.NaT
            or (isinstance(value, float | np.floating) and math.isnan(value)))


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
            f"  weighted shortfall   {fte_total_text(plan.weighted_shortfall)} FTE-periods "
            f"({fte_total_text(plan.shortfall_fte)} unweighted, "
            f"{plan.shortfall_fte / demand:.1%} of {fte_total_text(demand)} demanded)"
            if demand else "  no demand",
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
                f"{office} {fte_total_text(value)}" for office, value in short.items())]
        lines += ["", f"  independent verification: {_verdict(result)}"]
        lines += [f"    - {v}" for v in result.violations[:20]]
    lines += ["", "  Caution: " + CAUTION]
    return "\n".join(lines)


def format_outcome(result: PlanResult, *, replan: bool = False) -> str:
    """How the solve ended (status, model, each stage and what it leaves open) and whether
    the plan passed verification: the head of :func:`format_summary`, for commands that
    print their own tables of the plan.  ``replan``: the result re-plans an old plan, so
    its cost stage also counted the disruption cost of the changes."""
    lines = _outcome_lines(result, replan=replan)
    if result.plan is not None:
        lines.append(f"  independent verification: {_verdict(result)}")
    return "\n".join(lines)


def _verdict(result: PlanResult) -> str:
    return "passed" if result.verified else f"FAILED ({len(result.violations)} problems)"


def _outcome_lines(result: PlanResult, *, replan: bool = False) -> list[str]:
    s = result.solve
    currency = result.instance.money.currency
    lines = [f"Plan for {result.instance.name}: {STATUS_WORDS[result.status]}"]
    if [stage.name for stage in s.stages] == [BUILD_STAGE]:
        # Cut short while building: no model, so no model size and no stage to show.
        return [*lines, f"  {s.stages[0].solver_words}"]
    gap = s.gap
    lines.append(f"  solver {s.solver_version}; model {result.num_cols:,} columns "
                 f"({result.num_integer:,} integer) x {result.num_rows:,} rows; "
                 f"build {seconds_text(result.build_seconds)}s, "
                 f"solve {seconds_text(s.solve_seconds)}s"
                 + (f", gap {gap:.4%}" if gap is not None else ""))
    for stage in s.stages:
        bound = "-" if stage.bound is None or not math.isfinite(stage.bound) else (
            stage_value(stage.name, stage.bound, currency))
        objective = "-" if stage.objective is None else stage_value(
            stage.name, stage.objective, currency)
        status = stage.status.value
        if stage.status is Status.OPTIMAL and stage.gap:
            # Optimal as asked: within the relative gap the run was given, not exactly.
            status += f" within the gap asked ({stage.gap:.2%} left)"
        lines.append(f"  stage {stage.name}: {status}, objective {objective}, "
                     f"bound {bound}, {seconds_text(stage.seconds)}s ({stage.solver_words})")
        room = room_left(stage, currency, replan=replan)
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
# A re-plan's cost and weighted stages also priced the disruption of its changes, so what
# they leave open is on that sum, not on total cost alone.
REPLAN_ROOM_WORDS = {
    **ROOM_WORDS,
    "cost": "a plan with the same shortfall may come up to {room} lower on total cost plus "
            "disruption cost",
    "weighted": "a plan may score up to {room} lower on cost plus shortfall cost plus "
                "disruption cost",
}


def stage_value(stage: str, value: float, currency: str | None = None) -> str:
    """A stage's objective or bound in the stage's units: money (whole units, with the
    ``currency``) for the cost and weighted stages, FTE-periods (three decimals) for the
    shortfall stage."""
    if stage in MONEY_STAGES:
        return money_amount(value, currency)
    return number_text(value)


def room_left(stage: StageResult, currency: str | None = None, *,
              replan: bool = False) -> str | None:
    """What a stage stopped early leaves open, in the stage's own units (money in
    ``currency`` where one is given); ``replan``: the stage belongs to a re-plan, whose money
    stages counted disruption cost too."""
    if (stage.status is not Status.FEASIBLE_WITH_GAP or stage.gap is None
            or stage.objective is None or stage.bound is None
            or stage.name not in ROOM_WORDS):
        return None
    if stage.bound <= 0.0 < stage.objective:
        # Only the floor (nothing costs less than 0): "may cost up to all of it less" reads
        # as a finding about the plan, when the stage simply had no time to bound it.
        return (f"no bound worked out in the {stage.seconds:.1f}s this stage had, beyond 0 "
                f"(gap {stage.gap:.2%})")
    words = REPLAN_ROOM_WORDS if replan else ROOM_WORDS
    amount = stage_value(stage.name, stage.objective - stage.bound, currency)
    return words[stage.name].format(room=amount) + f" (gap {stage.gap:.2%})"


# Tables of measures (replan.csv: one row per measure, columns old_plan, new_plan,
# difference) name what each row holds in this column: total_cost's row is money though no
# column's name says so.
MEASURE_COLUMN = "measure"


def measure_names(frame: pd.DataFrame) -> list[str] | None:
    """Each row's measure (``total_cost``, ``hires``) in a table of measures, else None."""
    if MEASURE_COLUMN not in frame.columns:
        return None
    return [str(v) for v in frame[MEASURE_COLUMN].tolist()]


def cell_text(value: float, column: str, measure: str | None = None,
              currency: str | None = None, *, digits: int = 3) -> str:
    """A table's number by :func:`number_text`, named by its row's ``measure`` where the
    table is one of measures; a money row's cells carry the ``currency``, as its column's
    name cannot."""
    if measure is None:
        return number_text(value, column, digits=digits)
    text = number_text(value, measure, digits=digits)
    return f"{text} {currency}" if currency and is_money(measure) else text


def format_frame(frame: pd.DataFrame, currency: str | None = None) -> str:
    """A result table for the console, as a reader wants it (:func:`number_text`, two
    decimals to keep columns narrow), yes/no for flags and "-" where there is no value (pandas
    printed ``NaN``, ``True`` and ``2465500.0``).  Column names stay those of the CSV files;
    with a ``currency``, money columns' names say it (``total_cost (EUR)``), and in a table of
    measures (:func:`measure_names`) money rows' cells do."""

    def cell(column: str, value: object, measure: str | None) -> str:
        if is_missing(value):
            return "-"
        if is_flag(value):
            return "yes" if value else "no"
        if isinstance(value, int | float | np.integer | np.floating):
            return cell_text(float(value), column, measure, currency, digits=2)
        return str(value)

    columns = [str(c) for c in frame.columns]
    named = measure_names(frame)
    measures: list[str | None] = [None] * len(frame) if named is None else [*named]
    rows = [[cell(c, v, m) for c, v in zip(columns, values, strict=True)]
            for values, m in zip(frame.itertuples(index=False), measures, strict=True)]
    headers = [f"{c} ({currency})" if currency and is_money(c) else c for c in columns]
    return "\n".join(_table(headers, rows))


def format_violations(violations: Sequence[Violation]) -> str:
    if not violations:
        return "verification passed: every rule and total checks out"
    lines = [f"verification failed: {counted(len(violations), 'problem')}"]
    lines += [f"  - {v}" for v in violations]
    return "\n".join(lines)
