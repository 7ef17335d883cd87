"""Plan folders for the report tests, made by real solves of the tiny instance.

Besides the plan the CLI writes, the folder gets the analysis tables the report can show:
budget frontier, scenario comparison, marginal values and reasons, each made by the issue-5
analyses on tiny, so every figure the browser draws came from a solver run.
"""

from __future__ import annotations

import atexit
import json
import re
import shutil
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
    from rebalance.analysis.scenario_files import DemandChange, Scenario
    from rebalance.analysis.scenarios import compare_scenarios

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


def scratch_folder(prefix: str) -> Path:
    """A temporary folder for a case cached across tests, removed when the run ends (the
    suite had left one behind in /tmp per run)."""
    root = Path(tempfile.mkdtemp(prefix=prefix))
    atexit.register(shutil.rmtree, root, ignore_errors=True)
    return root


@lru_cache(maxsize=1)
def tiny_plan_folder() -> Path:
    """A plan folder of tiny written by ``rebalance plan``, plus analysis tables."""
    out = scratch_folder("rebalance-report-") / "plan"
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
        name="demo-slice", title=None, periods=periods,
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
    from rebalance.files import staged_folder
    from rebalance.report.files import write_plan_folder

    instance = demo_slice()
    result = make_plan(instance, options_from_instance(instance, relative_gap=0.02,
                                                       time_limit_seconds=60.0))
    if result.plan is None or not result.verified:
        raise RuntimeError(f"demo slice did not solve and verify: {result.status}")
    out = scratch_folder("rebalance-report-") / "demo-slice"
    with staged_folder(out, kind="plan") as folder:
        write_plan_folder(result, folder)
    return out


# Analysis tables shaped and valued as the demo's (rebalance marginal --max-resolves 4 and
# rebalance compare with two surge scenarios, 20 s solves), for the page's layout tests: the
# practitioner's audit read these pages at 1400 px.

def demo_marginal_table() -> pd.DataFrame:
    """marginal_values.csv of the demo: four limits re-solved, the rest estimates only."""
    resolved = "re-solve with the limit relaxed; estimate from LP duals"
    estimate = "estimate from LP duals; not re-solved"
    rows = [
        (1, "seats", "port-ilse-central", 52.0, 10.0, "seats", 8, 20.1175, -500.0, 49.3701,
         "feasible_with_gap", True, 0.0331, resolved),
        (2, "seats", "fenmarch-south", 42.0, 10.0, "seats", 7, 15.0978, 1500.0, 42.0338,
         "feasible_with_gap", True, 0.0262, resolved),
        (3, "seats", "fenmarch-north", 44.0, 10.0, "seats", 7, 7.8444, -29500.0, 31.1031,
         "feasible_with_gap", True, 0.0262, resolved),
        (4, "seats", "port-ilse-harbour", 40.0, 10.0, "seats", 5, 1.9531, -28000.0, 16.7987,
         "feasible_with_gap", True, 0.0310, resolved),
        (None, "seats", "aldercombe", 46.0, 10.0, "seats", 4, None, None, 14.2446,
         "not re-solved", None, None, estimate),
        (None, "moves_budget", "2028", 260000.0, 100000.0, "money", 1, None, None, 2.5369,
         "not re-solved", None, None, estimate),
        (None, "hiring_budget", "2027", 520000.0, 100000.0, "money", 1, None, None, 1.8816,
         "not re-solved", None, None, estimate),
        (None, "away_share", "policy", 0.15, 0.05, "share of people", 1, None, None, 0.9156,
         "not re-solved", None, None, estimate),
        (None, "vacancies", "technical_review at port-ilse-central", 3.0, 1.0, "vacancies", 1,
         None, None, 0.0, "not re-solved", None, None, estimate),
        (None, "max_hires", "port-ilse-harbour", 2.0, 1.0, "hires per period", 1, None, None,
         0.0705, "not re-solved", None, None, estimate),
        (None, "time_to_hire", "environmental_review", 2.0, -1.0, "periods", 2, None, None,
         0.6850, "not re-solved", None, None, estimate),
        (None, "time_to_hire", "intake", 1.0, -1.0, "periods", 1, None, None, 0.5380,
         "not re-solved", None, None, estimate),
    ]
    from rebalance.analysis.marginal import MARGINAL_COLUMNS

    # The rows above predate the shortfall stage's own gap column: it is left empty here.
    table = pd.DataFrame(rows, columns=[
        c for c in MARGINAL_COLUMNS if c not in ("shortfall_gap", "limit_in_words")])
    table.insert(list(MARGINAL_COLUMNS).index("shortfall_gap"), "shortfall_gap", None)
    table["rank"] = table["rank"].astype("Int64")
    return table


def demo_scenarios_table() -> pd.DataFrame:
    """scenarios.csv of the demo's comparison: 18 columns."""
    columns = ["scenario", "status", "verified", "gap", "demand_fte_periods",
               "weighted_shortfall", "shortfall_fte_periods", "total_cost", "hires",
               "detail_periods", "reassignments", "actions_differing", "cost_detail",
               "cost_relocation", "cost_onboarding", "cost_new_position_salary", "cost_2027",
               "cost_2028"]
    rows = [
        ("base", "feasible_with_gap", True, 0.0262, 2017.33, 165.945, 159.229, 2465500.0, 24,
         88, 0, 0, 558500.0, 0.0, 218000.0, 1689000.0, 813500.0, 1652000.0),
        ("harbour-permit-rush", "feasible_with_gap", True, 0.0407, 2041.3, 188.298, 180.174,
         2442000.0, 25, 90, 0, 95, 551000.0, 0.0, 219000.0, 1672000.0, 807500.0, 1634500.0),
        ("hollin-cross-storm", "feasible_with_gap", True, 0.0243, 2030.81, 169.929, 162.304,
         2531500.0, 24, 84, 0, 80, 551500.0, 0.0, 210000.0, 1770000.0, 961000.0, 1570500.0),
    ]
    return pd.DataFrame(rows, columns=columns)


def demo_reasons_table() -> pd.DataFrame:
    """reasons.csv rows of the demo: a hire's reason in prose, a shortfall's binding limits
    as one long run without spaces."""
    limits = ";".join(["hiring_budget|2027|2028-Q4", "hiring_budget|2028|2028-Q4",
                       "moves_budget|2028|2028-Q4"]
                      + [f"seats|port-ilse-harbour|{p}" for p in (
                          "2027-Q4", "2028-Q1", "2028-Q2", "2028-Q3", "2028-Q4")]
                      + ["max_hires|port-ilse-harbour|2027-Q4"])
    columns = ["action", "subject", "office", "skill", "first_period", "last_period", "amount",
               "reason", "binding_limits"]
    rows = [
        ("hire", "2 x technical_review", "port-ilse-central", "technical_review", "2027-Q3",
         "2028-Q4", 2.0, "technical_review demand at port-ilse-central is above its staff's "
         "output for 6 straight periods from 2027-Q3, to the end of the horizon (by 5.01 FTE "
         "on average), so a hire (fills a funded vacancy)", None),
        ("shortfall", "environmental_review at port-ilse-harbour", "port-ilse-harbour",
         "environmental_review", "2028-Q4", "2028-Q4", 0.932,
         "0.932 FTE short; held back by hiring budget 2027 (515,000 of 520,000 spent); seats at "
         "port-ilse-harbour in 2028-Q4 (40 of 40 used)", limits),
        ("shortfall", "safety_review at port-ilse-harbour", "port-ilse-harbour",
         "safety_review", "2028-Q4", "2028-Q4", 0.046, "0.046 FTE short; held back by seats",
         "seats|port-ilse-harbour|2028-Q4;max_hires|port-ilse-harbour|2027-Q4"),
    ]
    return pd.DataFrame(rows, columns=columns)


def demo_scenario_actions_table() -> pd.DataFrame:
    columns = ["scenario", "action", "person_or_office", "skill", "period", "detail", "base",
               "scenario_value"]
    rows = [("hollin-cross-storm", "detail", "E0003", None, "2027-Q3",
             "port-ilse-central -> port-ilse-harbour", 1.0, 0.0),
            ("harbour-permit-rush", "hire", "port-ilse-harbour", "environmental_review",
             "2027-Q4", None, 0.0, 1.0)]
    return pd.DataFrame(rows, columns=columns)


@lru_cache(maxsize=1)
def demo_tables_folder() -> Path:
    """The tiny plan folder with the demo-shaped analysis tables beside it, reports rebuilt."""
    plan = tiny_plan_folder()
    folder = plan.parent / "with-demo-tables"
    folder.mkdir()
    for file in plan.iterdir():
        (folder / file.name).write_bytes(file.read_bytes())
    demo_marginal_table().to_csv(folder / "marginal_values.csv", index=False)
    demo_scenarios_table().to_csv(folder / "scenarios.csv", index=False)
    demo_reasons_table().to_csv(folder / "reasons.csv", index=False)
    demo_scenario_actions_table().to_csv(folder / "scenario_actions.csv", index=False)
    done = cli("report", str(folder))
    if done.returncode != 0:
        raise RuntimeError(done.stderr)
    return folder


def page_payload(page: str) -> dict:
    """The chart data a report page carries as JSON."""
    found = re.search(r'<script type="application/json" id="report-data">(.*?)</script>', page,
                      re.S)
    assert found is not None
    return json.loads(found.group(1))


def page_text(page: str) -> str:
    """The page as read: tags, the style sheet and the scripts left out."""
    page = re.sub(r"<(script|style)\b.*?</\1>", " ", page, flags=re.S)
    return re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", page))


def replan_with_ahead(new_gaps: tuple[float, float],
                      ahead_gaps: tuple[float, float]) -> pd.DataFrame:
    """replan.csv as 'rebalance replan --planned-ahead' writes it (rebalance.analysis.planned_ahead:
    a planned_ahead column, and a row per stage gap, shortfall's and new money's), with made-up
    figures: by hand, reacting late leaves 4.2 more weighted FTE-periods short and costs
    38,000 more than planning ahead."""
    nan = float("nan")
    return pd.DataFrame({
        "measure": ["weighted_shortfall", "total_cost", "disruption_cost", "shortfall_gap",
                    "new_money_gap"],
        "old_plan": [20.0, 90_000.0, 0.0, nan, nan],
        "new_plan": [10.0, 138_000.0, 500.0, *new_gaps],
        "difference": [-10.0, 48_000.0, 500.0, nan, nan],
        "planned_ahead": [5.8, 100_000.0, nan, *ahead_gaps],
    })
