"""LP-guided rounding with repair: whole detail counts for a large model without a search.

On the agency benchmark the details-alone MIP finds no plan better than hires alone in its
time, while the LP of the same pass (hires held, detail counts continuous) solves in under a
minute and says where people should go.  Rounding its detail counts down keeps every budget,
away-share, one-detail and consecutive-detail row (their detail coefficients are all
positive), but can break a seat row: a person who stays home takes a seat there.  The repair
walks the broken rows and moves one person at a time, preferring the counts the LP wanted
most, never breaking another row.  The work split and shortfall are then solved again as an
LP (every whole number held), which gives a plan of the whole model.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import replace

import numpy as np
import scipy.sparse as sp

from rebalance.backends import Backend, SolveOptions, Status
from rebalance.model import ADAPTING_FAMILIES, Model

__all__ = ["details_by_rounding", "repair_rows", "round_up"]

TOLERANCE = 1e-6
# Above this many detail columns the LP keeps only the DESTINATIONS most short destinations
# per person and period: agency (211k) solves its LP in 52 s whole (plan 7,702) or 15 s
# pruned (7,982); large's did not finish in 203 s whole.
PRUNE_ABOVE_DETAIL_COLUMNS = 300_000
DESTINATIONS = 10
LP_SHARE = 0.9  # of the pass's time for the LP; the work-split LP after it takes seconds


def details_by_rounding(backend: Backend, model: Model, objective: np.ndarray,
                        extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                        deadline: float, start: np.ndarray,
                        say: Callable[[str], None]) -> np.ndarray | None:
    """A plan with the detail counts of the LP relaxation rounded and repaired.

    Every integer column but the detail columns that name their home office is held where
    ``start`` has it: homes, hires, and the per-destination details of relocatable people
    (with those free the agency LP did not finish in 200 s, against 52 s held).  Returns the
    plan, or None when the LP does not finish, the repair fails, or the plan is no better
    than ``start``.
    """
    integer = model.is_integer
    held_at = np.rint(start)
    free = np.zeros(model.num_cols, bool)
    if "detail" in model.blocks:
        block = model.blocks["detail"]
        free[block.start:block.stop] = block.keys["home"] >= 0
        if len(block) > PRUNE_ABOVE_DETAIL_COLUMNS:
            free[block.start:block.stop] &= _most_needed(model, start, DESTINATIONS)
    free &= integer
    if not free.any():
        return None
    held = integer & ~free
    lower, upper = model.col_lower.copy(), model.col_upper.copy()
    lower[held] = upper[held] = held_at[held]
    relaxed = replace(model, col_lower=lower, col_upper=upper,
                      is_integer=np.zeros(model.num_cols, bool))
    budget = deadline - time.perf_counter()
    lp = backend.run(relaxed, objective, extra_rows, replace(options, progress=None),
                     LP_SHARE * budget, None)
    if lp.status is not Status.OPTIMAL or lp.x is None:
        say(f"  details by rounding: LP not solved ({lp.words})")
        return None
    say(f"  details by rounding: LP {lp.objective:.6g} in {lp.seconds:.1f}s")
    rounded = np.where(integer, held_at, lp.x)
    rounded[free] = np.floor(lp.x[free] + TOLERANCE)
    ceiling = np.where(free, np.minimum(np.ceil(lp.x - TOLERANCE), upper), rounded)
    stack = _with_extra_rows(model, extra_rows)
    checked = _rows_checked(stack)
    if not repair_rows(stack, rounded, free, lp.x, lower, ceiling, checked):
        say("  details by rounding: a row could not be repaired")
        return None
    round_up(stack, rounded, free, lp.x, ceiling, checked)
    lower[integer] = upper[integer] = rounded[integer]
    left = deadline - time.perf_counter()
    split = backend.run(replace(relaxed, col_lower=lower, col_upper=upper), objective,
                        extra_rows, replace(options, progress=None), max(left, 1.0), None)
    if split.status is not Status.OPTIMAL or split.x is None or split.objective is None:
        say(f"  details by rounding: no work split ({split.words})")
        return None
    x = split.x.copy()
    x[integer] = rounded[integer]
    score = float(objective @ x)
    say(f"  details by rounding: plan with {score:.6g}")
    return x if score < float(objective @ start) - 1e-9 else None


def _most_needed(model: Model, plan: np.ndarray, keep: int) -> np.ndarray:
    """Per detail column: whether its destination is among the ``keep`` most short (weighted
    shortfall in ``plan``, all skills) of the unit's destinations that period.

    A detail to an office that ``plan`` leaves fully covered can only help by freeing
    someone else; keeping the few most short destinations per person and period makes the LP
    several times smaller where 60 offices give most people dozens of destinations, at a
    price (agency, forced: 7,982 against 7,702 whole).
    """
    detail, short = model.blocks["detail"], model.blocks["shortfall"]
    size = [1 + int(max(detail.keys[key].max(initial=0), short.keys[key].max(initial=0)))
            for key in ("office", "period")]
    periods = size[1]
    need = np.zeros(size)
    weighted = (model.shortfall_weight * plan)[short.start:short.stop]
    np.add.at(need, (short.keys["office"], short.keys["period"]), weighted)
    score = need[detail.keys["office"], detail.keys["period"]]
    unit, period = detail.keys["unit"], detail.keys["period"]
    # Rank within each (unit, period), most needed first.
    order = np.lexsort((-score, period, unit))
    group = unit[order] * periods + period[order]
    starts = np.r_[0, np.flatnonzero(np.diff(group)) + 1]
    rank = np.arange(len(order)) - np.repeat(starts, np.diff(np.r_[starts, len(order)]))
    kept = np.zeros(len(detail), bool)
    kept[order] = (rank < keep) & (score[order] > TOLERANCE)
    return kept


def _with_extra_rows(model: Model, extra_rows: list[tuple[np.ndarray, float]]) -> Model:
    """The model with ``extra_rows`` (row, upper bound) appended, for row checks."""
    if not extra_rows:
        return model
    extra = sp.csr_matrix(np.vstack([r for r, _ in extra_rows]))
    return replace(model, matrix=sp.vstack([model.matrix, extra], format="csr"),
                   row_lower=np.concatenate([model.row_lower,
                                             np.full(len(extra_rows), -math.inf)]),
                   row_upper=np.concatenate([model.row_upper, [ub for _, ub in extra_rows]]),
                   rows=model.rows)


def _rows_checked(stack: Model) -> np.ndarray:
    """Rows the repair must keep: all but those a work split and shortfall always satisfy
    (``ADAPTING_FAMILIES``) — and extra rows too (a held shortfall or cost must hold)."""
    checked = np.ones(stack.num_rows, bool)
    for family in stack.rows:
        if family.name in ADAPTING_FAMILIES:
            checked[family.start:family.stop] = False
    return checked


def repair_rows(model: Model, x: np.ndarray, movable: np.ndarray, wanted: np.ndarray,
                lowest: np.ndarray, highest: np.ndarray, checked: np.ndarray,
                max_moves: int = 1_000_000) -> bool:
    """Make every ``checked`` row of ``x`` hold by steps of one on ``movable`` columns.

    A step on a column goes toward the row's bounds, stays within ``[lowest, highest]``, and
    breaks no other checked row; among the columns that can step, the one whose LP value
    (``wanted``) is furthest in that direction goes first.  Columns outside ``movable`` keep
    their values (continuous ones at the LP's, which the checked rows take as given).
    Changes ``x`` in place; True when every checked row holds.
    """
    rows = model.matrix.tocsr()
    cols = model.matrix.tocsc()
    activity = rows @ x
    lo, hi = model.row_lower, model.row_upper
    keeps_the_rest = _step_check(cols, activity, lo, hi, checked)

    def broken(i: int) -> float:
        """How far row i is outside its bounds (+ above, - below, 0 inside)."""
        if activity[i] > hi[i] + TOLERANCE:
            return float(activity[i] - hi[i])
        if activity[i] < lo[i] - TOLERANCE:
            return float(activity[i] - lo[i])
        return 0.0

    # Only rows broken to begin with: a step never breaks a row that holds.
    outside = checked & ((activity > hi + TOLERANCE) | (activity < lo - TOLERANCE))
    moves = 0
    for i in np.flatnonzero(outside):
        while (excess := broken(int(i))) != 0.0:
            span = slice(rows.indptr[i], rows.indptr[i + 1])
            options = []
            for j, a in zip(rows.indices[span], rows.data[span], strict=True):
                if not movable[j]:
                    continue
                step = -1.0 if (a > 0) == (excess > 0) else 1.0
                if not lowest[j] <= x[j] + step <= highest[j]:
                    continue
                # Prefer the column whose LP value leans furthest toward the step.
                options.append((-(wanted[j] - x[j]) * step, int(j), step))
            for _, j, step in sorted(options):
                if keeps_the_rest(j, step):
                    x[j] += step
                    span_j = slice(cols.indptr[j], cols.indptr[j + 1])
                    activity[cols.indices[span_j]] += step * cols.data[span_j]
                    moves += 1
                    break
            else:
                return False
            if moves >= max_moves:
                return False
    return True


def round_up(model: Model, x: np.ndarray, movable: np.ndarray, wanted: np.ndarray,
             highest: np.ndarray, checked: np.ndarray) -> int:
    """Step ``movable`` columns of ``x`` up by one toward their LP value where no checked row
    breaks, most wanted (largest shortfall of ``x`` below ``wanted``) first: rounding down
    leaves budget and away-share room that the LP meant for these people.  Returns the
    number of steps; changes ``x`` in place."""
    cols = model.matrix.tocsc()
    activity = model.matrix @ x
    fits = _step_check(cols, activity, model.row_lower, model.row_upper, checked)
    candidates = np.flatnonzero(movable & (x + 1 <= highest + TOLERANCE))
    order = candidates[np.argsort(-(wanted[candidates] - x[candidates]), kind="stable")]
    steps = 0
    for j in order:
        if fits(int(j), 1.0):
            x[j] += 1.0
            span = slice(cols.indptr[j], cols.indptr[j + 1])
            activity[cols.indices[span]] += cols.data[span]
            steps += 1
    return steps


def _step_check(cols: sp.csc_matrix, activity: np.ndarray, lo: np.ndarray, hi: np.ndarray,
                checked: np.ndarray) -> Callable[[int, float], bool]:
    """``fits(j, step)``: whether moving column j by ``step`` keeps every checked row that
    holds now within its bounds (``activity`` is read live)."""
    def fits(j: int, step: float) -> bool:
        span = slice(cols.indptr[j], cols.indptr[j + 1])
        for i, a in zip(cols.indices[span], cols.data[span], strict=True):
            if not checked[i] or not lo[i] - TOLERANCE <= activity[i] <= hi[i] + TOLERANCE:
                continue
            after = activity[i] + step * a
            if after > hi[i] + TOLERANCE or after < lo[i] - TOLERANCE:
                return False
        return True

    return fits
