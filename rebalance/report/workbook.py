"""Write a plan as one formatted workbook: a summary sheet first, then one sheet per table.

Every sheet has a frozen, filterable header row, widths fitted to its content and number
formats by what a column holds (money, FTE, counts).  The workbook takes results in; the only
arithmetic here is summing plan tables for the summary sheet.
"""

from __future__ import annotations

import datetime as dt
import math
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import pandas as pd

from rebalance.plan import PLAN_TABLES
from rebalance.report.inputs import ReportData, quality_notes

__all__ = ["write_workbook"]

MONEY = "#,##0"
FTE = "#,##0.00"
WHOLE = "#,##0"
SHARE = "0.0%"
HEADER_FILL = "FF23404A"  # deep slate, the report's ink colour
HEADER_FONT = "FFFFFFFF"
BAND_FILL = "FFF3EFE6"  # warm paper, for the summary's section labels

# What each plan sheet is, shown in the summary's table of contents.
SHEET_NOTES = {
    "details": "one row per person and period on detail",
    "reassignments": "one row per permanent move, effective from its period",
    "hires": "one row per group of hires (office, skill, start period, funding)",
    "work": "who works where on which skill, per period",
    "coverage": "demand, output and shortfall per office, skill and period",
    "costs": "new money by budget year and kind",
    "frontier": "budget frontier: least shortfall at each budget",
    "scenarios": "scenario comparison",
    "marginal_values": "what one more unit of each binding limit buys",
    "reasons": "why each action is in the plan, and what stops each remaining gap",
    "replan": "old plan against the re-plan",
    "changes": "every change the re-plan makes to the old plan",
    "scenario_actions": "actions that differ between scenarios",
}


def _format_for(column: str) -> str | None:
    name = column.lower()
    if "share" in name or name.endswith("_pct") or name.endswith("rate"):
        return SHARE
    if any(w in name for w in ("cost", "spend", "budget", "salary", "hiring", "moves", "money")):
        return MONEY
    if any(w in name for w in ("fte", "shortfall", "output", "demand", "covered")):
        return FTE
    if name in ("count", "hires", "details", "reassignments", "detail_periods", "people"):
        return WHOLE
    return None


def write_workbook(data: ReportData, path: str | Path) -> Path:
    """Write ``plan.xlsx`` (atomically: a temporary file renamed into place)."""
    from openpyxl import Workbook

    target = Path(path)
    wb = Workbook()
    summary = wb.active
    if summary is None:  # a new workbook always has a sheet; keep mypy and readers honest
        summary = wb.create_sheet()
    summary.title = "summary"
    sheets: list[tuple[str, pd.DataFrame]] = [(n, data.plan.table(n)) for n in PLAN_TABLES]
    for name in ("frontier", "scenarios", "marginal_values"):
        frame = getattr(data, name)
        if frame is not None:
            sheets.append((name, frame))
    sheets.extend(data.tables)
    _summary_sheet(summary, data, [n for n, _ in sheets])
    for name, frame in sheets:
        _table_sheet(wb.create_sheet(name), frame)
    target.parent.mkdir(parents=True, exist_ok=True)
    # A plain file beside the target (not mkstemp, whose 0600 mode would stick to plan.xlsx).
    tmp = target.with_name(f".{target.name}.tmp")
    try:
        wb.save(tmp)
        os.replace(tmp, target)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return target


def _cell_value(value: Any) -> Any:
    if value is None:
        return None
    if isinstance(value, float) and math.isnan(value):
        return None
    if hasattr(value, "item"):  # numpy scalars
        return value.item()
    return value


def _style_header(ws: Any, row: int, count: int) -> None:
    from openpyxl.styles import Alignment, Font, PatternFill

    for col in range(1, count + 1):
        cell = ws.cell(row=row, column=col)
        cell.font = Font(bold=True, color=HEADER_FONT)
        cell.fill = PatternFill("solid", fgColor=HEADER_FILL)
        cell.alignment = Alignment(vertical="center")


def _fit_widths(ws: Any, columns: Sequence[str], frame: pd.DataFrame | None = None) -> None:
    from openpyxl.utils import get_column_letter

    for i, column in enumerate(columns, 1):
        width = len(str(column))
        if frame is not None and len(frame):
            sample = frame[column].head(500)
            fmt = _format_for(str(column))
            if fmt in (MONEY, WHOLE) and pd.api.types.is_numeric_dtype(sample):
                width = max(width, len(f"{sample.abs().max():,.0f}") + 1)
            elif fmt == FTE and pd.api.types.is_numeric_dtype(sample):
                width = max(width, len(f"{sample.abs().max():,.2f}") + 1)
            else:
                lengths = [len(str(v)) for v in sample.tolist() if not pd.isna(v)]
                width = max([width, *lengths])
        ws.column_dimensions[get_column_letter(i)].width = min(max(width + 2, 9), 48)


def _table_sheet(ws: Any, frame: pd.DataFrame) -> None:
    columns = [str(c) for c in frame.columns]
    ws.append(columns)
    _style_header(ws, 1, len(columns))
    formats = [_format_for(c) for c in columns]
    for values in frame.itertuples(index=False, name=None):
        ws.append([_cell_value(v) for v in values])
    for j, fmt in enumerate(formats, 1):
        if fmt is None:
            continue
        for (cell,) in ws.iter_rows(min_row=2, min_col=j, max_col=j):
            cell.number_format = fmt
    ws.freeze_panes = "A2"
    if columns:
        ws.auto_filter.ref = ws.dimensions
    _fit_widths(ws, columns, frame)


def _summary_sheet(ws: Any, data: ReportData, sheet_names: Sequence[str]) -> None:
    from openpyxl.styles import Alignment, Font, PatternFill

    plan, instance, run = data.plan, data.instance, data.summary
    demand = float(plan.coverage["demand_fte"].sum()) if len(plan.coverage) else 0.0
    bold = Font(bold=True)

    def band(text: str) -> None:
        ws.append([])
        ws.append([text])
        cell = ws.cell(row=ws.max_row, column=1)
        cell.font = Font(bold=True, size=12)
        for col in range(1, 6):
            ws.cell(row=ws.max_row, column=col).fill = PatternFill("solid", fgColor=BAND_FILL)

    def line(label: str, value: Any, fmt: str | None = None, note: str = "") -> None:
        ws.append([label, _cell_value(value), note or None])
        if fmt:
            ws.cell(row=ws.max_row, column=2).number_format = fmt

    ws.append([f"Staffing plan for {instance.name}"])
    ws.cell(row=1, column=1).font = Font(bold=True, size=15)
    ws.append([f"{len(instance.periods)} periods, {instance.periods[0].name} to "
               f"{instance.periods[-1].name}; {len(instance.offices)} offices, "
               f"{len(instance.staff)} staff; written "
               f"{dt.datetime.now(dt.UTC).strftime('%Y-%m-%d %H:%M')} UTC"])
    warnings = quality_notes(data)
    if warnings:
        band("Read this first")
        for text in warnings:
            ws.append([text])
            ws.cell(row=ws.max_row, column=1).font = Font(bold=True, color="FFB03A2E")
    band("Headline")
    line("status", run.status)
    line("weighted shortfall (FTE-periods)", plan.weighted_shortfall, FTE)
    line("shortfall (FTE-periods, unweighted)", plan.shortfall_fte, FTE)
    line("share of demand not covered", plan.shortfall_fte / demand if demand else 0.0, SHARE,
         f"of {demand:,.1f} FTE-periods demanded")
    line("new money, all years", plan.total_cost, MONEY)
    line("people hired", plan.hires_count(), WHOLE)
    line("detail periods", len(plan.details), WHOLE,
         f"{plan.details['person'].nunique()} people" if len(plan.details) else "")
    line("reassignments", len(plan.reassignments), WHOLE)

    band("Spending against budget")
    header = ["year", "hiring spend", "hiring cap", "moves spend", "moves cap"]
    ws.append(header)
    _style_header(ws, ws.max_row, len(header))
    costs = plan.costs.groupby(["year", "kind"])["cost"].sum() if len(plan.costs) else None
    for year in instance.years:
        def spent(*kinds: str, year: str = year) -> float:
            return sum(float(costs.get((year, k), 0.0)) for k in kinds) if costs is not None \
                else 0.0

        budget = instance.budget(year)
        ws.append([year, spent("onboarding", "new_position_salary"),
                   None if budget is None else budget.hiring,
                   spent("detail", "relocation"), None if budget is None else budget.moves])
        for col in range(2, 6):
            ws.cell(row=ws.max_row, column=col).number_format = MONEY
        for col in (3, 5):
            if ws.cell(row=ws.max_row, column=col).value is None:
                ws.cell(row=ws.max_row, column=col).value = "no cap"

    band("How the plan was found")
    line("solver", run.solver_version or run.solver)
    line("objective", run.objective_mode)
    line("relative gap at stop", run.gap, "0.00%")
    line("model size", f"{run.model_columns or 0:,} columns ({run.model_integer_columns or 0:,} "
         f"integer) x {run.model_rows or 0:,} rows")
    line("solve seconds", run.solve_seconds, "0.0")
    line("independent verification", {True: "passed", False: "FAILED", None: "unknown"}[
        run.verified])
    for warning in run.warnings:
        line("input warning", warning)

    band("Sheets")
    for name in sheet_names:
        ws.append([name, SHEET_NOTES.get(name, "")])
        ws.cell(row=ws.max_row, column=1).font = bold

    band("Caution")
    ws.append([run.caution])
    ws.merge_cells(start_row=ws.max_row, start_column=1, end_row=ws.max_row, end_column=5)
    ws.cell(row=ws.max_row, column=1).alignment = Alignment(wrap_text=True, vertical="top")
    ws.row_dimensions[ws.max_row].height = 48
    ws.column_dimensions["A"].width = 36
    for letter in "BCDE":
        ws.column_dimensions[letter].width = 16
    ws.freeze_panes = "A2"
