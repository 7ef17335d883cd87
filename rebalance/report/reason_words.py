"""The reasons table (``reasons.csv``) rolled up for reading before its hundreds of rows: by
office and by the limit each shortfall cites.  The page (:mod:`analysis_view`) shows both
above the full table."""

from __future__ import annotations

from typing import Any

import pandas as pd

from rebalance.analysis.limits import limit_words
from rebalance.report.analysis_words import cell_words

__all__ = ["NO_LIMIT", "REASON_KINDS", "REVIEW", "reasons_by_limit", "reasons_by_office"]

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
        names = list(dict.fromkeys(_limit_name(k) for k in cell_words(cited).split(";") if k))
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
