"""Report sections for analysis tables found beside a plan: budget frontier, scenario
comparison and marginal values (written by the analysis commands of issue 5).

Each section appears only when its table is there.  Their writers may name columns a little
differently over time, so columns are found by role (a budget, a shortfall, a label) rather
than by one fixed name; a table whose columns cannot be read for a chart is still shown whole.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from rebalance.report.htmlparts import chart, e, frame_table_html, section
from rebalance.report.inputs import SHEET_ONLY, ReportData

__all__ = ["AnalysisView", "analysis_payload", "find_column"]


@dataclass(frozen=True)
class AnalysisView:
    payload: dict[str, Any] = field(default_factory=dict)
    sections: tuple[str, ...] = ()
    nav: tuple[tuple[str, str], ...] = ()


def _numeric(frame: pd.DataFrame, column: str) -> bool:
    return bool(pd.api.types.is_numeric_dtype(frame[column])
                and not pd.api.types.is_bool_dtype(frame[column]))


def find_column(frame: pd.DataFrame, exact: Sequence[str], contains: Sequence[str] = (),
                *, numeric: bool = True, avoid: Sequence[str] = ()) -> str | None:
    """The first column named in ``exact``, else the first whose name holds a ``contains``
    word (and none of ``avoid``); numeric columns only unless ``numeric`` is False."""
    columns = [c for c in frame.columns if not numeric or _numeric(frame, c)]
    lower = {c.lower(): c for c in columns}
    for name in exact:
        if name in lower:
            return lower[name]
    for word in contains:
        for c in columns:
            if word in c.lower() and not any(a in c.lower() for a in avoid):
                return c
    return None


def _finite(values: Sequence[Any]) -> list[float | None]:
    out: list[float | None] = []
    for v in values:
        try:
            f = float(v)
        except (TypeError, ValueError):
            f = math.nan
        out.append(round(f, 6) if math.isfinite(f) else None)
    return out


def _truthy(value: Any) -> bool:
    if isinstance(value, str):
        return value.strip().lower() in ("true", "yes", "1", "knee", "y")
    try:
        return bool(value) and not (isinstance(value, float) and math.isnan(value))
    except (TypeError, ValueError):
        return False


def _frontier(frame: pd.DataFrame) -> dict[str, Any] | None:
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
        groups = [(f"{moves.replace('_', ' ')} {value:,g}", part)
                  for value, part in frame.groupby(moves, sort=True)]
    series = []
    for label, part in groups:
        ordered = part.sort_values(x)
        points = []
        for xs, ys, cs, ks in zip(
                _finite(ordered[x].tolist()), _finite(ordered[y].tolist()),
                _finite(ordered[cost].tolist()) if cost else [None] * len(ordered),
                ordered[knee_col].tolist() if knee_col else [False] * len(ordered), strict=True):
            if xs is not None and ys is not None:
                points.append({"x": xs, "y": ys, "cost": cs, "knee": _truthy(ks)})
        if points:
            series.append({"label": label, "points": points})
    if not series:
        return None
    return {"x_label": x, "y_label": y, "cost_label": cost, "series": series}


SCENARIO_METRICS = ("weighted_shortfall", "total_cost", "cost", "hires", "detail_periods",
                    "details", "reassignments", "shortfall_fte_periods", "shortfall_fte")


def _scenarios(frame: pd.DataFrame) -> dict[str, Any] | None:
    label = find_column(frame, ("scenario", "name", "label"), ("scenario", "name"),
                        numeric=False)
    if label is None:
        texts = [c for c in frame.columns if not _numeric(frame, c)]
        label = texts[0] if texts else None
    if label is None:
        return None
    numeric = [c for c in frame.columns if _numeric(frame, c) and c != label]
    chosen = [c for m in SCENARIO_METRICS for c in numeric if c.lower() == m]
    chosen += [c for c in numeric if c not in chosen and ("shortfall" in c.lower()
                                                         or "cost" in c.lower())]
    chosen = list(dict.fromkeys(chosen))[:4] or numeric[:4]
    if not chosen:
        return None
    return {"labels": [str(v) for v in frame[label].tolist()],
            "metrics": [{"name": c, "values": _finite(frame[c].tolist())} for c in chosen]}


def _marginal(frame: pd.DataFrame) -> dict[str, Any] | None:
    value = find_column(
        frame, ("shortfall_reduction", "weighted_shortfall_reduction", "delta_shortfall",
                "shortfall_change", "value", "marginal_value"),
        ("shortfall_reduction", "reduction", "delta", "change", "per_unit", "shortfall",
         "value"), avoid=("cost", "estimate"))
    # A fast estimate (e.g. from LP duals) beside the exact re-solve is drawn as a tick.
    estimate = find_column(frame, ("estimate_shortfall_reduction",), ("estimate",),
                           avoid=("cost",))
    if value is None:
        return None
    texts = [c for c in frame.columns if not _numeric(frame, c)]
    first = find_column(frame, ("limit", "constraint", "name"), ("limit", "constraint"),
                        numeric=False)
    scope = ("where", "scope", "year", "office", "skill", "period", "location", "kind")
    keys = ([first] if first else []) + [c for c in texts if c != first and c.lower() in scope]
    # The method (exact re-solve or dual estimate) only tells rows apart when it varies.
    method = find_column(frame, ("method",), numeric=False)
    if method and frame[method].nunique() > 1:
        keys.append(method)
    if not keys and texts:
        keys = texts[:2]
    step = find_column(frame, ("step", "increment", "unit_step", "delta_limit"), ("step",),
                       avoid=("shortfall", "cost"))
    rows: list[dict[str, Any]] = []
    for _, r in frame.iterrows():
        parts = [str(r[k]).replace("_", " ") for k in keys
                 if not (isinstance(r[k], float) and math.isnan(r[k])) and str(r[k]).strip()]
        step_value = _finite([r[step]])[0] if step else None
        text = " · ".join(parts) or f"row {len(rows) + 1}"
        if step_value is not None:
            text += f" ({step_value:+,g})"
        v = _finite([r[value]])[0]
        if v is not None:
            row: dict[str, Any] = {"label": text, "value": v}
            if estimate is not None:
                row["estimate"] = _finite([r[estimate]])[0]
            rows.append(row)
    rows.sort(key=lambda row: -abs(row["value"]))
    if not rows:
        return None
    return {"value_label": value, "estimate_label": estimate, "rows": rows[:25]}


def _gap_note(frame: pd.DataFrame) -> str:
    """A warning where the solves behind a comparison stopped short of proof: a difference
    smaller than their gaps may come from where each search stopped, not from what was
    compared (a practitioner's reading had a surge scenario cost less than the base)."""
    gap = find_column(frame, ("gap",))
    gaps = [g for g in _finite(frame[gap].tolist()) if g is not None] if gap else []
    if not gaps or max(gaps) <= 1e-4:
        return ""
    return ('<p class="note">These solves stopped before proving their plans best, with gaps '
            f"of up to {max(gaps):.1%} (the <code>gap</code> column). A difference between "
            "rows smaller than that share of a figure may come from where each search "
            "stopped rather than from what was changed: give the solves more time "
            "(<code>--time-limit</code>) before reading it as real.</p>")


def analysis_payload(data: ReportData) -> AnalysisView:
    """Chart data, sections and navigation entries for whichever analysis tables exist."""
    payload: dict[str, Any] = {}
    sections: list[str] = []
    nav: list[tuple[str, str]] = []
    specs = (
        ("frontier", data.frontier, _frontier, "Budget frontier",
         "What more (or less) budget would buy: the least weighted shortfall found at each "
         "budget level. The ringed point is the knee, where extra money starts to buy less.",
         "Least weighted shortfall at each budget"),
        ("scenarios", data.scenarios, _scenarios, "Scenarios side by side",
         "Each scenario was solved as its own plan; the bars compare their headline figures.",
         "Scenario comparison"),
        ("marginal", data.marginal_values, _marginal, "What one more unit buys",
         "Binding limits ranked by how much weighted shortfall one more unit of the limit "
         "would remove (another hiring slot, more budget, more seats).",
         "Marginal value of each binding limit"),
    )
    for key, frame, reader, title, lead, chart_title in specs:
        if frame is None:
            continue
        view = reader(frame)
        body = ""
        if view is not None:
            payload[key] = view
            body += chart(key, chart_title)
        else:
            body += ('<p class="note">The columns of this table were not recognised for a '
                     "chart; it is shown as written.</p>")
        body = _gap_note(frame) + body + frame_table_html(frame, key)
        sections.append(section(key, title, e(lead), body))
        nav.append((key, title))
    for name, frame in data.tables:
        if name in SHEET_ONLY:
            continue
        title, lead = TABLE_SECTIONS[name]
        sections.append(section(name, title, e(lead), frame_table_html(frame, name, limit=500)))
        nav.append((name, title))
    return AnalysisView(payload, tuple(sections), tuple(nav))


# Titles and one-line explanations of the tables shown as they are (see inputs.TABLE_FILES).
TABLE_SECTIONS = {
    "reasons": ("Why each action", "For each hire, detail and reassignment, the pattern in the "
                "plan that explains it, and for each remaining gap the limits that stop it being "
                "covered."),
    "replan": ("Re-plan against the old plan", "Headline figures of the old plan and the new "
               "one made from the re-plan period on."),
    "changes": ("What the re-plan changes", "Every action that differs from the old plan, "
                "with the disruption cost charged for changing it."),
    "scenario_actions": ("Actions that differ between scenarios", "Hires, details and "
                         "reassignments that are not the same in every scenario's plan."),
}
