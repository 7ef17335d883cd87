"""Fix a plan's whole-number decisions and solve the rest as an LP.

With people placed, moves made and hires counted, what is left (who works on which skill,
the shortfall, the cost-adjustment columns) is a linear programme that solves in seconds
even where the whole model takes minutes.  Both the final polish of a solve and the rounding
heuristic end here.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from rebalance.backends import Backend, BackendOutcome, SolveOptions, Status
from rebalance.model import Model
from rebalance.submodel import hold_apart

__all__ = ["relaxed", "resplit", "solve_relaxation"]


def relaxed(model: Model) -> Model:
    """The same model with every column continuous."""
    return replace(model, is_integer=np.zeros(model.num_cols, bool))


def solve_relaxation(backend: Backend, model: Model, objective: np.ndarray,
                     extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                     time_limit: float, lower: np.ndarray | None = None,
                     upper: np.ndarray | None = None) -> BackendOutcome:
    """The LP relaxation of ``model`` plus ``extra_rows``, within column bounds ``lower`` and
    ``upper`` where given, without progress lines (an LP is one step of something else)."""
    if lower is not None or upper is not None:
        model = replace(model, col_lower=model.col_lower if lower is None else lower,
                        col_upper=model.col_upper if upper is None else upper)
    return backend.run(relaxed(model), objective, extra_rows, replace(options, progress=None),
                       time_limit, None)


def resplit(backend: Backend, model: Model, plan: np.ndarray, objective: np.ndarray,
            options: SolveOptions, time_limit: float) -> BackendOutcome | None:
    """Hold every integer column at ``plan``'s value (rounded) and minimise ``objective``
    over the continuous ones.

    Returns the outcome with the integer columns exactly whole, or None when the LP is not
    solved to optimality in ``time_limit`` (infeasible, or out of time).
    """
    integer = model.is_integer
    whole = np.rint(plan[integer])
    lower, upper = model.col_lower.copy(), model.col_upper.copy()
    lower[integer] = upper[integer] = whole
    # The held columns are taken out first: on large, the LP with them (2.9M columns) ran
    # out of the benchmark's 12 GiB of address space in its solver process.
    part = hold_apart(model, lower, upper, [])
    if part is None:  # the held values break a row: let the solver say so
        lp = solve_relaxation(backend, model, objective, [], options, time_limit, lower, upper)
        x = lp.x
    else:
        lp = solve_relaxation(backend, part.model, part.objective(objective), [], options,
                              time_limit)
        x = None if lp.x is None else part.whole(lp.x)
    if lp.status is not Status.OPTIMAL or x is None:
        return None
    x = x.copy()
    x[integer] = whole  # the LP's values sit within its tolerance of these
    return replace(lp, x=x, objective=float(objective @ x), row_dual=None)
