"""The limits that conflict when no plan keeps them all, in a planner's words.

Limits that fail before any decision (more people at home than seats, with nothing that can
move) are read off the model's rows; otherwise each limit row gets an elastic column and the
least total relaxation (to a gap of 0; firm only where proven the least) names the limits
that had to give, and by how much: way out (a); where that finds none in the time, the seats
the instance alone proves no plan can keep are named.  That total adds seats to money, so
each other kind of limit is then relaxed alone, to say which of them would also do, and by
how much: ways out (b), (c), ..., each enough on its own.
"""

from __future__ import annotations

import math
import string
import time
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp

from rebalance.backends import Backend, BackendOutcome, SolveOptions, Status, relative_gap
from rebalance.instance import Instance
from rebalance.model import LIMIT_FAMILIES, Model
from rebalance.numbers import money_text, number_text
from rebalance.split import relaxed as all_continuous

__all__ = ["WayOut", "WaysOut", "bulleted", "constant_conflicts", "find_conflicts",
           "other_ways_out", "seat_words", "seats_cannot_hold"]

# The first line of a conflict's list, where another kind of limit would do alone, and where
# none would (then the least total is the one way out found).
WAYS_HEADING = "Ways out, each enough on its own:"
ONE_WAY_HEADING = "Way out (the least that must give):"


def bulleted(conflicts: Sequence[str]) -> list[str]:
    """Conflict lines as a list prints them: a heading as it is, each line under it after a
    "- " (the heading had been printed as a bullet of its own list, a reviewer's reading)."""
    return [c if c in (WAYS_HEADING, ONE_WAY_HEADING) else f"- {c}" for c in conflicts]


def constant_conflicts(model: Model, instance: Instance | None = None) -> list[str]:
    """Rows with no columns whose bounds already fail (e.g. more people at home than seats).
    ``instance``, the one ``model`` was built from, lets seats say whom they are short of."""
    counts = np.diff(model.matrix.indptr)
    bad = np.flatnonzero((counts == 0) & ((model.row_upper < -1e-9) | (model.row_lower > 1e-9)))
    seats = seat_words(instance) if len(bad) and instance is not None else {}
    return [_describe_row(model, int(i), None, seats) for i in bad]


def _describe_row(model: Model, row: int, excess: float | None,
                  seats: Mapping[str, str] | None = None) -> str:
    """The limit of ``row`` in words, with how far it had to give; a seats row also with
    its ``seats`` words (by label), where the instance was given."""
    family, label = model.row_label(row)
    words = family.replace("_", " ")
    # A budget's label names it already ("moves budget 2027"): said once, not twice.
    text = label if label.startswith(words) else f"{words}: {label}"
    if excess is not None:
        text += f" (over by {_amount(family, excess)})"
    if family == "seats" and seats and label in seats:
        text += f": {seats[label]}"
    return text


def seats_cannot_hold(instance: Instance) -> bool:
    """Whether no plan can keep some office's seats, before any solve: too few may be away
    in a period (:meth:`Instance.seat_counts`) or over a run of periods
    (:meth:`Instance.seat_windows`).  ``rebalance check`` says so and exits as ``plan``
    would: "valid" above that warning had read as ready to plan."""
    return (any(c.too_few_may_go for c in instance.seat_counts())
            or bool(instance.seat_windows()))


def seat_words(instance: Instance, money_short: Mapping[str, str] | None = None
               ) -> dict[str, str]:
    """For each seats row's label (``"A in 2027-Q1"``, ``rebalance.limits``), its seats and
    the people based there, in plain words: a conflict of seats had named the row only, not
    how far the people outnumber the seats.  Where they do, how many must be away or moved
    and how many at most may be (``Instance.seat_counts``: the numbers of the warning of
    ``rebalance check``), and where the consecutive-detail limit keeps too few away over a
    run of periods, that (``Instance.seat_windows``).  ``money_short`` (year -> "moves
    budget 2027 (0)") names the moves budgets that, raised alone, are a way out: where the
    rules let enough people go, it is that money that stops them ("at most 3 may be" had
    read as no conflict at all)."""
    names = instance.period_names
    windows = {w.office: w for w in instance.seat_windows()}
    out = {}
    for c in instance.seat_counts():
        said = f"{_people(c.seats, 'seat')} for {_people(c.based, 'person')} based there"
        if c.must_go:
            may = f"at most {c.may_go} may be" if c.may_go else "none may be"
            said += f"; {c.must_go} must be away or moved, and {may} away or moved"
            budget = (money_short or {}).get(instance.periods[c.period].year)
            window = windows.get(c.office)
            if c.too_few_may_go:
                said += f" ({', '.join(instance.away_limits(c.no_work_elsewhere > 0))})"
            elif window is not None and window.first <= c.period <= window.last:
                # Each period alone lets enough go ("2 must, at most 2 may" beside "over by
                # 1" had read as a contradiction): not all of them together.
                said += f" then, but not in every period: {window.words(names)}"
            elif budget is not None:
                said += (f" under the rules, but moving them costs money the {budget} "
                         "does not have")
        else:
            # The relaxation may let a full office take the excess in people detailed in,
            # as well as the office they come from: the same total (docs/model.md).
            said += "; what is over is people detailed in or hires"
        out[f"{c.office} in {names[c.period]}"] = said
    return out


def _people(n: int, one: str) -> str:
    """'1 person', '5 people', '1 seat', '40 seats'."""
    if n == 1:
        return f"1 {one}"
    return f"{n} {'people' if one == 'person' else one + 's'}"


def _amount(family: str, value: float) -> str:
    """How far a limit had to give, by the number rule: money in full for a budget (it had
    read "over by 8.16e+04"), else as a table writes a figure; a solver's dust off a whole
    number dropped ("166.000 seat-periods" had read as a fraction to keep)."""
    if abs(value - round(value)) <= 1e-6 * max(1.0, abs(value)):
        value = float(round(value))
    return money_text(value) if "budget" in family else number_text(value)


@dataclass(frozen=True)
class _Measure:
    """What the rows of a kind of limit count, for saying how far they give."""

    one: str  # a row's unit, for one: "seat"
    many: str  # "seats"
    total_one: str  # summed over its rows: "seat-period"
    total_many: str  # "seat-periods"
    beyond: str  # how a relaxation is past the limit: "short"
    rows: str  # what its rows are, several: "office-periods"
    which: str  # what the rows differ by: "offices and periods"


# By family (rows of rebalance/limits.py): seats and hires per office and period; the away
# share per office and period in people away (share x people based there); consecutive
# details per person (or group) and window of periods; vacancies per skill and office.
_AWAY = _Measure("person away", "people away", "person-period away", "person-periods away",
                 "over the share", "office-periods", "offices and periods")
_MEASURES = {
    "seats": _Measure("seat", "seats", "seat-period", "seat-periods", "short",
                      "office-periods", "offices and periods"),
    "away_share": _AWAY,
    "away_share_in_whole_people": _AWAY,
    "consecutive_details": _Measure("detail-period", "detail-periods", "detail-period",
                                    "detail-periods", "over the limit", "windows of periods",
                                    "people and periods"),
    "vacancies": _Measure("hire", "hires", "hire", "hires", "beyond the funded vacancies",
                          "skills at offices", "skills and offices"),
    "max_hires": _Measure("hire", "hires", "hire", "hires", "over the cap", "office-periods",
                          "offices and periods"),
}
# Budgets are money, one row a year; a family not listed is said in bare numbers.
_MONEY = _Measure("", "", "", "", "short", "years", "years")
_BARE = _Measure("", "", "", "", "over", "limits", "limits")


def _measure(family: str) -> _Measure:
    return _MONEY if "budget" in family else _MEASURES.get(family, _BARE)


def _counted(family: str, value: float, one: str, many: str) -> str:
    """'10 seat-periods', '1 seat', '60,000' (money has no unit word)."""
    text = _amount(family, value)
    unit = one if text == "1" else many
    return f"{text} {unit}" if unit else text


def _total_line(family: str, count: int, amount: float, firm: bool = True) -> str:
    """The least total's line for a family with several rows giving: its total is firm
    where proven the least (``firm``), its split between rows is not (equally small
    relaxations, and so solvers, differ)."""
    m = _measure(family)
    said = "the total is firm" if firm else "not proven the least"
    return (f"{family.replace('_', ' ')}: "
            f"{_counted(family, amount, m.total_one, m.total_many)} {m.beyond} in all, "
            f"across {count} {m.rows} ({said}; which {m.which} take it can differ)")


def _not_proven_line(out: BackendOutcome, total: float) -> str:
    """The first line of a least total not proven the least: what it is at most, and why
    the search stopped.  It had been called firm at 167.65 where 166 was the least (HiGHS
    within the instance's 1% gap)."""
    why = ("at the time limit" if "time" in out.words.lower() or out.killed
           else f"before proving it ({out.words})")
    gap = relative_gap(out.objective, out.bound)
    left = f", a gap of {gap:.1%} left" if gap else ""
    return (f"at most {_amount('', total)} in all (each limit in its own unit, added as one); "
            f"not proven the least: the search stopped {why}{left}")


@dataclass(frozen=True)
class WayOut:
    """A kind of limit that, relaxed alone, lets a plan keep every other limit."""

    kind: str  # the group's name: "moves_budget", "away_share" (with its whole-people rows)
    given: tuple[tuple[int, float], ...]  # (row, how far it gives)
    least: bool  # proven the least relaxation of that kind


@dataclass(frozen=True)
class WaysOut:
    """What :func:`other_ways_out` found: the ways, the kinds tried (in words), and lines
    saying what was not tried or not settled in the time."""

    found: tuple[WayOut, ...] = ()
    tried: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()


# Share of find_conflicts' time the least total relaxation may take; the other ways out
# (one family of limits at a time) share what it leaves.
LEAST_SHARE = 0.6
# Below this many seconds for each kind, or twice what the least total took where that is
# more, the other ways out are not tried, and that is said (each is a run like the least
# total's, on a model of the same size: at 0.5 s a 3 s run of a 6-person case had skipped
# runs of 0.02 s).
MIN_ALTERNATIVE_SECONDS = 0.1
# Rows named by each other way out; the rest are counted and totalled.
ROWS_NAMED = 3
# Families that are one limit written twice: the away share, and the same rows rounded to
# whole people. Relaxing either alone leaves the other holding, so they give way together.
_GROUPS = {"away_share_in_whole_people": "away_share"}


def _limit_rows(model: Model) -> dict[str, list[int]]:
    """The rows that may give, an elastic column each, by kind of limit (a family, the away
    share with its whole-people rows): every row of ``LIMIT_FAMILIES`` with an upper limit,
    in the model's order.  A kind with no such row is left out: it has nothing to relax."""
    kinds: dict[str, list[int]] = {}
    for f in model.rows:
        if f.name in LIMIT_FAMILIES:
            rows = [i for i in range(f.start, f.stop) if math.isfinite(model.row_upper[i])]
            if rows:
                kinds.setdefault(_GROUPS.get(f.name, f.name), []).extend(rows)
    return kinds


def _relaxed(model: Model, rows: list[int], backend: Backend, options: SolveOptions,
             time_limit: float) -> BackendOutcome:
    """Minimise the total relaxation of ``rows``, each by an elastic column; every other row
    held.  The relaxations are the last ``len(rows)`` entries of the outcome's ``x``."""
    k = len(rows)
    elastic = sp.csr_matrix((np.full(k, -1.0), (np.asarray(rows), np.arange(k))),
                            shape=(model.num_rows, k))
    with_elastic = replace(
        model,
        matrix=sp.hstack([model.matrix, elastic], format="csr"),
        col_lower=np.concatenate([model.col_lower, np.zeros(k)]),
        col_upper=np.concatenate([model.col_upper, np.full(k, math.inf)]),
        is_integer=np.concatenate([model.is_integer, np.zeros(k, bool)]),
        shortfall_weight=np.concatenate([model.shortfall_weight, np.zeros(k)]),
        cost=np.concatenate([model.cost, np.zeros(k)]),
    )
    objective = np.concatenate([np.zeros(model.num_cols), np.ones(k)])
    return backend.run(with_elastic, objective, [], options, time_limit, None)


def find_conflicts(model: Model, backend: Backend, options: SolveOptions,
                   time_limit: float, instance: Instance | None = None) -> list[str]:
    """Name the limits that cannot hold together: relax each limit row by an elastic column
    and minimise the total relaxation, to a gap of 0; rows that still need relaxing are the
    conflict, its total said firm only where proven the least (:func:`_not_proven_line`).
    Empty where none needs to: the model was feasible all along.  With ``instance`` (the
    model's), seats say whom they are short of (:func:`seat_words`).

    The total adds seats to money as one unit, so it names whichever limit is the smaller
    number, not always the cause.  After it come the other ways out: each family of limits
    that would, relaxed alone, let a plan keep every other limit (:func:`other_ways_out`),
    within the same ``time_limit``.  The lines read as ways out, each enough on its own: a
    heading, the least total as (a), the others as (b), (c), ... (:func:`_ways_lines`)."""
    started = time.perf_counter()
    kinds = _limit_rows(model)
    limit_rows = sorted(i for rows in kinds.values() for i in rows)
    if not limit_rows:
        return ["the solver reports the model infeasible, but no limit row can be relaxed"]
    # Where the other ways out could not have their least time each (one kind fewer than
    # there are: the answer's own, where it is one), the least total keeps it all.
    others = (1 - LEAST_SHARE) * time_limit / max(len(kinds) - 1, 1) >= MIN_ALTERNATIVE_SECONDS
    # The least, not one within the plan's gap: at the instance's 1% HiGHS had called 167.65
    # (away share and seats) firm where seats alone at 166 was the least.
    out = _relaxed(model, limit_rows, backend, replace(options, relative_gap=0.0),
                   LEAST_SHARE * time_limit if others else time_limit)
    least_seconds = time.perf_counter() - started
    if out.x is None or not out.status.has_plan:
        return _unrelaxed_lines(out, instance)
    excess = out.x[model.num_cols:]
    over = np.flatnonzero(excess > 1e-6)
    if not len(over):
        return []  # nothing had to give: the caller says the verdict was the solver's
    # Firm only where proven the least: optimal at a gap of 0.
    firm = out.status is Status.OPTIMAL
    # The least total relaxation, where proven, is the answer's firm part; how it splits
    # between offices and periods can differ between equally small relaxations (and so
    # between solvers).
    totals: dict[str, tuple[int, float]] = {}
    for i in over:
        family, _ = model.row_label(limit_rows[i])
        count, amount = totals.get(family, (0, 0.0))
        totals[family] = (count + 1, amount + float(excess[i]))
    answered = {_GROUPS.get(f, f) for f in totals}
    left = time_limit - (time.perf_counter() - started)
    ways = other_ways_out(model, backend, options, left, answered, least_seconds)
    # A moves budget that would do alone is what stops the moves seats need, where the
    # rules let enough people go: the seats say so.
    seats = seat_words(instance, _money_short(model, ways)) if instance is not None else {}
    least = (([] if firm else [_not_proven_line(out, float(excess[over].sum()))])
             + [_total_line(family, count, amount, firm)
                for family, (count, amount) in totals.items() if count > 1]
             + [_describe_row(model, limit_rows[i], float(excess[i]), seats) for i in over])
    return _ways_lines(model, least, ways, len(answered) > 1)


def _unrelaxed_lines(out: BackendOutcome, instance: Instance | None) -> list[str]:
    """Where the least relaxation found none (stopped in the time, most often): the seats
    the instance alone proves no plan can keep (:func:`seats_cannot_hold`, as ``rebalance
    check`` says), each in the words of a seats limit, so that a run that ends as infeasible
    names the limits it can prove conflict.  On medium at 10 seats for 88 people it had
    named none ("the analysis found no relaxation (stopped at the time limit)")."""
    found = (f"the analysis found no relaxation"
             f"{' in the time' if out.status is Status.NO_PLAN_IN_TIME else ''} ({out.words})")
    proven = _seats_proven(instance) if instance is not None else []
    if not proven:
        return [f"the limits conflict, but {found}"]
    return [f"Limits that no plan can keep, from the instance alone ({found}; so not how far "
            "each must give, nor the other ways out):", *proven]


def _seats_proven(instance: Instance) -> list[str]:
    """'seats: A in 2027-Q1: 2 seats for 5 people based there; 3 must be away ...' for each
    office-period where too few may be away (:meth:`Instance.seat_counts`) or that is in a
    run of periods too few may be away over (:meth:`Instance.seat_windows`)."""
    names, words = instance.period_names, seat_words(instance)
    windows = instance.seat_windows()
    return [f"seats: {label}: {words[label]}"
            for c in instance.seat_counts()
            if c.too_few_may_go or (c.must_go and any(
                w.office == c.office and w.first <= c.period <= w.last for w in windows))
            for label in [f"{c.office} in {names[c.period]}"]]


def _money_short(model: Model, ways: WaysOut) -> dict[str, str]:
    """Year -> "moves budget 2027 (0)", for each moves budget that is a way out alone."""
    out = {}
    for way in ways.found:
        if way.kind == "moves_budget":
            for row, _ in way.given:
                label = model.row_label(row)[1]  # "moves budget 2027" (rebalance.limits)
                out[label.removeprefix("moves budget ")] = (
                    f"{label} ({money_text(model.row_upper[row])})")
    return out


def _ways_lines(model: Model, least: list[str], ways: WaysOut, several: bool) -> list[str]:
    """The conflict's lines: a heading, the least total as way out (a), each other kind
    that would do alone as (b), (c), ...; then what was not tried or settled, or, where
    every kind was tried and none would do alone, that (``several``: the least total gave
    in more than one kind, which then must give together)."""
    lines = [WAYS_HEADING if ways.found else ONE_WAY_HEADING, f"(a) {least[0]}", *least[1:]]
    lines += [f"({letter}) {_way_out(model, way)}"
              for letter, way in zip(string.ascii_lowercase[1:], ways.found, strict=False)]
    lines += ways.notes
    if ways.tried and not ways.found and not ways.notes:
        lines.append("no one kind of limit raised alone would do; the ones above must give "
                     "together" if several else
                     "no other kind of limit raised alone would do (each was tried: "
                     f"{', '.join(ways.tried)}); any way out but (a) needs more than one kind "
                     "to give together")
    return lines


def other_ways_out(model: Model, backend: Backend, options: SolveOptions, time_limit: float,
                   answered: set[str], least_seconds: float = 0.0) -> WaysOut:
    """For each family of limits with rows, other than the one the least total relaxation
    gave way in alone (``answered``, where it is one family), whether relaxing that family
    alone lets a plan keep every other limit; if so, by how much.  ``time_limit`` is shared
    between the families; with too little for each, they are not tried, and a note says so.

    Where a run costs little beyond its solve, each is an LP first (:func:`_not_ruled_out`);
    a search, for the families the LPs leave, needs twice ``least_seconds`` (what the least
    total took) at least, as every try had before."""
    started = time.perf_counter()
    groups = _limit_rows(model)
    if len(answered) == 1:
        groups.pop(next(iter(answered)), None)
    if not groups:
        return WaysOut()
    needed = max(MIN_ALTERNATIVE_SECONDS, 2 * least_seconds)
    lp_first = backend.reruns_cheaply and model.num_integer > 0
    if time_limit / len(groups) < (MIN_ALTERNATIVE_SECONDS if lp_first else needed):
        return WaysOut(notes=(f"too little time left to check other ways out (each kind of "
                              f"limit relaxed alone): {max(time_limit, 0.0):.1f}s for "
                              f"{len(groups)} kinds",))
    # A run with no relaxation found yet must stop at its share, not run on; and the amount
    # is to be the least, not one within the plan's gap (1% of a budget is a real sum).
    options = replace(options, overtime_without_plan=0.0, progress=None, relative_gap=0.0)
    searched = (_not_ruled_out(model, groups, backend, options, time_limit) if lp_first
                else groups)
    found, unsettled = [], []
    for n, (group, rows) in enumerate(searched.items()):
        share = (time_limit - (time.perf_counter() - started)) / (len(searched) - n)
        if share < needed:
            unsettled += [g.replace("_", " ") for g in list(searched)[n:]]
            break
        out = _relaxed(model, rows, backend, options, share)
        if out.status is Status.INFEASIBLE:
            continue  # relaxing this family alone does not resolve it
        if out.x is None or not out.status.has_plan:
            unsettled.append(group.replace("_", " "))
            continue
        excess = out.x[model.num_cols:]
        given = tuple((rows[i], float(excess[i])) for i in np.flatnonzero(excess > 1e-6))
        if given:  # none: the solver's verdict of infeasible was numerics (as solve says)
            found.append(WayOut(group, given, out.status is Status.OPTIMAL))
    notes = (("not settled in the time whether these alone would do: "
              + ", ".join(unsettled),) if unsettled else ())
    return WaysOut(tuple(found), tuple(g.replace("_", " ") for g in groups), notes)


def _not_ruled_out(model: Model, groups: dict[str, list[int]], backend: Backend,
                   options: SolveOptions, time_limit: float) -> dict[str, list[int]]:
    """``groups`` but those whose rows, relaxed alone in the LP, cannot keep every other
    limit: the whole-number model cannot then either (each of its plans is a point of the
    LP), so no search is needed for them.  Within ``time_limit``, shared.  HiGHS, 300 people
    at half the seats: a search took 1.4-2.2 s to show a kind would not do alone (2.3 s of
    3.1 s in presolve), the LP 0.1-0.2 s.  CBC writes the model out for every run and its
    search starts from that LP, so there an LP first would only add a run."""
    started, lp = time.perf_counter(), all_continuous(model)
    left = {}
    for n, (group, rows) in enumerate(groups.items()):
        share = (time_limit - (time.perf_counter() - started)) / (len(groups) - n)
        if _relaxed(lp, rows, backend, options, share).status is not Status.INFEASIBLE:
            left[group] = rows  # a way out in the LP, or not settled: searched
    return left


def _way_out(model: Model, way: WayOut) -> str:
    """One other way out in words: the rows it gives way (row, by how much), by family: a
    lone row by name, several with their total and at most ``ROWS_NAMED`` of them named; a
    budget from its cap to the cap it would need."""
    by_family: dict[str, list[tuple[int, float]]] = {}
    for row, amount in way.given:
        by_family.setdefault(model.row_label(row)[0], []).append((row, amount))
    said = []
    for family, rows in by_family.items():
        words, m = family.replace("_", " "), _measure(family)

        def by(row: int, amount: float, family: str = family, m: _Measure = m) -> str:
            label, enough = model.row_label(row)[1], _enough(family, amount)
            if m is _MONEY:  # the label names the budget: "moves budget 2027"
                cap = float(model.row_upper[row])
                return f"{label} from {money_text(cap)} to {money_text(cap + enough)}"
            return f"{label} by {_counted(family, enough, m.one, m.many)}"

        if len(rows) == 1:
            said.append(f"the {by(*rows[0])}" if m is _MONEY
                        else f"the {words} of {by(*rows[0])}")
            continue
        # The largest first; equal ones in the model's order (offices, then periods).
        ranked = sorted(rows, key=lambda ra: -ra[1])
        named = [by(row, amount) for row, amount in ranked[:ROWS_NAMED]]
        if len(rows) > ROWS_NAMED:
            named.append(f"{len(rows) - ROWS_NAMED} more")
        total = _enough(family, sum(amount for _, amount in rows))
        said.append(f"the {words} by {_counted(family, total, m.total_one, m.total_many)} "
                    f"in all, across {len(rows)} {m.rows} ({', '.join(named)})")
    text = "raise " + " and ".join(said) + ", keeping every other limit"
    if not way.least:
        text += " (perhaps less would: not proven the least in the time)"
    return text


def _enough(family: str, amount: float) -> float:
    """Money rounded up to whole units, so that the amount said is never short of what the
    relaxation needed (dust of a millionth is the solver's, not a need)."""
    if "budget" in family:
        return float(math.ceil(amount - 1e-6 * max(1.0, abs(amount))))
    return amount
