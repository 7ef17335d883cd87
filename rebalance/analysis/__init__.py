"""Decision support on top of verified plans (issue 5): surge scenarios, minimal-change
re-planning, the budget frontier, marginal values of limits, and reasons for each action.

Each analysis is a pure function of an instance (and options, and sometimes an earlier plan)
returning frozen dataclasses holding DataFrames; nothing here prints or writes files.
"""

from rebalance.analysis.frontier import BudgetGrid, Frontier, budget_frontier, parse_grid
from rebalance.analysis.limits import LimitUse, limit_use
from rebalance.analysis.replan import DisruptionCosts, Replan, ReplanError, replan
from rebalance.analysis.scenario_files import (
    Scenario,
    ScenarioError,
    apply_scenario,
    read_scenario,
)
from rebalance.analysis.scenarios import Comparison, compare_scenarios

__all__ = [
    "BudgetGrid",
    "Comparison",
    "DisruptionCosts",
    "Frontier",
    "LimitUse",
    "Replan",
    "ReplanError",
    "Scenario",
    "ScenarioError",
    "apply_scenario",
    "budget_frontier",
    "compare_scenarios",
    "limit_use",
    "parse_grid",
    "read_scenario",
    "replan",
]
