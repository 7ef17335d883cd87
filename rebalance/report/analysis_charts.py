"""Chart data for the analysis sections of the page: the budget frontier, the scenario
comparison and the marginal values (written by the analysis commands of issue 5), with the
leads and captions that say what those charts draw.

Their writers may name columns a little differently over time, so columns are found by role
(a budget, a shortfall, a label) rather than by one fixed name; a reader returns None for a
table whose columns cannot be read for a chart (the page then shows it whole).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import pandas as pd

from rebalance.analysis.frontier import KNEE_MIN_POINTS
from rebalance.analysis.limits import LIMIT_NAMES
from rebalance.analysis.marginal import STEP_UNITS
from rebalance.numbers import (
    column_texts,
    grid_column_texts,
    is_money,
    money_header,
    number_text,
)
from rebalance.report.analysis_words import find_column, finite, is_numeric, limit_texts, truthy
from rebalance.report.htmlparts import e
from rebalance.report.words import readable

__all__ = ["CHART_ROWS", "GRID_COLUMNS", "KNEE_MIN_POINTS", "SCENARIO_METRICS", "grid_texts",
           "marginal_texts", "scenario_names", "step_words"]

# A frontier's grid values, as typed: factors of each year's cap or amounts.
GRID_COLUMNS = ("hiring_budget", "moves_budget")


def grid_texts(frame: pd.DataFrame) -> pd.DataFrame:
    """A frontier table (console or page) with its grid values as typed, the same decimals
    in every row (:func:`~rebalance.numbers.grid_column_texts`: 0.5, 1.0, 1.5), where the
    number rule's three decimals had written "1.500" and "1.000"; an amount with
    separators.  A missing value stays missing."""
    out = frame.copy()
    for column in GRID_COLUMNS:
        if column in out.columns:
            out[column] = grid_column_texts(finite(out[column].tolist()))
    return out


# Columns of marginal_values.csv holding a limit's amount (seats, periods, hires, money or a
# share), each row in its own unit.
AMOUNT_COLUMNS = ("current",)


def marginal_texts(frame: pd.DataFrame, currency: str | None = None) -> pd.DataFrame:
    """A marginal values table as the page shows it: each limit's ``current`` amount by its
    own row (52 seats, 2 periods as whole numbers, a share of 0.3 with decimals), and its
    ``step`` with its unit as the console writes it (+10 seats, -1 period).  One column mixes
    units, so the number rule's "decimals in every row" had written 52.000 seats and 2.000
    periods beside a share's 0.300.  The CSV file keeps the numbers."""
    out = frame.copy()
    for column in AMOUNT_COLUMNS:
        if column in out.columns:
            out[column] = [None if v is None else number_text(v)
                           for v in finite(out[column].tolist())]
    if "step" in out.columns and "unit" in out.columns:
        out["step"] = [None if step is None and not _text(unit) else
                       step_words(step, _text(unit), currency)
                       for step, unit in zip(finite(out["step"].tolist()),
                                             out["unit"].tolist(), strict=True)]
    return out


def _frontier(frame: pd.DataFrame, currency: str | None = None) -> dict[str, Any] | None:
    """A frontier's points per moves budget; with a ``currency``, the axis and tip names of
    money (the budget, unless the grid was factors of each year's cap, and the cost) say it."""
    x = find_column(frame, ("hiring_budget", "budget", "hiring_cap", "hiring", "budget_total"),
                    ("budget", "hiring", "cap"), avoid=("shortfall", "spend", "moves"))
    y = find_column(frame, ("weighted_shortfall", "shortfall"), ("weighted_shortfall",
                                                                  "shortfall"))
    if x is None or y is None:
        return None
    cost = find_column(frame, ("total_cost", "cost", "spend"), ("cost",),
                       avoid=("shortfall",))
    knee_col = find_column(frame, ("knee", "is_knee"), ("knee",), numeric=False)
    # A grid over both budgets is drawn as one line per moves budget.
    moves = find_column(frame, ("moves_budget", "moves_cap"), ("moves_budget",),
                        avoid=("spend",))
    groups: list[tuple[str | None, pd.DataFrame]] = [(None, frame)]
    if moves is not None and frame[moves].nunique() > 1:
        parts = list(frame.groupby(moves, sort=True))
        # By the number rule, as the table below writes them (":,g" had written 1.5e+06).
        texts = column_texts([float(value) for value, _ in parts])  # type: ignore[arg-type]  # numeric keys
        groups = [(f"{moves.replace('_', ' ')} {text}", part)
                  for text, (_, part) in zip(texts, parts, strict=True)]
    series = []
    for label, part in groups:
        ordered = part.sort_values(x)
        points = []
        for xs, ys, cs, ks in zip(
                finite(ordered[x].tolist()), finite(ordered[y].tolist()),
                finite(ordered[cost].tolist()) if cost else [None] * len(ordered),
                ordered[knee_col].tolist() if knee_col else [False] * len(ordered), strict=True):
            if xs is not None and ys is not None:
                points.append({"x": xs, "y": ys, "cost": cs, "knee": truthy(ks)})
        if len(points) < KNEE_MIN_POINTS:
            # Any three points bend somewhere, so a "knee" among fewer than four says nothing
            # about where money starts to buy less: none is ringed.  frontier.py marks none
            # there either (find_knee); a table written before that rule may still hold one.
            for point in points:
                point["knee"] = False
        if points:
            series.append({"label": label, "points": points})
    if not series:
        return None
    x_label, cost_label = x, cost
    # budget_unit says "money, each year" or "times each year's cap" (a factor grid); the
    # axis says which, in money with the currency where one is set.
    units = (list(dict.fromkeys(frame["budget_unit"].dropna().astype(str)))
             if "budget_unit" in frame.columns else [])
    money = not units or all(u.startswith("money") for u in units)
    if money and currency:
        x_label = money_header(x, currency)
    elif len(units) == 1:
        x_label = f"{x} ({units[0]})"
    if cost:
        # In words, as the table below heads it (total_cost reads "new money").
        cost_label = money_header(readable(cost), currency) if currency else readable(cost)
    return {"x_label": x_label, "y_label": y, "cost_label": cost_label, "series": series}


def _frontier_lead(view: dict[str, Any] | None) -> str:
    """The frontier section's lead: the knee is named only where the chart rings one."""
    lead = ("What more (or less) budget would buy: the least weighted shortfall found at each "
            "budget level.")
    if view is None:
        return lead
    if any(p["knee"] for s in view["series"] for p in s["points"]):
        return lead + " The ringed point is the knee, where extra money starts to buy less."
    if all(len(s["points"]) < KNEE_MIN_POINTS for s in view["series"]):
        return lead + (f" No knee is marked: with fewer than {KNEE_MIN_POINTS} budget levels "
                       "any line bends somewhere, so a bend says little; add levels to find "
                       "where extra money starts to buy less.")
    return lead


SCENARIO_METRICS = ("weighted_shortfall", "total_cost", "cost", "hires", "detail_periods",
                    "details", "reassignments", "shortfall_fte_periods", "shortfall_fte")


def _scenario_label(frame: pd.DataFrame) -> str | None:
    """The column naming each scenario (or the first text column)."""
    label = find_column(frame, ("scenario", "name", "label"), ("scenario", "name"),
                        numeric=False)
    if label is None:
        texts = [c for c in frame.columns if not is_numeric(frame, c)]
        label = texts[0] if texts else None
    return label


def scenario_names(frame: pd.DataFrame) -> list[str]:
    """The scenarios a comparison holds, in its order ("base" among them, as written)."""
    label = _scenario_label(frame)
    if label is None:
        return []
    return list(dict.fromkeys(str(v) for v in frame[label].tolist() if not pd.isna(v)))


def _metric_name(column: str, currency: str | None) -> str:
    """A scenario chart's metric in words, money with the ``currency`` (``new money (EUR)``)."""
    words = readable(column)
    return money_header(words, currency) if is_money(column) and currency else words


def _scenarios(frame: pd.DataFrame, currency: str | None = None) -> dict[str, Any] | None:
    label = _scenario_label(frame)
    if label is None:
        return None
    numeric = [c for c in frame.columns if is_numeric(frame, c) and c != label]
    chosen = [c for m in SCENARIO_METRICS for c in numeric if c.lower() == m]
    chosen += [c for c in numeric if c not in chosen and ("shortfall" in c.lower()
                                                         or "cost" in c.lower())]
    chosen = list(dict.fromkeys(chosen))[:4] or numeric[:4]
    if not chosen:
        return None
    return {"labels": [str(v) for v in frame[label].tolist()],
            # "money": the script writes those bars' values in full, as the table below.
            # Named in words, as the table below heads them (total_cost: "new money").
            "metrics": [{"name": _metric_name(c, currency), "money": is_money(c),
                         "values": finite(frame[c].tolist())} for c in chosen]}


# A step of exactly one in the singular, by the unit marginal.py wrote (its STEP_UNITS).
_SINGULAR = {unit.plural: unit.singular for unit in STEP_UNITS.values()}


def step_words(step: float | None, unit: str, currency: str | None = None) -> str:
    """One step of a limit with its unit: ``+10 seats``, ``+100,000 money`` (``+100,000 EUR``
    with a currency), ``-1 period``.  A unit not in :data:`STEP_UNITS` is kept as written."""
    words = unit.strip()
    if step is not None and abs(step) == 1:
        words = _SINGULAR.get(words, words)
    if words == "money" and currency:
        words = currency
    if step is None:
        return words
    amount = f"{int(step):+,}" if float(step).is_integer() else f"{step:+,g}"
    return f"{amount} {words}".strip()


@dataclass(frozen=True)
class _MarginalColumns:
    value: str
    estimate: str | None
    step: str | None
    unit: str | None
    status: str | None


def _marginal_columns(frame: pd.DataFrame) -> _MarginalColumns | None:
    value = find_column(
        frame, ("shortfall_reduction", "weighted_shortfall_reduction", "delta_shortfall",
                "shortfall_change", "value", "marginal_value"),
        ("shortfall_reduction", "reduction", "delta", "change", "per_unit", "shortfall",
         "value"), avoid=("cost", "estimate"))
    if value is None:
        return None
    # A fast estimate (an LP re-solve, else LP duals) beside the exact re-solve is drawn
    # as a tick.
    estimate = find_column(frame, ("estimate_shortfall_reduction",), ("estimate",),
                           avoid=("cost",))
    step = find_column(frame, ("step", "increment", "unit_step", "delta_limit"), ("step",),
                       avoid=("shortfall", "cost"))
    unit = find_column(frame, ("unit", "step_unit", "units"), numeric=False)
    status = find_column(frame, ("status",), numeric=False)
    return _MarginalColumns(value, estimate, step, unit, status)


@dataclass(frozen=True)
class _MarginalTable:
    """A marginal values table with its columns found and which rows were measured."""

    frame: pd.DataFrame
    cols: _MarginalColumns
    measured: pd.Series  # True where the value was measured by a re-solve


def _marginal_table(frame: pd.DataFrame) -> _MarginalTable | None:
    cols = _marginal_columns(frame)
    if cols is None:
        return None
    measured = frame[cols.value].map(lambda x: finite([x])[0] is not None).astype(bool)
    return _MarginalTable(frame, cols, measured)


def _text(value: Any) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return ""
    return str(value).strip()


# The marginal chart draws at most this many bars, the largest.
CHART_ROWS = 25


def _marginal(table: _MarginalTable, currency: str | None = None) -> dict[str, Any] | None:
    """Chart rows of the limits whose value was measured (re-solved), each labelled with its
    limit, scope and step in its unit; the rest (estimate only, or no value) are counted for
    the caption, not drawn as if measured."""
    frame, cols = table.frame, table.cols
    texts = [c for c in frame.columns if not is_numeric(frame, c)]
    first = find_column(frame, ("limit", "constraint", "name"), ("limit", "constraint"),
                        numeric=False)
    scope = ("where", "scope", "year", "office", "skill", "period", "location", "kind")
    keys = ([first] if first else []) + [c for c in texts if c != first and c.lower() in scope]
    if not keys and texts:
        keys = [c for c in texts if c not in (cols.unit, cols.status)][:2]
    method = find_column(frame, ("method",), numeric=False)
    measured = frame[table.measured]
    # The limit in words ("seats at aldercombe in every period"), not its codes.
    words = (limit_texts(measured) if "limit" in frame.columns else [""] * len(measured))
    rows: list[dict[str, Any]] = []
    for said, (_, r) in zip(words, measured.iterrows(), strict=True):
        parts = [_text(r[k]).replace("_", " ") for k in keys if _text(r[k])]
        name = said or " · ".join(parts) or f"row {len(rows) + 1}"
        step = finite([r[cols.step]])[0] if cols.step else None
        unit = _text(r[cols.unit]) if cols.unit else ""
        step_text = step_words(step, unit, currency) if step is not None or unit else ""
        label = f"{name}, {step_text}" if step_text else name
        row: dict[str, Any] = {"label": label, "value": finite([r[cols.value]])[0],
                               "tip": label + (f"\n{_text(r[method])}" if method else "")}
        if cols.estimate is not None:
            row["estimate"] = finite([r[cols.estimate]])[0]
        rows.append(row)
    # Two rows the same but for how they were found (a table with both) tell apart by it.
    seen = [r["label"] for r in rows]
    if method and len(set(seen)) < len(seen):
        for row, how in zip(rows, measured[method].tolist(), strict=True):
            row["label"] += f" · {_text(how)}"
    rows.sort(key=lambda row: -abs(row["value"]))
    if not rows:
        return None
    shown = rows[:CHART_ROWS]
    title = cols.value.replace("_", " ") + (
        f": all {len(frame)} limits" if len(shown) == len(frame) else
        f": the {len(shown)} of {len(frame)} limits measured by a re-solve"
        if len(shown) == len(rows) else
        f": the {len(shown)} largest of {len(rows)} measured by a re-solve "
        f"({len(frame)} limits in all)")
    return {"value_label": cols.value, "estimate_label": cols.estimate, "title": title,
            "rows": shown}


def _marginal_words(frame: pd.DataFrame, table: _MarginalTable | None,
                    currency: str | None = None) -> tuple[str, str]:
    """The marginal section's lead (what a step is, from the table's own steps and units) and
    the chart's caption (which rows it shows and why), both HTML."""
    cols = table.cols if table is not None else None
    limit = find_column(frame, ("limit", "constraint", "name"), ("limit", "constraint"),
                        numeric=False)
    steps: dict[str, list[str]] = {}
    if cols is not None and cols.step and cols.unit:
        for _, r in frame.iterrows():
            step = finite([r[cols.step]])[0]
            if step is None:
                continue
            what = step_words(step, _text(r[cols.unit]), currency)
            code = _text(r[limit]) if limit else ""
            name = LIMIT_NAMES.get(code, code.replace("_", " "))
            names = steps.setdefault(what, [])
            if name and name not in names:
                names.append(name)
    if steps:
        listed = "; ".join(f"{e(what)}{' (' + e(', '.join(names)) + ')' if names else ''}"
                           for what, names in steps.items())
        step_text = ("One step, as the <code>step</code> and <code>unit</code> columns give "
                     f"it, is {listed}.")
    else:
        step_text = "One step is the amount in the table's <code>step</code> column."
    lead = ("Each binding limit relaxed by one step and the plan solved again: what that step "
            "removes from the weighted shortfall (and adds to cost). " + step_text
            + " Only limits actually re-solved are ranked. The cost change is the new money the "
              "re-solved plan spends on hires, details and moves; a seat or a vacancy itself "
              "is not priced. Steps differ in kind and size, so the rank is not value for "
              "money.")
    if table is None or cols is None:
        return lead, ""
    n, total = int(table.measured.sum()), len(frame)
    rest = frame[~table.measured]
    ticks = "; ticks: the LP estimate, in brackets after the value" if cols.estimate else ""
    largest = (f" The chart draws the {CHART_ROWS} largest; the table has every row."
               if n > CHART_ROWS else "")
    if not len(rest):
        return lead, (f"All {total} limits were re-solved (bars: what the step removed{ticks})."
                      + largest)
    unsolved = (int((rest[cols.status].astype(str) == "not re-solved").sum())
                if cols.status else len(rest))
    with_estimate = (int(rest[cols.estimate].map(lambda x: finite([x])[0] is not None).sum())
                     if cols.estimate else 0)
    caption = (f"The chart shows only the {n} of {total} limits measured by a re-solve "
               f"(bars: what the step removed{ticks}).{largest} The other {len(rest)} have no "
               "measured value")
    if unsolved == len(rest):
        caption += (" (not re-solved: <code>--max-resolves</code> chose the best estimates, "
                    "with a budget kept among them where one was listed)")
    elif unsolved:
        caption += (f" ({unsolved} not re-solved; {len(rest) - unsolved} re-solved without a "
                    "verified plan, see status)")
    else:
        caption += " (re-solved without a verified plan, see status)"
    caption += (": the table lists them after the ranked rows, without a rank, ordered by "
                "their estimate")
    if cols.estimate and with_estimate < len(rest):
        caption += f" ({len(rest) - with_estimate} have no estimate either)"
    caption += (". An estimate comes from the plan's LP (whole-number decisions relaxed) "
                "solved again with the limit moved, or from its duals where that was not "
                "solved: a guide to what to re-solve, not a measured value.")
    return lead, caption
