"""What every backend shares: options, status, outcome, the :class:`Backend` Protocol.

Status is mapped once, in each backend, from its solver's own words to :class:`Status`.  A plan
stopped by a time limit is ``feasible_with_gap``, never ``optimal``.
"""

from __future__ import annotations

import enum
import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Protocol

import numpy as np

from rebalance.instance import ObjectiveMode, SolverName
from rebalance.model import Model
from rebalance.numbers import progress_value

# Receives each better plan a run finds (columns of the model, objective) as it is found.
PlanSink = Callable[[np.ndarray, float], None]
# Receives a run's bound on the objective whenever it rises, while the run searches.
BoundSink = Callable[[float], None]
# How often a search reports its best plan, bound and gap.
PROGRESS_SECONDS = 5.0
# What a stage stopped by our own time limit says, whether its solver was told to stop or
# was killed: one reason, one wording.
KILLED = "stopped at the time limit"


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
    # A run over part of a stage's model (the rounding search, a pass, an office group): its
    # own bound holds for that part only and sits above the stage's (the demo's cost stage:
    # 2,053,328 against the stage's 1,651,285), so its lines show ``stage_bound``, the
    # stage's best proven bound, or none: never its own (``shown_bound``).
    part_of_stage: bool = field(default=False, compare=False)
    stage_bound: float | None = field(default=None, compare=False)
    # Seconds a branch and bound may run past its time limit while it has no plan: stage 1
    # without one would otherwise stop with its cost stage's share unused (CBC on 50 small
    # offices: no plan after 28 s of a 40 s run), and a cost stage needs a plan to start.
    overtime_without_plan: float = field(default=0.0, compare=False)

    def shown_bound(self) -> float | None:
        """The bound a progress line of this run weighs its best plan against, besides the
        run's own (:func:`search_line`): the stage's for a part of it, else ``known_bound``."""
        return self.stage_bound if self.part_of_stage else self.known_bound

    def held_shortfall(self, shortfall: float) -> float:
        """What the cost stage holds the weighted shortfall to after a stage 1 plan with
        ``shortfall``: a small slack above it, never below the solvers' feasibility tolerance
        (1e-6), since stage 1 may itself be that far under the true least shortfall, and
        holding it tighter would make stage 2 pay for it."""
        return shortfall + max(self.shortfall_tolerance * abs(shortfall), 1e-6)


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


def search_line(best: float, bound: float, nodes: int | str, known_bound: float | None,
                part_of_stage: bool = False) -> str:
    """The progress line of a search: best plan, bound (never below ``known_bound``), gap.

    ``part_of_stage``: the search is of part of the stage's model (``SolveOptions``), so
    ``bound``, its own, is left out: the line shows ``known_bound`` as the stage's, or no
    bound.
    """
    whose = ""
    if part_of_stage:
        if known_bound is None:
            return (f"  searching: best plan {progress_value(best)}, {nodes} nodes (a search "
                    "of part of the model; no bound proven for the stage yet)")
        bound, whose = known_bound, " (the stage's)"
    elif known_bound is not None:
        bound = max(bound, known_bound)
    gap = relative_gap(best, bound)
    return (f"  searching: best plan {progress_value(best)}, bound {progress_value(bound)}"
            f"{whose}, gap {'undefined' if gap is None else f'{gap:.2%}'}, {nodes} nodes")


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
