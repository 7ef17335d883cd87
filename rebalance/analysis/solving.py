"""Solving many variants of an instance: one after another, or in a pool of processes.

Every solve is :func:`rebalance.planning.make_plan`, a pure function of its instance, options
and (where given) the plan it starts from, so running it in another process changes nothing
but the time.  Used by ``compare``, ``frontier`` and ``marginal``.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import time
from collections.abc import Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import replace

from rebalance.analysis.start_plan import from_plan
from rebalance.instance import Instance
from rebalance.plan import Plan
from rebalance.planning import PlanResult, make_plan
from rebalance.solve import SolveOptions

__all__ = ["solve_many"]


def _solve(instance: Instance, options: SolveOptions, start: Plan | None = None) -> PlanResult:
    if start is None:
        return make_plan(instance, options)
    return make_plan(instance, options, adjust=from_plan(instance, start))


def solve_many(instances: Sequence[Instance], options: SolveOptions,
               workers: int, start: Plan | None = None,
               names: Sequence[str] = ()) -> list[PlanResult]:
    """Solve each instance, from the plan ``start`` where given (see
    :mod:`rebalance.analysis.start_plan`); in a process pool when ``workers`` > 1 (same
    results either way: every solve is a pure function of its instance, options and start).
    Solves in this process that ``names`` names keep ``options.progress``, each line led by
    that name; others, and a pool's solves, have none (their lines would interleave)."""
    plain = replace(options, progress=None)
    if workers <= 1 or len(instances) <= 1:
        return [_solve(inst, _led(options, names[i]) if i < len(names) else plain, start)
                for i, inst in enumerate(instances)]
    # Spawned, not forked: a child forked from a process that has run HiGHS inherits its
    # thread pool in a broken state and spins.
    others = set(multiprocessing.active_children())  # the caller's own: never ended here
    pool = ProcessPoolExecutor(max_workers=min(workers, len(instances)),
                               mp_context=multiprocessing.get_context("spawn"))
    try:
        results = list(pool.map(_solve_in_worker, instances, [plain] * len(instances),
                                [start] * len(instances)))
    except BaseException:
        # Stopped from outside (Ctrl-C, SIGTERM) or failed: end the workers now rather than
        # wait for their solves (a sweep: 22 s to stop a comparison of three).
        pool.shutdown(wait=False, cancel_futures=True)
        _end_workers([p for p in multiprocessing.active_children() if p not in others])
        raise
    pool.shutdown(wait=True)
    return results


def _led(options: SolveOptions, name: str) -> SolveOptions:
    """``options`` whose progress lines start with ``[name]``, where it has any."""
    say = options.progress
    if say is None:
        return options
    return replace(options, progress=lambda text: say(f"[{name}] {text}"))


def _solve_in_worker(instance: Instance, options: SolveOptions,
                     start: Plan | None = None) -> PlanResult:
    """:func:`_solve` in a pool worker: stopped (SIGTERM from :func:`_end_workers`, or
    Ctrl-C at the terminal), its solver processes are already killed, and the worker ends
    rather than take the next task queued (which it had, forking solvers that outlived the
    run)."""
    try:
        return _solve(instance, options, start)
    except KeyboardInterrupt:
        os._exit(130)


def _end_workers(workers: list[multiprocessing.process.BaseProcess]) -> None:
    """SIGTERM to each worker, then, a second later, SIGKILL to whatever of their process
    trees is left.  The workers are waited for through multiprocessing alone: psutil's wait
    reaped them behind its back, its ``is_alive`` then stayed true for ever, and a stopped
    ``marginal`` spun at exit on the pool's manager thread (a review: 9 minutes at 94% CPU
    after a SIGTERM)."""
    import psutil

    solvers: list[psutil.Process] = []
    for worker in workers:
        with contextlib.suppress(psutil.Error, ValueError):
            solvers += psutil.Process(worker.pid).children(recursive=True)
        with contextlib.suppress(ValueError, OSError):
            worker.terminate()
    deadline = time.monotonic() + 1.0
    for worker in workers:
        with contextlib.suppress(ValueError, OSError, AssertionError):
            worker.join(max(0.0, deadline - time.monotonic()))
            if worker.is_alive():
                worker.kill()
                worker.join(1.0)
    # The solvers are the workers' children, not ours: psutil only watches them.
    _, alive = psutil.wait_procs(solvers, timeout=max(0.0, deadline - time.monotonic()))
    for process in alive:
        with contextlib.suppress(psutil.Error):
            process.kill()
