"""rebalance: from a forecast of work to a verified staffing plan."""

from rebalance.backends import TimeShares
from rebalance.instance import Instance
from rebalance.model import Model, build_model
from rebalance.plan import Plan, extract_plan, read_plan
from rebalance.planning import PlanResult, make_plan, options_from_instance, write_outputs
from rebalance.problems import Problem
from rebalance.readers import InstanceError, read_instance
from rebalance.solve import SolveOptions, SolveResult, Status, solve
from rebalance.verify import Violation, verify_folder, verify_plan

__all__ = [
    "Instance",
    "InstanceError",
    "Model",
    "Plan",
    "PlanResult",
    "Problem",
    "SolveOptions",
    "SolveResult",
    "Status",
    "TimeShares",
    "Violation",
    "build_model",
    "extract_plan",
    "make_plan",
    "options_from_instance",
    "read_instance",
    "read_plan",
    "solve",
    "verify_folder",
    "verify_plan",
    "write_outputs",
]
