"""Reading analysis tables by role, and what they say in plain text on every surface: the
caution about unproven solves and what each scenario of a comparison changed.

The console (``rebalance.cli_analysis``) prints these; the page (:mod:`analysis_view`) marks
them up.  Columns are found by role, as the page's sections find them.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import pandas as pd

from rebalance.numbers import fte_total_text, gap_text, money_amount

__all__ = ["find_column", "finite", "gap_caution", "is_numeric", "scenario_lines", "truthy"]


def is_numeric(frame: pd.DataFrame, column: str) -> bool:
    return bool(pd.api.types.is_numeric_dtype(frame[column])
                and not pd.api.types.is_bool_dtype(frame[column]))


def find_column(frame: pd.DataFrame, exact: Sequence[str], contains: Sequence[str] = (),
                *, numeric: bool = True, avoid: Sequence[str] = ()) -> str | None:
    """The first column named in ``exact``, else the first whose name holds a ``contains``
    word (and none of ``avoid``); numeric columns only unless ``numeric`` is False."""
    columns = [c for c in frame.columns if not numeric or is_numeric(frame, c)]
    lower = {c.lower(): c for c in columns}
    for name in exact:
        if name in lower:
            return lower[name]
    for word in contains:
        for c in columns:
            if word in c.lower() and not any(a in c.lower() for a in avoid):
                return c
    return None


def finite(values: Sequence[Any]) -> list[float | None]:
    out: list[float | None] = []
    for v in values:
        try:
            f = float(v)
        except (TypeError, ValueError):
            f = math.nan
        out.append(round(f, 6) if math.isfinite(f) else None)
    return out


def truthy(value: Any) -> bool:
    if isinstance(value, str):
        return value.strip().lower() in ("true", "yes", "1", "knee", "y")
    try:
        return bool(value) and not (isinstance(value, float) and math.isnan(value))
    except (TypeError, ValueError):
        return False


def gap_caution(frame: pd.DataFrame) -> str:
    """A warning where the solves behind a comparison stopped short of proof ("" where they
    did not): a difference smaller than their gaps may come from where each search stopped,
    not from what was compared (a practitioner's reading had a surge scenario cost less than
    the base).  Shortfall is held to its own stage's gap, which is far smaller than the
    largest (mostly the cost stage's): 5.59% of 165.8 had told a planner to dismiss a real
    gain of 2.8.  Plain text, for the console and, marked up, the page."""
    largest = _largest(frame, "gap")
    if largest is None or largest <= 1e-4:
        return ""
    shortfall = _largest(frame, "shortfall_gap")
    if shortfall is None:
        within = (f"with gaps of up to {gap_text(largest)} (the gap column). A difference "
                  "between rows smaller than that share of a figure")
    else:
        within = (f"with gaps of up to {gap_text(shortfall)} on shortfall (the shortfall_gap "
                  f"column) and {gap_text(largest)} on cost (the gap column). A difference "
                  "between rows smaller than that share of its figure")
    return (f"These solves stopped before proving their plans best, {within} may come from "
            "where each search stopped rather than from what was changed: give the solves "
            "more time (--time-limit) before reading it as real.")


def scenario_lines(frame: pd.DataFrame, currency: str | None = None) -> list[str]:
    """What each scenario of a comparison (``scenarios.csv``) is, and what it changed against
    the base: demand, weighted shortfall and total cost, as differences (a practitioner's
    reading had to work out by hand that a surge added 24 FTE-periods of demand and 19.9 of
    shortfall for 7,000 more).  Empty where the table lacks those columns."""
    needed = {"scenario", "description", "demand_fte_periods", "weighted_shortfall",
              "total_cost"}
    if not needed <= set(frame.columns) or frame.empty or frame["scenario"].iloc[0] != "base":
        return []
    base = frame.iloc[0]

    def signed(value: float, text: str) -> str:
        return ("+" if value > 0 and not text.startswith("-") else "") + text

    lines = []
    for row in frame.iloc[1:].itertuples(index=False):
        said = f"{row.scenario!s}: {str(row.description or '') or 'no description'}"
        more = row.demand_fte_periods - base.demand_fte_periods
        parts = [f"demand {signed(more, fte_total_text(more))} FTE-periods"]
        if finite([row.weighted_shortfall])[0] is None or finite(
                [base.weighted_shortfall])[0] is None:
            parts.append("no plan to compare")
        else:
            shortfall = row.weighted_shortfall - base.weighted_shortfall
            cost = row.total_cost - base.total_cost
            parts += [f"weighted shortfall {signed(shortfall, fte_total_text(shortfall))}",
                      f"total cost {signed(cost, money_amount(cost, currency))}"]
        lines.append(f"{said}; against the base: {', '.join(parts)}")
    return lines


def _largest(frame: pd.DataFrame, name: str) -> float | None:
    """The largest finite value of ``frame``'s column ``name``, None where there is none."""
    column = find_column(frame, (name,))
    values = [g for g in finite(frame[column].tolist()) if g is not None] if column else []
    return max(values) if values else None
