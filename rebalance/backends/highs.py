"""HiGHS through highspy: the model handed over as arrays, stopped at our own wall clock
(in a child process above a toy's size), progress reported while it searches."""

from __future__ import annotations

import math
import os
import sys
import time
from collections.abc import Callable
from dataclasses import replace
from typing import Any

import numpy as np

from rebalance.backends.common import (
    KILLED,
    PROGRESS_SECONDS,
    BackendOutcome,
    BoundSink,
    PlanSink,
    SolveOptions,
    Status,
    search_line,
)
from rebalance.backends.processes import raise_if_stopped, run_in_child, stopped
from rebalance.backends.rows import scaled_rows
from rebalance.model import Model

_HIGHS_BANNER_SHOWN = False


def silent_highs() -> Any:
    """A silent Highs object; the first one made in a process prints a banner to fd 1."""
    import highspy

    global _HIGHS_BANNER_SHOWN
    if _HIGHS_BANNER_SHOWN:
        h = highspy.Highs()
    else:
        sys.stdout.flush()
        saved, devnull = os.dup(1), os.open(os.devnull, os.O_WRONLY)
        try:
            os.dup2(devnull, 1)
            h = highspy.Highs()
        finally:
            os.dup2(saved, 1)
            os.close(saved)
            os.close(devnull)
        _HIGHS_BANNER_SHOWN = True
    h.setOptionValue("output_flag", False)
    return h


def _watch_highs(h: Any, deadline: float, progress: Callable[[str], None] | None,
                 on_plan: PlanSink | None = None, on_bound: BoundSink | None = None,
                 known_bound: float | None = None, overtime: float = 0.0,
                 part_of_stage: bool = False) -> None:
    """Stop HiGHS at our own wall-clock deadline (it can overrun its time limit during root
    work), or up to ``overtime`` seconds later while it has no plan; report best plan, bound
    and gap every few seconds while it searches, hand each better plan to ``on_plan`` and a
    risen bound to ``on_bound`` (at most every second)."""
    last = [0.0]
    bound_sent = [-math.inf, 0.0]  # the bound last handed on, and when
    # The best plan said so far: HiGHS 1.16 has been seen to report a far worse incumbent
    # for a moment (4,623 after 1,650.6, in one office group's search on medium).
    best_said = [math.inf]

    def interrupt(event: Any) -> None:
        now = time.perf_counter()
        if stopped() or (now > deadline and (
                now > deadline + overtime or math.isfinite(event.data_out.mip_primal_bound))):
            event.interrupt()
        if progress is not None and now - last[0] >= PROGRESS_SECONDS:
            out = event.data_out
            if math.isfinite(out.mip_primal_bound) and math.isfinite(out.mip_dual_bound):
                last[0] = now
                best = best_said[0] = min(best_said[0], out.mip_primal_bound)
                progress(search_line(best, out.mip_dual_bound, out.mip_node_count,
                                     known_bound, part_of_stage))

    def mip_interrupt(event: Any) -> None:
        interrupt(event)
        # Read in the search's own events only: there the bound is the search's.
        bound = event.data_out.mip_dual_bound
        now = time.perf_counter()
        if (on_bound is not None and math.isfinite(bound) and bound > bound_sent[0]
                and now - bound_sent[1] >= BOUND_SECONDS):
            bound_sent[:] = [bound, now]
            on_bound(float(bound))

    h.cbSimplexInterrupt += interrupt
    h.cbIpmInterrupt += interrupt
    h.cbMipInterrupt += mip_interrupt
    if on_plan is not None:
        # HiGHS hands the plan over in the model's own columns (after postsolve).
        h.cbMipImprovingSolution += lambda event: on_plan(
            np.asarray(event.data_out.mip_solution), float(event.data_out.objective_function_value))


BOUND_SECONDS = 1.0
# Pure LPs above this many columns go to the interior point method: the medium benchmark's
# stage-one relaxation (104k columns) takes 62 s that way and over 120 s with dual simplex.
IPM_LP_COLUMNS = 30_000
# A large LP wanted for its point only goes to PDLP, stopped at this relative tolerance on
# feasibility and optimality: agency's rounding LP (786k columns) takes 24.6 s that way to
# 6,572.5, against 61.5 s by interior point to its optimum of 6,571.8; medium's 3.2 s
# against 5.4 s.  At PDLP's own default (1e-7) it had not stopped after 100 s.
POINT_ONLY_TOLERANCE = 1e-3


# HiGHS answers its interrupt callback during simplex, interior point and branch and bound,
# but not everywhere in presolve: on the agency benchmark (6.8M nonzeros) presolve ran 170 s
# past the limit, and on the small one (10k columns) the presolve of a restart deep in the
# search (HPresolve::strengthenInequalities, HiGHS 1.16) ran on for over 13 minutes past a
# 1,500 s limit.  So every MIP run above a toy's size, and every LP above HARD_STOP_NONZEROS,
# goes to a child process that is killed at the wall-clock limit, HiGHS being told to stop a
# grace before (more for large models, which take longer to hand back after an interrupt).
# Toy MIPs (the test suite's: 227 nonzeros, solved in milliseconds) stay in process, where
# forking would cost more than the solve (tiny: 34 ms in process, 120 ms in children).
HARD_STOP_NONZEROS = 500_000
CHILD_MIP_NONZEROS = 5_000
HIGHS_GRACE_SECONDS = 3.0
SMALL_GRACE_SECONDS = 0.5


class HighsBackend:
    name = "highs"
    reruns_cheaply = True

    def version(self) -> str:
        return f"HiGHS {silent_highs().version()}"

    def run(self, model: Model, objective: np.ndarray, extra_rows: list[tuple[np.ndarray, float]],
            options: SolveOptions, time_limit: float, start: np.ndarray | None) -> BackendOutcome:
        large = model.matrix.nnz >= HARD_STOP_NONZEROS
        if not large and (not model.num_integer or model.matrix.nnz < CHILD_MIP_NONZEROS):
            return self._run_here(model, objective, extra_rows, options, time_limit, start)
        # HiGHS stops itself a grace before the kill, so the kill keeps the caller's limit.
        grace = HIGHS_GRACE_SECONDS if large else SMALL_GRACE_SECONDS
        own_limit = max(time_limit - grace, 0.5 * time_limit)
        out = run_in_child(
            lambda opts, on_plan, on_bound: self._run_here(model, objective, extra_rows, opts,
                                                           own_limit, start, on_plan, on_bound),
            options, time_limit + options.overtime_without_plan)
        if out.x is not None and out.killed:
            # A plan handed over before the kill: score it here rather than trust the claim.
            out = replace(out, objective=float(objective @ out.x))
        return out

    def _run_here(self, model: Model, objective: np.ndarray,
                  extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                  time_limit: float, start: np.ndarray | None,
                  on_plan: PlanSink | None = None,
                  on_bound: BoundSink | None = None) -> BackendOutcome:
        import highspy

        started = time.perf_counter()
        matrix, row_lo, row_hi, row_scale = scaled_rows(model, extra_rows)
        csc = matrix.tocsc()
        lp = highspy.HighsLp()
        lp.num_col_ = model.num_cols
        lp.num_row_ = int(row_lo.size)
        lp.col_cost_ = objective.astype(float)
        lp.col_lower_ = model.col_lower
        lp.col_upper_ = model.col_upper
        lp.row_lower_ = row_lo
        lp.row_upper_ = row_hi
        lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
        lp.a_matrix_.start_ = csc.indptr.astype(np.int32)
        lp.a_matrix_.index_ = csc.indices.astype(np.int32)
        lp.a_matrix_.value_ = csc.data
        lp.integrality_ = [
            highspy.HighsVarType.kInteger if i else highspy.HighsVarType.kContinuous
            for i in model.is_integer
        ]
        h = silent_highs()
        # Its own limit is the latest stop; our callback stops it sooner once it has a plan.
        h.setOptionValue("time_limit", float(max(time_limit, 0.05))
                         + options.overtime_without_plan)
        h.setOptionValue("mip_rel_gap", float(options.relative_gap))
        h.setOptionValue("random_seed", int(options.seed))
        h.passModel(lp)
        point_only = (options.point_only and not model.num_integer
                      and model.num_cols > IPM_LP_COLUMNS)
        if point_only:
            h.setOptionValue("solver", "pdlp")
            for name in ("pdlp_optimality_tolerance", "primal_feasibility_tolerance",
                         "dual_feasibility_tolerance"):
                h.setOptionValue(name, POINT_ONLY_TOLERANCE)
        elif not model.num_integer and model.num_cols > IPM_LP_COLUMNS:
            # A bound or a point to round is all a large LP is wanted for here: no vertex,
            # so no crossover.
            h.setOptionValue("solver", "ipm")
            h.setOptionValue("run_crossover", "off")
        found: list[np.ndarray] = []  # the last plan HiGHS handed to its callback

        def keep(x: np.ndarray, objective_value: float) -> None:
            found[:] = [x]
            if on_plan is not None:
                on_plan(x, objective_value)

        _watch_highs(h, started + max(time_limit, 0.05), options.progress,
                     keep if model.num_integer else on_plan, on_bound, options.shown_bound(),
                     options.overtime_without_plan, options.part_of_stage)
        if start is not None:
            solution = highspy.HighsSolution()
            solution.col_value = list(start)
            solution.value_valid = True
            h.setSolution(solution)
        h.run()
        raise_if_stopped()
        status = h.getModelStatus()
        if (status == highspy.HighsModelStatus.kUnknown and not model.num_integer
                and not point_only and h.getInfo().primal_solution_status == 2
                and time.perf_counter() - started < time_limit):
            # Seen at agency scale with the integer decisions fixed: the interior point is
            # optimal until postsolve finds a dual violation and HiGHS withdraws the claim.
            # Crossover makes it a vertex it can prove (3.7 s there, against 1.9 s without).
            h.setOptionValue("run_crossover", "on")
            h.setOptionValue("time_limit", float(max(time_limit - (time.perf_counter()
                                                                    - started), 0.05)))
            h.run()
            status = h.getModelStatus()
        info = h.getInfo()
        # Only our own callback interrupts HiGHS, at our wall-clock limit; its words for that
        # ("Interrupted by user") read to a planner as if someone had stopped the run.
        words = (KILLED if status == highspy.HighsModelStatus.kInterrupt
                 else h.modelStatusToString(status))
        has_solution = info.primal_solution_status == 2  # kSolutionStatusFeasible
        x = np.asarray(h.getSolution().col_value) if has_solution else None
        obj = float(info.objective_function_value) if has_solution else None
        # Any prices give a valid bound (rebalance.bounds), so the LP's are kept even where
        # HiGHS does not vouch for their feasibility.
        row_dual = (np.asarray(h.getSolution().row_dual) * row_scale
                    if not model.num_integer and info.dual_solution_status != 0 else None)
        bound = float(info.mip_dual_bound) if model.num_integer else obj
        MS = highspy.HighsModelStatus
        if status == MS.kOptimal:
            mapped = Status.OPTIMAL
        elif status in (MS.kInfeasible,):
            mapped = Status.INFEASIBLE
        elif status in (MS.kTimeLimit, MS.kIterationLimit, MS.kSolutionLimit,
                        MS.kInterrupt):
            mapped = Status.FEASIBLE_WITH_GAP if has_solution else Status.NO_PLAN_IN_TIME
        elif status in (MS.kUnbounded, MS.kUnboundedOrInfeasible, MS.kSolveError,
                        MS.kModelError, MS.kPresolveError, MS.kPostsolveError,
                        MS.kMemoryLimit):
            mapped = Status.ERROR
        else:
            mapped = Status.UNKNOWN
        if mapped is Status.OPTIMAL and not has_solution:
            mapped = Status.UNKNOWN
        if point_only and has_solution and status in (MS.kOptimal, MS.kUnknown):
            # HiGHS checks PDLP's point against its tolerances after postsolve and says
            # "unknown" when they are missed by a little; the point is what was asked for.
            mapped, bound = Status.APPROXIMATE, None
        # Seen with HiGHS 1.16: given a feasible start, it can report a better objective
        # while handing back the start itself.  Trust a vector, never the claim: the plan its
        # callback handed over where that one scores the claim, else solve again without the
        # start.
        if (x is not None and obj is not None and start is not None
                and not _scores(objective, x, obj)):
            if found and _scores(objective, found[0], obj):
                x = found[0]
            else:
                if options.progress is not None:
                    options.progress("  searching: HiGHS's plan did not match the value it "
                                     "gave; searching again from scratch")
                left = time_limit - (time.perf_counter() - started)
                again = self._run_here(model, objective, extra_rows, options, max(left, 1.0),
                                       None)
                return replace(again, seconds=time.perf_counter() - started)
        return BackendOutcome(mapped, x, obj, bound, words, time.perf_counter() - started,
                              row_dual)


def _scores(objective: np.ndarray, x: np.ndarray, claimed: float) -> bool:
    """Whether plan ``x`` scores ``claimed`` (within the solvers' relative 1e-6)."""
    return abs(float(objective @ x) - claimed) <= 1e-6 * (1.0 + abs(claimed))
