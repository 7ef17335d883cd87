"""Plan folders for the report tests, made by real solves of the tiny instance.

Besides the plan the CLI writes, the folder gets the analysis tables the report can show
(budget frontier, scenario comparison, marginal values), each computed here by plain re-solves
of tiny variants, so every figure the browser draws came from a solver run.
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


def _surge(instance: Instance, office: str, factor: float) -> Instance:
    return instance.with_changes(demand=tuple(
        replace(d, fte=d.fte * factor) if d.office == office else d for d in instance.demand))


def frontier_table(instance: Instance) -> pd.DataFrame:
    """Least shortfall over a grid of both budgets (columns as the issue-5 frontier names them)."""
    rows = [{"hiring_budget": h, "moves_budget": m,
             **_solve(_with_budget(instance, hiring=h, moves=m))}
            for m in (5_000.0, 30_000.0) for h in (0.0, 10_000.0, 20_000.0, 30_000.0, 60_000.0)]
    frame = pd.DataFrame(rows)
    frame["knee"] = False
    # Knee of each line: the point farthest below the chord from its first point to its last.
    for _, part in frame.groupby("moves_budget"):
        x, y = part["hiring_budget"], part["weighted_shortfall"]
        chord = y.iloc[0] + (y.iloc[-1] - y.iloc[0]) * (x - x.iloc[0]) / (x.iloc[-1] - x.iloc[0])
        if (chord - y).max() > 1e-9:
            frame.loc[(chord - y).idxmax(), "knee"] = True
    return frame


def scenario_table(instance: Instance) -> pd.DataFrame:
    variants = {"base": instance, "surge at B +50%": _surge(instance, "B", 1.5),
                "surge at A +40%": _surge(instance, "A", 1.4)}
    return pd.DataFrame([{"scenario": name, **_solve(v)} for name, v in variants.items()])


def marginal_table(instance: Instance) -> pd.DataFrame:
    # Measured at a tight hiring budget, where tiny is short of cover, so limits bind.
    instance = _with_budget(instance, hiring=20_000.0)
    base = _solve(instance)
    (budget,) = instance.budgets
    office_b = instance.office("B")
    relaxed = {
        ("hiring budget", "2027", 10_000.0): _with_budget(
            instance, hiring=(budget.hiring or 0) + 10_000),
        ("moves budget", "2027", 5_000.0): _with_budget(
            instance, moves=(budget.moves or 0) + 5_000),
        ("max hires per period", "B", 1.0): instance.with_changes(offices=tuple(
            replace(o, max_hires_per_period=(o.max_hires_per_period or 0) + 1)
            if o.name == office_b.name else o for o in instance.offices)),
    }
    rows = []
    for (limit, where, step), variant in relaxed.items():
        after = _solve(variant)
        rows.append({"limit": limit, "where": where, "step": step,
                     "shortfall_reduction": base["weighted_shortfall"]
                     - after["weighted_shortfall"],
                     "cost_change": after["total_cost"] - base["total_cost"],
                     # No dual estimate here: a blank column, as a writer may leave it.
                     "estimate_shortfall_reduction": None, "method": "re-solve"})
    return pd.DataFrame(rows)


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
    scenario_table(instance).to_csv(folder / "scenarios.csv", index=False)
    marginal_table(instance).to_csv(folder / "marginal_values.csv", index=False)
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
