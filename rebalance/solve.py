"""Solve a :class:`~rebalance.model.Model` with HiGHS (highspy) or CBC (through PuLP).

Status is mapped once, here, from each solver's own words to :class:`Status`.  A plan stopped
by a time limit is ``feasible_with_gap``, never ``optimal``: PuLP reports ``Optimal`` for a
CBC run cut short, so its *solution* status is what counts.  The lexicographic objective is
solved as two stages: least weighted shortfall, then least cost with the shortfall held.
"""

from __future__ import annotations

import contextlib
import enum
import math
import os
import re
import signal
import sys
import tempfile
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Protocol

import numpy as np
import scipy.sparse as sp

from rebalance.instance import ObjectiveMode, SolverName
from rebalance.model import LIMIT_FAMILIES, Model

__all__ = ["BACKENDS", "Backend", "SolveOptions", "SolveResult", "StageResult", "Status", "solve"]


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

    @property
    def has_plan(self) -> bool:
        return self in (Status.OPTIMAL, Status.FEASIBLE_WITH_GAP)


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
    progress: Callable[[str], None] | None = field(default=None, compare=False)


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


@dataclass(frozen=True)
class BackendOutcome:
    status: Status
    x: np.ndarray | None
    objective: float | None
    bound: float | None
    words: str
    seconds: float


class Backend(Protocol):
    """A MIP solver.  Every method must exist: a Protocol, not a base class with ``pass``."""

    name: str

    def version(self) -> str: ...

    def run(self, model: Model, objective: np.ndarray, extra_rows: list[tuple[np.ndarray, float]],
            options: SolveOptions, time_limit: float, start: np.ndarray | None) -> BackendOutcome:
        """Minimise ``objective @ x`` over the model plus ``extra_rows`` (row, upper bound)."""
        ...


def relative_gap(objective: float | None, bound: float | None) -> float | None:
    """Gap as (objective - bound) / |objective|, 0 when both agree to 1e-9 absolute."""
    if objective is None or bound is None or not math.isfinite(bound):
        return None
    diff = objective - bound
    if diff <= 1e-9 * max(1.0, abs(objective)):
        return 0.0
    return diff / max(abs(objective), 1e-9)


# --------------------------------------------------------------------------------------------
# HiGHS


_HIGHS_BANNER_SHOWN = False


def _new_highs() -> Any:
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


def _watch_highs(h: Any, deadline: float, progress: Callable[[str], None] | None) -> None:
    """Stop HiGHS at our own wall-clock deadline (it can overrun its time limit during root
    work) and report best plan, bound and gap every few seconds while it searches."""
    last = [0.0]

    def interrupt(event: Any) -> None:
        now = time.perf_counter()
        if now > deadline:
            event.interrupt()
        if progress is not None and now - last[0] >= PROGRESS_SECONDS:
            out = event.data_out
            if math.isfinite(out.mip_primal_bound) and math.isfinite(out.mip_dual_bound):
                last[0] = now
                progress(f"  searching: best plan {out.mip_primal_bound:.6g}, bound "
                         f"{out.mip_dual_bound:.6g}, gap {out.mip_gap:.2%}, "
                         f"{out.mip_node_count} nodes")

    h.cbSimplexInterrupt += interrupt
    h.cbIpmInterrupt += interrupt
    h.cbMipInterrupt += interrupt


PROGRESS_SECONDS = 5.0


class HighsBackend:
    name = "highs"

    def version(self) -> str:
        return f"HiGHS {_new_highs().version()}"

    def run(self, model: Model, objective: np.ndarray, extra_rows: list[tuple[np.ndarray, float]],
            options: SolveOptions, time_limit: float, start: np.ndarray | None) -> BackendOutcome:
        import highspy

        started = time.perf_counter()
        matrix, row_lo, row_hi = _stack(model, extra_rows)
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
        h = _new_highs()
        h.setOptionValue("time_limit", float(max(time_limit, 0.05)))
        h.setOptionValue("mip_rel_gap", float(options.relative_gap))
        h.setOptionValue("random_seed", int(options.seed))
        h.passModel(lp)
        _watch_highs(h, started + max(time_limit, 0.05), options.progress)
        if start is not None:
            solution = highspy.HighsSolution()
            solution.col_value = list(start)
            solution.value_valid = True
            h.setSolution(solution)
        h.run()
        status = h.getModelStatus()
        info = h.getInfo()
        words = h.modelStatusToString(status)
        has_solution = info.primal_solution_status == 2  # kSolutionStatusFeasible
        x = np.asarray(h.getSolution().col_value) if has_solution else None
        obj = float(info.objective_function_value) if has_solution else None
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
        return BackendOutcome(mapped, x, obj, bound, words, time.perf_counter() - started)


# --------------------------------------------------------------------------------------------
# CBC through PuLP


_CBC_RESULT = re.compile(r"^Result - (.*)$", re.M)
_CBC_OBJECTIVE = re.compile(r"^Objective value:\s*(\S+)", re.M)
_CBC_BOUND = re.compile(r"^Lower bound:\s*(\S+)", re.M)


_CBC_PROGRESS = re.compile(
    r"Cbc0010I After (\d+) nodes, \d+ on tree, (\S+) best solution, best possible (\S+)")


_CBC_PLAN = re.compile(r"Cbc0012I Integer solution of (\S+)")


class _CbcLogWatcher:
    """Reads CBC's log while it runs and reports best plan, bound and gap."""

    def __init__(self, path: Path, progress: Callable[[str], None] | None) -> None:
        self.path = path
        self.progress = progress
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
                gap = relative_gap(float(best), float(bound))
                self.progress(f"  searching: best plan {float(best):.6g}, bound "
                              f"{float(bound):.6g}, gap "
                              f"{'-' if gap is None else f'{gap:.2%}'}, {nodes} nodes")


CBC_GRACE_SECONDS = 1.0


class _Deadline:
    """Stops this process's CBC children at a wall-clock deadline (Linux: found via /proc)."""

    def __init__(self, deadline: float) -> None:
        self.deadline = deadline
        self.fired = False
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def start(self) -> None:
        self._thread.start()

    def stop(self) -> None:
        self._stop.set()
        self._thread.join(timeout=2.0)

    def _run(self) -> None:
        if self._stop.wait(max(0.0, self.deadline - time.perf_counter())):
            return
        self.fired = True
        for sig, wait in ((signal.SIGINT, 1.0), (signal.SIGKILL, 0.0)):
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


class CbcBackend:
    name = "cbc"

    def version(self) -> str:
        import pulp

        return f"CBC (bundled with PuLP {pulp.__version__})"

    def run(self, model: Model, objective: np.ndarray, extra_rows: list[tuple[np.ndarray, float]],
            options: SolveOptions, time_limit: float, start: np.ndarray | None) -> BackendOutcome:
        import pulp

        started = time.perf_counter()
        matrix, row_lo, row_hi = _stack(model, extra_rows)
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
        with tempfile.TemporaryDirectory(prefix="rebalance-cbc-") as tmp:
            log_path = Path(tmp) / "cbc.log"
            # The CBC binary bundled with PuLP, driven through COIN_CMD (PULP_CBC_CMD is
            # deprecated in PuLP 3.3).
            solver = pulp.COIN_CMD(
                path=_bundled_cbc(),
                msg=False,
                # PuLP's own model building already used part of the allowance.
                timeLimit=max(1.0, time_limit - (time.perf_counter() - started)),
                gapRel=options.relative_gap,
                threads=options.threads,
                warmStart=start is not None,
                logPath=str(log_path),
                options=[f"randomCbcSeed {options.seed + 1}"],
            )
            solver.tmpDir = tmp  # each solve its own folder
            watcher = _CbcLogWatcher(log_path, options.progress)
            # CBC can overrun its -sec limit in preprocessing; past our deadline it is asked to
            # stop (SIGINT: it keeps its best plan), and killed if it does not.
            guard = _Deadline(started + time_limit + CBC_GRACE_SECONDS)
            try:
                watcher.start()
                guard.start()
                prob.solve(solver)
            except pulp.PulpSolverError as exc:
                if guard.fired:
                    return BackendOutcome(Status.NO_PLAN_IN_TIME, None, None, None,
                                          "stopped at the wall-clock limit",
                                          time.perf_counter() - started)
                return BackendOutcome(Status.ERROR, None, None, None, str(exc),
                                      time.perf_counter() - started)
            finally:
                guard.stop()
                watcher.stop()
            log = log_path.read_text(errors="replace") if log_path.exists() else ""
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


def _stack(model: Model, extra_rows: list[tuple[np.ndarray, float]]) -> tuple[
        sp.csr_matrix, np.ndarray, np.ndarray]:
    if not extra_rows:
        return model.matrix, model.row_lower, model.row_upper
    extra = sp.csr_matrix(np.vstack([r for r, _ in extra_rows]))
    matrix = sp.vstack([model.matrix, extra], format="csr")
    row_lo = np.concatenate([model.row_lower, np.full(len(extra_rows), -math.inf)])
    row_hi = np.concatenate([model.row_upper, [ub for _, ub in extra_rows]])
    return matrix, row_lo, row_hi


# --------------------------------------------------------------------------------------------
# the two-stage solve


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
        if report is not None:
            report(f"[{time.perf_counter() - started:7.1f}s] {text}")

    # Backends report through the same line format, with the elapsed time of the whole run.
    options = replace(options, progress=say if report is not None else None)

    conflicts = constant_conflicts(model)
    if conflicts:
        return SolveResult(Status.INFEASIBLE, None, (), backend.name, backend.version(),
                           time.perf_counter() - started, tuple(conflicts))

    stages: list[StageResult] = []
    if options.mode == "weighted":
        objective = model.cost + options.shortfall_cost * model.shortfall_weight
        say("weighted: least cost + shortfall_cost x weighted shortfall")
        out = solve_stage(backend, model, objective, [], options, deadline, None, say)
        stages.append(_stage("weighted", out))
        return _finish(model, backend, options, stages, out, started, deadline)

    say("stage 1: least priority-weighted shortfall")
    # Stage 1 may use most of the time, but leaves stage 2 a share to lower the cost.
    stage1_deadline = started + STAGE1_SHARE * options.time_limit_seconds
    first = solve_stage(backend, model, model.shortfall_weight, [], options, stage1_deadline,
                        None, say)
    stages.append(_stage("shortfall", first))
    if not first.status.has_plan or first.x is None or first.objective is None:
        return _finish(model, backend, options, stages, first, started, deadline)
    say(f"stage 1 done: weighted shortfall {first.objective:.6g} ({first.words})")
    if deadline - time.perf_counter() <= 1.0:
        say("no time left for stage 2; keeping the stage-1 plan")
        return _finish(model, backend, options, stages, first, started, deadline,
                       final_status=Status.FEASIBLE_WITH_GAP)
    # Hold the stage-1 shortfall with a small slack, then minimise cost from its plan.
    held = first.objective
    # Never below the solvers' feasibility tolerance (1e-6): stage one may itself be that far
    # under the true least shortfall, and holding it tighter would make stage two pay for it.
    slack = max(options.shortfall_tolerance * abs(held), 1e-6)
    say(f"stage 2: least cost with weighted shortfall <= {held + slack:.6g}")
    second = solve_stage(backend, model, model.cost, [(model.shortfall_weight, held + slack)],
                         options, deadline, first.x, say)
    stages.append(_stage("cost", second))
    if not second.status.has_plan:
        # Stage 1's plan still stands; stage 2 only failed to improve its cost.
        say(f"stage 2 found no plan ({second.words}); keeping the stage-1 plan")
        return _finish(model, backend, options, stages, first, started, deadline,
                       final_status=Status.FEASIBLE_WITH_GAP)
    status = Status.OPTIMAL if (first.status is Status.OPTIMAL
                                and second.status is Status.OPTIMAL) else Status.FEASIBLE_WITH_GAP
    return _finish(model, backend, options, stages, polish(backend, model, second, options),
                   started, deadline, final_status=status)


def polish(backend: Backend, model: Model, out: BackendOutcome,
           options: SolveOptions) -> BackendOutcome:
    """Fix the integer decisions and re-split work to the least shortfall (an LP).

    Stage two may spend the small shortfall slack it is given; with the people, moves and
    hires fixed, the best work split is cheap to find exactly, and costs do not change.
    """
    if out.x is None or not model.num_integer:
        return out
    fixed = np.rint(out.x)
    integer = model.is_integer
    lower, upper = model.col_lower.copy(), model.col_upper.copy()
    lower[integer] = upper[integer] = fixed[integer]
    lp = backend.run(replace(model, col_lower=lower, col_upper=upper,
                             is_integer=np.zeros(model.num_cols, bool)),
                     model.shortfall_weight, [], options, 60.0, None)
    if lp.status is not Status.OPTIMAL or lp.x is None:
        return out
    x = lp.x.copy()
    x[integer] = fixed[integer]
    return replace(out, x=x)


STAGE1_SHARE = 0.7   # of the whole time limit, at most, for the shortfall stage
LP_SHARE = 0.35      # of a stage's time, at most, for its LP relaxation
RENS_SHARE = 0.3     # of a stage's time, at most, for the rounding neighbourhood search
MIN_HEURISTIC_SECONDS = 5.0  # below this a stage goes straight to branch and bound


def solve_stage(backend: Backend, model: Model, objective: np.ndarray,
                extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                deadline: float, start: np.ndarray | None,
                say: Callable[[str], None]) -> BackendOutcome:
    """One objective: LP relaxation, a rounding neighbourhood search for a first plan, then
    branch and bound from the better of that plan and ``start``.

    The neighbourhood search (RENS) fixes every integer column to the floor or ceiling of its
    LP value and solves that much smaller MIP: the LP says where people and hires should go,
    the sub-MIP makes it whole.  Naive rounding alone leaves plans far from the bound.
    """
    t0 = time.perf_counter()
    budget = deadline - t0
    lp_bound = None
    if model.num_integer and options.heuristics and budget > MIN_HEURISTIC_SECONDS:
        relaxed = replace(model, is_integer=np.zeros(model.num_cols, bool))
        lp = backend.run(relaxed, objective, extra_rows, options, LP_SHARE * budget, None)
        if lp.status is Status.OPTIMAL and lp.x is not None:
            lp_bound = lp.objective
            say(f"  LP relaxation {lp.objective:.6g} in {lp.seconds:.1f}s")
            integer = model.is_integer
            lower = model.col_lower.copy()
            upper = model.col_upper.copy()
            lower[integer] = np.maximum(lower[integer], np.floor(lp.x[integer] + 1e-6))
            upper[integer] = np.minimum(upper[integer], np.ceil(lp.x[integer] - 1e-6))
            if start is not None:
                # Widen the box to hold the previous plan too: never empty, and the search
                # mixes what the LP wants with what is known to work (stage two needs it).
                known = np.rint(start[integer])
                lower[integer] = np.minimum(lower[integer], known)
                upper[integer] = np.maximum(upper[integer], known)
            left = deadline - time.perf_counter()
            narrowed = replace(model, col_lower=lower, col_upper=upper)
            rens = None if left < 2.0 else backend.run(
                narrowed, objective, extra_rows, options, min(RENS_SHARE * budget, 0.5 * left),
                start)
            if rens is not None and rens.x is not None and rens.objective is not None:
                say(f"  rounding search: plan with {rens.objective:.6g} in {rens.seconds:.1f}s")
                if start is None or rens.objective < float(objective @ start) - 1e-9:
                    start = rens.x
        else:
            say(f"  LP relaxation not solved ({lp.words}); going straight to branch and bound")
    left = deadline - time.perf_counter()
    out = backend.run(model, objective, extra_rows, options, left, start)
    if out.x is None and start is not None and out.status in (Status.NO_PLAN_IN_TIME,
                                                             Status.UNKNOWN):
        # Branch and bound ran out of time before taking up the start: keep the start.
        obj = float(objective @ start)
        out = BackendOutcome(Status.FEASIBLE_WITH_GAP, start, obj, lp_bound, out.words,
                             out.seconds)
    elif out.bound is not None and lp_bound is not None and out.status.has_plan:
        out = replace(out, bound=max(out.bound, lp_bound) if out.status is not Status.OPTIMAL
                      else out.bound)
    seconds = time.perf_counter() - t0
    return replace(out, seconds=seconds)


def _stage(name: str, out: BackendOutcome) -> StageResult:
    return StageResult(name, out.status, out.objective, out.bound,
                       relative_gap(out.objective, out.bound) if out.status.has_plan else None,
                       out.seconds, out.words)


def _finish(model: Model, backend: Backend, options: SolveOptions, stages: list[StageResult],
            last: BackendOutcome, started: float, deadline: float,
            final_status: Status | None = None) -> SolveResult:
    status = final_status or last.status
    conflicts: tuple[str, ...] = ()
    if status is Status.INFEASIBLE:
        conflicts = tuple(find_conflicts(model, backend, options,
                                         max(5.0, deadline - time.perf_counter())))
    return SolveResult(status, last.x if status.has_plan else None, tuple(stages),
                       backend.name, backend.version(), time.perf_counter() - started, conflicts)


def find_conflicts(model: Model, backend: Backend, options: SolveOptions,
                   time_limit: float) -> list[str]:
    """Name the limits that cannot hold together: relax each limit row by an elastic column
    and minimise the total relaxation; rows that still need relaxing are the conflict."""
    limit_rows = [i for f in model.rows if f.name in LIMIT_FAMILIES
                  for i in range(f.start, f.stop) if math.isfinite(model.row_upper[i])]
    if not limit_rows:
        return ["the solver reports the model infeasible, but no limit row can be relaxed"]
    k = len(limit_rows)
    elastic = sp.csr_matrix((np.full(k, -1.0), (np.asarray(limit_rows), np.arange(k))),
                            shape=(model.num_rows, k))
    relaxed = replace(
        model,
        matrix=sp.hstack([model.matrix, elastic], format="csr"),
        col_lower=np.concatenate([model.col_lower, np.zeros(k)]),
        col_upper=np.concatenate([model.col_upper, np.full(k, math.inf)]),
        is_integer=np.concatenate([model.is_integer, np.zeros(k, bool)]),
        shortfall_weight=np.concatenate([model.shortfall_weight, np.zeros(k)]),
        cost=np.concatenate([model.cost, np.zeros(k)]),
    )
    objective = np.concatenate([np.zeros(model.num_cols), np.ones(k)])
    out = backend.run(relaxed, objective, [], options, time_limit, None)
    if out.x is None:
        return [f"the limits conflict, but the analysis found no relaxation ({out.words})"]
    excess = out.x[model.num_cols:]
    return [_describe_row(model, limit_rows[i], float(excess[i]))
            for i in np.flatnonzero(excess > 1e-6)]
