"""Budget frontier: the least weighted shortfall (and its cost) at each point of a budget grid.

Each point is the instance with its hiring cap (and optionally its moves cap) replaced in every
budget year, solved by :func:`rebalance.planning.make_plan` and verified; points are solved in
a process pool.  The knee is the point of the shortfall-against-budget curve farthest from the
chord between its ends, both axes scaled to [0, 1] (the "Kneedle" idea of Satopaa et al. 2011,
"Finding a 'Kneedle' in a Haystack"): where more money starts to buy markedly less.  Below
:data:`KNEE_MIN_POINTS` levels no knee is marked, in frontier.csv, on the console and on the
page alike: any three points bend somewhere.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import pandas as pd

from rebalance.analysis.solving import solve_many
from rebalance.instance import Budget, Instance
from rebalance.planning import PlanResult
from rebalance.solve import SolveOptions

__all__ = ["FRONTIER_COLUMNS", "KNEE_MIN_POINTS", "BudgetGrid", "Frontier", "budget_frontier",
           "cap_total", "find_knee", "mark_knees", "parse_grid", "uncapped_years",
           "with_budgets"]

# hiring_cap_total and moves_cap_total: the money each point's caps allow over the horizon
# (a factor grid's "1.5" alone had not said how much that is); extra_cost: its new money over
# point 1's.
FRONTIER_COLUMNS = (
    "point", "hiring_budget", "moves_budget", "budget_unit", "hiring_cap_total",
    "moves_cap_total", "status", "verified", "gap", "shortfall_gap", "weighted_shortfall",
    "shortfall_fte_periods", "total_cost", "extra_cost", "hiring_spend", "moves_spend", "hires",
    "detail_periods", "reassignments", "knee",
)

# Fewer budget levels than this mark no knee: any three points bend somewhere, so a "knee"
# among them says nothing about where money starts to buy less (frontier.csv had marked one
# on a 3-level grid while the page said none was marked).
KNEE_MIN_POINTS = 4


AMOUNT_UNIT = "money, each year"
FACTOR_UNIT = "times each year's cap"


def uncapped_years(instance: Instance, grid: BudgetGrid) -> list[str]:
    """Years a factor grid cannot change: no hiring cap (or no moves cap, where swept), so
    every point leaves them uncapped."""
    if not grid.as_factor:
        return []
    out = []
    for year in instance.years:
        if instance.budget_cap(year, "hiring") is None or (
                grid.moves and instance.budget_cap(year, "moves") is None):
            out.append(year)
    return out


@dataclass(frozen=True)
class BudgetGrid:
    """Values to sweep.  ``as_factor``: values multiply each year's cap instead of replacing it.

    ``moves`` empty keeps the instance's moves caps.
    """

    hiring: tuple[float, ...]
    moves: tuple[float, ...] = ()
    as_factor: bool = False


@dataclass(frozen=True)
class Frontier:
    grid: BudgetGrid
    table: pd.DataFrame  # FRONTIER_COLUMNS, one row per point
    results: tuple[PlanResult, ...]


def parse_grid(text: str) -> tuple[tuple[float, ...], bool]:
    """``a,b,c`` or ``start:stop:step`` (stop included); a trailing ``x`` on every value (or on
    the whole range) makes them factors of the instance's caps.  Raises ValueError."""
    text = text.strip().replace("_", "")
    factor = text.endswith("x")
    if ":" in text:
        parts = [p.strip().rstrip("x") for p in text.split(":")]
        if len(parts) != 3:
            raise ValueError(f"'{text}': expected start:stop:step")
        start, stop, step = (_grid_number(text, p) for p in parts)
        if step <= 0 or stop < start:
            raise ValueError(f"'{text}': expected step > 0 and stop >= start")
        n = math.floor((stop - start) / step + 1e-9) + 1
        if n > 200:
            raise ValueError(f"'{text}': {n} points; at most 200")
        values = tuple(round(start + i * step, 10) for i in range(n))
    else:
        items = [p.strip() for p in text.split(",")]
        if not any(items):
            raise ValueError("an empty grid")
        if not all(items):  # '1,,2' had dropped the empty value silently
            raise ValueError(f"'{text}': an empty value between commas")
        if any(p.endswith("x") for p in items) and not all(p.endswith("x") for p in items):
            raise ValueError(f"'{text}': give factors (with x) or amounts, not both")
        factor = all(p.endswith("x") for p in items)
        values = tuple(_grid_number(text, p.rstrip("x")) for p in items)
    if any(v < 0 or not math.isfinite(v) for v in values):
        raise ValueError(f"'{text}': values must be finite and >= 0")
    return values, factor


def _grid_number(text: str, item: str) -> float:
    try:
        return float(item)
    except ValueError:
        # float('') had said "could not convert string to float: ''" for a grid of 'x'.
        raise ValueError(f"'{text}': '{item}' is not a number") from None


def with_budgets(instance: Instance, hiring: float | None, moves: float | None,
                 as_factor: bool) -> Instance:
    """The instance with every year's hiring (and moves, unless None) cap set or scaled.

    A factor leaves a year without a cap uncapped; an amount caps every year.
    """
    budgets = []
    for year in instance.years:
        old = instance.budget(year) or Budget(year, None, None)
        if as_factor:
            h = None if old.hiring is None or hiring is None else old.hiring * hiring
            m = old.moves if moves is None or old.moves is None else old.moves * moves
        else:
            h = old.hiring if hiring is None else hiring
            m = old.moves if moves is None else moves
        budgets.append(Budget(year, h, m))
    return instance.with_changes(budgets=tuple(budgets))


def find_knee(x: Sequence[float], y: Sequence[float]) -> int | None:
    """Index of the knee of a decreasing curve y(x), or None when it is flat or has fewer than
    :data:`KNEE_MIN_POINTS` points."""
    if len(x) < KNEE_MIN_POINTS:
        return None
    order = sorted(range(len(x)), key=lambda i: x[i])
    xs = [x[i] for i in order]
    ys = [y[i] for i in order]
    dx, dy = xs[-1] - xs[0], max(ys) - min(ys)
    if dx <= 0 or dy <= 1e-9:
        return None
    y0 = min(ys)
    # Distance below the chord from the first to the last point, axes scaled to [0, 1].
    xn = [(v - xs[0]) / dx for v in xs]
    yn = [(v - y0) / dy for v in ys]
    chord = [yn[0] + (yn[-1] - yn[0]) * t for t in xn]
    gaps = [c - v for c, v in zip(chord, yn, strict=True)]
    best = max(range(1, len(xs) - 1), key=lambda i: gaps[i])
    return order[best] if gaps[best] > 1e-9 else None


def cap_total(instance: Instance, cap_name: str) -> float:
    """The ``hiring`` or ``moves`` caps of every budget year summed; nan where a year has none
    (that year is uncapped, so the horizon's total is not bounded)."""
    total = 0.0
    for year in instance.years:
        cap = instance.budget_cap(year, cap_name)
        if cap is None:
            return math.nan
        total += cap
    return total


def budget_frontier(instance: Instance, grid: BudgetGrid, options: SolveOptions,
                    workers: int = 2) -> Frontier:
    """Solve every grid point (hiring x moves) and mark the knee of each moves level.

    Every point is solved shortfall first, whatever the instance's objective mode: the
    frontier is the least shortfall each budget buys.  Weighted mode would trade shortfall
    for cost at each point, so more money could show more shortfall (a sweep: 0 -> 0.5
    FTE-periods as the hiring budget grew), and the knee would mark nothing real.
    """
    moves_values: Sequence[float | None] = grid.moves or (None,)
    points = list(itertools.product(grid.hiring, moves_values))
    variants = [with_budgets(instance, h, m, grid.as_factor) for h, m in points]
    results = solve_many(variants, replace(options, mode="shortfall-first"), workers)
    rows = []
    first = results[0].plan
    for i, ((h, m), variant, result) in enumerate(zip(points, variants, results, strict=True)):
        plan = result.plan
        row: dict[str, object] = {
            "point": i + 1, "hiring_budget": h, "moves_budget": m,
            # The grid's values are money only without the x: say which, beside them.
            "budget_unit": FACTOR_UNIT if grid.as_factor else AMOUNT_UNIT,
            "hiring_cap_total": cap_total(variant, "hiring"),
            "moves_cap_total": cap_total(variant, "moves"),
            "status": result.status.value, "verified": result.verified, "gap": result.solve.gap,
            "shortfall_gap": result.solve.shortfall_gap,
        }
        if plan is not None:
            kinds = plan.cost_by_kind()
            row.update({
                "weighted_shortfall": plan.weighted_shortfall,
                "shortfall_fte_periods": plan.shortfall_fte,
                "total_cost": plan.total_cost,
                "extra_cost": (math.nan if first is None
                               else plan.total_cost - first.total_cost),
                "hiring_spend": kinds["onboarding"] + kinds["new_position_salary"],
                "moves_spend": kinds["detail"] + kinds["relocation"],
                "hires": plan.hires_count(),
                "detail_periods": len(plan.details),
                "reassignments": len(plan.reassignments),
            })
        rows.append(row)
    table = mark_knees(pd.DataFrame(rows, columns=list(FRONTIER_COLUMNS)))
    return Frontier(grid, table, tuple(results))


def mark_knees(table: pd.DataFrame) -> pd.DataFrame:
    """``table`` with ``knee`` true at the knee of each moves level's verified points."""
    out = table.copy()
    out["knee"] = False
    # repr, not astype(str): pandas turns None into NaN there and groupby drops NaN keys.
    levels = out["moves_budget"].map(repr)
    for level in dict.fromkeys(levels):
        group = out[(levels == level) & out["verified"].astype(bool)]
        knee = find_knee(group["hiring_budget"].astype(float).tolist(),
                         group["weighted_shortfall"].astype(float).tolist())
        if knee is not None:
            out.loc[group.index[knee], "knee"] = True
    return out
