"""The workbook's words and formats for its analysis sheets: what each sheet is (the summary's
list of sheets), the lines an analysis sheet opens with, and the formats of a table of
measures (``replan.csv``), whose rows, not its columns, say what their numbers are.

Kept apart from :mod:`rebalance.report.workbook`, which the style guide's length holds; the
words come from the modules the page and the console take them from, so all three say the
same.
"""

from __future__ import annotations

from typing import Any

import pandas as pd

from rebalance.numbers import GAP_DIGITS, compared_row_texts, is_gap, is_money
from rebalance.report.analysis_words import FROM_BASE_WORDS, gap_caution
from rebalance.report.inputs import ReportData
from rebalance.report.late_notice_words import late_notice_line

__all__ = ["GAP", "MONEY", "SHEET_NOTES", "measure_formats", "money_format", "sheet_notes"]

MONEY = "#,##0"
GAP = "0." + "0" * GAP_DIGITS + "%"
# Places a figure of a table of measures is rounded to before a zero is written as 0: a
# gap's percentage has GAP_DIGITS after the point, so its fraction two more (0.0001 is 0.01%,
# which three places had written as 0).
PLACES = 3
GAP_PLACES = GAP_DIGITS + 2

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
    "marginal_values": "what one more step of each binding limit buys",
    "reasons": "why each action is in the plan, and what stops each remaining gap",
    "replan": "old plan against the re-plan",
    "changes": "every change the re-plan makes to the old plan",
    "scenario_actions": "actions where a scenario's plan differs from the base plan",
    "scenario_costs": "cost of each scenario's plan by budget year and kind",
    "scenario_offices": "demand and shortfall of each scenario's plan by office",
}


def money_format(currency: str | None) -> str:
    """The money number format, with the currency after the amount as
    :meth:`rebalance.instance.Money.amount` writes it (``43,000 EUR``): the cell stays a
    number.  The currency is quoted, or each character escaped where it holds a quote, so
    no letter of it is read as a format code (E is the exponent's)."""
    if not currency:
        return MONEY
    if '"' in currency:
        return MONEY + " " + "".join("\\" + ch for ch in currency)
    return f'{MONEY} "{currency}"'


def sheet_notes(name: str, frame: pd.DataFrame, data: ReportData) -> tuple[str, ...]:
    """Lines a table sheet opens with: the scenarios sheet's (how its plans were solved,
    and the gap caution where the solves stopped short of proof); the replan sheet's line on
    what late notice cost, where the same data were planned ahead too, as the page's re-plan
    section leads with it; none for the others."""
    if name == "replan" and data.summary.replan is not None:
        late = late_notice_line(frame, data.summary.replan.from_period,
                                data.instance.period_names[0], data.instance.money.currency)
        return (late,) if late else ()
    if name != "scenarios":
        return ()
    from_base = [FROM_BASE_WORDS] if "actions_differing" in frame.columns else []
    return tuple(note for note in (*from_base, gap_caution(frame)) if note)


def measure_formats(frame: pd.DataFrame, values: list[list[Any]], formats: list[Any],
                    measures: list[str], styles: Any, currency: str | None) -> None:
    """A table of measures (replan.csv): a row's measure says what its numbers are
    (total_cost's row is money in old_plan, new_plan and difference alike, a stage gap's row
    a percentage as the console and the page give it, where it had read 0.003), not the
    column's name; and a figure that shows as zero is written as 0, as Excel writes -0.00017
    as "-0.000" (the CSV file keeps the exact value).  ``styles``: the workbook's
    (``number(format)`` gives a cell format)."""
    money_cell, gap_cell = styles.number(money_format(currency)), styles.number(GAP)
    for j in range(len(frame.columns)):
        if not pd.api.types.is_float_dtype(frame.iloc[:, j]):
            continue
        plain = formats[j]
        formats[j] = [money_cell if is_money(m) else gap_cell if is_gap(m) else
                      plain[i] if isinstance(plain, list) else plain
                      for i, m in enumerate(measures)]
        places = [0 if is_money(m) else GAP_PLACES if is_gap(m) else PLACES for m in measures]
        values[j] = [0.0 if isinstance(v, float) and round(v, d) == 0 else v
                     for v, d in zip(values[j], places, strict=True)]
    # Old, new and difference with the decimals the console and the page give them
    # (compared_row_texts): 168.59153 and 168.59136 had shown "168.592", "168.591" and a
    # difference of 0.000 here.
    columns = [str(c) for c in frame.columns]
    originals = [frame.iloc[:, j].tolist() for j in range(len(columns))]
    for i, measure in enumerate(measures):
        row = [originals[j][i] for j in range(len(columns))]
        for j, text in compared_row_texts(columns, row, measure).items():
            decimals = len(text.partition(".")[2]) if "." in text else 0
            if (is_money(measure) or is_gap(measure) or not isinstance(formats[j], list)
                    or decimals <= PLACES):
                continue
            formats[j][i] = styles.number("#,##0." + "0" * decimals)
            values[j][i] = float(row[j])
