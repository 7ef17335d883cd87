"""Write a plan as one formatted workbook: a summary sheet first, then one sheet per table.

Every sheet has a frozen, filterable header row, widths fitted to its content and number
formats by what a column holds (money, FTE, counts).  The workbook takes results in; the only
arithmetic here is summing plan tables for the summary sheet.
"""

from __future__ import annotations

import datetime as dt
import itertools
import math
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from rebalance.files import atomic_file
from rebalance.numbers import (
    FTE_TOTAL_DIGITS,
    NEAR_ZERO,
    SHARE_DIGITS,
    TABLE_DIGITS,
    WHOLE_FROM,
    column_header,
    counted,
    dust_free,
    fte_total_text,
    has_decimals,
    is_gap,
    is_money,
    model_size_text,
    money_text,
    seconds_text,
    typed_places,
    years_text,
)
from rebalance.plan import PLAN_TABLES, budget_lines
from rebalance.planning import plan_run_rate, run_rate_note, run_rate_warning
from rebalance.report.analysis_charts import AMOUNT_COLUMNS, GRID_COLUMNS
from rebalance.report.chart_data import spare_capacity
from rebalance.report.console import MEASURE_COLUMN, budget_note, cell_text, measure_names
from rebalance.report.htmlparts import stage_words
from rebalance.report.inputs import ReportData, quality_notes
from rebalance.report.late_notice_words import planned_ahead_heading
from rebalance.report.limits_view import (
    LIMITS_LEAD,
    LIMITS_TITLE,
    SHORT_YET_AWAY_LEAD,
    limits_at_cap,
)
from rebalance.report.scenario_notes import scenario_rows
from rebalance.report.words import (
    ATTRITION_NOTE,
    expects_attrition,
    outcome_words,
    parts_decimals,
    people_text,
    plain_status,
    readable,
)
from rebalance.report.workbook_analysis import (
    GAP,
    MONEY,
    SHEET_NOTES,
    measure_formats,
    sheet_notes,
)
from rebalance.report.workbook_analysis import money_format as _money_format

__all__ = ["write_workbook"]

# Decimals as the one rule (rebalance/numbers.py) gives them to the console and the page: a
# sheet's FTE had two where the page's tables had three.
FTE = "#,##0." + "0" * TABLE_DIGITS
# Headline totals of FTE-periods, to the console's and the page's one decimal.
FTE_TOTAL = "#,##0." + "0" * FTE_TOTAL_DIGITS
WHOLE = "#,##0"
SHARE = "0." + "0" * SHARE_DIGITS + "%"
DECIMALS = "#,##0." + "0" * TABLE_DIGITS
HEADER_FILL = "#23404A"  # deep slate, the report's ink colour
HEADER_FONT = "#FFFFFF"
BAND_FILL = "#F3EFE6"  # warm paper, for the summary's section labels
WARNING_FONT = "#B03A2E"
# Rows one worksheet holds, header included: a longer table cannot be written whole.
SHEET_ROWS = 1_048_576

# Columns whose rows each hold their own quantity, as the page writes them: a limit's amount
# by its row (52 seats, a share of 0.150), where one format for the column had written 52.000;
# steps as typed (1.5, not 1.500); a grid's values as typed, one format down the column.
PER_ROW_COLUMNS = {"marginal_values": AMOUNT_COLUMNS}
TYPED_COLUMNS = {"marginal_values": ("step",)}
GRID_FORMAT_COLUMNS = {"frontier": GRID_COLUMNS}
# Most decimals a typed value is shown with (Excel's formats hold 30).
TYPED_DIGITS = 10


def _format_for(column: str) -> str | None:
    # Gaps and money by the one rule (rebalance/numbers.py), so a column is money in the
    # workbook exactly where it is on the page and in the terminal.  A frontier's budget
    # columns are not: they may hold factors of each year's cap, which whole units showed
    # as 1 for 0.5; they take the plain formats, whole or three places.
    name = column.lower()
    if is_gap(name):
        return GAP
    if "share" in name or name.endswith("_pct") or name.endswith("rate"):
        return SHARE
    if is_money(name):
        return MONEY
    if any(w in name for w in ("fte", "shortfall", "output", "demand", "covered")):
        return FTE
    if name in ("count", "hires", "details", "reassignments", "detail_periods", "people"):
        return WHOLE
    return None


def write_workbook(data: ReportData, path: str | Path) -> Path:
    """Write ``plan.xlsx`` (atomically: a temporary file renamed into place)."""
    from xlsxwriter import Workbook

    target = Path(path)
    sheets: list[tuple[str, pd.DataFrame]] = [(n, data.plan.table(n)) for n in PLAN_TABLES]
    sheets += [(name, frame) for name in ("frontier", "scenarios", "marginal_values")
               if (frame := getattr(data, name)) is not None]
    sheets.extend(data.tables)
    # A table longer than a worksheet is cut, and the summary says so first: failing here
    # would lose the whole plan folder for one sheet that the CSV files hold in full.
    cut = [_cut_note(name, len(frame)) for name, frame in sheets if len(frame) >= SHEET_ROWS]
    sheets = [(name, frame.iloc[:SHEET_ROWS - 1]) for name, frame in sheets]
    with atomic_file(target) as tmp:  # whole or not at all
        # constant_memory sends each row to disk when the next one starts, so a large plan is
        # never held whole in memory; it needs every sheet written top to bottom.  Text is
        # written as text: no turning "00123" into a number or "=..." into a formula.
        book = Workbook(str(tmp), {"constant_memory": True, "strings_to_numbers": False,
                                   "strings_to_formulas": False, "strings_to_urls": False})
        styles = _Styles(book)
        _summary_sheet(book.add_worksheet("summary"), styles, data,
                       [n for n, _ in sheets], cut)
        numeric_years = _numeric_years(data.instance.years)
        for name, frame in sheets:
            _table_sheet(book.add_worksheet(name), styles, frame, numeric_years,
                         data.instance.money.currency, notes=sheet_notes(name, frame, data),
                         per_row=PER_ROW_COLUMNS.get(name, ()),
                         typed=TYPED_COLUMNS.get(name, ()),
                         grid=GRID_FORMAT_COLUMNS.get(name, ()))
        book.close()
    return target


def _cut_note(name: str, rows: int) -> str:
    where = f"{name}.csv has" if name in PLAN_TABLES else "the other outputs have"
    return (f"The {name} sheet shows the first {SHEET_ROWS - 1:,} of its {rows:,} rows, all "
            f"a worksheet holds; {where} every row.")


class _Styles:
    """The workbook's cell formats, each added once (a workbook keeps every one it is given)."""

    def __init__(self, book: Any) -> None:
        self._book = book
        self.header = book.add_format({"bold": True, "font_color": HEADER_FONT,
                                       "bg_color": HEADER_FILL, "pattern": 1,
                                       "valign": "vcenter"})
        self.title = book.add_format({"bold": True, "font_size": 15})
        self.band_label = book.add_format({"bold": True, "font_size": 12,
                                           "bg_color": BAND_FILL, "pattern": 1})
        self.band = book.add_format({"bg_color": BAND_FILL, "pattern": 1})
        self.warning = book.add_format({"bold": True, "font_color": WARNING_FONT})
        self.bold = book.add_format({"bold": True})
        self.caution = book.add_format({"text_wrap": True, "valign": "top"})
        self._numbers: dict[str, Any] = {}

    def number(self, fmt: str | None) -> Any:
        if fmt is None:
            return None
        if fmt not in self._numbers:
            self._numbers[fmt] = self._book.add_format({"num_format": fmt})
        return self._numbers[fmt]


def _cell_value(value: Any) -> Any:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return None
    if hasattr(value, "item"):  # numpy scalars
        return _cell_value(value.item())
    if isinstance(value, float) and math.isinf(value):
        return str(value)  # a cell has no infinite number; "inf" as the CSV file has it
    return value


def _numeric_years(years: Sequence[str]) -> bool:
    """Whether every budget year is a plain whole number such as 2027 (not FY27, not 0027)."""
    return bool(years) and all(y.isascii() and y.isdigit() and not y.startswith("0")
                               for y in years)


def _year_cell(value: Any, numeric: bool) -> Any:
    """A year cell of one type in every sheet: the plan's costs hold years as text, tables
    read back from CSV files as numbers, and a sheet of each had mixed them."""
    if value is None:
        return None
    if numeric:
        text = str(value).strip()
        if isinstance(value, float) and value.is_integer():
            return int(value)
        return int(text) if text.isascii() and text.isdigit() else value
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)


def _column_values(column: pd.Series) -> list[Any]:
    """A column's cells as Python values, None where missing (see :func:`_cell_value`);
    solver dust (4.4e-16 where the plan means 0) as 0."""
    if isinstance(column.dtype, np.dtype) and column.dtype.kind == "f":
        values = column.to_numpy(dtype=float)
        dust = np.abs(values) < NEAR_ZERO
        if dust.any():
            column = column.where(~dust, 0.0)
    if isinstance(column.dtype, np.dtype) and column.dtype.kind in "biuf" and \
            np.isfinite(column.to_numpy(dtype=float)).all():
        return column.tolist()  # plain numbers, none missing: the common case, kept fast
    return [None if gone else _cell_value(v)
            for v, gone in zip(column.tolist(), column.isna().tolist(), strict=True)]


def _fit_widths(ws: Any, columns: Sequence[str], frame: pd.DataFrame | None = None,
                headers: Sequence[str] | None = None) -> None:
    """Each column as wide as its header (``headers``, else its name) and its content."""
    for i, column in enumerate(columns):
        width = len(str(column if headers is None else headers[i]))
        if frame is not None and len(frame):
            sample = frame[column].head(500)
            fmt = _format_for(str(column))
            if fmt in (MONEY, WHOLE) and pd.api.types.is_numeric_dtype(sample):
                width = max(width, len(money_text(sample.abs().max())) + 1)
            elif fmt == FTE and pd.api.types.is_numeric_dtype(sample):
                width = max(width, len(f"{sample.abs().max():,.{TABLE_DIGITS}f}") + 1)
            else:
                lengths = [len(str(v)) for v in sample.tolist() if not pd.isna(v)]
                width = max([width, *lengths])
        ws.set_column(i, i, min(max(width + 2, 9), 48))


def _plain_number_formats(column: pd.Series, values: list[Any], styles: _Styles,
                          per_row: bool = False) -> Any:
    """Formats for a numeric column its name says nothing about: whole numbers without
    decimals (24, not 24.0), others to the rule's places.  A column with decimals anywhere
    has them in every row, as the page and the console write it (0.500 and 1.000, where a
    column had read 0.500 and 1; grid values are TYPED_COLUMNS'); ``per_row`` (a re-plan's
    rows of counts and FTE, one measure a row) gives a format per cell instead."""
    if not (isinstance(column.dtype, np.dtype) and column.dtype.kind == "f"):
        return None
    numbers = np.array([v if isinstance(v, float) else np.nan for v in values], dtype=float)
    with np.errstate(invalid="ignore"):
        whole = ~np.isfinite(numbers) | (numbers % 1 == 0)
    if whole.all():
        return styles.number(WHOLE)
    whole_format, decimals = styles.number(WHOLE), styles.number(DECIMALS)
    # From 1,000 up decimals are noise, as number_text writes them: a marginal table's
    # column of limits had shown a moves budget as 300,000.000 beside seats of 52.000.
    with np.errstate(invalid="ignore"):
        big = np.isfinite(numbers) & (np.abs(numbers) >= WHOLE_FROM)
    if not per_row:
        return decimals if not big.any() else [whole_format if b else decimals
                                                for b in big.tolist()]
    return [whole_format if w or b else decimals
            for w, b in zip(whole.tolist(), big.tolist(), strict=True)]


def _typed_formats(values: list[Any], styles: _Styles) -> list[Any]:
    """A format per cell with the decimals the value was given with (1.5 as 1.5, 1 as 1,
    100000 as 100,000), as the page and the console write a limit's step."""
    return [_places_format(typed_places([v], TYPED_DIGITS), styles) for v in values]


def _places_format(places: int, styles: _Styles) -> Any:
    return styles.number(WHOLE + ("." + "0" * places if places else ""))


def _named_format(column: str, values: list[Any], styles: _Styles) -> Any:
    """The format a column's name gives it; FTE without decimals where every value is whole,
    as the page and the console write such a column (3, not 3.000)."""
    fmt = _format_for(column)
    if fmt == FTE and not has_decimals(values):
        fmt = WHOLE
    return styles.number(fmt)


def _table_sheet(ws: Any, styles: _Styles, frame: pd.DataFrame,
                 numeric_years: bool = False, currency: str | None = None,
                 notes: Sequence[str] = (), per_row: Sequence[str] = (),
                 typed: Sequence[str] = (), grid: Sequence[str] = ()) -> None:
    """One table as a sheet; ``notes``, one a row, open it, a blank row below them, and
    the header, its freeze and its filter move down below them.  ``per_row`` columns get
    a format per row (whole or decimals), ``typed`` ones the decimals each value has,
    ``grid`` ones the decimals the most precise value has, in every row."""
    columns = [str(c) for c in frame.columns]
    for i, note in enumerate(notes):
        ws.write_string(i, 0, note)
    top = len(notes) + 1 if notes else 0  # the header's row
    # Money columns' names carry the currency, as on the page (``cost (EUR)``).
    headers = [column_header(c, currency) for c in columns]
    for j, header in enumerate(headers):
        ws.write_string(top, j, header, styles.header)
    values = [_column_values(frame.iloc[:, j]) for j in range(len(columns))]
    measures = measure_names(frame)
    formats = [_named_format(c, values[j], styles) if _format_for(c) is not None else
               _plain_number_formats(frame.iloc[:, j], values[j], styles,
                                     per_row=measures is not None or c in per_row)
               for j, c in enumerate(columns)]
    for j, column in enumerate(columns):
        if column in typed and pd.api.types.is_numeric_dtype(frame.iloc[:, j]):
            formats[j] = _typed_formats(values[j], styles)
        elif column in grid and pd.api.types.is_numeric_dtype(frame.iloc[:, j]):
            # As the page writes a grid's values (grid_column_texts): 0.5, 1.0, 1.5.
            formats[j] = _places_format(typed_places(values[j], TYPED_DIGITS), styles)
    if measures is not None:
        measure_formats(frame, values, formats, measures, styles, currency)
    for j, column in enumerate(columns):
        if column == "year":
            values[j] = [_year_cell(v, numeric_years) for v in values[j]]
            formats[j] = None  # a year as 2027, not 2,027
        elif column.endswith("_budget_years"):
            # The years a scenario's budget change named, as text: one year read back from
            # scenarios.csv is the number 2027, which the sheet had written 2,027.
            values[j] = [years_text(v) or None for v in values[j]]
            formats[j] = None
        elif column == "status":
            # The words of the page and the console; the CSV file keeps the code.
            values[j] = [plain_status(v) if isinstance(v, str) else v for v in values[j]]
        elif column == MEASURE_COLUMN:
            values[j] = [readable(v) if isinstance(v, str) else v for v in values[j]]
    write = ws.write
    if any(isinstance(f, list) for f in formats):
        for i, row in enumerate(zip(*values, strict=True)):
            for j, value in enumerate(row):
                f = formats[j]
                write(top + 1 + i, j, value, f[i] if isinstance(f, list) else f)
    else:
        for i, row in enumerate(zip(*values, strict=True), top + 1):
            for j, value in enumerate(row):
                write(i, j, value, formats[j])
    ws.freeze_panes(top + 1, 0)
    if columns:
        ws.autofilter(top, 0, top + len(frame), len(columns) - 1)
    _fit_widths(ws, columns, frame, headers)
    if measures is not None:
        # Wide enough for a money row's "2,463,500 EUR", which the column's name cannot tell.
        for j, column in enumerate(columns):
            if pd.api.types.is_float_dtype(frame.iloc[:, j]):
                texts = [cell_text(v, column, m, currency) for v, m in zip(
                    values[j], measures, strict=True) if isinstance(v, int | float)]
                width = max([len(headers[j]), *(len(t) for t in texts)])
                ws.set_column(j, j, min(max(width + 2, 9), 48))


def _summary_sheet(ws: Any, styles: _Styles, data: ReportData, sheet_names: Sequence[str],
                   cut: Sequence[str] = ()) -> None:
    plan, instance, run = data.plan, data.instance, data.summary
    demand = float(plan.coverage["demand_fte"].sum()) if len(plan.coverage) else 0.0
    spending = budget_lines(instance, plan)
    rows = itertools.count()  # rows go strictly downwards (constant_memory)

    def band(text: str) -> None:
        next(rows)  # a blank row above each band
        row = next(rows)
        ws.write_string(row, 0, text, styles.band_label)
        for col in range(1, 5):
            ws.write_blank(row, col, None, styles.band)

    def line(label: str, value: Any, fmt: str | None = None, note: str = "") -> None:
        row = next(rows)
        ws.write_string(row, 0, label)
        ws.write(row, 1, _cell_value(value), styles.number(fmt))
        if note:
            ws.write_string(row, 2, note)

    title = f"Staffing plan for {instance.heading}"
    if (ahead := run.planned_ahead) is not None:  # a re-plan's planned_ahead/, as its page
        title = (planned_ahead_heading(ahead.for_replan_at, run.scenario,
                                       instance.periods[0].name) + f" · {instance.heading}")
    ws.write_string(next(rows), 0, title, styles.title)
    ws.write_string(next(rows), 0, (f"instance {instance.name}: " if instance.title else "") +
                    f"{counted(len(instance.periods), 'period')}, {instance.periods[0].name} to "
                    f"{instance.periods[-1].name}; {counted(len(instance.offices), 'office')}, "
                    f"{len(instance.staff)} staff; written "
                    f"{dt.datetime.now(dt.UTC).strftime('%Y-%m-%d %H:%M')} UTC")
    warnings = [*cut, *(note.words() for note in quality_notes(data))]
    if warnings:
        band("Read this first")
        for text in warnings:
            ws.write_string(next(rows), 0, text, styles.warning)
    scenario = run.scenario_changes
    if scenario is not None:
        band(f"Scenario {scenario.name}")
        for label, text in scenario_rows(scenario):
            line(label, text)
    band("Headline")
    line("outcome", outcome_words(run.status, run.gap))
    # Headline totals to one decimal, as the console's summary and the page's cards.
    line("weighted shortfall (FTE-periods)", plan.weighted_shortfall, FTE_TOTAL)
    if (staying := run.staying_put_weighted_shortfall) is not None:  # what the plan buys
        line("staying put (FTE-periods, weighted)", staying, FTE_TOTAL,
             "weighted shortfall with nobody moved or hired, the work split at its best")
    line("shortfall (FTE-periods, unweighted)", plan.shortfall_fte, FTE_TOTAL)
    line("share of demand not covered", plan.shortfall_fte / demand if demand else 0.0, SHARE,
         f"of {fte_total_text(demand)} FTE-periods demanded")
    cash = _money_format(instance.money.currency)
    line("new money, all years", plan.total_cost, cash,
         f"{budget_note(instance, spending)}, {instance.periods[0].name} to "
         f"{instance.periods[-1].name}")
    rate = plan_run_rate(instance, plan)
    line("new positions' salaries a year", rate.per_year, cash,
         f"every year after the horizon ({instance.periods[-1].name}), not in new money: "
         f"{counted(rate.positions, 'new position')} x salary per period x "
         f"{counted(instance.periods_per_year, 'period')} a year")
    if rate.cap and rate.per_year > 0:
        # The share as the console and the page write it sits beside the cell's; a year
        # the horizon cuts is said (a full year's salaries had been set against a half's cap).
        line(f"as a share of {rate.cap_year}'s hiring cap", rate.compared / rate.cap, SHARE,
             run_rate_note(rate, instance.money.currency))
    warning = run_rate_warning(rate, instance.money.currency)
    if warning:
        ws.write_string(next(rows), 0, f"Warning: {warning}.", styles.warning)
    spare = spare_capacity(data)
    beyond = float(spare["spare_fte"].sum()) if len(spare) else 0.0
    no_work = float(spare["unassigned_fte"].sum()) if len(spare) else 0.0
    # One meaning per label, as on the page: idle capacity is both parts below it, shown
    # with the decimals that make them add up (71.1 had read beside 52.1 and 18.9).
    parts = "#,##0." + "0" * parts_decimals([beyond, no_work])
    line("idle capacity (FTE-periods)", beyond + no_work, parts,
         "output beyond demand plus time with no work: covers nothing in this plan")
    line("output beyond demand (FTE-periods)", beyond, parts,
         "output beyond its office's and skill's demand")
    line("time with no work (FTE-periods)", no_work, parts,
         "available time of people the plan gives no work where they are")
    line("people hired", plan.hires_count(), WHOLE)
    line("detail periods", len(plan.details), WHOLE,
         people_text(plan.details['person'].nunique()) if len(plan.details) else "")
    line("reassignments", len(plan.reassignments), WHOLE)

    band(LIMITS_TITLE)
    found = limits_at_cap(instance, plan)
    caps, explained = found.caps, found.away_while_short
    # The console's backticks mark a command to type; a cell has no such marks.
    ws.write_string(next(rows), 0, " ".join(
        text[:1].upper() + text[1:] for text in LIMITS_LEAD).replace("`", "") + "." if caps else
        "None of the plan's limits is at its cap.")
    for limit in caps:
        line(limit.words, limit.text)
    if explained:  # lines explaining a cap rather than naming one: under their own lead
        ws.write_string(next(rows), 0, SHORT_YET_AWAY_LEAD[:1].upper() + SHORT_YET_AWAY_LEAD[1:]
                        + ":")
        for limit in explained:
            line(limit.words, limit.text)

    band("Spending against budget")
    header_row = next(rows)
    for col, text in enumerate(["year", *(instance.money.header(h) for h in (
            "hiring spend", "hiring cap", "moves spend", "moves cap"))]):
        ws.write_string(header_row, col, text, styles.header)
    money = styles.number(MONEY)
    numeric_years = _numeric_years(instance.years)
    # One row a budget year: its hiring line, then its moves line (BUDGET_LINES' order).
    by_year: dict[str, list[float | None]] = {}
    for spent in spending:
        by_year.setdefault(spent.year, []).extend([spent.spent, spent.cap])
    for year, cells in by_year.items():
        row = next(rows)
        ws.write(row, 0, _year_cell(year, numeric_years))
        for col, value in enumerate(cells, 1):
            value = _cell_value(value)
            ws.write(row, col, "no cap" if value is None else value, money)

    if len(spare):
        band("Idle capacity (FTE-periods)")
        header_row = next(rows)
        for col, text in enumerate(["office", "demand", "output", "shortfall",
                                    "output beyond demand", "time with no work"]):
            ws.write_string(header_row, col, text, styles.header)
        fte = styles.number(FTE_TOTAL)  # as the page's table of it
        figures = spare[["demand_fte", "output_fte", "shortfall_fte", "spare_fte",
                         "unassigned_fte"]].to_numpy(dtype=float)
        offices = [*(str(o) for o in spare["office"]), "all offices"]
        for office, values in zip(offices, [*figures, figures.sum(axis=0)], strict=True):
            row = next(rows)
            ws.write_string(row, 0, office, styles.bold if office == "all offices" else None)
            for col, value in enumerate(values.tolist(), 1):
                ws.write_number(row, col, dust_free(value), fte)

    band("How the plan was found")
    line("solver", run.solver_version or run.solver)
    line("objective", run.objective_mode)
    line("largest stage gap at stop", run.gap, GAP)
    for stage in run.stages:
        if stage.name != "build":
            line(f"{stage.name} stage", stage_words(stage, instance.money.currency,
                                                    replan=run.replan is not None))
    line("model size", model_size_text(run.model_columns or 0, run.model_integer_columns or 0,
                                       run.model_rows or 0))
    # As text, as the page writes it: one rounding of the stored seconds (56.65, not 56.6).
    line("build / solve seconds", " / ".join(
        "-" if v is None else seconds_text(v) for v in (run.build_seconds, run.solve_seconds)))
    line("independent verification", {True: "passed", False: "FAILED", None: "unknown"}[
        run.verified])
    for warning in run.warnings:
        line("input warning", warning)

    band("Sheets")
    for name in sheet_names:
        row = next(rows)
        ws.write_string(row, 0, name, styles.bold)
        # The work sheet's note says why a person's fte shrinks over the horizon; on the
        # sheet itself it would move the header off the first row, where readers of the
        # workbook (pandas' read_excel among them) look for it.
        note = SHEET_NOTES.get(name, "")
        if name == "work" and expects_attrition(instance):
            note += f". {ATTRITION_NOTE}"
        ws.write_string(row, 1, note)

    band("Caution")
    row = next(rows)
    ws.set_row(row, 48)  # before the row's cells: constant_memory writes a row out whole
    ws.merge_range(row, 0, row, 4, run.caution, styles.caution)
    ws.set_column(0, 0, 36)
    ws.set_column(1, 4, 16)
    ws.freeze_panes(1, 0)
