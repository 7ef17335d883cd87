"""What a stage's outcome may claim: a bound no higher than its plan, no bound below 0, and
"optimal" only where the plan meets its bound within the gap asked.

Every objective solved here is shortfall or money paid, so no plan scores below 0; solvers'
bounds can be wrong the other way (above the plan they bound), and those are discarded.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace

from rebalance.backends import BackendOutcome, Status, relative_gap
from rebalance.numbers import progress_value

__all__ = ["BOUND_TOLERANCE", "OBJECTIVE_FLOOR", "bound_above", "bound_checked", "higher_bound",
           "not_searched", "with_floor"]


def higher_bound(a: float | None, b: float | None) -> float | None:
    """The higher of two bounds, either of which may be missing."""
    return b if a is None else a if b is None else max(a, b)


def not_searched(words: str) -> BackendOutcome:
    """The outcome of a branch and bound that was not run: the stage keeps its plan."""
    return BackendOutcome(Status.NO_PLAN_IN_TIME, None, None, None, words, 0.0)


# A bound may sit above the plan it bounds by the solvers' relative tolerance, no more.
BOUND_TOLERANCE = 1e-6


def bound_above(bound: float | None, objective: float) -> bool:
    """Whether ``bound`` lies above a plan's ``objective`` by more than the tolerance."""
    return bound is not None and bound > objective + BOUND_TOLERANCE * max(1.0, abs(objective))


def bound_checked(out: BackendOutcome, fallback: float | None, relative_gap_wanted: float,
                   say: Callable[[str], None] | None = None) -> BackendOutcome:
    """``out`` with a bound above its own plan's objective discarded: such a bound bounds
    nothing, and had read "may cost up to -8,000 less".  It falls to ``fallback`` (the LP
    bound) where that one is not above the plan, else to :data:`OBJECTIVE_FLOOR`.

    Seen with HiGHS 1.16 on a re-plan's cost stage: presolve claimed 117,000 "Optimal" with
    the shortfall held at 1e-6 while a plan of 109,000 keeps every row (scipy's HiGHS and
    HiGHS with presolve off find 109,000); the plan of 109,000 was kept, the bound was not
    dropped.
    """
    if out.objective is None or not bound_above(out.bound, out.objective):
        return out
    kept = (max(fallback, OBJECTIVE_FLOOR) if fallback is not None
            and not bound_above(fallback, out.objective) else OBJECTIVE_FLOOR)
    if say is not None:
        source = "the LP's" if fallback == kept else "no plan scores below 0"
        say(f"  the solver's bound {progress_value(out.bound)} is above the plan kept "
            f"({progress_value(out.objective)}), so it bounds nothing: discarded; the bound is "
            f"{progress_value(kept)} ({source})")
    gap = relative_gap(out.objective, kept)
    status = (Status.OPTIMAL if gap is not None and gap <= relative_gap_wanted
              else Status.FEASIBLE_WITH_GAP)
    return replace(out, bound=kept, status=status,
                   words=f"{out.words}; its bound {progress_value(out.bound)} was above the "
                         "plan kept and is discarded")


# Every objective solved here is shortfall or money paid (priorities, costs and disruption
# rates are never negative), so no plan scores below 0.  The solver's bound can: the
# relocatable cost-adjustment columns dip below 0 on their own in the relaxation.
OBJECTIVE_FLOOR = 0.0


def with_floor(out: BackendOutcome, relative_gap_wanted: float) -> BackendOutcome:
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
    is_above = out.objective is not None and bound_above(out.bound, out.objective)
    if (out.status is not Status.OPTIMAL and not is_above and gap is not None
            and gap <= relative_gap_wanted):
        out = replace(out, status=Status.OPTIMAL, words="its plan meets its bound")
    return out


