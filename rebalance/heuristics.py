"""Plans for a stage before (and beside) branch and bound on the whole model: the plan that
moves and hires no one, a first plan from the LP relaxation and a rounding search near it, or
on a large model one kind of decision at a time, then a few offices at a time, and a cost
stage's start trimmed of what its held shortfall does not need.

Every search here runs on part of the model (a narrowed box, held columns), so whatever it
finds is a plan of the whole model; :mod:`rebalance.solve` decides which of them a stage runs
and keeps the best.
"""

from __future__ import annotations

import functools
import math
import time
from collections.abc import Callable
from concurrent.futures import Future
from dataclasses import dataclass, replace

import numpy as np

from rebalance import stage_bounds
from rebalance.backends import (
    Backend,
    BackendOutcome,
    SolveOptions,
    Status,
    in_background,
)
from rebalance.model import Model
from rebalance.numbers import progress_value
from rebalance.rounding import early_lp, movers_free, neighbourhood, plan_by_rounding
from rebalance.split import lp_backends, relaxed, resplit, run_within
from rebalance.stage_claims import higher_bound
from rebalance.whole_plans import decomposable

MIN_SEARCH_SECONDS = 1.0

# Above this many columns a first plan comes decision by decision instead of from the LP:
# the LP relaxation alone outlasts a stage's share there (medium, 104k columns: 81 s with
# interior point, over 120 s with simplex), while hires alone solve in seconds (issue 3).
LARGE_MODEL_COLUMNS = 30_000
# The same from this many columns where relocatable people's details are written per
# destination (past ten offices): there the LP relaxation by dual simplex is slow for its
# size (20,672 columns, 300 staff, 12 offices, 22% relocatable: not done in 14 s, and no
# plan in 60 s; 15,670 columns: none in 20 s), while the passes gave 214.4 and 115.7 in
# 30 s.  At 6,237 columns the LP path did better (58.8 against 63.3 in 30 s).
LARGE_MODEL_COLUMNS_WITH_MOVERS = 10_000
# Above this many nonzeros a large model with a plan already in hand gets no branch and bound
# on the whole model: HiGHS's presolve of agency (6.8M nonzeros) ran 170 s past the limit
# without one callback, while medium (0.8M) stopped on time (issue 3).
WHOLE_SEARCH_MAX_NONZEROS = 3_000_000

OFFICES_PER_GROUP = 4
# A group's search is small: it looks for its own best plan, not one within the run's gap
# (on medium, 1e-4 took stage 1's plan from 1,640.8 to 1,624.5 in 16 s; 1% to 1,630.5).
# 1e-3 rather than 1e-4: groups had spent most of their time closing the last 0.1-0.2%,
# and more groups in the same time did better (medium 1,622.2 -> 1,621.3 with 8 groups
# instead of 5; agency 6,955-6,961 -> 6,933.7 with 9 instead of 8).  The gap is of the
# whole model's shortfall, the held columns' share included (1.6 FTE-periods on medium).
GROUP_GAP = 1e-3
MIN_GROUP_SECONDS = 5.0
# The hires pass before the rounding is a stepping stone: the rounding's plan replaces it
# (agency 8,720 -> 7,376, large 19,783 -> 18,499), so it stops within this gap of its own
# bound.  On large it had its plan after 33 s and spent 82 s more on 1.21% -> 1.19%.
HIRES_FIRST_GAP = 0.02


def is_large(model: Model, backend: Backend) -> bool:
    """Whether ``model`` takes the large-model path (passes instead of the LP first)."""
    columns = (min(LARGE_MODEL_COLUMNS, LARGE_MODEL_COLUMNS_WITH_MOVERS)
               if decomposable(model) else LARGE_MODEL_COLUMNS)
    return model.num_cols > columns and backend.reruns_cheaply


def too_large_to_search(model: Model, backend: Backend) -> bool:
    """Whether ``model`` is past branch and bound on the whole of it: passes only."""
    return is_large(model, backend) and model.matrix.nnz > WHOLE_SEARCH_MAX_NONZEROS


def stay_put_plan(backend: Backend, model: Model, objective: np.ndarray,
                  options: SolveOptions, deadline: float, say: Callable[[str], None],
                  hint_split: BackendOutcome | None = None) -> np.ndarray | None:
    """The plan that keeps every whole-number decision at its least (nobody moved, nobody
    hired; a re-plan's fixed past kept), with the best work split, or the model's ``hint``
    (a re-plan's old plan) so completed where that is better: None where neither keeps
    every limit (seats over) or there is no time.  ``hint_split``: the hint so completed
    for ``objective`` already (:func:`hint_plan`), not worked out again."""
    candidates: list[tuple[str, np.ndarray | BackendOutcome]] = [
        ("staying put (no moves, no hires)", model.col_lower)]
    if model.hint is not None and model.hint.size == model.num_cols:
        # Said as such: replan.csv scores the old plan with its own work split, which can
        # leave more short (192.592 there beside 192.29 here had read as a contradiction).
        candidates.insert(0, (f"{model.hint_words}'s moves and hires with the work split "
                              "redone for these data (its own split may leave more short)",
                              _hint_held(model) if hint_split is None else hint_split))
    best: tuple[float, np.ndarray] | None = None
    for words, values in candidates:
        out = (values if isinstance(values, BackendOutcome)
               else work_split_for(backend, model, objective, options, deadline, values))
        if out is None or out.x is None or out.objective is None:
            continue
        say(f"  {words}: {progress_value(out.objective)}")
        if best is None or out.objective < best[0] - 1e-9:
            best = (out.objective, out.x)
    return None if best is None else best[1]


def hint_plan(backend: Backend, model: Model, objective: np.ndarray, options: SolveOptions,
              deadline: float) -> BackendOutcome | None:
    """The model's ``hint`` (a re-plan's old plan, a scenario's base plan) with the best
    work split for ``objective``; None where there is no hint, it breaks a limit, or there
    is no time."""
    if model.hint is None or model.hint.size != model.num_cols:
        return None
    out = work_split_for(backend, model, objective, options, deadline, _hint_held(model))
    return None if out is None or out.x is None or out.objective is None else out


def _hint_held(model: Model) -> np.ndarray:
    assert model.hint is not None
    return np.clip(np.rint(model.hint), model.col_lower, model.col_upper)


def work_split_for(backend: Backend, model: Model, objective: np.ndarray,
                   options: SolveOptions, deadline: float,
                   values: np.ndarray) -> BackendOutcome | None:
    """The best work split (an LP, :func:`~rebalance.split.resplit`) with every whole-number
    column held at ``values``; None where it keeps no limit or there is no time."""
    # Held apart, only the work split is left (an LP): CBC had been handed the whole model
    # (40 offices: PuLP's building and writing took the 1.9 s this step had, and the run
    # ended with no plan at all, exit 5).  Where a backend writes its model out for every run
    # (CBC through PuLP), HiGHS takes the LP's arrays instead: on a loaded machine CBC had
    # still not written it in its share, and a run that stays put keeps every limit.  The
    # backend asked for stays the fallback (HiGHS takes no cost of 1e20 or more).
    for lp_backend in lp_backends(backend):
        left = deadline - time.perf_counter()
        if left <= 0.05:
            break
        out = resplit(lp_backend, model, values, objective,
                      replace(options, heuristics=False), min(left, max(0.1 * left, 1.0)))
        if out is not None:
            return out
    return None


def first_plan_from_lp(backend: Backend, model: Model, objective: np.ndarray,
                       extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                       deadline: float, start: np.ndarray | None,
                       say: Callable[[str], None]) -> tuple[np.ndarray | None, float | None]:
    """The LP relaxation, then a rounding neighbourhood search (RENS) from it.

    RENS fixes every integer column to the floor or ceiling of its LP value and solves that
    much smaller MIP: the LP says where people and hires should go, the sub-MIP makes it
    whole.  Naive rounding alone leaves plans far from the bound.  Returns the better of the
    plan found and ``start``, and the LP bound.
    """
    budget = deadline - time.perf_counter()
    lp = backend.run(relaxed(model), objective, extra_rows, options, options.shares.lp * budget,
                     None)
    if lp.status is not Status.OPTIMAL or lp.x is None:
        why = "out of its time" if lp.status is Status.NO_PLAN_IN_TIME else lp.words
        say(f"  LP relaxation not solved ({why}); going straight to branch and bound")
        return start, None
    say(f"  LP relaxation {progress_value(lp.objective)} in {lp.seconds:.1f}s")
    # Widen the box to hold the previous plan too: never empty, and the search mixes what
    # the LP wants with what is known to work (stage two needs it).
    lower, upper = neighbourhood(lp.x, model.col_lower, model.col_upper, model.is_integer,
                                 start)
    left = deadline - time.perf_counter()
    narrowed = replace(model, col_lower=lower, col_upper=upper)
    # Its progress lines say whose they are, and show the LP's bound: the bound of the
    # narrowed model is no bound of the stage (on the demo's cost stage 2.07e6, where the
    # stage's is 1.63e6), and had read as the gap going backwards once the whole model's
    # search resumed.
    stage_bound = higher_bound(options.known_bound, lp.objective)
    rens = None if left < 2.0 else backend.run(
        narrowed, objective, extra_rows,
        _labelled(replace(options, known_bound=stage_bound), "rounding search", say),
        min(options.shares.rens * budget, 0.5 * left), start)
    if rens is not None and rens.x is not None and rens.objective is not None:
        say(f"  rounding search: plan with {progress_value(rens.objective)} in {rens.seconds:.1f}s")
        start = better_plan(objective, start, rens.x)
    return start, lp.objective


@dataclass(frozen=True)
class FirstPlan:
    """What :func:`first_plan_by_decision` found: a plan, and a bound where one came cheaply."""

    x: np.ndarray | None
    bound: float | None = None
    lp_seconds: float | None = None  # the rounding LP's (Rounding.lp_seconds)
    cost_bound: Future[stage_bounds.HeldCostBound | None] | None = None  # solve.CarriedOver's


def first_plan_by_decision(backend: Backend, model: Model, objective: np.ndarray,
                           extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                           deadline: float, say: Callable[[str], None],
                           start: np.ndarray | None = None,
                           cost_stage_deadline: float | None = None,
                           rounded_rows: bool = False) -> FirstPlan:
    """A plan for a large model, one kind of decision at a time, every other integer column
    held where the plan so far has it.

    First hires alone, from ``start`` or, without one, from every integer column at its
    lower bound (no moves, no hires: always a plan unless seats already conflict).  Then,
    outside stage two, the LP with hire and detail counts continuous is rounded and repaired
    (:func:`~rebalance.rounding.plan_by_rounding`), and a branch and bound near that LP
    point (each count between its floor and ceiling) looks for better whole numbers; where
    the LP is not solved, or under a held shortfall, details alone instead.  Each pass is a
    MIP that presolve shrinks hard, and any plan of a pass is a plan of the whole model,
    since only bounds were narrowed.  Returns the best plan seen (``start`` if no pass beat
    it, None if there is none) and, from the rounding LP's row prices, a bound for the whole
    model (:func:`~rebalance.bounds.priced_bound`).  ``rounded_rows``: the stage's bound
    comes from elsewhere, so the rounding's LP may keep the rows rounded to whole people
    (:func:`~rebalance.rounding.plan_by_rounding`).
    """
    integer = model.is_integer
    held_at = model.col_lower.copy() if start is None else np.rint(start)
    best = start
    best_objective = math.inf if start is None else float(objective @ start)

    def held_but(names: tuple[str, ...]) -> tuple[np.ndarray, np.ndarray] | None:
        """Column bounds with every integer column outside blocks ``names`` held."""
        free = np.zeros(model.num_cols, bool)
        for name in names:
            if name in model.blocks:
                free[model.blocks[name].start:model.blocks[name].stop] = True
        held = integer & ~free
        if not (integer & free).any():
            return None
        lower, upper = model.col_lower.copy(), model.col_upper.copy()
        lower[held] = upper[held] = held_at[held]
        return lower, upper

    def run_pass(label: str, bounds: tuple[np.ndarray, np.ndarray] | None,
                 share: float, pass_options: SolveOptions = options) -> None:
        nonlocal best, best_objective, held_at
        left = deadline - time.perf_counter()
        if bounds is None or left < 1.0:
            return
        out = _restricted_run(backend, model, objective, extra_rows, pass_options, bounds,
                              share * left, best, label, say)
        if out.x is None or out.objective is None:
            return
        if out.objective < best_objective - 1e-9:
            best, best_objective, held_at = out.x, out.objective, np.rint(out.x)

    # Only a stepping stone where the rounding follows (not under a held objective).
    hires_options = options if extra_rows else replace(
        options, relative_gap=max(options.relative_gap, HIRES_FIRST_GAP))
    early = None
    if (not extra_rows and start is None and options.threads >= 2
            and too_large_to_search(model, backend)):
        # The rounding's LP frees every hire, so it need not wait for the hires pass: with
        # two threads, and nothing else running yet (passes only), the two run side by side.
        left = deadline - time.perf_counter()
        early = early_lp(backend, model, objective, options,
                         options.shares.rounding_lp * options.shares.rounding * left, held_at)
    run_pass("hires alone", held_but(("hire",)), options.shares.hires, hires_options)
    near, lp_seconds = None, None
    bound: Future[float | None] | None = None
    cost_bound: Future[stage_bounds.HeldCostBound | None] | None = None
    left = deadline - time.perf_counter()
    if best is not None and not extra_rows and left >= 1.0:
        # Rounding down raises the shortfall, so it has no place under a held shortfall
        # (stage two): only for stage one and the weighted objective.
        rounding = plan_by_rounding(backend, model, objective, options,
                                    time.perf_counter() + options.shares.rounding * left,
                                    best, say, early, rounded_rows, movers_free(model))
        if rounding.plan is not None:
            best, best_objective = rounding.plan, float(objective @ rounding.plan)
            held_at = np.rint(rounding.plan)
        lp_seconds = rounding.lp_seconds
        if rounding.lp_x is not None:
            near = neighbourhood(rounding.lp_x, rounding.lower, rounding.upper, integer, best)
        left = deadline - time.perf_counter()
        if rounding.lp_row_dual is not None and left >= 1.0:
            # Beside the search it holds nothing up, so it may take what is left of the stage.
            beside = options.threads >= 2
            pricing = functools.partial(
                stage_bounds.bound_from_prices, backend, model, objective,
                rounding.lp_row_dual, options,
                (1.0 if beside else options.shares.priced_bound) * left, say)
            if beside:
                # Priced beside the search (agency: 19 s the groups would otherwise wait);
                # HiGHS lets go of Python while it solves.
                bound = in_background(pricing, " beside the search")
                if cost_stage_deadline is not None:
                    # Then the cost stage's bound, which its few seconds cannot work out
                    # (agency: the LP 28 s, against 3-6 s; on medium the whole plans there
                    # sometimes get no master LP done in their 4 s), after the pricing: one
                    # model's worth of memory beside the search at a time.
                    cost_bound = in_background(
                        stage_bounds.cost_bound_ahead, backend, model, options, best,
                        options.held_shortfall(best_objective), cost_stage_deadline, say,
                        lp_seconds, after=bound)
            else:
                bound = Future()
                bound.set_result(pricing(""))
    def with_stage_bound() -> SolveOptions:
        # The bound from prices, once worked out (beside the search, it may not be yet), is
        # the stage's bound on the next passes' lines.
        return replace(options, known_bound=higher_bound(options.known_bound,
                                                         _bound_if_done(bound)))

    if near is not None:
        if model.matrix.nnz <= WHOLE_SEARCH_MAX_NONZEROS:
            # Above it the groups get all the time: on agency one search of the whole
            # neighbourhood found nothing in 20-60 s, three runs out of three, and on large
            # the groups alone did better (17,047-17,158 where it had reached 17,524).
            run_pass("near the LP", near, options.shares.near_whole, with_stage_bound())
        if best is not None and deadline - time.perf_counter() >= MIN_GROUP_SECONDS:
            best = search_by_office_groups(backend, model, objective, extra_rows,
                                           with_stage_bound(), deadline, best, near, say)
    else:
        run_pass("details alone", held_but(("detail",)), 1.0)
    return FirstPlan(best, None if bound is None else bound.result(), lp_seconds, cost_bound)


def _bound_if_done(bound: Future[float | None] | None) -> float | None:
    """The bound ``bound`` has worked out, where it has finished without an error; for
    progress lines only, which must not wait for it."""
    if bound is None or not bound.done() or bound.exception() is not None:
        return None
    return bound.result()


def search_by_office_groups(backend: Backend, model: Model, objective: np.ndarray,
                            extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                            deadline: float, plan: np.ndarray,
                            box: tuple[np.ndarray, np.ndarray],
                            say: Callable[[str], None]) -> np.ndarray:
    """``plan`` improved a few offices at a time: every whole-number decision about a group
    of ``OFFICES_PER_GROUP`` offices (their hires, details from or to them, reassignments
    from or to them) free within ``box``, every other one held where the plan has it.

    One search of the whole box near the LP finds nothing on agency in its time (presolve
    and the root LP of a neighbourhood that large take it), while a group's search is small
    enough to finish in seconds: on agency, eight runs of 2-5 s took stage 1's plan from
    7,376 to 6,955 weighted FTE-periods (issue 3).  The continuous columns that cannot follow
    the group's decisions are held too, and every held column is taken out before the
    solver sees it (:func:`_group_bounds`, :func:`_restricted_run`).  Groups are drawn at
    random, seeded by ``options.seed``; once every office has been in a group since the
    last better plan, the groups double, up to half the offices.  Returns the best plan
    found (``plan`` if none is better).
    """
    integer = model.is_integer
    first, second = model.offices_of_columns()
    unit_of = model.key_of_columns("unit")
    num_offices = int(max(first.max(initial=-1), second.max(initial=-1))) + 1
    rng = np.random.default_rng(options.seed)
    group_options = replace(options, relative_gap=min(options.relative_gap, GROUP_GAP))
    best, best_objective = plan, float(objective @ plan)
    size = OFFICES_PER_GROUP
    groups: list[np.ndarray] = []
    tried, groups_without_better = 0, 0
    # Each group gets a fifth of the search's time.  Whole-model runs on agency needed 8 s
    # (passing 7.7M nonzeros to a solver process and presolving them took most of it);
    # with the held columns taken out first, 2-9 s.
    run_seconds = max(MIN_GROUP_SECONDS, 0.2 * (deadline - time.perf_counter()))
    while True:
        left = deadline - time.perf_counter()
        if left < MIN_SEARCH_SECONDS:
            break
        if groups_without_better >= math.ceil(num_offices / size):
            # Every office has been in a group since the last better plan: larger groups.
            if 2 * size > num_offices // 2:
                break
            size, groups, groups_without_better = 2 * size, [], 0
        if not groups:
            order = rng.permutation(num_offices)
            groups = [order[i:i + size] for i in range(0, num_offices, size)]
        group = groups.pop()
        about = integer & (np.isin(first, group) | np.isin(second, group))
        groups_without_better += 1
        bounds = _group_bounds(model, best, box, about, group, unit_of, second)
        if np.array_equal(bounds[0][about], bounds[1][about]):
            continue  # nothing about these offices may change
        tried += 1
        out = _restricted_run(backend, model, objective, extra_rows, group_options, bounds,
                              min(left, run_seconds), best,
                              f"office group {tried} ({len(group)} offices)", say)
        if (out.x is not None and out.objective is not None
                and out.objective < best_objective - 1e-9):
            best, best_objective = out.x, out.objective
            groups_without_better = 0
    return best


def _group_bounds(model: Model, plan: np.ndarray, box: tuple[np.ndarray, np.ndarray],
                  about: np.ndarray, group: np.ndarray, unit_of: np.ndarray,
                  office_of: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Column bounds for one group: the whole numbers ``about`` it free within ``box``
    (widened to hold ``plan``), and the continuous columns that can follow them (the
    shortfall, the work of the group's offices and of the people whose decisions are free);
    everything else held where ``plan`` has it.  Holding the rest of the work split keeps
    the plan a plan: those people's places do not change."""
    integer = model.is_integer
    known = np.where(integer, np.rint(plan), np.clip(plan, model.col_lower, model.col_upper))
    lower, upper = known.copy(), known.copy()
    lower[about] = np.minimum(box[0][about], known[about])
    upper[about] = np.maximum(box[1][about], known[about])
    moved = np.unique(unit_of[about & (unit_of >= 0)])
    follows = ~integer & ((unit_of < 0) | np.isin(unit_of, moved) | np.isin(office_of, group))
    lower[follows], upper[follows] = model.col_lower[follows], model.col_upper[follows]
    return lower, upper


def trimmed(backend: Backend, model: Model, objective: np.ndarray,
            extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
            start: np.ndarray, time_limit: float, say: Callable[[str], None]) -> np.ndarray:
    """``start`` with what the held shortfall does not need dropped: the cheapest plan with
    every whole-number decision at most ``start``'s (fewer hires, detail periods, moves).

    Stage one's plan buys everything that lowers the shortfall at all, and the searches
    after it rarely find the surplus: on medium (issue 3) neither the search of the whole
    model nor one near the cost stage's LP found anything cheaper in 35 s, while this
    smaller search took 1.8% off the cost in about 11 s (7.106e7 -> 6.975e7) and proved
    it the best such plan in 20 s.  Returns the plan found, or ``start``.
    """
    integer = model.is_integer
    upper = model.col_upper.copy()
    upper[integer] = np.maximum(np.rint(start[integer]), model.col_lower[integer])
    out = _restricted_run(backend, model, objective, extra_rows, options,
                          (model.col_lower, upper), time_limit, start, "trimming", say)
    if out.x is None or out.objective is None or out.objective >= objective @ start - 1e-9:
        return start
    return out.x


def toward_hint(backend: Backend, model: Model, objective: np.ndarray,
                extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                plan: np.ndarray, time_limit: float, say: Callable[[str], None]) -> np.ndarray:
    """``plan`` with any of its changes against the model's ``hint`` (a re-plan's old plan, a
    scenario's base plan) undone that does not pay: the best plan whose every whole-number
    decision lies between ``plan``'s and the hint's, the rest held, and of those equally
    good the one with the fewest changes.

    A re-plan's cost stage stops within the gap asked of the total cost, and a change costs
    little against that: a re-plan had dropped one person's detail and given the same
    detail to an identical colleague (4,000 of disruption within a 1% gap of 513,200).  A
    scenario solved from its base plan has no price on a change at all, so only the
    tie-break keeps a change that buys nothing out of the comparison.  The search has only
    the changed decisions to move, so it is small.  Returns the plan found, or ``plan``."""
    if model.hint is None or model.hint.size != model.num_cols:
        return plan
    integer = np.flatnonzero(model.is_integer)
    new = np.rint(plan[integer])
    old = np.clip(np.rint(model.hint[integer]), model.col_lower[integer],
                  model.col_upper[integer])
    if np.array_equal(new, old):
        return plan
    lower, upper = model.col_lower.copy(), model.col_upper.copy()
    lower[integer], upper[integer] = np.minimum(new, old), np.maximum(new, old)
    # Inside that box, a column's distance from the hint is linear: (x - old) where the plan
    # raised it, (old - x) where it lowered it.  Priced all together at TIE_BREAK of the
    # plan's objective, so that no real saving is ever given up for it.
    toward = np.zeros(model.num_cols)
    toward[integer] = np.sign(new - old)
    changes = float(np.abs(new - old).sum())
    unit = TIE_BREAK * max(1.0, abs(float(objective @ plan))) / changes
    priced = objective + unit * toward
    # No gap: a change is worth less than the gap asked of the whole plan's cost, so a
    # search allowed that gap stops at once on the plan it was given.  Its lines show the
    # plan's ``objective``, not ``priced``: the tie-break is no part of what the plan costs
    # (2,457,501 had been shown of a plan costing 2,457,500).
    out = _restricted_run(backend, model, priced, extra_rows,
                          replace(options, relative_gap=0.0), (lower, upper), time_limit, plan,
                          "undoing changes that do not pay", say, shown=objective)
    if out.x is None:
        return plan
    # Recomputed here, not the solver's figure: one change undone gains only ``unit``.
    gain = float(priced @ plan) - float(priced @ out.x)
    if gain <= min(0.5 * unit, 1e-9 * (1.0 + abs(float(priced @ plan)))):
        return plan
    left = float(np.abs(np.rint(out.x[integer]) - old).sum())
    say(f"  {changes - left:g} of {changes:g} changes against {model.hint_words} undone")
    return out.x


# Share of a plan's objective that all its changes together are priced at when undoing the
# ones that do not pay: the lexicographic stages' own tolerance, below any gap a solve is
# asked for (HiGHS's default is 1e-4).
TIE_BREAK = 1e-6


def _restricted_run(backend: Backend, model: Model, objective: np.ndarray,
                    extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                    bounds: tuple[np.ndarray, np.ndarray], time_limit: float,
                    start: np.ndarray | None, label: str,
                    say: Callable[[str], None],
                    shown: np.ndarray | None = None) -> BackendOutcome:
    """Branch and bound on ``model`` within column ``bounds`` (lower, upper): any plan it
    finds is a plan of the whole model.  Its progress lines and result carry ``label``,
    since its bound holds for the restricted model only; they show ``options.known_bound``
    as the stage's bound, if any (:func:`_labelled`).  ``shown``: the objective whose value
    its lines give, where ``objective`` carries a term the plan's value does not (a
    tie-break); the solver's own lines, which know only ``objective``, are then left out.

    The columns whose bounds meet are taken out before the solver sees them
    (:func:`~rebalance.submodel.hold_apart`): HiGHS's presolve would remove them too, but
    that was most of a short run on agency (4.8 s of 6.9), and the hires-alone pass on
    large, held apart, proved its plan in 129 s where the whole model had a worse one at
    149 s.
    """
    run_options = (_labelled(options, label, say) if shown is None
                   else replace(options, progress=None))
    out = run_within(backend, model, objective, extra_rows, run_options, bounds[0], bounds[1],
                     time_limit, start)
    if out.x is None or out.objective is None:
        say(f"  {label}: no plan ({out.words})")
        return out
    value = out.objective if shown is None else float(shown @ out.x)
    if start is not None and out.objective > float(objective @ start) + 1e-9 * (
            1.0 + abs(out.objective)):
        # Seen where HiGHS does not take the start up (on a model with many relocatable
        # people, 6,265.9 from a start of 2,620.2): the caller keeps the start.
        say(f"  {label}: nothing better than its start ({progress_value(value)} found, "
            f"{out.seconds:.1f}s)")
    else:
        say(f"  {label}: plan with {progress_value(value)} in {out.seconds:.1f}s")
    return out


def _labelled(options: SolveOptions, label: str, say: Callable[[str], None]) -> SolveOptions:
    """``options`` for a run on part of the model: its progress lines carry ``label``, and
    show ``options.known_bound`` (the stage's best proven bound, if any) as the stage's
    instead of the run's own, which holds for that part only (``SolveOptions.part_of_stage``)."""
    return replace(options, known_bound=None, part_of_stage=True,
                   stage_bound=options.known_bound,
                   progress=None if options.progress is None else (
                       lambda text: say(text.replace("searching:", f"{label}:"))))


def better_plan(objective: np.ndarray, a: np.ndarray | None,
                b: np.ndarray | None) -> np.ndarray | None:
    """The one of two plans (either may be None) with the lower ``objective``."""
    if a is None or b is None:
        return b if a is None else a
    return b if float(objective @ b) < float(objective @ a) - 1e-9 else a
