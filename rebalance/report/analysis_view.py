"""Report sections for analysis tables found beside a plan: budget frontier, scenario
comparison and marginal values (their charts read by :mod:`analysis_charts`), and the tables
shown as written (the reasons first rolled up by office and by limit, a re-plan's own words).

Each section appears only when its table is there; a table whose columns cannot be read for a
chart is still shown whole.
"""

from __future__ import annotations

import html
import re
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from rebalance.analysis.planned_ahead import AHEAD_COLUMN, GAP_MEASURES
from rebalance.numbers import money_amount
from rebalance.report.analysis_charts import (
    _frontier,
    _frontier_lead,
    _marginal,
    _marginal_table,
    _marginal_words,
    _scenarios,
    grid_texts,
    marginal_texts,
)
from rebalance.report.analysis_words import (
    SUMMARY_KEYS,
    actions_lead,
    find_column,
    finite,
    gap_caution,
    limit_texts,
    marginal_gap_words,
    scenario_lines,
    status_in_words,
    years_as_text,
)
from rebalance.report.htmlparts import chart, e, frame_table_html, section
from rebalance.report.inputs import SHEET_ONLY, ReportData
from rebalance.report.late_notice_words import GAP_ROWS_NOTE, late_notice_line
from rebalance.report.reason_words import reasons_by_limit, reasons_by_office

__all__ = ["AnalysisView", "analysis_payload"]


@dataclass(frozen=True)
class AnalysisView:
    payload: dict[str, Any] = field(default_factory=dict)
    sections: tuple[str, ...] = ()
    nav: tuple[tuple[str, str], ...] = ()


def _gap_note(frame: pd.DataFrame, key: str = "") -> str:
    """:func:`gap_caution` as a note of the page: its columns as the table below heads them
    ("shortfall gap"; a note had sent the reader to the CSV file for a column the table
    shows), but for the marginal table, which leaves that column out (see :func:`_tables`).
    The caution's own words hold nothing to escape."""

    def column(name: str) -> str:
        if name != "shortfall_gap":
            return f"the <code>{e(name)}</code> column"
        return ("<code>shortfall_gap</code> in marginal_values.csv" if key == "marginal"
                else "the shortfall gap column")

    caution = gap_caution(frame, column, "<code>--time-limit</code>")
    return f'<p class="note">{caution}</p>' if caution else ""


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
        body = _gap_note(frame, key) + body + _tables(frame, key, currency=currency)
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
        after = ""  # a note under the table
        if name == "replan":
            frame, after = _ahead_column(frame, data.instance.period_names[0])
        full = (_reasons_rolled_up(frame, currency) if name == "reasons"
                else _tables(frame, name, limit=_ROWS_SHOWN, currency=currency)) + after
        sections.append(section(name, titled(name, title), lead, body + full))
        nav.append((name, title))
    return AnalysisView(payload, tuple(sections), tuple(nav))


def _reasons_rolled_up(frame: pd.DataFrame, currency: str | None) -> str:
    """The reasons section's body: short tables by office and by limit first, then the full
    table (one row per action and shortfall: some 300 on the demo, 2.5 of them in view in
    its box) folded away below them, as reasons.csv holds it (:func:`_reasons_table`)."""
    full = _reasons_table(frame, currency)
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
                 + '<p class="more analysis-note">Each limit the shortfalls cite, all its '
                   "periods together: a cap in full, or a budget year with less left than the "
                   "hire or detail a shortfall needs would cost it (a hiring budget's reason "
                   "gives both figures), which may still have room for a cheaper one and so not "
                   "be among the limits at their cap. A shortfall held back by two limits counts "
                   "under "
                   "both, so the rows add up to more than the total. A hire is paid in every "
                   "year from its start, so a later year's hiring budget can hold back an "
                   "earlier shortfall. How often a limit is cited is not what relaxing it "
                   "would buy: <code>rebalance marginal</code> measures that.</p>")
    return (body + f'<details class="all-reasons"><summary>All {len(frame):,} reasons, one '
            "row per action and shortfall (as in <code>reasons.csv</code>)</summary>"
            f"{full}</details>")


# Rows a long analysis table shows on the page (the plan folder and plan.xlsx have them all).
_ROWS_SHOWN = 500
# Each action kind of reasons.csv as the note under its table counts it.
_KIND_WORDS = {"hire": "hires", "detail": "detail runs", "reassignment": "reassignments",
               "shortfall": "shortfalls"}


def _rows_by_kind(counts: dict[str, int], cap: int) -> dict[str, int]:
    """How many rows of each kind (``counts``, in the table's order) a table of at most
    ``cap`` rows shows: all when they fit; else each kind at least ``cap // (5 * kinds)``
    (all of a smaller kind), the rest of the cap in proportion to the rows left, largest
    remainders first (ties in the table's order)."""
    if sum(counts.values()) <= cap or not counts:
        return dict(counts)
    least = max(cap // (5 * len(counts)), 1 if cap >= len(counts) else 0)
    shown = {k: min(n, least) for k, n in counts.items()}
    room = cap - sum(shown.values())
    left = {k: counts[k] - shown[k] for k in counts}
    total = sum(left.values())  # more than room: the kinds did not fit
    for k in counts:
        shown[k] += room * left[k] // total
    # Whole rows: the one more each goes to the largest remainders (a kind's share is below
    # its rows left, so one more never passes them).
    spare = cap - sum(shown.values())
    for k in sorted(counts, key=lambda k: -(room * left[k] % total))[:spare]:
        shown[k] += 1
    return shown


def _reasons_table(frame: pd.DataFrame, currency: str | None) -> str:
    """The full reasons table as the page shows it: past :data:`_ROWS_SHOWN` rows, each
    action kind's first rows (:func:`_rows_by_kind`) in the table's order, so that a large
    plan's detail runs, reassignments and shortfalls are there too (its first 500 rows had
    all been hires on a plan of 17,824 reasons), and a note of how many of each."""
    if len(frame) <= _ROWS_SHOWN or "action" not in frame.columns:
        return _tables(frame, "reasons", limit=_ROWS_SHOWN, currency=currency)
    action = frame["action"].astype(str)
    counts = {str(k): int(n) for k, n in action.value_counts(sort=False).items()}
    counts = {k: counts[k] for k in dict.fromkeys(action)}  # the table's order
    shown = _rows_by_kind(counts, _ROWS_SHOWN)
    chosen = action.groupby(action, sort=False).cumcount() < action.map(shown)
    parts = [f"{shown[k]:,} of {n:,} {_KIND_WORDS.get(k, f'{k} rows')}"
             for k, n in counts.items()]
    listed = parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1]
    note = (f'<p class="more">Showing {listed} (each kind\'s first rows, in the table\'s '
            f"order); <code>reasons.csv</code> and <code>plan.xlsx</code> have all "
            f"{len(frame):,}.</p>")
    return _tables(frame[chosen.to_numpy()], "reasons", limit=_ROWS_SHOWN,
                   currency=currency) + note


def _tables(frame: pd.DataFrame, name: str, limit: int = 200,
            currency: str | None = None) -> str:
    """An analysis table as the page shows it: long text wraps so the table fits the page
    (``analysis-table`` in report.css).  A scenario comparison's cost breakdown, which made
    that table twice the page's width, is a second table below the headline figures."""
    split = _cost_columns(frame) if name == "scenarios" else []
    if name == "scenarios":
        frame = years_as_text(status_in_words(frame))  # as the console's table says it
    if name == "frontier":
        frame = grid_texts(frame)
    if name == "scenarios":
        # Said in the section's lead, in full (the summaries' keys in words).
        frame = frame.drop(columns=[c for c in ("description", *SUMMARY_KEYS)
                                    if c in frame.columns])
    if name == "marginal" and "shortfall_gap" in frame.columns:
        # Its fifteenth column had pushed the table past a 1400 px page; the gap note above
        # gives the shortfall stage's gap, and marginal_values.csv has the column.
        frame = frame.drop(columns="shortfall_gap")
    if name == "marginal" and "limit" in frame.columns:
        frame = _limits_in_words(frame)
    if name == "marginal":
        frame = marginal_texts(frame, currency)
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
    # Where the same data were planned from the start too (--planned-ahead): what reacting
    # late cost, as the console says it.
    late = late_notice_line(table, replan.from_period, data.instance.period_names[0],
                            data.instance.money.currency)
    ahead = "" if not late else (
        f"{e(late)} The plan made ahead is in the <code>planned_ahead/</code> folder beside "
        f"this page; the table's last column, planned ahead from "
        f"{e(data.instance.period_names[0])}, gives its figures. ")
    return (f"Re-planned from <strong>{e(replan.from_period)}</strong> on, {scenario}; before "
            f"{e(replan.from_period)} the old plan stands as it happened. {split}{ahead}")


def _ahead_column(frame: pd.DataFrame, first_period: str) -> tuple[pd.DataFrame, str]:
    """A re-plan's table as the page heads it, and the note under it: the plan made ahead's
    column named as a plan from ``first_period`` (headed "planned ahead" beside "difference",
    it had read as one more difference), and what the stage gaps' rows are.  As given, with
    no note, where the same data were not planned ahead."""
    if AHEAD_COLUMN not in frame.columns:
        return frame, ""
    shown = frame.rename(columns={AHEAD_COLUMN: f"planned ahead from {first_period}"})
    gaps = frame["measure"].astype(str).isin(GAP_MEASURES).any()
    return shown, (f'<p class="more analysis-note">{e(GAP_ROWS_NOTE)}</p>' if gaps else "")


def _measure(frame: pd.DataFrame, measure: str, column: str = "new_plan") -> float | None:
    if "measure" not in frame.columns or column not in frame.columns:
        return None
    rows = frame.loc[frame["measure"].astype(str) == measure, column].tolist()
    return finite(rows[:1])[0] if rows else None


def _disruption_note(data: ReportData) -> str:
    """A re-plan's cost stage minimised cost plus the disruption cost of its changes, while
    the headline new money (replan.csv's ``total_cost``) is without it: say so beside the
    figures, with the three numbers where the tables give them."""
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
                       f"new money {money_amount(total, currency)} + disruption cost "
                       f"{money_amount(disruption, currency)}.")
    return (f'<p class="note">The {e(name)} stage\'s objective in {where} includes the '
            "disruption cost of the changes (the sum of changes.csv's "
            "<code>disruption_cost</code>), which the re-plan weighed to stay near the old "
            "plan; the new money in the headline figures and in this table is without it."
            f"{e(figures)}</p>")


# Titles and one-line explanations of the tables shown as they are (see inputs.TABLE_FILES).
TABLE_SECTIONS = {
    "reasons": ("Why each action", "For each hire, detail and reassignment, the pattern in the "
                "plan that explains it, and for each remaining gap the limits that stop it being "
                "covered."),
    "replan": ("Re-plan against the old plan", "Headline figures over the whole horizon: the "
               "old plan, scored on the current data, and the new one, whose decisions change "
               "from the re-plan period on."),
    "changes": ("What the re-plan changes", "Every action that differs from the old plan, "
                "with the disruption cost charged for changing it and why, worked out from "
                "the data and both plans (an added action's reason is the new plan's own)."),
    "scenario_actions": ("Actions that differ from the base", "Each hire, detail and "
                         "reassignment decision a scenario's plan changes against the base "
                         "plan, one row each (a detail sent elsewhere in the same period is "
                         "one rerouted row), and why, worked out from the scenario's data and "
                         "both plans (an added action's reason is the scenario plan's own). "
                         "Each scenario was solved from the base plan, and a change that did "
                         "not pay under the scenario was undone."),
}
