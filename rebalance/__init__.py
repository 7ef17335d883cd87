"""rebalance: from a forecast of work to a verified staffing plan."""

from __future__ import annotations

import importlib
import importlib.util
from typing import TYPE_CHECKING, Any

# Where each name of the API lives: imported on first use (PEP 562), so that the command
# line's first lines run before pandas, pulp and highspy load (a Ctrl-C while they loaded
# had printed a traceback).
_WHERE = {
    "TimeShares": "rebalance.backends", "Instance": "rebalance.instance",
    "Model": "rebalance.model", "build_model": "rebalance.model",
    "Plan": "rebalance.plan", "extract_plan": "rebalance.plan", "read_plan": "rebalance.plan",
    "PlanResult": "rebalance.planning", "make_plan": "rebalance.planning",
    "options_from_instance": "rebalance.planning", "write_outputs": "rebalance.planning",
    "Problem": "rebalance.problems", "InstanceError": "rebalance.readers",
    "read_instance": "rebalance.readers", "SolveOptions": "rebalance.solve",
    "SolveResult": "rebalance.solve", "Status": "rebalance.solve", "solve": "rebalance.solve",
    "Violation": "rebalance.verify", "verify_folder": "rebalance.verify",
    "verify_plan": "rebalance.verify",
}
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


def __getattr__(name: str) -> Any:
    if name not in _WHERE:
        # A submodule (rebalance.readers), as an eager import had made every one loaded.
        if name.startswith("_") or importlib.util.find_spec(f"{__name__}.{name}") is None:
            raise AttributeError(f"module 'rebalance' has no attribute {name!r}")
        return importlib.import_module(f"{__name__}.{name}")
    value = getattr(importlib.import_module(_WHERE[name]), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    """The API's names, for completion in a notebook, not this module's machinery."""
    return sorted(__all__)


if TYPE_CHECKING:
    from rebalance.backends import TimeShares
    from rebalance.instance import Instance
    from rebalance.model import Model, build_model
    from rebalance.plan import Plan, extract_plan, read_plan
    from rebalance.planning import PlanResult, make_plan, options_from_instance, write_outputs
    from rebalance.problems import Problem
    from rebalance.readers import InstanceError, read_instance
    from rebalance.solve import SolveOptions, SolveResult, Status, solve
    from rebalance.verify import Violation, verify_folder, verify_plan
