"""Where solves run and how a run stops: a solve in a child process killed at the wall clock,
a step in a thread of its own, and stopping every solver process at once (Ctrl-C, SIGTERM).
"""

from __future__ import annotations

import contextlib
import ctypes
import multiprocessing
import os
import signal
import threading
import time
from collections.abc import Callable, Iterator
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import replace
from pathlib import Path
from typing import Any, TypeVar

import numpy as np

from rebalance.backends.common import (
    KILLED,
    BackendOutcome,
    BoundSink,
    PlanSink,
    SolveOptions,
    Status,
)

T = TypeVar("T")


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
    for pid in cbc_children():
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



# prctl's option that sends the child a signal when its parent dies (Linux, <linux/prctl.h>).
PR_SET_PDEATHSIG = 1


def die_with_parent(parent: int) -> None:
    """In a child: be killed with the parent ``parent`` (Linux; elsewhere nothing).  A parent
    killed outright (SIGKILL, the out-of-memory killer) runs no clean-up, and its solver
    children had gone on solving, re-parented to pid 1."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(PR_SET_PDEATHSIG, signal.SIGKILL)
    except (OSError, AttributeError, TypeError):
        return
    if os.getppid() != parent:  # it died before the request took hold
        os._exit(1)


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

    parent = os.getpid()

    def child() -> None:
        die_with_parent(parent)
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


def cbc_children() -> list[int]:
    """The CBC processes this process started (Linux: found via /proc; elsewhere none)."""
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
