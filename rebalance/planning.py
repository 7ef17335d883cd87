"""The whole job in one call: instance -> model -> solve -> plan -> verification.

:func:`make_plan` is a pure function of its inputs (instance and options), which is what lets
scenarios, sweeps and re-plans run it many times, in other processes if need be.
"""

from __future__ import annotations

import json
import time
from collections.abc import Callable, Collection, Hashable, Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import pandas as pd

from rebalance.backends import BACKENDS, raise_if_stopped, stoppable
from rebalance.files import staged_folder
from rebalance.instance import Instance, Person
from rebalance.model import BuildCutShort, DetailRoute, Model, build_model
from rebalance.numbers import gap_text, money_amount, seconds_text, share_text
from rebalance.plan import Plan, extract_plan, write_plan
from rebalance.solve import SolveOptions, SolveResult, StageResult, Status, solve
from rebalance.verify import Violation, verify_plan

__all__ = ["BUILD_STAGE", "WIDE_GAP", "PlanResult", "RunRate", "gap_warning", "make_plan",
           "new_position_salaries", "new_position_salary_per_year", "options_from_instance",
           "plan_run_rate", "plan_warnings", "run_rate_cap_words", "run_rate_consequence",
           "run_rate_note",
           "run_rate_warning", "summary_dict", "write_outputs", "write_plan_files"]


# The one stage of a run cut short while its model was built (no solver stage ran).
BUILD_STAGE = "build"


@dataclass(frozen=True)
class PlanResult:
    """Everything a report needs about one solve."""

    instance: Instance
    options: SolveOptions
    status: Status
    plan: Plan | None
    solve: SolveResult
    violations: tuple[Violation, ...]
    num_cols: int
    num_rows: int
    num_integer: int
    build_seconds: float
    extract_seconds: float
    verify_seconds: float
    notes: tuple[str, ...] = field(default=())

    @property
    def verified(self) -> bool:
        return self.plan is not None and not self.violations


def options_from_instance(instance: Instance, **overrides: Any) -> SolveOptions:
    """Solve options from the instance's settings, with command-line overrides on top."""
    s = instance.solver
    options = SolveOptions(
        solver=s.name,
        time_limit_seconds=s.time_limit_seconds,
        relative_gap=s.relative_gap,
        threads=s.threads,
        seed=s.seed,
        mode=instance.objective.mode,
        shortfall_cost=instance.objective.shortfall_cost,
        shortfall_tolerance=instance.objective.shortfall_tolerance,
    )
    given = {k: v for k, v in overrides.items() if v is not None}
    return replace(options, **given)


def make_plan(instance: Instance, options: SolveOptions, pooled: bool = True,
              pool_key: Callable[[Person], Hashable] | None = None,
              adjust: Callable[[Model], Model] | None = None,
              pair_details: bool | None = None,
              keep_details: Collection[DetailRoute] = ()) -> PlanResult:
    """Build, solve, extract and verify.  Never returns an unverified plan as good.

    ``pooled=False`` builds the person-level formulation (same optimum, larger model).
    ``pair_details`` picks the relocatable-detail formulation (see ``build_model``).
    ``pool_key`` and ``adjust`` let analyses (re-planning) keep people with different
    histories apart and fix or bound columns of the built model before it is solved;
    ``keep_details`` gives them detail columns the builder would prune (see ``build_model``).
    """
    started = time.perf_counter()
    try:
        model = build_model(instance, pooled=pooled, pool_key=pool_key,
                            pair_details=pair_details, keep_details=keep_details,
                            deadline=started + options.time_limit_seconds)
    except BuildCutShort as cut_short:
        return _built_too_late(instance, options, cut_short)
    if adjust is not None:
        model = adjust(model)
    build_seconds = time.perf_counter() - started
    if options.progress is not None:
        # By the number rule's seconds_text, as the console's summary and the page show it.
        options.progress(f"model: {model.num_cols:,} columns ({model.num_integer:,} whole-number), "
                         f"{model.num_rows:,} rows, built in {seconds_text(build_seconds)}s")
    # Naming people and verifying the plan come after the solve, inside the same limit.
    remaining = max(0.5, options.time_limit_seconds * (1.0 - options.shares.finish)
                    - build_seconds)
    # Ctrl-C (a notebook's interrupt too) stops every solver process at once.
    with stoppable():
        result = solve(model, replace(options, time_limit_seconds=remaining), instance)
    raise_if_stopped()
    plan = None
    violations: tuple[Violation, ...] = ()
    extract_seconds = verify_seconds = 0.0
    if result.status.has_plan and result.x is not None:
        t0 = time.perf_counter()
        plan = extract_plan(instance, model, result.x)
        extract_seconds = time.perf_counter() - t0
        t0 = time.perf_counter()
        violations = tuple(verify_plan(instance, plan))
        verify_seconds = time.perf_counter() - t0
    return PlanResult(instance, options, result.status, plan, result, violations,
                      model.num_cols, model.num_rows, model.num_integer, build_seconds,
                      extract_seconds, verify_seconds)


def _built_too_late(instance: Instance, options: SolveOptions,
                    cut_short: BuildCutShort) -> PlanResult:
    """No plan: the time limit or the machine's memory ran out while the model was built."""
    backend = BACKENDS[options.solver]()
    words = str(cut_short)
    if options.progress is not None:
        options.progress(f"model: {words}")
    status = Status.NO_PLAN_IN_TIME if cut_short.out_of == "time" else Status.ERROR
    stage = StageResult(BUILD_STAGE, status, None, None, None, cut_short.seconds, words)
    solved = SolveResult(status, None, (stage,), backend.name, backend.version(), 0.0)
    return PlanResult(instance, options, status, None, solved, (), 0, 0, 0, cut_short.seconds,
                      0.0, 0.0)


def summary_dict(result: PlanResult) -> dict[str, Any]:
    """The content of ``summary.json``."""
    plan = result.plan
    stages = [
        {"stage": s.name, "status": s.status.value, "objective": s.objective, "bound": s.bound,
         "gap": s.gap, "seconds": round(s.seconds, 3), "solver_says": s.solver_words}
        for s in result.solve.stages
    ]
    out: dict[str, Any] = {
        "instance": result.instance.name,
        "status": result.status.value,
        "objective_mode": result.options.mode,
        "weighted_shortfall": plan.weighted_shortfall if plan else None,
        # With nobody moved or hired, the work split at its best: what the plan buys.
        "staying_put_weighted_shortfall": result.solve.staying_put_shortfall if plan else None,
        "shortfall_fte_periods": plan.shortfall_fte if plan else None,
        "total_cost": plan.total_cost if plan else None,
        "cost_by_kind": plan.cost_by_kind() if plan else None,
        # The unit of every amount here ([money] currency; null where the instance sets
        # none): total_cost had carried no unit where the reports said EUR.
        "currency": result.instance.money.currency,
        "hires": plan.hires_count() if plan else None,
        "detail_periods": len(plan.details) if plan else None,
        "reassignments": len(plan.reassignments) if plan else None,
        "gap": result.solve.gap,
        # "optimal" means within this gap of the bound (solver.relative_gap or --gap): a
        # reader of the file alone could not tell "optimal" at 0.93% from proven exact.
        "relative_gap_asked": result.options.relative_gap,
        "stages": stages,
        "solver": result.solve.solver,
        "solver_version": result.solve.solver_version,
        "model": {"columns": result.num_cols, "rows": result.num_rows,
                  "integer_columns": result.num_integer},
        "seconds": {"build": round(result.build_seconds, 3),
                    "solve": round(result.solve.solve_seconds, 3),
                    "extract": round(result.extract_seconds, 3),
                    "verify": round(result.verify_seconds, 3)},
        "verification": {"passed": result.verified,
                         "violations": [str(v) for v in result.violations]},
        "conflicts": list(result.solve.conflicts),
        "warnings": list(result.instance.warnings),
        # The plan's own warnings, which the console, the page and the workbook show too;
        # "warnings" stays the instance's (input) warnings.
        "plan_warnings": list(plan_warnings(result.instance, plan, result.status.value,
                                            result.solve.gap)) if plan else [],
        "caution": CAUTION,
    }
    return out


def new_position_salary_per_year(instance: Instance, skill: str, count: int) -> float:
    """What ``count`` new positions of ``skill`` cost in salary a year after the horizon:
    count x the skill's salary per period x periods per year (a skill the instance lacks
    costs 0: a plan naming one fails verification, and its report is still drawn)."""
    return count * _salary_per_period(instance, skill) * instance.periods_per_year


def _salary_per_period(instance: Instance, skill: str) -> float:
    return next((float(s.salary_per_period) for s in instance.skills if s.name == skill), 0.0)


def new_position_salaries(instance: Instance, plan: Plan) -> pd.DataFrame:
    """Yearly salary that the plan's new positions commit beyond the horizon, by skill
    (:func:`new_position_salary_per_year` of the hires funded as new positions)."""
    hires = plan.hires
    columns = ["skill", "positions", "salary_per_period", "per_year"]
    if hires.empty:
        return pd.DataFrame(columns=columns)
    new = hires[hires["funding"] == "new"].groupby("skill")["count"].sum()
    rows = [{"skill": skill, "positions": int(count),
             "salary_per_period": _salary_per_period(instance, str(skill)),
             "per_year": new_position_salary_per_year(instance, str(skill), int(count))}
            for skill, count in new.items() if count > 0]
    return pd.DataFrame(rows, columns=columns)


# What the new positions cost after the horizon lives here, below the reports, because
# summary.json carries its warning as the console, the page and the workbook do (its
# "warnings" had been [] beside their warning).
@dataclass(frozen=True)
class RunRate:
    """What the plan's new positions cost in salaries every year after the horizon
    (``per_year``), beside the hiring cap of the last budget year that sets one for a whole
    year in the horizon (``cap_year``, ``cap``; None where none does): that cap is the
    nearest guide to the hiring money of the year after, which these salaries come out of
    first.  A later capped year only partly in the horizon (``part_year``, with
    ``part_periods`` of its ``periods_per_year``) caps only those periods' spending: it is
    passed over, and said to be.  Where no capped year is whole in the horizon, the part
    year's cap is set against the salaries of its periods in the horizon (``compared``)."""

    per_year: float
    positions: int
    horizon_end: str
    cap_year: str | None
    cap: float | None
    compared: float = 0.0
    part_year: str | None = None
    part_periods: int = 0
    periods_per_year: int = 0

    @property
    def set_against_part(self) -> bool:
        """The cap compared is a part year's, against its periods' salaries."""
        return self.part_year is not None and self.part_year == self.cap_year

    @property
    def above_cap(self) -> bool:
        """The salaries alone take more than the whole cap (money to the cent)."""
        return self.cap is not None and round(self.compared, 2) > round(self.cap, 2)


def plan_run_rate(instance: Instance, plan: Plan,
                  salaries: pd.DataFrame | None = None) -> RunRate:
    """:func:`new_position_salaries` (or its table ``salaries`` where the caller has it
    already), summed, beside the last hiring cap of a whole year (:class:`RunRate`)."""
    table = new_position_salaries(instance, plan) if salaries is None else salaries
    per_year = float(table["per_year"].sum()) if len(table) else 0.0
    positions = int(table["positions"].sum()) if len(table) else 0
    per = instance.periods_per_year
    whole: tuple[str, float] | None = None
    part: tuple[str, float, int] | None = None
    for year in instance.years:
        if (hiring := instance.budget_cap(year, "hiring")) is None:
            continue
        periods = sum(1 for p in instance.periods if p.year == year)
        if periods >= per:
            whole, part = (year, hiring), None
        else:  # a year cut by the horizon's start or end caps only its periods in it
            part = (year, hiring, periods)
    end = instance.periods[-1].name
    if whole is not None:
        return RunRate(per_year, positions, end, whole[0], whole[1], per_year,
                       part[0] if part else None, part[2] if part else 0, per)
    if part is not None:
        return RunRate(per_year, positions, end, part[0], part[1], per_year * part[2] / per,
                       part[0], part[2], per)
    return RunRate(per_year, positions, end, None, None, per_year, periods_per_year=per)


def _periods(count: int) -> str:
    return f"{count} period{'' if count == 1 else 's'}"


def run_rate_cap_words(rate: RunRate, currency: str | None) -> str:
    """The cap the salaries are set against, with any year the horizon cuts said: "2027's
    hiring cap (1,400,000), the last whole year's (2028's covers only 2 periods of its 4 in
    the horizon)"; "" with no cap."""
    if rate.cap is None:
        return ""
    cap = money_amount(rate.cap, currency)
    if rate.set_against_part:
        return (f"{rate.cap_year}'s hiring cap ({cap}), which caps only its "
                f"{_periods(rate.part_periods)} of {rate.periods_per_year} in the horizon "
                "(no capped year is whole in it)")
    return f"{rate.cap_year}'s hiring cap ({cap})" + (
        f", the last whole year's ({rate.part_year}'s covers only "
        f"{_periods(rate.part_periods)} of its {rate.periods_per_year} in the horizon)"
        if rate.part_year else "")


def run_rate_note(rate: RunRate, currency: str | None) -> str:
    """"100.6% of 2028's hiring cap (1,400,000)", or "" with no cap or no salaries
    (:func:`run_rate_cap_words`); set against a part year's cap, over its periods."""
    if rate.cap is None or rate.per_year <= 0:
        return ""
    over = (f"over {rate.cap_year}'s {_periods(rate.part_periods)} in the horizon "
            f"({money_amount(rate.compared, currency)}), " if rate.set_against_part else "")
    if rate.cap <= 0:
        return f"{over}more than {run_rate_cap_words(rate, currency)}"
    return (f"{over}{share_text(rate.compared, rate.cap)} of "
            f"{run_rate_cap_words(rate, currency)}")


def run_rate_warning(rate: RunRate, currency: str | None) -> str:
    """A warning where the salaries take more than the last hiring cap, else ""."""
    if not rate.above_cap:
        return ""
    return (f"the new positions' salaries ({money_amount(rate.per_year, currency)} a year) "
            f"are {run_rate_note(rate, currency)}: {run_rate_consequence(rate)}")


def run_rate_consequence(rate: RunRate) -> str:
    """What salaries above the last hiring cap mean for the year after the horizon."""
    # "Used up on them before a single new hire" had read as muddled to a practitioner.
    like = (f"at {rate.cap_year}'s pace" if rate.set_against_part
            else f"like {rate.cap_year}'s")
    return (f"after the horizon, a hiring budget {like} would not cover even "
            "these salaries, let alone any new hire")


# Above this gap a stopped solve is flagged before its figures (common practice is to quote
# a plan's gap; 5% is a judgement of when it changes what a reader should conclude).
WIDE_GAP = 0.05


def gap_warning(status: str | None, gap: float | None) -> str:
    """The warning of a solve stopped with a wide (or unknown) gap, else "": the console,
    summary.json, the page and the workbook all carry it (the console and summary.json had
    not, beside a cost gap of 46.84%)."""
    if status != Status.FEASIBLE_WITH_GAP.value or (gap is not None and gap <= WIDE_GAP):
        return ""
    said = "an unknown gap" if gap is None else f"a gap of {gap_text(gap)}"
    return (f"The solver stopped at its time limit with {said} between this plan and the best "
            "bound it proved: a better plan may exist. Give it more time (--time-limit) "
            "before relying on these figures.")


def plan_warnings(instance: Instance, plan: Plan, status: str | None = None,
                  gap: float | None = None) -> tuple[str, ...]:
    """Warnings about the plan itself (not its inputs), as the console writes them: the
    solve's wide gap (given its ``status`` and ``gap``), the new positions' salaries above
    the last hiring cap."""
    warnings = (gap_warning(status, gap),
                run_rate_warning(plan_run_rate(instance, plan), instance.money.currency))
    return tuple(w for w in warnings if w)


CAUTION = ("This plan supports a decision; it does not make one. Personnel rules, agreements "
           "with staff representatives and local law govern any detail, reassignment or hire.")
# After a demand forecast, which no plan has used yet.
FORECAST_CAUTION = ("This forecast supports a decision; it does not make one. It is an "
                    "estimate from past work, and a plan built on it is only as good as the "
                    "forecast.")


# Measured (writing the tables, summary, workbook and report of a generated instance's plan):
# medium, 2,000 staff, 1.5 s for 32,000 rows; the same plan with its work table eight times
# over (234,000 rows, about large's 226,000), 9.1 s.  The work rows grow with the people.
# With openpyxl writing plan.xlsx it had been 3.1 s for medium and 19 s for large.  The
# constant covers starting the program.
WRITE_SECONDS_PER_PERSON = 0.6e-3
WRITE_SECONDS_BASE = 1.0


def write_seconds(instance: Instance) -> float:
    """About how long :func:`write_outputs` (with the reports) takes for ``instance``'s plan:
    time a run that writes its files must keep out of its solve."""
    return WRITE_SECONDS_BASE + WRITE_SECONDS_PER_PERSON * len(instance.staff)


def write_plan_files(result: PlanResult, folder: Path,
                     summary: Mapping[str, Any] | None = None) -> None:
    """Write the plan tables and summary.json into ``folder`` (made already): what every plan
    folder holds, the run's own and an analysis's scenario plans alike.  ``summary``'s keys
    follow :func:`summary_dict`'s (which scenario, which re-plan, where the instance is)."""
    if result.plan is None:
        raise ValueError("no plan to write")
    write_plan(result.plan, folder)
    (folder / "summary.json").write_text(
        json.dumps({**summary_dict(result), **(summary or {})}, indent=2) + "\n",
        encoding="utf-8")


def write_outputs(result: PlanResult, out_dir: str | Path) -> None:
    """Write the plan tables and summary.json atomically: the tables alone, for a script.
    ``rebalance plan`` writes the whole folder (reasons.csv, report.html and plan.xlsx too)
    with :func:`rebalance.report.files.write_plan_folder` inside :func:`staged_folder`."""
    if result.plan is None:  # before a folder is staged
        raise ValueError("no plan to write")
    with staged_folder(out_dir, kind="plan") as folder:
        write_plan_files(result, folder)
