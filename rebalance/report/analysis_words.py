"""Reading analysis tables by role, and what they say in plain text on every surface: the
caution about unproven solves, what each scenario of a comparison changed, each limit in words
and the reasons table rolled up by office and by limit.

The console (``rebalance.cli_analysis``) prints these; the page (:mod:`analysis_view`) marks
them up.  Columns are found by role, as the page's sections find them.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import pandas as pd

from rebalance.analysis.limits import limit_words
from rebalance.numbers import fte_total_text, gap_text, money_amount

__all__ = ["NO_LIMIT", "find_column", "finite", "gap_caution", "is_numeric", "limit_texts",
           "reasons_by_limit", "reasons_by_office", "scenario_lines", "truthy"]


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
        within = (f"within gaps of up to {gap_text(largest)} (the gap column). A difference "
                  "between rows smaller than that share of a figure")
    else:
        within = (f"within gaps of up to {gap_text(shortfall)} on shortfall (the shortfall_gap "
                  f"column) and {gap_text(largest)} on cost (the gap column). A difference "
                  "between rows smaller than that share of its figure")
    # "Proven only within": true of a row the status calls optimal (within the gap asked)
    # as of one stopped by the time limit; "stopped before proving" had contradicted the
    # first (a sweep).
    return (f"These plans are proven best only {within} may come from "
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
        # By the figure shown: float dust (3.6e-15 more demand) is 0.0, not +0.0 or -0.0.
        if not any(digit in text for digit in "123456789"):
            return text.removeprefix("-")
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


def _text(value: Any) -> str:
    return "" if value is None or (isinstance(value, float) and math.isnan(value)) else str(
        value).strip()


def limit_texts(frame: pd.DataFrame) -> list[str]:
    """Each row's limit in words (``marginal_values.csv``): its ``limit_in_words``, or for a
    table written before that column, the words of its ``limit`` and ``where`` codes."""
    words = (frame["limit_in_words"].tolist() if "limit_in_words" in frame.columns
             else [None] * len(frame))
    limits = frame["limit"].tolist() if "limit" in frame.columns else [None] * len(frame)
    wheres = frame["where"].tolist() if "where" in frame.columns else [None] * len(frame)
    return [_text(w) or (limit_words(_text(lim), _text(at)) if _text(lim) else "")
            for w, lim, at in zip(words, limits, wheres, strict=True)]


REASON_KINDS = ("hire", "detail", "reassignment", "shortfall")
# A reason that asks a person to look again ends with these words (reasons.py writes them).
REVIEW = "(review)"


def reasons_by_office(frame: pd.DataFrame) -> pd.DataFrame | None:
    """``reasons.csv`` rolled up by office, for reading before its hundreds of rows: people
    hired, detail runs and their periods, reassignments, shortfalls (office, skill and period
    short) with their FTE-periods, and the reasons that ask for a review.  None where the
    table lacks the columns."""
    if not {"action", "office", "amount", "reason"} <= set(frame.columns) or frame.empty:
        return None
    action = frame["action"].astype(str)
    amount = pd.to_numeric(frame["amount"], errors="coerce").fillna(0.0)
    review = frame["reason"].astype(str).str.contains(REVIEW, regex=False)
    rows = []
    for office in dict.fromkeys(frame["office"].astype(str)):
        at = frame["office"].astype(str) == office

        def of(kind: str, mask: pd.Series = at) -> pd.Series:
            return mask & (action == kind)

        rows.append({"office": office, "hires": round(float(amount[of("hire")].sum())),
                     "detail_runs": int(of("detail").sum()),
                     "detail_periods": round(float(amount[of("detail")].sum())),
                     "reassignments": int(of("reassignment").sum()),
                     "shortfalls": int(of("shortfall").sum()),
                     "shortfall_fte_periods": float(amount[of("shortfall")].sum()),
                     "to_review": int((at & review).sum())})
    table = pd.DataFrame(rows)
    return table.sort_values(["shortfall_fte_periods", "office"], ascending=[False, True],
                             kind="stable").reset_index(drop=True)


NO_LIMIT = "no binding limit found"


def _limit_name(key: str) -> str:
    """A ``binding_limits`` key (``kind|where|period``) in words, its period left out."""
    limit, _, rest = key.partition("|")
    return limit_words(limit, rest.rpartition("|")[0] if "|" in rest else rest, "")


def reasons_by_limit(frame: pd.DataFrame) -> pd.DataFrame | None:
    """The shortfalls of ``reasons.csv`` by each limit that holds them back (its
    ``binding_limits``, ``kind|where|period``; the limit in words, every period together):
    how many shortfalls cite it, their FTE-periods and the periods they fall in, most FTE
    first, then the shortfalls that cite none.  A shortfall held back by two limits counts
    under both.  None where there is no shortfall."""
    if not {"action", "amount", "binding_limits", "first_period"} <= set(frame.columns):
        return None
    short = frame[frame["action"].astype(str) == "shortfall"]
    if short.empty:
        return None
    found: dict[str, dict[str, Any]] = {}
    for cited, amount, period in zip(short["binding_limits"].tolist(),
                                     pd.to_numeric(short["amount"], errors="coerce").fillna(0.0),
                                     short["first_period"].astype(str), strict=True):
        # One name per limit: a shortfall cites seats at its office in several periods.
        names = list(dict.fromkeys(_limit_name(k) for k in _text(cited).split(";") if k))
        for name in names or [NO_LIMIT]:
            row = found.setdefault(name, {"limit": name, "shortfalls": 0,
                                          "shortfall_fte_periods": 0.0, "periods_short": []})
            row["shortfalls"] += 1
            row["shortfall_fte_periods"] += float(amount)
            if period not in row["periods_short"]:
                row["periods_short"].append(period)
    for row in found.values():
        periods = row["periods_short"]
        row["periods_short"] = (periods[0] if len(periods) == 1 else
                                f"{len(periods)} periods, {periods[0]} to {periods[-1]}")
    table = pd.DataFrame(list(found.values()))
    table["_last"] = table["limit"] == NO_LIMIT
    return table.sort_values(["_last", "shortfall_fte_periods"], ascending=[True, False],
                             kind="stable").drop(columns="_last").reset_index(drop=True)
