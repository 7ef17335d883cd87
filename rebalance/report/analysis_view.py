"""Report sections for analysis tables found beside a plan: budget frontier, scenario
comparison and marginal values (written by the analysis commands of issue 5), and the tables
shown as written (the reasons first rolled up by office and by limit).

Each section appears only when its table is there.  Their writers may name columns a little
differently over time, so columns are found by role (a budget, a shortfall, a label) rather
than by one fixed name; a table whose columns cannot be read for a chart is still shown whole.
"""

from __future__ import annotations

import html
import math
import re
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from rebalance.analysis.limits import LIMIT_NAMES
from rebalance.analysis.marginal import STEP_UNITS
from rebalance.numbers import (
    column_header,
    column_texts,
    is_money,
    money_amount,
    money_header,
)
from rebalance.report.analysis_words import (
    actions_lead,
    find_column,
    finite,
    gap_caution,
    is_numeric,
    limit_texts,
    marginal_gap_words,
    reasons_by_limit,
    reasons_by_office,
    scenario_lines,
    status_in_words,
    truthy,
)
from rebalance.report.htmlparts import chart, e, frame_table_html, section
from rebalance.report.inputs import SHEET_ONLY, ReportData

__all__ = ["KNEE_MIN_POINTS", "AnalysisView", "analysis_payload", "scenario_names", "step_words"]


@dataclass(frozen=True)
class AnalysisView:
    payload: dict[str, Any] = field(default_factory=dict)
    sections: tuple[str, ...] = ()
    nav: tuple[tuple[str, str], ...] = ()


# Fewer budget levels than this mark no knee (see _frontier).
KNEE_MIN_POINTS = 4


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
            # about where money starts to buy less: none is ringed.
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
    if currency:
        cost_label = money_header(cost, currency) if cost else None
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
            "metrics": [{"name": column_header(c, currency), "money": is_money(c),
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


def _gap_note(frame: pd.DataFrame) -> str:
    """:func:`gap_caution` as a note of the page."""
    caution = gap_caution(frame)
    if not caution:
        return ""
    marked = e(caution).replace("the gap column", "the <code>gap</code> column").replace(
        "(the shortfall_gap column)", "(<code>shortfall_gap</code> in the table's CSV file)")
    return f'<p class="note">{marked.replace("(--time-limit)", "(<code>--time-limit</code>)")}</p>'


# The scenarios section's lead, as the console says it (cli_analysis.FROM_BASE_WORDS): a
# lead that said each was "solved as its own plan" had hidden that unpaid changes are undone.
SCENARIOS_LEAD = ("Each scenario was solved from the base plan, and a change that did not pay "
                  "under the scenario was undone; the bars compare the plans' headline "
                  "figures.")


def analysis_payload(data: ReportData,
                     titled: Callable[[str, str], str] = lambda anchor, title: title
                     ) -> AnalysisView:
    """Chart data, sections and navigation entries for whichever analysis tables exist."""
    payload: dict[str, Any] = {}
    sections: list[str] = []
    nav: list[tuple[str, str]] = []
    currency = data.instance.money.currency
    marginal = (_marginal_table(data.marginal_values) if data.marginal_values is not None
                else None)

    def frontier(frame: pd.DataFrame) -> dict[str, Any] | None:
        return _frontier(frame, currency)

    def scenarios(frame: pd.DataFrame) -> dict[str, Any] | None:
        return _scenarios(frame, currency)

    def marginal_chart(frame: pd.DataFrame) -> dict[str, Any] | None:
        return None if marginal is None else _marginal(marginal, currency)

    specs = (
        ("frontier", data.frontier, frontier, "Budget frontier",
         "",  # _frontier_lead
         "Least weighted shortfall at each budget"),
        ("scenarios", data.scenarios, scenarios, "Scenarios side by side",
         e(SCENARIOS_LEAD),
         "Scenario comparison"),
        ("marginal", data.marginal_values, marginal_chart,
         "What one more step of each limit buys",
         "", "Measured value of one more step of each binding limit"),
    )
    for key, frame, reader, title, lead, chart_title in specs:
        if frame is None:
            continue
        view = reader(frame)
        caption = ""
        if key == "frontier":
            lead = e(_frontier_lead(view))
        elif key == "marginal":
            lead, caption = _marginal_words(frame, marginal, currency)
        elif key == "scenarios":
            lines = scenario_lines(frame, currency, dict(data.tables).get("scenario_offices"))
            if lines:
                lead += "<ul>" + "".join(f"<li>{e(line)}</li>" for line in lines) + "</ul>"
        body = ""
        if view is not None:
            payload[key] = view
            body += chart(key, chart_title)
            if caption:
                body += f'<p class="more analysis-note">{caption}</p>'

        elif key == "marginal" and marginal is not None:
            body += ('<p class="note">No limit was measured by a re-solve, so there is nothing '
                     "to chart: the table lists each with its estimate only, unranked.</p>")
        else:
            body += ('<p class="note">The columns of this table were not recognised for a '
                     "chart; it is shown as written.</p>")
        if key == "marginal":
            within = marginal_gap_words(frame, data.plan.weighted_shortfall
                                        if data.plan is not None else None)
            body += f'<p class="note">{e(within)}</p>' if within else ""
        body = _gap_note(frame) + body + _tables(frame, key, currency=currency)
        sections.append(section(key, title, lead, body))
        nav.append((key, title))
    tables = [(name, frame) for name, frame in data.tables if name not in SHEET_ONLY]
    if data.summary.replan is not None:
        # A re-plan page is about what the re-plan changed: its own tables come before the
        # long table of reasons (a stable sort keeps each group's order).
        tables.sort(key=lambda item: item[0] not in ("replan", "changes"))
    # The re-plan's own words go to its first section: the headline table, else the changes.
    replan_home = next((name for name, _ in tables if name in ("replan", "changes")), None)
    for name, frame in tables:
        title, lead = TABLE_SECTIONS[name]
        lead = e(lead)
        body = ""
        if name == replan_home:
            lead = _replan_lead(data) + lead
            body = _disruption_note(data)
        elif name == "changes" and data.summary.replan is not None:
            lead = e(f"From {data.summary.replan.from_period} on: ") + lead
        elif name == "scenario_actions":
            lead += e(actions_lead(frame))
        full = _tables(frame, name, limit=500, currency=currency)
        if name == "reasons":
            full = _reasons_rolled_up(frame, full, currency)
        sections.append(section(name, titled(name, title), lead, body + full))
        nav.append((name, title))
    return AnalysisView(payload, tuple(sections), tuple(nav))


def _reasons_rolled_up(frame: pd.DataFrame, full: str, currency: str | None) -> str:
    """The reasons section's body: short tables by office and by limit first, then the full
    table (one row per action and shortfall: some 300 on the demo, 2.5 of them in view in
    its box) folded away below them, as reasons.csv holds it."""
    offices, limits = reasons_by_office(frame), reasons_by_limit(frame)
    if offices is None:
        return full
    body = ("<h3>By office</h3>" + _wrapped(frame_table_html(
        offices, "reasons_by_office", currency=currency))
            + '<p class="more analysis-note">People hired at each office, detail runs into it '
              "(and the periods they last), reassignments to it, its shortfalls (one per skill "
              "and period short) with their FTE-periods, and how many of its reasons ask for a "
              "review.</p>")
    if limits is not None:
        body += ("<h3>Limits the shortfalls cite</h3>" + _wrapped(frame_table_html(
            limits, "reasons_by_limit", currency=currency))
                 + '<p class="more analysis-note">Each binding limit the shortfalls cite, all '
                   "its periods together: a shortfall held back by two limits counts under "
                   "both, so the rows add up to more than the total. A hire is paid in every "
                   "year from its start, so a later year's hiring budget can hold back an "
                   "earlier shortfall. How often a limit is cited is not what relaxing it "
                   "would buy: <code>rebalance marginal</code> measures that.</p>")
    return (body + f'<details class="all-reasons"><summary>All {len(frame):,} reasons, one '
            "row per action and shortfall (as in <code>reasons.csv</code>)</summary>"
            f"{full}</details>")


def _tables(frame: pd.DataFrame, name: str, limit: int = 200,
            currency: str | None = None) -> str:
    """An analysis table as the page shows it: long text wraps so the table fits the page
    (``analysis-table`` in report.css).  A scenario comparison's cost breakdown, which made
    that table twice the page's width, is a second table below the headline figures."""
    split = _cost_columns(frame) if name == "scenarios" else []
    if name == "scenarios":
        frame = status_in_words(frame)  # as the console's table says it
    if name == "scenarios" and "description" in frame.columns:
        frame = frame.drop(columns="description")  # said in the section's lead, in full
    if name == "marginal" and "shortfall_gap" in frame.columns:
        # Its fifteenth column had pushed the table past a 1400 px page; the gap note above
        # gives the shortfall stage's gap, and marginal_values.csv has the column.
        frame = frame.drop(columns="shortfall_gap")
    if name == "marginal" and "limit" in frame.columns:
        frame = _limits_in_words(frame)
    if not split:
        return _wrapped(frame_table_html(frame, name, limit=limit, currency=currency))
    label = find_column(frame, ("scenario", "name", "label"), ("scenario", "name"),
                        numeric=False) or str(frame.columns[0])
    head = [c for c in frame.columns if c not in split]
    return (_wrapped(frame_table_html(frame[head], name, limit=limit, currency=currency))
            + "<h3>Cost by kind and budget year</h3>"
            + _wrapped(frame_table_html(frame[[label, *split]], f"{name}_costs", limit=limit,
                                        currency=currency)))


def _limits_in_words(frame: pd.DataFrame) -> pd.DataFrame:
    """A marginal values table with one ``limit`` column in words where the CSV has the codes
    (``limit``, ``where``) and ``limit_in_words`` (or, written before it, the codes alone)."""
    words = limit_texts(frame)
    shown = frame.drop(columns=[c for c in ("limit", "where", "limit_in_words")
                                if c in frame.columns])
    shown.insert(min(list(frame.columns).index("limit"), len(shown.columns)), "limit", words)
    return shown


# Text cells longer than this may wrap between words (the table helper wraps only prose, over
# 48 characters); shorter ones, names and periods, stay whole.
WRAP_TEXT = 20
_PLAIN_CELL = re.compile(r"<td>([^<]*)</td>")


def _wrapped(table: str) -> str:
    """A table of :func:`frame_table_html` in the analysis tables' box, its middling text cells
    (a status in words, ``skill at office``) marked to wrap, so wide tables fit the page."""
    def mark(cell: re.Match[str]) -> str:
        text = cell.group(1)
        return (f'<td class="wrap">{text}</td>' if len(html.unescape(text)) > WRAP_TEXT
                else cell.group(0))

    return f'<div class="analysis-table">{_PLAIN_CELL.sub(mark, table)}</div>'


# Beyond this many columns a scenario comparison shows its cost breakdown separately.
WIDE_TABLE = 12


def _cost_columns(frame: pd.DataFrame) -> list[str]:
    """The breakdown columns (``cost_<kind>``, ``cost_<year>``) of a wide scenario table."""
    costs = [c for c in frame.columns if str(c).lower().startswith("cost_")]
    return costs if len(frame.columns) > WIDE_TABLE and len(costs) >= 2 else []


def _replan_lead(data: ReportData) -> str:
    """Which re-plan this is (summary.json's ``replan`` key), as the lead's first words."""
    replan = data.summary.replan
    if replan is None:
        return ""
    scenario = (f"with scenario <strong>{e(replan.scenario)}</strong> applied to the data first"
                if replan.scenario else "with no scenario applied (the instance's own data)")
    table = dict(data.tables).get("replan")
    moved = _measure(table, "work_split_changes") if table is not None else None
    # A re-plan with no change of detail, reassignment or hire may still split work afresh,
    # which moves the idle figures: said here, as the console says it.
    split = "" if not moved else (
        f"The work split changed for {int(moved):,} person-period"
        f"{'' if int(moved) == 1 else 's'} from {e(replan.from_period)} on (no disruption "
        "cost: moving work between a person's skills is not a change of detail, "
        "reassignment or hire). ")
    return (f"Re-planned from <strong>{e(replan.from_period)}</strong> on, {scenario}; before "
            f"{e(replan.from_period)} the old plan stands as it happened. {split}")


def _measure(frame: pd.DataFrame, measure: str, column: str = "new_plan") -> float | None:
    if "measure" not in frame.columns or column not in frame.columns:
        return None
    rows = frame.loc[frame["measure"].astype(str) == measure, column].tolist()
    return finite(rows[:1])[0] if rows else None


def _disruption_note(data: ReportData) -> str:
    """A re-plan's cost stage minimised cost plus the disruption cost of its changes, while
    the headline total cost (and replan.csv's) is new money only: say so beside the figures,
    with the three numbers where the tables give them."""
    if data.summary.replan is None:
        return ""
    stage = next((st for st in data.summary.stages if st.name in ("cost", "weighted")), None)
    tables = dict(data.tables)
    replan = tables.get("replan")
    changes = tables.get("changes")
    total = _measure(replan, "total_cost") if replan is not None else None
    disruption = _measure(replan, "disruption_cost") if replan is not None else None
    if disruption is None and changes is not None and "disruption_cost" in changes.columns:
        disruption = float(pd.to_numeric(changes["disruption_cost"], errors="coerce").sum())
    name = stage.name if stage is not None else "cost"
    currency = data.instance.money.currency
    where = ('the <a href="#run">How it was found</a> section\'s stage table (and the Plan '
             "quality card)")
    figures = ""
    if disruption is not None:
        figures = f" Disruption cost of this re-plan: {money_amount(disruption, currency)}."
        objective = stage.objective if stage is not None else None
        if (name == "cost" and objective is not None and total is not None
                and abs(objective - total - disruption) <= 0.5 + 1e-9 * abs(objective)):
            figures = (f" Here: cost stage objective {money_amount(objective, currency)} = "
                       f"total cost {money_amount(total, currency)} + disruption cost "
                       f"{money_amount(disruption, currency)}.")
    return (f'<p class="note">The {e(name)} stage\'s objective in {where} includes the '
            "disruption cost of the changes (the sum of changes.csv's "
            "<code>disruption_cost</code>), which the re-plan weighed to stay near the old "
            "plan; the total cost in the headline figures and in this table is new money "
            f"only, without it.{e(figures)}</p>")


# Titles and one-line explanations of the tables shown as they are (see inputs.TABLE_FILES).
TABLE_SECTIONS = {
    "reasons": ("Why each action", "For each hire, detail and reassignment, the pattern in the "
                "plan that explains it, and for each remaining gap the limits that stop it being "
                "covered."),
    "replan": ("Re-plan against the old plan", "Headline figures over the whole horizon: the "
               "old plan, scored on the current data, and the new one, whose decisions change "
               "from the re-plan period on."),
    "changes": ("What the re-plan changes", "Every action that differs from the old plan, "
                "with the disruption cost charged for changing it."),
    "scenario_actions": ("Actions that differ from the base", "Each hire, detail and "
                         "reassignment decision a scenario's plan changes against the base "
                         "plan, one row each (a detail sent elsewhere in the same period is "
                         "one rerouted row). Each scenario was solved from the base plan, and "
                         "a change that did not pay under the scenario was undone."),
}

