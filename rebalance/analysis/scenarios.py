"""Surge scenarios: read a scenario file, apply it to an instance, compare plans side by side.

A scenario is a variant of an instance (``Instance.with_changes``): demand multiplied or
raised for a selection of offices, skills and periods, and optionally budgets changed.  The
file format is described in ``docs/instance-format.md`` (section *Scenario files*).  Every
plan is made by :func:`rebalance.planning.make_plan` and verified; the comparison only reads
the resulting plan tables.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import tomllib
from collections.abc import Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pandas as pd

from rebalance.analysis.limits import hire_rows
from rebalance.instance import Budget, Demand, Instance
from rebalance.plan import Plan
from rebalance.planning import PlanResult, make_plan
from rebalance.readers import Problem
from rebalance.solve import SolveOptions

__all__ = [
    "ACTION_COLUMNS",
    "BudgetChange",
    "Comparison",
    "DemandChange",
    "Scenario",
    "ScenarioError",
    "apply_scenario",
    "compare_scenarios",
    "plan_actions",
    "read_scenario",
]

ACTION_COLUMNS = ("scenario", "action", "person_or_office", "skill", "period", "detail",
                  "base", "scenario_value")


@dataclass(frozen=True)
class DemandChange:
    """Demand of the selected rows becomes ``fte x multiplier + add_fte``.

    ``None`` selects everything.  ``add_fte`` creates missing demand rows only when offices
    and skills are both named (a surge in a skill not asked for before).
    """

    offices: tuple[str, ...] | None
    skills: tuple[str, ...] | None
    periods: tuple[int, ...] | None
    multiplier: float = 1.0
    add_fte: float = 0.0
    priority: float | None = None  # priority of rows this change creates (default 1)


@dataclass(frozen=True)
class BudgetChange:
    """Caps of the selected years change by ``hiring_add`` and ``moves_add`` (money)."""

    years: tuple[str, ...] | None
    hiring_add: float = 0.0
    moves_add: float = 0.0


@dataclass(frozen=True)
class Scenario:
    name: str
    description: str
    demand: tuple[DemandChange, ...] = ()
    budget: tuple[BudgetChange, ...] = ()


class ScenarioError(ValueError):
    """A scenario file with problems; ``problems`` lists all of them."""

    def __init__(self, problems: list[Problem]) -> None:
        super().__init__("; ".join(str(p) for p in problems))
        self.problems = problems


def _names(raw: Any, known: Sequence[str], what: str, where: str,
           problems: list[Problem], file: str) -> tuple[str, ...] | None:
    if raw is None:
        return None
    if isinstance(raw, str):
        raw = [raw]
    if not isinstance(raw, list) or not all(isinstance(v, str) for v in raw) or not raw:
        problems.append(Problem(file, None, where, f"expected a list of {what} names"))
        return None
    unknown = [v for v in raw if v not in known]
    if unknown:
        problems.append(Problem(file, None, where, f"unknown {what} {', '.join(unknown)}; "
                                f"expected one of {', '.join(known)}"))
    return tuple(raw)


def _number(raw: Any, default: float, where: str, problems: list[Problem], file: str,
            minimum: float | None = None) -> float:
    if raw is None:
        return default
    if isinstance(raw, bool) or not isinstance(raw, int | float):
        problems.append(Problem(file, None, where, f"'{raw}' is not a number"))
        return default
    if minimum is not None and raw < minimum:
        problems.append(Problem(file, None, where, f"{raw} is below {minimum:g}"))
    return float(raw)


def read_scenario(path: str | Path, instance: Instance) -> Scenario:
    """Read and check a scenario TOML file against ``instance``; all problems at once."""
    file = str(path)
    problems: list[Problem] = []
    try:
        raw = tomllib.loads(Path(path).read_text(encoding="utf-8-sig"))
    except FileNotFoundError:
        raise ScenarioError([Problem(file, None, "", "file not found")]) from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise ScenarioError([Problem(file, None, "", f"not valid TOML: {exc}")]) from None
    known_keys = {"name", "description", "demand", "budget"}
    for key in raw:
        if key not in known_keys:
            problems.append(Problem(file, None, key, f"unknown key; expected one of "
                                    f"{', '.join(sorted(known_keys))}"))
    name = raw.get("name")
    if not isinstance(name, str) or not name.strip():
        problems.append(Problem(file, None, "name", "missing; expected a scenario name"))
        name = Path(path).stem
    description = raw.get("description", "")
    if not isinstance(description, str):
        problems.append(Problem(file, None, "description", "expected text"))
        description = ""
    offices = [o.name for o in instance.offices]
    skills = [s.name for s in instance.skills]
    periods = list(instance.period_names)
    demand: list[DemandChange] = []
    for i, entry in enumerate(raw.get("demand", []), 1):
        at = f"demand[{i}]"
        if not isinstance(entry, dict):
            problems.append(Problem(file, None, at, "expected a [[demand]] table"))
            continue
        for key in entry:
            if key not in {"offices", "skills", "periods", "multiplier", "add_fte", "priority"}:
                problems.append(Problem(file, None, f"{at}.{key}", "unknown key; expected "
                                        "offices, skills, periods, multiplier, add_fte, priority"))
        chosen = _names(entry.get("periods"), periods, "period", f"{at}.periods", problems,
                        file)
        change = DemandChange(
            offices=_names(entry.get("offices"), offices, "office", f"{at}.offices", problems,
                           file),
            skills=_names(entry.get("skills"), skills, "skill", f"{at}.skills", problems, file),
            periods=None if chosen is None else tuple(
                periods.index(p) for p in chosen if p in periods),
            multiplier=_number(entry.get("multiplier"), 1.0, f"{at}.multiplier", problems,
                               file, minimum=0.0),
            add_fte=_number(entry.get("add_fte"), 0.0, f"{at}.add_fte", problems, file),
            priority=(None if entry.get("priority") is None else _number(
                entry.get("priority"), 1.0, f"{at}.priority", problems, file, minimum=0.0)),
        )
        problem = _inert(change, instance)
        if problem is not None:
            problems.append(Problem(file, None, at, problem))
        demand.append(change)
    budget: list[BudgetChange] = []
    years = list(instance.years)
    for i, entry in enumerate(raw.get("budget", []), 1):
        at = f"budget[{i}]"
        if not isinstance(entry, dict):
            problems.append(Problem(file, None, at, "expected a [[budget]] table"))
            continue
        for key in entry:
            if key not in {"years", "hiring_add", "moves_add"}:
                problems.append(Problem(file, None, f"{at}.{key}", "unknown key; expected years, "
                                        "hiring_add, moves_add"))
        budget.append(BudgetChange(
            years=_names(entry.get("years"), years, "budget year", f"{at}.years", problems,
                         file),
            hiring_add=_number(entry.get("hiring_add"), 0.0, f"{at}.hiring_add", problems,
                               file),
            moves_add=_number(entry.get("moves_add"), 0.0, f"{at}.moves_add", problems, file),
        ))
    if not demand and not budget:
        problems.append(Problem(file, None, "demand", "the scenario changes nothing; expected "
                                "at least one [[demand]] or [[budget]] table"))
    if problems:
        raise ScenarioError(problems)
    return Scenario(name.strip(), description.strip(), tuple(demand), tuple(budget))


def _inert(change: DemandChange, instance: Instance) -> str | None:
    """Why a [[demand]] table would leave the demand as it is, or None.  A scenario that
    silently changed nothing had been solved and compared as if it were a surge."""
    if change.multiplier == 1.0 and change.add_fte == 0.0:
        # priority only labels the rows add_fte creates
        return "changes nothing; expected a multiplier other than 1, or add_fte"
    adds_rows = change.add_fte > 0 and change.offices is not None and change.skills is not None
    if not adds_rows and not any(_selected(change, d.office, d.skill, d.period)
                                 for d in instance.demand):
        return ("selects no demand row of the instance; name offices, skills and periods "
                "that have demand, or give offices, skills and add_fte to add rows")
    return None


def _selected(change: DemandChange, office: str, skill: str, period: int) -> bool:
    return ((change.offices is None or office in change.offices)
            and (change.skills is None or skill in change.skills)
            and (change.periods is None or period in change.periods))


def apply_scenario(instance: Instance, scenario: Scenario) -> Instance:
    """The instance with the scenario's changes; demand and caps never go below zero."""
    rows = {(d.office, d.skill, d.period): d for d in instance.demand}
    for change in scenario.demand:
        for key, d in list(rows.items()):
            if _selected(change, *key):
                fte = max(0.0, d.fte * change.multiplier + change.add_fte)
                rows[key] = Demand(d.office, d.skill, d.period, fte, d.priority, None)
        if change.add_fte > 0 and change.offices is not None and change.skills is not None:
            chosen = change.periods if change.periods is not None else range(
                len(instance.periods))
            for o in change.offices:
                for k in change.skills:
                    for t in chosen:
                        if (o, k, t) not in rows:
                            rows[(o, k, t)] = Demand(o, k, t, change.add_fte,
                                                     change.priority or 1.0, None)
    budgets = {b.year: b for b in instance.budgets}
    for bchange in scenario.budget:
        for year in bchange.years if bchange.years is not None else instance.years:
            old = budgets.get(year, Budget(year, None, None))
            budgets[year] = Budget(
                year,
                None if old.hiring is None else max(0.0, old.hiring + bchange.hiring_add),
                None if old.moves is None else max(0.0, old.moves + bchange.moves_add),
            )
    demand = tuple(sorted(rows.values(), key=lambda d: (d.period, d.office, d.skill)))
    return instance.with_changes(
        name=f"{instance.name}+{scenario.name}", demand=demand,
        budgets=tuple(budgets[y] for y in instance.years if y in budgets))


# --------------------------------------------------------------------------------------------
# comparison


@dataclass(frozen=True)
class Comparison:
    """Plans of the base and of each scenario, and the tables that compare them.

    ``table`` (``scenarios.csv``): one row per plan.  ``costs`` (``scenario_costs.csv``): cost
    by scenario, year and kind.  ``actions`` (``scenario_actions.csv``): every hire, detail and
    reassignment that differs from the base plan.
    """

    names: tuple[str, ...]
    results: tuple[PlanResult, ...]
    table: pd.DataFrame
    costs: pd.DataFrame
    actions: pd.DataFrame


def _solve(instance: Instance, options: SolveOptions) -> PlanResult:
    return make_plan(instance, options)


def solve_many(instances: Sequence[Instance], options: SolveOptions,
               workers: int) -> list[PlanResult]:
    """Solve each instance; in a process pool when ``workers`` > 1 (same results either way:
    every solve is a pure function of its instance and options)."""
    plain = options if options.progress is None else SolveOptions(
        **{f: getattr(options, f) for f in options.__dataclass_fields__ if f != "progress"})
    if workers <= 1 or len(instances) <= 1:
        return [_solve(inst, plain) for inst in instances]
    # Spawned, not forked: a child forked from a process that has run HiGHS inherits its
    # thread pool in a broken state and spins.
    others = set(multiprocessing.active_children())  # the caller's own: never ended here
    pool = ProcessPoolExecutor(max_workers=min(workers, len(instances)),
                               mp_context=multiprocessing.get_context("spawn"))
    try:
        results = list(pool.map(_solve_in_worker, instances, [plain] * len(instances)))
    except BaseException:
        # Stopped from outside (Ctrl-C, SIGTERM) or failed: end the workers now rather than
        # wait for their solves (a sweep: 22 s to stop a comparison of three).
        pool.shutdown(wait=False, cancel_futures=True)
        _end_workers([p for p in multiprocessing.active_children() if p not in others])
        raise
    pool.shutdown(wait=True)
    return results


def _solve_in_worker(instance: Instance, options: SolveOptions) -> PlanResult:
    """:func:`_solve` in a pool worker: stopped (SIGTERM from :func:`_end_workers`, or
    Ctrl-C at the terminal), its solver processes are already killed, and the worker ends
    rather than take the next task queued (which it had, forking solvers that outlived the
    run)."""
    try:
        return _solve(instance, options)
    except KeyboardInterrupt:
        os._exit(130)


def _end_workers(workers: list[multiprocessing.process.BaseProcess]) -> None:
    """SIGTERM to each worker, then, a second later, SIGKILL to whatever of their process
    trees is left."""
    import psutil

    tree: list[psutil.Process] = []
    for worker in workers:
        with contextlib.suppress(psutil.Error, ValueError):
            process = psutil.Process(worker.pid)
            tree += [process, *process.children(recursive=True)]
            process.terminate()
    _, alive = psutil.wait_procs(tree, timeout=1.0)
    for process in alive:
        with contextlib.suppress(psutil.Error):
            process.kill()


def plan_actions(plan: Plan) -> dict[tuple[str, str, str, str, str], float]:
    """Actions of a plan keyed (action, person or office, skill, period, detail) -> amount."""
    out: dict[tuple[str, str, str, str, str], float] = {}
    for h in hire_rows(plan):
        key = ("hire", h.office, h.skill, h.start_period, h.funding)
        out[key] = out.get(key, 0.0) + float(h.count)
    for row in plan.details.itertuples(index=False):
        key = ("detail", str(row.person), "", str(row.period),
               f"{row.from_office} -> {row.to_office}")
        out[key] = 1.0
    for row in plan.reassignments.itertuples(index=False):
        key = ("reassignment", str(row.person), "", str(row.period),
               f"{row.from_office} -> {row.to_office}")
        out[key] = 1.0
    return out


def _row(name: str, result: PlanResult, instance: Instance, differing: int) -> dict[str, Any]:
    plan = result.plan
    row: dict[str, Any] = {
        "scenario": name,
        "status": result.status.value,
        "verified": result.verified,
        "gap": result.solve.gap,
        "demand_fte_periods": sum(d.fte for d in instance.demand),
    }
    if plan is None:
        return row
    row.update({
        "weighted_shortfall": plan.weighted_shortfall,
        "shortfall_fte_periods": plan.shortfall_fte,
        "total_cost": plan.total_cost,
        "hires": plan.hires_count(),
        "detail_periods": len(plan.details),
        "reassignments": len(plan.reassignments),
        "actions_differing": differing,
    })
    for kind, cost in plan.cost_by_kind().items():
        row[f"cost_{kind}"] = cost
    by_year = plan.costs.groupby(plan.costs["year"].astype(str))["cost"].sum()
    for year in instance.years:
        row[f"cost_{year}"] = float(by_year.get(year, 0.0))
    return row


def compare_scenarios(instance: Instance, scenarios: Sequence[Scenario], options: SolveOptions,
                      workers: int = 2) -> Comparison:
    """Solve the base and each scenario and tabulate them side by side."""
    variants = [instance] + [apply_scenario(instance, s) for s in scenarios]
    names = ("base", *tuple(s.name for s in scenarios))
    if len(set(names)) != len(names):
        raise ValueError("scenario names must differ from each other and from 'base'")
    results = solve_many(variants, options, workers)
    base_plan = results[0].plan
    base_actions = plan_actions(base_plan) if base_plan is not None else {}
    rows = []
    cost_rows = []
    action_rows = []
    for name, variant, result in zip(names, variants, results, strict=True):
        differing = 0
        if result.plan is not None:
            actions = plan_actions(result.plan)
            if name != "base":
                for key in sorted(set(actions) | set(base_actions)):
                    a, b = base_actions.get(key, 0.0), actions.get(key, 0.0)
                    if abs(a - b) > 1e-9:
                        differing += 1
                        action_rows.append((name, *key, a, b))
            c = result.plan.costs
            for year, kind, cost in zip(c["year"].astype(str), c["kind"].astype(str),
                                        c["cost"].astype(float), strict=True):
                cost_rows.append((name, year, kind, cost))
        rows.append(_row(name, result, variant, differing))
    table = pd.DataFrame(rows)
    costs = pd.DataFrame(cost_rows, columns=["scenario", "year", "kind", "cost"])
    actions_frame = pd.DataFrame(action_rows, columns=list(ACTION_COLUMNS))
    return Comparison(names, tuple(results), table, costs, actions_frame)
