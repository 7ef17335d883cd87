"""The fast estimate of marginal values, from a linear programme built from the model arrays.

The integer decisions are relaxed to within one unit of the plan's values (fixing them
outright would make every limit row, which holds integer columns only, a constant), and the
LP is solved as it is and again with each limit moved by its step.
:func:`rebalance.analysis.marginal.marginal_values` ranks the limits by it and chooses which
to re-solve."""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Sequence
from dataclasses import replace
from typing import TYPE_CHECKING

import numpy as np

from rebalance.backends import BackendOutcome, HighsBackend
from rebalance.instance import Instance
from rebalance.model import Model, build_model
from rebalance.planning import PlanResult
from rebalance.solve import SolveOptions, Status
from rebalance.split import solve_relaxation

if TYPE_CHECKING:
    from rebalance.analysis.marginal import Candidate

__all__ = ["lp_row_duals"]

# The estimate's first LP, and then its LPs with a limit moved, together: bounded, as every
# solve is, and never more than a re-solve gets (``marginal_values`` passes the run's own
# limit when it is shorter).
ESTIMATE_SECONDS = 60.0


def _box(model: Model, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Column bounds with the integer columns boxed to within one unit of ``x``."""
    integer = model.is_integer
    lower, upper = model.col_lower.copy(), model.col_upper.copy()
    lower[integer] = np.maximum(lower[integer], np.rint(x[integer]) - 1.0)
    upper[integer] = np.minimum(upper[integer], np.rint(x[integer]) + 1.0)
    return lower, upper


def _boxed_lp(model: Model, objective: np.ndarray, lower: np.ndarray, upper: np.ndarray,
              time_limit: float) -> BackendOutcome:
    # The rows in whole people left free: their prices belong to the limits they round.
    return solve_relaxation(HighsBackend(), model, objective, [], SolveOptions(), time_limit,
                            lower, upper, prices_wanted=True)


def lp_row_duals(model: Model, x: np.ndarray, objective: np.ndarray,
                 time_limit: float = ESTIMATE_SECONDS) -> np.ndarray | None:
    """Row duals of the LP with integer columns boxed to within one unit of ``x``.

    Solved by :class:`~rebalance.backends.HighsBackend` within ``time_limit`` seconds.
    HiGHS's row dual is the change of the objective per unit increase of the row's active
    bound.  None when the LP is not solved to optimality in time.
    """
    out = _boxed_lp(model, objective, *_box(model, x), time_limit)
    return out.row_dual if out.status is Status.OPTIMAL else None


def _rows_of(model: Model, candidate: Candidate, instance: Instance) -> list[tuple[int, float]]:
    """Model rows of a candidate with the change of each row's upper bound when relaxed."""
    out: list[tuple[int, float]] = []
    for family in model.rows:
        for i, label in enumerate(family.labels):
            row = family.start + i
            if candidate.limit == "hiring_budget" and family.name == "hiring_budget":
                if label == f"hiring budget {candidate.where}":
                    out.append((row, candidate.step))
            elif candidate.limit == "moves_budget" and family.name == "moves_budget":
                if label == f"moves budget {candidate.where}":
                    out.append((row, candidate.step))
            elif candidate.limit == family.name and family.name in ("seats", "max_hires"):
                if label.startswith(f"{candidate.where} in "):
                    out.append((row, candidate.step))
            elif candidate.limit == "away_share" and family.name == "away_share":
                share = instance.policy.max_away_share
                # The bound is share x heads at home: it moves by step x heads.
                if share > 0:
                    out.append((row, candidate.step * model.row_upper[row] / share))
            elif (candidate.limit == "vacancies" and family.name == "vacancies"
                  and label == candidate.where):
                out.append((row, candidate.step))
    return out


# Limits the model writes into hire columns' upper bounds as well as into rows: an office
# and period with one possible start, or one vacancy-funded column, gets a bound, not a row.
BOUND_LIMITS = ("max_hires", "vacancies")
# Limits that change the hire columns themselves: those above, and a shorter time to hire,
# which opens columns for earlier starts.
COLUMN_LIMITS = (*BOUND_LIMITS, "time_to_hire")
HIRE_KEYS = ("office", "skill", "period", "new")


def _in_scope(model: Model, candidate: Candidate, instance: Instance) -> np.ndarray:
    """Mask over ``model``'s hire block: the columns whose upper bounds ``candidate`` sets
    (or, for a time to hire, whose existence)."""
    keys = {k: np.asarray(v, int) for k, v in model.blocks["hire"].keys.items()}
    offices = [o.name for o in instance.offices]
    skills = [s.name for s in instance.skills]
    if candidate.limit == "max_hires":
        return np.asarray(keys["office"] == offices.index(candidate.where), bool)
    if candidate.limit == "time_to_hire":
        return np.asarray(keys["skill"] == skills.index(candidate.where), bool)
    skill, office = candidate.where.split(" at ", 1)
    k = skills.index(skill)
    return np.asarray((keys["office"] == offices.index(office)) & (keys["skill"] == k)
                      & (keys["new"] == 0), bool)


def _columns_in(model: Model, other: Model) -> np.ndarray | None:
    """For each column of ``other`` (the model of a relaxed instance) the same column of
    ``model``, -1 where only ``other`` has it.  None where they differ beyond hire columns
    added, which is all the relaxations priced here can do to the columns."""
    if sum(len(block) for block in other.blocks.values()) != other.num_cols:
        return None
    out = np.full(other.num_cols, -1)
    for name, block in other.blocks.items():
        here = model.blocks.get(name)
        if here is None:
            return None
        if name == "hire":
            col_of = {tuple(int(here.keys[k][j]) for k in HIRE_KEYS): here.start + j
                      for j in range(len(here))}
            found = [col_of.get(tuple(int(block.keys[k][j]) for k in HIRE_KEYS), -1)
                     for j in range(len(block))]
            if sum(1 for col in found if col >= 0) != len(here):
                return None
            out[block.start:block.stop] = found
        elif len(here) == len(block):
            out[block.start:block.stop] = np.arange(here.start, here.stop)
        else:
            return None
    return out


def _relaxed_lp(model: Model, x: np.ndarray, candidate: Candidate, instance: Instance,
                built: Callable[[str], Model]) -> tuple[Model, np.ndarray, np.ndarray] | None:
    """The estimate's LP (:func:`lp_row_duals`) with ``candidate`` relaxed: the model and
    its column bounds, boxed around the plan.  None where it cannot be written.

    ``built(limit)`` is the model of the instance with every candidate of that limit relaxed
    at once, built once per limit: hire columns are per office (per skill for a time to
    hire), so each candidate takes its own columns' bounds from it and holds every other at
    this model's (the columns only another relaxation opens, at 0).  Budgets and seats move
    row bounds only."""
    if candidate.limit in ("hiring_budget", "moves_budget", "seats"):
        # A seat row left without columns is only the constant check; moved, it is moot too.
        row_upper = model.row_upper.copy()
        for r, d in _rows_of(model, candidate, instance):
            row_upper[r] += d
        return (replace(model, row_upper=row_upper), *_box(model, x))
    if candidate.limit not in (*COLUMN_LIMITS, "away_share"):
        return None
    other = built(candidate.limit)
    cols = _columns_in(model, other)
    if cols is None:
        return None
    known = cols >= 0
    lower, upper = _box(other, np.where(known, x[np.maximum(cols, 0)], 0.0))
    if candidate.limit == "away_share":
        return other, lower, upper  # the share is in the matrix too: the model as built
    hire = other.blocks["hire"]
    outside = np.zeros(other.num_cols, bool)
    outside[hire.start:hire.stop] = ~_in_scope(other, candidate, instance)
    here_lower, here_upper = _box(model, x)
    held = outside & known
    lower[held], upper[held] = here_lower[cols[held]], here_upper[cols[held]]
    lower[outside & ~known] = upper[outside & ~known] = 0.0
    # Rows this model has keep its bounds, the candidate's moved; a row only ``other`` has
    # holds columns at 0 or rows those columns' own bounds already keep.
    row_of = {(f.name, label): f.start + i for f in model.rows
              for i, label in enumerate(f.labels)}
    moved = dict(_rows_of(model, candidate, instance))
    row_upper = other.row_upper.copy()
    for f in other.rows:
        for i, label in enumerate(f.labels):
            same = row_of.get((f.name, label))
            if same is not None:
                row_upper[f.start + i] = model.row_upper[same] + moved.get(same, 0.0)
    return replace(other, row_upper=row_upper), lower, upper


def _bound_change(model: Model, duals: np.ndarray, objective_of: Callable[[Model], np.ndarray],
                  candidate: Candidate, instance: Instance, x: np.ndarray,
                  other: Model) -> float:
    """First-order objective change at the LP's prices from the hire columns' upper bounds
    that relaxing ``candidate`` raises (within the one-unit box of :func:`lp_row_duals`) or
    opens (a column the relaxed model ``other`` has and this one lacks, boxed to [0, 1] at
    0).  ``other`` may relax other candidates of the same limit too: only this candidate's
    columns are counted."""
    # Prices of the relaxed model's rows: this model's, by label; a row only it has (a new
    # max_hires row, say) is slack at the plan, where the new columns are 0, so priced 0.
    row_of = {(f.name, label): f.start + i for f in model.rows
              for i, label in enumerate(f.labels)}
    prices = np.zeros(other.num_rows)
    for f in other.rows:
        for i, label in enumerate(f.labels):
            r = row_of.get((f.name, label))
            if r is not None:
                prices[f.start + i] = duals[r]
    reduced = objective_of(other) - other.matrix.T @ prices  # HiGHS: c - A^T y
    here, there = model.blocks["hire"], other.blocks["hire"]
    col_of = {tuple(int(here.keys[k][j]) for k in HIRE_KEYS): here.start + j
              for j in range(len(here))}
    scope = _in_scope(other, candidate, instance)
    change = 0.0
    for j in np.flatnonzero(scope):
        col = col_of.get(tuple(int(there.keys[k][j]) for k in HIRE_KEYS))
        top = 1.0 if col is None else float(np.rint(x[col])) + 1.0
        before = 0.0 if col is None else min(float(model.col_upper[col]), top)
        raised = min(float(other.col_upper[there.start + j]), top) - before
        if raised > 0:
            # A negative reduced cost holds the column at its upper bound.
            change += min(float(reduced[there.start + j]), 0.0) * raised
    return change


ESTIMATE_BY_LP = "estimate from an LP re-solve"
ESTIMATE_BY_DUALS = "estimate from LP duals"


def _estimates(base: PlanResult, options: SolveOptions,
               chosen: Sequence[Candidate]) -> tuple[list[float], list[str], str]:
    """Each candidate's estimate in FTE-periods of shortfall (NaN: none), how it was found,
    and why there are none where the LP gave nothing.

    The estimate's LP (:func:`lp_row_duals`) is solved again with the limit moved by its
    step and the two optima differenced.  The LP's optimal value is convex in a row's bound,
    so the first-order estimate from its duals is never below that difference and is above
    it wherever the step passes the dual's range (or the dual returned is one of several):
    the demo's seats ran 2 to 8 times the measured values that way.  The duals remain the
    fallback where the re-solves' time runs out (best first by them)."""
    instance = base.instance
    estimates = [math.nan] * len(chosen)
    how = [""] * len(chosen)
    x = base.solve.x
    if x is None or not chosen:
        return estimates, how, "the plan's LP could not be built"
    model = build_model(instance)
    if model.num_cols != x.size:
        return estimates, how, "the plan's LP could not be built"

    def objective_of(m: Model) -> np.ndarray:
        return (m.shortfall_weight if options.mode == "shortfall-first"
                else m.cost + options.shortfall_cost * m.shortfall_weight)

    scale = 1.0 if options.mode == "shortfall-first" else options.shortfall_cost
    if scale <= 0:  # weighted with a free shortfall: no shortfall-equivalent exists
        return estimates, how, "shortfall_cost is 0, so shortfall has no price"
    seconds = min(ESTIMATE_SECONDS, options.time_limit_seconds)
    first = _boxed_lp(model, objective_of(model), *_box(model, x), seconds)
    if first.status is not Status.OPTIMAL or first.row_dual is None or first.objective is None:
        return estimates, how, "the LP was not solved to optimality in time"
    duals = first.row_dual
    cache: dict[str, Model] = {}

    def built(limit: str) -> Model:
        # One build per limit, every candidate of it relaxed: seconds apiece at agency
        # scale, where there are tens of such candidates.
        if limit not in cache:
            relaxed = instance
            for cand in chosen:
                if cand.limit == limit:
                    relaxed = cand.relax(relaxed)
            cache[limit] = build_model(relaxed)
        return cache[limit]

    # An estimate cannot lower the objective below 0, nor raise it (relaxing a limit never
    # hurts; the LPs' tolerances and the duals' extrapolation can say otherwise); a limit
    # with neither row nor bound in the model constrains nothing in it: 0.
    ceiling = _objective(base, options) / scale if base.plan else math.inf
    first_order: dict[int, float] = {}
    for c, cand in enumerate(chosen):
        moved = _rows_of(model, cand, instance)
        first_order[c] = (sum(duals[r] * d for r, d in moved) if moved
                          or cand.limit not in COLUMN_LIMITS else _bound_change(
                              model, duals, objective_of, cand, instance, x, built(cand.limit)))
    # The re-solves together get as long as the first LP could: best first by the duals, so
    # a deadline leaves the least promising limits with their first-order estimate.
    deadline = time.perf_counter() + seconds
    for c in sorted(first_order, key=lambda c: (first_order[c], c)):
        change, how[c] = first_order[c], f"{ESTIMATE_BY_DUALS} (no LP re-solve in time)"
        left = deadline - time.perf_counter()
        lp = _relaxed_lp(model, x, chosen[c], instance, built) if left > 0.1 else None
        if lp is None and left > 0.1:
            how[c] = f"{ESTIMATE_BY_DUALS} (its LP could not be written again)"
        elif lp is not None:
            out = _boxed_lp(lp[0], objective_of(lp[0]), lp[1], lp[2], left)
            if out.status is Status.OPTIMAL and out.objective is not None:
                change, how[c] = out.objective - first.objective, ESTIMATE_BY_LP
        estimates[c] = min(max(-change / scale, 0.0), ceiling) + 0.0  # no -0.0
    return estimates, how, ""


def _objective(result: PlanResult, options: SolveOptions) -> float:
    """What the solve minimised, from the plan's tables: the weighted shortfall first, or
    cost + shortfall_cost x weighted shortfall in weighted mode."""
    assert result.plan is not None
    if options.mode == "weighted":
        return result.plan.total_cost + options.shortfall_cost * result.plan.weighted_shortfall
    return result.plan.weighted_shortfall
