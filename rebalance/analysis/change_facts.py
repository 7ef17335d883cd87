"""Both plans' figures for the reasons of ``changes.csv`` and ``scenario_actions.csv``
(:mod:`rebalance.analysis.change_reasons`), indexed once per call: coverage, who is detailed
where, who takes the seats, hires gained, and the new plan's own reasons and limits.

Read off the instance, the old plan and the new plan only, as ``reasons.csv`` is: never off
solver objects.  One plan's figures by office, skill and period (``_Context``) are here too,
for :mod:`rebalance.analysis.reasons` reads them as well and had grown past the 600 lines a
module keeps to (tests/test_layout.py); so this module imports that one for type checks only.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from rebalance.analysis.limits import LimitUse, hire_rows
from rebalance.analysis.scenario_actions import main_skills
from rebalance.instance import Instance, Person
from rebalance.numbers import gap_text, number_text, share_of
from rebalance.plan import Plan

if TYPE_CHECKING:  # reasons.py imports _Context from here: no import back at run time
    from rebalance.analysis.reasons import Reasons

__all__ = ["BASE_AND_SCENARIO", "FORCED", "OLD_AND_NEW", "PlanNames", "work_on_current_data"]

_EPS = 1e-6

# A relative gap at or below this is proven (analysis_words.GAP_SAID says the same).
PROVEN_GAP = 1e-4

# How a reason the data force begins (docs/analysis.md, "changes.csv").
FORCED = "forced by the data"

_Key = tuple[str, str, int]  # office, skill, period index


@dataclass(frozen=True)
class PlanNames:
    """What a reason calls the two plans where it names them: a re-plan's ``old`` and
    ``new`` plan, or a comparison's base plan and the scenario's."""

    old: str = "the old plan"
    new: str = "the new plan"


OLD_AND_NEW = PlanNames()
BASE_AND_SCENARIO = PlanNames("the base plan", "the scenario's plan")


class _Context:
    """Plan figures by office, skill and period index, shared by the reason writers."""

    def __init__(self, instance: Instance, plan: Plan) -> None:
        self.i = instance
        self.names = instance.period_names
        self.ix = {n: t for t, n in enumerate(self.names)}
        c = plan.coverage
        self.demand: dict[tuple[str, str, int], float] = {}
        self.own: dict[tuple[str, str, int], float] = defaultdict(float)
        self.staff_out: dict[tuple[str, str, int], float] = defaultdict(float)
        self.short: dict[tuple[str, str, int], float] = {}
        # Columns as lists: stepping through pandas arrays item by item was most of this.
        for o, k, p, dem, staff_out, hire_out, short in zip(
                *(_texts(c[name]) for name in ("office", "skill", "period")),
                *(_floats(c[name]) for name in ("demand_fte", "staff_output_fte",
                                                "hire_output_fte", "shortfall_fte")),
                strict=True):
            t = self.ix[p]
            self.demand[(o, k, t)] = dem
            self.own[(o, k, t)] = staff_out + hire_out
            self.staff_out[(o, k, t)] = staff_out
            self.short[(o, k, t)] = short
        # Output of people on detail, by destination: removed to see the office's own cover.
        d = plan.details
        self.away = {(p, self.ix[t]): to for p, t, to in zip(
            _texts(d["person"]), _texts(d["period"]), _texts(d["to_office"]), strict=True)}
        self.visitor_out: dict[tuple[str, str, int], float] = defaultdict(float)
        self.person_out: dict[tuple[str, int], dict[str, float]] = defaultdict(dict)
        w = plan.work
        for p, per, o, k, out in zip(
                *(_texts(w[name]) for name in ("person", "period", "office", "skill")),
                _floats(w["output_fte"]), strict=True):
            t = self.ix[per]
            if self.away.get((p, t)) == o:
                self.visitor_out[(o, k, t)] += out
            self.person_out[(p, t)][k] = self.person_out[(p, t)].get(k, 0.0) + out

    def gap_without_visitors(self, office: str, skill: str, t: int) -> float:
        key = (office, skill, t)
        return self.demand.get(key, 0.0) - (self.own[key] - self.visitor_out[key])

    def gap_before_hires(self, office: str, skill: str, t: int) -> float:
        key = (office, skill, t)
        return self.demand.get(key, 0.0) - self.staff_out[key]

    def gap_without(self, person: str, office: str, skill: str, t: int) -> float:
        key = (office, skill, t)
        return self.demand.get(key, 0.0) - (self.own[key] - self.person_out.get(
            (person, t), {}).get(skill, 0.0))


def _texts(column: pd.Series) -> list[str]:
    return column.astype(str).tolist()


def _floats(column: pd.Series) -> list[float]:
    return column.astype(float).tolist()


def _visitors(plan: Plan, ix: dict[str, int]) -> dict[_Key, dict[str, float]]:
    """(office, skill, period) -> {person: output FTE} of the people detailed in there."""
    d = plan.details
    away = {(p, ix[t]): o for p, t, o in zip(_texts(d["person"]), _texts(d["period"]),
                                             _texts(d["to_office"]), strict=True) if t in ix}
    out: dict[_Key, dict[str, float]] = defaultdict(dict)
    w = plan.work
    for p, per, o, k, x in zip(*(_texts(w[c]) for c in ("person", "period", "office", "skill")),
                               _floats(w["output_fte"]), strict=True):
        t = ix.get(per)
        if t is not None and away.get((p, t)) == o and x > _EPS:
            out[(o, k, t)][p] = out[(o, k, t)].get(p, 0.0) + x
    return out


def _coverage(plan: Plan, ix: dict[str, int]) -> dict[_Key, tuple[float, float, float]]:
    """(office, skill, period) -> (demand, staff output, hire output) as ``plan``'s coverage
    table has them (an old plan's: at the data it was made for)."""
    c = plan.coverage
    return {(o, k, ix[p]): (dem, staff, hire) for o, k, p, dem, staff, hire in zip(
        *(_texts(c[n]) for n in ("office", "skill", "period")),
        *(_floats(c[n]) for n in ("demand_fte", "staff_output_fte", "hire_output_fte")),
        strict=True) if p in ix}


def work_on_current_data(instance: Instance, work: pd.DataFrame) -> pd.DataFrame:
    """A plan's ``work`` table as ``instance``'s data would have it: rows of people present
    then only, each person within the FTE they have now (their shares kept), output at their
    current proficiency.  (An old plan's own tables hold the data it was made for: a person
    who has since left still covered demand there, and a reason had read a gap the current
    data leave as none.)  Shared by the re-plan's scoring of the old plan and its reasons."""
    people = {p.person: p for p in instance.staff}
    ix = {name: t for t, name in enumerate(instance.period_names)}
    person = work["person"].astype(str)
    t = work["period"].astype(str).map(ix)
    present = [name in people and not pd.isna(i) and people[name].is_present(int(i))
               for name, i in zip(person, t, strict=True)]
    work = work[present].copy()
    person, t = person[present], t[present]
    had = work.groupby([person, t])["fte"].transform("sum")
    has = [instance.available_fte(people[name], int(i)) for name, i in zip(person, t,
                                                                            strict=True)]
    work["fte"] = work["fte"] * np.minimum(1.0, np.asarray(has) / had.clip(lower=1e-12))
    work["output_fte"] = work["fte"] * [people[name].proficiency(str(k))
                                        for name, k in zip(person, work["skill"], strict=True)]
    return work


def _staff_output_now(work: pd.DataFrame, ix: dict[str, int]) -> dict[_Key, float]:
    """(office, skill, period) -> output of a plan's staff from its ``work`` table on the
    current data (:func:`work_on_current_data`)."""
    out: dict[_Key, float] = defaultdict(float)
    for o, k, per, x in zip(*(_texts(work[c]) for c in ("office", "skill", "period")),
                            _floats(work["output_fte"]), strict=True):
        out[(o, k, ix[per])] += x
    return out


def _moves(plan: Plan) -> dict[str, tuple[str, str, str]]:
    """person -> (period, from office, to office) of ``plan``'s reassignments."""
    r = plan.reassignments
    return {p: (t, a, b) for p, t, a, b in zip(
        *(_texts(r[n]) for n in ("person", "period", "from_office", "to_office")), strict=True)}


def _whereabouts(instance: Instance, plan: Plan,
                 ix: dict[str, int]) -> dict[tuple[str, int], tuple[str, str]]:
    """(person, period index) -> (home office then, detail destination or "") of everyone
    present, as the seats rule reads the tables (``limits.limit_use``)."""
    T = len(ix)
    moves = _moves(plan)
    d = plan.details
    away = {(p, ix[t]): o for p, t, o in zip(_texts(d["person"]), _texts(d["period"]),
                                             _texts(d["to_office"]), strict=True) if t in ix}
    out: dict[tuple[str, int], tuple[str, str]] = {}
    for person in instance.staff:
        move = moves.get(person.person)
        moved_at = ix.get(move[0], T) if move is not None else T
        for t in range(T):
            if person.is_present(t):
                home = move[2] if move is not None and t >= moved_at else person.home_office
                out[(person.person, t)] = (home, away.get((person.person, t), ""))
    return out


def _seated(where: dict[tuple[str, int], tuple[str, str]]) -> dict[tuple[str, int], set[str]]:
    """(office, period index) -> the people in a seat there: at home, or detailed in."""
    out: dict[tuple[str, int], set[str]] = defaultdict(set)
    for (p, t), (home, away) in where.items():
        out[(away or home, t)].add(p)
    return out


def _people(names: Sequence[str]) -> str:
    shown = ", ".join(names[:3])
    return shown + (f" and {len(names) - 3} more" if len(names) > 3 else "")


def _both_ways(instance: Instance, moves: Sequence[tuple[str, int, str, str, str]],
               staff: dict[str, Person]) -> dict[str, str]:
    """person -> words on the plan's moves the other way between the same two offices in
    the same period, of people with the skill (``moves``: person, period index, from, to,
    the skill the move's reason names), and what tells the two groups apart in staff.csv
    and attrition.csv: a generated plan moved 3 people with one skill from one office to
    another and 7 with it back in one period, and had said of each that it freed a seat
    "for good".  Nothing for a move with none the other way."""
    route: dict[tuple[int, str, str], list[str]] = defaultdict(list)
    for p, t, a, b, _ in moves:
        route[(t, a, b)].append(p)
    names = instance.period_names

    def traits(p: Person) -> dict[str, str]:
        rate = instance.attrition_rate(p.skills[0][0], p.home_office)
        # Each keeps the rate of the office they were based at (Instance.available_fte).
        return {"attrition (kept from their first office)": f"{share_of(rate)} a year",
                "FTE": number_text(p.fte),
                "skills": "(" + ", ".join(f"{k} {number_text(v)}" for k, v in p.skills) + ")",
                "last period": "none" if p.last_period is None else names[p.last_period]}

    def group(key: tuple[int, str, str], skill: str) -> list[str]:
        return sorted(q for q in route.get(key, ()) if staff[q].proficiency(skill) > 0)
    out = {}
    for p, t, a, b, skill in moves:
        there, back = group((t, a, b), skill), group((t, b, a), skill)
        if not back:
            continue
        mine = {w: sorted({traits(staff[q])[w] for q in there}) for w in traits(staff[p])}
        theirs = {w: sorted({traits(staff[q])[w] for q in back}) for w in mine}
        differ = [f"{w} {' or '.join(mine[w])} against {' or '.join(theirs[w])}"
                  for w in mine if mine[w] != theirs[w]]
        out[p] = (f"moves both ways: in {names[t]} the plan moves {len(there)} with {skill} "
                  f"from {a} to {b} ({_people(there)}) and {len(back)} with it from {b} to {a} "
                  f"({_people(back)}); " + (f"what differs: {'; '.join(differ)}" if differ
                                            else "nothing in the tables tells them apart")
                  + " (review)")
    return out


class _Facts:
    """Both plans' figures, indexed once for every row."""

    def __init__(self, instance: Instance, old: Plan, new: Plan, new_reasons: Reasons,
                 plans: PlanNames, old_work_now: pd.DataFrame | None = None,
                 shortfall_gap: float | None = None) -> None:
        self.i = instance
        self.plans = plans
        # The larger relative gap on weighted shortfall of the two plans' solves (None:
        # unknown), and the new plan's weighted shortfall it is a share of.
        self.shortfall_gap = shortfall_gap
        self.weighted_short = float(new.coverage["weighted_shortfall"].astype(float).sum())
        self.names = instance.period_names
        self.ix = {n: t for t, n in enumerate(self.names)}
        self.people = {p.person: p for p in instance.staff}
        self.ctx = _Context(instance, new)
        self.old_cover = _coverage(old, self.ix)
        if old_work_now is None:
            old_work_now = work_on_current_data(instance, old.work)
        self.old_staff_now = _staff_output_now(old_work_now, self.ix)
        self.old_visitors = _visitors(old, self.ix)
        self.new_visitors = _visitors(new, self.ix)
        self.new_moves = _moves(new)
        # (home office, period) -> the people the old plan had detailed out of it then.
        self.old_out: dict[tuple[str, int], list[str]] = defaultdict(list)
        d = old.details
        for p, per, a in zip(*(_texts(d[n]) for n in ("person", "period", "from_office")),
                             strict=True):
            if per in self.ix:
                self.old_out[(a, self.ix[per])].append(p)
        # (person, period, office) -> skill worked most FTE of time: the ``skill`` column's
        # rule (replan._changes), so a reason speaks of the skill its row names.
        self.old_main = main_skills(old)
        self.new_main = main_skills(new)
        # Who sits where in each plan, for a hire's seat (a hire holds one from its start on).
        self.old_where = _whereabouts(instance, old, self.ix)
        self.new_where = _whereabouts(instance, new, self.ix)
        self.old_seated = _seated(self.old_where)
        self.new_seated = _seated(self.new_where)
        self.wanted: dict[tuple[str, int], set[str]] = defaultdict(set)
        self.demand: dict[_Key, float] = {}
        self.priority: dict[_Key, float] = {}
        for dm in instance.demand:
            self.demand[(dm.office, dm.skill, dm.period)] = dm.fte
            self.priority[(dm.office, dm.skill, dm.period)] = dm.priority
            if dm.fte > 0:
                self.wanted[(dm.office, dm.period)].add(dm.skill)
        # Hires by office, skill and start: new minus old (what started there instead).
        self.hire_gain: dict[tuple[str, str], list[tuple[int, int]]] = defaultdict(list)
        # By funding too (what a budget year pays for): start -> new count minus old, so a
        # moved hire is +n at its new start and -n at its old one.  Its new start alone had
        # been named as a hire the new plan adds, where it cost the short year less.
        self.hire_delta: dict[tuple[str, str, str], dict[int, int]] = defaultdict(dict)
        counts: dict[tuple[str, str, int, str], int] = defaultdict(int)
        for h in hire_rows(new):
            counts[(h.office, h.skill, self.ix[h.start_period], h.funding)] += h.count
        for h in hire_rows(old):
            if h.start_period in self.ix:
                counts[(h.office, h.skill, self.ix[h.start_period], h.funding)] -= h.count
        by_start: dict[tuple[str, str, int], int] = defaultdict(int)
        for (o, k, s, funding), n in sorted(counts.items(), key=lambda kv: kv[0][2]):
            by_start[(o, k, s)] += n
            if n != 0:
                self.hire_delta[(o, k, funding)][s] = n
        for (o, k, s), n in by_start.items():
            if n > 0:
                self.hire_gain[(o, k)].append((s, n))
        # The new plan's own reasons, by what they are about.
        table = new_reasons.table
        self.detail_why: dict[tuple[str, str], list[tuple[int, int, str]]] = defaultdict(list)
        self.move_why: dict[str, str] = {}
        self.hire_why: dict[tuple[str, str, str, str], str] = {}
        hires = iter(hire_rows(new))  # reasons() writes one hire row per hire_rows row
        for action, subject, office, first, last, text in zip(
                *(_texts(table[n]) for n in ("action", "subject", "office", "first_period",
                                             "last_period", "reason")), strict=True):
            if action == "detail":
                self.detail_why[(subject, office)].append((self.ix[first], self.ix[last], text))
            elif action == "reassignment":
                self.move_why[subject] = text
            elif action == "hire":
                h = next(hires)
                self.hire_why[(h.office, h.skill, h.start_period, h.funding)] = text
        self.binding = [u for u in new_reasons.limits if u.binding]
        self.uses = {(u.limit, u.where, u.period): u for u in new_reasons.limits}
        self.binding_at: dict[tuple[str, str, str], LimitUse] = {
            (u.limit, u.where, u.period): u for u in self.binding}

    # -- where a person is in the new plan ------------------------------------------------------
    def home(self, person: Person, t: int) -> str:
        move = self.new_moves.get(person.person)
        if move is not None and t >= self.ix[move[0]]:
            return move[2]
        return person.home_office

    def detail_reason(self, person: str, office: str, t: int) -> str:
        for t1, t2, text in self.detail_why.get((person, office), ()):
            if t1 <= t <= t2:
                return text
        return ""

    def limit(self, kind: str, where: str, period: str = "") -> LimitUse | None:
        return self.binding_at.get((kind, where, period))

    def hire_cost(self, skill: str, funding: str, starts: dict[int, int]) -> dict[str, float]:
        """What hires of ``skill`` on ``funding`` cost the hiring budget each year, ``n``
        starting in each period of ``starts`` (a negative ``n`` takes off): onboarding in the
        start year, and a new position's salary every period from its start on, in that
        period's year (:meth:`Instance.hire_cost_by_year`), at the current data's prices."""
        cost: dict[str, float] = defaultdict(float)
        for s, n in starts.items():
            for year, amount in self.i.hire_cost_by_year(
                    skill, s, n, new_position=funding == "new").items():
                cost[year] += amount
        return cost

    def within_gap(self, weighted: float, what: str) -> str:
        """Where the solves stopped short of proof by more than ``weighted`` (the
        priority-weighted shortfall ``what`` could take off at most), that in words; else ""
        (proven, gaps unknown, or the change is larger than they allow: a puzzle to review)."""
        g = self.shortfall_gap
        if g is None or g <= PROVEN_GAP or weighted > g * self.weighted_short:
            return ""
        return (f"within the solves' gaps: {what} could take at most {number_text(weighted)} "
                f"off the weighted shortfall, and the plans are proven only within "
                f"{gap_text(g)} of it ({number_text(g * self.weighted_short)} of "
                f"{number_text(self.weighted_short)}), so where each search stopped, not a "
                "limit in the tables, may account for it")

    def prio(self, key: _Key) -> str:
        return number_text(self.priority.get(key, 1.0))

    def seats_full(self, office: str, periods: Sequence[int]) -> tuple[str, set[str]]:
        """The new plan's full seats at ``office`` in those of ``periods`` where they bind,
        and who took them against the old plan ("" where none binds); and those people."""
        uses = [(t, u) for t in periods
                if (u := self.limit("seats", office, self.names[t])) is not None]
        if not uses:
            return "", set()
        if len({(u.used, u.cap) for _, u in uses}) == 1:
            u = uses[0][1]
            when = (f"{', '.join(self.names[t] for t, _ in uses)} ({number_text(u.used)} of "
                    f"{number_text(u.cap)} used{' in each' if len(uses) > 1 else ''})")
        else:
            when = ", ".join(f"{self.names[t]} ({number_text(u.used)} of "
                             f"{number_text(u.cap)} used)" for t, u in uses)
        taken, who = self.seat_takers(office, [t for t, _ in uses])
        return (f"the seats at {office} are full in {when}"
                + (f", taken by {taken}" if taken else "")), who

    def seat_takers(self, office: str, periods: Sequence[int]) -> tuple[str, set[str]]:
        """Who has a seat at ``office`` in ``periods`` in the new plan and not in the old:
        people detailed in, back from a detail, reassigned there; and hires the new plan adds
        there by then.  In words, and the people."""
        came: set[str] = set()
        back: set[str] = set()
        moved: set[str] = set()
        for t in periods:
            for p in self.new_seated.get((office, t), set()) - self.old_seated.get(
                    (office, t), set()):
                _, away = self.new_where[(p, t)]
                old_home, old_away = self.old_where.get((p, t), ("", ""))
                if away == office:
                    came.add(p)
                elif old_home == office and old_away:
                    back.add(p)
                elif old_home != office:
                    moved.add(p)
        # A hire holds a seat from its start on: one the new plan adds, or starts earlier,
        # takes one only where it has more hires seated there than the old plan (a moved
        # hire: from its new start to its old one).
        last = max(periods)
        deltas: dict[str, list[tuple[int, int]]] = defaultdict(list)
        for (o, k, _), delta in self.hire_delta.items():
            if o == office:
                deltas[k] += delta.items()
        found = []
        for k, starts in deltas.items():
            more = max(sum(n for s, n in starts if s <= t) for t in periods)
            if more > 0:  # then some start by ``last`` has more hires than before
                first = sorted({s for s, n in starts if n > 0 and s <= last})
                found.append((first, f"{more} x {k} hired there from "
                              + ", ".join(self.names[s] for s in first)))
        hired = [text for _, text in sorted(found)]
        parts = [f"{_people(sorted(who))} {words}" for who, words in (
            (came, "detailed in"), (back, "no longer detailed out"),
            (moved, "reassigned there")) if who]
        return " and ".join(parts + hired), came | back | moved


