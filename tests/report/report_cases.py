"""Plan folders for the report tests, made by real solves of the tiny instance.

Besides the plan the CLI writes, the folder gets the analysis tables the report can show:
budget frontier, scenario comparison, marginal values and reasons, each made by the issue-5
analyses on tiny, so every figure the browser draws came from a solver run.
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
from dataclasses import replace
from functools import lru_cache
from pathlib import Path

import pandas as pd

from rebalance import make_plan, options_from_instance, read_instance
from rebalance.instance import Budget, Instance
from rebalance.solve import SolveOptions

TESTS = Path(__file__).resolve().parent.parent
TINY = TESTS / "data" / "tiny"


def cli(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "rebalance.cli", *args], capture_output=True,
                          text=True, timeout=300)


def _solve(instance: Instance) -> dict[str, float]:
    result = make_plan(instance, options_from_instance(instance, relative_gap=0.0,
                                                       time_limit_seconds=60.0))
    if result.plan is None or not result.verified:
        raise RuntimeError(f"tiny variant did not solve and verify: {result.status}")
    plan = result.plan
    return {"weighted_shortfall": plan.weighted_shortfall, "total_cost": plan.total_cost,
            "hires": plan.hires_count(), "detail_periods": len(plan.details)}


def _with_budget(instance: Instance, hiring: float | None = None,
                 moves: float | None = None) -> Instance:
    (budget,) = instance.budgets
    return instance.with_changes(budgets=(Budget(
        budget.year, budget.hiring if hiring is None else hiring,
        budget.moves if moves is None else moves),))


def _options(instance: Instance) -> SolveOptions:
    return options_from_instance(instance, relative_gap=0.0, time_limit_seconds=60.0)


def frontier_table(instance: Instance) -> pd.DataFrame:
    """The issue-5 budget frontier over both budgets (each point an exact re-solve)."""
    from rebalance.analysis.frontier import BudgetGrid, budget_frontier

    grid = BudgetGrid(hiring=(0.0, 10_000.0, 20_000.0, 30_000.0, 60_000.0),
                      moves=(5_000.0, 30_000.0))
    return budget_frontier(instance, grid, _options(instance), workers=1).table


def _comparison(instance: Instance):  # type: ignore[no-untyped-def]
    from rebalance.analysis.scenarios import DemandChange, Scenario, compare_scenarios

    surges = [Scenario("surge at B +50%", "half as much work again at B",
                       (DemandChange(("B",), None, None, multiplier=1.5),)),
              Scenario("surge at A +40%", "two-fifths more work at A",
                       (DemandChange(("A",), None, None, multiplier=1.4),))]
    return compare_scenarios(instance, surges, _options(instance), workers=1)


def scenario_table(instance: Instance) -> pd.DataFrame:
    """The issue-5 scenario comparison of tiny and two surges (each its own solve)."""
    return _comparison(instance).table


def marginal_table(instance: Instance) -> pd.DataFrame:
    """The issue-5 marginal values (exact re-solve and LP-dual estimate per binding limit),
    measured at a tight hiring budget, where tiny is short of cover, so limits bind."""
    from rebalance.analysis.marginal import Steps, marginal_values

    tight = _with_budget(instance, hiring=20_000.0, moves=5_000.0)
    base = make_plan(tight, _options(tight))
    return marginal_values(base, _options(tight), Steps(budget=10_000.0), workers=1).table


def reasons_table(instance: Instance) -> pd.DataFrame:
    """The issue-5 reason for each action of tiny's plan."""
    from rebalance.analysis.reasons import reasons

    result = make_plan(instance, _options(instance))
    if result.plan is None:
        raise RuntimeError(f"tiny did not solve: {result.status}")
    return reasons(instance, result.plan).table


@lru_cache(maxsize=1)
def tiny_plan_folder() -> Path:
    """A plan folder of tiny written by ``rebalance plan``, plus analysis tables."""
    out = Path(tempfile.mkdtemp(prefix="rebalance-report-")) / "plan"
    done = cli("plan", str(TINY), "-o", str(out), "-q")
    if done.returncode != 0:
        raise RuntimeError(done.stderr)
    return out


@lru_cache(maxsize=1)
def tiny_analysis_folder() -> Path:
    """The tiny plan folder with frontier, scenarios and marginal values beside it, and the
    reports rebuilt by ``rebalance report`` so they show them."""
    plan = tiny_plan_folder()
    folder = plan.parent / "with-analysis"
    folder.mkdir()
    for file in plan.iterdir():
        (folder / file.name).write_bytes(file.read_bytes())
    instance = read_instance(TINY)
    frontier_table(instance).to_csv(folder / "frontier.csv", index=False)
    comparison = _comparison(instance)
    comparison.table.to_csv(folder / "scenarios.csv", index=False)
    comparison.actions.to_csv(folder / "scenario_actions.csv", index=False)
    comparison.costs.to_csv(folder / "scenario_costs.csv", index=False)
    marginal_table(instance).to_csv(folder / "marginal_values.csv", index=False)
    reasons_table(instance).to_csv(folder / "reasons.csv", index=False)
    done = cli("report", str(folder))
    if done.returncode != 0:
        raise RuntimeError(done.stderr)
    return folder


DEMO = TESTS.parent / "instances" / "demo"


def demo_slice() -> Instance:
    """The demo's first year at two offices that lend each other staff, budget caps scaled to
    their share of staff (the notebook plans the same slice).  Solves in seconds, where the
    whole demo takes about a minute."""
    demo = read_instance(DEMO)
    keep = {"port-ilse-central", "fenmarch-south"}
    periods = demo.periods[:4]
    years = {p.year for p in periods}
    share = sum(p.home_office in keep for p in demo.staff) / len(demo.staff)

    def scaled(cap: float | None) -> float | None:
        return None if cap is None else round(cap * share, -3)

    return demo.with_changes(
        name="demo-slice", periods=periods,
        offices=tuple(o for o in demo.offices if o.name in keep),
        staff=tuple(p for p in demo.staff if p.home_office in keep),
        demand=tuple(d for d in demo.demand if d.office in keep and d.period < len(periods)),
        vacancies={k: v for k, v in demo.vacancies.items() if k[0] in keep},
        attrition={k: v for k, v in demo.attrition.items() if k[1] is None or k[1] in keep},
        budgets=tuple(replace(b, hiring=scaled(b.hiring), moves=scaled(b.moves))
                      for b in demo.budgets if b.year in years))


@lru_cache(maxsize=1)
def demo_slice_folder() -> Path:
    """A plan folder of the demo slice, written the way ``rebalance plan`` writes one."""
    from rebalance.planning import write_outputs
    from rebalance.report.files import plan_extras

    instance = demo_slice()
    result = make_plan(instance, options_from_instance(instance, relative_gap=0.02,
                                                       time_limit_seconds=60.0))
    if result.plan is None or not result.verified:
        raise RuntimeError(f"demo slice did not solve and verify: {result.status}")
    out = Path(tempfile.mkdtemp(prefix="rebalance-report-")) / "demo-slice"
    write_outputs(result, out, extra=plan_extras())
    return out
