"""The page's chart data: sums of plan tables by office, period and skill, as JSON-ready
dicts for the drawing script (``assets/report.js``), and the two tables of sums the page and
the workbook both show (idle capacity per office; new positions' salaries by skill, which
summary.json's warning also needs, are :mod:`rebalance.planning`'s: the reports take them
from there).

Aggregation only: the plan itself is never recomputed here.
"""

from __future__ import annotations

from typing import Any

import pandas as pd

from rebalance.numbers import NEAR_ZERO, fte_total_text, number_rule
from rebalance.plan import BUDGET_LINES, budget_lines
from rebalance.report.inputs import ReportData

__all__ = ["chart_payload", "records", "spare_capacity"]


def records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    """Rows as dicts (``itertuples`` would shadow a ``count`` column with tuple.count)."""
    return [{str(k): v for k, v in row.items()} for row in frame.to_dict("records")]


def _with_spare(coverage: pd.DataFrame) -> pd.DataFrame:
    """Coverage rows with ``output_fte`` (what staff and hires there produce) and
    ``spare_fte``: output beyond the row's demand, which covers nothing in the plan."""
    cov = coverage.copy()
    if len(cov):
        cov["output_fte"] = cov["staff_output_fte"] + cov["hire_output_fte"]
        spare = (cov["output_fte"] - cov["covered_fte"]).clip(lower=0.0)
        cov["spare_fte"] = spare.where(spare > NEAR_ZERO, 0.0)
    else:
        cov["output_fte"] = cov["spare_fte"] = pd.Series(dtype=float)
    return cov


def spare_capacity(data: ReportData) -> pd.DataFrame:
    """Per office, FTE-periods of output beyond demand (summed over its skills and periods)
    and of people's time there with no work at all (``unassigned_fte``: people whose skills
    the office does not want then have no work rows, so output alone had missed them),
    beside demand, output and shortfall; the skills holding most of the spare output."""
    cov = _with_spare(data.plan.coverage)
    unassigned = _unassigned_time(data)
    rows = []
    for office in [o.name for o in data.instance.offices]:
        part = cov[cov["office"] == office]
        if part.empty and not unassigned.get(office):
            continue
        by_skill = part.groupby("skill")["spare_fte"].sum().sort_values(ascending=False)
        top = [f"{skill} {fte_total_text(value)}" for skill, value in by_skill.head(3).items()
               if value >= 0.05]
        rows.append({"office": office, "demand_fte": float(part["demand_fte"].sum()),
                     "output_fte": float(part["output_fte"].sum()),
                     "shortfall_fte": float(part["shortfall_fte"].sum()),
                     "spare_fte": float(part["spare_fte"].sum()),
                     "unassigned_fte": unassigned.get(office, 0.0), "most_in": ", ".join(top)})
    return pd.DataFrame(rows, columns=["office", "demand_fte", "output_fte", "shortfall_fte",
                                       "spare_fte", "unassigned_fte", "most_in"])


def _unassigned_time(data: ReportData) -> dict[str, float]:
    """Per office, FTE-periods of the available time of people there (at their home in force
    and not away, or on detail there) that the plan gives no work."""
    instance, plan = data.instance, data.plan
    names = instance.period_names
    away = {(str(p), str(t)): str(o) for p, t, o in zip(
        plan.details["person"], plan.details["period"], plan.details["to_office"],
        strict=True)}
    moved = {str(p): (names.index(str(t)), str(o)) for p, t, o in zip(
        plan.reassignments["person"], plan.reassignments["period"],
        plan.reassignments["to_office"], strict=True)}
    worked = plan.work.groupby([plan.work["person"].astype(str),
                                plan.work["period"].astype(str)])["fte"].sum().to_dict()
    out: dict[str, float] = {}
    for person in instance.staff:
        move = moved.get(person.person)
        for t, period in enumerate(names):
            available = instance.available_fte(person, t)
            if available <= 0:
                continue
            home = move[1] if move is not None and t >= move[0] else person.home_office
            where = away.get((person.person, period), home)
            idle = available - float(worked.get((person.person, period), 0.0))
            if idle > NEAR_ZERO:
                out[where] = out.get(where, 0.0) + idle
    return out


def _coverage_series(data: ReportData) -> dict[str, Any]:
    periods = list(data.instance.period_names)
    cov = _with_spare(data.plan.coverage)
    offices = [o.name for o in data.instance.offices]
    if len(cov):
        # Stack what staff cover first, then what hires add, up to the demand line; output
        # beyond demand (spare) is drawn above the line, where it covers nothing.
        cov["staff_cov"] = cov[["staff_output_fte", "demand_fte"]].min(axis=1)
        cov["hire_cov"] = (cov["covered_fte"] - cov["staff_cov"]).clip(lower=0.0)
    series = []
    for office in [None, *offices]:
        part = cov if office is None else cov[cov["office"] == office]
        if office is not None and part.empty:
            continue
        sums = part.groupby("period")[["demand_fte", "staff_cov", "hire_cov", "covered_fte",
                                       "shortfall_fte", "spare_fte"]].sum() if len(
            part) else pd.DataFrame()

        def col(name: str, sums: pd.DataFrame = sums) -> list[float]:
            return [round(float(sums[name].get(p, 0.0)), 4) + 0.0 if len(sums) else 0.0
                    for p in periods]

        series.append({"office": office or "all offices", "demand": col("demand_fte"),
                       "staff": col("staff_cov"), "hires": col("hire_cov"),
                       "shortfall": col("shortfall_fte"), "spare": col("spare_fte")})
    return {"periods": periods, "series": series}


def _heat(data: ReportData) -> dict[str, Any]:
    periods = list(data.instance.period_names)
    cov = data.plan.coverage
    offices = [o.name for o in data.instance.offices]
    cells = []
    for office in offices:
        part = cov[cov["office"] == office]
        row = []
        for period in periods:
            here = part[part["period"] == period]
            short = here[here["shortfall_fte"] > 1e-9]
            worst = (short.sort_values("shortfall_fte", ascending=False)["skill"].head(3)
                     .tolist())
            row.append({"shortfall": round(float(here["shortfall_fte"].sum()), 4),
                        "weighted": round(float(here["weighted_shortfall"].sum()), 4),
                        "demand": round(float(here["demand_fte"].sum()), 4),
                        "skills": worst, "skills_short": len(short)})
        cells.append(row)
    return {"offices": offices, "periods": periods, "cells": cells}


def _flows(data: ReportData) -> dict[str, Any]:
    periods = list(data.instance.period_names)
    T = len(periods)
    index = {p: i for i, p in enumerate(periods)}
    flows: dict[tuple[str, str], dict[str, Any]] = {}

    def entry(a: str, b: str) -> dict[str, Any]:
        return flows.setdefault((a, b), {"from": a, "to": b, "detail_periods": 0,
                                         "detail_people": set(), "reassignments": 0,
                                         "reassigned_periods": 0})

    for row in records(data.plan.details):
        e = entry(str(row["from_office"]), str(row["to_office"]))
        e["detail_periods"] += 1
        e["detail_people"].add(str(row["person"]))
    for row in records(data.plan.reassignments):
        e = entry(str(row["from_office"]), str(row["to_office"]))
        e["reassignments"] += 1
        # One common width unit: a reassignment moves a person's work for every period
        # from its start to the end of the horizon.
        e["reassigned_periods"] += T - index.get(str(row["period"]), 0)
    out = []
    for e in flows.values():
        e["detail_people"] = len(e["detail_people"])
        out.append(e)
    out.sort(key=lambda f: -(f["detail_periods"] + f["reassigned_periods"]))
    return {"offices": [o.name for o in data.instance.offices], "flows": out}


def _hires(data: ReportData) -> dict[str, Any]:
    periods = list(data.instance.period_names)
    skills = [s.name for s in data.instance.skills]
    hires = data.plan.hires
    counts = {s: [0] * len(periods) for s in skills}
    index = {p: i for i, p in enumerate(periods)}
    for row in records(hires):
        if row["skill"] in counts and str(row["start_period"]) in index:
            counts[row["skill"]][index[str(row["start_period"])]] += int(row["count"])
    used = [s for s in skills if any(counts[s])]
    return {"periods": periods, "skills": used, "counts": [counts[s] for s in used]}


def _budget_rows(data: ReportData) -> list[dict[str, Any]]:
    """Each budget line (:func:`rebalance.plan.budget_lines`) with its spending split by kind
    of cost, the parts the chart stacks."""
    costs = data.plan.costs.groupby(["year", "kind"])["cost"].sum() if len(
        data.plan.costs) else pd.Series(dtype=float)
    kinds = dict(BUDGET_LINES)
    return [{"year": line.year, "kind": line.cap_name, "spend": line.spent, "cap": line.cap,
             "parts": {k: float(costs.get((line.year, k), 0.0)) for k in kinds[line.cap_name]}}
            for line in budget_lines(data.instance, data.plan)]


def chart_payload(data: ReportData) -> dict[str, Any]:
    """Every plan chart's data, with the number rule's decimals (``numbers``) and the
    currency (the budget chart's axis says it) for the script to write labels by."""
    return {
        "coverage": _coverage_series(data),
        "heat": _heat(data),
        "flows": _flows(data),
        "hires": _hires(data),
        "budget": _budget_rows(data),
        "currency": data.instance.money.currency,
        "numbers": number_rule(),
    }
