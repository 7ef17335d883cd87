"""Fix a plan's whole-number decisions and solve the rest as an LP.

With people placed, moves made and hires counted, what is left (who works on which skill,
the shortfall, the cost-adjustment columns) is a linear programme that solves in seconds
even where the whole model takes minutes.  Both the final polish of a solve and the rounding
heuristic end here.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from rebalance.backends import Backend, BackendOutcome, HighsBackend, SolveOptions, Status
from rebalance.model import Model, without_rounded_rows
from rebalance.submodel import hold_apart

__all__ = ["lp_backends", "relaxed", "resplit", "run_within", "solve_relaxation"]


def relaxed(model: Model) -> Model:
    """The same model with every column continuous."""
    return replace(model, is_integer=np.zeros(model.num_cols, bool))


def solve_relaxation(backend: Backend, model: Model, objective: np.ndarray,
                     extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                     time_limit: float, lower: np.ndarray | None = None,
                     upper: np.ndarray | None = None, point_only: bool = False,
                     prices_wanted: bool = False) -> BackendOutcome:
    """The LP relaxation of ``model`` plus ``extra_rows``, within column bounds ``lower`` and
    ``upper`` where given, without progress lines (an LP is one step of something else).
    ``point_only``: its point and prices are all that is wanted (status ``APPROXIMATE``
    where that made it quicker; :attr:`~rebalance.backends.SolveOptions.point_only`).

    ``prices_wanted``: its row prices will price whole plans (a bound, a marginal value), so
    the rows rounded to whole people are left free (:func:`~rebalance.model.without_rounded_rows`):
    priced, they credit each relocatable person a lifted coefficient at every office it may
    move to (medium's bound from prices 1,540 -> 1,502)."""
    if prices_wanted:
        model = without_rounded_rows(model)
    if lower is not None or upper is not None:
        model = replace(model, col_lower=model.col_lower if lower is None else lower,
                        col_upper=model.col_upper if upper is None else upper)
    return backend.run(relaxed(model), objective, extra_rows,
                       replace(options, progress=None, point_only=point_only), time_limit, None)


def run_within(backend: Backend, model: Model, objective: np.ndarray,
               extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
               lower: np.ndarray, upper: np.ndarray, time_limit: float,
               start: np.ndarray | None = None) -> BackendOutcome:
    """``model`` solved within column bounds ``lower`` and ``upper``, the columns whose
    bounds meet taken out before the solver sees them (:func:`~rebalance.submodel.hold_apart`).
    The outcome is in the whole model's terms (its plan, objective and bound)."""
    part = hold_apart(model, lower, upper, extra_rows)
    if part is None:  # the held values break a row: let the solver say so on the whole model
        return backend.run(replace(model, col_lower=lower, col_upper=upper), objective,
                           extra_rows, options, time_limit, start)
    out = backend.run(part.model, part.objective(objective), part.extra_rows, options,
                      time_limit, None if start is None else part.part(start))
    if out.x is None:
        return out
    x = part.whole(out.x)
    return replace(out, x=x, objective=float(objective @ x), row_dual=None)


def lp_backends(backend: Backend) -> list[Backend]:
    """The backends to try, in turn, for an LP with the whole-number decisions held: the one
    asked for where it reruns cheaply, else HiGHS first, which takes the arrays as they are
    (CBC through PuLP writes the model out for every run, and its solution file holds 8
    significant digits, which priorities of 1e6 multiply), and the one asked for after it
    (HiGHS takes no cost of 1e20 or more)."""
    return [backend] if backend.reruns_cheaply else [HighsBackend(), backend]


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
    # Held apart: on large, the LP with every column (2.9M) ran out of the benchmark's
    # 12 GiB of address space in its solver process.
    lp = run_within(backend, relaxed(model), objective, [], replace(options, progress=None),
                    lower, upper, time_limit)
    if lp.status is not Status.OPTIMAL or lp.x is None:
        return None
    x = lp.x.copy()
    x[integer] = whole  # the LP's values sit within its tolerance of these
    return replace(lp, x=x, objective=float(objective @ x))
