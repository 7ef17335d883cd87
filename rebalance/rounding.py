"""LP-guided rounding with repair: whole hire and detail counts for a large model, and the
neighbourhood of the LP point for a search near it.

On the agency benchmark the details-alone MIP finds no plan better than hires alone in its
time, while the LP with hire and detail counts continuous says where people should go.
Rounding those counts down keeps every budget, vacancy, hiring-rate, away-share, one-detail
and consecutive-detail row (their coefficients are all positive), but can break a seat row:
a person who stays home takes a seat there.  The repair walks the broken rows and moves one
person at a time, preferring the counts the LP wanted most, never breaking another row.
The work split and shortfall are then solved again as an LP (every whole number held),
which gives a plan of the whole model.
"""

from __future__ import annotations

import functools
import time
from collections.abc import Callable
from concurrent.futures import Future
from dataclasses import dataclass, replace

import numpy as np

from rebalance.backends import Backend, BackendOutcome, SolveOptions, Status, in_background
from rebalance.model import ADAPTING_FAMILIES, Model
from rebalance.numbers import progress_value
from rebalance.split import resplit, solve_relaxation

__all__ = [
    "AtHomeLinks",
    "EarlyLP",
    "Rounding",
    "RowActivity",
    "at_home_links",
    "early_lp",
    "held_lp_bounds",
    "movers_free",
    "neighbourhood",
    "plan_by_rounding",
    "repair_rows",
    "round_up",
]

TOLERANCE = 1e-6


@dataclass(frozen=True)
class Rounding:
    """What LP-guided rounding leaves: a plan, and the LP it rounded for a search near it."""

    plan: np.ndarray | None  # a whole plan better than the start, or None
    lp_x: np.ndarray | None  # the LP point (None: the LP did not finish)
    lp_row_dual: np.ndarray | None  # its row prices, for a bound (rebalance.bounds)
    lower: np.ndarray  # the LP's column bounds: held columns fixed where the start has them
    upper: np.ndarray
    # Seconds its LP ran (finished or not; None: no LP): a measure of what an LP with the
    # same columns held costs, for the cost stage's (rebalance.solve).
    lp_seconds: float | None = None


@dataclass(frozen=True)
class EarlyLP:
    """The rounding's LP, started before the plan it rounds is known (:func:`early_lp`)."""

    lower: np.ndarray  # the column bounds it was given
    upper: np.ndarray
    outcome: Future[BackendOutcome]


def early_lp(backend: Backend, model: Model, objective: np.ndarray, options: SolveOptions,
             time_limit: float, start: np.ndarray) -> EarlyLP:
    """The rounding's LP for ``start``, solved in a thread (the solver runs in a child
    process) while the caller goes on.  Its bounds hold no hire, so a plan that differs from
    ``start`` in hires only is rounded from the same LP: on agency the hires pass (10 s) and
    this LP (25-28 s) then run side by side instead of one after the other."""
    _, lower, upper = held_lp_bounds(model, start)
    solve = functools.partial(solve_relaxation, backend, model, objective, [], options,
                              time_limit, lower, upper, point_only=True, prices_wanted=True)
    return EarlyLP(lower, upper, in_background(solve))


def plan_by_rounding(backend: Backend, model: Model, objective: np.ndarray,
                     options: SolveOptions, deadline: float, start: np.ndarray,
                     say: Callable[[str], None], early: EarlyLP | None = None,
                     rounded_rows: bool = False, movers_free: bool = False) -> Rounding:
    """A plan with the hire and detail counts of an LP relaxation rounded and repaired.

    Hires and the detail columns that name their home office are continuous in the LP;
    every other integer column is held where ``start`` has it: homes, and unless
    ``movers_free`` the per-destination details of relocatable people (with those free
    agency's LP took 65 s instead of 25-28 s, and stage 1 ended at 7,237 instead of 6,889;
    see :func:`movers_free`).  Free, each moves with its person's at-home column
    (:func:`at_home_links`).  The plan is None when the LP does not finish, the repair fails, or
    the plan is no better than ``start``.  Not for a held shortfall (stage two): rounding
    down raises it.  ``early``, where given, is the LP started before: used if its bounds are
    those of ``start``.

    ``rounded_rows``: the LP keeps the limit rows rounded to whole people
    (``ROUNDED_FAMILIES``), which gives a point nearer whole numbers and a neighbourhood
    where the search does better (medium, after the office groups: 1,636-1,639 against
    1,648-1,651), but prices that bound less (1,502 against 1,540): for where the stage's
    bound comes from elsewhere.
    """
    integer = model.is_integer
    held_at = np.rint(start)
    free, lower, upper = held_lp_bounds(model, start, movers_free)
    if not free.any():
        return Rounding(None, None, None, lower, upper)
    if (early is not None and not rounded_rows and np.array_equal(early.lower, lower)
            and np.array_equal(early.upper, upper)):
        lp = early.outcome.result()
    else:
        if early is not None:  # not expected: the plan differs from the LP's in more than hires
            say("  rounding: the LP started early does not fit this plan; solving it again")
        lp = solve_relaxation(backend, model, objective, [], options,
                              options.shares.rounding_lp * (deadline - time.perf_counter()),
                              lower, upper, point_only=True, prices_wanted=not rounded_rows)
    if lp.status not in (Status.OPTIMAL, Status.APPROXIMATE) or lp.x is None:
        say(f"  rounding: LP not solved ({lp.words})")
        return Rounding(None, None, None, lower, upper, lp.seconds)
    say(f"  rounding: LP {progress_value(lp.objective)} in {lp.seconds:.1f}s")
    found = Rounding(None, lp.x, lp.row_dual, lower, upper, lp.seconds)
    rounded = np.where(integer, held_at, lp.x)
    rounded[free] = np.floor(lp.x[free] + TOLERANCE)
    ceiling = np.where(free, np.minimum(np.ceil(lp.x - TOLERANCE), upper), rounded)
    links = at_home_links(model, held_at)
    _follow_details(rounded, links)
    rows = RowActivity(model, rounded, _rows_checked(model), links.partner)
    if not repair_rows(rows, free, lp.x, lower, ceiling):
        say("  rounding: a row could not be repaired")
        return found
    round_up(rows, free, lp.x, ceiling)
    split = resplit(backend, model, rounded, objective, options,
                    max(deadline - time.perf_counter(), 1.0))
    if split is None or split.x is None:
        say("  rounding: no work split")
        return found
    score = float(objective @ split.x)
    say(f"  rounding: plan with {progress_value(score)}")
    return replace(found, plan=split.x) if score < float(objective @ start) - 1e-9 else found


# Relocatable people's details written per destination join the rounding's LP where enough
# of the people may relocate for the model's size.  Held, those people are never detailed in
# stage one; free, the LP is slower and its rounding can be worse.  Measured at 60 s, two
# threads (issue 3), stage 1's plan held -> free:
#   400 staff, 12 offices, 0.4M nonzeros, 41% relocatable: 160.0 -> 132.3; 32%: 153.2 -> 139.0
#   1,000 staff, 16 offices, 1.7M nonzeros, 41%: 483.6 -> 388.3
#   250 staff, 14 offices, 1.2M nonzeros, 100% (30 s): 458.0 -> 437.1
#   2,000 staff, 2.9M nonzeros, 18%: 3,173 -> 3,148 on one seed, 2,197 -> 2,462 on another
#     (the LP 4.1 s -> 18.5 s); medium, 5% and 2.5%: no better, or worse (2,283 -> 2,288)
#   agency (8M nonzeros, 5%): its LP 25-28 s -> 65 s, 6,889 -> 7,237.
MOVERS_FREE_MIN_SHARE = 0.1
MOVERS_FREE_MAX_NONZEROS = 500_000
# Above that size, a larger share; past it (agency) never, as the LP alone would take most
# of the stage.
MOVERS_FREE_MIN_SHARE_LARGER = 0.3
MOVERS_FREE_MAX_NONZEROS_LARGER = 3_000_000


def movers_free(model: Model) -> bool:
    """Whether the rounding's LP frees relocatable people's per-destination details."""
    nonzeros = model.matrix.nnz
    if nonzeros > MOVERS_FREE_MAX_NONZEROS_LARGER:
        return False
    share = relocatable_share(model)
    if nonzeros <= MOVERS_FREE_MAX_NONZEROS:
        return share >= MOVERS_FREE_MIN_SHARE
    return share >= MOVERS_FREE_MIN_SHARE_LARGER


def relocatable_share(model: Model) -> float:
    """The share of the model's people whose details are written per destination."""
    if "detail" not in model.blocks or not model.units:
        return 0.0
    block = model.blocks["detail"]
    movers = np.unique(block.keys["unit"][block.keys["home"] < 0])
    return sum(len(model.units[u]) for u in movers) / sum(len(m) for m in model.units)


def held_lp_bounds(model: Model, start: np.ndarray, movers_free: bool = False
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Which integer columns the rounding's LP sets free (hires, the details that name their
    home office, and with ``movers_free`` the others too), and its column bounds: every
    other integer column (homes, reassignments) held where ``start`` has it."""
    integer = model.is_integer
    free = np.zeros(model.num_cols, bool)
    if "detail" in model.blocks:
        block = model.blocks["detail"]
        free[block.start:block.stop] = movers_free | (block.keys["home"] >= 0)
    if "hire" in model.blocks:
        free[model.blocks["hire"].start:model.blocks["hire"].stop] = True
    free &= integer
    held = integer & ~free
    lower, upper = model.col_lower.copy(), model.col_upper.copy()
    lower[held] = upper[held] = np.rint(start)[held]
    return free, lower, upper


@dataclass(frozen=True)
class AtHomeLinks:
    """How relocatable people's details and at-home columns move together while their
    homes are held (:func:`at_home_links`)."""

    partner: np.ndarray  # per column, the at-home column a step on it moves back (-1: none)
    at_home: np.ndarray  # the at-home columns
    held_home: np.ndarray  # per at-home column, the people whose held home it is


def at_home_links(model: Model, plan: np.ndarray) -> AtHomeLinks:
    """The at-home column that each detail moves the other way, with homes held at ``plan``.

    A relocatable person's detail written per destination (``rebalance.relocation``) sits
    in an equality row with their at-home columns: one place a period.  With their home
    held, a detail step of +1 is a step of -1 at home, so rounding and repair move the two
    together."""
    partner = np.full(model.num_cols, -1)
    family = next((f for f in model.rows if f.name == "home_in_force"), None)
    if "at_home" not in model.blocks or family is None:
        return AtHomeLinks(partner, np.zeros(0, int), np.zeros(0))
    det, at = model.blocks["detail"], model.blocks["at_home"]
    # The home_in_force rows read x[u, a, t] <= (people of u whose home in force is a): the
    # right-hand side less the home columns' terms, at the held homes, is that count.
    rows = model.matrix[family.start:family.stop].tocsr()
    is_at = (rows.indices >= at.start) & (rows.indices < at.stop)
    at_in_row = rows.indices[is_at]
    assert at_in_row.size == rows.shape[0], "one at-home column per home_in_force row"
    held = np.where(model.is_integer, np.rint(plan), 0.0)
    held_home = np.zeros(at.stop - at.start)
    held_home[at_in_row - at.start] = model.row_upper[family.start:family.stop] - rows @ held
    keys = zip(at.keys["unit"].tolist(), at.keys["office"].tolist(), at.keys["period"].tolist(),
               strict=True)
    home_of = {(u, t): at.start + j for j, (u, _, t) in enumerate(keys)
               if held_home[j] >= 1 - TOLERANCE}
    for j in np.flatnonzero(det.keys["home"] < 0):
        key = (int(det.keys["unit"][j]), int(det.keys["period"][j]))
        partner[det.start + j] = home_of.get(key, -1)
    return AtHomeLinks(partner, np.arange(at.start, at.stop), held_home)


def _follow_details(x: np.ndarray, links: AtHomeLinks) -> None:
    """Set each at-home column to the people at that home who are not on detail at ``x``
    (in place): exact, where the LP's point (PDLP's, say) held the one-place rows only
    nearly, and a repair of those rows by whole steps could not."""
    if not links.at_home.size:
        return
    x[links.at_home] = links.held_home
    linked = np.flatnonzero(links.partner >= 0)
    np.subtract.at(x, links.partner[linked], x[linked])


def neighbourhood(x: np.ndarray, lower: np.ndarray, upper: np.ndarray, integer: np.ndarray,
                  plan: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
    """Column bounds around an LP point ``x``: every integer column between the floor and
    the ceiling of its LP value (within ``lower`` and ``upper``), widened to hold ``plan``.

    A branch and bound inside these bounds (a rounding neighbourhood search) is a much
    smaller MIP than the model; with ``plan`` inside, it starts from a plan and never ends
    worse than it.
    """
    lower, upper = lower.copy(), upper.copy()
    lower[integer] = np.maximum(lower[integer], np.floor(x[integer] + TOLERANCE))
    upper[integer] = np.minimum(upper[integer], np.ceil(x[integer] - TOLERANCE))
    if plan is not None:
        known = np.rint(plan[integer])
        lower[integer] = np.minimum(lower[integer], known)
        upper[integer] = np.maximum(upper[integer], known)
    return lower, upper


def _rows_checked(model: Model) -> np.ndarray:
    """Rows the repair must keep: all but those a work split and shortfall always satisfy
    (``ADAPTING_FAMILIES``)."""
    checked = np.ones(model.num_rows, bool)
    for family in model.rows:
        if family.name in ADAPTING_FAMILIES:
            checked[family.start:family.stop] = False
    return checked


class RowActivity:
    """The activity of every row at ``x``, kept live while columns of ``x`` move by whole
    steps; only ``checked`` rows count.  A step on a column with a ``partner`` (see
    :func:`at_home_links`) moves the partner the other way."""

    def __init__(self, model: Model, x: np.ndarray, checked: np.ndarray,
                 partner: np.ndarray | None = None) -> None:
        self.rows, self.cols = model.matrix.tocsr(), model.matrix.tocsc()
        self.lo, self.hi = model.row_lower, model.row_upper
        self.col_lower, self.col_upper = model.col_lower, model.col_upper
        self.x, self.checked = x, checked
        self.partner = np.full(model.num_cols, -1) if partner is None else partner
        self.activity = self.rows @ x

    def effect(self, j: int, step: float) -> tuple[np.ndarray, np.ndarray]:
        """The rows a step on column j changes, and by how much (its partner's share too)."""
        span = slice(self.cols.indptr[j], self.cols.indptr[j + 1])
        rows, change = self.cols.indices[span], step * self.cols.data[span]
        p = int(self.partner[j])
        if p >= 0:
            other = slice(self.cols.indptr[p], self.cols.indptr[p + 1])
            rows = np.concatenate([rows, self.cols.indices[other]])
            change = np.concatenate([change, -step * self.cols.data[other]])
            rows, where = np.unique(rows, return_inverse=True)
            change = np.bincount(where, weights=change, minlength=rows.size)
        return rows, change

    def outside(self, i: int) -> float:
        """How far row i is outside its bounds (+ above, - below, 0 inside)."""
        if self.activity[i] > self.hi[i] + TOLERANCE:
            return float(self.activity[i] - self.hi[i])
        if self.activity[i] < self.lo[i] - TOLERANCE:
            return float(self.activity[i] - self.lo[i])
        return 0.0

    def broken_rows(self) -> np.ndarray:
        return np.flatnonzero(self.checked & ((self.activity > self.hi + TOLERANCE)
                                              | (self.activity < self.lo - TOLERANCE)))

    def fits(self, j: int, step: float) -> bool:
        """Whether moving column j by ``step`` keeps every checked row that holds now (and
        its partner within its bounds)."""
        p = int(self.partner[j])
        if p >= 0 and not (self.col_lower[p] - TOLERANCE <= self.x[p] - step
                           <= self.col_upper[p] + TOLERANCE):
            return False
        for i, change in zip(*self.effect(j, step), strict=True):
            if self.checked[i] and self.outside(i) == 0.0:
                after = self.activity[i] + change
                if after > self.hi[i] + TOLERANCE or after < self.lo[i] - TOLERANCE:
                    return False
        return True

    def move(self, j: int, step: float) -> None:
        rows, change = self.effect(j, step)
        self.x[j] += step
        if self.partner[j] >= 0:
            self.x[self.partner[j]] -= step
        self.activity[rows] += change


def repair_rows(rows: RowActivity, movable: np.ndarray, wanted: np.ndarray,
                lowest: np.ndarray, highest: np.ndarray, max_moves: int = 1_000_000) -> bool:
    """Make every checked row hold by steps of one on ``movable`` columns.

    A step on a column goes toward the row's bounds, stays within ``[lowest, highest]``, and
    breaks no other checked row; among the columns that can step, the one whose LP value
    (``wanted``) is furthest in that direction goes first.  Columns outside ``movable`` keep
    their values (continuous ones at the LP's, which the checked rows take as given).
    Changes ``rows.x`` in place; True when every checked row holds.
    """
    x, csr = rows.x, rows.rows
    moves = 0
    # Only rows broken to begin with: a step never breaks a row that holds.
    for i in rows.broken_rows():
        span = slice(csr.indptr[i], csr.indptr[i + 1])
        columns = csr.indices[span]
        # What a step on each column does to this row, its partner's share included.
        coefficient = dict(zip(columns.tolist(), csr.data[span].tolist(), strict=True))
        effect = [(int(j), a - coefficient.get(int(rows.partner[j]), 0.0))
                  for j, a in coefficient.items()]
        while (excess := rows.outside(int(i))) != 0.0:
            options = []
            for j, a in effect:
                if a == 0.0:
                    continue
                step = -1.0 if (a > 0) == (excess > 0) else 1.0
                if movable[j] and lowest[j] <= x[j] + step <= highest[j]:
                    # Prefer the column whose LP value leans furthest toward the step.
                    options.append((-(wanted[j] - x[j]) * step, int(j), step))
            chosen = next(((j, step) for _, j, step in sorted(options) if rows.fits(j, step)),
                          None)
            if chosen is None or moves >= max_moves:
                return False
            rows.move(*chosen)
            moves += 1
    return True


def round_up(rows: RowActivity, movable: np.ndarray, wanted: np.ndarray,
             highest: np.ndarray) -> int:
    """Step ``movable`` columns up by one toward their LP value where no checked row breaks,
    most wanted (largest shortfall below ``wanted``) first: rounding down leaves budget and
    away-share room that the LP meant for these people.  Returns the number of steps."""
    x = rows.x
    candidates = np.flatnonzero(movable & (x + 1 <= highest + TOLERANCE))
    order = candidates[np.argsort(-(wanted[candidates] - x[candidates]), kind="stable")]
    steps = 0
    for j in order:
        if rows.fits(int(j), 1.0):
            rows.move(int(j), 1.0)
            steps += 1
    return steps
