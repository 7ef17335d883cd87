"""Solver backends: HiGHS through highspy and CBC through PuLP, behind one Protocol.

Status is mapped once, here, from each solver's own words to :class:`Status`.  A plan stopped
by a time limit is ``feasible_with_gap``, never ``optimal``: PuLP reports ``Optimal`` for a
CBC run cut short, so its *solution* status is what counts.  Both backends take the model as
arrays, stop at our own wall-clock deadline and report progress while they search.
"""

from __future__ import annotations

import contextlib
import enum
import functools
import hashlib
import math
import multiprocessing
import os
import re
import shlex
import shutil
import signal
import subprocess
import sys
import tempfile
import threading
import time
from collections.abc import Callable, Iterator
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Protocol, TypeVar

import numpy as np
import scipy.sparse as sp

from rebalance.instance import ObjectiveMode, SolverName
from rebalance.model import Model

__all__ = [
    "BACKENDS",
    "Backend",
    "BackendOutcome",
    "SolveOptions",
    "Status",
    "TimeShares",
    "in_background",
    "raise_if_stopped",
    "relative_gap",
    "row_scale",
    "run_in_child",
    "silent_highs",
    "stacked_rows",
    "stoppable",
    "stopped",
]


T = TypeVar("T")


class Status(enum.Enum):
    OPTIMAL = "optimal"
    """Proven optimal within the requested relative gap."""
    FEASIBLE_WITH_GAP = "feasible_with_gap"
    """A plan was found but the solver stopped (time limit) before proving it; see the gap."""
    INFEASIBLE = "infeasible"
    """The hard limits cannot all hold at once; the conflicting limits are listed."""
    NO_PLAN_IN_TIME = "no_plan_in_time"
    """The time limit ran out before any plan was found."""
    ERROR = "error"
    """The solver failed (crashed, ran out of memory, reported an error)."""
    UNKNOWN = "unknown"
    """The solver said something this module does not recognise; treat as no plan."""
    APPROXIMATE = "approximate"
    """An LP's point and row prices within a first-order method's tolerance
    (:attr:`SolveOptions.point_only`): neither a plan nor a bound."""

    @property
    def has_plan(self) -> bool:
        return self in (Status.OPTIMAL, Status.FEASIBLE_WITH_GAP)


@dataclass(frozen=True)
class TimeShares:
    """How a run shares out its time limit.  Each share is of the time left when its step
    starts, except the stages' (of the whole limit).  Tuned on the benchmark machine with one
    seed per size (``docs/benchmarks.md``), so a sweep may vary them like any other input."""

    stage1: float = 0.7
    """The shortfall stage; the cost stage gets the rest."""
    stage1_large: float = 0.88
    """The same for large models, whose first plan and bound need the time (on medium the
    search near the LP improves for 50 s, and with two threads the LP beside it takes 92-95
    s of 120: at 0.85 it finished with a second to spare); stage 2 there needs about 7 s for
    its bound and 3 s to trim the plan (agency: trimming found nothing in 20-31 s once the
    groups had run)."""
    stage1_passes_only: float = 0.95
    """The same for models too large for branch and bound on the whole model (agency,
    large), whose stage 1 hangs on one LP and then improves a few offices at a time while
    stage 2 only trims the plan (its bound is worked out beside stage 1).  Set when agency's
    rounding LP took 60-74 s by interior point and 0.88 stopped it through the command line
    at 120 s; by PDLP it takes 25-28 s, and the groups use the time instead (6,902.6 at
    120 s)."""
    lp: float = 0.35
    """A stage's LP relaxation (models up to 30,000 columns)."""
    rens: float = 0.3
    """The rounding neighbourhood search after that LP."""
    passes: float = 0.97
    """A large model's decision-by-decision passes; branch and bound on the whole model gets
    the rest, and all of it where the passes end early (an easy model is proven there).  On
    medium that search found nothing in its 8.6 s at 0.8 (no bound either), where two more
    office groups took stage 1 from 1,633.8 to 1,628.6 and 1,627.3 (seed 0) and from
    2,284.3 to 2,283.4 (seed 1), 60 s runs with two threads."""
    hires: float = 0.25
    """The hires pass (on large it spent 178 s going from 1.28% to 0.09% of its own bound)."""
    rounding: float = 0.97
    """The rounding after it (on agency 8,705 -> 7,376 where a details MIP found nothing).
    A cap, like the LP's below: at agency's 120 s its LP (57-66 s) had been stopped at 59 s
    with 0.8 and 0.9, leaving only the hires pass's plan, and through the command line
    (which keeps time for writing files) at 66 s with 0.9 and 0.95."""
    rounding_lp: float = 0.95
    """Of the rounding's time, its LP; the work split after it takes seconds."""
    near_whole: float = 0.5
    """Of the time after the rounding, the search of the whole neighbourhood of its LP (up to
    3 million nonzeros; above, none); the search a few offices at a time gets the rest."""
    priced_bound: float = 0.5
    """The bound from the rounding LP's prices (medium 2 s, agency 19 s), with one thread;
    with two it runs beside the search until the stage ends."""
    held_bound: float = 0.7
    """Stage 2 of a large model: the bound from an LP with homes held (medium 6.6 s), where
    stage 1's rounding LP says it can finish."""
    held_lp: float = 0.8
    """Of that, the LP."""
    trim: float = 0.9
    """Stage 2 of a large model, after that bound: dropping what stage 1's plan does not
    need (medium: 1.8% off the cost in about 11 s, of 16 s left; with 0.7 of them a loaded
    machine missed it; agency 5.4% in 23 s).  What follows it found nothing cheaper."""
    finish: float = 0.03
    """Of the whole limit, kept for naming people, verifying and writing the plan."""


@dataclass(frozen=True)
class SolveOptions:
    """How to solve: one small frozen object instead of many keyword arguments."""

    solver: SolverName = "highs"
    time_limit_seconds: float = 300.0
    relative_gap: float = 1e-4
    threads: int = 1
    seed: int = 0
    mode: ObjectiveMode = "shortfall-first"
    shortfall_cost: float = 100_000.0
    shortfall_tolerance: float = 1e-6
    heuristics: bool = True  # LP-guided rounding search before branch and bound
    # An LP wanted for its point and row prices only (the rounding, a bound from prices,
    # both exact whatever the point): HiGHS solves a large one by its first-order method to
    # a relative POINT_ONLY_TOLERANCE, status APPROXIMATE, and its objective bounds nothing.
    point_only: bool = False
    shares: TimeShares = TimeShares()
    progress: Callable[[str], None] | None = field(default=None, compare=False)
    # A bound on the run's objective proven before it (the stage's LP relaxation, or 0):
    # progress lines show the higher of it and the search's own, which starts lower.
    known_bound: float | None = field(default=None, compare=False)
    # Seconds a branch and bound may run past its time limit while it has no plan: stage 1
    # without one would otherwise stop with its cost stage's share unused (CBC on 50 small
    # offices: no plan after 28 s of a 40 s run), and a cost stage needs a plan to start.
    overtime_without_plan: float = field(default=0.0, compare=False)


@dataclass(frozen=True)
class BackendOutcome:
    status: Status
    x: np.ndarray | None
    objective: float | None
    bound: float | None
    words: str
    seconds: float
    # An LP's row prices (duals), model rows then extra rows, where the solver gives them.
    row_dual: np.ndarray | None = None
    # Stopped by our own kill at the wall clock (HiGHS's child, or CBC), not by the solver.
    killed: bool = False


class Backend(Protocol):
    """A MIP solver.  Every method must exist: a Protocol, not a base class with ``pass``."""

    name: str
    # True when a run hands the arrays straight to the solver; False when every run first
    # writes the whole model out (CBC through PuLP), so that many short runs on a large
    # model spend their time writing it (issue 3: medium, 514k columns, ran 300 s over).
    reruns_cheaply: bool

    def version(self) -> str: ...

    def run(self, model: Model, objective: np.ndarray, extra_rows: list[tuple[np.ndarray, float]],
            options: SolveOptions, time_limit: float, start: np.ndarray | None) -> BackendOutcome:
        """Minimise ``objective @ x`` over the model plus ``extra_rows`` (row, upper bound)."""
        ...


def search_line(best: float, bound: float, nodes: int | str, known_bound: float | None) -> str:
    """The progress line of a search: best plan, bound (never below ``known_bound``), gap."""
    if known_bound is not None:
        bound = max(bound, known_bound)
    gap = relative_gap(best, bound)
    return (f"  searching: best plan {best:.6g}, bound {bound:.6g}, gap "
            f"{'undefined' if gap is None else f'{gap:.2%}'}, {nodes} nodes")


def relative_gap(objective: float | None, bound: float | None) -> float | None:
    """Gap as (objective - bound) / |objective|, 0 when both agree to 1e-9 absolute.

    ``None`` where it has no meaning: no bound, or a plan scoring 0 above a lower bound.
    """
    if objective is None or bound is None or not math.isfinite(bound):
        return None
    diff = objective - bound
    if diff <= 1e-9 * max(1.0, abs(objective)):
        return 0.0
    if abs(objective) < 1e-9:
        return None
    return diff / abs(objective)


# --------------------------------------------------------------------------------------------
# HiGHS


_HIGHS_BANNER_SHOWN = False
# Receives each better plan a run finds (columns of the model, objective) as it is found.
PlanSink = Callable[[np.ndarray, float], None]
# Receives a run's bound on the objective whenever it rises, while the run searches.
BoundSink = Callable[[float], None]


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
                 known_bound: float | None = None, overtime: float = 0.0) -> None:
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
        if _STOPPING.is_set() or (now > deadline and (
                now > deadline + overtime or math.isfinite(event.data_out.mip_primal_bound))):
            event.interrupt()
        if progress is not None and now - last[0] >= PROGRESS_SECONDS:
            out = event.data_out
            if math.isfinite(out.mip_primal_bound) and math.isfinite(out.mip_dual_bound):
                last[0] = now
                best = best_said[0] = min(best_said[0], out.mip_primal_bound)
                progress(search_line(best, out.mip_dual_bound, out.mip_node_count,
                                     known_bound))

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


PROGRESS_SECONDS = 5.0
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
# What a stage stopped by our own time limit says, whether its solver was told to stop or
# was killed: one reason, one wording.
KILLED = "stopped at the time limit"


STOPPED = "stopped from outside"
# Set once the run is stopped from outside (Ctrl-C, SIGTERM) within :func:`stoppable`: no
# solver process starts after it, and those running are killed.  Without it a stopped run
# waited for its side jobs to reach their own limits (medium: 15 s; agency: up to a minute).
_STOPPING = threading.Event()
_LIVE_CHILDREN: set[Any] = set()
_LIVE_LOCK = threading.RLock()  # re-entered by the signal handler in the main thread


def stop_everything() -> None:
    """Kill every solver process this process started, and start no more."""
    _STOPPING.set()
    with _LIVE_LOCK:
        children = list(_LIVE_CHILDREN)
    for process in children:
        with contextlib.suppress(Exception):
            process.kill()
    for pid in _cbc_children():
        with contextlib.suppress(OSError):
            os.kill(pid, signal.SIGKILL)


def stopped() -> bool:
    """Whether the run has been stopped from outside."""
    return _STOPPING.is_set()


def raise_if_stopped() -> None:
    """Raise :class:`KeyboardInterrupt` in the main thread once the run has been stopped:
    raised from inside a solver's callback, the signal's own may be swallowed there."""
    if _STOPPING.is_set() and threading.current_thread() is threading.main_thread():
        raise KeyboardInterrupt


@contextlib.contextmanager
def stoppable() -> Iterator[None]:
    """Within: SIGINT and SIGTERM kill every solver process of the run at once
    (:func:`stop_everything`) and raise :class:`KeyboardInterrupt` in the main thread, so
    the run ends in a second or two with nothing written.  Signals reach the main thread
    only, so elsewhere (a solve in a thread of its own) it does nothing."""

    def stop(signum: int, frame: Any) -> None:
        stop_everything()
        raise KeyboardInterrupt

    if threading.current_thread() is not threading.main_thread():
        yield
        return
    _STOPPING.clear()
    before = {sig: signal.signal(sig, stop) for sig in (signal.SIGINT, signal.SIGTERM)}
    try:
        yield
    finally:
        for sig, handler in before.items():
            signal.signal(sig, handler)


def _forget_solver_threads() -> None:
    """In a forked child: drop HiGHS's scheduler, whose worker threads stayed in the parent
    (left alone, the child's first run waits on them forever)."""
    import highspy

    highspy.Highs.resetGlobalScheduler(False)


def run_in_child(run: Callable[[SolveOptions, PlanSink, BoundSink], BackendOutcome],
                  options: SolveOptions, wall_seconds: float) -> BackendOutcome:
    """``run(options, on_plan, on_bound)`` in a forked child; its outcome, or, once
    ``wall_seconds`` have passed (the child is killed then), the last plan it handed to
    ``on_plan`` as ``FEASIBLE_WITH_GAP``, or ``NO_PLAN_IN_TIME``, either with the highest
    bound it handed to ``on_bound`` (a bound found on the way holds: it is only weaker than
    the one the run would have ended with).

    Progress lines and plans come back through one pipe, so the caller's ``progress`` sees
    them in this process.  A child that dies (out of memory, a crash in the solver) gives
    ``ERROR`` instead of taking the whole run down with it.
    """
    started = time.perf_counter()
    if _STOPPING.is_set():
        return BackendOutcome(Status.ERROR, None, None, None, STOPPED, 0.0)
    context = multiprocessing.get_context("fork")
    receiver, sender = context.Pipe(duplex=False)

    def child() -> None:
        # The parent's handlers would kill its other children from here.
        signal.signal(signal.SIGINT, signal.default_int_handler)
        signal.signal(signal.SIGTERM, signal.SIG_DFL)

        def forward(text: str) -> None:
            sender.send(("progress", text))

        def hand_over(x: np.ndarray, objective: float) -> None:
            sender.send(("plan", (x, objective)))

        def bound_rose(bound: float) -> None:
            sender.send(("bound", bound))

        try:
            _forget_solver_threads()
            out = run(replace(options, progress=None if options.progress is None else forward),
                      hand_over, bound_rose)
            sender.send(("outcome", out))
        except BaseException as exc:  # the parent must hear of any failure, then exit
            sender.send(("failed", f"{type(exc).__name__}: {exc}"))
        finally:
            sender.close()

    process = context.Process(target=child, daemon=True)
    process.start()
    with _LIVE_LOCK:
        _LIVE_CHILDREN.add(process)
    sender.close()
    outcome: BackendOutcome | None = None
    last_plan: tuple[np.ndarray, float] | None = None
    best_bound: float | None = None
    failure = ""
    try:
        while outcome is None and not failure:
            left = started + wall_seconds - time.perf_counter()
            if left <= 0 or _STOPPING.is_set():
                break
            if not receiver.poll(min(left, 1.0)):
                if not process.is_alive() and not receiver.poll():
                    break  # ended without a word: killed by the system
                continue
            try:
                kind, payload = receiver.recv()
            except EOFError:
                break
            if kind == "progress":
                if options.progress is not None:
                    options.progress(payload)
            elif kind == "plan":
                last_plan = payload
            elif kind == "bound":
                best_bound = payload if best_bound is None else max(best_bound, payload)
            elif kind == "outcome":
                outcome = payload
            else:
                failure = payload
    finally:
        with _LIVE_LOCK:
            _LIVE_CHILDREN.discard(process)
        if process.is_alive():
            process.kill()
        process.join()
        receiver.close()
    seconds = time.perf_counter() - started
    raise_if_stopped()
    if _STOPPING.is_set() and outcome is None:
        return BackendOutcome(Status.ERROR, None, None, None, STOPPED, seconds)
    if outcome is not None:
        return replace(outcome, seconds=seconds)
    if failure:
        return BackendOutcome(Status.ERROR, None, None, None, failure, seconds)
    if last_plan is not None:
        x, objective = last_plan
        return BackendOutcome(Status.FEASIBLE_WITH_GAP, x, objective, best_bound, KILLED,
                              seconds, killed=True)
    if process.exitcode not in (0, -signal.SIGKILL) or seconds < wall_seconds:
        return BackendOutcome(Status.ERROR, None, None, None,
                              f"the solver process ended with code {process.exitcode}",
                              seconds)
    return BackendOutcome(Status.NO_PLAN_IN_TIME, None, None, best_bound, KILLED, seconds,
                          killed=True)


def in_background(run: Callable[..., T], *args: Any,
                  after: Future[Any] | None = None) -> Future[T]:
    """``run(*args)`` started in a thread of its own, once ``after`` (where given) is done;
    the caller goes on and reads the result from the future.  For steps whose solver runs
    in a child process or lets go of Python while it solves, so the thread only waits."""

    def when_ready() -> T:
        if after is not None:
            after.result()
        return run(*args)

    pool = ThreadPoolExecutor(max_workers=1)
    future = pool.submit(when_ready)
    pool.shutdown(wait=False)  # the step runs on; its result waits for it
    return future


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
        matrix, row_lo, row_hi, row_scale = _stack(model, extra_rows)
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
                     keep if model.num_integer else on_plan, on_bound, options.known_bound,
                     options.overtime_without_plan)
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
                    options.progress(f"  searching: HiGHS claimed {obj:.6g} but handed back a "
                                     "plan that does not score it; searching again without "
                                     "the start")
                left = time_limit - (time.perf_counter() - started)
                again = self._run_here(model, objective, extra_rows, options, max(left, 1.0),
                                       None)
                return replace(again, seconds=time.perf_counter() - started)
        return BackendOutcome(mapped, x, obj, bound, words, time.perf_counter() - started,
                              row_dual)


def _scores(objective: np.ndarray, x: np.ndarray, claimed: float) -> bool:
    """Whether plan ``x`` scores ``claimed`` (within the solvers' relative 1e-6)."""
    return abs(float(objective @ x) - claimed) <= 1e-6 * (1.0 + abs(claimed))


# --------------------------------------------------------------------------------------------
# CBC through PuLP


_CBC_RESULT = re.compile(r"^Result - (.*)$", re.M)
_CBC_OBJECTIVE = re.compile(r"^Objective value:\s*(\S+)", re.M)
_CBC_BOUND = re.compile(r"^Lower bound:\s*(\S+)", re.M)


_CBC_PROGRESS = re.compile(
    r"Cbc0010I After (\d+) nodes, \d+ on tree, (\S+) best solution, best possible (\S+)")


_CBC_PLAN = re.compile(r"Cbc0012I Integer solution of (\S+)")
# Any plan CBC has found, by a heuristic (0012I) or in the tree (0004I).
_CBC_ANY_PLAN = re.compile(r"Cbc00(?:04|12)I Integer solution of")
# How often a run in overtime looks for its first plan in CBC's log.
OVERTIME_POLL_SECONDS = 0.5


class _CbcLogWatcher:
    """Reads CBC's log while it runs and reports best plan, bound and gap."""

    def __init__(self, path: Path, progress: Callable[[str], None] | None,
                 known_bound: float | None = None) -> None:
        self.path = path
        self.progress = progress
        self.known_bound = known_bound
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def start(self) -> None:
        if self.progress is not None:
            self._thread.start()

    def stop(self) -> None:
        self._stop.set()
        if self._thread.is_alive():
            self._thread.join(timeout=2.0)

    def _run(self) -> None:
        assert self.progress is not None
        seen_plan = ""
        seen_progress: tuple[str, str, str] = ("", "", "")
        while not self._stop.wait(PROGRESS_SECONDS):
            try:
                text = self.path.read_text(errors="replace")
            except OSError:
                continue
            found = _CBC_PROGRESS.findall(text)
            plans = _CBC_PLAN.findall(text)
            if not found and plans and plans[-1] != seen_plan:
                seen_plan = plans[-1]
                self.progress(f"  searching: plan found with {float(seen_plan):.6g}")
            elif found and found[-1] != seen_progress:
                seen_progress = found[-1]
                nodes, best, bound = seen_progress
                self.progress(search_line(float(best), float(bound), nodes, self.known_bound))


# Past its own limit CBC is asked to stop after this grace, and killed as long after that:
# a sweep measured 1.4 s past a 3 s limit with 1 s each.
CBC_GRACE_SECONDS = 0.5
CBC_STOP_SECONDS = 0.5


class _Deadline:
    """Stops this process's CBC children at a wall-clock deadline (Linux: found via /proc),
    or up to ``overtime`` seconds later while CBC's log at ``log`` shows no plan yet."""

    def __init__(self, deadline: float, overtime: float = 0.0, log: Path | None = None) -> None:
        self.deadline = deadline
        self.overtime = overtime if log is not None else 0.0
        self.log = log
        self.fired = False
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def start(self) -> None:
        self._thread.start()

    def stop(self) -> None:
        self._stop.set()
        self._thread.join(timeout=2.0)

    def _has_plan(self) -> bool:
        try:
            return self.log is not None and bool(_CBC_ANY_PLAN.search(self.log.read_text(
                errors="replace")))
        except OSError:
            return False

    def _run(self) -> None:
        if self._stop.wait(max(0.0, self.deadline - time.perf_counter())):
            return
        latest = self.deadline + self.overtime
        while time.perf_counter() < latest and not self._has_plan():
            if self._stop.wait(min(OVERTIME_POLL_SECONDS, latest - time.perf_counter())):
                return
        self.fired = True
        for sig, wait in ((signal.SIGINT, CBC_STOP_SECONDS), (signal.SIGKILL, 0.0)):
            children = _cbc_children()
            if not children:
                return
            for pid in children:
                with contextlib.suppress(OSError):
                    os.kill(pid, sig)
            if self._stop.wait(wait):
                return


def _cbc_children() -> list[int]:
    me = str(os.getpid())
    found = []
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields = stat.read_text().split(") ")[-1].split()
            name = stat.read_text().split("(")[1].split(")")[0]
        except (OSError, IndexError):
            continue
        if fields[1] == me and name.startswith("cbc"):
            found.append(int(stat.parent.name))
    return found


def _bundled_cbc() -> str:
    from pulp.apis import coin_api

    return str(coin_api.COIN_CMD.executableExtension(coin_api.pulp_cbc_path))


@functools.cache
def _cbc_launcher() -> str:
    """The bundled CBC behind coreutils' ``stdbuf -oL``, so that each line it prints reaches
    its log at once: written to a file, C's standard output is held back in 4 KiB blocks, and
    the progress lines and the check for a first plan (``_Deadline``) saw nothing until CBC
    ended (a sweep: the demo's log stayed empty from 3 s to 19 s). Where ``stdbuf`` is missing
    (not Linux) or the launcher cannot run (a temporary folder mounted noexec), CBC itself.

    The launcher lives in a folder of this user's, under a name from the two paths, and is
    kept: every process finds it there, and none leaves one behind (pool workers ended by a
    stop had left a folder each)."""
    cbc = _bundled_cbc()
    stdbuf = shutil.which("stdbuf")
    getuid = getattr(os, "getuid", None)
    if stdbuf is None or getuid is None:
        return cbc
    folder = Path(tempfile.gettempdir()) / f"rebalance-cbc-launcher-{getuid()}"
    try:
        folder.mkdir(mode=0o700, exist_ok=True)
        owned = folder.stat()
        if owned.st_uid != getuid() or owned.st_mode & 0o077:
            return cbc  # not this user's alone: run nothing from it
        digest = hashlib.sha256(f"{stdbuf}\0{cbc}".encode()).hexdigest()[:16]
        launcher = folder / f"cbc-lines-{digest}"
        if not launcher.is_file():
            staged = folder / f".{launcher.name}.{os.getpid()}"
            staged.write_text(f"#!/bin/sh\nexec {shlex.quote(stdbuf)} -oL -eL "
                              f'{shlex.quote(cbc)} "$@"\n')
            staged.chmod(0o700)
            os.replace(staged, launcher)  # whole or not at all, whoever writes it
        ok = subprocess.run([str(launcher), "-quit"], capture_output=True, timeout=10,
                            check=False).returncode == 0
    except (OSError, subprocess.SubprocessError):
        ok = False
    return str(launcher) if ok else cbc


# PuLP builds and writes CBC's model in Python, which no signal to CBC can stop: the run
# checks the clock every so many rows while building, and starts CBC only with time for PuLP to
# write the model and CBC to search (the medium benchmark's person-level case at a 60 s limit
# had run for over 210 s, building and writing 514k columns again for each of its runs).
CBC_CHECK_ROWS = 2_000
CBC_WRITE_PER_BUILD = 1.5  # medium, pooled: 2.4 s building, 3.3 s writing (measured)
# CBC solves the test suite's tiny instance in 0.05 s: at a 2 s limit it had been given up
# on with 0.5 s left ("no plan within the time limit", exit 5, even for an infeasible one).
MIN_CBC_SECONDS = 0.2


def _cbc_out_of_time(started: float, words: str) -> BackendOutcome:
    return BackendOutcome(Status.NO_PLAN_IN_TIME, None, None, None, words,
                          time.perf_counter() - started)


class CbcBackend:
    name = "cbc"
    reruns_cheaply = False

    def version(self) -> str:
        import pulp

        return f"CBC (bundled with PuLP {pulp.__version__})"

    def run(self, model: Model, objective: np.ndarray, extra_rows: list[tuple[np.ndarray, float]],
            options: SolveOptions, time_limit: float, start: np.ndarray | None) -> BackendOutcome:
        import pulp

        started = time.perf_counter()
        deadline = started + time_limit
        matrix, row_lo, row_hi, _ = _stack(model, extra_rows)
        prob = pulp.LpProblem("rebalance", pulp.LpMinimize)
        # Names from integer indices: PuLP merges names that differ only in punctuation.
        variables = [
            prob.add_variable(
                f"x{j}",
                lowBound=None if not math.isfinite(lo) else float(lo),
                upBound=None if not math.isfinite(hi) else float(hi),
                cat=pulp.LpInteger if integer else pulp.LpContinuous,
            )
            for j, (lo, hi, integer) in enumerate(
                zip(model.col_lower, model.col_upper, model.is_integer, strict=True))
        ]
        nz = np.flatnonzero(objective)
        prob.setObjective(pulp.LpAffineExpression(
            [(variables[j], float(objective[j])) for j in nz]))
        csr = matrix.tocsr()
        for i in range(csr.shape[0]):
            if i % CBC_CHECK_ROWS == 0 and time.perf_counter() > deadline:
                return _cbc_out_of_time(started, "building the model for CBC took the time")
            lo_i, hi_i = row_lo[i], row_hi[i]
            a, z = csr.indptr[i], csr.indptr[i + 1]
            terms = [(variables[j], float(v))
                     for j, v in zip(csr.indices[a:z], csr.data[a:z], strict=True)]
            if not terms:
                continue  # constant rows are checked before any backend runs
            if lo_i == hi_i:
                prob.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(terms),
                                                     pulp.LpConstraintEQ, rhs=float(hi_i)),
                                   name=f"e{i}")
                continue
            if math.isfinite(hi_i):
                prob.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(terms),
                                                     pulp.LpConstraintLE, rhs=float(hi_i)),
                                   name=f"u{i}")
            if math.isfinite(lo_i):
                prob.addConstraint(pulp.LpConstraint(pulp.LpAffineExpression(terms),
                                                     pulp.LpConstraintGE, rhs=float(lo_i)),
                                   name=f"l{i}")
        if start is not None:
            start = np.clip(start, model.col_lower, model.col_upper)
            start = np.where(model.is_integer, np.rint(start), start)
            for var, value in zip(variables, start, strict=True):
                var.setInitialValue(float(value))
        # PuLP then writes the model out for CBC term by term, which takes longer than building
        # it; the guard below cannot stop Python, so start only with that time left.
        writing = CBC_WRITE_PER_BUILD * (time.perf_counter() - started)
        if deadline - time.perf_counter() < max(MIN_CBC_SECONDS, writing):
            return _cbc_out_of_time(started, "no time left to run CBC after building its model")
        with tempfile.TemporaryDirectory(prefix="rebalance-cbc-") as tmp:
            log_path = Path(tmp) / "cbc.log"
            # The CBC binary bundled with PuLP, driven through COIN_CMD (PULP_CBC_CMD is
            # deprecated in PuLP 3.3).
            solver = pulp.COIN_CMD(
                path=_cbc_launcher(),
                msg=False,
                # PuLP's building, and its writing the model out, use part of the allowance.
                timeLimit=max(1.0, deadline + options.overtime_without_plan
                              - time.perf_counter() - writing),
                gapRel=options.relative_gap,
                threads=options.threads,
                warmStart=start is not None,
                logPath=str(log_path),
                options=[f"randomCbcSeed {options.seed + 1}"],
            )
            solver.tmpDir = tmp  # each solve its own folder
            watcher = _CbcLogWatcher(log_path, options.progress, options.known_bound)
            # CBC can overrun its -sec limit in preprocessing; past our deadline it is asked to
            # stop (SIGINT: it keeps its best plan), and killed if it does not.
            guard = _Deadline(started + time_limit + CBC_GRACE_SECONDS,
                              options.overtime_without_plan, log_path)
            try:
                watcher.start()
                guard.start()
                prob.solve(solver)
            except pulp.PulpSolverError as exc:
                if guard.fired:
                    return BackendOutcome(Status.NO_PLAN_IN_TIME, None, None, None, KILLED,
                                          time.perf_counter() - started, killed=True)
                return BackendOutcome(Status.ERROR, None, None, None, str(exc),
                                      time.perf_counter() - started)
            finally:
                guard.stop()
                watcher.stop()
            log = log_path.read_text(errors="replace") if log_path.exists() else ""
        raise_if_stopped()  # CBC killed by a stop: no plan from its remains
        result = _CBC_RESULT.findall(log)
        words = result[-1].strip() if result else pulp.LpStatus.get(prob.status, "?")
        sol_status = prob.sol_status
        has_solution = sol_status in (pulp.LpSolutionOptimal, pulp.LpSolutionIntegerFeasible)
        x = None
        obj = None
        if has_solution:
            x = np.asarray([v.varValue if v.varValue is not None else 0.0 for v in variables])
            obj = float(objective @ x)
        bound = None
        match = _CBC_BOUND.findall(log)
        if match:
            try:
                bound = float(match[-1])
            except ValueError:
                bound = None
        if sol_status == pulp.LpSolutionOptimal:
            mapped = Status.OPTIMAL
            if bound is None:
                bound = obj
        elif sol_status == pulp.LpSolutionIntegerFeasible:
            mapped = Status.FEASIBLE_WITH_GAP
        elif sol_status == pulp.LpSolutionInfeasible or "infeasible" in words.lower():
            mapped = Status.INFEASIBLE
        elif sol_status == pulp.LpSolutionNoSolutionFound:
            mapped = Status.NO_PLAN_IN_TIME if "time" in words.lower() else Status.UNKNOWN
        elif sol_status == pulp.LpSolutionUnbounded:
            mapped = Status.ERROR
        else:
            mapped = Status.UNKNOWN
        return BackendOutcome(mapped, x, obj, bound, words, time.perf_counter() - started)


BACKENDS: dict[str, Callable[[], Backend]] = {"highs": HighsBackend, "cbc": CbcBackend}


def stacked_rows(model: Model, extra_rows: list[tuple[np.ndarray, float]]) -> tuple[
        sp.csr_matrix, np.ndarray, np.ndarray]:
    """The model's rows with ``extra_rows`` (row, upper bound) below them, unscaled: the
    rows every backend solves over, in the order their prices come back."""
    matrix, row_lo, row_hi = model.matrix, model.row_lower, model.row_upper
    if extra_rows:
        extra = sp.csr_matrix(np.vstack([r for r, _ in extra_rows]))
        matrix = sp.vstack([matrix, extra], format="csr")
        row_lo = np.concatenate([row_lo, np.full(len(extra_rows), -math.inf)])
        row_hi = np.concatenate([row_hi, [ub for _, ub in extra_rows]])
    return matrix, row_lo, row_hi


def _stack(model: Model, extra_rows: list[tuple[np.ndarray, float]]) -> tuple[
        sp.csr_matrix, np.ndarray, np.ndarray, np.ndarray]:
    """The model's rows plus ``extra_rows``, each row scaled to a largest coefficient near 1,
    and the factor of each row (a price of a scaled row times it prices the row itself).

    Money rows (budgets, cost adjustments) carry coefficients up to 1e5 beside head and FTE
    rows near 1; left so, HiGHS's interior point method stalls on the demo-sized models.
    Scaling by powers of two changes neither the solution nor the rounding of any value.
    """
    matrix, row_lo, row_hi = stacked_rows(model, extra_rows)
    factor = row_scale(matrix)
    big = factor != 1.0
    if not big.any():
        return matrix, row_lo, row_hi, factor
    return (sp.diags(factor, format="csr") @ matrix, row_lo * factor, row_hi * factor, factor)


def row_scale(matrix: sp.csr_matrix) -> np.ndarray:
    """Per row, a power of two that brings its largest coefficient near 1 (1 where it is
    at most 2 already): see :func:`_stack`."""
    largest = np.zeros(matrix.shape[0])
    counts = np.diff(matrix.indptr)
    nonempty = counts > 0
    largest[nonempty] = np.maximum.reduceat(np.abs(matrix.data), matrix.indptr[:-1][nonempty])
    factor = np.ones_like(largest)
    big = largest > 2.0
    factor[big] = np.exp2(-np.round(np.log2(largest[big])))
    return factor


# --------------------------------------------------------------------------------------------
# the two-stage solve
