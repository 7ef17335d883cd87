"""Readable console text for a plan result, an instance check and a verification."""

from __future__ import annotations

import math
import textwrap
from collections.abc import Sequence
from dataclasses import replace

import numpy as np
import pandas as pd

from rebalance.conflicts import bulleted, seats_cannot_hold
from rebalance.instance import Instance
from rebalance.numbers import (
    column_header,
    compared_row_texts,
    counted,
    fte_total_text,
    gap_text,
    has_decimals,
    is_money,
    model_size_text,
    money_amount,
    money_text,
    number_text,
    seconds_text,
    share_text,
    with_currency,
)
from rebalance.plan import BudgetLine, budget_lines
from rebalance.planning import (
    BUILD_STAGE,
    CAUTION,
    PlanResult,
    gap_warning,
    plan_run_rate,
    run_rate_note,
    run_rate_warning,
)
from rebalance.report.limits_view import (
    LIMITS_LEAD,
    LIMITS_TITLE,
    SHORT_YET_AWAY_LEAD,
    LimitLine,
    limits_at_cap,
)
from rebalance.report.words import (
    and_list,
    outcome_words,
    people_text,
    plain_status,
    readable,
)
from rebalance.solve import StageResult, Status
from rebalance.verify import Violation
from rebalance.verify_causes import (
    KNOCK_ONS_SHOWN,
    PROBLEMS_SHOWN,
    ViolationGroup,
    first_problems,
    group_problems,
)

__all__ = [
    "KNOCK_ONS_SHOWN",
    "MEASURE_COLUMN",
    "PROBLEMS_SHOWN",
    "budget_note",
    "cell_text",
    "column_decimals",
    "format_check",
    "format_frame",
    "format_outcome",
    "format_summary",
    "format_violations",
    "measure_names",
    "problem_lines",
    "room_left",
    "stage_value",
]

# What a pass covers and what it does not: summary.json's status, bounds, gaps and
# staying-put shortfall are the solver's report, checked only for agreeing with each other
# (a status of "optimal" beside a gap above the one asked had passed under "every rule and
# total checks out").
PASSED_WORDS = ("verification passed: every rule, the plan tables' figures and summary.json's "
                "totals recomputed from the instance and the plan tables; the solver's status, "
                "bounds, gaps and staying-put shortfall are its own report, checked only for "
                "agreeing with each other")


# Numbers are written by rebalance.numbers (one rule for every surface); what a table cell is
# (a flag, a missing value, a measure's row) is the console's and the page's concern, here.


def is_flag(value: object) -> bool:
    return isinstance(value, bool | np.bool_)


def is_missing(value: object) -> bool:
    """None, NaN or pandas' NA: a cell with no value."""
    return (value is None or value is pd.NA or value is pd.NaT
            or (isinstance(value, float | np.floating) and math.isnan(value)))


def _table(headers: Sequence[str], rows: Sequence[Sequence[object]]) -> list[str]:
    cells = [[str(h) for h in headers]] + [[str(c) for c in r] for r in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(headers))]

    def line(r: Sequence[str]) -> str:
        return "  ".join(c.rjust(w) if i else c.ljust(w)
                         for i, (c, w) in enumerate(zip(r, widths, strict=True)))

    return [line(cells[0]), "  ".join("-" * w for w in widths)] + [line(r) for r in cells[1:]]


def budget_note(instance: Instance, lines: Sequence[BudgetLine]) -> str:
    """New money against the caps, for a headline (console, page, workbook alike): "of
    314,000 allowed" where every cap is set, "no caps set" where none is, and otherwise the
    spending under caps against them, apart from the spending with none ("300,100 of 314,000
    allowed where capped, 201,600 where uncapped"): all spending "of" the set caps' sum
    ("501,700 of 314,000 allowed") had read as overspending.  A cap of 0 is a cap (nothing
    may be spent; it had read "no caps set"); a blank cap, or a year with no row in
    budget.csv, is none.  ``lines`` are the plan's :func:`rebalance.plan.budget_lines`."""
    allowed = capped_spent = uncapped_spent = 0.0
    capped = uncapped = False
    for line in lines:
        if line.cap is None:
            uncapped, uncapped_spent = True, uncapped_spent + line.spent
        else:
            capped, capped_spent = True, capped_spent + line.spent
            allowed += line.cap
    if not capped:
        return "no caps set"

    def money(value: float) -> str:
        # Beside a total that names its currency, so must the amounts here ("43,000 EUR (of
        # 70,000 allowed)" had left it to be guessed).
        return instance.money.amount(money_text(value))

    if not uncapped:
        return f"of {money(allowed)} allowed"
    return (f"{money(capped_spent)} of {money(allowed)} allowed where capped, "
            f"{money(uncapped_spent)} where uncapped")


def format_check(instance: Instance) -> str:
    periods = instance.periods
    span = periods[0].name if len(periods) == 1 else f"{periods[0].name} to {periods[-1].name}"
    lines = [
        f"Instance {instance.name}: " + ("valid input, but no plan can keep its seats (see the "
                                         "warning below)" if seats_cannot_hold(instance)
                                         else "valid"),
        f"  {counted(len(instance.offices), 'office')} in "
        f"{counted(len({o.location for o in instance.offices}), 'location')}, "
        f"{counted(len(instance.skills), 'skill')}, {len(instance.staff):,} staff, "
        f"{counted(len(periods), 'period')} ({span}), "
        f"{counted(len(instance.demand), 'demand row')} "
        f"({fte_total_text(sum(d.fte for d in instance.demand))} FTE-periods)",
    ]
    lines += [f"  warning: {w}" for w in instance.warnings]
    return "\n".join(lines)




def format_summary(result: PlanResult) -> str:
    lines = _outcome_lines(result)
    plan = result.plan
    money = result.instance.money
    if plan is not None:
        spending = budget_lines(result.instance, plan)
        demand = float(plan.coverage["demand_fte"].sum())
        lines += [
            "",
            f"  weighted shortfall   {fte_total_text(plan.weighted_shortfall)} FTE-periods "
            f"({fte_total_text(plan.shortfall_fte)} unweighted, "
            f"{share_text(plan.shortfall_fte, demand)} of {fte_total_text(demand)} demanded)"
            if demand else "  no demand",
            *_staying_put_lines(result),
            # "New money", as the page and the workbook name it: leaders had read "total
            # cost" as the whole staffing cost, when staff already employed are not in it.
            f"  new money            {money_amount(plan.total_cost, money.currency)} "
            f"({budget_note(result.instance, spending)})",
            f"  hires                {plan.hires_count()}",
            f"  detail periods       {len(plan.details)} "
            f"({people_text(plan.details['person'].nunique())})",
            f"  reassignments        {len(plan.reassignments)}",
            *_run_rate_lines(result),
            "",
        ]
        # One row a budget year: its hiring line, then its moves line (BUDGET_LINES' order).
        by_year: dict[str, list[str]] = {}
        for spent in spending:
            by_year.setdefault(spent.year, [spent.year]).extend(
                [money_text(spent.spent),
                 "no cap" if spent.cap is None else money_text(spent.cap)])
        rows = [tuple(cells) for cells in by_year.values()]
        lines += ["  " + x for x in _table(
            ("year", *(money.header(h) for h in ("hiring spend", "hiring cap", "moves spend",
                                                  "moves cap"))), rows)]
        short = (plan.coverage[plan.coverage["shortfall_fte"] > 1e-6]
                 .groupby("office")["shortfall_fte"].sum().sort_values(ascending=False))
        if len(short):
            lines += ["", "  shortfall by office (FTE-periods, unweighted): " + ", ".join(
                f"{office} {fte_total_text(value)}" for office, value in short.items())]
        lines += ["", *_limit_lines(result)]
        # Problems as verify lists them (format_violations), capped as it caps them: the
        # first 20 violations, one line each, had cut a long list at no problem's end.
        problems = group_problems(result.violations)
        lines += ["", "  independent verification: " + (
            "passed" if result.verified else f"FAILED ({counted(len(problems), 'problem')})")]
        listed = []
        for problem in problems:
            text, under = problem_lines(problem)
            listed += [f"    - {text}", *(f"        so {line}" for line in under)]
        lines += first_problems(listed, "; rebalance verify with --all lists every one")
        lines += ["", "  Caution: " + CAUTION]
    else:
        # The caution is about a plan; with none, what a reader needs is that nothing moved.
        lines += ["", "  No plan: nothing was written."]
    return "\n".join(lines)


def _staying_put_lines(result: PlanResult) -> list[str]:
    """What the plan buys: the weighted shortfall with nobody moved or hired (the work split
    at its best) beside the plan's; no line where it was not worked out."""
    staying, plan = result.solve.staying_put_shortfall, result.plan
    if staying is None or plan is None:
        return []
    removed = fte_total_text(max(staying - plan.weighted_shortfall, 0.0))
    return [f"  staying put          {fte_total_text(staying)} FTE-periods weighted with "
            "nobody moved or hired (the plan removes "
            f"{'none of it' if removed == fte_total_text(0.0) else removed})"]


def _run_rate_lines(result: PlanResult) -> list[str]:
    """The new positions' salaries a year after the horizon, as the page's card has them,
    against the last hiring cap, with a warning where they alone take more than it."""
    if result.plan is None:
        return []
    currency = result.instance.money.currency
    rate = plan_run_rate(result.instance, result.plan)
    if rate.positions == 0:
        return ["  yearly salaries      none committed after the horizon (no new positions)"]
    note = run_rate_note(rate, currency)
    lines = [f"  yearly salaries      {money_amount(rate.per_year, currency)} every year after "
             f"{rate.horizon_end} ({counted(rate.positions, 'new position')}; not in new "
             "money)" + (f", {note}" if note else "")]
    warning = run_rate_warning(rate, currency)
    return [*lines, f"  warning: {warning}"] if warning else lines


# A normal terminal's width, which no line of the limits block passes: the demo's seats,
# said in full, had made one line of about 200 characters.
LINE_CHARS = 100
# Most lines one kind of limit takes; beyond them it is counted, and the page and the
# workbook (which have room) list it all.
LIMIT_LINES = 3
LEFT_OUT = "... (the page and the workbook list them all)"


def _limit_lines(result: PlanResult) -> list[str]:
    """:data:`LIMITS_TITLE` and a line or a few per kind of limit at its cap, each within
    :data:`LINE_CHARS`."""
    if result.plan is None:
        return []
    found = limits_at_cap(result.instance, result.plan)
    if not found:
        return [f"  {LIMITS_TITLE}: none is at its cap"]
    width = max(len(line.words) for line in found.lines)
    lines = [f"  {LIMITS_TITLE}: {LIMITS_LEAD[0]}", f"  {LIMITS_LEAD[1]}:"]
    indent = " " * (4 + width + 2)

    def said(line: LimitLine, most: int) -> list[str]:
        texts = fitted_lines(line.text, line.total, LINE_CHARS - len(indent), most)
        return [f"    {line.words.ljust(width)}  {texts[0]}", *(indent + t for t in texts[1:])]

    for line in found.caps:
        lines += said(line, LIMIT_LINES)
    if found.away_while_short:  # names no cap: under words of its own
        lines.append(f"  {SHORT_YET_AWAY_LEAD[:1].upper()}{SHORT_YET_AWAY_LEAD[1:]}:")
    for line in found.away_while_short:
        # The offices short yet sending people out are one sentence, not "; "-separated
        # entries to count: the demo's four offices take a fourth line rather than be cut.
        lines += said(line, LIMIT_LINES + 1)
    return lines


def fitted_lines(text: str, total: str, chars: int, most: int = LIMIT_LINES) -> list[str]:
    """``text`` wrapped at spaces into lines of at most ``chars`` characters; where that takes
    more than ``most`` lines, ``total`` (what the text counts) and as many of its
    "; "-separated entries as still fit, then :data:`LEFT_OUT`.  A word longer than
    ``chars`` (a very long office name) keeps its own line whole."""
    def wrapped(words: str) -> list[str]:
        return textwrap.wrap(words, chars, break_long_words=False, break_on_hyphens=False)

    lines = wrapped(text)
    if len(lines) <= most:
        return lines
    entries = text.split("; ")
    for kept in range(len(entries) - 1, 0, -1):
        lines = wrapped(f"{total}: " + "; ".join(entries[:kept]) + f"; {LEFT_OUT}")
        if len(lines) <= most:
            return lines
    return wrapped(f"{total} {LEFT_OUT.removeprefix('... ')}")


def format_outcome(result: PlanResult, *, replan: bool = False) -> str:
    """How the solve ended (status, model, each stage and what it leaves open) and whether
    the plan passed verification: the head of :func:`format_summary`, for commands that
    print their own tables of the plan.  ``replan``: the result re-plans an old plan, so
    its cost stage also counted the disruption cost of the changes."""
    lines = _outcome_lines(result, replan=replan)
    if result.plan is not None:
        lines.append(f"  independent verification: {_verdict(result)}")
    return "\n".join(lines)


def _verdict(result: PlanResult) -> str:
    if result.verified:
        return "passed"
    return f"FAILED ({counted(len(group_problems(result.violations)), 'problem')})"


def _outcome_lines(result: PlanResult, *, replan: bool = False) -> list[str]:
    s = result.solve
    currency = result.instance.money.currency
    lines = [f"Plan for {result.instance.name}: {outcome_words(result.status, s.gap)}"]
    if [stage.name for stage in s.stages] == [BUILD_STAGE]:
        # Cut short while building: no model, so no model size and no stage to show.
        return [*lines, f"  {s.stages[0].solver_words}"]
    gap = s.gap
    lines.append(f"  solver {s.solver_version}; model "
                 f"{model_size_text(result.num_cols, result.num_integer, result.num_rows)}; "
                 f"build {seconds_text(result.build_seconds)}s, "
                 f"solve {seconds_text(s.solve_seconds)}s"
                 + (f", gap {gap_text(gap)}" if gap is not None else ""))
    for stage in s.stages:
        bound = "-" if stage.bound is None or not math.isfinite(stage.bound) else (
            stage_value(stage.name, stage.bound, currency))
        objective = "-" if stage.objective is None else stage_value(
            stage.name, stage.objective, currency)
        lines.append(f"  stage {stage.name}: {outcome_words(stage.status, stage.gap)}, "
                     f"objective {objective}, "
                     f"bound {bound}, {seconds_text(stage.seconds)}s"
                     + ("" if stage.status is Status.OPTIMAL else f" ({stage.solver_words})"))
        room = room_left(stage, currency, replan=replan)
        if room:
            lines.append(f"    not proven: {room}")
    if wide := gap_warning(result.status.value, gap):  # as summary.json and the page say it
        lines.append(f"  warning: {wide}")
    if s.conflicts:
        lines.append("  limits in conflict:")
        lines += [f"    {line}" for line in bulleted(s.conflicts)]
    return lines


# Stages whose objective is an amount of money.
MONEY_STAGES = ("cost", "weighted")
ROOM_WORDS = {
    "shortfall": "a plan may exist with up to {room} weighted FTE-periods less shortfall",
    "cost": "a plan with the same shortfall may cost up to {room} less",
    "weighted": "a plan may score up to {room} lower on cost plus shortfall cost",
}
# A re-plan's cost and weighted stages also priced the disruption of its changes, so what
# they leave open is on that sum, not on new money alone.
REPLAN_ROOM_WORDS = {
    **ROOM_WORDS,
    "cost": "a plan with the same shortfall may come up to {room} lower on new money plus "
            "disruption cost",
    "weighted": "a plan may score up to {room} lower on cost plus shortfall cost plus "
                "disruption cost",
}


def stage_value(stage: str, value: float, currency: str | None = None) -> str:
    """A stage's objective or bound in the stage's units: money (whole units, with the
    ``currency``) for the cost and weighted stages, FTE-periods (three decimals) for the
    shortfall stage."""
    if stage in MONEY_STAGES:
        return money_amount(value, currency)
    return number_text(value)


def room_left(stage: StageResult, currency: str | None = None, *,
              replan: bool = False) -> str | None:
    """What a stage stopped early leaves open, in the stage's own units (money in
    ``currency`` where one is given); ``replan``: the stage belongs to a re-plan, whose money
    stages counted disruption cost too."""
    if (stage.status is not Status.FEASIBLE_WITH_GAP or stage.gap is None
            or stage.objective is None or stage.bound is None
            or stage.name not in ROOM_WORDS):
        return None
    if stage.bound <= 0.0 < stage.objective:
        # Only the floor (nothing costs less than 0): "may cost up to all of it less" reads
        # as a finding about the plan, when the stage simply had no time to bound it.
        return (f"no bound worked out in the {seconds_text(stage.seconds)}s this stage had, "
                f"beyond 0 (gap {gap_text(stage.gap)})")
    words = REPLAN_ROOM_WORDS if replan else ROOM_WORDS
    amount = stage_value(stage.name, stage.objective - stage.bound, currency)
    return words[stage.name].format(room=amount) + f" (gap {gap_text(stage.gap)})"


# Tables of measures (replan.csv: one row per measure, columns old_plan, new_plan,
# difference) name what each row holds in this column: total_cost's row is money though no
# column's name says so.
MEASURE_COLUMN = "measure"


def measure_names(frame: pd.DataFrame) -> list[str] | None:
    """Each row's measure (``total_cost``, ``hires``) in a table of measures, else None."""
    if MEASURE_COLUMN not in frame.columns:
        return None
    return [str(v) for v in frame[MEASURE_COLUMN].tolist()]


def cell_text(value: float, column: str, measure: str | None = None,
              currency: str | None = None, *, decimals: bool | None = None) -> str:
    """A table's number by :func:`number_text`, named by its row's ``measure`` where the
    table is one of measures; a money row's cells carry the ``currency``, as its column's
    name cannot.  ``decimals``: the column has decimals somewhere (:func:`has_decimals`), so
    its whole numbers take them too; not in a table of measures, whose rows differ in kind."""
    if measure is None:
        return number_text(value, column, decimals=decimals)
    text = number_text(value, measure)
    return with_currency(text, currency) if is_money(measure) else text


def column_decimals(column: pd.Series) -> bool:
    """Whether a column's numbers take decimals in every row (:func:`has_decimals`)."""
    if not pd.api.types.is_numeric_dtype(column) or pd.api.types.is_bool_dtype(column):
        return False
    return has_decimals(float(v) for v in column.tolist() if not is_missing(v))


def format_frame(frame: pd.DataFrame, currency: str | None = None) -> str:
    """A result table for the console, as a reader wants it (:func:`number_text`, the
    decimals of the page and the workbook), yes/no for flags and "-" where there is no value (pandas
    printed ``NaN``, ``True`` and ``2465500.0``).  Column names stay those of the CSV files;
    with a ``currency``, money columns' names say it (``total_cost (EUR)``), and in a table of
    measures (:func:`measure_names`) money rows' cells do."""

    columns = [str(c) for c in frame.columns]
    decimals = {c: column_decimals(frame[c]) for c in columns}

    def cell(column: str, value: object, measure: str | None) -> str:
        if is_missing(value):
            return "-"
        if is_flag(value):
            return "yes" if value else "no"
        if isinstance(value, int | float | np.integer | np.floating):
            return cell_text(float(value), column, measure, currency,
                             decimals=decimals[column])
        if column == "status":
            return plain_status(value)  # the words of the page, not the CSV's code
        if column == MEASURE_COLUMN:
            return readable(str(value))  # as the page says it; the CSV keeps the code
        return str(value)

    def row(values: Sequence[object], measure: str | None) -> list[str]:
        texts = [cell(c, v, measure) for c, v in zip(columns, values, strict=True)]
        if measure is not None:
            # Old, new and difference side by side (compared_row_texts): 168.592 beside
            # 168.591 had read a difference of 0.000.
            for j, text in compared_row_texts(columns, values, measure).items():
                texts[j] = with_currency(text, currency) if is_money(measure) else text
        return texts

    named = measure_names(frame)
    measures: list[str | None] = [None] * len(frame) if named is None else [*named]
    rows = [row(values, m)
            for values, m in zip(frame.itertuples(index=False), measures, strict=True)]
    headers = [column_header(c, currency) for c in columns]
    return "\n".join(_table(headers, rows))


def format_violations(violations: Sequence[Violation]) -> str:
    """The head line, then a line a problem (:func:`~rebalance.verify_causes.group_problems`):
    a coverage.csv row only out of date because of an earlier problem is shown under the first
    it follows from, one line a row (a moved work row had read as nine problems), and the same
    seats excess at an office over consecutive periods is one line (one extra hire had read as
    seven)."""
    if not violations:
        return PASSED_WORDS
    problems = group_problems(violations)
    knock_ons = sum(len(group) for p in problems for group in p.under)
    head = f"verification failed: {counted(len(problems), 'problem')}"
    if knock_ons:
        head += f"; {_knock_on_words(problems, knock_ons)}"
    lines = [head]
    for problem in problems:
        text, under = problem_lines(problem)
        lines += [f"  - {text}", *(f"      so {line}" for line in under)]
    return "\n".join(lines)


def _knock_on_words(problems: Sequence[ViolationGroup], knock_ons: int) -> str:
    """How many coverage figures follow from the problems, and from how many: "1 figure ...
    differ because of them" had read where one figure followed from one of several."""
    problem_of = {v: ix for ix, p in enumerate(problems)
                  for v in (*p.run, *(v for group in p.under for v in group))}
    causes = {ix for ix, p in enumerate(problems) if p.under} | {
        problem_of[cause] for p in problems for group in p.under for v in group
        for cause in v.also_follows if cause in problem_of}
    rows = sum(len(p.under) for p in problems)
    one = knock_ons == 1
    if len(problems) == 1:
        because, under = "it", "it"
    else:
        because = ("one of them" if len(causes) == 1 else
                   "them" if len(causes) == len(problems) else "some of them")
        under = "it" if len(causes) == 1 else f"the first problem {'it' if one else 'each'} " \
            "follows from"
    return (f"{counted(knock_ons, 'figure')} in {counted(rows, 'coverage.csv row')} "
            f"{'differs' if one else 'differ'} because of {because} and "
            f"{'is' if one else 'are'} shown under {under}")


# Other problems a coverage row follows from, named on its line before the rest are counted.
ALSO_NAMED = 2


def problem_lines(problem: ViolationGroup) -> tuple[str, list[str]]:
    """A problem's own line and one line for each coverage.csv row that follows from it (only
    a coverage figure ``follows`` another), in the console's words; a page's list can use the
    same.  A row that also follows from other problems names them (by person, else by plan
    row): it is listed under the first only."""
    under = []
    for first, *rest in problem.under:
        also = [other.figure_column or other.rule for other in rest]
        tail = f", and {and_list(also)} with it" if also else ""
        others = _cause_names(first, *rest)
        if others:
            more = len(others) - ALSO_NAMED
            named = others[:ALSO_NAMED] + ([f"{more} more"] if more > 1 else others[ALSO_NAMED:])
            tail += f" (it also follows from {and_list(named)})"
        under.append(f"{first.file}: {first.where}: {first.message}{tail}")
    return _run_text(*problem.run), under


def _cause_names(*figures: Violation) -> list[str]:
    """The other causes of a coverage row's figures, each once and not the first's: a
    person's name where the cause is about one, else its plan file and row."""

    def name(cause: Violation) -> str:
        if cause.person is not None:
            return cause.person
        if cause.table:
            return f"{cause.table}.csv" + ("" if cause.line is None else f":{cause.line}")
        return cause.where

    first = {name(v.follows) for v in figures if v.follows is not None}
    names = dict.fromkeys(name(cause) for v in figures for cause in v.also_follows)
    return [n for n in names if n not in first]


def _run_text(first: Violation, *rest: Violation) -> str:
    """A violation, or a run of it over consecutive periods ("B in 2027-Q2 to 2027-Q4 (3
    periods): 7 seats used; 6 exist"): its ``where`` ends with its first period, and the last
    is named by ``period``."""
    if rest:
        last = rest[-1].period or rest[-1].where
        first = replace(first, where=f"{first.where} to {last} ({len(rest) + 1} periods)")
    return str(first)
