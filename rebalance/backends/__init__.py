"""Solver backends: HiGHS through highspy and CBC through PuLP, behind one Protocol.

Status is mapped once, in each backend's module, from its solver's own words to
:class:`Status`.  A plan stopped by a time limit is ``feasible_with_gap``, never ``optimal``:
PuLP reports ``Optimal`` for a CBC run cut short, so its *solution* status is what counts.
Both backends take the model as arrays, stop at our own wall-clock deadline and report
progress while they search.
"""

from rebalance.backends.cbc import CbcBackend
from rebalance.backends.common import (
    Backend,
    BackendOutcome,
    SolveOptions,
    Status,
    TimeShares,
    relative_gap,
    search_line,
)
from rebalance.backends.highs import HighsBackend, silent_highs
from rebalance.backends.processes import (
    in_background,
    raise_if_stopped,
    run_in_child,
    stop_everything,
    stoppable,
    stopped,
)
from rebalance.backends.registry import BACKENDS
from rebalance.backends.rows import row_scale, stacked_rows

__all__ = [
    "BACKENDS",
    "Backend",
    "BackendOutcome",
    "CbcBackend",
    "HighsBackend",
    "SolveOptions",
    "Status",
    "TimeShares",
    "in_background",
    "raise_if_stopped",
    "relative_gap",
    "row_scale",
    "run_in_child",
    "search_line",
    "silent_highs",
    "stacked_rows",
    "stop_everything",
    "stoppable",
    "stopped",
]
