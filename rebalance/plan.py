"""Turn a solution vector into a plan of named people and counts; read and write plan tables.

Nothing here refers to solver objects.  The work split is cleaned before it is reported: integer
decisions are rounded, work is kept only where the person really is that period, and a
person's work is scaled down if solver tolerance let it exceed their available FTE.  Coverage
and shortfall are then recomputed exactly from those tables, not taken from the solver.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from collections import defaultdict
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from rebalance.instance import Instance
from rebalance.model import Model

__all__ = ["PLAN_TABLES", "Plan", "extract_plan", "read_plan", "staged_folder", "write_plan"]

PLAN_TABLES: dict[str, tuple[str, ...]] = {
    "details": ("person", "period", "from_office", "to_office", "cost"),
    "reassignments": ("person", "period", "from_office", "to_office", "cost"),
    "hires": ("office", "skill", "start_period", "count", "funding", "onboarding_cost",
              "salary_cost"),
    "work": ("person", "period", "office", "skill", "fte", "output_fte"),
    "coverage": ("office", "skill", "period", "demand_fte", "staff_output_fte",
                 "hire_output_fte", "covered_fte", "shortfall_fte", "priority",
                 "weighted_shortfall"),
    "costs": ("year", "kind", "cost"),
}
COST_KINDS = ("detail", "relocation", "onboarding", "new_position_salary")


@dataclass(frozen=True)
class Plan:
    """A staffing plan as tables (see ``docs/instance-format.md``, section Outputs)."""

    details: pd.DataFrame
    reassignments: pd.DataFrame
    hires: pd.DataFrame
    work: pd.DataFrame
    coverage: pd.DataFrame
    costs: pd.DataFrame

    def table(self, name: str) -> pd.DataFrame:
        frame: pd.DataFrame = getattr(self, name)
        return frame

    @property
    def weighted_shortfall(self) -> float:
        return float(self.coverage["weighted_shortfall"].sum())

    @property
    def shortfall_fte(self) -> float:
        return float(self.coverage["shortfall_fte"].sum())

    @property
    def total_cost(self) -> float:
        return float(self.costs["cost"].sum())

    def cost_by_kind(self) -> dict[str, float]:
        sums = self.costs.groupby("kind")["cost"].sum()
        return {kind: float(sums.get(kind, 0.0)) for kind in COST_KINDS}

    def hires_count(self) -> int:
        return int(self.hires["count"].sum())


def _frame(name: str, rows: list[tuple[object, ...]]) -> pd.DataFrame:
    return pd.DataFrame(rows, columns=list(PLAN_TABLES[name]))


def extract_plan(instance: Instance, model: Model, x: np.ndarray) -> Plan:
    """Decode ``x`` into named tables, cleaning solver tolerance as described above."""
    offices = [o.name for o in instance.offices]
    skills = [s.name for s in instance.skills]
    periods = instance.period_names
    T = len(periods)
    staff = instance.staff

    def chosen(block: str) -> tuple[np.ndarray, dict[str, np.ndarray]]:
        blk = model.blocks[block]
        values = np.rint(x[blk.start:blk.stop]).astype(np.int64)
        keep = values > 0
        return values[keep], {k: v[keep] for k, v in blk.keys.items()}

    # Reassignments first: they decide the home in force for every later period.
    _, rk = chosen("reassignment")
    moved_to: dict[int, tuple[int, int]] = {}
    reassignment_rows = []
    for p, o, t in zip(rk["person"], rk["office"], rk["period"], strict=True):
        person = staff[p]
        moved_to[int(p)] = (int(o), int(t))
        reassignment_rows.append((person.person, periods[t], person.home_office, offices[o],
                                  instance.relocation_cost(person.home_office, offices[o])))

    def home_in_force(p: int, t: int) -> str:
        move = moved_to.get(p)
        if move is not None and move[1] <= t:
            return offices[move[0]]
        return staff[p].home_office

    _, dk = chosen("detail")
    detail_rows = []
    located: dict[tuple[int, int], str] = {}
    for p, a, o, t in zip(dk["person"], dk["home"], dk["office"], dk["period"], strict=True):
        located[(int(p), int(t))] = offices[o]
        detail_rows.append((staff[p].person, periods[t], offices[a], offices[o],
                            instance.detail_cost_per_period(offices[a], offices[o])))

    counts, hk = chosen("hire")
    hire_rows = []
    for n, o, k, s, new in zip(counts, hk["office"], hk["skill"], hk["period"], hk["new"],
                               strict=True):
        skill = instance.skills[k]
        salary = skill.salary_per_period * (T - s) * n if new else 0.0
        hire_rows.append((offices[o], skills[k], periods[s], int(n),
                          "new" if new else "vacancy", skill.onboarding_cost * n, salary))

    # Work: only where the person is that period, never above their available FTE.
    wb = model.blocks["work"]
    w = np.clip(x[wb.start:wb.stop], 0.0, None)
    work_by_pt: dict[tuple[int, int], list[tuple[int, float]]] = defaultdict(list)
    for j in np.flatnonzero(w > 1e-9):
        p, o, t = int(wb.keys["person"][j]), int(wb.keys["office"][j]), int(wb.keys["period"][j])
        where = located.get((p, t)) or home_in_force(p, t)
        if offices[o] == where:
            work_by_pt[(p, t)].append((int(j), float(w[j])))
    work_rows = []
    for (p, t), entries in sorted(work_by_pt.items()):
        total = sum(v for _, v in entries)
        avail = instance.available_fte(staff[p], t)
        scale = min(1.0, avail / total) if total > 0 else 0.0
        for j, v in entries:
            o, k = int(wb.keys["office"][j]), int(wb.keys["skill"][j])
            fte = v * scale
            work_rows.append((staff[p].person, periods[t], offices[o], skills[k], fte,
                              fte * staff[p].proficiency(skills[k])))

    details = _frame("details", detail_rows)
    reassignments = _frame("reassignments", reassignment_rows)
    hires = _frame("hires", hire_rows)
    work = _frame("work", work_rows)
    coverage = coverage_table(instance, work, hires)
    costs = cost_table(instance, details, reassignments, hires)
    return Plan(details, reassignments, hires, work, coverage, costs)


def coverage_table(instance: Instance, work: pd.DataFrame, hires: pd.DataFrame) -> pd.DataFrame:
    """Demand, output and shortfall per demand row, from the work and hire tables."""
    periods = instance.period_names
    staff_out = work.groupby(["office", "skill", "period"])["output_fte"].sum().to_dict()
    hire_out: dict[tuple[str, str, str], float] = defaultdict(float)
    period_ix = {name: i for i, name in enumerate(periods)}
    for row in hires.itertuples(index=False):
        s = period_ix[row.start_period]
        for t in range(s, len(periods)):
            hire_out[(row.office, row.skill, periods[t])] += row.count * instance.hire_fte(
                row.skill, row.office, s, t)
    rows = []
    for d in instance.demand:
        key = (d.office, d.skill, periods[d.period])
        staff_fte = float(staff_out.get(key, 0.0))
        hire_fte = float(hire_out.get(key, 0.0))
        covered = min(d.fte, staff_fte + hire_fte)
        shortfall = max(0.0, d.fte - covered)
        rows.append((d.office, d.skill, periods[d.period], d.fte, staff_fte, hire_fte, covered,
                     shortfall, d.priority, d.priority * shortfall))
    return _frame("coverage", rows)


def cost_table(instance: Instance, details: pd.DataFrame, reassignments: pd.DataFrame,
               hires: pd.DataFrame) -> pd.DataFrame:
    """Spending by budget year and kind; new-position salary falls in the years it is paid."""
    year_of = {p.name: p.year for p in instance.periods}
    periods = instance.period_names
    totals: dict[tuple[str, str], float] = defaultdict(float)
    for row in details.itertuples(index=False):
        totals[(year_of[row.period], "detail")] += row.cost
    for row in reassignments.itertuples(index=False):
        totals[(year_of[row.period], "relocation")] += row.cost
    for row in hires.itertuples(index=False):
        totals[(year_of[row.start_period], "onboarding")] += row.onboarding_cost
        if row.funding == "new":
            salary = instance.skill(row.skill).salary_per_period * row.count
            for t in range(periods.index(row.start_period), len(periods)):
                totals[(year_of[periods[t]], "new_position_salary")] += salary
    rows = [(year, kind, totals.get((year, kind), 0.0)) for year in instance.years
            for kind in COST_KINDS]
    return _frame("costs", rows)


# --------------------------------------------------------------------------------------------
# files


@contextlib.contextmanager
def staged_folder(out_dir: str | Path) -> Iterator[Path]:
    """Write into a temporary sibling folder, then swap it in: all of it or nothing."""
    out = Path(out_dir)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", dir=out.parent))
    try:
        yield tmp
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    old = None
    if out.exists():
        old = out.parent / f".{out.name}.old.{os.getpid()}"
        os.replace(out, old)
    os.replace(tmp, out)
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)


def write_plan(plan: Plan, folder: Path) -> None:
    for name, columns in PLAN_TABLES.items():
        plan.table(name).to_csv(folder / f"{name}.csv", columns=list(columns), index=False)


def read_plan(folder: str | Path) -> Plan:
    """Read plan tables back (for the verifier and reports).  Missing tables read as empty."""
    path = Path(folder)
    frames = {}
    for name, columns in PLAN_TABLES.items():
        file = path / f"{name}.csv"
        if file.exists():
            frame = pd.read_csv(file, dtype={"period": str, "start_period": str, "year": str,
                                             "person": str})
        else:
            frame = pd.DataFrame(columns=list(columns))
        frames[name] = frame
    return Plan(**frames)
