"""Reading analysis tables by role, and what they say in plain text on every surface: the
caution about unproven solves, what each scenario of a comparison changed and each limit in
words (the reasons table rolled up: :mod:`reason_words`).

The console (``rebalance.cli_analysis``) prints these; the page (:mod:`analysis_view`) marks
them up.  Columns are found by role, as the page's sections find them.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from typing import Any

import pandas as pd

from rebalance.analysis.limits import BUDGET_LIMITS, LIMIT_NAMES, limit_words
from rebalance.numbers import fte_total_text, gap_text, money_amount, money_text, years_text
from rebalance.report.like_for_like_words import not_like_for_like
from rebalance.report.words import and_list, outcome_words

__all__ = [
    "FROM_BASE_WORDS",
    "SUMMARY_KEYS",
    "actions_lead",
    "cell_words",
    "column_words",
    "find_column",
    "finite",
    "gap_caution",
    "is_numeric",
    "limit_texts",
    "marginal_gap_words",
    "scenario_lines",
    "shows",
    "status_in_words",
    "truthy",
    "years_as_text",
]


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


# How a comparison's scenarios were solved, so actions_differing reads right (console and
# workbook).
FROM_BASE_WORDS = ("Each scenario was solved from the base plan, and a change that did not pay "
                   "under the scenario was undone: actions_differing counts the changes that "
                   "did pay.")


def column_words(name: str) -> str:
    """A table's column, as plain text names it."""
    return f"the {name} column"


def gap_caution(frame: pd.DataFrame, column: Callable[[str], str] = column_words,
                option: str = "--time-limit") -> str:
    """A warning where the solves behind a comparison stopped short of proof ("" where they
    did not): a difference smaller than their gaps may come from where each search stopped,
    not from what was compared (a practitioner's reading had a surge scenario cost less than
    the base).  Shortfall is held to its own stage's gap, which is far smaller than the
    largest (mostly the cost stage's): 5.59% of 165.8 had told a planner to dismiss a real
    gain of 2.8.  Plain text for the console and workbook; the page names the columns
    (``column``, given ``gap`` or ``shortfall_gap``) and the ``option`` marked up."""
    largest = _largest(frame, "gap")
    if largest is None or largest <= 1e-4:
        return ""
    shortfall = _largest(frame, "shortfall_gap")
    if shortfall is None:
        within = (f"within gaps of up to {gap_text(largest)} ({column('gap')}). A difference "
                  "between rows smaller than that share of a figure")
    else:
        within = (f"within gaps of up to {gap_text(shortfall)} on shortfall "
                  f"({column('shortfall_gap')}) and {gap_text(largest)} on cost "
                  f"({column('gap')}). A difference between rows smaller than that share of "
                  "its figure")
    # "Proven only within": true of a row the status calls optimal (within the gap asked)
    # as of one stopped by the time limit; "stopped before proving" had contradicted the
    # first (a sweep).
    return (f"These plans are proven best only {within} may come from "
            "where each search stopped rather than from what was changed: give the solves "
            f"more time ({option}) before reading it as real.")


# How many offices a scenario's line names where demand or shortfall moved, largest first.
OFFICES_SAID = 3
# A difference no larger than this share of its figure is not marked as within the gaps:
# below it the solves were proven (gap_caution says nothing either).
GAP_SAID = 1e-4
WITHIN_GAPS = "(within the solves' gaps)"


def _signed(value: float, text: str) -> str:
    """``text`` (``value`` written) with its sign; by the figure shown, float dust (3.6e-15
    more demand) is 0.0, not +0.0 or -0.0."""
    if not shows(text):
        return text.removeprefix("-")
    return ("+" if value > 0 and not text.startswith("-") else "") + text


def shows(text: str) -> bool:
    """Whether a written figure is other than zero."""
    return any(digit in text for digit in "123456789")


def _number(row: Any, name: str) -> float | None:
    """``row``'s finite number in column ``name``; None where it is missing or not one."""
    return finite([getattr(row, name, None)])[0]


def _within(difference: float, gap_column: str, row: Any, base: Any,
            *figures: float) -> bool:
    """Whether ``difference`` is within the larger gap of the two solves (``gap_column``)
    times the larger of the figures compared: where each search stopped may account for it."""
    gaps = [g for g in (_number(row, gap_column), _number(base, gap_column)) if g is not None]
    if not gaps or max(gaps) <= GAP_SAID:
        return False
    return abs(difference) <= max(gaps) * max(abs(f) for f in figures)


def _office_changes(offices: pd.DataFrame | None, name: str, column: str) -> list[
        tuple[str, float]]:
    """Each office's ``column`` in scenario ``name`` less the base's (``scenario_offices.csv``),
    largest change first, offices whose change shows as 0.0 left out."""
    if offices is None or not {"scenario", "office", column} <= set(offices.columns):
        return []
    scenario = offices["scenario"].astype(str)
    values = pd.to_numeric(offices[column], errors="coerce")
    mine = values[scenario == name].groupby(offices["office"].astype(str)).sum(min_count=1)
    base = values[scenario == "base"].groupby(offices["office"].astype(str)).sum(min_count=1)
    if mine.isna().all() or base.empty:
        return []
    changes = [(str(o), float(mine.get(o, 0.0)) - float(base.get(o, 0.0)))
               for o in dict.fromkeys([*mine.index, *base.index])]
    changes = [(o, c) for o, c in changes if math.isfinite(c) and shows(fte_total_text(c))]
    return sorted(changes, key=lambda item: -abs(item[1]))


def _office_list(changes: list[tuple[str, float]]) -> str:
    said = ", ".join(f"{o} {_signed(c, fte_total_text(c))}" for o, c in changes[:OFFICES_SAID])
    more = len(changes) - OFFICES_SAID
    return said + (f" and {more} more office{'s' if more > 1 else ''}" if more > 0 else "")


def _covered_words(more: float, short: float) -> str:
    """How much of ``more`` demand the plan covers, given ``short`` more shortfall."""
    if not shows(fte_total_text(more)) or more < 0:
        return ""
    if short > more:
        return (f", none of it covered (shortfall rises by {fte_total_text(short)}, more "
                "than the demand added)")
    if short < 0 or not shows(fte_total_text(short)):
        return ", all of it covered"
    return (f", of it {fte_total_text(more - short)} covered and {fte_total_text(short)} "
            "left short")


def _years_text(value: Any) -> str:
    """The years a budget change named (`` 2027, 2028``, with a space before), as written:
    read back from the CSV file a single year 2027 is the number 2027.0."""
    text = years_text(value)
    return f" {text.replace('; ', ', ')}" if text else ""


def years_as_text(frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` with its ``*_budget_years`` columns (``scenarios.csv``) as text: read back
    from the CSV file a single year is a number, which the page's table had written
    "2,027"."""
    columns = [c for c in frame.columns if str(c).endswith("_budget_years")]
    if not columns:
        return frame
    out = frame.copy()
    for column in columns:
        out[column] = [years_text(v) for v in out[column].tolist()]
    return out


def _budget_words(row: Any, currency: str | None) -> str | None:
    """The budget changes the scenario made and the money spent under them, or "budgets
    unchanged"; None where the table has no such columns (written before them)."""
    said = []
    known = False
    for cap in ("hiring", "moves"):
        change = _number(row, f"{cap}_budget_change")
        if change is None:
            continue
        known = True
        if not shows(money_text(change)):
            continue
        where = _years_text(getattr(row, f"{cap}_budget_years", None))
        text = f"{cap} budget{where} {_signed(change, money_amount(change, currency))}"
        spent = _number(row, f"{cap}_spent_change")
        if spent is not None:
            # Not "of it": the plan may spend more than was added (the base left cap unused).
            text += (f", {money_amount(spent, currency)} more spent under it than in the base"
                     if spent > 0 and shows(money_text(spent)) else
                     ", none of it spent beyond the base's spending")
        if change > 0:
            # A practitioner's reading: the storm's added hiring money bought a hire at an
            # office the storm never touched.
            text += (f" (a budget pays for {'hires' if cap == 'hiring' else 'moves'} anywhere "
                     "in its year, not only the surge's)")
        said.append(text)
    if not known:
        return None
    return "; ".join(said) if said else "budgets unchanged"


def _keys(row: Any, name: str) -> list[list[str]]:
    """The ``;``-joined, ``|``-split keys of ``row``'s column ``name`` (none where it is
    missing or blank: the base's row, or a table written before it)."""
    return [key.split("|") for key in cell_words(getattr(row, name, None)).split(";") if key]


def _span(periods: str, single: str = "in ") -> str:
    """``in 2027-Q4`` or ``2027-Q4 to 2028-Q4`` (the first and last of ``,``-joined periods)."""
    said = [p for p in periods.split(",") if p]
    if not said:
        return ""
    return f"{single}{said[0]}" if len(said) == 1 else f"{said[0]} to {said[-1]}"


def _limit_phrase(kind: str, wheres: str, periods: str, previous: str) -> str:
    """One limit of ``held_back_by`` in words: ``seats at port-ilse-harbour (full 2027-Q4 to
    2028-Q4)``, ``hiring slots there in 2027-Q4``, ``the hiring budgets of 2027 and 2028``."""
    name = LIMIT_NAMES.get(kind, kind.replace("_", " "))
    places = [w for w in wheres.split(",") if w]
    if kind in BUDGET_LIMITS:
        return f"the {name}{'s' if len(places) > 1 else ''} of {and_list(places or ['its year'])}"
    where = ", ".join(places)
    of = "of" if kind in ("vacancies", "time_to_hire") else "at"
    at = "there" if where == previous else f"{of} {where}"
    span = _span(periods)
    if kind == "seats":
        return f"seats {at}" + (f" (full {span})" if span else "")
    return f"{name} {at}" + (f" {span}" if span else "")


def _cited_words(weight: float, total: float | None, net: float | None = None) -> str:
    """How much of the new shortfall cites a limit: "all the new shortfall there", or
    "12.5 of the 20.6 FTE-periods of new shortfall there" (without the total, written before
    that field: "12.5 FTE-periods of new shortfall there").  Where the total is not the
    ``net`` shortfall the line has just said, it says how it is counted: a planner had asked
    why 21.1 FTE-periods of new shortfall sat beside 19.9 left short."""
    text = fte_total_text(weight)
    if total is None:
        return f"{text} FTE-periods of new shortfall there"
    counted = ""
    if net is not None and fte_total_text(total) != fte_total_text(net):
        counted = (" (counted in each office, skill and period where shortfall rose, while the "
                   f"{fte_total_text(net)} above is net of any that fell)")
    if text == fte_total_text(total):
        return f"all the new shortfall there{counted}"
    return f"{text} of the {fte_total_text(total)} FTE-periods of new shortfall there{counted}"


def _held_back_words(row: Any, net: float | None = None) -> str:
    """What holds the scenario's new shortfall back (``held_back_by``), or "" where the table
    has no such column or names no limit.  "Mostly" only of what leads by the new shortfall
    citing it, as written: the harbour surge's every row cited seats, slots and budgets alike,
    and "held back mostly by the hiring budget of 2027" had ranked a tie by name.  Tied
    limits are said together with how much cites each; ``net``: the shortfall the line says
    is left short."""
    said: list[str] = []
    weights: list[float | None] = []
    total: float | None = None
    previous = ""
    for key in _keys(row, "held_back_by"):
        kind, wheres, periods, weight, of = [*key, "", "", "", ""][:5]
        said.append(_limit_phrase(kind, wheres, periods, previous))
        previous = "" if kind in BUDGET_LIMITS else wheres.replace(",", ", ")
        weights.append(finite([weight or None])[0])
        total = finite([of or None])[0]
    if not said:
        return ""
    first = weights[0]
    if first is None or any(w is None for w in weights):
        return f", held back by {and_list(said)}"  # no weights to rank by
    tied = sum(1 for w in weights if fte_total_text(w or 0.0) == fte_total_text(first))
    cited = f"{'each ' if tied > 1 else ''}cited by {_cited_words(first, total, net)}"
    if tied == len(said):
        return f", held back by {and_list(said)}, {cited}"
    # "Mostly" of the leaders alone: the storm's line had said it of a limit cited by a
    # fifth of the new shortfall too.
    return (f", held back mostly by {and_list(said[:tied])}, {cited}, and less by "
            f"{and_list(said[tied:])}")


# The keyed columns of scenarios.csv that a scenario's line says in words
# (rebalance.analysis.scenario_actions.SUMMARY_COLUMNS and scenarios.HELD_BACK_COLUMN).
SUMMARY_KEYS = ("details_added", "details_dropped", "hires_changed", "held_back_by")
# How many home offices of a destination, and hire changes, a scenario's line names.
ACTIONS_SAID = 3
HIRES_SAID = 2


def _more(n: int, what: str) -> str:
    return f" and {n} more {what}{'s' if n > 1 else ''}" if n > 0 else ""


def _hire_phrase(key: list[str]) -> str:
    change, office, skill, _, start, before, after, was = [*key, *[""] * 8][:8]
    n = abs(int(float(after or 0)) - int(float(before or 0)))
    if change in ("earlier", "later"):  # before and after: the number moved
        n = int(float(after or 0))
        how = "brought forward" if change == "earlier" else "put back"
        return f"{n} {skill} at {office} {how} from {was} to {start}"
    return f"{n} {change} {skill} at {office} starting {start}"


def _hires_words(keys: list[list[str]], offices: Sequence[str]) -> str:
    """The hire changes at the ``offices`` whose demand the scenario changes (the first
    :data:`HIRES_SAID`), and how many more there are elsewhere (every office where
    ``offices`` is unknown): the storm's line had listed hires across the country first."""
    if not keys:
        return "hires as the base's"
    here = [k for k in keys if not offices or (len(k) > 1 and k[1] in offices)]
    said = [_hire_phrase(k) for k in here[:HIRES_SAID]]
    text = (", ".join(said) if said else "none changed at its offices") + _more(
        len(here) - len(said), "change")
    elsewhere = len(keys) - len(here)
    if elsewhere:
        text += f" ({elsewhere} change{'s' if elsewhere > 1 else ''} elsewhere)"
    return f"hires: {text}"


def _routes(row: Any, column: str) -> dict[str, list[tuple[str, int]]]:
    """A ``to|home|count`` column of the row by destination, in the table's order."""
    into: dict[str, list[tuple[str, int]]] = {}
    for key in _keys(row, column):
        to, home, n = [*key, "", "", "0"][:3]
        into.setdefault(to, []).append((home, int(float(n))))
    return into


def _details_into(to: str, added: list[tuple[str, int]],
                  dropped: list[tuple[str, int]]) -> str:
    """"7 detail-periods into B (4 from A, 3 from C), 2 dropped: net +5": a planner had read
    the added count alone as what the scenario sends there."""
    def counted(routes: list[tuple[str, int]]) -> tuple[int, str]:
        sources = ", ".join(f"{n} from {home}" for home, n in routes[:ACTIONS_SAID])
        return (sum(n for _, n in routes),
                f"({sources}{_more(len(routes) - ACTIONS_SAID, 'office')})")

    total, sources = counted(added)
    said = f"{total:,} detail-period{'s' if total != 1 else ''} into {to} {sources}"
    if not dropped:
        return said
    fewer, their_sources = counted(dropped)
    if not added:
        return (f"{fewer:,} fewer detail-period{'s' if fewer != 1 else ''} into {to} "
                f"{their_sources}")
    return f"{said}, {fewer:,} dropped {their_sources}: net {total - fewer:+,}"


def _moves_words(row: Any, offices: Sequence[str] = ()) -> str:
    """Who moves for the scenario and what hires change (``details_added``,
    ``details_dropped``, ``hires_changed``, ``changes_before``), or "" where the table has no
    such columns.  ``offices``: those whose demand the scenario changes, where known."""
    if not {"details_added", "hires_changed"} <= set(row._fields):
        return ""
    dropped = _routes(row, "details_dropped")
    added = _routes(row, "details_added")
    moves = [_details_into(to, added.get(to, []), dropped.get(to, []))
             for to in [*added, *(to for to in dropped if to not in added)]]
    said = "moves for it: " + (and_list(moves) if moves else "no detail added into its offices")
    said += f"; {_hires_words(_keys(row, 'hires_changed'), offices)}"
    early = int(_number(row, "changes_before") or 0)
    if early:
        said += (f"; {early:,} change{'s' if early != 1 else ''} before the scenario's "
                 "changes begin")
    return said


SALARIES_AFTER = "salary_after_horizon_per_year"


def _salaries_words(row: Any, base: Any, currency: str | None) -> str:
    """The scenario's new positions' salaries after the horizon against the base's
    ("+32,000 a year in salaries after the horizon"), or "" where the table has no such
    column (written before it): new money counts only the horizon, and a surge's hires go
    on being paid after it."""
    mine, theirs = _number(row, SALARIES_AFTER), _number(base, SALARIES_AFTER)
    if mine is None or theirs is None:
        return ""
    more = mine - theirs
    if not shows(money_text(more)):
        return "salaries after the horizon as the base's"
    return f"{_signed(more, money_amount(more, currency))} a year in salaries after the horizon"


def scenario_lines(frame: pd.DataFrame, currency: str | None = None,
                   offices: pd.DataFrame | None = None) -> list[str]:
    """What each scenario of a comparison (``scenarios.csv``) is, and what it changed against
    the base: the demand added and where, how much of it the plan covers and how much is left
    short (FTE-periods, and weighted), the new money, the budget the scenario gave and what
    of it was spent, and where shortfall rose or fell by office (``offices``,
    ``scenario_offices.csv``).  A leader had read "total cost +7,000" as what the surge
    costs, with 20 of its 24 FTE-periods left short.  A difference within the solves' gaps is
    marked so.  Tables written before a column say less; empty where the table lacks the
    headline columns."""
    needed = {"scenario", "description", "demand_fte_periods", "weighted_shortfall",
              "total_cost"}
    if not needed <= set(frame.columns) or frame.empty or frame["scenario"].iloc[0] != "base":
        return []
    # Any: the rows' columns are read by name, and checked by _number where they may be gone.
    base: Any = next(frame.iloc[:1].itertuples(index=False))
    rows: list[Any] = list(frame.iloc[1:].itertuples(index=False))
    gap_of_shortfall = "shortfall_gap" if "shortfall_gap" in frame.columns else "gap"

    lines = []
    for row in rows:
        name = str(row.scenario)
        # A blank cell of scenarios.csv reads back as NaN, which is true: "nan" had shown.
        described = "" if pd.isna(row.description) else str(row.description)
        said = f"{name}: {described or 'no description'}"
        more = row.demand_fte_periods - base.demand_fte_periods
        demand = f"demand {_signed(more, fte_total_text(more))} FTE-periods"
        where = _office_changes(offices, name, "demand_fte_periods")
        if where:
            demand += f" ({_office_list(where)})"
        parts = [demand]
        weighted, base_weighted = _number(row, "weighted_shortfall"), _number(
            base, "weighted_shortfall")
        if weighted is None or base_weighted is None:
            parts.append("no plan to compare")
            lines.append(f"{said}; against the base: {', '.join(parts)}")
            continue
        w_diff = weighted - base_weighted
        plain, base_plain = _number(row, "shortfall_fte_periods"), _number(
            base, "shortfall_fte_periods")
        shortfall = f"weighted shortfall {_signed(w_diff, fte_total_text(w_diff))}"
        if plain is not None and base_plain is not None:
            short = plain - base_plain
            covered = _covered_words(more, short)
            parts[0] += covered + (_held_back_words(row, short) if "short" in covered else "")
            shortfall = (f"shortfall {_signed(short, fte_total_text(short))} FTE-periods, "
                         f"weighted {_signed(w_diff, fte_total_text(w_diff))}")
        moves = _moves_words(row, [o for o, _ in where])
        if moves:
            parts.append(moves)
        if shows(fte_total_text(w_diff)) and _within(w_diff, gap_of_shortfall, row, base,
                                                      weighted, base_weighted):
            shortfall += f" {WITHIN_GAPS}"
        parts.append(shortfall)
        total, base_total = float(row.total_cost), float(base.total_cost)
        cost = total - base_total
        money = f"new money {_signed(cost, money_amount(cost, currency))}"
        if shows(money_text(cost)) and _within(cost, "gap", row, base, total, base_total):
            money += f" {WITHIN_GAPS}"
        salaries = _salaries_words(row, base, currency)
        parts.append(f"{money}, {salaries}" if salaries else money)
        unlike = not_like_for_like(w_diff if shows(fte_total_text(w_diff)) else None,
                                   cost if shows(money_text(cost)) else None, before=". ")
        budget = _budget_words(row, currency)
        if budget is not None:
            parts.append(budget)
        line = f"{said}; against the base: {'; '.join(parts)}"
        by_office = _office_changes(offices, name, "shortfall_fte_periods")
        if by_office:
            line += f"; shortfall by office against the base: {_office_list(by_office)}"
        lines.append(line + unlike)
    return lines


def status_in_words(frame: pd.DataFrame) -> pd.DataFrame:
    """``frame`` with its ``status`` codes in the words of the run's headline
    (:func:`~rebalance.report.words.outcome_words`): "optimal" beside a gap of 0.99% had
    read as exact.  The CSV file keeps the code; a table without the columns is returned as
    it is."""
    if "status" not in frame.columns or "gap" not in frame.columns:
        return frame
    gaps = finite(frame["gap"].tolist())
    words = [outcome_words(s, g) if isinstance(s, str) else s
             for s, g in zip(frame["status"].tolist(), gaps, strict=True)]
    return frame.assign(status=words)


def _largest(frame: pd.DataFrame, name: str) -> float | None:
    """The largest finite value of ``frame``'s column ``name``, None where there is none."""
    column = find_column(frame, (name,))
    values = [g for g in finite(frame[column].tolist()) if g is not None] if column else []
    return max(values) if values else None


def cell_words(value: Any) -> str:
    """A cell as stripped text, "" where it is empty."""
    return "" if value is None or (isinstance(value, float) and math.isnan(value)) else str(
        value).strip()


def limit_texts(frame: pd.DataFrame) -> list[str]:
    """Each row's limit in words (``marginal_values.csv``): its ``limit_in_words``, or for a
    table written before that column, the words of its ``limit`` and ``where`` codes."""
    words = (frame["limit_in_words"].tolist() if "limit_in_words" in frame.columns
             else [None] * len(frame))
    limits = frame["limit"].tolist() if "limit" in frame.columns else [None] * len(frame)
    wheres = frame["where"].tolist() if "where" in frame.columns else [None] * len(frame)
    text = cell_words
    return [text(w) or (limit_words(text(lim), text(at)) if text(lim) else "")
            for w, lim, at in zip(words, limits, wheres, strict=True)]


def actions_lead(frame: pd.DataFrame) -> str:
    """How many of a comparison's changes fall before their scenario's changes begin, and
    how many every scenario makes ("" for a table without those columns)."""
    if "when" not in frame.columns or "in_every_scenario" not in frame.columns or not len(frame):
        return ""
    early = frame["when"].astype(str) == "before"
    every = frame["in_every_scenario"].map(truthy).astype(bool)
    words = (f" {int(early.sum()):,} of the {len(frame):,} change"
             f"{'' if len(frame) == 1 else 's'} {'falls' if early.sum() == 1 else 'fall'} "
             "before their scenario's changes begin")
    if every.any():
        # Counted once each (a row per scenario in the table); one made before every
        # scenario's changes begin answers no surge, so likely suits the base plan too.
        # A hire's skill is part of it; a detail's is only what the person works there.
        hire = frame.get("action", pd.Series("", index=frame.index)).astype(str) == "hire"
        skill = frame.get("skill", pd.Series("", index=frame.index)).where(hire, "")
        keys = [c for c in ("change", "action", "person_or_office", "period",
                            "route_or_funding") if c in frame.columns]
        common = (frame.assign(_skill=skill, _early=early)[every]
                  .groupby([*keys, "_skill"], dropna=False)["_early"])
        n = common.ngroups
        words += (f"; {n:,} {'is' if n == 1 else 'are'} made under every scenario, "
                  f"{int(common.all().sum()):,} of them before any scenario's changes begin: "
                  "those likely suit the base plan too")
    return words + "."


def marginal_gap_words(frame: pd.DataFrame, shortfall: float | None) -> str:
    """Which measured marginal values are within the solves' shortfall gap of the base
    plan's weighted ``shortfall`` ("" where none is, or the table lacks the columns): a
    practitioner's reading took a +100,000 budget's 0.842 for a measured gain where 1% of
    168.6 is 1.7."""
    needed = {"shortfall_reduction", "shortfall_gap"}
    if shortfall is None or not needed <= set(frame.columns) or frame.empty:
        return ""
    gaps = [g for g in finite(frame["shortfall_gap"].tolist()) if g is not None]
    if not gaps or max(gaps) <= 1e-4:
        return ""
    noise = max(gaps) * abs(shortfall)
    name = "limit_in_words" if "limit_in_words" in frame.columns else "limit"
    within = [str(limit) for limit, value in zip(frame[name], finite(
        frame["shortfall_reduction"].tolist()), strict=True)
        if value is not None and abs(value) <= noise]
    if not within:
        return ""
    listed = ", ".join(within[:5]) + (f" and {len(within) - 5} more" if len(within) > 5 else "")
    return (f"Measured values within the solves' shortfall gap ({gap_text(max(gaps))} of "
            f"{fte_total_text(shortfall)} FTE-periods: {fte_total_text(noise)}) are not firm: "
            f"{listed}.")
