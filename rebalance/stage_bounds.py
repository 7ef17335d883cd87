"""Bounds for one stage of the solve, each said when found: from row prices (the rounding's
LP, or an LP with homes held), from relocatable people's whole plans, or from the LP
relaxation.  The first two are worked out by weak duality from prices
(``rebalance.bounds``), so no solver tolerance can make them claim too much; the third is
the solver's own value.  The stage keeps the highest (``rebalance.solve``).
"""

from __future__ import annotations

import threading
import time
import weakref
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import psutil

from rebalance.backends import Backend, BackendOutcome, SolveOptions, Status, run_in_child
from rebalance.bounds import priced_bound, signed_prices
from rebalance.decomposition import plan_bound
from rebalance.model import Model
from rebalance.numbers import progress_value
from rebalance.rounding import held_lp_bounds
from rebalance.split import solve_relaxation
from rebalance.whole_plans import DecompositionError, WholePlans, decomposable

__all__ = ["COST_BOUND_BYTES_PER_NONZERO", "HeldCostBound", "bound_from_prices",
           "cost_bound_ahead", "held_lp_bound", "lp_bound", "relaxation_bound",
           "uses_whole_plans"]


def held_lp_bound(backend: Backend, model: Model, objective: np.ndarray,
                  extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                  start: np.ndarray, deadline: float, say: Callable[[str], None],
                  expected_seconds: float | None = None) -> float | None:
    """A bound from the prices of the rounding's LP (homes held where ``start`` has them;
    :func:`~rebalance.bounds.priced_bound`), or None if the LP does not finish in time.

    Not tried where ``expected_seconds`` (what the same LP took in stage one) is more than
    it would get (agency: 28 s, against 3 s in stage two).
    """
    began = time.perf_counter()
    priced = _priced_held_lp(backend, model, objective, extra_rows, options, start, deadline,
                             say, expected_seconds, "bound from an LP with homes held")
    if priced is None:
        return None
    say(f"  bound from the row prices of an LP with homes held: {_bound_text(priced[0])} in "
        f"{time.perf_counter() - began:.1f}s")
    return priced[0]


@dataclass(frozen=True)
class HeldCostBound:
    """A bound on the least cost with the weighted shortfall held at ``held`` or less,
    worked out before the cost stage knows what it holds (:func:`cost_bound_ahead`).

    Prices bound by weak duality whatever the held value; only the held row's own term
    depends on it, so the same prices bound the stage for any held value: higher by the
    row's price times the difference below ``held`` (``rebalance.bounds``).
    """

    held: float
    bound: float
    held_price: float  # the held row's price, signed as its upper bound allows (<= 0)

    def at(self, held: float) -> float:
        """The bound for a shortfall held at ``held``."""
        return self.bound + self.held_price * (held - self.held)


# What the cost stage's LP and its pricing add to a run's memory, per nonzero of the model,
# at their peak: measured on large (31 million nonzeros), 3.4 GB while the LP is solved and
# 5.9 GB while it is priced; agency (7.7 million) about 1.4 GB.
COST_BOUND_BYTES_PER_NONZERO = 200
# Left free for the search beside it and for everything else on the machine.
MEMORY_RESERVE_BYTES = 2**30


def cost_bound_ahead(backend: Backend, model: Model, options: SolveOptions,
                     start: np.ndarray, held: float, deadline: float,
                     say: Callable[[str], None],
                     expected_seconds: float | None = None) -> HeldCostBound | None:
    """While stage 1 still searches: a bound on the cost stage, from the prices of an LP with
    homes held where ``start`` has them and the shortfall held at ``held``.  On models whose
    cost stage is too short for that LP (agency: 28 s, against 3-6 s), it would otherwise
    have no bound.

    Not tried where the machine lacks the memory for it (a bound is worth less than a run
    that swaps or is killed), nor where the LP would get less time than ``expected_seconds``
    (what stage 1's rounding LP took; agency at 60 s: 8 s left here, against 21 s): the
    cost stage then reports the bound it finds itself."""
    need = COST_BOUND_BYTES_PER_NONZERO * model.matrix.nnz
    free = psutil.virtual_memory().available
    if need + MEMORY_RESERVE_BYTES > free:
        say(f"  no bound for the cost stage beside the search: it needs about "
            f"{need / 2**30:.1f} GiB of memory, and {free / 2**30:.1f} GiB are free")
        return None
    began = time.perf_counter()
    extra_rows = [(model.shortfall_weight, held)]
    priced = _priced_held_lp(backend, model, model.cost, extra_rows, options, start, deadline,
                             say, expected_seconds,
                             "bound for the cost stage beside the search")
    if priced is None:
        return None
    bound, held_price = priced
    say(f"  bound for the cost stage, from an LP with the shortfall held at {progress_value(held)} "
        f"(beside the search): {_bound_text(bound)} in {time.perf_counter() - began:.1f}s")
    return HeldCostBound(held, bound, held_price)


def _priced_held_lp(backend: Backend, model: Model, objective: np.ndarray,
                    extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                    start: np.ndarray, deadline: float, say: Callable[[str], None],
                    expected_seconds: float | None, what: str) -> tuple[float, float] | None:
    """The bound from the prices of the rounding's LP plus ``extra_rows`` (homes held where
    ``start`` has them), and the first extra row's price, signed; None if the LP or the
    pricing does not finish by ``deadline``, or (said, naming the bound ``what``) if the LP
    would get less time than ``expected_seconds``, what the same LP took in stage 1."""
    lp_limit = options.shares.held_lp * (deadline - time.perf_counter())
    if expected_seconds is not None and expected_seconds > lp_limit:
        say(f"  no {what}: its LP would get {max(lp_limit, 0.0):.0f}s, and stage 1's took "
            f"{expected_seconds:.0f}s")
        return None
    _, lower, upper = held_lp_bounds(model, start)
    lp = solve_relaxation(backend, model, objective, extra_rows, options,
                          lp_limit, lower, upper, point_only=True, prices_wanted=True)
    if lp.row_dual is None:
        say(f"  bound from row prices: LP with homes held not solved ({lp.words})")
        return None
    if time.perf_counter() >= deadline:
        # Reading the people's rows alone takes seconds (agency: 9 s), past the deadline.
        return None
    pieces = _exact_pieces(model)  # before the time left is read: it takes seconds
    bound = priced_bound(backend, model, objective, lp.row_dual, options,
                         deadline - time.perf_counter(), extra_rows, pieces)
    if bound is None:
        return None
    first = model.num_rows  # the extra rows follow the model's own
    held_price = signed_prices(np.array([-np.inf]), np.array([extra_rows[0][1]]),
                               lp.row_dual[first:first + 1])[0] if extra_rows else 0.0
    return bound, float(held_price)


def uses_whole_plans(backend: Backend, model: Model) -> bool:
    """Whether :func:`relaxation_bound` comes from relocatable people's whole plans (their
    master LP runs in HiGHS) rather than the LP relaxation."""
    return backend.name == "highs" and decomposable(model)


def relaxation_bound(backend: Backend, model: Model, objective: np.ndarray,
                     extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                     time_limit: float, say: Callable[[str], None],
                     when: str) -> float | None:
    """A bound for the stage from a relaxation: relocatable people's whole plans where the
    model has them and the backend is HiGHS (:mod:`rebalance.decomposition`; medium: 1,557.8
    in 20 s, where the LP relaxation gives 1,546.5 in 81-95 s), else the LP relaxation."""
    began = time.perf_counter()
    if uses_whole_plans(backend, model):
        try:
            return _whole_plans_bound(model, objective, extra_rows, options, time_limit,
                                      say, when)
        except DecompositionError as failure:
            # People whose rows the shortest path does not read, or a solver error: the
            # LP relaxation, in the time left.
            say(f"  bound from relocatable people's whole plans ({when}) failed: {failure}")
            time_limit -= time.perf_counter() - began
    return lp_bound(backend, model, objective, extra_rows, options, time_limit, say, when)


# The column generation is told to stop this long before its process is killed.
WHOLE_PLANS_GRACE_SECONDS = 1.5
# Rounds of coverage cuts it may add (medium: 1,557.8 after 21 s without; 1,572-1,575.7
# after 45-85 s with them, converged after 62 rounds of plans and cuts).
WHOLE_PLANS_CUT_ROUNDS = 50


def _whole_plans_bound(model: Model, objective: np.ndarray,
                       extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
                       time_limit: float, say: Callable[[str], None],
                       when: str) -> float | None:
    """:func:`~rebalance.decomposition.plan_bound` in a process killed at ``time_limit``
    (its master LP runs in HiGHS, which may overrun); the best bound it reached.  Raises
    :class:`~rebalance.whole_plans.DecompositionError` where it failed rather than ran out
    of time."""
    began = time.perf_counter()
    stop = began + max(time_limit - WHOLE_PLANS_GRACE_SECONDS, 0.5 * time_limit)

    def run(_: SolveOptions, __: object, on_bound: Callable[[float], None]) -> BackendOutcome:
        bound, rounds = plan_bound(model, objective, extra_rows, stop, on_bound,
                                   WHOLE_PLANS_CUT_ROUNDS)
        return BackendOutcome(Status.OPTIMAL if bound is not None else Status.NO_PLAN_IN_TIME,
                              None, None, bound, f"{rounds} round{'s' * (rounds != 1)}", 0.0)

    out = run_in_child(run, replace(options, progress=None), time_limit)
    if out.status is Status.ERROR:
        raise DecompositionError(out.words)
    if out.bound is None:
        say(f"  bound from relocatable people's whole plans ({when}): none ({out.words})")
        return None
    say(f"  bound from relocatable people's whole plans ({when}): {_bound_text(out.bound)} in "
        f"{out.seconds:.1f}s ({out.words})")
    return out.bound


def lp_bound(backend: Backend, model: Model, objective: np.ndarray,
             extra_rows: list[tuple[np.ndarray, float]], options: SolveOptions,
             time_limit: float, say: Callable[[str], None], when: str) -> float | None:
    """The LP relaxation's value, a bound for the stage, or None if it did not finish."""
    lp = solve_relaxation(backend, model, objective, extra_rows, options, time_limit)
    if lp.status is Status.OPTIMAL and lp.objective is not None:
        say(f"  LP relaxation ({when}) {progress_value(lp.objective)} in {lp.seconds:.1f}s")
        return lp.objective
    say(f"  LP relaxation ({when}) not solved ({lp.words}); no bound from it")
    return None


def bound_from_prices(backend: Backend, model: Model, objective: np.ndarray,
                      prices: np.ndarray, options: SolveOptions, time_limit: float,
                      say: Callable[[str], None], where: str) -> float | None:
    """:func:`~rebalance.bounds.priced_bound`, said when found."""
    began = time.perf_counter()
    # Reading the people's rows takes seconds (agency: 9.4 s), within the time given.
    pieces = _exact_pieces(model)
    bound = priced_bound(backend, model, objective, prices, options,
                         time_limit - (time.perf_counter() - began), None, pieces)
    if bound is not None:
        say(f"  bound from the rounding LP's row prices{where}: {_bound_text(bound)} in "
            f"{time.perf_counter() - began:.1f}s")
    return bound


def _exact_pieces(model: Model) -> WholePlans | None:
    """Relocatable people's whole plans, for a bound from prices to solve exactly, where the
    model has them in the shape their shortest path reads.

    Read once per model and kept while it lives: the pricing beside stage 1's search and
    the cost stage's bound after it both need them (agency: 9 s to read)."""
    with _PIECES_LOCK:
        kept_for, pieces = _PIECES
        if kept_for is not None and kept_for() is model:
            return pieces
        pieces = None
        if decomposable(model):
            try:
                pieces = WholePlans(model)
            except DecompositionError:
                pieces = None
        _PIECES[:] = [weakref.ref(model), pieces]
        return pieces


# The last model's pieces (WholePlans are read-only once built), and who may read or build.
_PIECES: list[Any] = [None, None]
_PIECES_LOCK = threading.Lock()


def _bound_text(bound: float) -> str:
    """A bound for a progress line.  Every objective here is shortfall or money paid, so none
    is below 0, and a bound below it says nothing ("-1.96776e+11" had been shown)."""
    return f"{progress_value(bound)}" if bound > 0 else "none above 0"
