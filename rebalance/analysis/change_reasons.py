"""Why each row of a re-plan's ``changes.csv`` was made (its ``reason`` column), and of
``compare``'s ``scenario_actions.csv`` (the base plan as the old plan, the scenario's as the
new, on the scenario's data).

Read off the instance (the re-plan's data, a scenario's if given), the old plan and the new
plan only, as ``reasons.csv`` is: never off solver objects.  What the new plan adds (a detail,
a reassignment, more hires, a moved start) takes the new plan's own reason from
:func:`rebalance.analysis.reasons.reasons` (one rule per fact).  What it takes away says
first whether the data force it (the person has left, may no longer go, the destination has
no demand left for their skills, no hire has a place left), else what the tables show: what
the person does instead, and whether the old destination is covered without them and by what,
or is still short; for fewer hires, whether the need fell, a budget year's cap or an office's
hiring slots are full and what the new plan buys with them, or how the gap is covered now.

Every figure is looked up in dictionaries built once per call, so a re-plan of thousands of
changes costs one pass over each table.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Sequence
from dataclasses import dataclass

import pandas as pd

from rebalance.analysis.limits import LimitUse, hire_rows
from rebalance.analysis.reasons import Reasons, _Context, _describe, _fte
from rebalance.analysis.scenario_actions import main_skills
from rebalance.instance import Instance, Person
from rebalance.numbers import money_amount, number_text
from rebalance.plan import Plan

__all__ = ["BASE_AND_SCENARIO", "FORCED", "OLD_AND_NEW", "PlanNames", "change_reasons"]

# How a reason the data force begins (docs/analysis.md, "changes.csv").
FORCED = "forced by the data"
_EPS = 1e-6

_Key = tuple[str, str, int]  # office, skill, period index


@dataclass(frozen=True)
class PlanNames:
    """What a reason calls the two plans where it names them: a re-plan's ``old`` and
    ``new`` plan, or a comparison's base plan and the scenario's."""

    old: str = "the old plan"
    new: str = "the new plan"


OLD_AND_NEW = PlanNames()
BASE_AND_SCENARIO = PlanNames("the base plan", "the scenario's plan")


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


def _moves(plan: Plan) -> dict[str, tuple[str, str, str]]:
    """person -> (period, from office, to office) of ``plan``'s reassignments."""
    r = plan.reassignments
    return {p: (t, a, b) for p, t, a, b in zip(
        *(_texts(r[n]) for n in ("person", "period", "from_office", "to_office")), strict=True)}


def _people(names: Sequence[str]) -> str:
    shown = ", ".join(names[:3])
    return shown + (f" and {len(names) - 3} more" if len(names) > 3 else "")


class _Facts:
    """Both plans' figures, indexed once for every row."""

    def __init__(self, instance: Instance, old: Plan, new: Plan, at: int,
                 new_reasons: Reasons, plans: PlanNames) -> None:
        self.i = instance
        self.at = at
        self.plans = plans
        self.names = instance.period_names
        self.ix = {n: t for t, n in enumerate(self.names)}
        self.people = {p.person: p for p in instance.staff}
        self.ctx = _Context(instance, new)
        self.old_cover = _coverage(old, self.ix)
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
        self.old_main = main_skills(old)  # (person, period, office) -> skill worked most
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
        # The same by funding too: what a budget year pays for (start, office, skill, funding,
        # count).
        self.gains: list[tuple[int, str, str, str, int]] = []
        counts: dict[tuple[str, str, int, str], int] = defaultdict(int)
        for h in hire_rows(new):
            counts[(h.office, h.skill, self.ix[h.start_period], h.funding)] += h.count
        for h in hire_rows(old):
            if h.start_period in self.ix:
                counts[(h.office, h.skill, self.ix[h.start_period], h.funding)] -= h.count
        by_start: dict[tuple[str, str, int], int] = defaultdict(int)
        for (o, k, s, funding), n in sorted(counts.items(), key=lambda kv: kv[0][2]):
            by_start[(o, k, s)] += n
            if n > 0:
                self.gains.append((s, o, k, funding, n))
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

    def prio(self, key: _Key) -> str:
        return number_text(self.priority.get(key, 1.0))


# -- forced changes: the data leave the old decision no place (replan_model's `forced`) ---------

def _detail_ruled_out(f: _Facts, person: str, office: str, t: int) -> str:
    p = f.people.get(person)
    if p is None:
        return f"{FORCED}: {person} is no longer in staff.csv"
    if not p.is_present(t):
        return f"{FORCED}: {person} has left by then (staff.csv last_period)"
    if not p.can_detail:
        return f"{FORCED}: staff.csv now says {person} may not go on detail (can_detail)"
    if f.i.policy.max_consecutive_detail_periods == 0:
        return f"{FORCED}: settings.toml now allows no details"
    if not {k for k, _ in p.skills} & f.wanted.get((office, t), set()):
        return (f"{FORCED}: {office} has no demand left for {person}'s skills in "
                f"{f.names[t]}")
    return ""


def _move_ruled_out(f: _Facts, person: str, t: int) -> str:
    p = f.people.get(person)
    if p is None:
        return f"{FORCED}: {person} is no longer in staff.csv"
    if not p.can_relocate:
        return f"{FORCED}: staff.csv now says {person} may not be reassigned (can_relocate)"
    if not p.is_present(t):
        return f"{FORCED}: {person} has left by then (staff.csv last_period)"
    return ""


def _hire_ruled_out(f: _Facts, office: str, skill: str, s: int, funding: str) -> str:
    """Why the model has no hire column there (``model._add_hire_columns``), if it has none."""
    o = next((x for x in f.i.offices if x.name == office), None)
    if o is None:
        return f"{FORCED}: {office} is no longer in offices.csv"
    if o.max_hires_per_period == 0:
        return f"{FORCED}: offices.csv now says {office} may not hire"
    if s < f.i.skill(skill).time_to_hire:
        return (f"{FORCED}: {skill}'s time to hire now rules out a start in {f.names[s]}")
    T = len(f.names)
    if not any(f.demand.get((office, skill, t), 0.0) > 0 and f.i.hire_fte(skill, office, s, t) > 0
               for t in range(s, T)):
        return (f"{FORCED}: no {skill} demand is left at {office} from {f.names[s]} on for a "
                "hire to cover")
    if funding == "vacancy" and f.i.vacancies.get((office, skill), 0) <= 0:
        return f"{FORCED}: no funded {skill} vacancy is left at {office}"
    return ""


# -- the old destination, without the person ----------------------------------------------------

def _without_them(f: _Facts, person: str, office: str, skill: str, t: int) -> str:
    """Whether ``office`` covers ``skill`` in ``t`` without ``person``, and by what; or how
    short it is left."""
    key = (office, skill, t)
    name = f.names[t]
    short = f.ctx.short.get(key, 0.0)
    if short > _EPS:
        return (f"{office} is left {_fte(short)} FTE short of {skill} in {name} "
                f"(priority {f.prio(key)})")
    causes = []
    old_demand, old_staff, old_hire = f.old_cover.get(key, (0.0, 0.0, 0.0))
    demand = f.demand.get(key, 0.0)
    if demand < old_demand - _EPS:
        causes.append(f"demand there fell from {_fte(old_demand)} to {_fte(demand)} FTE")
    started = [(s, n) for s, n in f.hire_gain.get((office, skill), ()) if s <= t]
    if started and f.ctx.own[key] - f.ctx.staff_out[key] > old_hire + _EPS:
        n = sum(n for _, n in started)
        causes.append(f"{n} {'hire' if n == 1 else 'hires'} started there in "
                      f"{', '.join(f.names[s] for s, _ in started)}")
    came = sorted(p for p in f.new_visitors.get(key, {}) if p != person
                  and p not in f.old_visitors.get(key, {}))
    if came:
        causes.append(f"{_people(came)} detailed in")
    own_new = f.ctx.staff_out[key] - f.ctx.visitor_out[key]
    own_old = old_staff - sum(f.old_visitors.get(key, {}).values())
    if own_new > own_old + _EPS:
        back = sorted(p for p in f.old_out.get((office, t), ()) if p != person
                      and (p, t) not in f.ctx.away
                      and f.ctx.person_out.get((p, t), {}).get(skill, 0.0) > _EPS)
        causes.append(f"its own staff give {_fte(own_new - own_old)} FTE more"
                      + (f" ({_people(back)} no longer detailed out)" if back else ""))
    covered = f"{office} covers {skill} in {name} without them"
    if causes:
        return f"{covered}: {'; '.join(causes)}"
    # None of these: the old plan gave it more than its demand, their share included.
    return (f"{covered} ({f.plans.old} gave it {_fte(old_staff + old_hire)} FTE for "
            f"{_fte(old_demand)} of demand, {f.plans.new} {_fte(f.ctx.own[key])} for "
            f"{_fte(demand)})")


def _doing_instead(f: _Facts, person: str, t: int) -> tuple[str, bool]:
    """What ``person`` does in ``t`` in the new plan when not on detail, and whether that work
    meets a need (their office would be short without it)."""
    p = f.people[person]
    home = f.home(p, t)
    out = f.ctx.person_out.get((person, t), {})
    if not out or max(out.values()) <= _EPS:
        return f"now at home at {home} with no work there then", False
    skill = max(out, key=lambda k: (out[k], k))
    gap = f.ctx.gap_without(person, home, skill, t)
    if gap > _EPS:
        return (f"now at home at {home} covering {skill} there ({home} would be {_fte(gap)} FTE "
                f"short without them, priority {f.prio((home, skill, t))})"), True
    return f"now at home at {home} on {skill}, which is covered there without them", False


def _meets_no_less(f: _Facts, person: str, where: str, office: str, skill: str,
                   t: int) -> str:
    """Where ``person`` meets at least as much priority-weighted need at ``where`` in ``t``
    (what that office would be short without them, up to their output there) as they could at
    ``office`` (its shortfall of ``skill``, up to their FTE then at their proficiency), say so;
    else "" (something else keeps them from it)."""
    p = f.people[person]
    here = sum(min(x, max(0.0, f.ctx.gap_without(person, where, k, t)))
               * f.priority.get((where, k, t), 1.0)
               for k, x in f.ctx.person_out.get((person, t), {}).items())
    key = (office, skill, t)
    there = (min(f.i.available_fte(p, t) * p.proficiency(skill), f.ctx.short.get(key, 0.0))
             * f.priority.get(key, 1.0))
    if here > _EPS and here >= there - _EPS:
        return (f"they meet no less need at {where} than they could at {office} "
                f"(priority-weighted FTE: {_fte(here)} against {_fte(there)})")
    return ""


def _held_back(f: _Facts, person: str, office: str, t: int) -> str:
    """The binding limits of the new plan that keep ``person`` from a detail to ``office`` in
    ``t``, in words; or what the tables show where none is."""
    p = f.people[person]
    name = f.names[t]
    # In reasons.csv's words for a binding limit.
    found = [_describe(u, f.i) for u in (f.limit("seats", office, name),
                                         f.limit("away_share", f.home(p, t), name),
                                         f.limit("moves_budget", f.i.periods[t].year))
             if u is not None]
    # The verifier's rule: at most m detail periods in any m + 1 periods in a row.
    m = f.i.policy.max_consecutive_detail_periods or 0
    T = len(f.names)
    for start in range(max(0, t - m), min(t, T - m - 1) + 1) if m > 0 else ():
        if sum((person, s) in f.ctx.away for s in range(start, start + m + 1) if s != t) >= m:
            found.append(f"a person may be away on detail at most {m} of any {m + 1} "
                         f"periods, and they are {m} from {f.names[start]} to "
                         f"{f.names[start + m]} already")
            break
    if found:
        return "held back by " + " and ".join(found)
    return "the tables show no binding limit that keeps them from it (review)"


# -- one writer per kind of row -----------------------------------------------------------------

def _dropped_detail(f: _Facts, person: str, route: str, skill: str, t: int) -> str:
    office = route.split(" -> ")[-1]
    forced = _detail_ruled_out(f, person, office, t)
    if forced:
        return forced
    p = f.people[person]
    skill = skill or p.skills[0][0]
    home = f.home(p, t)
    if home == office:
        move = f.new_moves[person]
        return f"reassigned to {office} from {move[0]} instead, so based there then"
    doing, _ = _doing_instead(f, person, t)
    there = _without_them(f, person, office, skill, t)
    if f.ctx.short.get((office, skill, t), 0.0) <= _EPS:
        return f"{doing}; {there}"
    why = _meets_no_less(f, person, home, office, skill, t) or _held_back(f, person, office, t)
    return f"{doing}; {there}; {why}"


def _rerouted_detail(f: _Facts, person: str, before: str, after: str, skill: str,
                     t: int) -> str:
    old_office, new_office = before.split(" -> ")[-1], after.split(" -> ")[-1]
    forced = _detail_ruled_out(f, person, old_office, t)
    out = f.ctx.person_out.get((person, t), {})
    k = max(out, key=lambda x: (out[x], x)) if out else skill
    gap = f.ctx.gap_without(person, new_office, k, t) if k else 0.0
    if gap > _EPS:
        instead = (f"detailed to {new_office} instead, which would be {_fte(gap)} FTE short of "
                   f"{k} without them (priority {f.prio((new_office, k, t))})")
    else:
        instead = (f"detailed to {new_office} instead; "
                   + (f.detail_reason(person, new_office, t) or "no reason found (review)"))
    if forced:
        return f"{forced}; {instead}"
    old_skill = (f.old_main.get((person, f.names[t], old_office), "")
                 or f.people[person].skills[0][0])
    there = _without_them(f, person, old_office, old_skill, t)
    if f.ctx.short.get((old_office, old_skill, t), 0.0) <= _EPS:
        return f"{instead}; {there}"
    why = (_meets_no_less(f, person, new_office, old_office, old_skill, t)
           or _held_back(f, person, old_office, t))
    return f"{instead}; {there}; {why}"


def _dropped_move(f: _Facts, person: str, period: str, route: str) -> str:
    t0 = f.ix[period]
    forced = _move_ruled_out(f, person, t0)
    if forced:
        return forced
    p = f.people[person]
    office = route.split(" -> ")[-1]
    T = len(f.names)
    left = [t for t in range(t0, T) if p.is_present(t)]
    needed = 0
    for t in left:
        out = f.ctx.person_out.get((person, t), {})
        where = f.ctx.away.get((person, t)) or f.home(p, t)
        needed += any(f.ctx.gap_without(person, where, k, t) > _EPS for k in out)
    short = sum(1 for t in left if any(f.ctx.short.get((office, k, t), 0.0) > _EPS
                                       for k, _ in p.skills))
    n = len(left)
    stays = (f"stays based at {f.home(p, t0)}, where their work is needed in {needed} of the "
             f"{n} periods from {period}")
    if short:
        return (f"{stays}; {office} is short of their skills in {short} of them without them, "
                f"and {_held_back(f, person, office, left[0])}") if not needed else (
                f"{stays}; {office} is short of their skills in {short} of them without them")
    return f"{stays}; {office} covers their skills in all of them without them"


def _fewer_hires(f: _Facts, office: str, skill: str, s: int, funding: str) -> str:
    forced = _hire_ruled_out(f, office, skill, s, funding)
    if forced:
        return forced
    T = len(f.names)
    money = f.i.money.currency
    parts = []
    old_need = sum(f.old_cover.get((office, skill, t), (0.0, 0.0, 0.0))[0] for t in range(s, T))
    need = sum(f.demand.get((office, skill, t), 0.0) for t in range(s, T))
    if need < old_need - _EPS:
        parts.append(f"{skill} demand at {office} from {f.names[s]} on is "
                     f"{_fte(old_need - need)} FTE-periods lower than {f.plans.old} was made "
                     "for")
    need_fell = len(parts)
    # What one such hire costs the hiring budget of each year it is paid in (onboarding in
    # its start year; a new position's salary every period from its start, limits.py's rule),
    # against what the new plan leaves of that year's budget.
    k = f.i.skill(skill)
    cost: dict[str, float] = defaultdict(float)
    cost[f.i.periods[s].year] += k.onboarding_cost
    if funding == "new":
        for t in range(s, T):
            cost[f.i.periods[t].year] += k.salary_per_period
    short_of = [(u, cost[y]) for y in sorted(cost)
                if (u := f.uses.get(("hiring_budget", y, ""))) is not None
                and u.cap - u.used < cost[y] - _EPS]
    if short_of:
        years = {u.where for u, _ in short_of}
        # Hires the new plan adds that are paid in those years (a new position's salary runs
        # on past its start year).
        last = max(years)
        gained = [(t, o, k2, n) for t, o, k2, fund, n in f.gains
                  if f.i.periods[t].year in years
                  or (fund == "new" and f.i.periods[t].year <= last)]
        left = " and ".join(f"{money_amount(u.cap - u.used, money)} of the {u.where} hiring "
                            f"budget, less than the {money_amount(c, money)} it would cost then"
                            for u, c in short_of)
        parts.append(f"{f.plans.new} leaves {left}" + (
            "; it hires instead " + _people([f"{n} x {k2} at {o} from {f.names[t]}"
                                             for t, o, k2, n in gained]) if gained else ""))
    slots = f.limit("max_hires", office, f.names[s])
    if slots is not None:
        others = [f"{n} x {k}" for (o, k), starts in f.hire_gain.items() if o == office
                  for t, n in starts if t == s]
        parts.append(f"the hiring slots at {office} in {f.names[s]} are full"
                     + (f", taken by {_people(others)} more" if others else ""))
    paid = parts[need_fell:]  # a budget or the slots: said only where a gap is left
    del parts[need_fell:]
    elsewhen = [(t, n) for t, n in f.hire_gain.get((office, skill), ()) if t != s]
    if elsewhen:
        n = sum(n for _, n in elsewhen)
        parts.append(f"{n} {skill} {'hire starts' if n == 1 else 'hires start'} there in "
                     f"{', '.join(f.names[t] for t, _ in elsewhen)} instead")
    came = sorted({p for t in range(s, T) for p in f.new_visitors.get((office, skill, t), {})
                   if p not in f.old_visitors.get((office, skill, t), {})})
    if came:
        parts.append(f"{_people(came)} detailed in")
    short_new = sum(f.ctx.short.get((office, skill, t), 0.0) for t in range(s, T))
    if short_new <= _EPS:
        return (f"{skill} demand at {office} from {f.names[s]} on is met without it"
                + (f": {'; '.join(parts)}" if parts else ""))
    text = (f"{skill} demand at {office} from {f.names[s]} on is left {_fte(short_new)} "
            "FTE-periods short")
    if not need_fell and not paid:
        text += ", and no binding limit found that keeps the hire (review)"
    return "; ".join([*paid, *parts, text])


# -- the column ---------------------------------------------------------------------------------

def change_reasons(instance: Instance, old: Plan, new: Plan, at: int, changes: pd.DataFrame,
                   new_reasons: Reasons, plans: PlanNames = OLD_AND_NEW) -> list[str]:
    """One short reason per row of ``changes`` (``replan``'s ``CHANGE_COLUMNS`` but
    ``reason``), from the re-plan's ``instance``, the ``old`` and ``new`` plans, the re-plan
    period index ``at`` and the new plan's ``new_reasons`` (:func:`reasons` of it).

    ``plans``: what the reasons call the two plans (``compare`` passes
    :data:`BASE_AND_SCENARIO`, with the base plan as ``old``, the scenario's as ``new``, its
    data as ``instance`` and ``at`` 0)."""
    f = _Facts(instance, old, new, at, new_reasons, plans)
    out = []
    for change, kind, who, skill, period, before, after in zip(
            *(_texts(changes[c]) for c in ("change", "kind", "who", "skill", "period", "old",
                                           "new")), strict=True):
        t = f.ix[period]
        if kind == "detail":
            if change == "added":
                text = (f.detail_reason(who, after.split(" -> ")[-1], t)
                        or "no reason found for it in reasons.csv (review)")
            elif change == "dropped":
                text = _dropped_detail(f, who, before, skill, t)
            else:
                text = _rerouted_detail(f, who, before, after, skill, t)
        elif kind == "reassignment":
            if change == "dropped":
                route, _, when = before.partition(" from ")
                text = _dropped_move(f, who, when, route)
            else:
                text = ((f"in place of {before}: " if change == "changed" else "")
                        + f.move_why.get(who, "no reason found for it in reasons.csv (review)"))
                if change == "changed":
                    route, _, when = before.partition(" from ")
                    forced = _move_ruled_out(f, who, f.ix[when])
                    text = f"{forced}; {text}" if forced else text
        else:
            funding = kind[kind.find("(") + 1:-1]
            if change == "fewer":
                text = _fewer_hires(f, who, skill, t, funding)
            else:
                text = f.hire_why.get((who, skill, period, funding), "")
                if change == "moved":
                    old_start = before.split(" in ")[-1]
                    forced = _hire_ruled_out(f, who, skill, f.ix[old_start], funding)
                    text = (f"{forced + '; ' if forced else ''}starts in {period} instead of "
                            f"{old_start}; " + text)
                text = text or "no reason found for it in reasons.csv (review)"
        out.append(text)
    return out
