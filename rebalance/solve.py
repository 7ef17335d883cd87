"""Solve a :class:`~rebalance.model.Model`: the two-stage lexicographic objective, a first plan
from the LP, one overall time limit, and the limits that conflict when nothing is feasible.

The solvers themselves sit behind :mod:`rebalance.backends`.
"""

from __future__ import annotations

import functools
import math
import time
from collections.abc import Callable
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp

from rebalance import stage_bounds
from rebalance.backends import (
    BACKENDS,
    Backend,
    BackendOutcome,
    SolveOptions,
    Status,
    in_background,
    relative_gap,
    stopped,
)
from rebalance.model import LIMIT_FAMILIES, Model
from rebalance.rounding import early_lp, movers_free, neighbourhood, plan_by_rounding
from rebalance.split import relaxed, resplit, run_within
from rebalance.whole_plans import decomposable

__all__ = ["SolveOptions", "SolveResult", "StageResult", "Status", "solve", "solve_stage"]


@dataclass(frozen=True)
class StageResult:
    name: str
    status: Status
    objective: float | None
    bound: float | None
    gap: float | None
    seconds: float
    solver_words: str


@dataclass(frozen=True)
class SolveResult:
    status: Status
    x: np.ndarray | None
    stages: tuple[StageResult, ...]
    solver: str
    solver_version: str
    solve_seconds: float
    conflicts: tuple[str, ...] = ()

    @property
    def gap(self) -> float | None:
        gaps = [s.gap for s in self.stages if s.gap is not None]
        return max(gaps) if gaps else None


def constant_conflicts(model: Model) -> list[str]:
    """Rows with no columns whose bounds already fail (e.g. more people at home than seats)."""
    counts = np.diff(model.matrix.indptr)
    bad = np.flatnonzero((counts == 0) & ((model.row_upper < -1e-9) | (model.row_lower > 1e-9)))
    return [_describe_row(model, int(i), None) for i in bad]


def _describe_row(model: Model, row: int, excess: float | None) -> str:
    family, label = model.row_label(row)
    text = f"{family.replace('_', ' ')}: {label}"
    if excess is not None:
        text += f" (over by {excess:.4g})"
    return text


def solve(model: Model, options: SolveOptions) -> SolveResult:
    """Solve ``model`` lexicographically (or weighted) within one overall time limit."""
    backend = BACKENDS[options.solver]()
    started = time.perf_counter()
    deadline = started + options.time_limit_seconds
    report = options.progress

    def say(text: str) -> None:
        # Once stopped from outside, the steps cut short would each say they failed; the
        # command line says it once.
        if report is not None and not stopped():
            report(f"[{time.perf_counter() - started:7.1f}s] {text}")

    # Backends report through the same line format, with the elapsed time of the whole run.
    options = replace(options, progress=say if report is not None else None)

    conflicts = constant_conflicts(model)
    if conflicts:
        return SolveResult(Status.INFEASIBLE, None, (), backend.name, backend.version(),
                           time.perf_counter() - started, tuple(conflicts))

    stages: list[StageResult] = []
    if model.num_cols == 0:
        # Nothing to decide (no demand, so no move or hire can help and none was written as
        # a column): the empty plan is the one plan, and optimal.  HiGHS calls such a model
        # "Empty", which had read as a solver error.
        nothing = BackendOutcome(Status.OPTIMAL, np.zeros(0), 0.0, 0.0, "nothing to decide",
                                 0.0)
        names = ("weighted",) if options.mode == "weighted" else ("shortfall", "cost")
        return _finish(model, backend, options, [_stage(n, nothing) for n in names], nothing,
                       started, deadline)
    if options.mode == "weighted":
        objective = model.cost + options.shortfall_cost * model.shortfall_weight
        say("weighted: least cost + shortfall_cost x weighted shortfall")
        out, _ = solve_stage(backend, model, objective, [], options, deadline, None, say)
        stages.append(_stage("weighted", out))
        return _finish(model, backend, options, stages, out, started, deadline)

    say("stage 1: least priority-weighted shortfall")
    # Stage 1 may use most of the time, but leaves stage 2 a share to lower the cost.
    if _passes_only(model, backend):
        share = options.shares.stage1_passes_only
    elif _is_large(model, backend):
        share = options.shares.stage1_large
    else:
        share = options.shares.stage1
    stage1_deadline = started + share * options.time_limit_seconds
    first, carried = solve_stage(backend, model, model.shortfall_weight, [], options,
                                 stage1_deadline, None, say, cost_stage_deadline=deadline)
    stages.append(_stage("shortfall", first))
    if not first.status.has_plan or first.x is None or first.objective is None:
        return _finish(model, backend, options, stages, first, started, deadline)
    say(f"stage 1 done: weighted shortfall {first.objective:.6g} ({first.words})")
    if deadline - time.perf_counter() <= min(1.0, 0.1 * options.time_limit_seconds):
        say("no time left for stage 2; keeping the stage-1 plan")
        # Its cost is then proven by nothing: the stage is reported, bounded by 0 only (it
        # had read as "gap 0%" from stage 1's gap alone).
        stages.append(_stage("cost", _unimproved(model, first, None,
                                                 "not run: no time left")))
        return _finish(model, backend, options, stages, first, started, deadline,
                       final_status=Status.FEASIBLE_WITH_GAP)
    # Hold the stage-1 shortfall with a small slack, then minimise cost from its plan.
    held = held_shortfall(first.objective, options)
    say(f"stage 2: least cost with weighted shortfall <= {held:.6g}")
    second, _ = solve_stage(backend, model, model.cost, [(model.shortfall_weight, held)],
                            options, deadline, first.x, say, carried)
    if not second.status.has_plan:
        # Stage 1's plan still stands; stage 2 only failed to improve its cost, which its
        # bound (if any) still bounds.
        say(f"stage 2 found no plan ({second.words}); keeping the stage-1 plan")
        stages.append(_stage("cost", _unimproved(model, first, second.bound, second.words)))
        return _finish(model, backend, options, stages, first, started, deadline,
                       final_status=Status.FEASIBLE_WITH_GAP)
    stages.append(_stage("cost", second))
    status = Status.OPTIMAL if (first.status is Status.OPTIMAL
                                and second.status is Status.OPTIMAL) else Status.FEASIBLE_WITH_GAP
    return _finish(model, backend, options, stages,
                   polish(backend, model, second, options, deadline), started, deadline,
                   final_status=status)


def held_shortfall(shortfall: float, options: SolveOptions) -> float:
    """What the cost stage holds the weighted shortfall to after a stage 1 plan with
    ``shortfall``: a small slack above it, never below the solvers' feasibility tolerance
    (1e-6), since stage 1 may itself be that far under the true least shortfall, and
    holding it tighter would make stage 2 pay for it."""
    return shortfall + max(options.shortfall_tolerance * abs(shortfall), 1e-6)


@dataclass(frozen=True)
class CarriedOver:
    """What stage 1 hands the cost stage besides its plan."""

    # Seconds the rounding's LP (homes held) ran, if it ran: whether an LP of the cost
    # stage's own with homes held can finish in its time.
    lp_seconds: float | None = None
    # A bound on the cost stage worked out beside stage 1's search, for any shortfall held
    # at or below what stage 1's plan had then (stage_bounds.cost_bound_ahead).
    cost_bound: Future[stage_bounds.HeldCostBound | None] | None = None


def polish(backend: Backend, model: Model, out: BackendOutcome, options: SolveOptions,
           deadline: float = math.inf) -> BackendOutcome:
    """Fix the integer decisions and re-split work to the least shortfall (an LP).

    Stage two may spend the small shortfall slack it is given; with the people, moves and
    hires fixed, the best work split is cheap to find exactly, and costs do not change.
    """
    left = min(POLISH_SECONDS, deadline - time.perf_counter())
    if out.x is None or not model.num_integer or left < MIN_POLISH_SECONDS:
        return out
    split = resplit(backend, model, out.x, model.shortfall_weight, options, left)
    return out if split is None else replace(out, x=split.x)


MIN_SEARCH_SECONDS = 1.0
POLISH_SECONDS = 60.0  # at most, for the final work split; never past the limit
MIN_POLISH_SECONDS = 0.5
MIN_HEURISTIC_SECONDS = 5.0  # below this a stage goes straight to branch and bound
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


def solve_stage(backend: Backend, model: Model, objective: np.ndarray,
                extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                deadline: float, start: np.ndarray | None, say: Callable[[str], None],
                carried: CarriedOver = CarriedOver(),
                cost_stage_deadline: float | None = None) -> tuple[BackendOutcome, CarriedOver]:
    """One objective: a first plan, then branch and bound from the better of that plan and
    ``start``.  Returns the outcome and what a cost stage after it should know
    (:class:`CarriedOver`), which the cost stage gets back as ``carried``.
    ``cost_stage_deadline``: a cost stage follows, and ends then.

    The first plan comes from the LP relaxation and a rounding neighbourhood search, or, on
    models above ``LARGE_MODEL_COLUMNS`` columns with a backend that reruns cheaply, from
    solving one kind of decision at a time with the others held
    (:func:`first_plan_by_decision`).
    """
    t0 = time.perf_counter()
    budget = deadline - t0
    lp_bound = None
    rounding_lp_seconds = None
    cost_bound: Future[stage_bounds.HeldCostBound | None] | None = None
    bound_on_side: Future[float | None] | None = None
    large = _is_large(model, backend)
    # Above this size branch and bound on the whole model gets nowhere in a stage's time
    # (HiGHS's presolve of agency alone outlasted it): the passes get all of it instead.
    passes_only = _passes_only(model, backend)
    # With one thread the LP relaxation (medium: 81 s) runs after the passes only if they
    # bring no bound from the rounding LP's prices (medium: 1,492 in 2 s, against the LP's
    # 1,547): the search near the LP makes better use of the time.
    bound_after = (large and not passes_only and start is None and options.threads < 2
                   and model.num_integer > 0 and options.heuristics)
    searched = bool(model.num_integer) and options.heuristics and budget > MIN_HEURISTIC_SECONDS
    # The plan that moves and hires no one is always at hand where it is feasible: no plan
    # handed back may be worse than it (the demo at 2 s had ended at 412.5 where staying
    # put leaves 314.6), and branch and bound with nothing better starts from it.
    floor = (_stay_put_plan(backend, model, objective, options, deadline, say)
             if start is None and not extra_rows and model.num_integer
             and model.num_cols <= STAY_PUT_MAX_COLUMNS else None)
    with ThreadPoolExecutor(max_workers=1) as side:
        if large and searched and options.threads >= 2 and not passes_only:
            # The bound takes about as long as the passes (medium: the LP relaxation 92 s,
            # whole plans 21 s): run it beside them, within the stage (in stage two beside
            # trimming too, which leaves it 8 s on medium at 60 s).  Not above
            # WHOLE_SEARCH_MAX_NONZEROS: agency's LP was not solved in 237 s (its process
            # held 2.3 GiB beside the search's 3.7), and whole plans gave 5,835 after 93 s
            # where the rounding LP's prices give 6,080 in 19 s.
            bound_on_side = side.submit(stage_bounds.relaxation_bound, backend, model,
                                        objective, extra_rows, options,
                                        deadline - time.perf_counter(), say,
                                        "beside the search")
        if large and searched and extra_rows and start is not None:
            # Stage two: no rounding LP to price the rows, so one of its own unless whole
            # plans bound the stage beside it (medium: 5.89e7 after 6.4 s against 5.51e7
            # from the held LP's prices), then trimming.  Where stage one worked one out
            # beside its search, that one instead (read at the end).
            if (carried.cost_bound is None and (
                    bound_on_side is None or not stage_bounds.uses_whole_plans(backend, model))):
                lp_bound = stage_bounds.held_lp_bound(
                    backend, model, objective, extra_rows, options, start,
                    t0 + options.shares.held_bound * budget, say, carried.lp_seconds)
            start = _trimmed(backend, model, objective, extra_rows, options, start,
                             options.shares.trim * (deadline - time.perf_counter()), say)
        if searched:
            if large:
                if start is None or passes_only:
                    # Stage two of a model that branch and bound can still search starts
                    # from stage one's plan there instead: on medium the passes found nothing
                    # cheaper while holding the shortfall.
                    share = 1.0 if passes_only else options.shares.passes
                    first = first_plan_by_decision(backend, model, objective, extra_rows,
                                                   options, t0 + share * budget, say, start,
                                                   cost_stage_deadline,
                                                   rounded_rows=bound_on_side is not None)
                    start, lp_bound = first.x, _higher(lp_bound, first.bound)
                    rounding_lp_seconds, cost_bound = first.lp_seconds, first.cost_bound
            else:
                start, lp_bound = _first_plan_from_lp(backend, model, objective, extra_rows,
                                                      options, deadline, start, say)
        left = deadline - time.perf_counter()
        if bound_after and start is not None and lp_bound is None:
            lp_bound = stage_bounds.relaxation_bound(backend, model, objective, extra_rows,
                                                     options, left, say,
                                                     "after the passes, for the bound")
            left = deadline - time.perf_counter()
        start = _better_plan(objective, start, floor)  # the search starts from the better
        if passes_only and start is not None:
            say(f"  no search of the whole model: {model.matrix.nnz:,} nonzeros, more than "
                "branch and bound can use in the time")
            out = _not_searched("whole-model search not started")
        elif bound_after and left < MIN_SEARCH_SECONDS:
            out = _not_searched("no time left to search the whole model")
        else:
            # Easy large models still get proven here; the LP bound above joins its bound.
            known = _higher(lp_bound, OBJECTIVE_FLOOR)
            # With no plan yet there is nothing for a cost stage to start from: until its
            # first plan this search may use the cost stage's time too.
            overtime = (max(cost_stage_deadline - deadline, 0.0)
                        if start is None and cost_stage_deadline is not None else 0.0)
            out = backend.run(model, objective, extra_rows,
                              replace(options, known_bound=known,
                                      overtime_without_plan=overtime), left, start)
        if bound_on_side is not None:
            lp_bound = _higher(lp_bound, bound_on_side.result())
    if carried.cost_bound is not None and extra_rows:
        lp_bound = _higher(lp_bound, _bound_worked_out_ahead(carried.cost_bound,
                                                             extra_rows[0][1], deadline, say))
    # A verdict of no plan (infeasible, a solver error) is the solver's own where a plan
    # that keeps every limit is already at hand: that plan stands.
    no_plan = ((Status.NO_PLAN_IN_TIME, Status.UNKNOWN, Status.INFEASIBLE, Status.ERROR)
               if floor is not None else (Status.NO_PLAN_IN_TIME, Status.UNKNOWN))
    start_value = None if start is None else float(objective @ start)
    if out.x is None and start_value is not None and out.status in no_plan:
        # Branch and bound ran out of time before taking up the start: keep the start, and
        # the bound its root proved (CBC's LP on a 40-office stage: 333.1, else 0).
        proved = out.bound if out.status is Status.NO_PLAN_IN_TIME else None
        out = BackendOutcome(Status.FEASIBLE_WITH_GAP, start, start_value,
                             _higher(lp_bound, proved), out.words, out.seconds)
    elif (out.x is not None and out.objective is not None and start_value is not None
          and start_value < out.objective - 1e-9 * max(1.0, abs(out.objective))):
        say(f"  keeping the plan of {start_value:.6g}: the search's best, "
            f"{out.objective:.6g}, is worse")
        out = replace(out, x=start, objective=start_value, status=Status.FEASIBLE_WITH_GAP)
    elif out.status.has_plan and out.status is not Status.OPTIMAL:
        # A run killed at the wall clock hands back its plan without a bound.
        out = replace(out, bound=_higher(out.bound, lp_bound))
    out = _with_floor(_bound_checked(out, lp_bound, options.relative_gap, say),
                      options.relative_gap)
    seconds = time.perf_counter() - t0
    return replace(out, seconds=seconds), CarriedOver(rounding_lp_seconds, cost_bound)


def _bound_worked_out_ahead(ahead: Future[stage_bounds.HeldCostBound | None], held: float,
                            deadline: float, say: Callable[[str], None]) -> float | None:
    """The cost stage's bound from :func:`~rebalance.stage_bounds.cost_bound_ahead` for a
    shortfall held at ``held``, if it is there by ``deadline``."""
    try:
        worked_out = ahead.result(timeout=max(deadline - time.perf_counter(), 0.0))
    except TimeoutError:
        say("  the cost stage's bound from beside stage 1's search did not finish in time")
        return None
    if worked_out is None:
        return None
    bound = worked_out.at(held)
    say(f"  bound from beside stage 1's search, for the shortfall held at {held:.6g}: "
        f"{bound:.6g}")
    return bound


def _restricted_run(backend: Backend, model: Model, objective: np.ndarray,
                    extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                    bounds: tuple[np.ndarray, np.ndarray], time_limit: float,
                    start: np.ndarray | None, label: str,
                    say: Callable[[str], None]) -> BackendOutcome:
    """Branch and bound on ``model`` within column ``bounds`` (lower, upper): any plan it
    finds is a plan of the whole model.  Its progress lines and result carry ``label``,
    since its bound holds for the restricted model only.

    The columns whose bounds meet are taken out before the solver sees them
    (:func:`~rebalance.submodel.hold_apart`): HiGHS's presolve would remove them too, but
    that was most of a short run on agency (4.8 s of 6.9), and the hires-alone pass on
    large, held apart, proved its plan in 129 s where the whole model had a worse one at
    149 s.
    """
    out = run_within(backend, model, objective, extra_rows, _labelled(options, label, say),
                     bounds[0], bounds[1], time_limit, start)
    if out.x is None or out.objective is None:
        say(f"  {label}: no plan ({out.words})")
    elif start is not None and out.objective > float(objective @ start) + 1e-9 * (
            1.0 + abs(out.objective)):
        # Seen where HiGHS does not take the start up (on a model with many relocatable
        # people, 6,265.9 from a start of 2,620.2): the caller keeps the start.
        say(f"  {label}: nothing better than its start ({out.objective:.6g} found, "
            f"{out.seconds:.1f}s)")
    else:
        say(f"  {label}: plan with {out.objective:.6g} in {out.seconds:.1f}s")
    return out


def _labelled(options: SolveOptions, label: str, say: Callable[[str], None]) -> SolveOptions:
    """``options`` for a run on part of the model: its progress lines carry ``label``, since
    their bound holds for that part only."""
    return replace(options, known_bound=None, progress=None if options.progress is None else (
        lambda text: say(text.replace("searching:", f"{label}:"))))


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


def _trimmed(backend: Backend, model: Model, objective: np.ndarray,
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


def _higher(a: float | None, b: float | None) -> float | None:
    """The higher of two bounds, either of which may be missing."""
    return b if a is None else a if b is None else max(a, b)


def _is_large(model: Model, backend: Backend) -> bool:
    """Whether ``model`` takes the large-model path (passes instead of the LP first)."""
    columns = (min(LARGE_MODEL_COLUMNS, LARGE_MODEL_COLUMNS_WITH_MOVERS)
               if decomposable(model) else LARGE_MODEL_COLUMNS)
    return model.num_cols > columns and backend.reruns_cheaply


def _passes_only(model: Model, backend: Backend) -> bool:
    """Whether ``model`` is past branch and bound on the whole of it: passes only."""
    return _is_large(model, backend) and model.matrix.nnz > WHOLE_SEARCH_MAX_NONZEROS


def _not_searched(words: str) -> BackendOutcome:
    """The outcome of a branch and bound that was not run: the stage keeps its plan."""
    return BackendOutcome(Status.NO_PLAN_IN_TIME, None, None, None, words, 0.0)


# A bound may sit above the plan it bounds by the solvers' relative tolerance, no more.
BOUND_TOLERANCE = 1e-6


def _bound_checked(out: BackendOutcome, fallback: float | None, relative_gap_wanted: float,
                   say: Callable[[str], None] | None = None) -> BackendOutcome:
    """``out`` with a bound above its own plan's objective discarded: such a bound bounds
    nothing, and had read "may cost up to -8,000 less".  It falls to ``fallback`` (the LP
    bound) where that one is not above the plan, else to :data:`OBJECTIVE_FLOOR`.

    Seen with HiGHS 1.16 on a re-plan's cost stage: presolve claimed 117,000 "Optimal" with
    the shortfall held at 1e-6 while a plan of 109,000 keeps every row (scipy's HiGHS and
    HiGHS with presolve off find 109,000); the plan of 109,000 was kept, the bound was not
    dropped.
    """
    if (out.objective is None or out.bound is None
            or out.bound <= out.objective + BOUND_TOLERANCE * max(1.0, abs(out.objective))):
        return out
    kept = (max(fallback, OBJECTIVE_FLOOR) if fallback is not None
            and fallback <= out.objective + BOUND_TOLERANCE * max(1.0, abs(out.objective))
            else OBJECTIVE_FLOOR)
    if say is not None:
        source = "the LP's" if fallback == kept else "no plan scores below 0"
        say(f"  the solver's bound {out.bound:.6g} is above the plan kept "
            f"({out.objective:.6g}), so it bounds nothing: discarded; the bound is "
            f"{kept:.6g} ({source})")
    gap = relative_gap(out.objective, kept)
    status = (Status.OPTIMAL if gap is not None and gap <= relative_gap_wanted
              else Status.FEASIBLE_WITH_GAP)
    return replace(out, bound=kept, status=status,
                   words=f"{out.words}; its bound {out.bound:.6g} was above the plan kept and "
                         "is discarded")


# Every objective solved here is shortfall or money paid (priorities, costs and disruption
# rates are never negative), so no plan scores below 0.  The solver's bound can: the
# relocatable cost-adjustment columns dip below 0 on their own in the relaxation.
OBJECTIVE_FLOOR = 0.0


def _with_floor(out: BackendOutcome, relative_gap_wanted: float) -> BackendOutcome:
    """Raise a bound below :data:`OBJECTIVE_FLOOR` (or none) to it; a plan its bound proves
    (within the gap asked) is optimal, whichever step stopped.  A cost of 0 against a
    solver's bound of 0 had stayed "feasible" in one run and read "optimal ... (stopped at
    the time limit)" in another."""
    if not out.status.has_plan:
        return out
    if out.bound is None or out.bound < OBJECTIVE_FLOOR:
        out = replace(out, bound=OBJECTIVE_FLOOR)
    gap = relative_gap(out.objective, out.bound)
    # A bound above the plan is no proof (a solver's wrong claim), whatever the gap reads.
    above = (out.objective is not None and out.bound is not None
             and out.bound > out.objective + BOUND_TOLERANCE * max(1.0, abs(out.objective)))
    if (out.status is not Status.OPTIMAL and not above and gap is not None
            and gap <= relative_gap_wanted):
        out = replace(out, status=Status.OPTIMAL, words="its plan meets its bound")
    return out


# Above this many columns the first stage starts from its passes, whose plans are far better
# than staying put, and the extra solve would only take time.
STAY_PUT_MAX_COLUMNS = 200_000


def _stay_put_plan(backend: Backend, model: Model, objective: np.ndarray,
                   options: SolveOptions, deadline: float,
                   say: Callable[[str], None]) -> np.ndarray | None:
    """The plan that keeps every whole-number decision at its least (nobody moved, nobody
    hired; a re-plan's fixed past kept), with the best work split, or the model's ``hint``
    (a re-plan's old plan) so completed where that is better: None where neither keeps
    every limit (seats over) or there is no time."""
    candidates = [("staying put (no moves, no hires)", model.col_lower)]
    if model.hint is not None and model.hint.size == model.num_cols:
        held = np.clip(np.rint(model.hint), model.col_lower, model.col_upper)
        candidates.insert(0, ("the old plan's moves and hires, work split afresh", held))
    best: tuple[float, np.ndarray] | None = None
    for words, values in candidates:
        left = deadline - time.perf_counter()
        if left <= 0.05:
            break
        # Held apart, only the work split is left (an LP): CBC had been handed the whole
        # model (40 offices: PuLP's building and writing took the 1.9 s this step had, and
        # the run ended with no plan at all, exit 5).
        lower = np.where(model.is_integer, values, model.col_lower)
        upper = np.where(model.is_integer, values, model.col_upper)
        out = run_within(backend, relaxed(model), objective, [],
                         replace(options, progress=None, heuristics=False), lower, upper,
                         min(left, max(0.1 * left, 1.0)))
        if out.x is None or out.objective is None:
            continue
        say(f"  {words}: {out.objective:.6g}")
        if best is None or out.objective < best[0] - 1e-9:
            best = (out.objective, out.x)
    return None if best is None else best[1]


def _first_plan_from_lp(backend: Backend, model: Model, objective: np.ndarray,
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
        say(f"  LP relaxation not solved ({lp.words}); going straight to branch and bound")
        return start, None
    say(f"  LP relaxation {lp.objective:.6g} in {lp.seconds:.1f}s")
    # Widen the box to hold the previous plan too: never empty, and the search mixes what
    # the LP wants with what is known to work (stage two needs it).
    lower, upper = neighbourhood(lp.x, model.col_lower, model.col_upper, model.is_integer,
                                 start)
    left = deadline - time.perf_counter()
    narrowed = replace(model, col_lower=lower, col_upper=upper)
    # Its progress lines say whose they are: the bound of the narrowed model is no bound
    # of the stage (on the demo's cost stage 2.07e6, where the stage's is 1.63e6).
    rens = None if left < 2.0 else backend.run(
        narrowed, objective, extra_rows, _labelled(options, "rounding search", say),
        min(options.shares.rens * budget, 0.5 * left), start)
    if rens is not None and rens.x is not None and rens.objective is not None:
        say(f"  rounding search: plan with {rens.objective:.6g} in {rens.seconds:.1f}s")
        start = _better_plan(objective, start, rens.x)
    return start, lp.objective


@dataclass(frozen=True)
class FirstPlan:
    """What :func:`first_plan_by_decision` found: a plan, and a bound where one came cheaply."""

    x: np.ndarray | None
    bound: float | None = None
    lp_seconds: float | None = None  # the rounding LP's (Rounding.lp_seconds)
    cost_bound: Future[stage_bounds.HeldCostBound | None] | None = None  # CarriedOver's


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
            and _passes_only(model, backend)):
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
                        held_shortfall(best_objective, options), cost_stage_deadline, say,
                        lp_seconds, after=bound)
            else:
                bound = Future()
                bound.set_result(pricing(""))
    if near is not None:
        if model.matrix.nnz <= WHOLE_SEARCH_MAX_NONZEROS:
            # Above it the groups get all the time: on agency one search of the whole
            # neighbourhood found nothing in 20-60 s, three runs out of three, and on large
            # the groups alone did better (17,047-17,158 where it had reached 17,524).
            run_pass("near the LP", near, options.shares.near_whole)
        if best is not None and deadline - time.perf_counter() >= MIN_GROUP_SECONDS:
            best = search_by_office_groups(backend, model, objective, extra_rows, options,
                                           deadline, best, near, say)
    else:
        run_pass("details alone", held_but(("detail",)), 1.0)
    return FirstPlan(best, None if bound is None else bound.result(), lp_seconds, cost_bound)


def _better_plan(objective: np.ndarray, a: np.ndarray | None,
                 b: np.ndarray | None) -> np.ndarray | None:
    """The one of two plans (either may be None) with the lower ``objective``."""
    if a is None or b is None:
        return b if a is None else a
    return b if float(objective @ b) < float(objective @ a) - 1e-9 else a


def _unimproved(model: Model, first: BackendOutcome, bound: float | None,
                words: str) -> BackendOutcome:
    """The cost stage's outcome where it kept stage 1's plan: that plan's cost, bounded by
    ``bound`` or else only by 0 (no cost is negative)."""
    assert first.x is not None
    return BackendOutcome(Status.FEASIBLE_WITH_GAP, first.x, float(model.cost @ first.x),
                          bound if bound is not None else 0.0, words, 0.0)


def _stage(name: str, out: BackendOutcome) -> StageResult:
    # No bound above the stage's plan reaches a report, from whichever path it came.
    out = _bound_checked(out, None, 0.0)
    return StageResult(name, out.status, out.objective, out.bound,
                       relative_gap(out.objective, out.bound) if out.status.has_plan else None,
                       out.seconds, out.words)


def _finish(model: Model, backend: Backend, options: SolveOptions, stages: list[StageResult],
            last: BackendOutcome, started: float, deadline: float,
            final_status: Status | None = None) -> SolveResult:
    status = final_status or last.status
    conflicts: tuple[str, ...] = ()
    if status is Status.INFEASIBLE:
        # At least a second, so that a run out of time can still name the limits: past the
        # deadline by that at most (it had been 5 s).
        conflicts = tuple(find_conflicts(model, backend, options,
                                         max(1.0, deadline - time.perf_counter())))
        if not conflicts:
            # Every limit held with nothing relaxed: the model is feasible and the verdict
            # was the solver's numerics (CBC with shortfall_cost 1e100, from a sweep).
            status = Status.ERROR
            conflicts = (f"{backend.name} called the model infeasible, but every limit holds "
                         "in a plan found with nothing relaxed: a numerical failure of the "
                         "solver (are some numbers extremely large?); try the other solver",)
    return SolveResult(status, last.x if status.has_plan else None, tuple(stages),
                       backend.name, backend.version(), time.perf_counter() - started, conflicts)


def find_conflicts(model: Model, backend: Backend, options: SolveOptions,
                   time_limit: float) -> list[str]:
    """Name the limits that cannot hold together: relax each limit row by an elastic column
    and minimise the total relaxation; rows that still need relaxing are the conflict.
    Empty where none needs to: the model was feasible all along."""
    limit_rows = [i for f in model.rows if f.name in LIMIT_FAMILIES
                  for i in range(f.start, f.stop) if math.isfinite(model.row_upper[i])]
    if not limit_rows:
        return ["the solver reports the model infeasible, but no limit row can be relaxed"]
    k = len(limit_rows)
    elastic = sp.csr_matrix((np.full(k, -1.0), (np.asarray(limit_rows), np.arange(k))),
                            shape=(model.num_rows, k))
    with_elastic = replace(
        model,
        matrix=sp.hstack([model.matrix, elastic], format="csr"),
        col_lower=np.concatenate([model.col_lower, np.zeros(k)]),
        col_upper=np.concatenate([model.col_upper, np.full(k, math.inf)]),
        is_integer=np.concatenate([model.is_integer, np.zeros(k, bool)]),
        shortfall_weight=np.concatenate([model.shortfall_weight, np.zeros(k)]),
        cost=np.concatenate([model.cost, np.zeros(k)]),
    )
    objective = np.concatenate([np.zeros(model.num_cols), np.ones(k)])
    out = backend.run(with_elastic, objective, [], options, time_limit, None)
    if out.x is None:
        return [f"the limits conflict, but the analysis found no relaxation ({out.words})"]
    excess = out.x[model.num_cols:]
    over = np.flatnonzero(excess > 1e-6)
    if not len(over):
        return []  # nothing had to give: the caller says the verdict was the solver's
    listed = [_describe_row(model, limit_rows[i], float(excess[i])) for i in over]
    # The least total relaxation is the answer's firm part; how it splits between offices
    # and periods can differ between equally small relaxations (and so between solvers).
    totals: dict[str, tuple[int, float]] = {}
    for i in over:
        family, _ = model.row_label(limit_rows[i])
        count, amount = totals.get(family, (0, 0.0))
        totals[family] = (count + 1, amount + float(excess[i]))
    summary = [f"{family.replace('_', ' ')}: over by {amount:.4g} in all, across {count} limits "
               "(the least total; how it is split between them can differ)"
               for family, (count, amount) in totals.items() if count > 1]
    return summary + listed
