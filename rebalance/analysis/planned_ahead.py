"""What late notice cost: a re-plan against planning for the same data from the start.

A re-plan reacts at its period: the past is fixed as it happened and every change from then on
costs a disruption cost.  Planned ahead, the same data (the scenario's instance) are planned
afresh from the first period, nothing fixed and no disruption.  Every plan the re-plan can
make is one a fresh plan could make too (fixing the past and charging for changes only
restrict), so with both solved to optimality planning ahead is never worse on the
lexicographic objective: no more weighted shortfall, and where equal, no more new money.  The
difference is what reacting late cost; solves stopped at a gap can only say it to within their
gaps, which ``replan.csv`` keeps beside it.

The time asked for (``--time-limit``) is shared, not doubled: the re-plan keeps
:data:`REPLAN_SHARE` of it, planning ahead the rest.
"""

from __future__ import annotations

import math
from dataclasses import replace

import pandas as pd

from rebalance.analysis.replan import plan_measures  # one rule for both plans' figures
from rebalance.instance import Instance
from rebalance.planning import PlanResult, make_plan
from rebalance.solve import SolveOptions

__all__ = ["AHEAD_COLUMN", "GAP_MEASURES", "REPLAN_SHARE", "plan_ahead", "split_time",
           "with_planned_ahead"]

# replan.csv's column of the plan made ahead.  After ``difference``: the console, the page
# and the workbook set a row's old plan, new plan and difference side by side by position.
AHEAD_COLUMN = "planned_ahead"
# The re-plan's share of --time-limit: the larger, as it is the answer asked for; planning
# ahead is the yardstick beside it.
REPLAN_SHARE = 2.0 / 3.0
# Rows of each solve's stage gaps (relative, as the progress lines give them): the shortfall
# stage's, and the last stage's (least new money; a re-plan's with its disruption cost, or the
# one weighted stage).  Not "cost_..." rows: a row's name says money wherever "cost" is in it.
GAP_MEASURES = ("shortfall_gap", "new_money_gap")
# Rows that compare a plan with the old one: nothing to say for a plan made from the start.
AGAINST_OLD = ("changes", "work_split_changes", "disruption_cost")


def split_time(options: SolveOptions) -> tuple[SolveOptions, SolveOptions]:
    """``options`` for the re-plan and for planning ahead, sharing its time limit
    (:data:`REPLAN_SHARE` and the rest); everything else as given."""
    total = options.time_limit_seconds
    return (replace(options, time_limit_seconds=total * REPLAN_SHARE),
            replace(options, time_limit_seconds=total * (1.0 - REPLAN_SHARE)))


def plan_ahead(instance: Instance, options: SolveOptions) -> PlanResult:
    """``instance`` (the data the re-plan reads) planned from its first period: nothing
    fixed, no disruption cost, people pooled by their staff rows as a fresh plan is."""
    return make_plan(instance, options)


def _stage_gaps(result: PlanResult) -> tuple[float, float]:
    """The shortfall stage's gap and the last stage's (NaN where unknown or not run); in
    weighted mode the one stage's gap is both, as it weighs shortfall and money together."""
    def gap(value: float | None) -> float:
        return math.nan if value is None else float(value)

    stages = result.solve.stages
    shortfall = next((s.gap for s in stages if s.name in ("shortfall", "weighted")), None)
    last = stages[-1].gap if stages and stages[-1].name != "shortfall" else None
    return gap(shortfall), gap(last)


def with_planned_ahead(summary: pd.DataFrame, replanned: PlanResult,
                       ahead: PlanResult) -> pd.DataFrame:
    """``summary`` (``replan.csv``) with :data:`AHEAD_COLUMN`: the plan made ahead's figures
    (by the same measures as the new plan's; blank where there is none, and on the rows that
    compare with the old plan), and a row per stage gap (:data:`GAP_MEASURES`) for the new
    plan and the plan made ahead (the old plan had no solve here)."""
    out = summary.copy()
    figures = plan_measures(ahead.instance, ahead.plan) if ahead.plan is not None else {}
    out[AHEAD_COLUMN] = [math.nan if m in AGAINST_OLD else figures.get(str(m), math.nan)
                         for m in out["measure"]]
    new_gaps = _stage_gaps(replanned)
    ahead_gaps = _stage_gaps(ahead) if ahead.plan is not None else (math.nan, math.nan)
    gaps = pd.DataFrame({"measure": list(GAP_MEASURES), "old_plan": [math.nan] * 2,
                         "new_plan": list(new_gaps), "difference": [math.nan] * 2,
                         AHEAD_COLUMN: list(ahead_gaps)})
    return pd.concat([out, gaps], ignore_index=True)
