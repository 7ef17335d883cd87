"""CBC through PuLP: the model written out for the bundled CBC binary, its log read while it
runs, and the process asked to stop (then killed) past our own wall clock.

PuLP reports ``Optimal`` for a CBC run cut short, so its *solution* status is what counts.
"""

from __future__ import annotations

import contextlib
import functools
import hashlib
import math
import os
import re
import shlex
import shutil
import signal
import subprocess
import tempfile
import threading
import time
from collections.abc import Callable
from pathlib import Path

import numpy as np

from rebalance.backends.common import (
    KILLED,
    PROGRESS_SECONDS,
    BackendOutcome,
    SolveOptions,
    Status,
    search_line,
)
from rebalance.backends.processes import cbc_children, raise_if_stopped
from rebalance.backends.rows import scaled_rows
from rebalance.model import Model
from rebalance.numbers import progress_value

_CBC_RESULT = re.compile(r"^Result - (.*)$", re.M)
_CBC_BOUND = re.compile(r"^Lower bound:\s*(\S+)", re.M)
# What CBC writes where it has shown a model infeasible (presolve, preprocessing, the search).
_CBC_PROVEN_INFEASIBLE = re.compile(
    r"says infeasible|proven infeasible|relaxation infeasible|problem (?:is )?infeasible"
    r"|PrimalInfeasible|determined that the problem was infeasible", re.I)
# The root LP's value, said before preprocessing: a bound of a run stopped before its summary.
_CBC_ROOT_LP = re.compile(r"^Continuous objective value is\s*(\S+)", re.M)


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
                 known_bound: float | None = None, part_of_stage: bool = False) -> None:
        self.path = path
        self.progress = progress
        self.known_bound = known_bound
        self.part_of_stage = part_of_stage
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
                self.progress(f"  searching: plan found with {progress_value(float(seen_plan))}")
            elif found and found[-1] != seen_progress:
                seen_progress = found[-1]
                nodes, best, bound = seen_progress
                self.progress(search_line(float(best), float(bound), nodes, self.known_bound,
                                          self.part_of_stage))


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
            children = cbc_children()
            if not children:
                return
            for pid in children:
                with contextlib.suppress(OSError):
                    os.kill(pid, sig)
            if self._stop.wait(wait):
                return



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
    # util-linux's setpriv, where present, has CBC killed with this process: one killed
    # outright (SIGKILL, the out-of-memory killer) had left CBC solving on.
    setpriv = shutil.which("setpriv")
    dies_with_us = f"{shlex.quote(setpriv)} --pdeathsig KILL " if setpriv else ""
    getuid = getattr(os, "getuid", None)
    if stdbuf is None or getuid is None:
        return cbc
    folder = Path(tempfile.gettempdir()) / f"rebalance-cbc-launcher-{getuid()}"
    try:
        folder.mkdir(mode=0o700, exist_ok=True)
        owned = folder.stat()
        if owned.st_uid != getuid() or owned.st_mode & 0o077:
            return cbc  # not this user's alone: run nothing from it
        digest = hashlib.sha256(f"{stdbuf}\0{cbc}\0{setpriv}".encode()).hexdigest()[:16]
        launcher = folder / f"cbc-lines-{digest}"
        if not launcher.is_file():
            staged = folder / f".{launcher.name}.{os.getpid()}"
            staged.write_text(f"#!/bin/sh\nexec {dies_with_us}{shlex.quote(stdbuf)} -oL -eL "
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


@functools.cache
def _primal_simplex_command() -> type:
    """PuLP's COIN_CMD for an LP, solved once, by primal simplex (made on first use: the
    verifier runs without PuLP).

    CBC's default dual simplex had not solved a 40-office model's relaxation (35k columns) in
    120 s, its primal infeasibility growing, where primal simplex takes 10 s (HiGHS 6 s). And
    COIN_CMD ends an LP's command line with ``-initialSolve``, which after ``-primalS`` solved
    the LP a second time, by dual simplex after presolve (19.3 s in all on that relaxation).
    So the command line is ours; the files and their reading are PuLP's."""
    import pulp

    class PrimalSimplexLp(pulp.COIN_CMD):
        def actualSolve(self, lp, **kwargs):
            folder = Path(self.tmpDir)
            mps, solution = folder / "lp.mps", folder / "lp.sol"
            columns, column_names, row_names, _ = lp.writeMPS(str(mps), rename=1)
            command = [self.path, str(mps), "-timeMode", "elapsed", "-sec", str(self.timeLimit),
                       "-primalS", "-printingOptions", "all", "-solution", str(solution)]
            with open(self.optionsDict["logPath"], "w") as log:
                code = subprocess.Popen(command, stdout=log, stderr=log,
                                        stdin=subprocess.DEVNULL).wait()
            if code != 0 or not solution.exists():
                raise pulp.PulpSolverError(f"CBC ended with code {code} and no solution file")
            status, values, _, _, _, solution_status = self.readsol_MPS(
                str(solution), lp, columns, column_names, row_names)
            lp.assignVarsVals(values)
            lp.assignStatus(status, solution_status)
            return status

    return PrimalSimplexLp


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
        # A stage with no plan yet may run on (SolveOptions.overtime_without_plan): building
        # and writing the model may use that time too (it had given up with a third of a 5 s
        # run unused, "no time left to run CBC after building its model").
        latest = deadline + options.overtime_without_plan
        matrix, row_lo, row_hi, _ = scaled_rows(model, extra_rows)
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
            if i % CBC_CHECK_ROWS == 0 and time.perf_counter() > latest:
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
        if latest - time.perf_counter() < max(MIN_CBC_SECONDS, writing):
            return _cbc_out_of_time(started, "no time left to run CBC after building its model")
        # An LP (an analysis's relaxation, a bound) by primal simplex.
        is_lp = not bool(model.is_integer.any())
        with tempfile.TemporaryDirectory(prefix="rebalance-cbc-") as tmp:
            log_path = Path(tmp) / "cbc.log"
            # The CBC binary bundled with PuLP, driven through COIN_CMD (PULP_CBC_CMD is
            # deprecated in PuLP 3.3).
            command = _primal_simplex_command() if is_lp else pulp.COIN_CMD
            solver = command(
                path=_cbc_launcher(),
                msg=False,
                # PuLP's building, and its writing the model out, use part of the allowance.
                timeLimit=max(1.0, latest - time.perf_counter() - writing),
                gapRel=options.relative_gap,
                threads=options.threads,
                warmStart=start is not None,
                logPath=str(log_path),
                mip=not is_lp,
                # CBC 2.10.3's integer preprocessing can cut off the optimum and still say
                # "Optimal": a 22-column cost stage read 4,600 where a plan of 4,300 keeps
                # every row (HiGHS, and CBC itself with it off, find 4,300).
                options=[f"randomCbcSeed {options.seed + 1}"] + ([] if is_lp else [
                    "preprocess off"]),
            )
            solver.tmpDir = tmp  # each solve its own folder
            watcher = _CbcLogWatcher(log_path, options.progress, options.shown_bound(),
                                     options.part_of_stage)
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
                    # Its root LP, where it got that far, still bounds the stage (a 40-office
                    # model's 333.1 had been lost, leaving a bound of 0).
                    return BackendOutcome(Status.NO_PLAN_IN_TIME, None, None,
                                          None if is_lp else _cbc_bound(_read(log_path)),
                                          KILLED, time.perf_counter() - started, killed=True)
                return BackendOutcome(Status.ERROR, None, None, None, str(exc),
                                      time.perf_counter() - started)
            finally:
                guard.stop()
                watcher.stop()
            log = _read(log_path)
        raise_if_stopped()  # CBC killed by a stop: no plan from its remains
        result = _CBC_RESULT.findall(log)
        words = result[-1].strip() if result else pulp.LpStatus.get(prob.status, "?")
        sol_status = prob.sol_status
        if is_lp and sol_status == pulp.LpSolutionIntegerFeasible:
            # PuLP reads "Stopped on iterations - objective value ..." as a feasible point,
            # but a simplex stopped part way holds no feasible point of an LP (the 40-office
            # relaxation's came back at 184.8 under its optimum of 333.1).
            return _cbc_out_of_time(started, words)
        has_solution = sol_status in (pulp.LpSolutionOptimal, pulp.LpSolutionIntegerFeasible)
        x = None
        obj = None
        if has_solution:
            x = np.asarray([v.varValue if v.varValue is not None else 0.0 for v in variables])
            obj = float(objective @ x)
        bound = None if is_lp else _cbc_bound(log)
        if sol_status == pulp.LpSolutionOptimal:
            mapped = Status.OPTIMAL
            bound = obj if is_lp or obj is None else _optimal_bound(log, obj,
                                                                     options.relative_gap)
        elif sol_status == pulp.LpSolutionIntegerFeasible:
            mapped = Status.FEASIBLE_WITH_GAP
            # "Stopped on time limit", or "User ctrl-c" where our deadline asked it to stop
            # (it had read "(User ctrl-cuser ctrl-c)"): the words a stopped HiGHS gets too.
            if "time" in words.lower() or guard.fired:
                words = KILLED
        elif sol_status == pulp.LpSolutionInfeasible or "infeasible" in words.lower():
            mapped = Status.INFEASIBLE
        elif sol_status == pulp.LpSolutionNoSolutionFound:
            mapped = Status.NO_PLAN_IN_TIME if "time" in words.lower() else Status.UNKNOWN
        elif sol_status == pulp.LpSolutionUnbounded:
            mapped = Status.ERROR
        else:
            mapped = Status.UNKNOWN
        out_of_time = guard.fired or time.perf_counter() - started >= 0.9 * time_limit
        if mapped is Status.INFEASIBLE and (out_of_time
                                            or not _CBC_PROVEN_INFEASIBLE.search(log)):
            # Stopped by its time limit in preprocessing, CBC writes "Pre-processing says
            # infeasible or unbounded" of a model it never finished (a 40-office stage whose
            # stay-put plan is feasible, at its 14.3 s limit): out of time, or without the log
            # showing why, it is no plan in time, not infeasible.
            mapped = Status.NO_PLAN_IN_TIME if out_of_time else Status.UNKNOWN
            words = KILLED if out_of_time else f"CBC said {words} without showing why"
        elif guard.fired and mapped is Status.UNKNOWN:
            mapped, words = Status.NO_PLAN_IN_TIME, f"{KILLED} (CBC said: {words})"
        return BackendOutcome(mapped, x, obj, bound, words, time.perf_counter() - started)


def _read(log_path: Path) -> str:
    return log_path.read_text(errors="replace") if log_path.exists() else ""


def _cbc_bound(log: str, root: bool = True) -> float | None:
    """The run's bound from CBC's log: its summary's lower bound, else (``root``) its root
    LP's value (a run stopped before its summary); None where neither is a finite number.

    Not the "best possible" of its progress lines: after a restart on a reduced model
    (reduced cost fixing) they bound that model, and CBC's own summary then gives the outer
    search's lower figure (a sweep: 268,499.69 in the lines, 237,892 in the summary)."""
    summary = _printed_bounds(_CBC_BOUND.findall(log)[-1:])
    if summary or not root:
        return summary[0] if summary else None
    found = _printed_bounds(_CBC_ROOT_LP.findall(log)[-1:])
    return found[0] if found else None


def _optimal_bound(log: str, objective: float, relative_gap: float) -> float:
    """The bound of a search CBC calls optimal.  Stopped within the gap asked, its summary
    gives it.  A search that ran to its end has no "Lower bound" line, and it pruned every
    node within the gap asked of its plan, so that much is all it proves: "optimal" with a
    gap of 0 from a 1% search had been claimed of a plan 0.013% above the optimum (and with
    no gap asked, tiny had read "optimal within the gap asked (15.54% left)" from the root
    LP's bound).  The root LP's value, where higher, bounds it too."""
    summary = _cbc_bound(log, root=False)
    if summary is not None:
        return summary
    if not relative_gap:
        return objective
    pruned = objective - relative_gap * abs(objective)
    root = _cbc_bound(log)
    return pruned if root is None else max(pruned, root)


def _printed_bounds(texts: list[str]) -> list[float]:
    """Bounds as CBC prints them, each taken at the least value its digits may stand for:
    rounded to the digits shown, 201.61754 reads "201.618", above the optimum it bounds."""
    out = []
    for text in texts:
        try:
            value = float(text)
        except ValueError:
            continue
        if not math.isfinite(value) or abs(value) >= 1e49:  # CBC writes 1e+50 for none
            continue
        mantissa, _, exponent = text.lower().partition("e")
        decimals = len(mantissa.partition(".")[2])
        out.append(value - 10.0 ** (int(exponent or 0) - decimals))  # one unit in the last place
    return out
