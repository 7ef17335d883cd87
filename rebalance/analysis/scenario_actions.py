"""What a scenario's plan changes against the base plan (``scenario_actions.csv``).

One row per changed decision, in the re-plan's words (``rebalance.analysis.replan``): a
detail ``added``, ``dropped`` or ``rerouted`` (a new destination in the same period, one row),
a reassignment ``added``, ``dropped`` or ``changed``, ``more`` or ``fewer`` hires of an office,
skill, start period and funding (``moved`` where the same number start in another period
instead).  Each row says ``when`` it falls against the periods the scenario changes and
whether every scenario of the comparison makes it, and ``reason`` why, in ``changes.csv``'s
words (:func:`change_rows` puts a row in them for
:func:`~rebalance.analysis.change_reasons.change_reasons`).
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import pandas as pd

from rebalance.analysis.limits import hire_rows
from rebalance.plan import Plan

__all__ = ["ACTION_COLUMNS", "NO_WHEN", "REASON_COLUMN", "SUMMARY_COLUMNS", "HireChange",
           "PlanActions", "action_rows", "action_summary", "actions_table", "change_rows",
           "hire_changes", "main_skills", "plan_actions", "when_words"]

# The columns of :func:`action_rows`; the table adds :data:`REASON_COLUMN` after them.
ACTION_COLUMNS = ("scenario", "change", "action", "person_or_office", "skill", "period",
                  "route_or_funding", "base", "scenario_value", "when", "in_every_scenario")
REASON_COLUMN = "reason"
# ``when`` where the scenario changes no period (nothing to be before or after).
NO_WHEN = "—"


@dataclass(frozen=True)
class PlanActions:
    """A plan's decisions: hires by (office, skill, start period, funding) -> count; details
    by (person, period) -> route ``from -> to``; reassignments by person -> (period, route)."""

    hires: dict[tuple[str, str, str, str], int]
    details: dict[tuple[str, str], str]
    moves: dict[str, tuple[str, str]]


def plan_actions(plan: Plan) -> PlanActions:
    """The hires, details and reassignments of ``plan``, keyed as :class:`PlanActions` says."""
    hires: dict[tuple[str, str, str, str], int] = defaultdict(int)
    for h in hire_rows(plan):
        hires[(h.office, h.skill, h.start_period, h.funding)] += h.count
    details = {(str(r.person), str(r.period)): f"{r.from_office} -> {r.to_office}"
               for r in plan.details.itertuples(index=False)}
    moves = {str(r.person): (str(r.period), f"{r.from_office} -> {r.to_office}")
             for r in plan.reassignments.itertuples(index=False)}
    return PlanActions(dict(hires), details, moves)


def when_words(period: int, changed: Sequence[int]) -> str:
    """``before``, ``during`` or ``after`` the span of the ``changed`` period indices."""
    if not changed:
        return NO_WHEN
    return ("before" if period < min(changed) else "after" if period > max(changed)
            else "during")


def main_skills(plan: Plan) -> dict[tuple[str, str, str], str]:
    """(person, period, office) -> the skill the person works most FTE at there then (ties:
    the first by name)."""
    w = plan.work
    fte: dict[tuple[str, str, str], dict[str, float]] = defaultdict(lambda: defaultdict(float))
    for person, period, office, skill, amount in zip(
            w["person"].astype(str), w["period"].astype(str), w["office"].astype(str),
            w["skill"].astype(str), w["fte"].astype(float), strict=True):
        fte[(person, period, office)][skill] += amount
    # Most FTE first, then the first by name; time with no work (0 FTE) names no skill.
    return {key: min(by, key=lambda k: (-by[k], k)) for key, by in fte.items()
            if max(by.values()) > 1e-9}


@dataclass(frozen=True)
class HireChange:
    """Hires of one office, skill and funding that differ between two plans at one start
    period: ``before`` and ``after`` there; or, where the same number start in one other
    period instead and nothing else of theirs changes, one move (``moved_from`` the old
    start, ``start`` the new, ``before`` = ``after`` = the number moved)."""

    office: str
    skill: str
    funding: str
    start: str
    before: int
    after: int
    moved_from: str | None = None


def hire_changes(before: Mapping[tuple[str, str, str, str], int],
                 after: Mapping[tuple[str, str, str, str], int],
                 order: Callable[[str], int]) -> list[HireChange]:
    """The hires that differ between two plans' counts by (office, skill, start period,
    funding), grouped by office, skill and funding, each group's starts in ``order``: two
    starts of a group changed, one up by what the other lost, are one move (two rows, fewer
    and more, had read as two decisions); compare and re-plan words both come from here."""
    steps: dict[tuple[str, str, str], list[tuple[str, int, int]]] = defaultdict(list)
    for key in sorted(set(before) | set(after), key=lambda k: (k[0], k[1], k[3], order(k[2]))):
        if before.get(key, 0) != after.get(key, 0):
            office, skill, start, funding = key
            steps[(office, skill, funding)].append((start, before.get(key, 0),
                                                    after.get(key, 0)))
    out = []
    for (office, skill, funding), group in steps.items():
        if len(group) == 2 and group[0][2] - group[0][1] == group[1][1] - group[1][2]:
            (s0, b0, n0), (s1, _, _) = group
            was, now = (s0, s1) if n0 < b0 else (s1, s0)
            n = abs(n0 - b0)
            out.append(HireChange(office, skill, funding, now, n, n, moved_from=was))
            continue
        out.extend(HireChange(office, skill, funding, start, b, n) for start, b, n in group)
    return out


def _destination(route: str) -> str:
    return route.split(" -> ")[-1]


def action_rows(name: str, base: Plan, plan: Plan, periods: Sequence[str],
                changed: Sequence[int]) -> list[tuple[Any, ...]]:
    """The rows of ``scenario_actions.csv`` for scenario ``name`` (``in_every_scenario``
    left False: :func:`actions_table` sets it), in period order.  ``periods`` names the
    horizon's periods; ``changed`` holds the indices of those the scenario changes."""
    ix = {p: t for t, p in enumerate(periods)}
    a, b = plan_actions(base), plan_actions(plan)
    skills = {"base": main_skills(base), "scenario": main_skills(plan)}
    rows: list[tuple[int, tuple[Any, ...]]] = []

    def add(change: str, action: str, who: str, skill: str, period: str, route: str,
            before: int, after: int) -> None:
        t = ix.get(period)
        when = NO_WHEN if t is None else when_words(t, changed)
        rows.append((-1 if t is None else t, (name, change, action, who, skill, period, route,
                                              before, after, when, False)))

    for c in hire_changes(a.hires, b.hires, lambda period: ix.get(period, -1)):
        if c.moved_from is not None:
            add("moved", "hire", c.office, c.skill, c.start, f"{c.funding}, was {c.moved_from}",
                c.before, c.after)
        else:
            add("more" if c.after > c.before else "fewer", "hire", c.office, c.skill, c.start,
                c.funding, c.before, c.after)
    for person, period in sorted(set(a.details) | set(b.details)):
        before, after = a.details.get((person, period), ""), b.details.get((person, period), "")
        if before == after:
            continue
        # The skill at the destination the row is about: the scenario's unless dropped.
        side, route = ("base", before) if not after else ("scenario", after)
        skill = skills[side].get((person, period, _destination(route)), "")
        if not before:
            add("added", "detail", person, skill, period, after, 0, 1)
        elif not after:
            add("dropped", "detail", person, skill, period, before, 1, 0)
        else:
            add("rerouted", "detail", person, skill, period, f"{before}, now {after}", 1, 1)
    for person in sorted(set(a.moves) | set(b.moves)):
        old, new = a.moves.get(person), b.moves.get(person)
        if old == new:
            continue
        kept = new if new is not None else old
        if kept is None:  # both None: equal, skipped above
            continue
        side, (period, route) = ("scenario" if new is not None else "base"), kept
        skill = skills[side].get((person, period, _destination(route)), "")
        if old is None:
            add("added", "reassignment", person, skill, period, route, 0, 1)
        elif new is None:
            add("dropped", "reassignment", person, skill, period, route, 1, 0)
        else:
            add("changed", "reassignment", person, skill, period,
                f"{old[1]} from {old[0]}, now {new[1]} from {new[0]}", 1, 1)
    return [row for _, row in sorted(rows, key=lambda r: (r[0], r[1][2], r[1][3], r[1][6]))]


def change_rows(rows: Sequence[tuple[Any, ...]]) -> pd.DataFrame:
    """``rows`` of :func:`action_rows` in ``changes.csv``'s words (``change, kind, who,
    skill, period, old, new``, as ``replan`` writes them), for
    :func:`~rebalance.analysis.change_reasons.change_reasons`: a route pair ``X, now Y``
    split in two, a reassignment's route with ``from`` its period, a hire's funding in its
    kind and a moved hire's counts as ``1 in 2027-Q4``."""
    out = []
    for _, change, action, who, skill, period, route, before, after, _, _ in rows:
        old, _, new = str(route).partition(", now ")
        if action == "hire":
            funding, _, was = str(route).partition(", was ")
            kind = f"hire ({funding})"
            old, new = ((f"{before} in {was}", f"{after} in {period}") if change == "moved"
                        else (str(before), str(after)))
        else:
            kind = action
            if action == "reassignment" and change != "changed":
                old = f"{route} from {period}"
            if change == "added":
                old, new = "", old
            elif change == "dropped":
                new = ""
        out.append((change, kind, who, skill, period, old, new))
    return pd.DataFrame(out, columns=["change", "kind", "who", "skill", "period", "old", "new"])


def actions_table(rows: Sequence[tuple[Any, ...]], scenarios: Sequence[str],
                  reasons: Sequence[str] | None = None) -> pd.DataFrame:
    """``rows`` of :func:`action_rows` as the table, ``in_every_scenario`` true where the same
    change (all but the scenario, the skill a detail is worked in, and ``when``) is made under
    every one of ``scenarios``, when there are 2 or more; ``reason`` from ``reasons``, one a
    row (blank without them)."""
    def decision(row: tuple[Any, ...]) -> tuple[Any, ...]:
        _, change, action, who, skill, period, route, before, after, _, _ = row
        return (change, action, who, skill if action == "hire" else "", period, route,
                before, after)

    made: dict[tuple[Any, ...], set[str]] = defaultdict(set)
    for row in rows:
        made[decision(row)].add(row[0])
    every = len(scenarios) >= 2
    said = [""] * len(rows) if reasons is None else reasons
    out = [(*row[:-1], every and made[decision(row)] >= set(scenarios), why)
           for row, why in zip(rows, said, strict=True)]
    return pd.DataFrame(out, columns=[*ACTION_COLUMNS, REASON_COLUMN])


def _hire_change(c: HireChange, ix: Mapping[str, int]) -> str:
    if c.moved_from is None:
        return "more" if c.after > c.before else "fewer"
    return "earlier" if ix.get(c.start, -1) < ix.get(c.moved_from, -1) else "later"


def _route_keys(counts: Mapping[tuple[str, str], int]) -> str:
    """``to|home|count`` keys joined by ``;``: offices with most first, then routes."""
    into: dict[str, int] = defaultdict(int)
    for (to, _), n in counts.items():
        into[to] += n
    ordered = sorted(counts.items(), key=lambda kv: (-into[kv[0][0]], kv[0][0], -kv[1],
                                                     kv[0][1]))
    return ";".join(f"{to}|{home}|{n}" for (to, home), n in ordered)


# What :func:`action_summary` adds to a scenario's row of ``scenarios.csv``.
SUMMARY_COLUMNS = ("details_added", "details_dropped", "hires_changed", "changes_before")


def action_summary(base: Plan, plan: Plan, periods: Sequence[str], changed: Sequence[int],
                   offices: Sequence[str], rows: Sequence[tuple[Any, ...]]) -> dict[str, Any]:
    """Who moves for a scenario, for its row of ``scenarios.csv`` (a planner's reading: the
    rows of ``scenario_actions.csv`` were there, summed up nowhere).

    ``details_added``: detail periods the scenario's plan adds into the ``offices`` whose
    demand it changes, from the first period it changes on: by route and period, what the
    scenario sends beyond the base (another person on the same run is no change), as
    ``to|home|count`` keys joined by ``;``, most first.  ``details_dropped``: the same for
    what the base sends there and the scenario's plan does not (a count of 7 added beside
    2 dropped is a net 5, which a planner had asked after).  ``hires_changed``: each hire change
    of :func:`hire_changes` as ``change|office|skill|funding|start|base|scenario|moved_from``
    (change: ``more``, ``fewer``, or a move ``earlier`` or ``later``).
    ``changes_before``: the rows of :func:`action_rows` that fall before the scenario's
    changes begin (the solver's noise or its anticipation); ``rows``: those rows of the two
    plans, as the caller has them already."""
    ix = {p: t for t, p in enumerate(periods)}
    a, b = plan_actions(base), plan_actions(plan)
    first = min(changed) if changed else len(periods)
    # By route and period, so a detail that only swaps who goes is no move for the scenario.
    runs: dict[tuple[str, str], int] = defaultdict(int)
    for sign, sent in ((1, b.details), (-1, a.details)):
        for (_, period), route in sent.items():
            if ix.get(period, -1) >= first:
                runs[(route, period)] += sign
    added: dict[tuple[str, str], int] = defaultdict(int)
    dropped: dict[tuple[str, str], int] = defaultdict(int)
    for (route, _), n in runs.items():
        home, _, to = route.partition(" -> ")
        if to in offices and n:
            (added if n > 0 else dropped)[(to, home)] += abs(n)
    hires = hire_changes(a.hires, b.hires, lambda period: ix.get(period, -1))
    before = sum(1 for row in rows if row[ACTION_COLUMNS.index("when")] == "before")
    return {
        "details_added": _route_keys(added),
        "details_dropped": _route_keys(dropped),
        "hires_changed": ";".join(f"{_hire_change(c, ix)}|{c.office}|{c.skill}|{c.funding}|"
                                  f"{c.start}|{c.before}|{c.after}|{c.moved_from or ''}"
                                  for c in hires),
        "changes_before": before,
    }
