"""Small HTML building blocks shared by the report's pages: escaping, sortable tables (numbers
written by :mod:`rebalance.numbers`), chart placeholders and sections."""

from __future__ import annotations

import html
import math
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any, Protocol

import pandas as pd

from rebalance.numbers import (
    compared_row_texts,
    dust_free,
    gap_text,
    has_decimals,
    is_money,
    money_header,
    number_text,
    seconds_text,
    with_currency,
)
from rebalance.report.console import (
    MEASURE_COLUMN,
    PROBLEMS_SHOWN,
    cell_text,
    column_decimals,
    is_flag,
    is_missing,
    measure_names,
    room_left,
    stage_value,
)
from rebalance.report.scenario_notes import figures_note
from rebalance.report.words import optimal_words, outcome_words, plain_status, readable
from rebalance.solve import StageResult, Status

if TYPE_CHECKING:
    from rebalance.report.inputs import Note, Pointer, ProblemText, ReportData, ScenarioSummary

__all__ = ["PROBLEMS_TITLE", "RUN_ANCHOR", "RUN_TITLE", "card", "chart", "e", "frame_table_html",
           "note_html", "problem_list", "run_details", "scenario_box", "section", "stage_cell",
           "stage_words", "table_html"]

# The last section, its anchor and heading, and the heading of a failed verification's list
# in it: the console calls them problems, and the page had said "Violations".
RUN_ANCHOR, RUN_TITLE = "run", "How it was found"
PROBLEMS_TITLE = "Problems"
# What the page puts where a note at its top (rebalance.report.inputs.Note) points a reader
# to the problems: its own list, linked ("the run details" had named no section of the page;
# the workbook, which lists none, keeps inputs.VERIFY_POINTERS' words).
_RUN_LINK = f'<a href="#{RUN_ANCHOR}">{RUN_TITLE}</a>'
NOTE_LINKS: dict[Pointer, str] = {
    "verify_lists": f"the list of {PROBLEMS_TITLE} in {_RUN_LINK} says why",
    "verify_listed": f"listed under {PROBLEMS_TITLE} in {_RUN_LINK}",
}
# Under the scenario box: whose data the page's figures are.
SCENARIO_FIGURES = figures_note("on this page")


def e(value: object) -> str:
    return html.escape(str(value), quote=True)


def note_html(note: Note) -> str:
    """A note at the top of the page, escaped, its pointer to the problems a link to them."""
    link = "" if note.pointer is None else NOTE_LINKS[note.pointer]
    return f'<p class="note">{e(note.text)}{link}{e(note.after)}</p>'


class _Stage(Protocol):
    @property
    def name(self) -> str: ...
    @property
    def status(self) -> str: ...
    @property
    def objective(self) -> float | None: ...
    @property
    def bound(self) -> float | None: ...
    @property
    def gap(self) -> float | None: ...
    @property
    def seconds(self) -> float | None: ...
    @property
    def solver_says(self) -> str: ...


def stage_words(stage: _Stage, currency: str | None = None, *, replan: bool = False) -> str:
    """What one solve stage's outcome and gap mean, in the stage's own units (money in
    ``currency`` where one is given), worded as the console words them
    (:func:`rebalance.report.console.room_left`; ``replan``: a re-plan's stage)."""
    try:
        status = Status(stage.status)
    except ValueError:
        return plain_status(stage.status)
    if status is Status.OPTIMAL:
        return optimal_words(stage.gap)
    if status is Status.FEASIBLE_WITH_GAP:
        room = room_left(StageResult(stage.name, status, stage.objective, stage.bound,
                                      stage.gap, stage.seconds or 0.0, stage.solver_says),
                         currency, replan=replan)
        if room is None:
            room = "gap unknown" if stage.gap is None else f"gap {gap_text(stage.gap)}"
        return f"not proven optimal: {room}"
    return plain_status(stage.status)


def stage_cell(stage: _Stage, value: float | None,
               currency: str | None = None) -> tuple[float, str]:
    """A stage's objective or bound as a table cell (value to sort by, text) in its own units:
    money for the cost stage (with its currency, if any), and for the weighted stage's cost
    plus shortfall cost."""
    if value is None:
        return -1.0, "-"
    return value, stage_value(stage.name, value, currency)


def table_html(headers: Sequence[str], rows: Sequence[Sequence[Any]], *, name: str,
               numeric: Sequence[bool] | None = None, caption: str = "",
               limit: int | None = None, foot: Sequence[Sequence[Any]] = ()) -> str:
    """A sortable table; numbers carry their raw value in ``data-v`` for sorting.  ``foot``
    rows (totals) sit below the body and stay there when it is sorted."""
    numeric = numeric or [False] * len(headers)
    head = "".join(f'<th scope="col" class="{"num" if n else ""}" tabindex="0">{e(h)}</th>'
                   for h, n in zip(headers, numeric, strict=True))
    shown = rows if limit is None else rows[:limit]
    # Plain floats by the number rule, a column with decimals anywhere with them in every row.
    decimals = [n and has_decimals(r[i] for r in [*shown, *foot] if isinstance(r[i], float))
                for i, n in enumerate(numeric)]
    body = [_row(r, numeric, decimals) for r in shown]
    more = ""
    if limit is not None and len(rows) > limit:
        more = (f'<p class="more">Showing the first {limit:,} of {len(rows):,} rows; the full '
                "table is in the plan folder and in plan.xlsx.</p>")
    cap = f"<caption>{e(caption)}</caption>" if caption else ""
    tfoot = f"<tfoot>{''.join(_row(r, numeric, decimals) for r in foot)}</tfoot>" if foot else ""
    return (f'<div class="table-wrap"><table class="sortable" data-table="{e(name)}">{cap}'
            f"<thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody>{tfoot}</table>"
            f"</div>{more}")


def _row(r: Sequence[Any], numeric: Sequence[bool], decimals: Sequence[bool]) -> str:
    cells = []
    for value, is_num, dec in zip(r, numeric, decimals, strict=True):
        if isinstance(value, tuple):  # (sort value, shown text)
            sort, text = value
            cells.append(f'<td class="num" data-v="{e(sort)}">{e(text)}</td>')
        elif is_num and isinstance(value, int | float) and not isinstance(value, bool):
            text = number_text(value, decimals=dec) if isinstance(value, float) else f"{value:,}"
            cells.append(f'<td class="num" data-v="{value}">{e(text)}</td>')
        else:
            text = "" if value is None else str(value)
            # Long prose (a reason, a method) wraps; short cells stay on one line.
            wrap = ' class="long"' if len(text) > 48 else ""
            cells.append(f"<td{wrap}>{e(text)}</td>")
    return "<tr>" + "".join(cells) + "</tr>"


def _cell(value: Any, column: str, is_num: bool, measure: str | None = None,
          currency: str | None = None, decimals: bool = False) -> Any:
    """One cell of an analysis table as the page shows it (see :func:`frame_table_html`)."""
    if is_missing(value):
        return ""  # blank, not the console's "-": the sorting script reads blank as no number
    if is_flag(value):
        return "yes" if value else "no"
    if is_num and isinstance(value, int | float) and math.isfinite(float(value)):
        v = dust_free(value)
        return (v, cell_text(v, column, measure, currency, decimals=decimals))
    if column.lower() == "status" and isinstance(value, str):
        return plain_status(value)
    return value


def frame_table_html(frame: pd.DataFrame, name: str, limit: int = 200,
                     currency: str | None = None) -> str:
    """Any analysis table as written, for people: headers in words (money columns' with the
    ``currency``, if any), numbers right-aligned and sortable and written by
    :func:`rebalance.numbers.number_text` (three decimals; in a table of measures by each
    row's measure, money rows with the ``currency``), true/false as yes/no and solver statuses
    in plain words."""
    columns = [str(c) for c in frame.columns]
    numeric = [pd.api.types.is_numeric_dtype(frame[c]) and not pd.api.types.is_bool_dtype(
        frame[c]) for c in frame.columns]
    named = measure_names(frame)
    measures: list[str | None] = [None] * len(frame) if named is None else [*named]
    decimals = [column_decimals(frame[c]) for c in frame.columns]

    def row(values: tuple[Any, ...], measure: str | None) -> list[Any]:
        cells = [_cell(v, c, n, measure, currency, d)
                 for v, c, n, d in zip(values, columns, numeric, decimals, strict=True)]
        if measure is not None:
            # The measure's name in words, as the column headers are (its code in the CSV).
            cells[columns.index(MEASURE_COLUMN)] = readable(measure)
            # Old, new and difference side by side, as the console sets them
            # (compared_row_texts): 168.592 beside 168.591 had read a difference of 0.000.
            for j, text in compared_row_texts(columns, values, measure).items():
                cells[j] = (dust_free(values[j]),
                            with_currency(text, currency) if is_money(measure) else text)
        return cells

    rows = [row(values, m) for values, m in zip(frame.itertuples(index=False, name=None),
                                                measures, strict=True)]
    headers = [money_header(readable(c), currency) if is_money(c) else readable(c)
               for c in columns]
    return table_html(headers, rows, name=name, numeric=numeric, limit=limit)


def card(label: str, value: str, note: str, tone: str = "", *, more: str = "",
         wide: bool = False) -> str:
    """A headline figure; ``more`` is HTML under the note, ``wide`` spans two columns."""
    classes = " ".join(c for c in ("card", tone, "wide" if wide else "") if c)
    return (f'<div class="{classes}"><div class="card-label">{e(label)}</div>'
            f'<div class="card-value">{e(value)}</div><div class="card-note">{e(note)}</div>'
            f"{more}</div>")


def chart(kind: str, title: str, note: str = "") -> str:
    return (f'<figure class="chart-box"><div class="chart" data-chart="{kind}" '
            f'data-drawn="no" role="img" aria-label="{e(title)}"></div>'
            + (f"<figcaption>{e(note)}</figcaption>" if note else "") + "</figure>")


def section(anchor: str, title: str, lead: str, body: str) -> str:
    return (f'<section id="{anchor}"><h2>{e(title)}</h2><p class="lead">{lead}</p>'
            f"{body}</section>")


def scenario_box(scenario: ScenarioSummary | None) -> str:
    """What the scenario a plan was made under assumed, near the top of its page: its name
    and description, and its demand and budget changes in words; "" for no scenario."""
    if scenario is None:
        return ""

    def items(title: str, lines: Sequence[str]) -> str:
        said = "".join(f"<li>{e(line)}</li>" for line in lines) or \
            "<li>as in the instance's data</li>"
        return f"<div><h3>{e(title)}</h3><ul>{said}</ul></div>"

    about = f" {e(scenario.description)}" if scenario.description else ""
    return (f'<aside class="scenario-box" role="note" aria-label="Scenario">'
            f"<p><strong>Scenario {e(scenario.name)}.</strong>{about}</p>"
            f'<div class="scenario-changes">{items("Demand", scenario.demand)}'
            f"{items('Budgets', scenario.budget)}</div>"
            f'<p class="scenario-figures">{e(SCENARIO_FIGURES)}</p></aside>')


def problem_list(problems: Sequence[ProblemText], flat: Sequence[str] = ()) -> str:
    """A failed verification's problems as a list, each with the coverage.csv rows only out of
    date because of it in a list under it, capped as the console caps them
    (:data:`~rebalance.report.console.PROBLEMS_SHOWN` problems, the rest counted); ``flat``
    lines, one a problem, where no grouped ``problems`` are given; "" for none."""
    listed = [(p.text, p.under) for p in problems] or [(line, ()) for line in flat]
    if not listed:
        return ""

    def item(text: str, under: Sequence[str]) -> str:
        knock_ons = "".join(f"<li>so {e(line)}</li>" for line in under)
        return f"<li>{e(text)}" + (f'<ul class="knock-ons">{knock_ons}</ul>' if under else
                                   "") + "</li>"

    items = "".join(item(text, under) for text, under in listed[:PROBLEMS_SHOWN])
    more = (f'<p class="more">Showing the first {PROBLEMS_SHOWN} of {len(listed):,} problems; '
            "rebalance verify with --all lists every one.</p>"
            if len(listed) > PROBLEMS_SHOWN else "")
    lead = ("<p>Each problem once, with the coverage.csv rows only out of date because of it "
            "under it.</p>" if any(under for _, under in listed) else "")
    return f'<h3>{PROBLEMS_TITLE}</h3>{lead}<ul class="problems">{items}</ul>{more}'

# Only what verify recomputes; the solver's own figures are named apart (a page had said
# "every rule and total recomputed" beside an edited status and staying-put figure).
VERIFIED_WORDS = ("passed: every rule, the plan tables' figures and summary.json's totals "
                  "recomputed from the instance and the plan tables; the outcome, bounds, gaps "
                  "and staying-put shortfall are the solver's own report, checked only for "
                  "agreeing with each other")


def run_details(data: ReportData) -> str:
    """The body of the page's :data:`RUN_TITLE` section: the run's facts, its stages, a
    failed verification's problems, conflicts and input warnings."""
    run = data.summary
    currency = data.instance.money.currency
    replan = run.replan is not None

    def secs(value: float | None) -> str:
        return "-" if value is None else seconds_text(value)

    facts = [
        ("instance", data.instance.name),  # the folder's name, which a title stands in for
        ("solver", run.solver_version or run.solver or "-"),
        ("objective", run.objective_mode or "-"),
        ("outcome", outcome_words(run.status, run.gap)),
        ("largest stage gap at stop", "-" if run.gap is None else gap_text(run.gap)),
        ("model", f"{run.model_columns or 0:,} columns ({run.model_integer_columns or 0:,} "
                  f"whole-number) and {run.model_rows or 0:,} rows"),
        ("build / solve seconds", f"{secs(run.build_seconds)} / {secs(run.solve_seconds)}"),
        ("independent verification", {True: VERIFIED_WORDS, False: "FAILED",
                                      None: "unknown"}[run.verified]),
    ]
    out = '<dl class="facts">' + "".join(f"<dt>{e(k)}</dt><dd>{e(v)}</dd>"
                                          for k, v in facts) + "</dl>"
    if run.stages:
        out += table_html(["stage", "outcome, and what the gap leaves open", "objective",
                           "bound", "gap", "seconds", "solver says"],
                          [[s.name, stage_words(s, currency, replan=replan),
                            stage_cell(s, s.objective, currency),
                            stage_cell(s, s.bound, currency),
                            (s.gap if s.gap is not None else -1,
                             "-" if s.gap is None else gap_text(s.gap)),
                            (s.seconds if s.seconds is not None else -1,
                             secs(s.seconds)), s.solver_says] for s in run.stages],
                          name="stages", numeric=[False, False, True, True, True, True, False])
    out += problem_list(data.problems, run.violations)  # each problem's knock-ons under it
    for title, items in (("Limits in conflict", run.conflicts), ("Input warnings", run.warnings)):
        if items:
            out += f"<h3>{title}</h3><ul>" + "".join(f"<li>{e(i)}</li>" for i in items) + \
                "</ul>"
    return out
