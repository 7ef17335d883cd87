"""Solve a :class:`~rebalance.model.Model`: the two-stage lexicographic objective, a first plan
from the LP, one overall time limit, and the limits that conflict when nothing is feasible.

The solvers themselves sit behind :mod:`rebalance.backends`; the plans a stage starts from
(first plans, searches on part of the model) come from :mod:`rebalance.heuristics`.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, replace

import numpy as np

from rebalance import stage_bounds
from rebalance.backends import (
    BACKENDS,
    Backend,
    BackendOutcome,
    SolveOptions,
    Status,
    relative_gap,
    stopped,
)
from rebalance.conflicts import constant_conflicts, find_conflicts, seats_cannot_hold
from rebalance.heuristics import (
    MIN_SEARCH_SECONDS,
    better_plan,
    first_plan_by_decision,
    first_plan_from_lp,
    hint_plan,
    is_large,
    stay_put_plan,
    too_large_to_search,
    toward_hint,
    trimmed,
)
from rebalance.instance import Instance
from rebalance.model import Model
from rebalance.numbers import progress_value
from rebalance.split import lp_backends, resplit
from rebalance.stage_claims import (
    BOUND_TOLERANCE,
    OBJECTIVE_FLOOR,
    bound_checked,
    higher_bound,
    not_searched,
    with_floor,
)

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
    # The weighted shortfall with nobody moved or hired and the best work split, beside the
    # plan's: what the plan buys.  Shortfall-first plans without a hint only (a hint's plan
    # may stand in for staying put); None where not worked out.
    staying_put_shortfall: float | None = None

    @property
    def gap(self) -> float | None:
        gaps = [s.gap for s in self.stages if s.gap is not None]
        return max(gaps) if gaps else None

    @property
    def shortfall_gap(self) -> float | None:
        """The shortfall stage's gap (None in weighted mode): how far a plan's shortfall may
        be from the least, where :attr:`gap`, the largest, is mostly the cost stage's."""
        return next((s.gap for s in self.stages if s.name == "shortfall"), None)

    @property
    def gap_on_shortfall(self) -> float | None:
        """How far the plan's shortfall may be from the least, as a share: the shortfall
        stage's gap, or in weighted mode the whole objective's (:attr:`gap`)."""
        return self.gap if self.shortfall_gap is None else self.shortfall_gap


def solve(model: Model, options: SolveOptions, instance: Instance | None = None) -> SolveResult:
    """Solve ``model`` lexicographically (or weighted) within one overall time limit.

    ``instance``, the one ``model`` was built from, lets conflicting seats say how many
    people are based at the office (:func:`seat_words`); without it they name the row only.
    """
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

    conflicts = constant_conflicts(model, instance)
    if conflicts:
        return SolveResult(Status.INFEASIBLE, None, (), backend.name, backend.version(),
                           time.perf_counter() - started, tuple(conflicts))
    if instance is not None and seats_cannot_hold(instance):
        # No plan can keep some office's seats (``rebalance check``'s proof): the stages could
        # only fail to find one, and the analysis gets the whole time (medium at 10 seats:
        # stage 1 used 9.6 s of 15 s and ended "no plan within the time limit").
        proven = BackendOutcome(Status.INFEASIBLE, None, None, None,
                                "no plan can keep its seats", 0.0)
        return _finish(model, backend, options, [], proven, started, deadline,
                       instance=instance)

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
        out, _ = solve_stage(backend, model, objective, [], options,
                             deadline - _undo_reserve(model, options), None, say)
        out = _last_stage_finished(backend, model, out, objective, [], options, deadline, say)
        stages.append(_stage("weighted", out))
        # The work split to the least shortfall, people, moves and hires held: it costs
        # nothing, so it never worsens the objective, and where shortfall is priced at 0 the
        # solver is free to leave everyone idle (a sweep's plan had no work at all).
        return _finish(model, backend, options, stages,
                       polish(backend, model, out, options, deadline), started, deadline,
                       instance=instance)

    say("stage 1: least priority-weighted shortfall")
    # Stage 1 may use most of the time, but leaves stage 2 a share to lower the cost.
    if too_large_to_search(model, backend):
        share = options.shares.stage1_passes_only
    elif is_large(model, backend):
        share = options.shares.stage1_large
    else:
        share = options.shares.stage1
    stage1_deadline = started + share * options.time_limit_seconds
    # The hint's least shortfall is wanted twice (a first plan, then whether the cost stage
    # may keep it): one LP, shared.
    hint_split = hint_plan(backend, model, model.shortfall_weight, options,
                           min(stage1_deadline, time.perf_counter() + HINT_SECONDS))
    first, carried = solve_stage(backend, model, model.shortfall_weight, [], options,
                                 stage1_deadline, None, say, cost_stage_deadline=deadline,
                                 hint_split=hint_split)
    first = settled(model, first, model.shortfall_weight, options.relative_gap)
    stages.append(_stage("shortfall", first))
    # With a hint stage 1 starts from the better of it and staying put: not staying put;
    # with nothing whole to decide, staying put is stage 1's plan (it had been left out).
    staying_put = None if model.hint is not None else (
        carried.staying_put if model.num_integer else first.objective)
    if not first.status.has_plan or first.x is None or first.objective is None:
        return _finish(model, backend, options, stages, first, started, deadline,
                       instance=instance, staying_put=staying_put)
    # The gap, not the solver's word: HiGHS says "Optimal" of a search within the gap asked.
    gap = stages[-1].gap
    say(f"stage 1 done: weighted shortfall {progress_value(first.objective)}, "
        + ("gap unknown" if gap is None else f"gap {gap:.2%}"))
    if deadline - time.perf_counter() <= min(1.0, 0.1 * options.time_limit_seconds):
        say("no time left for stage 2; keeping the stage-1 plan")
        # Its cost is then proven by nothing: the stage is reported, bounded by 0 only (it
        # had read as "gap 0%" from stage 1's gap alone).
        stages.append(_stage("cost", _unimproved(model, first, None,
                                                 "not run: no time left")))
        return _finish(model, backend, options, stages, first, started, deadline,
                       final_status=Status.FEASIBLE_WITH_GAP, staying_put=staying_put)
    # Hold the stage-1 shortfall with a small slack, then minimise cost from its plan.
    base = first.objective
    start_plan: np.ndarray | None = first.x
    kept = _hint_within_gap(model, hint_split, first.objective, stages[-1].bound, options,
                            say)
    if kept is not None and kept.objective is not None:
        base = kept.objective
        start_plan = better_plan(model.cost, first.x, kept.x)
    held = options.held_shortfall(base)
    # Below ``held`` by half the slack, at most 1e-6 of it: solvers keep a row to their
    # tolerance (HiGHS broke a held 4,515.094 by 4.9e-4, for 900 where keeping it costs 1,200).
    hold = [(model.shortfall_weight,
             held - min(0.5 * (held - base), 1e-6 * max(1.0, abs(base))))]
    say(f"stage 2: least cost with weighted shortfall <= {progress_value(held)}")
    second, _ = solve_stage(backend, model, model.cost, hold, options,
                            deadline - _undo_reserve(model, options), start_plan, say, carried)
    if not second.status.has_plan:
        # Stage 1's plan still stands; stage 2 only failed to improve its cost, which its
        # bound (if any) still bounds.
        say(f"stage 2 found no plan ({second.words}); keeping the stage-1 plan")
        stages.append(_stage("cost", _unimproved(model, first, second.bound, second.words)))
        return _finish(model, backend, options, stages, first, started, deadline,
                       final_status=Status.FEASIBLE_WITH_GAP, staying_put=staying_put)
    second = _last_stage_finished(backend, model, second, model.cost, hold, options, deadline,
                                  say)
    last = polish(backend, model, second, options, deadline)
    if _breaks(model, last, held) and start_plan is not None:
        # Beyond the row's margin: the plan it started from keeps ``held``; the bound stands.
        say("stage 2's plan breaks the held shortfall (the solver's tolerances); keeping the "
            "plan it started from")
        second = _unimproved(model, replace(first, x=start_plan), second.bound,
                             f"{second.words}; its plan broke the held shortfall")
        last = polish(backend, model, second, options, deadline)
    stages.append(_stage("cost", second))
    if last.x is not None:
        stages[0] = _plan_shortfall(stages[0], float(model.shortfall_weight @ last.x), model,
                                    kept is not None, held, options.relative_gap)
    return _finish(model, backend, options, stages, last, started, deadline,
                   final_status=Status.OPTIMAL, staying_put=staying_put)


# At most, for the best work split of a re-plan's old plan (or a scenario's base) before
# its cost stage: an LP with every whole-number column held.
HINT_SECONDS = 10.0


def _hint_within_gap(model: Model, old: BackendOutcome | None, shortfall: float,
                     bound: float | None, options: SolveOptions,
                     say: Callable[[str], None]) -> BackendOutcome | None:
    """``old``, the model's hint (a re-plan's old plan, a scenario's base plan) with its
    least-shortfall work split (:func:`~rebalance.heuristics.hint_plan`), where it leaves
    more weighted shortfall than stage 1's plan (``shortfall``) but is within the gap asked
    of stage 1's ``bound``: the search cannot tell that difference from where it stopped, so
    the cost stage may keep the hint (a re-plan of unchanged data had made 15 changes,
    52,000 of disruption, for 0.057 of 32.8 weighted shortfall, inside its 0.99% gap).
    None otherwise."""
    if bound is None or old is None or old.objective is None or (
            old.objective <= options.held_shortfall(shortfall)):
        return None
    gap = relative_gap(old.objective, bound)
    if gap is None or gap > options.relative_gap:
        return None
    say(f"  {model.hint_words}'s weighted shortfall {progress_value(old.objective)} is within "
        f"the gap asked of stage 1's bound {progress_value(bound)}: no change is needed for less")
    return old


def _plan_shortfall(stage: StageResult, shortfall: float, model: Model, hint_kept: bool,
                    held: float, relative_gap_wanted: float) -> StageResult:
    """Stage 1's result for the plan handed back, whose weighted ``shortfall`` can differ
    from stage 1's own plan's: the plan's figure, against the same bound.  Higher where its
    cost stage kept the hint's shortfall (``hint_kept``, :func:`_hint_within_gap`); lower
    where the cost stage's plan, re-split, leaves less (a scenario's page had read 172.778
    for stage 1 beside a plan of 172.741).  Above the ``held`` shortfall the cost stage was
    to keep, the solver's tolerances let the row slip: the stage is then as good as the
    plan's figure proves against its bound, no better (priorities of 1 beside one of 1e10
    had left a plan short by 6.0 that stage 1 still called optimal at 0)."""
    if stage.objective is None:
        return stage
    if shortfall > held + BOUND_TOLERANCE * max(1.0, held):
        gap = relative_gap(shortfall, stage.bound)
        return replace(
            stage, objective=shortfall, gap=gap,
            status=(Status.OPTIMAL if gap is not None and gap <= relative_gap_wanted
                    else Status.FEASIBLE_WITH_GAP),
            solver_words=f"{stage.solver_words}; the plan handed back leaves "
                         f"{progress_value(shortfall)}, above the {progress_value(held)} the "
                         "cost stage was to hold (the solver's tolerances)")
    if hint_kept and shortfall > stage.objective * (1 + 1e-9):
        words = f"the plan keeps {model.hint_words}'s shortfall, within the gap asked"
    elif shortfall < stage.objective * (1 - 1e-9) - 1e-9:
        words = "the cost stage's plan, its work re-split, leaves less"
    else:
        return stage
    return replace(stage, objective=shortfall, gap=relative_gap(shortfall, stage.bound),
                   solver_words=f"{stage.solver_words}; {words}")


@dataclass(frozen=True)
class CarriedOver:
    """What stage 1 hands the cost stage besides its plan."""

    # Seconds the rounding's LP (homes held) ran, if it ran: whether an LP of the cost
    # stage's own with homes held can finish in its time.
    lp_seconds: float | None = None
    # A bound on the cost stage worked out beside stage 1's search, for any shortfall held
    # at or below what stage 1's plan had then (stage_bounds.cost_bound_ahead).
    cost_bound: Future[stage_bounds.HeldCostBound | None] | None = None
    # The objective of the plan stage 1 started from where staying put was worked out
    # (:func:`~rebalance.heuristics.stay_put_plan`; with a hint, possibly the hint's plan).
    staying_put: float | None = None


def polish(backend: Backend, model: Model, out: BackendOutcome, options: SolveOptions,
           deadline: float = math.inf) -> BackendOutcome:
    """Fix the integer decisions and re-split work to the least shortfall (an LP).

    Stage two may spend the small shortfall slack it is given; with the people, moves and
    hires fixed, the best work split is cheap to find exactly, and costs do not change.
    """
    if out.x is None or not (model.num_integer or not backend.reruns_cheaply):
        return out
    # HiGHS first where CBC solves (9.2 short beside "optimal at 0" with CBC's digits).
    for lp_backend in lp_backends(backend):
        left = min(POLISH_SECONDS, deadline - time.perf_counter())
        if left < MIN_POLISH_SECONDS:
            break
        split = resplit(lp_backend, model, out.x, model.shortfall_weight, options, left)
        if split is not None:
            return replace(out, x=split.x)
    return out


def _last_stage_finished(backend: Backend, model: Model, out: BackendOutcome,
                         objective: np.ndarray, extra_rows: list[tuple[np.ndarray, float]],
                         options: SolveOptions, deadline: float,
                         say: Callable[[str], None]) -> BackendOutcome:
    """The last stage's outcome, settled (:func:`settled`), with the changes against the
    model's hint (a re-plan's old plan, a scenario's base plan) that do not pay undone
    first (:func:`~rebalance.heuristics.toward_hint`) where there is a hint and time."""
    left = min(UNDO_SECONDS, deadline - time.perf_counter())
    if model.hint is not None and out.x is not None and left >= MIN_POLISH_SECONDS:
        x = toward_hint(backend, model, objective, extra_rows, options, out.x, left, say)
        if x is not out.x:
            out = with_floor(replace(out, x=x, objective=float(objective @ x)),
                              options.relative_gap)
    return settled(model, out, objective, options.relative_gap)


def _undo_reserve(model: Model, options: SolveOptions) -> float:
    """Seconds a re-plan's last stage leaves for :func:`_last_stage_finished`, which a stage run to
    its limit would otherwise never get: a tenth of the limit, at most :data:`UNDO_SECONDS`."""
    return 0.0 if model.hint is None else min(UNDO_SECONDS, 0.1 * options.time_limit_seconds)


# At most, for undoing a re-plan's changes that do not pay: a search over those alone.
UNDO_SECONDS = 10.0
SETTLE_TOLERANCE = 1e-9  # relative: less than this off a plan's objective is no slack


def settled(model: Model, out: BackendOutcome, objective: np.ndarray,
            relative_gap_wanted: float) -> BackendOutcome:
    """``out`` with each continuous column ``objective`` prices at the least its rows allow,
    every other column held: a plan the solver stopped with can carry slack there (what a
    detail costs from a new home), and its objective then overstates the plan's.  A cost
    stage had read 2,987,500 of a plan costing 2,936,500.

    Worked out row by row, with no solver (so with no time left too): with the rest held,
    a column's least value is the largest lower limit its rows set, where no row that sets
    one holds two such columns (what a detail costs from a new home, the shortfall of a
    demand; a budget row holds many, but lowering them only eases it).  Where that does not
    hold, ``out`` is returned as it is."""
    free = ~model.is_integer & (objective > 0)
    if out.x is None or out.objective is None or not free.any():
        return out
    x = out.x
    matrix = model.matrix.tocsr()
    touched = matrix[:, np.flatnonzero(free)].tocoo()
    rows, cols, coef = touched.row, np.flatnonzero(free)[touched.col], touched.data
    # a e + rest within [lo, hi] limits e from below where a < 0 and hi is finite, or a > 0
    # and lo is finite.
    hi, lo = model.row_upper[rows], model.row_lower[rows]
    limiting = np.where(coef < 0, np.isfinite(hi), np.isfinite(lo))
    if np.bincount(rows[limiting], minlength=model.num_rows).max(initial=0) > 1:
        return out
    rows, cols, coef, hi, lo = (a[limiting] for a in (rows, cols, coef, hi, lo))
    rest = matrix[rows] @ x - coef * x[cols]  # each row's held part
    least = model.col_lower.copy()
    np.maximum.at(least, cols, np.where(coef < 0, (rest - hi) / -coef, (lo - rest) / coef))
    settled_x = x.copy()
    settled_x[free] = np.minimum(least[free], x[free])
    value = float(objective @ settled_x)
    if not value < out.objective - SETTLE_TOLERANCE * max(1.0, abs(out.objective)):
        return out  # rounding noise: a start moved by 1e-13 had sent a search elsewhere
    return with_floor(replace(out, x=settled_x, objective=value), relative_gap_wanted)


POLISH_SECONDS = 60.0  # at most, for the final work split; never past the limit
MIN_POLISH_SECONDS = 0.5
MIN_HEURISTIC_SECONDS = 5.0  # below this a stage goes straight to branch and bound


def solve_stage(backend: Backend, model: Model, objective: np.ndarray,
                extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                deadline: float, start: np.ndarray | None, say: Callable[[str], None],
                carried: CarriedOver = CarriedOver(),
                cost_stage_deadline: float | None = None,
                hint_split: BackendOutcome | None = None) -> tuple[BackendOutcome, CarriedOver]:
    """One objective: a first plan, then branch and bound from the better of that plan and
    ``start``.  Returns the outcome and what a cost stage after it should know
    (:class:`CarriedOver`), which the cost stage gets back as ``carried``.
    ``cost_stage_deadline``: a cost stage follows, and ends then.  ``hint_split``: the
    model's hint with its best work split for ``objective``, where already worked out.

    The first plan comes from the LP relaxation and a rounding neighbourhood search, or, on
    models above ``LARGE_MODEL_COLUMNS`` columns with a backend that reruns cheaply, from
    solving one kind of decision at a time with the others held
    (:func:`~rebalance.heuristics.first_plan_by_decision`).
    """
    t0 = time.perf_counter()
    budget = deadline - t0
    lp_bound = None
    rounding_lp_seconds = None
    cost_bound: Future[stage_bounds.HeldCostBound | None] | None = None
    bound_on_side: Future[float | None] | None = None
    large = is_large(model, backend)
    # Above this size branch and bound on the whole model gets nowhere in a stage's time
    # (HiGHS's presolve of agency alone outlasted it): the passes get all of it instead.
    passes_only = too_large_to_search(model, backend)
    # With one thread the LP relaxation (medium: 81 s) runs after the passes only if they
    # bring no bound from the rounding LP's prices (medium: 1,492 in 2 s, against the LP's
    # 1,547): the search near the LP makes better use of the time.
    bound_after = (large and not passes_only and start is None and options.threads < 2
                   and model.num_integer > 0 and options.heuristics)
    searched = bool(model.num_integer) and options.heuristics and budget > MIN_HEURISTIC_SECONDS
    # The plan that moves and hires no one is always at hand where it is feasible: no plan
    # handed back may be worse than it (the demo at 2 s had ended at 412.5 where staying
    # put leaves 314.6), and branch and bound with nothing better starts from it.
    floor = (stay_put_plan(backend, model, objective, options, deadline, say, hint_split)
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
            # Its lines show the stage's bound found so far, not the trimming's own.
            start = trimmed(backend, model, objective, extra_rows,
                            replace(options, known_bound=lp_bound), start,
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
                    start, lp_bound = first.x, higher_bound(lp_bound, first.bound)
                    rounding_lp_seconds, cost_bound = first.lp_seconds, first.cost_bound
            else:
                start, lp_bound = first_plan_from_lp(backend, model, objective, extra_rows,
                                                     options, deadline, start, say)
        left = deadline - time.perf_counter()
        if bound_after and start is not None and lp_bound is None:
            lp_bound = stage_bounds.relaxation_bound(backend, model, objective, extra_rows,
                                                     options, left, say,
                                                     "after the passes, for the bound")
            left = deadline - time.perf_counter()
        start = better_plan(objective, start, floor)  # the search starts from the better
        if passes_only and start is not None:
            say(f"  no search of the whole model: {model.matrix.nnz:,} nonzeros, more than "
                "branch and bound can use in the time")
            out = not_searched("whole-model search not started")
        elif bound_after and left < MIN_SEARCH_SECONDS:
            out = not_searched("no time left to search the whole model")
        else:
            # Easy large models still get proven here; the LP bound above joins its bound.
            known = higher_bound(lp_bound, OBJECTIVE_FLOOR)
            # With no plan yet there is nothing for a cost stage to start from: until its
            # first plan this search may use the cost stage's time too.
            overtime = (max(cost_stage_deadline - deadline, 0.0)
                        if start is None and cost_stage_deadline is not None else 0.0)
            out = backend.run(model, objective, extra_rows,
                              replace(options, known_bound=known,
                                      overtime_without_plan=overtime), left, start)
        if bound_on_side is not None:
            lp_bound = higher_bound(lp_bound, bound_on_side.result())
    if carried.cost_bound is not None and extra_rows:
        lp_bound = higher_bound(lp_bound, _bound_worked_out_ahead(carried.cost_bound,
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
                             higher_bound(lp_bound, proved), out.words, out.seconds)
    elif (out.x is not None and out.objective is not None and start_value is not None
          and start_value < out.objective - 1e-9 * max(1.0, abs(out.objective))):
        say(f"  keeping the plan of {progress_value(start_value)}: the search's best, "
            f"{progress_value(out.objective)}, is worse")
        out = replace(out, x=start, objective=start_value, status=Status.FEASIBLE_WITH_GAP)
    elif out.status.has_plan and out.status is not Status.OPTIMAL:
        # A run killed at the wall clock hands back its plan without a bound.
        out = replace(out, bound=higher_bound(out.bound, lp_bound))
    out = with_floor(bound_checked(out, lp_bound, options.relative_gap, say),
                      options.relative_gap)
    seconds = time.perf_counter() - t0
    return replace(out, seconds=seconds), CarriedOver(
        rounding_lp_seconds, cost_bound, None if floor is None else float(objective @ floor))


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
    say(f"  bound from beside stage 1's search, for the shortfall held at {progress_value(held)}: "
        f"{progress_value(bound)}")
    return bound


# Above this many columns the first stage starts from its passes, whose plans are far better
# than staying put, and the extra solve would only take time.
STAY_PUT_MAX_COLUMNS = 200_000


def _breaks(model: Model, out: BackendOutcome, held: float) -> bool:
    """Whether ``out``'s plan leaves more weighted shortfall than ``held``, beyond noise."""
    return out.x is not None and float(model.shortfall_weight @ out.x) > held + 1e-9 * max(
        1.0, held)


def _unimproved(model: Model, first: BackendOutcome, bound: float | None,
                words: str) -> BackendOutcome:
    """The cost stage's outcome where it kept stage 1's plan: that plan's cost, bounded by
    ``bound`` or else only by 0 (no cost is negative)."""
    assert first.x is not None
    return BackendOutcome(Status.FEASIBLE_WITH_GAP, first.x, float(model.cost @ first.x),
                          bound if bound is not None else 0.0, words, 0.0)


def _stage(name: str, out: BackendOutcome) -> StageResult:
    # No bound above the stage's plan reaches a report, from whichever path it came.
    out = bound_checked(out, None, 0.0)
    return StageResult(name, out.status, out.objective, out.bound,
                       relative_gap(out.objective, out.bound) if out.status.has_plan else None,
                       out.seconds, out.words)


def _finish(model: Model, backend: Backend, options: SolveOptions, stages: list[StageResult],
            last: BackendOutcome, started: float, deadline: float,
            final_status: Status | None = None, instance: Instance | None = None,
            staying_put: float | None = None) -> SolveResult:
    status = final_status or last.status
    if status is Status.OPTIMAL and any(s.status is not Status.OPTIMAL for s in stages):
        status = Status.FEASIBLE_WITH_GAP  # as the stages are recorded: verify checks it
    conflicts: tuple[str, ...] = ()
    if status is Status.INFEASIBLE:
        # At least a second, so that a run out of time can still name the limits: past the
        # deadline by that at most (it had been 5 s).
        conflicts = tuple(find_conflicts(model, backend, options,
                                         max(1.0, deadline - time.perf_counter()), instance))
        if not conflicts:
            # Every limit held with nothing relaxed: the model is feasible and the verdict
            # was the solver's numerics (CBC with shortfall_cost 1e100, from a sweep).
            status = Status.ERROR
            conflicts = (f"{backend.name} called the model infeasible, but every limit holds "
                         "in a plan found with nothing relaxed: a numerical failure of the "
                         "solver (are some numbers extremely large?); try the other solver",)
    return SolveResult(status, last.x if status.has_plan else None, tuple(stages),
                       backend.name, backend.version(), time.perf_counter() - started, conflicts,
                       staying_put)
